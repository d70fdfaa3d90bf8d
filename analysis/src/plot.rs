//! Plots: MSD/τ against τ, α(τ) against τ, the van Hove distribution,
//! and (in `sweep_plot`) D_eff/D0 against a swept key, each as SVG and PNG.
//!
//! A plot is first described as a [`Figure`] (data in plot units), then
//! drawn once, as SVG, by a small writer of our own; the PNG is that SVG
//! rasterised (resvg), so both files show the same ticks, labels and legend.
//! SVG text needs no font file; PNG text needs a TrueType font at run time,
//! looked for in a few standard places (or the file named by the
//! environment variable `THICKET_FONT`), and the PNG is drawn without text
//! if none is found.
//!
//! Log axes carry ticks at 1, 2 and 5 times each power of ten (labelled)
//! and at the other integers (unlabelled); labels are written as
//! "2·10⁻⁵", never as floating-point noise.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::sync::OnceLock;

use crate::error::{ErrorKind, Result};
use crate::estimators::{Report, NM2_PER_S_IN_M2_PER_S};
use crate::msd::Msd;

/// Fonts tried for text in PNG files, in order (after `THICKET_FONT`).
pub const FONT_CANDIDATES: &[&str] = &[
    "/usr/share/fonts/truetype/dejavu/DejaVuSans.ttf",
    "/usr/share/fonts/TTF/DejaVuSans.ttf",
    "/usr/share/fonts/dejavu/DejaVuSans.ttf",
    "/usr/share/fonts/dejavu-sans-fonts/DejaVuSans.ttf",
    "/usr/share/fonts/truetype/liberation/LiberationSans-Regular.ttf",
    "/usr/share/fonts/liberation-sans/LiberationSans-Regular.ttf",
    "/usr/share/fonts/truetype/freefont/FreeSans.ttf",
    "/System/Library/Fonts/Supplemental/Arial.ttf",
    "/Library/Fonts/Arial.ttf",
    "C:\\Windows\\Fonts\\arial.ttf",
];

const FAMILY: &str = "sans-serif";
/// Width of the plotting area, px; the legend adds a column to its right.
const PLOT_WIDTH: u32 = 700;
const HEIGHT: u32 = 500;

/// An RGB colour with opacity.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Colour {
    /// Red, green, blue.
    pub rgb: (u8, u8, u8),
    /// Opacity, 0–1.
    pub opacity: f64,
}

/// thicket's house palette, a woodland set of our own: the measurement in
/// deep teal, models and further series in the order of [`SERIES`].
pub const MEASURED: Colour = Colour {
    rgb: (0, 104, 116),
    opacity: 1.0,
};

/// Colours of further series (models, lags, species), in order of use.
pub const SERIES: [Colour; 6] = [
    Colour {
        rgb: (181, 72, 28),
        opacity: 1.0,
    }, // rust
    Colour {
        rgb: (196, 146, 0),
        opacity: 1.0,
    }, // ochre
    Colour {
        rgb: (116, 66, 138),
        opacity: 1.0,
    }, // plum
    Colour {
        rgb: (86, 130, 52),
        opacity: 1.0,
    }, // moss
    Colour {
        rgb: (72, 96, 140),
        opacity: 1.0,
    }, // slate blue
    Colour {
        rgb: (150, 110, 80),
        opacity: 1.0,
    }, // bark
];

/// The colour of series `i` (cycling through [`SERIES`]).
pub fn series(i: usize) -> Colour {
    SERIES[i % SERIES.len()]
}

/// Apparent values: vermilion rings.
pub const WARNING: Colour = Colour {
    rgb: (222, 60, 40),
    opacity: 1.0,
};

const BLUE_C: Colour = MEASURED;
const ORANGE_C: Colour = SERIES[0];
const GREEN_C: Colour = SERIES[3];
const GREY_C: Colour = Colour {
    rgb: (70, 70, 70),
    opacity: 1.0,
};
/// Fit windows: pale sage.
const WINDOW_C: Colour = Colour {
    rgb: (170, 205, 150),
    opacity: 0.3,
};

