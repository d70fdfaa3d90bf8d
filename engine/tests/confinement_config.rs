//! `[geometry]` sections: what they resolve to, and bad input refused with
//! an error naming the file, the key, the value and what is allowed.

use std::path::{Path, PathBuf};
use thicket_engine::space::mobility::PerpendicularModel;
use thicket_engine::space::shape::Shape;
use thicket_engine::Scenario;

fn text(edges: &str, radius: f64, geometry: &str) -> String {
    format!(
        "seed = 3\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = {edges}\n[[species]]\nname = \"tracer\"\nradius_nm = {radius}\ncount = 10\n\
         [integrator]\ndt_s = 1e-10\nsteps = 100\n[geometry]\n{geometry}\n"
    )
}

fn load_in(dir: &Path, edges: &str, radius: f64, geometry: &str) -> Result<Scenario, String> {
    Scenario::from_text(
        &text(edges, radius, geometry),
        &dir.join("scenario.toml"),
        &[],
    )
    .map_err(|e| e.to_string())
}

fn load(edges: &str, radius: f64, geometry: &str) -> Result<Scenario, String> {
    load_in(Path::new("/nonexistent-folder"), edges, radius, geometry)
}

/// The error must name every one of `parts` (file, key, value, allowed range).
fn refused(result: Result<Scenario, String>, parts: &[&str]) {
    let err = match result {
        Ok(_) => panic!("accepted, but should be refused for {parts:?}"),
        Err(e) => e,
    };
    for p in parts {
        assert!(err.contains(p), "error lacks {p:?}: {err}");
    }
}

#[test]
fn kinds_resolve_to_shapes_and_walled_axes() {
    let s = load(
        "[50.0, 50.0, 20.0]",
        2.0,
        "kind = \"slit\"\nwall_hydrodynamics = true",
    )
    .unwrap();
    let g = s.geometry.as_ref().unwrap();
    assert_eq!(g.shape, Shape::Slit { width_nm: 20.0 });
    assert_eq!(g.hydrodynamics, Some(PerpendicularModel::Brenner));
    assert_eq!(s.sim_box.periodic, [true, true, false]);
    // The resolved scenario spells out the defaults and reads back the same.
    assert!(
        s.resolved_toml.contains("wall_hydrodynamics = true")
            && s.resolved_toml
                .contains("perpendicular_model = \"brenner\"")
    );
    let again = Scenario::from_text(&s.resolved_toml, Path::new("again.toml"), &[]).unwrap();
    assert_eq!(again.geometry, s.geometry);

    let s = load("[24.0, 24.0, 60.0]", 2.0, "kind = \"cylinder\"\npore_radius_nm = 10.0\nwall_hydrodynamics = true\nperpendicular_model = \"bevan_prieve\"").unwrap();
    assert_eq!(s.sim_box.periodic, [false, false, true]);
    assert_eq!(
        s.geometry.as_ref().unwrap().hydrodynamics,
        Some(PerpendicularModel::BevanPrieve)
    );

    let s = load(
        "[60.0, 40.0, 80.0]",
        2.0,
        "kind = \"membrane\"\nthickness_nm = 30.0\npore_radius_nm = 8.0\npores_x = 3\npores_y = 2",
    )
    .unwrap();
    let Shape::Membrane(m) = &s.geometry.as_ref().unwrap().shape else {
        panic!("membrane")
    };
    assert_eq!(m.pores.len(), 6);
    assert_eq!((m.z_lo_nm, m.z_hi_nm), (25.0, 55.0));
    assert_eq!(
        (
            m.top_concentration_mol_per_m3,
            m.bottom_concentration_mol_per_m3
        ),
        (1.0, 0.0)
    );
    // Steric partition (1 − λ)², REFERENCES.md (exact).
    assert!((m.steric_partition(2.0) - 0.75f64.powi(2)).abs() < 1e-15);
    assert_eq!(s.sim_box.periodic, [true, true, false]);
    // An override reaches the geometry like any other key.
    let sets = vec!["geometry.pore_radius_nm=6.0".to_string()];
    let s = Scenario::from_text(
        &text(
            "[60.0, 40.0, 80.0]",
            2.0,
            "kind = \"membrane\"\nthickness_nm = 30.0\npore_radius_nm = 8.0",
        ),
        Path::new("s.toml"),
        &sets,
    )
    .unwrap();
    let Shape::Membrane(m) = &s.geometry.as_ref().unwrap().shape else {
        panic!("membrane")
    };
    assert_eq!(m.pores[0].radius_nm, 6.0);
}

