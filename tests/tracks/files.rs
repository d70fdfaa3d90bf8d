//! The demo microscope end to end: the CSV reads back with Python's csv
//! module and numpy (numbers only, header present), the HDF5 file holds the
//! truth, the estimates recover it, and runs are reproducible.

use crate::support::{fails, ok, python, repo, tempdir, thicket, write_scenario};
use thicket_analysis::tracks::{
    analyze_track_table, read_csv, read_truth, truth_path_for, TrackAnalysisOptions,
};

/// configs/tracks.toml, shortened to 1.5 s (150 frames).
fn demo(dir: &std::path::Path, extra: &[&str]) -> std::path::PathBuf {
    let mut args: Vec<String> = vec![
        "tracks".into(),
        repo("configs/tracks.toml").to_str().unwrap().to_string(),
        "--out".into(),
        "tracks.csv".into(),
        "--set".into(),
        "integrator.steps=1500".into(),
    ];
    for e in extra {
        args.push((*e).to_string());
    }
    let refs: Vec<&str> = args.iter().map(String::as_str).collect();
    let out = ok(&thicket(dir, &refs));
    assert!(out.contains("wrote") && out.contains("tracks.h5"), "{out}");
    dir.join("tracks.csv")
}

#[test]
fn demo_csv_and_h5_read_back_in_python() {
    let dir = tempdir();
    let csv = demo(dir.path(), &[]);
    let Some(r) = python(&["csv", csv.to_str().unwrap()]) else {
        return;
    };
    assert_eq!(
        r["header"],
        serde_json::json!(["track_id", "frame", "time_s", "x_nm", "y_nm"])
    );
    assert_eq!(r["fields_per_row"], serde_json::json!([5]));
    assert_eq!(r["numeric"], true, "{r}");
    assert_eq!(r["genfromtxt_nan"], 0, "{r}");
    assert_eq!(r["integral_ids_and_frames"], true);
    assert_eq!(r["consecutive_frames"], true);
    assert_eq!(r["sorted_by_track"], true);
    let dt = &r["frame_interval_s"];
    assert!(
        (dt[0].as_f64().unwrap() - 0.01).abs() < 1e-12
            && (dt[1].as_f64().unwrap() - 0.01).abs() < 1e-12,
        "{dt}"
    );
    assert!(r["rows"].as_u64().unwrap() > 1000, "{r}");

    let Some(h) = python(&["h5", dir.path().join("tracks.h5").to_str().unwrap()]) else {
        return;
    };
    assert_eq!(h["detections"], r["rows"]);
    assert_eq!(h["tracks"], r["tracks"]);
    assert_eq!(h["species"], serde_json::json!(["cluster", "probe"]));
    assert_eq!(h["regions"], serde_json::json!(["free"]));
    assert_eq!(h["region_names"], serde_json::json!(["free"]));
    assert_eq!(h["region_index_max"], 0);
    assert_eq!(h["has_scenario"], true);
    for (name, unit) in [
        ("detections/x_nm", "nm"),
        ("detections/time_s", "s"),
        ("tracks/d0_m2_per_s", "m2/s"),
        ("detections/true_z_nm", "nm"),
    ] {
        assert_eq!(h["units"][name], unit, "{name}");
    }
    // The truth D0 is the engine's Stokes–Einstein value, as `check --json` reports it.
    let check: serde_json::Value = serde_json::from_str(&ok(&thicket(
        dir.path(),
        &[
            "check",
            repo("configs/tracks.toml").to_str().unwrap(),
            "--json",
        ],
    )))
    .unwrap();
    for s in check["species"].as_array().unwrap() {
        let name = s["name"].as_str().unwrap();
        let d0 = s["d0_m2_per_s"].as_f64().unwrap();
        assert!(
            (h["d0_m2_per_s"][name].as_f64().unwrap() / d0 - 1.0).abs() < 1e-12,
            "{name}"
        );
    }
    // Photon-limited σ of the demo (Thompson, Larson & Webb 2002) ≈ 15.0 nm, stored with the camera.
    assert!(
        (h["camera"]["localisation_sigma_nm"].as_f64().unwrap() - 14.995).abs() < 1e-3,
        "{}",
        h["camera"]
    );
}

