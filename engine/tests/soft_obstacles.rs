//! Soft interactions of tracers with fixed obstacles, measured from runs.
//! Around one charged sphere (and one attractive one: a well plus van der
//! Waals) in a periodic box the radial density must be Boltzmann's
//! exp(−U/k_BT) normalised over the open volume; in a gel the mean
//! Boltzmann factor of the tracers must match the partition coefficient
//! `check` prints (both exact for the model: U is the model's own pair sum,
//! cut off where |U| < 1e-3 k_BT). Each run starts from the Boltzmann
//! distribution (drawn by rejection) and runs many relaxation times of the
//! interaction range, so a wrong drift shows. Switched off, the step is the
//! hard-sphere one bit for bit; bad keys are refused by name.

mod confinement_support;

use confinement_support::*;
use std::path::Path;
use thicket_engine::base::rng::ParticleRng;
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::space::potentials::Facing;
use thicket_engine::space::soft::{SoftField, CUTOFF_TOLERANCE_KT};
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

/// Chi-square critical value, 19 dof, p = 0.001 (NIST/SEMATECH e-Handbook, table 1.3.6.7.4).
const CHI2_19_P001: f64 = 43.82;
const A: f64 = 2.0;
const B: f64 = 5.0;
const L: f64 = 32.0;
const SIGMA: f64 = 0.05;

fn scenario(text: &str) -> Scenario {
    Scenario::from_text(text, Path::new("test.toml"), &[]).unwrap_or_else(|e| panic!("{e}"))
}

/// One tracer species among `[obstacles]` with the given extra keys.
fn text(species_keys: &str, obstacles: &str, count: usize, steps: u64, edge: f64) -> String {
    format!(
        "seed = 29\n[medium]\ntemperature_K = 298.15\nionic_strength_mol_per_L = 0.1\nrelative_permittivity = 78.4\n\
         [box]\nedges_nm = [{edge}, {edge}, {edge}]\n\
         [[species]]\nname = \"protein\"\nradius_nm = {A}\ncount = {count}\ndiffusivity_m2_per_s = {D0_M2_PER_S:e}\n{species_keys}\n\
         [integrator]\ndt_s = {:e}\nsteps = {steps}\n[output]\nrecord_every_steps = {steps}\n\
         [obstacles]\n{obstacles}\n",
        dt_for_sigma(SIGMA)
    )
}

/// The field of species 0 in pN·nm (scale 1), as `check` and the step build it.
fn field(s: &Scenario, o: &FixedObstacles) -> SoftField {
    SoftField::build(
        &o.spheres,
        &o.fibres,
        &s.species[0].body_potential,
        &s.sim_box,
        CUTOFF_TOLERANCE_KT * s.thermal_energy_pn_nm(),
        1.0,
    )
}

/// Boltzmann-distributed open points by rejection: uniform in the box,
/// kept with probability e^(−U/k_BT)/w_max.
fn boltzmann_starts(s: &Scenario, f: &SoftField, w_max: f64, n: usize, seed: u64) -> Vec<[f64; 3]> {
    let kt = s.thermal_energy_pn_nm();
    let mut g = ParticleRng::for_particle(seed, 0);
    let mut out = Vec::with_capacity(n);
    while out.len() < n {
        let p = [0, 1, 2].map(|k| g.uniform() * s.sim_box.edges_nm[k]);
        if let Some(u) = f.energy_pn_nm(&p) {
            let w = (-u / kt).exp();
            assert!(w <= w_max, "w_max bounds the weight");
            if g.uniform() * w_max < w {
                out.push(p);
            }
        }
    }
    out
}

fn run(s: &Scenario, o: &FixedObstacles, starts: &[[f64; 3]], steps: u64) -> Vec<[f64; 3]> {
    let mut c = Stepper::new(s, o);
    let mut state = c.initial_state(s).unwrap();
    state.positions.copy_from_slice(starts);
    on_threads(2, || advance(&mut c, &mut state, steps, 1000));
    state.positions
}

