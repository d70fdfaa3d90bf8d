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
        &[
            "bad.toml",
            "species[0].radius_nm",
            "-2",
            "from 1e-6 to 1e7 nm",
        ],
    );
    fails(
        d.path(),
        &BASE.replace("radius_nm = 2.0", "radius_nm = 0.0"),
        "check",
        &[],
        &[
            "bad.toml",
            "species[0].radius_nm",
            "= 0",
            "from 1e-6 to 1e7 nm",
        ],
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
        &["bad.toml", "integrator.dt_s", "from 1e-15 to 1e6 s"],
    );
    fails(
        d.path(),
        &BASE.replace("dt_s = 1e-9", "dt_s = -1e-9"),
        "check",
        &[],
        &["integrator.dt_s", "-1e-9"],
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
        &["medium.temperature_K", "-5", "from 1e0 to 1e4 K"],
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
        &["'0' for '--threads", "from 1 to 1024"],
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

// Regression tests of the input bounds (issue 11): each non-physical value
// used to pass `check` and let `run` write inf/NaN or abort on allocation.

/// Obstacles from a volume fraction in a large box, a count from tiny radii:
/// refused with the estimated need and the keys to change, before any allocation.
#[test]
fn poisson_obstacles_in_a_huge_box_are_refused_by_memory() {
    let d = tempdir();
    let text = BASE.replace("[100.0, 100.0, 100.0]", "[1e6, 1e6, 1e6]")
        + "[output]\nprecision = \"f64\"\n[obstacles]\nplacement = \"poisson\"\nradius_nm = 5.0\nvolume_fraction = 0.3\n";
    for verb in ["check", "run"] {
        fails(
            d.path(),
            &text,
            verb,
            &[],
            &[
                "bad.toml",
                "would need about",
                "obstacles.volume_fraction",
                "MemAvailable",
            ],
        );
    }
    assert!(
        !d.path().join("bad.h5").exists(),
        "a refused run writes nothing"
    );
}

#[test]
fn fibres_in_a_big_box_are_refused_by_max_memory() {
    let d = tempdir();
    let text = BASE.replace("[100.0, 100.0, 100.0]", "[20000.0, 20000.0, 20000.0]")
        + "[fibres]\nradius_nm = 1.0\nlength_nm = 50.0\nvolume_fraction = 0.1\n";
    fails(
        d.path(),
        &text,
        "check",
        &["--max-memory", "64M"],
        &[
            "bad.toml",
            "64.0 MiB (--max-memory)",
            "fibres.volume_fraction",
        ],
    );
}

#[test]
fn a_large_particle_count_is_refused_by_max_memory() {
    let d = tempdir();
    let text = BASE.replace("count = 20", "count = 50000000");
    fails(
        d.path(),
        &text,
        "run",
        &["--max-memory", "1G"],
        &["bad.toml", "species[0].count", "--max-memory"],
    );
}

#[test]
fn max_memory_needs_a_size() {
    let d = tempdir();
    fails(
        d.path(),
        BASE,
        "check",
        &["--max-memory", "lots"],
        &["--max-memory", "512M"],
    );
}

#[test]
fn non_physical_values_are_refused_with_their_range() {
    let d = tempdir();
    for (set, key, range) in [
        ("integrator.dt_s=1e300", "integrator.dt_s", "1e-15 to 1e6 s"),
        (
            "medium.viscosity_Pa_s=1e-300",
            "medium.viscosity_Pa_s",
            "Pa·s",
        ),
        (
            "species.0.drag_radius_nm=1e-300",
            "species[0].drag_radius_nm",
            "nm",
        ),
        ("medium.temperature_K=1e300", "medium.temperature_K", "K"),
        ("box.edges_nm=[1e30,1e30,1e30]", "box.edges_nm[0]", "nm"),
    ] {
        let err = fails(
            d.path(),
            BASE,
            "run",
            &["--set", set],
            &["bad.toml", key, range],
        );
        // Numbers far from 1 are shown in e-notation, not hundreds of digits.
        assert!(err.len() < 400, "message too long: {err}");
    }
    assert!(!d.path().join("bad.h5").exists());
}

/// A box so large that the per-frame step vanishes in f32 (D_eff/D0 = 0 without a word before).
#[test]
fn steps_unresolvable_at_the_box_size_are_refused() {
    let d = tempdir();
    fails(
        d.path(),
        BASE,
        "check",
        &["--set", "box.edges_nm=[1e8,1e8,1e8]"],
        &["bad.toml", "output.precision", "\"f64\""],
    );
    fails(
        d.path(),
        BASE,
        "check",
        &[
            "--set",
            "integrator.dt_s=1e-15",
            "--set",
            "medium.viscosity_Pa_s=1e10",
            "--set",
            "box.edges_nm=[1e9,1e9,1e9]",
        ],
        &["bad.toml", "integrator.dt_s", "f64 resolves"],
    );
}

#[test]
fn camera_noise_and_rates_are_bounded() {
    let d = tempdir();
    let text = BASE.to_string()
        + "[camera]\nframe_interval_s = 1e-8\nlocalisation_sigma_nm = 5.0\nblink_on_to_off_per_s = 10.0\nblink_off_to_on_per_s = 10.0\n";
    fails(
        d.path(),
        &text,
        "check",
        &["--set", "camera.localisation_sigma_nm=1e300"],
        &[
            "bad.toml",
            "camera.localisation_sigma_nm",
            "largest box edge",
        ],
    );
    fails(
        d.path(),
        &text,
        "check",
        &["--set", "camera.blink_on_to_off_per_s=1e300"],
        &["bad.toml", "camera.blink_on_to_off_per_s", "1/s"],
    );
}

#[test]
fn empty_or_folder_outputs_are_named() {
    let d = tempdir();
    fails(
        d.path(),
        &(BASE.to_string() + "[output]\nfile = \"\"\n"),
        "run",
        &[],
        &["bad.toml", "output.file", "not empty"],
    );
    std::fs::create_dir(d.path().join("folder")).unwrap();
    fails(
        d.path(),
        BASE,
        "run",
        &["--out", "folder"],
        &["--out", "folder", "is a folder"],
    );
}

#[test]
fn threads_out_of_range_are_refused_at_once() {
    let d = tempdir();
    let started = std::time::Instant::now();
    let cfg = d.path().join("ok.toml");
    std::fs::write(&cfg, BASE).unwrap();
    let out = thicket(d.path(), &["run", "ok.toml", "--threads", "100000"]);
    let err = stderr(&out);
    assert!(!out.status.success());
    assert!(
        err.contains("--threads") && err.contains("1 to 1024"),
        "{err}"
    );
    assert!(!d.path().join("ok.h5").exists());
    // Refused by the parser, not after trying to start the threads (which took half a minute).
    assert!(started.elapsed().as_secs() < 20);
}

#[test]
fn negative_numbers_after_options_reach_the_validation() {
    let d = tempdir();
    let out = thicket(d.path(), &["models", "--size-ratio", "-1"]);
    let err = stderr(&out);
    assert!(!out.status.success());
    assert!(
        err.contains("--size-ratio -1") && !err.contains("unexpected argument"),
        "{err}"
    );
    let out = thicket(d.path(), &["analyze", "missing.h5", "--d0", "-1"]);
    let err = stderr(&out);
    assert!(
        err.contains("--d0") && !err.contains("d0_m2_per_s"),
        "{err}"
    );
}

/// `seeds = [1, 1]` raced on one result file or counted one sample twice.
#[test]
fn duplicate_sweep_seeds_are_refused() {
    let d = tempdir();
    std::fs::write(d.path().join("s.toml"), BASE).unwrap();
    std::fs::write(
        d.path().join("sw.toml"),
        "scenario = \"s.toml\"\nseeds = [1, 1]\n[grid]\n\"species.0.radius_nm\" = [2.0]\n",
    )
    .unwrap();
    let out = thicket(d.path(), &["sweep", "sw.toml", "--out", "o"]);
    let err = stderr(&out);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("sw.toml") && err.contains("seeds") && err.contains("twice"),
        "{err}"
    );
}

