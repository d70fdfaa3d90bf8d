//! `thicket sweep --slurm` on a real scheduler: the one-node cluster
//! ci/start-slurm.sh starts (under CI=true the tests start it; elsewhere
//! they are skipped, saying so, when no Slurm is reachable).
//!
//! The reference is the same sweep run locally in one process: sharding,
//! scheduling, killing and resubmitting must not change a single digit of
//! the summary (an exact identity: every run is fixed by its seed).

use crate::outside::{require, Tool};
use crate::support::*;
use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

/// A sweep of `free.toml` in `dir`: two bead radii × `seeds`, with `steps` steps of `count` beads.
fn write_sweep(dir: &Path, name: &str, seeds: &str, steps: u32, count: u32) {
    free_config(dir);
    std::fs::write(
        dir.join(name),
        format!(
            "scenario = \"free.toml\"\nseeds = {seeds}\ntitle = \"beads\"\n[grid]\n\"species.bead.radius_nm\" = [2.0, 4.0]\n[set]\n\"integrator.steps\" = {steps}\n\"species.bead.count\" = {count}\n\"output.record_every_steps\" = {}\n",
            steps / 50
        ),
    )
    .unwrap();
}

/// summary.json without the sweep file's path (given relative locally, absolute to the jobs).
fn summary(out: &Path) -> serde_json::Value {
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    v.as_object_mut().unwrap().remove("sweep_file");
    v
}

/// The number after `what` in the submit output, e.g. "job array 12".
fn job_id(text: &str, what: &str) -> String {
    text.split(what)
        .nth(1)
        .and_then(|rest| rest.split_whitespace().next())
        .map(|id| id.trim_end_matches(':').to_string())
        .unwrap_or_else(|| panic!("no `{what}` in:\n{text}"))
}

fn in_queue(job: &str) -> bool {
    let out = Command::new("squeue")
        .args(["-h", "-j", job, "-o", "%i"])
        .output()
        .expect("squeue runs");
    out.status.success() && !String::from_utf8_lossy(&out.stdout).trim().is_empty()
}

/// Waits until `job` has left the queue (at most 2 minutes).
fn wait_for(job: &str, out: &Path) {
    let start = Instant::now();
    while in_queue(job) {
        if start.elapsed() > Duration::from_secs(120) {
            let logs: String = std::fs::read_dir(out.join("slurm/logs"))
                .map(|d| {
                    d.flatten()
                        .map(|e| std::fs::read_to_string(e.path()).unwrap_or_default())
                        .collect()
                })
                .unwrap_or_default();
            panic!("job {job} still in the queue after 2 minutes; logs:\n{logs}");
        }
        std::thread::sleep(Duration::from_millis(100));
    }
}

fn status_count(text: &str, what: &str) -> usize {
    text.lines()
        .find_map(|l| l.strip_prefix(&format!("{what}: ")))
        .and_then(|rest| rest.split_whitespace().next())
        .and_then(|n| n.parse().ok())
        .unwrap_or_else(|| panic!("no `{what}:` line in the status:\n{text}"))
}

