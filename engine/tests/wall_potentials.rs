//! Soft wall interactions measured from runs: the equilibrium density next
//! to a charged floor, across a charged slit and across a charged
//! cylindrical pore must be Boltzmann's exp(−U/k_BT), normalised, with U the
//! model's own potential (screened electrostatics in the linear
//! superposition approximation plus a short-range well; exact for the
//! model). Each run starts from that profile (drawn by inversion) and runs
//! many relaxation times of the interaction range, so a wrong drift shows.

mod confinement_support;

use confinement_support::*;
use std::path::Path;
use thicket_engine::base::rng::ParticleRng;
use thicket_engine::space::potentials::WallPotential;
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

const A: f64 = 2.0;
const SIGMA: f64 = 0.1;
/// Chi-square critical value, 19 dof, p = 0.001 (NIST/SEMATECH e-Handbook, table 1.3.6.7.4).
const CHI2_19_P001: f64 = 43.82;
const BINS: usize = 20;

fn scenario_with(edges: [f64; 3], geometry: &str, count: usize, steps: u64) -> Scenario {
    let text = format!(
        "seed = 23\n[medium]\ntemperature_K = 298.15\nionic_strength_mol_per_L = 0.01\nrelative_permittivity = 78.4\n\
         [box]\nedges_nm = [{}, {}, {}]\n\
         [[species]]\nname = \"protein\"\nradius_nm = {A}\ncount = {count}\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         surface_potential_mV = -25.0\nwall_well_depth_kT = 2.0\nwall_well_range_nm = 1.0\n\
         [integrator]\ndt_s = {:e}\nsteps = {steps}\n[output]\nrecord_every_steps = {steps}\n\
         [geometry]\n{geometry}\nwall_surface_potential_mV = -30.0\n",
        edges[0],
        edges[1],
        edges[2],
        dt_for_sigma(SIGMA)
    );
    Scenario::from_text(&text, Path::new("test.toml"), &[]).unwrap_or_else(|e| panic!("{e}"))
}

/// Draws `n` values of x on [0, top] with density ∝ w(x), by inverting a fine tabulated CDF.
fn draw(w: impl Fn(f64) -> f64, top: f64, n: usize, seed: u64) -> Vec<f64> {
    let m = 20_000;
    let mut cdf = vec![0.0; m + 1];
    for k in 0..m {
        let (x0, x1) = (k as f64 * top / m as f64, (k + 1) as f64 * top / m as f64);
        cdf[k + 1] = cdf[k] + 0.5 * (w(x0) + w(x1)) * (x1 - x0);
    }
    let total = cdf[m];
    let mut g = ParticleRng::for_particle(seed, 0);
    (0..n)
        .map(|_| {
            let u = g.uniform() * total;
            let k = cdf.partition_point(|&c| c < u).clamp(1, m);
            let f = (u - cdf[k - 1]) / (cdf[k] - cdf[k - 1]).max(1e-300);
            (k as f64 - 1.0 + f) * top / m as f64
        })
        .collect()
}

/// Pearson chi-square of `values` against density ∝ w on [0, top], in 19
/// equal bins over [0, head] and one over [head, top].
fn chi_square(values: &[f64], w: impl Fn(f64) -> f64, head: f64, top: f64) -> f64 {
    let edges: Vec<f64> = (0..BINS)
        .map(|k| k as f64 * head / (BINS - 1) as f64)
        .chain([top])
        .collect();
    let integral = |lo: f64, hi: f64| {
        let m = 2000;
        (0..m)
            .map(|k| {
                let x = lo + (k as f64 + 0.5) * (hi - lo) / m as f64;
                w(x) * (hi - lo) / m as f64
            })
            .sum::<f64>()
    };
    let total = integral(0.0, top);
    let mut counts = [0u64; BINS];
    for &v in values {
        let k = edges.partition_point(|&e| e <= v).clamp(1, BINS) - 1;
        counts[k] += 1;
    }
    let n = values.len() as f64;
    (0..BINS)
        .map(|k| {
            let e = n * integral(edges[k], edges[k + 1]) / total;
            (counts[k] as f64 - e).powi(2) / e
        })
        .sum()
}

