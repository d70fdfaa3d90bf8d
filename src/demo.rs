//! `thicket demo`: a built-in scenario end to end.

use anyhow::Result;
use std::path::Path;
use std::process::ExitCode;

/// Runs the demonstration into `out`.
pub fn demo(out: &Path, force: bool) -> Result<ExitCode> {
    let _ = (out, force);
    anyhow::bail!("the demo is being built")
}
