//! Bad input to `thicket tracks`: each a clear error naming file, key, value
//! and the allowed range, with exit code 2 and no output files.

use crate::support::{fails, repo, tempdir, thicket, write_scenario};

/// Runs `thicket tracks` on a small scenario with `camera` lines and `sets`,
/// and returns stderr after checking it names every `part`.
fn refused(camera: &str, sets: &[&str], parts: &[&str]) {
    let dir = tempdir();
    let cfg = write_scenario(
        dir.path(),
        [2000.0, 2000.0, 1000.0],
        10,
        1e-12,
        0.001,
        100,
        camera,
    );
    let mut args = vec!["tracks", cfg.to_str().unwrap(), "--out", "t.csv"];
    for s in sets {
        args.extend(["--set", s]);
    }
    let err = fails(&thicket(dir.path(), &args));
    for part in parts {
        assert!(err.contains(part), "error lacks `{part}`:\n{err}");
    }
    assert!(
        !dir.path().join("t.csv").exists() && !dir.path().join("t.trajectory.h5").exists(),
        "a refused run left files"
    );
}

#[test]
fn exposure_longer_than_the_frame_interval() {
    refused(
        "frame_interval_s = 0.01\nexposure_s = 0.015",
        &[],
        &[
            "scenario.toml",
            "camera.exposure_s",
            "0.015",
            "cannot be longer than the frame interval",
        ],
    );
}

#[test]
fn recording_interval_not_dividing_the_frame_interval() {
    refused(
        "frame_interval_s = 0.01",
        &["output.record_every_steps=4"],
        &[
            "scenario.toml",
            "camera.frame_interval_s",
            "0.01",
            "whole multiple of the recording interval",
        ],
    );
}

#[test]
fn negative_noise() {
    refused(
        "frame_interval_s = 0.01\nlocalisation_sigma_nm = -20.0",
        &[],
        &[
            "scenario.toml",
            "camera.localisation_sigma_nm",
            "-20",
            "cannot be negative",
        ],
    );
}

#[test]
fn focal_depth_outside_the_box() {
    refused(
        "frame_interval_s = 0.01\nfocal_depth_nm = 800.0",
        &[],
        &[
            "scenario.toml",
            "camera.focal_depth_nm",
            "800",
            "must lie inside the box, 0 to 1000 nm along z",
        ],
    );
}

#[test]
fn scenario_without_a_camera() {
    let dir = tempdir();
    let err = fails(&thicket(
        dir.path(),
        &[
            "tracks",
            repo("configs/free.toml").to_str().unwrap(),
            "--out",
            "t.csv",
        ],
    ));
    assert!(
        err.contains("free.toml") && err.contains("[camera]"),
        "{err}"
    );
}

#[test]
fn existing_output_needs_force() {
    let dir = tempdir();
    let cfg = write_scenario(
        dir.path(),
        [2000.0, 2000.0, 1000.0],
        10,
        1e-12,
        0.001,
        100,
        "frame_interval_s = 0.01",
    );
    std::fs::write(dir.path().join("t.csv"), "keep me").unwrap();
    let err = fails(&thicket(
        dir.path(),
        &["tracks", cfg.to_str().unwrap(), "--out", "t.csv"],
    ));
    assert!(err.contains("t.csv") && err.contains("--force"), "{err}");
    assert_eq!(
        std::fs::read_to_string(dir.path().join("t.csv")).unwrap(),
        "keep me"
    );
    crate::support::ok(&thicket(
        dir.path(),
        &["tracks", cfg.to_str().unwrap(), "--out", "t.csv", "--force"],
    ));
}
