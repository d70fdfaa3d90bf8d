//! Free diffusion checked from outside: h5py + numpy + scipy read our file.

use crate::support::*;

/// REFERENCES.md: free diffusion, MSD = 2 d D t and Gaussian displacements with
/// variance 2 D t per axis (Einstein 1905); D0 from Stokes–Einstein.
#[test]
fn free_diffusion_matches_stokes_einstein_from_outside() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    ok(&thicket(
        dir.path(),
        &[
            "run",
            cfg.to_str().unwrap(),
            "--out",
            "free.h5",
            "--set",
            "integrator.steps=40000",
            "--set",
            "output.record_every_steps=400",
        ],
    ));
    let Some(r) = python_json(
        "free_check.py",
        &[dir.path().join("free.h5").to_str().unwrap(), "bead"],
    ) else {
        return;
    };
    let d = r["d_nm2_per_s"].as_f64().unwrap();
    let se = r["d_se_nm2_per_s"].as_f64().unwrap();
    let d0 = r["d0_nm2_per_s"].as_f64().unwrap();
    // Stokes–Einstein D0 for a = 4 nm, 298.15 K, water: k_B T/(6π η a); 4 standard errors.
    assert!(
        (d - d0).abs() < 4.0 * se,
        "D = {d} ± {se} nm²/s vs Stokes–Einstein {d0}"
    );
    // The SE itself must be the Gaussian one, √(2/M)·D for M samples of a χ²₁ variable.
    let m = 3.0 * r["particles"].as_f64().unwrap();
    // 5 SE of a sample SD of χ²₁ values (kurtosis 15): 5·√(14/M)/2 ≈ 0.12 at M = 6000.
    assert!(
        (se / (d0 * (2.0 / m).sqrt()) - 1.0).abs() < 0.12,
        "SE {se} vs expected {}",
        d0 * (2.0 / m).sqrt()
    );
    // scipy.stats.kstest against N(0,1) at the conventional 1 % level (common practice), fixed seed.
    for (axis, p) in r["ks_pvalues"].as_array().unwrap().iter().enumerate() {
        let p = p.as_f64().unwrap();
        assert!(p > 0.01, "axis {axis}: KS p = {p}");
    }
    // Exact identity: the one-frame MSD is 6 D0 Δt_frame; 5 SE of a mean of M'·χ²₃/3 samples.
    let msd1 = r["msd_lag1_nm2"].as_f64().unwrap();
    let expected = 6.0 * d0 * r["dt_frame_s"].as_f64().unwrap();
    let n_samples = r["particles"].as_f64().unwrap() * (r["frames"].as_f64().unwrap() - 1.0);
    let se1 = expected * (2.0 / 3.0 / n_samples).sqrt();
    assert!(
        (msd1 - expected).abs() < 5.0 * se1,
        "lag-1 MSD {msd1} vs {expected} ± {se1}"
    );
}

/// `thicket check --json` reports Stokes–Einstein D0 for the scenario.
#[test]
fn check_json_reports_species() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    let out = ok(&thicket(
        dir.path(),
        &["check", cfg.to_str().unwrap(), "--json"],
    ));
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    let sp = &v["species"][0];
    assert_eq!(sp["name"], "bead");
    assert_eq!(sp["count"], 2000);
    assert!((sp["radius_m"].as_f64().unwrap() - 4e-9).abs() < 1e-15);
    // k_B T/(6π η a) with η from the water correlation at 298.15 K (REFERENCES.md, 0.8900 mPa·s ±1 %).
    let d0 = sp["d0_m2_per_s"].as_f64().unwrap();
    let d0_table = 1.380649e-23 * 298.15 / (6.0 * std::f64::consts::PI * 0.8900e-3 * 4e-9);
    assert!((d0 / d0_table - 1.0).abs() < 0.01, "{d0} vs {d0_table}");
    assert_eq!(v["obstacle_volume_fraction"].as_f64(), Some(0.0));
}
