//! The `[camera]` section: bad input gives errors naming file, key, value
//! and the allowed range; and the camera's emitter, field of view and noise
//! behave as documented.

mod camera_support;

use camera_support::{image, image_in_windows, mean_se, scenario};
use std::path::Path;
use thicket_analysis::camera::photon_limited_sigma_nm;
use thicket_engine::Scenario;

const BASE: &str = r#"
seed = 7
[medium]
temperature_K = 298.15
[box]
edges_nm = [2000.0, 2000.0, 1000.0]
[[species]]
name = "bead"
radius_nm = 5.0
count = 10
[integrator]
dt_s = 0.001
steps = 100
[output]
record_every_steps = 1
[camera]
frame_interval_s = 0.01
"#;

fn load(extra: &str, sets: &[&str]) -> Result<Scenario, String> {
    let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
    Scenario::from_text(&format!("{BASE}{extra}"), Path::new("scope.toml"), &sets)
        .map_err(|e| e.to_string())
}

/// Asserts an error that names the file, the key, the value and a range phrase.
fn refused(extra: &str, sets: &[&str], key: &str, value: &str, phrase: &str) {
    let err = load(extra, sets).expect_err("the scenario must be refused");
    for part in ["scope.toml", key, value, phrase] {
        assert!(err.contains(part), "error lacks `{part}`: {err}");
    }
}

#[test]
fn exposure_longer_than_the_frame_interval() {
    refused(
        "exposure_s = 0.02\n",
        &[],
        "camera.exposure_s",
        "0.02",
        "cannot be longer than the frame interval",
    );
    refused(
        "",
        &["camera.exposure_s=0.011"],
        "camera.exposure_s",
        "0.011",
        "from 0 to camera.frame_interval_s",
    );
}

#[test]
fn recording_interval_not_dividing_the_frame_interval() {
    refused(
        "",
        &["camera.frame_interval_s=0.0105"],
        "camera.frame_interval_s",
        "0.0105",
        "whole multiple of the recording interval",
    );
    refused(
        "",
        &["output.record_every_steps=4"],
        "camera.frame_interval_s",
        "0.01",
        "4 × 1e-3 s",
    );
    refused(
        "exposure_s = 0.0045\n",
        &[],
        "camera.exposure_s",
        "0.0045",
        "whole multiple of the recording interval",
    );
}

#[test]
fn negative_noise() {
    refused(
        "localisation_sigma_nm = -5.0\n",
        &[],
        "camera.localisation_sigma_nm",
        "-5",
        "cannot be negative",
    );
    refused(
        "projection = \"3d\"\nlocalisation_sigma_z_nm = -1.0\n",
        &[],
        "camera.localisation_sigma_z_nm",
        "-1",
        "cannot be negative",
    );
    refused(
        "[camera.photons]\nphotons_per_detection = 100.0\npsf_sigma_nm = 120.0\npixel_size_nm = 100.0\nbackground_photons_per_pixel = -2.0\n",
        &[],
        "camera.photons.background_photons_per_pixel",
        "-2",
        "from 0 to 1e15",
    );
}

#[test]
fn focal_depth_outside_the_box() {
    refused(
        "focal_depth_nm = 600.0\n",
        &[],
        "camera.focal_depth_nm",
        "600",
        "must lie inside the box, 0 to 1000 nm",
    );
    refused(
        "focal_plane_z_nm = 900.0\nfocal_depth_nm = 200.0\n",
        &[],
        "camera.focal_depth_nm",
        "200",
        "(0, 100] nm",
    );
    refused(
        "focal_plane_z_nm = 1200.0\n",
        &[],
        "camera.focal_plane_z_nm",
        "1200",
        "inside the box",
    );
    refused(
        "focal_depth_nm = -3.0\n",
        &[],
        "camera.focal_depth_nm",
        "-3",
        "(0, 500] nm",
    );
}

