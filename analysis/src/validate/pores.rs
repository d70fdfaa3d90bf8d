//! Cylindrical pores: steric confinement leaves axial diffusion free and
//! fills the section uniformly; wall hydrodynamics give the section average
//! of D∥; the hindrance formulas against their printed values.

use super::walls::{confined_scenario, confinement, D0_NM2_PER_S};
use super::{check, Area, Comparison, Group, Mode, Outcome};
use crate::direct::{advance_confined, chi_square_flat, mean_se, CHI2_19_P001};
use crate::models;
use std::path::Path;
use thicket_engine::step::pipeline::mean_axial_mobility;

pub(super) fn groups() -> Vec<Group> {
    vec![
        Group {
            area: Area::Pores,
            title: "pore hindrance formulas against their printed values",
            source: "Renkin (1954); Dechadilok & Deen (2006); Bungay & Brenner (1973)",
            run: formulas,
        },
        Group {
            area: Area::Pores,
            title: "steric cylindrical pore, λ = 0.2",
            source: "steric confinement alone leaves axial diffusion free",
            run: |m, d| pore(false, m, d),
        },
        Group {
            area: Area::Pores,
            title: "cylindrical pore with wall hydrodynamics, λ = 0.2",
            source: "section average of Faxén D∥",
            run: |m, d| pore(true, m, d),
        },
    ]
}

fn formulas(_mode: Mode, _dir: &Path) -> Outcome {
    let e = |r: models::ModelResult<f64>| r.map_err(|e| e.to_string());
    let rounding = "half a unit in the 4th decimal printed";
    Ok(vec![
        check(
            "Renkin hindrance H at λ = 0.2",
            "Renkin (1954), H = (1 − λ)² K_d; value printed in REFERENCES.md",
            0.3812,
            e(models::renkin_hindrance(0.2))?,
            0.0,
        )
        .printed(5e-5, rounding),
        check(
            "Dechadilok–Deen hindrance H at λ = 0.2",
            "Dechadilok & Deen (2006); value printed in REFERENCES.md",
            0.3579,
            e(models::dechadilok_deen_hindrance(0.2))?,
            0.0,
        )
        .printed(5e-5, rounding),
        check(
            "Renkin centreline K_d at λ = 0.1 against Bungay & Brenner",
            "Bungay & Brenner (1973) centreline K_d = 0.7916 (REFERENCES.md), an independent exact theory",
            0.7916,
            e(models::renkin_centreline_kd(0.1))?,
            0.0,
        )
        .printed(3e-4, "3e-4: Renkin's truncated series agrees this closely at small λ, as the test suite"),
    ])
}

fn pore(hydro: bool, mode: Mode, _dir: &Path) -> Outcome {
    // Pore radius 10 nm, tracer 2 nm (λ = 0.2), rms step 0.2 nm, windows of 2000 steps.
    const R: f64 = 10.0;
    const A: f64 = 2.0;
    const WINDOW: u64 = 2000;
    const BINS: usize = 20;
    let (count, windows) = match (hydro, mode) {
        (false, Mode::Quick) => (6_000usize, 6u64),
        (false, Mode::Full) => (12_000, 10),
        (true, Mode::Quick) => (2_000, 5),
        (true, Mode::Full) => (6_000, 8),
    };
    let geometry =
        format!("kind = \"cylinder\"\npore_radius_nm = {R}\nwall_hydrodynamics = {hydro}");
    let s = confined_scenario(
        21,
        [2.0 * R, 2.0 * R, 40.0],
        A,
        count,
        0.2,
        WINDOW * windows,
        &geometry,
    )?;
    let mut c = confinement(&s)?;
    let mut state = c.initial_state(&s).map_err(|e| e.to_string())?;
    let start = state.clone();
    let mut axial = vec![0.0; count];
    for _ in 0..windows {
        let before = state.clone();
        advance_confined(&mut c, &mut state, WINDOW, WINDOW);
        let t = WINDOW as f64 * s.dt_s;
        for (i, ax) in axial.iter_mut().enumerate() {
            let dz = state.unwrapped(i, &s.sim_box)[2] - before.unwrapped(i, &s.sim_box)[2];
            *ax += dz * dz / (2.0 * t * D0_NM2_PER_S) / windows as f64;
        }
    }
    let open = R - A;
    let mut radial = vec![0u64; BINS];
    let mut transverse = Vec::with_capacity(count);
    for (p, p0) in state.positions.iter().zip(&start.positions) {
        let rho2 = (p[0] - R).powi(2) + (p[1] - R).powi(2);
        radial[((rho2 / (open * open) * BINS as f64) as usize).min(BINS - 1)] += 1;
        transverse.push(0.5 * ((p[0] - p0[0]).powi(2) + (p[1] - p0[1]).powi(2)));
    }
    let (d, se) = mean_se(&axial);
    let chi2 = chi_square_flat(&radial);
    let chi_basis = "the chi-square critical value, 19 degrees of freedom, p = 0.001 (NIST/SEMATECH e-Handbook, table 1.3.6.7.4)";
    let label = if hydro {
        "with wall hydrodynamics"
    } else {
        "steric"
    };
    let uniform = check(
        format!("cylindrical pore, λ = 0.2, {label}: chi-square of ρ² against flat"),
        "uniform equilibrium over the open section, ρ² uniform on [0, (r − a)²] (exact)",
        CHI2_19_P001,
        chi2,
        0.0,
    )
    .bound(Comparison::AtMost, 0.0, chi_basis);
    if !hydro {
        let (t, t_se) = mean_se(&transverse);
        return Ok(vec![
            check(
                "cylindrical pore, λ = 0.2, steric: axial D_eff/D0",
                "steric confinement alone does not slow axial diffusion in a long straight pore (REFERENCES.md)",
                1.0,
                d,
                se,
            )
            .band(0.02, "2 %, as the test suite (a guard against reflection bugs)"),
            uniform,
            check(
                "cylindrical pore, λ = 0.2, steric: long-time transverse MSD per axis, nm²",
                "exact: 2 Var(x) = (r − a)²/2 for a uniformly filled disk",
                open * open / 2.0,
                t,
                t_se,
            )
            .standard_errors(5.0),
        ]);
    }
    let geometry = s.geometry.as_ref().ok_or("no geometry")?;
    let model = mean_axial_mobility(geometry, A, A).ok_or("no section-averaged mobility")?;
    Ok(vec![
        check(
            "cylindrical pore, λ = 0.2, with wall hydrodynamics: axial D_eff/D0",
            "exact for the model: ⟨Δz²⟩ = 2⟨D_zz⟩t over the uniform section; the cylinder model's average is Dechadilok & Deen's (2006) K_d (REFERENCES.md)",
            model,
            d,
            se,
        )
        .standard_errors(5.0),
        uniform,
    ])
}
