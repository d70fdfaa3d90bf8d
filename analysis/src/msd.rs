//! Mean squared displacements and related displacement statistics.
//!
//! For each particle and axis the time-averaged MSD over all origins,
//!
//! ```text
//! MSD_a(m) = 1/(F − m) · Σ_{k=0}^{F−m−1} (x_a(k+m) − x_a(k))²,
//! ```
//!
//! is evaluated at the lags of a log-spaced grid ([`lag_grid`]), then
//! averaged over particles (every particle has the same F − m origins, so
//! the ensemble mean weights particles equally). Particles are also pooled
//! into groups (particle p into group p mod G) whose mean curves carry the
//! spread between independent particles, from which
//! [`crate::estimators`] builds confidence intervals.
//!
//! Two ways to evaluate a series, chosen per run by a cost estimate
//! ([`MsdMethod::Auto`]):
//! - directly, Σ (F − m) operations over the lags asked for;
//! - by FFT, with the usual decomposition Σ(x_{k+m} − x_k)² = S1(m) − 2·S2(m),
//!   S1 from prefix sums of squares and the autocorrelation S2 from a
//!   zero-padded FFT, O(F log F) for all lags at once. To keep the
//!   cancellation in S1 − 2·S2 small the series is first reduced by its
//!   end-to-end line and its mean, and the line's contribution
//!   (2·c·m·Σ Δy + (F − m)·c²·m²) is added back exactly. Two real series
//!   share one complex transform.
//!
//! Everything is accumulated one block of particles at a time
//! ([`MsdAccumulator::add_block`]), so memory grows with the number of lags
//! and groups, not with the file.

use std::sync::Arc;

use ndarray::s;
use rustfft::num_complex::Complex;
use rustfft::{Fft, FftPlanner};
use serde::Serialize;

use crate::error::{Error, Result};
use crate::read::{ParticleBlock, SpeciesReader, DEFAULT_MEMORY_BUDGET_BYTES};

/// How a time-averaged MSD is evaluated.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Default)]
pub enum MsdMethod {
    /// Pick the cheaper of [`MsdMethod::Direct`] and [`MsdMethod::Fft`]
    /// from the frame count and the lags asked for.
    #[default]
    Auto,
    /// Sum the squared displacements at each lag.
    Direct,
    /// Use the FFT decomposition (all lags in O(F log F)).
    Fft,
}

/// Options of the MSD computation.
#[derive(Debug, Clone, PartialEq)]
pub struct MsdOptions {
    /// Evaluation method. By default, [`MsdMethod::Auto`].
    pub method: MsdMethod,
    /// Points per decade of the log-spaced lag grid. By default, 10.
    pub lags_per_decade: usize,
    /// Series with at most this many frames get every lag. By default, 100.
    pub all_lags_up_to_frames: usize,
    /// Largest number of particle groups kept for the spread between
    /// particles (each particle is its own group when N is at most this).
    /// By default, 64.
    pub max_groups: usize,
    /// Lags (in frames) at which van Hove histograms and the non-Gaussian
    /// parameter are computed. By default, none.
    pub van_hove_lags: Vec<usize>,
    /// Bins of each van Hove histogram. By default, 101.
    pub van_hove_bins: usize,
    /// Memory budget for one block of positions in bytes. By default,
    /// [`DEFAULT_MEMORY_BUDGET_BYTES`].
    pub memory_budget_bytes: usize,
    /// Subtract the square of the ensemble-mean displacement at each lag
    /// from every MSD curve, leaving the variance of the displacement about
    /// the mean drift (under a force or a flow the MSD grows ballistically
    /// with the drift; its variance grows like 2Dτ, D the dispersion
    /// coefficient). By default, false.
    pub remove_mean_drift: bool,
}

impl Default for MsdOptions {
    fn default() -> Self {
        MsdOptions {
            method: MsdMethod::Auto,
            lags_per_decade: 10,
            all_lags_up_to_frames: 100,
            max_groups: 64,
            van_hove_lags: Vec::new(),
            van_hove_bins: 101,
            memory_budget_bytes: DEFAULT_MEMORY_BUDGET_BYTES,
            remove_mean_drift: false,
        }
    }
}

/// Mean MSD curves of one group of particles.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MsdGroup {
    /// Particles in the group.
    pub particles: usize,
    /// Group mean of the time-averaged MSD, `[axis][lag]`, nm².
    pub axes_nm2: Vec<Vec<f64>>,
}

/// Histogram of one-axis displacements at one lag (the self part of the van
/// Hove function, G_s(x, τ)).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct VanHove {
    /// The lag in frames.
    pub lag_frames: usize,
    /// The lag in s.
    pub lag_time_s: f64,
    /// Bin edges in nm (bins + 1 values, symmetric about 0; the range is
    /// ±8 RMS displacements of the first block of particles).
    pub bin_edges_nm: Vec<f64>,
    /// Counts per axis and bin, `[axis][bin]`.
    pub counts: Vec<Vec<u64>>,
    /// Displacements per axis that fell outside the bins.
    pub outside: Vec<u64>,
    /// Displacements per axis counted (particles × origins).
    pub samples: u64,
}

