//! D_eff, its interval, the fit window and the report.

mod common;

use common::{gaussian_walks, write_h5md, Rng, Spec};
use thicket_analysis::error::ErrorKind;
use thicket_analysis::estimators::{
    analyze, analyze_file, fit_diffusion, AnalyzeOptions, CiMethod, FitOptions, WindowSource,
};
use thicket_analysis::msd::{lag_grid, Msd, MsdGroup, MsdMethod};

const D_TRUE_M2_PER_S: f64 = 1e-12;
const D_TRUE_NM2_PER_S: f64 = 1e6;
const DT_S: f64 = 1e-3;

/// Writes free-diffusion walks (Einstein 1905: each step Gaussian with
/// variance 2DΔt) for one seed and returns the file's path.
fn free_walk_file(
    dir: &std::path::Path,
    seed: u64,
    frames: usize,
    particles: usize,
) -> std::path::PathBuf {
    let path = dir.join(format!("free_{seed}.h5"));
    let x = gaussian_walks(seed, frames, particles, D_TRUE_NM2_PER_S, DT_S);
    let mut spec = Spec::new("tracer", &x, DT_S);
    spec.periodic = [false; 3];
    spec.parameters = Some((D_TRUE_M2_PER_S, frames as i64));
    write_h5md(&path, &spec);
    path
}

fn coverage(ci: CiMethod) -> (usize, Vec<u64>) {
    let dir = tempfile::tempdir().unwrap();
    let seeds: Vec<u64> = (1000..1020).collect();
    let options = AnalyzeOptions {
        fit: FitOptions {
            ci,
            ..FitOptions::default()
        },
        ..AnalyzeOptions::default()
    };
    let mut covered = 0;
    let mut missed = Vec::new();
    for &seed in &seeds {
        let path = free_walk_file(dir.path(), seed, 200, 40);
        let r = analyze_file(&path, None, &options).unwrap();
        let [lo, hi] = r.d_eff_ci95_m2_per_s;
        assert!(
            lo < r.d_eff_m2_per_s && r.d_eff_m2_per_s < hi,
            "seed {seed}: {r:?}"
        );
        assert_eq!(
            r.fit_window_source,
            WindowSource::Auto,
            "seed {seed}: free diffusion is diffusive at all lags"
        );
        if lo <= D_TRUE_M2_PER_S && D_TRUE_M2_PER_S <= hi {
            covered += 1;
        } else {
            missed.push(seed);
        }
    }
    println!("{ci:?}: covered {covered}/20, missed seeds {missed:?}");
    (covered, missed)
}

#[test]
fn student_t_interval_covers_the_true_d() {
    // With 20 trials at 95 % coverage, fewer than 16 hits has probability ≈ 0.3 % (binomial).
    let (covered, missed) = coverage(CiMethod::StudentT);
    assert!(
        covered >= 16,
        "covered {covered}/20 (seeds 1000–1019; missed {missed:?})"
    );
}

#[test]
fn bootstrap_interval_covers_the_true_d() {
    let (covered, missed) = coverage(CiMethod::Bootstrap {
        resamples: 400,
        seed: 7,
    });
    assert!(
        covered >= 16,
        "covered {covered}/20 (seeds 1000–1019; missed {missed:?})"
    );
}

#[test]
fn report_has_the_contract_keys() {
    let dir = tempfile::tempdir().unwrap();
    let path = free_walk_file(dir.path(), 5, 120, 12);
    let a = analyze(&path, Some("tracer"), &AnalyzeOptions::default()).unwrap();
    let json = serde_json::to_value(&a.report).unwrap();
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
        "species",
        "tortuosity",
        "frames_planned",
        "truncated",
        "warnings",
    ] {
        assert!(json.get(key).is_some(), "missing key {key} in {json}");
    }
    assert_eq!(json["d_eff_ci95_m2_per_s"].as_array().unwrap().len(), 2);
    assert_eq!(json["d_eff_axes_m2_per_s"].as_array().unwrap().len(), 3);
    assert_eq!(json["fit_window_s"].as_array().unwrap().len(), 2);
    assert!(json["models"].as_object().unwrap().is_empty());
    assert_eq!(json["particles"], 12);
    assert_eq!(json["frames"], 120);
    assert_eq!(json["truncated"], false);
    let r = &a.report;
    assert_eq!(r.d0_source, "file");
    // D_eff/D0 and tortuosity are reciprocal by definition.
    assert!((r.d_eff_over_d0.unwrap() * r.tortuosity.unwrap() - 1.0).abs() < 1e-12);
    let table = r.to_table();
    assert!(
        table.contains("D_eff") && table.contains("fit window") && table.contains("tracer"),
        "{table}"
    );
    // The local exponent handed back is the MSD's own.
    assert_eq!(a.exponent, a.msd.local_exponent());
}

