//! The analysis against outside computations, its interval coverage, and
//! its handling of bad files.

use crate::support::*;
use std::path::Path;
use thicket_analysis::estimators::{analyze, AnalyzeOptions};

fn run_free(dir: &Path, out: &str, extra: &[&str]) {
    let cfg = free_config(dir);
    let mut args = vec!["run", cfg.to_str().unwrap(), "--out", out];
    args.extend(extra);
    ok(&thicket(dir, &args));
}

/// The MSD of thicket-analysis equals numpy's on the same file read by h5py
/// (an independent implementation; exact identity up to rounding, 1e-9 relative).
#[test]
fn msd_equals_numpy_from_h5py() {
    let dir = tempdir();
    run_free(
        dir.path(),
        "m.h5",
        &[
            "--set",
            "species.bead.count=300",
            "--set",
            "integrator.steps=16000",
            "--set",
            "output.record_every_steps=80",
            "--set",
            "output.precision=f64",
        ],
    );
    let file = dir.path().join("m.h5");
    let analysis = analyze(&file, None, &AnalyzeOptions::default()).unwrap();
    let msd = &analysis.msd;
    let lags: Vec<String> = msd.lags_frames.iter().map(|l| l.to_string()).collect();
    let mut args = vec![file.to_str().unwrap(), "bead"];
    args.extend(lags.iter().map(String::as_str));
    let Some(r) = python_json("msd_check.py", &args) else {
        return;
    };
    for axis in 0..3 {
        let theirs = r["msd_axes_nm2"][axis].as_array().unwrap();
        assert_eq!(theirs.len(), msd.lags_frames.len());
        for (i, t) in theirs.iter().enumerate() {
            let t = t.as_f64().unwrap();
            let ours = msd.time_averaged_axes_nm2[axis][i];
            assert!(
                (ours - t).abs() <= 1e-9 * t.abs(),
                "axis {axis}, lag {}: ours {ours} vs numpy {t}",
                msd.lags_frames[i]
            );
        }
    }
}

/// Over 20 seeds of free diffusion the 95 % interval contains the
/// Stokes–Einstein D in at least 16: with true coverage 0.95 the chance of
/// fewer than 16 is about 0.3 % (binomial), so a failure means the interval is wrong.
#[test]
fn interval_covers_stokes_einstein_over_twenty_seeds() {
    let dir = tempdir();
    let mut covered = 0;
    let mut misses = Vec::new();
    for seed in 1..=20 {
        let name = format!("s{seed}.h5");
        let seed_set = format!("seed={seed}");
        run_free(
            dir.path(),
            &name,
            &[
                "--set",
                &seed_set,
                "--set",
                "species.bead.count=400",
                "--set",
                "integrator.steps=8000",
                "--set",
                "output.record_every_steps=80",
            ],
        );
        let report = analyze(dir.path().join(&name), None, &AnalyzeOptions::default())
            .unwrap()
            .report;
        let d0 = report.d0_m2_per_s.unwrap();
        let [lo, hi] = report.d_eff_ci95_m2_per_s;
        if lo <= d0 && d0 <= hi {
            covered += 1;
        } else {
            misses.push((seed, lo / d0, hi / d0));
        }
    }
    assert!(covered >= 16, "the 95 % interval covered D0 in {covered} of 20 seeds; misses (seed, lo/D0, hi/D0): {misses:?}");
}

