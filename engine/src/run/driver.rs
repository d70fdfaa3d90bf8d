//! The run driver: creates or resumes a trajectory, advances the state in
//! blocks, records frames, checkpoints on a timer and stops cleanly when asked.

use crate::base::error::{EngineError, Result};
use crate::io::lock::OutputLock;
use crate::io::trajectory::{checkpoint_path, recorded_steps, Checkpoint, TrajectoryWriter};
use crate::obstacles::FixedObstacles;
use crate::run::observe::{Frames, Observer, Progress, Tethers, WallsAndBaths};
use crate::run::part::PartRun;
use crate::scenario::Scenario;
use crate::step::pipeline::Stepper;
use crate::step::state::State;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

/// Particle-steps per block between checks of the stop flag and the
/// checkpoint timer: keeps an interrupt answered within a fraction of a second.
const BLOCK_PARTICLE_STEPS: u64 = 20_000_000;

/// What `run` is asked to do.
#[derive(Debug, Clone)]
pub struct RunOptions {
    /// Trajectory path.
    pub out: PathBuf,
    /// Overwrite an existing trajectory. By default, this is disabled.
    pub force: bool,
    /// Continue an interrupted run from its checkpoint. By default, this is disabled.
    pub resume: bool,
}

/// How a run ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RunOutcome {
    /// All steps done; the checkpoint was removed.
    Completed {
        /// Frames in the file.
        frames: u64,
    },
    /// Stopped by the stop flag; a checkpoint allows `--resume`.
    Interrupted {
        /// Steps done.
        step: u64,
        /// Frames in the file.
        frames: u64,
    },
}

