//! Effective diffusivity from the long-time MSD, with a 95 % confidence
//! interval from the spread between independent particles.
//!
//! D_eff is the slope of MSD(τ) = 2·d·D_eff·τ + c over a fit window
//! (d = the dimension for the total MSD, 1 per axis; the intercept c absorbs
//! the faster short-time transport and any localisation offset), found by
//! ordinary least squares on the lag grid. The interval never comes from the
//! fit's residuals, which are correlated along an MSD curve: the same fit is
//! made to the mean curve of each group of particles (each particle is its
//! own group when there are at most [`crate::msd::MsdOptions::max_groups`]),
//! and the groups' spread gives the interval, either as mean ± t-quantile ·
//! SE (Student, G − 1 degrees of freedom) or as a seeded bootstrap over groups.
//! Because the fit is linear in the MSD, the estimate from the ensemble curve
//! equals the particle-weighted mean of the groups' estimates.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::path::Path;

use serde::Serialize;

use crate::error::{Error, ErrorKind, Result};
use crate::msd::{weighted_mean_se, LocalExponent, Msd, MsdMethod, MsdOptions};
use crate::read::Trajectory;

/// 1 nm²/s in m²/s.
pub const NM2_PER_S_IN_M2_PER_S: f64 = 1e-18;

/// How the 95 % interval is formed from the groups' estimates.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
pub enum CiMethod {
    /// Weighted mean ± t(0.975, G − 1) · SE.
    #[default]
    StudentT,
    /// Percentile interval of a bootstrap over groups.
    Bootstrap {
        /// Number of resamples.
        resamples: usize,
        /// Seed of the resampling stream (splitmix64).
        seed: u64,
    },
}

/// Options of the D_eff fit.
#[derive(Debug, Clone, PartialEq)]
pub struct FitOptions {
    /// Fit window [t0, t1] in s; `None` chooses it automatically (see
    /// [`choose_fit_window`]). By default, `None`.
    pub window_s: Option<[f64; 2]>,
    /// Longest lag admitted by the automatic window, as a fraction of the
    /// run's duration (few origins remain beyond). By default, 0.25.
    pub max_lag_fraction: f64,
    /// Number of standard errors within which α(τ) counts as 1. By default,
    /// `None`: a simultaneous 95 % band over the n admissible lags
    /// (Bonferroni), z = t(1 − 0.025/n, G − 1), because α at neighbouring
    /// lags is strongly correlated and a pointwise 2-SE test strays by chance
    /// over some range of lags in many runs.
    pub z_alpha: Option<f64>,
    /// Fewest lags in an automatic window. By default, 4.
    pub min_lags: usize,
    /// Interval construction. By default, [`CiMethod::StudentT`].
    pub ci: CiMethod,
    /// Axes whose summed MSD defines D_eff, α and the window (e.g. `[0, 1]`
    /// for the lateral diffusivity in a slit). By default, `None`: all axes.
    pub axes: Option<Vec<usize>>,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            window_s: None,
            max_lag_fraction: 0.25,
            z_alpha: None,
            min_lags: 4,
            ci: CiMethod::StudentT,
            axes: None,
        }
    }
}

/// Options of [`analyze_file`].
#[derive(Debug, Clone, PartialEq, Default)]
pub struct AnalyzeOptions {
    /// MSD options.
    pub msd: MsdOptions,
    /// Fit options.
    pub fit: FitOptions,
    /// D0 in m²/s, overriding the file's value. By default, `None` (use the
    /// file's `/parameters/thicket/species/<name>` attribute `d0_m2_per_s`).
    pub d0_m2_per_s: Option<f64>,
    /// Axes of the headline D_eff, overriding the geometry's choice (see
    /// [`crate::directions::directions`]). By default, `None`.
    pub axes: Option<Vec<usize>>,
}

/// A diffusivity along one set of axes beside the headline one (e.g. along
/// aligned fibres), with its own fit window.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DirectionalEstimate {
    /// What it is, e.g. "along the fibres (z)".
    pub label: String,
    /// Axis indices.
    pub axes: Vec<usize>,
    /// D, m²/s.
    pub d_m2_per_s: f64,
    /// Its 95 % interval, m²/s.
    pub ci95_m2_per_s: [f64; 2],
    /// D/D0, when D0 is known.
    pub d_over_d0: Option<f64>,
    /// Its 95 % interval.
    pub d_over_d0_ci95: Option<[f64; 2]>,
    /// Slope of ln MSD against ln τ in the window.
    pub alpha_long: f64,
    /// Fit window [t0, t1], s.
    pub fit_window_s: [f64; 2],
    /// `true` when D is an apparent value (see [`DiffusionFit::apparent`]).
    pub apparent: bool,
}

/// Where the fit window came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum WindowSource {
    /// The automatic rule found a diffusive range.
    Auto,
    /// The automatic rule found no diffusive range and fell back to the
    /// last admissible lags.
    AutoFallback,
    /// Given by the caller.
    User,
}

/// A fit window on the lag grid.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FitWindow {
    /// First and last lag index of the window (inclusive).
    pub lag_index: [usize; 2],
    /// The window's lags in s, [t0, t1].
    pub window_s: [f64; 2],
    /// How it was chosen.
    pub source: WindowSource,
    /// Standard errors within which α counted as 1.
    pub z_alpha: f64,
    /// Earliest lag from which α stays within its uncertainty of 1 up to the
    /// longest admissible lag (see [`choose_fit_window`]; the first lag if no
    /// subdiffusive range is resolved); `None` if α is not within its
    /// uncertainty of 1 at the longest admissible lags.
    pub crossover_time_s: Option<f64>,
}

