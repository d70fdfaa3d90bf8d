//! Mobile hard spheres: Brownian dynamics with hard contacts by move
//! rejection (a Monte Carlo Brownian dynamics scheme).
//!
//! Every step each particle proposes a Gaussian displacement √(2 D0 Δt)·ξ per
//! axis from its own random stream; the move is rejected whole if the new
//! centre would overlap a fixed obstacle or another particle it interacts
//! with. Crowders interact with every particle; tracers only with crowders
//! (tracer pairs are ideal probes). The rejection scheme samples the
//! hard-sphere equilibrium exactly for any Δt, since each proposal is
//! symmetric (Metropolis et al. 1953); its dynamics carry a bias that
//! shrinks like √Δt (REFERENCES.md "Numerics").
//!
//! **Update order.** The reference is the sequential sweep: particles in
//! index order, each tested against the already-updated positions of lower
//! indices and the old positions of higher ones. The parallel sweep gives
//! exactly the same result ("propose, then resolve"): all proposals are drawn
//! at once; in parallel, a proposal is accepted when nothing can block it,
//! rejected when an obstacle, a higher-index particle's old position, or a
//! lower-index particle that certainly stays put blocks it, and otherwise
//! marked as depending on lower-index particles; the few dependent ones are
//! then resolved in index order. No two particles can thus be accepted into
//! an overlap, and since every draw comes from a per-particle stream the
//! result does not depend on the number of threads.

use crate::base::error::{EngineError, Result};
use crate::base::rng::ParticleRng;
use crate::scenario::config::{Scenario, LATTICE_START_FRACTION};
use crate::scenario::media::Sweep;
use crate::space::collisions::{ContactRule, EventStep};
use crate::space::neighbors::{CellList, DynamicGrid, MinImage, ObstacleGrid, VerletList};
use crate::space::pairs::PairTable;
use crate::space::shape::Shape;
use crate::space::sim_box::SimBox;
use crate::step::boundary::Boundary;
use crate::step::displacement::{Displacement, Isotropic};
use crate::step::state::{Kinetics, State};
use rayon::prelude::*;

/// Particles per rayon task.
const CHUNK: usize = 1024;
/// Cost of one list build relative to one step's neighbour tests, per
/// unit of (1 + skin/contact)³: 27 cells scanned against the ~8φ neighbours
/// tested per step, twice as dear per candidate (measured).
const REBUILD_WEIGHT: f64 = 13.0;
/// Path length an event step allows for, in units of the drawn displacement,
/// when deciding whether the Verlet list still holds (checked after the step).
const PATH_ALLOWANCE: f64 = 1.2;
/// Fewest steps a Verlet list should last.
const MIN_STEPS_PER_BUILD: f64 = 2.0;
/// Below this many particles a step runs on one thread: a rayon pass costs
/// more than it saves. The result is the same either way.
pub const PARALLEL_MIN_PARTICLES: usize = 4096;
/// Placement attempts allowed per particle (plus [`PLACEMENT_ATTEMPT_FLOOR`]).
pub const PLACEMENT_ATTEMPTS_PER_PARTICLE: u64 = 1000;
/// Placement attempts any placement may use.
pub const PLACEMENT_ATTEMPT_FLOOR: u64 = 2_000_000;

/// Stream index (with the run seed) that picks the lattice sites of a dense start.
pub const CROWD_LATTICE_STREAM: u64 = u64::MAX - 3;

const REJECTED: u8 = 0;
const ACCEPTED: u8 = 1;
const DEPENDENT: u8 = 2;

/// Move counters since the crowd was built.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct CrowdStats {
    /// Moves proposed.
    pub proposed: u64,
    /// Moves accepted.
    pub accepted: u64,
    /// Moves that had to wait for lower-index particles (parallel sweep).
    pub dependent: u64,
    /// Verlet list builds.
    pub rebuilds: u64,
}

/// Interacting particles with their neighbour lists and work buffers.
#[derive(Debug, Clone)]
pub struct Crowd {
    radius_nm: Vec<f64>,
    /// Radius the Verlet list reaches with: the contact radius, grown by
    /// half the largest soft cut-off gap when particles interact softly.
    list_radius_nm: Vec<f64>,
    crowder: Vec<bool>,
    /// Soft interactions between particles (the Metropolis sweep), if any.
    pairs: Option<PairTable>,
    /// k_BT, pN·nm.
    kt_pn_nm: f64,
    grids: Vec<Option<ObstacleGrid>>,
    /// Confining walls beyond the box faces (a pore), if any.
    region: Option<Shape>,
    sweep: Sweep,
    /// Rejection, or the event-driven step (contact.rs).
    contact: ContactRule,
    parallel_min: usize,
    skin_nm: f64,
    cells: Option<CellList>,
    verlet: Option<VerletList>,
    /// Working copy of the particles in the Verlet list's cell order.
    slots: Slots,
    /// Move counters.
    pub stats: CrowdStats,
}

/// The particles during [`Crowd::advance`], held by slot (position in the
/// Verlet list's cell order) rather than by index: neighbours in space are
/// then neighbours in memory, and a thread's chunk of slots is a compact
/// region of the box whose data stay in that core's cache from pass to pass.
#[derive(Debug, Clone, Default)]
struct Slots {
    /// Particle index of each slot.
    id: Vec<u32>,
    /// Species of each slot.
    species: Vec<u32>,
    radius: Vec<f64>,
    /// Current centres (before the pending moves, if any); the image counts
    /// apart, since the hot passes read centres only.
    pos: Vec<[f64; 3]>,
    img: Vec<[i32; 3]>,
    rng: Vec<ParticleRng>,
    /// This step's proposals: centres and image counts.
    y: Vec<[f64; 3]>,
    ym: Vec<[i32; 3]>,
    /// Proposal rejected for good (an obstacle or a wall).
    blocked: Vec<bool>,
    /// Verdict of each proposal (parallel sweep).
    decision: Vec<u8>,
    /// Accepted proposals not yet copied into `pos`: the copy is made by the
    /// next draw pass, which saves a pass over memory per step.
    pending: bool,
}