/// A sweep submitted through --slurm (a job array and a merge job) writes
/// the summary the same sweep writes when run locally.
#[test]
fn slurm_sweep_matches_the_local_sweep() {
    if require(Tool::Slurm).is_none() {
        return;
    }
    let dir = tempdir();
    write_sweep(dir.path(), "sw.toml", "[1, 2]", 2000, 100);
    ok(&thicket(
        dir.path(),
        &["sweep", "sw.toml", "--out", "local"],
    ));
    let submitted = ok(&thicket(
        dir.path(),
        &[
            "sweep",
            "sw.toml",
            "--out",
            "cluster",
            "--slurm",
            "--tasks",
            "3",
            "--at-once",
            "2",
            "--task-cpus",
            "1",
            "--task-memory",
            "200M",
            "--time-limit",
            "5:00",
            "--sbatch-line=--comment=thicket-test",
        ],
    ));
    let array = job_id(&submitted, "job array ");
    let merge = job_id(&submitted, "merge job ");
    let out = dir.path().join("cluster");
    let script = std::fs::read_to_string(out.join("slurm/tasks.sh")).unwrap();
    for line in [
        "#SBATCH --array=0-2%2",
        "#SBATCH --cpus-per-task=1",
        "#SBATCH --mem=200M",
        "#SBATCH --time=5:00",
        "#SBATCH --comment=thicket-test",
        "--threads \"${SLURM_CPUS_PER_TASK:-1}\"",
    ] {
        assert!(script.contains(line), "tasks.sh lacks {line}:\n{script}");
    }
    wait_for(&array, &out);
    wait_for(&merge, &out);
    assert!(
        out.join("summary.json").exists(),
        "the merge job wrote no summary; its log:\n{}",
        std::fs::read_to_string(out.join(format!("slurm/logs/merge_{merge}.out")))
            .unwrap_or_default()
    );
    assert_eq!(summary(&out), summary(&dir.path().join("local")));
    assert_eq!(
        std::fs::read_to_string(out.join("summary.csv")).unwrap(),
        std::fs::read_to_string(dir.path().join("local/summary.csv")).unwrap()
    );
    let status = ok(&thicket(
        dir.path(),
        &["sweep", "sw.toml", "--out", "cluster", "--status"],
    ));
    assert_eq!(status_count(&status, "done"), 4, "{status}");
    assert!(status.contains("summary.json: written"), "{status}");
}

