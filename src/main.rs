//! `thicket`: the command-line front end. Parses arguments, builds validated
//! configurations through the libraries and prints; no physics lives here.

mod analyze;
mod check;
mod confined;
mod demo;
mod models;
mod progress;
mod run;
mod slurm;
mod sweep;
mod tracks;
mod validate;

use clap::{Parser, Subcommand};
use std::path::PathBuf;
use std::process::ExitCode;

/// Brownian dynamics of spheres in crowded and confined media, and the
/// effective diffusivity they show.
#[derive(Parser, Debug)]
#[command(name = "thicket", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
    /// Refuse inputs whose estimated memory exceeds SIZE (e.g. 512M, 8G; default: the memory available now).
    #[arg(long, global = true, value_name = "SIZE", value_parser = parse_max_memory)]
    max_memory: Option<f64>,
}

/// The largest --threads accepted: far above any machine's cores, low enough to start.
const MAX_THREADS: usize = 1024;

/// Parses `--threads`, naming the allowed range.
fn parse_threads(text: &str) -> Result<usize, String> {
    match text.parse::<usize>() {
        Ok(n) if (1..=MAX_THREADS).contains(&n) => Ok(n),
        _ => Err(format!(
            "the thread count must be a whole number from 1 to {MAX_THREADS}"
        )),
    }
}

