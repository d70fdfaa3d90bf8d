//! Plane walls and slits: short-time D⊥ and D∥ against Brenner's and
//! Faxén's series, the series themselves against their printed values, and
//! the slit's equilibrium (Itô drift), partition coefficient and lateral
//! diffusivity.

use super::{check, Area, Comparison, Group, Mode, Outcome};
use crate::direct::{advance_confined, chi_square_flat, mean_se, scenario_from_text, CHI2_19_P001};
use crate::models;
use std::path::Path;
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::space::mobility::mean_parallel_mobility;
use thicket_engine::space::mobility::{
    bevan_prieve_perpendicular, brenner_perpendicular, faxen_parallel,
};
use thicket_engine::step::State;
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

/// Free diffusivity of the confined tracers: 1e8 nm²/s (1e-10 m²/s).
pub(super) const D0_NM2_PER_S: f64 = 1e8;

pub(super) fn groups() -> Vec<Group> {
    vec![
        Group {
            area: Area::Walls,
            title: "wall mobility formulas against their printed values",
            source: "Brenner (1961); Faxén; Bevan & Prieve (2000)",
            run: formulas,
        },
        Group {
            area: Area::Walls,
            title: "short-time diffusion near one plane wall",
            source: "Brenner (1961); Faxén",
            run: plane_wall,
        },
        Group {
            area: Area::Walls,
            title: "slit with wall hydrodynamics",
            source: "Itô drift; Φ = 1 − a/h; gap-averaged Faxén D∥",
            run: slit,
        },
    ]
}

/// A one-species confined scenario (D0 = 1e-10 m²/s, rms step `sigma_nm` per axis).
pub(super) fn confined_scenario(
    seed: u64,
    edges_nm: [f64; 3],
    radius_nm: f64,
    count: usize,
    sigma_nm: f64,
    steps: u64,
    geometry: &str,
) -> Result<Scenario, String> {
    let text = format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{}, {}, {}]\n\
         [[species]]\nname = \"tracer\"\nradius_nm = {radius_nm}\ncount = {count}\ndiffusivity_m2_per_s = 1e-10\n\
         [integrator]\ndt_s = {:e}\nsteps = {steps}\n[output]\nrecord_every_steps = {steps}\n[geometry]\n{geometry}\n",
        edges_nm[0],
        edges_nm[1],
        edges_nm[2],
        sigma_nm * sigma_nm / (2.0 * D0_NM2_PER_S)
    );
    scenario_from_text(&text, "confined.toml").map_err(|e| e.to_string())
}

/// The prepared kernels of a confined scenario.
pub(super) fn confinement(s: &Scenario) -> Result<Stepper, String> {
    let g = s.geometry.as_ref().ok_or("the scenario has no geometry")?;
    let _ = g;
    Ok(Stepper::new(s, &FixedObstacles::default()))
}

fn formulas(_mode: Mode, _dir: &Path) -> Outcome {
    let rounding = "half a unit in the 4th decimal printed";
    Ok(vec![
        check(
            "Brenner D⊥/D0 at z/a = 1.1",
            "Brenner (1961) exact series; value printed in REFERENCES.md",
            0.0873,
            brenner_perpendicular(1.1),
            0.0,
        )
        .printed(5e-5, rounding),
        check(
            "Brenner D⊥/D0 at z/a = 2",
            "Brenner (1961) exact series; value printed in REFERENCES.md",
            0.4705,
            brenner_perpendicular(2.0),
            0.0,
        )
        .printed(5e-5, rounding),
        check(
            "Bevan–Prieve D⊥/D0 at z/a = 1.5",
            "Bevan & Prieve (2000) closed form; value printed in REFERENCES.md",
            0.3125,
            bevan_prieve_perpendicular(0.5),
            0.0,
        )
        .printed(5e-5, rounding),
        check(
            "Faxén D∥/D0 at z/a = 2",
            "Faxén's method of reflections; value printed in REFERENCES.md",
            0.7214,
            faxen_parallel(0.5),
            0.0,
        )
        .printed(5e-5, rounding),
    ])
}

fn plane_wall(mode: Mode, _dir: &Path) -> Outcome {
    const A: f64 = 1.0;
    const HALF_BIN: f64 = 0.05;
    let lag = 5u64;
    let (count, windows) = mode.pick((20_000usize, 100usize), (40_000, 250));
    let heights: Vec<f64> = mode.pick(vec![2.0], vec![1.5, 2.0, 3.0]);
    let geometry =
        "kind = \"plane_wall\"\nwall_hydrodynamics = true\nperpendicular_model = \"brenner\"";
    let s = confined_scenario(
        5,
        [80.0, 80.0, 12.0],
        A,
        count,
        0.02,
        lag * windows as u64,
        geometry,
    )?;
    let mut c = confinement(&s)?;
    let mut state = c.initial_state(&s).map_err(|e| e.to_string())?;
    // Per height bin: Σ Δz, Σ Δz², Σ (Δx² + Δy²), samples.
    let mut bins = vec![[0.0f64; 4]; heights.len()];
    for _ in 0..windows {
        let before = state.clone();
        c.advance(&mut state, lag);
        for i in 0..state.len() {
            let z0 = before.positions[i][2] / A;
            let Some(b) = heights.iter().position(|h| (z0 - h).abs() < HALF_BIN) else {
                continue;
            };
            let (p0, p1) = (
                before.unwrapped(i, &s.sim_box),
                state.unwrapped(i, &s.sim_box),
            );
            let dz = p1[2] - p0[2];
            bins[b][0] += dz;
            bins[b][1] += dz * dz;
            bins[b][2] += (p1[0] - p0[0]).powi(2) + (p1[1] - p0[1]).powi(2);
            bins[b][3] += 1.0;
        }
    }
    let tau = lag as f64 * s.dt_s;
    let mut out = Vec::new();
    for (h, b) in heights.iter().zip(&bins) {
        let n = b[3];
        let mean = b[0] / n;
        let perp = (b[1] / n - mean * mean) / (2.0 * tau * D0_NM2_PER_S);
        let par = b[2] / n / (4.0 * tau * D0_NM2_PER_S);
        let (bp, fp) = (brenner_perpendicular(*h), faxen_parallel(1.0 / h));
        // Gaussian displacements: relative SE of a variance √(2/n), of two axes √(1/n).
        out.push(
            check(
                format!("plane wall, z/a = {h}: short-time D⊥/D0"),
                "Brenner (1961) exact series (REFERENCES.md)",
                bp,
                perp,
                bp * (2.0 / n).sqrt(),
            )
            .band(
                0.03 * bp,
                "3 % (the Δt = 5 steps average over a varying D⊥), as the test suite",
            ),
        );
        out.push(
            check(
                format!("plane wall, z/a = {h}: short-time D∥/D0"),
                "Faxén's method of reflections (REFERENCES.md)",
                fp,
                par,
                fp * (1.0 / n).sqrt(),
            )
            .band(
                0.03 * fp,
                "3 % (the series is truncated at (a/z)⁵), as the test suite",
            ),
        );
    }
    Ok(out)
}

