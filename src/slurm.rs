//! `thicket sweep --slurm`: a sweep as a Slurm job array (one task per
//! shard) and a merge job that runs once every task has succeeded, and
//! `--status`, which reports every run of the sweep as done, queued,
//! running, failed or missing.
//!
//! Everything the scheduler needs lives in `DIR/slurm/`: the two job
//! scripts, `submissions.json` (the job ids of each submission), the tasks'
//! logs, and a mark each task leaves when it starts and when it ends. The
//! state is read from those files and from `squeue`; finished jobs are not
//! asked for, so no accounting storage is needed.

use anyhow::{bail, ensure, Context, Result};
use serde::{Deserialize, Serialize};
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};
use std::process::{Command, ExitCode};
use thicket_analysis::sweep::{write_atomically, Sweep};

/// The most array tasks one submission makes by default (Slurm's default
/// MaxArraySize is 1001, so indices 0..=1000).
const DEFAULT_MAX_TASKS: usize = 1000;

/// Options of `thicket sweep` for a Slurm cluster.
#[derive(clap::Args, Debug, Clone, Default)]
#[command(next_help_heading = "On a Slurm cluster")]
pub struct SlurmArgs {
    /// Submit the sweep to Slurm: a job array with one task per shard, and a merge job that writes the summary once every task succeeded. Submitting again runs only what is failed or missing.
    #[arg(long, conflicts_with_all = ["shard", "merge", "force"])]
    pub slurm: bool,
    /// Report each run of the sweep as done, queued, running, failed or missing, and the merge job's state.
    #[arg(long, conflicts_with_all = ["slurm", "shard", "merge", "force"])]
    pub status: bool,
    /// Array tasks (shards) to split the runs into (default: one per run, at most 1000; a resubmission keeps the last count).
    #[arg(long, value_name = "N", requires = "slurm")]
    pub tasks: Option<usize>,
    /// Slurm partition to run in (default: the cluster's default).
    #[arg(long, value_name = "NAME", requires = "slurm")]
    pub partition: Option<String>,
    /// Time limit of each task, in Slurm's form: MINUTES, HH:MM:SS or DAYS-HH:MM:SS.
    #[arg(long, value_name = "TIME", requires = "slurm")]
    pub time_limit: Option<String>,
    /// CPUs given to each task; the task runs that many worker threads.
    #[arg(long, value_name = "N", default_value_t = 1, requires = "slurm")]
    pub task_cpus: usize,
    /// Memory of each task, e.g. 4G or 500M (default: the partition's default).
    #[arg(long, value_name = "SIZE", requires = "slurm")]
    pub task_memory: Option<String>,
    /// The most tasks running at the same time (default: as many as the cluster allows).
    #[arg(long, value_name = "N", requires = "slurm")]
    pub at_once: Option<usize>,
    /// An extra `#SBATCH` line for both jobs, e.g. --sbatch-line=--account=lab7 (repeatable).
    #[arg(
        long,
        value_name = "OPTION",
        requires = "slurm",
        allow_hyphen_values = true
    )]
    pub sbatch_line: Vec<String>,
    /// Write the job scripts and print the sbatch commands, without submitting.
    #[arg(long, requires = "slurm")]
    pub write_only: bool,
}

/// One submission: its jobs and which shards of how many it ran.
#[derive(Debug, Clone, Serialize, Deserialize)]
struct Submission {
    /// Job id of the array.
    array_job: String,
    /// Job id of the merge job.
    merge_job: Option<String>,
    /// Shards the runs were split into.
    tasks: usize,
    /// Shards (0-based array task ids) submitted.
    shards: Vec<usize>,
    /// Seconds since 1970 at submission.
    submitted_unix_s: u64,
}

/// A job array task or job as `squeue` shows it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum QueueState {
    Queued,
    Running,
}

/// The queue: (array job id, task id or None) → state. `None` when `squeue`
/// cannot be asked.
type Queue = Option<BTreeMap<(String, Option<usize>), QueueState>>;

/// What became of one run.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
enum RunState {
    Done,
    Queued,
    Running,
    /// Its task started and ended without a result (killed, timed out, failed).
    Failed {
        job: String,
        task: usize,
    },
    /// Its task started, and the queue could not be asked whether it still runs.
    Unknown {
        job: String,
        task: usize,
    },
    Missing,
}