/// `analyze --json` carries the keys of the DESIGN.md contract, and the
/// Stokes–Einstein model for a free scenario.
#[test]
fn analyze_json_has_the_contract_keys() {
    let dir = tempdir();
    run_free(
        dir.path(),
        "a.h5",
        &[
            "--set",
            "species.bead.count=200",
            "--set",
            "integrator.steps=4000",
            "--set",
            "output.record_every_steps=40",
        ],
    );
    let out = ok(&thicket(
        dir.path(),
        &["analyze", "a.h5", "--json", "--plot", "a"],
    ));
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    for key in [
        "d0_m2_per_s",
        "d_eff_m2_per_s",
        "d_eff_ci95_m2_per_s",
        "d_eff_over_d0",
        "d_eff_axes_m2_per_s",
        "alpha_long",
        "fit_window_s",
        "particles",
        "frames",
        "models",
    ] {
        assert!(v.get(key).is_some(), "analyze --json lacks {key}: {out}");
    }
    assert_eq!(v["d_eff_ci95_m2_per_s"].as_array().unwrap().len(), 2);
    assert_eq!(v["d_eff_axes_m2_per_s"].as_array().unwrap().len(), 3);
    assert_eq!(v["particles"], 200);
    assert_eq!(v["frames"], 101);
    assert_eq!(v["models"]["free diffusion (Stokes-Einstein)"], 1.0);
    for f in ["a_msd.svg", "a_msd.png", "a_alpha.svg", "a_alpha.png"] {
        assert_png_or_svg(&dir.path().join(f));
    }
}

/// A plot file exists, is not trivial, and (for PNG) decodes to an image
/// that is not a single colour — decoded by the `image` crate.
pub fn assert_png_or_svg(path: &Path) {
    let bytes = std::fs::read(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()));
    assert!(
        bytes.len() > 2000,
        "{} is only {} bytes",
        path.display(),
        bytes.len()
    );
    if path.extension().and_then(|e| e.to_str()) == Some("png") {
        let img = image::load_from_memory(&bytes)
            .unwrap_or_else(|e| panic!("{} does not decode: {e}", path.display()))
            .to_rgb8();
        assert!(img.width() >= 400 && img.height() >= 300);
        let first = img.get_pixel(0, 0);
        let differing = img.pixels().filter(|p| *p != first).count();
        assert!(
            differing > 1000,
            "{} is nearly blank ({differing} pixels differ)",
            path.display()
        );
    } else {
        let text = String::from_utf8_lossy(&bytes);
        assert!(
            text.starts_with("<svg") && text.contains("polyline"),
            "{} is not an SVG plot",
            path.display()
        );
    }
}

/// A sweep writes summary.csv, summary.json with the per-point keys, and a plot.
#[test]
fn sweep_writes_summary_and_plot() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    let sweep = dir.path().join("sweep.toml");
    std::fs::write(
        &sweep,
        format!(
            "scenario = {:?}\nseeds = [1, 2]\ntitle = \"bead sizes\"\n[grid]\n\"species.bead.radius_nm\" = [2.0, 4.0]\n[set]\n\"integrator.steps\" = 4000\n\"species.bead.count\" = 200\n\"output.record_every_steps\" = 40\n",
            cfg.file_name().unwrap().to_str().unwrap()
        ),
    )
    .unwrap();
    ok(&thicket(
        dir.path(),
        &["sweep", "sweep.toml", "--out", "out"],
    ));
    let out = dir.path().join("out");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let points = json["points"].as_array().unwrap();
    assert_eq!(points.len(), 2);
    for p in points {
        for key in [
            "values",
            "seeds",
            "d0_m2_per_s",
            "d_eff_m2_per_s",
            "d_eff_ci95_m2_per_s",
            "d_eff_over_d0",
            "d_eff_over_d0_ci95",
            "alpha_long",
            "models",
        ] {
            assert!(p.get(key).is_some(), "summary point lacks {key}");
        }
        assert_eq!(p["seeds"], 2);
    }
    assert!(json["caution"]
        .as_str()
        .unwrap()
        .contains("not, on their own"));
    let csv = std::fs::read_to_string(out.join("summary.csv")).unwrap();
    assert_eq!(csv.lines().count(), 3, "header and two rows:\n{csv}");
    assert!(csv.starts_with("point,species.bead.radius_nm,seeds,"));
    assert_png_or_svg(&out.join("sweep.png"));
    assert_png_or_svg(&out.join("sweep.svg"));
    // Shards: each half of a fresh sweep, then a merge, gives the same summary.
    ok(&thicket(
        dir.path(),
        &["sweep", "sweep.toml", "--out", "sharded", "--shard", "1/2"],
    ));
    ok(&thicket(
        dir.path(),
        &["sweep", "sweep.toml", "--out", "sharded", "--shard", "2/2"],
    ));
    ok(&thicket(
        dir.path(),
        &["sweep", "sweep.toml", "--out", "sharded", "--merge"],
    ));
    let merged: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("sharded/summary.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(
        merged["points"], json["points"],
        "sharded and whole sweeps agree"
    );
}