impl VanHove {
    /// Probability density per bin (1/nm) for `axis`, normalised over all
    /// samples including those outside the bins.
    pub fn density_per_nm(&self, axis: usize) -> Vec<f64> {
        let Some(counts) = self.counts.get(axis) else {
            return Vec::new();
        };
        counts
            .iter()
            .zip(self.bin_edges_nm.windows(2))
            .map(|(&c, w)| c as f64 / (self.samples as f64 * (w[1] - w[0])))
            .collect()
    }
}

/// The non-Gaussian parameter at one lag.
///
/// In d dimensions α2 = d·⟨Δr⁴⟩ / ((d + 2)·⟨Δr²⟩²) − 1, which is
/// 3⟨Δr⁴⟩/(5⟨Δr²⟩²) − 1 in 3D; per axis (d = 1) it is
/// ⟨Δx⁴⟩/(3⟨Δx²⟩²) − 1. It vanishes for Gaussian displacements
/// (Rahman 1964).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NonGaussian {
    /// The lag in frames.
    pub lag_frames: usize,
    /// The lag in s.
    pub lag_time_s: f64,
    /// α2 of the full displacement in the file's dimension.
    pub alpha2: f64,
    /// α2 of each axis.
    pub alpha2_axes: Vec<f64>,
    /// Displacements counted (particles × origins).
    pub samples: u64,
}

/// The MSD of one species.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Msd {
    /// Frames of each series F.
    pub frames: usize,
    /// Particles averaged over.
    pub particles: usize,
    /// Spatial dimension d.
    pub dims: usize,
    /// Interval between frames in s.
    pub frame_interval_s: f64,
    /// Lags in frames (increasing, from 1).
    pub lags_frames: Vec<usize>,
    /// Lags in s.
    pub lag_times_s: Vec<f64>,
    /// Time origins per particle at each lag, F − m.
    pub origins: Vec<usize>,
    /// Ensemble mean of the time-averaged MSD, `[axis][lag]`, nm².
    pub time_averaged_axes_nm2: Vec<Vec<f64>>,
    /// Ensemble MSD from frame 0 only, `[axis][lag]`, nm².
    pub origin_axes_nm2: Vec<Vec<f64>>,
    /// Standard error over particles of the total MSD from frame 0, nm².
    pub origin_total_se_nm2: Vec<f64>,
    /// Group mean curves (particle p in group p mod G).
    pub groups: Vec<MsdGroup>,
    /// The method that was used.
    pub method: MsdMethod,
    /// Van Hove histograms at the lags asked for.
    pub van_hove: Vec<VanHove>,
    /// Non-Gaussian parameter at the lags asked for.
    pub non_gaussian: Vec<NonGaussian>,
    /// Suspicious frame-to-frame jumps seen by the reader (see
    /// [`ParticleBlock::suspicious_jumps`]).
    pub suspicious_jumps: usize,
    /// Ensemble mean of the time-averaged displacement, `[axis][lag]`, nm:
    /// the drift (zero on average without a force or a flow).
    pub mean_displacement_axes_nm: Vec<Vec<f64>>,
    /// True when the MSD curves are variances about that mean drift.
    pub drift_removed: bool,
}

/// Local exponent α(τ) = d ln MSD / d ln τ on the lag grid.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LocalExponent {
    /// Lags in s.
    pub lag_times_s: Vec<f64>,
    /// α at each lag: centred differences over the neighbouring grid points,
    /// one-sided at the two ends; NaN where the MSD is not positive.
    pub alpha: Vec<f64>,
    /// Standard error of α from the spread between particle groups; NaN with
    /// fewer than 2 groups.
    pub se: Vec<f64>,
}

impl Msd {
    /// Total time-averaged MSD (sum over axes) at each lag, nm².
    pub fn total_nm2(&self) -> Vec<f64> {
        sum_axes(&self.time_averaged_axes_nm2)
    }

    /// Total MSD from frame 0 at each lag, nm².
    pub fn origin_total_nm2(&self) -> Vec<f64> {
        sum_axes(&self.origin_axes_nm2)
    }

    /// Time-averaged MSD summed over `axes` at each lag, nm².
    pub fn axes_sum_nm2(&self, axes: &[usize]) -> Vec<f64> {
        sum_selected(&self.time_averaged_axes_nm2, axes)
    }

    /// MSD from frame 0 summed over `axes` at each lag, nm².
    pub fn origin_axes_sum_nm2(&self, axes: &[usize]) -> Vec<f64> {
        sum_selected(&self.origin_axes_nm2, axes)
    }

    /// Local exponent of the total time-averaged MSD, with its standard error
    /// from the spread between groups.
    pub fn local_exponent(&self) -> LocalExponent {
        self.local_exponent_of(&(0..self.dims).collect::<Vec<_>>())
    }

