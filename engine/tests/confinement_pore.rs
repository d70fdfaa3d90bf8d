//! Infinitely long cylindrical pore: steric confinement alone leaves axial
//! diffusion free, fills the cross-section uniformly and bounds the
//! transverse MSD; with wall hydrodynamics the axial D_eff is the
//! cross-section average of D∥ (nearest-wall planar approximation).

mod confinement_support;

use confinement_support::*;
use thicket_engine::space::mobility::mean_parallel_mobility;
use thicket_engine::Scenario;

/// Pore radius and tracer radius (λ = 0.2), nm.
const R: f64 = 10.0;
const A: f64 = 2.0;
const SIGMA: f64 = 0.2;
const WINDOW: u64 = 2000;
const BINS: usize = 20;
/// Chi-square critical value, 19 dof, p = 0.001 (NIST/SEMATECH e-Handbook, table 1.3.6.7.4).
const CHI2_19_P001: f64 = 43.82;

fn pore(hydro: bool, count: usize, windows: u64) -> Scenario {
    // These tests pin the nearest-wall approximation, kept selectable for comparison;
    // the cylinder model has its own tests (confinement_pore_model.rs).
    let model = if hydro {
        "\npore_mobility = \"nearest_wall\""
    } else {
        ""
    };
    let geometry =
        format!("kind = \"cylinder\"\npore_radius_nm = {R}\nwall_hydrodynamics = {hydro}{model}");
    scenario(
        21,
        [2.0 * R, 2.0 * R, 40.0],
        A,
        count,
        SIGMA,
        WINDOW * windows,
        &geometry,
    )
}

struct Measured {
    /// Per particle: mean over windows of Δz²/(2t), in units of D0.
    axial: Vec<f64>,
    /// Per particle: (Δx² + Δy²)/2 between start and end, nm².
    transverse: Vec<f64>,
    /// Histogram of ρ²/(r − a)² at the end.
    radial: Vec<u64>,
    rejected: u64,
}

fn measure(s: &Scenario, windows: u64) -> Measured {
    let mut c = confinement(s);
    let mut state = c.initial_state(s).unwrap();
    let start = state.clone();
    let n = state.len();
    let mut axial = vec![0.0; n];
    let mut rejected = 0;
    on_threads(2, || {
        for _ in 0..windows {
            let before = state.clone();
            rejected += advance(&mut c, &mut state, WINDOW, WINDOW)[0].rejected_moves;
            let t = WINDOW as f64 * s.dt_s;
            for (i, ax) in axial.iter_mut().enumerate() {
                let dz = state.unwrapped(i, &s.sim_box)[2] - before.unwrapped(i, &s.sim_box)[2];
                *ax += dz * dz / (2.0 * t * D0_NM2_PER_S) / windows as f64;
            }
        }
    });
    let axis = [R, R];
    let open = R - A;
    let mut radial = vec![0u64; BINS];
    let mut transverse = Vec::with_capacity(n);
    for (p, p0) in state.positions.iter().zip(&start.positions) {
        let rho2 = (p[0] - axis[0]).powi(2) + (p[1] - axis[1]).powi(2);
        assert!(
            rho2 <= open * open * (1.0 + 1e-12),
            "a centre left the pore: ρ = {}",
            rho2.sqrt()
        );
        radial[((rho2 / (open * open) * BINS as f64) as usize).min(BINS - 1)] += 1;
        transverse.push(0.5 * ((p[0] - p0[0]).powi(2) + (p[1] - p0[1]).powi(2)));
    }
    Measured {
        axial,
        transverse,
        radial,
        rejected,
    }
}

#[test]
fn steric_confinement_leaves_axial_diffusion_free() {
    let windows = 10;
    let s = pore(false, 12_000, windows);
    let m = measure(&s, windows);
    let (d, se) = mean_se(&m.axial);
    println!(
        "axial D_eff/D0 = {d:.4} ± {se:.4} (rejected moves: {})",
        m.rejected
    );
    assert!(4.5 * se < 0.02, "too few samples for a 2 % check: SE {se}");
    // REFERENCES.md: steric confinement alone does not slow axial diffusion in an infinitely long
    // straight pore (a guard against reflection bugs); within 2 %.
    assert!((d - 1.0).abs() < 0.02, "axial D_eff/D0 = {d}");

    // Uniform equilibrium across the section: ρ² is uniform on [0, (r − a)²].
    let chi2 = chi_square_flat(&m.radial);
    println!("radial chi-square {chi2:.2}, bins {:?}", m.radial);
    // Chi-square critical value at p = 0.001, 19 dof: NIST/SEMATECH e-Handbook table.
    assert!(
        chi2 < CHI2_19_P001,
        "section not uniformly filled: chi-square {chi2}"
    );

    // Long-time transverse MSD per axis: 2 Var(x) = (r − a)²/2 for a uniform disk (exact).
    let (t, se) = mean_se(&m.transverse);
    let plateau = (R - A).powi(2) / 2.0;
    println!("transverse MSD per axis {t:.3} ± {se:.3} nm² against (r − a)²/2 = {plateau:.3}");
    assert!(
        (t - plateau).abs() < 5.0 * se,
        "transverse plateau {t} vs {plateau}"
    );
}

#[test]
fn wall_hydrodynamics_slow_axial_diffusion_to_the_section_average() {
    let windows = 8;
    let s = pore(true, 6_000, windows);
    let m = measure(&s, windows);
    let (d, se) = mean_se(&m.axial);
    let shape = &s.geometry.as_ref().unwrap().shape;
    let model = mean_parallel_mobility(shape, A, A).unwrap();
    let lambda = A / R;
    let dd = thicket_analysis::models::dechadilok_deen_hindrance(lambda).unwrap()
        / thicket_analysis::models::partition_cylinder(lambda).unwrap();
    let renkin = thicket_analysis::models::renkin_centreline_kd(lambda).unwrap();
    println!(
        "λ = {lambda}: axial D_eff/D0 = {d:.4} ± {se:.4}; nearest-wall model average {model:.4}; \
         Dechadilok-Deen averaged K_d {dd:.4}; Renkin centreline K_d {renkin:.4}"
    );
    // Exact identity of the model: axial moves have no drift and the equilibrium density is
    // uniform, so ⟨Δz²⟩ = 2 ⟨D∥⟩ t, with Faxén's D∥ (REFERENCES.md) at the nearest-wall distance.
    assert!((d - model).abs() < 5.0 * se, "{d} vs {model}");
    // A uniform section also needs the curvature term of the drift.
    let chi2 = chi_square_flat(&m.radial);
    // Chi-square critical value at p = 0.001, 19 dof: NIST/SEMATECH e-Handbook table.
    assert!(
        chi2 < CHI2_19_P001,
        "section not uniform with hydrodynamics: chi-square {chi2}, {:?}",
        m.radial
    );
    assert!(d < 0.95, "wall corrections must slow axial diffusion: {d}");
}
