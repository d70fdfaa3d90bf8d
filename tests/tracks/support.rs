//! Helpers: a temporary folder, the binary, scenarios written inline, and the
//! Python outside checks in tests/tracks/check_tracks.py.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

/// Path of the built `thicket` binary.
pub fn bin() -> PathBuf {
    PathBuf::from(env!("CARGO_BIN_EXE_thicket"))
}

/// Path of a file in the repository.
pub fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

/// Runs `thicket ARGS` in `dir`.
pub fn thicket(dir: &Path, args: &[&str]) -> Output {
    Command::new(bin())
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the thicket binary runs")
}

/// Asserts success and returns stdout.
pub fn ok(out: &Output) -> String {
    assert!(
        out.status.success(),
        "thicket failed ({:?}):\nstdout: {}\nstderr: {}",
        out.status,
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// Asserts failure with exit code 2 and returns stderr.
pub fn fails(out: &Output) -> String {
    assert_eq!(
        out.status.code(),
        Some(2),
        "expected a refusal, got {:?}: {}",
        out.status,
        String::from_utf8_lossy(&out.stdout)
    );
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// A fresh temporary folder.
pub fn tempdir() -> tempfile::TempDir {
    tempfile::tempdir().expect("a temporary folder")
}

/// Writes `scenario.toml` in `dir`: one free species in a periodic box, one
/// integrator step per recorded position, and the given `[camera]` lines.
pub fn write_scenario(
    dir: &Path,
    edges_nm: [f64; 3],
    count: usize,
    d_m2_per_s: f64,
    dt_s: f64,
    steps: u64,
    camera: &str,
) -> PathBuf {
    let text = format!(
        "seed = 4242\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{}, {}, {}]\n\
         [[species]]\nname = \"dot\"\nradius_nm = 10.0\ncount = {count}\ndiffusivity_m2_per_s = {d_m2_per_s:e}\n\
         [integrator]\ndt_s = {dt_s:e}\nsteps = {steps}\n[output]\nrecord_every_steps = 1\n[camera]\n{camera}\n",
        edges_nm[0], edges_nm[1], edges_nm[2]
    );
    let path = dir.join("scenario.toml");
    std::fs::write(&path, text).expect("the scenario is written");
    path
}

/// Runs tests/tracks/check_tracks.py and parses its JSON output; None when
/// Python with h5py, numpy and scipy cannot be had (the check is skipped,
/// see tests/outside).
pub fn python(args: &[&str]) -> Option<serde_json::Value> {
    let python = crate::outside::require(crate::outside::Tool::Python)?;
    let out = Command::new(python)
        .arg(repo("tests/tracks/check_tracks.py"))
        .args(args)
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "check_tracks.py {args:?} failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    Some(serde_json::from_slice(&out.stdout).expect("the script prints JSON"))
}