impl Colour {
    /// The same colour at another opacity.
    pub fn with_opacity(self, opacity: f64) -> Colour {
        Colour { opacity, ..self }
    }

    fn svg(&self) -> String {
        format!("rgb({},{},{})", self.rgb.0, self.rgb.1, self.rgb.2)
    }
}

/// A curve of a figure.
#[derive(Debug, Clone, PartialEq)]
pub struct Curve {
    /// Points (x, y) in plot units.
    pub points: Vec<(f64, f64)>,
    /// Colour.
    pub colour: Colour,
    /// Legend text.
    pub label: String,
    /// Dashed line.
    pub dashed: bool,
    /// Mark each point.
    pub markers: bool,
    /// Join the points with a line (off for points that only mark).
    pub line: bool,
}

/// A shaded band between a lower and an upper curve.
#[derive(Debug, Clone, PartialEq)]
pub struct Band {
    /// (x, low, high) in plot units.
    pub points: Vec<(f64, f64, f64)>,
    /// Colour (with opacity).
    pub colour: Colour,
    /// Legend text.
    pub label: String,
}

/// A horizontal reference line.
#[derive(Debug, Clone, PartialEq)]
pub struct HLine {
    /// Its y value in plot units.
    pub y: f64,
    /// Colour.
    pub colour: Colour,
    /// Legend text.
    pub label: String,
}

/// A plot with a logarithmic or linear x axis and a linear y axis.
#[derive(Debug, Clone, PartialEq)]
pub struct Figure {
    /// Title.
    pub title: String,
    /// x-axis label.
    pub x_label: String,
    /// y-axis label.
    pub y_label: String,
    /// x range (positive when `x_log`).
    pub x_range: [f64; 2],
    /// Logarithmic x axis.
    pub x_log: bool,
    /// y range.
    pub y_range: [f64; 2],
    /// Shaded x intervals (e.g. the fit window), with legend text.
    pub x_spans: Vec<([f64; 2], Colour, String)>,
    /// Shaded bands.
    pub bands: Vec<Band>,
    /// Reference lines.
    pub hlines: Vec<HLine>,
    /// Curves.
    pub curves: Vec<Curve>,
}

/// Writes `PREFIX_msd.svg`, `PREFIX_msd.png`, `PREFIX_alpha.svg` and
/// `PREFIX_alpha.png` and returns their paths.
///
/// # Errors
/// [`ErrorKind::Output`] if a file cannot be written.
pub fn write_plots(prefix: impl AsRef<Path>, msd: &Msd, report: &Report) -> Result<Vec<PathBuf>> {
    let prefix = prefix.as_ref().display().to_string();
    let text = png_font_available();
    let mut written = Vec::new();
    for (name, fig) in [
        ("msd", msd_figure(msd, report)),
        ("alpha", alpha_figure(msd, report)),
    ] {
        let svg = PathBuf::from(format!("{prefix}_{name}.svg"));
        std::fs::write(&svg, render_svg(&fig)).map_err(|e| output_error(&svg, e))?;
        written.push(svg);
        let png = PathBuf::from(format!("{prefix}_{name}.png"));
        render_png(&fig, &png, text)?;
        written.push(png);
    }
    Ok(written)
}

/// Writes `PREFIX_van_hove.svg` and `.png` (the displacement distribution
/// against the Gaussian) when the analysis has van Hove data, and the
/// curve tables `PREFIX_msd.csv` and `PREFIX_van_hove.csv`; returns their paths.
///
/// # Errors
/// [`ErrorKind::Output`] if a file cannot be written.
pub fn write_curves(prefix: impl AsRef<Path>, msd: &Msd, report: &Report) -> Result<Vec<PathBuf>> {
    let prefix = prefix.as_ref();
    let curves = report
        .curves
        .clone()
        .unwrap_or_else(|| crate::curves::curves(msd, report));
    let mut written = crate::curves::write_tables(prefix, &curves)?;
    if let Some(fig) = crate::curves::van_hove_figure(&curves, report) {
        let base = prefix.display().to_string();
        let svg = PathBuf::from(format!("{base}_van_hove.svg"));
        std::fs::write(&svg, render_svg(&fig)).map_err(|e| output_error(&svg, e))?;
        written.push(svg);
        let png = PathBuf::from(format!("{base}_van_hove.png"));
        render_png(&fig, &png, png_font_available())?;
        written.push(png);
    }
    Ok(written)
}

