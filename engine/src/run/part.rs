//! One part of a large ensemble of non-interacting tracers: the particles of
//! a contiguous range of each species, run on their own.
//!
//! A part keeps the whole run's medium (obstacles, fibres, walls and pores
//! come from the seed alone) and every particle keeps its whole-run random
//! stream and starting point, so the union of the N parts equals the whole
//! run bit for bit. Crowders touch every particle, so a run with crowders
//! cannot be split; a membrane recycles particles between its baths and
//! counts crossings over all of them, so it is not split either.

use crate::base::error::{EngineError, Result};
use crate::io::trajectory::{write_attributes, AttrValue, TrajectoryWriter};
use crate::obstacles::FixedObstacles;
use crate::scenario::Scenario;
use crate::space::shape::Shape;
use crate::step::{State, Stepper};
use std::ops::Range;

/// HDF5 group holding a part's description.
pub const PART_GROUP: &str = "parameters/thicket/ensemble_part";

/// Part `index` (0-based) of `parts`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct EnsemblePart {
    /// 0-based index of the part.
    pub index: usize,
    /// Number of parts.
    pub parts: usize,
}

/// A whole scenario split for one part: the part's own scenario (each
/// species' count cut to its range) and the whole one it came from.
#[derive(Debug, Clone)]
pub struct PartRun {
    /// Which part.
    pub part: EnsemblePart,
    /// The whole run's scenario.
    pub whole: Scenario,
    /// The part's scenario: the whole one with each species' count set to its range.
    pub scenario: Scenario,
}

impl EnsemblePart {
    /// Particles of a species of `count` that this part holds: the
    /// `index`-th of `parts` nearly equal contiguous ranges.
    pub fn range(&self, count: usize) -> Range<usize> {
        let cut = |i: usize| (count as u128 * i as u128 / self.parts as u128) as usize;
        cut(self.index)..cut(self.index + 1)
    }
}

impl PartRun {
    /// Splits `whole` for `part`.
    ///
    /// # Errors
    /// [`EngineError::InvalidValue`] for a run with crowders or a membrane,
    /// or a species with fewer particles than parts.
    pub fn new(whole: &Scenario, part: EnsemblePart) -> Result<Self> {
        let refuse = |key: &str, value: String, allowed: String| EngineError::InvalidValue {
            file: whole.source.clone(),
            key: key.into(),
            value,
            allowed,
        };
        if let Some(s) = whole.species.iter().find(|s| s.crowder) {
            return Err(refuse(
                &format!("species.{}.kind", s.name),
                "\"crowder\"".into(),
                "a run split into parts must hold only non-interacting tracers: crowders touch every particle, so no part could move its particles without the others; run it whole".into(),
            ));
        }
        if let Some(g) = &whole.geometry {
            if matches!(g.shape, Shape::Membrane(_)) {
                return Err(refuse(
                    "geometry.shape",
                    "\"membrane\"".into(),
                    "a membrane run is not split into parts: it recycles particles between its baths and counts crossings over all of them; run it whole".into(),
                ));
            }
        }
        if part.parts == 0 || part.index >= part.parts {
            return Err(refuse(
                "ensemble part",
                format!("{}/{}", part.index + 1, part.parts),
                "give I/N with 1 ≤ I ≤ N".into(),
            ));
        }
        if let Some(s) = whole.species.iter().find(|s| s.count < part.parts) {
            return Err(refuse(
                &format!("species.{}.count", s.name),
                s.count.to_string(),
                format!(
                    "each of the {} parts needs at least one particle of every species; use at most {} parts",
                    part.parts, s.count
                ),
            ));
        }
        let counts: Vec<String> = whole
            .species
            .iter()
            .map(|s| format!("species.{}.count={}", s.name, part.range(s.count).len()))
            .collect();
        let scenario = Scenario::from_text(&whole.resolved_toml, &whole.source, &counts)?;
        Ok(Self {
            part,
            whole: whole.clone(),
            scenario,
        })
    }

    /// The part's starting state: the whole run's, cut to the part's
    /// ranges, so each particle starts where it does in the whole run and
    /// keeps its stream.
    ///
    /// # Errors
    /// [`EngineError::Placement`] when a species cannot fit.
    pub fn initial_state(&self, obstacles: &FixedObstacles) -> Result<State> {
        let whole = &self.whole;
        // The start the whole run would have (crowders are refused in `new`).
        let full = Stepper::new(whole, obstacles).initial_state(whole)?;
        let mut state = State {
            positions: Vec::with_capacity(self.scenario.particle_count()),
            images: Vec::with_capacity(self.scenario.particle_count()),
            rngs: Vec::with_capacity(self.scenario.particle_count()),
            step: full.step,
            binding: Default::default(),
        };
        let mut start = 0;
        for s in &whole.species {
            let r = self.part.range(s.count);
            let r = start + r.start..start + r.end;
            state
                .positions
                .extend_from_slice(&full.positions[r.clone()]);
            state.images.extend_from_slice(&full.images[r.clone()]);
            state.rngs.extend_from_slice(&full.rngs[r]);
            start += s.count;
        }
        if !full.binding.tethers.is_empty() {
            state.binding.tethers = vec![None; state.positions.len()];
        }
        Ok(state)
    }

    /// Records in a new trajectory which part it holds: index, count of
    /// parts, each species' first particle and whole count, and the whole
    /// scenario, so the parts can be checked and joined.
    ///
    /// # Errors
    /// HDF5 failures.
    pub fn describe(&self, writer: &TrajectoryWriter) -> Result<()> {
        let mut attrs: Vec<(String, AttrValue)> = vec![
            ("index".into(), AttrValue::I64(self.part.index as i64)),
            ("parts".into(), AttrValue::I64(self.part.parts as i64)),
            (
                "whole_scenario".into(),
                AttrValue::Str(self.whole.resolved_toml.clone()),
            ),
        ];
        for s in &self.whole.species {
            let r = self.part.range(s.count);
            attrs.push((format!("first_{}", s.name), AttrValue::I64(r.start as i64)));
            attrs.push((
                format!("whole_count_{}", s.name),
                AttrValue::I64(s.count as i64),
            ));
        }
        let refs: Vec<(&str, AttrValue)> =
            attrs.iter().map(|(k, v)| (k.as_str(), v.clone())).collect();
        write_attributes(writer, PART_GROUP, &refs)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ranges_tile_the_species() {
        for count in [1usize, 2, 7, 10, 1001] {
            for parts in 1..=count.min(9) {
                let mut next = 0;
                for index in 0..parts {
                    let r = EnsemblePart { index, parts }.range(count);
                    assert_eq!(r.start, next);
                    assert!(!r.is_empty());
                    next = r.end;
                }
                assert_eq!(next, count);
            }
        }
    }
}