    /// Local exponent of the MSD summed over `axes` (e.g. the lateral axes
    /// of a slit), with its standard error from the spread between groups.
    pub fn local_exponent_of(&self, axes: &[usize]) -> LocalExponent {
        let alpha = log_derivative(&self.lag_times_s, &self.axes_sum_nm2(axes));
        let per_group: Vec<Vec<f64>> = self
            .groups
            .iter()
            .map(|g| log_derivative(&self.lag_times_s, &sum_selected(&g.axes_nm2, axes)))
            .collect();
        let weights: Vec<usize> = self.groups.iter().map(|g| g.particles).collect();
        let se = (0..alpha.len())
            .map(|i| {
                let values: Vec<f64> = per_group.iter().map(|a| a[i]).collect();
                weighted_mean_se(&values, &weights).1
            })
            .collect();
        LocalExponent {
            lag_times_s: self.lag_times_s.clone(),
            alpha,
            se,
        }
    }
}

fn sum_selected(curves: &[Vec<f64>], axes: &[usize]) -> Vec<f64> {
    let n = curves.first().map_or(0, Vec::len);
    (0..n)
        .map(|i| axes.iter().map(|&a| curves[a][i]).sum())
        .collect()
}

fn sum_axes(axes: &[Vec<f64>]) -> Vec<f64> {
    let n = axes.first().map_or(0, Vec::len);
    (0..n).map(|i| axes.iter().map(|a| a[i]).sum()).collect()
}

/// d ln y / d ln t on a grid: centred differences over the neighbours,
/// one-sided at the ends; NaN where y is not positive.
pub fn log_derivative(t: &[f64], y: &[f64]) -> Vec<f64> {
    let n = t.len().min(y.len());
    let ln = |v: f64| if v > 0.0 { v.ln() } else { f64::NAN };
    (0..n)
        .map(|i| {
            if n < 2 {
                return f64::NAN;
            }
            let (a, b) = if i == 0 {
                (0, 1)
            } else if i == n - 1 {
                (n - 2, n - 1)
            } else {
                (i - 1, i + 1)
            };
            (ln(y[b]) - ln(y[a])) / (t[b].ln() - t[a].ln())
        })
        .collect()
}

/// Weighted mean of per-group values (weights = particles per group) and its
/// standard error from their spread, SE² = Σ n_g (v_g − v̄)² / ((G − 1) N),
/// which is s²/G for equal groups. Non-finite values are skipped; the SE is
/// NaN with fewer than 2 finite groups.
pub(crate) fn weighted_mean_se(values: &[f64], weights: &[usize]) -> (f64, f64) {
    let pairs: Vec<(f64, f64)> = values
        .iter()
        .zip(weights)
        .filter(|(v, _)| v.is_finite())
        .map(|(&v, &w)| (v, w as f64))
        .collect();
    let total: f64 = pairs.iter().map(|p| p.1).sum();
    if pairs.is_empty() || total <= 0.0 {
        return (f64::NAN, f64::NAN);
    }
    let mean = pairs.iter().map(|(v, w)| v * w).sum::<f64>() / total;
    if pairs.len() < 2 {
        return (mean, f64::NAN);
    }
    let ss: f64 = pairs.iter().map(|(v, w)| w * (v - mean).powi(2)).sum();
    (mean, (ss / ((pairs.len() - 1) as f64 * total)).sqrt())
}

/// The lag grid (in frames) for series of `frames` frames: every lag
/// 1..F−1 when F ≤ `all_lags_up_to_frames`, otherwise the distinct values of
/// round(10^(k / `lags_per_decade`)) up to F − 1, with F − 1 itself last.
pub fn lag_grid(frames: usize, lags_per_decade: usize, all_lags_up_to_frames: usize) -> Vec<usize> {
    if frames < 2 {
        return Vec::new();
    }
    let max_lag = frames - 1;
    if frames <= all_lags_up_to_frames || lags_per_decade == 0 {
        return (1..=max_lag).collect();
    }
    let mut lags = Vec::new();
    for k in 0.. {
        let m = 10f64.powf(k as f64 / lags_per_decade as f64).round() as usize;
        if m > max_lag {
            break;
        }
        if lags.last() != Some(&m) {
            lags.push(m);
        }
    }
    if lags.last() != Some(&max_lag) {
        lags.push(max_lag);
    }
    lags
}

/// Time-averaged MSD of one series at `lags`, by `method`.
///
/// # Errors
/// [`crate::error::ErrorKind::InvalidOption`] if a lag is 0 or not below the
/// series length.
pub fn time_averaged_msd(series: &[f64], lags: &[usize], method: MsdMethod) -> Result<Vec<f64>> {
    check_lags(series.len(), lags)?;
    let mut out = vec![0.0; lags.len()];
    match resolve_method(method, series.len(), lags) {
        MsdMethod::Fft => {
            let mut engine = FftEngine::new(series.len());
            engine.pair(series, None, lags, &mut out, &mut []);
        }
        _ => direct_msd(series, lags, &mut out),
    }
    Ok(out)
}

fn check_lags(frames: usize, lags: &[usize]) -> Result<()> {
    if let Some(&m) = lags.iter().find(|&&m| m == 0 || m >= frames) {
        return Err(Error::invalid_option(
            "lag (frames)",
            m,
            format!(
                "1 to {} for a series of {frames} frames",
                frames.saturating_sub(1)
            ),
        ));
    }
    Ok(())
}

