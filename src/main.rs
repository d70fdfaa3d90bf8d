//! `thicket`: the command-line front end. Parses arguments, builds validated
//! configurations through the libraries and prints; no physics lives here.

mod check;
mod demo;
mod progress;
mod run;

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
        #[arg(long)]
        threads: Option<usize>,
        /// Overwrite an existing trajectory.
        #[arg(long)]
        force: bool,
        /// Continue an interrupted run from its checkpoint.
        #[arg(long, conflicts_with = "force")]
        resume: bool,
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

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Run { config, out, sets, threads, force, resume } => run::run(&config, out, &sets, threads, force, resume),
        Command::Check { config, sets, json } => check::check(&config, &sets, json),
        Command::Demo { out, force } => demo::demo(&out, force),
    };
    match result {
        Ok(code) => code,
        Err(err) => {
            eprintln!("thicket: error: {err:#}");
            ExitCode::from(2)
        }
    }
}