/// One chunk of slots as the draw pass changes it.
struct DrawChunk<'a> {
    pos: &'a mut [[f64; 3]],
    img: &'a mut [[i32; 3]],
    rng: &'a mut [ParticleRng],
    y: &'a mut [[f64; 3]],
    ym: &'a mut [[i32; 3]],
    blocked: &'a mut [bool],
}

impl Slots {
    /// Where the particle at `s` is once the pending moves are made.
    fn current(&self, s: usize) -> (&[f64; 3], &[i32; 3]) {
        if self.pending && self.decision[s] == ACCEPTED {
            (&self.y[s], &self.ym[s])
        } else {
            (&self.pos[s], &self.img[s])
        }
    }

    /// Reorders every per-slot array: new slot s takes what old slot `from[s]` held.
    fn permute(&mut self, from: &[u32]) {
        fn gather<T: Clone + Send + Sync>(v: &mut Vec<T>, from: &[u32]) {
            *v = from.par_iter().map(|&o| v[o as usize].clone()).collect();
        }
        debug_assert!(!self.pending, "pending moves are made before a rebuild");
        gather(&mut self.id, from);
        gather(&mut self.species, from);
        gather(&mut self.radius, from);
        gather(&mut self.pos, from);
        gather(&mut self.img, from);
        gather(&mut self.rng, from);
        gather(&mut self.y, from);
        gather(&mut self.ym, from);
        gather(&mut self.blocked, from);
        self.decision.resize(from.len(), REJECTED);
    }
}

/// One Gaussian proposal from `g`: the same displacement and box faces as
/// every particle that steps alone (`pipeline`).
#[inline(always)]
fn propose(
    p: &[f64; 3],
    im: &[i32; 3],
    g: &mut ParticleRng,
    kin: &Kinetics,
    sim_box: &SimBox,
) -> ([f64; 3], [i32; 3]) {
    let d = Isotropic {
        sigma_nm: kin.sigma_nm,
    }
    .draw(p, im, g);
    let moved = kin
        .bounds(sim_box)
        .fold(p, im, [p[0] + d[0], p[1] + d[1], p[2] + d[2]], g, true);
    (moved.at, moved.image)
}

impl Crowd {
    /// Prepares a crowd for a scenario; `grids[s]` is the obstacle grid of
    /// species s (None without obstacles).
    pub fn new(scenario: &Scenario, grids: Vec<Option<ObstacleGrid>>) -> Self {
        let n = scenario.particle_count();
        let mut radius_nm = Vec::with_capacity(n);
        let mut crowder = Vec::with_capacity(n);
        for s in &scenario.species {
            radius_nm.extend(std::iter::repeat_n(s.radius_nm, s.count));
            crowder.extend(std::iter::repeat_n(s.crowder, s.count));
        }
        let step = scenario
            .species
            .iter()
            .map(|s| s.step_rms_nm(scenario.dt_s))
            .fold(0.0, f64::max);
        let mut contact = f64::INFINITY;
        for a in &scenario.species {
            for b in scenario.species.iter().filter(|b| a.crowder || b.crowder) {
                contact = contact.min(a.radius_nm + b.radius_nm);
            }
        }
        // A soft pair is listed out to its cut-off: every list radius grows by half the widest.
        let grow = scenario
            .pairs
            .as_ref()
            .map_or(0.0, |p| 0.5 * p.largest_cutoff_gap_nm());
        let list_radius_nm: Vec<f64> = radius_nm.iter().map(|r| r + grow).collect();
        contact += 2.0 * grow;
        // An event step's paths may outrun its draws (checked after each step): lists sized for that.
        let allowance = match scenario.contact {
            ContactRule::Reject => 1.0,
            ContactRule::Reflect => PATH_ALLOWANCE,
        };
        let skin_nm = choose_skin_nm(contact, allowance * step, n);
        Self {
            radius_nm,
            list_radius_nm,
            crowder,
            pairs: scenario.pairs.clone(),
            kt_pn_nm: scenario.thermal_energy_pn_nm(),
            grids,
            region: curved_region(scenario),
            sweep: scenario.sweep,
            contact: scenario.contact,
            parallel_min: PARALLEL_MIN_PARTICLES,
            skin_nm,
            cells: None,
            verlet: None,
            slots: Slots::default(),
            stats: CrowdStats::default(),
        }
    }

    /// Overrides the update order (for comparisons of the two).
    pub fn set_sweep(&mut self, sweep: Sweep) {
        self.sweep = sweep;
    }

    /// Overrides the contact rule (for comparisons of the two).
    pub fn set_contact(&mut self, contact: ContactRule) {
        self.contact = contact;
    }

    /// Sets the particle count from which the parallel sweep is used
    /// (default [`PARALLEL_MIN_PARTICLES`]; 0 forces it, for tests).
    pub fn set_parallel_min(&mut self, particles: usize) {
        self.parallel_min = particles;
    }

    /// Verlet skin, nm.
    pub fn skin_nm(&self) -> f64 {
        self.skin_nm
    }

    /// Mean number of Verlet neighbours per particle (0 before the first step).
    pub fn mean_neighbours(&self) -> f64 {
        self.verlet.as_ref().map_or(0.0, |l| l.mean_neighbours())
    }

    /// Obstacle grid of each species (None without obstacles).
    pub fn grids(&self) -> &[Option<ObstacleGrid>] {
        &self.grids
    }

    /// Contact radius of every particle, nm.
    pub fn radii_nm(&self) -> &[f64] {
        &self.radius_nm
    }