fn slurm_dir(out: &Path) -> PathBuf {
    out.join("slurm")
}

fn submissions_path(out: &Path) -> PathBuf {
    slurm_dir(out).join("submissions.json")
}

fn marks_dir(out: &Path) -> PathBuf {
    slurm_dir(out).join("marks")
}

fn read_submissions(out: &Path) -> Result<Vec<Submission>> {
    let path = submissions_path(out);
    if !path.exists() {
        return Ok(Vec::new());
    }
    let text =
        std::fs::read_to_string(&path).with_context(|| format!("reading {}", path.display()))?;
    serde_json::from_str(&text).with_context(|| {
        format!(
            "{}: not a list of submissions; delete it to forget earlier submissions",
            path.display()
        )
    })
}

/// Quotes a word for bash.
fn quote(p: &Path) -> String {
    format!("'{}'", p.display().to_string().replace('\'', r"'\''"))
}

/// Checks a value that goes onto an `#SBATCH` line.
fn plain(option: &str, value: &str) -> Result<()> {
    ensure!(
        !value.is_empty() && !value.contains(['\n', '\r']) && !value.contains(char::is_whitespace),
        "{option} {value:?}: give one word without spaces or line breaks"
    );
    Ok(())
}

fn check_time(text: &str) -> Result<()> {
    let bad = || {
        anyhow::anyhow!(
            "--time-limit {text}: expected MINUTES, MM:SS, HH:MM:SS, DAYS-HH, DAYS-HH:MM or DAYS-HH:MM:SS (Slurm's time forms), e.g. 2:00:00"
        )
    };
    let (days, rest) = match text.split_once('-') {
        Some((d, r)) => (Some(d), r),
        None => (None, text),
    };
    if let Some(d) = days {
        ensure!(
            !d.is_empty() && d.bytes().all(|b| b.is_ascii_digit()),
            bad()
        );
    }
    let parts: Vec<&str> = rest.split(':').collect();
    ensure!(
        parts.len() <= 3
            && parts
                .iter()
                .all(|p| !p.is_empty() && p.bytes().all(|b| b.is_ascii_digit())),
        bad()
    );
    Ok(())
}

fn check_memory(text: &str) -> Result<()> {
    let digits = text.trim_end_matches(['K', 'M', 'G', 'T', 'k', 'm', 'g', 't']);
    ensure!(
        !digits.is_empty()
            && text.len() - digits.len() <= 1
            && digits.bytes().all(|b| b.is_ascii_digit())
            && digits.parse::<u64>().is_ok_and(|n| n > 0),
        "--task-memory {text}: expected a whole number of megabytes, or one with K, M, G or T, e.g. 4G"
    );
    Ok(())
}

impl SlurmArgs {
    fn check(&self) -> Result<()> {
        if let Some(p) = &self.partition {
            plain("--partition", p)?;
        }
        if let Some(t) = &self.time_limit {
            check_time(t)?;
        }
        if let Some(m) = &self.task_memory {
            check_memory(m)?;
        }
        ensure!(
            (1..=1024).contains(&self.task_cpus),
            "--task-cpus {}: give a whole number from 1 to 1024",
            self.task_cpus
        );
        if let Some(n) = self.at_once {
            ensure!(n >= 1, "--at-once 0: give at least 1");
        }
        for line in &self.sbatch_line {
            ensure!(
                line.starts_with('-') && !line.contains(['\n', '\r']),
                "--sbatch-line {line:?}: give one sbatch option starting with -, e.g. --sbatch-line=--account=lab7"
            );
        }
        Ok(())
    }

    /// The `#SBATCH` lines both jobs share.
    fn common_lines(&self) -> Vec<String> {
        let mut lines = Vec::new();
        if let Some(p) = &self.partition {
            lines.push(format!("--partition={p}"));
        }
        if let Some(t) = &self.time_limit {
            lines.push(format!("--time={t}"));
        }
        lines.extend(self.sbatch_line.iter().cloned());
        lines
    }
}