#[test]
fn estimates_recover_the_truth_of_the_demo() {
    let dir = tempdir();
    let csv = demo(dir.path(), &[]);
    let table = read_csv(&csv).expect("the CSV reads back");
    let truth = read_truth(&truth_path_for(&csv)).expect("the truth reads back");
    let report = analyze_track_table(&table, Some(&truth), &TrackAnalysisOptions::default())
        .expect("report");
    println!("{}", report.to_text());
    assert_eq!(report.groups.len(), 2);
    for g in &report.groups {
        for st in [&g.covariance_d_m2_per_s, &g.msd_fit_d_m2_per_s] {
            let (bias, se) = (st.bias.unwrap(), st.bias_se.unwrap());
            // Per-track estimates are unbiased for D (Vestergaard et al. 2014); short tracks
            // selected by focus and field of view are selected on z and on position, not on
            // lateral steps, so 4 standard errors.
            assert!(
                bias.abs() < 4.0 * se,
                "{} {}: bias {bias} ± {se}",
                g.species,
                g.region
            );
            assert!(
                se < 0.05,
                "{}: too few tracks to see a bias ({se})",
                g.species
            );
        }
        let s2 = &g.covariance_sigma2_nm2;
        assert!(
            (s2.mean - s2.truth.unwrap()).abs() < 4.0 * s2.se,
            "{}: σ² {} ± {} vs {}",
            g.species,
            s2.mean,
            s2.se,
            s2.truth.unwrap()
        );
    }
    // `thicket analyze tracks.csv --json` prints the same report.
    let out = ok(&thicket(dir.path(), &["analyze", "tracks.csv", "--json"]));
    let json: serde_json::Value = serde_json::from_str(&out).expect("analyze --json prints JSON");
    for (g, want) in json["groups"]
        .as_array()
        .unwrap()
        .iter()
        .zip(&report.groups)
    {
        assert_eq!(g["species"], want.species.as_str());
        let got = g["covariance_d_m2_per_s"]["mean"].as_f64().unwrap();
        assert!(
            (got / want.covariance_d_m2_per_s.mean - 1.0).abs() < 1e-12,
            "{got}"
        );
    }
    assert!(json["groups"][0]["covariance_d_m2_per_s"]["bias"].is_number());
    let text = ok(&thicket(dir.path(), &["analyze", "tracks.csv"]));
    assert!(
        text.contains("species probe") && text.contains("D, covariance"),
        "{text}"
    );
    let err = fails(&thicket(
        dir.path(),
        &["analyze", "tracks.csv", "--species", "probe"],
    ));
    assert!(
        err.contains("tracks.csv") && err.contains("--json"),
        "{err}"
    );
}

#[test]
fn same_seed_same_files_and_reimaging_a_trajectory() {
    let a = tempdir();
    let b = tempdir();
    let csv_a = demo(a.path(), &["--threads", "1"]);
    let csv_b = demo(b.path(), &["--threads", "2"]);
    assert_eq!(
        std::fs::read(&csv_a).unwrap(),
        std::fs::read(&csv_b).unwrap(),
        "same seed, different CSV"
    );

    // Image the kept trajectory again with another camera: 3D with a shorter exposure.
    let traj = a.path().join("tracks.trajectory.h5");
    let cfg = repo("configs/tracks.toml");
    let args = [
        "tracks",
        cfg.to_str().unwrap(),
        "--set",
        "integrator.steps=1500",
        "--set",
        "camera.exposure_s=0.005",
        "--set",
        "camera.projection=\"3d\"",
        "--trajectory",
        traj.to_str().unwrap(),
        "--out",
        "again.csv",
    ];
    ok(&thicket(a.path(), &args));
    if let Some(r) = python(&["csv", a.path().join("again.csv").to_str().unwrap()]) {
        assert_eq!(
            r["header"],
            serde_json::json!(["track_id", "frame", "time_s", "x_nm", "y_nm", "z_nm"])
        );
    }
    if let Some(h) = python(&["h5", a.path().join("again.h5").to_str().unwrap()]) {
        assert!((h["camera"]["exposure_s"].as_f64().unwrap() - 0.005).abs() < 1e-15);
    }

    // A trajectory of another scenario is refused.
    let args = [
        "tracks",
        cfg.to_str().unwrap(),
        "--set",
        "integrator.steps=1500",
        "--set",
        "species.probe.count=10",
        "--trajectory",
        traj.to_str().unwrap(),
        "--out",
        "other.csv",
    ];
    let err = fails(&thicket(a.path(), &args));
    assert!(
        err.contains("tracks.trajectory.h5") && err.contains("different scenario"),
        "{err}"
    );
}

#[test]
fn bad_csv_rows_name_their_line() {
    let dir = tempdir();
    let path = dir.path().join("bad.csv");
    std::fs::write(
        &path,
        "track_id,frame,time_s,x_nm,y_nm\n0,0,0,1.0,2.0\n0,1,0.01,abc,2.0\n",
    )
    .unwrap();
    let err = read_csv(&path).unwrap_err().to_string();
    assert!(
        err.contains("bad.csv")
            && err.contains("line 3")
            && err.contains("x_nm")
            && err.contains("abc"),
        "{err}"
    );
    std::fs::write(&path, "id,frame,x_nm,y_nm\n").unwrap();
    let err = read_csv(&path).unwrap_err().to_string();
    assert!(err.contains("line 1") && err.contains("track_id"), "{err}");
    std::fs::write(
        &path,
        "track_id,frame,time_s,x_nm,y_nm\n0,0,0,1,2\n0,0,0,1,2\n",
    )
    .unwrap();
    let err = read_csv(&path).unwrap_err().to_string();
    assert!(err.contains("line 3") && err.contains("twice"), "{err}");
    // A 3D file without a truth beside it still gives estimates, with R assumed and said so.
    let small = write_scenario(
        dir.path(),
        [3000.0, 3000.0, 3000.0],
        20,
        1e-12,
        0.001,
        200,
        "frame_interval_s = 0.01\nprojection = \"3d\"\nlocalisation_sigma_nm = 20.0",
    );
    ok(&thicket(
        dir.path(),
        &["tracks", small.to_str().unwrap(), "--out", "small.csv"],
    ));
    std::fs::remove_file(dir.path().join("small.h5")).unwrap();
    let table = read_csv(&dir.path().join("small.csv")).unwrap();
    assert_eq!(table.dims, 3);
    let report = analyze_track_table(&table, None, &TrackAnalysisOptions::default()).unwrap();
    assert!(
        report.blur_factor_source.contains("assumed") && report.groups[0].species == "all",
        "{report:?}"
    );
}