/// A task cancelled mid-run leaves its run failed and the merge unstarted;
/// submitting again runs only that task's shard and completes the sweep
/// with the summary of the local run.
#[test]
fn a_killed_slurm_task_is_resubmitted_alone() {
    if require(Tool::Slurm).is_none() {
        return;
    }
    let dir = tempdir();
    // Each run takes about a second on one thread, long enough to be cancelled mid-run.
    write_sweep(dir.path(), "slow.toml", "[1]", 50_000, 1000);
    ok(&thicket(
        dir.path(),
        &["sweep", "slow.toml", "--out", "local", "--threads", "1"],
    ));
    let submit = || {
        ok(&thicket(
            dir.path(),
            &[
                "sweep",
                "slow.toml",
                "--out",
                "cluster",
                "--slurm",
                "--tasks",
                "2",
            ],
        ))
    };
    let first = submit();
    let array = job_id(&first, "job array ");
    let merge = job_id(&first, "merge job ");
    let out = dir.path().join("cluster");
    // Task 1 runs point 1: cancel it as soon as it has started.
    let started = out.join(format!("slurm/marks/{array}_1.started"));
    let t0 = Instant::now();
    while !started.exists() {
        assert!(
            t0.elapsed() < Duration::from_secs(120),
            "task 1 never started"
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    let cancelled = Command::new("scancel")
        .arg(format!("{array}_1"))
        .status()
        .expect("scancel runs");
    assert!(cancelled.success());
    wait_for(&array, &out);
    wait_for(&merge, &out);
    assert!(
        !out.join("points/p0001_s1.json").exists(),
        "the cancelled task finished its run before the cancel arrived; the test needs longer runs"
    );
    assert!(
        !out.join("summary.json").exists(),
        "the merge ran after a failed task"
    );
    let status = ok(&thicket(
        dir.path(),
        &["sweep", "slow.toml", "--out", "cluster", "--status"],
    ));
    assert_eq!(status_count(&status, "done"), 1, "{status}");
    assert_eq!(status_count(&status, "failed"), 1, "{status}");
    assert!(status.contains("p0001_s1"), "{status}");

    let second = submit();
    assert!(
        second.contains("1 task(s) for 1 of 2 "),
        "the resubmission runs only the failed run:\n{second}"
    );
    let tasks = std::fs::read_to_string(out.join("slurm/tasks.sh")).unwrap();
    assert!(tasks.contains("#SBATCH --array=1\n"), "{tasks}");
    let array2 = job_id(&second, "job array ");
    let merge2 = job_id(&second, "merge job ");
    wait_for(&array2, &out);
    wait_for(&merge2, &out);
    assert_eq!(summary(&out), summary(&dir.path().join("local")));
}

/// A run split into 3 parts of its ensemble through --slurm: the merge job's
/// joined analysis gives the D_eff and MSD of the same run made whole locally.
#[test]
fn a_split_ensemble_runs_through_slurm() {
    if require(Tool::Slurm).is_none() {
        return;
    }
    let dir = tempdir();
    let d = dir.path();
    std::fs::write(d.join("s.toml"), crate::ensemble::OBSTACLES).unwrap();
    ok(&thicket(d, &["run", "s.toml", "--out", "whole.h5"]));
    let whole: serde_json::Value =
        serde_json::from_str(&ok(&thicket(d, &["analyze", "whole.h5", "--json"]))).unwrap();
    let submitted = ok(&thicket(
        d,
        &["run", "s.toml", "--out", "parts", "--slurm", "--tasks", "3"],
    ));
    let out = d.join("parts");
    wait_for(&job_id(&submitted, "job array "), &out);
    wait_for(&job_id(&submitted, "merge job "), &out);
    let text = std::fs::read_to_string(out.join("analysis.json")).unwrap_or_else(|_| {
        panic!(
            "the merge job wrote no analysis.json; logs in {}",
            out.join("slurm/logs").display()
        )
    });
    let joined: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(joined["particles"], whole["particles"]);
    assert_eq!(joined["d_eff_m2_per_s"], whole["d_eff_m2_per_s"]);
    assert_eq!(
        joined["curves"]["msd_axes_nm2"],
        whole["curves"]["msd_axes_nm2"]
    );
    let status = ok(&thicket(
        d,
        &["run", "s.toml", "--out", "parts", "--status"],
    ));
    assert_eq!(status_count(&status, "done"), 3, "{status}");
}

/// Without a scheduler: --write-only writes both job scripts with the
/// options asked for, and bad options are refused before any file is made.
#[test]
fn slurm_scripts_are_written_and_bad_options_refused() {
    let dir = tempdir();
    let d = dir.path();
    write_sweep(d, "sw.toml", "[1, 2]", 2000, 100);
    let printed = ok(&thicket(
        d,
        &[
            "sweep",
            "sw.toml",
            "--out",
            "o",
            "--slurm",
            "--write-only",
            "--tasks",
            "2",
            "--at-once",
            "1",
            "--task-cpus",
            "3",
            "--task-memory",
            "1G",
            "--time-limit",
            "1-00:00",
            "--partition",
            "short",
            "--sbatch-line=--qos=low",
        ],
    ));
    assert!(
        printed.contains("--dependency=afterok:$job --kill-on-invalid-dep=yes"),
        "{printed}"
    );
    let tasks = std::fs::read_to_string(d.join("o/slurm/tasks.sh")).unwrap();
    for line in [
        "#SBATCH --array=0-1%1\n",
        "#SBATCH --cpus-per-task=3\n",
        "#SBATCH --mem=1G\n",
        "#SBATCH --time=1-00:00\n",
        "#SBATCH --partition=short\n",
        "#SBATCH --qos=low\n",
        "--shard \"$((SLURM_ARRAY_TASK_ID + 1))/2\"",
    ] {
        assert!(tasks.contains(line), "tasks.sh lacks {line:?}:\n{tasks}");
    }
    let merge = std::fs::read_to_string(d.join("o/slurm/merge.sh")).unwrap();
    assert!(merge.contains(" --merge"), "{merge}");
    assert!(!d.join("o/summary.json").exists());

    let refused = |args: &[&str], needle: &str| {
        let mut all = vec!["sweep", "sw.toml", "--out", "bad", "--slurm"];
        all.extend_from_slice(args);
        let out = thicket(d, &all);
        let err = stderr(&out);
        assert_eq!(out.status.code(), Some(2), "{all:?}: {err}");
        assert!(
            err.contains(needle),
            "{all:?}: message lacks {needle:?}: {err}"
        );
        assert!(!d.join("bad").exists(), "{all:?} made the output folder");
    };
    refused(&["--time-limit", "2h"], "--time-limit 2h");
    refused(&["--task-memory", "lots"], "--task-memory lots");
    refused(&["--tasks", "5"], "give 1 to 4 tasks");
    refused(&["--partition", "a b"], "--partition");
    refused(&["--shard", "1/2"], "--shard do not go with --slurm");
    refused(&["--sbatch-line", "account=x"], "--sbatch-line");
}
