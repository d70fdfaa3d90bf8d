//! One ensemble of non-interacting tracers split into parts by particle
//! ranges (`thicket run --ensemble-part I/N`) and joined by `thicket
//! analyze`.
//!
//! The reference is the whole run itself: every particle has its own random
//! stream and starting point and the medium comes from the seed, so the
//! union of the parts must equal the whole run bit for bit (an exact
//! identity), and the joined analysis must give the whole run's MSD and
//! D_eff to rounding.

use crate::support::*;
use std::path::Path;

/// An invented probe among fixed random obstacles (the obstructed kernel), small enough for seconds.
pub const OBSTACLES: &str = r#"seed = 4242
[medium]
temperature_K = 310.15
[box]
edges_nm = [120.0, 120.0, 120.0]
[[species]]
name = "probe"
radius_nm = 3.0
count = 301
[[species]]
name = "marker"
radius_nm = 1.5
count = 31
[obstacles]
placement = "random"
volume_fraction = 0.2
radius_nm = 15.0
[integrator]
dt_s = 1e-9
steps = 8000
[output]
record_every_steps = 200
"#;

/// An invented protein between two walls (the confined kernel).
const SLIT: &str = r#"seed = 77
[medium]
temperature_K = 298.15
[box]
edges_nm = [100.0, 100.0, 20.0]
[[species]]
name = "globin"
radius_nm = 3.0
count = 200
[integrator]
dt_s = 1.4e-10
steps = 6000
[geometry]
kind = "slit"
[output]
record_every_steps = 150
"#;

/// Runs the whole scenario and its `parts` parts in `dir`.
fn whole_and_parts(dir: &Path, text: &str, parts: usize) -> Vec<String> {
    std::fs::write(dir.join("s.toml"), text).unwrap();
    ok(&thicket(dir, &["run", "s.toml", "--out", "whole.h5"]));
    (1..=parts)
        .map(|i| {
            let part = format!("{i}/{parts}");
            ok(&thicket(dir, &["run", "s.toml", "--ensemble-part", &part]));
            format!("s.part{i}of{parts}.h5")
        })
        .collect()
}

fn shape(path: &Path, dataset: &str) -> Vec<usize> {
    hdf5::File::open(path)
        .unwrap()
        .dataset(dataset)
        .unwrap()
        .shape()
}

/// Every dataset of the whole run equals the parts': a per-particle one
/// (frames × particles × axes) is the parts' joined along the particle
/// axis, any other is the same in every part.
fn assert_union_is_whole(dir: &Path, parts: &[String]) {
    let whole_path = dir.join("whole.h5");
    let whole = datasets(&whole_path);
    let part_sets: Vec<_> = parts.iter().map(|p| datasets(&dir.join(p))).collect();
    let mut joined_checked = 0;
    for (name, bytes) in &whole {
        let pieces: Vec<&Vec<u8>> = part_sets
            .iter()
            .map(|set| {
                &set.iter()
                    .find(|(n, _)| n == name)
                    .unwrap_or_else(|| panic!("a part lacks {name}"))
                    .1
            })
            .collect();
        let per_particle = name.starts_with("/particles/")
            && !name.starts_with("/particles/obstacles/")
            && name.ends_with("/value");
        if per_particle {
            let frames = shape(&whole_path, name)[0];
            let mut expected = Vec::with_capacity(bytes.len());
            for f in 0..frames {
                for piece in &pieces {
                    let row = piece.len() / frames;
                    expected.extend_from_slice(&piece[f * row..(f + 1) * row]);
                }
            }
            assert!(
                expected == *bytes,
                "{name}: the parts joined differ from the whole run"
            );
            joined_checked += 1;
        } else {
            for (piece, part) in pieces.iter().zip(parts) {
                assert!(
                    *piece == bytes,
                    "{name} differs between the whole run and {part}"
                );
            }
        }
    }
    assert!(joined_checked >= 2, "positions and images were compared");
}

fn analyze_json(dir: &Path, files: &[&str]) -> serde_json::Value {
    let mut args = vec!["analyze"];
    args.extend_from_slice(files);
    args.push("--json");
    serde_json::from_str(&ok(&thicket(dir, &args))).expect("analyze prints JSON")
}

