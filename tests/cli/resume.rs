//! SIGINT leaves a readable file and a checkpoint; --resume finishes it to the
//! same datasets as an uninterrupted run.

use crate::support::*;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

#[test]
fn interrupted_run_resumes_to_the_uninterrupted_result() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    let cfg = cfg.to_str().unwrap();
    // Long enough (several seconds) that the signal lands mid-run.
    let sets = [
        "--set",
        "species.bead.count=20000",
        "--set",
        "integrator.steps=40000",
        "--set",
        "output.record_every_steps=400",
        "--set",
        "output.precision=f64",
    ];
    let mut args = vec!["run", cfg, "--out", "cut.h5", "--threads", "2"];
    args.extend(sets);
    let child = Command::new(bin())
        .args(&args)
        .current_dir(dir.path())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Wait until a few frames are on disk, then interrupt.
    let started = Instant::now();
    let file = dir.path().join("cut.h5");
    loop {
        std::thread::sleep(Duration::from_millis(200));
        if file.exists() && std::fs::metadata(&file).map(|m| m.len()).unwrap_or(0) > 3_000_000 {
            break;
        }
        assert!(
            started.elapsed() < Duration::from_secs(120),
            "the run wrote nothing in two minutes"
        );
    }
    let status = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(status.success());
    let out = child.wait_with_output().unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(
        out.status.code(),
        Some(130),
        "expected the interrupt exit code; stderr: {err}"
    );
    assert!(
        err.contains("--resume"),
        "the message says how to resume: {err}"
    );
    assert!(
        dir.path().join("cut.h5.ckpt").exists(),
        "a checkpoint is left behind"
    );

    // The partial file opens in h5py with consistent, non-empty datasets.
    let probe = "import sys,h5py; f=h5py.File(sys.argv[1],'r'); g=f['particles/bead']; print(g['position/value'].shape[0], g['position/step'].shape[0], f['parameters/thicket'].attrs['frames_planned'])";
    if let Some(python) = crate::outside::require(crate::outside::Tool::Python) {
        let p = Command::new(python)
            .args(["-c", probe, file.to_str().unwrap()])
            .output()
            .unwrap();
        assert!(
            p.status.success(),
            "h5py cannot open the interrupted file: {}",
            String::from_utf8_lossy(&p.stderr)
        );
        let nums: Vec<i64> = String::from_utf8_lossy(&p.stdout)
            .split_whitespace()
            .map(|s| s.parse().unwrap())
            .collect();
        assert!(
            nums[0] >= 1 && nums[0] < nums[2],
            "partial file has {} of {} frames",
            nums[0],
            nums[2]
        );
    }

    // Resuming with a different scenario is refused, naming the difference, and leaves the file alone.
    let mut wrong = vec![
        "run",
        cfg,
        "--out",
        "cut.h5",
        "--resume",
        "--set",
        "medium.temperature_K=310.0",
    ];
    wrong.extend(sets);
    let out = thicket(dir.path(), &wrong);
    assert_eq!(out.status.code(), Some(2));
    let msg = stderr(&out);
    assert!(
        msg.contains("cut.h5")
            && msg.contains("scenario mismatch")
            && msg.contains("temperature_K"),
        "{msg}"
    );

    let mut resume = vec!["run", cfg, "--out", "cut.h5", "--resume", "--threads", "1"];
    resume.extend(sets);
    ok(&thicket(dir.path(), &resume));
    assert!(
        !dir.path().join("cut.h5.ckpt").exists(),
        "the checkpoint is removed after completion"
    );

    let mut whole = vec!["run", cfg, "--out", "whole.h5"];
    whole.extend(sets);
    ok(&thicket(dir.path(), &whole));
    let a = datasets(&file);
    let b = datasets(&dir.path().join("whole.h5"));
    assert_eq!(a.len(), b.len());
    for ((pa, da), (pb, db)) in a.iter().zip(&b) {
        assert_eq!(pa, pb);
        assert!(
            da == db,
            "{pa} differs between the resumed and the uninterrupted run"
        );
    }
}
