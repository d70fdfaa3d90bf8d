//! Confined runs are reproducible: the same on one and two threads, the
//! same however the steps are split into blocks, and the same when
//! interrupted and resumed; the trajectory carries the geometry and the
//! membrane observables.

mod confinement_support;

use confinement_support::*;
use std::sync::atomic::{AtomicBool, Ordering};
use thicket_engine::run::driver::{run, RunOptions, RunOutcome};
use thicket_engine::Scenario;

/// One scenario of each kind, with and without wall hydrodynamics.
fn kinds() -> Vec<(&'static str, Scenario)> {
    let mut out = Vec::new();
    for hydro in [false, true] {
        let h = format!("wall_hydrodynamics = {hydro}");
        out.push((
            "plane_wall",
            scenario(
                1,
                [30.0, 30.0, 12.0],
                1.0,
                3000,
                0.2,
                1,
                &format!("kind = \"plane_wall\"\n{h}"),
            ),
        ));
        out.push((
            "slit",
            scenario(
                2,
                [30.0, 30.0, 8.0],
                1.0,
                3000,
                0.2,
                1,
                &format!("kind = \"slit\"\n{h}"),
            ),
        ));
        out.push((
            "cylinder",
            scenario(
                3,
                [12.0, 12.0, 30.0],
                1.0,
                3000,
                0.3,
                1,
                &format!("kind = \"cylinder\"\npore_radius_nm = 5.0\n{h}"),
            ),
        ));
        out.push((
            "membrane",
            scenario(
                4,
                [20.0, 20.0, 30.0],
                1.0,
                3000,
                0.4,
                1,
                &format!("kind = \"membrane\"\nthickness_nm = 10.0\npore_radius_nm = 5.0\ntop_concentration_mol_per_m3 = 2.0\nbottom_concentration_mol_per_m3 = 0.5\n{h}"),
            ),
        ));
    }
    out
}

#[test]
fn results_do_not_depend_on_threads_or_blocks() {
    for (name, s) in kinds() {
        let mut c = confinement(&s);
        let start = c.initial_state(&s).unwrap();
        let mut one = start.clone();
        let counts_one = on_threads(1, || advance(&mut c, &mut one, 400, 400));
        let mut two = start.clone();
        let counts_two = on_threads(2, || advance(&mut c, &mut two, 400, 400));
        assert_eq!(one, two, "{name}: one and two threads differ");
        assert_eq!(
            counts_one, counts_two,
            "{name}: counts differ between thread counts"
        );
        let mut split = start.clone();
        let counts_split = on_threads(2, || advance(&mut c, &mut split, 400, 37));
        assert_eq!(
            one, split,
            "{name}: splitting the steps into blocks changed the result"
        );
        assert_eq!(
            counts_one, counts_split,
            "{name}: counts depend on the blocks"
        );
        // Placement is thread-independent too.
        assert_eq!(
            on_threads(1, || c.initial_state(&s).unwrap()),
            on_threads(2, || c.initial_state(&s).unwrap()),
            "{name}: placement"
        );
        for p in &one.positions {
            assert!(
                c.shape().allows(p, 1.0),
                "{name}: a centre ended too close to a wall: {p:?}"
            );
        }
        if name == "membrane" {
            let k = counts_one[0];
            assert!(
                k.exits_top + k.exits_bottom > 0
                    && k.exits_top + k.exits_bottom == k.entries_top + k.entries_bottom,
                "{name}: {k:?}"
            );
            assert!(
                k.crossings_down + k.crossings_up > 0,
                "{name}: nothing crossed the pore: {k:?}"
            );
        }
    }
}

fn membrane_text(steps: u64) -> String {
    format!(
        "seed = 8\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [20.0, 20.0, 30.0]\n\
         [[species]]\nname = \"solute\"\nradius_nm = 1.0\ncount = 5000\ndiffusivity_m2_per_s = 1e-10\n\
         [[species]]\nname = \"marker\"\nradius_nm = 2.0\ncount = 2000\ndiffusivity_m2_per_s = 5e-11\n\
         [integrator]\ndt_s = 5e-10\nsteps = {steps}\n[output]\nrecord_every_steps = 4000\nprecision = \"f64\"\n\
         [geometry]\nkind = \"membrane\"\nthickness_nm = 10.0\npore_radius_nm = 5.0\nwall_hydrodynamics = false\n"
    )
}