/// The joined analysis equals the whole run's: MSD at every lag, D_eff and its interval.
fn assert_same_analysis(whole: &serde_json::Value, joined: &serde_json::Value) {
    assert_eq!(whole["particles"], joined["particles"]);
    let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * a.abs().max(b.abs());
    for key in ["d_eff_m2_per_s", "alpha_long"] {
        let (a, b) = (whole[key].as_f64().unwrap(), joined[key].as_f64().unwrap());
        assert!(close(a, b), "{key}: whole {a}, parts {b}");
    }
    for k in 0..2 {
        let (a, b) = (
            whole["d_eff_ci95_m2_per_s"][k].as_f64().unwrap(),
            joined["d_eff_ci95_m2_per_s"][k].as_f64().unwrap(),
        );
        assert!(close(a, b), "interval end {k}: whole {a}, parts {b}");
    }
    // Per axis, every lag.
    let msd = |v: &serde_json::Value| -> Vec<f64> {
        v["curves"]["msd_axes_nm2"]
            .as_array()
            .expect("curves.msd_axes_nm2")
            .iter()
            .flat_map(|axis| axis.as_array().expect("one list per axis").clone())
            .map(|x| x.as_f64().unwrap())
            .collect()
    };
    let (a, b) = (msd(whole), msd(joined));
    assert_eq!(a.len(), b.len());
    assert!(!a.is_empty());
    for (lag, (x, y)) in a.iter().zip(&b).enumerate() {
        assert!(close(*x, *y), "MSD at lag {lag}: whole {x}, parts {y}");
    }
}

/// Three parts among obstacles: the union is the whole run bit for bit, and
/// analysed together (in any order) they give its MSD and D_eff.
#[test]
fn an_obstructed_ensemble_in_three_parts_is_the_whole_run() {
    let dir = tempdir();
    let parts = whole_and_parts(dir.path(), OBSTACLES, 3);
    assert_union_is_whole(dir.path(), &parts);
    let whole = analyze_json(dir.path(), &["whole.h5"]);
    let joined = analyze_json(dir.path(), &[&parts[2], &parts[0], &parts[1]]);
    assert_same_analysis(&whole, &joined);
    // One part alone is a smaller ensemble, not the whole one.
    let alone = analyze_json(dir.path(), &[&parts[0]]);
    assert_ne!(alone["particles"], whole["particles"]);
}

/// Between walls (the confined kernel) the parts are the whole run too.
#[test]
fn a_slit_ensemble_in_three_parts_is_the_whole_run() {
    let dir = tempdir();
    let parts = whole_and_parts(dir.path(), SLIT, 3);
    assert_union_is_whole(dir.path(), &parts);
    let whole = analyze_json(dir.path(), &["whole.h5"]);
    let joined = analyze_json(dir.path(), &[&parts[1], &parts[2], &parts[0]]);
    assert_same_analysis(&whole, &joined);
}

fn refused(dir: &Path, args: &[&str], needles: &[&str]) {
    let out = thicket(dir, args);
    let err = stderr(&out);
    assert_eq!(
        out.status.code(),
        Some(2),
        "expected exit 2 for {args:?}: {err}"
    );
    assert!(!err.contains("panicked"), "{err}");
    for n in needles {
        assert!(err.contains(n), "message lacks {n:?}: {err}");
    }
}

/// Crowders interact, so a run with them is not split; incomplete or
/// mismatched sets of parts are not joined; nothing is written on refusal.
#[test]
fn unsplittable_runs_and_bad_sets_of_parts_are_refused() {
    let dir = tempdir();
    let d = dir.path();
    std::fs::copy(repo("configs/mobile.toml"), d.join("mobile.toml")).unwrap();
    refused(
        d,
        &["run", "mobile.toml", "--ensemble-part", "1/2"],
        &["mobile.toml", "crowder", "touch every particle"],
    );
    assert!(
        std::fs::read_dir(d).unwrap().count() == 1,
        "a refused split wrote a file"
    );
    refused(
        d,
        &["run", "mobile.toml", "--ensemble-part", "3/2"],
        &["--ensemble-part 3/2", "1 ≤ I ≤ N"],
    );

    let parts = whole_and_parts(d, OBSTACLES, 3);
    // A part missing.
    refused(
        d,
        &["analyze", &parts[0], &parts[1]],
        &[&parts[0], "give all 3 parts"],
    );
    // A part twice.
    refused(
        d,
        &["analyze", &parts[0], &parts[1], &parts[1]],
        &["each part once"],
    );
    // A whole run among parts.
    refused(
        d,
        &["analyze", "whole.h5", &parts[1], &parts[2]],
        &["whole.h5", "a whole run"],
    );
    // A part of another run (another seed).
    ok(&thicket(
        d,
        &[
            "run",
            "s.toml",
            "--ensemble-part",
            "3/3",
            "--set",
            "seed=5",
            "--out",
            "other.h5",
        ],
    ));
    refused(
        d,
        &["analyze", &parts[0], &parts[1], "other.h5"],
        &["other.h5", "same scenario, seed and overrides"],
    );
    // More parts than particles of a species.
    refused(
        d,
        &[
            "run",
            "s.toml",
            "--ensemble-part",
            "1/40",
            "--out",
            "many.h5",
        ],
        &["species.marker.count", "at most 31 parts"],
    );
    assert!(!d.join("many.h5").exists());
}
