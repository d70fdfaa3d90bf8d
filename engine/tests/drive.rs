//! Forces and flows measured from runs against exact results: Poiseuille
//! transport of point-like tracers (exact section averages), the convective
//! hindrance of Dechadilok & Deen (2006) with wall hydrodynamics,
//! Taylor–Aris dispersion (Taylor 1953, Aris 1956), sedimentation
//! equilibrium (Boltzmann), the Einstein mobility under a constant force
//! and an electric field, and uniform shear (the exact variance of the
//! discrete walk).

mod confinement_support;

use confinement_support::*;
use std::path::Path;
use thicket_analysis::models::{dechadilok_deen_kc, lag_free_kc_cylinder, lag_free_kc_slit};
use thicket_engine::base::rng::ParticleRng;
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

/// Pore radius, nm.
const R: f64 = 10.0;
/// Tolerance in standard errors for statistical checks (4–5 SE, project rule).
const K_SE: f64 = 5.0;

fn text_scenario(text: &str) -> Scenario {
    Scenario::from_text(text, Path::new("test.toml"), &[])
        .unwrap_or_else(|e| panic!("test scenario is valid: {e}"))
}

fn free_stepper(s: &Scenario) -> Stepper {
    Stepper::new(s, &thicket_engine::obstacles::FixedObstacles::default())
}

/// A cylinder of radius R along z with Poiseuille flow of mean `v` nm/s.
fn tube(a: f64, sigma: f64, count: usize, steps: u64, v_nm_per_s: f64, hydro: bool) -> Scenario {
    scenario(
        41,
        [2.0 * R, 2.0 * R, 40.0],
        a,
        count,
        sigma,
        steps,
        &format!(
            "kind = \"cylinder\"\npore_radius_nm = {R}\nwall_hydrodynamics = {hydro}\n\
             [flow]\nkind = \"poiseuille\"\nmean_velocity_m_per_s = {:e}",
            v_nm_per_s * 1e-9
        ),
    )
}

/// Per-particle mean axial velocity over `steps` steps, nm/s (mean, SE).
fn mean_axial_velocity(s: &Scenario, steps: u64) -> (f64, f64) {
    let mut c = free_stepper(s);
    let mut state = c.initial_state(s).unwrap();
    let before = state.clone();
    on_threads(2, || advance(&mut c, &mut state, steps, 1000));
    let t = steps as f64 * s.dt_s;
    let v: Vec<f64> = (0..state.len())
        .map(|i| (state.unwrapped(i, &s.sim_box)[2] - before.unwrapped(i, &s.sim_box)[2]) / t)
        .collect();
    mean_se(&v)
}

#[test]
fn point_tracers_in_poiseuille_flow_move_at_the_mean_over_their_section() {
    // Exact for tracers without hydrodynamic lag (REFERENCES.md): ⟨u⟩ = V(2 − Φ), Φ = (1 − λ)².
    let v = 5e7; // V R/D0 = 5
    for lambda in [0.01, 0.3] {
        let a = lambda * R;
        let sigma = 0.02 * (R - a);
        let steps = (2.0 * R * R / (0.5 * sigma * sigma)) as u64; // 2 R²/D0
        let s = tube(a, sigma, 3000, steps, v, false);
        let (u, se) = mean_axial_velocity(&s, steps);
        let expected = v * lag_free_kc_cylinder(lambda).unwrap();
        println!(
            "λ = {lambda}: ⟨U⟩/V = {:.5} ± {:.5}, exact {:.5}",
            u / v,
            se / v,
            expected / v
        );
        assert!(
            (u - expected).abs() < K_SE * se,
            "λ = {lambda}: {u} vs {expected} ± {se}"
        );
    }
}

