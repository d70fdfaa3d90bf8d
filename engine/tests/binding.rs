//! Reversible binding to fixed obstacles: the bound fraction against the
//! model's exact equilibrium, dwell times against exp(−k_off t), the
//! fast-exchange diffusivity (Crank), bit-identity with binding off, and
//! thread independence.
//!
//! Lengths in nm, D0 = 1 nm²/s, so times are in units of b²/D0 for the
//! obstacle radius b = 1 nm. Point-like tracers (a = 0.1 nm) among random
//! non-overlapping spheres at φ = 0.2, binding within δ = 0.2 nm of the
//! excluded surface. Fixed seeds; standard errors from the spread between
//! independent tracers.

mod crowding_support;

use crowding_support::*;
use thicket_analysis::binding::{
    fast_exchange_ratio, ks_test, truncated_exponential_cdf, truncated_exponential_mean,
    uncensored_dwells,
};
use thicket_engine::obstacles::spheres::FixedObstacles;

/// Unbinding and binding rates (1/s) of the fast-exchange scenario.
const K_OFF: f64 = 50.0;
const K_ON: f64 = 250.0;

/// Tracers among spheres, rms step `sigma` nm per axis, with binding when
/// `rates` is given.
fn text(seed: u64, tracers: usize, sigma: f64, rates: Option<(f64, f64)>) -> String {
    let binding = rates.map_or(String::new(), |(on, off)| {
        format!("binding_layer_nm = 0.2\nbinding_rate_per_s = {on}\nunbinding_rate_per_s = {off}\n")
    });
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [16.0, 16.0, 16.0]\n\
         [[species]]\nname = \"sticky\"\nradius_nm = 0.1\ncount = {tracers}\ndiffusivity_m2_per_s = 1e-18\n{binding}\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.2\nradius_nm = 1.0\n\
         [integrator]\ndt_s = {}\nsteps = 1\n",
        sigma * sigma / 2.0
    )
}

/// The model's K = p_on/p_off · V_layer/V_open for a scenario, with its
/// standard error (Monte Carlo share).
fn predicted_k(sc: &thicket_engine::Scenario, obstacles: &FixedObstacles) -> (f64, f64) {
    let s = &sc.species[0];
    let spec = s.binding.expect("binding species");
    let share = obstacles.layer_share(&sc.sim_box, s.radius_nm, spec.layer_nm, 2_000_000, 7);
    let r = spec.stepped_ratio(sc.dt_s);
    (r * share.value, r * share.standard_error)
}

// Exact for the model (REFERENCES.md "Reversible binding"): free tracers stay
// uniform in the open space and binding and release balance at each point of
// the layer, so N_bound/N_free = K = p_on/p_off · V_layer/V_open and the bound
// fraction is K/(1 + K) at any rates; here k_on = 20/s, k_off = 10/s, a
// tenth of the diffusion test's, with a step p_on/p_off = 1.99 rather than 2.
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn bound_fraction_is_k_over_one_plus_k() {
    let sc = scenario(&text(31, 6000, 0.05, Some((20.0, 10.0))));
    let (obstacles, mut stepper, mut state) = prepare(&sc);
    let (k, k_se) = predicted_k(&sc, &obstacles);
    // Equilibrate 5 s: starting all free, the approach is limited by
    // diffusion between obstacles (about 1 s), not by the exchange (0.07 s);
    // then 120 samples 0.05 s apart per tracer.
    let per_s = (1.0 / sc.dt_s).round() as u64;
    stepper.advance(&mut state, 5 * per_s);
    let n = sc.particle_count();
    let mut bound = vec![0.0; n];
    let samples = 120;
    for _ in 0..samples {
        stepper.advance(&mut state, per_s / 20);
        for (b, t) in bound.iter_mut().zip(&state.binding.tethers) {
            *b += t.is_some() as u8 as f64 / samples as f64;
        }
    }
    // Tracers are independent: the spread of their time averages gives the SE.
    let (f, se) = mean_se(&bound);
    let want = k / (1.0 + k);
    let want_se = k_se / (1.0 + k).powi(2);
    let tol = 4.5 * (se * se + want_se * want_se).sqrt();
    println!("bound fraction {f:.4} ± {se:.4}; K/(1+K) = {want:.4} ± {want_se:.4} (K = {k:.4})");
    assert!((f - want).abs() < tol, "{f} ± {se} vs {want} ± {want_se}");
    assert!(tol < 0.03 * want, "too noisy to test: {tol}");
}

