//! Helpers: a temporary folder, the binary, and Python for outside checks.

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

/// Runs `thicket ARGS` in `dir` and returns its output.
pub fn thicket(dir: &Path, args: &[&str]) -> Output {
    Command::new(bin())
        .args(args)
        .current_dir(dir)
        .output()
        .expect("the thicket binary runs")
}

/// Stderr as text.
pub fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// Stdout as text.
pub fn stdout(out: &Output) -> String {
    String::from_utf8_lossy(&out.stdout).into_owned()
}

/// Asserts success and returns stdout.
pub fn ok(out: &Output) -> String {
    assert!(
        out.status.success(),
        "thicket failed ({:?}):\nstdout: {}\nstderr: {}",
        out.status,
        stdout(out),
        stderr(out)
    );
    stdout(out)
}

/// A fresh temporary folder.
pub fn tempdir() -> tempfile::TempDir {
    tempfile::tempdir().expect("a temporary folder")
}

/// Runs a Python script from tests/python and parses its JSON output; None
/// when Python with h5py, numpy and scipy cannot be had (the check is skipped,
/// see tests/outside).
pub fn python_json(script: &str, args: &[&str]) -> Option<serde_json::Value> {
    let python = crate::outside::require(crate::outside::Tool::Python)?;
    let out = Command::new(python)
        .arg(repo(&format!("tests/python/{script}")))
        .args(args)
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "python3 {script} failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    Some(serde_json::from_slice(&out.stdout).expect("the script prints JSON"))
}

/// The free-diffusion scenario shipped in configs/, copied into `dir`.
pub fn free_config(dir: &Path) -> PathBuf {
    let dst = dir.join("free.toml");
    std::fs::copy(repo("configs/free.toml"), &dst).expect("configs/free.toml exists");
    dst
}

/// Reads every dataset of the trajectory as raw bytes keyed by path, to
/// compare two files dataset by dataset.
pub fn datasets(path: &Path) -> Vec<(String, Vec<u8>)> {
    let file = hdf5::File::open(path).expect("the trajectory opens");
    let mut out = Vec::new();
    collect(&file, "", &mut out);
    out.sort_by(|a, b| a.0.cmp(&b.0));
    out
}

fn collect(group: &hdf5::Group, prefix: &str, out: &mut Vec<(String, Vec<u8>)>) {
    for name in group.member_names().expect("members list") {
        let path = format!("{prefix}/{name}");
        if let Ok(ds) = group.dataset(&name) {
            let dtype = ds.dtype().expect("dtype");
            let size = dtype.size();
            let bytes: Vec<u8> = match size {
                4 if dtype.is::<f32>() => ds
                    .read_raw::<f32>()
                    .unwrap()
                    .iter()
                    .flat_map(|v| v.to_le_bytes())
                    .collect(),
                4 => ds
                    .read_raw::<i32>()
                    .unwrap()
                    .iter()
                    .flat_map(|v| v.to_le_bytes())
                    .collect(),
                8 if dtype.is::<f64>() => ds
                    .read_raw::<f64>()
                    .unwrap()
                    .iter()
                    .flat_map(|v| v.to_le_bytes())
                    .collect(),
                8 => ds
                    .read_raw::<i64>()
                    .unwrap()
                    .iter()
                    .flat_map(|v| v.to_le_bytes())
                    .collect(),
                other => panic!("{path}: unexpected element size {other}"),
            };
            out.push((path, bytes));
        } else if let Ok(g) = group.group(&name) {
            collect(&g, &path, out);
        }
    }
}