#[test]
fn particles_in_poiseuille_flow_with_wall_hydrodynamics_lag_as_dechadilok_deen_say() {
    // Dechadilok & Deen (2006): section-averaged U/V = W/Φ = K_c (REFERENCES.md, from memory); issue target 3 %.
    let v = 5e7;
    for lambda in [0.2, 0.4] {
        let a = lambda * R;
        let sigma = 0.02 * (R - a);
        let steps = (1.0 * R * R / (0.5 * sigma * sigma)) as u64;
        let s = tube(a, sigma, 2000, steps, v, true);
        let (u, se) = mean_axial_velocity(&s, steps);
        let kc = dechadilok_deen_kc(lambda).unwrap();
        let lag_free = lag_free_kc_cylinder(lambda).unwrap();
        println!(
            "λ = {lambda}: ⟨U⟩/V = {:.5} ± {:.5}, Dechadilok–Deen K_c {:.5} (without lag {:.5})",
            u / v,
            se / v,
            kc,
            lag_free
        );
        assert!(
            (u / v - kc).abs() < 0.03 * kc,
            "λ = {lambda}: {} vs K_c {kc}",
            u / v
        );
        assert!((u / v - kc).abs() < 0.03 * kc + K_SE * se / v);
        // The lag is resolved: the lag-free value is many standard errors away.
        assert!((u / v - lag_free).abs() > 10.0 * se / v);
    }
}

#[test]
fn taylor_aris_dispersion_of_point_tracers_in_a_tube() {
    // Taylor (1953), Aris (1956): D_eff = D0 (1 + Pe²/48), Pe = U R/D0 (exact asymptotic).
    // Centres sample r ≤ b = R − a, where u − ⟨u⟩ is the Poiseuille deviation of a
    // tube of radius b and mean U' = V b²/R²; a = R/1000 makes b ≈ R.
    let a = 1e-3 * R;
    let b = R - a;
    let pe_target = 10.0;
    let v = pe_target * D0_NM2_PER_S / R;
    let sigma = 0.03 * R;
    let tau_steps = (R * R / (0.5 * sigma * sigma)) as u64; // R²/D0 in steps
    let records = 40;
    let s = tube(a, sigma, 2000, tau_steps * records, v, false);
    let mut c = free_stepper(&s);
    let mut state = c.initial_state(&s).unwrap();
    let n = state.len();
    let mut z = vec![Vec::with_capacity(records as usize + 1); n];
    on_threads(2, || {
        for r in 0..=records {
            if r > 0 {
                advance(&mut c, &mut state, tau_steps, 2000);
            }
            for (i, zi) in z.iter_mut().enumerate() {
                zi.push(state.unwrapped(i, &s.sim_box)[2]);
            }
        }
    });
    let tau = tau_steps as f64 * s.dt_s;
    let mean_u = v * lag_free_kc_cylinder(a / R).unwrap();
    // Per particle: (⟨(Δz − ⟨u⟩τ)²⟩ at 5τ − the same at τ)/(2·4τ): the constant offset cancels.
    let msd = |zi: &Vec<f64>, lag: usize| {
        let m = zi.len() - lag;
        (0..m)
            .map(|k| (zi[k + lag] - zi[k] - mean_u * lag as f64 * tau).powi(2))
            .sum::<f64>()
            / m as f64
    };
    let d: Vec<f64> = z
        .iter()
        .map(|zi| (msd(zi, 5) - msd(zi, 1)) / (8.0 * tau) / D0_NM2_PER_S)
        .collect();
    let (d, se) = mean_se(&d);
    let u_prime = v * b * b / (R * R);
    let pe = u_prime * b / D0_NM2_PER_S;
    let expected = 1.0 + pe * pe / 48.0;
    println!("Taylor–Aris: D_eff/D0 = {d:.4} ± {se:.4}, exact {expected:.4} (Pe = {pe:.3})");
    assert!((d - expected).abs() < 0.05 * expected, "{d} vs {expected}");
    assert!(
        (d - expected).abs() < K_SE * se + 0.01 * expected,
        "{d} ± {se} vs {expected}"
    );
}

