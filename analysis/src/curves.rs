//! The curves behind an analysis, exported: MSD per axis, α(τ), the van
//! Hove distribution and the non-Gaussian parameter, as tables (CSV with
//! plain snake_case headers and units in the names) and in `--json`, and
//! the van Hove plot against the Gaussian of the same variance.

use crate::error::{ErrorKind, Result};
use crate::estimators::Report;
use crate::format::csv;
use crate::msd::Msd;
use crate::plot::{Curve, Figure};
use serde::Serialize;
use std::path::{Path, PathBuf};

/// One lag of the van Hove distribution along one axis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VanHoveCurve {
    /// Lag, s.
    pub lag_s: f64,
    /// Axis (0 = x).
    pub axis: usize,
    /// Bin centres, nm.
    pub displacement_nm: Vec<f64>,
    /// Measured probability density, 1/nm.
    pub density_per_nm: Vec<f64>,
    /// Gaussian of the measured variance, 1/nm (what free diffusion gives).
    pub gaussian_per_nm: Vec<f64>,
    /// Non-Gaussian parameter α2 of this axis at this lag (0 for a Gaussian).
    pub alpha2: f64,
}

/// The curves of one analysis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Curves {
    /// Lags, s.
    pub lag_s: Vec<f64>,
    /// Lags, frames.
    pub lag_frames: Vec<usize>,
    /// Time-averaged MSD per axis, `[axis][lag]`, nm².
    pub msd_axes_nm2: Vec<Vec<f64>>,
    /// MSD summed over the axes of D_eff, nm².
    pub msd_direction_nm2: Vec<f64>,
    /// Local exponent α(τ) of that MSD.
    pub alpha: Vec<f64>,
    /// Its standard error between particle groups.
    pub alpha_se: Vec<f64>,
    /// Van Hove distributions along the first axis of D_eff.
    pub van_hove: Vec<VanHoveCurve>,
}

/// Van Hove lags worth exporting for a series of `frames` frames: one
/// frame, a tenth and a quarter of the run (distinct, at least 1).
pub fn default_van_hove_lags(frames: usize) -> Vec<usize> {
    if frames < 2 {
        return Vec::new();
    }
    let mut lags: Vec<usize> = [1, frames / 10, frames / 4]
        .into_iter()
        .filter(|&m| m >= 1 && m < frames)
        .collect();
    lags.sort_unstable();
    lags.dedup();
    lags
}

/// The curves of `msd` for `report`'s direction.
pub fn curves(msd: &Msd, report: &Report) -> Curves {
    let axes: Vec<usize> = if report.direction_axes.is_empty() {
        (0..msd.dims).collect()
    } else {
        report.direction_axes.clone()
    };
    let exponent = msd.local_exponent_of(&axes);
    let axis = axes[0];
    let van_hove = msd
        .van_hove
        .iter()
        .map(|vh| {
            let density = vh.density_per_nm(axis);
            let centres: Vec<f64> = vh
                .bin_edges_nm
                .windows(2)
                .map(|w| 0.5 * (w[0] + w[1]))
                .collect();
            let widths: Vec<f64> = vh.bin_edges_nm.windows(2).map(|w| w[1] - w[0]).collect();
            // Variance of the histogram itself, so the Gaussian has the same second moment.
            let mass: f64 = density.iter().zip(&widths).map(|(p, w)| p * w).sum();
            let var = density
                .iter()
                .zip(&widths)
                .zip(&centres)
                .map(|((p, w), x)| p * w * x * x)
                .sum::<f64>()
                / mass.max(f64::MIN_POSITIVE);
            let gaussian = centres
                .iter()
                .map(|x| (-x * x / (2.0 * var)).exp() / (2.0 * std::f64::consts::PI * var).sqrt())
                .collect();
            let alpha2 = msd
                .non_gaussian
                .iter()
                .find(|n| n.lag_frames == vh.lag_frames)
                .and_then(|n| n.alpha2_axes.get(axis).copied())
                .unwrap_or(f64::NAN);
            VanHoveCurve {
                lag_s: vh.lag_time_s,
                axis,
                displacement_nm: centres,
                density_per_nm: density,
                gaussian_per_nm: gaussian,
                alpha2,
            }
        })
        .collect();
    Curves {
        lag_s: msd.lag_times_s.clone(),
        lag_frames: msd.lags_frames.clone(),
        msd_axes_nm2: msd.time_averaged_axes_nm2.clone(),
        msd_direction_nm2: msd.axes_sum_nm2(&axes),
        alpha: exponent.alpha,
        alpha_se: exponent.se,
        van_hove,
    }
}

