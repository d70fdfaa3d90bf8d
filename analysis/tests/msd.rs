//! MSD, α(τ), van Hove and α2 against exact results and brute force.

mod common;

use common::{brute_msd, gaussian_walks, write_h5md, Rng, Spec};
use ndarray::Array3;
use thicket_analysis::msd::{
    compute_msd, lag_grid, origin_msd_all_frames, time_averaged_msd, MsdAccumulator, MsdMethod,
    MsdOptions,
};
use thicket_analysis::read::Trajectory;

fn rel(a: f64, b: f64) -> f64 {
    (a - b).abs() / b.abs().max(f64::MIN_POSITIVE)
}

#[test]
fn lag_grid_is_log_spaced_and_complete_for_short_series() {
    assert_eq!(lag_grid(6, 10, 100), vec![1, 2, 3, 4, 5]);
    let g = lag_grid(10_000, 10, 100);
    assert_eq!(&g[..10], &[1, 2, 3, 4, 5, 6, 8, 10, 13, 16]);
    assert_eq!(*g.last().unwrap(), 9_999);
    assert!(g.windows(2).all(|w| w[0] < w[1]));
    // 4 decades at 10 per decade plus the last lag.
    assert!(g.len() <= 42, "{} lags", g.len());
}

#[test]
fn ballistic_motion_gives_v_squared_tau_squared() {
    // x = x0 + v·k exactly: every displacement over m frames is v·m, so MSD(m) = v²m² exactly.
    let (frames, v) = (700, 0.37);
    let x: Vec<f64> = (0..frames).map(|k| 12.5 + v * k as f64).collect();
    let lags = lag_grid(frames, 10, 100);
    for method in [MsdMethod::Direct, MsdMethod::Fft] {
        let msd = time_averaged_msd(&x, &lags, method).unwrap();
        for (&m, &got) in lags.iter().zip(&msd) {
            let exact = (v * m as f64).powi(2);
            // Direct: rounding of the positions (1e-16 of ~260) squared relative to v²m².
            // FFT: the end-to-end line is removed exactly, leaving rounding residuals only.
            assert!(
                rel(got, exact) < 1e-12,
                "{method:?} lag {m}: {got} vs {exact}"
            );
        }
    }
}

#[test]
fn fft_and_direct_agree_with_brute_force_on_a_random_walk() {
    for seed in [11u64, 12, 13] {
        let mut rng = Rng::new(seed);
        let frames = 1000;
        let mut x = vec![0.0; frames];
        // A walk with drift, far from the origin: the hard case for S1 − 2·S2.
        x[0] = 5_000.0;
        for k in 1..frames {
            x[k] = x[k - 1] + 0.3 + rng.normal();
        }
        let lags: Vec<usize> = (1..frames).collect();
        let fft = time_averaged_msd(&x, &lags, MsdMethod::Fft).unwrap();
        let direct = time_averaged_msd(&x, &lags, MsdMethod::Direct).unwrap();
        for (i, &m) in lags.iter().enumerate() {
            let brute = brute_msd(&x, m);
            assert!(
                rel(direct[i], brute) < 1e-12,
                "seed {seed} lag {m}: direct {} vs {brute}",
                direct[i]
            );
            assert!(
                rel(fft[i], brute) < 1e-12,
                "seed {seed} lag {m}: fft {} vs {brute}",
                fft[i]
            );
        }
    }
}

