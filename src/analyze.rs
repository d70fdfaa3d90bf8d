//! `thicket analyze`: D_eff with its interval, α, and the models beside it.

use anyhow::{Context, Result};
use std::path::Path;
use std::process::ExitCode;
use thicket_analysis::estimators::{analyze, AnalyzeOptions};

/// Analyses a trajectory and prints a table or JSON; optional plots.
pub fn analyze_trajectory(
    file: &Path,
    species: Option<&str>,
    window: Option<&str>,
    axes: Option<&str>,
    d0: Option<f64>,
    plot: Option<&Path>,
    as_json: bool,
) -> Result<ExitCode> {
    // Recycled particles make an MSD meaningless in a membrane: its own report instead.
    if crate::confined::is_membrane(file) {
        anyhow::ensure!(
            window.is_none() && d0.is_none(),
            "{}: --window and --d0 set an MSD fit, which a membrane file does not get (its D0 is stored); leave them out",
            file.display()
        );
        crate::confined::membrane_report(file, species, plot, as_json)?;
        return Ok(ExitCode::SUCCESS);
    }
    let mut options = AnalyzeOptions {
        d0_m2_per_s: d0,
        ..AnalyzeOptions::default()
    };
    if let Some(w) = window {
        let parts = crate::models::parse_list("--window", w)?;
        anyhow::ensure!(
            parts.len() == 2 && parts[0] < parts[1],
            "--window {w}: give two times in seconds, T0,T1 with T0 < T1"
        );
        options.fit.window_s = Some([parts[0], parts[1]]);
    }
    if let Some(text) = axes {
        // Three axes is the most a trajectory has; the reader refuses axes beyond its dimension.
        options.axes = Some(
            thicket_analysis::directions::parse_axes(text, 3)
                .map_err(|e| anyhow::anyhow!("--axes {e}"))?,
        );
    }
    let analysis = analyze(file, species, &options)?;
    let report = &analysis.report;
    let partition = crate::confined::partition_report(file, species, plot)?;
    if as_json {
        let mut value = serde_json::to_value(report)?;
        if let (Some(p), Some(map)) = (&partition, value.as_object_mut()) {
            map.insert("partition".into(), serde_json::to_value(p)?);
        }
        println!("{}", serde_json::to_string_pretty(&value)?);
    } else {
        print!("{}", report.to_table());
        if let Some(p) = &partition {
            print!("{}", p.to_table());
        }
        println!("{}", thicket_analysis::sweep::CAUTION);
    }
    if let Some(prefix) = plot {
        let mut written = thicket_analysis::plot::write_plots(prefix, &analysis.msd, report)
            .with_context(|| format!("writing plots {}_*", prefix.display()))?;
        written.extend(
            thicket_analysis::plot::write_curves(prefix, &analysis.msd, report)
                .with_context(|| format!("writing curves {}_*", prefix.display()))?,
        );
        for p in written {
            eprintln!("wrote {}", p.display());
        }
    }
    Ok(ExitCode::SUCCESS)
}