/// Runs a scenario to its end or until `stop` is set.
///
/// `progress(step, steps)` is called after every block.
///
/// # Errors
/// Output that exists without `force`, unwritable output, a resume whose
/// checkpoint or scenario does not match, HDF5 or I/O failures.
pub fn run(
    scenario: &Scenario,
    options: &RunOptions,
    stop: &AtomicBool,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<RunOutcome> {
    drive(scenario, None, options, stop, progress)
}

/// Runs one part of a split ensemble (see [`crate::run::part`]) to its end or
/// until `stop` is set, as [`run`] does a whole scenario.
///
/// # Errors
/// As [`run`].
pub fn run_part(
    part: &PartRun,
    options: &RunOptions,
    stop: &AtomicBool,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<RunOutcome> {
    drive(&part.scenario, Some(part), options, stop, progress)
}

/// The one run driver; `part` (whose scenario is `scenario`) only changes
/// where a new run starts and what the file says it holds.
fn drive(
    scenario: &Scenario,
    part: Option<&PartRun>,
    options: &RunOptions,
    stop: &AtomicBool,
    progress: &mut dyn FnMut(u64, u64),
) -> Result<RunOutcome> {
    let out = &options.out;
    let ckpt_path = checkpoint_path(out);
    // Obstacles come from the seed, so a resumed run rebuilds the same medium;
    // placed before any file is touched, so a failed placement leaves files alone.
    let obstacles = FixedObstacles::build(scenario)?;
    check_parent(out)?;
    // Held to the end: a second run on this output (with --force or --resume) is refused.
    let _lock = OutputLock::acquire(out)?;
    let mut stepper = Stepper::new(scenario, &obstacles);
    let mut observers: Vec<Box<dyn Observer + '_>> = vec![Box::new(Frames)];
    if let Some(g) = &scenario.geometry {
        observers.push(Box::new(WallsAndBaths::new(scenario, g)));
    }
    if stepper.binds() {
        observers.push(Box::new(Tethers::new(scenario)));
    }
    observers.push(Box::new(Progress {
        report: progress,
        steps: scenario.steps,
    }));
    let (mut state, mut writer) = if options.resume {
        let (state, mut writer, parts) = resume_state(scenario, out, &ckpt_path)?;
        for o in &mut observers {
            let part = parts
                .iter()
                .find(|(n, _)| n == o.name())
                .map(|(_, t)| t.as_str());
            o.resume(&mut writer, part)?;
        }
        (state, writer)
    } else {
        if out.exists() {
            if !options.force {
                return Err(EngineError::OutputExists { file: out.clone() });
            }
            std::fs::remove_file(out).map_err(|e| EngineError::OutputNotWritable {
                file: out.clone(),
                reason: e.to_string(),
            })?;
        }
        let _ = std::fs::remove_file(&ckpt_path);
        let state = match part {
            Some(p) => p.initial_state(&obstacles)?,
            None => stepper.initial_state(scenario)?,
        };
        let mut writer = TrajectoryWriter::create(out, scenario)?;
        if let Some(p) = part {
            p.describe(&writer)?;
        }
        writer.write_obstacles(&obstacles, scenario)?;
        for o in &mut observers {
            o.start(&mut writer, &stepper, &state)?;
        }
        writer.flush()?;
        (state, writer)
    };

    let record = scenario.output.record_every_steps;
    let n = scenario.particle_count() as u64;
    let block = (BLOCK_PARTICLE_STEPS / stepper.relative_cost() / n.max(1)).clamp(1, record);
    let mut last_checkpoint = Instant::now();
    // One checkpoint: the state, the frames on disk and every observer's part.
    let save = |state: &State,
                writer: &TrajectoryWriter,
                observers: &[Box<dyn Observer + '_>]|
     -> Result<()> {
        writer.flush()?;
        let mut parts = Vec::new();
        for o in observers {
            if let Some(text) = o.save()? {
                parts.push((o.name().to_string(), text));
            }
        }
        Checkpoint {
            frames: writer.frames() as u64,
            resolved_toml: scenario.resolved_toml.clone(),
            state: state.clone(),
            parts,
        }
        .save(&ckpt_path)
    };
    if !options.resume {
        // From the first frame on, a killed run can be resumed.
        save(&state, &writer, &observers)?;
    }
    while state.step < scenario.steps {
        if stop.load(Ordering::Relaxed) {
            save(&state, &writer, &observers)?;
            return Ok(RunOutcome::Interrupted {
                step: state.step,
                frames: writer.frames() as u64,
            });
        }
        // Never step past the next frame, so frames land exactly on multiples of `record`.
        let to_frame = record - state.step % record;
        let steps = block.min(to_frame);
        let events = stepper.advance(&mut state, steps);
        for o in &mut observers {
            o.block(&state, &events);
        }
        if state.step % record == 0 {
            let time_s = state.step as f64 * scenario.dt_s;
            for o in &mut observers {
                o.frame(&mut writer, &stepper, &state, time_s)?;
            }
        }
        if last_checkpoint.elapsed().as_secs_f64() >= scenario.output.checkpoint_interval_s {
            save(&state, &writer, &observers)?;
            last_checkpoint = Instant::now();
        }
    }
    for o in &mut observers {
        o.finish(&mut writer, &stepper, &state)?;
    }
    writer.flush()?;
    let frames = writer.frames() as u64;
    drop(writer);
    let _ = std::fs::remove_file(&ckpt_path);
    Ok(RunOutcome::Completed { frames })
}

fn check_parent(out: &Path) -> Result<()> {
    let parent = match out.parent() {
        Some(p) if !p.as_os_str().is_empty() => p,
        _ => return Ok(()),
    };
    if !parent.is_dir() {
        return Err(EngineError::OutputNotWritable {
            file: out.to_path_buf(),
            reason: format!("the folder {} does not exist", parent.display()),
        });
    }
    Ok(())
}

/// Observers' checkpoint parts by name.
type Parts = Vec<(String, String)>;

fn resume_state(
    scenario: &Scenario,
    out: &Path,
    ckpt_path: &Path,
) -> Result<(State, TrajectoryWriter, Parts)> {
    if !out.exists() {
        return Err(EngineError::Resume {
            file: out.to_path_buf(),
            reason: "the trajectory does not exist; start the run without --resume".into(),
        });
    }
    let ckpt = Checkpoint::load(ckpt_path)?;
    if ckpt.resolved_toml != scenario.resolved_toml {
        let diff = ckpt
            .resolved_toml
            .lines()
            .zip(scenario.resolved_toml.lines())
            .find(|(a, b)| a != b)
            .map(|(a, b)| format!("the run was started with `{a}` but the scenario now says `{b}`"))
            .unwrap_or_else(|| {
                "the scenario differs in length from the one the run was started with".into()
            });
        return Err(EngineError::Resume {
            file: out.to_path_buf(),
            reason: format!(
                "scenario mismatch: {diff}; resume with the same scenario and --set options"
            ),
        });
    }
    check_against(&ckpt, scenario, out, ckpt_path)?;
    let writer = TrajectoryWriter::reopen(out, scenario, ckpt.frames as usize)?;
    Ok((ckpt.state, writer, ckpt.parts))
}

/// Cross-checks a checkpoint against the scenario and the trajectory before
/// anything is changed: particle count, step, frame count and the recorded
/// steps must all agree.
fn check_against(
    ckpt: &Checkpoint,
    scenario: &Scenario,
    out: &Path,
    ckpt_path: &Path,
) -> Result<()> {
    let fail = |reason: String| EngineError::Resume {
        file: ckpt_path.to_path_buf(),
        reason: format!("{reason}; no file was changed"),
    };
    let n = scenario.particle_count();
    if ckpt.state.len() != n {
        return Err(fail(format!(
            "the checkpoint holds {} particles but the scenario has {n}",
            ckpt.state.len()
        )));
    }
    // Generous bounds: a stored position is inside the box (wrapped or between walls).
    let edges = scenario.sim_box.edges_nm;
    if let Some(i) = ckpt
        .state
        .positions
        .iter()
        .position(|p| (0..3).any(|k| !(-edges[k]..=2.0 * edges[k]).contains(&p[k])))
    {
        return Err(fail(format!(
            "particle {i} is at {:?} nm, far outside the box {edges:?} nm",
            ckpt.state.positions[i]
        )));
    }
    let step = ckpt.state.step;
    if step > scenario.steps {
        return Err(fail(format!(
            "the checkpoint is at step {step}, past the scenario's {} steps",
            scenario.steps
        )));
    }
    // A frame is recorded at step 0 and at every multiple of record_every_steps.
    let record = scenario.output.record_every_steps;
    let expected = step / record + 1;
    if ckpt.frames != expected {
        return Err(fail(format!(
            "the checkpoint says {} frames but step {step} with a frame every {record} steps means {expected}",
            ckpt.frames
        )));
    }
    let frames = expected as usize;
    for ((have, steps), s) in recorded_steps(out, scenario)?.iter().zip(&scenario.species) {
        if *have < frames || steps.len() < frames {
            return Err(EngineError::Resume {
                file: out.to_path_buf(),
                reason: format!(
                    "species `{}` has {} frames on disk but the checkpoint {} expects {frames}; the file is not the one the checkpoint belongs to; no file was changed",
                    s.name,
                    have.min(&steps.len()),
                    ckpt_path.display()
                ),
            });
        }
        if let Some(k) = (0..frames).find(|&k| steps[k] != (k as u64 * record) as i64) {
            return Err(EngineError::Resume {
                file: out.to_path_buf(),
                reason: format!(
                    "species `{}` frame {k} is at step {} but the checkpoint {} expects step {}; no file was changed",
                    s.name,
                    steps[k],
                    ckpt_path.display(),
                    k as u64 * record
                ),
            });
        }
    }
    Ok(())
}