/// The array task id list `0,2,5-7` of sorted shards.
fn array_spec(shards: &[usize]) -> String {
    let mut parts = Vec::new();
    let mut i = 0;
    while i < shards.len() {
        let mut j = i;
        while j + 1 < shards.len() && shards[j + 1] == shards[j] + 1 {
            j += 1;
        }
        parts.push(if j > i {
            format!("{}-{}", shards[i], shards[j])
        } else {
            shards[i].to_string()
        });
        i = j + 1;
    }
    parts.join(",")
}

/// The job array script: task k runs shard k+1 of `tasks` with the CPUs it was given.
fn task_script(
    args: &SlurmArgs,
    thicket: &Path,
    sweep_file: &Path,
    out: &Path,
    title: &str,
    tasks: usize,
    shards: &[usize],
) -> String {
    let mut array = array_spec(shards);
    if let Some(n) = args.at_once {
        array.push_str(&format!("%{n}"));
    }
    let mut s = String::from("#!/bin/bash\n");
    s.push_str(&format!("#SBATCH --job-name={}\n", job_name(title)));
    s.push_str(&format!("#SBATCH --array={array}\n"));
    s.push_str("#SBATCH --ntasks=1\n");
    s.push_str(&format!("#SBATCH --cpus-per-task={}\n", args.task_cpus));
    if let Some(m) = &args.task_memory {
        s.push_str(&format!("#SBATCH --mem={m}\n"));
    }
    s.push_str(&format!(
        "#SBATCH --output={}/%A_%a.out\n",
        slurm_dir(out).join("logs").display()
    ));
    for line in args.common_lines() {
        s.push_str(&format!("#SBATCH {line}\n"));
    }
    let marks = marks_dir(out);
    s.push_str(&format!(
        r#"# Written by thicket: one shard of the sweep per array task (task k runs shard k+1 of {tasks}).
# The marks tell `thicket sweep --status` that a task started and how it ended.
set -u
mark() {{
  local file={marks}/"${{SLURM_ARRAY_JOB_ID}}_${{SLURM_ARRAY_TASK_ID}}.$1"
  echo "$2" >"$file.$$.tmp" && mv -f "$file.$$.tmp" "$file"
}}
mark started "$(hostname) $(date -u +%Y-%m-%dT%H:%M:%SZ)"
{thicket} sweep {sweep} --out {out} \
  --shard "$((SLURM_ARRAY_TASK_ID + 1))/{tasks}" --threads "${{SLURM_CPUS_PER_TASK:-1}}"
code=$?
mark exit "$code"
exit "$code"
"#,
        marks = quote(&marks),
        thicket = quote(thicket),
        sweep = quote(sweep_file),
        out = quote(out),
    ));
    s
}

/// The merge job script: joins every shard's results into the summary.
fn merge_script(
    args: &SlurmArgs,
    thicket: &Path,
    sweep_file: &Path,
    out: &Path,
    title: &str,
) -> String {
    let mut s = String::from("#!/bin/bash\n");
    s.push_str(&format!("#SBATCH --job-name={}-merge\n", job_name(title)));
    s.push_str("#SBATCH --ntasks=1\n#SBATCH --cpus-per-task=1\n");
    s.push_str(&format!(
        "#SBATCH --output={}/merge_%j.out\n",
        slurm_dir(out).join("logs").display()
    ));
    for line in args.common_lines() {
        s.push_str(&format!("#SBATCH {line}\n"));
    }
    s.push_str(&format!(
        "# Written by thicket: the only writer of the summary, run after every task succeeded.\nexec {} sweep {} --out {} --merge --threads 1\n",
        quote(thicket),
        quote(sweep_file),
        quote(out)
    ));
    s
}

/// A job name from the sweep's title: letters, digits, - and _.
fn job_name(title: &str) -> String {
    let name: String = title
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' {
                c
            } else {
                '_'
            }
        })
        .take(40)
        .collect();
    format!("thicket-{name}")
}