fn read_f64(file: &hdf5::File, path: &str) -> Vec<f64> {
    file.dataset(path).unwrap().read_raw::<f64>().unwrap()
}

fn read_i64(file: &hdf5::File, path: &str) -> Vec<i64> {
    file.dataset(path).unwrap().read_raw::<i64>().unwrap()
}

#[test]
fn interrupted_membrane_run_resumes_to_the_same_file() {
    let dir = tempfile::tempdir().unwrap();
    // 7000 particles: the driver's blocks (2·10⁷ particle-steps) are shorter than a frame interval.
    let s = Scenario::from_text(&membrane_text(8000), &dir.path().join("m.toml"), &[]).unwrap();
    let stop = AtomicBool::new(false);
    let whole = dir.path().join("whole.h5");
    let out = run(
        &s,
        &RunOptions {
            out: whole.clone(),
            force: false,
            resume: false,
        },
        &stop,
        &mut |_, _| {},
    )
    .unwrap();
    assert_eq!(out, RunOutcome::Completed { frames: 3 });

    let parts = dir.path().join("parts.h5");
    let options = RunOptions {
        out: parts.clone(),
        force: false,
        resume: false,
    };
    // Stop after the first block, between frames: the counters must come from the sidecar, not a frame.
    let out = run(&s, &options, &stop, &mut |step, _| {
        if step > 0 {
            stop.store(true, Ordering::Relaxed);
        }
    })
    .unwrap();
    let RunOutcome::Interrupted { step, .. } = out else {
        panic!("{out:?}")
    };
    assert!(
        step % 4000 != 0,
        "the interruption fell on a frame (step {step}); the test needs one between frames"
    );
    stop.store(false, Ordering::Relaxed);
    let out = run(
        &s,
        &RunOptions {
            resume: true,
            ..options
        },
        &stop,
        &mut |_, _| {},
    )
    .unwrap();
    assert_eq!(out, RunOutcome::Completed { frames: 3 });

    let (a, b) = (
        hdf5::File::open(&whole).unwrap(),
        hdf5::File::open(&parts).unwrap(),
    );
    for sp in ["solute", "marker"] {
        assert_eq!(
            read_f64(&a, &format!("particles/{sp}/position/value")),
            read_f64(&b, &format!("particles/{sp}/position/value")),
            "{sp} positions"
        );
        let series = format!("observables/{sp}/membrane/value");
        assert_eq!(
            read_i64(&a, &series),
            read_i64(&b, &series),
            "{sp} membrane series"
        );
        assert_eq!(
            read_i64(&a, &series).len(),
            3 * thicket_engine::run::membrane::MEMBRANE_COLUMNS.len()
        );
        let summary = a.group(&format!("observables/{sp}/membrane")).unwrap();
        let resumed = b.group(&format!("observables/{sp}/membrane")).unwrap();
        for attr in [
            "permeability_m_per_s",
            "hindrance_measured",
            "mean_particles_in_pores",
            "window_start_s",
        ] {
            let x: f64 = summary.attr(attr).unwrap().read_scalar().unwrap();
            let y: f64 = resumed.attr(attr).unwrap().read_scalar().unwrap();
            assert_eq!(x, y, "{sp} {attr}");
            assert!(x.is_finite(), "{sp} {attr} = {x}");
        }
    }
    let g = a.group("parameters/thicket/geometry").unwrap();
    let kind: hdf5::types::FixedAscii<16> = g.attr("kind").unwrap().read_scalar().unwrap();
    assert_eq!(kind.as_str(), "membrane");
    let thickness: f64 = g.attr("thickness_nm").unwrap().read_scalar().unwrap();
    assert_eq!(thickness, 10.0);
    // No checkpoint or sidecar is left behind by a completed run.
    let leftovers: Vec<_> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("ckpt"))
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}
