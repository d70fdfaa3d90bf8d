//! Outputs of `thicket analyze TRACKS.csv` beside its report: the per-track
//! table (CSV) and the histogram of per-track D (SVG and PNG, drawn with
//! [`crate::plot`]).
//!
//! # Per-track table
//! One row per track of the file, in order of id, a header row, numbers
//! only, full precision (shortest text that reads back to the same f64);
//! an empty field where an estimate is undefined:
//!
//! | column | meaning |
//! |---|---|
//! | `track_id` | track id from the file |
//! | `n_positions` | detections of the track |
//! | `analysed` | 1 when long enough for the report's groups, else 0 |
//! | `d_cve_um2_per_s` | D, covariance estimator (Vestergaard et al. 2014), µm²/s |
//! | `sigma2_cve_nm2` | lateral σ², covariance estimator, nm² (may be < 0) |
//! | `sigma_cve_nm` | √σ², nm (empty when σ² < 0) |
//! | `d_msd_um2_per_s` | D, MSD fit with the optimal number of lags, µm²/s |
//! | `sigma2_msd_nm2` | lateral σ², MSD fit, nm² |
//! | `msd_lags` | lags fitted, mean over axes |
//! | `d0_um2_per_s` | true D0, only with a truth file |

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::plot::{png_font_available, render_png, render_svg, Colour, Curve, Figure};
use crate::tracks::{TracksError, TracksReport};

/// µm²/s in one nm²/s.
const UM2_PER_NM2: f64 = 1e-6;

/// Colour of species `i` in the histogram: the house palette.
fn species_colour(i: usize) -> Colour {
    if i == 0 {
        crate::plot::MEASURED
    } else {
        crate::plot::series(i - 1)
    }
}

/// Text of one table field: the shortest exact form, empty when undefined.
fn field(v: Option<f64>) -> String {
    match v {
        Some(v) if v.is_finite() => format!("{v}"),
        _ => String::new(),
    }
}

/// The per-track table as CSV text (columns in the module documentation).
pub fn track_table_csv(report: &TracksReport) -> String {
    let lateral = report.dims.min(2);
    let with_truth = report.truth_file.is_some();
    let mut out = String::from(
        "track_id,n_positions,analysed,d_cve_um2_per_s,sigma2_cve_nm2,sigma_cve_nm,d_msd_um2_per_s,sigma2_msd_nm2,msd_lags",
    );
    if with_truth {
        out.push_str(",d0_um2_per_s");
    }
    out.push('\n');
    for t in &report.per_track {
        let lat = |v: &[f64]| v[..lateral].iter().sum::<f64>() / lateral as f64;
        let cve_s2 = t.covariance.as_ref().map(|c| lat(&c.sigma2_axes_nm2));
        let _ = write!(
            out,
            "{},{},{},{},{},{},{},{},{}",
            t.id,
            t.positions,
            u8::from(t.analysed),
            field(t.covariance.as_ref().map(|c| c.d_nm2_per_s * UM2_PER_NM2)),
            field(cve_s2),
            field(cve_s2.filter(|s| *s >= 0.0).map(f64::sqrt)),
            field(t.msd_fit.as_ref().map(|m| m.d_nm2_per_s * UM2_PER_NM2)),
            field(t.msd_fit.as_ref().map(|m| lat(&m.sigma2_axes_nm2))),
            field(t.msd_fit.as_ref().map(|m| {
                m.lags_axes.iter().sum::<usize>() as f64 / m.lags_axes.len().max(1) as f64
            })),
        );
        if with_truth {
            let _ = write!(out, ",{}", field(t.d0_m2_per_s.map(|d| d * 1e12)));
        }
        out.push('\n');
    }
    out
}

/// Writes the per-track table to `path`.
///
/// # Errors
/// [`TracksError::Io`] if the file cannot be written.
pub fn write_track_table(path: &Path, report: &TracksReport) -> Result<(), TracksError> {
    std::fs::write(path, track_table_csv(report)).map_err(|source| TracksError::Io {
        file: path.to_path_buf(),
        source,
    })
}