fn output_error(path: &Path, e: impl std::fmt::Display) -> crate::error::Error {
    ErrorKind::Output {
        path: path.to_path_buf(),
        message: e.to_string(),
    }
    .into()
}

/// `true` when a TrueType font for PNG text was found.
pub fn png_font_available() -> bool {
    !font_database().is_empty()
}

/// The font of PNG text, loaded once: `THICKET_FONT` or the first of
/// [`FONT_CANDIDATES`] that loads, registered as the family the SVG names.
fn font_database() -> &'static resvg::usvg::fontdb::Database {
    static DB: OnceLock<resvg::usvg::fontdb::Database> = OnceLock::new();
    DB.get_or_init(|| {
        let mut db = resvg::usvg::fontdb::Database::new();
        let from_env = std::env::var_os("THICKET_FONT").map(PathBuf::from);
        let candidates = from_env
            .into_iter()
            .chain(FONT_CANDIDATES.iter().map(PathBuf::from));
        for path in candidates {
            if db.load_font_file(&path).is_ok() && !db.is_empty() {
                let family = db
                    .faces()
                    .next()
                    .and_then(|f| f.families.first().map(|(name, _)| name.clone()));
                if let Some(family) = family {
                    db.set_sans_serif_family(family);
                }
                break;
            }
        }
        db
    })
}

/// The axes of the report's D_eff that the MSD has (all axes for reports
/// that name none).
fn report_axes(msd: &Msd, report: &Report) -> Vec<usize> {
    let axes: Vec<usize> = report
        .direction_axes
        .iter()
        .copied()
        .filter(|&a| a < msd.dims)
        .collect();
    if axes.is_empty() {
        (0..msd.dims).collect()
    } else {
        axes
    }
}

/// What a figure shows, for its title: the scenario line, or the species
/// and file of a trajectory without one.
fn context(report: &Report) -> String {
    report.scenario.clone().unwrap_or_else(|| {
        let file = Path::new(&report.file)
            .file_name()
            .map_or_else(String::new, |f| f.to_string_lossy().into_owned());
        format!("'{}' in {file}", report.species)
    })
}

/// The apparent-value caveat for a figure's title.
fn apparent_note(report: &Report) -> &'static str {
    if report.apparent {
        " — APPARENT: not diffusive in the fit window"
    } else {
        ""
    }
}

/// Power of ten that brings `max` into [1, 10), for axis scaling.
fn decade(max: f64) -> i32 {
    if max > 0.0 && max.is_finite() {
        max.log10().floor() as i32
    } else {
        0
    }
}

fn log_x_range(t: &[f64]) -> [f64; 2] {
    let lo = t
        .iter()
        .copied()
        .filter(|v| *v > 0.0)
        .fold(f64::INFINITY, f64::min);
    let hi = t.iter().copied().fold(0.0, f64::max);
    if lo.is_finite() && hi > lo {
        [lo / 1.3, hi * 1.3]
    } else if lo.is_finite() {
        [lo / 2.0, lo * 2.0]
    } else {
        [1e-9, 1.0]
    }
}

