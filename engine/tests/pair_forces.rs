//! Soft interactions between mobile particles (the crowd's Metropolis-tested
//! step), checked where no statistics are needed: switched off, a crowd is
//! the hard-sphere crowd bit for bit; a soft run stopped and resumed ends
//! where the whole run ends, on any thread count; the step's detailed
//! balance holds in a two-particle system (the mean energy of a pair in a
//! small box against the exact Boltzmann average); bad keys are refused by
//! name. The second virial coefficients measured from runs are in
//! analysis/tests/pair_virial.rs.

mod crowding_support;

use crowding_support::*;
use std::path::Path;
use thicket_engine::Scenario;

/// A crowd of `crowders` charged spheres among `tracers` probes; `keys`
/// go to both species.
fn crowd(keys: &str, crowders: usize, tracers: usize, steps: u64, contact: &str) -> String {
    format!(
        "seed = 41\n[medium]\ntemperature_K = 298.15\nionic_strength_mol_per_L = 0.1\nrelative_permittivity = 78.4\n\
         [box]\nedges_nm = [40.0, 40.0, 40.0]\n\
         [[species]]\nname = \"colloid\"\nrole = \"crowder\"\nradius_nm = 3.0\ncount = {crowders}\n{keys}\n\
         [[species]]\nname = \"probe\"\nradius_nm = 1.5\ncount = {tracers}\n{keys}\n\
         [integrator]\ndt_s = 1e-10\nsteps = {steps}\n{contact}\n[output]\nrecord_every_steps = {}\n",
        steps / 4
    )
}

fn ends(text: &str, steps: u64, threads: usize) -> Vec<[f64; 3]> {
    let sc = scenario(text);
    let (_, mut stepper, mut state) = prepare(&sc);
    with_threads(threads, || stepper.advance(&mut state, steps));
    state.positions
}

#[test]
fn interactions_switched_off_give_the_hard_crowd_bit_for_bit() {
    // Zero potentials and a well of zero depth act on nothing: the step is the hard-sphere one.
    let contact = "contact = \"reject\"\nsweep = \"sequential\"";
    let off = crowd(
        "surface_potential_mV = 0.0\npair_well_depth_kT = 0.0\npair_well_range_nm = 1.0",
        300,
        300,
        200,
        contact,
    );
    let hard = crowd("", 300, 300, 200, contact);
    assert!(scenario(&off).pairs.is_none());
    assert_eq!(ends(&off, 200, 2), ends(&hard, 200, 2));
}

#[test]
fn a_soft_crowd_moves_and_resumes_to_the_same_result_on_any_thread_count() {
    let text = crowd(
        "surface_potential_mV = 30.0\npair_well_depth_kT = 1.0\npair_well_range_nm = 0.5",
        200,
        400,
        400,
        "",
    );
    let sc = scenario(&text);
    assert!(sc.pairs.is_some());
    let one = ends(&text, 400, 1);
    let two = ends(&text, 400, 2);
    assert_eq!(one, two);
    let (_, _, start) = prepare(&sc);
    assert_ne!(one, start.positions, "nothing moved");
    let dir = tempfile::tempdir().unwrap();
    let (whole, split) = whole_and_resumed(&sc, dir.path(), 150, 5);
    let read = |p: &Path| {
        let f = hdf5::File::open(p).unwrap();
        let d = f.dataset("/particles/colloid/position/value").unwrap();
        d.read_raw::<f32>().unwrap()
    };
    assert_eq!(read(&whole), read(&split));
}