/// Picks Direct or Fft for `Auto`: the direct sum costs Σ (F − m) over the
/// lags, the FFT about 3·P·log2 P per series in the same units (one forward
/// and one inverse complex transform of P ≥ 2F points, shared by two series;
/// the factor 3 was measured in a release build, F = 10³–10⁵).
fn resolve_method(method: MsdMethod, frames: usize, lags: &[usize]) -> MsdMethod {
    match method {
        MsdMethod::Auto => {
            let direct: f64 = lags.iter().map(|&m| (frames - m) as f64).sum();
            let p = fft_size(frames) as f64;
            if frames > 32 && 3.0 * p * p.log2() < direct {
                MsdMethod::Fft
            } else {
                MsdMethod::Direct
            }
        }
        m => m,
    }
}

fn fft_size(frames: usize) -> usize {
    (2 * frames).next_power_of_two()
}

fn direct_msd(x: &[f64], lags: &[usize], out: &mut [f64]) {
    let f = x.len();
    for (o, &m) in out.iter_mut().zip(lags) {
        let sum: f64 = x[m..]
            .iter()
            .zip(&x[..f - m])
            .map(|(b, a)| (b - a) * (b - a))
            .sum();
        *o = sum / (f - m) as f64;
    }
}

/// A series reduced for the FFT path: y = x − x0 − c·k − mean, with prefix
/// sums of y and y² (so S1 and the line's correction are exact sums).
#[derive(Debug, Default)]
struct Reduced {
    slope: f64,
    rms: f64,
    prefix: Vec<f64>,
    prefix_sq: Vec<f64>,
    y: Vec<f64>,
}

impl Reduced {
    fn fill(&mut self, x: &[f64]) {
        let f = x.len();
        self.slope = (x[f - 1] - x[0]) / (f - 1) as f64;
        self.y.clear();
        self.y.extend(
            x.iter()
                .enumerate()
                .map(|(k, &v)| (v - x[0]) - self.slope * k as f64),
        );
        let mean = self.y.iter().sum::<f64>() / f as f64;
        self.y.iter_mut().for_each(|v| *v -= mean);
        self.prefix.clear();
        self.prefix_sq.clear();
        self.prefix.push(0.0);
        self.prefix_sq.push(0.0);
        let (mut s, mut s2) = (0.0, 0.0);
        for &v in &self.y {
            s += v;
            s2 += v * v;
            self.prefix.push(s);
            self.prefix_sq.push(s2);
        }
        self.rms = (s2 / f as f64).sqrt();
    }

    /// MSD at lag m given the autocorrelation of y/rms at m.
    fn msd(&self, m: usize, autocorr_scaled: f64) -> f64 {
        let f = self.y.len();
        let p = &self.prefix;
        let p2 = &self.prefix_sq;
        let s1 = p2[f - m] + (p2[f] - p2[m]);
        let s2 = autocorr_scaled * self.rms * self.rms;
        let dy = (p[f] - p[m]) - p[f - m];
        let mf = m as f64;
        let total = (s1 - 2.0 * s2)
            + 2.0 * self.slope * mf * dy
            + (f - m) as f64 * (self.slope * mf).powi(2);
        total.max(0.0) / (f - m) as f64
    }
}

/// FFT plans and buffers for series of one length.
struct FftEngine {
    frames: usize,
    forward: Arc<dyn Fft<f64>>,
    inverse: Arc<dyn Fft<f64>>,
    buf: Vec<Complex<f64>>,
    scratch: Vec<Complex<f64>>,
    a: Reduced,
    b: Reduced,
}

impl FftEngine {
    fn new(frames: usize) -> Self {
        let size = fft_size(frames);
        let mut planner = FftPlanner::new();
        let forward = planner.plan_fft_forward(size);
        let inverse = planner.plan_fft_inverse(size);
        let scratch_len = forward
            .get_inplace_scratch_len()
            .max(inverse.get_inplace_scratch_len());
        FftEngine {
            frames,
            forward,
            inverse,
            buf: vec![Complex::new(0.0, 0.0); size],
            scratch: vec![Complex::new(0.0, 0.0); scratch_len],
            a: Reduced::default(),
            b: Reduced::default(),
        }
    }

