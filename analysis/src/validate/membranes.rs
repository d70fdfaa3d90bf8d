//! Membranes with a pore between fixed-concentration reservoirs: the pore's
//! partition coefficient and the steady-state steric permeability.

use super::walls::{confined_scenario, confinement, D0_NM2_PER_S};
use super::{check, Area, Group, Mode, Outcome};
use crate::direct::{advance_confined, mean_se};
use crate::models::{membrane_steric_permeability_over_d0, partition_cylinder};
use std::path::Path;
use thicket_engine::base::rng::ParticleRng;
use thicket_engine::run::membrane::MembraneMeter;
use thicket_engine::space::shape::Shape;

pub(super) fn groups() -> Vec<Group> {
    vec![
        Group {
            area: Area::Membranes,
            title: "membrane pore partition coefficient, λ = 0.2",
            source: "Φ = (1 − λ)² (exact)",
            run: partition,
        },
        Group {
            area: Area::Membranes,
            title: "steady-state steric permeability, λ = 0.1",
            source: "εΦD0/L with end corrections",
            run: permeability,
        },
    ]
}

fn partition(mode: Mode, _dir: &Path) -> Outcome {
    // Pore radius 10 nm through a slab 20 nm thick, reservoirs 10 nm deep, one pore per 24 × 24 nm cell.
    let (lambda, r) = (0.2, 10.0);
    let a = lambda * r;
    let (count, measure) = mode.pick((3_000usize, 8_000u64), (5_000, 16_000));
    // Equilibrium is exact for any step, so the step only sets the pace (a fifth of the tracer radius).
    let sigma = 0.8;
    let (fill, every) = (2_000u64, 100u64);
    let geometry = format!(
        "kind = \"membrane\"\nthickness_nm = 20.0\npore_radius_nm = {r}\ntop_concentration_mol_per_m3 = 1.0\nbottom_concentration_mol_per_m3 = 1.0"
    );
    let s = confined_scenario(
        31,
        [24.0, 24.0, 40.0],
        a,
        count,
        sigma,
        fill + measure,
        &geometry,
    )?;
    let Some(Shape::Membrane(m)) = s.geometry.as_ref().map(|g| &g.shape) else {
        return Err("not a membrane".into());
    };
    let (z_lo, z_hi, lz) = (m.z_lo_nm, m.z_hi_nm, m.height_nm);
    let mut c = confinement(&s)?;
    let mut state = c.initial_state(&s).map_err(|e| e.to_string())?;
    // Empty the pore: the dynamics, not the placement, must fill it.
    let mut g = ParticleRng::for_particle(999, 0);
    for p in state
        .positions
        .iter_mut()
        .filter(|p| p[2] >= z_lo - a && p[2] <= z_hi + a)
    {
        let top = g.uniform() < 0.5;
        let depth = (z_lo - a) * g.uniform();
        *p = [
            24.0 * g.uniform(),
            24.0 * g.uniform(),
            if top { lz - depth } else { depth },
        ];
    }
    let pore_volume = std::f64::consts::PI * r * r * (z_hi - z_lo);
    // Fully open reservoir layers: beyond a from the slab faces.
    let bulk_volume = 2.0 * 24.0 * 24.0 * (z_lo - a);
    advance_confined(&mut c, &mut state, fill, every);
    let batch_len = measure / every / 8;
    let (mut batches, mut sums) = (Vec::new(), [0.0f64; 2]);
    for k in 0..measure / every {
        advance_confined(&mut c, &mut state, every, every);
        for p in &state.positions {
            if m.in_pore(p) {
                sums[0] += 1.0;
            } else if p[2] > z_hi + a || p[2] < z_lo - a {
                sums[1] += 1.0;
            }
        }
        if (k + 1) % batch_len == 0 {
            batches.push(sums);
            sums = [0.0; 2];
        }
    }
    let phi_of = |b: &[f64; 2]| (b[0] / pore_volume) / (b[1] / bulk_volume);
    let total = batches
        .iter()
        .fold([0.0; 2], |t, b| [t[0] + b[0], t[1] + b[1]]);
    let per_batch: Vec<f64> = batches.iter().map(phi_of).collect();
    let (_, se) = mean_se(&per_batch);
    let expected = partition_cylinder(lambda).map_err(|e| e.to_string())?;
    Ok(vec![check(
        "membrane pore, λ = 0.2: partition coefficient",
        "steric partition coefficient of a cylindrical pore Φ = (1 − λ)², exact (REFERENCES.md)",
        expected,
        phi_of(&total),
        se,
    )
    .band(
        0.03 * expected,
        "3 % (finite pore ends), as the test suite; SE from 8 batch means",
    )])
}

fn permeability(mode: Mode, _dir: &Path) -> Outcome {
    // a = 1 nm, pore radius 10 nm (λ = 0.1) through a slab 30 nm thick, one pore per 40 × 40 nm cell.
    const R: f64 = 10.0;
    const A: f64 = 1.0;
    const L: f64 = 30.0;
    const S: f64 = 40.0;
    let sigma: f64 = 0.5;
    let per_l2 = (2.0 * (L / sigma).powi(2)) as u64;
    // About half a diffusion time L²/D0 to settle (the start is close to the steady profile).
    let (count, relax, measure) = mode.pick(
        (4_000usize, per_l2 / 2, 2 * per_l2),
        (8_000, per_l2 / 2, 4 * per_l2),
    );
    let geometry = format!(
        "kind = \"membrane\"\nthickness_nm = {L}\npore_radius_nm = {R}\nwall_hydrodynamics = false\n\
         top_concentration_mol_per_m3 = 1.0\nbottom_concentration_mol_per_m3 = 0.0"
    );
    let s = confined_scenario(
        41,
        [S, S, L + 20.0],
        A,
        count,
        sigma,
        relax + measure,
        &geometry,
    )?;
    let mut c = confinement(&s)?;
    let mut state = c.initial_state(&s).map_err(|e| e.to_string())?;
    let mut meter = MembraneMeter::new(1);
    let flux_after = relax as f64 * s.dt_s;
    while state.step < relax + measure {
        let counts = c.advance(&mut state, 1000);
        meter.add(&counts);
        let occupancy = c.occupancy(&state).ok_or("no membrane occupancy")?;
        meter.observe(
            state.step,
            state.step as f64 * s.dt_s,
            flux_after,
            &occupancy,
        );
    }
    let summary = meter
        .summary(&c, &s, 0, state.step)
        .ok_or("no membrane summary")?;
    let porosity = std::f64::consts::PI * R * R / (S * S);
    let predicted = membrane_steric_permeability_over_d0(porosity, L, A, R, Some(S))
        .map_err(|e| e.to_string())?;
    let measured = summary.membrane_permeability_m_per_s * 1e9 / D0_NM2_PER_S;
    // Net transfers through the pore are close to Poisson events.
    let se = measured / (summary.net_crossings_down.max(1) as f64).sqrt();
    Ok(vec![check(
        "membrane, λ = 0.1, no wall hydrodynamics: steady-state P_m/D0, 1/nm",
        "steric εΦD0/L, Φ = (1 − λ)², with the flanged-pipe end correction 0.8216(r − a) (King 1936; Norris & Sheng 1989, from memory) and the square-array factor (REFERENCES.md)",
        predicted,
        measured,
        se,
    )
    .band(0.05 * predicted, "5 % (the end correction is an approximation), as the test suite")])
}