fn slit(mode: Mode, _dir: &Path) -> Outcome {
    // Radius a = 1 nm and gap W = 6a: centres span z/a from 1 to 5; rms step a/40.
    const A: f64 = 1.0;
    const W: f64 = 6.0;
    const BINS: usize = 20;
    let (count, steps, windows) = mode.pick((6_000usize, 12_000u64, 4u64), (16_000, 15_000, 5));
    let geometry = "kind = \"slit\"\nwall_hydrodynamics = true";
    let s = confined_scenario(11, [60.0, 60.0, W], A, count, 0.025, steps, geometry)?;
    let run = |c: &mut Stepper| -> Result<(Vec<u64>, Vec<f64>), String> {
        let mut state = c.initial_state(&s).map_err(|e| e.to_string())?;
        let mut lateral = vec![0.0; count];
        let window = steps / windows;
        for _ in 0..windows {
            let before: State = state.clone();
            advance_confined(c, &mut state, window, 500);
            let t = window as f64 * s.dt_s;
            for (i, sum) in lateral.iter_mut().enumerate() {
                let (p0, p1) = (
                    before.unwrapped(i, &s.sim_box),
                    state.unwrapped(i, &s.sim_box),
                );
                let msd = (p1[0] - p0[0]).powi(2) + (p1[1] - p0[1]).powi(2);
                // Windows of one particle are correlated: average them per particle.
                *sum += msd / (2.0 * 2.0 * t) / windows as f64;
            }
        }
        let mut histogram = vec![0u64; BINS];
        for p in &state.positions {
            let u = ((p[2] - A) / (W - 2.0 * A)).clamp(0.0, 1.0);
            histogram[((u * BINS as f64) as usize).min(BINS - 1)] += 1;
        }
        Ok((histogram, lateral))
    };
    let mut c = confinement(&s)?;
    let (histogram, lateral) = run(&mut c)?;
    let (without, _) = run(&mut confinement(&s)?.without_ito_drift())?;
    let chi2 = chi_square_flat(&histogram);
    let chi2_off = chi_square_flat(&without);
    // Partition coefficient: mean concentration over the gap over that in its central half.
    let central: u64 = histogram[BINS / 4..3 * BINS / 4].iter().sum();
    let phi = (count as f64 / W) / (central as f64 / (0.5 * (W - 2.0 * A)));
    let expected = models::partition_slit(A, 0.5 * W).map_err(|e| e.to_string())?;
    // Binomial spread of the central count (p = 1/2): relative SE √(1/N).
    let phi_se = expected * (1.0 / count as f64).sqrt();
    let (d, d_se) = mean_se(&lateral);
    let model = mean_parallel_mobility(&s.geometry.as_ref().ok_or("no geometry")?.shape, A, A)
        .ok_or("no gap-averaged mobility for the slit")?;
    let chi_basis = "the chi-square critical value, 19 degrees of freedom, p = 0.001 (NIST/SEMATECH e-Handbook, table 1.3.6.7.4)";
    Ok(vec![
        check(
            "slit W = 6a with wall hydrodynamics: chi-square of the height histogram against flat",
            "with the Itô drift the equilibrium density stays uniform (REFERENCES.md)",
            CHI2_19_P001,
            chi2,
            0.0,
        )
        .bound(Comparison::AtMost, 0.0, chi_basis),
        check(
            "same slit without the Itô drift: chi-square against flat (the check has teeth)",
            "without the drift particles pile up at the walls (REFERENCES.md)",
            10.0 * CHI2_19_P001,
            chi2_off,
            0.0,
        )
        .bound(Comparison::AtLeast, 0.0, "at least ten times the critical value"),
        check(
            "slit W = 6a: partition coefficient",
            "steric partition coefficient of a slit Φ = 1 − a/h, exact (REFERENCES.md)",
            expected,
            phi,
            phi_se,
        )
        .standard_errors(5.0),
        check(
            "slit W = 6a: lateral D_eff/D0",
            "exact for the model: ⟨Δx²⟩ = 2⟨D∥⟩t (Itô isometry), Faxén D∥ of both walls superposed (REFERENCES.md)",
            model,
            d / D0_NM2_PER_S,
            d_se / D0_NM2_PER_S,
        )
        .standard_errors(5.0),
    ])
}