#[test]
fn accumulator_matches_brute_force_per_axis_and_in_the_ensemble() {
    let seed = 21;
    let (frames, n, dt) = (300, 7, 1e-6);
    let x = gaussian_walks(seed, frames, n, 1e6, dt);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("walk.h5");
    write_h5md(&path, &Spec::new("tracer", &x, dt));
    let t = Trajectory::open(&path).unwrap();
    let r = t.species(None).unwrap();
    for method in [MsdMethod::Direct, MsdMethod::Fft] {
        let options = MsdOptions {
            method,
            max_groups: 3,
            // Two particles per block: the accumulator must not depend on blocking.
            memory_budget_bytes: 2 * frames * 3 * 16,
            ..MsdOptions::default()
        };
        let msd = compute_msd(&r, &options).unwrap();
        assert_eq!(msd.method, method);
        assert_eq!(msd.particles, n);
        assert_eq!(
            msd.groups.iter().map(|g| g.particles).collect::<Vec<_>>(),
            [3, 2, 2]
        );
        for (i, &m) in msd.lags_frames.iter().enumerate() {
            for a in 0..3 {
                let brute: f64 = (0..n)
                    .map(|p| brute_msd(&x.slice(ndarray::s![.., p, a]).to_vec(), m))
                    .sum::<f64>()
                    / n as f64;
                let got = msd.time_averaged_axes_nm2[a][i];
                assert!(
                    rel(got, brute) < 1e-11,
                    "seed {seed} {method:?} lag {m} axis {a}: {got} vs {brute}"
                );
                // Group 0 holds particles 0, 3, 6.
                let g0: f64 = [0, 3, 6]
                    .iter()
                    .map(|&p| brute_msd(&x.slice(ndarray::s![.., p, a]).to_vec(), m))
                    .sum::<f64>()
                    / 3.0;
                assert!(rel(msd.groups[0].axes_nm2[a][i], g0) < 1e-11);
                let origin: f64 = (0..n)
                    .map(|p| (x[[m, p, a]] - x[[0, p, a]]).powi(2))
                    .sum::<f64>()
                    / n as f64;
                assert!(rel(msd.origin_axes_nm2[a][i], origin) < 1e-12);
            }
            assert!((msd.lag_times_s[i] - m as f64 * dt).abs() < 1e-18);
        }
    }
    // Per-frame statistic from frame windows agrees with the block pass.
    let per_frame = origin_msd_all_frames(&r, 5 * n * 48).unwrap();
    let msd = compute_msd(&r, &MsdOptions::default()).unwrap();
    for (i, &m) in msd.lags_frames.iter().enumerate() {
        for (axis, expected) in per_frame.iter().zip(&msd.origin_axes_nm2) {
            assert!(rel(axis[m], expected[i]) < 1e-12);
        }
    }
}

#[test]
fn local_exponent_is_exact_for_power_laws() {
    // MSD ∝ τ² (ballistic) has α = 2 at every lag on any grid.
    let frames = 400;
    let x: Array3<f64> =
        Array3::from_shape_fn((frames, 2, 3), |(f, p, a)| (1 + p + a) as f64 * f as f64);
    let mut acc = MsdAccumulator::new(frames, 2, 3, 1e-3, &MsdOptions::default()).unwrap();
    for p in 0..2 {
        let axes: Vec<Vec<f64>> = (0..3)
            .map(|a| x.slice(ndarray::s![.., p, a]).to_vec())
            .collect();
        let refs: Vec<&[f64]> = axes.iter().map(Vec::as_slice).collect();
        acc.add_particle(p, &refs).unwrap();
    }
    let msd = acc.finish().unwrap();
    let ex = msd.local_exponent();
    for (i, a) in ex.alpha.iter().enumerate() {
        assert!((a - 2.0).abs() < 1e-9, "lag index {i}: α = {a}");
    }
}