fn fails(dir: &Path, args: &[&str], needles: &[&str]) {
    let out = thicket(dir, args);
    let err = stderr(&out);
    assert_eq!(
        out.status.code(),
        Some(2),
        "expected exit 2 for {args:?}: {err}"
    );
    assert!(!err.contains("panicked"), "{err}");
    for n in needles {
        assert!(err.contains(n), "message lacks {n:?}: {err}");
    }
}

#[test]
fn bad_files_and_options_are_refused_clearly() {
    let dir = tempdir();
    let d = dir.path();
    std::fs::write(d.join("not.h5"), b"just some text, not HDF5").unwrap();
    fails(d, &["analyze", "not.h5"], &["not.h5", "HDF5"]);
    // An HDF5 file without positions.
    {
        let f = hdf5::File::create(d.join("empty.h5")).unwrap();
        f.create_group("particles")
            .unwrap()
            .create_group("ghost")
            .unwrap();
    }
    fails(d, &["analyze", "empty.h5"], &["empty.h5", "position"]);
    run_free(
        d,
        "ok.h5",
        &[
            "--set",
            "species.bead.count=50",
            "--set",
            "integrator.steps=800",
            "--set",
            "output.record_every_steps=8",
        ],
    );
    fails(
        d,
        &["analyze", "ok.h5", "--window", "1,2"],
        &["fit window", "available"],
    );
    fails(
        d,
        &["analyze", "ok.h5", "--window", "abc"],
        &["--window", "not a number"],
    );
    fails(
        d,
        &["analyze", "ok.h5", "--species", "nobody"],
        &["nobody", "bead"],
    );
    // A sweep over a key the scenario does not have.
    free_config(d);
    std::fs::write(
        d.join("bad_sweep.toml"),
        "scenario = \"free.toml\"\n[grid]\n\"species.bead.radius\" = [1.0]\n",
    )
    .unwrap();
    fails(
        d,
        &["sweep", "bad_sweep.toml", "--out", "o"],
        &[
            "bad_sweep.toml",
            "species.bead.radius",
            "unknown field `radius`",
        ],
    );
    fails(
        d,
        &["sweep", "bad_sweep.toml", "--shard", "3/2"],
        &["--shard 3/2", "1 ≤ I ≤ N"],
    );
}

/// A file cut short by an interrupted run is analysed for what it holds, and says so.
#[test]
fn truncated_file_is_analysed_and_flagged() {
    let dir = tempdir();
    let d = dir.path();
    run_free(
        d,
        "t.h5",
        &[
            "--set",
            "species.bead.count=100",
            "--set",
            "integrator.steps=4000",
            "--set",
            "output.record_every_steps=40",
        ],
    );
    // Shrink the datasets as a kill mid-run would leave them, and keep frames_planned.
    {
        let f = hdf5::File::open_rw(d.join("t.h5")).unwrap();
        for name in ["position/value", "image/value"] {
            f.dataset(&format!("particles/bead/{name}"))
                .unwrap()
                .resize((60, 100, 3))
                .unwrap();
        }
        f.dataset("particles/bead/position/step")
            .unwrap()
            .resize(59)
            .unwrap();
        f.dataset("particles/bead/position/time")
            .unwrap()
            .resize(60)
            .unwrap();
    }
    let out = ok(&thicket(d, &["analyze", "t.h5", "--json"]));
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["truncated"], true);
    assert_eq!(v["frames"], 59);
    assert_eq!(v["frames_planned"], 101);
    assert!(
        v["warnings"]
            .as_array()
            .unwrap()
            .iter()
            .any(|w| w.as_str().unwrap().contains("59")),
        "{out}"
    );
}