/// Result of fitting D_eff to an MSD.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DiffusionFit {
    /// D_eff from the total MSD, m²/s.
    pub d_m2_per_s: f64,
    /// Its 95 % interval, m²/s.
    pub ci95_m2_per_s: [f64; 2],
    /// D per axis, m²/s.
    pub axes_m2_per_s: Vec<f64>,
    /// 95 % interval per axis, m²/s.
    pub axes_ci95_m2_per_s: Vec<[f64; 2]>,
    /// Slope of ln MSD against ln τ in the window.
    pub alpha_long: f64,
    /// The window.
    pub window: FitWindow,
    /// Lags in the window.
    pub lags_in_window: usize,
    /// Groups whose spread gives the interval.
    pub groups: usize,
    /// Axes whose summed MSD gave `d_m2_per_s`.
    pub axes: Vec<usize>,
    /// `true` when the MSD did not reach the diffusive regime in the window
    /// (automatic fallback, or α_long off 1 by more than 0.1): D is an
    /// apparent value.
    pub apparent: bool,
    /// Notes on the fit for the report.
    pub warnings: Vec<String>,
}

/// The analysis report (`thicket analyze --json` prints it).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Report {
    /// The analysed file.
    pub file: String,
    /// The analysed species.
    pub species: String,
    /// The stored scenario in a line (file, species, obstacles, geometry,
    /// seed), when the file holds one.
    pub scenario: Option<String>,
    /// Particles analysed.
    pub particles: usize,
    /// Frames analysed.
    pub frames: usize,
    /// Frames the run meant to write, if the file says.
    pub frames_planned: Option<u64>,
    /// `true` if the file is from an interrupted run or its datasets differ in length.
    pub truncated: bool,
    /// Interval between frames, s.
    pub frame_interval_s: f64,
    /// D0, m²/s (`null` if neither the file nor the caller gives it).
    pub d0_m2_per_s: Option<f64>,
    /// Where D0 came from: "file", "caller" or "unknown".
    pub d0_source: String,
    /// Which diffusivity D_eff is, e.g. "isotropic (x, y, z)", "lateral
    /// (x, y)" or "axial (z)": the geometry decides (or the caller's axes).
    pub direction: String,
    /// Axes of D_eff.
    pub direction_axes: Vec<usize>,
    /// Why these axes.
    pub direction_reason: String,
    /// Per axis: `true` where walls bound the motion, so that axis's D is
    /// not a long-time diffusivity.
    pub bounded_axes: Vec<bool>,
    /// D_eff along `direction`, m²/s.
    pub d_eff_m2_per_s: f64,
    /// 95 % interval of D_eff, [low, high], m²/s.
    pub d_eff_ci95_m2_per_s: [f64; 2],
    /// D_eff / D0 (the self-diffusivity ratio, not a conductivity ratio).
    pub d_eff_over_d0: Option<f64>,
    /// 95 % interval of D_eff / D0.
    pub d_eff_over_d0_ci95: Option<[f64; 2]>,
    /// Tortuosity D0 / D_eff.
    pub tortuosity: Option<f64>,
    /// D per axis [x, y, z], m²/s.
    pub d_eff_axes_m2_per_s: Vec<f64>,
    /// 95 % interval per axis, m²/s.
    pub d_eff_axes_ci95_m2_per_s: Vec<[f64; 2]>,
    /// Slope of ln MSD against ln τ in the fit window.
    pub alpha_long: f64,
    /// Fit window [t0, t1], s.
    pub fit_window_s: [f64; 2],
    /// How the window was chosen.
    pub fit_window_source: WindowSource,
    /// Lags in the fit window.
    pub fit_lags: usize,
    /// Crossover time, s (see [`FitWindow::crossover_time_s`]).
    pub crossover_time_s: Option<f64>,
    /// `true` when D_eff is an apparent value: the MSD did not reach the
    /// diffusive regime in the fit window (see [`DiffusionFit::apparent`]).
    pub apparent: bool,
    /// Diffusivities along further directions (e.g. along aligned fibres).
    pub other_directions: Vec<DirectionalEstimate>,
    /// How the interval was formed.
    pub ci_method: String,
    /// Groups of particles whose spread gives the interval.
    pub ci_groups: usize,
    /// How the MSD was evaluated.
    pub msd_method: MsdMethod,
    /// Model predictions of this D_eff / D0 by name (the applicable entries
    /// of `model_table` that predict it), for the scenario stored in the file.
    pub models: BTreeMap<String, f64>,
    /// Every model entry for the scenario, with the variable it is evaluated
    /// at and, where a model does not apply, the reason.
    pub model_table: Vec<crate::model_table::ModelValue>,
    /// Everything the reader should know before trusting the numbers.
    pub warnings: Vec<String>,
    /// Under a force or a flow: the mean velocity per axis over the fit
    /// window's longest lag, m/s (the MSD is then taken about it).
    pub mean_velocity_m_per_s: Option<Vec<f64>>,
    /// The curves behind the numbers: MSD per axis, α(τ), van Hove.
    pub curves: Option<crate::curves::Curves>,
}

/// The report together with the curves it was computed from (for plots).
#[derive(Debug, Clone)]
pub struct Analysis {
    /// The report.
    pub report: Report,
    /// The MSD.
    pub msd: Msd,
    /// Its local exponent.
    pub exponent: LocalExponent,
}

/// Reads a trajectory, computes the MSD of one species and fits D_eff.
///
/// `species = None` analyses the first species (a warning names the others).
///
/// # Errors
/// Reading errors (see [`Trajectory::open`] and [`Trajectory::species`]),
/// [`ErrorKind::TooLittleData`] with fewer than 2 particles or too few
/// lags, [`ErrorKind::FitWindow`] if a given window lies outside the data,
/// and [`ErrorKind::InvalidOption`] for out-of-range options.
pub fn analyze_file(
    path: impl AsRef<Path>,
    species: Option<&str>,
    options: &AnalyzeOptions,
) -> Result<Report> {
    analyze(path, species, options).map(|a| a.report)
}

