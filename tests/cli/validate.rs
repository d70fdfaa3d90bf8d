//! `thicket validate --quick`: every published check passes at modest size,
//! in the table and in the JSON form.

use crate::support::*;

/// The quick table passes, lists at least a dozen checks over every area,
/// and names a source for each.
#[test]
fn quick_validation_passes_and_names_its_sources() {
    let dir = tempdir();
    let out = ok(&thicket(dir.path(), &["validate", "--quick"]));
    let verdicts = out
        .lines()
        .filter(|l| l.starts_with("PASS") || l.starts_with("FAIL"))
        .count();
    let sources = out
        .lines()
        .filter(|l| l.trim_start().starts_with("source: "))
        .count();
    assert!(verdicts >= 12, "only {verdicts} checks:\n{out}");
    assert_eq!(sources, verdicts, "a check without its source:\n{out}");
    assert!(!out.contains("FAIL"), "{out}");
    for area in [
        "[free]",
        "[obstruction]",
        "[crowders]",
        "[walls]",
        "[pores]",
        "[membranes]",
        "[camera]",
    ] {
        assert!(out.contains(area), "no {area} checks:\n{out}");
    }
    assert!(
        out.contains(&format!("{verdicts} of {verdicts} checks passed")),
        "{out}"
    );
}

/// The JSON form parses and every check carries source, expected, measured,
/// tolerance and verdict.
#[test]
fn quick_validation_json_has_every_field() {
    let dir = tempdir();
    let out = ok(&thicket(dir.path(), &["validate", "--quick", "--json"]));
    let v: serde_json::Value = serde_json::from_str(&out).expect("validate --json prints JSON");
    let checks = v["checks"].as_array().expect("a list of checks");
    assert!(checks.len() >= 12, "only {} checks", checks.len());
    assert_eq!(v["failed"].as_u64(), Some(0), "{out}");
    for c in checks {
        assert!(
            c["source"].as_str().is_some_and(|s| !s.is_empty()),
            "no source: {c}"
        );
        assert!(c["area"].is_string(), "no area: {c}");
        for key in ["expected", "measured", "tolerance"] {
            assert!(c[key].is_number(), "{key} is not a number: {c}");
        }
        assert_eq!(c["verdict"], "pass", "{c}");
    }
}
