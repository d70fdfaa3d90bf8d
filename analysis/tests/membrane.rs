//! The membrane analysis: its numbers equal the run's own summary, its
//! permeability and partition intervals agree with the exact steric values,
//! and its time-lag fit returns L²/(6D) on Crank's exact solution.

mod confined_support;

use confined_support::*;
use thicket_analysis::membrane::{analyze_membrane, time_lag_fit};
use thicket_analysis::models::{membrane_steric_permeability_over_d0, partition_cylinder};
use thicket_analysis::read::Trajectory;

/// Slab 30 nm thick with one pore of radius 10 nm per 40 nm × 40 nm cell,
/// reservoirs 10 nm deep, tracer a = 1 nm (λ = 0.1), source at the top and
/// sink at the bottom, no wall hydrodynamics; rms step 0.5 nm.
const L: f64 = 30.0;
const R: f64 = 10.0;
const A: f64 = 1.0;
const S: f64 = 40.0;
const SIGMA: f64 = 0.5;

fn membrane_file(dir: &std::path::Path) -> std::path::PathBuf {
    // L²/D0 is 2 (L/σ)² = 7200 steps: settle for half of it (the start is near the steady
    // profile), then measure for eight, recording every 600 steps.
    let per_l2 = (2.0 * (L / SIGMA).powi(2)) as u64;
    let settle = per_l2 / 2;
    let steps = settle + 8 * per_l2;
    let geometry = format!(
        "[geometry]\nkind = \"membrane\"\nthickness_nm = {L}\npore_radius_nm = {R}\nwall_hydrodynamics = false\n\
         top_concentration_mol_per_m3 = 1.0\nbottom_concentration_mol_per_m3 = 0.0\nflux_after_s = {:e}",
        settle as f64 * dt_for_sigma(SIGMA)
    );
    let text = scenario_text(41, [S, S, L + 20.0], A, 4_000, SIGMA, steps, 600, &geometry);
    run_into(dir, "membrane", &text)
}

#[test]
fn membrane_analysis_against_steric_values_and_the_run_summary() {
    let dir = tempfile::tempdir().unwrap();
    let file = membrane_file(dir.path());
    let r = analyze_membrane(&file, None).unwrap();
    print!("{}", r.to_table());

    // Same numbers as the engine's end-of-run summary (/observables/<species>/membrane attributes).
    let t = Trajectory::open(&file).unwrap();
    let attrs = t.membrane_results("tracer").unwrap();
    let attr = |k: &str| attrs.iter().find(|(n, _)| n == k).unwrap().1;
    for (mine, theirs) in [
        (r.flux_particles_per_s.value, attr("flux_particles_per_s")),
        (
            r.permeability_m_per_s.value,
            attr("membrane_permeability_m_per_s"),
        ),
        (r.hindrance.value, attr("hindrance_measured")),
        (r.partition.value, attr("pore_concentration_over_mean_bath")),
    ] {
        assert!((mine / theirs - 1.0).abs() < 1e-12, "{mine} vs {theirs}");
    }

    // Permeability against the steric model: REFERENCE.md, P = εΦD0/L with its end corrections
    // (models::membrane_steric_permeability_over_d0: slab L + 2a, flanged-pipe end correction, square
    // array factor); tolerance 4.5 block standard errors.
    let porosity = std::f64::consts::PI * R * R / (S * S);
    let steric =
        membrane_steric_permeability_over_d0(porosity, L, A, R, Some(S)).unwrap() * 1e8 * 1e-9;
    assert_eq!(r.steric_permeability_m_per_s, Some(steric));
    let p = r.permeability_m_per_s;
    let [lo, hi] = p.ci95.expect("an interval");
    let se = p.standard_error.expect("a standard error");
    println!(
        "P_m = {:.4e} [{lo:.4e}, {hi:.4e}] m/s (SE {:.2} %, {} blocks) vs steric {steric:.4e}; covered: {}",
        p.value,
        100.0 * se / p.value,
        p.blocks,
        p.covers(steric)
    );
    assert!(p.blocks >= 4, "{}", r.block_rule);
    assert!(4.5 * se < 0.06 * p.value, "too noisy for the check: {se}");
    assert!(
        (p.value - steric).abs() < 4.5 * se,
        "P_m {} vs steric {steric}",
        p.value
    );

    // Partition under flux: the steady state is the equilibrium at the mean bath concentration plus a
    // part odd about the mid-plane, so K is the exact (1 − λ)² (REFERENCE.md); 4.5 block SEs.
    let k = r.partition;
    let exact = partition_cylinder(A / R).unwrap();
    assert_eq!(r.partition_steric, exact);
    let se_k = k.standard_error.expect("an interval");
    println!(
        "K = {:.4} ± {:.4} ({} blocks) vs (1 − λ)² = {exact:.4}",
        k.value, se_k, k.blocks
    );
    assert!(k.blocks >= 4, "{}", r.block_rule);
    assert!(4.5 * se_k < 0.06 * exact, "too noisy for the check: {se_k}");
    assert!(
        (k.value - exact).abs() < 4.5 * se_k,
        "K {} vs {exact}",
        k.value
    );

    // No isotropic D anywhere in the report, and the time lag says why it does not apply.
    let json = serde_json::to_value(&r).unwrap();
    assert!(json.get("d_eff_m2_per_s").is_none() && json.get("msd").is_none());
    assert!(!r.time_lag.applies);
    assert!(
        r.time_lag
            .reason
            .contains("did not start from an empty membrane"),
        "{}",
        r.time_lag.reason
    );

    // The profile: the feed reservoir near its bath face is at the feed concentration, the
    // permeate near its face close to zero; inside the pores c falls from top to bottom.
    let prof = &r.profile;
    let top = prof.c_over_feed[prof.c_over_feed.len() - 2];
    assert!(
        (top - 1.0).abs() < 0.1,
        "c/c_feed next to the feed face: {top}"
    );
    assert!(prof.c_over_feed[1] < 0.1);
    let pores: Vec<f64> = prof
        .region
        .iter()
        .zip(&prof.c_open_over_feed)
        .filter(|(reg, _)| *reg == "pores")
        .map(|(_, c)| *c)
        .collect();
    assert!(pores.first().unwrap() < pores.last().unwrap());
}

