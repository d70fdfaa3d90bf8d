//! Motion blur and localisation error in the MSD of camera tracks.
//!
//! Outside check: per axis, the MSD of blurred, noisy tracks of free
//! diffusion is MSD(nΔt) = 2D nΔt + 2σ² − 4RDΔt with R = t_E/(6Δt) for a
//! uniform exposure t_E ≤ Δt (Berglund, Phys. Rev. E 82, 011917, 2010;
//! Savin & Doyle 2005; REFERENCES.md "Single-particle-tracking measurement
//! model"). The issue asks for agreement within 3 % at three (σ, t_E).

mod camera_support;

use camera_support::{image, mean_se, scenario};

/// D = 1 µm²/s in nm²/s.
const D_NM2_PER_S: f64 = 1e6;
const FRAME_S: f64 = 0.01;
/// 40 recorded positions per frame: a quarter-frame exposure still averages ten.
const RECORD_S: f64 = FRAME_S / 40.0;
const LAGS: [usize; 5] = [1, 2, 3, 5, 10];

/// Per-track, per-axis time-averaged MSD at `LAGS`, nm²: `[axis][lag][track]`.
fn per_track_msd(set: &thicket_analysis::tracks::TrackSet) -> Vec<Vec<Vec<f64>>> {
    let mut out = vec![vec![Vec::new(); LAGS.len()]; 3];
    for t in &set.tracks {
        let x = &t.positions_nm;
        for (li, &lag) in LAGS.iter().enumerate() {
            if x.len() <= lag {
                continue;
            }
            for (k, axis) in out.iter_mut().enumerate() {
                let s: f64 = (lag..x.len())
                    .map(|i| (x[i][k] - x[i - lag][k]).powi(2))
                    .sum();
                axis[li].push(s / (x.len() - lag) as f64);
            }
        }
    }
    out
}

fn check_setting(seed: u64, sigma_nm: f64, exposure_frames: f64) {
    let exposure_s = exposure_frames * FRAME_S;
    let camera = format!(
        "exposure_s = {exposure_s:e}\nlocalisation_sigma_nm = {sigma_nm}\nprojection = \"3d\""
    );
    // A box far larger than any excursion, so tracks never cross a periodic face.
    let sc = scenario(
        seed,
        2000,
        D_NM2_PER_S * 1e-18,
        1e7,
        RECORD_S,
        FRAME_S,
        200,
        &camera,
    );
    let mut set = image(&sc);
    // A particle that happens to start near a periodic face breaks its track
    // where it crosses (camera.rs); keep the whole tracks of the others.
    set.tracks.retain(|t| t.positions_nm.len() == 200);
    assert!(
        set.tracks.len() >= 1980,
        "only {} whole tracks",
        set.tracks.len()
    );
    let msd = per_track_msd(&set);
    let r = exposure_s / (6.0 * FRAME_S);
    for (k, axis) in msd.iter().enumerate() {
        for (li, &lag) in LAGS.iter().enumerate() {
            let (measured, se) = mean_se(&axis[li]);
            let dt = FRAME_S;
            // Berglund (2010), eq. for a uniform exposure: 2D nΔt + 2σ² − 4RDΔt.
            let berglund = 2.0 * D_NM2_PER_S * lag as f64 * dt + 2.0 * sigma_nm * sigma_nm
                - 4.0 * r * D_NM2_PER_S * dt;
            let rel = measured / berglund - 1.0;
            println!(
                "σ = {sigma_nm} nm, t_E = {exposure_frames} Δt, axis {k}, lag {lag}: MSD {measured:.1} ± {se:.1} nm², Berglund {berglund:.1}, {:+.2} %",
                100.0 * rel
            );
            // The 3 % of the issue must be at least 3 standard errors, or the test could not tell.
            assert!(
                0.03 * berglund > 3.0 * se,
                "too few tracks to test 3 %: SE {se}"
            );
            assert!(
                rel.abs() < 0.03,
                "axis {k} lag {lag}: MSD {measured} against Berglund {berglund} ({:+.2} %)",
                100.0 * rel
            );
        }
        if exposure_frames > 0.0 {
            // The blur term matters: without it the prediction at lag 1 misses by more than 3 %.
            let (measured, _) = mean_se(&axis[0]);
            let unblurred = 2.0 * D_NM2_PER_S * FRAME_S + 2.0 * sigma_nm * sigma_nm;
            assert!(
                (measured / unblurred - 1.0).abs() > 0.03,
                "the blur is too small to be tested at this setting"
            );
        }
    }
}

#[test]
fn full_exposure_without_noise() {
    check_setting(101, 0.0, 1.0);
}

#[test]
fn half_exposure_with_30_nm_noise() {
    check_setting(102, 30.0, 0.5);
}

#[test]
fn quarter_exposure_with_80_nm_noise() {
    check_setting(103, 80.0, 0.25);
}

/// The camera's reported blur factor is the continuous t_E/(6Δt) corrected for
/// averaging m positions: t_E (1 − 1/m²)/(6Δt) (camera.rs derivation).
#[test]
fn reported_blur_factor_accounts_for_sampling() {
    let sc = scenario(
        1,
        10,
        1e-12,
        1e6,
        RECORD_S,
        FRAME_S,
        5,
        "exposure_s = 0.005",
    );
    let set = image(&sc);
    let m = 20.0;
    let expected = 0.005 * (1.0 - 1.0 / (m * m)) / (6.0 * FRAME_S);
    assert!(
        (set.camera.blur_factor - expected).abs() < 1e-12,
        "{}",
        set.camera.blur_factor
    );
    let sc = scenario(1, 10, 1e-12, 1e6, RECORD_S, FRAME_S, 5, "exposure_s = 0.0");
    assert_eq!(image(&sc).camera.blur_factor, 0.0);
}
