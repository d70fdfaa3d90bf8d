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
    /// Submit to Slurm as a job array and a merge job that runs once every task succeeded: a sweep with one task per shard (the merge writes the summary), or a run split into --tasks parts of its ensemble (the merge analyses them together into DIR/analysis.json). Submitting again runs only what is failed or missing.
    #[arg(long)]
    pub slurm: bool,
    /// Report each run of the sweep (or part of the ensemble) in --out as done, queued, running, failed or missing, and the merge job's state.
    #[arg(long, conflicts_with = "slurm")]
    pub status: bool,
    /// Array tasks: for a sweep, the shards to split its runs into (default: one per run, at most 1000; a resubmission keeps the last count); for a run, the parts to split its ensemble into.
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

/// What a submission runs.
pub enum Work<'a> {
    /// A sweep file: one task per shard of its runs, merged into the summary.
    Sweep {
        /// The sweep file.
        file: &'a Path,
    },
    /// A scenario split into `--tasks` parts of its ensemble, analysed together.
    Ensemble {
        /// The scenario file.
        config: &'a Path,
        /// Its `--set` overrides.
        sets: &'a [String],
    },
}

/// The units of work (runs of a sweep, parts of an ensemble) of one
/// submission and how to run them.
struct Plan {
    title: String,
    /// Name of each unit, for the status.
    names: Vec<String>,
    /// Which units have their result.
    done: Vec<bool>,
    /// Array tasks; unit k belongs to task k mod tasks.
    tasks: usize,
    /// The command a task runs (bash; `$SLURM_ARRAY_TASK_ID` and `$SLURM_CPUS_PER_TASK` are set).
    task_command: String,
    /// The command of the merge job.
    merge_command: String,
    /// What the merge leaves behind.
    result: PathBuf,
    /// How to ask for the status again.
    status_hint: String,
}

fn part_file(out: &Path, stem: &str, i: usize, n: usize) -> PathBuf {
    out.join(format!("{stem}.part{i}of{n}.h5"))
}

/// Builds the plan; `tasks` is the array size asked for (or kept from the
/// last submission). Paths in the commands are absolute.
fn plan(work: &Work, out: &Path, tasks: Option<usize>) -> Result<Plan> {
    let thicket = std::env::current_exe().context("finding the thicket program")?;
    // The output folder may not exist yet: nothing is created before every check passed.
    let abs = |p: &Path| -> Result<PathBuf> {
        if p.exists() {
            p.canonicalize()
                .with_context(|| format!("resolving {}", p.display()))
        } else {
            Ok(std::env::current_dir()
                .context("finding the current folder")?
                .join(p))
        }
    };
    match work {
        Work::Sweep { file } => {
            let spec = Sweep::load(file)?;
            let runs = spec.runs();
            if let Some(n) = tasks {
                ensure!(
                    (1..=runs.len()).contains(&n),
                    "--tasks {n}: the sweep has {} runs; give 1 to {} tasks",
                    runs.len(),
                    runs.len()
                );
            }
            let tasks = tasks.unwrap_or(runs.len().min(DEFAULT_MAX_TASKS));
            let (file_abs, out_abs) = (abs(file)?, abs(out)?);
            Ok(Plan {
                title: spec.title.clone(),
                names: runs.iter().map(|(p, s)| format!("p{p:04}_s{s}")).collect(),
                done: runs
                    .iter()
                    .map(|&(p, s)| spec.has_result(out, p, s))
                    .collect(),
                tasks,
                task_command: format!(
                    "{} sweep {} --out {} \\\n  --shard \"$((SLURM_ARRAY_TASK_ID + 1))/{tasks}\" --threads \"${{SLURM_CPUS_PER_TASK:-1}}\"",
                    quote(&thicket),
                    quote(&file_abs),
                    quote(&out_abs)
                ),
                merge_command: format!(
                    "exec {} sweep {} --out {} --merge --threads 1",
                    quote(&thicket),
                    quote(&file_abs),
                    quote(&out_abs)
                ),
                result: out.join("summary.json"),
                status_hint: format!(
                    "thicket sweep {} --out {} --status",
                    file.display(),
                    out.display()
                ),
            })
        }
        Work::Ensemble { config, sets } => {
            let n = tasks.ok_or_else(|| {
                anyhow::anyhow!(
                    "--slurm with a scenario splits its ensemble: give the number of parts with --tasks N"
                )
            })?;
            let whole = thicket_engine::Scenario::load(config, sets)?;
            // Refuses crowders, membranes and more parts than particles before anything is written.
            thicket_engine::run::part::PartRun::new(
                &whole,
                thicket_engine::run::part::EnsemblePart { index: 0, parts: n },
            )?;
            let stem = config
                .file_stem()
                .map_or("run".into(), |s| s.to_string_lossy().into_owned());
            let (config_abs, out_abs) = (abs(config)?, abs(out)?);
            let done = (1..=n)
                .map(|i| {
                    let f = part_file(out, &stem, i, n);
                    f.exists() && !thicket_engine::io::trajectory::checkpoint_path(&f).exists()
                })
                .collect();
            let set_args: String = sets
                .iter()
                .map(|s| format!(" --set {}", quote(Path::new(s))))
                .collect();
            let part = quote(&out_abs.join(format!("{stem}.part")));
            Ok(Plan {
                title: stem.clone(),
                names: (1..=n).map(|i| format!("part{i}of{n}")).collect(),
                done,
                tasks: n,
                task_command: format!(
                    r#"i=$((SLURM_ARRAY_TASK_ID + 1))
file={part}"${{i}}of{n}.h5"
# A part stopped with its checkpoint continues from it; any other is started afresh.
if [ -e "$file.ckpt" ]; then again=--resume; else again=--force; fi
{thicket} run {config}{set_args} --ensemble-part "$i/{n}" --out "$file" "$again" \
  --threads "${{SLURM_CPUS_PER_TASK:-1}}""#,
                    thicket = quote(&thicket),
                    config = quote(&config_abs),
                ),
                merge_command: format!(
                    r#"set -e
{thicket} analyze {parts} --json >{json}.$$.tmp
mv -f {json}.$$.tmp {json}"#,
                    thicket = quote(&thicket),
                    parts = (1..=n)
                        .map(|i| quote(&part_file(&out_abs, &stem, i, n)))
                        .collect::<Vec<_>>()
                        .join(" "),
                    json = quote(&out_abs.join("analysis.json")),
                ),
                result: out.join("analysis.json"),
                status_hint: format!(
                    "thicket run {} --out {} --status",
                    config.display(),
                    out.display()
                ),
            })
        }
    }
}