fn write_new(path: &Path, text: &str) -> Result<()> {
    std::fs::write(path, text).map_err(|e| {
        ErrorKind::Output {
            path: path.to_path_buf(),
            message: e.to_string(),
        }
        .into()
    })
}

/// Writes `PREFIX_msd.csv` (one row per lag) and `PREFIX_van_hove.csv`
/// (one row per lag and bin); returns their paths.
///
/// # Errors
/// [`ErrorKind::Output`] if a file cannot be written.
pub fn write_tables(prefix: &Path, c: &Curves) -> Result<Vec<PathBuf>> {
    let prefix = prefix.display().to_string();
    let names = ["x", "y", "z"];
    let mut text = String::from("lag_s,lag_frames");
    for a in 0..c.msd_axes_nm2.len() {
        text.push_str(&format!(",msd_{}_nm2", names.get(a).unwrap_or(&"w")));
    }
    text.push_str(",msd_direction_nm2,alpha,alpha_se\n");
    for i in 0..c.lag_s.len() {
        let mut row = vec![csv(c.lag_s[i]), c.lag_frames[i].to_string()];
        row.extend(c.msd_axes_nm2.iter().map(|a| csv(a[i])));
        row.push(csv(c.msd_direction_nm2[i]));
        row.push(csv(c.alpha[i]));
        row.push(csv(c.alpha_se[i]));
        text.push_str(&row.join(","));
        text.push('\n');
    }
    let msd_path = PathBuf::from(format!("{prefix}_msd.csv"));
    write_new(&msd_path, &text)?;
    let mut written = vec![msd_path];
    if !c.van_hove.is_empty() {
        let mut text = String::from(
            "lag_s,axis,displacement_nm,density_per_nm,gaussian_density_per_nm,alpha2\n",
        );
        for v in &c.van_hove {
            for i in 0..v.displacement_nm.len() {
                text.push_str(&format!(
                    "{},{},{},{},{},{}\n",
                    csv(v.lag_s),
                    names.get(v.axis).unwrap_or(&"w"),
                    csv(v.displacement_nm[i]),
                    csv(v.density_per_nm[i]),
                    csv(v.gaussian_per_nm[i]),
                    csv(v.alpha2)
                ));
            }
        }
        let path = PathBuf::from(format!("{prefix}_van_hove.csv"));
        write_new(&path, &text)?;
        written.push(path);
    }
    Ok(written)
}

/// The van Hove distribution at each exported lag (solid) against the
/// Gaussian of the same variance (dashed); `None` without van Hove data.
pub fn van_hove_figure(c: &Curves, report: &Report) -> Option<Figure> {
    if c.van_hove.is_empty() {
        return None;
    }
    let mut curves = Vec::new();
    let (mut xmax, mut ymax) = (0.0f64, 0.0f64);
    for (i, v) in c.van_hove.iter().enumerate() {
        let colour = if i == 0 {
            crate::plot::MEASURED
        } else {
            crate::plot::series(i - 1)
        };
        let measured: Vec<(f64, f64)> = v
            .displacement_nm
            .iter()
            .copied()
            .zip(v.density_per_nm.iter().copied())
            .collect();
        xmax = xmax.max(
            v.displacement_nm
                .iter()
                .zip(&v.density_per_nm)
                .filter(|(_, p)| **p > 0.0)
                .map(|(x, _)| x.abs())
                .fold(0.0, f64::max),
        );
        ymax = ymax.max(v.density_per_nm.iter().copied().fold(0.0, f64::max));
        curves.push(Curve {
            points: measured,
            colour,
            label: format!(
                "τ = {} s (α2 = {})",
                crate::format::sig(v.lag_s, 3),
                crate::format::sig(v.alpha2, 2)
            ),
            dashed: false,
            markers: false,
            line: true,
        });
        curves.push(Curve {
            points: v
                .displacement_nm
                .iter()
                .copied()
                .zip(v.gaussian_per_nm.iter().copied())
                .collect(),
            colour,
            label: "Gaussian, same variance".into(),
            dashed: true,
            markers: false,
            line: true,
        });
    }
    let axis = ["x", "y", "z"]
        .get(c.van_hove[0].axis)
        .copied()
        .unwrap_or("w");
    Some(Figure {
        title: format!(
            "van Hove G_s({axis}, τ) — {}",
            report
                .scenario
                .clone()
                .unwrap_or_else(|| report.species.clone())
        ),
        x_label: format!("displacement Δ{axis} / nm"),
        y_label: "probability density / nm⁻¹".into(),
        x_range: [-xmax * 1.05, xmax * 1.05],
        x_log: false,
        y_range: [0.0, ymax * 1.1 + f64::MIN_POSITIVE],
        x_spans: vec![],
        bands: vec![],
        hlines: vec![],
        curves,
    })
}

