//! Surface charge densities in place of surface potentials: a scenario
//! giving σ on each surface runs bit for bit as the one giving the
//! potential ψ(σ) of the Grahame equation (Grahame 1947, planar; from
//! memory), its resolved text validates again to the same potentials, and
//! bad input (both keys, a missing medium key, a value out of range) is
//! refused naming the key.

use std::path::Path;
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::space::potentials::grahame_potential_mv;
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

const MEDIUM: &str = "[medium]\ntemperature_K = 298.15\nionic_strength_mol_per_L = 0.01\nrelative_permittivity = 78.4\n";

/// The potential the Grahame equation gives σ in `MEDIUM`, written so that TOML reads back the same f64.
fn psi(sigma: f64) -> String {
    format!("{:?}", grahame_potential_mv(sigma, 78.4, 298.15, 0.01))
}

fn load(text: &str, name: &str) -> Result<Scenario, String> {
    Scenario::from_text(text, Path::new(name), &[]).map_err(|e| e.to_string())
}

/// A tracer between charged slit walls.
fn slit(species_key: &str, wall_key: &str) -> String {
    format!(
        "seed = 7\n{MEDIUM}[box]\nedges_nm = [30.0, 30.0, 20.0]\n\
         [[species]]\nname = \"p\"\nradius_nm = 2.0\ncount = 400\n{species_key}\n\
         [integrator]\ndt_s = 1e-11\nsteps = 200\n[geometry]\nkind = \"slit\"\n{wall_key}\n"
    )
}

/// A tracer among charged spheres and fibres.
fn gel(species_key: &str, sphere_key: &str, fibre_key: &str) -> String {
    format!(
        "seed = 9\n{MEDIUM}[box]\nedges_nm = [40.0, 40.0, 40.0]\n\
         [[species]]\nname = \"p\"\nradius_nm = 2.0\ncount = 300\n{species_key}\n\
         [integrator]\ndt_s = 1e-11\nsteps = 200\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.1\nradius_nm = 4.0\n{sphere_key}\n\
         [fibres]\nradius_nm = 1.5\ncount = 4\n{fibre_key}\n"
    )
}

/// Charged crowders in an open box (pairs between mobile particles).
fn crowd(species_key: &str) -> String {
    format!(
        "seed = 11\n{MEDIUM}[box]\nedges_nm = [50.0, 50.0, 50.0]\n\
         [[species]]\nname = \"c\"\nradius_nm = 2.0\ncount = 200\nrole = \"crowder\"\n{species_key}\n\
         [integrator]\ndt_s = 1e-11\nsteps = 100\n"
    )
}

/// Final positions after the scenario's steps on two threads.
fn run(s: &Scenario) -> Vec<[f64; 3]> {
    let o = FixedObstacles::build(s).unwrap();
    let mut c = Stepper::new(s, &o);
    let mut state = c.initial_state(s).unwrap();
    rayon::ThreadPoolBuilder::new()
        .num_threads(2)
        .build()
        .unwrap()
        .install(|| {
            let mut done = 0;
            while done < s.steps {
                let n = 50.min(s.steps - done);
                c.advance(&mut state, n);
                done += n;
            }
        });
    state.positions
}

/// The charge-density scenario and the potential one: same physics, same
/// positions bit for bit; the charge one's resolved text keeps the keys as
/// written (never both on a surface) and validates again.
fn same_as_potentials(charged: &str, potentials: &str, converted: usize) {
    let a = load(charged, "charge.toml").unwrap_or_else(|e| panic!("{e}"));
    let b = load(potentials, "potential.toml").unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(a.surface_charges.len(), converted);
    assert!(b.surface_charges.is_empty());
    for c in &a.surface_charges {
        assert!(c.key.ends_with("surface_charge_density_mC_per_m2"), "{c:?}");
        assert!(c.potential_mv.is_finite() && c.potential_mv < 0.0, "{c:?}");
    }
    for (x, y) in a.species.iter().zip(&b.species) {
        assert_eq!(x.wall_potential, y.wall_potential);
        assert_eq!(x.body_potential, y.body_potential);
    }
    assert_eq!(a.pairs, b.pairs);
    // The charges act: the comparison is not between two uncharged runs.
    assert!(
        a.pairs.is_some()
            || a.species.iter().any(|s| {
                s.wall_potential.electrostatic_pn_nm != 0.0
                    && s.body_potential.sphere_electrostatic_pn == 0.0
                    || s.body_potential.sphere_electrostatic_pn != 0.0
                        && s.body_potential.fibre_electrostatic_pn != 0.0
            })
    );
    for key in ["surface_potential_mV", "surface_charge_density_mC_per_m2"] {
        assert_eq!(
            a.resolved_toml.matches(key).count(),
            charged.matches(key).count(),
            "{key}: {}",
            a.resolved_toml
        );
    }
    let again = load(&a.resolved_toml, "again.toml").unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(again.resolved_toml, a.resolved_toml);
    assert_eq!(again.surface_charges, a.surface_charges);
    assert_eq!(run(&a), run(&b));
}

#[test]
fn charged_slit_walls_run_as_their_grahame_potentials() {
    let charged = slit(
        "surface_charge_density_mC_per_m2 = -8.0",
        "wall_surface_charge_density_mC_per_m2 = -12.5",
    );
    let potentials = slit(
        &format!("surface_potential_mV = {}", psi(-8.0)),
        &format!("wall_surface_potential_mV = {}", psi(-12.5)),
    );
    same_as_potentials(&charged, &potentials, 2);
}

