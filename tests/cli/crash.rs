//! Crash safety: SIGKILL at any moment leaves a readable file with every
//! flushed frame and a checkpoint that resumes to the uninterrupted result;
//! damaged checkpoints are refused without touching any file; one output has
//! one writer at a time.

use crate::outside::{require, Tool};
use crate::support::*;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

/// Small run for the kill test: 2000 particles, 200000 steps, 201 frames,
/// about five seconds on one thread; checkpoints every 20 ms so kills land
/// between, during and right after flushes.
const KILL_SETS: [&str; 8] = [
    "--set",
    "integrator.steps=200000",
    "--set",
    "output.record_every_steps=1000",
    "--set",
    "output.precision=f64",
    "--set",
    "output.checkpoint_interval_s=0.02",
];

fn spawn(dir: &Path, args: &[&str]) -> Child {
    Command::new(bin())
        .args(args)
        .current_dir(dir)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the thicket binary starts")
}

fn sigkill(child: &mut Child) {
    // Child::kill sends SIGKILL on Unix: no handler runs, nothing is tidied.
    let _ = child.kill();
    let _ = child.wait();
}

/// Frames and step recorded in a checkpoint's header (format in engine/src/trajectory.rs).
fn checkpoint_header(path: &Path) -> Option<(u64, u64)> {
    let b = std::fs::read(path).ok()?;
    let word = |at: usize| Some(u64::from_le_bytes(b.get(at..at + 8)?.try_into().ok()?));
    Some((word(8)?, word(16)?))
}

/// FNV-1a 64 (the checkpoint's checksum), to forge well-formed damaged checkpoints.
fn fnv1a64(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

fn reseal(body: &mut Vec<u8>) {
    let sum = fnv1a64(body);
    body.extend_from_slice(&sum.to_le_bytes());
}

/// Deterministic uniform numbers in [0, 1) (splitmix64) for the kill moments.
struct Moments(u64);
impl Moments {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
    }
}

#[test]
fn sigkill_at_twenty_moments_leaves_readable_files_that_resume_bit_identically() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    let cfg = cfg.to_str().unwrap();
    let fresh: Vec<&str> = ["run", cfg, "--out", "cut.h5", "--threads", "1", "--force"]
        .into_iter()
        .chain(KILL_SETS)
        .collect();
    let resume: Vec<&str> = ["run", cfg, "--out", "cut.h5", "--threads", "1", "--resume"]
        .into_iter()
        .chain(KILL_SETS)
        .collect();
    let file = dir.path().join("cut.h5");
    let ckpt = dir.path().join("cut.h5.ckpt");
    let mut moments = Moments(20261202);
    let mut snapshots = Vec::new();
    let mut before_first_frame = 0;
    for kill in 0..20 {
        // Resume when there is something to resume; else start again.
        let args = if ckpt.exists() { &resume } else { &fresh };
        let mut child = spawn(dir.path(), args);
        // Each attempt advances ~0.2 s on average, so twenty fit in one run.
        let wait = Duration::from_secs_f64(0.4 * moments.next());
        std::thread::sleep(wait);
        if child.try_wait().unwrap().is_some() {
            let out = child.wait_with_output().unwrap();
            panic!("attempt {kill} ended before its kill: {}", stderr(&out));
        }
        sigkill(&mut child);
        match checkpoint_header(&ckpt) {
            // A checkpoint is written only after its frames are flushed.
            Some((frames, step)) => {
                let copy = dir.path().join(format!("kill{kill}.h5"));
                std::fs::copy(&file, &copy).unwrap();
                let on_disk = datasets(&copy);
                let steps = on_disk
                    .iter()
                    .find(|(p, _)| p == "/particles/bead/position/step")
                    .map(|(_, b)| b.len() as u64 / 8)
                    .unwrap();
                assert!(
                    steps >= frames,
                    "kill {kill} at {wait:?}: the file holds {steps} frames, the checkpoint (step {step}) {frames}"
                );
                snapshots.push((copy, frames));
            }
            None => before_first_frame += 1,
        }
    }
    // Finish the interrupted run, then compare with one that was never interrupted.
    let args = if ckpt.exists() { &resume } else { &fresh };
    ok(&thicket(dir.path(), args));
    assert!(!ckpt.exists(), "the checkpoint is removed after completion");
    assert!(
        !dir.path().join("cut.h5.lock").exists(),
        "the lock is released after completion"
    );
    let whole: Vec<&str> = ["run", cfg, "--out", "whole.h5", "--threads", "1"]
        .into_iter()
        .chain(KILL_SETS)
        .collect();
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
    eprintln!(
        "kill test: {} kills after the first flush, {before_first_frame} before it; resumed run bit-identical",
        snapshots.len()
    );
    assert!(
        snapshots.len() >= 10,
        "most kills should land after the first frame ({} did)",
        snapshots.len()
    );

    // Outside check: every killed file opens in h5py (the reference HDF5
    // library) with at least the checkpoint's frames, steps on the record
    // grid and finite positions.
    if let Some(python) = require(Tool::Python) {
        let probe = r#"
import sys, h5py, numpy as np
for path, frames in zip(sys.argv[1::2], sys.argv[2::2]):
    with h5py.File(path, "r") as f:
        g = f["particles/bead"]
        v = g["position/value"][:]
        s = g["position/step"][:]
        n = min(len(s), v.shape[0])
        assert n >= int(frames), (path, n, frames)
        assert (s[:n] == 1000 * np.arange(n)).all(), path
        assert np.isfinite(v[:n]).all(), path
print(len(sys.argv[1::2]))
"#;
        let mut cmd = Command::new(python);
        cmd.args(["-c", probe]);
        for (p, frames) in &snapshots {
            cmd.arg(p).arg(frames.to_string());
        }
        let out = cmd.output().unwrap();
        assert!(
            out.status.success(),
            "h5py cannot read a killed file: {}",
            String::from_utf8_lossy(&out.stderr)
        );
    }
    if let Some(h5dump) = require(Tool::H5dump) {
        for (p, _) in &snapshots {
            let out = Command::new(&h5dump).arg("-H").arg(p).output().unwrap();
            assert!(out.status.success(), "h5dump cannot read {}", p.display());
        }
    }
}

