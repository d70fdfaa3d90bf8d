//! Slit with hydrodynamic wall corrections: the Itô drift keeps the
//! equilibrium density uniform across the gap (and its absence piles
//! particles up at the walls), the partition coefficient is 1 − a/h, and
//! the lateral D_eff is the gap average of D∥.

mod confinement_support;

use confinement_support::*;
use std::sync::OnceLock;
use thicket_engine::space::mobility::mean_parallel_mobility;
use thicket_engine::step::State;

/// Radius a (nm) and gap W = 6a: centres span z/a from 1 to 5.
const A: f64 = 1.0;
const W: f64 = 6.0;
const BINS: usize = 20;
/// rms step per axis, a/40.
const SIGMA: f64 = 0.025;
const COUNT: usize = 16_000;
/// About three relaxation times across the gap, (W − 2a)²/(π² D0) ≈ 1.6e-8 s, at D⊥ ≈ D0/2.
const STEPS: u64 = 15_000;
/// Snapshots for the lateral MSD.
const WINDOWS: u64 = 5;

/// Pearson chi-square critical value, 19 degrees of freedom, upper tail
/// probability 0.001 (standard chi-square table, e.g. the NIST/SEMATECH
/// e-Handbook of Statistical Methods, table 1.3.6.7.4).
const CHI2_19_P001: f64 = 43.82;

struct Outcome {
    histogram: Vec<u64>,
    /// Per particle: mean over windows of ⟨Δx² + Δy²⟩/(2 · 2 t), nm²/s.
    lateral_msd_over_2t: Vec<f64>,
}

/// The run with the drift, shared by the tests that read it.
fn with_drift() -> &'static Outcome {
    static OUT: OnceLock<Outcome> = OnceLock::new();
    OUT.get_or_init(|| run_slit(true))
}

fn run_slit(ito_drift: bool) -> Outcome {
    let s = scenario(
        11,
        [60.0, 60.0, W],
        A,
        COUNT,
        SIGMA,
        STEPS,
        "kind = \"slit\"\nwall_hydrodynamics = true",
    );
    let mut c = confinement(&s);
    if !ito_drift {
        c = c.without_ito_drift();
    }
    let mut state = c.initial_state(&s).unwrap();
    let mut lateral = vec![0.0; COUNT];
    let window = STEPS / WINDOWS;
    on_threads(2, || {
        for _ in 0..WINDOWS {
            let before: State = state.clone();
            advance(&mut c, &mut state, window, 500);
            let t = window as f64 * s.dt_s;
            for (i, sum) in lateral.iter_mut().enumerate() {
                let (p0, p1) = (
                    before.unwrapped(i, &s.sim_box),
                    state.unwrapped(i, &s.sim_box),
                );
                let msd = (p1[0] - p0[0]).powi(2) + (p1[1] - p0[1]).powi(2);
                // Windows of one particle are correlated: average them per particle.
                *sum += msd / (2.0 * 2.0 * t) / WINDOWS as f64;
            }
        }
    });
    let mut histogram = vec![0u64; BINS];
    for p in &state.positions {
        let u = (p[2] - A) / (W - 2.0 * A);
        assert!(
            (0.0..=1.0).contains(&u),
            "a centre left the slit: z = {}",
            p[2]
        );
        histogram[((u * BINS as f64) as usize).min(BINS - 1)] += 1;
    }
    Outcome {
        histogram,
        lateral_msd_over_2t: lateral,
    }
}

#[test]
fn drift_keeps_density_uniform_and_its_absence_piles_up() {
    let with = with_drift();
    let chi2 = chi_square_flat(&with.histogram);
    println!(
        "with Itô drift: chi-square {chi2:.2} (19 dof), bins {:?}",
        with.histogram
    );
    // REFERENCES.md: with the Itô drift the equilibrium density across a slit stays uniform.
    // Chi-square critical value at p = 0.001, 19 dof: NIST/SEMATECH e-Handbook table.
    assert!(
        chi2 < CHI2_19_P001,
        "density not flat: chi-square {chi2} ≥ {CHI2_19_P001}"
    );

    let without = run_slit(false);
    let chi2_off = chi_square_flat(&without.histogram);
    let mean = COUNT as f64 / BINS as f64;
    let edge = 0.5 * (without.histogram[0] + without.histogram[BINS - 1]) as f64 / mean;
    println!(
        "without drift: chi-square {chi2_off:.0}, wall bins hold {edge:.2}× the mean, bins {:?}",
        without.histogram
    );
    // REFERENCES.md: without the drift particles pile up at the walls; the same test must fail.
    assert!(
        chi2_off > 10.0 * CHI2_19_P001,
        "no pile-up seen without the drift: chi-square {chi2_off}"
    );
    assert!(
        edge > 1.5,
        "wall bins should be crowded without the drift: {edge}"
    );

    // Partition coefficient of the slit: the mean concentration over the whole gap over the
    // concentration in its middle (central half of the open range, away from both walls).
    let central: u64 = with.histogram[BINS / 4..3 * BINS / 4].iter().sum();
    let c_centre = central as f64 / (0.5 * (W - 2.0 * A));
    let c_gap = COUNT as f64 / W;
    let phi = c_gap / c_centre;
    let expected = thicket_analysis::models::partition_slit(A, 0.5 * W).unwrap();
    // Binomial spread of the central count: relative SE √((1 − p)/(N p)), p = 1/2.
    let se = expected * (1.0 / COUNT as f64).sqrt();
    println!("slit partition coefficient {phi:.4} against 1 − a/h = {expected:.4} (SE {se:.4})");
    // REFERENCES.md: slit of half-width h, steric partition coefficient Φ = 1 − a/h (exact).
    assert!(
        (phi - expected).abs() < 5.0 * se,
        "partition {phi} vs {expected}"
    );
}

#[test]
fn lateral_diffusivity_is_the_gap_average_of_the_parallel_mobility() {
    let out = with_drift();
    let (d, se) = mean_se(&out.lateral_msd_over_2t);
    let d_over_d0 = d / D0_NM2_PER_S;
    let se = se / D0_NM2_PER_S;
    let s = scenario(
        11,
        [60.0, 60.0, W],
        A,
        1,
        SIGMA,
        1,
        "kind = \"slit\"\nwall_hydrodynamics = true",
    );
    let model = mean_parallel_mobility(&s.geometry.as_ref().unwrap().shape, A, A).unwrap();
    println!("lateral D_eff/D0 = {d_over_d0:.4} ± {se:.4}, gap average of superposed Faxén D∥ = {model:.4}");
    // Exact identity of the model: lateral moves have no drift and the density is uniform,
    // so ⟨Δx²⟩ = 2 ⟨D∥⟩ t (Itô isometry); D∥ by Faxén (REFERENCES.md), walls superposed.
    assert!(
        (d_over_d0 - model).abs() < 5.0 * se,
        "{d_over_d0} vs {model}"
    );
    // And it is clearly below free diffusion, so the check has teeth.
    assert!(model < 0.9);
}