#[test]
fn slit_tracers_move_at_the_mean_of_plane_poiseuille_flow_over_their_section() {
    // Exact for tracers without lag: (3/2)V(1 − (1 − λ)²/3), λ = a/h (REFERENCES.md).
    let (w, a) = (20.0, 2.0);
    let v = 5e7;
    let sigma = 0.02 * (w - 2.0 * a);
    let steps = (1.0 * w * w / (0.5 * sigma * sigma)) as u64;
    let text = format!(
        "seed = 5\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [40.0, 40.0, {w}]\n\
         [[species]]\nname = \"tracer\"\nradius_nm = {a}\ncount = 3000\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         [integrator]\ndt_s = {:e}\nsteps = {steps}\n[geometry]\nkind = \"slit\"\n\
         [flow]\nkind = \"poiseuille\"\nmean_velocity_m_per_s = {:e}\n",
        dt_for_sigma(sigma),
        v * 1e-9
    );
    let s = text_scenario(&text);
    let mut c = free_stepper(&s);
    let mut state = c.initial_state(&s).unwrap();
    let before = state.clone();
    on_threads(2, || advance(&mut c, &mut state, steps, 1000));
    let t = steps as f64 * s.dt_s;
    let u: Vec<f64> = (0..state.len())
        .map(|i| (state.unwrapped(i, &s.sim_box)[0] - before.unwrapped(i, &s.sim_box)[0]) / t)
        .collect();
    let (u, se) = mean_se(&u);
    let expected = v * lag_free_kc_slit(a / (0.5 * w)).unwrap();
    println!(
        "slit: ⟨U⟩/V = {:.5} ± {:.5}, exact {:.5}",
        u / v,
        se / v,
        expected / v
    );
    assert!((u - expected).abs() < K_SE * se);
}

/// Sedimentation against the floor: a fixed-seed start drawn from the
/// Boltzmann profile, then a run; the histogram of heights must stay
/// exp(−(z − a)/ℓ_g) truncated at the lid (chi-square, 19 dof).
fn sedimentation_chi_square(geometry: Option<&str>) -> (f64, f64) {
    // A 500 nm sphere 1000 kg/m³ denser than its medium: ℓ_g = k_B T/(m_b g) ≈ 800 nm.
    let a = 500.0;
    let (rho_p, rho_m, g) = (2000.0, 1000.0, 9.81);
    let kt = 1.380649e-23 * 298.15;
    let mb = 4.0 / 3.0 * std::f64::consts::PI * (a * 1e-9_f64).powi(3) * (rho_p - rho_m);
    let ell = kt / (mb * g) * 1e9;
    let lz = 2.0 * a + 6.0 * ell;
    let sigma = 0.04 * a;
    let steps = (4.0 * ell * ell / (0.5 * sigma * sigma)) as u64;
    let body = match geometry {
        Some(g) => format!("[geometry]\n{g}\n"),
        None => "".into(),
    };
    let periodic = if geometry.is_some() {
        ""
    } else {
        "periodic = [true, true, false]\n"
    };
    let text = format!(
        "seed = 9\n[medium]\ntemperature_K = 298.15\ndensity_kg_per_m3 = {rho_m}\n[box]\nedges_nm = [4000.0, 4000.0, {lz}]\n{periodic}\
         [[species]]\nname = \"bead\"\nradius_nm = {a}\ncount = 6000\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\ndensity_kg_per_m3 = {rho_p}\n\
         [integrator]\ndt_s = {:e}\nsteps = {steps}\n[forces]\ngravity_m_per_s2 = {g}\n{body}",
        dt_for_sigma(sigma)
    );
    let s = text_scenario(&text);
    let mut c = free_stepper(&s);
    let mut state = c.initial_state(&s).unwrap();
    // Start in equilibrium: heights from the truncated exponential, by inversion.
    let span = lz - 2.0 * a;
    let mut rng = ParticleRng::for_particle(12345, 0);
    let tail = (-span / ell).exp();
    for p in &mut state.positions {
        let u = rng.uniform();
        p[2] = a - ell * (1.0 - u * (1.0 - tail)).ln();
    }
    on_threads(2, || advance(&mut c, &mut state, steps, 1000));
    const BINS: usize = 20;
    let top = 4.0 * ell;
    let mut counts = [0u64; BINS];
    for p in &state.positions {
        let h = p[2] - a;
        counts[((h / top * BINS as f64) as usize).min(BINS - 1)] += 1;
    }
    let n = state.len() as f64;
    let cdf = |h: f64| (1.0 - (-h / ell).exp()) / (1.0 - tail);
    let chi2 = (0..BINS)
        .map(|k| {
            let lo = k as f64 * top / BINS as f64;
            let hi = if k + 1 == BINS {
                span
            } else {
                (k + 1) as f64 * top / BINS as f64
            };
            let e = n * (cdf(hi) - cdf(lo));
            (counts[k] as f64 - e).powi(2) / e
        })
        .sum();
    let mean_height = state.positions.iter().map(|p| p[2] - a).sum::<f64>() / n;
    (chi2, mean_height / ell)
}

