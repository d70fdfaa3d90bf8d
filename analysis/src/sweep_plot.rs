//! The sweep's picture and table: D_eff/D0 against the first grid key, with
//! its 95 % interval and the models' values for the same scenarios.

use crate::models;
use crate::plot::{
    png_font_available, render_png, render_svg, series, Band, Curve, Figure, MEASURED, WARNING,
};
use crate::sweep::{Summary, SweepError};
use std::path::{Path, PathBuf};

fn x_value(summary: &Summary, row: &crate::sweep::SummaryRow) -> Option<f64> {
    let v = row.values.get(&summary.keys[0])?;
    v.as_float().or(v.as_integer().map(|i| i as f64))
}

/// The sweep figure (linear axes).
pub fn sweep_figure(summary: &Summary) -> Figure {
    let mut pts: Vec<(f64, &crate::sweep::SummaryRow)> = summary
        .points
        .iter()
        .filter_map(|r| Some((x_value(summary, r)?, r)))
        .collect();
    pts.sort_by(|a, b| a.0.total_cmp(&b.0));
    let xs: Vec<f64> = pts.iter().map(|p| p.0).collect();
    let curve_lo = summary
        .model_curves
        .iter()
        .filter_map(|c| c.points.first().map(|p| p[0]))
        .fold(f64::INFINITY, f64::min);
    let lo = xs.first().copied().unwrap_or(0.0).min(curve_lo);
    let hi = xs.last().copied().unwrap_or(1.0);
    let pad = ((hi - lo) * 0.05).max(1e-3);
    let mut curves = vec![Curve {
        points: pts.iter().map(|(x, r)| (*x, r.d_eff_over_d0)).collect(),
        colour: MEASURED,
        label: "simulation D_eff/D0".into(),
        dashed: false,
        markers: true,
        line: true,
    }];
    let apparent: Vec<(f64, f64)> = pts
        .iter()
        .filter(|(_, r)| r.apparent)
        .map(|(x, r)| (*x, r.d_eff_over_d0))
        .collect();
    if !apparent.is_empty() {
        curves.push(Curve {
            points: apparent,
            colour: WARNING,
            label: "apparent value: MSD not diffusive in the fit window".into(),
            dashed: false,
            markers: true,
            line: false,
        });
    }
    let mut names: Vec<&String> = pts.iter().flat_map(|(_, r)| r.models.keys()).collect();
    names.sort();
    names.dedup();
    for (i, name) in names.iter().enumerate() {
        // The fine-grid curve when the summary has one, else the values at the points.
        let line: Vec<(f64, f64)> = match summary.model_curves.iter().find(|c| &c.name == *name) {
            Some(c) => c.points.iter().map(|p| (p[0], p[1])).collect(),
            None => pts
                .iter()
                .filter_map(|(x, r)| Some((*x, *r.models.get(*name)?)))
                .collect(),
        };
        curves.push(Curve {
            points: line,
            colour: series(i),
            label: (*name).clone(),
            dashed: true,
            markers: false,
            line: true,
        });
    }
    if let Some(gamma) = summary.free_volume_gamma {
        let line: Vec<(f64, f64)> = (0..=50)
            .map(|k| lo + (hi - lo) * k as f64 / 50.0)
            .filter_map(|phi| Some((phi, models::free_volume(phi, gamma).ok()?)))
            .collect();
        curves.push(Curve {
            points: line,
            colour: series(names.len()),
            label: format!("free volume, fitted γ = {gamma:.3}"),
            dashed: true,
            markers: false,
            line: true,
        });
    }
    let ymax = pts
        .iter()
        .map(|(_, r)| r.d_eff_over_d0_ci95[1])
        .chain(pts.iter().flat_map(|(_, r)| r.models.values().copied()))
        .fold(1.0_f64, f64::max);
    let direction = summary
        .points
        .first()
        .map(|r| r.direction.clone())
        .filter(|d| !d.is_empty())
        .map_or_else(String::new, |d| format!(", {d}"));
    Figure {
        title: format!("{}: D_eff/D0{direction}", summary.title),
        x_label: axis_label(&summary.keys[0]),
        y_label: "D_eff/D0".into(),
        x_range: [lo - pad, hi + pad],
        y_range: [0.0, ymax * 1.08],
        x_log: false,
        x_spans: vec![],
        bands: vec![Band {
            points: pts
                .iter()
                .map(|(x, r)| (*x, r.d_eff_over_d0_ci95[0], r.d_eff_over_d0_ci95[1]))
                .collect(),
            colour: MEASURED.with_opacity(0.2),
            label: "95 % interval".into(),
        }],
        hlines: vec![],
        curves,
    }
}

