//! Mobile hard spheres: the Carnahan–Starling contact value, dilute
//! long-time self-diffusion, and the contact theorem at a hard wall.

use super::{check, Area, Group, Mode, Outcome};
use crate::direct::{
    contact_value, long_time_diffusivity, mean_se, prepare, quadratic_intercept, scenario_from_text,
};
use crate::models;
use std::path::Path;

pub(super) fn groups() -> Vec<Group> {
    vec![
        Group {
            area: Area::Crowders,
            title: "hard-sphere contact value at φ = 0.3",
            source: "Carnahan & Starling (1969)",
            run: carnahan_starling,
        },
        Group {
            area: Area::Crowders,
            title: "dilute long-time self-diffusion at φ = 0.05",
            source: "Hanna, Hess & Klein (1982); Ackerson & Fleishman (1982)",
            run: dilute_self_diffusion,
        },
        Group {
            area: Area::Crowders,
            title: "hard spheres at a hard wall",
            source: "Henderson, Blum & Lebowitz (1979); Carnahan & Starling (1969)",
            run: contact_theorem,
        },
    ]
}

/// Equal crowders of diameter 1 nm at volume fraction `phi`, rms step `sigma` nm, D0 = 1 nm²/s,
/// with move rejection as the test suite's crowding_mobile.rs (reflection: contact_reflect.rs).
fn crowd_text(phi: f64, n: usize, sigma: f64, seed: u64) -> String {
    let edge = (n as f64 * std::f64::consts::PI / 6.0 / phi).cbrt();
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n\
         [[species]]\nname = \"crowder\"\nrole = \"crowder\"\nradius_nm = 0.5\ncount = {n}\ndiffusivity_m2_per_s = 1e-18\n\
         [integrator]\ncontact = \"reject\"\ndt_s = {}\nsteps = 1\n",
        sigma * sigma / 2.0
    )
}

fn carnahan_starling(mode: Mode, _dir: &Path) -> Outcome {
    let phi = 0.3;
    let (n, configs) = mode.pick((2000, 150), (5000, 250));
    // Move rejection samples the equilibrium exactly at any Δt, so a large step (0.08σ) decorrelates fast.
    let sc = scenario_from_text(&crowd_text(phi, n, 0.08, 41), "crowders.toml")
        .map_err(|e| e.to_string())?;
    let (g, se) = contact_value(&sc, 600, configs, 20).map_err(|e| e.to_string())?;
    let cs = models::carnahan_starling_contact(phi).map_err(|e| e.to_string())?;
    Ok(vec![check(
        "hard spheres at φ = 0.3: contact value g(σ⁺)",
        "Carnahan & Starling (1969) g(σ⁺) = (1 − φ/2)/(1 − φ)³ (REFERENCES.md)",
        cs,
        g,
        se,
    )
    .band(
        0.03 * cs,
        "3 % of the equation of state (an approximation), as the test suite",
    )])
}

fn dilute_self_diffusion(mode: Mode, _dir: &Path) -> Outcome {
    let phi = 0.05;
    let (n, duration) = mode.pick((3000, 8.0), (5000, 15.0));
    // Records every 0.25 s (D0 = 1 nm²/s, σ_hs = 1 nm); slope over 0.75–1.5 s, past the collision time.
    let records = (duration / 0.25) as usize + 1;
    let (d, se) = long_time_diffusivity(
        |s| crowd_text(phi, n, 0.02, s),
        &[51],
        |sc| 0..sc.particle_count(),
        0.25,
        records,
        3,
        6,
    )
    .map_err(|e| e.to_string())?;
    let dilute = models::hard_sphere_self_diffusion_dilute(phi).map_err(|e| e.to_string())?;
    Ok(vec![check(
        "hard spheres at φ = 0.05: long-time self-diffusion D_L/D0",
        "1 − 2φ + O(φ²), Hanna, Hess & Klein (1982); Ackerson & Fleishman (1982) (REFERENCES.md, from memory)",
        dilute,
        d,
        se,
    )
    .band(0.02, "0.02 for the O(φ²) term and the √Δt rejection bias, as the test suite")])
}

/// Carnahan–Starling compressibility factor p/(ρkT) = (1 + φ + φ² − φ³)/(1 − φ)³.
fn carnahan_starling_z(phi: f64) -> f64 {
    (1.0 + phi + phi * phi - phi.powi(3)) / (1.0 - phi).powi(3)
}

fn contact_theorem(mode: Mode, _dir: &Path) -> Outcome {
    // Spheres of radius 1 nm in a 24 nm slit, about φ = 0.2 in the middle; D0 = 1e8 nm²/s.
    let (a, w, l, count) = (1.0, 24.0, 36.0, 1485usize);
    let sigma: f64 = 0.04;
    let (equilibrate, frames, every) = mode.pick((8_000u64, 1_200u64, 20u64), (20_000, 6_000, 20));
    let text = format!(
        "seed = 41\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{l}, {l}, {w}]\n\
         [[species]]\nname = \"sphere\"\nrole = \"crowder\"\nradius_nm = {a}\ncount = {count}\ndiffusivity_m2_per_s = 1e-10\n\
         [integrator]\ndt_s = {:e}\nsteps = {}\n[output]\nrecord_every_steps = {every}\n\
         [geometry]\nkind = \"slit\"\n",
        sigma * sigma / 2e8,
        equilibrate + frames * every
    );
    let s = scenario_from_text(&text, "contact.toml").map_err(|e| e.to_string())?;
    let (_o, mut dynamics, mut state) = prepare(&s).map_err(|e| e.to_string())?;
    dynamics.advance(&mut state, equilibrate);
    // Gap h from a centre's contact position to the nearer wall, binned near contact; the middle
    // 8 nm (four diameters from either wall) gives the bulk density.
    let (bin, near_bins, batches) = (0.04, 8usize, 20usize);
    let per_batch = frames as usize / batches;
    let (mut ratios, mut near, mut middle) = (Vec::new(), vec![0u64; near_bins], 0u64);
    for f in 0..frames as usize {
        dynamics.advance(&mut state, every);
        for p in &state.positions {
            let h = (p[2] - a).min(w - a - p[2]);
            let k = (h / bin) as usize;
            if k < near_bins {
                near[k] += 1;
            }
            if (p[2] - 0.5 * w).abs() < 4.0 {
                middle += 1;
            }
        }
        if (f + 1) % per_batch == 0 {
            let norm = per_batch as f64 * 2.0 * l * l * bin;
            let x: Vec<f64> = (0..near_bins).map(|k| (k as f64 + 0.5) * bin).collect();
            let rho: Vec<f64> = near.iter().map(|&n| n as f64 / norm).collect();
            let contact = quadratic_intercept(&x, &rho);
            let bulk = middle as f64 / (per_batch as f64 * l * l * 8.0);
            let phi = bulk * 4.0 / 3.0 * std::f64::consts::PI * a.powi(3);
            ratios.push(contact / (bulk * carnahan_starling_z(phi)));
            near.iter_mut().for_each(|n| *n = 0);
            middle = 0;
        }
    }
    let (ratio, se) = mean_se(&ratios);
    Ok(vec![check(
        "hard spheres in a slit, φ ≈ 0.2: contact density over p/kT",
        "contact theorem ρ(contact) = p/kT, Henderson, Blum & Lebowitz (1979, from memory), p from Carnahan & Starling (1969) (REFERENCES.md)",
        1.0,
        ratio,
        se,
    )
    .standard_errors(4.0)])
}
