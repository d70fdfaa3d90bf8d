//! Mobile hard spheres (crowders): the parallel sweep against the sequential
//! reference, no overlaps ever, equilibrium structure against
//! Carnahan–Starling, and dilute long-time self-diffusion with its
//! Δt-convergence series.
//!
//! Units: sphere diameter σ = 1 nm (radius 0.5 nm), D0 = 1 nm²/s. Every
//! scenario pins `contact = "reject"` (the sweeps and the √Δt series are
//! about move rejection); reflection, the default, is in contact_reflect.rs.

mod crowding_support;

use crowding_support::*;
use thicket_analysis::models;
use thicket_engine::base::rng::standard_normal;
use thicket_engine::obstacles::spheres::FixedObstacles;
use thicket_engine::scenario::media::Sweep;
use thicket_engine::space::neighbors::{blocked_brute_force, min_image_distance2};
use thicket_engine::space::sim_box::reflect;
use thicket_engine::step::crowd::find_overlap_brute_force;
use thicket_engine::step::{Kinetics, State};
use thicket_engine::Scenario;

/// Equal crowders of diameter 1 nm at volume fraction `phi`, rms step `sigma` nm.
fn crowd_text(phi: f64, n: usize, sigma: f64, seed: u64) -> String {
    let edge = (n as f64 * std::f64::consts::PI / 6.0 / phi).cbrt();
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{edge}, {edge}, {edge}]\n\
         [[species]]\nname = \"crowder\"\nrole = \"crowder\"\nradius_nm = 0.5\ncount = {n}\ndiffusivity_m2_per_s = 1e-18\n\
         [integrator]\ncontact = \"reject\"\ndt_s = {}\nsteps = 1\n",
        sigma * sigma / 2.0
    )
}

/// Two crowder species, tracers (which touch crowders but not each other),
/// fixed obstacles, fibres and a walled axis: every kind of contact at once.
fn mixed_text(sigma: f64, seed: u64) -> String {
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [14.0, 13.0, 12.0]\nperiodic = [true, true, false]\n\
         [[species]]\nname = \"small\"\nrole = \"crowder\"\nradius_nm = 0.5\ncount = 500\ndiffusivity_m2_per_s = 1e-18\n\
         [[species]]\nname = \"large\"\nrole = \"crowder\"\nradius_nm = 0.8\ncount = 150\ndiffusivity_m2_per_s = 0.5e-18\n\
         [[species]]\nname = \"probe\"\nradius_nm = 0.3\ncount = 300\ndiffusivity_m2_per_s = 2e-18\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.08\nradius_nm = 1.2\n\
         [fibres]\nradius_nm = 0.3\ncount = 4\n\
         [integrator]\ncontact = \"reject\"\ndt_s = {}\nsteps = 1\n",
        sigma * sigma / 2.0
    )
}

/// Per-particle contact radius and crowder flag.
fn radii_and_roles(sc: &Scenario) -> (Vec<f64>, Vec<bool>) {
    let mut r = Vec::new();
    let mut c = Vec::new();
    for s in &sc.species {
        r.extend(std::iter::repeat_n(s.radius_nm, s.count));
        c.extend(std::iter::repeat_n(s.crowder, s.count));
    }
    (r, c)
}

/// The sequential sweep written out from its definition, with brute-force
/// searches and no neighbour lists: particle after particle in index order,
/// a Gaussian proposal from its own stream (x, y, z in turn), wrapped or
/// reflected, rejected whole if it would overlap an obstacle or any particle
/// it interacts with at that moment.
fn reference_sweep(
    state: &mut State,
    sc: &Scenario,
    kin: &[Kinetics],
    o: &FixedObstacles,
    steps: usize,
) {
    let (radius, crowder) = radii_and_roles(sc);
    let b = &sc.sim_box;
    for _ in 0..steps {
        for k in kin {
            for i in k.range.clone() {
                let mut y = state.positions[i];
                let mut m = state.images[i];
                for ax in 0..3 {
                    y[ax] += k.sigma_nm * standard_normal(&mut state.rngs[i]);
                    if b.periodic[ax] {
                        if y[ax] >= b.edges_nm[ax] {
                            y[ax] -= b.edges_nm[ax];
                            m[ax] += 1;
                        } else if y[ax] < 0.0 {
                            y[ax] += b.edges_nm[ax];
                            m[ax] -= 1;
                        }
                    } else {
                        y[ax] = reflect(y[ax], k.lower_nm[ax], k.upper_nm[ax]);
                    }
                }
                if blocked_brute_force(&o.spheres, &o.fibres, radius[i], b, &y) {
                    continue;
                }
                let clash = (0..state.len()).any(|j| {
                    j != i
                        && (crowder[i] || crowder[j])
                        && min_image_distance2(b, &y, &state.positions[j])
                            < (radius[i] + radius[j]).powi(2)
                });
                if !clash {
                    state.positions[i] = y;
                    state.images[i] = m;
                }
            }
        }
        state.step += 1;
    }
}

