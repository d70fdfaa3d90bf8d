//! `thicket run`.

use crate::progress;
use anyhow::{Context, Result};
use std::path::{Path, PathBuf};
use std::process::ExitCode;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::Arc;
use thicket_engine::run::part::{EnsemblePart, PartRun};
use thicket_engine::run::{RunOptions, RunOutcome};
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

/// Parses `--ensemble-part I/N` (1 ≤ I ≤ N) into the engine's 0-based part.
pub fn parse_part(text: &str) -> Result<EnsemblePart> {
    let bad = || {
        anyhow::anyhow!(
            "--ensemble-part {text}: expected I/N with 1 ≤ I ≤ N, e.g. --ensemble-part 2/8"
        )
    };
    let (i, n) = text.split_once('/').ok_or_else(bad)?;
    let (i, n): (usize, usize) = (
        i.trim().parse().map_err(|_| bad())?,
        n.trim().parse().map_err(|_| bad())?,
    );
    anyhow::ensure!(n >= 1 && (1..=n).contains(&i), bad());
    Ok(EnsemblePart {
        index: i - 1,
        parts: n,
    })
}

/// Runs a scenario file (or, with `part`, one part of its ensemble) to
/// completion or interruption.
pub fn run(
    config: &Path,
    out: Option<PathBuf>,
    sets: &[String],
    threads: Option<usize>,
    force: bool,
    resume: bool,
    part: Option<&str>,
) -> Result<ExitCode> {
    set_threads(threads)?;
    let part = part.map(parse_part).transpose()?;
    let whole = Scenario::load(config, sets)?;
    let part = part.map(|p| PartRun::new(&whole, p)).transpose()?;
    let scenario = part.as_ref().map_or(&whole, |p| &p.scenario);
    // A part's file is named after its part unless --out says otherwise.
    let out = match (&part, out) {
        (Some(p), None) => output_path(config, &whole, None).with_extension(format!(
            "part{}of{}.h5",
            p.part.index + 1,
            p.part.parts
        )),
        (_, out) => output_path(config, &whole, out),
    };
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
    let mut progress = |step, _| bar.set_position(step);
    let outcome = match &part {
        Some(p) => thicket_engine::run::run_part(p, &options, &stop, &mut progress)?,
        None => thicket_engine::run::run(scenario, &options, &stop, &mut progress)?,
    };
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
            if let Some(p) = &part {
                println!(
                    "part {} of {} of the ensemble of {} particles; analyse all parts together: thicket analyze PART1.h5 PART2.h5 …",
                    p.part.index + 1,
                    p.part.parts,
                    p.whole.particle_count()
                );
            }
            print_membrane_results(scenario, &out);
            Ok(ExitCode::SUCCESS)
        }
        RunOutcome::Interrupted { step, frames } => {
            let mut sets: String = sets.iter().map(|s| format!(" --set {s}")).collect();
            if let Some(p) = &part {
                sets.push_str(&format!(
                    " --ensemble-part {}/{}",
                    p.part.index + 1,
                    p.part.parts
                ));
            }
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