#[test]
fn other_bad_camera_keys() {
    refused(
        "field_of_view_nm = [3000.0, 100.0]\n",
        &[],
        "camera.field_of_view_nm[0]",
        "3000",
        "cannot be wider than box.edges_nm[0]",
    );
    refused(
        "blink_on_to_off_per_s = 2.0\n",
        &[],
        "camera.blink_on_to_off_per_s",
        "2",
        "needs both",
    );
    refused(
        "projection = \"4d\"\n",
        &[],
        "camera.projection",
        "4d",
        "\"2d\" or \"3d\"",
    );
    refused(
        "localisation_sigma_z_nm = 30.0\n",
        &[],
        "camera.localisation_sigma_z_nm",
        "30",
        "only with camera.projection = \"3d\"",
    );
    refused(
        "localisation_sigma_nm = 5.0\n[camera.photons]\nphotons_per_detection = 100.0\npsf_sigma_nm = 120.0\npixel_size_nm = 100.0\n",
        &[],
        "camera.localisation_sigma_nm",
        "5",
        "not both",
    );
    refused(
        "bleach_lifetime_s = 0.0\n",
        &[],
        "camera.bleach_lifetime_s",
        "0",
        "from 1e-12 to 1e12 s",
    );
    refused(
        "",
        &["integrator.steps=10"],
        "integrator.steps",
        "10",
        "at least two frames",
    );
    let err = load("exposure_time = 0.01\n", &[]).expect_err("unknown key");
    assert!(
        err.contains("exposure_time") && err.contains("line"),
        "{err}"
    );
}

#[test]
fn valid_camera_resolves_and_round_trips() {
    let s = load(
        "exposure_s = 0.005\nfocal_depth_nm = 200.0\nfield_of_view_nm = [1000.0, 500.0]\n",
        &[],
    )
    .expect("valid");
    let c = s.camera.as_ref().expect("camera");
    assert_eq!(
        (c.samples_per_frame, c.samples_per_exposure, c.frames),
        (10, 5, 10)
    );
    assert_eq!(c.field_of_view_nm, [[500.0, 1500.0], [750.0, 1250.0]]);
    assert_eq!(c.focal_slab_nm, Some([300.0, 700.0]));
    // The resolved scenario keeps the camera, so trajectories carry it.
    let again = Scenario::from_text(&s.resolved_toml, Path::new("again.toml"), &[])
        .expect("resolved text parses");
    assert_eq!(again.camera, s.camera);
}

/// Thompson, Larson & Webb (2002), eq. 17, evaluated by hand for s = 130 nm,
/// a = 110 nm, N = 150, b² = 4: 14.9951 nm; and its limits.
#[test]
fn photon_limited_sigma() {
    assert!((photon_limited_sigma_nm(150.0, 130.0, 110.0, 4.0) - 14.99510).abs() < 1e-4);
    // No background: the shot-noise term alone, (s² + a²/12)/N.
    let shot = ((130.0f64 * 130.0 + 110.0 * 110.0 / 12.0) / 150.0).sqrt();
    assert!((photon_limited_sigma_nm(150.0, 130.0, 110.0, 0.0) - shot).abs() < 1e-12);
    // Four times the photons halve σ without background.
    let ratio = photon_limited_sigma_nm(600.0, 130.0, 110.0, 0.0)
        / photon_limited_sigma_nm(150.0, 130.0, 110.0, 0.0);
    assert!((ratio - 0.5).abs() < 1e-12);
}

/// The reported minus the true (blurred) position is Gaussian noise of the set σ.
#[test]
fn localisation_error_has_the_set_sigma() {
    let sc = scenario(
        31,
        500,
        1e-12,
        1e7,
        0.001,
        0.01,
        50,
        "localisation_sigma_nm = 25.0\nprojection = \"3d\"\nlocalisation_sigma_z_nm = 60.0",
    );
    let set = image(&sc);
    for (k, sigma) in [(0usize, 25.0), (1, 25.0), (2, 60.0)] {
        let e: Vec<f64> = set
            .tracks
            .iter()
            .flat_map(|t| {
                t.positions_nm
                    .iter()
                    .zip(&t.true_positions_nm)
                    .map(move |(p, q)| (p[k] - q[k]).powi(2))
            })
            .collect();
        let (var, se) = mean_se(&e);
        assert!(
            (var - sigma * sigma).abs() < 4.0 * se,
            "axis {k}: variance {var} ± {se}"
        );
    }
}

