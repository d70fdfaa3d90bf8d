//! Outside checks: tools from outside the project that read our files —
//! Python with h5py, numpy, scipy and pandas, and h5dump (hdf5-tools) — or
//! run our jobs: a one-node Slurm cluster (ci/start-slurm.sh).
//!
//! Each is provisioned when it can be: Python packages into a virtual
//! environment under target/ from the package registry (h5py's wheels bring
//! their own HDF5 library, never seen by the build), h5dump through apt when
//! running as root with CI=true or THICKET_TEST_APT=1. A check whose tool
//! cannot be had prints one line saying so and why, and is skipped — except
//! under CI=true, where it fails. Every check is logged for the summary the
//! last test binary prints (hdf5/tests/zz_outside_summary.rs).
#![allow(dead_code)]

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

/// A tool an outside check needs.
#[derive(Debug, Clone, Copy)]
pub enum Tool {
    /// A Python interpreter that imports h5py, numpy, scipy and pandas.
    Python,
    /// The h5dump command.
    H5dump,
    /// A Slurm cluster with an idle node (the path is sbatch).
    Slurm,
}

/// Python packages the outside checks import (pandas reads our CSV tables).
const PACKAGES: [&str; 4] = ["h5py", "numpy", "scipy", "pandas"];

fn ci() -> bool {
    std::env::var("CI").is_ok_and(|v| v == "true" || v == "1")
}

fn target_tmp() -> PathBuf {
    PathBuf::from(env!("CARGO_TARGET_TMPDIR"))
}

/// The log of this `cargo test` run: test binaries are children of one cargo
/// process, so its id names the run.
pub fn log_path() -> PathBuf {
    target_tmp()
        .join("outside-checks")
        .join(format!("{}.log", std::os::unix::process::parent_id()))
}

fn record(line: &str) {
    let path = log_path();
    let _ = std::fs::create_dir_all(path.parent().expect("a folder"));
    if let Ok(mut f) = std::fs::OpenOptions::new()
        .create(true)
        .append(true)
        .open(&path)
    {
        let _ = writeln!(f, "{line}");
    }
}

fn succeeds(cmd: &mut Command) -> bool {
    cmd.output().is_ok_and(|o| o.status.success())
}

fn is_root() -> bool {
    Command::new("id")
        .arg("-u")
        .output()
        .is_ok_and(|o| String::from_utf8_lossy(&o.stdout).trim() == "0")
}

fn apt_allowed() -> bool {
    is_root() && (ci() || std::env::var("THICKET_TEST_APT").is_ok_and(|v| v == "1"))
}

fn apt_install(packages: &[&str]) -> Result<(), String> {
    let run = |args: &[&str]| {
        Command::new("apt-get")
            // Wait for a dpkg lock another install holds rather than fail.
            .args(["-o", "DPkg::Lock::Timeout=300"])
            .args(args)
            .env("DEBIAN_FRONTEND", "noninteractive")
            .output()
            .map_err(|e| format!("apt-get did not run: {e}"))
            .and_then(|o| {
                if o.status.success() {
                    Ok(())
                } else {
                    Err(format!(
                        "apt-get {} failed: {}",
                        args.join(" "),
                        last_line(&o.stderr)
                    ))
                }
            })
    };
    run(&["update", "-qq"])?;
    let mut args = vec!["install", "-y", "-qq"];
    args.extend_from_slice(packages);
    run(&args)
}

fn last_line(bytes: &[u8]) -> String {
    String::from_utf8_lossy(bytes)
        .lines()
        .rev()
        .find(|l| !l.trim().is_empty())
        .unwrap_or("")
        .trim()
        .to_owned()
}

fn imports_packages(python: &Path) -> bool {
    succeeds(Command::new(python).args(["-c", &format!("import {}", PACKAGES.join(", "))]))
}