    /// Whether each particle is a crowder.
    pub fn crowders(&self) -> &[bool] {
        &self.crowder
    }

    /// Advances every particle by `steps` steps.
    pub fn advance(
        &mut self,
        state: &mut State,
        kinetics: &[Kinetics],
        sim_box: &SimBox,
        steps: u64,
    ) {
        // Into cell order once per call, not once per step.
        self.load(state, kinetics, sim_box);
        for _ in 0..steps {
            self.step(state, kinetics, sim_box);
            debug_assert!(
                self.overlap_in_slots(sim_box).is_none(),
                "overlap after step {}",
                state.step
            );
        }
        self.store(state);
    }

    /// Copies the state into the slots of the Verlet list, building one
    /// first if there is none for this many particles.
    fn load(&mut self, state: &State, kinetics: &[Kinetics], sim_box: &SimBox) {
        if self.verlet.as_ref().is_some_and(|l| l.len() != state.len()) {
            self.verlet = None;
        }
        if self.verlet.is_none() {
            let list = self.build_list(&state.positions, sim_box, self.skin_nm);
            self.verlet = Some(list);
        }
        let ids = self.verlet.as_ref().expect("built above").cell_order();
        let mut species = vec![0u32; state.len()];
        for (s, kin) in kinetics.iter().enumerate() {
            species[kin.range.clone()].fill(s as u32);
        }
        let n = state.len();
        let slots = &mut self.slots;
        slots.id = ids.to_vec();
        ids.par_iter()
            .map(|&i| species[i as usize])
            .collect_into_vec(&mut slots.species);
        ids.par_iter()
            .map(|&i| self.radius_nm[i as usize])
            .collect_into_vec(&mut slots.radius);
        ids.par_iter()
            .map(|&i| state.positions[i as usize])
            .collect_into_vec(&mut slots.pos);
        ids.par_iter()
            .map(|&i| state.images[i as usize])
            .collect_into_vec(&mut slots.img);
        ids.par_iter()
            .map(|&i| state.rngs[i as usize].clone())
            .collect_into_vec(&mut slots.rng);
        slots.y.resize(n, [0.0; 3]);
        slots.ym.resize(n, [0; 3]);
        slots.blocked.resize(n, false);
        slots.decision.resize(n, REJECTED);
        slots.pending = false;
    }

    /// Writes the slots back to the state by particle index, pending moves made.
    fn store(&self, state: &mut State) {
        let list = self.verlet.as_ref().expect("list built by load");
        let slots = &self.slots;
        state
            .positions
            .par_chunks_mut(CHUNK)
            .zip(state.images.par_chunks_mut(CHUNK))
            .zip(state.rngs.par_chunks_mut(CHUNK))
            .enumerate()
            .for_each(|(c, ((p, m), g))| {
                for o in 0..p.len() {
                    let s = list.slot_of(c * CHUNK + o);
                    let (at, image) = slots.current(s);
                    p[o] = *at;
                    m[o] = *image;
                    g[o] = slots.rng[s].clone();
                }
            });
    }

    /// A Verlet list of the given skin for `positions` (by particle index).
    fn build_list(&mut self, positions: &[[f64; 3]], sim_box: &SimBox, skin: f64) -> VerletList {
        let reach = 2.0 * self.list_radius_nm.iter().cloned().fold(0.0, f64::max) + self.skin_nm;
        let cells = self
            .cells
            .get_or_insert_with(|| CellList::new(sim_box, reach));
        self.stats.rebuilds += 1;
        VerletList::build(
            cells,
            positions,
            &self.list_radius_nm,
            &self.crowder,
            sim_box,
            skin,
        )
    }

    fn step(&mut self, state: &mut State, kinetics: &[Kinetics], sim_box: &SimBox) {
        if self.pairs.is_some() {
            self.step_soft(state, kinetics, sim_box);
            return;
        }
        if self.contact == ContactRule::Reflect {
            self.step_events(state, kinetics, sim_box);
            return;
        }
        let sequential = self.sweep == Sweep::Sequential || state.len() < self.parallel_min;
        let drift2 = self.draw_proposals(kinetics, sim_box, sequential);
        self.ensure_list(state, sim_box, drift2);
        self.stats.proposed += state.len() as u64;
        if sequential {
            self.stats.accepted += self.sweep_in_order(sim_box);
        } else {
            let (dependent, accepted) = self.classify(sim_box);
            self.stats.dependent += dependent.len() as u64;
            self.stats.accepted += accepted + self.resolve_in_order(sim_box, &dependent);
            // The accepted moves are made by the next draw pass (or by `store`).
            self.slots.pending = true;
        }
        state.step += 1;
    }

