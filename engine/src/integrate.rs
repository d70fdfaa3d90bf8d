//! Step kernels: overdamped Langevin dynamics by Euler–Maruyama.
//!
//! Free particles do not interact, so each one is advanced through a whole
//! block of steps while its state sits in registers ("particle-major"); the
//! result is the same as stepping all particles in lock-step, because every
//! particle draws from its own random stream.

use crate::config::{Scenario, SimBox};
use crate::contact::{billiard, Bounds, ContactRule};
use crate::crowders::Crowd;
use crate::error::{EngineError, Result};
use crate::neighbors::{Blocker, ObstacleGrid};
use crate::obstacles::FixedObstacles;
use crate::rng::{standard_normal, ParticleRng};
use rayon::prelude::*;
use std::ops::Range;

/// Particles handed to one rayon task: big enough to amortise scheduling,
/// small enough to balance two cores.
const PAR_CHUNK: usize = 2048;

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
}

/// How one species moves: its index range in [`State`] and its step size.
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
    /// Initial state: every particle uniformly placed in the space open to its
    /// centre, drawing from its own stream (so placement is thread-independent).
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

/// Advances free (non-interacting) particles by `steps` steps.
///
/// Periodic axes wrap with image counting; walled axes reflect the centre
/// specularly at `lower_nm`/`upper_nm`.
pub fn advance_free(state: &mut State, kinetics: &[Kinetics], sim_box: &SimBox, steps: u64) {
    for kin in kinetics {
        let r = kin.range.clone();
        let pos = &mut state.positions[r.clone()];
        let img = &mut state.images[r.clone()];
        let rng = &mut state.rngs[r];
        pos.par_chunks_mut(PAR_CHUNK)
            .zip(img.par_chunks_mut(PAR_CHUNK))
            .zip(rng.par_chunks_mut(PAR_CHUNK))
            .for_each(|((p, im), g)| {
                for ((p, im), g) in p.iter_mut().zip(im.iter_mut()).zip(g.iter_mut()) {
                    advance_one_free(p, im, g, kin, sim_box, steps);
                }
            });
    }
    state.step += steps;
}

/// One particle through `steps` free steps; kept inline so the state lives in registers.
#[inline(always)]
fn advance_one_free(
    p: &mut [f64; 3],
    im: &mut [i32; 3],
    g: &mut ParticleRng,
    kin: &Kinetics,
    sim_box: &SimBox,
    steps: u64,
) {
    let mut x = *p;
    let mut n = *im;
    let sigma = kin.sigma_nm;
    for _ in 0..steps {
        for k in 0..3 {
            x[k] += sigma * standard_normal(g);
            if sim_box.periodic[k] {
                let l = sim_box.edges_nm[k];
                if x[k] >= l {
                    x[k] -= l;
                    n[k] += 1;
                } else if x[k] < 0.0 {
                    x[k] += l;
                    n[k] -= 1;
                }
            } else {
                x[k] = reflect(x[k], kin.lower_nm[k], kin.upper_nm[k]);
            }
        }
    }
    *p = x;
    *im = n;
}

/// Tracers per rayon task among obstacles: each runs a whole block of steps,
/// so small tasks already amortise scheduling and keep both cores busy.
const OBSTRUCTED_CHUNK: usize = 256;

/// Attempts allowed to find an open starting point for one tracer among
/// fixed obstacles before its species is declared unable to fit.
pub const OPEN_START_ATTEMPTS: u64 = 1_000_000;

/// Advances non-interacting particles among fixed obstacles by `steps` steps
/// (particle-major, like [`advance_free`]).
///
/// Each step proposes the Gaussian move (wrapped, or reflected at walls) and
/// rejects it whole if the new centre would overlap an obstacle: move
/// rejection, a Monte Carlo Brownian dynamics scheme whose bias shrinks like
/// √Δt (REFERENCES.md "Numerics"). `blockers[s]` answers for species s.
pub fn advance_obstructed<B: Blocker>(
    state: &mut State,
    kinetics: &[Kinetics],
    blockers: &[B],
    sim_box: &SimBox,
    steps: u64,
) {
    for (kin, blocker) in kinetics.iter().zip(blockers) {
        let r = kin.range.clone();
        let pos = &mut state.positions[r.clone()];
        let img = &mut state.images[r.clone()];
        let rng = &mut state.rngs[r];
        pos.par_chunks_mut(OBSTRUCTED_CHUNK)
            .zip(img.par_chunks_mut(OBSTRUCTED_CHUNK))
            .zip(rng.par_chunks_mut(OBSTRUCTED_CHUNK))
            .for_each(|((p, im), g)| {
                for ((p, im), g) in p.iter_mut().zip(im.iter_mut()).zip(g.iter_mut()) {
                    advance_one_obstructed(p, im, g, kin, blocker, sim_box, steps);
                    debug_assert!(
                        !blocker.blocked(p),
                        "a tracer ended inside an obstacle at {p:?}"
                    );
                }
            });
    }
    state.step += steps;
}

