//! Prints how many outside checks ran and how many were skipped in this
//! `cargo test` run. Cargo runs this package's tests last (packages by name,
//! then test targets by name; doctests are off), so the summary ends the run.

#[path = "../../tests/outside/mod.rs"]
mod outside;

use std::collections::BTreeMap;
use std::io::Write;

#[test]
fn outside_checks_summary() {
    let path = outside::log_path();
    let text = std::fs::read_to_string(&path).unwrap_or_default();
    let _ = std::fs::remove_file(&path);
    // One entry per check (a test may call its tool more than once); a skip wins.
    let mut checks: BTreeMap<String, Option<String>> = BTreeMap::new();
    for line in text.lines() {
        let mut parts = line.splitn(3, '\t');
        match (parts.next(), parts.next(), parts.next()) {
            (Some("ran"), Some(name), _) => {
                checks.entry(name.to_owned()).or_insert(None);
            }
            (Some("skipped"), Some(name), reason) => {
                checks.insert(name.to_owned(), Some(reason.unwrap_or("").to_owned()));
            }
            _ => {}
        }
    }
    let skipped: Vec<_> = checks
        .iter()
        .filter_map(|(n, r)| r.as_ref().map(|r| (n, r)))
        .collect();
    let ran = checks.len() - skipped.len();
    let mut err = std::io::stderr();
    // Straight to stderr: the test harness does not capture it.
    for (name, reason) in &skipped {
        let _ = writeln!(err, "outside check skipped: {name}: {reason}");
    }
    let _ = writeln!(
        err,
        "outside checks (h5py, numpy, scipy, pandas, h5dump): {ran} ran, {} skipped",
        skipped.len()
    );
    let ci = std::env::var("CI").is_ok_and(|v| v == "true" || v == "1");
    assert!(
        !ci || skipped.is_empty(),
        "under CI=true no outside check may be skipped"
    );
}