/// As [`analyze_file`], also returning the MSD and α(τ).
///
/// # Errors
/// As [`analyze_file`].
pub fn analyze(
    path: impl AsRef<Path>,
    species: Option<&str>,
    options: &AnalyzeOptions,
) -> Result<Analysis> {
    analyze_parts(&[path.as_ref()], species, options)
}

/// As [`analyze`], for one trajectory or the parts of a split ensemble
/// (`thicket run --ensemble-part I/N`, all N given in any order): the parts
/// are checked to come from one whole run and joined particle by particle.
///
/// # Errors
/// As [`analyze`], and [`ErrorKind::BadValue`] for files that are not the
/// complete set of parts of one run.
pub fn analyze_parts(
    paths: &[&Path],
    species: Option<&str>,
    options: &AnalyzeOptions,
) -> Result<Analysis> {
    if paths.is_empty() {
        return Err(Error::invalid_option("files", 0, "at least one trajectory"));
    }
    if let Some(d0) = options.d0_m2_per_s {
        if !(d0.is_finite() && d0 > 0.0) {
            return Err(Error::invalid_option(
                "--d0",
                d0,
                "a finite positive diffusivity in m²/s, e.g. --d0 1e-10",
            ));
        }
    }
    let mut trajectories = paths
        .iter()
        .map(Trajectory::open)
        .collect::<Result<Vec<_>>>()?;
    if paths.len() > 1 {
        crate::parts::order_parts(&mut trajectories)?;
    }
    let trajectory = &trajectories[0];
    let path = trajectory.path();
    let scenario = crate::report::scenario_of(trajectory, path);
    // By default the first tracer: crowders are the medium, not what is measured.
    let default_species = scenario
        .as_ref()
        .and_then(crate::sweep::default_species)
        .filter(|name| trajectory.species_names().iter().any(|n| n == name));
    let mut readers = trajectories
        .iter()
        .map(|t| t.species(species.or(default_species.as_deref())))
        .collect::<Result<Vec<_>>>()?;
    for reader in &mut readers {
        // No particle of an MSD analysis jumps: a wrong image count would inflate D_eff without bound.
        reader.check_image_jumps(true);
    }
    crate::parts::check_joined(&trajectories, &readers)?;
    let mut meta = readers[0].meta().clone();
    meta.particles = readers.iter().map(|r| r.meta().particles).sum();
    let mut warnings = Vec::new();
    if species.is_none() && trajectory.species_names().len() > 1 {
        warnings.push(format!(
            "the file holds species [{}]; analysed '{}', the first tracer (choose another by name)",
            trajectory.species_names().join(", "),
            meta.name
        ));
    }
    if meta.particles < 2 {
        return Err(ErrorKind::TooLittleData {
            path: Some(path.to_path_buf()),
            what: format!("the number of particles of species '{}'", meta.name),
            found: meta.particles,
            needed: 2,
        }
        .into());
    }
    if meta.truncated {
        let l = &meta.lengths;
        let planned = meta
            .frames_planned
            .map_or_else(|| "an unknown number of".to_string(), |p| p.to_string());
        warnings.push(format!(
            "the file is truncated (an interrupted run?): {} frames present of {planned} planned; dataset lengths: position/value {}, step {}, time {}, image {}; analysed the first {} frames",
            meta.frames,
            l.value,
            fmt_len(l.step),
            fmt_len(l.time),
            fmt_len(l.image),
            meta.frames
        ));
    }
    let found = crate::directions::directions(scenario.as_ref(), meta.dims);
    let (headline, others) = match (&options.axes, found.headline) {
        (Some(axes), _) => (
            crate::directions::Direction {
                label: format!("chosen axes ({})", crate::directions::axes_text(axes)),
                axes: axes.clone(),
                reason: "given by the caller".into(),
            },
            Vec::new(),
        ),
        (None, Some(h)) => (h, found.others),
        (None, None) => {
            return Err(ErrorKind::NoDiffusivity {
                path: path.to_path_buf(),
                reason: if found.bounded.iter().all(|b| *b) {
                    "walls bound every axis, so there is no long-time diffusivity; choose axes explicitly to fit one anyway".into()
                } else {
                    "a membrane's particles are recycled between the baths, so no diffusivity follows from their MSD; its flux, permeability and partition are the results (or choose axes explicitly)".into()
                },
            }
            .into())
        }
    };
    let bounded_axes = found.bounded.clone();
    for (a, b) in bounded_axes.iter().enumerate() {
        if *b && headline.axes.contains(&a) {
            warnings.push(format!(
                "axis {} is bounded by walls: its MSD levels off, so a D_eff that includes it describes no long-time transport",
                crate::directions::axes_text(&[a])
            ));
        }
    }
    let driven = scenario.as_ref().is_some_and(|s| s.is_driven());
    let mut msd_options = if options.msd.van_hove_lags.is_empty() {
        crate::msd::MsdOptions {
            van_hove_lags: crate::curves::default_van_hove_lags(meta.frames),
            ..options.msd.clone()
        }
    } else {
        options.msd.clone()
    };
    // Under a force or a flow the MSD grows like (vτ)²: fit the spread about the drift instead.
    msd_options.remove_mean_drift |= driven;
    let msd = crate::msd::compute_msd_joined(&readers, &msd_options)?;
    if msd.suspicious_jumps > 0 {
        warnings.push(format!(
            "the box is periodic but the file has no image counts, and {} frame-to-frame jumps exceed half a box edge: positions look wrapped, so the MSD is too small",
            msd.suspicious_jumps
        ));
    }
    let fit_options = FitOptions {
        axes: Some(headline.axes.clone()),
        ..options.fit.clone()
    };
    let fit = fit_diffusion(&msd, &fit_options).map_err(|e| match e.into_kind() {
        ErrorKind::TooLittleData {
            what,
            found,
            needed,
            ..
        } => ErrorKind::TooLittleData {
            path: Some(path.to_path_buf()),
            what,
            found,
            needed,
        }
        .into(),
        other => Error::from(other),
    })?;
    warnings.extend(fit.warnings.iter().cloned());
    let (d0, d0_source) = match (options.d0_m2_per_s, meta.d0_m2_per_s) {
        (Some(d), _) => (Some(d), "caller"),
        (None, Some(d)) => (Some(d), "file"),
        (None, None) => {
            warnings.push("D0 is unknown (the file has no /parameters/thicket/species entry and none was given): D_eff/D0 and tortuosity are omitted".into());
            (None, "unknown")
        }
    };
    let ratio_ci = d0.map(|d| [fit.ci95_m2_per_s[0] / d, fit.ci95_m2_per_s[1] / d]);
    let ci_method = match options.fit.ci {
        CiMethod::StudentT => format!("Student t over {} groups of particles", fit.groups),
        CiMethod::Bootstrap { resamples, seed } => {
            format!(
                "bootstrap over {} groups of particles ({resamples} resamples, seed {seed})",
                fit.groups
            )
        }
    };
    let exponent = msd.local_exponent_of(&fit.axes);
    let mut other_directions = Vec::new();
    for o in &others {
        let other = FitOptions {
            axes: Some(o.axes.clone()),
            ..options.fit.clone()
        };
        // A direction that cannot be fitted is left out; the headline stands.
        if let Ok(f) = fit_diffusion(&msd, &other) {
            if f.apparent {
                warnings.push(format!(
                    "D {} is an apparent value: the MSD did not reach the diffusive regime there",
                    o.label
                ));
            }
            other_directions.push(DirectionalEstimate {
                label: o.label.clone(),
                axes: o.axes.clone(),
                d_m2_per_s: f.d_m2_per_s,
                ci95_m2_per_s: f.ci95_m2_per_s,
                d_over_d0: d0.map(|d| f.d_m2_per_s / d),
                d_over_d0_ci95: d0.map(|d| [f.ci95_m2_per_s[0] / d, f.ci95_m2_per_s[1] / d]),
                alpha_long: f.alpha_long,
                fit_window_s: f.window.window_s,
                apparent: f.apparent,
            });
        }
    }
    let table = scenario
        .as_ref()
        .map(|s| crate::model_table::scenario_model_table(s, &meta.name))
        .unwrap_or_default();
    let report = Report {
        file: paths
            .iter()
            .map(|p| p.display().to_string())
            .collect::<Vec<_>>()
            .join(" + "),
        species: meta.name.clone(),
        scenario: scenario
            .as_ref()
            .map(|s| crate::report::scenario_line(s, &meta.name)),
        particles: meta.particles,
        frames: meta.frames,
        frames_planned: meta.frames_planned,
        truncated: meta.truncated,
        frame_interval_s: meta.frame_interval_s,
        d0_m2_per_s: d0,
        d0_source: d0_source.into(),
        direction: headline.label.clone(),
        direction_axes: headline.axes.clone(),
        direction_reason: headline.reason.clone(),
        bounded_axes,
        d_eff_m2_per_s: fit.d_m2_per_s,
        d_eff_ci95_m2_per_s: fit.ci95_m2_per_s,
        d_eff_over_d0: d0.map(|d| fit.d_m2_per_s / d),
        d_eff_over_d0_ci95: ratio_ci,
        tortuosity: d0.map(|d| d / fit.d_m2_per_s),
        d_eff_axes_m2_per_s: fit.axes_m2_per_s.clone(),
        d_eff_axes_ci95_m2_per_s: fit.axes_ci95_m2_per_s.clone(),
        alpha_long: fit.alpha_long,
        fit_window_s: fit.window.window_s,
        fit_window_source: fit.window.source,
        fit_lags: fit.lags_in_window,
        crossover_time_s: fit.window.crossover_time_s,
        apparent: fit.apparent,
        other_directions,
        ci_method,
        ci_groups: fit.groups,
        msd_method: msd.method,
        models: table.d_eff_over_d0(),
        model_table: table.entries,
        warnings,
        mean_velocity_m_per_s: None,
        curves: None,
    };
    let mut report = report;
    if msd.drift_removed {
        // The drift over the longest lag of the fit window, per axis.
        let i = msd
            .lag_times_s
            .iter()
            .rposition(|&t| t <= report.fit_window_s[1])
            .unwrap_or(0);
        let v: Vec<f64> = msd
            .mean_displacement_axes_nm
            .iter()
            .map(|a| a[i] / msd.lag_times_s[i] * 1e-9)
            .collect();
        report.mean_velocity_m_per_s = Some(v.clone());
        report.warnings.push(format!(
            "a force or a flow drives this species: the MSD is taken about the mean drift (its variance), so D_eff is the \
             dispersion coefficient along the chosen axes (Taylor–Aris in a pore flow), not the self-diffusivity of a still \
             medium; mean velocity [x, y, z] = [{:.4e}, {:.4e}, {:.4e}] m/s",
            v.first().copied().unwrap_or(0.0),
            v.get(1).copied().unwrap_or(0.0),
            v.get(2).copied().unwrap_or(0.0)
        ));
    }
    report.curves = Some(crate::curves::curves(&msd, &report));
    Ok(Analysis {
        report,
        msd,
        exponent,
    })
}