#[test]
fn non_gaussian_parameter_and_van_hove() {
    // Ballistic along x only: every displacement is (v·m, 0, 0), so
    // ⟨r⁴⟩ = ⟨r²⟩² and the 3D α2 = 3/5 − 1 = −0.4 exactly; per axis x, 1/3 − 1.
    let frames = 50;
    let v = 0.5;
    let xs: Vec<f64> = (0..frames).map(|k| v * k as f64).collect();
    let zeros = vec![0.0; frames];
    let options = MsdOptions {
        van_hove_lags: vec![1, 4],
        van_hove_bins: 41,
        ..MsdOptions::default()
    };
    let mut acc = MsdAccumulator::new(frames, 1, 3, 1.0, &options).unwrap();
    acc.add_particle(0, &[&xs, &zeros, &zeros]).unwrap();
    let msd = acc.finish().unwrap();
    let ng = &msd.non_gaussian[0];
    assert!((ng.alpha2 + 0.4).abs() < 1e-12, "α2 = {}", ng.alpha2);
    assert!((ng.alpha2_axes[0] + 2.0 / 3.0).abs() < 1e-12);
    assert_eq!(ng.samples, (frames - 1) as u64);

    // Gaussian steps: α2 ≈ 0 (Rahman 1964), within its sampling spread.
    let seed = 31;
    let (f, n) = (400, 50);
    let x = gaussian_walks(seed, f, n, 1.0, 0.5);
    let mut acc = MsdAccumulator::new(f, n, 3, 0.5, &options).unwrap();
    for p in 0..n {
        let axes: Vec<Vec<f64>> = (0..3)
            .map(|a| x.slice(ndarray::s![.., p, a]).to_vec())
            .collect();
        let refs: Vec<&[f64]> = axes.iter().map(Vec::as_slice).collect();
        acc.add_particle(p, &refs).unwrap();
    }
    let msd = acc.finish().unwrap();
    let ng = &msd.non_gaussian[0];
    // At lag 1 the M = 19 950 displacements are independent; for 3D Gaussian
    // displacements the delta method gives SD(α2) = sqrt(8/(15 M)) ≈ 0.0052; allow 5 SD.
    assert!(ng.alpha2.abs() < 0.026, "seed {seed}: α2 = {}", ng.alpha2);
    let vh = &msd.van_hove[0];
    let density = vh.density_per_nm(0);
    let total: f64 = density
        .iter()
        .zip(vh.bin_edges_nm.windows(2))
        .map(|(d, w)| d * (w[1] - w[0]))
        .sum();
    let inside = 1.0 - vh.outside[0] as f64 / vh.samples as f64;
    assert!((total - inside).abs() < 1e-12);
    // Normal density at 0 for variance 2DΔt = 1 is 1/sqrt(2π) = 0.3989; the
    // central bin (width 0.39) holds ~3100 counts, a 1.8 % (0.007) counting
    // error, and its curvature lowers the bin mean by 0.002; allow 4 SD.
    let centre = density[density.len() / 2];
    assert!(
        (centre - 0.3989).abs() < 0.03,
        "seed {seed}: density at 0 = {centre}"
    );
}

#[test]
fn bad_lags_and_options_are_refused() {
    let x = vec![0.0; 10];
    assert!(time_averaged_msd(&x, &[0], MsdMethod::Direct).is_err());
    assert!(time_averaged_msd(&x, &[10], MsdMethod::Fft).is_err());
    let options = MsdOptions {
        van_hove_lags: vec![20],
        ..MsdOptions::default()
    };
    assert!(MsdAccumulator::new(10, 2, 3, 1.0, &options).is_err());
    assert!(MsdAccumulator::new(10, 2, 3, -1.0, &MsdOptions::default()).is_err());
}

#[test]
fn auto_method_uses_the_fft_only_where_it_pays() {
    // Log grid: ~30 lags cost 3·10⁴ operations directly against ~10⁵ for the FFT.
    let grid = MsdAccumulator::new(1000, 2, 3, 1.0, &MsdOptions::default()).unwrap();
    assert_eq!(grid.method(), MsdMethod::Direct);
    // Every lag of 1000 frames: 5·10⁵ operations directly, ~7·10⁴ by FFT.
    let dense = MsdOptions {
        all_lags_up_to_frames: 1000,
        ..MsdOptions::default()
    };
    let all = MsdAccumulator::new(1000, 2, 3, 1.0, &dense).unwrap();
    assert_eq!(all.lags().len(), 999);
    assert_eq!(all.method(), MsdMethod::Fft);
}
