//! Bad input: a non-zero exit and one message naming the file, the key, the
//! value and what is allowed — never a panic.

use crate::support::*;
use std::path::Path;

const BASE: &str = r#"seed = 7
[medium]
temperature_K = 300.0
[box]
edges_nm = [100.0, 100.0, 100.0]
[[species]]
name = "probe"
radius_nm = 2.0
count = 20
[integrator]
dt_s = 1e-9
steps = 100
"#;

/// Writes a scenario and runs `thicket ARGS...` on it; returns stderr after
/// asserting a clean failure.
fn fails(dir: &Path, text: &str, verb: &str, extra: &[&str], must_contain: &[&str]) -> String {
    let cfg = dir.join("bad.toml");
    std::fs::write(&cfg, text).unwrap();
    let mut args = vec![verb, cfg.to_str().unwrap()];
    args.extend(extra);
    let out = thicket(dir, &args);
    let err = stderr(&out);
    assert!(
        !out.status.success(),
        "expected failure for {must_contain:?}; stdout: {}",
        stdout(&out)
    );
    assert_eq!(out.status.code(), Some(2), "bad input exits with 2: {err}");
    assert!(
        !err.contains("panicked"),
        "panic instead of an error: {err}"
    );
    for needle in must_contain {
        assert!(err.contains(needle), "message lacks {needle:?}: {err}");
    }
    err
}

#[test]
fn unknown_key_is_named_with_its_line() {
    let d = tempdir();
    let text = BASE.replace("steps = 100", "steps = 100\nsubsteps = 4");
    fails(
        d.path(),
        &text,
        "check",
        &[],
        &["bad.toml", "line 13", "substeps", "expected"],
    );
}

#[test]
fn wrong_type() {
    let d = tempdir();
    fails(
        d.path(),
        &BASE.replace("radius_nm = 2.0", "radius_nm = \"two\""),
        "check",
        &[],
        &["bad.toml", "radius_nm", "\"two\"", "expected f64"],
    );
}

#[test]
fn negative_and_zero_radius() {
    let d = tempdir();
    fails(
        d.path(),
        &BASE.replace("radius_nm = 2.0", "radius_nm = -2.0"),
        "check",
        &[],
        &["bad.toml", "species[0].radius_nm", "-2", "greater than 0"],
    );
    fails(
        d.path(),
        &BASE.replace("radius_nm = 2.0", "radius_nm = 0.0"),
        "check",
        &[],
        &["bad.toml", "species[0].radius_nm", "= 0", "greater than 0"],
    );
}

#[test]
fn time_step_not_positive() {
    let d = tempdir();
    fails(
        d.path(),
        &BASE.replace("dt_s = 1e-9", "dt_s = 0.0"),
        "check",
        &[],
        &["bad.toml", "integrator.dt_s", "greater than 0"],
    );
    fails(
        d.path(),
        &BASE.replace("dt_s = 1e-9", "dt_s = -1e-9"),
        "check",
        &[],
        &["integrator.dt_s", "-0.000000001"],
    );
}

#[test]
fn zero_steps() {
    let d = tempdir();
    fails(
        d.path(),
        &BASE.replace("steps = 100", "steps = 0"),
        "check",
        &[],
        &["bad.toml", "integrator.steps", "= 0", "from 1 to"],
    );
}

#[test]
fn non_finite_numbers() {
    let d = tempdir();
    fails(
        d.path(),
        &BASE.replace("temperature_K = 300.0", "temperature_K = nan"),
        "check",
        &[],
        &["medium.temperature_K", "NaN", "finite"],
    );
    fails(
        d.path(),
        &BASE.replace(
            "edges_nm = [100.0, 100.0, 100.0]",
            "edges_nm = [100.0, inf, 100.0]",
        ),
        "check",
        &[],
        &["box.edges_nm[1]", "inf", "finite"],
    );
}

#[test]
fn temperature_not_positive() {
    let d = tempdir();
    fails(
        d.path(),
        &BASE.replace("temperature_K = 300.0", "temperature_K = -5.0"),
        "check",
        &[],
        &["medium.temperature_K", "-5", "greater than 0"],
    );
    // Water's viscosity is only known for liquid water: a frozen "water" is refused.
    fails(
        d.path(),
        &BASE.replace("temperature_K = 300.0", "temperature_K = 250.0"),
        "check",
        &[],
        &[
            "medium.temperature_K",
            "250",
            "273.15 to 373.15",
            "viscosity_Pa_s",
        ],
    );
}