#[test]
fn two_particles_in_a_box_sample_the_boltzmann_mean_energy() {
    // Two crowders with a 3 k_BT well of range 1 nm in a 12 nm box: the
    // relative position is distributed as e^{−U/k_BT} over the periodic
    // box, so ⟨U⟩ = ∫U e^{−U} dV / ∫e^{−U} dV exactly (numerical
    // integral over r; the cut-off sphere lies inside the box). 1000
    // frames 200 steps apart, rms step 0.4 nm: the batch error is measured.
    let text = "seed = 5\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [12.0, 12.0, 12.0]\n\
         [[species]]\nname = \"pair\"\nrole = \"crowder\"\nradius_nm = 1.0\ncount = 2\ndiffusivity_m2_per_s = 1e-10\n\
         pair_well_depth_kT = 3.0\npair_well_range_nm = 1.0\n\
         [integrator]\ndt_s = 8e-10\nsteps = 200\n[output]\nrecord_every_steps = 200\n";
    let sc = scenario(text);
    let pair = *sc.pairs.as_ref().unwrap().get(0, 0).unwrap();
    let kt = sc.thermal_energy_pn_nm();
    let (_, mut stepper, mut state) = prepare(&sc);
    let edge = 12.0;
    let energy = |p: &[[f64; 3]]| {
        let r2: f64 = (0..3)
            .map(|k| {
                let d = p[1][k] - p[0][k];
                let d = d - edge * (d / edge).round();
                d * d
            })
            .sum();
        pair.energy_pn_nm(r2.sqrt()) / kt
    };
    let mut samples = Vec::new();
    for _ in 0..1000 {
        stepper.advance(&mut state, 200);
        samples.push(energy(&state.positions));
    }
    // Exact: the box volume outside the cut-off sphere has U = 0 and the core is excluded.
    let (lo, hi) = (pair.contact_nm, pair.cutoff_distance_nm());
    let n = 20_000;
    let dr = (hi - lo) / n as f64;
    let (mut z, mut zu) = (0.0, 0.0);
    for q in 0..n {
        let r = lo + (q as f64 + 0.5) * dr;
        let u = pair.energy_pn_nm(r) / kt;
        let w = 4.0 * std::f64::consts::PI * r * r * (-u).exp() * dr;
        z += w;
        zu += w * u;
    }
    z += edge.powi(3) - 4.0 / 3.0 * std::f64::consts::PI * hi.powi(3);
    let exact = zu / z;
    // Batches of 50 frames: their means are nearly independent.
    let batches: Vec<f64> = samples
        .chunks(50)
        .map(|c| c.iter().sum::<f64>() / c.len() as f64)
        .collect();
    let (mean, se) = mean_se(&batches);
    println!("⟨U⟩ = {mean:.4} ± {se:.4} k_BT, exact {exact:.4} k_BT");
    assert!(exact < -0.1, "the well must matter: {exact}");
    assert!(
        (mean - exact).abs() < 4.5 * se,
        "{mean} ± {se} against {exact}"
    );
    assert!(4.5 * se < 0.5 * exact.abs(), "too noisy: {se}");
}

#[test]
fn bad_pair_keys_are_refused_by_name() {
    let refuse = |text: &str, key: &str| {
        let e = Scenario::from_text(text, Path::new("pairs.toml"), &[])
            .expect_err("refused")
            .to_string();
        assert!(e.contains("pairs.toml") && e.contains(key), "{key}: {e}");
    };
    // A well between particles needs a crowd.
    refuse(
        &crowd(
            "pair_well_depth_kT = 1.0\npair_well_range_nm = 1.0",
            0,
            10,
            10,
            "",
        )
        .replace("count = 0", "count = 5\nrole = \"tracer\"")
        .replace("role = \"crowder\"\n", ""),
        "species[0].pair_well_depth_kT",
    );
    // Both well keys.
    refuse(
        &crowd("pair_well_depth_kT = 1.0", 10, 10, 10, ""),
        "pair_well_range_nm",
    );
    // A potential with no partner that carries one.
    refuse(
        &crowd("", 10, 10, 10, "").replace(
            "name = \"probe\"\n",
            "name = \"probe\"\nsurface_potential_mV = 20.0\n",
        ),
        "species[1].surface_potential_mV",
    );
    // Soft pairs move by a Metropolis test: no reflecting contacts, no parallel sweep.
    let soft = "surface_potential_mV = 30.0";
    refuse(
        &crowd(soft, 10, 10, 10, "contact = \"reflect\""),
        "integrator.contact",
    );
    refuse(
        &crowd(soft, 10, 10, 10, "sweep = \"parallel\""),
        "integrator.sweep",
    );
    // Electrostatics needs the electrolyte.
    refuse(
        &crowd(soft, 10, 10, 10, "").replace("ionic_strength_mol_per_L = 0.1\n", ""),
        "medium.ionic_strength_mol_per_L",
    );
    // The cut-off must fit the box twice.
    refuse(
        &crowd(soft, 10, 10, 10, "").replace("[40.0, 40.0, 40.0]", "[15.0, 15.0, 15.0]"),
        "box.edges_nm",
    );
    // Walled faces.
    refuse(
        &crowd(soft, 10, 10, 10, "").replace(
            "edges_nm = [40.0, 40.0, 40.0]",
            "edges_nm = [40.0, 40.0, 40.0]\nperiodic = [true, true, false]",
        ),
        "box.periodic[2]",
    );
}
