//! Reflecting contacts (`[integrator] contact = "reflect"`, contact.rs):
//! never an overlap, the equilibrium unchanged (uniform open-space density,
//! Carnahan–Starling contact value), and Δt series whose bias shrinks like
//! Δt, against Torquato's estimate, the Maxwell bound and the dilute limit.
//!
//! Units: D0 = 1 nm²/s; obstacle radius 1 nm; mobile spheres of radius 0.5 nm.

mod crowding_support;

use crowding_support::*;
use thicket_analysis::models;
use thicket_engine::crowders::find_overlap_brute_force;
use thicket_engine::integrate::State;
use thicket_engine::neighbors::{blocked_brute_force, min_image_distance2};
use thicket_engine::Scenario;

/// Two crowder species (unequal D0), tracers (which touch crowders but not
/// each other), fixed obstacles, fibres and a walled axis, with reflecting
/// contacts: every kind of contact at once.
fn mixed_text(sigma: f64, seed: u64) -> String {
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [14.0, 13.0, 12.0]\nperiodic = [true, true, false]\n\
         [[species]]\nname = \"small\"\nrole = \"crowder\"\nradius_nm = 0.5\ncount = 500\ndiffusivity_m2_per_s = 1e-18\n\
         [[species]]\nname = \"large\"\nrole = \"crowder\"\nradius_nm = 0.8\ncount = 150\ndiffusivity_m2_per_s = 0.5e-18\n\
         [[species]]\nname = \"probe\"\nradius_nm = 0.3\ncount = 300\ndiffusivity_m2_per_s = 2e-18\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.08\nradius_nm = 1.2\n\
         [fibres]\nradius_nm = 0.3\ncount = 4\n\
         [integrator]\ndt_s = {}\nsteps = 1\ncontact = \"reflect\"\n",
        sigma * sigma / 2.0
    )
}

/// Point-like tracers (a = 1e-4 nm) among random non-overlapping spheres of
/// radius 1 nm at volume fraction `phi`, rms step `sigma` nm, box `edge` nm.
fn spheres_text(phi: f64, sigma: f64, tracers: usize, edge: f64, seed: u64) -> String {
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n\
         [[species]]\nname = \"point\"\nradius_nm = 0.0001\ncount = {tracers}\ndiffusivity_m2_per_s = 1e-18\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = {phi}\nradius_nm = 1.0\n\
         [integrator]\ndt_s = {}\nsteps = 1\ncontact = \"reflect\"\n",
        sigma * sigma / 2.0
    )
}

/// Equal mobile hard spheres of radius 0.5 nm at `phi`, rms step `sigma` nm.
fn crowd_text(phi: f64, n: usize, sigma: f64, seed: u64) -> String {
    let edge = (n as f64 * std::f64::consts::PI / 6.0 / phi).cbrt();
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n\
         [[species]]\nname = \"crowder\"\nrole = \"crowder\"\nradius_nm = 0.5\ncount = {n}\ndiffusivity_m2_per_s = 1e-18\n\
         [integrator]\ndt_s = {}\nsteps = 1\ncontact = \"reflect\"\n",
        sigma * sigma / 2.0
    )
}

fn radii_and_roles(sc: &Scenario) -> (Vec<f64>, Vec<bool>) {
    let mut r = Vec::new();
    let mut c = Vec::new();
    for s in &sc.species {
        r.extend(std::iter::repeat_n(s.radius_nm, s.count));
        c.extend(std::iter::repeat_n(s.crowder, s.count));
    }
    (r, c)
}

// Never an overlap: after many large steps of the event-driven step in the
// mixed system the state is checked pair by pair (brute force, relative
// tolerance 1e-12), against obstacles and fibres, and against the walls.
#[test]
fn reflecting_crowd_never_overlaps() {
    let sc = scenario(&mixed_text(0.12, 9));
    let (o, mut dynamics, mut state) = prepare(&sc);
    let (radius, crowder) = radii_and_roles(&sc);
    let kin = dynamics.kinetics().to_vec();
    let check = |state: &State| {
        assert_eq!(
            find_overlap_brute_force(&state.positions, &radius, &crowder, &sc.sim_box, 1e-12),
            None,
            "overlap at step {}",
            state.step
        );
        for k in &kin {
            for i in k.range.clone() {
                let p = state.positions[i];
                assert!(
                    !blocked_brute_force(
                        &o.spheres,
                        &o.fibres,
                        radius[i] * (1.0 - 1e-12),
                        &sc.sim_box,
                        &p
                    ),
                    "particle {i} inside an obstacle"
                );
                assert!(
                    p[2] >= k.lower_nm[2] && p[2] <= k.upper_nm[2],
                    "particle {i} through a wall"
                );
            }
        }
    };
    check(&state);
    for _ in 0..5 {
        with_threads(2, || dynamics.advance(&mut state, 100));
        check(&state);
    }
    let stats = dynamics.crowd().unwrap().stats;
    assert!(
        stats.accepted < stats.proposed * 9 / 10,
        "the test needs many contacts: {stats:?}"
    );
}