    /// MSD of series `a` (and `b`, if given) at `lags`, one complex transform
    /// for both: z = a + i·b, whose spectrum separates into the two real
    /// spectra by conjugate symmetry.
    fn pair(
        &mut self,
        a: &[f64],
        b: Option<&[f64]>,
        lags: &[usize],
        out_a: &mut [f64],
        out_b: &mut [f64],
    ) {
        let f = self.frames;
        let size = self.buf.len();
        self.a.fill(a);
        if let Some(b) = b {
            self.b.fill(b);
        }
        // Scale each series to unit RMS so neither drowns the other's rounding.
        let inv = |r: f64| if r > 0.0 { 1.0 / r } else { 0.0 };
        let (sa, sb) = (
            inv(self.a.rms),
            if b.is_some() { inv(self.b.rms) } else { 0.0 },
        );
        for k in 0..size {
            self.buf[k] = if k < f {
                let im = if b.is_some() { self.b.y[k] * sb } else { 0.0 };
                Complex::new(self.a.y[k] * sa, im)
            } else {
                Complex::new(0.0, 0.0)
            };
        }
        self.forward
            .process_with_scratch(&mut self.buf, &mut self.scratch);
        for k in 0..=size / 2 {
            let zk = self.buf[k];
            let zc = self.buf[(size - k) % size].conj();
            let spec_a = (zk + zc) * 0.5;
            let spec_b = (zk - zc) * Complex::new(0.0, -0.5);
            let w = Complex::new(spec_a.norm_sqr(), spec_b.norm_sqr());
            self.buf[k] = w;
            self.buf[(size - k) % size] = w;
        }
        self.inverse
            .process_with_scratch(&mut self.buf, &mut self.scratch);
        let norm = 1.0 / size as f64;
        for (i, &m) in lags.iter().enumerate() {
            out_a[i] = self.a.msd(m, self.buf[m].re * norm);
            if b.is_some() {
                out_b[i] = self.b.msd(m, self.buf[m].im * norm);
            }
        }
    }
}

impl std::fmt::Debug for FftEngine {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("FftEngine")
            .field("frames", &self.frames)
            .field("size", &self.buf.len())
            .finish()
    }
}

/// Running sums for the van Hove histogram and α2 at one lag.
#[derive(Debug)]
struct DisplacementStats {
    lag: usize,
    half_range_nm: Option<f64>,
    bins: usize,
    counts: Vec<Vec<u64>>,
    outside: Vec<u64>,
    samples: u64,
    r2: f64,
    r4: f64,
    ax2: Vec<f64>,
    ax4: Vec<f64>,
}

/// Streaming accumulator of MSD statistics, fed one block of particles at a
/// time.
#[derive(Debug)]
pub struct MsdAccumulator {
    frames: usize,
    dims: usize,
    frame_interval_s: f64,
    lags: Vec<usize>,
    method: MsdMethod,
    engine: Option<FftEngine>,
    group_sums: Vec<Vec<Vec<f64>>>,
    group_counts: Vec<usize>,
    origin_sums: Vec<Vec<f64>>,
    origin_total_sq: Vec<f64>,
    displacement: Vec<DisplacementStats>,
    particles: usize,
    suspicious_jumps: usize,
    series: Vec<Vec<f64>>,
    ta: Vec<Vec<f64>>,
    /// Sums over particles of the time-averaged displacement, `[axis][lag]`.
    drift_sums: Vec<Vec<f64>>,
    /// The same per group, `[group][axis][lag]`.
    group_drift_sums: Vec<Vec<Vec<f64>>>,
    /// Sums over particles of the displacement from frame 0, `[axis][lag]`.
    origin_drift_sums: Vec<Vec<f64>>,
    remove_mean_drift: bool,
}

impl MsdAccumulator {
    /// Prepares to accumulate series of `frames` frames in `dims` dimensions
    /// for `particles` particles (which sets the number of groups).
    ///
    /// # Errors
    /// [`crate::error::ErrorKind::InvalidOption`] if `frames` < 2, `dims` is
    /// not 1–3, the frame interval is not positive, `lags_per_decade`,
    /// `max_groups` or `van_hove_bins` is 0, or a van Hove lag is outside 1..F−1.
    pub fn new(
        frames: usize,
        particles: usize,
        dims: usize,
        frame_interval_s: f64,
        options: &MsdOptions,
    ) -> Result<Self> {
        if frames < 2 {
            return Err(Error::invalid_option("frames", frames, "at least 2"));
        }
        if !(1..=3).contains(&dims) {
            return Err(Error::invalid_option("dims", dims, "1, 2 or 3"));
        }
        if !(frame_interval_s.is_finite() && frame_interval_s > 0.0) {
            return Err(Error::invalid_option(
                "frame_interval_s",
                frame_interval_s,
                "a finite positive time in s",
            ));
        }
        if options.lags_per_decade == 0 {
            return Err(Error::invalid_option("lags_per_decade", 0, "at least 1"));
        }
        if options.max_groups == 0 {
            return Err(Error::invalid_option("max_groups", 0, "at least 1"));
        }
        if options.van_hove_bins == 0 {
            return Err(Error::invalid_option("van_hove_bins", 0, "at least 1"));
        }
        check_lags(frames, &options.van_hove_lags)?;
        let lags = lag_grid(
            frames,
            options.lags_per_decade,
            options.all_lags_up_to_frames,
        );
        let method = resolve_method(options.method, frames, &lags);
        let groups = particles.clamp(1, options.max_groups);
        let l = lags.len();
        Ok(MsdAccumulator {
            frames,
            dims,
            frame_interval_s,
            engine: (method == MsdMethod::Fft).then(|| FftEngine::new(frames)),
            method,
            group_sums: vec![vec![vec![0.0; l]; dims]; groups],
            group_counts: vec![0; groups],
            origin_sums: vec![vec![0.0; l]; dims],
            origin_total_sq: vec![0.0; l],
            displacement: options
                .van_hove_lags
                .iter()
                .map(|&lag| DisplacementStats {
                    lag,
                    half_range_nm: None,
                    bins: options.van_hove_bins,
                    counts: vec![vec![0; options.van_hove_bins]; dims],
                    outside: vec![0; dims],
                    samples: 0,
                    r2: 0.0,
                    r4: 0.0,
                    ax2: vec![0.0; dims],
                    ax4: vec![0.0; dims],
                })
                .collect(),
            lags,
            particles: 0,
            suspicious_jumps: 0,
            series: vec![Vec::with_capacity(frames); dims],
            ta: vec![vec![0.0; l]; dims],
            drift_sums: vec![vec![0.0; l]; dims],
            group_drift_sums: vec![vec![vec![0.0; l]; dims]; groups],
            origin_drift_sums: vec![vec![0.0; l]; dims],
            remove_mean_drift: options.remove_mean_drift,
        })
    }

