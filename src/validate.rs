//! `thicket validate`: published checks at modest size, to trust an install.

use anyhow::{Context, Result};
use std::process::ExitCode;
use std::time::Instant;
use thicket_analysis::validate::{run_checks, table};

/// Runs the checks; exit code 1 when any fails.
pub fn validate(as_json: bool) -> Result<ExitCode> {
    let dir = std::env::temp_dir().join(format!("thicket-validate-{}", std::process::id()));
    std::fs::create_dir_all(&dir)
        .with_context(|| format!("{}: cannot create a working folder", dir.display()))?;
    let started = Instant::now();
    let results = run_checks(&dir, &|name| {
        if !as_json {
            eprintln!("  running: {name}");
        }
    });
    let _ = std::fs::remove_dir_all(&dir);
    let failed = results.iter().filter(|r| !r.passed).count();
    if as_json {
        println!(
            "{}",
            serde_json::to_string_pretty(
                &serde_json::json!({ "checks": results, "failed": failed, "seconds": started.elapsed().as_secs_f64() })
            )?
        );
    } else {
        print!("{}", table(&results));
        println!("({:.0} s)", started.elapsed().as_secs_f64());
    }
    Ok(if failed == 0 {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(1)
    })
}