/// MSD/τ against τ: time-averaged and from-origin curves, 2d·D0 and
/// 2d·D_eff (with its interval), the fit window shaded.
pub fn msd_figure(msd: &Msd, report: &Report) -> Figure {
    let axes = report_axes(msd, report);
    let d2 = 2.0 * axes.len() as f64;
    // In m²/s here; shown in µm²/s (× 1e12), with a power of ten only when far from 1.
    let to_si = |msd_nm2: f64, t: f64| msd_nm2 * NM2_PER_S_IN_M2_PER_S / t;
    let ta: Vec<(f64, f64)> = msd
        .lag_times_s
        .iter()
        .zip(msd.axes_sum_nm2(&axes))
        .map(|(&t, m)| (t, to_si(m, t)))
        .collect();
    let origin: Vec<(f64, f64)> = msd
        .lag_times_s
        .iter()
        .zip(msd.origin_axes_sum_nm2(&axes))
        .map(|(&t, m)| (t, to_si(m, t)))
        .collect();
    let mut ymax = ta
        .iter()
        .chain(&origin)
        .map(|p| p.1)
        .filter(|v| v.is_finite())
        .fold(0.0, f64::max);
    if let Some(d0) = report.d0_m2_per_s {
        ymax = ymax.max(d2 * d0);
        for ratio in report.models.values() {
            ymax = ymax.max(d2 * d0 * ratio);
        }
    }
    ymax = ymax.max(d2 * report.d_eff_ci95_m2_per_s[1]);
    let e = decade(ymax * 1e12);
    let e = if (-1..=3).contains(&e) { 0 } else { e };
    let scale = 1e12 * 10f64.powi(-e);
    let sc = |pts: Vec<(f64, f64)>| {
        pts.into_iter()
            .map(|(x, y)| (x, y * scale))
            .collect::<Vec<_>>()
    };
    let x_range = log_x_range(&msd.lag_times_s);
    let dims = axes.len();
    let mut fig = Figure {
        title: format!(
            "MSD/τ, {} — {}{}",
            report.direction,
            context(report),
            apparent_note(report)
        ),
        x_label: "lag τ / s".into(),
        y_label: if e == 0 {
            "MSD/τ / (µm² s⁻¹)".into()
        } else {
            format!("MSD/τ / ({} µm² s⁻¹)", fmt_power_tick(1, e))
        },
        x_range,
        x_log: true,
        y_range: [0.0, ymax * scale * 1.15 + f64::MIN_POSITIVE],
        x_spans: vec![(report.fit_window_s, WINDOW_C, "fit window".into())],
        bands: vec![Band {
            points: vec![
                (
                    x_range[0],
                    d2 * report.d_eff_ci95_m2_per_s[0] * scale,
                    d2 * report.d_eff_ci95_m2_per_s[1] * scale,
                ),
                (
                    x_range[1],
                    d2 * report.d_eff_ci95_m2_per_s[0] * scale,
                    d2 * report.d_eff_ci95_m2_per_s[1] * scale,
                ),
            ],
            colour: ORANGE_C.with_opacity(0.2),
            label: "95 % interval of D_eff".into(),
        }],
        hlines: vec![HLine {
            y: d2 * report.d_eff_m2_per_s * scale,
            colour: ORANGE_C,
            label: format!("{}·D_eff", 2 * dims),
        }],
        curves: vec![
            Curve {
                points: sc(ta),
                colour: BLUE_C,
                label: "time-averaged".into(),
                dashed: false,
                markers: true,
                line: true,
            },
            Curve {
                points: sc(origin),
                colour: GREEN_C,
                label: "from frame 0".into(),
                dashed: true,
                markers: false,
                line: true,
            },
        ],
    };
    // The models' prediction of this D_eff, as the line the MSD/τ plateau would reach.
    if let Some(d0) = report.d0_m2_per_s {
        for (i, (name, ratio)) in report.models.iter().enumerate() {
            fig.hlines.push(HLine {
                y: d2 * d0 * ratio * scale,
                colour: series(i + 1),
                label: format!("model: {name}"),
            });
        }
    }
    if let Some(d0) = report.d0_m2_per_s {
        fig.hlines.push(HLine {
            y: d2 * d0 * scale,
            colour: GREY_C,
            label: format!("{}·D0", 2 * dims),
        });
    }
    fig
}