/// Parses `--max-memory`.
fn parse_max_memory(text: &str) -> Result<f64, String> {
    thicket_engine::scenario::memory::parse_size(text).ok_or_else(|| {
        "a size greater than 0: bytes, or a number with K, M, G or T (powers of 1024), e.g. 512M or 8G".into()
    })
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Run a scenario and write its trajectory (HDF5, H5MD layout).
    Run {
        /// Scenario file (TOML).
        config: PathBuf,
        /// Trajectory file; defaults to output.file in the scenario, else the scenario's name with .h5.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Override a scenario key by dotted path, e.g. --set integrator.steps=1000.
        #[arg(long = "set", value_name = "KEY=VALUE")]
        sets: Vec<String>,
        /// Worker threads (default: all cores). Results do not depend on it.
        #[arg(long, value_parser = parse_threads)]
        threads: Option<usize>,
        /// Overwrite an existing trajectory.
        #[arg(long)]
        force: bool,
        /// Continue an interrupted run from its checkpoint.
        #[arg(long, conflicts_with = "force")]
        resume: bool,
        #[command(flatten)]
        slurm: slurm::SlurmArgs,
        /// Run only part I of N of the ensemble (non-interacting tracers: each species cut into N particle ranges, same medium and streams); default file NAME.partIofN.h5. `thicket analyze` joins the parts.
        #[arg(long, value_name = "I/N")]
        ensemble_part: Option<String>,
    },
    /// Validate a scenario and print derived quantities and warnings.
    Check {
        /// Scenario file (TOML).
        config: PathBuf,
        /// Override a scenario key by dotted path.
        #[arg(long = "set", value_name = "KEY=VALUE")]
        sets: Vec<String>,
        /// Print one JSON object instead of a table.
        #[arg(long)]
        json: bool,
    },
    /// Print published model values (obstruction, fibres, pores) for given parameters.
    Models {
        /// Obstacle volume fractions, comma-separated.
        #[arg(long, default_value = "0.1,0.2,0.3,0.4", allow_hyphen_values = true)]
        phi: String,
        /// Tracer radius over obstacle (or fibre) radius, a/b; 0 for a point tracer.
        #[arg(long, default_value_t = 0.0, allow_hyphen_values = true)]
        size_ratio: f64,
        /// λ = a / r_pore values, comma-separated.
        #[arg(long, default_value = "0.1,0.2,0.3,0.5", allow_hyphen_values = true)]
        lambda: String,
        /// Print one JSON object instead of tables.
        #[arg(long)]
        json: bool,
    },
    /// Synthetic single-particle tracks: simulate, image with the scenario's [camera], write CSV + HDF5 with ground truth.
    Tracks {
        /// Scenario file (TOML) with a [camera] section.
        config: PathBuf,
        /// CSV of detections; the HDF5 file with the truth goes beside it (.h5), the trajectory as .trajectory.h5.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Override a scenario key by dotted path, e.g. --set camera.exposure_s=0.005.
        #[arg(long = "set", value_name = "KEY=VALUE")]
        sets: Vec<String>,
        /// Worker threads for the simulation (default: all cores). Results do not depend on it.
        #[arg(long, value_parser = parse_threads)]
        threads: Option<usize>,
        /// Overwrite existing outputs.
        #[arg(long)]
        force: bool,
        /// Image an existing trajectory of the same scenario instead of simulating (only [camera] may differ).
        #[arg(long)]
        trajectory: Option<PathBuf>,
    },
    /// Analyse a trajectory: MSD, D_eff with its 95 % interval, α, models.
    Analyze {
        /// Trajectory (HDF5, H5MD layout), or a tracks CSV: from `thicket tracks` (estimates against the truth beside it) or another pipeline (see the tracks CSV options).
        file: PathBuf,
        /// The other parts of an ensemble split with `thicket run --ensemble-part I/N`: all N files are analysed as one ensemble.
        #[arg(value_name = "MORE_PARTS")]
        more: Vec<PathBuf>,
        /// Print one JSON object instead of a table.
        #[arg(long)]
        json: bool,
        /// Write PREFIX_msd.{svg,png} and PREFIX_alpha.{svg,png}; for a tracks CSV, PREFIX_d_hist.{svg,png} and PREFIX_tracks.csv.
        #[arg(long, value_name = "PREFIX")]
        plot: Option<PathBuf>,
        /// Species to analyse (default: the first).
        #[arg(long)]
        species: Option<String>,
        /// Fit window T0,T1 in seconds (default: chosen where α(τ) is 1 within its error).
        #[arg(long, value_name = "T0,T1", allow_hyphen_values = true)]
        window: Option<String>,
        /// D0 in m²/s, for files that do not carry it.
        #[arg(long, value_name = "M2_PER_S", allow_hyphen_values = true)]
        d0: Option<f64>,
        /// Axes of the headline D_eff, e.g. xy or z (default: what the geometry defines: lateral in a slit, axial in a pore, all axes in an open box).
        #[arg(long, value_name = "AXES")]
        axes: Option<String>,
        #[command(flatten)]
        track_csv: TrackCsvArgs,
    },
    /// Run a grid of scenarios × seeds and summarise D_eff/D0 beside the models.
    Sweep {
        /// Sweep file (TOML): scenario, seeds, [grid] of keys and values, [set] fixed overrides.
        sweep: PathBuf,
        /// Output folder (summary.csv, summary.json, sweep.svg/png, points/, runs/); default: the sweep file's name without .toml, in the current folder.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Run only every N-th run starting at the I-th (1-based), e.g. 2/8 for a job array.
        #[arg(long, value_name = "I/N")]
        shard: Option<String>,
        /// Run nothing: join the results already in the output folder (from all shards).
        #[arg(long)]
        merge: bool,
        /// Rerun points whose results exist.
        #[arg(long)]
        force: bool,
        /// Worker threads (default: all cores). Results do not depend on it.
        #[arg(long, value_parser = parse_threads)]
        threads: Option<usize>,
        #[command(flatten)]
        slurm: slurm::SlurmArgs,
    },
    /// Run the published checks of the test suite (free, obstruction, crowders, walls, pores,
    /// membranes, camera) and report each with its source (exit 1 on a failure).
    Validate {
        /// Modest sizes: under a minute on two cores (the default runs larger systems).
        #[arg(long)]
        quick: bool,
        /// Print one JSON object instead of a table.
        #[arg(long)]
        json: bool,
    },
    /// Run the built-in demonstration end to end and leave a report behind.
    Demo {
        /// Output folder.
        #[arg(long, default_value = "thicket-demo")]
        out: PathBuf,
        /// Overwrite earlier demo output.
        #[arg(long)]
        force: bool,
    },
}

