//! The numbers a user takes home: the diffusivity each geometry defines,
//! one model table for every verb, and fit quality carried into sweeps.

use crate::support::*;
use serde_json::Value;
use std::path::Path;

fn json_of(out: &std::process::Output) -> Value {
    serde_json::from_str(&ok(out)).expect("the command prints JSON")
}

/// Runs a shipped config shortened by `sets` into `dir/out` and returns `analyze --json`.
fn run_and_analyze(dir: &Path, config: &str, out: &str, sets: &[&str]) -> Value {
    let cfg = repo(config);
    let mut args = vec!["run", cfg.to_str().unwrap(), "--out", out];
    for s in sets {
        args.extend(["--set", s]);
    }
    ok(&thicket(dir, &args));
    json_of(&thicket(dir, &["analyze", out, "--json"]))
}

/// The model entry called `name` in a report's model table.
fn model_value(report: &Value, name: &str) -> f64 {
    report["model_table"]
        .as_array()
        .unwrap()
        .iter()
        .find(|e| e["name"] == name)
        .unwrap_or_else(|| panic!("no model '{name}' in {}", report["model_table"]))["value"]
        .as_f64()
        .unwrap()
}

/// Asserts `expected` lies within 2.5 half-widths of the 95 % interval
/// around `measured` (about 4.9 standard errors).
fn within_interval(measured: f64, ci: &Value, expected: f64, what: &str) {
    let (lo, hi) = (ci[0].as_f64().unwrap(), ci[1].as_f64().unwrap());
    let half = 0.5 * (hi - lo);
    assert!(
        (measured - expected).abs() <= 2.5 * half,
        "{what}: measured {measured} [{lo}, {hi}] vs expected {expected}"
    );
}

/// In a slit the headline D_eff is lateral (x, y), and it matches the
/// gap-averaged Faxén mobility the engine models (Faxén's series,
/// REFERENCES.md, averaged exactly over the open gap: the lateral MSD of an
/// equilibrium start is linear at every lag). The bounded z axis is flagged.
#[test]
fn slit_reports_the_lateral_diffusivity_of_its_wall_model() {
    let dir = tempdir();
    let r = run_and_analyze(
        dir.path(),
        "configs/slit.toml",
        "slit.h5",
        &[
            "species.globin.count=500",
            "integrator.steps=20000",
            "output.record_every_steps=200",
        ],
    );
    assert!(r["direction"].as_str().unwrap().starts_with("lateral"));
    assert_eq!(r["direction_axes"], serde_json::json!([0, 1]));
    assert_eq!(r["bounded_axes"], serde_json::json!([false, false, true]));
    assert_eq!(r["apparent"], false);
    let engine = model_value(&r, "this engine's wall model ⟨D∥⟩/D0");
    within_interval(
        r["d_eff_over_d0"].as_f64().unwrap(),
        &r["d_eff_over_d0_ci95"],
        engine,
        "slit lateral D_eff/D0",
    );
    // The wall model is what the headline compares with.
    assert!(r["models"]
        .as_object()
        .unwrap()
        .contains_key("this engine's wall model ⟨D∥⟩/D0"));
}

/// In a cylindrical pore the headline D_eff is axial (z) and matches the
/// cross-section-averaged axial mobility the engine models; x and y are
/// bounded by the wall.
#[test]
fn pore_reports_the_axial_diffusivity_of_its_wall_model() {
    let dir = tempdir();
    let r = run_and_analyze(
        dir.path(),
        "configs/pore.toml",
        "pore.h5",
        &[
            "species.dextrin.count=300",
            "integrator.steps=20000",
            "output.record_every_steps=200",
        ],
    );
    assert!(r["direction"].as_str().unwrap().starts_with("axial"));
    assert_eq!(r["direction_axes"], serde_json::json!([2]));
    assert_eq!(r["bounded_axes"], serde_json::json!([true, true, false]));
    let engine = model_value(&r, "this engine's wall model ⟨D∥⟩/D0");
    within_interval(
        r["d_eff_over_d0"].as_f64().unwrap(),
        &r["d_eff_over_d0_ci95"],
        engine,
        "pore axial D_eff/D0",
    );
}