/// A uniformly filled periodic box: the fraction of particles in view is the
/// area fraction of the field of view (exact geometry).
#[test]
fn field_of_view_sees_its_area_fraction() {
    let sc = scenario(
        32,
        4000,
        1e-12,
        2000.0,
        0.001,
        0.01,
        30,
        "field_of_view_nm = [1000.0, 1500.0]",
    );
    let set = image(&sc);
    let frames = set.camera.frames as f64;
    let fraction = set.detections() as f64 / (4000.0 * frames);
    let expected: f64 = 0.5 * 0.75;
    // Binomial spread of one frame, shrunk by the frames (correlated, so counted as 3 independent).
    let se = (expected * (1.0 - expected) / (4000.0 * 3.0)).sqrt();
    assert!(
        (fraction - expected).abs() < 4.0 * se,
        "fraction {fraction}"
    );
    for t in &set.tracks {
        for q in &t.true_positions_nm {
            assert!(
                (500.0..1500.0).contains(&q[0]) && (250.0..1750.0).contains(&q[1]),
                "{q:?} outside the field"
            );
        }
    }
}

/// Two-state blinking: the fraction of emitting frames is k_on/(k_on + k_off)
/// and an emitting frame is followed by an emitting one with probability
/// p_stay = π + (1 − π) e^{−(k_on + k_off)Δt} (two-state Markov chain, exact).
#[test]
fn blinking_follows_the_two_state_chain() {
    let (k_off, k_on, dt) = (20.0, 30.0, 0.01);
    let sc = scenario(
        33,
        3000,
        1e-15,
        1e7,
        0.01,
        dt,
        100,
        &format!(
            "exposure_s = 0.0\nblink_on_to_off_per_s = {k_off}\nblink_off_to_on_per_s = {k_on}"
        ),
    );
    let set = image(&sc);
    let frames = set.camera.frames;
    let pi = k_on / (k_on + k_off);
    let fraction = set.detections() as f64 / (3000.0 * frames as f64);
    assert!(
        (fraction - pi).abs() < 0.01,
        "on fraction {fraction}, expected {pi}"
    );
    // Emitting frames that have a next frame, and how many of those stay emitting
    // (a run of L detections holds L − 1 such steps); counting steps, not runs,
    // avoids the bias of runs cut by the end of the movie.
    let stays: usize = set.tracks.iter().map(|t| t.positions_nm.len() - 1).sum();
    let with_next: usize = set
        .tracks
        .iter()
        .map(|t| t.positions_nm.len() - usize::from(t.first_frame + t.positions_nm.len() == frames))
        .sum();
    let p_stay = stays as f64 / with_next as f64;
    let expected = pi + (1.0 - pi) * (-(k_on + k_off) * dt).exp();
    let se = (expected * (1.0 - expected) / with_next as f64).sqrt();
    assert!(
        (p_stay - expected).abs() < 4.0 * se,
        "p_stay {p_stay} ± {se}, expected {expected}"
    );
}

/// The camera's streams are keyed by particle: reading the trajectory one
/// position at a time or in large windows gives the same tracks.
#[test]
fn tracks_do_not_depend_on_the_read_window() {
    let sc = scenario(34, 50, 1e-12, 3000.0, 0.001, 0.01, 20, "exposure_s = 0.005\nlocalisation_sigma_nm = 10.0\nfocal_depth_nm = 600.0\nbleach_lifetime_s = 0.1\nblink_on_to_off_per_s = 5.0\nblink_off_to_on_per_s = 50.0");
    assert_eq!(image_in_windows(&sc, 1), image_in_windows(&sc, 500));
}