    /// The lag grid in frames.
    pub fn lags(&self) -> &[usize] {
        &self.lags
    }

    /// The evaluation method in use ([`MsdMethod::Auto`] resolved).
    pub fn method(&self) -> MsdMethod {
        self.method
    }

    /// Adds a block of particles from [`SpeciesReader::blocks`].
    ///
    /// # Errors
    /// [`crate::error::ErrorKind::InvalidOption`] if the block's frame count or
    /// dimension differs from the accumulator's.
    pub fn add_block(&mut self, block: &ParticleBlock) -> Result<()> {
        let shape = block.positions_nm.shape();
        if shape[0] != self.frames || shape[2] != self.dims {
            return Err(Error::invalid_option(
                "block shape",
                format!("{shape:?}"),
                format!("[{}, n, {}]", self.frames, self.dims),
            ));
        }
        self.suspicious_jumps += block.suspicious_jumps;
        self.init_van_hove_ranges(block);
        for p in 0..shape[1] {
            for a in 0..self.dims {
                let column = block.positions_nm.slice(s![.., p, a]);
                self.series[a].clear();
                self.series[a].extend(column.iter());
            }
            self.add_current(block.first_particle + p);
        }
        Ok(())
    }

    /// Adds one particle given its series per axis (each of F frames, in nm);
    /// `index` is its index in the species, which sets its group.
    ///
    /// # Errors
    /// [`crate::error::ErrorKind::InvalidOption`] if the number of axes or
    /// the length of a series differs from the accumulator's.
    pub fn add_particle(&mut self, index: usize, axes: &[&[f64]]) -> Result<()> {
        if axes.len() != self.dims || axes.iter().any(|s| s.len() != self.frames) {
            return Err(Error::invalid_option(
                "particle series",
                format!(
                    "{} axes of lengths {:?}",
                    axes.len(),
                    axes.iter().map(|s| s.len()).collect::<Vec<_>>()
                ),
                format!("{} axes of {} frames", self.dims, self.frames),
            ));
        }
        let block = ParticleBlock {
            first_particle: index,
            positions_nm: ndarray::Array3::from_shape_fn(
                (self.frames, 1, self.dims),
                |(f, _, a)| axes[a][f],
            ),
            suspicious_jumps: 0,
        };
        self.add_block(&block)
    }

    /// Sets each van Hove range from the first data seen: ±8 RMS one-axis
    /// displacements at that lag (1 nm if all displacements are zero).
    fn init_van_hove_ranges(&mut self, block: &ParticleBlock) {
        let x = &block.positions_nm;
        for st in self
            .displacement
            .iter_mut()
            .filter(|s| s.half_range_nm.is_none())
        {
            let m = st.lag;
            let (mut sum, mut n) = (0.0, 0usize);
            for p in 0..x.shape()[1] {
                for a in 0..self.dims {
                    for k in 0..self.frames - m {
                        sum += (x[[k + m, p, a]] - x[[k, p, a]]).powi(2);
                        n += 1;
                    }
                }
            }
            let rms = (sum / n.max(1) as f64).sqrt();
            st.half_range_nm = Some(if rms > 0.0 { 8.0 * rms } else { 1.0 });
        }
    }