/// Python with the packages: the system's, else the one under target/
/// (made on first use). THICKET_TEST_VENV=1 skips the system's, to test the
/// provisioning itself.
fn provision_python() -> Result<PathBuf, String> {
    let system = PathBuf::from("python3");
    let force_venv = std::env::var("THICKET_TEST_VENV").is_ok_and(|v| v == "1");
    if !force_venv && imports_packages(&system) {
        return Ok(system);
    }
    let venv = target_tmp().join("outside-venv");
    let python = venv.join("bin").join("python3");
    if imports_packages(&python) {
        return Ok(python);
    }
    if !succeeds(Command::new("python3").arg("--version")) {
        return Err("python3 is not installed".into());
    }
    // Built beside its final place and renamed, so a half-made one is never used.
    let staging = target_tmp().join(format!("outside-venv.{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&staging);
    let make = || succeeds(Command::new("python3").arg("-m").arg("venv").arg(&staging));
    if !make() {
        let _ = std::fs::remove_dir_all(&staging);
        if !apt_allowed() {
            return Err(
                "python3 cannot make a virtual environment (apt-get install python3-venv, or set THICKET_TEST_APT=1 to let the tests install it as root)"
                    .into(),
            );
        }
        apt_install(&["python3-venv"])?;
        if !make() {
            return Err("python3 -m venv fails even with python3-venv installed".into());
        }
    }
    let staged = staging.join("bin").join("python3");
    let out = Command::new(&staged)
        .args([
            "-m",
            "pip",
            "install",
            "--quiet",
            "--disable-pip-version-check",
        ])
        .args(PACKAGES)
        .output()
        .map_err(|e| format!("pip did not run: {e}"))?;
    if !out.status.success() {
        let _ = std::fs::remove_dir_all(&staging);
        return Err(format!(
            "pip could not install {} from the package registry: {}",
            PACKAGES.join(", "),
            last_line(&out.stderr)
        ));
    }
    if std::fs::rename(&staging, &venv).is_err() {
        // Another run finished one first.
        let _ = std::fs::remove_dir_all(&staging);
    }
    if imports_packages(&python) {
        Ok(python)
    } else {
        Err(format!(
            "the virtual environment in {} does not import {}",
            venv.display(),
            PACKAGES.join(", ")
        ))
    }
}

fn provision_h5dump() -> Result<PathBuf, String> {
    let h5dump = PathBuf::from("h5dump");
    if succeeds(Command::new(&h5dump).arg("--version")) {
        return Ok(h5dump);
    }
    if !apt_allowed() {
        return Err(
            "h5dump is not installed (apt-get install hdf5-tools, or set THICKET_TEST_APT=1 to let the tests install it as root)"
                .into(),
        );
    }
    apt_install(&["hdf5-tools"])?;
    if succeeds(Command::new(&h5dump).arg("--version")) {
        Ok(h5dump)
    } else {
        Err("h5dump is missing even after installing hdf5-tools".into())
    }
}

fn slurm_node_up() -> bool {
    // Without its configuration file sinfo retries for a minute before giving up.
    let conf = std::env::var_os("SLURM_CONF")
        .map_or_else(|| PathBuf::from("/etc/slurm/slurm.conf"), PathBuf::from);
    if !conf.exists() {
        return false;
    }
    // An unreachable controller is given 20 s, not sinfo's own retries.
    Command::new("timeout")
        .args(["20", "sinfo", "-h", "-N", "-o", "%T"])
        .output()
        .is_ok_and(|o| {
            o.status.success()
                && String::from_utf8_lossy(&o.stdout)
                    .lines()
                    .any(|l| ["idle", "mixed", "allocated"].contains(&l.trim()))
        })
}

/// A reachable Slurm cluster, else (as root, under CI=true or
/// THICKET_TEST_APT=1) the one-node cluster ci/start-slurm.sh starts.
fn provision_slurm() -> Result<PathBuf, String> {
    if slurm_node_up() {
        return Ok(PathBuf::from("sbatch"));
    }
    if !apt_allowed() {
        return Err(
            "no Slurm cluster is reachable (sinfo shows no idle node); run ci/start-slurm.sh as root to start a one-node cluster, or set THICKET_TEST_APT=1 to let the tests start it"
                .into(),
        );
    }
    // The script lives at the workspace root, above whichever crate runs the test.
    let script = Path::new(env!("CARGO_MANIFEST_DIR"))
        .ancestors()
        .map(|d| d.join("ci").join("start-slurm.sh"))
        .find(|p| p.exists())
        .ok_or("ci/start-slurm.sh is not found above the crate")?;
    let out = Command::new("bash")
        .arg(&script)
        .output()
        .map_err(|e| format!("{} did not run: {e}", script.display()))?;
    if !out.status.success() {
        return Err(format!(
            "{} failed: {}",
            script.display(),
            last_line(&out.stderr)
        ));
    }
    if slurm_node_up() {
        Ok(PathBuf::from("sbatch"))
    } else {
        Err(format!(
            "{} ended but sinfo shows no idle node",
            script.display()
        ))
    }
}

fn provisioned(tool: Tool) -> &'static Result<PathBuf, String> {
    static PYTHON: OnceLock<Result<PathBuf, String>> = OnceLock::new();
    static H5DUMP: OnceLock<Result<PathBuf, String>> = OnceLock::new();
    static SLURM: OnceLock<Result<PathBuf, String>> = OnceLock::new();
    match tool {
        Tool::Python => PYTHON.get_or_init(provision_python),
        Tool::H5dump => H5DUMP.get_or_init(provision_h5dump),
        Tool::Slurm => SLURM.get_or_init(provision_slurm),
    }
}

/// The tool for the outside check running on this thread (named after the
/// test), or None after printing why the check is skipped. Under CI=true a
/// missing tool fails the check instead.
pub fn require(tool: Tool) -> Option<PathBuf> {
    let check = std::thread::current()
        .name()
        .unwrap_or("an outside check")
        .to_owned();
    match provisioned(tool) {
        Ok(path) => {
            record(&format!("ran\t{check}"));
            Some(path.clone())
        }
        Err(reason) => {
            assert!(
                !ci(),
                "outside check {check} cannot run under CI=true: {reason}"
            );
            // Straight to stderr: the test harness does not capture it, so the line shows.
            let _ = writeln!(
                std::io::stderr(),
                "outside check skipped: {check}: {reason}"
            );
            record(&format!("skipped\t{check}\t{reason}"));
            None
        }
    }
}