fn fmt_len(n: Option<usize>) -> String {
    n.map_or_else(|| "-".to_string(), |n| n.to_string())
}

/// Chooses the fit window.
///
/// With `options.window_s` given, the window holds the grid lags in
/// [t0, t1] and must contain at least 2 of them. Otherwise the rule is:
/// 1. admissible lags are those up to `max_lag_fraction` of the run's
///    duration (beyond, few independent origins remain); there must be at
///    least `min_lags` of them;
/// 2. from the longest admissible lag downwards, extend the window while
///    |α(τ) − 1| ≤ z · SE(α) (SE from the spread between groups, z from
///    [`FitOptions::z_alpha`]),
///    stopping at the first two consecutive lags that fail (a single lag
///    outside is expected by chance); the lowest passing lag of this run is
///    the crossover time;
/// 3. keep at most the last decade of that run (t0 ≥ t1/10, but at least
///    `min_lags` lags), so the short-time transient does not enter the slope;
/// 4. if fewer than `min_lags` lags remain, fall back to the last
///    `min_lags` admissible lags and say so.
///
/// # Errors
/// [`ErrorKind::FitWindow`] if a given window holds fewer than 2 lags (it
/// names the window and the lags present), [`ErrorKind::InvalidOption`] for
/// a window with t0 ≥ t1 or non-finite ends, or options out of range, and
/// [`ErrorKind::TooLittleData`] if fewer than `min_lags` lags are admissible.
pub fn choose_fit_window(
    msd: &Msd,
    exponent: &LocalExponent,
    options: &FitOptions,
) -> Result<FitWindow> {
    let t = &msd.lag_times_s;
    if t.is_empty() {
        return Err(ErrorKind::TooLittleData {
            path: None,
            what: "the number of lags".into(),
            found: 0,
            needed: 2,
        }
        .into());
    }
    if !(options.max_lag_fraction > 0.0 && options.max_lag_fraction <= 1.0) {
        return Err(Error::invalid_option(
            "max_lag_fraction",
            options.max_lag_fraction,
            "0 < fraction ≤ 1",
        ));
    }
    let last_admissible = {
        let limit = options.max_lag_fraction * msd.frames.saturating_sub(1) as f64;
        msd.lags_frames
            .iter()
            .rposition(|&m| m as f64 <= limit + 1e-9)
    };
    let z = match options.z_alpha {
        Some(z) if z.is_finite() && z > 0.0 => z,
        Some(z) => {
            return Err(Error::invalid_option(
                "z_alpha",
                z,
                "a finite positive number of standard errors",
            ));
        }
        None => {
            let n = last_admissible.map_or(1, |i| i + 1) as f64;
            student_t_quantile(
                1.0 - 0.025 / n,
                msd.groups.len().saturating_sub(1).max(1) as f64,
            )
        }
    };
    // Lowest lag of the run ending at `last` where α is within error of 1;
    // a single stray lag does not end the run, two in a row do.
    let crossover = |last: usize| -> Option<usize> {
        let ok = |i: usize| {
            let (a, se) = (exponent.alpha[i], exponent.se[i]);
            a.is_finite() && se.is_finite() && (a - 1.0).abs() <= z * se
        };
        let mut first = None;
        let mut misses = 0;
        for i in (0..=last).rev() {
            if ok(i) {
                first = Some(i);
                misses = 0;
            } else {
                misses += 1;
                if misses == 2 {
                    break;
                }
            }
        }
        first
    };
    if let Some([t0, t1]) = options.window_s {
        if !(t0.is_finite() && t1.is_finite() && t0 < t1) {
            return Err(Error::invalid_option(
                "fit window",
                format!("[{t0:e}, {t1:e}] s"),
                "finite t0 < t1 in s",
            ));
        }
        let tol = 1e-9 * t[t.len() - 1];
        let inside: Vec<usize> = (0..t.len())
            .filter(|&i| t[i] >= t0 - tol && t[i] <= t1 + tol)
            .collect();
        if inside.len() < 2 {
            return Err(ErrorKind::FitWindow {
                t0_s: t0,
                t1_s: t1,
                available_s: [t[0], t[t.len() - 1]],
                found_lags: inside.len(),
                needed_lags: 2,
            }
            .into());
        }
        let (i0, i1) = (inside[0], inside[inside.len() - 1]);
        return Ok(FitWindow {
            lag_index: [i0, i1],
            window_s: [t[i0], t[i1]],
            source: WindowSource::User,
            z_alpha: z,
            crossover_time_s: last_admissible.and_then(crossover).map(|i| t[i]),
        });
    }
    if options.min_lags < 2 {
        return Err(Error::invalid_option(
            "min_lags",
            options.min_lags,
            "at least 2",
        ));
    }
    let admissible = last_admissible.map_or(0, |i| i + 1);
    if admissible < options.min_lags {
        return Err(ErrorKind::TooLittleData {
            path: None,
            what: format!(
                "the number of lags up to {} of the run's {} frames",
                options.max_lag_fraction, msd.frames
            ),
            found: admissible,
            needed: options.min_lags,
        }
        .into());
    }
    let last = admissible - 1;
    let cross = crossover(last);
    if let Some(first) = cross {
        let first_in_decade = (first..=last)
            .find(|&i| t[i] >= t[last] / 10.0 * (1.0 - 1e-12))
            .unwrap_or(first);
        if last + 1 - first_in_decade >= options.min_lags {
            return Ok(FitWindow {
                lag_index: [first_in_decade, last],
                window_s: [t[first_in_decade], t[last]],
                source: WindowSource::Auto,
                z_alpha: z,
                crossover_time_s: Some(t[first]),
            });
        }
        if last + 1 - first >= options.min_lags {
            let i0 = last + 1 - options.min_lags;
            return Ok(FitWindow {
                lag_index: [i0, last],
                window_s: [t[i0], t[last]],
                source: WindowSource::Auto,
                z_alpha: z,
                crossover_time_s: Some(t[first]),
            });
        }
    }
    let i0 = last + 1 - options.min_lags;
    Ok(FitWindow {
        lag_index: [i0, last],
        window_s: [t[i0], t[last]],
        source: WindowSource::AutoFallback,
        z_alpha: z,
        crossover_time_s: cross.map(|i| t[i]),
    })
}