/// Runs `sbatch --parsable ARGS SCRIPT` and returns the job id.
fn sbatch(extra: &[String], script: &Path) -> Result<String> {
    let out = Command::new("sbatch")
        .arg("--parsable")
        .args(extra)
        .arg(script)
        .output()
        .map_err(|e| {
            anyhow::anyhow!(
                "cannot run sbatch ({e}): --slurm needs Slurm's sbatch on PATH; --write-only writes the job scripts without submitting"
            )
        })?;
    if !out.status.success() {
        bail!(
            "sbatch {} failed: {}",
            script.display(),
            String::from_utf8_lossy(&out.stderr).trim()
        );
    }
    // --parsable prints `ID` or `ID;CLUSTER`.
    let text = String::from_utf8_lossy(&out.stdout);
    let id = text.trim().split(';').next().unwrap_or("").to_string();
    ensure!(
        !id.is_empty() && id.bytes().all(|b| b.is_ascii_digit()),
        "sbatch {} printed {:?}, not a job id",
        script.display(),
        text.trim()
    );
    Ok(id)
}

/// This user's jobs in the queue, by (array job id, array task id).
fn ask_queue() -> Queue {
    // SAFETY: getuid has no preconditions and cannot fail.
    let uid = unsafe { libc::getuid() };
    let out = Command::new("squeue")
        .args(["-h", "-r", "-u", &uid.to_string(), "-o", "%F|%K|%T"])
        .output()
        .ok()?;
    if !out.status.success() {
        return None;
    }
    let mut queue = BTreeMap::new();
    for line in String::from_utf8_lossy(&out.stdout).lines() {
        let f: Vec<&str> = line.trim().split('|').collect();
        if f.len() != 3 {
            continue;
        }
        let state = match f[2] {
            "PENDING" | "REQUEUED" | "REQUEUE_HOLD" | "REQUEUE_FED" | "RESV_DEL_HOLD" => {
                QueueState::Queued
            }
            "RUNNING" | "CONFIGURING" | "COMPLETING" | "SUSPENDED" | "STOPPED" | "SIGNALING"
            | "STAGE_OUT" | "RESIZING" => QueueState::Running,
            _ => continue,
        };
        queue.insert((f[0].to_string(), f[1].parse().ok()), state);
    }
    Some(queue)
}

/// The state of every run of the sweep, in run order.
fn run_states(
    spec: &Sweep,
    out: &Path,
    submissions: &[Submission],
    queue: &Queue,
) -> Vec<((usize, i64), RunState)> {
    let marks = marks_dir(out);
    spec.runs()
        .into_iter()
        .enumerate()
        .map(|(k, (point, seed))| {
            if spec.has_result(out, point, seed) {
                return ((point, seed), RunState::Done);
            }
            // The latest submission that included this run's shard.
            let owner = submissions.iter().rev().find_map(|s| {
                let shard = k % s.tasks;
                s.shards
                    .contains(&shard)
                    .then(|| (s.array_job.clone(), shard))
            });
            let state = match owner {
                None => RunState::Missing,
                Some((job, task)) => match queue
                    .as_ref()
                    .map(|q| q.get(&(job.clone(), Some(task))).copied())
                {
                    Some(Some(QueueState::Queued)) => RunState::Queued,
                    Some(Some(QueueState::Running)) => RunState::Running,
                    Some(None) | None if !marks.join(format!("{job}_{task}.started")).exists() => {
                        RunState::Missing
                    }
                    Some(None) => RunState::Failed { job, task },
                    None if marks.join(format!("{job}_{task}.exit")).exists() => {
                        RunState::Failed { job, task }
                    }
                    None => RunState::Unknown { job, task },
                },
            };
            ((point, seed), state)
        })
        .collect()
}