/// One model table: the same scenario through `check --json`, `models
/// --json`, `analyze --json` and a sweep's summary.json gives the same
/// names and values (identical up to rounding, 1e-12 relative).
#[test]
fn every_verb_prints_the_same_model_values() {
    let dir = tempdir();
    let sets = [
        "species.probe.count=200",
        "integrator.steps=4000",
        "output.record_every_steps=40",
    ];
    let cfg = repo("configs/crowded.toml");
    let mut check_args = vec!["check", cfg.to_str().unwrap(), "--json"];
    for s in &sets {
        check_args.extend(["--set", s]);
    }
    let check = json_of(&thicket(dir.path(), &check_args));
    let phi = check["obstacle_volume_fraction"].as_f64().unwrap();
    let a = check["species"][0]["radius_m"].as_f64().unwrap() * 1e9;
    // configs/crowded.toml: obstacles of radius 20 nm.
    let size_ratio = a / 20.0;
    let models = json_of(&thicket(
        dir.path(),
        &[
            "models",
            "--phi",
            &format!("{phi:e}"),
            "--size-ratio",
            &format!("{size_ratio:e}"),
            "--lambda",
            "0.1",
            "--json",
        ],
    ));
    let analyze = run_and_analyze(dir.path(), "configs/crowded.toml", "c.h5", &sets);
    std::fs::write(
        dir.path().join("sweep.toml"),
        format!(
            "scenario = {:?}\nseeds = [1]\n[grid]\n\"species.probe.count\" = [200]\n[set]\n\"integrator.steps\" = 4000\n\"output.record_every_steps\" = 40\n",
            cfg.to_str().unwrap()
        ),
    )
    .unwrap();
    ok(&thicket(
        dir.path(),
        &["sweep", "sweep.toml", "--out", "sw"],
    ));
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("sw/summary.json")).unwrap())
            .unwrap();
    let from_check = check["models"].as_object().unwrap();
    let from_models = models["obstacles"][0]["models"].as_object().unwrap();
    let from_analyze = analyze["models"].as_object().unwrap();
    let from_sweep = summary["points"][0]["models"].as_object().unwrap();
    assert!(from_analyze.len() >= 2, "{from_analyze:?}");
    let same = |x: &Value, y: &Value| {
        let (x, y) = (x.as_f64().unwrap(), y.as_f64().unwrap());
        (x - y).abs() <= 1e-12 * x.abs().max(y.abs())
    };
    for (name, v) in from_analyze {
        for (verb, map) in [
            ("check", from_check),
            ("models", from_models),
            ("sweep", from_sweep),
        ] {
            let w = map
                .get(name)
                .unwrap_or_else(|| panic!("{verb} lacks model '{name}': {map:?}"));
            assert!(same(v, w), "{name}: analyze {v} vs {verb} {w}");
        }
    }
    // Every entry of the check's table also appears, with its value, in `models`.
    for (name, v) in from_check {
        if let Some(w) = from_models.get(name) {
            assert!(same(v, w), "{name}: check {v} vs models {w}");
        }
    }
}

/// Splits one CSV line into fields (RFC 4180 quoting: "a, b" is one field).
fn csv_fields(line: &str) -> Vec<String> {
    let mut fields = vec![String::new()];
    let mut quoted = false;
    let mut chars = line.chars().peekable();
    while let Some(c) = chars.next() {
        match (c, quoted) {
            ('"', true) if chars.peek() == Some(&'"') => {
                chars.next();
                fields.last_mut().unwrap().push('"');
            }
            ('"', _) => quoted = !quoted,
            (',', false) => fields.push(String::new()),
            (c, _) => fields.last_mut().unwrap().push(c),
        }
    }
    fields
}

/// A run too short to reach the diffusive regime is flagged apparent in
/// summary.csv and summary.json, with advice to lengthen it; a long one is not.
/// Rejection pinned: with reflection this seed's 10 µs run is one the window
/// search misses (α ≈ 0.97 over 1.3–2.5 µs; 1 of seeds 1–6 unflagged,
/// against 0 of 6 with rejection), a limit of the detector left open.
#[test]
fn apparent_values_are_flagged_in_the_sweep_summary() {
    let dir = tempdir();
    let cfg = repo("configs/demo/hydrogel.toml");
    std::fs::write(
        dir.path().join("sweep.toml"),
        format!(
            "scenario = {:?}\nseeds = [1]\n[grid]\n\"integrator.steps\" = [10000, 300000]\n[set]\n\"species.marker.count\" = 300\n\"obstacles.volume_fraction\" = 0.3\n\"output.record_every_steps\" = 100\n\"integrator.contact\" = \"reject\"\n",
            cfg.to_str().unwrap()
        ),
    )
    .unwrap();
    ok(&thicket(
        dir.path(),
        &["sweep", "sweep.toml", "--out", "sw"],
    ));
    let csv = std::fs::read_to_string(dir.path().join("sw/summary.csv")).unwrap();
    let mut lines = csv.lines();
    let header = csv_fields(lines.next().unwrap());
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let rows: Vec<Vec<String>> = lines.map(csv_fields).collect();
    assert_eq!(rows.len(), 2, "{csv}");
    assert_eq!(rows[0][col("apparent")], "yes", "short run:\n{csv}");
    assert!(rows[0][col("lengthen_run_by")].parse::<f64>().unwrap() >= 2.0);
    assert_eq!(rows[1][col("apparent")], "no", "long run:\n{csv}");
    assert!(rows[1][col("lengthen_run_by")].is_empty());
    let t0: f64 = rows[1][col("fit_window_t0_s")].parse().unwrap();
    let t1: f64 = rows[1][col("fit_window_t1_s")].parse().unwrap();
    assert!(t0 > 0.0 && t1 > t0);
    let summary: Value =
        serde_json::from_str(&std::fs::read_to_string(dir.path().join("sw/summary.json")).unwrap())
            .unwrap();
    assert_eq!(summary["points"][0]["apparent"], true);
    assert_eq!(summary["points"][0]["per_seed"][0]["apparent"], true);
    assert_eq!(summary["points"][1]["apparent"], false);
    let advice = summary["too_short"].as_array().unwrap();
    assert_eq!(advice.len(), 1);
    assert!(advice[0].as_str().unwrap().contains("lengthen"));
}