/// Least-squares slope and intercept of y against x.
fn linear_fit(x: &[f64], y: &[f64]) -> (f64, f64) {
    let n = x.len() as f64;
    let mx = x.iter().sum::<f64>() / n;
    let my = y.iter().sum::<f64>() / n;
    let sxy: f64 = x.iter().zip(y).map(|(a, b)| (a - mx) * (b - my)).sum();
    let sxx: f64 = x.iter().map(|a| (a - mx).powi(2)).sum();
    let slope = sxy / sxx;
    (slope, my - slope * mx)
}

/// Fits D_eff (total and per axis) and α_long to an MSD.
///
/// # Errors
/// As [`choose_fit_window`]; [`ErrorKind::TooLittleData`] with fewer than
/// 2 groups of particles; [`ErrorKind::InvalidOption`] for a bootstrap with
/// fewer than 100 resamples.
pub fn fit_diffusion(msd: &Msd, options: &FitOptions) -> Result<DiffusionFit> {
    if msd.groups.len() < 2 {
        return Err(ErrorKind::TooLittleData {
            path: None,
            what: "the number of particle groups for a confidence interval".into(),
            found: msd.groups.len(),
            needed: 2,
        }
        .into());
    }
    if let CiMethod::Bootstrap { resamples, .. } = options.ci {
        if resamples < 100 {
            return Err(Error::invalid_option(
                "bootstrap resamples",
                resamples,
                "at least 100",
            ));
        }
    }
    let selected: Vec<usize> = options
        .axes
        .clone()
        .unwrap_or_else(|| (0..msd.dims).collect());
    if selected.is_empty() || selected.iter().any(|&a| a >= msd.dims) {
        return Err(Error::invalid_option(
            "axes",
            format!("{selected:?}"),
            format!("distinct axes below the dimension {}", msd.dims),
        ));
    }
    let exponent = msd.local_exponent_of(&selected);
    let window = choose_fit_window(msd, &exponent, options)?;
    let [i0, i1] = window.lag_index;
    let t: Vec<f64> = msd.lag_times_s[i0..=i1].to_vec();
    let d = selected.len() as f64;
    let slope_d = |curve: &[f64], dims: f64| {
        linear_fit(&t, &curve[i0..=i1]).0 / (2.0 * dims) * NM2_PER_S_IN_M2_PER_S
    };
    let weights: Vec<usize> = msd.groups.iter().map(|g| g.particles).collect();
    let total = msd.axes_sum_nm2(&selected);
    let d_total = slope_d(&total, d);
    let group_total: Vec<f64> = msd
        .groups
        .iter()
        .map(|g| {
            let curve: Vec<f64> = (0..total.len())
                .map(|i| selected.iter().map(|&a| g.axes_nm2[a][i]).sum())
                .collect();
            slope_d(&curve, d)
        })
        .collect();
    let ci = interval(d_total, &group_total, &weights, options.ci);
    let mut axes = Vec::with_capacity(msd.dims);
    let mut axes_ci = Vec::with_capacity(msd.dims);
    for a in 0..msd.dims {
        let da = slope_d(&msd.time_averaged_axes_nm2[a], 1.0);
        let per_group: Vec<f64> = msd
            .groups
            .iter()
            .map(|g| slope_d(&g.axes_nm2[a], 1.0))
            .collect();
        axes.push(da);
        axes_ci.push(interval(da, &per_group, &weights, options.ci));
    }
    let ln_t: Vec<f64> = t.iter().map(|v| v.ln()).collect();
    let ln_m: Vec<f64> = total[i0..=i1].iter().map(|v| v.ln()).collect();
    let alpha_long = linear_fit(&ln_t, &ln_m).0;

    let mut warnings = Vec::new();
    let apparent = window.source == WindowSource::AutoFallback || (alpha_long - 1.0).abs() > 0.1;
    if window.source == WindowSource::AutoFallback {
        let last = exponent.alpha[i1];
        match window.crossover_time_s {
            Some(tc) => warnings.push(format!(
                "α(τ) comes within {:.2} standard errors of 1 only from τ = {tc:.3e} s, leaving fewer than {} admissible lags (α = {last:.3} ± {:.3} at τ = {:.3e} s): the run is too short for a diffusive fit window, and D_eff from the last {} lags is an apparent value",
                window.z_alpha, options.min_lags, exponent.se[i1], msd.lag_times_s[i1], i1 + 1 - i0
            )),
            None => warnings.push(format!(
                "α(τ) is not within {:.2} standard errors of 1 over the longest admissible lags (α = {last:.3} ± {:.3} at τ = {:.3e} s): the MSD has not reached the diffusive regime, and D_eff from the last {} lags is an apparent value",
                window.z_alpha, exponent.se[i1], msd.lag_times_s[i1], i1 + 1 - i0
            )),
        }
    } else if (alpha_long - 1.0).abs() > 0.1 {
        warnings.push(format!(
            "alpha_long = {alpha_long:.3} in the fit window: the MSD is not linear there, so D_eff is an apparent value"
        ));
    }
    if window.source == WindowSource::User {
        let limit = options.max_lag_fraction * msd.frames.saturating_sub(1) as f64;
        if msd.lags_frames[i1] as f64 > limit + 1e-9 {
            warnings.push(format!(
                "the fit window reaches lags beyond {} of the run, where few independent time origins remain",
                options.max_lag_fraction
            ));
        }
    }
    if msd.groups.len() < 10 {
        warnings.push(format!(
            "the 95 % interval rests on the spread of only {} particles/groups and is itself uncertain",
            msd.groups.len()
        ));
    }
    Ok(DiffusionFit {
        d_m2_per_s: d_total,
        ci95_m2_per_s: ci,
        axes_m2_per_s: axes,
        axes_ci95_m2_per_s: axes_ci,
        alpha_long,
        lags_in_window: i1 + 1 - i0,
        groups: msd.groups.len(),
        window,
        axes: selected,
        apparent,
        warnings,
    })
}

