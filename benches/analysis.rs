//! Analysis throughput and peak memory on trajectories of about 0.5 and 1 GB.
//!
//! Run with `cargo bench --bench analysis`. It writes the trajectories with
//! the engine into a temporary folder (about 1.5 GB of disk), analyses the
//! smaller one first and the larger one second, and prints frames·particles
//! per second and the process's peak resident memory after each: streaming
//! analysis keeps the peak flat as the file doubles.

use std::path::Path;
use std::sync::atomic::AtomicBool;
use std::time::Instant;
use thicket_analysis::estimators::{analyze_file, AnalyzeOptions};
use thicket_engine::run::driver::{run, RunOptions};
use thicket_engine::Scenario;

fn peak_rss_mib() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|s| {
            s.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1)?.parse::<f64>().ok())
        })
        .map(|kib| kib / 1024.0)
        .unwrap_or(f64::NAN)
}

fn write_trajectory(path: &Path, particles: usize, frames: u64) {
    let text = format!(
        "seed = 3\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [2000.0, 2000.0, 2000.0]\n\
         [[species]]\nname = \"bead\"\nradius_nm = 5.0\ncount = {particles}\n[integrator]\ndt_s = 1e-8\nsteps = {}\n\
         [output]\nrecord_every_steps = 1\nprecision = \"f32\"\n",
        frames - 1
    );
    let sc = Scenario::from_text(&text, Path::new("bench.toml"), &[]).expect("bench scenario");
    let opts = RunOptions {
        out: path.to_path_buf(),
        force: true,
        resume: false,
    };
    run(&sc, &opts, &AtomicBool::new(false), &mut |_, _| {}).expect("bench run");
}

fn main() {
    let dir = std::env::temp_dir().join(format!("thicket-analysis-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).expect("temp folder");
    let particles = 10_000;
    println!("analysis of free-diffusion trajectories, {particles} particles, f32 positions + i32 images");
    println!(
        "  peak memory before any analysis: {:.0} MiB",
        peak_rss_mib()
    );
    for frames in [2_000u64, 4_000] {
        let path = dir.join(format!("t{frames}.h5"));
        write_trajectory(&path, particles, frames);
        let size = std::fs::metadata(&path).map(|m| m.len()).unwrap_or(0) as f64;
        let t = Instant::now();
        let report = analyze_file(&path, None, &AnalyzeOptions::default()).expect("analysis");
        let secs = t.elapsed().as_secs_f64();
        println!(
            "  {:6} frames, file {:6.0} MB: {:6.2} s, {:7.1} M frame·particles/s, {:6.0} MB/s, peak resident {:5.0} MiB (D_eff/D0 = {:.3})",
            frames,
            size / 1e6,
            secs,
            particles as f64 * frames as f64 / secs / 1e6,
            size / secs / 1e6,
            peak_rss_mib(),
            report.d_eff_over_d0.unwrap_or(f64::NAN)
        );
        let _ = std::fs::remove_file(&path);
    }
    let _ = std::fs::remove_dir_all(&dir);
}
