//! `thicket validate`: the published checks of the test suite at modest
//! size, to trust an install. The checks live in thicket-analysis.

use anyhow::{Context, Result};
use std::process::ExitCode;
use std::time::Instant;
use thicket_analysis::validate::{run_checks, table, Mode};

/// Runs the checks; exit code 1 when any fails.
pub fn validate(quick: bool, as_json: bool) -> Result<ExitCode> {
    let mode = if quick { Mode::Quick } else { Mode::Full };
    let dir = std::env::temp_dir().join(format!("thicket-validate-{}", std::process::id()));
    std::fs::create_dir_all(&dir)
        .with_context(|| format!("{}: cannot create a working folder", dir.display()))?;
    let started = Instant::now();
    let results = run_checks(mode, &dir, &|area, title| {
        if !as_json {
            eprintln!("  running [{}] {title}", area.name());
        }
    });
    let _ = std::fs::remove_dir_all(&dir);
    let failed = results.iter().filter(|r| !r.passed).count();
    let seconds = started.elapsed().as_secs_f64();
    if as_json {
        println!(
            "{}",
            serde_json::to_string_pretty(&serde_json::json!({
                "mode": mode,
                "checks": results,
                "passed": results.len() - failed,
                "failed": failed,
                "seconds": seconds,
            }))?
        );
    } else {
        print!("{}", table(&results));
        println!(
            "({seconds:.0} s, {} mode)",
            if quick { "quick" } else { "full" }
        );
    }
    Ok(if failed == 0 {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}
