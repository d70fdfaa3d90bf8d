//! `thicket tracks`: synthetic camera tracks with ground truth, and the CSV
//! branch of `thicket analyze`.
//!
//! Files, for `--out DIR/NAME.csv`:
//! - `DIR/NAME.trajectory.h5`: the simulated trajectory, recorded every
//!   `output.record_every_steps` steps (the sub-frame interval the camera
//!   averages over); kept, so `thicket analyze` can read the true motion and
//!   `--trajectory` can image it again with other camera settings.
//!   `output.file` of the scenario is not used.
//! - `DIR/NAME.csv`: the detections (columns in thicket_analysis::tracks).
//! - `DIR/NAME.h5`: the detections with the ground truth per track.

use crate::progress;
use anyhow::{bail, Context, Result};
use std::path::PathBuf;
use std::process::ExitCode;
use std::time::Instant;
use thicket_analysis::camera::image_trajectory_on;
use thicket_analysis::track_import::{read_csv_with, ImportOptions, TrackCsvLayout};
use thicket_analysis::track_outputs::{d_histogram_paths, write_d_histogram, write_track_table};
use thicket_analysis::tracks::{
    analyze_track_table, read_truth, truth_path_for, TrackAnalysisOptions, TracksError,
};
use thicket_engine::run::driver::{RunOptions, RunOutcome};
use thicket_engine::Scenario;

/// Exit code after an interrupt (128 + SIGINT, the shell convention).
const EXIT_INTERRUPTED: u8 = 130;

/// What `thicket tracks` is asked to do.
#[derive(Debug, Clone)]
pub struct TracksArgs {
    /// Scenario with a `[camera]` section.
    pub config: PathBuf,
    /// CSV output; by default the scenario's name with `.csv`.
    pub out: Option<PathBuf>,
    /// `--set KEY=VALUE` overrides.
    pub sets: Vec<String>,
    /// Worker threads for the simulation.
    pub threads: Option<usize>,
    /// Overwrite existing outputs.
    pub force: bool,
    /// Image this existing trajectory instead of simulating.
    pub trajectory: Option<PathBuf>,
}

/// Simulates the scenario (unless `--trajectory` is given), images it with
/// its camera and writes the CSV and the HDF5 file with the truth.
pub fn tracks(args: &TracksArgs) -> Result<ExitCode> {
    crate::run::set_threads(args.threads)?;
    let scenario = Scenario::load(&args.config, &args.sets)?;
    if scenario.camera.is_none() {
        return Err(TracksError::NoCamera {
            file: args.config.clone(),
        }
        .into());
    }
    let csv = args
        .out
        .clone()
        .unwrap_or_else(|| args.config.with_extension("csv"));
    let h5 = truth_path_for(&csv);
    if csv == h5 {
        bail!("--out {}: the CSV needs another extension than .h5, which the tracks HDF5 file beside it takes (e.g. --out tracks.csv)", csv.display());
    }
    let simulate = args.trajectory.is_none();
    let trajectory = args
        .trajectory
        .clone()
        .unwrap_or_else(|| csv.with_extension("trajectory.h5"));
    let mut outputs = vec![&csv, &h5];
    if simulate {
        outputs.push(&trajectory);
    }
    for p in outputs.iter().filter(|p| p.exists()) {
        if !args.force {
            bail!(
                "{}: the output file exists; pass --force to overwrite it",
                p.display()
            );
        }
    }
    for w in scenario.warnings() {
        eprintln!("thicket: warning: {w}");
    }

    let started = Instant::now();
    if simulate {
        let stop = crate::run::stop_flag()?;
        let bar = progress::bar(scenario.steps, "tracks");
        let options = RunOptions {
            out: trajectory.clone(),
            force: args.force,
            resume: false,
        };
        let outcome =
            thicket_engine::run::driver::run(&scenario, &options, &stop, &mut |step, _| {
                bar.set_position(step)
            })?;
        bar.finish_and_clear();
        if let RunOutcome::Interrupted { step, .. } = outcome {
            eprintln!(
                "thicket: interrupted at step {step} of {}; no tracks were written. {} holds the frames so far; start again with --force",
                scenario.steps,
                trajectory.display()
            );
            return Ok(ExitCode::from(EXIT_INTERRUPTED));
        }
    }
    let simulated_s = started.elapsed().as_secs_f64();
    let imaging = Instant::now();
    let threads = args
        .threads
        .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()));
    let set = image_trajectory_on(&trajectory, &scenario, threads)
        .with_context(|| format!("imaging {}", trajectory.display()))?;
    set.write_csv(&csv)?;
    set.write_h5(&h5)?;
    let imaged_s = imaging.elapsed().as_secs_f64();
    let c = &set.camera;
    let lengths = set
        .tracks
        .iter()
        .map(|t| t.positions_nm.len())
        .sum::<usize>() as f64
        / set.tracks.len().max(1) as f64;
    println!(
        "wrote {} ({} tracks, {} detections, mean length {:.1} frames, {} frames of {:e} s, {}D) and {} (with ground truth)",
        csv.display(),
        set.tracks.len(),
        set.detections(),
        lengths,
        c.frames,
        c.frame_interval_s,
        c.dims,
        h5.display()
    );
    println!(
        "  camera: exposure {:e} s (blur factor R = {:.4}), σ = {:.2} nm{}; trajectory {} ({}); simulation {:.2} s, camera {:.2} s",
        c.exposure_s,
        c.blur_factor,
        c.sigma_nm,
        c.sigma_z_nm.map_or(String::new(), |z| format!(", σ_z = {z:.2} nm")),
        trajectory.display(),
        if simulate { "simulated" } else { "given" },
        simulated_s,
        imaged_s
    );
    Ok(ExitCode::SUCCESS)
}

