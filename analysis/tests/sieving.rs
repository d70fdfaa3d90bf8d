//! Filtration through a membrane: the sieving coefficient measured from a
//! run (transits by bath of origin) against Deen's (1987) hindered-transport
//! expression S = ΦK_c/(1 − (1 − ΦK_c)e^(−Pe)), evaluated with the run's own
//! pore model (steric pores: K_d = 1 exactly, K_c = 2 − Φ exactly for
//! tracers without hydrodynamic lag; REFERENCES.md), at three Péclet numbers.

mod confined_support;

use confined_support::*;
use thicket_analysis::membrane::analyze_membrane;
use thicket_analysis::models::{
    deen_sieving_coefficient, lag_free_kc_cylinder, partition_cylinder,
};

/// Slab 60 nm thick with one pore of radius 10 nm per 30 nm × 30 nm cell,
/// reservoirs 15 nm deep, tracer a = 2 nm (λ = 0.2), both baths at the same
/// concentration (transits both ways), no wall hydrodynamics; rms step 1 nm.
const L: f64 = 60.0;
const R: f64 = 10.0;
const A: f64 = 2.0;
const CELL: f64 = 30.0;
const SIGMA: f64 = 1.0;
const D0_NM2_PER_S: f64 = 1e8;

#[test]
fn sieving_coefficient_matches_deen_at_three_peclet_numbers() {
    let lambda = A / R;
    let phi = partition_cylinder(lambda).unwrap();
    let kc = lag_free_kc_cylinder(lambda).unwrap();
    let kd = 1.0;
    let per_l2 = (2.0 * (L / SIGMA).powi(2)) as u64; // L²/D0 in steps
    let dir = tempfile::tempdir().unwrap();
    for (k, pe) in [0.5, 1.5, 4.0].into_iter().enumerate() {
        // Pe = K_c v L/(K_d D0) (Deen 1987).
        let v_nm_per_s = pe * kd * D0_NM2_PER_S / (kc * L);
        let settle = 2 * per_l2;
        let steps = settle + 8 * per_l2;
        let extra = format!(
            "[geometry]\nkind = \"membrane\"\nthickness_nm = {L}\npore_radius_nm = {R}\nwall_hydrodynamics = false\n\
             top_concentration_mol_per_m3 = 1.0\nbottom_concentration_mol_per_m3 = 1.0\nflux_after_s = {:e}\n\
             [flow]\nkind = \"poiseuille\"\nmean_velocity_m_per_s = {:e}\n",
            settle as f64 * dt_for_sigma(SIGMA),
            v_nm_per_s * 1e-9
        );
        let text = scenario_text(
            61 + k as u64,
            [CELL, CELL, L + 30.0],
            A,
            3_000,
            SIGMA,
            steps,
            per_l2 / 16,
            &extra,
        );
        let file = run_into(dir.path(), &format!("filtration-{k}"), &text);
        let r = analyze_membrane(&file, None).unwrap();
        let f = r
            .filtration
            .as_ref()
            .expect("a filtration run reports sieving");
        let s = f.sieving_coefficient;
        let se = s.standard_error.expect("a block standard error");
        let deen = deen_sieving_coefficient(phi, kc, pe).unwrap();
        let own = &f.models[0];
        println!(
            "Pe = {pe}: S = {:.4} ± {se:.4} ({} blocks, transits {} down / {} up), Deen {deen:.4}; report's own model {:.4} at Pe {:.4}",
            s.value, s.blocks, f.transits_down, f.transits_up, own.sieving_coefficient, own.peclet
        );
        assert!((own.sieving_coefficient - deen).abs() < 1e-9 && (own.peclet - pe).abs() < 1e-9);
        assert!(s.blocks >= 4, "{}", r.block_rule);
        assert!(4.5 * se < 0.1 * deen, "too noisy for the check: {se}");
        // 4.5 block standard errors (project rule for statistical checks).
        assert!(
            (s.value - deen).abs() < 4.5 * se,
            "Pe = {pe}: S {} vs Deen {deen}",
            s.value
        );
        // Deen's pore equation: b/a = e^(−Pe) and (a − b)/Pe = εΦK_d D0/L (steric pores: K_d = 1, exact).
        let p = f.peclet_inferred;
        let h = f.diffusive_hindrance_inferred;
        println!(
            "  inferred Pe {:.4} ± {:.4} (given {pe}); diffusive hindrance {:.4} ± {:.4} (Φ K_d = {phi:.4})",
            p.value,
            p.standard_error.unwrap_or(f64::NAN),
            h.value,
            h.standard_error.unwrap_or(f64::NAN)
        );
        assert!((p.value - pe).abs() < 4.5 * p.standard_error.unwrap());
        assert!((h.value - phi * kd).abs() < 4.5 * h.standard_error.unwrap());
    }
}