#[test]
fn truncated_file_is_analysed_with_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("killed.h5");
    let x = gaussian_walks(77, 150, 10, D_TRUE_NM2_PER_S, DT_S);
    let mut spec = Spec::new("tracer", &x, DT_S);
    spec.periodic = [false; 3];
    spec.parameters = Some((D_TRUE_M2_PER_S, 1000));
    spec.lengths = Some((150, 149, 149));
    write_h5md(&path, &spec);
    let r = analyze_file(&path, None, &AnalyzeOptions::default()).unwrap();
    assert!(r.truncated);
    assert_eq!(r.frames, 149);
    assert_eq!(r.frames_planned, Some(1000));
    assert!(
        r.warnings
            .iter()
            .any(|w| w.contains("truncated") && w.contains("149") && w.contains("1000")),
        "{:?}",
        r.warnings
    );
}

#[test]
fn fit_window_outside_the_data_is_an_error_naming_both() {
    let dir = tempfile::tempdir().unwrap();
    let path = free_walk_file(dir.path(), 9, 100, 5);
    let options = AnalyzeOptions {
        fit: FitOptions {
            window_s: Some([10.0, 20.0]),
            ..FitOptions::default()
        },
        ..AnalyzeOptions::default()
    };
    let e = analyze_file(&path, None, &options).unwrap_err();
    match e.kind() {
        ErrorKind::FitWindow {
            t0_s,
            t1_s,
            available_s,
            ..
        } => {
            assert_eq!((*t0_s, *t1_s), (10.0, 20.0));
            assert!(
                (available_s[0] - DT_S).abs() < 1e-15
                    && (available_s[1] - 99.0 * DT_S).abs() < 1e-12
            );
        }
        other => panic!("expected a FitWindow error, got {other:?}"),
    }
    let msg = e.to_string();
    assert!(msg.contains("1e1") && msg.contains("9.9e-2"), "{msg}");

    // A window inside the data is used as given.
    let options = AnalyzeOptions {
        fit: FitOptions {
            window_s: Some([5e-3, 2e-2]),
            ..FitOptions::default()
        },
        d0_m2_per_s: Some(2e-12),
        ..AnalyzeOptions::default()
    };
    let r = analyze_file(&path, None, &options).unwrap();
    assert_eq!(r.fit_window_source, WindowSource::User);
    assert!((r.fit_window_s[0] - 5e-3).abs() < 1e-12 && (r.fit_window_s[1] - 2e-2).abs() < 1e-12);
    assert_eq!(r.d0_source, "caller");
    assert_eq!(r.d0_m2_per_s, Some(2e-12));
}

#[test]
fn missing_d0_and_other_bad_input() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("foreign.h5");
    let x = gaussian_walks(3, 80, 6, D_TRUE_NM2_PER_S, DT_S);
    let mut spec = Spec::new("tracer", &x, DT_S);
    spec.periodic = [false; 3];
    write_h5md(&path, &spec);
    let r = analyze_file(&path, None, &AnalyzeOptions::default()).unwrap();
    assert_eq!(r.d0_m2_per_s, None);
    assert_eq!(r.tortuosity, None);
    assert!(
        r.warnings.iter().any(|w| w.contains("D0 is unknown")),
        "{:?}",
        r.warnings
    );

    let bad = AnalyzeOptions {
        d0_m2_per_s: Some(-1.0),
        ..AnalyzeOptions::default()
    };
    assert!(matches!(
        analyze_file(&path, None, &bad).unwrap_err().kind(),
        ErrorKind::InvalidOption { .. }
    ));

    let one = dir.path().join("one.h5");
    let x1 = gaussian_walks(3, 80, 1, D_TRUE_NM2_PER_S, DT_S);
    write_h5md(&one, &Spec::new("tracer", &x1, DT_S));
    let e = analyze_file(&one, None, &AnalyzeOptions::default()).unwrap_err();
    assert!(
        matches!(e.kind(), ErrorKind::TooLittleData { needed: 2, .. }),
        "{e}"
    );
    assert!(e.to_string().contains("one.h5"), "{e}");
}