/// The job array script: task k runs its share of the units with the CPUs it was given.
fn task_script(args: &SlurmArgs, out: &Path, plan: &Plan, shards: &[usize]) -> String {
    let mut array = array_spec(shards);
    if let Some(n) = args.at_once {
        array.push_str(&format!("%{n}"));
    }
    let mut s = String::from("#!/bin/bash\n");
    s.push_str(&format!("#SBATCH --job-name={}\n", job_name(&plan.title)));
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
    s.push_str(&format!(
        r#"# Written by thicket: array task k runs share k+1 of {tasks}.
# The marks tell `--status` that a task started and how it ended.
set -u
mark() {{
  local file={marks}/"${{SLURM_ARRAY_JOB_ID}}_${{SLURM_ARRAY_TASK_ID}}.$1"
  echo "$2" >"$file.$$.tmp" && mv -f "$file.$$.tmp" "$file"
}}
mark started "$(hostname) $(date -u +%Y-%m-%dT%H:%M:%SZ)"
{command}
code=$?
mark exit "$code"
exit "$code"
"#,
        tasks = plan.tasks,
        marks = quote(&marks_dir(out)),
        command = plan.task_command,
    ));
    s
}

/// The merge job script: the only writer of the joined result.
fn merge_script(args: &SlurmArgs, out: &Path, plan: &Plan) -> String {
    let mut s = String::from("#!/bin/bash\n");
    s.push_str(&format!(
        "#SBATCH --job-name={}-merge\n",
        job_name(&plan.title)
    ));
    s.push_str("#SBATCH --ntasks=1\n#SBATCH --cpus-per-task=1\n");
    s.push_str(&format!(
        "#SBATCH --output={}/merge_%j.out\n",
        slurm_dir(out).join("logs").display()
    ));
    for line in args.common_lines() {
        s.push_str(&format!("#SBATCH {line}\n"));
    }
    s.push_str(&format!(
        "# Written by thicket: the only writer of the joined result, run after every task succeeded.\n{}\n",
        plan.merge_command
    ));
    s
}

/// The state of every unit, in order.
fn run_states(
    done: &[bool],
    out: &Path,
    submissions: &[Submission],
    queue: &Queue,
) -> Vec<RunState> {
    let marks = marks_dir(out);
    done.iter()
        .enumerate()
        .map(|(k, &done)| {
            if done {
                return RunState::Done;
            }
            // The latest submission that included this unit's task.
            let owner = submissions
                .iter()
                .rev()
                .filter(|s| s.tasks > 0)
                .find_map(|s| {
                    let shard = k % s.tasks;
                    s.shards
                        .contains(&shard)
                        .then(|| (s.array_job.clone(), shard))
                });
            match owner {
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
            }
        })
        .collect()
}

