//! Tracers among fixed spheres at φ = 0.3 with screened electrostatics
//! (Debye length ≈ 1 nm, obstacles of radius 5 nm, tracers of 3 nm)
//! against the hard-sphere kernel of the same gel: particle-steps per
//! second and their ratio. Target: the soft step costs at most 3× the hard one.
//!
//! Run with `cargo bench --bench soft_obstacles`. Figures are best-of-five
//! in one process, the two settings timed in turn (so load from elsewhere
//! falls on both alike), and compared as ratios.

use std::path::Path;
use std::time::Instant;
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

const COUNT: usize = 50_000;
const STEPS: u64 = 100;

fn scenario(species_keys: &str, obstacle_keys: &str) -> Scenario {
    let text = format!(
        "seed = 17\n[medium]\ntemperature_K = 298.15\nionic_strength_mol_per_L = 0.1\nrelative_permittivity = 78.4\n\
         [box]\nedges_nm = [100.0, 100.0, 100.0]\n\
         [[species]]\nname = \"protein\"\nradius_nm = 3.0\ncount = {COUNT}\n{species_keys}\n\
         [integrator]\ndt_s = 2e-11\nsteps = {STEPS}\n[output]\nrecord_every_steps = {STEPS}\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.3\nradius_nm = 5.0\n{obstacle_keys}\n"
    );
    Scenario::from_text(&text, Path::new("bench.toml"), &[]).expect("bench scenario is valid")
}

fn main() {
    let settings = [
        scenario("", ""),
        scenario(
            "surface_potential_mV = -25.0",
            "surface_potential_mV = -30.0",
        ),
    ];
    let obstacles = FixedObstacles::build(&settings[0]).expect("placement");
    let cut = obstacles.soft_cutoff_nm(&settings[1], 0);
    let mut runs: Vec<_> = settings
        .iter()
        .map(|s| {
            let c = Stepper::new(s, &obstacles);
            let state = c.initial_state(s).expect("placement");
            (c, state)
        })
        .collect();
    println!(
        "tracers (a = 3 nm) among {} fixed spheres (b = 5 nm, φ = 0.3), κ⁻¹ = 0.96 nm, cut-off gap {cut:.2} nm; \
         {COUNT} particles × {STEPS} steps, best of 5",
        obstacles.spheres.len()
    );
    for threads in [1, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("thread pool");
        let mut best = [f64::INFINITY; 2];
        for _ in 0..5 {
            for (k, (c, state)) in runs.iter_mut().enumerate() {
                let t = Instant::now();
                pool.install(|| c.advance(state, STEPS));
                best[k] = best[k].min(t.elapsed().as_secs_f64());
            }
        }
        let rate = best.map(|t| COUNT as f64 * STEPS as f64 / t);
        println!(
            "  {threads} thread{}: hard spheres {:6.2} M particle-steps/s, screened electrostatics {:6.2} M/s \
             → soft costs {:.2}× (target ≤ 3×)",
            if threads == 1 { " " } else { "s" },
            rate[0] / 1e6,
            rate[1] / 1e6,
            rate[0] / rate[1]
        );
    }
    std::hint::black_box(&runs);
}
