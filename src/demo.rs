//! `thicket demo`: the built-in scenario end to end — a small crowding sweep
//! of an invented protein in an invented hydrogel, analysed, plotted and
//! written up in a short report.

use crate::progress;
use anyhow::{Context, Result};
use std::fmt::Write as _;
use std::path::Path;
use std::process::ExitCode;
use std::sync::atomic::Ordering;
use std::time::Instant;
use thicket_analysis::sweep::{run_sweep, summarize, write_summary, Sweep, CAUTION};
use thicket_analysis::sweep_plot::{summary_table, write_sweep_plots};

const SCENARIO: &str = include_str!("../configs/demo/hydrogel.toml");
const SWEEP: &str = include_str!("../configs/demo/hydrogel-sweep.toml");

/// Runs the demonstration into `out`.
pub fn demo(out: &Path, force: bool) -> Result<ExitCode> {
    if out.exists()
        && std::fs::read_dir(out)
            .map(|mut d| d.next().is_some())
            .unwrap_or(false)
        && !force
    {
        anyhow::bail!("{}: the demo folder exists and is not empty; pass --force to run the demo again into it, or --out DIR for another folder", out.display());
    }
    if force && out.join("points").exists() {
        std::fs::remove_dir_all(out.join("points"))
            .with_context(|| format!("clearing {}", out.join("points").display()))?;
    }
    std::fs::create_dir_all(out)
        .with_context(|| format!("{}: cannot create the demo folder", out.display()))?;
    std::fs::write(out.join("hydrogel.toml"), SCENARIO)
        .with_context(|| format!("{}: cannot write", out.join("hydrogel.toml").display()))?;
    let sweep_file = out.join("hydrogel-sweep.toml");
    std::fs::write(&sweep_file, SWEEP)
        .with_context(|| format!("{}: cannot write", sweep_file.display()))?;

    println!("thicket demo: a 3.5 nm marker protein among the 15 nm beads of an invented hydrogel at 37 °C");
    println!(
        "  sweeping the bead volume fraction over 4 values × 2 independent gels; results in {}",
        out.display()
    );
    let spec = Sweep::load(&sweep_file)?;
    let stop = crate::run::stop_flag()?;
    let started = Instant::now();
    let total = spec.points.len() * spec.seeds.len();
    let bar = progress::bar(total as u64, "demo");
    run_sweep(&spec, out, (1, 1), force, &stop, &|done, _| {
        bar.set_position(done as u64)
    })?;
    bar.finish_and_clear();
    if stop.load(Ordering::Relaxed) {
        eprintln!("thicket: demo interrupted; run `thicket demo --out {}` again to finish the remaining points", out.display());
        return Ok(ExitCode::from(130));
    }
    let elapsed = started.elapsed().as_secs_f64();
    let summary = summarize(&spec, out)?;
    let mut written = write_summary(&summary, out)?;
    written.extend(write_sweep_plots(&summary, &out.join("sweep"))?);

    // One point analysed in full, with its MSD and α(τ) plots.
    let example = out.join("runs").join("p0002_s1.h5");
    if example.exists() {
        let analysis =
            thicket_analysis::estimators::analyze(&example, Some("marker"), &Default::default())?;
        written.extend(thicket_analysis::plot::write_plots(
            out.join("example"),
            &analysis.msd,
            &analysis.report,
        )?);
    }

    let table = summary_table(&summary);
    let mut report = String::new();
    let _ = writeln!(report, "# thicket demo: {}\n", summary.title);
    let _ = writeln!(report, "An invented 3.5 nm marker protein diffuses among fixed, impermeable 15 nm beads of an invented hydrogel");
    let _ = writeln!(report, "(random, non-overlapping) in water at 37 °C. For each bead volume fraction φ, two independent gels were");
    let _ = writeln!(report, "simulated by Brownian dynamics and the long-time D_eff/D0 measured from the MSD, with a 95 % interval from the");
    let _ = writeln!(report, "spread between particles and gels. Models are evaluated for the same scenarios: Maxwell's tracer form at the");
    let _ = writeln!(report, "fraction the beads exclude from the protein's centre, φ_excl = φ·((a+b)/b)³, and Mackie–Meares at φ.\n");
    let _ = writeln!(report, "```\n{table}```\n");
    let _ = writeln!(report, "Each D_eff is the slope of the time-averaged MSD over its fit window (the `fit window` column, the shortest");
    let _ = writeln!(report, "start and longest end over the gels), chosen automatically where the local exponent α(τ) is 1 within its");
    let _ = writeln!(report, "error; α is the mean slope of ln MSD against ln τ there. A point marked APPARENT never reached the diffusive");
    let _ = writeln!(
        report,
        "regime: its value is biased and the table says by how much to lengthen its runs.\n"
    );
    if summary.too_short.is_empty() {
        let _ = writeln!(
            report,
            "Fit quality: every point reached the diffusive regime.\n"
        );
    } else {
        let _ = writeln!(
            report,
            "Fit quality: **{} of {} points are apparent values.**\n",
            summary.too_short.len(),
            summary.points.len()
        );
        for line in &summary.too_short {
            let _ = writeln!(report, "- {line}");
        }
        let _ = writeln!(report);
    }
    let _ = writeln!(report, "Simulated in {elapsed:.1} s. Files: `summary.csv`, `summary.json`, `sweep.svg`/`sweep.png` (D_eff/D0 against φ),");
    let _ = writeln!(report, "`example_msd.*` and `example_alpha.*` (one gel at φ = 0.2), the trajectories in `runs/`, the inputs");
    let _ = writeln!(report, "`hydrogel.toml` and `hydrogel-sweep.toml` (rerun with `thicket sweep hydrogel-sweep.toml`).\n");
    let _ = writeln!(
        report,
        "No hydrodynamic interactions between particles are modelled.\n"
    );
    let _ = writeln!(report, "*{CAUTION}*");
    let report_path = out.join("report.md");
    std::fs::write(&report_path, &report)
        .with_context(|| format!("{}: cannot write", report_path.display()))?;
    written.push(report_path);

    print!("{table}");
    println!("  simulated in {elapsed:.1} s");
    for p in &written {
        println!("  wrote {}", p.display());
    }
    println!("{CAUTION}");
    Ok(ExitCode::SUCCESS)
}