/// Options of `thicket analyze TRACKS.csv` for tracks from other pipelines
/// (README, "Synthetic tracks").
#[derive(clap::Args, Debug, Clone, Default)]
#[command(next_help_heading = "Tracks CSV (other pipelines)")]
struct TrackCsvArgs {
    /// Which column holds what: KEY=COLUMN pairs, keys track, frame, time, x, y, z; COLUMN a header name or a 1-based number, e.g. track=TRACK_ID,frame=FRAME,x=POSITION_X,y=POSITION_Y (default: thicket's own track_id, frame, time_s, x_nm, y_nm[, z_nm]).
    #[arg(long, value_name = "KEY=COLUMN,...")]
    columns: Option<String>,
    /// Unit of the position columns: nm, um (µm), or px with --pixel-size (default nm).
    #[arg(long, value_name = "UNIT")]
    length_unit: Option<String>,
    /// Pixel size in nm, with --length-unit px.
    #[arg(long, value_name = "NM", allow_hyphen_values = true)]
    pixel_size: Option<f64>,
    /// Unit of the time column: s or ms (default s).
    #[arg(long, value_name = "UNIT")]
    time_unit: Option<String>,
    /// Frame interval in seconds, for files with frame numbers but no times (or times off a grid).
    #[arg(long, value_name = "S", allow_hyphen_values = true)]
    frame_interval: Option<f64>,
    /// Exposure time per frame in seconds, 0 to the frame interval: sets the blur factor R = t_E/(6Δt) (default: from the truth file beside a thicket CSV, else R = 1/6).
    #[arg(long, value_name = "S", allow_hyphen_values = true)]
    exposure: Option<f64>,
    /// Lines to skip after the header row (rows of units or descriptions).
    #[arg(long, value_name = "N")]
    skip_rows: Option<usize>,
    /// Write the per-track table (CSV) here (default with --plot PREFIX: PREFIX_tracks.csv).
    #[arg(long, value_name = "FILE")]
    tracks_table: Option<PathBuf>,
    /// Overwrite existing plots and tables (with a trajectory too: --plot files).
    #[arg(long)]
    force: bool,
}

impl TrackCsvArgs {
    /// Options given, by name (they apply to a tracks CSV only).
    fn given(&self) -> Vec<&'static str> {
        [
            (self.columns.is_some(), "--columns"),
            (self.length_unit.is_some(), "--length-unit"),
            (self.pixel_size.is_some(), "--pixel-size"),
            (self.time_unit.is_some(), "--time-unit"),
            (self.frame_interval.is_some(), "--frame-interval"),
            (self.exposure.is_some(), "--exposure"),
            (self.skip_rows.is_some(), "--skip-rows"),
            (self.tracks_table.is_some(), "--tracks-table"),
        ]
        .into_iter()
        .filter_map(|(on, name)| on.then_some(name))
        .collect()
    }
}

