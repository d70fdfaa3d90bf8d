//! The single-particle-tracking camera: the MSD of blurred, noisy tracks
//! and the covariance-based estimator of D and σ².

use super::{check, Area, Group, Mode, Outcome};
use crate::camera::image_free_in_memory;
use crate::direct::{mean_se, scenario_from_text};
use crate::tracks::{covariance_estimate, msd_fit_estimate, TrackSet};
use std::path::Path;

/// D = 1 µm²/s in nm²/s.
const D_NM2_PER_S: f64 = 1e6;
const FRAME_S: f64 = 0.01;

pub(super) fn groups() -> Vec<Group> {
    vec![
        Group {
            area: Area::Camera,
            title: "MSD of blurred, noisy camera tracks",
            source: "Berglund (2010); Savin & Doyle (2005)",
            run: berglund,
        },
        Group {
            area: Area::Camera,
            title: "covariance-based estimator over many tracks",
            source: "Vestergaard, Blainey & Flyvbjerg (2014)",
            run: covariance,
        },
    ]
}

/// Whole tracks (of every frame) of `count` free beads imaged by a camera
/// given as TOML lines, in a box far larger than any excursion.
fn tracks(
    seed: u64,
    count: usize,
    record_s: f64,
    frames: usize,
    camera: &str,
) -> Result<TrackSet, String> {
    let steps = ((frames as f64 * FRAME_S / record_s).round() as u64).max(1);
    let text = format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [1e7, 1e7, 1e7]\n\
         [[species]]\nname = \"bead\"\nradius_nm = 5.0\ncount = {count}\ndiffusivity_m2_per_s = {:e}\n\
         [integrator]\ndt_s = {record_s:e}\nsteps = {steps}\n[output]\nrecord_every_steps = 1\n\
         [camera]\nframe_interval_s = {FRAME_S:e}\n{camera}\n",
        D_NM2_PER_S * 1e-18
    );
    let sc = scenario_from_text(&text, "camera.toml").map_err(|e| e.to_string())?;
    let mut set = image_free_in_memory(&sc, 64).map_err(|e| e.to_string())?;
    // A particle that starts near a periodic face breaks its track where it crosses: keep whole ones.
    let whole = set.camera.frames;
    set.tracks.retain(|t| t.positions_nm.len() == whole);
    if set.tracks.len() < count * 9 / 10 {
        return Err(format!("only {} whole tracks of {count}", set.tracks.len()));
    }
    Ok(set)
}

fn berglund(mode: Mode, _dir: &Path) -> Outcome {
    let (sigma, exposure_frames) = (30.0, 0.5);
    let (count, frames) = mode.pick((1000, 100), (2000, 200));
    let exposure_s = exposure_frames * FRAME_S;
    let camera = format!(
        "exposure_s = {exposure_s:e}\nlocalisation_sigma_nm = {sigma}\nprojection = \"3d\""
    );
    // 40 recorded positions per frame, so the exposure averages 20.
    let set = tracks(102, count, FRAME_S / 40.0, frames, &camera)?;
    let r = exposure_s / (6.0 * FRAME_S);
    let mut out = Vec::new();
    for lag in [1usize, 5] {
        // Per track: the time-averaged MSD per axis, averaged over the three axes.
        let per: Vec<f64> = set
            .tracks
            .iter()
            .map(|t| {
                let x = &t.positions_nm;
                (0..3)
                    .map(|k| {
                        (lag..x.len())
                            .map(|i| (x[i][k] - x[i - lag][k]).powi(2))
                            .sum::<f64>()
                            / (x.len() - lag) as f64
                    })
                    .sum::<f64>()
                    / 3.0
            })
            .collect();
        let (measured, se) = mean_se(&per);
        let expected = 2.0 * D_NM2_PER_S * lag as f64 * FRAME_S + 2.0 * sigma * sigma
            - 4.0 * r * D_NM2_PER_S * FRAME_S;
        out.push(
            check(
                format!("camera, σ = 30 nm, exposure Δt/2: per-axis MSD at lag {lag}, nm²"),
                "Berglund (2010); Savin & Doyle (2005): 2D nΔt + 2σ² − 4RDΔt, R = t_E/(6Δt) (REFERENCES.md)",
                expected,
                measured,
                se,
            )
            .band(0.03 * expected, "3 % (a finite number of positions per exposure), as the test suite"),
        );
    }
    Ok(out)
}

fn covariance(mode: Mode, _dir: &Path) -> Outcome {
    let sigma = 30.0;
    let (count, frames) = mode.pick((100, 500), (200, 1000));
    let set = tracks(
        601,
        count,
        FRAME_S / 20.0,
        frames,
        &format!("exposure_s = 0.005\nlocalisation_sigma_nm = {sigma}"),
    )?;
    let r = set.camera.blur_factor;
    let (mut d, mut s2, mut d_fit) = (Vec::new(), Vec::new(), Vec::new());
    for t in &set.tracks {
        let f: Vec<i64> = (0..t.positions_nm.len())
            .map(|k| (t.first_frame + k) as i64)
            .collect();
        let c = covariance_estimate(&f, &t.positions_nm, 2, FRAME_S, r)
            .ok_or("a track too short to estimate")?;
        d.push(c.d_nm2_per_s);
        s2.push(0.5 * (c.sigma2_axes_nm2[0] + c.sigma2_axes_nm2[1]));
        let m = msd_fit_estimate(&f, &t.positions_nm, 2, FRAME_S, r)
            .ok_or("a track too short to fit")?;
        d_fit.push(m.d_nm2_per_s);
    }
    let (fm, fse) = mean_se(&d_fit);
    let (dm, dse) = mean_se(&d);
    let (sm, sse) = mean_se(&s2);
    let source = "Vestergaard, Blainey & Flyvbjerg (2014): unbiased for D and σ² under blur and noise (REFERENCES.md)";
    Ok(vec![
        check(
            format!(
                "covariance estimator, {} tracks: mean D̂, nm²/s",
                set.tracks.len()
            ),
            source,
            D_NM2_PER_S,
            dm,
            dse,
        )
        .standard_errors(4.0),
        check(
            format!(
                "covariance estimator, {} tracks: mean σ̂², nm²",
                set.tracks.len()
            ),
            source,
            sigma * sigma,
            sm,
            sse,
        )
        .standard_errors(4.0),
        check(
            format!("MSD fit with optimal lags, {} tracks: mean D̂, nm²/s", set.tracks.len()),
            "Berglund (2010): the MSD is exactly a + b n, so the least-squares slope is unbiased; lags chosen as Michalet (2010) (REFERENCES.md)",
            D_NM2_PER_S,
            fm,
            fse,
        )
        .standard_errors(4.0),
    ])
}