/// Crank, *The Mathematics of Diffusion* (2nd ed.), eq. 4.24a (equation number
/// from memory): the amount through a membrane of
/// thickness L, initially empty, with C₁ at x = 0 and 0 at x = L:
/// Q/(L C₁) = Dt/L² − 1/6 − (2/π²) Σ (−1)ⁿ/n² exp(−D n² π² t/L²); its asymptote crosses the
/// time axis at L²/(6D) (the Barrer time lag).
#[test]
fn time_lag_of_crank_solution_is_l2_over_6d() {
    let (l, d) = (40.0, 2.0);
    let q = |t: f64| -> f64 {
        let mut sum = 0.0;
        for n in 1..200 {
            let nf = n as f64;
            let sign = if n % 2 == 0 { 1.0 } else { -1.0 };
            sum += sign / (nf * nf)
                * (-d * nf * nf * std::f64::consts::PI.powi(2) * t / (l * l)).exp();
        }
        l * (d * t / (l * l) - 1.0 / 6.0 - 2.0 / std::f64::consts::PI.powi(2) * sum)
    };
    let exact = l * l / (6.0 * d);
    let times: Vec<f64> = (0..=400).map(|i| i as f64 * 10.0 * exact / 400.0).collect();
    let amounts: Vec<f64> = times.iter().map(|&t| q(t)).collect();
    let (lag, window) = time_lag_fit(&times, &amounts, 0.0).unwrap();
    // The fit starts at 3 t_lag, where the transient is (2/π²) e^(−π²/2) of L C₁ at most:
    // the intercept cannot move by more than that over the slope D C₁/L.
    let bound =
        2.0 / std::f64::consts::PI.powi(2) * (-std::f64::consts::PI.powi(2) / 2.0).exp() * l
            / (d / l);
    println!("t_lag = {lag} vs L²/(6D) = {exact} (bound {bound}), window {window:?}");
    assert!(window[0] >= 2.9 * exact);
    assert!((lag - exact).abs() <= bound, "{lag} vs {exact}");
    assert!((lag - exact).abs() < 0.01 * exact);
}
