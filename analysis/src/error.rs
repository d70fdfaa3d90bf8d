//! The error type of thicket-analysis.
//!
//! Every failure is a value that names what was being read (file, HDF5
//! object, option), the offending value and what would have been allowed,
//! so that the CLI can print it as one paragraph without further context.

use std::path::{Path, PathBuf};

/// Result alias used throughout thicket-analysis.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// An analysis error: a boxed [`ErrorKind`] (boxed so that `Result` stays
/// one pointer wide on the hot paths).
#[derive(Debug, thiserror::Error)]
#[error(transparent)]
pub struct Error {
    kind: Box<ErrorKind>,
}

impl Error {
    /// The kind of failure, with its context.
    pub fn kind(&self) -> &ErrorKind {
        &self.kind
    }

    /// Consumes the error and returns its kind.
    pub fn into_kind(self) -> ErrorKind {
        *self.kind
    }
}

impl From<ErrorKind> for Error {
    fn from(kind: ErrorKind) -> Self {
        Error {
            kind: Box::new(kind),
        }
    }
}

/// What went wrong, with the context needed to fix it.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum ErrorKind {
    /// The file could not be opened or read at the operating-system level.
    #[error("cannot read '{}': {source}", path.display())]
    Io {
        /// The file.
        path: PathBuf,
        /// The underlying I/O error.
        source: std::io::Error,
    },

    /// The file exists but carries no HDF5 signature.
    #[error("'{}' is not an HDF5 file (no HDF5 signature found); expected an H5MD trajectory written by `thicket run` or another H5MD writer", path.display())]
    NotHdf5 {
        /// The file.
        path: PathBuf,
    },

    /// The HDF5 library failed on an object of the file.
    #[error("HDF5 error in '{}' at '{object}': {source}", path.display())]
    Hdf5 {
        /// The file.
        path: PathBuf,
        /// The group, dataset or attribute being accessed.
        object: String,
        /// The library's error.
        source: hdf5::Error,
    },

    /// A group or dataset the H5MD layout requires is absent.
    #[error("'{}' has no '{object}': {expected}", path.display())]
    Missing {
        /// The file.
        path: PathBuf,
        /// The absent group, dataset or attribute.
        object: String,
        /// What the layout expects there.
        expected: String,
    },

    /// A species was asked for that the file does not contain.
    #[error("'{}' has no species '{species}'; available: [{}]", path.display(), available.join(", "))]
    UnknownSpecies {
        /// The file.
        path: PathBuf,
        /// The requested species.
        species: String,
        /// The species the file does contain.
        available: Vec<String>,
    },

    /// A dataset or attribute has a shape other than the layout allows.
    #[error("'{}': '{object}' has shape {shape:?}; allowed: {allowed}", path.display())]
    BadShape {
        /// The file.
        path: PathBuf,
        /// The dataset or attribute.
        object: String,
        /// Its actual shape.
        shape: Vec<usize>,
        /// The shapes that are allowed.
        allowed: String,
    },

    /// A dataset or attribute holds a value the analysis cannot use.
    #[error("'{}': '{object}' has {value}; allowed: {allowed}", path.display())]
    BadValue {
        /// The file.
        path: PathBuf,
        /// The dataset or attribute.
        object: String,
        /// The offending value, described.
        value: String,
        /// What is allowed.
        allowed: String,
    },

    /// The trajectory is too short or has too few particles for the analysis.
    #[error("{}{what} is {found}; the analysis needs at least {needed}", file_prefix(path.as_deref()))]
    TooLittleData {
        /// The file, when the data came from one.
        path: Option<PathBuf>,
        /// What is counted (e.g. "the number of frames of species 'tracer'").
        what: String,
        /// How many there are.
        found: usize,
        /// How many are needed.
        needed: usize,
    },

    /// An analysis option is out of its allowed range.
    #[error("option '{option}' = {value} is invalid; allowed: {allowed}")]
    InvalidOption {
        /// The option's name.
        option: String,
        /// The given value.
        value: String,
        /// What is allowed.
        allowed: String,
    },

    /// A fit window given by the caller lies outside the lags present.
    #[error("fit window [{t0_s:e}, {t1_s:e}] s is outside the data: the lags available run from {:e} s to {:e} s and the window must hold at least {needed_lags} of them (it holds {found_lags})", available_s[0], available_s[1])]
    FitWindow {
        /// Window start (s).
        t0_s: f64,
        /// Window end (s).
        t1_s: f64,
        /// The lag range present in the data, [first, last] (s).
        available_s: [f64; 2],
        /// Lags of the grid inside the window.
        found_lags: usize,
        /// Lags needed for a fit.
        needed_lags: usize,
    },

    /// The geometry defines no MSD-based diffusivity (a membrane, whose
    /// particles are recycled between baths, or no free axis).
    #[error("'{}': {reason}", path.display())]
    NoDiffusivity {
        /// The trajectory.
        path: PathBuf,
        /// Why, and what to use instead.
        reason: String,
    },

    /// Writing a plot or report file failed.
    #[error("cannot write '{}': {message}", path.display())]
    Output {
        /// The output file.
        path: PathBuf,
        /// What failed.
        message: String,
    },
}

/// "'FILE': " for messages about a file's contents, nothing otherwise.
fn file_prefix(path: Option<&Path>) -> String {
    path.map_or_else(String::new, |p| format!("'{}': ", p.display()))
}

impl Error {
    /// An HDF5 failure on `object` of the file at `path`.
    pub(crate) fn hdf5(path: &Path, object: impl Into<String>, source: hdf5::Error) -> Self {
        ErrorKind::Hdf5 {
            path: path.to_path_buf(),
            object: object.into(),
            source,
        }
        .into()
    }

    /// A required object of the layout is absent.
    pub(crate) fn missing(
        path: &Path,
        object: impl Into<String>,
        expected: impl Into<String>,
    ) -> Self {
        ErrorKind::Missing {
            path: path.to_path_buf(),
            object: object.into(),
            expected: expected.into(),
        }
        .into()
    }

    /// A value in the file the analysis cannot use.
    pub(crate) fn bad_value(
        path: &Path,
        object: impl Into<String>,
        value: impl Into<String>,
        allowed: impl Into<String>,
    ) -> Self {
        ErrorKind::BadValue {
            path: path.to_path_buf(),
            object: object.into(),
            value: value.into(),
            allowed: allowed.into(),
        }
        .into()
    }

    /// An option out of range.
    pub(crate) fn invalid_option(
        option: impl Into<String>,
        value: impl std::fmt::Display,
        allowed: impl Into<String>,
    ) -> Self {
        ErrorKind::InvalidOption {
            option: option.into(),
            value: value.to_string(),
            allowed: allowed.into(),
        }
        .into()
    }
}