// The parallel sweep (propose, then resolve conflicts in index order) gives
// exactly the state of the sequential sweep, on one thread or two, and both
// equal the sequential sweep written out with brute-force searches.
#[test]
fn parallel_sweep_equals_the_sequential_reference() {
    let sc = scenario(&mixed_text(0.06, 7));
    let (o, dynamics, start) = prepare(&sc);
    assert_eq!(dynamics.name(), "crowded");
    let steps = 300;
    let run = |sweep: Sweep, threads: usize| {
        let mut d = dynamics.clone();
        let crowd = d.crowd_mut().unwrap();
        crowd.set_sweep(sweep);
        // Force the parallel path even for this small system.
        crowd.set_parallel_min(0);
        let mut st = start.clone();
        with_threads(threads, || d.advance(&mut st, steps));
        (st, d.crowd().unwrap().stats)
    };
    let (sequential, seq_stats) = run(Sweep::Sequential, 1);
    let (parallel_one, par_stats) = run(Sweep::Parallel, 1);
    let (parallel_two, _) = run(Sweep::Parallel, 2);
    let mut reference = start.clone();
    reference_sweep(&mut reference, &sc, dynamics.kinetics(), &o, steps as usize);
    println!(
        "moves {} accepted {} dependent {} list builds {}",
        par_stats.proposed, par_stats.accepted, par_stats.dependent, par_stats.rebuilds
    );
    // The comparison means something only if contacts happened and conflicts had to be resolved.
    assert!(
        par_stats.accepted < par_stats.proposed * 97 / 100,
        "too few rejections: {par_stats:?}"
    );
    assert!(
        par_stats.dependent > 100,
        "the resolve path was hardly used: {par_stats:?}"
    );
    assert_eq!(seq_stats.accepted, par_stats.accepted);
    assert_eq!(
        parallel_one, sequential,
        "parallel sweep on one thread differs from the sequential sweep"
    );
    assert_eq!(
        parallel_two, sequential,
        "parallel sweep on two threads differs"
    );
    assert_eq!(
        reference, sequential,
        "the engine differs from the brute-force sequential sweep"
    );
}

// `integrator.sweep = "sequential"` selects the reference sweep, and the
// default parallel sweep gives the same trajectory for a system large enough
// to use threads.
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn sweep_key_selects_the_reference_and_results_agree() {
    let text = crowd_text(0.25, 6000, 0.03, 3);
    let a = scenario(&text);
    let b = scenario(&text.replace("steps = 1\n", "steps = 1\nsweep = \"sequential\"\n"));
    assert_eq!(a.sweep, Sweep::Parallel);
    assert_eq!(b.sweep, Sweep::Sequential);
    let (_, mut da, mut sa) = prepare(&a);
    let (_, mut db, mut sb) = prepare(&b);
    assert_eq!(sa, sb, "same placement");
    with_threads(2, || da.advance(&mut sa, 100));
    db.advance(&mut sb, 100);
    assert_eq!(sa, sb);
}

// Never an overlap: after many large steps in the mixed system the state is
// checked pair by pair (brute force, relative tolerance 1e-12), against
// obstacles and fibres, and against the walls.
#[test]
fn never_an_overlap_after_many_steps() {
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
    for _ in 0..10 {
        with_threads(2, || dynamics.advance(&mut state, 200));
        check(&state);
    }
    let stats = dynamics.crowd().unwrap().stats;
    assert!(
        stats.accepted < stats.proposed * 9 / 10,
        "the test needs many contacts: {stats:?}"
    );
}

/// Contact value g(σ⁺) (mean, SE over 5 blocks) of equal crowders at `phi`
/// (the library's measurement, shared with `thicket validate`).
fn contact_value(
    phi: f64,
    n: usize,
    sigma: f64,
    equilibrate: u64,
    configs: usize,
    gap: u64,
) -> (f64, f64) {
    let sc = scenario(&crowd_text(phi, n, sigma, 41));
    with_threads(2, || {
        thicket_analysis::direct::contact_value(&sc, equilibrate, configs, gap).expect("placement")
    })
}

