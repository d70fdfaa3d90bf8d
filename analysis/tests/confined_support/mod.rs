//! Helpers of the confined-analysis tests: write a scenario, run it with
//! the engine into a temporary folder.
#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use thicket_engine::run::driver::{run, RunOptions, RunOutcome};
use thicket_engine::Scenario;

/// Free diffusivity of the test tracers, m²/s (1e8 nm²/s).
pub const D0_M2_PER_S: f64 = 1e-10;

/// Time step for an rms step `sigma_nm` per axis, σ = √(2 D0 Δt).
pub fn dt_for_sigma(sigma_nm: f64) -> f64 {
    sigma_nm * sigma_nm / (2.0 * D0_M2_PER_S * 1e18)
}

/// Scenario text with one tracer species; `extra` holds further sections.
#[allow(clippy::too_many_arguments)]
pub fn scenario_text(
    seed: u64,
    edges: [f64; 3],
    radius_nm: f64,
    count: usize,
    sigma_nm: f64,
    steps: u64,
    every: u64,
    extra: &str,
) -> String {
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{}, {}, {}]\n\
         [[species]]\nname = \"tracer\"\nradius_nm = {radius_nm}\ncount = {count}\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         [integrator]\ndt_s = {:e}\nsteps = {steps}\n[output]\nrecord_every_steps = {every}\nprecision = \"f64\"\n{extra}\n",
        edges[0],
        edges[1],
        edges[2],
        dt_for_sigma(sigma_nm)
    )
}

/// Runs `text` into `dir/name` on 2 threads and returns the trajectory path.
pub fn run_into(dir: &Path, name: &str, text: &str) -> PathBuf {
    let cfg = dir.join(format!("{name}.toml"));
    std::fs::write(&cfg, text).unwrap();
    let scenario = Scenario::from_text(text, &cfg, &[]).unwrap_or_else(|e| panic!("{e}"));
    let out = dir.join(format!("{name}.h5"));
    let options = RunOptions {
        out: out.clone(),
        force: false,
        resume: false,
    };
    let stop = AtomicBool::new(false);
    let outcome = rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap()
        .install(|| run(&scenario, &options, &stop, &mut |_, _| {}))
        .unwrap();
    assert!(matches!(outcome, RunOutcome::Completed { .. }));
    out
}