#[test]
fn charged_spheres_and_fibres_run_as_their_grahame_potentials() {
    // The species by potential, the bodies by charge density: the two mix across surfaces.
    let charged = gel(
        "surface_potential_mV = -25.0",
        "surface_charge_density_mC_per_m2 = -20.0",
        "surface_charge_density_mC_per_m2 = -5.0",
    );
    let potentials = gel(
        "surface_potential_mV = -25.0",
        &format!("surface_potential_mV = {}", psi(-20.0)),
        &format!("surface_potential_mV = {}", psi(-5.0)),
    );
    same_as_potentials(&charged, &potentials, 2);
    let keys: Vec<String> = load(&charged, "charge.toml")
        .unwrap()
        .surface_charges
        .into_iter()
        .map(|c| c.key)
        .collect();
    assert_eq!(
        keys,
        [
            "obstacles.surface_charge_density_mC_per_m2",
            "fibres.surface_charge_density_mC_per_m2"
        ]
    );
    // All three by charge density.
    let all = charged.replace(
        "surface_potential_mV = -25.0",
        "surface_charge_density_mC_per_m2 = -9.0",
    );
    let potentials = potentials.replace(
        "surface_potential_mV = -25.0",
        &format!("surface_potential_mV = {}", psi(-9.0)),
    );
    same_as_potentials(&all, &potentials, 3);
}

#[test]
fn charged_crowders_run_as_their_grahame_potential() {
    let charged = crowd("surface_charge_density_mC_per_m2 = -3.0");
    let potentials = crowd(&format!("surface_potential_mV = {}", psi(-3.0)));
    let a = load(&charged, "charge.toml").unwrap();
    assert!(a.pairs.is_some());
    same_as_potentials(&charged, &potentials, 1);
}

#[test]
fn both_keys_on_one_surface_are_refused_naming_the_charge_key() {
    for (text, key) in [
        (
            slit(
                "surface_potential_mV = -20.0\nsurface_charge_density_mC_per_m2 = -8.0",
                "wall_surface_potential_mV = -30.0",
            ),
            "species[0].surface_charge_density_mC_per_m2",
        ),
        (
            slit(
                "surface_potential_mV = -20.0",
                "wall_surface_potential_mV = -30.0\nwall_surface_charge_density_mC_per_m2 = -8.0",
            ),
            "geometry.wall_surface_charge_density_mC_per_m2",
        ),
        (
            gel(
                "surface_potential_mV = -20.0",
                "surface_potential_mV = -30.0\nsurface_charge_density_mC_per_m2 = -8.0",
                "",
            ),
            "obstacles.surface_charge_density_mC_per_m2",
        ),
        (
            gel(
                "surface_potential_mV = -20.0",
                "",
                "surface_potential_mV = -30.0\nsurface_charge_density_mC_per_m2 = -8.0",
            ),
            "fibres.surface_charge_density_mC_per_m2",
        ),
    ] {
        let e = load(&text, "both.toml").expect_err(key);
        assert!(
            e.contains("both.toml") && e.contains(key) && e.contains("not both"),
            "{key}: {e}"
        );
    }
}

#[test]
fn a_charge_density_needs_the_medium_keys_and_a_sane_value() {
    let text = slit(
        "surface_charge_density_mC_per_m2 = -8.0",
        "wall_surface_potential_mV = -30.0",
    );
    for (missing, line) in [
        (
            "medium.ionic_strength_mol_per_L",
            "ionic_strength_mol_per_L = 0.01\n",
        ),
        (
            "medium.relative_permittivity",
            "relative_permittivity = 78.4\n",
        ),
    ] {
        let e = load(&text.replace(line, ""), "bare.toml").expect_err(missing);
        assert!(
            e.contains("bare.toml")
                && e.contains(missing)
                && e.contains("(missing)")
                && e.contains("species[0].surface_charge_density_mC_per_m2"),
            "{missing}: {e}"
        );
    }
    for bad in ["nan", "inf", "-1500.0"] {
        let e = load(&text.replace("= -8.0", &format!("= {bad}")), "range.toml").expect_err(bad);
        assert!(
            e.contains("species[0].surface_charge_density_mC_per_m2") && e.contains("mC/m²"),
            "{bad}: {e}"
        );
    }
}

#[test]
fn later_errors_name_the_charge_key_the_file_gave() {
    // A charged species with uncharged walls: the error speaks of the key written, not the potential.
    let text = slit("surface_charge_density_mC_per_m2 = -8.0", "");
    let e = load(&text, "walls.toml").unwrap_err();
    assert!(
        e.contains("species[0].surface_charge_density_mC_per_m2")
            && !e.contains("species[0].surface_potential_mV")
            && e.contains("wall_surface_charge_density_mC_per_m2"),
        "{e}"
    );
    // Charged walls with no charged species: the value shown is σ and the potential it gave.
    let text = slit("", "wall_surface_charge_density_mC_per_m2 = -12.5");
    let e = load(&text, "walls.toml").unwrap_err();
    assert!(
        e.contains("geometry.wall_surface_charge_density_mC_per_m2` = -12.5 (ψ = ")
            && e.contains("act on nothing"),
        "{e}"
    );
}