/// Radial density around the one obstacle against 4πr² e^(−U(r)/k_BT) on
/// 19 shells out to L/2, the rest of the box as a 20th bin (U = 0 there: the
/// reach a + b + cut-off stays below L/2, so no image interferes).
fn one_sphere_chi_square(species_keys: &str, obstacle_keys: &str) -> f64 {
    let count = 12_000;
    let steps = 8000; // 10 relaxation times κ⁻²/D0 of the double layer (κ⁻¹ ≈ 0.96 nm)
    let s = scenario(&text(
        species_keys,
        &format!("placement = \"random\"\ncount = 1\nradius_nm = {B}\n{obstacle_keys}"),
        count,
        steps,
        L,
    ));
    let o = FixedObstacles::build(&s).unwrap();
    let f = field(&s, &o);
    let kt = s.thermal_energy_pn_nm();
    let pair = f.pair(Facing::Sphere(B));
    let cut = f.cutoff_nm();
    let (contact, half) = (A + B, 0.5 * L);
    assert!(contact + cut < half, "the reach stays inside half the box");
    let u = |r: f64| {
        if r - contact < cut {
            pair.energy_pn_nm(r - contact)
        } else {
            0.0
        }
    };
    let w_max = (0..10_000)
        .map(|k| (-u(contact + k as f64 * cut / 10_000.0) / kt).exp())
        .fold(1.0, f64::max)
        * 1.01;
    let starts = boltzmann_starts(&s, &f, w_max, count, 3);
    let end = run(&s, &o, &starts, steps);
    let c = o.spheres.centres_nm[0];
    let bins = 19;
    let dr = (half - contact) / bins as f64;
    let mut counts = vec![0u64; bins + 1];
    for p in &end {
        let d: f64 = (0..3)
            .map(|k| {
                let x = p[k] - c[k];
                (x - L * (x / L).round()).powi(2)
            })
            .sum::<f64>()
            .sqrt();
        assert!(
            d >= contact * (1.0 - 1e-9),
            "a tracer inside the obstacle: {d}"
        );
        let k = (((d - contact) / dr) as usize).min(bins);
        counts[k] += 1;
    }
    let shell = |lo: f64, hi: f64| {
        let m = 2000;
        (0..m)
            .map(|k| {
                let r = lo + (k as f64 + 0.5) * (hi - lo) / m as f64;
                4.0 * std::f64::consts::PI * r * r * (-u(r) / kt).exp() * (hi - lo) / m as f64
            })
            .sum::<f64>()
    };
    let mut weights: Vec<f64> = (0..bins)
        .map(|k| shell(contact + k as f64 * dr, contact + (k + 1) as f64 * dr))
        .collect();
    weights.push(L.powi(3) - 4.0 / 3.0 * std::f64::consts::PI * half.powi(3));
    let total: f64 = weights.iter().sum();
    let chi2: f64 = counts
        .iter()
        .zip(&weights)
        .map(|(&n, &w)| {
            let e = count as f64 * w / total;
            (n as f64 - e).powi(2) / e
        })
        .sum();
    println!(
        "{species_keys:?}: chi² = {chi2:.1} (19 dof); U at contact {:.3} k_BT, cut-off {cut:.2} nm; counts {counts:?}",
        u(contact) / kt
    );
    chi2
}

#[test]
fn density_around_a_charged_sphere_is_boltzmann() {
    // Boltzmann (exact for the model): ρ(r) ∝ exp(−U(r)/k_BT), U the linear-superposition
    // sphere–sphere electrostatics with Derjaguin's radius.
    let chi2 = one_sphere_chi_square(
        "surface_potential_mV = -25.0",
        "surface_potential_mV = -30.0",
    );
    assert!(chi2 < CHI2_19_P001, "chi² = {chi2}");
}

#[test]
fn density_around_an_attractive_sphere_is_boltzmann() {
    // An attractive well (2 k_BT over 0.5 nm) and sphere–sphere van der Waals (Hamaker) held
    // below a closest gap of 0.3 nm: the same Boltzmann identity.
    let chi2 = one_sphere_chi_square(
        "obstacle_well_depth_kT = 2.0\nobstacle_well_range_nm = 0.5\nhamaker_constant_zJ = 10.0\nvdw_closest_gap_nm = 0.3",
        "",
    );
    assert!(chi2 < CHI2_19_P001, "chi² = {chi2}");
}