#[test]
fn an_oversized_sweep_grid_is_refused() {
    let d = tempdir();
    std::fs::write(d.path().join("s.toml"), BASE).unwrap();
    std::fs::write(
        d.path().join("sw.toml"),
        format!(
            "scenario = \"s.toml\"\n[grid]\n\"species.0.count\" = [{l}]\n\"integrator.steps\" = [{l}]\n",
            l = (1..=400).map(|i| i.to_string()).collect::<Vec<_>>().join(", ")
        ),
    )
    .unwrap();
    let out = thicket(d.path(), &["sweep", "sw.toml", "--out", "o"]);
    let err = stderr(&out);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("sw.toml") && err.contains("160000") || err.contains("1.6e5"),
        "{err}"
    );
}

/// An edited grid used to reuse the old points' results (keyed by index and seed only).
#[test]
fn an_edited_sweep_grid_reruns_the_changed_points() {
    let d = tempdir();
    std::fs::write(d.path().join("s.toml"), BASE).unwrap();
    let sweep = |radius: &str| {
        std::fs::write(
            d.path().join("sw.toml"),
            format!("scenario = \"s.toml\"\n[grid]\n\"species.0.radius_nm\" = [{radius}]\n[set]\n\"integrator.steps\" = 2000\n\"output.record_every_steps\" = 20\n"),
        )
        .unwrap();
        ok(&thicket(d.path(), &["sweep", "sw.toml", "--out", "o"]));
        let text = std::fs::read_to_string(d.path().join("o/points/p0000_s1.json")).unwrap();
        serde_json::from_str::<serde_json::Value>(&text).unwrap()
    };
    let json = d.path().join("o/points/p0000_s1.json");
    let first = sweep("2.0");
    let written = std::fs::metadata(&json).unwrap().modified().unwrap();
    std::thread::sleep(std::time::Duration::from_millis(20));
    let again = sweep("2.0");
    assert_eq!(first, again);
    let rewritten = std::fs::metadata(&json).unwrap().modified().unwrap();
    assert_eq!(
        written, rewritten,
        "an unchanged point is reused, not rerun"
    );
    let edited = sweep("4.0");
    assert_ne!(first["scenario_hash"], edited["scenario_hash"]);
    assert_eq!(edited["values"]["species.0.radius_nm"], 4.0);
    // Stokes–Einstein: D0 ∝ 1/a, so doubling the radius halves D0 (exact).
    let ratio = first["d0_m2_per_s"].as_f64().unwrap() / edited["d0_m2_per_s"].as_f64().unwrap();
    assert!((ratio - 2.0).abs() < 1e-9, "D0 ratio {ratio}");
}