/// 95 % interval around `estimate` from the groups' values.
fn interval(estimate: f64, values: &[f64], weights: &[usize], method: CiMethod) -> [f64; 2] {
    match method {
        CiMethod::StudentT => {
            let (_, se) = weighted_mean_se(values, weights);
            let dof = values
                .iter()
                .filter(|v| v.is_finite())
                .count()
                .saturating_sub(1);
            let half = student_t_quantile(0.975, dof as f64) * se;
            [estimate - half, estimate + half]
        }
        CiMethod::Bootstrap { resamples, seed } => {
            let mut rng = SplitMix64(seed);
            let g = values.len() as u64;
            let mut means: Vec<f64> = (0..resamples)
                .map(|_| {
                    let (mut s, mut w) = (0.0, 0.0);
                    for _ in 0..g {
                        let k = (rng.next() % g) as usize;
                        s += values[k] * weights[k] as f64;
                        w += weights[k] as f64;
                    }
                    s / w
                })
                .collect();
            means.sort_by(f64::total_cmp);
            let q =
                |p: f64| means[((p * (resamples - 1) as f64).round() as usize).min(resamples - 1)];
            [q(0.025), q(0.975)]
        }
    }
}

/// splitmix64 (Steele, Lea & Flood 2014): a small portable generator for
/// the bootstrap, so a seed gives the same interval everywhere.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
}

