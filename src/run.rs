//! `thicket run`.

use crate::progress;
use anyhow::{Context, Result};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use thicket_engine::run::driver::{RunOptions, RunOutcome};
use thicket_engine::Scenario;

/// Exit code after an interrupt (128 + SIGINT, the shell convention).
const EXIT_INTERRUPTED: u8 = 130;

/// Where the trajectory goes: `--out`, else `output.file`, else CONFIG with `.h5`.
pub fn output_path(config: &Path, scenario: &Scenario, out: Option<PathBuf>) -> PathBuf {
    out.or_else(|| scenario.output.file.clone())
        .unwrap_or_else(|| config.with_extension("h5"))
}

/// Sets the worker-thread count once for the process.
pub fn set_threads(threads: Option<usize>) -> Result<()> {
    if let Some(n) = threads {
        anyhow::ensure!(n >= 1, "--threads {n}: the thread count must be at least 1");
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build_global()
            .context("cannot start the worker threads")?;
    }
    Ok(())
}

/// A stop flag raised by SIGINT or SIGTERM.
pub fn stop_flag() -> Result<Arc<AtomicBool>> {
    let stop = Arc::new(AtomicBool::new(false));
    let flag = stop.clone();
    ctrlc::set_handler(move || flag.store(true, Ordering::Relaxed))
        .context("cannot install the interrupt handler")?;
    Ok(stop)
}

/// Runs a scenario file to completion or interruption.
pub fn run(
    config: &Path,
    out: Option<PathBuf>,
    sets: &[String],
    threads: Option<usize>,
    force: bool,
    resume: bool,
) -> Result<ExitCode> {
    set_threads(threads)?;
    let scenario = Scenario::load(config, sets)?;
    let out = output_path(config, &scenario, out);
    for w in scenario.warnings() {
        eprintln!("thicket: warning: {w}");
    }
    let stop = stop_flag()?;
    let bar = progress::bar(scenario.steps, "run");
    let options = RunOptions {
        out: out.clone(),
        force,
        resume,
    };
    let outcome = thicket_engine::run::driver::run(&scenario, &options, &stop, &mut |step, _| {
        bar.set_position(step)
    })?;
    bar.finish_and_clear();
    match outcome {
        RunOutcome::Completed { frames } => {
            println!(
                "wrote {} ({} frames, {} particles, {} steps)",
                out.display(),
                frames,
                scenario.particle_count(),
                scenario.steps
            );
            print_membrane_results(&scenario, &out);
            Ok(ExitCode::SUCCESS)
        }
        RunOutcome::Interrupted { step, frames } => {
            let sets: String = sets.iter().map(|s| format!(" --set {s}")).collect();
            eprintln!(
                "thicket: interrupted at step {step} of {}; {} holds {frames} frames. Continue with: thicket run {}{sets} --out {} --resume",
                scenario.steps,
                out.display(),
                config.display(),
                out.display()
            );
            Ok(ExitCode::from(EXIT_INTERRUPTED))
        }
    }
}

/// After a membrane run, the steady-state results per species, from the
/// membrane analysis (the numbers `thicket analyze` prints, with intervals).
fn print_membrane_results(scenario: &Scenario, out: &Path) {
    let is_membrane = scenario
        .geometry
        .as_ref()
        .is_some_and(|g| matches!(g.shape, thicket_engine::space::shape::Shape::Membrane(_)));
    if !is_membrane {
        return;
    }
    let names: Vec<String> = scenario.species.iter().map(|s| s.name.clone()).collect();
    crate::confined::print_membrane_summary(out, &names);
}