/// `thicket sweep --slurm`: writes the job scripts and submits them.
pub fn submit(sweep_file: &Path, out: &Path, args: &SlurmArgs) -> Result<ExitCode> {
    args.check()?;
    let spec = Sweep::load(sweep_file)?;
    let runs = spec.runs().len();
    if let Some(n) = args.tasks {
        ensure!(
            (1..=runs).contains(&n),
            "--tasks {n}: the sweep has {runs} runs; give 1 to {runs} tasks"
        );
    }
    std::fs::create_dir_all(slurm_dir(out).join("logs"))
        .and_then(|_| std::fs::create_dir_all(marks_dir(out)))
        .with_context(|| format!("creating {}", slurm_dir(out).display()))?;
    // The jobs may start in another folder, on another machine: every path is absolute.
    let out = &out
        .canonicalize()
        .with_context(|| format!("resolving {}", out.display()))?;
    let sweep_abs = sweep_file
        .canonicalize()
        .with_context(|| format!("resolving {}", sweep_file.display()))?;
    let thicket = std::env::current_exe().context("finding the thicket program")?;

    let mut submissions = read_submissions(out)?;
    let queue = if submissions.is_empty() || args.write_only {
        None
    } else {
        Some(ask_queue().ok_or_else(|| {
            anyhow::anyhow!(
                "cannot ask squeue whether the earlier submission of {} still runs; resubmitting needs Slurm's squeue on PATH",
                out.display()
            )
        })?)
    };
    let states = run_states(&spec, out, &submissions, &queue);
    let busy = states
        .iter()
        .filter(|(_, s)| matches!(s, RunState::Queued | RunState::Running))
        .count();
    if busy > 0 {
        let job = &submissions
            .last()
            .expect("a busy run was submitted")
            .array_job;
        bail!(
            "{busy} run(s) of {} are still queued or running in job {job}; wait for them (thicket sweep {} --out {} --status) or cancel them (scancel {job}), then submit again",
            out.display(),
            sweep_file.display(),
            out.display()
        );
    }
    if let (Some(last), Some(q)) = (submissions.last(), &queue) {
        if let Some(merge) = &last.merge_job {
            match q.get(&(merge.clone(), None)) {
                Some(QueueState::Running) => bail!(
                    "the merge job {merge} of the earlier submission is running; wait for it, then submit again"
                ),
                Some(QueueState::Queued) => {
                    // Its array ended with a failure, so it would never start.
                    let _ = Command::new("scancel").arg(merge).status();
                    println!("cancelled the earlier merge job {merge}, which waited on a failed task");
                }
                None => {}
            }
        }
    }
    let tasks = args
        .tasks
        .or(submissions.last().map(|s| s.tasks).filter(|&n| n <= runs))
        .unwrap_or(runs.min(DEFAULT_MAX_TASKS));
    let shards: Vec<usize> = states
        .iter()
        .enumerate()
        .filter(|(_, (_, s))| *s != RunState::Done)
        .map(|(k, _)| k % tasks)
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect();
    let todo = states.iter().filter(|(_, s)| *s != RunState::Done).count();

    let task_path = slurm_dir(out).join("tasks.sh");
    let merge_path = slurm_dir(out).join("merge.sh");
    if !shards.is_empty() {
        let text = task_script(args, &thicket, &sweep_abs, out, &spec.title, tasks, &shards);
        write_atomically(&task_path, text.as_bytes())
            .with_context(|| format!("writing {}", task_path.display()))?;
    }
    let text = merge_script(args, &thicket, &sweep_abs, out, &spec.title);
    write_atomically(&merge_path, text.as_bytes())
        .with_context(|| format!("writing {}", merge_path.display()))?;
    let merge_after = |job: &str| {
        vec![
            format!("--dependency=afterok:{job}"),
            "--kill-on-invalid-dep=yes".to_string(),
        ]
    };

    if args.write_only {
        if shards.is_empty() {
            println!(
                "every run has its result; join them with: sbatch {}",
                merge_path.display()
            );
        } else {
            println!(
                "wrote {} ({} tasks of {tasks} shards, {todo} of {runs} runs) and {}",
                task_path.display(),
                shards.len(),
                merge_path.display()
            );
            println!("submit with:");
            println!("  job=$(sbatch --parsable {})", task_path.display());
            println!(
                "  sbatch {} {}",
                merge_after("$job").join(" "),
                merge_path.display()
            );
        }
        return Ok(ExitCode::SUCCESS);
    }

    let (array_job, merge_job) = if shards.is_empty() {
        println!("every run of the sweep has its result; submitting the merge only");
        (None, sbatch(&[], &merge_path)?)
    } else {
        let array = sbatch(&[], &task_path)?;
        let merge = sbatch(&merge_after(&array), &merge_path).with_context(|| {
            format!("the array job {array} was submitted; cancel it with scancel {array}")
        })?;
        (Some(array), merge)
    };
    if let Some(array) = &array_job {
        submissions.push(Submission {
            array_job: array.clone(),
            merge_job: Some(merge_job.clone()),
            tasks,
            shards: shards.clone(),
            submitted_unix_s: std::time::SystemTime::now()
                .duration_since(std::time::UNIX_EPOCH)
                .map_or(0, |d| d.as_secs()),
        });
        let text = serde_json::to_string_pretty(&submissions)?;
        let path = submissions_path(out);
        write_atomically(&path, text.as_bytes())
            .with_context(|| format!("writing {}", path.display()))?;
        println!(
            "submitted job array {array}: {} task(s) for {todo} of {runs} runs ({tasks} shards)",
            shards.len()
        );
    }
    println!("submitted merge job {merge_job}: writes the summary after every task succeeded");
    println!(
        "follow with: thicket sweep {} --out {} --status",
        sweep_file.display(),
        out.display()
    );
    Ok(ExitCode::SUCCESS)
}