// Equilibrium structure: any correct hard-sphere move scheme reproduces the
// Carnahan–Starling (1969) contact value g(σ⁺) = (1 − φ/2)/(1 − φ)³
// (REFERENCES.md), within 3 %. Move rejection samples the equilibrium exactly
// at any Δt (a symmetric proposal, Metropolis acceptance), so a step of
// 0.08σ is used to decorrelate configurations quickly.
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn contact_value_matches_carnahan_starling() {
    // φ = 0.45 starts on a lattice (above LATTICE_START_FRACTION): 5000 steps melt it first.
    for (phi, equilibrate) in [(0.2, 600), (0.3, 600), (0.45, 5000)] {
        let (g, se) = contact_value(phi, 5000, 0.08, equilibrate, 250, 20);
        let cs = models::carnahan_starling_contact(phi).unwrap();
        println!("φ = {phi}: g(σ⁺) = {g:.4} ± {se:.4}; Carnahan–Starling {cs:.4}");
        assert!(
            (g / cs - 1.0).abs() < 0.03,
            "φ = {phi}: g(σ⁺) = {g} ± {se} vs {cs}"
        );
        assert!(
            se < 0.01 * cs,
            "φ = {phi}: standard error {se} too large to test 3 %"
        );
    }
}

/// Long-time self-diffusion D_L/D0 (mean, SE) at φ = 0.05 with rms step
/// `sigma`: 5000 crowders, records every 0.25 s for `duration` s, slope of
/// the time-averaged MSD over lags 0.75 s … 1.5 s (past the collision time
/// σ²/D0, where a pilot showed the slope had settled).
fn dilute_self_diffusion(sigma: f64, duration: f64) -> (f64, f64) {
    let records = (duration / 0.25) as usize + 1;
    with_threads(2, || {
        long_time_diffusivity(
            |s| crowd_text(0.05, 5000, sigma, s),
            &[51],
            |sc| 0..sc.particle_count(),
            0.25,
            records,
            3,
            6,
        )
    })
}

// Dilute mobile hard spheres: D_L/D0 = 1 − 2φ + O(φ²) (Hanna, Hess & Klein
// 1982; Ackerson & Fleishman 1982; REFERENCES.md, from memory), within 0.02 at
// φ = 0.05, at the smallest Δt of a series σ = 0.02, 0.06, 0.18 (in σ_hs)
// whose rejection bias shrinks like √Δt (REFERENCES.md "Numerics").
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn dilute_self_diffusion_and_dt_series() {
    let (fine, fine_se) = dilute_self_diffusion(0.02, 15.0);
    let (mid, mid_se) = dilute_self_diffusion(0.06, 15.0);
    let (coarse, coarse_se) = dilute_self_diffusion(0.18, 15.0);
    let dilute = models::hard_sphere_self_diffusion_dilute(0.05).unwrap();
    println!(
        "φ = 0.05: D_L/D0 at σ = 0.02: {fine:.4} ± {fine_se:.4}; 0.06: {mid:.4} ± {mid_se:.4}; 0.18: {coarse:.4} ± {coarse_se:.4}; \
         1 − 2φ = {dilute:.4}; Brady {:.4}",
        models::brady_long_time_self_diffusion(0.05).unwrap()
    );
    assert!(
        (fine - dilute).abs() < 0.02,
        "D_L/D0 = {fine} ± {fine_se} vs 1 − 2φ = {dilute}"
    );
    assert!(
        fine_se < 0.005,
        "standard error {fine_se} too large to test 0.02"
    );
    let sd = |a: f64, b: f64| (a * a + b * b).sqrt();
    assert!(
        fine - mid > 2.0 * sd(fine_se, mid_se),
        "bias does not grow with Δt: {fine} vs {mid}"
    );
    assert!(
        mid - coarse > 2.0 * sd(mid_se, coarse_se),
        "bias does not grow with Δt: {mid} vs {coarse}"
    );
    // Linear in σ = √(2 D0 Δt): the two coarse points predict the fine one.
    let predicted = mid + (mid - coarse) / 0.12 * 0.04;
    assert!(
        (predicted - fine).abs() < 4.0 * sd(sd(mid_se * 4.0 / 3.0, coarse_se / 3.0), fine_se),
        "√Δt extrapolation {predicted} vs {fine}"
    );
}

// A crowded run interrupted and resumed ends with the same trajectory as an
// uninterrupted one: neighbour lists are rebuilt on resume, and the result
// depends only on the particles' streams.
#[test]
fn crowded_resume_is_exact() {
    let dir = tempfile::tempdir().unwrap();
    let text = mixed_text(0.05, 12).replace(
        "steps = 1\n",
        "steps = 300\n[output]\nrecord_every_steps = 30\ncheckpoint_interval_s = 1000\n",
    );
    let sc = scenario(&text);
    let (whole, split) = whole_and_resumed(&sc, dir.path(), 120, 11);
    for name in ["small", "large", "probe"] {
        let read = |f: &std::path::Path| {
            hdf5::File::open(f)
                .unwrap()
                .dataset(&format!("particles/{name}/position/value"))
                .unwrap()
                .read_raw::<f32>()
                .unwrap()
        };
        assert_eq!(read(&whole), read(&split), "species {name}");
    }
}
