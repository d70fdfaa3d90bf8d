//! Reflecting contacts (`[integrator] contact = "reflect"`, contact.rs):
//! never an overlap, the equilibrium unchanged (uniform open-space density,
//! Carnahan–Starling contact value), and Δt series whose bias shrinks like
//! Δt, against Torquato's estimate, the Maxwell bound and the dilute limit.
//!
//! Units: D0 = 1 nm²/s; obstacle radius 1 nm; mobile spheres of radius 0.5 nm.

mod crowding_support;

use crowding_support::*;
use thicket_analysis::models;
use thicket_engine::space::neighbors::{blocked_brute_force, min_image_distance2};
use thicket_engine::step::crowd::find_overlap_brute_force;
use thicket_engine::step::State;
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

/// A Δt series at steps h, h/2, h/4: the values (mean, SE), the measured
/// order p of the bias in the step (bias ∝ h^p, so Δt^(p/2)) with its
/// standard error (first-order propagation), and the value extrapolated to
/// Δt → 0 by the leading order p = 2 (Richardson: D(h/4) + (D(h/4) − D(h/2))/3).
struct Series {
    values: Vec<(f64, f64)>,
    order: (f64, f64),
    extrapolated: (f64, f64),
}

fn series(values: Vec<Vec<f64>>) -> Series {
    let (d12, s12) = paired(&values[0], &values[1]);
    let (d23, s23) = paired(&values[1], &values[2]);
    let p = (d12 / d23).log2();
    let sp = ((s12 / d12).powi(2) + (s23 / d23).powi(2)).sqrt() / std::f64::consts::LN_2;
    let (fine, fine_se) = mean_se(&values[2]);
    Series {
        values: values.iter().map(|v| mean_se(v)).collect(),
        order: (p, sp),
        extrapolated: (
            fine + d23 / 3.0,
            (fine_se * fine_se + s23 * s23 / 9.0).sqrt(),
        ),
    }
}

// Δt series for point tracers among random non-overlapping spheres at
// φ = 0.3 with reflecting moves, steps h of 0.32, 0.16, 0.08 obstacle radii.
// Longer runs (see the contact_series example) measure a bias ∝ h² ∝ Δt;
// this test's statistics (SE ≈ 0.4 %) resolve the bias only at the largest
// step, so it asserts: the bias at h = 0.32 is visible (beyond 4 SE), the
// two finer steps agree within 4 SE (bias under ~1 % from h = 0.16 down),
// and the value extrapolated to Δt → 0 with the leading order Δt sits within
// 2 % of Torquato's three-point estimate 0.859 (REFERENCES.md, from memory)
// and below the Maxwell–Hashin–Shtrikman upper bound 2/(2 + φ)
// (REFERENCES.md) within 4 SE. The measured order is printed.
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn fixed_spheres_dt_series() {
    let hs = [0.32, 0.16, 0.08];
    let values = hs
        .iter()
        .map(|&h| {
            per_particle(
                |s| spheres_text(0.3, h, 1500, 30.0, s),
                &[11, 12, 13],
                0.5,
                30.0,
                (2, 4),
            )
        })
        .collect();
    let s = series(values);
    let (p, sp) = s.order;
    let (zero, zero_se) = s.extrapolated;
    println!(
        "fixed φ = 0.3, reflect: D/D0 at h = {hs:?}: {:?}; order in h p = {p:.2} ± {sp:.2}; Δt → 0: {zero:.4} ± {zero_se:.4}",
        s.values
    );
    let sd = |a: f64, b: f64| (a * a + b * b).sqrt();
    let [(coarse, coarse_se), (mid, mid_se), (fine, fine_se)] =
        [s.values[0], s.values[1], s.values[2]];
    assert!(
        fine - coarse > 4.0 * sd(fine_se, coarse_se),
        "no bias seen at h = 0.32: {coarse} vs {fine}"
    );
    assert!(
        (fine - mid).abs() < 4.0 * sd(fine_se, mid_se),
        "h = 0.16 {mid} vs h = 0.08 {fine}"
    );
    let torquato = models::torquato_tracer(0.3).unwrap();
    assert!(
        (zero / torquato - 1.0).abs() < 0.02,
        "{zero} vs Torquato {torquato}"
    );
    let maxwell = models::maxwell_tracer(0.3).unwrap();
    assert!(
        zero < maxwell + 4.0 * zero_se,
        "{zero} ± {zero_se} above Maxwell {maxwell}"
    );
}

