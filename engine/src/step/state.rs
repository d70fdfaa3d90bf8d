//! The dynamic state of all particles and each species' step size and box limits.

use crate::base::rng::ParticleRng;
use crate::scenario::Scenario;
use crate::space::collisions::Bounds;
use crate::space::SimBox;
use rayon::prelude::*;
use std::ops::Range;

/// Dynamic state of all particles, in scenario species order.
#[derive(Debug, Clone, PartialEq)]
pub struct State {
    /// Centres in nm, wrapped into [0, L) on periodic axes.
    pub positions: Vec<[f64; 3]>,
    /// Periodic image counts: unwrapped = position + image · edges.
    pub images: Vec<[i32; 3]>,
    /// One random stream per particle.
    pub rngs: Vec<ParticleRng>,
    /// Steps taken so far.
    pub step: u64,
    /// Who is bound to an obstacle (empty when no species binds).
    pub binding: Binding,
}

/// A tracer bound to an obstacle: held where it bound from the end of step
/// `since_step` to the end of step `until_step`, when it is free again.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Tether {
    /// Step at whose end it bound.
    pub since_step: u64,
    /// Step at whose end it is released, ⌈τ/Δt⌉ steps later.
    pub until_step: u64,
    /// Its dwell time τ as drawn, s.
    pub dwell_s: f64,
}

/// A completed binding event.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Release {
    /// Particle index in the state.
    pub particle: u64,
    /// The event's tether.
    pub tether: Tether,
}

/// Binding state: one slot per particle, and the events completed in the
/// last call of the step (in order of release step, then particle).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Binding {
    /// Per particle: `Some` while bound (all particles when some species binds, else empty).
    pub tethers: Vec<Option<Tether>>,
    /// Events completed during the last advance of the state.
    pub released: Vec<Release>,
}

/// How one species moves in the box: its index range in [`State`] and its step size.
#[derive(Debug, Clone, PartialEq)]
pub struct Kinetics {
    /// Particle indices of the species.
    pub range: Range<usize>,
    /// Per-axis Gaussian step standard deviation √(2 D0 Δt), nm.
    pub sigma_nm: f64,
    /// Lowest allowed centre coordinate per axis (radius on a walled axis).
    pub lower_nm: [f64; 3],
    /// Highest allowed centre coordinate per axis.
    pub upper_nm: [f64; 3],
}

impl Kinetics {
    /// The box as this species' centres see it.
    pub fn bounds(&self, sim_box: &SimBox) -> Bounds {
        Bounds {
            periodic: sim_box.periodic,
            edges_nm: sim_box.edges_nm,
            lower_nm: self.lower_nm,
            upper_nm: self.upper_nm,
        }
    }
}

/// Per-species kinetics for a scenario.
pub fn kinetics(scenario: &Scenario) -> Vec<Kinetics> {
    let mut start = 0;
    scenario
        .species
        .iter()
        .map(|s| {
            let range = start..start + s.count;
            start = range.end;
            let mut lower_nm = [0.0; 3];
            let mut upper_nm = scenario.sim_box.edges_nm;
            for k in 0..3 {
                if !scenario.sim_box.periodic[k] {
                    lower_nm[k] = s.radius_nm;
                    upper_nm[k] -= s.radius_nm;
                }
            }
            Kinetics {
                range,
                sigma_nm: s.step_rms_nm(scenario.dt_s),
                lower_nm,
                upper_nm,
            }
        })
        .collect()
}

impl State {
    /// Initial state: every particle uniformly placed in the box space open
    /// to its centre, drawing from its own stream (so placement is
    /// thread-independent).
    pub fn initial(scenario: &Scenario) -> Self {
        let n = scenario.particle_count();
        let mut rngs: Vec<ParticleRng> = (0..n as u64)
            .map(|i| ParticleRng::for_particle(scenario.seed, i))
            .collect();
        let mut positions = vec![[0.0; 3]; n];
        for kin in kinetics(scenario) {
            for i in kin.range.clone() {
                let rng = &mut rngs[i];
                positions[i] = std::array::from_fn(|k| {
                    kin.lower_nm[k] + rng.uniform() * (kin.upper_nm[k] - kin.lower_nm[k])
                });
            }
        }
        Self {
            positions,
            images: vec![[0; 3]; n],
            rngs,
            step: 0,
            binding: Binding::default(),
        }
    }

    /// Number of particles.
    pub fn len(&self) -> usize {
        self.positions.len()
    }

    /// True when there are no particles.
    pub fn is_empty(&self) -> bool {
        self.positions.is_empty()
    }

    /// Unwrapped position of particle `i`, nm.
    pub fn unwrapped(&self, i: usize, sim_box: &SimBox) -> [f64; 3] {
        let p = self.positions[i];
        let im = self.images[i];
        [0, 1, 2].map(|k| p[k] + im[k] as f64 * sim_box.edges_nm[k])
    }
}

/// Draws every particle's start from its own stream (in parallel, so
/// thread-independent): `trial` proposes a centre, or `None` to try again,
/// up to `attempts` times. Returns false if some particle found none.
pub fn draw_starts(
    positions: &mut [[f64; 3]],
    rngs: &mut [ParticleRng],
    attempts: u64,
    trial: impl Fn(&mut ParticleRng) -> Option<[f64; 3]> + Sync,
) -> bool {
    positions
        .par_iter_mut()
        .zip(rngs.par_iter_mut())
        .all(|(p, g)| {
            (0..attempts)
                .find_map(|_| trial(g))
                .map(|c| *p = c)
                .is_some()
        })
}