/// An interrupted run (SIGKILL after a checkpoint past step 0) in `dir`;
/// returns the config path.
fn interrupted_run(dir: &Path) -> String {
    let cfg = free_config(dir);
    let cfg = cfg.to_str().unwrap().to_string();
    let mut child = spawn(
        dir,
        &[
            "run",
            &cfg,
            "--out",
            "cut.h5",
            "--threads",
            "1",
            "--set",
            "integrator.steps=400000",
            "--set",
            "output.record_every_steps=200",
            "--set",
            "output.checkpoint_interval_s=0.05",
        ],
    );
    let started = Instant::now();
    let ckpt = dir.join("cut.h5.ckpt");
    while checkpoint_header(&ckpt).is_none_or(|(frames, _)| frames < 3) {
        std::thread::sleep(Duration::from_millis(20));
        assert!(started.elapsed() < Duration::from_secs(60), "no checkpoint");
    }
    sigkill(&mut child);
    cfg
}

fn resume_args(cfg: &str) -> Vec<&str> {
    vec![
        "run",
        cfg,
        "--out",
        "cut.h5",
        "--resume",
        "--set",
        "integrator.steps=400000",
        "--set",
        "output.record_every_steps=200",
        "--set",
        "output.checkpoint_interval_s=0.05",
    ]
}

