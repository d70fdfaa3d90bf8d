//! Helpers shared by the confinement tests: scenario text, thread pools,
//! statistics.

#![allow(dead_code)]

use std::path::Path;
use thicket_engine::confined::Confinement;
use thicket_engine::integrate::State;
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
pub fn confinement(s: &Scenario) -> Confinement {
    Confinement::new(s, s.geometry.as_ref().expect("scenario has a geometry"))
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
pub fn advance(
    c: &Confinement,
    state: &mut State,
    steps: u64,
    block: u64,
) -> Vec<thicket_engine::confined::Counts> {
    let mut totals = Vec::new();
    let mut done = 0;
    while done < steps {
        let n = block.min(steps - done);
        let counts = c.advance(state, n);
        if totals.is_empty() {
            totals = counts;
        } else {
            for (t, b) in totals.iter_mut().zip(counts) {
                *t = *t + b;
            }
        }
        done += n;
    }
    totals
}

/// Pearson's chi-square of counts against equal expected counts.
pub fn chi_square_flat(counts: &[u64]) -> f64 {
    let total: u64 = counts.iter().sum();
    let expected = total as f64 / counts.len() as f64;
    counts
        .iter()
        .map(|&c| (c as f64 - expected).powi(2) / expected)
        .sum()
}

/// Mean and standard error of the mean.
pub fn mean_se(values: &[f64]) -> (f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, (var / n).sqrt())
}