fn main() -> ExitCode {
    restore_default_sigpipe();
    let cli = Cli::parse();
    if let Some(bytes) = cli.max_memory {
        thicket_engine::scenario::memory::set_limit(bytes);
    }
    if let Err(err) = check_out_option(&cli.command) {
        eprintln!("thicket: error: {err:#}");
        return ExitCode::from(2);
    }
    let result = match cli.command {
        Command::Run {
            config,
            out,
            sets,
            threads,
            force,
            resume,
            ensemble_part,
            slurm,
        } if slurm.slurm || slurm.status => {
            let given: Vec<&str> = [
                (force, "--force"),
                (resume, "--resume"),
                (ensemble_part.is_some(), "--ensemble-part"),
                (threads.is_some(), "--threads (use --task-cpus)"),
            ]
            .into_iter()
            .filter_map(|(on, name)| on.then_some(name))
            .collect();
            // The folder of the parts, by default named after the scenario.
            let out = out.unwrap_or_else(|| config.with_extension(""));
            if !given.is_empty() {
                Err(anyhow::anyhow!(
                    "{} do not go with --slurm or --status: the tasks choose them",
                    given.join(", ")
                ))
            } else {
                let work = slurm::Work::Ensemble {
                    config: &config,
                    sets: &sets,
                };
                if slurm.status {
                    slurm::status(&work, &out)
                } else {
                    slurm::submit(&work, &out, &slurm)
                }
            }
        }
        Command::Run {
            config,
            out,
            sets,
            threads,
            force,
            resume,
            ensemble_part,
            ..
        } => run::run(
            &config,
            out,
            &sets,
            threads,
            force,
            resume,
            ensemble_part.as_deref(),
        ),
        Command::Check { config, sets, json } => check::check(&config, &sets, json),
        Command::Models {
            phi,
            size_ratio,
            lambda,
            json,
        } => models::models(&phi, size_ratio, &lambda, json),
        Command::Analyze { file, more, .. }
            if !more.is_empty()
                && std::iter::once(&file)
                    .chain(&more)
                    .any(|f| f.extension().is_some_and(|e| e.eq_ignore_ascii_case("csv"))) =>
        {
            Err(anyhow::anyhow!(
                "{}: several files are joined only as the parts of a split trajectory (.h5); analyse a tracks CSV on its own",
                file.display()
            ))
        }
        Command::Analyze {
            file,
            json,
            plot,
            species,
            window,
            d0,
            axes,
            track_csv: t,
            ..
        } if file
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("csv")) =>
        {
            tracks::analyze_tracks_csv(&tracks::AnalyzeTracksArgs {
                path: file,
                json,
                plot,
                trajectory_options: species.is_some()
                    || window.is_some()
                    || d0.is_some()
                    || axes.is_some(),
                import: thicket_analysis::track_import::ImportOptions {
                    columns: t.columns,
                    length_unit: t.length_unit,
                    pixel_size_nm: t.pixel_size,
                    time_unit: t.time_unit,
                    frame_interval_s: t.frame_interval,
                    skip_rows: t.skip_rows.unwrap_or(0),
                },
                exposure_s: t.exposure,
                tracks_table: t.tracks_table,
                force: t.force,
            })
        }
        Command::Analyze {
            file, track_csv, ..
        } if !track_csv.given().is_empty() => Err(anyhow::anyhow!(
            "{}: {} apply to a tracks CSV (.csv), not to a trajectory",
            file.display(),
            track_csv.given().join(", ")
        )),
        Command::Analyze {
            file,
            more,
            json,
            plot,
            species,
            window,
            d0,
            axes,
            track_csv,
        } => analyze::analyze_trajectory(&analyze::TrajectoryArgs {
            file: &file,
            more: &more,
            species: species.as_deref(),
            window: window.as_deref(),
            axes: axes.as_deref(),
            d0,
            plot: plot.as_deref(),
            as_json: json,
            force: track_csv.force,
        }),
        Command::Sweep {
            sweep,
            out,
            shard,
            merge,
            force,
            threads,
            slurm,
        } => {
            // By default the folder is named after the sweep file, in the current folder.
            let out = out.unwrap_or_else(|| {
                PathBuf::from(sweep.file_stem().unwrap_or_else(|| "sweep".as_ref()))
            });
            let work = slurm::Work::Sweep { file: &sweep };
            let given: Vec<&str> = [
                (shard.is_some(), "--shard"),
                (merge, "--merge"),
                (force, "--force"),
                (threads.is_some(), "--threads (use --task-cpus)"),
            ]
            .into_iter()
            .filter_map(|(on, name)| on.then_some(name))
            .collect();
            if (slurm.status || slurm.slurm) && !given.is_empty() {
                Err(anyhow::anyhow!(
                    "{} do not go with --slurm or --status: the tasks choose them",
                    given.join(", ")
                ))
            } else if slurm.status {
                slurm::status(&work, &out)
            } else if slurm.slurm {
                slurm::submit(&work, &out, &slurm)
            } else {
                run::set_threads(threads)
                    .and_then(|_| sweep::sweep(&sweep, &out, shard.as_deref(), merge, force))
            }
        }
        Command::Validate { quick, json } => validate::validate(quick, json),
        Command::Demo { out, force } => demo::demo(&out, force),
        Command::Tracks {
            config,
            out,
            sets,
            threads,
            force,
            trajectory,
        } => tracks::tracks(&tracks::TracksArgs {
            config,
            out,
            sets,
            threads,
            force,
            trajectory,
        }),
    };
    match result {
        Ok(code) => code,
        Err(err) => {
            eprintln!("thicket: error: {err:#}");
            ExitCode::from(2)
        }
    }
}

/// Refuses an `--out` that is empty or an existing folder, naming the option.
fn check_out_option(command: &Command) -> anyhow::Result<()> {
    let out = match command {
        // With --slurm or --status, a run's --out is the folder of its parts.
        Command::Run { slurm, .. } if slurm.slurm || slurm.status => return Ok(()),
        Command::Run { out: Some(o), .. } | Command::Tracks { out: Some(o), .. } => o,
        _ => return Ok(()),
    };
    anyhow::ensure!(
        !out.as_os_str().is_empty(),
        "--out \"\": give a file path, e.g. --out run.h5"
    );
    anyhow::ensure!(
        !out.is_dir(),
        "--out {}: this is a folder; give a file path inside it, e.g. --out {}",
        out.display(),
        out.join("run.h5").display()
    );
    Ok(())
}

/// Output piped into a reader that stops early (`thicket analyze --json | head`)
/// ends the program quietly, as Unix tools do, instead of panicking on the write.
fn restore_default_sigpipe() {
    #[cfg(unix)]
    // SAFETY: called first in main, before any thread exists; SIG_DFL is always a valid disposition.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
}
