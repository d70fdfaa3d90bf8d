//! Per-track estimators of D and σ² on camera tracks with blur and noise.
//!
//! Outside check: the covariance-based estimator is unbiased for D and σ²
//! (Vestergaard, Blainey & Flyvbjerg, Phys. Rev. E 89, 022726, 2014;
//! REFERENCES.md), checked as REFERENCES.md asks, by the spread over many
//! seeded tracks against the true D and σ, not by a quoted error formula.

mod camera_support;

use camera_support::{image, mean_se, scenario};
use thicket_analysis::tracks::{
    covariance_estimate, msd_fit_estimate, msd_slope_variance, Track, TrackSet,
};

const D_NM2_PER_S: f64 = 1e6;
const FRAME_S: f64 = 0.01;
const RECORD_S: f64 = FRAME_S / 20.0;

/// `want` whole tracks of `frames` frames (tracks that cross a periodic face are dropped).
fn whole_tracks(seed: u64, want: usize, frames: usize, camera: &str) -> TrackSet {
    let sc = scenario(
        seed,
        want + want / 10 + 5,
        D_NM2_PER_S * 1e-18,
        1e7,
        RECORD_S,
        FRAME_S,
        frames,
        camera,
    );
    let mut set = image(&sc);
    // With an instantaneous exposure the frame at the very end also fits.
    let whole = set.camera.frames;
    set.tracks.retain(|t| t.positions_nm.len() == whole);
    assert!(
        set.tracks.len() >= want,
        "only {} whole tracks",
        set.tracks.len()
    );
    set.tracks.truncate(want);
    set
}

fn frames_of(t: &Track) -> Vec<i64> {
    (0..t.positions_nm.len())
        .map(|k| (t.first_frame + k) as i64)
        .collect()
}

#[test]
fn covariance_estimator_is_unbiased_over_200_tracks() {
    let sigma = 30.0;
    let set = whole_tracks(
        601,
        200,
        1000,
        &format!("exposure_s = 0.005\nlocalisation_sigma_nm = {sigma}"),
    );
    let r = set.camera.blur_factor;
    let (mut d, mut s2, mut s2_no_blur) = (Vec::new(), Vec::new(), Vec::new());
    for t in &set.tracks {
        let c = covariance_estimate(&frames_of(t), &t.positions_nm, 2, FRAME_S, r)
            .expect("1000 frames give an estimate");
        d.push(c.d_nm2_per_s);
        s2.push(0.5 * (c.sigma2_axes_nm2[0] + c.sigma2_axes_nm2[1]));
        let c0 =
            covariance_estimate(&frames_of(t), &t.positions_nm, 2, FRAME_S, 0.0).expect("estimate");
        s2_no_blur.push(0.5 * (c0.sigma2_axes_nm2[0] + c0.sigma2_axes_nm2[1]));
    }
    let (dm, dse) = mean_se(&d);
    let (sm, sse) = mean_se(&s2);
    println!("covariance estimator over 200 tracks: D = {dm:.0} ± {dse:.0} nm²/s (truth {D_NM2_PER_S}), σ² = {sm:.1} ± {sse:.1} nm² (truth {})", sigma * sigma);
    // Vestergaard et al. (2014): E[D̂] = D and E[σ̂²] = σ²; 3 standard errors.
    assert!((dm - D_NM2_PER_S).abs() < 3.0 * dse, "D {dm} ± {dse}");
    assert!((sm - sigma * sigma).abs() < 3.0 * sse, "σ² {sm} ± {sse}");
    // Power: ignoring the blur (R = 0) biases σ² far beyond that spread.
    let (bm, _) = mean_se(&s2_no_blur);
    assert!(
        (bm - sigma * sigma).abs() > 10.0 * sse,
        "the test cannot see the blur: {bm}"
    );
}

#[test]
fn msd_fit_with_optimal_lags_is_unbiased_over_200_tracks() {
    let sigma = 30.0;
    let set = whole_tracks(
        602,
        200,
        1000,
        &format!("exposure_s = 0.005\nlocalisation_sigma_nm = {sigma}"),
    );
    let r = set.camera.blur_factor;
    let (mut d, mut s2) = (Vec::new(), Vec::new());
    for t in &set.tracks {
        let m = msd_fit_estimate(&frames_of(t), &t.positions_nm, 2, FRAME_S, r)
            .expect("1000 frames give an estimate");
        d.push(m.d_nm2_per_s);
        s2.push(0.5 * (m.sigma2_axes_nm2[0] + m.sigma2_axes_nm2[1]));
    }
    let (dm, dse) = mean_se(&d);
    let (sm, sse) = mean_se(&s2);
    println!("MSD fit over 200 tracks: D = {dm:.0} ± {dse:.0} nm²/s, σ² = {sm:.1} ± {sse:.1} nm²");
    // The MSD is exactly a + b n for n ≥ 1 (Berglund 2010), so the least-squares
    // slope and intercept are unbiased; the lag choice adds a small selection
    // effect, inside 3 standard errors here.
    assert!((dm - D_NM2_PER_S).abs() < 3.0 * dse, "D {dm} ± {dse}");
    assert!((sm - sigma * sigma).abs() < 3.0 * sse, "σ² {sm} ± {sse}");
}