#[test]
fn pores_from_csv_with_header_and_comments() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("pores.csv"),
        "# two pores\nx_nm,y_nm,radius_nm\n10,10,5\n\n30, 20, 6.5\n",
    )
    .unwrap();
    let s = load_in(
        dir.path(),
        "[40.0, 40.0, 60.0]",
        1.0,
        "kind = \"membrane\"\nthickness_nm = 20.0\npores_file = \"pores.csv\"",
    )
    .unwrap();
    let Shape::Membrane(m) = &s.geometry.as_ref().unwrap().shape else {
        panic!("membrane")
    };
    assert_eq!(m.pores.len(), 2);
    assert_eq!(m.pores[1].radius_nm, 6.5);
    // Steric partition Σ(r − a)²/Σr² for unequal pores (exact).
    assert!((m.steric_partition(1.0) - (16.0 + 30.25) / (25.0 + 42.25)).abs() < 1e-15);
}

#[test]
fn tracer_larger_than_the_pore_is_refused() {
    refused(
        load(
            "[24.0, 24.0, 60.0]",
            5.0,
            "kind = \"cylinder\"\npore_radius_nm = 4.0",
        ),
        &[
            "scenario.toml",
            "geometry.pore_radius_nm",
            "= 4",
            "larger than the pore",
            "λ = a/r_pore < 1",
        ],
    );
    refused(
        load(
            "[40.0, 40.0, 60.0]",
            3.0,
            "kind = \"membrane\"\nthickness_nm = 20.0\npore_radius_nm = 3.0",
        ),
        &[
            "scenario.toml",
            "geometry.pore_radius_nm",
            "= 3",
            "larger than the pore",
        ],
    );
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("pores.csv"), "10,10,5\n30,30,1.5\n").unwrap();
    refused(
        load_in(
            dir.path(),
            "[40.0, 40.0, 60.0]",
            2.0,
            "kind = \"membrane\"\nthickness_nm = 20.0\npores_file = \"pores.csv\"",
        ),
        &[
            "pores.csv",
            "line 2",
            "\"30,30,1.5\"",
            "tracer is larger than the pore",
        ],
    );
}

#[test]
fn overlapping_pores_are_refused() {
    refused(
        load(
            "[30.0, 30.0, 60.0]",
            1.0,
            "kind = \"membrane\"\nthickness_nm = 20.0\npore_radius_nm = 8.0\npores_x = 2",
        ),
        &[
            "scenario.toml",
            "geometry.pore_radius_nm",
            "= 8",
            "pores overlap each other",
            "15 nm apart",
        ],
    );
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(
        dir.path().join("pores.csv"),
        "x_nm,y_nm,radius_nm\n10,10,5\n# the next one touches the first\n18,10,4\n",
    )
    .unwrap();
    refused(
        load_in(
            dir.path(),
            "[40.0, 40.0, 60.0]",
            1.0,
            "kind = \"membrane\"\nthickness_nm = 20.0\npores_file = \"pores.csv\"",
        ),
        &[
            "pores.csv",
            "line 4",
            "overlaps the one on line 2",
            "must not overlap",
        ],
    );
}