// The event step depends only on the particles' streams: split into blocks,
// on one thread or two, the trajectory is the same.
#[test]
fn reflecting_crowd_is_block_and_thread_independent() {
    let sc = scenario(&mixed_text(0.1, 4));
    let (_, mut one, mut a) = prepare(&sc);
    let (_, mut two, mut b) = prepare(&sc);
    with_threads(1, || one.advance(&mut a, 60));
    with_threads(2, || {
        for _ in 0..4 {
            two.advance(&mut b, 15);
        }
    });
    assert_eq!(a, b);
}

// Tracers among fixed spheres and fibres behind walls never end inside an
// obstacle or beyond a wall with reflecting moves, at a step of 0.3 radii.
#[test]
fn reflecting_tracers_never_enter_obstacles() {
    let text = spheres_text(0.2, 0.3, 400, 12.0, 3)
        .replace(
            "edges_nm = [12.0, 12.0, 12.0]\n",
            "edges_nm = [12.0, 12.0, 12.0]\nperiodic = [true, false, true]\n",
        )
        .replace(
            "[integrator]",
            "[fibres]\nradius_nm = 0.3\ncount = 6\n[integrator]",
        );
    let sc = scenario(&text);
    let (o, mut dynamics, mut state) = prepare(&sc);
    let kin = dynamics.kinetics().to_vec();
    for _ in 0..5 {
        with_threads(2, || dynamics.advance(&mut state, 200));
        for i in kin[0].range.clone() {
            let p = state.positions[i];
            assert!(
                !blocked_brute_force(&o.spheres, &o.fibres, 1e-4 * (1.0 - 1e-9), &sc.sim_box, &p),
                "tracer {i} inside an obstacle at {p:?}"
            );
            assert!(p[1] >= kin[0].lower_nm[1] && p[1] <= kin[0].upper_nm[1]);
        }
    }
}

// Equilibrium near a surface: the reflecting step keeps the uniform density
// over the open space at any Δt (billiard maps preserve volume, Liouville's
// theorem), so the density of point tracers in a thin shell at contact with
// the obstacles equals that in a shell farther out. Dilute spheres (φ = 0.02)
// so that shells of different spheres rarely meet; a large step (0.3 radii),
// where any contact bias would be largest. Tolerance: 5 standard errors of
// the count ratio (Poisson counts, correlated samples counted conservatively
// as one tracer's count per sample spacing of 200 steps ≫ the shell crossing time).
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn reflecting_keeps_the_open_density_uniform_at_contact() {
    let sc = scenario(&spheres_text(0.02, 0.3, 40000, 30.0, 8));
    let (o, mut dynamics, mut state) = prepare(&sc);
    let b = sc.sim_box;
    let (inner, outer) = ((1.0001, 1.1), (1.4, 1.5));
    let shell = |r: (f64, f64)| r.1 * r.1 * r.1 - r.0 * r.0 * r.0;
    let (mut n_in, mut n_out) = (0.0, 0.0);
    with_threads(2, || dynamics.advance(&mut state, 500));
    for _ in 0..40 {
        with_threads(2, || dynamics.advance(&mut state, 200));
        for p in &state.positions {
            for c in &o.spheres.centres_nm {
                let r = min_image_distance2(&b, p, c).sqrt();
                if r >= inner.0 && r < inner.1 {
                    n_in += 1.0;
                } else if r >= outer.0 && r < outer.1 {
                    n_out += 1.0;
                }
            }
        }
    }
    let ratio = (n_in / shell(inner)) / (n_out / shell(outer));
    let se = ratio * (1.0 / n_in + 1.0 / n_out).sqrt();
    println!("density at contact / farther out = {ratio:.4} ± {se:.4} ({n_in} and {n_out} counts)");
    assert!(n_in > 2000.0, "too few counts: {n_in}");
    assert!((ratio - 1.0).abs() < 5.0 * se, "{ratio} ± {se}");
}

// Equilibrium structure of mobile spheres: the event-driven step samples the
// hard-sphere equilibrium at any Δt (Hamiltonian hard-sphere flow with
// Maxwellian velocities redrawn each step), so the contact value matches
// Carnahan–Starling (1969) g(σ⁺) = (1 − φ/2)/(1 − φ)³ (REFERENCES.md) within
// 3 %, as the rejection test does, here at a large step of 0.16 radii.
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn reflecting_contact_value_matches_carnahan_starling() {
    let phi = 0.3;
    let sc = scenario(&crowd_text(phi, 3000, 0.08, 41));
    let (g, se) = with_threads(2, || {
        thicket_analysis::direct::contact_value(&sc, 300, 200, 10).expect("placement")
    });
    let cs = models::carnahan_starling_contact(phi).unwrap();
    println!("φ = {phi}: g(σ⁺) = {g:.4} ± {se:.4}; Carnahan–Starling {cs:.4}");
    assert!((g / cs - 1.0).abs() < 0.03, "g(σ⁺) = {g} ± {se} vs {cs}");
    assert!(se < 0.01 * cs, "standard error {se} too large to test 3 %");
}
