//! `thicket analyze` and `thicket run` on confined files: the membrane
//! report instead of an MSD, the partition coefficient and profile of a slit.

use crate::support::*;
use std::path::Path;

fn run_config(dir: &Path, config: &str, out: &str, sets: &[&str]) -> String {
    let cfg = dir.join(config);
    std::fs::copy(repo(&format!("configs/{config}")), &cfg).unwrap();
    let mut args = vec!["run", cfg.to_str().unwrap(), "--out", out];
    for s in sets {
        args.extend(["--set", s]);
    }
    ok(&thicket(dir, &args))
}

#[test]
fn membrane_file_gets_the_membrane_report() {
    let dir = tempdir();
    let run_out = run_config(
        dir.path(),
        "membrane.toml",
        "m.h5",
        &[
            "species.solute.count=600",
            "integrator.steps=20000",
            "output.record_every_steps=500",
            "geometry.flux_after_s=8e-7",
        ],
    );
    let json: serde_json::Value =
        serde_json::from_str(&ok(&thicket(dir.path(), &["analyze", "m.h5", "--json"]))).unwrap();
    // No isotropic D: recycled particles jump between the baths.
    assert!(json.get("d_eff_m2_per_s").is_none(), "{json}");
    assert!(json.get("d_eff_over_d0").is_none());
    for key in ["permeability_m_per_s", "hindrance", "partition"] {
        let ci = &json[key]["ci95"];
        assert!(ci.as_array().is_some_and(|a| a.len() == 2), "{key}: {json}");
    }
    assert!(json["flux_particles_per_s"]["value"].is_number());
    assert!(json["time_lag"]["applies"] == false);
    // `run` prints the same permeability as `analyze`, with its interval.
    let p = json["permeability_m_per_s"]["value"].as_f64().unwrap();
    let shown = format!("{p:.4e}  [");
    assert!(
        run_out.contains(&shown),
        "run printed:\n{run_out}\nexpected {shown}"
    );
    let table = ok(&thicket(dir.path(), &["analyze", "m.h5"]));
    assert!(
        !table.contains("D_eff") && !table.contains("tortuosity"),
        "{table}"
    );
    assert!(table.contains("membrane permeability"));
    let fit = thicket(dir.path(), &["analyze", "m.h5", "--window", "1e-7,2e-7"]);
    assert!(!fit.status.success() && stderr(&fit).contains("--window"));

    // --plot writes the profile CSV; a second time it refuses and leaves the file alone.
    ok(&thicket(dir.path(), &["analyze", "m.h5", "--plot", "m"]));
    let csv = dir.path().join("m_profile.csv");
    let text = std::fs::read_to_string(&csv).unwrap();
    assert!(text.starts_with("z_nm,region,c_over_feed"));
    assert!(text.contains(",pores,"));
    let again = thicket(dir.path(), &["analyze", "m.h5", "--plot", "m"]);
    assert!(!again.status.success());
    assert!(
        stderr(&again).contains("m_profile.csv"),
        "{}",
        stderr(&again)
    );
    assert_eq!(std::fs::read_to_string(&csv).unwrap(), text);
}

#[test]
fn slit_file_gets_a_partition_coefficient() {
    let dir = tempdir();
    run_config(
        dir.path(),
        "slit.toml",
        "s.h5",
        &[
            "species.globin.count=400",
            "integrator.steps=6000",
            "output.record_every_steps=60",
        ],
    );
    let out = ok(&thicket(
        dir.path(),
        &["analyze", "s.h5", "--json", "--plot", "s"],
    ));
    let json: serde_json::Value = serde_json::from_str(&out).unwrap();
    let k = json["partition"]["partition"]["value"].as_f64().unwrap();
    assert_eq!(json["partition"]["geometry"], "slit");
    // REFERENCE.md: (W − 2a)/W for W = 20 nm, a = 3 nm (exact).
    assert!((json["partition"]["exact"].as_f64().unwrap() - 0.7).abs() < 1e-12);
    // The same K from numpy on the file read with h5py (independent implementation; rounding only).
    let py = python_json(
        "slit_profile_check.py",
        &[
            dir.path().join("s.h5").to_str().unwrap(),
            "globin",
            "20",
            "3",
        ],
    );
    if let Some(py) = py {
        let k_py = py["partition"].as_f64().unwrap();
        assert!((k / k_py - 1.0).abs() < 1e-9, "{k} vs numpy {k_py}");
    }
    assert!(dir.path().join("s_profile.csv").exists());
    assert_eq!(
        json["partition"]["profile_csv"].as_str().unwrap(),
        "s_profile.csv"
    );
}

#[test]
fn membrane_numbers_equal_numpy_from_h5py() {
    let dir = tempdir();
    run_config(
        dir.path(),
        "membrane.toml",
        "m.h5",
        &[
            "species.solute.count=600",
            "integrator.steps=20000",
            "output.record_every_steps=500",
            "geometry.flux_after_s=8e-7",
            "geometry.wall_hydrodynamics=false",
        ],
    );
    let json: serde_json::Value =
        serde_json::from_str(&ok(&thicket(dir.path(), &["analyze", "m.h5", "--json"]))).unwrap();
    let file = dir.path().join("m.h5");
    let Some(py) = python_json("membrane_check.py", &[file.to_str().unwrap(), "solute"]) else {
        return;
    };
    // The same definitions computed independently with numpy on the file read by h5py: rounding only.
    for (ours, theirs) in [
        ("flux_particles_per_s", "flux_particles_per_s"),
        (
            "permeability_bath_to_bath_m_per_s",
            "permeability_bath_to_bath_m_per_s",
        ),
        ("partition", "partition"),
    ] {
        let a = json[ours]["value"].as_f64().unwrap();
        let b = py[theirs].as_f64().unwrap();
        assert!((a / b - 1.0).abs() < 1e-9, "{ours}: {a} vs numpy {b}");
    }
}