#[test]
fn box_smaller_than_a_particle() {
    let d = tempdir();
    fails(
        d.path(),
        &BASE.replace(
            "edges_nm = [100.0, 100.0, 100.0]",
            "edges_nm = [100.0, 3.0, 100.0]",
        ),
        "check",
        &[],
        &["box.edges_nm[1]", "= 3", "diameter", "probe"],
    );
}

#[test]
fn missing_required_section() {
    let d = tempdir();
    let text = BASE.replace("[integrator]\ndt_s = 1e-9\nsteps = 100\n", "");
    fails(
        d.path(),
        &text,
        "check",
        &[],
        &["bad.toml", "missing field `integrator`"],
    );
}

#[test]
fn empty_file_and_not_toml() {
    let d = tempdir();
    fails(d.path(), "", "check", &[], &["bad.toml", "empty"]);
    fails(
        d.path(),
        "\u{0}\u{1}PNG this is not a scenario ][",
        "check",
        &[],
        &["bad.toml", "TOML parse error", "line 1"],
    );
}

#[test]
fn missing_file() {
    let d = tempdir();
    let out = thicket(d.path(), &["check", "nowhere.toml"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr(&out).contains("nowhere.toml") && stderr(&out).contains("cannot read"),
        "{}",
        stderr(&out)
    );
}

#[test]
fn output_exists_without_force() {
    let d = tempdir();
    std::fs::write(d.path().join("taken.h5"), b"precious").unwrap();
    fails(
        d.path(),
        BASE,
        "run",
        &["--out", "taken.h5"],
        &["taken.h5", "exists", "--force"],
    );
    assert_eq!(
        std::fs::read(d.path().join("taken.h5")).unwrap(),
        b"precious",
        "existing output must not be touched"
    );
    // With --force it is replaced.
    let cfg = d.path().join("bad.toml");
    ok(&thicket(
        d.path(),
        &["run", cfg.to_str().unwrap(), "--out", "taken.h5", "--force"],
    ));
}

#[test]
fn unwritable_output_folder() {
    let d = tempdir();
    fails(
        d.path(),
        BASE,
        "run",
        &["--out", "no/such/folder/t.h5"],
        &["no/such/folder/t.h5", "cannot write", "does not exist"],
    );
}

#[test]
fn resume_without_checkpoint_or_file() {
    let d = tempdir();
    fails(
        d.path(),
        BASE,
        "run",
        &["--out", "never.h5", "--resume"],
        &["never.h5", "cannot resume", "does not exist"],
    );
    let cfg = d.path().join("bad.toml");
    std::fs::write(&cfg, BASE).unwrap();
    ok(&thicket(
        d.path(),
        &["run", cfg.to_str().unwrap(), "--out", "r.h5"],
    ));
    // A completed run leaves no checkpoint. (A mismatched scenario is tested in resume.rs.)
    fails(
        d.path(),
        BASE,
        "run",
        &["--out", "r.h5", "--resume"],
        &[
            "r.h5.ckpt",
            "cannot resume",
            "only a run that was interrupted",
        ],
    );
}

#[test]
fn malformed_set() {
    let d = tempdir();
    fails(
        d.path(),
        BASE,
        "check",
        &["--set", "integrator.steps"],
        &["--set 'integrator.steps'", "KEY=VALUE"],
    );
    fails(
        d.path(),
        BASE,
        "check",
        &["--set", "integrator.stepz=3"],
        &["integrator.stepz=3", "unknown field `stepz`"],
    );
    fails(
        d.path(),
        BASE,
        "check",
        &["--set", "species.probe=3"],
        &["species.probe=3", "name a key"],
    );
    fails(
        d.path(),
        BASE,
        "check",
        &["--set", "integrator.steps=-4"],
        &["integrator.steps", "-4", "from 1 to"],
    );
}

#[test]
fn record_interval_must_divide_steps() {
    let d = tempdir();
    fails(
        d.path(),
        BASE,
        "check",
        &["--set", "output.record_every_steps=7"],
        &[
            "output.record_every_steps",
            "= 7",
            "divides integrator.steps = 100",
        ],
    );
}

#[test]
fn zero_threads() {
    let d = tempdir();
    fails(
        d.path(),
        BASE,
        "run",
        &["--threads", "0", "--out", "x.h5"],
        &["--threads 0", "at least 1"],
    );
}

#[test]
fn duplicate_species_names() {
    let d = tempdir();
    let text = format!("{BASE}[[species]]\nname = \"probe\"\nradius_nm = 1.0\ncount = 3\n");
    let text = text.replace("[integrator]\ndt_s = 1e-9\nsteps = 100\n", "")
        + "[integrator]\ndt_s = 1e-9\nsteps = 100\n";
    fails(
        d.path(),
        &text,
        "check",
        &[],
        &["species[1].name", "unique"],
    );
}