// Exact for the model: dwell times are drawn from exp(−k_off t). Completed
// events favour short dwells near the run's end, so only events that began
// at least w = 5/k_off before the end with a dwell ≤ w are kept (all of
// which ended in the run); their law is the exponential truncated at w.
// KS test at the 1 % level (Kolmogorov–Smirnov, Numerical Recipes §14.3)
// and the mean within 4.5 SE of the truncated law's mean (exact identity).
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn dwell_times_are_exponential() {
    let sc = scenario(&text(32, 2000, 0.05, Some((K_ON, K_OFF))));
    let (_, mut stepper, mut state) = prepare(&sc);
    let steps = (1.0 / sc.dt_s).round() as u64;
    let (mut dwell, mut began) = (Vec::new(), Vec::new());
    for _ in 0..20 {
        stepper.advance(&mut state, steps / 20);
        for r in &state.binding.released {
            dwell.push(r.tether.dwell_s);
            began.push(r.tether.since_step as f64 * sc.dt_s);
            // The tracer was held ⌈τ/Δt⌉ steps.
            let held = r.tether.until_step - r.tether.since_step;
            assert_eq!(held, ((r.tether.dwell_s / sc.dt_s).ceil() as u64).max(1));
        }
    }
    let end = state.step as f64 * sc.dt_s;
    let cut = 5.0 / K_OFF;
    let kept = uncensored_dwells(&dwell, &began, end, cut);
    let ks = ks_test(&kept, truncated_exponential_cdf(K_OFF, cut));
    let (m, se) = mean_se(&kept);
    let want = truncated_exponential_mean(K_OFF, cut);
    println!(
        "{} events ({} kept): KS D = {:.4}, p = {:.3}; mean dwell {m:.5} ± {se:.5} s vs {want:.5} s",
        dwell.len(),
        ks.n,
        ks.statistic,
        ks.p_value
    );
    assert!(ks.n > 20_000, "too few events: {}", ks.n);
    assert!(ks.p_value > 0.01, "{ks:?}");
    assert!((m - want).abs() < 4.5 * se, "{m} ± {se} vs {want}");
}

/// Per-tracer long-time diffusivities (nm²/s) from the slope of the
/// time-averaged MSD between lags 1 s and 2 s, over 8 s after 1 s of
/// equilibration (past the obstruction transient, about 1 s here, and many
/// exchange times).
fn diffusivities(rates: Option<(f64, f64)>) -> (Vec<f64>, f64) {
    let sc = scenario(&text(33, 3000, 0.05, rates));
    let (obstacles, mut stepper, mut state) = prepare(&sc);
    let k = rates.map_or(0.0, |_| predicted_k(&sc, &obstacles).0);
    let every = (0.25 / sc.dt_s).round() as u64;
    stepper.advance(&mut state, 4 * every);
    let tracks = record(
        &mut stepper,
        &mut state,
        &sc,
        0..sc.particle_count(),
        every,
        33,
    );
    let per = (0..tracks[0].len())
        .map(|p| (ta_msd(&tracks, p, 8) - ta_msd(&tracks, p, 4)) / (6.0 * 4.0 * 0.25))
        .collect();
    (per, k)
}

// Crank, The Mathematics of Diffusion, 2nd ed., §14.2: with instantaneous
// linear reversible immobilisation D_eff = D_free/(1 + K). Here the exchange
// time 1/(k_off + k_on·V_layer/V_open) ≈ 0.01 s is a hundredth of the time to
// diffuse between obstacles (spacing ≈ 2.8 nm, ≈ 1.3 s), and the slope is
// taken between lags of 1 and 2 s, a hundred exchange times: the
// slow-exchange correction to the slope decays like the exchange time over
// the lag, far below the 4.5 SE tolerance (about 3 %). D_free is measured in
// the same obstacles and from the same starts without binding.
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn fast_exchange_diffusivity_follows_crank() {
    let (free, _) = diffusivities(None);
    let (bound, k) = diffusivities(Some((K_ON, K_OFF)));
    let (d_free, se_free) = mean_se(&free);
    let (d_eff, se_eff) = mean_se(&bound);
    let ratio = d_eff / d_free;
    let se = ratio * ((se_free / d_free).powi(2) + (se_eff / d_eff).powi(2)).sqrt();
    let want = fast_exchange_ratio(k);
    println!("D_free = {d_free:.4} ± {se_free:.4}, D_eff = {d_eff:.4} ± {se_eff:.4} nm²/s; D_eff/D_free = {ratio:.4} ± {se:.4} vs 1/(1+K) = {want:.4} (K = {k:.4})");
    assert!((ratio - want).abs() < 4.5 * se, "{ratio} ± {se} vs {want}");
    assert!(se < 0.01, "too noisy to test: {se}");
}