#[test]
fn damaged_checkpoints_are_refused_and_change_no_file() {
    let dir = tempdir();
    let cfg = interrupted_run(dir.path());
    let ckpt = dir.path().join("cut.h5.ckpt");
    let file = dir.path().join("cut.h5");
    let good = std::fs::read(&ckpt).unwrap();
    let body = &good[..good.len() - 8];
    let n = u64::from_le_bytes(body[24..32].try_into().unwrap()) as usize;
    let toml_len = u64::from_le_bytes(body[32..40].try_into().unwrap()) as usize;
    let particles = 40 + toml_len;
    let rngs = particles + n * 36;

    let mut cases: Vec<(&str, Vec<u8>, &str)> = Vec::new();
    cases.push(("truncated", good[..good.len() / 2].to_vec(), "damaged"));
    let mut flipped = good.clone();
    flipped[particles + 100] ^= 0x5a;
    cases.push(("flipped byte", flipped, "checksum"));
    let mut zero = body.to_vec();
    zero[rngs..rngs + 32].fill(0);
    reseal(&mut zero);
    cases.push(("zero generator state", zero, "all-zero generator state"));
    let mut nan = body.to_vec();
    nan[particles..particles + 8].copy_from_slice(&f64::NAN.to_le_bytes());
    reseal(&mut nan);
    cases.push(("non-finite position", nan, "non-finite position"));
    let mut far = body.to_vec();
    far[particles..particles + 8].copy_from_slice(&1e12f64.to_le_bytes());
    reseal(&mut far);
    cases.push(("position outside the box", far, "outside the box"));
    // One particle fewer, consistently sized and sealed.
    let mut fewer = Vec::new();
    fewer.extend_from_slice(&body[..24]);
    fewer.extend_from_slice(&(n as u64 - 1).to_le_bytes());
    fewer.extend_from_slice(&body[32..particles]);
    fewer.extend_from_slice(&body[particles + 24..particles + n * 24]);
    fewer.extend_from_slice(&body[particles + n * 24 + 12..rngs]);
    fewer.extend_from_slice(&body[rngs + 32..]);
    reseal(&mut fewer);
    cases.push((
        "wrong particle count",
        fewer,
        "particles but the scenario has",
    ));
    // Zero frames: obeyed, it would delete frames already on disk.
    let mut frames = body.to_vec();
    frames[8..16].copy_from_slice(&0u64.to_le_bytes());
    reseal(&mut frames);
    cases.push(("wrong frame count", frames, "frames"));

    let h5_before = std::fs::read(&file).unwrap();
    for (what, bytes, says) in cases {
        std::fs::write(&ckpt, &bytes).unwrap();
        let out = thicket(dir.path(), &resume_args(&cfg));
        let msg = stderr(&out);
        assert_eq!(out.status.code(), Some(2), "{what}: {msg}");
        assert!(
            msg.contains("cut.h5.ckpt") && msg.contains(says),
            "{what}: the message names the checkpoint and says `{says}`: {msg}"
        );
        assert!(
            std::fs::read(&file).unwrap() == h5_before,
            "{what}: the trajectory was changed"
        );
        assert!(
            std::fs::read(&ckpt).unwrap() == bytes,
            "{what}: the checkpoint was changed"
        );
    }
    // The undamaged checkpoint still resumes.
    std::fs::write(&ckpt, &good).unwrap();
    let mut child = spawn(dir.path(), &resume_args(&cfg));
    std::thread::sleep(Duration::from_millis(300));
    assert!(
        child.try_wait().unwrap().is_none(),
        "the resumed run is running"
    );
    sigkill(&mut child);
}

#[test]
fn a_second_run_on_one_output_is_refused_even_with_force() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    let cfg = cfg.to_str().unwrap();
    let long = [
        "--set",
        "integrator.steps=4000000",
        "--set",
        "output.record_every_steps=2000",
    ];
    let first: Vec<&str> = ["run", cfg, "--out", "one.h5", "--threads", "1"]
        .into_iter()
        .chain(long)
        .collect();
    let mut child = spawn(dir.path(), &first);
    let started = Instant::now();
    while !dir.path().join("one.h5.ckpt").exists() {
        std::thread::sleep(Duration::from_millis(20));
        assert!(started.elapsed() < Duration::from_secs(60), "no checkpoint");
    }
    for extra in [&["--force"][..], &["--resume"][..]] {
        let args: Vec<&str> = first.iter().copied().chain(extra.iter().copied()).collect();
        let out = thicket(dir.path(), &args);
        let msg = stderr(&out);
        assert_eq!(out.status.code(), Some(2), "{extra:?}: {msg}");
        assert!(
            msg.contains("one.h5") && msg.contains("another thicket run"),
            "{extra:?}: {msg}"
        );
        assert!(
            msg.contains(&child.id().to_string()),
            "the message names the running pid: {msg}"
        );
    }
    assert!(
        child.try_wait().unwrap().is_none(),
        "the first run is unharmed and still running"
    );
    sigkill(&mut child);
    // The kernel released the killed run's lock: --force now proceeds.
    let args: Vec<&str> = ["run", cfg, "--out", "one.h5", "--force"]
        .into_iter()
        .chain([
            "--set",
            "integrator.steps=2000",
            "--set",
            "output.record_every_steps=200",
        ])
        .collect();
    ok(&thicket(dir.path(), &args));
}