fn run(
    s: &Scenario,
    mut place: impl FnMut(&mut [f64; 3], f64),
    heights: &[f64],
    steps: u64,
) -> Vec<[f64; 3]> {
    let mut c = Stepper::new(s, &thicket_engine::obstacles::FixedObstacles::default());
    let mut state = c.initial_state(s).unwrap();
    for (p, &h) in state.positions.iter_mut().zip(heights) {
        place(p, h);
    }
    on_threads(2, || advance(&mut c, &mut state, steps, 1000));
    state.positions
}

fn potential(s: &Scenario) -> (WallPotential, f64) {
    (s.species[0].wall_potential, s.thermal_energy_pn_nm())
}

#[test]
fn density_next_to_a_charged_floor_is_boltzmann() {
    // Boltzmann (exact for the model): ρ(h) ∝ exp(−U(h)/k_BT), h the gap to the floor.
    for hydro in [false, true] {
        let lz = 40.0;
        let count = 6000;
        let steps = 20_000; // ~10 relaxation times κ⁻²/D0 of the double layer
        let s = scenario_with(
            [30.0, 30.0, lz],
            &format!("kind = \"plane_wall\"\nwall_hydrodynamics = {hydro}"),
            count,
            steps,
        );
        let (u, kt) = potential(&s);
        assert!(u.electrostatic_pn_nm > 0.0 && u.well_depth_pn_nm > 0.0);
        let top = lz - 2.0 * A;
        let w = |h: f64| (-u.energy_pn_nm(h) / kt).exp();
        let heights = draw(w, top, count, 5);
        let end = run(&s, |p, h| p[2] = A + h, &heights, steps);
        let gaps: Vec<f64> = end.iter().map(|p| p[2] - A).collect();
        let chi2 = chi_square(&gaps, w, 12.0, top);
        println!("charged floor (hydrodynamics {hydro}): chi² = {chi2:.1}; U(0) = {:.3} k_BT, κ⁻¹ = {:.3} nm", u.energy_pn_nm(0.0) / kt, 1.0 / u.kappa_per_nm);
        assert!(chi2 < CHI2_19_P001, "chi² = {chi2}");
    }
}

#[test]
fn density_across_a_charged_slit_is_boltzmann() {
    // Both walls act: U(h) + U(W − 2a − h) (exact for the model).
    let w_slit = 16.0;
    let count = 6000;
    let steps = 20_000;
    let s = scenario_with([30.0, 30.0, w_slit], "kind = \"slit\"", count, steps);
    let (u, kt) = potential(&s);
    let top = w_slit - 2.0 * A;
    let w = |h: f64| (-(u.energy_pn_nm(h) + u.energy_pn_nm(top - h)) / kt).exp();
    let heights = draw(w, top, count, 6);
    let end = run(&s, |p, h| p[2] = A + h, &heights, steps);
    let gaps: Vec<f64> = end.iter().map(|p| p[2] - A).collect();
    let chi2 = chi_square(&gaps, w, top * 0.95, top);
    println!("charged slit: chi² = {chi2:.1}");
    assert!(chi2 < CHI2_19_P001, "chi² = {chi2}");
}

#[test]
fn density_across_a_charged_pore_is_boltzmann() {
    // The two wall points on the diameter superposed, U(R − a − ρ) + U(R − a + ρ), weight 2ρ dρ
    // (exact for the model), with and without wall hydrodynamics (the cylinder model).
    let r = 10.0;
    let open = r - A;
    for hydro in [false, true] {
        let count = 6000;
        let steps = 20_000;
        let s = scenario_with(
            [2.0 * r, 2.0 * r, 30.0],
            &format!("kind = \"cylinder\"\npore_radius_nm = {r}\nwall_hydrodynamics = {hydro}"),
            count,
            steps,
        );
        let (u, kt) = potential(&s);
        let boltzmann =
            |rho: f64| (-(u.energy_pn_nm(open - rho) + u.energy_pn_nm(open + rho)) / kt).exp();
        let w = |rho: f64| boltzmann(rho) * 2.0 * rho;
        let radii = draw(w, open, count, 7);
        let mut g = ParticleRng::for_particle(8, 0);
        let angles: Vec<f64> = (0..count)
            .map(|_| 2.0 * std::f64::consts::PI * g.uniform())
            .collect();
        let end = {
            let mut k = 0;
            run(
                &s,
                |p, rho| {
                    p[0] = r + rho * angles[k].cos();
                    p[1] = r + rho * angles[k].sin();
                    k += 1;
                },
                &radii,
                steps,
            )
        };
        let rhos: Vec<f64> = end
            .iter()
            .map(|p| ((p[0] - r).powi(2) + (p[1] - r).powi(2)).sqrt())
            .collect();
        let chi2 = chi_square(&rhos, w, open * 0.95, open);
        // The Boltzmann-weighted partition coefficient of the model, for the report.
        let m = 4000;
        let phi_b: f64 = (0..m)
            .map(|k| {
                let rho = (k as f64 + 0.5) * open / m as f64;
                w(rho) * open / m as f64
            })
            .sum::<f64>()
            / (r * r);
        println!("charged pore (hydrodynamics {hydro}): chi² = {chi2:.1}; Boltzmann partition {phi_b:.4} (steric {:.4})", (open / r).powi(2));
        assert!(chi2 < CHI2_19_P001, "chi² = {chi2}");
    }
}