/// Quantile of Student's t distribution with `dof` degrees of freedom at
/// probability `p` (0 < p < 1), by bisection on the CDF; NaN for `dof` ≤ 0
/// or p outside (0, 1).
pub fn student_t_quantile(p: f64, dof: f64) -> f64 {
    if !(dof > 0.0 && p > 0.0 && p < 1.0) {
        return f64::NAN;
    }
    if p < 0.5 {
        return -student_t_quantile(1.0 - p, dof);
    }
    let (mut lo, mut hi) = (0.0, 1.0);
    while student_t_cdf(hi, dof) < p && hi < 1e12 {
        hi *= 2.0;
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if student_t_cdf(mid, dof) < p {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo <= 1e-14 * hi {
            break;
        }
    }
    0.5 * (lo + hi)
}

/// CDF of Student's t: for t ≥ 0, 1 − I_x(ν/2, 1/2)/2 with x = ν/(ν + t²).
pub fn student_t_cdf(t: f64, dof: f64) -> f64 {
    let x = dof / (dof + t * t);
    let tail = 0.5 * regularized_incomplete_beta(x, 0.5 * dof, 0.5);
    if t >= 0.0 {
        1.0 - tail
    } else {
        tail
    }
}

/// Regularised incomplete beta function I_x(a, b), from its continued
/// fraction evaluated by the modified Lentz method (using the symmetry
/// I_x(a, b) = 1 − I_{1−x}(b, a) where the fraction converges slowly).
fn regularized_incomplete_beta(x: f64, a: f64, b: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let ln_front = ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b) + a * x.ln() + b * (1.0 - x).ln();
    if x < (a + 1.0) / (a + b + 2.0) {
        ln_front.exp() * beta_fraction(x, a, b) / a
    } else {
        1.0 - ln_front.exp() * beta_fraction(1.0 - x, b, a) / b
    }
}

fn beta_fraction(x: f64, a: f64, b: f64) -> f64 {
    const TINY: f64 = 1e-300;
    let mut c = 1.0;
    let mut d = 1.0 - (a + b) * x / (a + 1.0);
    if d.abs() < TINY {
        d = TINY;
    }
    d = 1.0 / d;
    let mut h = d;
    for m in 1..500 {
        let m = m as f64;
        // Even step of the fraction.
        let num = m * (b - m) * x / ((a + 2.0 * m - 1.0) * (a + 2.0 * m));
        d = 1.0 + num * d;
        d = if d.abs() < TINY { 1.0 / TINY } else { 1.0 / d };
        c = 1.0 + num / c;
        if c.abs() < TINY {
            c = TINY;
        }
        h *= d * c;
        // Odd step.
        let num = -(a + m) * (a + b + m) * x / ((a + 2.0 * m) * (a + 2.0 * m + 1.0));
        d = 1.0 + num * d;
        d = if d.abs() < TINY { 1.0 / TINY } else { 1.0 / d };
        c = 1.0 + num / c;
        if c.abs() < TINY {
            c = TINY;
        }
        let step = d * c;
        h *= step;
        if (step - 1.0).abs() < 1e-15 {
            break;
        }
    }
    h
}

