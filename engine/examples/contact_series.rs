//! Δt series of long-time diffusivities with either contact rule: the
//! measurements behind the contact scheme's convergence order.
//!
//! `cargo run --release -p thicket-engine --example contact_series -- KIND RULE SIGMA...`
//! KIND: `fixed` (point tracers among random non-overlapping spheres of
//! radius 1 nm, φ = 0.3) or `mobile` (hard spheres of radius 0.5 nm, φ = 0.3);
//! RULE: `reject` or `reflect`; SIGMA: rms steps per axis as fractions of the
//! (obstacle or particle) radius. Prints D/D0 ± SE and the wall time per point;
//! SERIES_DURATION (s) sets the run length (fixed 30, mobile 12).
//!
//! Time to a value within 1 % (bias and statistics together): take the
//! bias b(h) from a series against its Δt → 0 limit, pick the step where
//! b + 2·SE ≤ 1 % costs least (with SE ∝ 1/√(run length) and cost ∝
//! run length/h², both measured here), and multiply the wall time per
//! simulated second at that step by the run length needed.

use std::time::Instant;
use thicket_analysis::direct::long_time_diffusivity;

fn fixed_text(rule: &str, sigma: f64, seed: u64) -> String {
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [30.0, 30.0, 30.0]\n\
         [[species]]\nname = \"point\"\nradius_nm = 0.0001\ncount = 1500\ndiffusivity_m2_per_s = 1e-18\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.3\nradius_nm = 1.0\n\
         [integrator]\ndt_s = {}\nsteps = 1\ncontact = \"{rule}\"\n",
        sigma * sigma / 2.0
    )
}

fn mobile_text(rule: &str, n: usize, sigma: f64, seed: u64) -> String {
    let edge = (n as f64 * std::f64::consts::PI / 6.0 / 0.3).cbrt();
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n\
         [[species]]\nname = \"crowder\"\nrole = \"crowder\"\nradius_nm = 0.5\ncount = {n}\ndiffusivity_m2_per_s = 1e-18\n\
         [integrator]\ndt_s = {}\nsteps = 1\ncontact = \"{rule}\"\n",
        sigma * sigma / 2.0
    )
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    if args[0] == "stats" {
        for rule in ["reject", "reflect"] {
            stats(rule, args[1].parse().unwrap(), 2000);
        }
        return;
    }
    let kind = args[0].as_str();
    let rule = args[1].clone();
    let duration: f64 = std::env::var("SERIES_DURATION")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(if kind == "fixed" { 30.0 } else { 12.0 });
    for a in &args[2..] {
        let frac: f64 = a.parse().expect("a step fraction");
        let t = Instant::now();
        let (d, se) = if kind == "fixed" {
            let sigma = frac * 1.0;
            let records = (duration / 0.5) as usize + 1;
            long_time_diffusivity(
                |s| fixed_text(&rule, sigma, s),
                &[11, 12, 13],
                |sc| 0..sc.particle_count(),
                0.5,
                records,
                2,
                4,
            )
        } else {
            let sigma = frac * 0.5;
            let records = (duration / 0.5) as usize + 1;
            long_time_diffusivity(
                |s| mobile_text(&rule, 1000, sigma, s),
                &[51, 52],
                |sc| 0..sc.particle_count(),
                0.5,
                records,
                2,
                4,
            )
        }
        .unwrap();
        println!(
            "{kind} {rule} step/radius {frac}: D/D0 = {d:.4} ± {se:.4} ({:.1} s)",
            t.elapsed().as_secs_f64()
        );
    }
}

/// Counters of one short mobile run (rebuilds, untouched moves, wall time)
/// with each rule: `contact_series stats STEP_FRACTION`.
fn stats(rule: &str, frac: f64, steps: u64) {
    let sc = thicket_analysis::direct::scenario_from_text(
        &mobile_text(rule, 1000, frac * 0.5, 51),
        "s.toml",
    )
    .unwrap();
    let (_o, mut dynamics, mut state) = thicket_analysis::direct::prepare(&sc).unwrap();
    let t = Instant::now();
    dynamics.advance(&mut state, steps);
    let c = dynamics.crowd().unwrap();
    println!(
        "{rule} {frac}: {:?} skin {} neighbours {:.1} in {:.2} s",
        c.stats,
        c.skin_nm(),
        c.mean_neighbours(),
        t.elapsed().as_secs_f64()
    );
}