#[test]
fn interactions_switched_off_give_the_hard_wall_run_bit_for_bit() {
    // Zero surface potentials and a well of zero depth act on nothing: the step is the hard-wall one.
    let base = "seed = 3\n[medium]\ntemperature_K = 298.15\nionic_strength_mol_per_L = 0.1\nrelative_permittivity = 78.4\n\
                [box]\nedges_nm = [30.0, 30.0, 20.0]\n[[species]]\nname = \"p\"\nradius_nm = 2.0\ncount = 500\n";
    let tail = "[integrator]\ndt_s = 1e-11\nsteps = 300\n[geometry]\nkind = \"slit\"\n";
    let off = format!(
        "{base}surface_potential_mV = 0.0\nwall_well_depth_kT = 0.0\nwall_well_range_nm = 1.0\n{tail}wall_surface_potential_mV = 0.0\n"
    );
    let hard = format!("{base}{tail}");
    let ends: Vec<Vec<[f64; 3]>> = [off, hard]
        .iter()
        .map(|text| {
            let s = Scenario::from_text(text, Path::new("t.toml"), &[]).unwrap();
            let mut c = Stepper::new(&s, &thicket_engine::obstacles::FixedObstacles::default());
            let mut state = c.initial_state(&s).unwrap();
            on_threads(2, || advance(&mut c, &mut state, 300, 100));
            state.positions
        })
        .collect();
    assert_eq!(ends[0], ends[1]);
}

#[test]
fn a_membrane_refuses_an_interaction_that_reaches_the_bath_faces() {
    // κ⁻¹ ≈ 3 nm at 0.01 mol/L: the pull reaches about 20 nm, more than 8 nm reservoirs leave.
    let geometry = |depth: f64| {
        format!(
            "kind = \"membrane\"\nthickness_nm = 10.0\npore_radius_nm = 6.0\nwall_hydrodynamics = false\n\
             top_concentration_mol_per_m3 = 1.0\nbottom_concentration_mol_per_m3 = 1.0\n# reservoirs {depth} nm"
        )
    };
    let text = |depth: f64| {
        format!(
            "seed = 1\n[medium]\ntemperature_K = 298.15\nionic_strength_mol_per_L = 0.01\nrelative_permittivity = 78.4\n\
             [box]\nedges_nm = [16.0, 16.0, {}]\n[[species]]\nname = \"p\"\nradius_nm = 2.0\ncount = 10\n\
             surface_potential_mV = -25.0\n[integrator]\ndt_s = 1e-11\nsteps = 10\n[geometry]\n{}\nwall_surface_potential_mV = -30.0\n",
            10.0 + 2.0 * depth,
            geometry(depth)
        )
    };
    let e = Scenario::from_text(&text(8.0), Path::new("shallow.toml"), &[])
        .expect_err("the interaction reaches the bath faces")
        .to_string();
    assert!(
        e.contains("shallow.toml") && e.contains("species[0].surface_potential_mV"),
        "{e}"
    );
    assert!(e.contains("bath faces"), "{e}");
    Scenario::from_text(&text(40.0), Path::new("deep.toml"), &[]).unwrap_or_else(|e| panic!("{e}"));
}