/// α(τ) against τ with its ±2 SE band, α = 1 marked and the fit window shaded.
pub fn alpha_figure(msd: &Msd, report: &Report) -> Figure {
    let ex = msd.local_exponent_of(&report_axes(msd, report));
    let points: Vec<(f64, f64)> = ex
        .lag_times_s
        .iter()
        .zip(&ex.alpha)
        .filter(|(_, a)| a.is_finite())
        .map(|(&t, &a)| (t, a))
        .collect();
    let band: Vec<(f64, f64, f64)> = ex
        .lag_times_s
        .iter()
        .zip(ex.alpha.iter().zip(&ex.se))
        .filter(|(_, (a, s))| a.is_finite() && s.is_finite())
        .map(|(&t, (&a, &s))| (t, a - 2.0 * s, a + 2.0 * s))
        .collect();
    let (mut lo, mut hi) = (0.0f64, 1.2f64);
    for &(_, a) in &points {
        lo = lo.min(a);
        hi = hi.max(a);
    }
    Figure {
        title: format!(
            "local exponent α(τ), {} — {}{}",
            report.direction,
            context(report),
            apparent_note(report)
        ),
        x_label: "lag τ / s".into(),
        y_label: "α = d ln MSD / d ln τ".into(),
        x_range: log_x_range(&msd.lag_times_s),
        x_log: true,
        y_range: [lo, hi.min(3.0) + 0.05],
        x_spans: vec![(report.fit_window_s, WINDOW_C, "fit window".into())],
        bands: vec![Band {
            points: band,
            colour: BLUE_C.with_opacity(0.2),
            label: "±2 SE (between particles)".into(),
        }],
        hlines: vec![HLine {
            y: 1.0,
            colour: GREY_C,
            label: "α = 1 (diffusive)".into(),
        }],
        curves: vec![Curve {
            points,
            colour: BLUE_C,
            label: "α(τ)".into(),
            dashed: false,
            markers: true,
            line: true,
        }],
    }
}

/// Tick values of a linear axis: 1, 2 or 5 times a power of ten apart.
fn linear_ticks(lo: f64, hi: f64) -> Vec<f64> {
    let span = hi - lo;
    if !(span > 0.0 && span.is_finite()) {
        return vec![lo];
    }
    let raw = span / 6.0;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let mut v = (lo / step).ceil() * step;
    let mut out = Vec::new();
    while v <= hi + 1e-9 * step {
        out.push(if v.abs() < 1e-12 * step { 0.0 } else { v });
        v += step;
    }
    out
}

fn escape(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
}