    /// Accumulates the particle whose series are in `self.series`.
    fn add_current(&mut self, index: usize) {
        let g = index % self.group_counts.len();
        let dims = self.dims;
        // Time-averaged MSD per axis.
        match self.engine.as_mut() {
            Some(engine) => {
                let mut a = 0;
                while a < dims {
                    let (lo, hi) = self.ta.split_at_mut(a + 1);
                    if a + 1 < dims {
                        engine.pair(
                            &self.series[a],
                            Some(&self.series[a + 1]),
                            &self.lags,
                            &mut lo[a],
                            &mut hi[0],
                        );
                        a += 2;
                    } else {
                        engine.pair(&self.series[a], None, &self.lags, &mut lo[a], &mut []);
                        a += 1;
                    }
                }
            }
            None => {
                for a in 0..dims {
                    direct_msd(&self.series[a], &self.lags, &mut self.ta[a]);
                }
            }
        }
        for a in 0..dims {
            for (s, v) in self.group_sums[g][a].iter_mut().zip(&self.ta[a]) {
                *s += v;
            }
        }
        self.group_counts[g] += 1;
        // Mean displacement over origins at each lag, from prefix sums: (P[F] − P[m] − P[F − m])/(F − m).
        let f = self.frames;
        for a in 0..dims {
            let x = &self.series[a];
            let mut prefix = Vec::with_capacity(f + 1);
            prefix.push(0.0);
            for v in x {
                prefix.push(prefix.last().copied().unwrap_or(0.0) + v);
            }
            for (i, &m) in self.lags.iter().enumerate() {
                let mean = (prefix[f] - prefix[m] - prefix[f - m]) / (f - m) as f64;
                self.drift_sums[a][i] += mean;
                self.group_drift_sums[g][a][i] += mean;
                self.origin_drift_sums[a][i] += x[m] - x[0];
            }
        }
        // MSD from the first frame.
        for (i, &m) in self.lags.iter().enumerate() {
            let mut r2 = 0.0;
            for a in 0..dims {
                let d2 = (self.series[a][m] - self.series[a][0]).powi(2);
                self.origin_sums[a][i] += d2;
                r2 += d2;
            }
            self.origin_total_sq[i] += r2 * r2;
        }
        // Van Hove and non-Gaussian sums.
        for st in &mut self.displacement {
            let m = st.lag;
            let h = st.half_range_nm.unwrap_or(1.0);
            let width = 2.0 * h / st.bins as f64;
            for k in 0..self.frames - m {
                let mut r2 = 0.0;
                for a in 0..dims {
                    let d = self.series[a][k + m] - self.series[a][k];
                    let d2 = d * d;
                    r2 += d2;
                    st.ax2[a] += d2;
                    st.ax4[a] += d2 * d2;
                    let bin = ((d + h) / width).floor();
                    if bin >= 0.0 && (bin as usize) < st.bins {
                        st.counts[a][bin as usize] += 1;
                    } else {
                        st.outside[a] += 1;
                    }
                }
                st.r2 += r2;
                st.r4 += r2 * r2;
            }
            st.samples += (self.frames - m) as u64;
        }
        self.particles += 1;
    }

    /// Finishes the accumulation.
    ///
    /// # Errors
    /// [`crate::error::ErrorKind::InvalidOption`] if no particle was added.
    pub fn finish(self) -> Result<Msd> {
        if self.particles == 0 {
            return Err(Error::invalid_option("particles added", 0, "at least 1"));
        }
        let n = self.particles as f64;
        let l = self.lags.len();
        let dims = self.dims;
        let dt = self.frame_interval_s;
        let mut ta = vec![vec![0.0; l]; dims];
        for g in &self.group_sums {
            for a in 0..dims {
                for i in 0..l {
                    ta[a][i] += g[a][i];
                }
            }
        }
        ta.iter_mut().flatten().for_each(|v| *v /= n);
        let mean_displacement: Vec<Vec<f64>> = self
            .drift_sums
            .iter()
            .map(|axis| axis.iter().map(|v| v / n).collect())
            .collect();
        let origin_mean: Vec<Vec<f64>> = self
            .origin_drift_sums
            .iter()
            .map(|axis| axis.iter().map(|v| v / n).collect())
            .collect();
        // Variance about the drift: each curve less the square of its own particles' mean displacement
        // (a group's, for a group curve), so that the large cross term 2⟨u⟩τ²·δu of each set's own
        // mean-velocity fluctuation cancels within the set (a fixed ensemble mean² would leave it in).
        let remove = self.remove_mean_drift;
        if remove {
            for a in 0..dims {
                for i in 0..l {
                    ta[a][i] -= mean_displacement[a][i] * mean_displacement[a][i];
                }
            }
        }
        let groups = self
            .group_sums
            .iter()
            .zip(&self.group_drift_sums)
            .zip(&self.group_counts)
            .filter(|(_, &c)| c > 0)
            .map(|((sums, drifts), &c)| MsdGroup {
                particles: c,
                axes_nm2: sums
                    .iter()
                    .zip(drifts)
                    .map(|(axis, drift)| {
                        axis.iter()
                            .zip(drift)
                            .map(|(v, d)| {
                                let m = if remove { d / c as f64 } else { 0.0 };
                                v / c as f64 - m * m
                            })
                            .collect()
                    })
                    .collect(),
            })
            .collect();
        let origin_axes: Vec<Vec<f64>> = self
            .origin_sums
            .iter()
            .enumerate()
            .map(|(a, axis)| {
                axis.iter()
                    .enumerate()
                    .map(|(i, v)| {
                        let m = if self.remove_mean_drift {
                            origin_mean[a][i]
                        } else {
                            0.0
                        };
                        v / n - m * m
                    })
                    .collect()
            })
            .collect();
        let origin_total = sum_axes(&origin_axes);
        let origin_total_se_nm2 = origin_total
            .iter()
            .zip(&self.origin_total_sq)
            .map(|(&mean, &sq)| {
                if self.particles < 2 {
                    return f64::NAN;
                }
                let var = (sq / n - mean * mean).max(0.0) * n / (n - 1.0);
                (var / n).sqrt()
            })
            .collect();
        let d = dims as f64;
        let van_hove = self
            .displacement
            .iter()
            .map(|st| {
                let h = st.half_range_nm.unwrap_or(1.0);
                VanHove {
                    lag_frames: st.lag,
                    lag_time_s: st.lag as f64 * dt,
                    bin_edges_nm: (0..=st.bins)
                        .map(|b| -h + 2.0 * h * b as f64 / st.bins as f64)
                        .collect(),
                    counts: st.counts.clone(),
                    outside: st.outside.clone(),
                    samples: st.samples,
                }
            })
            .collect();
        let non_gaussian = self
            .displacement
            .iter()
            .map(|st| {
                let s = st.samples as f64;
                let ratio = |m4: f64, m2: f64, k: f64| {
                    let (m4, m2) = (m4 / s, m2 / s);
                    k * m4 / ((k + 2.0) * m2 * m2) - 1.0
                };
                NonGaussian {
                    lag_frames: st.lag,
                    lag_time_s: st.lag as f64 * dt,
                    alpha2: ratio(st.r4, st.r2, d),
                    alpha2_axes: (0..dims)
                        .map(|a| ratio(st.ax4[a], st.ax2[a], 1.0))
                        .collect(),
                    samples: st.samples,
                }
            })
            .collect();
        Ok(Msd {
            frames: self.frames,
            particles: self.particles,
            dims,
            frame_interval_s: dt,
            lag_times_s: self.lags.iter().map(|&m| m as f64 * dt).collect(),
            origins: self.lags.iter().map(|&m| self.frames - m).collect(),
            lags_frames: self.lags,
            time_averaged_axes_nm2: ta,
            origin_axes_nm2: origin_axes,
            origin_total_se_nm2,
            groups,
            method: self.method,
            van_hove,
            non_gaussian,
            suspicious_jumps: self.suspicious_jumps,
            mean_displacement_axes_nm: mean_displacement,
            drift_removed: self.remove_mean_drift,
        })
    }
}