/// Through an HDF5 trajectory written by the engine (f64), split over 1 or 3
/// threads, the camera gives exactly the tracks of the in-memory path.
#[test]
fn file_path_matches_memory_and_any_thread_split() {
    let mut sc = scenario(35, 600, 1e-12, 3000.0, 0.001, 0.01, 20, "exposure_s = 0.005\nlocalisation_sigma_nm = 10.0\nfocal_depth_nm = 600.0\nbleach_lifetime_s = 0.5");
    sc.output.precision = thicket_engine::scenario::config::Precision::F64;
    let dir = tempfile::tempdir().expect("temp folder");
    let traj = dir.path().join("t.h5");
    let opts = thicket_engine::run::driver::RunOptions {
        out: traj.clone(),
        force: false,
        resume: false,
    };
    thicket_engine::run::driver::run(
        &sc,
        &opts,
        &std::sync::atomic::AtomicBool::new(false),
        &mut |_, _| {},
    )
    .expect("run");
    let memory = image(&sc);
    let one = thicket_analysis::camera::image_trajectory_on(&traj, &sc, 1).expect("imaging");
    let three = thicket_analysis::camera::image_trajectory_on(&traj, &sc, 3).expect("imaging");
    assert_eq!(one, three);
    assert_eq!(one.tracks, memory.tracks);
    assert!(
        one.tracks.len() > 600,
        "focus and bleaching should break tracks"
    );
}

/// A membrane scene: detections inside the slab (necessarily in a pore) are
/// labelled "pore", the others "reservoir" (exact geometry), and a species
/// without a label is never seen.
#[test]
fn membrane_regions_and_labelled_species() {
    let text = r#"
seed = 36
[medium]
temperature_K = 298.15
[box]
edges_nm = [80.0, 80.0, 80.0]
[[species]]
name = "solute"
radius_nm = 2.0
count = 800
[[species]]
name = "dark"
radius_nm = 2.0
count = 300
[integrator]
dt_s = 1.6e-10
steps = 6000
[geometry]
kind = "membrane"
thickness_nm = 40.0
pore_radius_nm = 10.0
pores_x = 2
pores_y = 2
top_concentration_mol_per_m3 = 1.0
bottom_concentration_mol_per_m3 = 1.0
[output]
record_every_steps = 10
precision = "f64"
[camera]
frame_interval_s = 1.6e-8
labelled_species = ["solute"]
"#;
    let sc = Scenario::from_text(text, Path::new("membrane-camera.toml"), &[])
        .expect("valid membrane scene");
    let dir = tempfile::tempdir().expect("temp folder");
    let traj = dir.path().join("m.h5");
    let opts = thicket_engine::run::driver::RunOptions {
        out: traj.clone(),
        force: false,
        resume: false,
    };
    thicket_engine::run::driver::run(
        &sc,
        &opts,
        &std::sync::atomic::AtomicBool::new(false),
        &mut |_, _| {},
    )
    .expect("run");
    let set = thicket_analysis::camera::image_trajectory(&traj, &sc).expect("imaging");
    assert_eq!(set.regions, ["reservoir", "pore"]);
    let (z_lo, z_hi) = (20.0, 60.0);
    let mut seen = [0usize; 2];
    for t in &set.tracks {
        assert_eq!(
            set.species[t.species].name, "solute",
            "the unlabelled species was seen"
        );
        assert!(t.particle < 800);
        for (q, &r) in t.true_positions_nm.iter().zip(&t.regions) {
            let in_slab = (z_lo..=z_hi).contains(&q[2]);
            assert_eq!(r == 1, in_slab, "region {r} at z = {}", q[2]);
            seen[r as usize] += 1;
        }
        let pore = t.regions.iter().filter(|&&r| r == 1).count();
        assert_eq!(
            t.region == 1,
            2 * pore > t.regions.len(),
            "majority region of track {}",
            t.id
        );
    }
    assert!(
        seen[0] > 1000 && seen[1] > 100,
        "both regions seen: {seen:?}"
    );
    assert!(set.tracks.iter().any(|t| t.region == 1) && set.tracks.iter().any(|t| t.region == 0));

    let bad = text.replace(
        "labelled_species = [\"solute\"]",
        "labelled_species = [\"solut\"]",
    );
    let err = Scenario::from_text(&bad, Path::new("membrane-camera.toml"), &[])
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("camera.labelled_species") && err.contains("solut") && err.contains("dark"),
        "{err}"
    );
}