/// The density profile of a slit, pore or obstacle file over the reference
/// density, with its 95 % band and the edge of the space open to centres.
pub fn partition_profile_figure(p: &crate::profile::PartitionAnalysis) -> Figure {
    let prof = &p.profile;
    let points: Vec<(f64, f64)> = prof
        .x_nm
        .iter()
        .copied()
        .zip(prof.density_over_reference.iter().copied())
        .collect();
    let band = prof
        .x_nm
        .iter()
        .zip(prof.density_over_reference.iter().zip(&prof.ci95))
        .map(|(&x, (&y, &h))| (x, y - h, y + h))
        .collect();
    let xmax = prof.x_nm.last().copied().unwrap_or(1.0) + 0.5 * prof.bin_nm;
    let ymax = prof
        .density_over_reference
        .iter()
        .zip(&prof.ci95)
        .map(|(y, h)| y + h)
        .filter(|v| v.is_finite())
        .fold(1.0f64, f64::max);
    let coordinate = match prof.coordinate.as_str() {
        "z_nm" => "height z across the gap / nm",
        "rho_nm" => "distance ρ from the pore axis / nm",
        _ => "distance to the nearest obstacle surface / nm",
    };
    Figure {
        title: format!(
            "density profile of '{}' ({}), measured K = {}",
            p.species,
            p.geometry,
            match p.partition.ci95 {
                Some(ci) => crate::format::with_interval(p.partition.value, ci),
                None => crate::format::sig(p.partition.value, 4),
            }
        ),
        x_label: coordinate.into(),
        y_label: "density / reference density".into(),
        x_range: [0.0, xmax],
        x_log: false,
        y_range: [0.0, ymax * 1.15],
        x_spans: vec![],
        bands: vec![crate::plot::Band {
            points: band,
            colour: crate::plot::MEASURED.with_opacity(0.2),
            label: "95 % interval (groups of particles)".into(),
        }],
        hlines: vec![crate::plot::HLine {
            y: 1.0,
            colour: crate::plot::series(0),
            label: "uniform open space (steric equilibrium)".into(),
        }],
        curves: vec![Curve {
            points,
            colour: crate::plot::MEASURED,
            label: "measured".into(),
            dashed: false,
            markers: true,
            line: true,
        }],
    }
}

/// c(z)/c_feed across a membrane, with its 95 % band and the slab shaded.
pub fn membrane_profile_figure(m: &crate::membrane::MembraneAnalysis) -> Figure {
    let prof = &m.profile;
    let points: Vec<(f64, f64)> = prof
        .z_nm
        .iter()
        .copied()
        .zip(prof.c_over_feed.iter().copied())
        .collect();
    let band = prof
        .z_nm
        .iter()
        .zip(prof.c_over_feed.iter().zip(&prof.c_over_feed_ci95))
        .map(|(&z, (&c, &h))| (z, c - h, c + h))
        .collect();
    let zmax = prof.z_nm.last().copied().unwrap_or(1.0) + 0.5 * prof.bin_nm;
    let ymax = prof
        .c_over_feed
        .iter()
        .zip(&prof.c_over_feed_ci95)
        .map(|(c, h)| c + h)
        .filter(|v| v.is_finite())
        .fold(1.0f64, f64::max);
    Figure {
        title: format!("concentration across the membrane, '{}'", m.species),
        x_label: "z / nm".into(),
        y_label: "c(z) / c_feed".into(),
        x_range: [0.0, zmax],
        x_log: false,
        y_range: [0.0, ymax * 1.15],
        x_spans: vec![(
            prof.pore_region_nm,
            crate::plot::series(3).with_opacity(0.2),
            "membrane (pores)".into(),
        )],
        bands: vec![crate::plot::Band {
            points: band,
            colour: crate::plot::MEASURED.with_opacity(0.2),
            label: "95 % interval (blocks of frames)".into(),
        }],
        hlines: vec![],
        curves: vec![Curve {
            points,
            colour: crate::plot::MEASURED,
            label: "c(z)/c_feed per box cross-section".into(),
            dashed: false,
            markers: false,
            line: true,
        }],
    }
}

/// Writes `PREFIX_profile.svg` and `.png` for `fig`; returns their paths.
///
/// # Errors
/// [`ErrorKind::Output`] if a file cannot be written.
pub fn write_profile_plot(prefix: &Path, fig: &Figure) -> Result<Vec<PathBuf>> {
    let base = prefix.display().to_string();
    let svg = PathBuf::from(format!("{base}_profile.svg"));
    write_new(&svg, &crate::plot::render_svg(fig))?;
    let png = PathBuf::from(format!("{base}_profile.png"));
    crate::plot::render_png(fig, &png, crate::plot::png_font_available())?;
    Ok(vec![svg, png])
}