#[test]
fn sedimentation_equilibrium_is_barometric() {
    // Boltzmann: density ∝ exp(−z/ℓ_g), ℓ_g = k_B T/((4/3)π a³ Δρ g) (exact, REFERENCES.md).
    // Chi-square critical value 43.82 at 19 dof, p = 0.001 (NIST/SEMATECH e-Handbook 1.3.6.7.4).
    let (chi2, mean) = sedimentation_chi_square(None);
    println!("box floor: chi² = {chi2:.1}, ⟨h⟩/ℓ_g = {mean:.4}");
    assert!(chi2 < 43.82, "chi² = {chi2}");
    // With wall hydrodynamics the force drift is D⊥(z)F/k_BT next to the floor;
    // the profile stays Boltzmann's only if the mobility scales the force and the Itô drift is kept.
    let (chi2, mean) =
        sedimentation_chi_square(Some("kind = \"plane_wall\"\nwall_hydrodynamics = true"));
    println!("plane wall with hydrodynamics: chi² = {chi2:.1}, ⟨h⟩/ℓ_g = {mean:.4}");
    assert!(chi2 < 43.82, "chi² = {chi2}");
}

#[test]
fn constant_force_and_charge_in_a_field_drift_at_the_einstein_mobility() {
    // Einstein: v = D0 F/k_BT; F = force_pN + q e E (exact). Mean displacement per axis.
    let steps = 400u64;
    let sigma = 1.0;
    let dt = dt_for_sigma(sigma);
    let text = format!(
        "seed = 2\n[medium]\ntemperature_K = 300.0\n[box]\nedges_nm = [100.0, 100.0, 100.0]\n\
         [[species]]\nname = \"ion\"\nradius_nm = 1.0\ncount = 20000\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         force_pN = [0.2, 0.0, -0.1]\ncharge_e = -3.0\n\
         [integrator]\ndt_s = {dt:e}\nsteps = {steps}\n[forces]\nelectric_field_V_per_m = [0.0, 1e6, 0.0]\n"
    );
    let s = text_scenario(&text);
    let mut c = free_stepper(&s);
    let mut state = c.initial_state(&s).unwrap();
    let before = state.clone();
    on_threads(2, || advance(&mut c, &mut state, steps, 100));
    let kt = 1.380649e-23 * 300.0 * 1e21; // pN·nm
    let qe = -3.0 * 1.602176634e-19 * 1e6 * 1e12; // pN
    let force = [0.2, qe, -0.1];
    let t = steps as f64 * dt;
    for (k, f) in force.iter().enumerate() {
        let d: Vec<f64> = (0..state.len())
            .map(|i| state.unwrapped(i, &s.sim_box)[k] - before.unwrapped(i, &s.sim_box)[k])
            .collect();
        let (m, se) = mean_se(&d);
        let expected = D0_NM2_PER_S * f / kt * t;
        println!("axis {k}: ⟨Δ⟩ = {m:.4} ± {se:.4} nm, Einstein {expected:.4} nm");
        assert!((m - expected).abs() < K_SE * se);
        assert!(expected.abs() > 20.0 * se, "the drift is resolved");
    }
}

#[test]
fn uniform_shear_spreads_particles_as_the_exact_discrete_walk() {
    // x_n − x_0 = Σ σξ + γ̇Δt Σ_k (z_k − z_mid): given z_0 its mean is nγ̇Δt(z_0 − z_mid) and its
    // variance nσ² + (γ̇Δt σ)² (n − 1) n (2n − 1)/6 (exact; → 2D0t + (2/3)γ̇²D0t³).
    let n = 1000u64;
    let sigma = 0.5;
    let dt = dt_for_sigma(sigma);
    let rate = 3.0 / (n as f64 * dt);
    let lz = 60.0;
    let text = format!(
        "seed = 4\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [60.0, 60.0, {lz}]\n\
         [[species]]\nname = \"bead\"\nradius_nm = 1.0\ncount = 20000\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n\
         [integrator]\ndt_s = {dt:e}\nsteps = {n}\n[flow]\nkind = \"shear\"\nshear_rate_per_s = {rate:e}\n"
    );
    let s = text_scenario(&text);
    let mut c = free_stepper(&s);
    let mut state = c.initial_state(&s).unwrap();
    let before = state.clone();
    on_threads(2, || advance(&mut c, &mut state, n, 100));
    let g = rate * dt;
    let r: Vec<f64> = (0..state.len())
        .map(|i| {
            let (x0, x1) = (
                before.unwrapped(i, &s.sim_box),
                state.unwrapped(i, &s.sim_box),
            );
            x1[0] - x0[0] - n as f64 * g * (x0[2] - 0.5 * lz)
        })
        .collect();
    let (m, se) = mean_se(&r);
    let var = r.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (r.len() - 1) as f64;
    let nf = n as f64;
    let expected =
        nf * sigma * sigma + (g * sigma).powi(2) * (nf - 1.0) * nf * (2.0 * nf - 1.0) / 6.0;
    // Gaussian: the sample variance has relative SE √(2/(N − 1)).
    let var_se = expected * (2.0 / (r.len() - 1) as f64).sqrt();
    println!("shear: mean residual {m:.4} ± {se:.4}; variance {var:.2}, exact {expected:.2} ± {var_se:.2}");
    assert!(m.abs() < K_SE * se);
    assert!((var - expected).abs() < K_SE * var_se);
    // The shear term is resolved: three times the diffusive one.
    assert!(expected - nf * sigma * sigma > 20.0 * var_se);
}

