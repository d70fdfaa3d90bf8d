//! Helpers shared by the confinement tests: scenario text, thread pools,
//! statistics.

#![allow(dead_code)]
// Each test file uses a different part of the re-exported helpers.
#![allow(unused_imports)]

use std::path::Path;
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

/// Free diffusivity of every test tracer, m²/s: 1e8 nm²/s keeps the numbers simple.
pub const D0_M2_PER_S: f64 = 1e-10;
/// The same in nm²/s.
pub const D0_NM2_PER_S: f64 = 1e8;

/// Time step giving an rms step `sigma_nm` per axis: σ = √(2 D0 Δt).
pub fn dt_for_sigma(sigma_nm: f64) -> f64 {
    sigma_nm * sigma_nm / (2.0 * D0_NM2_PER_S)
}

/// A scenario with one tracer species and the given `[geometry]` body.
pub fn scenario(
    seed: u64,
    edges_nm: [f64; 3],
    radius_nm: f64,
    count: usize,
    sigma_nm: f64,
    steps: u64,
    geometry: &str,
) -> Scenario {
    let text = format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{}, {}, {}]\n\
         [[species]]\nname = \"tracer\"\nradius_nm = {radius_nm}\ncount = {count}\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         [integrator]\ndt_s = {:e}\nsteps = {steps}\n[output]\nrecord_every_steps = {steps}\n[geometry]\n{geometry}\n",
        edges_nm[0],
        edges_nm[1],
        edges_nm[2],
        dt_for_sigma(sigma_nm)
    );
    Scenario::from_text(&text, Path::new("test.toml"), &[])
        .unwrap_or_else(|e| panic!("test scenario is valid: {e}"))
}

/// The prepared kernels of a scenario with a geometry.
pub fn confinement(s: &Scenario) -> Stepper {
    Stepper::new(s, &thicket_engine::obstacles::FixedObstacles::default())
}

/// Runs `f` on a pool of `threads` worker threads.
pub fn on_threads<T: Send>(threads: usize, f: impl FnOnce() -> T + Send) -> T {
    rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("thread pool")
        .install(f)
}

/// Advances in blocks of at most `block` steps (the driver's way), `steps` in all.
pub use thicket_analysis::direct::advance_confined as advance;
pub use thicket_analysis::direct::{chi_square_flat, mean_se};