/// Renders a figure as SVG text.
pub fn render_svg(fig: &Figure) -> String {
    // A long title splits at " — " into a title and a smaller subtitle line.
    let (title, subtitle) = match fig.title.split_once(" — ") {
        Some((t, sub)) => (t, Some(sub)),
        None => (fig.title.as_str(), None),
    };
    // (colour, label, filled box, dashed line)
    let mut entries: Vec<(Colour, &str, bool, bool)> = Vec::new();
    entries.extend(
        fig.curves
            .iter()
            .map(|c| (c.colour, c.label.as_str(), false, c.dashed)),
    );
    entries.extend(
        fig.hlines
            .iter()
            .map(|l| (l.colour, l.label.as_str(), false, true)),
    );
    entries.extend(
        fig.bands
            .iter()
            .map(|b| (b.colour, b.label.as_str(), true, false)),
    );
    entries.extend(
        fig.x_spans
            .iter()
            .map(|(_, c, l)| (*c, l.as_str(), true, false)),
    );
    // Wide enough for the longest label (about 6.6 px a character at 12 px).
    let legend_w = entries
        .iter()
        .map(|e| e.1.chars().count())
        .max()
        .map_or(0.0, |n| 40.0 + 6.6 * n as f64)
        .clamp(120.0, 520.0);
    let (left, top, bottom) = (80.0, if subtitle.is_some() { 56.0 } else { 40.0 }, 60.0);
    let pw = f64::from(PLOT_WIDTH);
    let w = left + pw + 24.0 + legend_w + 10.0;
    let h = f64::from(HEIGHT);
    let ph = h - top - bottom;
    let fx = |x: f64| if fig.x_log { x.log10() } else { x };
    let (lx0, lx1) = (fx(fig.x_range[0]), fx(fig.x_range[1]));
    let [y0, y1] = fig.y_range;
    let px = |x: f64| left + (fx(x) - lx0) / (lx1 - lx0) * pw;
    let py = |y: f64| top + (1.0 - (y - y0) / (y1 - y0)) * ph;
    let mut s = String::new();
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{w:.0}" height="{h:.0}" viewBox="0 0 {w:.0} {h:.0}" font-family="sans-serif">"#
    );
    let _ = writeln!(s, r#"<rect width="100%" height="100%" fill="white"/>"#);
    let _ = writeln!(
        s,
        r#"<defs><clipPath id="plot"><rect x="{left}" y="{top}" width="{pw}" height="{ph}"/></clipPath></defs>"#
    );
    let _ = writeln!(s, r#"<g clip-path="url(#plot)">"#);
    for (span, c, _) in &fig.x_spans {
        let (a, b) = (
            px(span[0].max(fig.x_range[0])),
            px(span[1].min(fig.x_range[1])),
        );
        let _ = writeln!(
            s,
            r#"<rect x="{a:.2}" y="{top}" width="{:.2}" height="{ph}" fill="{}" fill-opacity="{}"/>"#,
            (b - a).max(0.0),
            c.svg(),
            c.opacity
        );
    }
    for band in &fig.bands {
        if band.points.len() < 2 {
            continue;
        }
        let mut d = String::new();
        for (i, &(x, _, hi)) in band.points.iter().enumerate() {
            let _ = write!(
                d,
                "{}{:.2},{:.2} ",
                if i == 0 { "M" } else { "L" },
                px(x),
                py(hi)
            );
        }
        for &(x, lo, _) in band.points.iter().rev() {
            let _ = write!(d, "L{:.2},{:.2} ", px(x), py(lo));
        }
        let _ = writeln!(
            s,
            r#"<path d="{d}Z" fill="{}" fill-opacity="{}" stroke="none"/>"#,
            band.colour.svg(),
            band.colour.opacity
        );
    }
    // Grid lines at the labelled x ticks and at the y ticks.
    let xticks = x_ticks(fig);
    let labelled: Vec<f64> = xticks
        .iter()
        .filter(|t| t.1.is_some())
        .map(|t| t.0)
        .collect();
    for &x in &labelled {
        let _ = writeln!(
            s,
            r##"<line x1="{0:.2}" y1="{top}" x2="{0:.2}" y2="{1}" stroke="#ddd"/>"##,
            px(x),
            top + ph
        );
    }
    let yticks = linear_ticks(y0, y1);
    for &y in &yticks {
        let _ = writeln!(
            s,
            r##"<line x1="{left}" y1="{0:.2}" x2="{1}" y2="{0:.2}" stroke="#ddd"/>"##,
            py(y),
            left + pw
        );
    }
    for l in &fig.hlines {
        let _ = writeln!(
            s,
            r#"<line x1="{left}" y1="{0:.2}" x2="{1}" y2="{0:.2}" stroke="{2}" stroke-width="1.5" stroke-dasharray="6,4"/>"#,
            py(l.y),
            left + pw,
            l.colour.svg()
        );
    }
    for c in &fig.curves {
        let pts: Vec<String> = c
            .points
            .iter()
            .filter(|p| (p.0 > 0.0 || !fig.x_log) && p.1.is_finite())
            .map(|&(x, y)| format!("{:.2},{:.2}", px(x), py(y)))
            .collect();
        if pts.is_empty() {
            continue;
        }
        let dash = if c.dashed {
            r#" stroke-dasharray="5,3""#
        } else {
            ""
        };
        if c.line {
            let _ = writeln!(
                s,
                r#"<polyline points="{}" fill="none" stroke="{}" stroke-width="1.8"{dash}/>"#,
                pts.join(" "),
                c.colour.svg()
            );
        }
        if c.markers {
            // Marker-only curves draw larger rings so they stand out on a line's dots.
            let ring = !c.line;
            for p in &pts {
                let (x, y) = p.split_once(',').unwrap_or(("0", "0"));
                let _ = if ring {
                    writeln!(
                        s,
                        r#"<circle cx="{x}" cy="{y}" r="5" fill="none" stroke="{}" stroke-width="1.8"/>"#,
                        c.colour.svg()
                    )
                } else {
                    writeln!(
                        s,
                        r#"<circle cx="{x}" cy="{y}" r="2.5" fill="{}"/>"#,
                        c.colour.svg()
                    )
                };
            }
        }
    }
    let _ = writeln!(s, "</g>");
    // Frame, ticks and labels.
    let _ = writeln!(
        s,
        r#"<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="none" stroke="black"/>"#
    );
    for (x, label) in &xticks {
        let xp = px(*x);
        match label {
            Some(text) => {
                let _ = writeln!(
                    s,
                    r#"<line class="xtick" x1="{xp:.2}" y1="{0}" x2="{xp:.2}" y2="{1}" stroke="black"/><text class="xlabel" x="{xp:.2}" y="{2}" font-size="13" text-anchor="middle">{3}</text>"#,
                    top + ph,
                    top + ph + 6.0,
                    top + ph + 20.0,
                    escape(text)
                );
            }
            None => {
                let _ = writeln!(
                    s,
                    r#"<line class="xminor" x1="{xp:.2}" y1="{0}" x2="{xp:.2}" y2="{1}" stroke="black"/>"#,
                    top + ph,
                    top + ph + 3.0
                );
            }
        }
    }
    for &y in &yticks {
        let yp = py(y);
        let _ = writeln!(
            s,
            r#"<line x1="{0}" y1="{yp:.2}" x2="{left}" y2="{yp:.2}" stroke="black"/><text x="{1}" y="{2:.2}" font-size="13" text-anchor="end">{3}</text>"#,
            left - 6.0,
            left - 9.0,
            yp + 4.0,
            fmt_tick(y)
        );
    }
    let _ = writeln!(
        s,
        r#"<text x="{0}" y="24" font-size="16" text-anchor="middle">{1}</text>"#,
        left + pw / 2.0,
        escape(title)
    );
    if let Some(sub) = subtitle {
        let _ = writeln!(
            s,
            r#"<text x="{0}" y="42" font-size="12" text-anchor="middle">{1}</text>"#,
            left + pw / 2.0,
            escape(sub)
        );
    }
    let _ = writeln!(
        s,
        r#"<text x="{0}" y="{1}" font-size="14" text-anchor="middle">{2}</text>"#,
        left + pw / 2.0,
        h - 15.0,
        escape(&fig.x_label)
    );
    let _ = writeln!(
        s,
        r#"<text x="20" y="{0}" font-size="14" text-anchor="middle" transform="rotate(-90 20 {0})">{1}</text>"#,
        top + ph / 2.0,
        escape(&fig.y_label)
    );
    // Legend, in its own column right of the plot.
    let (lx, mut ly) = (left + pw + 30.0, top + 12.0);
    let _ = writeln!(
        s,
        r##"<rect x="{0}" y="{1}" width="{legend_w:.1}" height="{2}" fill="white" fill-opacity="0.85" stroke="#999"/>"##,
        lx - 6.0,
        top + 4.0,
        18.0 * entries.len() as f64 + 6.0
    );
    for (c, label, filled, dashed) in entries {
        if filled {
            let _ = writeln!(
                s,
                r#"<rect x="{lx}" y="{0}" width="22" height="10" fill="{1}" fill-opacity="{2}"/>"#,
                ly,
                c.svg(),
                c.opacity.max(0.3)
            );
        } else {
            let dash = if dashed {
                r#" stroke-dasharray="5,3""#
            } else {
                ""
            };
            let _ = writeln!(
                s,
                r#"<line x1="{lx}" y1="{0}" x2="{1}" y2="{0}" stroke="{2}" stroke-width="2"{dash}/>"#,
                ly + 5.0,
                lx + 22.0,
                c.svg()
            );
        }
        let _ = writeln!(
            s,
            r#"<text x="{0}" y="{1}" font-size="12">{2}</text>"#,
            lx + 30.0,
            ly + 9.5,
            escape(label)
        );
        ly += 18.0;
    }
    let _ = writeln!(s, "</svg>");
    s
}

/// x ticks of a figure: (value, label) with labels on the major ticks.
/// A log axis has majors at 1, 2 and 5 × 10^k (only 10^k when it spans
/// more than three decades) and unlabelled minors at the other integers.
pub fn x_ticks(fig: &Figure) -> Vec<(f64, Option<String>)> {
    let [lo, hi] = fig.x_range;
    if !fig.x_log {
        return linear_ticks(lo, hi)
            .into_iter()
            .map(|v| (v, Some(fmt_tick(v))))
            .collect();
    }
    if !(lo > 0.0 && hi > lo && hi.is_finite()) {
        return Vec::new();
    }
    let (k0, k1) = (lo.log10().floor() as i32, hi.log10().ceil() as i32);
    let wide = hi.log10() - lo.log10() > 3.0;
    let mut out = Vec::new();
    for k in k0..=k1 {
        for m in 1..=9 {
            let v = f64::from(m) * 10f64.powi(k);
            if v < lo || v > hi {
                continue;
            }
            let major = m == 1 || (!wide && (m == 2 || m == 5));
            out.push((v, major.then(|| fmt_power_tick(m, k))));
        }
    }
    out
}

/// "10⁻⁵" for m = 1, "2·10⁻⁵" otherwise.
fn fmt_power_tick(m: i32, k: i32) -> String {
    const SUPERSCRIPT: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut power = String::from("10");
    if k < 0 {
        power.push('⁻');
    }
    for d in k.unsigned_abs().to_string().chars() {
        power.push(SUPERSCRIPT[d.to_digit(10).unwrap_or(0) as usize]);
    }
    if m == 1 {
        power
    } else {
        format!("{m}·{power}")
    }
}

fn fmt_tick(v: f64) -> String {
    let s = format!("{v:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.to_string()
    }
}

/// Renders a figure as PNG by rasterising the SVG of [`render_svg`], so
/// the two files show the same chart: ticks, labels, legend and all.
/// Without `text`, the text elements are left out (no font is needed then).
///
/// # Errors
/// [`ErrorKind::Output`] if rasterising or writing fails.
pub fn render_png(fig: &Figure, path: &Path, text: bool) -> Result<()> {
    use resvg::{tiny_skia, usvg};
    let mut svg = render_svg(fig);
    if !text {
        svg = strip_text(&svg);
    }
    let mut options = usvg::Options {
        font_family: FAMILY.into(),
        ..usvg::Options::default()
    };
    if text {
        *options.fontdb_mut() = font_database().clone();
    }
    let tree = usvg::Tree::from_str(&svg, &options).map_err(|e| output_error(path, e))?;
    let size = tree.size().to_int_size();
    let mut pixmap = tiny_skia::Pixmap::new(size.width(), size.height())
        .ok_or_else(|| output_error(path, "cannot allocate the image"))?;
    resvg::render(&tree, tiny_skia::Transform::default(), &mut pixmap.as_mut());
    pixmap.save_png(path).map_err(|e| output_error(path, e))
}

/// The SVG without its `<text>` elements.
fn strip_text(svg: &str) -> String {
    svg.lines()
        .map(|l| match (l.find("<text"), l.rfind("</text>")) {
            (Some(a), Some(b)) => format!("{}{}", &l[..a], &l[b + "</text>".len()..]),
            _ => l.to_string(),
        })
        .collect::<Vec<_>>()
        .join("\n")
}