// With the binding keys absent the step is the plain obstructed step: no
// binding state, no events, and the same state bit for bit as the step
// among obstacles advanced by hand (the CLI's golden hashes check the same
// for every shipped scenario).
#[test]
fn binding_keys_absent_leave_the_run_unchanged() {
    use thicket_engine::step::pipeline::advance_obstructed;
    let plain =
        text(34, 200, 0.05, None).replace("[integrator]\n", "[integrator]\ncontact = \"reject\"\n");
    let sc = scenario(&plain);
    let (obstacles, mut stepper, mut a) = prepare(&sc);
    let mut b = a.clone();
    stepper.advance(&mut a, 500);
    assert!(a.binding.tethers.is_empty() && a.binding.released.is_empty());
    advance_obstructed(
        &mut b,
        stepper.kinetics(),
        &obstacles.grids_for(&sc),
        &sc.sim_box,
        500,
    );
    assert_eq!(a, b);
}

// Results do not depend on the thread count: every binding draw comes from
// the particle's own stream.
#[test]
fn binding_is_thread_independent() {
    let sc = scenario(&text(35, 600, 0.05, Some((K_ON, K_OFF))));
    let run = |threads| {
        with_threads(threads, || {
            let (_, mut stepper, mut state) = prepare(&sc);
            let mut events = Vec::new();
            for _ in 0..4 {
                stepper.advance(&mut state, 250);
                events.extend(state.binding.released.clone());
            }
            (state, events)
        })
    };
    let (a, ea) = run(1);
    let (b, eb) = run(2);
    assert!(!ea.is_empty());
    assert_eq!(a, b);
    assert_eq!(ea, eb);
}

// A run stopped and resumed ends with the same file as an uninterrupted one:
// tracers bound at the stop stay bound for the rest of their dwell (the
// checkpoint holds their tethers), and the bound series and the events match.
#[test]
fn resumed_binding_run_is_exact() {
    let dir = tempfile::tempdir().unwrap();
    let text = text(36, 80, 0.05, Some((K_ON, K_OFF))).replace(
        "steps = 1\n",
        "steps = 400\n[output]\nrecord_every_steps = 20\ncheckpoint_interval_s = 1000\n",
    );
    let sc = scenario(&text);
    let (whole, split) = whole_and_resumed(&sc, dir.path(), 200, 21);
    let a = hdf5::File::open(&whole).unwrap();
    let b = hdf5::File::open(&split).unwrap();
    let ints = |f: &hdf5::File, set: &str| f.dataset(set).unwrap().read_raw::<i64>().unwrap();
    let floats = |f: &hdf5::File, set: &str| f.dataset(set).unwrap().read_raw::<f64>().unwrap();
    let bound = ints(&a, "observables/sticky/bound/value");
    assert_eq!(bound.len(), 21 * 80);
    assert!(bound.contains(&1) && bound.iter().all(|&v| v == 0 || v == 1));
    assert_eq!(bound, ints(&b, "observables/sticky/bound/value"));
    let dwell = floats(&a, "observables/sticky/binding_events/dwell_time");
    assert!(!dwell.is_empty());
    assert_eq!(
        dwell,
        floats(&b, "observables/sticky/binding_events/dwell_time")
    );
    let path = "observables/sticky/binding_events/bound_time";
    assert_eq!(floats(&a, path), floats(&b, path));
    let path = "observables/sticky/binding_events/particle";
    assert_eq!(ints(&a, path), ints(&b, path));
    let pos = |f: &hdf5::File| {
        f.dataset("particles/sticky/position/value")
            .unwrap()
            .read_raw::<f32>()
            .unwrap()
    };
    assert_eq!(pos(&a), pos(&b), "resumed run differs");
}