/// Computes the MSD of a species, reading it block by block within
/// `options.memory_budget_bytes`.
///
/// # Errors
/// Reading errors from [`SpeciesReader::read_block`] and option errors from
/// [`MsdAccumulator::new`].
pub fn compute_msd(reader: &SpeciesReader<'_>, options: &MsdOptions) -> Result<Msd> {
    compute_msd_joined(std::slice::from_ref(reader), options)
}

/// Computes the MSD of one species held by several readers in order — the
/// parts of a split ensemble — as one ensemble: every particle enters the
/// same accumulator under its index in the whole run, so the result is that
/// of the whole run, not an average of the parts' averages.
///
/// # Errors
/// As [`compute_msd`]; readers must share frames and dimensions.
pub fn compute_msd_joined(readers: &[SpeciesReader<'_>], options: &MsdOptions) -> Result<Msd> {
    let meta = readers
        .first()
        .ok_or_else(|| Error::invalid_option("readers", 0, "at least one"))?
        .meta();
    let total = readers.iter().map(|r| r.meta().particles).sum();
    let mut acc = MsdAccumulator::new(
        meta.frames,
        total,
        meta.dims,
        meta.frame_interval_s,
        options,
    )?;
    let mut offset = 0;
    for reader in readers {
        for block in reader.blocks(options.memory_budget_bytes) {
            let mut block = block?;
            block.first_particle += offset;
            acc.add_block(&block)?;
        }
        offset += reader.meta().particles;
    }
    acc.finish()
}

/// Ensemble MSD from frame 0 at every frame, per axis (`[axis][frame]`, nm²),
/// read window by window of frames within `budget_bytes`: a per-frame
/// statistic that needs only the first frame kept in memory.
///
/// # Errors
/// Reading errors from [`SpeciesReader::read_frames`].
pub fn origin_msd_all_frames(
    reader: &SpeciesReader<'_>,
    budget_bytes: usize,
) -> Result<Vec<Vec<f64>>> {
    let meta = reader.meta();
    let (n, dims) = (meta.particles, meta.dims);
    let mut first: Option<ndarray::Array2<f64>> = None;
    let mut out = vec![Vec::with_capacity(meta.frames); dims];
    for window in reader.frame_windows(budget_bytes) {
        let window = window?;
        let x = &window.positions_nm;
        let origin = first.get_or_insert_with(|| x.slice(s![0, .., ..]).to_owned());
        for f in 0..x.shape()[0] {
            for (a, axis) in out.iter_mut().enumerate() {
                let sum: f64 = (0..n)
                    .map(|p| (x[[f, p, a]] - origin[[p, a]]).powi(2))
                    .sum();
                axis.push(sum / n as f64);
            }
        }
    }
    Ok(out)
}