/// A swept key as an axis label with its symbol and unit, e.g.
/// "obstacles.volume_fraction" → "obstacle volume fraction φ" and
/// "species.bead.radius_nm" → "bead radius a / nm".
pub fn axis_label(key: &str) -> String {
    let known = [
        ("obstacles.volume_fraction", "obstacle volume fraction φ"),
        ("fibres.volume_fraction", "fibre volume fraction φ_f"),
        ("obstacles.radius_nm", "obstacle radius b / nm"),
        ("fibres.radius_nm", "fibre radius r_f / nm"),
        ("obstacles.count", "number of obstacles"),
        ("geometry.pore_radius_nm", "pore radius r_p / nm"),
        ("medium.temperature_K", "temperature T / K"),
        ("medium.viscosity_Pa_s", "viscosity η / (Pa s)"),
        ("integrator.dt_s", "time step Δt / s"),
        ("integrator.steps", "steps"),
    ];
    if let Some((_, label)) = known.iter().find(|(k, _)| *k == key) {
        return (*label).to_string();
    }
    let parts: Vec<&str> = key.split('.').collect();
    let last = parts.last().copied().unwrap_or(key);
    let units = [
        ("_m2_per_s", "m²/s"),
        ("_mol_per_m3", "mol/m³"),
        ("_Pa_s", "Pa s"),
        ("_nm", "nm"),
        ("_s", "s"),
        ("_K", "K"),
    ];
    let (stem, unit) = units
        .iter()
        .find_map(|(suffix, unit)| last.strip_suffix(suffix).map(|s| (s, Some(*unit))))
        .unwrap_or((last, None));
    // A species key names the species: "species.bead.radius_nm" → "bead radius".
    let owner = if parts.len() == 3 && parts[0] == "species" {
        format!("{} ", parts[1])
    } else {
        String::new()
    };
    let symbol = match stem {
        "radius" if !owner.is_empty() => " a",
        "count" => " N",
        _ => "",
    };
    let name = format!("{owner}{}{symbol}", stem.replace('_', " "));
    match unit {
        Some(u) => format!("{name} / {u}"),
        None => name,
    }
}

/// Writes `PREFIX.svg` and `PREFIX.png`.
///
/// # Errors
/// [`SweepError::Output`] if a file cannot be written.
pub fn write_sweep_plots(summary: &Summary, prefix: &Path) -> Result<Vec<PathBuf>, SweepError> {
    let fig = sweep_figure(summary);
    let svg = prefix.with_extension("svg");
    crate::sweep::write_atomically(&svg, render_svg(&fig).as_bytes()).map_err(|e| {
        SweepError::Output {
            path: svg.clone(),
            message: e.to_string(),
        }
    })?;
    let png = prefix.with_extension("png");
    render_png(&fig, &png, png_font_available()).map_err(|e| SweepError::Output {
        path: png.clone(),
        message: e.to_string(),
    })?;
    Ok(vec![svg, png])
}

/// A plain-text table of the summary.
pub fn summary_table(summary: &Summary) -> String {
    let mut out = String::new();
    let mut names: Vec<&String> = summary
        .points
        .iter()
        .flat_map(|r| r.models.keys())
        .collect();
    names.sort();
    names.dedup();
    let key_w = summary
        .keys
        .iter()
        .map(|k| k.len().max(8))
        .collect::<Vec<_>>();
    for (k, w) in summary.keys.iter().zip(&key_w) {
        out.push_str(&format!("  {k:>w$}"));
    }
    out.push_str(&format!(
        "  {:>5}  {:>26}  {:>6}  {:>19}  {:>8}",
        "seeds", "D_eff/D0 [95 % interval]", "α", "fit window / s", "fit"
    ));
    for (i, _) in names.iter().enumerate() {
        out.push_str(&format!("  {:>8}", format!("model {}", i + 1)));
    }
    out.push('\n');
    for r in &summary.points {
        for (k, w) in summary.keys.iter().zip(&key_w) {
            let v = r.values.get(k).map(|v| v.to_string()).unwrap_or_default();
            out.push_str(&format!("  {v:>w$}"));
        }
        out.push_str(&format!(
            "  {:>5}  {:>26}  {:>6.3}  {:>19}  {:>8}",
            r.seeds,
            crate::format::with_interval(r.d_eff_over_d0, r.d_eff_over_d0_ci95),
            r.alpha_long,
            format!(
                "{}–{}",
                crate::format::sig(r.fit_window_s[0], 3),
                crate::format::sig(r.fit_window_s[1], 3)
            ),
            if r.apparent { "APPARENT" } else { "ok" }
        ));
        for n in &names {
            out.push_str(&format!(
                "  {:>8.4}",
                r.models.get(*n).copied().unwrap_or(f64::NAN)
            ));
        }
        out.push('\n');
    }
    for (i, n) in names.iter().enumerate() {
        out.push_str(&format!("  model {}: {n}\n", i + 1));
    }
    if let Some(d) = summary.points.first().map(|r| &r.direction) {
        if !d.is_empty() {
            out.push_str(&format!("  D_eff is the {d} diffusivity\n"));
        }
    }
    for line in &summary.too_short {
        out.push_str(&format!("  {line}\n"));
    }
    if let (Some(g), Some(se)) = (summary.free_volume_gamma, summary.free_volume_gamma_se) {
        out.push_str(&format!("  free-volume fit exp(−γ φ/(1−φ)): γ = {g:.3} ± {se:.3} (fitted to these points, not a prediction)\n"));
    }
    out
}
