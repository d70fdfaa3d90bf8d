//! `thicket sweep`: a grid of runs × seeds, summarised with model curves.

use crate::progress;
use anyhow::{Context, Result};
use std::path::Path;
use std::process::ExitCode;
use std::sync::atomic::Ordering;
use thicket_analysis::sweep::{run_sweep, summarize, write_summary, Sweep};

/// Parses `I/N` (1 ≤ I ≤ N).
pub fn parse_shard(text: &str) -> Result<(usize, usize)> {
    let bad = || anyhow::anyhow!("--shard {text}: expected I/N with 1 ≤ I ≤ N, e.g. --shard 2/8");
    let (i, n) = text.split_once('/').ok_or_else(bad)?;
    let (i, n): (usize, usize) = (
        i.trim().parse().map_err(|_| bad())?,
        n.trim().parse().map_err(|_| bad())?,
    );
    anyhow::ensure!(n >= 1 && (1..=n).contains(&i), bad());
    Ok((i, n))
}

/// Runs (or with `merge`, only joins) a sweep into `out`.
pub fn sweep(
    file: &Path,
    out: &Path,
    shard: Option<&str>,
    merge: bool,
    force: bool,
) -> Result<ExitCode> {
    let shard = shard.map(parse_shard).transpose()?.unwrap_or((1, 1));
    let spec = Sweep::load(file)?;
    let stop = crate::run::stop_flag()?;
    if !merge {
        // This shard's runs: every N-th from the I-th.
        let total = (spec.runs().len() + shard.1 - shard.0) / shard.1;
        let bar = progress::bar(total as u64, "sweep");
        run_sweep(&spec, out, shard, force, &stop, &|done, _| {
            bar.set_position(done as u64)
        })?;
        bar.finish_and_clear();
        if stop.load(Ordering::Relaxed) {
            eprintln!("thicket: sweep interrupted; finished points are kept in {}, run the same command again to continue", out.join("points").display());
            return Ok(ExitCode::from(130));
        }
        // Shards may run at once on a shared folder: only --merge writes the summary.
        if shard.1 > 1 {
            println!(
                "shard {}/{} done: its results are in {}; join all shards with --merge",
                shard.0,
                shard.1,
                out.join("points").display()
            );
            return Ok(ExitCode::SUCCESS);
        }
    }
    let summary = summarize(&spec, out)
        .with_context(|| format!("joining the results in {}", out.display()))?;
    let mut written = write_summary(&summary, out)?;
    written.extend(thicket_analysis::sweep_plot::write_sweep_plots(
        &summary,
        &out.join("sweep"),
    )?);
    println!(
        "{} — {} points × {} seeds",
        summary.title,
        spec.points.len(),
        spec.seeds.len()
    );
    print!("{}", thicket_analysis::sweep_plot::summary_table(&summary));
    if !summary.missing_points.is_empty() {
        println!(
            "points without results yet (other shards, or interrupted): {:?}",
            summary.missing_points
        );
    }
    for p in written {
        println!("wrote {}", p.display());
    }
    println!("{}", thicket_analysis::sweep::CAUTION);
    Ok(ExitCode::SUCCESS)
}
