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
//! shrinks like √Δt (REFERENCE.md "Numerics").
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

use crate::config::{Scenario, SimBox};
use crate::error::{EngineError, Result};
use crate::geometry::Shape;
use crate::integrate::{reflect, Kinetics, State};
use crate::neighbors::{CellList, DynamicGrid, MinImage, ObstacleGrid, VerletList};
use crate::rng::{standard_normal, ParticleRng};
use rayon::prelude::*;

/// Particles per rayon task.
const CHUNK: usize = 1024;
/// Cost of one list build relative to one step's neighbour tests, per
/// unit of (1 + skin/contact)³: 27 cells scanned against the ~8φ neighbours
/// tested per step, twice as dear per candidate (measured).
const REBUILD_WEIGHT: f64 = 13.0;
/// Fewest steps a Verlet list should last.
const MIN_STEPS_PER_BUILD: f64 = 2.0;
/// Below this many particles a step runs on one thread: a rayon pass costs
/// more than it saves. The result is the same either way.
pub const PARALLEL_MIN_PARTICLES: usize = 4096;
/// Placement attempts allowed per particle (plus [`PLACEMENT_ATTEMPT_FLOOR`]).
pub const PLACEMENT_ATTEMPTS_PER_PARTICLE: u64 = 1000;
/// Placement attempts any placement may use.
pub const PLACEMENT_ATTEMPT_FLOOR: u64 = 2_000_000;

const REJECTED: u8 = 0;
const ACCEPTED: u8 = 1;
const DEPENDENT: u8 = 2;

/// Update order of particles with hard contacts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sweep {
    /// Propose in parallel, resolve conflicts in index order (the default).
    Parallel,
    /// One particle after the other in index order: the reference.
    Sequential,
}

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
    crowder: Vec<bool>,
    grids: Vec<Option<ObstacleGrid>>,
    /// Confining walls beyond the box faces (a pore), if any.
    region: Option<Shape>,
    sweep: Sweep,
    parallel_min: usize,
    skin_nm: f64,
    cells: Option<CellList>,
    verlet: Option<VerletList>,
    proposals: Vec<[f64; 3]>,
    proposal_images: Vec<[i32; 3]>,
    blocked: Vec<bool>,
    /// Verdict of each move, by slot of the Verlet list's cell order.
    decision: Vec<u8>,
    /// Move counters.
    pub stats: CrowdStats,
}