/// One particle through `steps` obstructed steps, its state kept in registers.
#[inline(always)]
fn advance_one_obstructed<B: Blocker>(
    p: &mut [f64; 3],
    im: &mut [i32; 3],
    g: &mut ParticleRng,
    kin: &Kinetics,
    blocker: &B,
    sim_box: &SimBox,
    steps: u64,
) {
    let mut x = *p;
    let mut n = *im;
    let sigma = kin.sigma_nm;
    let periodic = sim_box.periodic;
    let edges = sim_box.edges_nm;
    // A ball around `anchor` known to be open: moves that stay inside it need no
    // lookup. Same decisions as testing every move, only cheaper.
    let mut anchor = x;
    let mut safe2 = -1.0;
    for _ in 0..steps {
        // Draws first (x, y, z in order, as every kernel), so the small axis loop unrolls.
        let z = [standard_normal(g), standard_normal(g), standard_normal(g)];
        let mut y = x;
        let mut crossed = [0i32; 3];
        let mut wrapped = false;
        for k in 0..3 {
            y[k] += sigma * z[k];
            if periodic[k] {
                if y[k] >= edges[k] {
                    y[k] -= edges[k];
                    crossed[k] = 1;
                    wrapped = true;
                } else if y[k] < 0.0 {
                    y[k] += edges[k];
                    crossed[k] = -1;
                    wrapped = true;
                }
            } else {
                y[k] = reflect(y[k], kin.lower_nm[k], kin.upper_nm[k]);
            }
        }
        let d = [y[0] - anchor[0], y[1] - anchor[1], y[2] - anchor[2]];
        let accept = if d[0] * d[0] + d[1] * d[1] + d[2] * d[2] < safe2 {
            true
        } else {
            let clear = blocker.clearance(&y);
            if clear >= 0.0 {
                anchor = y;
                safe2 = clear * clear;
            }
            clear >= 0.0
        };
        if accept {
            x = y;
            if wrapped {
                for k in 0..3 {
                    n[k] += crossed[k];
                }
            }
        }
    }
    *p = x;
    *im = n;
}

/// The box as the centres of species `kin` see it (contact.rs).
pub fn bounds(kin: &Kinetics, sim_box: &SimBox) -> Bounds {
    Bounds {
        periodic: sim_box.periodic,
        edges_nm: sim_box.edges_nm,
        lower_nm: kin.lower_nm,
        upper_nm: kin.upper_nm,
    }
}

/// Advances non-interacting particles among fixed obstacles by `steps`
/// steps, reflecting each Gaussian move at the obstacles and walls it meets
/// instead of rejecting it (contact.rs; `[integrator] contact = "reflect"`).
/// Particle-major like [`advance_obstructed`], with the same draws.
pub fn advance_reflecting(
    state: &mut State,
    kinetics: &[Kinetics],
    grids: &[ObstacleGrid],
    sim_box: &SimBox,
    steps: u64,
) {
    for (kin, grid) in kinetics.iter().zip(grids) {
        let r = kin.range.clone();
        let bounds = bounds(kin, sim_box);
        let pos = &mut state.positions[r.clone()];
        let img = &mut state.images[r.clone()];
        let rng = &mut state.rngs[r];
        pos.par_chunks_mut(OBSTRUCTED_CHUNK)
            .zip(img.par_chunks_mut(OBSTRUCTED_CHUNK))
            .zip(rng.par_chunks_mut(OBSTRUCTED_CHUNK))
            .for_each(|((p, im), g)| {
                for ((p, im), g) in p.iter_mut().zip(im.iter_mut()).zip(g.iter_mut()) {
                    advance_one_reflecting(p, im, g, kin, grid, &bounds, steps);
                    debug_assert!(
                        !grid.blocked(p),
                        "a tracer ended inside an obstacle at {p:?}"
                    );
                }
            });
    }
    state.step += steps;
}

