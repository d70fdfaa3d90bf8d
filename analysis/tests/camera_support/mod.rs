//! Helpers for the camera tests: scenarios written inline and an in-memory
//! path from the engine's free-diffusion kernel into the camera (no HDF5).

#![allow(dead_code)] // each test file uses a different part

use std::path::Path;
use thicket_analysis::camera::image_free_in_memory;
use thicket_analysis::tracks::TrackSet;
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
         [integrator]\ndt_s = {record_s:e}\nsteps = {steps}\n[output]\nrecord_every_steps = 1\nprecision = \"f64\"\n\
         [camera]\nframe_interval_s = {frame_s:e}\n{camera}\n"
    );
    Scenario::from_text(&text, Path::new("camera-test.toml"), &[])
        .expect("the test scenario is valid")
}

/// Simulates a one-species scenario in memory and images it with its camera.
pub fn image(scenario: &Scenario) -> TrackSet {
    image_in_windows(scenario, 64)
}

/// As [`image`], handing the camera `window` recorded positions at a time
/// (the library's in-memory path, shared with `thicket validate`).
pub fn image_in_windows(scenario: &Scenario, window: usize) -> TrackSet {
    assert_eq!(
        scenario.species.len(),
        1,
        "the in-memory helper images one species"
    );
    image_free_in_memory(scenario, window).expect("the scenario has a camera")
}

pub use thicket_analysis::direct::mean_se;