/// `thicket sweep --status`.
pub fn status(sweep_file: &Path, out: &Path) -> Result<ExitCode> {
    let spec = Sweep::load(sweep_file)?;
    ensure!(
        out.is_dir(),
        "--out {}: no such folder; the sweep has not been started there",
        out.display()
    );
    let submissions = read_submissions(out)?;
    let queue = if submissions.is_empty() {
        None
    } else {
        ask_queue()
    };
    let states = run_states(&spec, out, &submissions, &queue);
    let count = |f: &dyn Fn(&RunState) -> bool| states.iter().filter(|(_, s)| f(s)).count();
    println!(
        "{}: {} runs ({} points × {} seeds) in {}",
        spec.title,
        states.len(),
        spec.points.len(),
        spec.seeds.len(),
        out.display()
    );
    let name = |(p, s): &(usize, i64)| format!("p{p:04}_s{s}");
    let list = |f: &dyn Fn(&RunState) -> bool| -> String {
        let names: Vec<String> = states
            .iter()
            .filter(|(_, s)| f(s))
            .map(|(r, _)| name(r))
            .take(20)
            .collect();
        if names.is_empty() {
            String::new()
        } else {
            format!("  {}", names.join(" "))
        }
    };
    println!("done: {}", count(&|s| *s == RunState::Done));
    println!("queued: {}", count(&|s| *s == RunState::Queued));
    println!("running: {}", count(&|s| *s == RunState::Running));
    let failed = |s: &RunState| matches!(s, RunState::Failed { .. });
    println!("failed: {}{}", count(&failed), list(&failed));
    let unknown = |s: &RunState| matches!(s, RunState::Unknown { .. });
    if count(&unknown) > 0 {
        println!(
            "started, state unknown (squeue cannot be asked): {}{}",
            count(&unknown),
            list(&unknown)
        );
    }
    println!(
        "missing: {}{}",
        count(&|s| *s == RunState::Missing),
        list(&|s| *s == RunState::Missing)
    );
    let logs: BTreeSet<String> = states
        .iter()
        .filter_map(|(_, s)| match s {
            RunState::Failed { job, task } => Some(
                slurm_dir(out)
                    .join("logs")
                    .join(format!("{job}_{task}.out"))
                    .display()
                    .to_string(),
            ),
            _ => None,
        })
        .collect();
    for log in logs.iter().take(5) {
        println!("log of a failed task: {log}");
    }
    if let Some(last) = submissions.last() {
        let merge = last.merge_job.clone().unwrap_or_default();
        let state = match queue.as_ref().map(|q| q.get(&(merge.clone(), None))) {
            Some(Some(QueueState::Queued)) => "waiting for the tasks",
            Some(Some(QueueState::Running)) => "running",
            Some(None) => "not in the queue (finished or cancelled)",
            None => "unknown (squeue cannot be asked)",
        };
        println!("merge job {merge}: {state}");
    }
    println!(
        "summary: {}",
        if out.join("summary.json").exists() {
            "written"
        } else {
            "not written yet"
        }
    );
    if count(&|s| failed(s) || *s == RunState::Missing) > 0 && !submissions.is_empty() {
        println!(
            "to run what failed or is missing: thicket sweep {} --out {} --slurm",
            sweep_file.display(),
            out.display()
        );
    }
    Ok(ExitCode::SUCCESS)
}
