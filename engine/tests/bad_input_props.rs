//! Property test of scenario validation: mutated scenario files (values at
//! the edges of f64 and i64, wrong types, removed keys, extra sections) never
//! panic, every refusal names the file, and every accepted scenario has a
//! finite memory estimate within the limit in force.

use proptest::prelude::*;
use std::path::Path;
use thicket_engine::scenario::memory;
use thicket_engine::Scenario;

const BASE: &str = r#"seed = 3
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

/// Optional sections a mutation may add, each valid on its own.
const SECTIONS: [&str; 5] = [
    "[obstacles]\nplacement = \"poisson\"\nradius_nm = 5.0\nvolume_fraction = 0.1\n",
    "[fibres]\nradius_nm = 2.0\nlength_nm = 50.0\nvolume_fraction = 0.05\n",
    "[output]\nrecord_every_steps = 10\nprecision = \"f32\"\n",
    "[camera]\nframe_interval_s = 1e-8\nlocalisation_sigma_nm = 5.0\nblink_on_to_off_per_s = 10.0\nblink_off_to_on_per_s = 10.0\n",
    "[geometry]\nkind = \"slit\"\n",
];

/// Keys a mutation may set (dotted, as `--set` takes them).
const KEYS: [&str; 31] = [
    "seed",
    "medium.temperature_K",
    "medium.viscosity_Pa_s",
    "box.edges_nm",
    "box.periodic",
    "species.0.radius_nm",
    "species.0.drag_radius_nm",
    "species.0.count",
    "species.0.diffusivity_m2_per_s",
    "species.0.role",
    "species.0.name",
    "integrator.dt_s",
    "integrator.steps",
    "integrator.sweep",
    "output.record_every_steps",
    "output.precision",
    "output.file",
    "output.checkpoint_interval_s",
    "obstacles.radius_nm",
    "obstacles.volume_fraction",
    "obstacles.count",
    "obstacles.placement",
    "fibres.radius_nm",
    "fibres.length_nm",
    "fibres.volume_fraction",
    "fibres.count",
    "camera.frame_interval_s",
    "camera.localisation_sigma_nm",
    "camera.blink_on_to_off_per_s",
    "camera.exposure_s",
    "geometry.kind",
];

/// Values at the edges of what TOML can carry.
fn value() -> impl Strategy<Value = String> {
    prop_oneof![
        prop::sample::select(vec![
            "0",
            "-1",
            "1",
            "1e300",
            "-1e300",
            "1e-300",
            "inf",
            "-inf",
            "nan",
            "0.0",
            "9223372036854775807",
            "-9223372036854775808",
            "1e30",
            "1e-30",
            "0.5",
            "\"\"",
            "\"x\"",
            "true",
            "[]",
            "[1e300, 1.0, 1.0]",
            "[0.0, 0.0, 0.0]",
            "[1e8, 1e8, 1e8]",
            "[true, false]",
            "{}",
            "\"f64\"",
            "\"crowder\"",
            "\"cylinder\"",
            "\"lattice\"",
            "100000000",
            "20000000",
        ])
        .prop_map(String::from),
        any::<f64>().prop_map(|v| format!("{v:e}").replace("NaN", "nan")),
        any::<i64>().prop_map(|v| v.to_string()),
        (1e-6f64..1e6).prop_map(|v| format!("{v:e}")),
    ]
}

/// A scenario text: the base plus some sections, then key mutations written as `--set` overrides.
fn scenario() -> impl Strategy<Value = (String, Vec<String>)> {
    (
        prop::collection::vec(0usize..SECTIONS.len(), 0..3),
        prop::collection::vec((0usize..KEYS.len(), value()), 0..4),
        0usize..6,
    )
        .prop_map(|(sections, sets, cut)| {
            let mut text = BASE.to_string();
            for s in sections {
                if !text.contains(SECTIONS[s].lines().next().unwrap()) {
                    text.push_str(SECTIONS[s]);
                }
            }
            // Sometimes a line goes missing, as in a truncated or hand-edited file.
            if cut > 0 {
                let lines: Vec<&str> = text.lines().collect();
                let k = (cut * 7) % lines.len();
                text = lines
                    .iter()
                    .enumerate()
                    .filter(|(i, _)| *i != k)
                    .map(|(_, l)| *l)
                    .collect::<Vec<_>>()
                    .join("\n");
            }
            let sets = sets
                .into_iter()
                .map(|(k, v)| format!("{}={v}", KEYS[k]))
                .collect();
            (text, sets)
        })
}

/// The limit the accepted scenarios are held to in this test.
const LIMIT_BYTES: f64 = 4.0 * 1024.0 * 1024.0 * 1024.0;

proptest! {
    #![proptest_config(ProptestConfig { cases: 4000, ..ProptestConfig::default() })]

    #[test]
    fn mutated_scenarios_are_refused_by_name_or_bounded((text, sets) in scenario()) {
        memory::set_limit(LIMIT_BYTES);
        let path = Path::new("mutated_scenario.toml");
        match Scenario::from_text(&text, path, &sets) {
            Ok(s) => {
                let need = memory::estimate(&s).total_bytes();
                prop_assert!(need.is_finite() && need <= LIMIT_BYTES, "accepted with {need} bytes: {text} {sets:?}");
                prop_assert!(s.dt_s.is_finite() && s.temperature_k.is_finite() && s.viscosity_pa_s.is_finite());
                for sp in &s.species {
                    let step = sp.step_rms_nm(s.dt_s);
                    prop_assert!(step.is_finite() && step > 0.0, "step {step} accepted: {sets:?}");
                    prop_assert!(sp.d0_m2_per_s.is_finite() && sp.d0_m2_per_s > 0.0);
                }
            }
            Err(e) => {
                let msg = e.to_string();
                // Overrides are named by their assignment; everything else by the file.
                prop_assert!(
                    msg.contains("mutated_scenario.toml") || msg.starts_with("--set '"),
                    "refusal without the file or the assignment: {msg}"
                );
            }
        }
    }
}
