//! Shared helpers of the crowding tests: scenarios from text, recording
//! unwrapped positions straight from the engine state, and long-time
//! diffusivities from time-averaged mean-squared displacements.

#![allow(dead_code)]
// Each test file uses a different part of the re-exported helpers.
#![allow(unused_imports)]

use std::ops::Range;
use std::path::{Path, PathBuf};
use thicket_analysis::direct;
pub use thicket_analysis::direct::{fitted_slope, mean_se, record, ta_msd};
use thicket_engine::obstacles::spheres::FixedObstacles;
use thicket_engine::step::{State, Stepper};
use thicket_engine::Scenario;

/// A validated scenario from TOML text.
pub fn scenario(text: &str) -> Scenario {
    Scenario::from_text(text, Path::new("test.toml"), &[])
        .unwrap_or_else(|e| panic!("test scenario: {e}\n{text}"))
}

/// Obstacles, kernel and initial state of a scenario.
pub fn prepare(sc: &Scenario) -> (FixedObstacles, Stepper, State) {
    let obstacles = FixedObstacles::build(sc).expect("placement");
    let dynamics = Stepper::new(sc, &obstacles);
    let state = dynamics.initial_state(sc).expect("initial state");
    (obstacles, dynamics, state)
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

/// Long-time diffusivity (mean, SE, nm²/s) of particles `range` over
/// realisations `seeds` (the library's measurement, shared with `thicket validate`).
pub fn long_time_diffusivity(
    text: impl Fn(u64) -> String,
    seeds: &[u64],
    range: impl Fn(&Scenario) -> Range<usize>,
    record_s: f64,
    records: usize,
    lo: usize,
    hi: usize,
) -> (f64, f64) {
    direct::long_time_diffusivity(text, seeds, range, record_s, records, lo, hi)
        .unwrap_or_else(|e| panic!("test scenario: {e}"))
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
    use thicket_engine::run::driver::{run, RunOptions, RunOutcome};
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

/// Per-particle long-time diffusivities (nm²/s) of every particle of the
/// scenarios `text(seed)`: records every `record_s` s for `duration_s`,
/// slope of the time-averaged MSD over lags `lags` records (as
/// `direct::long_time_diffusivity`, but kept per particle, so that runs at
/// different steps from the same seeds can be compared particle by particle:
/// the medium and the starting points are shared, which cancels most noise).
pub fn per_particle(
    text: impl Fn(u64) -> String,
    seeds: &[u64],
    record_s: f64,
    duration_s: f64,
    lags: (usize, usize),
) -> Vec<f64> {
    let mut out = Vec::new();
    for &seed in seeds {
        let sc = scenario(&text(seed));
        let (_, mut dynamics, mut state) = prepare(&sc);
        let every = (record_s / sc.dt_s).round() as u64;
        let records = (duration_s / record_s) as usize + 1;
        let tracks = with_threads(2, || {
            record(
                &mut dynamics,
                &mut state,
                &sc,
                0..sc.particle_count(),
                every,
                records,
            )
        });
        let rs = every as f64 * sc.dt_s;
        out.extend(
            (0..tracks[0].len()).map(|p| fitted_slope(&tracks, p, lags.0, lags.1) / (6.0 * rs)),
        );
    }
    out
}

/// Mean and standard error of b − a, particle by particle.
pub fn paired(a: &[f64], b: &[f64]) -> (f64, f64) {
    let d: Vec<f64> = a.iter().zip(b).map(|(x, y)| y - x).collect();
    mean_se(&d)
}
