//! Joining the parts of a split ensemble (`thicket run --ensemble-part I/N`)
//! into one: the files must be every part of one whole run, each once,
//! holding together every particle of the analysed species exactly once.

use crate::error::{Error, Result};
use crate::read::{SpeciesReader, Trajectory};

/// Checks that `trajectories` are all N parts of one whole run, each once,
/// and puts them in part order.
///
/// # Errors
/// [`crate::error::ErrorKind::BadValue`] naming the file at fault: a whole
/// run among parts, parts of different runs or of a different split, a part
/// given twice or missing.
pub fn order_parts(trajectories: &mut Vec<Trajectory>) -> Result<()> {
    let n = trajectories.len();
    let mut infos = Vec::with_capacity(n);
    for t in trajectories.iter() {
        let info = t.ensemble_part()?.ok_or_else(|| {
            Error::bad_value(
                t.path(),
                "/parameters/thicket/ensemble_part",
                "no such group (a whole run)",
                "several files are joined only when each is a part written by thicket run --ensemble-part I/N; analyse a whole run on its own",
            )
        })?;
        infos.push(info);
    }
    let first = &infos[0];
    for (t, info) in trajectories.iter().zip(&infos) {
        if info.parts != n {
            return Err(Error::bad_value(
                t.path(),
                "/parameters/thicket/ensemble_part attribute parts",
                info.parts.to_string(),
                format!(
                    "the number of files given ({n}): give all {} parts of the run, each once",
                    info.parts
                ),
            ));
        }
        if info.whole_scenario != first.whole_scenario {
            return Err(Error::bad_value(
                t.path(),
                "/parameters/thicket/ensemble_part attribute whole_scenario",
                "a different whole run",
                format!(
                    "the run {} is a part of: parts join only with parts of the same scenario, seed and overrides",
                    trajectories[0].path().display()
                ),
            ));
        }
    }
    let mut seen: Vec<Option<usize>> = vec![None; n];
    for (k, info) in infos.iter().enumerate() {
        if let Some(other) = seen[info.index] {
            return Err(Error::bad_value(
                trajectories[k].path(),
                "/parameters/thicket/ensemble_part attribute index",
                format!("part {} of {n}", info.index + 1),
                format!(
                    "each part once; {} is the same part",
                    trajectories[other].path().display()
                ),
            ));
        }
        seen[info.index] = Some(k);
    }
    // n distinct indices below n: every part is there; put them in order.
    let mut paired: Vec<(usize, Trajectory)> = infos
        .iter()
        .map(|i| i.index)
        .zip(trajectories.drain(..))
        .collect();
    paired.sort_by_key(|p| p.0);
    trajectories.extend(paired.into_iter().map(|p| p.1));
    Ok(())
}

/// Checks that the ordered parts' readers of one species hold the whole
/// run's particles of it exactly once, over the same frames.
///
/// # Errors
/// [`crate::error::ErrorKind::BadValue`] naming the file at fault.
pub fn check_joined(trajectories: &[Trajectory], readers: &[SpeciesReader<'_>]) -> Result<()> {
    if trajectories.len() < 2 {
        return Ok(());
    }
    let first = readers[0].meta();
    let mut next = 0;
    let mut whole = 0;
    for (t, r) in trajectories.iter().zip(readers) {
        let meta = r.meta();
        let info = t.ensemble_part()?.expect("checked by order_parts");
        let (start, count) = info
            .species
            .get(&meta.name)
            .copied()
            .unwrap_or((usize::MAX, 0));
        if start != next {
            return Err(Error::bad_value(
                t.path(),
                format!(
                    "/parameters/thicket/ensemble_part attribute first_{}",
                    meta.name
                ),
                start.to_string(),
                format!("{next}, the particle after those of the parts before it"),
            ));
        }
        if meta.frames != first.frames
            || meta.dims != first.dims
            || meta.frame_interval_s != first.frame_interval_s
        {
            return Err(Error::bad_value(
                t.path(),
                format!("/particles/{}/position", meta.name),
                format!(
                    "{} frames every {} s",
                    meta.frames, meta.frame_interval_s
                ),
                format!(
                    "the frames of the other parts ({} every {} s); finish an interrupted part with thicket run --resume",
                    first.frames, first.frame_interval_s
                ),
            ));
        }
        next += meta.particles;
        whole = count;
    }
    if next != whole {
        return Err(Error::bad_value(
            trajectories[trajectories.len() - 1].path(),
            format!("/particles/{}/position/value", first.name),
            format!("{next} particles in all parts"),
            format!("the whole run's {whole}"),
        ));
    }
    Ok(())
}