/// What `thicket analyze TRACKS.csv` is asked to do.
#[derive(Debug, Clone)]
pub struct AnalyzeTracksArgs {
    /// The tracks CSV.
    pub path: PathBuf,
    /// Print JSON instead of tables.
    pub json: bool,
    /// `--plot PREFIX`: histogram of per-track D and, unless `--tracks-table`
    /// says otherwise, the per-track table `PREFIX_tracks.csv`.
    pub plot: Option<PathBuf>,
    /// Options meant for trajectories were given (refused).
    pub trajectory_options: bool,
    /// Layout and units of the CSV.
    pub import: ImportOptions,
    /// `--exposure`, s.
    pub exposure_s: Option<f64>,
    /// `--tracks-table FILE`.
    pub tracks_table: Option<PathBuf>,
    /// Overwrite existing outputs.
    pub force: bool,
}

/// `thicket analyze TRACKS.csv`: per-track D and σ² by the covariance
/// estimator and the MSD fit, against the truth in the `.h5` file beside the
/// CSV when there is one (bias and spread per species and region), else
/// their distribution over tracks; optionally the per-track table and a
/// histogram of D. Every option is checked and every output path is free
/// (or `--force`) before anything is written.
pub fn analyze_tracks_csv(args: &AnalyzeTracksArgs) -> Result<ExitCode> {
    let path = args.path.as_path();
    if args.trajectory_options {
        bail!("{}: --species, --window, --d0 and --axes apply to trajectories (.h5); a tracks CSV takes --json, --plot and the tracks CSV options (see thicket analyze --help)", path.display());
    }
    let layout = TrackCsvLayout::from_options(path, &args.import)?;
    let table_path = args.tracks_table.clone().or_else(|| {
        args.plot
            .as_ref()
            .map(|p| PathBuf::from(format!("{}_tracks.csv", p.display())))
    });
    let mut outputs: Vec<PathBuf> = table_path.iter().cloned().collect();
    if let Some(prefix) = &args.plot {
        outputs.extend(d_histogram_paths(prefix));
    }
    for p in &outputs {
        if p == path || p == &truth_path_for(path) {
            bail!(
                "{}: an output would replace the input; choose another --plot PREFIX or --tracks-table FILE",
                p.display()
            );
        }
        if p.exists() && !args.force {
            bail!(
                "{}: the output file exists; pass --force to overwrite it",
                p.display()
            );
        }
    }
    let table = read_csv_with(path, &layout)?;
    let truth_path = truth_path_for(path);
    let truth = if truth_path.exists() {
        Some(read_truth(&truth_path)?)
    } else {
        None
    };
    let options = TrackAnalysisOptions {
        exposure_s: args.exposure_s,
        ..TrackAnalysisOptions::default()
    };
    let report = analyze_track_table(&table, truth.as_ref(), &options)?;
    if args.json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", report.to_text());
    }
    let mut written = Vec::new();
    if let Some(t) = &table_path {
        write_track_table(t, &report)?;
        written.push(t.clone());
    }
    if let Some(prefix) = &args.plot {
        written.extend(write_d_histogram(prefix, &report)?);
    }
    if !written.is_empty() {
        let names: Vec<String> = written.iter().map(|p| p.display().to_string()).collect();
        let line = format!("wrote {}", names.join(", "));
        // JSON mode keeps stdout to one JSON object.
        if args.json {
            eprintln!("{line}");
        } else {
            println!("\n{line}");
        }
    }
    Ok(ExitCode::SUCCESS)
}