#[test]
fn drive_keys_are_checked_with_their_names() {
    let base = "[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [50.0, 50.0, 50.0]\n\
                [[species]]\nname = \"t\"\nradius_nm = 1.0\ncount = 10\n\
                [integrator]\ndt_s = 1e-9\nsteps = 10\n";
    for (extra, key, says) in [
        (
            "[flow]\nkind = \"poiseuille\"\nmean_velocity_m_per_s = 0.1\n",
            "flow.kind",
            "cylinder",
        ),
        ("[flow]\nkind = \"swirl\"\n", "flow.kind", "allowed"),
        (
            "[flow]\nkind = \"shear\"\n",
            "flow.shear_rate_per_s",
            "rate",
        ),
        (
            "[forces]\ngravity_m_per_s2 = 9.81\n",
            "species[0].density_kg_per_m3",
            "density",
        ),
        (
            "[forces]\nelectric_field_V_per_m = [1.0, 2.0]\n",
            "forces.electric_field_V_per_m",
            "three",
        ),
    ] {
        let text = format!("{base}{extra}");
        let e = Scenario::from_text(&text, Path::new("bad.toml"), &[])
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("bad.toml") && e.contains(key) && e.contains(says),
            "{extra}: {e}"
        );
    }
    let text = format!("{base}[geometry]\nkind = \"cylinder\"\npore_radius_nm = 10.0\n[flow]\nkind = \"poiseuille\"\nmean_velocity_m_per_s = 0.1\npressure_gradient_Pa_per_m = 1e9\n");
    let e = Scenario::from_text(&text, Path::new("bad.toml"), &[])
        .unwrap_err()
        .to_string();
    assert!(e.contains("not both"), "{e}");
}

#[test]
fn a_pressure_gradient_sets_the_hagen_poiseuille_mean_velocity() {
    // Hagen–Poiseuille: V = G R²/(8η) in a tube, G w²/(12η) in a slit (exact, laminar).
    let eta = 1e-3;
    for (geometry, expected) in [
        (
            "kind = \"cylinder\"\npore_radius_nm = 10.0",
            1e12 * (10e-9_f64).powi(2) / (8.0 * eta),
        ),
        ("kind = \"slit\"", 1e12 * (20e-9_f64).powi(2) / (12.0 * eta)),
    ] {
        let text = format!(
            "[medium]\ntemperature_K = 298.15\nviscosity_Pa_s = {eta}\n[box]\nedges_nm = [20.0, 20.0, 20.0]\n\
             [[species]]\nname = \"t\"\nradius_nm = 1.0\ncount = 10\n[integrator]\ndt_s = 1e-12\nsteps = 10\n\
             [geometry]\n{geometry}\n[flow]\nkind = \"poiseuille\"\npressure_gradient_Pa_per_m = 1e12\n"
        );
        let s = text_scenario(&text);
        let Some(thicket_engine::scenario::drive::FlowSpec::Poiseuille {
            mean_velocity_nm_per_s,
        }) = s.flow
        else {
            panic!("a Poiseuille flow")
        };
        assert!((mean_velocity_nm_per_s * 1e-9 - expected).abs() < 1e-12 * expected);
    }
}