/// Histogram of the covariance D of the analysed tracks, µm²/s, one
/// outline per species, with each species' true D0 as a dashed line when
/// the truth is known.
pub fn d_histogram_figure(report: &TracksReport) -> Figure {
    let mut groups: Vec<(String, Vec<f64>, Option<f64>)> = Vec::new();
    for t in report.per_track.iter().filter(|t| t.analysed) {
        let Some(c) = &t.covariance else { continue };
        let name = t.species.clone().unwrap_or_else(|| "all tracks".into());
        let d = c.d_nm2_per_s * UM2_PER_NM2;
        match groups.iter_mut().find(|g| g.0 == name) {
            Some(g) => g.1.push(d),
            None => groups.push((name, vec![d], t.d0_m2_per_s.map(|d| d * 1e12))),
        }
    }
    groups.sort_by(|a, b| a.0.cmp(&b.0));
    let all: Vec<f64> = groups
        .iter()
        .flat_map(|g| g.1.iter().copied().chain(g.2))
        .collect();
    let (mut lo, mut hi) = all
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(l, h), &v| {
            (l.min(v), h.max(v))
        });
    if !(lo.is_finite() && hi.is_finite()) {
        (lo, hi) = (0.0, 1.0);
    }
    if hi <= lo {
        (lo, hi) = (lo - 0.5 * lo.abs().max(1e-3), hi + 0.5 * hi.abs().max(1e-3));
    }
    let count = groups.iter().map(|g| g.1.len()).max().unwrap_or(0);
    // √n bins, a common rule of thumb, kept between 5 and 60.
    let bins = ((count as f64).sqrt().ceil() as usize).clamp(5, 60);
    let width = (hi - lo) / bins as f64;
    let mut curves = Vec::new();
    let mut top = 1.0f64;
    for (i, (name, values, _)) in groups.iter().enumerate() {
        let mut counts = vec![0usize; bins];
        for &v in values {
            counts[(((v - lo) / width) as usize).min(bins - 1)] += 1;
        }
        top = top.max(counts.iter().copied().max().unwrap_or(0) as f64);
        let mut points = vec![(lo, 0.0)];
        for (b, &c) in counts.iter().enumerate() {
            let (x0, x1) = (lo + b as f64 * width, lo + (b + 1) as f64 * width);
            points.extend([(x0, c as f64), (x1, c as f64)]);
        }
        points.push((hi, 0.0));
        curves.push(Curve {
            points,
            colour: species_colour(i),
            label: format!("{name} ({} tracks)", values.len()),
            dashed: false,
            markers: false,
            line: true,
        });
    }
    for (i, (name, _, d0)) in groups.iter().enumerate() {
        if let Some(d0) = d0 {
            curves.push(Curve {
                points: vec![(*d0, 0.0), (*d0, 1.08 * top)],
                colour: species_colour(i).with_opacity(0.8),
                label: format!("true D0 of {name}"),
                dashed: true,
                markers: false,
                line: true,
            });
        }
    }
    let pad = 0.03 * (hi - lo);
    Figure {
        title: format!(
            "per-track D, covariance estimator ({} tracks of ≥ {} detections)",
            report.tracks_analysed, report.min_track_frames
        ),
        x_label: "D (µm²/s)".into(),
        y_label: "tracks per bin".into(),
        x_range: [lo - pad, hi + pad],
        x_log: false,
        y_range: [0.0, 1.15 * top],
        x_spans: Vec::new(),
        bands: Vec::new(),
        hlines: Vec::new(),
        curves,
    }
}

/// The histogram files for `prefix`: `PREFIX_d_hist.svg` and `.png`.
pub fn d_histogram_paths(prefix: &Path) -> [PathBuf; 2] {
    let p = prefix.display().to_string();
    [
        PathBuf::from(format!("{p}_d_hist.svg")),
        PathBuf::from(format!("{p}_d_hist.png")),
    ]
}

/// Writes the histogram of [`d_histogram_figure`] as SVG and PNG.
///
/// # Errors
/// [`TracksError::Io`] or [`TracksError::Output`] if a file cannot be written.
pub fn write_d_histogram(
    prefix: &Path,
    report: &TracksReport,
) -> Result<[PathBuf; 2], TracksError> {
    let fig = d_histogram_figure(report);
    let [svg, png] = d_histogram_paths(prefix);
    std::fs::write(&svg, render_svg(&fig)).map_err(|source| TracksError::Io {
        file: svg.clone(),
        source,
    })?;
    render_png(&fig, &png, png_font_available()).map_err(|e| TracksError::Output {
        file: png.clone(),
        message: e.to_string(),
    })?;
    Ok([svg, png])
}
