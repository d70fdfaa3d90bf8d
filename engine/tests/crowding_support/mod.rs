//! Shared helpers of the crowding tests: scenarios from text, recording
//! unwrapped positions straight from the engine state, and long-time
//! diffusivities from time-averaged mean-squared displacements.

#![allow(dead_code)]

use std::ops::Range;
use std::path::{Path, PathBuf};
use thicket_engine::integrate::{Dynamics, State};
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::Scenario;

/// A validated scenario from TOML text.
pub fn scenario(text: &str) -> Scenario {
    Scenario::from_text(text, Path::new("test.toml"), &[])
        .unwrap_or_else(|e| panic!("test scenario: {e}\n{text}"))
}

/// Obstacles, kernel and initial state of a scenario.
pub fn prepare(sc: &Scenario) -> (FixedObstacles, Dynamics, State) {
    let obstacles = FixedObstacles::build(sc).expect("placement");
    let dynamics = Dynamics::new(sc, &obstacles);
    let state = dynamics.initial_state(sc).expect("initial state");
    (obstacles, dynamics, state)
}

/// Unwrapped positions of particles `range` every `every` steps, `records` times
/// (the first record is the current state).
pub fn record(
    dynamics: &mut Dynamics,
    state: &mut State,
    sc: &Scenario,
    range: Range<usize>,
    every: u64,
    records: usize,
) -> Vec<Vec<[f64; 3]>> {
    let mut out = Vec::with_capacity(records);
    for r in 0..records {
        if r > 0 {
            dynamics.advance(state, every);
        }
        out.push(
            range
                .clone()
                .map(|i| state.unwrapped(i, &sc.sim_box))
                .collect(),
        );
    }
    out
}

/// Mean and standard error over particles of a per-particle value.
pub fn mean_se(values: &[f64]) -> (f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, (var / n).sqrt())
}

/// Time-averaged squared displacement of particle `p` at a lag of `lag` records.
pub fn ta_msd(tracks: &[Vec<[f64; 3]>], p: usize, lag: usize) -> f64 {
    let origins = tracks.len() - lag;
    let mut sum = 0.0;
    for t in 0..origins {
        let a = tracks[t][p];
        let b = tracks[t + lag][p];
        sum += (0..3).map(|k| (b[k] - a[k]).powi(2)).sum::<f64>();
    }
    sum / origins as f64
}

/// Long-time diffusivity per particle from the slope of its time-averaged MSD
/// between lags `lo` and `hi` (records of `record_s` seconds):
/// D = (MSD(hi) − MSD(lo)) / (6 (hi − lo) record_s), which removes the
/// constant offset the short-time regime leaves in MSD(t) = 6 D t + c.
/// Returns the mean over particles and its standard error (nm²/s).
pub fn slope_diffusivity(
    tracks: &[Vec<[f64; 3]>],
    lo: usize,
    hi: usize,
    record_s: f64,
) -> (f64, f64) {
    let n = tracks[0].len();
    let per: Vec<f64> = (0..n)
        .map(|p| {
            (ta_msd(tracks, p, hi) - ta_msd(tracks, p, lo)) / (6.0 * (hi - lo) as f64 * record_s)
        })
        .collect();
    mean_se(&per)
}

/// As [`slope_diffusivity`] but MSD(hi)/(6 t): the plain long-time estimate.
pub fn plain_diffusivity(tracks: &[Vec<[f64; 3]>], hi: usize, record_s: f64) -> (f64, f64) {
    let n = tracks[0].len();
    let per: Vec<f64> = (0..n)
        .map(|p| ta_msd(tracks, p, hi) / (6.0 * hi as f64 * record_s))
        .collect();
    mean_se(&per)
}

/// Runs `f` inside a rayon pool of `threads` threads.
pub fn with_threads<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("thread pool")
        .install(f)
}

/// Least-squares slope (nm² per record) of particle `p`'s time-averaged MSD
/// against lag over lags `lo..=hi`: MSD(τ) = 6Dτ + c, the offset c absorbing
/// the short-time regime.
pub fn fitted_slope(tracks: &[Vec<[f64; 3]>], p: usize, lo: usize, hi: usize) -> f64 {
    let lags: Vec<f64> = (lo..=hi).map(|l| l as f64).collect();
    let msd: Vec<f64> = (lo..=hi).map(|l| ta_msd(tracks, p, l)).collect();
    let n = lags.len() as f64;
    let (mx, my) = (lags.iter().sum::<f64>() / n, msd.iter().sum::<f64>() / n);
    let sxy: f64 = lags
        .iter()
        .zip(&msd)
        .map(|(x, y)| (x - mx) * (y - my))
        .sum();
    let sxx: f64 = lags.iter().map(|x| (x - mx).powi(2)).sum();
    sxy / sxx
}

/// Long-time diffusivity (mean, standard error, nm²/s) of particles `range`
/// over several independent realisations: `text(seed)` gives each one's
/// scenario. Records every `record_s` seconds, `records` times, and fits the
/// slope of each particle's time-averaged MSD over lags `lo..=hi` records.
/// The standard error comes from the spread between particles.
pub fn long_time_diffusivity(
    text: impl Fn(u64) -> String,
    seeds: &[u64],
    range: impl Fn(&Scenario) -> Range<usize>,
    record_s: f64,
    records: usize,
    lo: usize,
    hi: usize,
) -> (f64, f64) {
    let mut per = Vec::new();
    for &seed in seeds {
        let sc = scenario(&text(seed));
        let (_obstacles, mut dynamics, mut state) = prepare(&sc);
        let every = (record_s / sc.dt_s).round() as u64;
        let tracks = record(&mut dynamics, &mut state, &sc, range(&sc), every, records);
        let rs = every as f64 * sc.dt_s;
        for p in 0..tracks[0].len() {
            per.push(fitted_slope(&tracks, p, lo, hi) / (6.0 * rs));
        }
    }
    mean_se(&per)
}

/// Runs `sc` into `dir` twice: once whole (`whole.h5`), and once stopped at
/// step `stop_at` and resumed (`split.h5`); asserts both complete with
/// `frames` frames and returns the two paths.
pub fn whole_and_resumed(
    sc: &Scenario,
    dir: &Path,
    stop_at: u64,
    frames: u64,
) -> (PathBuf, PathBuf) {
    use std::sync::atomic::{AtomicBool, Ordering};
    use thicket_engine::run::{run, RunOptions, RunOutcome};
    let options = |out: &PathBuf, resume: bool| RunOptions {
        out: out.clone(),
        force: false,
        resume,
    };
    let never = AtomicBool::new(false);
    let whole = dir.join("whole.h5");
    let out = run(sc, &options(&whole, false), &never, &mut |_, _| {}).unwrap();
    assert_eq!(out, RunOutcome::Completed { frames });
    let split = dir.join("split.h5");
    let stop = AtomicBool::new(false);
    let out = run(sc, &options(&split, false), &stop, &mut |step, _| {
        if step >= stop_at {
            stop.store(true, Ordering::Relaxed);
        }
    })
    .unwrap();
    assert!(matches!(out, RunOutcome::Interrupted { .. }), "{out:?}");
    let out = run(sc, &options(&split, true), &never, &mut |_, _| {}).unwrap();
    assert_eq!(out, RunOutcome::Completed { frames });
    (whole, split)
}