// Δt series for mobile hard spheres at φ = 0.3 with the event-driven step,
// steps of 0.48 and 0.24 radii (large, so that this test's statistics
// resolve the bias): the coarse step is slower beyond 4 SE, and the value at
// 0.24 lies within 3 % of the leading-order (Δt) extrapolation from the
// pair. Longer runs (the contact_series example) give D_L/D0 = 0.4457,
// 0.4755, 0.4813, 0.4818 at 0.32, 0.16, 0.08, 0.04 radii. No published D_L
// without hydrodynamic interactions is at hand for φ = 0.3; the dilute test
// below is the outside check.
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn mobile_spheres_dt_series() {
    let hs = [0.48, 0.24];
    let v: Vec<Vec<f64>> = hs
        .iter()
        .map(|&h| {
            per_particle(
                |s| crowd_text(0.3, 1000, 0.5 * h, s),
                &[51, 52],
                0.5,
                8.0,
                (2, 4),
            )
        })
        .collect();
    let (coarse, coarse_se) = mean_se(&v[0]);
    let (fine, fine_se) = mean_se(&v[1]);
    let zero = fine + (fine - coarse) / 3.0;
    println!("mobile φ = 0.3, reflect: D_L/D0 at h = {hs:?}: {coarse:.4} ± {coarse_se:.4}, {fine:.4} ± {fine_se:.4}; Δt → 0 (order Δt): {zero:.4}");
    let sd = (coarse_se * coarse_se + fine_se * fine_se).sqrt();
    assert!(
        fine - coarse > 4.0 * sd,
        "no bias seen at h = 0.48: {coarse} vs {fine}"
    );
    assert!(
        (zero - fine) / zero < 0.03,
        "bias at h = 0.24: {fine} vs {zero}"
    );
}

// Dilute mobile hard spheres: D_L/D0 = 1 − 2φ + O(φ²) (Hanna, Hess & Klein
// 1982; Ackerson & Fleishman 1982; REFERENCES.md, from memory), within 0.02
// at φ = 0.05, here at the large step 0.18 σ (0.36 radii), the coarsest of
// the rejection test's series (whose bias there is several percent).
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn dilute_self_diffusion_at_a_large_step() {
    let v = per_particle(
        |s| crowd_text(0.05, 5000, 0.18, s),
        &[51],
        0.25,
        15.0,
        (3, 6),
    );
    // Lags 3..=6 records of 0.25 s as the rejection test (past σ²/D0).
    let (d, se) = mean_se(&v);
    let dilute = models::hard_sphere_self_diffusion_dilute(0.05).unwrap();
    println!("φ = 0.05, reflect, step 0.18 σ: D_L/D0 = {d:.4} ± {se:.4}; 1 − 2φ = {dilute:.4}");
    assert!((d - dilute).abs() < 0.02, "{d} ± {se} vs {dilute}");
    assert!(se < 0.005, "standard error {se} too large to test 0.02");
}