/// One particle through `steps` reflecting steps, its state kept in registers.
#[inline(always)]
fn advance_one_reflecting(
    p: &mut [f64; 3],
    im: &mut [i32; 3],
    g: &mut ParticleRng,
    kin: &Kinetics,
    grid: &ObstacleGrid,
    bounds: &Bounds,
    steps: u64,
) {
    let mut x = *p;
    let mut n = *im;
    let sigma = kin.sigma_nm;
    // A ball around `anchor` known to be open: a move whose end stays inside
    // it (and inside the walls) meets nothing, as both ends lie in a convex open set.
    let mut anchor = x;
    let mut safe2 = -1.0;
    for _ in 0..steps {
        let d = [0, 1, 2].map(|_| sigma * standard_normal(g));
        let mut y = [x[0] + d[0], x[1] + d[1], x[2] + d[2]];
        let e = [y[0] - anchor[0], y[1] - anchor[1], y[2] - anchor[2]];
        let inside_walls = (0..3).all(|k| {
            bounds.periodic[k] || (y[k] >= bounds.lower_nm[k] && y[k] <= bounds.upper_nm[k])
        });
        let clear = inside_walls && e[0] * e[0] + e[1] * e[1] + e[2] * e[2] < safe2;
        if !clear {
            y = billiard(&x, &d, bounds, grid).0;
        }
        let (w, crossed) = bounds.wrap(&y);
        x = w;
        for k in 0..3 {
            n[k] += crossed[k];
        }
        if !clear {
            let c = grid.clearance(&x);
            anchor = x;
            safe2 = if c > 0.0 { c * c } else { -1.0 };
        } else if crossed != [0; 3] {
            // The anchor stays in the frame it was found in: a wrapped point needs a new one.
            safe2 = -1.0;
        }
    }
    *p = x;
    *im = n;
}

/// The step kernel a scenario needs, with its prepared neighbour structures.
#[derive(Debug, Clone)]
pub struct Dynamics {
    sim_box: SimBox,
    kinetics: Vec<Kinetics>,
    kernel: Kernel,
}

#[derive(Debug, Clone)]
enum Kernel {
    Free,
    Obstructed(Vec<ObstacleGrid>, ContactRule),
    Crowded(Box<Crowd>),
}

impl Dynamics {
    /// Chooses the kernel: free particles, tracers among fixed obstacles
    /// (particle-major with rejection), or hard contacts between particles
    /// (a [`Crowd`]) when some species is a crowder.
    pub fn new(scenario: &Scenario, obstacles: &FixedObstacles) -> Self {
        let kinetics = kinetics(scenario);
        let grids = || obstacles.grids_for(scenario);
        let kernel = if scenario.has_crowders() {
            let g = if obstacles.is_empty() {
                vec![None; scenario.species.len()]
            } else {
                grids().into_iter().map(Some).collect()
            };
            Kernel::Crowded(Box::new(Crowd::new(scenario, g)))
        } else if obstacles.is_empty() {
            Kernel::Free
        } else {
            Kernel::Obstructed(grids(), scenario.contact)
        };
        Self {
            sim_box: scenario.sim_box,
            kinetics,
            kernel,
        }
    }