#[test]
fn mean_boltzmann_factor_in_a_gel_matches_the_checked_partition() {
    // For the Boltzmann density e^(−U)/Z over the open space, ⟨e^(U/k_BT)⟩ = f_open/K with
    // K = ⟨e^(−U/k_BT)⟩ over the box (hard cores 0) and f_open the open fraction (exact identity);
    // K and f_open are `check`'s Monte Carlo estimates, independent of the run.
    let count = 6000;
    let steps = 4000;
    let s = scenario(&text(
        "surface_potential_mV = -25.0\nobstacle_well_depth_kT = 1.0\nobstacle_well_range_nm = 0.4",
        "placement = \"random\"\nvolume_fraction = 0.2\nradius_nm = 4.0\nsurface_potential_mV = -30.0",
        count,
        steps,
        40.0,
    ));
    let o = FixedObstacles::build(&s).unwrap();
    let f = field(&s, &o);
    let kt = s.thermal_energy_pn_nm();
    let samples = 1_000_000;
    let k = o.boltzmann_partition(&s, 0, samples, s.seed).unwrap();
    let open = o.open_fraction(&s.sim_box, A, samples, s.seed);
    // The largest Boltzmann weight: a point touching two obstacles at most feels two wells.
    let w_max = (2.0f64 * 1.0 + 0.1).exp();
    let starts = boltzmann_starts(&s, &f, w_max, count, 4);
    let end = run(&s, &o, &starts, steps);
    let factors: Vec<f64> = end
        .iter()
        .map(|p| (f.energy_pn_nm(p).expect("tracers stay open") / kt).exp())
        .collect();
    let n = factors.len() as f64;
    let mean = factors.iter().sum::<f64>() / n;
    let sd = (factors.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let predicted = open.value / k.value;
    // Standard errors in quadrature (relative): the run's mean, K's and f_open's Monte Carlo.
    let rel = ((sd / n.sqrt() / mean).powi(2)
        + (k.standard_error / k.value).powi(2)
        + (open.standard_error / open.value).powi(2))
    .sqrt();
    println!(
        "gel: ⟨e^U⟩ = {mean:.4} ± {:.4}, f_open/K = {predicted:.4} (K = {:.4} ± {:.4}, f_open = {:.4}); {:.1} standard errors",
        sd / n.sqrt(),
        k.value,
        k.standard_error,
        open.value,
        (mean / predicted - 1.0).abs() / rel
    );
    assert!(
        k.value < open.value,
        "charge repels: K below the steric partition"
    );
    assert!(
        (mean / predicted - 1.0).abs() < 5.0 * rel,
        "{mean} vs {predicted}"
    );
}

#[test]
fn interactions_switched_off_give_the_hard_sphere_run_bit_for_bit() {
    // Zero surface potentials and a well of zero depth act on nothing: the step is the hard-sphere one.
    let obstacles = "placement = \"random\"\nvolume_fraction = 0.2\nradius_nm = 4.0";
    let off = text(
        "surface_potential_mV = 0.0\nobstacle_well_depth_kT = 0.0\nobstacle_well_range_nm = 1.0",
        &format!("{obstacles}\nsurface_potential_mV = 0.0"),
        500,
        300,
        40.0,
    );
    let hard = text("", obstacles, 500, 300, 40.0);
    let ends: Vec<Vec<[f64; 3]>> = [off, hard]
        .iter()
        .map(|t| {
            let s = scenario(t);
            assert!(s.species[0].body_potential.is_none());
            let o = FixedObstacles::build(&s).unwrap();
            let mut c = Stepper::new(&s, &o);
            let mut state = c.initial_state(&s).unwrap();
            on_threads(2, || advance(&mut c, &mut state, 300, 100));
            state.positions
        })
        .collect();
    assert_eq!(ends[0], ends[1]);
}

#[test]
fn bad_soft_obstacle_keys_are_refused_by_name() {
    let ok_obstacles = "placement = \"random\"\ncount = 5\nradius_nm = 4.0";
    let charged = format!("{ok_obstacles}\nsurface_potential_mV = -30.0");
    let cases: Vec<(String, &str)> = vec![
        // The obstacles' potential with no charged species acts on nothing.
        (
            text("", &charged, 10, 10, 40.0),
            "obstacles.surface_potential_mV",
        ),
        // Both van der Waals keys or neither.
        (
            text("hamaker_constant_zJ = 10.0", ok_obstacles, 10, 10, 40.0),
            "vdw_closest_gap_nm",
        ),
        (
            text("vdw_closest_gap_nm = 0.3", ok_obstacles, 10, 10, 40.0),
            "hamaker_constant_zJ",
        ),
        // Both well keys or neither.
        (
            text("obstacle_well_depth_kT = 1.0", ok_obstacles, 10, 10, 40.0),
            "obstacle_well_range_nm",
        ),
        (
            text("obstacle_well_range_nm = 1.0", ok_obstacles, 10, 10, 40.0),
            "obstacle_well_depth_kT",
        ),
        (
            text(
                "obstacle_well_depth_kT = -1.0\nobstacle_well_range_nm = 1.0",
                ok_obstacles,
                10,
                10,
                40.0,
            ),
            "obstacle_well_depth_kT",
        ),
        (
            text(
                "hamaker_constant_zJ = 1e9\nvdw_closest_gap_nm = 0.3",
                ok_obstacles,
                10,
                10,
                40.0,
            ),
            "hamaker_constant_zJ",
        ),
        (
            text(
                "surface_potential_mV = -25.0",
                &format!("{ok_obstacles}\nsurface_potential_mV = 5000.0"),
                10,
                10,
                40.0,
            ),
            "obstacles.surface_potential_mV",
        ),
    ];
    // Without obstacles: a well at obstacles and van der Waals act on nothing.
    let bare = "seed = 1\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [40.0, 40.0, 40.0]\n\
                [[species]]\nname = \"p\"\nradius_nm = 2.0\ncount = 10\n";
    let tail = "[integrator]\ndt_s = 1e-11\nsteps = 10\n";
    let mut cases = cases;
    cases.push((
        format!("{bare}obstacle_well_depth_kT = 1.0\nobstacle_well_range_nm = 1.0\n{tail}"),
        "obstacle_well_depth_kT",
    ));
    cases.push((
        format!("{bare}hamaker_constant_zJ = 10.0\nvdw_closest_gap_nm = 0.3\n{tail}"),
        "hamaker_constant_zJ",
    ));
    // Electrostatics needs the medium's ionic strength.
    cases.push((
        format!("{bare}surface_potential_mV = -25.0\n{tail}[obstacles]\n{charged}\n"),
        "medium.ionic_strength_mol_per_L",
    ));
    // Not with crowders, not with a [geometry].
    cases.push((
        text(
            "surface_potential_mV = -25.0\n[[species]]\nname = \"c\"\nradius_nm = 2.0\ncount = 10\nrole = \"crowder\"",
            &charged,
            10,
            10,
            40.0,
        ),
        "species[0].surface_potential_mV",
    ));
    cases.push((
        format!(
            "{}[geometry]\nkind = \"plane_wall\"\n",
            text(
                "obstacle_well_depth_kT = 1.0\nobstacle_well_range_nm = 1.0",
                ok_obstacles,
                10,
                10,
                40.0
            )
        ),
        "species[0].obstacle_well_depth_kT",
    ));
    for (t, key) in cases {
        let e = Scenario::from_text(&t, Path::new("bad.toml"), &[])
            .err()
            .unwrap_or_else(|| panic!("accepted:\n{t}"))
            .to_string();
        assert!(e.contains("bad.toml") && e.contains(key), "{key}: {e}");
    }
}

#[test]
fn density_around_a_charged_fibre_is_boltzmann() {
    // Boltzmann (exact for the model) around one aligned fibre spanning the box (an infinite
    // cylinder): ρ(s) ∝ exp(−U(s)/k_BT) in the distance s from its axis, U the sphere–cylinder
    // electrostatics with Derjaguin's radius a√(c/(a + c)); 19 rings out to L/2, the rest a 20th bin.
    let (c_f, count, steps) = (1.5, 12_000, 8000);
    let t = text("surface_potential_mV = -25.0", "", count, steps, L).replace(
        "[obstacles]\n",
        "[fibres]\nradius_nm = 1.5\ncount = 1\norientation = \"aligned\"\naxis = \"z\"\nsurface_potential_mV = -30.0\n",
    );
    let s = scenario(&t);
    let o = FixedObstacles::build(&s).unwrap();
    let f = field(&s, &o);
    let kt = s.thermal_energy_pn_nm();
    let pair = f.pair(Facing::Cylinder(c_f));
    let cut = f.cutoff_nm();
    let (contact, half) = (A + c_f, 0.5 * L);
    assert!(contact + cut < half, "the reach stays inside half the box");
    let u = |r: f64| {
        if r - contact < cut {
            pair.energy_pn_nm(r - contact)
        } else {
            0.0
        }
    };
    let starts = boltzmann_starts(&s, &f, 1.01, count, 5);
    let end = run(&s, &o, &starts, steps);
    let axis = o.fibres.centres_nm[0];
    let bins = 19;
    let dr = (half - contact) / bins as f64;
    let mut counts = vec![0u64; bins + 1];
    for p in &end {
        let d: f64 = (0..2)
            .map(|k| {
                let x = p[k] - axis[k];
                (x - L * (x / L).round()).powi(2)
            })
            .sum::<f64>()
            .sqrt();
        assert!(
            d >= contact * (1.0 - 1e-9),
            "a tracer inside the fibre: {d}"
        );
        counts[(((d - contact) / dr) as usize).min(bins)] += 1;
    }
    let ring = |lo: f64, hi: f64| {
        let m = 2000;
        (0..m)
            .map(|k| {
                let r = lo + (k as f64 + 0.5) * (hi - lo) / m as f64;
                2.0 * std::f64::consts::PI * r * (-u(r) / kt).exp() * (hi - lo) / m as f64
            })
            .sum::<f64>()
    };
    let mut weights: Vec<f64> = (0..bins)
        .map(|k| ring(contact + k as f64 * dr, contact + (k + 1) as f64 * dr))
        .collect();
    weights.push(L * L - std::f64::consts::PI * half * half);
    let total: f64 = weights.iter().sum();
    let chi2: f64 = counts
        .iter()
        .zip(&weights)
        .map(|(&n, &w)| {
            let e = count as f64 * w / total;
            (n as f64 - e).powi(2) / e
        })
        .sum();
    println!(
        "fibre: chi² = {chi2:.1} (19 dof); U at contact {:.3} k_BT, cut-off {cut:.2} nm; counts {counts:?}",
        u(contact) / kt
    );
    assert!(chi2 < CHI2_19_P001, "chi² = {chi2}");
}
