//! The trajectory follows the H5MD 1.1 layout, read by h5dump and h5py.

use crate::support::*;
use std::process::Command;

fn small_run(dir: &std::path::Path) -> std::path::PathBuf {
    let cfg = free_config(dir);
    ok(&thicket(
        dir,
        &[
            "run",
            cfg.to_str().unwrap(),
            "--out",
            "t.h5",
            "--set",
            "integrator.steps=800",
            "--set",
            "output.record_every_steps=8",
            "--set",
            "species.bead.count=50",
        ],
    ));
    dir.join("t.h5")
}

/// H5MD 1.1 (de Buyl, Colberg & Höfling 2014; summary in shared/H5MD.md):
/// mandatory groups and attributes, units module, box, time-dependent elements.
#[test]
fn h5dump_shows_the_h5md_layout() {
    let dir = tempdir();
    let file = small_run(dir.path());
    let Some(h5dump) = crate::outside::require(crate::outside::Tool::H5dump) else {
        return;
    };
    let out = Command::new(h5dump)
        .args(["-A", file.to_str().unwrap()])
        .output()
        .expect("h5dump runs");
    assert!(
        out.status.success(),
        "h5dump failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    for needle in [
        "GROUP \"h5md\"",
        "ATTRIBUTE \"version\"",
        "GROUP \"author\"",
        "GROUP \"creator\"",
        "\"thicket\"",
        "GROUP \"units\"",
        "\"SI\"",
        "GROUP \"particles\"",
        "GROUP \"bead\"",
        "GROUP \"box\"",
        "ATTRIBUTE \"dimension\"",
        "ATTRIBUTE \"boundary\"",
        "\"periodic\"",
        "DATASET \"edges\"",
        "GROUP \"position\"",
        "GROUP \"image\"",
        "DATASET \"value\"",
        "DATASET \"step\"",
        "DATASET \"time\"",
        "ATTRIBUTE \"unit\"",
        "\"nm\"",
        "\"s\"",
        "GROUP \"parameters\"",
        "ATTRIBUTE \"scenario\"",
        "ATTRIBUTE \"seed\"",
    ] {
        assert!(text.contains(needle), "h5dump -A output lacks {needle}");
    }
    // The version attribute is the integer pair [1, 1].
    assert!(text.contains("(0): 1, 1"), "h5md version is not [1, 1]");
}

/// The same file through h5py: shapes, units, hard-linked step/time, and
/// positions inside the periodic box.
#[test]
fn h5py_reads_shapes_units_and_links() {
    let dir = tempdir();
    let file = small_run(dir.path());
    let script = r#"
import sys, json, h5py, numpy as np
f = h5py.File(sys.argv[1], "r")
g = f["particles/bead"]
v = g["position/value"]
out = {
  "version": f["h5md"].attrs["version"].tolist(),
  "shape": list(v.shape),
  "chunks": list(v.chunks),
  "unit": v.attrs["unit"].decode(),
  "time_unit": g["position/time"].attrs["unit"].decode(),
  "linked": g["image/step"].id == g["position/step"].id or (g["image/step"][()] == g["position/step"][()]).all(),
  "same_object": h5py.h5o.get_info(g["image/step"].id).addr == h5py.h5o.get_info(g["position/step"].id).addr,
  "inside": bool(((v[()] >= 0) & (v[()] < g["box/edges"][()])).all()),
  "steps": g["position/step"][()].tolist()[:3],
  "boundary": [b.decode() for b in g["box"].attrs["boundary"]],
  "dimension": int(g["box"].attrs["dimension"]),
}
print(json.dumps(out))
"#;
    let Some(python) = crate::outside::require(crate::outside::Tool::Python) else {
        return;
    };
    let out = std::process::Command::new(python)
        .args(["-c", script, file.to_str().unwrap()])
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["version"], serde_json::json!([1, 1]));
    // 800 steps recorded every 8: 101 frames of 50 particles.
    assert_eq!(v["shape"], serde_json::json!([101, 50, 3]));
    assert_eq!(v["unit"], "nm");
    assert_eq!(v["time_unit"], "s");
    assert_eq!(
        v["same_object"], true,
        "image/step must be a hard link to position/step"
    );
    assert_eq!(v["inside"], true);
    assert_eq!(v["steps"], serde_json::json!([0, 8, 16]));
    assert_eq!(
        v["boundary"],
        serde_json::json!(["periodic", "periodic", "periodic"])
    );
    assert_eq!(v["dimension"], 3);
}