// Binding keys: all three or none, each in its range, and only for tracers
// among fixed obstacles in a periodic box without crowders or a geometry.
#[test]
fn binding_keys_are_checked() {
    let d = tempdir();
    let keys =
        "count = 20\nbinding_layer_nm = 1.0\nbinding_rate_per_s = 1e5\nunbinding_rate_per_s = 1e4";
    let fibres = "[fibres]\nradius_nm = 2.0\ncount = 3\n[integrator]";
    let among = BASE
        .replace("count = 20", keys)
        .replace("[integrator]", fibres);
    fails(
        d.path(),
        &BASE
            .replace("count = 20", "count = 20\nbinding_rate_per_s = 1e5")
            .replace("[integrator]", fibres),
        "check",
        &[],
        &[
            "bad.toml",
            "species[0].binding_layer_nm",
            "(missing)",
            "all three",
            "no defaults",
        ],
    );
    fails(
        d.path(),
        &among.replace("unbinding_rate_per_s = 1e4", "unbinding_rate_per_s = -5.0"),
        "check",
        &[],
        &[
            "bad.toml",
            "species[0].unbinding_rate_per_s",
            "-5",
            "finite number from",
            "per second",
        ],
    );
    fails(
        d.path(),
        &among.replace("binding_layer_nm = 1.0", "binding_layer_nm = 0.0"),
        "check",
        &[],
        &["bad.toml", "species[0].binding_layer_nm", "0", "nm"],
    );
    fails(
        d.path(),
        &BASE.replace("count = 20", keys),
        "check",
        &[],
        &[
            "bad.toml",
            "species[0].binding_layer_nm",
            "1",
            "[obstacles] or [fibres]",
        ],
    );
    fails(
        d.path(),
        &among.replace("[fibres]", "[[species]]\nname = \"crowd\"\nradius_nm = 3.0\ncount = 10\nrole = \"crowder\"\n[fibres]"),
        "check",
        &[],
        &["bad.toml", "species[0].binding_layer_nm", "crowder"],
    );
    fails(
        d.path(),
        &among.replace("[integrator]", "[geometry]\nkind = \"slit\"\n[integrator]"),
        "check",
        &[],
        &["bad.toml", "species[0].binding_layer_nm", "[geometry]"],
    );
    // A run refused for bad binding keys writes nothing.
    fails(
        d.path(),
        &among.replace("binding_rate_per_s = 1e5", "binding_rate_per_s = 1e99"),
        "run",
        &["--out", d.path().join("out.h5").to_str().unwrap()],
        &["bad.toml", "species[0].binding_rate_per_s", "1e99"],
    );
    assert!(!d.path().join("out.h5").exists());
}