/// Michalet (2010): the best number of MSD points grows with the reduced
/// localisation error x = σ²/(DΔt).
#[test]
fn optimal_lags_grow_with_reduced_localisation_error() {
    let median_lags = |sigma: f64, seed: u64| {
        let set = whole_tracks(
            seed,
            100,
            200,
            &format!("exposure_s = 0.0\nlocalisation_sigma_nm = {sigma}"),
        );
        let mut p: Vec<usize> = set
            .tracks
            .iter()
            .flat_map(|t| {
                msd_fit_estimate(&frames_of(t), &t.positions_nm, 2, FRAME_S, 0.0)
                    .expect("estimate")
                    .lags_axes
            })
            .collect();
        p.sort_unstable();
        p[p.len() / 2]
    };
    let small = median_lags(10.0, 603); // x = 0.01
    let large = median_lags(300.0, 604); // x = 9
    println!("median lags: x = 0.01 → {small}, x = 9 → {large}");
    assert!(small <= 3, "{small}");
    assert!(large > small + 2, "{large} vs {small}");
}

/// The variance the lag choice minimises against the spread of fitted slopes
/// over 4000 tracks.
#[test]
fn slope_variance_matches_the_spread_of_fits() {
    let (sigma, n, p) = (50.0, 50usize, 5usize);
    let set = whole_tracks(605, 4000, n, &format!("localisation_sigma_nm = {sigma}"));
    let r = set.camera.blur_factor;
    let mut slopes = Vec::new();
    for t in &set.tracks {
        for k in 0..2 {
            let x: Vec<f64> = t.positions_nm.iter().map(|q| q[k]).collect();
            let rho: Vec<f64> = (1..=p)
                .map(|l| (l..n).map(|i| (x[i] - x[i - l]).powi(2)).sum::<f64>() / (n - l) as f64)
                .collect();
            let mx = (p as f64 + 1.0) / 2.0;
            let sxx: f64 = (1..=p).map(|l| (l as f64 - mx).powi(2)).sum();
            slopes.push((1..=p).map(|l| (l as f64 - mx) * rho[l - 1]).sum::<f64>() / sxx);
        }
    }
    let m = slopes.iter().sum::<f64>() / slopes.len() as f64;
    let var = slopes.iter().map(|s| (s - m).powi(2)).sum::<f64>() / (slopes.len() - 1) as f64;
    let m4 = slopes.iter().map(|s| (s - m).powi(4)).sum::<f64>() / slopes.len() as f64;
    let var_se = ((m4 - var * var) / slopes.len() as f64).sqrt();
    let (b, a) = (
        2.0 * D_NM2_PER_S * FRAME_S,
        2.0 * sigma * sigma - 4.0 * r * D_NM2_PER_S * FRAME_S,
    );
    let predicted = msd_slope_variance(n, p, a, b);
    println!("slope variance: measured {var:.4e} ± {var_se:.2e}, predicted {predicted:.4e}");
    assert!(
        (var - predicted).abs() < 4.0 * var_se,
        "measured {var} ± {var_se}, predicted {predicted}"
    );
}

/// The fast covariance sums against a slow, obviously correct double loop
/// over every pair of displacements (Isserlis: Cov(u², v²) = 2 Cov(u, v)²).
#[test]
fn slope_variance_matches_brute_force() {
    let (n, p, a, b) = (9usize, 4usize, 37.0, 120.0);
    let (g0, g1) = (a + b, -a / 2.0);
    let gamma = |d: i64| match d.abs() {
        0 => g0,
        1 => g1,
        _ => 0.0,
    };
    let cov_rho = |l1: usize, l2: usize| {
        let mut s = 0.0;
        for i in 0..n - l1 {
            for j in 0..n - l2 {
                let mut c = 0.0;
                for k in i..i + l1 {
                    for l in j..j + l2 {
                        c += gamma(k as i64 - l as i64);
                    }
                }
                s += 2.0 * c * c;
            }
        }
        s / ((n - l1) * (n - l2)) as f64
    };
    let mx = (p as f64 + 1.0) / 2.0;
    let sxx: f64 = (1..=p).map(|l| (l as f64 - mx).powi(2)).sum();
    let mut v = 0.0;
    for l1 in 1..=p {
        for l2 in 1..=p {
            v += (l1 as f64 - mx) * (l2 as f64 - mx) / (sxx * sxx) * cov_rho(l1, l2);
        }
    }
    let fast = msd_slope_variance(n, p, a, b);
    assert!((fast - v).abs() < 1e-9 * v, "fast {fast}, brute force {v}");
}

#[test]
fn estimators_handle_gaps_and_refuse_short_tracks() {
    let frames = [0i64, 1, 2, 5, 6, 7, 8];
    let pos: Vec<[f64; 3]> = frames
        .iter()
        .map(|&f| [f as f64 * 10.0, 0.0, 0.0])
        .collect();
    let c =
        covariance_estimate(&frames, &pos, 2, 0.01, 0.0).expect("two runs of consecutive steps");
    assert_eq!(c.steps, 5);
    assert!(covariance_estimate(&frames[..2], &pos[..2], 2, 0.01, 0.0).is_none());
    assert!(msd_fit_estimate(&frames[..2], &pos[..2], 2, 0.01, 0.0).is_none());
    assert!(msd_fit_estimate(&frames, &pos, 2, 0.01, 0.0).is_some());
}