/// One Gaussian proposal from `g`, wrapped (periodic) or reflected (walls).
#[inline(always)]
fn propose(
    p: &[f64; 3],
    im: &[i32; 3],
    g: &mut ParticleRng,
    kin: &Kinetics,
    sim_box: &SimBox,
) -> ([f64; 3], [i32; 3]) {
    let mut y = *p;
    let mut m = *im;
    for k in 0..3 {
        y[k] += kin.sigma_nm * standard_normal(g);
        if sim_box.periodic[k] {
            let l = sim_box.edges_nm[k];
            if y[k] >= l {
                y[k] -= l;
                m[k] += 1;
            } else if y[k] < 0.0 {
                y[k] += l;
                m[k] -= 1;
            }
        } else {
            y[k] = reflect(y[k], kin.lower_nm[k], kin.upper_nm[k]);
        }
    }
    (y, m)
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
        let skin_nm = choose_skin_nm(contact, step, n);
        Self {
            radius_nm,
            crowder,
            grids,
            region: curved_region(scenario),
            sweep: scenario.sweep,
            parallel_min: PARALLEL_MIN_PARTICLES,
            skin_nm,
            cells: None,
            verlet: None,
            proposals: vec![[0.0; 3]; n],
            proposal_images: vec![[0; 3]; n],
            blocked: vec![false; n],
            decision: vec![REJECTED; n],
            stats: CrowdStats::default(),
        }
    }

    /// Overrides the update order (for comparisons of the two).
    pub fn set_sweep(&mut self, sweep: Sweep) {
        self.sweep = sweep;
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
        for _ in 0..steps {
            self.step(state, kinetics, sim_box);
            debug_assert!(
                self.find_overlap(state, kinetics, sim_box).is_none(),
                "overlap after step {}",
                state.step
            );
        }
    }

    fn step(&mut self, state: &mut State, kinetics: &[Kinetics], sim_box: &SimBox) {
        let sequential = self.sweep == Sweep::Sequential || state.len() < self.parallel_min;
        let drift2 = draw_proposals(
            state,
            kinetics,
            sim_box,
            &self.grids,
            (self.region.as_ref(), &self.radius_nm),
            self.verlet.as_ref(),
            (
                &mut self.proposals,
                &mut self.proposal_images,
                &mut self.blocked,
            ),
            sequential,
        );
        self.ensure_list(state, sim_box, drift2, sequential);
        let n = state.len();
        self.stats.proposed += n as u64;
        if sequential {
            self.stats.accepted += self.sweep_in_order(state, sim_box);
        } else {
            let dependent = self.classify(state, sim_box);
            self.stats.dependent += dependent.len() as u64;
            self.resolve_in_order(state, sim_box, dependent);
            let list = self.verlet.as_ref().expect("list built before the sweep");
            let (decision, proposals, proposal_images) =
                (&self.decision, &self.proposals, &self.proposal_images);
            self.stats.accepted += state
                .positions
                .par_chunks_mut(CHUNK)
                .zip(state.images.par_chunks_mut(CHUNK))
                .enumerate()
                .map(|(c, (p, im))| {
                    let base = c * CHUNK;
                    let mut accepted = 0;
                    for (o, (p, im)) in p.iter_mut().zip(im.iter_mut()).enumerate() {
                        if decision[list.slot_of(base + o)] == ACCEPTED {
                            *p = proposals[base + o];
                            *im = proposal_images[base + o];
                            accepted += 1;
                        }
                    }
                    accepted
                })
                .sum::<u64>();
        }
        state.step += 1;
    }

    /// The sequential sweep: each particle in index order is tested against
    /// the positions as they stand (lower indices already moved) and moved at
    /// once if nothing blocks it. Returns the number of accepted moves.
    fn sweep_in_order(&mut self, state: &mut State, sim_box: &SimBox) -> u64 {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref().expect("list built before the sweep");
        let mut accepted = 0;
        for i in 0..state.len() {
            if self.blocked[i] {
                continue;
            }
            let y = self.proposals[i];
            let ri = self.radius_nm[i];
            let positions = &state.positions;
            let clash = list.neighbours(i).iter().any(|&j| {
                let cut = ri + self.radius_nm[j as usize];
                wrap.distance2(&y, &positions[j as usize]) < cut * cut
            });
            if !clash {
                state.positions[i] = y;
                state.images[i] = self.proposal_images[i];
                accepted += 1;
            }
        }
        accepted
    }

    /// Rebuilds the Verlet list when a proposal has drifted more than half
    /// the skin (`drift2` is the largest squared drift) from where its
    /// particle was at the last build.
    fn ensure_list(&mut self, state: &State, sim_box: &SimBox, drift2: f64, sequential: bool) {
        let wrap = MinImage::new(sim_box);
        if let Some(list) = &self.verlet {
            if drift2 <= list.max_drift2() {
                return;
            }
        }
        let mut skin = self.skin_nm;
        let reach = 2.0 * self.radius_nm.iter().cloned().fold(0.0, f64::max) + skin;
        let cells = self
            .cells
            .get_or_insert_with(|| CellList::new(sim_box, reach));
        loop {
            let list = VerletList::build(
                cells,
                &state.positions,
                &self.radius_nm,
                &self.crowder,
                sim_box,
                skin,
            );
            self.stats.rebuilds += 1;
            let drift = |(i, (y, b)): (usize, (&[f64; 3], &bool))| {
                if *b {
                    0.0
                } else {
                    list.drift2(&wrap, i, y)
                }
            };
            let d2 = if sequential {
                self.proposals
                    .iter()
                    .zip(&self.blocked)
                    .enumerate()
                    .map(drift)
                    .fold(0.0, f64::max)
            } else {
                self.proposals
                    .par_iter()
                    .zip(self.blocked.par_iter())
                    .enumerate()
                    .map(drift)
                    .reduce(|| 0.0, f64::max)
            };
            if d2 <= list.max_drift2() {
                self.verlet = Some(list);
                return;
            }
            // A proposal longer than half the skin (a far Gaussian tail): a wider
            // skin for now; the next rebuild returns to the usual one.
            skin = 2.0 * d2.sqrt() * 1.01;
        }
    }

    /// Parallel pass: accepted, rejected, or dependent on lower indices.
    fn classify(&mut self, state: &State, sim_box: &SimBox) -> Vec<usize> {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref().expect("list built before classify");
        let (proposals, blocked, radius) = (&self.proposals, &self.blocked, &self.radius_nm);
        let old = &state.positions;
        self.decision.resize(state.len(), REJECTED);
        // Visited in cell order, so that neighbouring particles' data stay in cache;
        // verdicts are kept by cell slot.
        let order = list.cell_order();
        let chunks: Vec<Vec<usize>> = self
            .decision
            .par_chunks_mut(CHUNK)
            .enumerate()
            .map(|(c, out)| {
                let mut dependent = Vec::new();
                for (o, d) in out.iter_mut().enumerate() {
                    let slot = c * CHUNK + o;
                    let i = order[slot] as usize;
                    if blocked[i] {
                        *d = REJECTED;
                        continue;
                    }
                    let y = &proposals[i];
                    let mut verdict = ACCEPTED;
                    for &j in list.neighbours_at(slot) {
                        let j = j as usize;
                        let cut = radius[i] + radius[j];
                        let hits_old = wrap.distance2(y, &old[j]) < cut * cut;
                        if j > i {
                            if hits_old {
                                verdict = REJECTED;
                                break;
                            }
                        } else if blocked[j] {
                            // j certainly stays at its old position.
                            if hits_old {
                                verdict = REJECTED;
                                break;
                            }
                        } else {
                            let hits_new = wrap.distance2(y, &proposals[j]) < cut * cut;
                            if hits_old && hits_new {
                                // Blocked whether j moves or not.
                                verdict = REJECTED;
                                break;
                            }
                            if hits_old || hits_new {
                                verdict = DEPENDENT;
                            }
                        }
                    }
                    if verdict == DEPENDENT {
                        dependent.push(i);
                    }
                    *d = verdict;
                }
                dependent
            })
            .collect();
        let mut dependent: Vec<usize> = chunks.into_iter().flatten().collect();
        // Resolved in index order, the order of the sequential sweep.
        dependent.sort_unstable();
        dependent
    }

    /// Decides `order` (increasing indices) one by one against the current
    /// positions: lower indices as already decided, higher ones old.
    fn resolve_in_order(
        &mut self,
        state: &State,
        sim_box: &SimBox,
        order: impl IntoIterator<Item = usize>,
    ) {
        let wrap = MinImage::new(sim_box);
        let list = self.verlet.as_ref().expect("list built before resolve");
        for i in order {
            let slot = list.slot_of(i);
            if self.blocked[i] {
                self.decision[slot] = REJECTED;
                continue;
            }
            let y = &self.proposals[i];
            let clash = list.neighbours_at(slot).iter().any(|&j| {
                let j = j as usize;
                let at = if j < i && self.decision[list.slot_of(j)] == ACCEPTED {
                    &self.proposals[j]
                } else {
                    &state.positions[j]
                };
                let cut = self.radius_nm[i] + self.radius_nm[j];
                wrap.distance2(y, at) < cut * cut
            });
            self.decision[slot] = if clash { REJECTED } else { ACCEPTED };
        }
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

/// Every particle draws its proposal from its own stream; obstacle hits are
/// final rejections. Returns the largest squared drift of an unblocked
/// proposal from the Verlet list's reference (0 without a list).
fn draw_proposals(
    state: &mut State,
    kinetics: &[Kinetics],
    sim_box: &SimBox,
    grids: &[Option<ObstacleGrid>],
    (region, radius): (Option<&Shape>, &[f64]),
    list: Option<&VerletList>,
    (proposals, proposal_images, blocked): (&mut [[f64; 3]], &mut [[i32; 3]], &mut [bool]),
    sequential: bool,
) -> f64 {
    let mut max_drift2: f64 = 0.0;
    let wrap = MinImage::new(sim_box);
    for (s, kin) in kinetics.iter().enumerate() {
        let r = kin.range.clone();
        let start = r.start;
        let grid = grids.get(s).and_then(|g| g.as_ref());
        let pos = &state.positions[r.clone()];
        let img = &state.images[r.clone()];
        // One chunk: proposals, obstacle test, largest drift.
        let chunk = |c: usize,
                     g: &mut [ParticleRng],
                     y: &mut [[f64; 3]],
                     m: &mut [[i32; 3]],
                     b: &mut [bool]|
         -> f64 {
            let base = c * CHUNK;
            let mut d2max: f64 = 0.0;
            for o in 0..g.len() {
                let (yy, mm) = propose(&pos[base + o], &img[base + o], &mut g[o], kin, sim_box);
                y[o] = yy;
                m[o] = mm;
                b[o] = grid.is_some_and(|grid| grid.blocked(&yy))
                    || region.is_some_and(|shape| !shape.allows(&yy, radius[start + base + o]));
                if let (false, Some(list)) = (b[o], list) {
                    d2max = d2max.max(list.drift2(&wrap, start + base + o, &yy));
                }
            }
            d2max
        };
        let rng = &mut state.rngs[r.clone()];
        let (y, m, b) = (
            &mut proposals[r.clone()],
            &mut proposal_images[r.clone()],
            &mut blocked[r],
        );
        let d2 = if sequential {
            rng.chunks_mut(CHUNK)
                .zip(y.chunks_mut(CHUNK))
                .zip(m.chunks_mut(CHUNK))
                .zip(b.chunks_mut(CHUNK))
                .enumerate()
                .map(|(c, (((g, y), m), b))| chunk(c, g, y, m, b))
                .fold(0.0, f64::max)
        } else {
            rng.par_chunks_mut(CHUNK)
                .zip(y.par_chunks_mut(CHUNK))
                .zip(m.par_chunks_mut(CHUNK))
                .zip(b.par_chunks_mut(CHUNK))
                .enumerate()
                .map(|(c, (((g, y), m), b))| chunk(c, g, y, m, b))
                .reduce(|| 0.0, f64::max)
        };
        max_drift2 = max_drift2.max(d2);
    }
    max_drift2
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
            if crate::neighbors::min_image_distance2(sim_box, &positions[i], &positions[j])
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
/// and no earlier particle it interacts with.
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
    for (s, i) in order {
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
                             addition jams near φ ≈ {} for equal spheres (Zhang & Torquato 2013): lower the counts or enlarge the box",
                            sp.name,
                            placed[s],
                            sp.count,
                            crowd_volume / volume,
                            crate::obstacles::RSA_JAMMING_FRACTION
                        ),
                    });
                }
                attempts += 1;
                let g = &mut rngs[i];
                let c = [0, 1, 2]
                    .map(|k| kin.lower_nm[k] + g.uniform() * (kin.upper_nm[k] - kin.lower_nm[k]));
                if obstacle_grid.is_some_and(|og| og.blocked(&c))
                    || region.as_ref().is_some_and(|shape| !shape.allows(&c, radius[i]))
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
    })
}
