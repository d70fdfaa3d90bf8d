//! Property test of sweep files: mutated seeds, grids and fixed overrides
//! never panic, every refusal names the sweep file or the point, duplicate
//! seeds never pass, and the grid stays within its bound.

use proptest::prelude::*;
use thicket_analysis::sweep::{scenario_hash, Sweep, MAX_SWEEP_RUNS};

const SCENARIO: &str = r#"seed = 3
[medium]
temperature_K = 298.15
[box]
edges_nm = [200.0, 200.0, 200.0]
[[species]]
name = "tracer"
radius_nm = 2.0
count = 10
[integrator]
dt_s = 1e-9
steps = 100
"#;

const KEYS: [&str; 6] = [
    "species.0.radius_nm",
    "species.tracer.count",
    "integrator.dt_s",
    "medium.temperature_K",
    "box.edges_nm",
    "no.such_key",
];

const VALUES: [&str; 10] = [
    "1.0",
    "2.0",
    "-1.0",
    "1e300",
    "0",
    "10",
    "\"x\"",
    "[300.0, 300.0, 300.0]",
    "nan",
    "1e-9",
];

fn sweep_text() -> impl Strategy<Value = String> {
    (
        prop::collection::vec(-3i64..4, 0..4),
        prop::collection::vec(
            (
                0usize..KEYS.len(),
                prop::collection::vec(0usize..VALUES.len(), 0..3),
            ),
            0..3,
        ),
        prop::option::of((0usize..KEYS.len(), 0usize..VALUES.len())),
    )
        .prop_map(|(seeds, grid, set)| {
            let mut t = format!("scenario = \"s.toml\"\nseeds = {seeds:?}\n[grid]\n");
            let mut used = std::collections::BTreeSet::new();
            for (k, vs) in grid {
                if used.insert(k) {
                    let list: Vec<&str> = vs.iter().map(|&v| VALUES[v]).collect();
                    t.push_str(&format!("\"{}\" = [{}]\n", KEYS[k], list.join(", ")));
                }
            }
            if let Some((k, v)) = set {
                t.push_str(&format!("[set]\n\"{}\" = {}\n", KEYS[k], VALUES[v]));
            }
            t
        })
}

proptest! {
    #![proptest_config(ProptestConfig { cases: 600, ..ProptestConfig::default() })]

    #[test]
    fn mutated_sweeps_are_refused_by_name_or_sound(text in sweep_text()) {
        let dir = tempfile::tempdir().unwrap();
        std::fs::write(dir.path().join("s.toml"), SCENARIO).unwrap();
        let file = dir.path().join("mutated_sweep.toml");
        std::fs::write(&file, &text).unwrap();
        match Sweep::load(&file) {
            Ok(sweep) => {
                let mut seeds = sweep.seeds.clone();
                seeds.sort_unstable();
                seeds.dedup();
                prop_assert_eq!(seeds.len(), sweep.seeds.len(), "duplicate seeds accepted: {}", text);
                prop_assert!(sweep.points.len() * sweep.seeds.len() <= MAX_SWEEP_RUNS);
                // Distinct points of one seed are distinct scenarios, so their hashes differ.
                let hashes: std::collections::BTreeSet<String> = (0..sweep.points.len())
                    .filter_map(|p| sweep.point_hash(p, sweep.seeds[0]).ok())
                    .collect();
                let distinct_points: std::collections::BTreeSet<String> =
                    sweep.points.iter().map(|p| format!("{p:?}")).collect();
                prop_assert!(hashes.len() <= distinct_points.len());
            }
            Err(e) => {
                let msg = e.to_string();
                prop_assert!(msg.contains("mutated_sweep.toml") || msg.starts_with("sweep point"), "{}", msg);
            }
        }
    }
}

/// FNV-1a of the empty text is its offset basis (FNV specification, Fowler–Noll–Vo).
#[test]
fn scenario_hash_is_fnv1a() {
    assert_eq!(scenario_hash(""), "cbf29ce484222325");
    // FNV-1a 64 of "a" is af63dc4c8601ec8c (published FNV test vectors).
    assert_eq!(scenario_hash("a"), "af63dc4c8601ec8c");
}