#[test]
fn pores_leaving_the_slab_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("pores.csv"), "20,20,5\n37,20,5\n").unwrap();
    refused(
        load_in(
            dir.path(),
            "[40.0, 40.0, 60.0]",
            1.0,
            "kind = \"membrane\"\nthickness_nm = 20.0\npores_file = \"pores.csv\"",
        ),
        &[
            "pores.csv",
            "line 2",
            "\"37,20,5\"",
            "leaves the slab",
            "0 … 40 nm",
        ],
    );
    // A slab that leaves no reservoir a diameter deep.
    refused(
        load(
            "[40.0, 40.0, 60.0]",
            2.0,
            "kind = \"membrane\"\nthickness_nm = 55.0\npore_radius_nm = 8.0",
        ),
        &[
            "scenario.toml",
            "geometry.thickness_nm",
            "= 55",
            "deeper than the largest particle's diameter",
        ],
    );
}

#[test]
fn walls_closer_than_a_diameter_are_refused() {
    refused(
        load("[50.0, 50.0, 3.9]", 2.0, "kind = \"slit\""),
        &["scenario.toml", "box.edges_nm[2]", "3.9", "diameter"],
    );
    // A pore cross-section that does not fit in the box.
    refused(
        load(
            "[15.0, 24.0, 60.0]",
            2.0,
            "kind = \"cylinder\"\npore_radius_nm = 10.0",
        ),
        &["scenario.toml", "box.edges_nm[0]", "= 15", "2 × 10 nm"],
    );
}

#[test]
fn bad_reservoir_concentrations_are_refused() {
    let base = "kind = \"membrane\"\nthickness_nm = 20.0\npore_radius_nm = 8.0\n";
    refused(
        load(
            "[40.0, 40.0, 60.0]",
            1.0,
            &format!("{base}top_concentration_mol_per_m3 = -0.5"),
        ),
        &[
            "scenario.toml",
            "geometry.top_concentration_mol_per_m3",
            "-0.5",
            "≥ 0 mol/m³",
        ],
    );
    refused(
        load(
            "[40.0, 40.0, 60.0]",
            1.0,
            &format!("{base}bottom_concentration_mol_per_m3 = -1e-3"),
        ),
        &["geometry.bottom_concentration_mol_per_m3", "-0.001", "≥ 0"],
    );
    refused(
        load(
            "[40.0, 40.0, 60.0]",
            1.0,
            &format!(
                "{base}top_concentration_mol_per_m3 = 0.0\nbottom_concentration_mol_per_m3 = 0.0"
            ),
        ),
        &[
            "geometry.top_concentration_mol_per_m3",
            "at least one reservoir",
        ],
    );
}

#[test]
fn misplaced_or_unknown_keys_are_refused() {
    refused(
        load("[50.0, 50.0, 20.0]", 2.0, "kind = \"tube\""),
        &[
            "geometry.kind",
            "\"tube\"",
            "\"plane_wall\", \"slit\", \"cylinder\" or \"membrane\"",
        ],
    );
    refused(
        load(
            "[50.0, 50.0, 20.0]",
            2.0,
            "kind = \"slit\"\nthickness_nm = 5.0",
        ),
        &["geometry.thickness_nm", "not used with kind = \"slit\""],
    );
    refused(
        load(
            "[50.0, 50.0, 20.0]",
            2.0,
            "kind = \"slit\"\nperpendicular_model = \"brenner\"",
        ),
        &[
            "geometry.perpendicular_model",
            "only used with wall_hydrodynamics = true",
        ],
    );
    refused(
        load(
            "[50.0, 50.0, 20.0]",
            2.0,
            "kind = \"slit\"\nwall_hydrodynamics = true\nperpendicular_model = \"lorentz\"",
        ),
        &[
            "geometry.perpendicular_model",
            "\"lorentz\"",
            "\"brenner\"",
            "\"bevan_prieve\"",
        ],
    );
    // Unknown keys are reported with their line by the TOML reader.
    refused(
        load("[50.0, 50.0, 20.0]", 2.0, "kind = \"slit\"\ngap_nm = 5.0"),
        &["scenario.toml", "gap_nm", "line"],
    );
    refused(
        load(
            "[50.0, 50.0, 20.0]",
            2.0,
            "kind = \"membrane\"\nthickness_nm = 5.0\npore_radius_nm = 4.0\npores_file = \"p.csv\"",
        ),
        &[
            "geometry.pore_radius_nm",
            "either geometry.pores_file or an arrangement",
        ],
    );
    refused(
        load(
            "[50.0, 50.0, 20.0]",
            2.0,
            "kind = \"membrane\"\nthickness_nm = 5.0\npore_radius_nm = 4.0\nflux_after_s = 1.0",
        ),
        &["geometry.flux_after_s", "= 1", "the run's duration"],
    );
}