/// `--slurm`: writes the job scripts and submits them.
pub fn submit(work: &Work, out: &Path, args: &SlurmArgs) -> Result<ExitCode> {
    args.check()?;
    let mut submissions = read_submissions(out)?;
    let kept = submissions.last().map(|s| s.tasks);
    let plan = plan(work, out, args.tasks.or(kept))?;
    let units = plan.done.len();
    let queue = if submissions.is_empty() || args.write_only {
        None
    } else {
        Some(ask_queue().ok_or_else(|| {
            anyhow::anyhow!(
                "cannot ask squeue whether the earlier submission in {} still runs; resubmitting needs Slurm's squeue on PATH",
                out.display()
            )
        })?)
    };
    let states = run_states(&plan.done, out, &submissions, &queue);
    let busy = states
        .iter()
        .filter(|s| matches!(s, RunState::Queued | RunState::Running))
        .count();
    if busy > 0 {
        let job = &submissions
            .last()
            .expect("a busy unit was submitted")
            .array_job;
        bail!(
            "{busy} task share(s) in {} are still queued or running in job {job}; wait for them ({}) or cancel them (scancel {job}), then submit again",
            out.display(),
            plan.status_hint
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
                    println!(
                        "cancelled the earlier merge job {merge}, which waited on a failed task"
                    );
                }
                None => {}
            }
        }
    }
    let shards: Vec<usize> = states
        .iter()
        .enumerate()
        .filter(|(_, s)| **s != RunState::Done)
        .map(|(k, _)| k % plan.tasks)
        .collect::<BTreeSet<_>>()
        .into_iter()
        .collect();
    let todo = states.iter().filter(|s| **s != RunState::Done).count();

    std::fs::create_dir_all(slurm_dir(out).join("logs"))
        .and_then(|_| std::fs::create_dir_all(marks_dir(out)))
        .with_context(|| format!("creating {}", slurm_dir(out).display()))?;
    let out_abs = out
        .canonicalize()
        .with_context(|| format!("resolving {}", out.display()))?;
    let task_path = slurm_dir(out).join("tasks.sh");
    let merge_path = slurm_dir(out).join("merge.sh");
    if !shards.is_empty() {
        let text = task_script(args, &out_abs, &plan, &shards);
        write_atomically(&task_path, text.as_bytes())
            .with_context(|| format!("writing {}", task_path.display()))?;
    }
    let text = merge_script(args, &out_abs, &plan);
    write_atomically(&merge_path, text.as_bytes())
        .with_context(|| format!("writing {}", merge_path.display()))?;
    let merge_after = |job: &str| {
        vec![
            format!("--dependency=afterok:{job}"),
            "--kill-on-invalid-dep=yes".to_string(),
        ]
    };
    let tasks = plan.tasks;

    if args.write_only {
        if shards.is_empty() {
            println!(
                "every share has its result; join them with: sbatch {}",
                merge_path.display()
            );
        } else {
            println!(
                "wrote {} ({} of {tasks} tasks, {todo} of {units} to run) and {}",
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
        println!("every share has its result; submitting the merge only");
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
            "submitted job array {array}: {} task(s) for {todo} of {units} (in {tasks} shares)",
            shards.len()
        );
    }
    println!(
        "submitted merge job {merge_job}: writes {} after every task succeeded",
        plan.result.display()
    );
    println!("follow with: {}", plan.status_hint);
    Ok(ExitCode::SUCCESS)
}

/// `--status`.
pub fn status(work: &Work, out: &Path) -> Result<ExitCode> {
    ensure!(
        out.is_dir(),
        "--out {}: no such folder; nothing has been submitted there",
        out.display()
    );
    let submissions = read_submissions(out)?;
    let plan = plan(work, out, submissions.last().map(|s| s.tasks))?;
    let queue = if submissions.is_empty() {
        None
    } else {
        ask_queue()
    };
    let states = run_states(&plan.done, out, &submissions, &queue);
    let count = |f: &dyn Fn(&RunState) -> bool| states.iter().filter(|s| f(s)).count();
    let list = |f: &dyn Fn(&RunState) -> bool| -> String {
        let names: Vec<&str> = states
            .iter()
            .zip(&plan.names)
            .filter(|(s, _)| f(s))
            .map(|(_, n)| n.as_str())
            .take(20)
            .collect();
        if names.is_empty() {
            String::new()
        } else {
            format!("  {}", names.join(" "))
        }
    };
    println!("{}: {} in {}", plan.title, states.len(), out.display());
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
        .filter_map(|s| match s {
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
        "result {}: {}",
        plan.result.display(),
        if plan.result.exists() {
            "written"
        } else {
            "not written yet"
        }
    );
    if count(&|s| failed(s) || *s == RunState::Missing) > 0 && !submissions.is_empty() {
        println!("to run what failed or is missing, submit again with --slurm");
    }
    Ok(ExitCode::SUCCESS)
}
