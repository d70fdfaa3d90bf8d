//! A crowd with soft pair interactions against the same crowd of hard
//! spheres: charged crowders (radius 5 nm, φ = 0.1) and charged probes
//! (radius 2.5 nm) at two ionic strengths, moved by the Metropolis-tested
//! step, against the hard crowd with rejection in the sequential sweep (the
//! same update order) and with the default reflecting step. Particle-steps
//! per second and their ratios, best of three, the settings timed in turn in
//! one process (load from elsewhere falls on all alike).
//!
//! Run with `cargo bench -p thicket-engine --bench pair_forces`.

use std::path::Path;
use std::time::Instant;
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

const STEPS: u64 = 200;

fn scenario(ionic: f64, species_keys: &str, integrator: &str) -> Scenario {
    let text = format!(
        "seed = 3\n[medium]\ntemperature_K = 298.15\nionic_strength_mol_per_L = {ionic}\nrelative_permittivity = 78.4\n\
         [box]\nedges_nm = [120.0, 120.0, 120.0]\n\
         [[species]]\nname = \"bead\"\nrole = \"crowder\"\nradius_nm = 5.0\ncount = 330\n{species_keys}\n\
         [[species]]\nname = \"probe\"\nradius_nm = 2.5\ncount = 2000\n{species_keys}\n\
         [integrator]\ndt_s = 4e-10\nsteps = {STEPS}\n{integrator}\n[output]\nrecord_every_steps = {STEPS}\n"
    );
    Scenario::from_text(&text, Path::new("bench.toml"), &[]).expect("bench scenario is valid")
}

fn main() {
    let settings = [
        (
            "hard, reject, sequential",
            scenario(0.1, "", "contact = \"reject\"\nsweep = \"sequential\""),
        ),
        ("hard, reflect (default)", scenario(0.1, "", "")),
        (
            "soft, 100 mM (κ⁻¹ 0.96 nm)",
            scenario(0.1, "surface_potential_mV = -25.0", ""),
        ),
        (
            "soft, 10 mM (κ⁻¹ 3.0 nm)",
            scenario(0.01, "surface_potential_mV = -25.0", ""),
        ),
    ];
    let mut runs: Vec<_> = settings
        .iter()
        .map(|(_, s)| {
            let obstacles = FixedObstacles::build(s).expect("no obstacles");
            let c = Stepper::new(s, &obstacles);
            let state = c.initial_state(s).expect("placement");
            (c, state)
        })
        .collect();
    let n = settings[0].1.particle_count() as f64;
    println!("330 charged crowders (a = 5 nm, φ ≈ 0.1) and 2000 probes (a = 2.5 nm); {STEPS} steps, best of 3, one thread");
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .expect("thread pool");
    let mut best = vec![f64::INFINITY; runs.len()];
    for _ in 0..3 {
        for (k, (c, state)) in runs.iter_mut().enumerate() {
            let t = Instant::now();
            pool.install(|| c.advance(state, STEPS));
            best[k] = best[k].min(t.elapsed().as_secs_f64());
        }
    }
    let base = n * STEPS as f64 / best[0];
    for ((name, s), t) in settings.iter().zip(&best) {
        let rate = n * STEPS as f64 / t;
        let cut = s.pairs.as_ref().map_or(String::new(), |p| {
            format!(", cut-off gap {:.1} nm", p.largest_cutoff_gap_nm())
        });
        println!(
            "  {name:32} {:7.3} M particle-steps/s, {:5.2}× the cost of the hard sequential sweep{cut}",
            rate / 1e6,
            base / rate
        );
    }
    std::hint::black_box(&runs);
}
