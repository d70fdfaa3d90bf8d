//! The sweep's picture and table: D_eff/D0 against the first grid key, with
//! its 95 % interval and the models' values for the same scenarios.

use crate::models;
use crate::plot::{png_font_available, render_png, render_svg, Band, Colour, Curve, Figure};
use crate::sweep::{Summary, SweepError};
use std::path::{Path, PathBuf};

const PALETTE: [(u8, u8, u8); 6] = [
    (214, 39, 40),
    (44, 160, 44),
    (148, 103, 189),
    (140, 86, 75),
    (227, 119, 194),
    (127, 127, 127),
];

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
    let lo = xs.first().copied().unwrap_or(0.0);
    let hi = xs.last().copied().unwrap_or(1.0);
    let pad = ((hi - lo) * 0.05).max(1e-3);
    let mut curves = vec![Curve {
        points: pts.iter().map(|(x, r)| (*x, r.d_eff_over_d0)).collect(),
        colour: Colour {
            rgb: (31, 119, 180),
            opacity: 1.0,
        },
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
            colour: Colour {
                rgb: (230, 85, 13),
                opacity: 1.0,
            },
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
        let line: Vec<(f64, f64)> = pts
            .iter()
            .filter_map(|(x, r)| Some((*x, *r.models.get(*name)?)))
            .collect();
        curves.push(Curve {
            points: line,
            colour: Colour {
                rgb: PALETTE[i % PALETTE.len()],
                opacity: 1.0,
            },
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
            colour: Colour {
                rgb: (23, 190, 207),
                opacity: 1.0,
            },
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
    Figure {
        title: summary.title.clone(),
        x_label: summary.keys[0].clone(),
        y_label: "D_eff / D0".into(),
        x_range: [lo - pad, hi + pad],
        y_range: [0.0, ymax * 1.08],
        x_log: false,
        x_spans: vec![],
        bands: vec![Band {
            points: pts
                .iter()
                .map(|(x, r)| (*x, r.d_eff_over_d0_ci95[0], r.d_eff_over_d0_ci95[1]))
                .collect(),
            colour: Colour {
                rgb: (31, 119, 180),
                opacity: 0.2,
            },
            label: "95 % interval".into(),
        }],
        hlines: vec![],
        curves,
    }
}

/// Writes `PREFIX.svg` and `PREFIX.png`.
///
/// # Errors
/// [`SweepError::Output`] if a file cannot be written.
pub fn write_sweep_plots(summary: &Summary, prefix: &Path) -> Result<Vec<PathBuf>, SweepError> {
    let fig = sweep_figure(summary);
    let svg = prefix.with_extension("svg");
    std::fs::write(&svg, render_svg(&fig)).map_err(|e| SweepError::Output {
        path: svg.clone(),
        message: e.to_string(),
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
        "  {:>5}  {:>9}  {:>19}  {:>6}  {:>19}  {:>8}",
        "seeds", "D_eff/D0", "95 % interval", "α", "fit window / s", "fit"
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
            "  {:>5}  {:>9.4}  [{:>8.4}, {:>8.4}]  {:>6.3}",
            r.seeds,
            r.d_eff_over_d0,
            r.d_eff_over_d0_ci95[0],
            r.d_eff_over_d0_ci95[1],
            r.alpha_long
        ));
        out.push_str(&format!(
            "  {:>19}  {:>8}",
            format!("{:.2e}–{:.2e}", r.fit_window_s[0], r.fit_window_s[1]),
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