    /// Makes the pending moves, then every particle draws its proposal from
    /// its own stream; obstacle and wall hits are final rejections. Returns
    /// the largest squared drift of an unblocked proposal from the Verlet
    /// list's reference.
    fn draw_proposals(&mut self, kinetics: &[Kinetics], sim_box: &SimBox, sequential: bool) -> f64 {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref().expect("list built by load");
        let (grids, region) = (&self.grids, self.region.as_ref());
        let slots = &mut self.slots;
        let pending = std::mem::replace(&mut slots.pending, false);
        let (species, radius, decision) = (&slots.species, &slots.radius, &slots.decision);
        // One chunk of slots: moves, proposals, obstacle and wall tests, largest drift.
        let chunk = |(c, part): (usize, DrawChunk)| -> f64 {
            let base = c * CHUNK;
            let mut d2max: f64 = 0.0;
            for o in 0..part.pos.len() {
                let s = base + o;
                if pending && decision[s] == ACCEPTED {
                    part.pos[o] = part.y[o];
                    part.img[o] = part.ym[o];
                }
                let sp = species[s] as usize;
                let (p, m) = propose(
                    &part.pos[o],
                    &part.img[o],
                    &mut part.rng[o],
                    &kinetics[sp],
                    sim_box,
                );
                part.y[o] = p;
                part.ym[o] = m;
                let blocked = grids
                    .get(sp)
                    .and_then(|g| g.as_ref())
                    .is_some_and(|grid| grid.blocked(&p))
                    || region.is_some_and(|shape| !shape.allows(&p, radius[s]));
                part.blocked[o] = blocked;
                if !blocked {
                    d2max = d2max.max(list.drift2_at(&wrap, s, &p));
                }
            }
            d2max
        };
        let parts: Vec<DrawChunk> = slots
            .pos
            .chunks_mut(CHUNK)
            .zip(slots.img.chunks_mut(CHUNK))
            .zip(slots.rng.chunks_mut(CHUNK))
            .zip(slots.y.chunks_mut(CHUNK))
            .zip(slots.ym.chunks_mut(CHUNK))
            .zip(slots.blocked.chunks_mut(CHUNK))
            .map(|(((((pos, img), rng), y), ym), blocked)| DrawChunk {
                pos,
                img,
                rng,
                y,
                ym,
                blocked,
            })
            .collect();
        if sequential {
            parts.into_iter().enumerate().map(chunk).fold(0.0, f64::max)
        } else {
            parts
                .into_par_iter()
                .enumerate()
                .map(chunk)
                .reduce(|| 0.0, f64::max)
        }
    }

    /// Rebuilds the Verlet list when a proposal has drifted more than half
    /// the skin (`drift2` is the largest squared drift) from where its
    /// particle was at the last build, and puts the slots in its new order.
    fn ensure_list(&mut self, state: &mut State, sim_box: &SimBox, drift2: f64) {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref().expect("list built by load");
        if drift2 <= list.max_drift2() {
            return;
        }
        // The build reads positions by index; the state's array is scratch until `store`.
        let pos = &self.slots.pos;
        state
            .positions
            .par_iter_mut()
            .enumerate()
            .for_each(|(i, p)| *p = pos[list.slot_of(i)]);
        let mut skin = self.skin_nm;
        loop {
            let fresh = self.build_list(&state.positions, sim_box, skin);
            let old = self.verlet.as_ref().expect("list built by load");
            let from: Vec<u32> = fresh
                .cell_order()
                .par_iter()
                .map(|&i| old.slot_of(i as usize) as u32)
                .collect();
            self.slots.permute(&from);
            let list = &*self.verlet.insert(fresh);
            let slots = &self.slots;
            let d2 = (0..slots.id.len())
                .into_par_iter()
                .map(|s| {
                    if slots.blocked[s] {
                        0.0
                    } else {
                        list.drift2_at(&wrap, s, &slots.y[s])
                    }
                })
                .reduce(|| 0.0, f64::max);
            if d2 <= list.max_drift2() {
                return;
            }
            // A proposal longer than half the skin (a far Gaussian tail): a wider
            // skin for now; the next rebuild returns to the usual one.
            skin = 2.0 * d2.sqrt() * 1.01;
        }
    }

    /// The sequential sweep: each particle in index order is tested against
    /// the positions as they stand (lower indices already moved) and moved at
    /// once if nothing blocks it. Returns the number of accepted moves.
    fn sweep_in_order(&mut self, sim_box: &SimBox) -> u64 {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref().expect("list built before the sweep");
        let slots = &mut self.slots;
        let mut accepted = 0;
        for i in 0..slots.id.len() {
            let s = list.slot_of(i);
            if slots.blocked[s] {
                continue;
            }
            let (y, ri) = (slots.y[s], slots.radius[s]);
            let clash = list.neighbour_slots_at(s).iter().any(|&t| {
                let t = t as usize;
                let cut = ri + slots.radius[t];
                wrap.distance2(&y, &slots.pos[t]) < cut * cut
            });
            if !clash {
                slots.pos[s] = y;
                slots.img[s] = slots.ym[s];
                accepted += 1;
            }
        }
        accepted
    }

    /// Parallel pass: accepted, rejected, or dependent on lower indices.
    /// Returns the dependent moves as (index, slot) in index order, and the
    /// number accepted.
    fn classify(&mut self, sim_box: &SimBox) -> (Vec<(u32, u32)>, u64) {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref().expect("list built before classify");
        let slots = &mut self.slots;
        let (id, radius, pos, y, blocked) = (
            &slots.id,
            &slots.radius,
            &slots.pos,
            &slots.y,
            &slots.blocked,
        );
        let chunks: Vec<(Vec<(u32, u32)>, u64)> = slots
            .decision
            .par_chunks_mut(CHUNK)
            .enumerate()
            .map(|(c, out)| {
                let mut dependent = Vec::new();
                let mut accepted = 0;
                for (o, d) in out.iter_mut().enumerate() {
                    let s = c * CHUNK + o;
                    if blocked[s] {
                        *d = REJECTED;
                        continue;
                    }
                    let (i, ys, ri) = (id[s], &y[s], radius[s]);
                    let mut verdict = ACCEPTED;
                    for &t in list.neighbour_slots_at(s) {
                        let t = t as usize;
                        let cut = ri + radius[t];
                        let hits_old = wrap.distance2(ys, &pos[t]) < cut * cut;
                        if id[t] > i || blocked[t] {
                            // t is still (higher index) or for good (blocked) at its old position.
                            if hits_old {
                                verdict = REJECTED;
                                break;
                            }
                        } else {
                            let hits_new = wrap.distance2(ys, &y[t]) < cut * cut;
                            if hits_old && hits_new {
                                // Blocked whether t moves or not.
                                verdict = REJECTED;
                                break;
                            }
                            if hits_old || hits_new {
                                verdict = DEPENDENT;
                            }
                        }
                    }
                    match verdict {
                        ACCEPTED => accepted += 1,
                        DEPENDENT => dependent.push((i, s as u32)),
                        _ => {}
                    }
                    *d = verdict;
                }
                (dependent, accepted)
            })
            .collect();
        let accepted = chunks.iter().map(|c| c.1).sum();
        let mut dependent: Vec<(u32, u32)> = chunks.into_iter().flat_map(|c| c.0).collect();
        // Resolved in index order, the order of the sequential sweep.
        dependent.sort_unstable();
        (dependent, accepted)
    }