#[test]
fn surface_charge_density_keys_are_checked() {
    let d = tempdir();
    let medium =
        "temperature_K = 300.0\nionic_strength_mol_per_L = 0.01\nrelative_permittivity = 78.4";
    let charged = BASE
        .replace("temperature_K = 300.0", medium)
        .replace(
            "count = 20",
            "count = 20\nsurface_potential_mV = -25.0\nrole = \"tracer\"",
        )
        .replace(
            "[integrator]",
            "[obstacles]\nplacement = \"random\"\ncount = 10\nradius_nm = 5.0\nsurface_charge_density_mC_per_m2 = -10.0\n[integrator]",
        );
    // Both keys on one surface, in `check` and in `run` (which must leave no file behind).
    let both = charged.replace(
        "surface_charge_density_mC_per_m2 = -10.0",
        "surface_charge_density_mC_per_m2 = -10.0\nsurface_potential_mV = -30.0",
    );
    for verb in ["check", "run"] {
        fails(
            d.path(),
            &both,
            verb,
            &[],
            &[
                "bad.toml",
                "obstacles.surface_charge_density_mC_per_m2",
                "-10",
                "not both",
            ],
        );
    }
    assert!(!d.path().join("bad.h5").exists());
    // A charge density without the medium's ionic strength.
    fails(
        d.path(),
        &charged.replace("ionic_strength_mol_per_L = 0.01\n", ""),
        "check",
        &[],
        &[
            "bad.toml",
            "medium.ionic_strength_mol_per_L",
            "(missing)",
            "obstacles.surface_charge_density_mC_per_m2",
            "Grahame",
        ],
    );
    // Out of range.
    fails(
        d.path(),
        &charged.replace("= -10.0", "= 5000.0"),
        "check",
        &[],
        &[
            "bad.toml",
            "obstacles.surface_charge_density_mC_per_m2",
            "5000",
            "mC/m²",
        ],
    );
    // Valid: check prints the potential the charge density gives (Grahame 1947; −10 mC/m² at
    // 0.01 mol/L, ε_r = 78.4, 300 K: 51.70 mV · asinh(−10/11.77) = −39.86 mV, by hand).
    let cfg = d.path().join("good.toml");
    std::fs::write(&cfg, &charged).unwrap();
    let out = ok(&thicket(d.path(), &["check", cfg.to_str().unwrap()]));
    let line = out
        .lines()
        .find(|l| l.contains("obstacles.surface_charge_density_mC_per_m2"))
        .unwrap_or_else(|| panic!("no charge line: {out}"));
    assert!(
        line.contains("-10 mC/m²") && line.contains("ψ = -39.") && line.contains("Grahame"),
        "{line}"
    );
}