#[test]
fn frames_reach_the_disk_within_seconds_by_default() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    let cfg = cfg.to_str().unwrap();
    // Default checkpoint interval (5 s); a frame every ~0.05 s of computing.
    let mut child = spawn(
        dir.path(),
        &[
            "run",
            cfg,
            "--out",
            "live.h5",
            "--threads",
            "1",
            "--set",
            "integrator.steps=4000000",
            "--set",
            "output.record_every_steps=2000",
        ],
    );
    let ckpt = dir.path().join("live.h5.ckpt");
    let started = Instant::now();
    std::thread::sleep(Duration::from_secs(7));
    let header = checkpoint_header(&ckpt);
    let elapsed = started.elapsed();
    sigkill(&mut child);
    let (frames, step) = header.expect("a checkpoint exists");
    assert!(
        frames > 1 && step > 0,
        "after {elapsed:?} only {frames} frames (step {step}) are on disk"
    );
    let on_disk = datasets(&dir.path().join("live.h5"));
    let steps = on_disk
        .iter()
        .find(|(p, _)| p == "/particles/bead/position/step")
        .map(|(_, b)| b.len() as u64 / 8)
        .unwrap();
    assert!(steps >= frames, "the file holds {steps} of {frames} frames");
}

/// Generated damage (a fixed seed): 30 checkpoints, each truncated at a
/// random length or with 1–4 random bytes replaced, half of them resealed
/// with a valid checksum so the checks behind it are reached too. Every
/// resume either refuses with exit 2, naming the checkpoint and changing no
/// file, or (a resealed change the checks accept, e.g. in padding) finishes
/// with exit 0; none panics, aborts or hangs.
#[test]
fn generated_checkpoint_damage_never_panics_or_changes_files_when_refused() {
    let dir = tempdir();
    let cfg = interrupted_run(dir.path());
    let ckpt = dir.path().join("cut.h5.ckpt");
    let file = dir.path().join("cut.h5");
    let good = std::fs::read(&ckpt).unwrap();
    let h5_before = std::fs::read(&file).unwrap();
    let mut r = Moments(20261202);
    let (mut refused, mut accepted) = (0, 0);
    for case in 0..30 {
        let mut bytes = if case % 3 == 0 {
            good[..(r.next() * good.len() as f64) as usize].to_vec()
        } else {
            let mut b = good.clone();
            let count = 1 + (r.next() * 4.0) as usize;
            for _ in 0..count {
                let at = ((r.next() * b.len() as f64) as usize).min(b.len() - 1);
                b[at] = (r.next() * 256.0) as u8;
            }
            b
        };
        let resealed = case % 2 == 1 && bytes.len() > 8;
        if resealed {
            bytes.truncate(bytes.len() - 8);
            reseal(&mut bytes);
        }
        if bytes == good {
            continue;
        }
        std::fs::write(&ckpt, &bytes).unwrap();
        let out = thicket(dir.path(), &resume_args(&cfg));
        let msg = stderr(&out);
        assert!(
            !msg.contains("panicked") && out.status.code().is_some(),
            "case {case}: {msg}"
        );
        if out.status.code() == Some(2) {
            refused += 1;
            assert!(msg.contains("cut.h5.ckpt"), "case {case}: {msg}");
            assert!(
                std::fs::read(&file).unwrap() == h5_before,
                "case {case}: a refusal changed the trajectory"
            );
        } else {
            assert_eq!(out.status.code(), Some(0), "case {case}: {msg}");
            accepted += 1;
            // The run finished: put the interrupted state back for the next case.
            std::fs::write(&file, &h5_before).unwrap();
        }
    }
    assert!(refused >= 20, "refused {refused}, accepted {accepted}");
}