// A reflecting crowded run interrupted and resumed ends with the same
// trajectory as an uninterrupted one.
#[test]
fn reflecting_resume_is_exact() {
    let dir = tempfile::tempdir().unwrap();
    let text = mixed_text(0.05, 12).replace(
        "steps = 1\ncontact = \"reflect\"\n",
        "steps = 300\ncontact = \"reflect\"\n[output]\nrecord_every_steps = 30\ncheckpoint_interval_s = 1000\n",
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

// Bad input: an unknown rule, or reflection with a [geometry], is refused
// naming the key, the value and what is allowed; the default is reflection
// without a [geometry] and rejection with one (and `check` says so).
#[test]
fn contact_key_is_validated() {
    let text = spheres_text(0.1, 0.1, 10, 10.0, 1);
    let bad = text.replace("contact = \"reflect\"", "contact = \"bounce\"");
    let e = Scenario::from_text(&bad, std::path::Path::new("c.toml"), &[])
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("integrator.contact") && e.contains("bounce") && e.contains("reflect"),
        "{e}"
    );
    let sc = scenario(&text.replace("contact = \"reflect\"", "contact = \"reject\""));
    assert_eq!(
        sc.contact,
        thicket_engine::space::collisions::ContactRule::Reject
    );
    let sc = scenario(&text);
    assert_eq!(
        sc.contact,
        thicket_engine::space::collisions::ContactRule::Reflect
    );
    // The default: reflection without a [geometry], rejection with one.
    let sc = scenario(&text.replace("contact = \"reflect\"\n", ""));
    assert_eq!(
        (sc.contact, sc.contact_given),
        (
            thicket_engine::space::collisions::ContactRule::Reflect,
            false
        )
    );
    assert!(sc.resolved_toml.contains("contact = \"reflect\""));
    let slit = "seed = 3\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [50.0, 50.0, 20.0]\n\
                [[species]]\nname = \"tracer\"\nradius_nm = 1.0\ncount = 10\n\
                [integrator]\ndt_s = 1e-10\nsteps = 100\ncontact = \"reflect\"\n[geometry]\nkind = \"slit\"\n";
    let e = Scenario::from_text(slit, std::path::Path::new("s.toml"), &[])
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("integrator.contact") && e.contains("geometry"),
        "{e}"
    );
    let sc = scenario(&slit.replace("contact = \"reflect\"\n", ""));
    assert_eq!(
        sc.contact,
        thicket_engine::space::collisions::ContactRule::Reject
    );
    assert!(sc
        .contact_description()
        .is_some_and(|d| d.contains("not available")));
}

// The contact-bias rule of thumb (Scenario::contact_bias_estimate, common
// practice calibrated on this project's φ = 0.3 series) against the measured
// biases it was built from, within its stated factor of 2: rejection among
// fixed spheres at h = 0.04 (measured 2.6 %), reflection there at h = 0.32
// (2.3 %), mobile rejection at h = 0.04 (17 %) and reflection at h = 0.16
// (1.4 %); and `check` warns above 1 % only where the bias is that large.
#[test]
fn contact_bias_estimate_brackets_the_measured_biases() {
    let within = |est: f64, measured: f64| est > measured / 2.0 && est < measured * 2.0;
    let reject = |t: String| t.replace("contact = \"reflect\"", "contact = \"reject\"");
    let bias = |t: &str| {
        let sc = scenario(t);
        (
            sc.contact_bias_estimate(&sc.species[0]).unwrap(),
            sc.warnings(),
        )
    };
    let (b, w) = bias(&reject(spheres_text(0.3, 0.04, 10, 30.0, 1)));
    assert!(within(b, 0.026) && !w.is_empty(), "{b} {w:?}");
    let (b, _) = bias(&spheres_text(0.3, 0.32, 10, 30.0, 1));
    assert!(within(b, 0.023), "{b}");
    let (b, w) = bias(&spheres_text(0.3, 0.05, 10, 30.0, 1));
    assert!(
        b < 0.005 && w.iter().all(|w| !w.contains("bias its diffusivity")),
        "{b} {w:?}"
    );
    let (b, _) = bias(&reject(crowd_text(0.3, 1000, 0.5 * 0.04, 1)));
    assert!(within(b, 0.17), "{b}");
    let (b, w) = bias(&crowd_text(0.3, 1000, 0.5 * 0.16, 1));
    assert!(within(b, 0.014) && !w.is_empty(), "{b} {w:?}");
}