    /// Decides the dependent moves `order` ((index, slot) by increasing
    /// index) one by one against the current positions: lower indices as
    /// already decided, higher ones old. Returns the number accepted.
    fn resolve_in_order(&mut self, sim_box: &SimBox, order: &[(u32, u32)]) -> u64 {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref().expect("list built before resolve");
        let slots = &mut self.slots;
        let mut accepted = 0;
        for &(i, s) in order {
            let s = s as usize;
            debug_assert!(!slots.blocked[s], "blocked moves are never dependent");
            let (y, ri) = (&slots.y[s], slots.radius[s]);
            let clash = list.neighbour_slots_at(s).iter().any(|&t| {
                let t = t as usize;
                let at = if slots.id[t] < i && slots.decision[t] == ACCEPTED {
                    &slots.y[t]
                } else {
                    &slots.pos[t]
                };
                let cut = ri + slots.radius[t];
                wrap.distance2(y, at) < cut * cut
            });
            slots.decision[s] = if clash { REJECTED } else { ACCEPTED };
            accepted += u64::from(!clash);
        }
        accepted
    }

    /// One step with reflecting contacts (`contact = "reflect"`): every
    /// particle draws its displacement from its own stream (x, y, z, as the
    /// proposals), then contact.rs runs the step as event-driven hard-sphere
    /// dynamics. The Verlet list must hold every pair that can meet during
    /// the step: each particle's drift from the list's reference plus its
    /// path length must stay within half the skin, else the list is rebuilt
    /// wider and the step run again from the same draws.
    fn step_events(&mut self, state: &mut State, kinetics: &[Kinetics], sim_box: &SimBox) {
        let wrap = MinImage::new(sim_box);
        let n = self.slots.id.len();
        let mut d2max: f64 = 0.0;
        {
            let list = self.verlet.as_ref().expect("list built by load");
            let slots = &mut self.slots;
            debug_assert!(!slots.pending, "the event step makes its moves at once");
            for s in 0..n {
                let kin = &kinetics[slots.species[s] as usize];
                let g = &mut slots.rng[s];
                let p = slots.pos[s];
                let d = Isotropic {
                    sigma_nm: kin.sigma_nm,
                }
                .draw(&p, &[0; 3], g);
                slots.y[s] = [p[0] + d[0], p[1] + d[1], p[2] + d[2]];
                slots.blocked[s] = false;
                // Collisions can lengthen a path: checked after the step.
                let reach = list.drift2_at(&wrap, s, &p).sqrt()
                    + (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
                d2max = d2max.max(reach * reach);
            }
        }
        // `y` holds start + displacement (not wrapped), so it survives the reordering.
        self.ensure_list(state, sim_box, d2max);
        // Inverse masses: D0 of each species (the displacements are Maxwellian velocities).
        let mobility: Vec<f64> = kinetics
            .iter()
            .map(|k| 0.5 * k.sigma_nm * k.sigma_nm)
            .collect();
        let bounds: Vec<_> = kinetics.iter().map(|k| k.bounds(sim_box)).collect();
        let mut end = vec![[0.0; 3]; n];
        let mut path = vec![0.0; n];
        loop {
            let displacement: Vec<[f64; 3]> = (0..n)
                .map(|s| {
                    let (y, p) = (&self.slots.y[s], &self.slots.pos[s]);
                    [y[0] - p[0], y[1] - p[1], y[2] - p[2]]
                })
                .collect();
            let list = self.verlet.as_ref().expect("list built by load");
            let slots = &self.slots;
            let step = EventStep {
                start: &slots.pos,
                displacement: &displacement,
                radius: &slots.radius,
                species: &slots.species,
                mobility: &mobility,
                bounds: &bounds,
                surfaces: &self.grids,
            };
            let counts = step.run(|s| list.neighbour_slots_at(s), &mut end, &mut path);
            debug_assert_eq!(counts.stalled, 0, "a particle stalled in the event step");
            let reach = (0..n)
                .map(|s| list.drift2_at(&wrap, s, &slots.pos[s]).sqrt() + path[s])
                .fold(0.0, f64::max);
            if reach * reach <= list.max_drift2() {
                break;
            }
            // Some path left the list's reach: a list from here, wide enough for every path.
            let widest = 2.0 * 1.01 * path.iter().cloned().fold(0.0, f64::max);
            self.rebuild_at_least(state, sim_box, widest);
        }
        let slots = &mut self.slots;
        let mut untouched = 0;
        for s in 0..n {
            // A move that met nothing ends where it was drawn to.
            untouched += u64::from(end[s] == slots.y[s]);
            let (p, m) = bounds[slots.species[s] as usize].wrap(&end[s]);
            slots.pos[s] = p;
            for (image, crossed) in slots.img[s].iter_mut().zip(m) {
                *image += crossed;
            }
        }
        self.stats.accepted += untouched;
        self.stats.proposed += n as u64;
        state.step += 1;
    }

    /// One step with soft interactions between particles: each particle in
    /// index order proposes y = x + (D0Δt/k_BT) F(x) + √(2D0Δt) ξ from the
    /// forces of its neighbours where they stand (lower indices moved), and
    /// the move stands with the Metropolis–Hastings probability
    /// min(1, e^{−ΔU/k_BT} q(y→x)/q(x→y)) (Rossky, Doll & Friedman 1978,
    /// "smart Monte Carlo"): Brownian dynamics whose equilibrium is the
    /// Boltzmann distribution at any Δt. Moves into an obstacle or a hard
    /// core are rejected. Each particle draws three normals and one uniform.
    fn step_soft(&mut self, state: &mut State, kinetics: &[Kinetics], sim_box: &SimBox) {
        let wrap = MinImage::new(sim_box);
        let n = self.slots.id.len();
        let mut accepted = 0;
        for i in 0..n {
            let mut s = self.verlet.as_ref().expect("list built by load").slot_of(i);
            let sp = self.slots.species[s] as usize;
            let kin = &kinetics[sp];
            // D0Δt/k_BT, nm/pN, from σ² = 2 D0 Δt.
            let mobility = 0.5 * kin.sigma_nm * kin.sigma_nm / self.kt_pn_nm;
            let x = self.slots.pos[s];
            let (u_x, f_x) = self
                .soft_energy_force(s, &x, &wrap)
                .expect("a particle's own position is never in overlap");
            let g = &mut self.slots.rng[s];
            let noise = Isotropic {
                sigma_nm: kin.sigma_nm,
            }
            .draw(&x, &[0; 3], g);
            let uniform = g.uniform();
            let d = [0, 1, 2].map(|k| mobility * f_x[k] + noise[k]);
            let moved = kin.bounds(sim_box).fold(
                &x,
                &self.slots.img[s],
                [x[0] + d[0], x[1] + d[1], x[2] + d[2]],
                g,
                true,
            );
            // An obstacle rejects the move before any list is consulted (or rebuilt).
            let blocked = self
                .grids
                .get(sp)
                .and_then(|g| g.as_ref())
                .is_some_and(|grid| grid.blocked(&moved.at));
            if blocked {
                continue;
            }
            let list = self.verlet.as_ref().expect("list built by load");
            if list.drift2_at(&wrap, s, &moved.at) > list.max_drift2() {
                // Neighbours are valid within half the skin of the build: a list from here, wide enough for this move.
                let length = (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
                self.rebuild_at_least(state, sim_box, 2.0 * 1.01 * length);
                s = self.verlet.as_ref().expect("just built").slot_of(i);
            }
            let Some((u_y, f_y)) = self.soft_energy_force(s, &moved.at, &wrap) else {
                continue;
            };
            // ln q(y→x) − ln q(x→y): Gaussians of variance 2D0Δt about each start's drifted point.
            let two_var = 2.0 * kin.sigma_nm * kin.sigma_nm;
            let mut forward = 0.0;
            let mut backward = 0.0;
            for k in 0..3 {
                forward += noise[k] * noise[k];
                let back = -d[k] - mobility * f_y[k];
                backward += back * back;
            }
            let log_ratio = -(u_y - u_x) / self.kt_pn_nm - (backward - forward) / two_var;
            if log_ratio >= 0.0 || uniform < log_ratio.exp() {
                self.slots.pos[s] = moved.at;
                self.slots.img[s] = moved.image;
                accepted += 1;
            }
        }
        self.stats.proposed += n as u64;
        self.stats.accepted += accepted;
        state.step += 1;
    }

    /// The soft energy (pN·nm) and force (pN) on the particle in slot `s`
    /// placed at `p`, from its neighbours where they stand; None when `p`
    /// overlaps one. Terms are summed in fixed point (2⁻³² of a unit), which
    /// is exact and so independent of the list's order: a resumed run, which
    /// rebuilds its list, gives the same numbers.
    fn soft_energy_force(
        &self,
        s: usize,
        p: &[f64; 3],
        wrap: &MinImage,
    ) -> Option<(f64, [f64; 3])> {
        const SCALE: f64 = 4_294_967_296.0;
        // Truncation, not `round` (a library call here): each term is converted alone, so the sum stays exact.
        let fixed = |x: f64| (x * SCALE) as i64;
        let pairs = self.pairs.as_ref().expect("soft step has pairs");
        let list = self.verlet.as_ref().expect("list built by load");
        let slots = &self.slots;
        let (sp, ri) = (slots.species[s] as usize, slots.radius[s]);
        let mut u = 0i64;
        let mut f = [0i64; 3];
        for &t in list.neighbour_slots_at(s) {
            let t = t as usize;
            let d = wrap.delta(&slots.pos[t], p);
            let r2 = d[0] * d[0] + d[1] * d[1] + d[2] * d[2];
            let contact = ri + slots.radius[t];
            if r2 < contact * contact {
                return None;
            }
            let Some(pair) = pairs.get(sp, slots.species[t] as usize) else {
                continue;
            };
            let cut = pair.cutoff_distance_nm();
            if r2 >= cut * cut {
                continue;
            }
            let r = r2.sqrt();
            let (e, force) = pair.energy_force(r);
            let c = force / r;
            u = u.wrapping_add(fixed(e));
            for k in 0..3 {
                f[k] = f[k].wrapping_add(fixed(c * d[k]));
            }
        }
        Some((u as f64 / SCALE, f.map(|v| v as f64 / SCALE)))
    }

    /// Rebuilds the Verlet list at the current positions with a skin of at
    /// least `skin_nm`, reordering the slots.
    fn rebuild_at_least(&mut self, state: &mut State, sim_box: &SimBox, skin_nm: f64) {
        let list = self.verlet.as_ref().expect("list built by load");
        let pos = &self.slots.pos;
        // The build reads positions by index; the state's array is scratch until `store`.
        state
            .positions
            .par_iter_mut()
            .enumerate()
            .for_each(|(i, p)| *p = pos[list.slot_of(i)]);
        let fresh = self.build_list(&state.positions, sim_box, skin_nm.max(self.skin_nm));
        let old = self.verlet.as_ref().expect("list built by load");
        let from: Vec<u32> = fresh
            .cell_order()
            .iter()
            .map(|&i| old.slot_of(i as usize) as u32)
            .collect();
        self.slots.permute(&from);
        self.verlet = Some(fresh);
    }

    /// The first overlapping interacting pair, or a particle inside an
    /// obstacle (reported as (i, i)), in the slots with the pending moves
    /// made (the debug check after every step).
    fn overlap_in_slots(&self, sim_box: &SimBox) -> Option<(usize, usize)> {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref()?;
        let slots = &self.slots;
        (0..slots.id.len()).find_map(|s| {
            let (a, i) = (slots.current(s).0, slots.id[s] as usize);
            let grid = self.grids.get(slots.species[s] as usize);
            if grid.and_then(|g| g.as_ref()).is_some_and(|g| g.blocked(a)) {
                return Some((i, i));
            }
            list.neighbour_slots_at(s)
                .iter()
                .map(|&t| t as usize)
                .find(|&t| {
                    let cut = slots.radius[s] + slots.radius[t];
                    wrap.distance2(a, slots.current(t).0) < cut * cut
                })
                .map(|t| {
                    let j = slots.id[t] as usize;
                    (i.min(j), i.max(j))
                })
        })
    }

    /// The first overlapping interacting pair, or a particle inside an
    /// obstacle (reported as (i, i)), using the current neighbour list.
    pub fn find_overlap(
        &self,
        state: &State,
        kinetics: &[Kinetics],
        sim_box: &SimBox,
    ) -> Option<(usize, usize)> {
        let wrap = MinImage::new(sim_box);
        for (s, kin) in kinetics.iter().enumerate() {
            if let Some(grid) = self.grids.get(s).and_then(|g| g.as_ref()) {
                if let Some(i) = kin
                    .range
                    .clone()
                    .find(|&i| grid.blocked(&state.positions[i]))
                {
                    return Some((i, i));
                }
            }
        }
        let list = self.verlet.as_ref()?;
        (0..state.len()).find_map(|i| {
            list.neighbours(i)
                .iter()
                .map(|&j| j as usize)
                .find(|&j| {
                    let cut = self.radius_nm[i] + self.radius_nm[j];
                    wrap.distance2(&state.positions[i], &state.positions[j]) < cut * cut
                })
                .map(|j| (i.min(j), i.max(j)))
        })
    }
}

/// Verlet skin that minimises the expected cost per step: lists hold
/// neighbours within (1 + s)·contact, and last until the largest of `n`
/// displacements (about √(2 ln n + 3) rms steps times √m after m steps, the
/// tail of a χ² with 3 degrees of freedom) reaches half the skin.
fn choose_skin_nm(contact_nm: f64, step_rms_nm: f64, n: usize) -> f64 {
    let z = (2.0 * (n.max(2) as f64).ln() + 3.0).sqrt();
    // A list must outlive a couple of steps, or one step's proposals outrun it.
    let shortest = 2.0 * z * step_rms_nm * MIN_STEPS_PER_BUILD.sqrt();
    let mut best = (f64::INFINITY, shortest);
    for k in 1..=500 {
        let skin = 0.01 * k as f64 * contact_nm;
        if skin < shortest {
            continue;
        }
        let steps_per_build = (skin / (2.0 * z * step_rms_nm)).powi(2);
        let cost = (1.0 + skin / contact_nm).powi(3) * (1.0 + REBUILD_WEIGHT / steps_per_build);
        if cost < best.0 {
            best = (cost, skin);
        }
    }
    best.1
}

/// The walls a crowd must test itself: a cylindrical pore. Plane walls
/// coincide with the box faces, which every proposal already respects.
fn curved_region(scenario: &Scenario) -> Option<Shape> {
    scenario
        .geometry
        .as_ref()
        .map(|g| g.shape.clone())
        .filter(|shape| matches!(shape, Shape::Cylinder { .. }))
}

/// Slow reference: the first overlapping interacting pair by testing all
/// pairs, with a relative tolerance `tolerance` on the contact distance.
pub fn find_overlap_brute_force(
    positions: &[[f64; 3]],
    radius_nm: &[f64],
    crowder: &[bool],
    sim_box: &SimBox,
    tolerance: f64,
) -> Option<(usize, usize)> {
    for i in 0..positions.len() {
        for j in i + 1..positions.len() {
            if !(crowder[i] || crowder[j]) {
                continue;
            }
            let cut = (radius_nm[i] + radius_nm[j]) * (1.0 - tolerance);
            if crate::space::neighbors::min_image_distance2(sim_box, &positions[i], &positions[j])
                < cut * cut
            {
                return Some((i, j));
            }
        }
    }
    None
}

/// Places interacting particles one by one, largest radius first and in
/// index order among equals (random sequential addition), each drawing
/// uniform trial centres from its own stream until it overlaps no obstacle
/// and no earlier particle it interacts with. Crowds denser than
/// [`LATTICE_START_FRACTION`] put their crowders on randomly chosen sites of
/// a face-centred lattice instead (the others are then added at random).
///
/// # Errors
/// [`EngineError::Placement`] when the attempt budget runs out, saying which
/// species was being placed and the crowder volume fraction reached.
pub fn place_crowd(
    scenario: &Scenario,
    kinetics: &[Kinetics],
    grids: &[Option<ObstacleGrid>],
) -> Result<State> {
    let wrap = MinImage::new(&scenario.sim_box);
    let n = scenario.particle_count();
    let mut rngs: Vec<ParticleRng> = (0..n as u64)
        .map(|i| ParticleRng::for_particle(scenario.seed, i))
        .collect();
    let mut positions = vec![[0.0; 3]; n];
    let mut radius = Vec::with_capacity(n);
    let mut crowder = Vec::with_capacity(n);
    for s in &scenario.species {
        radius.extend(std::iter::repeat_n(s.radius_nm, s.count));
        crowder.extend(std::iter::repeat_n(s.crowder, s.count));
    }
    let r_max = radius.iter().cloned().fold(0.0, f64::max);
    let sim_box = &scenario.sim_box;
    let region = curved_region(scenario);
    // Tracers need no grid of their own when they only meet crowders, but both go in one.
    let mut grid = DynamicGrid::new(sim_box, 2.0 * r_max);
    let budget = PLACEMENT_ATTEMPT_FLOOR + PLACEMENT_ATTEMPTS_PER_PARTICLE * n as u64;
    let mut attempts = 0u64;
    // The space open to the fluid: the box, or the pore within it.
    let volume: f64 = sim_box.edges_nm.iter().product::<f64>()
        * region
            .as_ref()
            .map_or(1.0, |shape| shape.open_fraction(0.0, &sim_box.edges_nm));
    let mut crowd_volume = 0.0;
    // Larger particles first (index order among equals): small ones fill the gaps
    // large ones leave. Each draws from its own stream, so the order costs no reproducibility.
    let mut order: Vec<(usize, usize)> = kinetics
        .iter()
        .enumerate()
        .flat_map(|(s, kin)| kin.range.clone().map(move |i| (s, i)))
        .collect();
    order.sort_by(|a, b| radius[b.1].total_cmp(&radius[a.1]).then(a.1.cmp(&b.1)));
    let mut placed = vec![0usize; kinetics.len()];
    // Dense crowds start on a lattice, which the dynamics melt: random addition jams near φ ≈ 0.38.
    let on_lattice = scenario.crowder_volume_fraction() > LATTICE_START_FRACTION;
    if on_lattice {
        let members: Vec<(usize, usize)> =
            order.iter().copied().filter(|&(_, i)| crowder[i]).collect();
        let r_c = members.iter().map(|&(_, i)| radius[i]).fold(0.0, f64::max);
        // A pore keeps part of the box's sites: ask for enough that the pore holds them all.
        let share = region
            .as_ref()
            .map_or(1.0, |shape| shape.open_fraction(r_c, &sim_box.edges_nm));
        let wanted = (members.len() as f64 / share.max(1e-9)).ceil() as usize;
        let fail = |reason: String| {
            EngineError::Placement {
            file: scenario.source.clone(),
            reason: format!(
                "crowders fill φ = {:.4}, above {LATTICE_START_FRACTION}, so they start on a face-centred lattice, but {reason}; \
                 lower species[].count of the crowders or enlarge box.edges_nm",
                scenario.crowder_volume_fraction()
            ),
        }
        };
        let mut sites =
            crate::obstacles::spheres::fcc_sites_for(sim_box, r_c, wanted).map_err(fail)?;
        sites.retain(|p| {
            region.as_ref().is_none_or(|shape| shape.allows(p, r_c))
                && members.iter().all(|&(s, _)| {
                    grids
                        .get(s)
                        .and_then(|g| g.as_ref())
                        .is_none_or(|g| !g.blocked(p))
                })
        });
        if sites.len() < members.len() {
            return Err(fail(format!(
                "only {} lattice sites are open to them ({} needed)",
                sites.len(),
                members.len()
            )));
        }
        // Which sites are taken: a partial shuffle from a stream no particle uses.
        let mut g = ParticleRng::for_particle(scenario.seed, CROWD_LATTICE_STREAM);
        for (k, &(s, i)) in members.iter().enumerate() {
            let left = sites.len() - k;
            let pick = k + ((g.uniform() * left as f64) as usize).min(left - 1);
            sites.swap(k, pick);
            positions[i] = sites[k];
            grid.insert(i as u32, &sites[k]);
            crowd_volume += 4.0 / 3.0 * std::f64::consts::PI * radius[i].powi(3);
            placed[s] += 1;
        }
    }
    for (s, i) in order {
        if on_lattice && crowder[i] {
            continue;
        }
        let kin = &kinetics[s];
        let obstacle_grid = grids.get(s).and_then(|g| g.as_ref());
        {
            loop {
                if attempts >= budget {
                    let sp = &scenario.species[s];
                    return Err(EngineError::Placement {
                        file: scenario.source.clone(),
                        reason: format!(
                            "placing mobile particles one by one (largest first) ran out of room at species '{}' ({} of {} placed) \
                             after {attempts} attempts; the particles placed so far fill φ = {:.4} of the open volume. Random sequential \
                             addition jams near φ ≈ {} for equal spheres (Zhang & Torquato 2013): lower species[].count or enlarge box.edges_nm",
                            sp.name,
                            placed[s],
                            sp.count,
                            crowd_volume / volume,
                            crate::obstacles::spheres::RSA_JAMMING_FRACTION
                        ),
                    });
                }
                attempts += 1;
                let g = &mut rngs[i];
                let c = [0, 1, 2]
                    .map(|k| kin.lower_nm[k] + g.uniform() * (kin.upper_nm[k] - kin.lower_nm[k]));
                if obstacle_grid.is_some_and(|og| og.blocked(&c))
                    || region
                        .as_ref()
                        .is_some_and(|shape| !shape.allows(&c, radius[i]))
                {
                    continue;
                }
                let clash = grid.any_near(&c, |j| {
                    let j = j as usize;
                    if !(crowder[i] || crowder[j]) {
                        return false;
                    }
                    let cut = radius[i] + radius[j];
                    wrap.distance2(&c, &positions[j]) < cut * cut
                });
                if !clash {
                    positions[i] = c;
                    grid.insert(i as u32, &c);
                    crowd_volume += 4.0 / 3.0 * std::f64::consts::PI * radius[i].powi(3);
                    placed[s] += 1;
                    break;
                }
            }
        }
    }
    Ok(State {
        positions,
        images: vec![[0; 3]; n],
        rngs,
        step: 0,
        binding: Default::default(),
    })
}