    /// Short name of the kernel ("free", "obstructed", "crowded").
    pub fn name(&self) -> &'static str {
        match self.kernel {
            Kernel::Free => "free",
            Kernel::Obstructed(..) => "obstructed",
            Kernel::Crowded(_) => "crowded",
        }
    }

    /// Cost of a particle-step relative to a free one (roughly), so that
    /// the run driver can size its blocks.
    pub fn relative_cost(&self) -> u64 {
        match self.kernel {
            Kernel::Free => 1,
            Kernel::Obstructed(..) => 2,
            Kernel::Crowded(_) => 8,
        }
    }

    /// Per-species kinetics.
    pub fn kinetics(&self) -> &[Kinetics] {
        &self.kinetics
    }

    /// The crowd, when particles have hard contacts.
    pub fn crowd(&self) -> Option<&Crowd> {
        match &self.kernel {
            Kernel::Crowded(c) => Some(c),
            _ => None,
        }
    }

    /// Mutable access to the crowd (to switch its sweep for comparisons).
    pub fn crowd_mut(&mut self) -> Option<&mut Crowd> {
        match &mut self.kernel {
            Kernel::Crowded(c) => Some(c),
            _ => None,
        }
    }

    /// Initial state: uniform in the space open to each centre, every
    /// particle drawing from its own stream. Free particles are placed as by
    /// [`State::initial`]; tracers among obstacles redraw until open;
    /// interacting particles are added one by one in index order.
    ///
    /// # Errors
    /// [`EngineError::Placement`] when a species cannot fit.
    pub fn initial_state(&self, scenario: &Scenario) -> Result<State> {
        match &self.kernel {
            Kernel::Free => Ok(State::initial(scenario)),
            Kernel::Crowded(c) => {
                let grids = c.grids();
                crate::crowders::place_crowd(scenario, &self.kinetics, grids)
            }
            Kernel::Obstructed(grids, _) => {
                let n = scenario.particle_count();
                let mut rngs: Vec<ParticleRng> = (0..n as u64)
                    .map(|i| ParticleRng::for_particle(scenario.seed, i))
                    .collect();
                let mut positions = vec![[0.0; 3]; n];
                for (s, (kin, grid)) in self.kinetics.iter().zip(grids).enumerate() {
                    let r = kin.range.clone();
                    let placed = draw_starts(
                        &mut positions[r.clone()],
                        &mut rngs[r],
                        OPEN_START_ATTEMPTS,
                        |g| {
                            let c = [0, 1, 2].map(|k| {
                                kin.lower_nm[k] + g.uniform() * (kin.upper_nm[k] - kin.lower_nm[k])
                            });
                            (!grid.blocked(&c)).then_some(c)
                        },
                    );
                    if !placed {
                        let sp = &scenario.species[s];
                        return Err(EngineError::Placement {
                            file: scenario.source.clone(),
                            reason: format!(
                                "species '{}' (radius {} nm) found no open starting point in {OPEN_START_ATTEMPTS} tries: the \
                                 obstacles leave (almost) no room for its centre (open fraction below about 1e-6); a smaller \
                                 tracer, fewer or smaller obstacles would fit",
                                sp.name, sp.radius_nm
                            ),
                        });
                    }
                }
                Ok(State {
                    positions,
                    images: vec![[0; 3]; n],
                    rngs,
                    step: 0,
                })
            }
        }
    }

    /// Advances the state by `steps` steps with the chosen kernel.
    pub fn advance(&mut self, state: &mut State, steps: u64) {
        match &mut self.kernel {
            Kernel::Free => advance_free(state, &self.kinetics, &self.sim_box, steps),
            Kernel::Obstructed(grids, ContactRule::Reject) => {
                advance_obstructed(state, &self.kinetics, grids, &self.sim_box, steps)
            }
            Kernel::Obstructed(grids, ContactRule::Reflect) => {
                advance_reflecting(state, &self.kinetics, grids, &self.sim_box, steps)
            }
            Kernel::Crowded(c) => c.advance(state, &self.kinetics, &self.sim_box, steps),
        }
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

/// Specular reflection of a coordinate into [lo, hi].
#[inline(always)]
pub fn reflect(mut x: f64, lo: f64, hi: f64) -> f64 {
    // A step longer than the gap could need several bounces; loop until inside.
    loop {
        if x < lo {
            x = 2.0 * lo - x;
        } else if x > hi {
            x = 2.0 * hi - x;
        } else {
            return x;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::Path;

    fn scenario(periodic: &str) -> Scenario {
        let text = format!(
            "seed = 3\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [50.0, 50.0, 50.0]\nperiodic = {periodic}\n\
             [[species]]\nname = \"a\"\nradius_nm = 1.0\ncount = 500\n[[species]]\nname = \"b\"\nradius_nm = 4.0\ncount = 300\n\
             [integrator]\ndt_s = 1e-9\nsteps = 100\n"
        );
        Scenario::from_text(&text, Path::new("t.toml"), &[]).unwrap()
    }

    #[test]
    fn splitting_steps_does_not_change_the_result() {
        let s = scenario("[true, true, false]");
        let kin = kinetics(&s);
        let mut a = State::initial(&s);
        let mut b = a.clone();
        advance_free(&mut a, &kin, &s.sim_box, 100);
        for _ in 0..4 {
            advance_free(&mut b, &kin, &s.sim_box, 25);
        }
        assert_eq!(a, b);
    }

    #[test]
    fn walls_keep_centres_a_radius_away() {
        let s = scenario("[false, false, false]");
        let kin = kinetics(&s);
        let mut st = State::initial(&s);
        advance_free(&mut st, &kin, &s.sim_box, 2000);
        for k in &kin {
            for i in k.range.clone() {
                for ax in 0..3 {
                    let x = st.positions[i][ax];
                    assert!(
                        x >= k.lower_nm[ax] && x <= k.upper_nm[ax],
                        "particle {i} axis {ax}: {x}"
                    );
                }
                assert_eq!(st.images[i], [0, 0, 0]);
            }
        }
    }

    #[test]
    fn reflect_folds_back_inside() {
        assert_eq!(reflect(-0.5, 0.0, 10.0), 0.5);
        assert_eq!(reflect(10.5, 0.0, 10.0), 9.5);
        assert_eq!(reflect(25.0, 0.0, 10.0), 5.0);
    }
}
