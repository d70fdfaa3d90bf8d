//! Reading a scenario: file, `--set` overrides, validation, and the memory
//! estimate checked before anything is allocated.

use crate::base::error::{EngineError, Result};
use crate::scenario::config::{RawScenario, Scenario};
use crate::scenario::memory;
use std::path::Path;

impl Scenario {
    /// Reads, overrides and validates a scenario file.
    ///
    /// # Errors
    /// Any read, parse, override or validation failure, naming file and key.
    pub fn load(path: &Path, overrides: &[String]) -> Result<Self> {
        let text = std::fs::read_to_string(path).map_err(|source| EngineError::ReadScenario {
            file: path.to_path_buf(),
            source,
        })?;
        Self::from_text(&text, path, overrides)
    }

    /// Parses, overrides and validates scenario text; `path` is used in messages.
    ///
    /// # Errors
    /// As [`Scenario::load`].
    pub fn from_text(text: &str, path: &Path, overrides: &[String]) -> Result<Self> {
        let raw = RawScenario::parse(text, path)?;
        let raw = raw.with_overrides(overrides)?;
        let scenario = raw.validate(path)?;
        // Refused here, before any caller allocates particles, obstacles or grids.
        if let Some((limit, source)) = memory::current_limit() {
            memory::check(&scenario, limit, source)?;
        }
        Ok(scenario)
    }
}