/// ln Γ(x) for x > 0 by the Lanczos approximation (g = 7, 9 terms), with
/// the reflection formula below 1/2.
fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const C: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        let pi = std::f64::consts::PI;
        return (pi / (pi * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut sum = C[0];
    for (i, &c) in C.iter().enumerate().skip(1) {
        sum += c / (x + i as f64);
    }
    let t = x + G + 0.5;
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + sum.ln()
}

impl Report {
    /// A human-readable table of the report.
    pub fn to_table(&self) -> String {
        let mut s = String::new();
        use crate::format::{sig, with_interval};
        let e = |v: f64| sig(v, 4);
        let window = |p: [f64; 2]| format!("{}–{}", sig(p[0], 3), sig(p[1], 3));
        let _ = writeln!(
            s,
            "thicket analysis of {} (species '{}')",
            self.file, self.species
        );
        let mut row = |k: &str, v: String| {
            let _ = writeln!(s, "  {k:<26} {v}");
        };
        row("particles", self.particles.to_string());
        let planned = self
            .frames_planned
            .map_or(String::new(), |p| format!(" of {p} planned"));
        let trunc = if self.truncated { " (truncated)" } else { "" };
        row("frames", format!("{}{planned}{trunc}", self.frames));
        row("frame interval", format!("{} s", e(self.frame_interval_s)));
        row(
            "D0",
            match self.d0_m2_per_s {
                Some(d) => format!("{} m²/s ({})", e(d), self.d0_source),
                None => "unknown".into(),
            },
        );
        row(
            "D_eff is",
            format!("{}: {}", self.direction, self.direction_reason),
        );
        let flag = if self.apparent { "  APPARENT" } else { "" };
        row(
            "D_eff (95 % CI)",
            format!(
                "{} m²/s{flag}",
                with_interval(self.d_eff_m2_per_s, self.d_eff_ci95_m2_per_s)
            ),
        );
        if let (Some(r), Some(ci)) = (self.d_eff_over_d0, self.d_eff_over_d0_ci95) {
            row("D_eff/D0 (95 % CI)", with_interval(r, ci));
        }
        if let Some(tau) = self.tortuosity {
            row("tortuosity D0/D_eff", format!("{tau:.4}"));
        }
        let names = ["x", "y", "z"];
        for (a, (d, ci)) in self
            .d_eff_axes_m2_per_s
            .iter()
            .zip(&self.d_eff_axes_ci95_m2_per_s)
            .enumerate()
        {
            let bounded = if self.bounded_axes.get(a).copied().unwrap_or(false) {
                "  (bounded by walls: not a long-time diffusivity)"
            } else {
                ""
            };
            row(
                &format!("D_{}", names.get(a).unwrap_or(&"?")),
                format!("{} m²/s{bounded}", with_interval(*d, *ci)),
            );
        }
        for o in &self.other_directions {
            let ratio = match (o.d_over_d0, o.d_over_d0_ci95) {
                (Some(r), Some(ci)) => format!(", D/D0 = {}", with_interval(r, ci)),
                _ => String::new(),
            };
            let flag = if o.apparent { "  APPARENT" } else { "" };
            row(
                &format!("D {}", o.label),
                format!(
                    "{} m²/s{ratio}, α = {:.3}, window {} s{flag}",
                    with_interval(o.d_m2_per_s, o.ci95_m2_per_s),
                    o.alpha_long,
                    window(o.fit_window_s)
                ),
            );
        }
        row("alpha_long", format!("{:.4}", self.alpha_long));
        let source = match self.fit_window_source {
            WindowSource::Auto => "automatic",
            WindowSource::AutoFallback => "automatic, fallback",
            WindowSource::User => "given",
        };
        row(
            "fit window",
            format!(
                "{} s ({source}, {} lags)",
                window(self.fit_window_s),
                self.fit_lags
            ),
        );
        row(
            "crossover time",
            self.crossover_time_s
                .map_or_else(|| "not reached".into(), |t| format!("{} s", e(t))),
        );
        row(
            "fit quality",
            if self.apparent {
                format!("APPARENT value: the MSD is not diffusive over the window (α = {:.3}); lengthen the run", self.alpha_long)
            } else {
                format!(
                    "diffusive: α within its error of 1 over the window (α = {:.3})",
                    self.alpha_long
                )
            },
        );
        row("interval", self.ci_method.clone());
        if !self.model_table.is_empty() {
            let _ = writeln!(s, "models for this scenario (* = predicts this D_eff/D0):");
            let table = crate::model_table::ModelTable {
                entries: self.model_table.clone(),
            };
            for (line, entry) in table.lines().iter().zip(&self.model_table) {
                let mark = if entry.compares_with_d_eff { '*' } else { ' ' };
                let _ = writeln!(s, "  {mark} {line}");
            }
        }
        if !self.warnings.is_empty() {
            let _ = writeln!(s, "warnings:");
            for w in &self.warnings {
                let _ = writeln!(s, "  - {w}");
            }
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn t_quantiles_match_tables() {
        // Standard two-sided 95 % t values (any statistics table, from memory).
        for (dof, expected) in [
            (1.0, 12.706),
            (2.0, 4.303),
            (5.0, 2.571),
            (10.0, 2.228),
            (30.0, 2.042),
            (1e6, 1.960),
        ] {
            let q = student_t_quantile(0.975, dof);
            assert!((q - expected).abs() < 1e-3, "dof {dof}: {q} vs {expected}");
        }
        // Exact identity: for one degree of freedom t is Cauchy, quantile tan(π(p − 1/2)).
        let p: f64 = 0.9;
        let exact = (std::f64::consts::PI * (p - 0.5)).tan();
        assert!((student_t_quantile(p, 1.0) - exact).abs() < 1e-9);
    }

    #[test]
    fn ln_gamma_matches_factorials() {
        // Γ(n) = (n − 1)!, Γ(1/2) = √π: exact identities.
        assert!((ln_gamma(5.0) - 24f64.ln()).abs() < 1e-12);
        assert!((ln_gamma(0.5) - std::f64::consts::PI.sqrt().ln()).abs() < 1e-12);
    }
}
