//! Golden trajectories: every scenario in configs/, shortened with --set, must
//! reproduce the committed SHA-256 of every dataset, on 1 and 2 threads.
//!
//! Guards refactoring of the engine: a change of output is caught here and
//! must be intended. Regenerate the fixture with THICKET_BLESS_GOLDEN=1 only
//! for an intended change, and say so in the commit.

use crate::support::{datasets, ok, repo, tempdir, thicket};
use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::fmt::Write as _;

/// Each shipped scenario with the overrides that make it a few hundred steps
/// and at most a few hundred tracers (crowders keep their count: it sets φ).
const CASES: &[(&str, &[&str])] = &[
    (
        "configs/free.toml",
        &[
            "species.bead.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/crowded.toml",
        &[
            "species.probe.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/fibres.toml",
        &[
            "species.nanobead.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/gel-pore.toml",
        &[
            "species.peptide.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/membrane.toml",
        &[
            "species.solute.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
            "geometry.flux_after_s=2e-8",
        ],
    ),
    (
        "configs/mobile.toml",
        &[
            "species.reporter.count=100",
            "integrator.steps=300",
            "output.record_every_steps=30",
        ],
    ),
    (
        "configs/pore.toml",
        &[
            "species.dextrin.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/slit.toml",
        &[
            "species.globin.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/tracks.toml",
        &[
            "species.probe.count=200",
            "species.cluster.count=100",
            "integrator.steps=300",
            "output.record_every_steps=1",
        ],
    ),
    (
        "configs/filtration.toml",
        &[
            "species.solute.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
            "geometry.flux_after_s=2e-8",
        ],
    ),
    (
        "configs/charged-pore.toml",
        &[
            "species.sloe.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/sticky-fibres.toml",
        &[
            "species.stickybead.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/charged-gel-low-salt.toml",
        &[
            "species.rowan.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/charged-crowd.toml",
        &[
            "species.sorrel.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/charged-gel-high-salt.toml",
        &[
            "species.rowan.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
    (
        "configs/demo/hydrogel.toml",
        &[
            "species.marker.count=300",
            "integrator.steps=400",
            "output.record_every_steps=40",
        ],
    ),
];

const FIXTURE: &str = "tests/fixtures/golden-trajectories.sha256";

/// "scenario dataset sha256" lines for one thread count.
fn digests(threads: &str) -> BTreeMap<String, String> {
    let dir = tempdir();
    let mut out = BTreeMap::new();
    for (config, sets) in CASES {
        let traj = dir
            .path()
            .join(format!("{}-{threads}.h5", config.replace('/', "_")));
        let config_path = repo(config);
        let traj_s = traj.to_str().unwrap();
        let mut args = vec![
            "run",
            config_path.to_str().unwrap(),
            "--out",
            traj_s,
            "--threads",
            threads,
        ];
        for s in *sets {
            args.push("--set");
            args.push(s);
        }
        ok(&thicket(dir.path(), &args));
        for (path, bytes) in datasets(&traj) {
            let hash = Sha256::digest(&bytes);
            let mut hex = String::new();
            for b in hash.iter() {
                write!(hex, "{b:02x}").unwrap();
            }
            out.insert(format!("{config} {path}"), hex);
        }
    }
    out
}

fn render(map: &BTreeMap<String, String>) -> String {
    map.iter().map(|(k, v)| format!("{k} {v}\n")).collect()
}

#[test]
fn every_config_reproduces_its_committed_dataset_hashes_on_one_and_two_threads() {
    let one = digests("1");
    let two = digests("2");
    assert_eq!(
        render(&one),
        render(&two),
        "1 and 2 threads must write identical trajectories"
    );
    let fixture = repo(FIXTURE);
    if std::env::var_os("THICKET_BLESS_GOLDEN").is_some() {
        std::fs::write(&fixture, render(&one)).expect("the fixture is written");
        return;
    }
    let expected = std::fs::read_to_string(&fixture).expect("the committed fixture exists");
    let got = render(&one);
    let diff: Vec<String> = expected
        .lines()
        .filter(|l| !got.lines().any(|g| g == *l))
        .map(|l| format!("expected: {l}"))
        .chain(
            got.lines()
                .filter(|g| !expected.lines().any(|l| l == *g))
                .map(|g| format!("got:      {g}")),
        )
        .collect();
    assert!(
        diff.is_empty(),
        "trajectories changed:\n{}",
        diff.join("\n")
    );
}
