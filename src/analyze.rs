//! `thicket analyze`: D_eff with its interval, α, and the models beside it.

use anyhow::{Context, Result};
use std::path::Path;
use std::process::ExitCode;
use thicket_analysis::estimators::{analyze, AnalyzeOptions};

/// Suffixes of the files `--plot PREFIX` may write for a trajectory.
const PLOT_FILES: [&str; 12] = [
    "_pairs.csv",
    "_msd.svg",
    "_msd.png",
    "_alpha.svg",
    "_alpha.png",
    "_msd.csv",
    "_van_hove.csv",
    "_van_hove.svg",
    "_van_hove.png",
    "_profile.csv",
    "_profile.svg",
    "_profile.png",
];

/// What `thicket analyze FILE.h5` is asked to do.
pub struct TrajectoryArgs<'a> {
    /// The trajectory.
    pub file: &'a Path,
    /// The other parts of a split ensemble, analysed with `file` as one.
    pub more: &'a [std::path::PathBuf],
    /// Species (default: the first tracer).
    pub species: Option<&'a str>,
    /// `--window T0,T1`.
    pub window: Option<&'a str>,
    /// `--axes`.
    pub axes: Option<&'a str>,
    /// `--d0`.
    pub d0: Option<f64>,
    /// `--plot PREFIX`.
    pub plot: Option<&'a Path>,
    /// `--json`.
    pub as_json: bool,
    /// `--force`: replace existing plot files.
    pub force: bool,
}

/// Analyses a trajectory and prints a table or JSON; optional plots
/// (existing files are refused unless `force`).
pub fn analyze_trajectory(args: &TrajectoryArgs) -> Result<ExitCode> {
    let TrajectoryArgs {
        file,
        more,
        species,
        window,
        axes,
        d0,
        plot,
        as_json,
        force,
    } = *args;
    // Every file --plot may write is checked before anything is written.
    if let (Some(prefix), false) = (plot, force) {
        let taken: Vec<String> = PLOT_FILES
            .iter()
            .map(|suffix| {
                let mut name = prefix.as_os_str().to_owned();
                name.push(suffix);
                std::path::PathBuf::from(name)
            })
            .filter(|p| p.exists())
            .map(|p| p.display().to_string())
            .collect();
        anyhow::ensure!(
            taken.is_empty(),
            "--plot {}: {} exist already; pass --force to overwrite them, or choose another prefix",
            prefix.display(),
            taken.join(", ")
        );
    }
    // Recycled particles make an MSD meaningless in a membrane: its own report instead.
    if crate::confined::is_membrane(file) {
        anyhow::ensure!(
            window.is_none() && d0.is_none(),
            "{}: --window and --d0 set an MSD fit, which a membrane file does not get (its D0 is stored); leave them out",
            file.display()
        );
        crate::confined::membrane_report(file, species, plot, as_json, force)?;
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
    let analysis = if more.is_empty() {
        analyze(file, species, &options)?
    } else {
        let mut paths = vec![file];
        paths.extend(more.iter().map(|p| p.as_path()));
        thicket_analysis::estimators::analyze_parts(&paths, species, &options)?
    };
    let report = &analysis.report;
    // The wall profile is per file; the parts are joined for the MSD only.
    let partition = if more.is_empty() {
        crate::confined::partition_report(file, species, plot, force)?
    } else {
        None
    };
    let stored = more
        .is_empty()
        .then(|| thicket_analysis::report::stored_scenario(file))
        .flatten();
    // Binding species: bound fraction, dwell times and the fast-exchange model, per file.
    let binding = match &stored {
        Some(scenario) => thicket_analysis::binding::binding_report(
            file,
            scenario,
            &report.species,
            report.d_eff_m2_per_s,
        )
        .map_err(|e| anyhow::anyhow!("{}: binding record: {e}", file.display()))?,
        None => None,
    };
    // Soft pairs: B₂ from the pair distribution against the model's integral, per file.
    let pairs = match &stored {
        Some(scenario) => thicket_analysis::pairs::pair_report(file, scenario, &report.species)
            .map_err(|e| anyhow::anyhow!("{}: pair distribution: {e}", file.display()))?,
        None => None,
    };
    if as_json {
        let mut value = serde_json::to_value(report)?;
        if let (Some(p), Some(map)) = (&partition, value.as_object_mut()) {
            map.insert("partition".into(), serde_json::to_value(p)?);
        }
        if let (Some(b), Some(map)) = (&binding, value.as_object_mut()) {
            map.insert("binding".into(), serde_json::to_value(b)?);
        }
        if let (Some(p), Some(map)) = (&pairs, value.as_object_mut()) {
            map.insert("pairs".into(), serde_json::to_value(p)?);
        }
        println!("{}", serde_json::to_string_pretty(&value)?);
    } else {
        print!("{}", report.to_table());
        if let Some(p) = &partition {
            print!("{}", p.to_table());
        }
        if let Some(b) = &binding {
            print!("{}", b.to_table());
        }
        if let Some(p) = &pairs {
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
        if let Some(p) = &pairs {
            let mut name = prefix.as_os_str().to_owned();
            name.push("_pairs.csv");
            let path = std::path::PathBuf::from(name);
            std::fs::write(&path, p.to_csv())
                .with_context(|| format!("writing {}", path.display()))?;
            written.push(path);
        }
        for p in written {
            eprintln!("wrote {}", p.display());
        }
    }
    Ok(ExitCode::SUCCESS)
}
