//! Free-diffusion throughput: particle-steps per second on one and two
//! threads, with recording off and on, and memory per particle.
//!
//! Run with `cargo bench --bench free`. Figures are measured in one process,
//! and compared as ratios, since shared machines are noisy.

use std::path::Path;
use std::sync::atomic::AtomicBool;
use std::time::Instant;
use thicket_engine::base::rng::{standard_normal, ParticleRng};
use thicket_engine::run::driver::{run, RunOptions};
use thicket_engine::step::pipeline::advance_free;
use thicket_engine::step::state::{kinetics, State};
use thicket_engine::Scenario;

fn scenario(count: usize, steps: u64, record: u64) -> Scenario {
    let text = format!(
        "seed = 11\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [1000.0, 1000.0, 1000.0]\n\
         [[species]]\nname = \"bead\"\nradius_nm = 5.0\ncount = {count}\n[integrator]\ndt_s = 1e-9\nsteps = {steps}\n\
         [output]\nrecord_every_steps = {record}\nprecision = \"f32\"\n"
    );
    Scenario::from_text(&text, Path::new("bench.toml"), &[]).expect("bench scenario is valid")
}

fn rss_kib() -> u64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmRSS:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse().ok())
        })
        .unwrap_or(0)
}

/// Best of `repeats` timings of `steps` free steps on `threads` threads, in particle-steps/s.
fn throughput(count: usize, steps: u64, threads: usize, repeats: usize) -> f64 {
    let sc = scenario(count, steps, steps);
    let kin = kinetics(&sc);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(threads)
        .build()
        .expect("thread pool");
    let mut best = f64::INFINITY;
    let mut state = State::initial(&sc);
    for _ in 0..repeats {
        let t = Instant::now();
        pool.install(|| advance_free(&mut state, &kin, &sc.sim_box, steps));
        best = best.min(t.elapsed().as_secs_f64());
    }
    count as f64 * steps as f64 / best
}

/// The floor: three standard normals per particle-step and nothing else, one thread.
fn bare_normals(count: usize, steps: u64) -> f64 {
    let mut rngs: Vec<ParticleRng> = (0..count as u64)
        .map(|i| ParticleRng::for_particle(5, i))
        .collect();
    let mut best = f64::INFINITY;
    for _ in 0..5 {
        let t = Instant::now();
        for g in rngs.iter_mut() {
            // Three independent sums, like the three coordinates of the kernel.
            let mut acc = [0.0f64; 3];
            for _ in 0..steps {
                for a in &mut acc {
                    *a += standard_normal(g);
                }
            }
            std::hint::black_box(acc);
        }
        best = best.min(t.elapsed().as_secs_f64());
    }
    count as f64 * steps as f64 / best
}

fn main() {
    let count = 200_000;
    let steps = 200;
    println!(
        "free diffusion, f64 3D Euler–Maruyama, {count} particles × {steps} steps (best of 5)"
    );
    let bare = bare_normals(count, steps);
    let one = throughput(count, steps, 1, 5);
    let two = throughput(count, steps, 2, 5);
    println!(
        "  bare cost, 3 normals per step: {:8.1} M particle-steps/s",
        bare / 1e6
    );
    println!(
        "  1 thread : {:8.1} M particle-steps/s   ({:.0} % of the bare random-number rate)",
        one / 1e6,
        100.0 * one / bare
    );
    println!(
        "  2 threads: {:8.1} M particle-steps/s   speed-up {:.2}×",
        two / 1e6,
        two / one
    );

    // Recording: the whole driver writing a frame every 100 steps (f32) against the bare kernel.
    let dir = std::env::temp_dir().join(format!("thicket-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp folder");
    let rec_steps = 1000;
    let record = 100;
    let sc = scenario(count, rec_steps, record);
    let stop = AtomicBool::new(false);
    let mut bare_best = f64::INFINITY;
    let mut rec_best = f64::INFINITY;
    for _ in 0..3 {
        let kin = kinetics(&sc);
        let mut state = State::initial(&sc);
        let t = Instant::now();
        advance_free(&mut state, &kin, &sc.sim_box, rec_steps);
        bare_best = bare_best.min(t.elapsed().as_secs_f64());
        let out = dir.join("bench.h5");
        let opts = RunOptions {
            out: out.clone(),
            force: true,
            resume: false,
        };
        let t = Instant::now();
        run(&sc, &opts, &stop, &mut |_, _| {}).expect("bench run");
        rec_best = rec_best.min(t.elapsed().as_secs_f64());
    }
    println!(
        "  recording every {record} steps (f32, {} frames): {:.3} s against {:.3} s bare kernel → cost {:+.1} %",
        rec_steps / record + 1,
        rec_best,
        bare_best,
        100.0 * (rec_best / bare_best - 1.0)
    );
    let _ = std::fs::remove_dir_all(&dir);

    // Memory per particle: resident growth when a large state is created.
    let big = 2_000_000;
    let before = rss_kib();
    let sc = scenario(big, 1, 1);
    let mut state = State::initial(&sc);
    advance_free(&mut state, &kinetics(&sc), &sc.sim_box, 1);
    let after = rss_kib();
    println!(
        "  memory: {:.1} bytes per particle resident ({big} particles; state holds position 24 + image 12 + stream 32 = 68)",
        (after.saturating_sub(before)) as f64 * 1024.0 / big as f64
    );
    std::hint::black_box(&state);
}