#[test]
fn geometry_conflicts_are_refused() {
    let t = text("[50.0, 50.0, 20.0]", 2.0, "kind = \"slit\"").replace(
        "edges_nm = [50.0, 50.0, 20.0]",
        "edges_nm = [50.0, 50.0, 20.0]\nperiodic = [true, true, true]",
    );
    let err = Scenario::from_text(&t, Path::new("scenario.toml"), &[])
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("box.periodic") && err.contains("[true, true, false]"),
        "{err}"
    );
    // Crowders meet walls, but neither wall hydrodynamics nor membrane baths.
    let crowded = |geometry: &str| {
        text("[50.0, 50.0, 20.0]", 2.0, geometry)
            .replace("radius_nm = 2", "radius_nm = 2\nrole = \"crowder\"")
    };
    let err = Scenario::from_text(
        &crowded("kind = \"slit\"\nwall_hydrodynamics = true"),
        Path::new("scenario.toml"),
        &[],
    )
    .unwrap_err()
    .to_string();
    assert!(
        err.contains("geometry.wall_hydrodynamics") && err.contains("crowders"),
        "{err}"
    );
    assert!(
        Scenario::from_text(&crowded("kind = \"slit\""), Path::new("scenario.toml"), &[]).is_ok(),
        "crowders in a slit without hydrodynamics are allowed"
    );
    let t = text(
        "[50.0, 50.0, 20.0]",
        2.0,
        "kind = \"slit\"\nwall_hydrodynamics = true",
    )
    .replace("radius_nm = 2", "radius_nm = 2\ndrag_radius_nm = 2.5");
    let err = Scenario::from_text(&t, Path::new("scenario.toml"), &[])
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("species[0].drag_radius_nm")
            && err.contains("2.5")
            && err.contains("must not exceed the steric radius"),
        "{err}"
    );
}

#[test]
fn csv_errors_name_line_and_column() {
    let dir = tempfile::tempdir().unwrap();
    let geometry = "kind = \"membrane\"\nthickness_nm = 20.0\npores_file = \"pores.csv\"";
    for (body, parts) in [
        (
            "x_nm,y_nm,radius_nm\n10,10,5\n20,abc,5\n",
            vec!["line 3", "column 2 (y_nm)", "\"abc\""],
        ),
        ("10,10\n", vec!["line 1", "3 comma-separated numbers"]),
        (
            "x,y,r\n10,10,5\n",
            vec!["line 1", "header must read `x_nm,y_nm,radius_nm`"],
        ),
        ("# nothing\n", vec!["geometry.pores_file", "no pore rows"]),
    ] {
        std::fs::write(dir.path().join("pores.csv"), body).unwrap();
        refused(
            load_in(dir.path(), "[40.0, 40.0, 60.0]", 1.0, geometry),
            &parts,
        );
    }
    refused(
        load_in(
            &PathBuf::from("/nonexistent-folder"),
            "[40.0, 40.0, 60.0]",
            1.0,
            geometry,
        ),
        &["scenario.toml", "geometry.pores_file", "cannot be read"],
    );
}
