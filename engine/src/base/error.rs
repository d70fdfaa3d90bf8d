//! Errors of the engine. Each names the file, key and value concerned and
//! what would have been allowed.

use std::path::PathBuf;

/// Everything that can go wrong while reading a scenario or running it.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum EngineError {
    /// The scenario file could not be read.
    #[error("{}: cannot read the scenario file: {source}", file.display())]
    ReadScenario {
        /// Scenario path.
        file: PathBuf,
        /// Underlying I/O error.
        source: std::io::Error,
    },
    /// The scenario file is empty.
    #[error("{}: the file is empty; a scenario needs at least [medium], [box], [[species]] and [integrator]", file.display())]
    EmptyScenario {
        /// Scenario path.
        file: PathBuf,
    },
    /// The scenario is not valid TOML, or has unknown keys or wrong types.
    #[error("{}: {message}", file.display())]
    ParseScenario {
        /// Scenario path.
        file: PathBuf,
        /// Parser message, with line and column.
        message: String,
    },
    /// A key has a value outside what is allowed.
    #[error("{}: key `{key}` = {value} is not allowed; {allowed}", file.display())]
    InvalidValue {
        /// Scenario path.
        file: PathBuf,
        /// Dotted key.
        key: String,
        /// The offending value, as written.
        value: String,
        /// What would be allowed.
        allowed: String,
    },
    /// A `--set KEY=VALUE` override is malformed or names no key.
    #[error("--set '{assignment}': {reason}")]
    Override {
        /// The assignment as given.
        assignment: String,
        /// Why it was refused.
        reason: String,
    },
    /// The output file exists and `--force` was not given.
    #[error("{}: the output file exists; pass --force to overwrite it, or --resume to continue an interrupted run", file.display())]
    OutputExists {
        /// Output path.
        file: PathBuf,
    },
    /// Another run holds the output's lock.
    #[error("{}: another thicket run (pid {holder}) is writing this file; wait for it to end or stop it; --force does not override a running run", file.display())]
    OutputLocked {
        /// Output path.
        file: PathBuf,
        /// Process id recorded in the lock file, as text.
        holder: String,
    },
    /// The output folder does not exist or is not writable.
    #[error("{}: cannot write the output file: {reason}", file.display())]
    OutputNotWritable {
        /// Output path.
        file: PathBuf,
        /// What failed.
        reason: String,
    },
    /// `--resume` was asked for but cannot be honoured.
    #[error("{}: cannot resume: {reason}", file.display())]
    Resume {
        /// Output (or checkpoint) path.
        file: PathBuf,
        /// Why not.
        reason: String,
    },
    /// Obstacle or particle placement failed to reach its target.
    #[error("{}: placement stopped: {reason}", file.display())]
    Placement {
        /// Scenario path.
        file: PathBuf,
        /// What was reached and why it stopped.
        reason: String,
    },
    /// HDF5 library error while writing a trajectory.
    #[error("{}: HDF5 error: {source}", file.display())]
    Hdf5 {
        /// Trajectory path.
        file: PathBuf,
        /// Library error.
        source: hdf5::Error,
    },
    /// The run would need more memory than the limit allows.
    #[error("{}: the run would need about {needed} of memory, more than the limit of {limit}; {detail}", file.display())]
    Memory {
        /// Scenario path.
        file: PathBuf,
        /// Estimated need, formatted.
        needed: String,
        /// The limit and where it comes from.
        limit: String,
        /// The largest part and the keys that set it.
        detail: String,
    },
    /// Other I/O error (checkpoints, CSV inputs).
    #[error("{}: {source}", file.display())]
    Io {
        /// Path concerned.
        file: PathBuf,
        /// Underlying error.
        source: std::io::Error,
    },
}

/// Result with [`EngineError`].
pub type Result<T, E = EngineError> = std::result::Result<T, E>;
