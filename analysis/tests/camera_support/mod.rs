//! Helpers for the camera tests: scenarios written inline and an in-memory
//! path from the engine's free-diffusion kernel into the camera (no HDF5).

#![allow(dead_code)] // each test file uses a different part

use ndarray::Array3;
use std::path::Path;
use thicket_analysis::camera::Camera;
use thicket_analysis::tracks::{SpeciesTruth, TrackSet};
use thicket_engine::integrate::{advance_free, kinetics, State};
use thicket_engine::Scenario;

/// One free species of diffusivity `d_m2_per_s` in a periodic cube of edge
/// `edge_nm`, stepped once per recorded position of `record_s`, for `frames`
/// camera frames of `frame_s`, with the `[camera]` keys given as TOML lines.
#[allow(clippy::too_many_arguments)] // one flat call per test reads better than a builder here
pub fn scenario(
    seed: u64,
    count: usize,
    d_m2_per_s: f64,
    edge_nm: f64,
    record_s: f64,
    frame_s: f64,
    frames: usize,
    camera: &str,
) -> Scenario {
    let steps = ((frames as f64 * frame_s / record_s).round() as u64).max(1);
    let text = format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge_nm}, {edge_nm}, {edge_nm}]\n\
         [[species]]\nname = \"bead\"\nradius_nm = 5.0\ncount = {count}\ndiffusivity_m2_per_s = {d_m2_per_s:e}\n\
         [integrator]\ndt_s = {record_s:e}\nsteps = {steps}\n[output]\nrecord_every_steps = 1\n\
         [camera]\nframe_interval_s = {frame_s:e}\n{camera}\n"
    );
    Scenario::from_text(&text, Path::new("camera-test.toml"), &[])
        .expect("the test scenario is valid")
}

/// Simulates a one-species scenario in memory and images it with its camera.
pub fn image(scenario: &Scenario) -> TrackSet {
    image_in_windows(scenario, 64)
}

/// As [`image`], handing the camera `window` recorded positions at a time.
pub fn image_in_windows(scenario: &Scenario, window: usize) -> TrackSet {
    assert_eq!(
        scenario.species.len(),
        1,
        "the in-memory helper images one species"
    );
    let camera = Camera::new(scenario).expect("the scenario has a camera");
    let kin = kinetics(scenario);
    let mut state = State::initial(scenario);
    let n = state.len();
    let needed = camera.samples_needed();
    let mut imaging = camera.start(0, 0, n);
    let mut done = 0;
    while done < needed {
        let w = window.min(needed - done);
        let mut buf = Array3::<f64>::zeros((w, n, 3));
        for t in 0..w {
            if done + t > 0 {
                advance_free(
                    &mut state,
                    &kin,
                    &scenario.sim_box,
                    scenario.output.record_every_steps,
                );
            }
            for i in 0..n {
                let p = state.unwrapped(i, &scenario.sim_box);
                for k in 0..3 {
                    buf[[t, i, k]] = p[k];
                }
            }
        }
        imaging.push(buf.view());
        done += w;
    }
    let species = vec![SpeciesTruth {
        name: scenario.species[0].name.clone(),
        d0_m2_per_s: scenario.species[0].d0_m2_per_s,
    }];
    TrackSet::assemble(
        imaging.finish(),
        species,
        camera
            .region_names()
            .iter()
            .map(|r| r.to_string())
            .collect(),
        camera.summary(),
        scenario.resolved_toml.clone(),
    )
}

/// Mean and standard error of the mean.
pub fn mean_se(v: &[f64]) -> (f64, f64) {
    let n = v.len() as f64;
    let m = v.iter().sum::<f64>() / n;
    let var = v.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (n - 1.0);
    (m, (var / n).sqrt())
}