/// An MSD with a known long-time D and a subdiffusive transient:
/// MSD(τ) = 6Dτ + A(1 − e^(−τ/τc)), groups scattered by 1 % per lag.
fn transient_msd(seed: u64) -> (Msd, f64) {
    let frames = 100_000;
    let dt = 1.0;
    let d = 1.0; // nm²/s
    let tau_c = 1.0;
    let amplitude = 6.0 * d * 10.0 * tau_c;
    let lags = lag_grid(frames, 10, 100);
    let t: Vec<f64> = lags.iter().map(|&m| m as f64 * dt).collect();
    let base: Vec<f64> = t
        .iter()
        .map(|&t| 6.0 * d * t + amplitude * (1.0 - (-t / tau_c).exp()))
        .collect();
    let mut rng = Rng::new(seed);
    let groups: Vec<MsdGroup> = (0..16)
        .map(|_| MsdGroup {
            particles: 1,
            axes_nm2: (0..3)
                .map(|_| {
                    base.iter()
                        .map(|b| b / 3.0 * (1.0 + 0.01 * rng.normal()))
                        .collect()
                })
                .collect(),
        })
        .collect();
    let mean: Vec<Vec<f64>> = (0..3)
        .map(|a| {
            (0..t.len())
                .map(|i| groups.iter().map(|g| g.axes_nm2[a][i]).sum::<f64>() / 16.0)
                .collect()
        })
        .collect();
    let lags_len = lags.len();
    let msd = Msd {
        frames,
        particles: 16,
        dims: 3,
        frame_interval_s: dt,
        origins: lags.iter().map(|&m| frames - m).collect(),
        lags_frames: lags,
        lag_times_s: t,
        time_averaged_axes_nm2: mean.clone(),
        origin_axes_nm2: mean,
        origin_total_se_nm2: vec![0.0; 0],
        groups,
        method: MsdMethod::Direct,
        van_hove: vec![],
        non_gaussian: vec![],
        suspicious_jumps: 0,
        mean_displacement_axes_nm: vec![vec![0.0; lags_len]; 3],
        drift_removed: false,
    };
    (msd, d * 1e-18)
}

#[test]
fn automatic_window_starts_after_the_transient() {
    let seed = 4;
    let (msd, d_true) = transient_msd(seed);
    let fit = fit_diffusion(&msd, &FitOptions::default()).unwrap();
    assert_eq!(fit.window.source, WindowSource::Auto);
    // α(τ) − 1 ≈ −A/(6Dτ) = −10/τ at long τ, against SE(α) ≈ (1 %/√3)·√2/0.46/√16
    // ≈ 0.0044: the transient is resolved out to τ ≈ 10/(2·0.0044) ≈ 1100 s, so
    // the crossover lies beyond 100 s; the window ends at the last lag within a
    // quarter of the run.
    let cross = fit.window.crossover_time_s.unwrap();
    assert!(cross > 100.0, "seed {seed}: crossover {cross} s");
    let last = *msd
        .lags_frames
        .iter()
        .rev()
        .find(|&&m| m as f64 <= 0.25 * 99_999.0)
        .unwrap() as f64;
    assert!(
        fit.window.window_s[0] >= cross && fit.window.window_s[1] == last,
        "{:?}",
        fit.window
    );
    // In the window the MSD is 6Dτ + A exactly, up to the 1 %/√16 scatter.
    assert!(
        (fit.d_m2_per_s / d_true - 1.0).abs() < 0.01,
        "seed {seed}: {fit:?}"
    );
    assert!(
        fit.ci95_m2_per_s[0] < d_true && d_true < fit.ci95_m2_per_s[1],
        "seed {seed}: {fit:?}"
    );
    assert!((fit.alpha_long - 1.0).abs() < 0.05);
}

#[test]
fn caged_motion_falls_back_with_a_warning() {
    // MSD ∝ τ^0.5 never becomes diffusive.
    let (mut msd, _) = transient_msd(5);
    let mut rng = Rng::new(5);
    for g in &mut msd.groups {
        for axis in &mut g.axes_nm2 {
            for (v, &t) in axis.iter_mut().zip(&msd.lag_times_s) {
                *v = t.sqrt() * (1.0 + 0.01 * rng.normal());
            }
        }
    }
    for a in 0..3 {
        for i in 0..msd.lag_times_s.len() {
            msd.time_averaged_axes_nm2[a][i] =
                msd.groups.iter().map(|g| g.axes_nm2[a][i]).sum::<f64>() / 16.0;
        }
    }
    let fit = fit_diffusion(&msd, &FitOptions::default()).unwrap();
    assert_eq!(fit.window.source, WindowSource::AutoFallback);
    assert!(
        fit.warnings
            .iter()
            .any(|w| w.contains("not reached the diffusive regime")),
        "{:?}",
        fit.warnings
    );
    assert!((fit.alpha_long - 0.5).abs() < 0.05, "{}", fit.alpha_long);
}
