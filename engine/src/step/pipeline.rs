//! One step pipeline: displacement × boundary × contact, composed per
//! species with static dispatch, and [`Stepper`], which builds it from a
//! scenario and advances the state (or hands mobile crowders to the crowd).
//!
//! Particles that do not interact run through a whole block of steps each
//! on their own random stream (particle-major): results do not depend on the
//! number of threads, and event counts are integer sums. Adding a force or a
//! flow is a change to the displacement; a new wall is a new boundary; a new
//! contact rule is a new contact.

use crate::base::error::{EngineError, Result};
use crate::base::rng::ParticleRng;
use crate::obstacles::FixedObstacles;
use crate::scenario::drive::FlowSpec;
use crate::scenario::geometry::Geometry;
use crate::scenario::Scenario;
use crate::space::collisions::{Bounds, ContactRule};
use crate::space::mobility::{
    superpose_two_walls, superpose_two_walls_with_gradient, PerpendicularModel, WallMobilityTable,
};
use crate::space::neighbors::{Blocker, ObstacleGrid};
use crate::space::pore_hydro::plane_shear_lag;
use crate::space::pore_hydro::{CylinderMobility, PoreModel};
use crate::space::potentials::WallPotential;
use crate::space::shape::Shape;
use crate::space::soft::{SoftField, CUTOFF_TOLERANCE_KT};
use crate::space::SimBox;
use crate::step::binding::Sticky;
use crate::step::boundary::{
    Baths, Boundary, Counts, Events, Pore, Slab, Walls, PLACEMENT_ATTEMPTS,
};
use crate::step::contact::{Contact, NoContact, Reflect, Reject};
use crate::step::crowd::{place_crowd, Crowd};
use crate::step::displacement::{
    Displacement, Drive, Driven, Flow, Isotropic, MobilityTable, NearestWall, PlanarWalls,
    PoreTensor, RadialTable, SoftBodies,
};
use crate::step::state::{draw_starts, kinetics, Kinetics, Release, State};
use rayon::prelude::*;

/// Particles stepped together when each step waits on the previous position.
const LANES: usize = 8;
/// Particles per rayon task: free particles in the box.
const FREE_CHUNK: usize = 2048;
/// Particles per rayon task among obstacles: each runs a whole block of
/// steps, so small tasks already amortise scheduling and keep both cores busy.
const OBSTRUCTED_CHUNK: usize = 256;
/// Particles per rayon task between walls.
const WALLED_CHUNK: usize = 1024;

/// Attempts allowed to find an open starting point for one tracer among
/// fixed obstacles before its species is declared unable to fit.
pub const OPEN_START_ATTEMPTS: u64 = 1_000_000;

/// One particle's step: propose, fold at the boundary, accept or keep.
#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn one_step<D: Displacement, B: Boundary, C: Contact>(
    d: &D,
    b: &B,
    c: &C,
    x: &mut [f64; 3],
    n: &mut [i32; 3],
    g: &mut ParticleRng,
    memo: &mut C::Memo,
    events: &mut B::Events,
) {
    let dx = d.draw(x, n, g);
    if let Some(moved) = c.settle(b, x, n, &dx, g, d.symmetric(), memo) {
        *x = moved.at;
        *n = moved.image;
        *events += moved.events;
    }
}

/// Runs `steps` steps over a chunk of particles, `K` at a time: each step
/// of one particle is followed by the same step of the next K − 1, so that
/// independent chains of dependent operations overlap in the processor.
/// Each particle draws from its own stream in the same order as alone, so K
/// changes speed, never results.
#[inline(always)]
fn lanes<const K: usize, D: Displacement, B: Boundary, C: Contact>(
    (d, b, c): (&D, &B, &C),
    p: &mut [[f64; 3]],
    im: &mut [[i32; 3]],
    g: &mut [ParticleRng],
    steps: u64,
) -> B::Events {
    let mut ev = B::Events::default();
    let mut pg = p.chunks_exact_mut(K);
    let mut ig = im.chunks_exact_mut(K);
    let mut gg = g.chunks_exact_mut(K);
    for ((p, im), g) in (&mut pg).zip(&mut ig).zip(&mut gg) {
        let mut x: [[f64; 3]; K] = p.try_into().expect("a chunk of K");
        let mut n: [[i32; 3]; K] = im.try_into().expect("a chunk of K");
        let mut memo: [C::Memo; K] = std::array::from_fn(|j| c.memo(&x[j]));
        for _ in 0..steps {
            for j in 0..K {
                one_step(
                    d,
                    b,
                    c,
                    &mut x[j],
                    &mut n[j],
                    &mut g[j],
                    &mut memo[j],
                    &mut ev,
                );
            }
        }
        p.copy_from_slice(&x);
        im.copy_from_slice(&n);
    }
    for ((p, im), g) in pg
        .into_remainder()
        .iter_mut()
        .zip(ig.into_remainder().iter_mut())
        .zip(gg.into_remainder().iter_mut())
    {
        let (mut x, mut n) = (*p, *im);
        let mut memo = c.memo(&x);
        for _ in 0..steps {
            one_step(d, b, c, &mut x, &mut n, g, &mut memo, &mut ev);
        }
        *p = x;
        *im = n;
    }
    ev
}

/// Advances the particles of one species by `steps` steps in parallel
/// chunks of `chunk`; returns the events summed over them.
pub fn advance_species<D: Displacement, B: Boundary, C: Contact>(
    pieces: (&D, &B, &C),
    state: &mut State,
    range: std::ops::Range<usize>,
    steps: u64,
    chunk: usize,
) -> Counts {
    let pos = &mut state.positions[range.clone()];
    let img = &mut state.images[range.clone()];
    let rng = &mut state.rngs[range];
    pos.par_chunks_mut(chunk)
        .zip(img.par_chunks_mut(chunk))
        .zip(rng.par_chunks_mut(chunk))
        .map(|((p, im), g)| {
            if D::INTERLEAVE {
                lanes::<LANES, D, B, C>(pieces, p, im, g, steps)
            } else {
                lanes::<1, D, B, C>(pieces, p, im, g, steps)
            }
        })
        .reduce(B::Events::default, |mut a, b| {
            a += b;
            a
        })
        .counts()
}

/// Advances the particles of one binding species by `steps` steps: a free
/// particle takes the pipeline's step and may bind where it ends (in the
/// layer); a bound one stays put until the end of its tether's last step.
/// One particle at a time, each on its own stream; the events completed are
/// appended to `state.binding.released`.
pub fn advance_sticky<D: Displacement, B: Boundary, C: Contact>(
    (d, b, c): (&D, &B, &C),
    sticky: &Sticky,
    state: &mut State,
    range: std::ops::Range<usize>,
    steps: u64,
    chunk: usize,
) -> Counts {
    let first = state.step;
    let base = range.start;
    let pos = &mut state.positions[range.clone()];
    let img = &mut state.images[range.clone()];
    let rng = &mut state.rngs[range.clone()];
    let teth = &mut state.binding.tethers[range];
    let parts: Vec<(B::Events, Vec<Release>)> = pos
        .par_chunks_mut(chunk)
        .zip(img.par_chunks_mut(chunk))
        .zip(rng.par_chunks_mut(chunk))
        .zip(teth.par_chunks_mut(chunk))
        .enumerate()
        .map(|(k, (((p, im), g), t))| {
            let mut ev = B::Events::default();
            let mut out = Vec::new();
            for j in 0..p.len() {
                let (x, n, g, t) = (&mut p[j], &mut im[j], &mut g[j], &mut t[j]);
                let mut memo = c.memo(x);
                for now in first + 1..=first + steps {
                    if let Some(held) = *t {
                        if now >= held.until_step {
                            *t = None;
                            out.push(Release {
                                particle: (base + k * chunk + j) as u64,
                                tether: held,
                            });
                        }
                        continue;
                    }
                    one_step(d, b, c, x, n, g, &mut memo, &mut ev);
                    if sticky.in_layer(x) {
                        *t = sticky.try_bind(g, now);
                    }
                }
            }
            (ev, out)
        })
        .collect();
    let mut events = B::Events::default();
    for (ev, out) in parts {
        events += ev;
        state.binding.released.extend(out);
    }
    events.counts()
}

/// Advances free (non-interacting) particles by `steps` steps: the box's
/// faces and nothing else.
pub fn advance_free(state: &mut State, kinetics: &[Kinetics], sim_box: &SimBox, steps: u64) {
    for kin in kinetics {
        let d = Isotropic {
            sigma_nm: kin.sigma_nm,
        };
        let b = kin.bounds(sim_box);
        advance_species(
            (&d, &b, &NoContact),
            state,
            kin.range.clone(),
            steps,
            FREE_CHUNK,
        );
    }
    state.step += steps;
}

/// Advances non-interacting particles among fixed obstacles by `steps`
/// steps, rejecting moves into them; `blockers[s]` answers for species s.
pub fn advance_obstructed<B: Blocker>(
    state: &mut State,
    kinetics: &[Kinetics],
    blockers: &[B],
    sim_box: &SimBox,
    steps: u64,
) {
    for (kin, blocker) in kinetics.iter().zip(blockers) {
        let d = Isotropic {
            sigma_nm: kin.sigma_nm,
        };
        let b = kin.bounds(sim_box);
        let c = Reject { blocker };
        advance_species(
            (&d, &b, &c),
            state,
            kin.range.clone(),
            steps,
            OBSTRUCTED_CHUNK,
        );
    }
    state.step += steps;
}

/// How one species' particles are displaced.
#[derive(Debug, Clone)]
enum Move {
    Free(Isotropic),
    Driven(Driven),
    Planar(PlanarWalls),
    Nearest(NearestWall),
    Pore(PoreTensor),
    Soft(SoftBodies),
}

/// What folds one species' moves.
#[derive(Debug, Clone)]
enum Fold {
    Box(Bounds),
    Slab(Slab),
    Pore(Pore),
    Baths(Baths),
}

/// The composed pipeline of one species.
#[derive(Debug, Clone)]
struct Pipeline {
    kinetics: Kinetics,
    displacement: Move,
    boundary: Fold,
}

/// The step of a scenario: per-species pipelines for particles that do not
/// interact, or the crowd when some species is a crowder.
#[derive(Debug, Clone)]
pub struct Stepper {
    sim_box: SimBox,
    kinetics: Vec<Kinetics>,
    geometry: Option<Geometry>,
    pipelines: Vec<Pipeline>,
    /// Fixed obstacles as seen by each species' centre (empty without obstacles).
    grids: Vec<ObstacleGrid>,
    crowd: Option<Box<Crowd>>,
    /// How moves meet fixed obstacles (rejection or reflection).
    contact: ContactRule,
    /// Each species' binding to the obstacles (empty when none binds).
    sticky: Vec<Option<Sticky>>,
}

/// Particles of one species in each region of a membrane at one instant.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Occupancy {
    /// Centres inside a pore, within the slab.
    pub pores: u64,
    /// Centres above the slab.
    pub top: u64,
    /// Centres below the slab.
    pub bottom: u64,
}

/// D∥/D0, D⊥/D0 and a·dD⊥/dz of one plane wall at centre distance `z_nm`,
/// for a sphere of drag radius `drag_nm` (Faxén; Brenner or Bevan–Prieve).
fn single_wall(table: &WallMobilityTable, z_nm: f64, drag_nm: f64) -> (f64, f64, f64) {
    let m = table.eval(z_nm / drag_nm);
    (m.parallel, m.perpendicular, m.d_perpendicular_dz_times_a)
}

impl Stepper {
    /// Builds the step of `scenario` among its fixed `obstacles`.
    pub fn new(scenario: &Scenario, obstacles: &FixedObstacles) -> Self {
        let kinetics = kinetics(scenario);
        let geometry = scenario.geometry.clone();
        let wall_table = geometry
            .as_ref()
            .and_then(|g| g.hydrodynamics)
            .map(WallMobilityTable::new);
        let pipelines = scenario
            .species
            .iter()
            .zip(&kinetics)
            .map(|(s, kin)| {
                let a = s.radius_nm;
                let sigma = kin.sigma_nm;
                let drive = Drive {
                    force_nm: scenario.force_drift_nm(s),
                    flow: flow_field(scenario, geometry.as_ref()),
                };
                let free = if drive.is_idle() {
                    Move::Free(Isotropic { sigma_nm: sigma })
                } else {
                    Move::Driven(Driven {
                        sigma_nm: sigma,
                        drive: drive.clone(),
                    })
                };
                // Validation admits soft obstacles only in an open box without crowders.
                let free = if s.body_potential.is_none() || obstacles.is_empty() {
                    free
                } else {
                    let kt = scenario.thermal_energy_pn_nm();
                    Move::Soft(SoftBodies {
                        sigma_nm: sigma,
                        force_nm: drive.force_nm,
                        field: std::sync::Arc::new(SoftField::build(
                            &obstacles.spheres,
                            &obstacles.fibres,
                            &s.body_potential,
                            &scenario.sim_box,
                            CUTOFF_TOLERANCE_KT * kt,
                            s.d0_nm2_per_s() * scenario.dt_s / kt,
                        )),
                    })
                };
                let Some(geometry) = &geometry else {
                    return Pipeline {
                        kinetics: kin.clone(),
                        displacement: free,
                        boundary: Fold::Box(kin.bounds(&scenario.sim_box)),
                    };
                };
                let mean_velocity_dt = match scenario.flow {
                    Some(FlowSpec::Poiseuille {
                        mean_velocity_nm_per_s,
                    }) => Some(mean_velocity_nm_per_s * scenario.dt_s),
                    _ => None,
                };
                let potential = s.wall_potential;
                // D0Δt/k_BT, nm per pN: a force's drift per step in free solution.
                let per_pn = s.d0_nm2_per_s() * scenario.dt_s / scenario.thermal_energy_pn_nm();
                let table = (wall_table.is_some() || !potential.is_none()).then(|| {
                    mobility_table(
                        wall_table.as_ref(),
                        &geometry.shape,
                        (a, s.drag_radius_nm),
                        sigma,
                        mean_velocity_dt,
                        (&potential, per_pn),
                    )
                });
                let edges = scenario.sim_box.edges_nm;
                let inverse_variance = 1.0 / (sigma * sigma);
                let displacement = match (&table, &geometry.shape) {
                    (None, _) => free,
                    (Some(t), Shape::PlaneWall { .. } | Shape::Slit { .. }) => {
                        Move::Planar(PlanarWalls {
                            table: t.clone(),
                            lower_nm: a,
                            upper_nm: edges[2] - a,
                            two_walls: matches!(geometry.shape, Shape::Slit { .. }),
                            ito_drift: true,
                            force_nm: drive.force_nm,
                            inverse_variance,
                            flowing: mean_velocity_dt.is_some(),
                            potential: !potential.is_none(),
                        })
                    }
                    (Some(_), Shape::Cylinder { radius_nm, axis_nm })
                        if geometry.hydrodynamics.is_none()
                            || geometry.pore_model == PoreModel::Cylinder =>
                    {
                        let mut p = pore_tensor(
                            (*radius_nm, *axis_nm),
                            a,
                            sigma,
                            geometry,
                            mean_velocity_dt,
                            (&potential, per_pn),
                        );
                        p.force_nm = drive.force_nm;
                        Move::Pore(p)
                    }
                    (Some(t), shape) => Move::Nearest(NearestWall {
                        shape: shape.clone(),
                        table: t.clone(),
                        radius_nm: a,
                        divergence_cap_per_nm: 1.0 / sigma,
                        ito_drift: true,
                        force_nm: drive.force_nm,
                        inverse_variance,
                        potential: !potential.is_none(),
                    }),
                };
                let bath_sigma_nm = match (&geometry.shape, &table) {
                    (Shape::Membrane(m), Some(t)) => {
                        let face_gap = m.reservoir_depth_nm() - a;
                        [t.eval(face_gap)[1]; 2]
                    }
                    _ => [sigma; 2],
                };
                let walls = Walls {
                    shape: geometry.shape.clone(),
                    edges_nm: edges,
                    radius_nm: a,
                    sigma_nm: sigma,
                    bath_sigma_nm,
                };
                let boundary = match &geometry.shape {
                    Shape::PlaneWall { .. } | Shape::Slit { .. } => Fold::Slab(Slab(walls)),
                    Shape::Cylinder { .. } => Fold::Pore(Pore(walls)),
                    Shape::Membrane(m) => Fold::Baths(Baths {
                        membrane: (**m).clone(),
                        walls,
                    }),
                };
                Pipeline {
                    kinetics: kin.clone(),
                    displacement,
                    boundary,
                }
            })
            .collect();
        let crowd = scenario.has_crowders().then(|| {
            let g = if obstacles.is_empty() {
                vec![None; scenario.species.len()]
            } else {
                obstacles
                    .grids_for(scenario)
                    .into_iter()
                    .map(Some)
                    .collect()
            };
            Box::new(Crowd::new(scenario, g))
        });
        let grids = if obstacles.is_empty() || crowd.is_some() {
            Vec::new()
        } else {
            obstacles.grids_for(scenario)
        };
        // Validation allows binding only among obstacles, without crowders or a geometry.
        let sticky = if scenario.species.iter().any(|s| s.binding.is_some()) {
            scenario
                .species
                .iter()
                .map(|s| {
                    s.binding.map(|spec| {
                        Sticky::new(
                            &spec,
                            obstacles,
                            s.radius_nm,
                            &scenario.sim_box,
                            scenario.dt_s,
                        )
                    })
                })
                .collect()
        } else {
            Vec::new()
        };
        Self {
            sim_box: scenario.sim_box,
            kinetics,
            geometry,
            pipelines,
            grids,
            crowd,
            contact: scenario.contact,
            sticky,
        }
    }

    /// The same step without the Itô drift term: only to show the spurious
    /// pile-up at walls that its absence causes (REFERENCES.md). Has no
    /// effect without wall hydrodynamics.
    pub fn without_ito_drift(mut self) -> Self {
        for p in &mut self.pipelines {
            match &mut p.displacement {
                Move::Free(_) | Move::Driven(_) | Move::Soft(_) => {}
                Move::Planar(w) => w.ito_drift = false,
                Move::Nearest(w) => w.ito_drift = false,
                Move::Pore(w) => w.ito_drift = false,
            }
        }
        self
    }

    /// Short name of the step ("free", "obstructed", "confined", "crowded").
    pub fn name(&self) -> &'static str {
        if self.crowd.is_some() {
            "crowded"
        } else if self.geometry.is_some() {
            "confined"
        } else if self.grids.is_empty() {
            "free"
        } else {
            "obstructed"
        }
    }

    /// Cost of a particle-step relative to a free one (roughly), so that
    /// the run driver can size its blocks.
    pub fn relative_cost(&self) -> u64 {
        match self.name() {
            "free" => 1,
            "crowded" => 8,
            _ => 2,
        }
    }

    /// Per-species kinetics.
    pub fn kinetics(&self) -> &[Kinetics] {
        &self.kinetics
    }

    /// The confining shape, if any.
    pub fn confining_shape(&self) -> Option<&Shape> {
        self.geometry.as_ref().map(|g| &g.shape)
    }

    /// The confining shape of a confined scenario.
    ///
    /// # Panics
    /// When the scenario has no geometry.
    pub fn shape(&self) -> &Shape {
        self.confining_shape().expect("the scenario has a geometry")
    }

    /// Wall hydrodynamics model, if on.
    pub fn hydrodynamics(&self) -> Option<PerpendicularModel> {
        self.geometry.as_ref().and_then(|g| g.hydrodynamics)
    }

    /// Step rms across each bath face [bottom, top] of species `s`, nm:
    /// the σ by which emissions are drawn and bath concentrations measured.
    pub fn bath_sigma_nm(&self, s: usize) -> [f64; 2] {
        match &self.pipelines[s].boundary {
            Fold::Baths(b) => b.walls.bath_sigma_nm,
            _ => [self.kinetics[s].sigma_nm; 2],
        }
    }

    /// The crowd, when particles have hard contacts.
    pub fn crowd(&self) -> Option<&Crowd> {
        self.crowd.as_deref()
    }

    /// Mutable access to the crowd (to switch its sweep for comparisons).
    pub fn crowd_mut(&mut self) -> Option<&mut Crowd> {
        self.crowd.as_deref_mut()
    }

    /// Initial state: uniform in the space open to each centre, every
    /// particle drawing from its own stream (thread-independent); interacting
    /// particles are added one by one in index order (`crowd`). In a
    /// membrane the density follows the steady state roughly.
    ///
    /// # Errors
    /// [`EngineError::Placement`] when a species cannot fit.
    pub fn initial_state(&self, scenario: &Scenario) -> Result<State> {
        if let Some(c) = &self.crowd {
            return place_crowd(scenario, &self.kinetics, c.grids());
        }
        let n = scenario.particle_count();
        let mut rngs: Vec<ParticleRng> = (0..n as u64)
            .map(|i| ParticleRng::for_particle(scenario.seed, i))
            .collect();
        let mut positions = vec![[0.0; 3]; n];
        for (s, p) in self.pipelines.iter().enumerate() {
            let r = p.kinetics.range.clone();
            let grid = self.grids.get(s);
            let open = |c: [f64; 3]| !grid.is_some_and(|g| g.blocked(&c));
            let placed = match &p.boundary {
                Fold::Box(b) => draw_starts(
                    &mut positions[r.clone()],
                    &mut rngs[r],
                    OPEN_START_ATTEMPTS,
                    |g| b.trial_start(g).filter(|c| open(*c)),
                ),
                Fold::Slab(Slab(w)) | Fold::Pore(Pore(w)) | Fold::Baths(Baths { walls: w, .. }) => {
                    draw_starts(
                        &mut positions[r.clone()],
                        &mut rngs[r],
                        PLACEMENT_ATTEMPTS,
                        |g| w.trial_start(g).filter(|c| open(*c)),
                    )
                }
            };
            if !placed {
                let sp = &scenario.species[s];
                let reason = match &self.geometry {
                    None => format!(
                        "species '{}' (radius {} nm) found no open starting point in {OPEN_START_ATTEMPTS} tries: the \
                         obstacles leave (almost) no room for its centre (open fraction below about 1e-6); a smaller \
                         tracer, fewer or smaller obstacles would fit",
                        sp.name, sp.radius_nm
                    ),
                    Some(g) => format!(
                        "species '{}' (radius {} nm) found no allowed starting point in the {} in {PLACEMENT_ATTEMPTS} tries",
                        sp.name,
                        sp.radius_nm,
                        g.shape.kind()
                    ),
                };
                return Err(EngineError::Placement {
                    file: scenario.source.clone(),
                    reason,
                });
            }
        }
        let mut state = State {
            positions,
            images: vec![[0; 3]; n],
            rngs,
            step: 0,
            binding: Default::default(),
        };
        if !self.sticky.is_empty() {
            state.binding.tethers = vec![None; n];
        }
        Ok(state)
    }

    /// Advances the state by `steps` steps; returns the events of this
    /// block per species (all zero but at walls and baths).
    pub fn advance(&mut self, state: &mut State, steps: u64) -> Vec<Counts> {
        if let Some(c) = &mut self.crowd {
            c.advance(state, &self.kinetics, &self.sim_box, steps);
            return vec![Counts::default(); self.kinetics.len()];
        }
        state.binding.released.clear();
        let counts = (0..self.pipelines.len())
            .map(|s| {
                let p = &self.pipelines[s];
                match &p.displacement {
                    Move::Free(d) => self.with_boundary(s, d, state, steps),
                    Move::Driven(d) => self.with_boundary(s, d, state, steps),
                    Move::Planar(d) => self.with_boundary(s, d, state, steps),
                    Move::Nearest(d) => self.with_boundary(s, d, state, steps),
                    Move::Pore(d) => self.with_boundary(s, d, state, steps),
                    Move::Soft(d) => self.with_boundary(s, d, state, steps),
                }
            })
            .collect();
        state.step += steps;
        // One order whatever the chunks: by release step, then particle.
        state
            .binding
            .released
            .sort_unstable_by_key(|r| (r.tether.until_step, r.particle));
        counts
    }

    /// True when some species binds to the obstacles.
    pub fn binds(&self) -> bool {
        !self.sticky.is_empty()
    }

    fn with_boundary<D: Displacement>(
        &self,
        s: usize,
        d: &D,
        state: &mut State,
        steps: u64,
    ) -> Counts {
        match &self.pipelines[s].boundary {
            Fold::Box(b) => self.with_contact(s, d, b, state, steps),
            Fold::Slab(b) => self.with_contact(s, d, b, state, steps),
            Fold::Pore(b) => self.with_contact(s, d, b, state, steps),
            Fold::Baths(b) => self.with_contact(s, d, b, state, steps),
        }
    }

    fn with_contact<D: Displacement, B: Boundary>(
        &self,
        s: usize,
        d: &D,
        b: &B,
        state: &mut State,
        steps: u64,
    ) -> Counts {
        let range = self.pipelines[s].kinetics.range.clone();
        let walled = self.geometry.is_some();
        if let (Some(Some(sticky)), Some(grid)) = (self.sticky.get(s), self.grids.get(s)) {
            // Binding species: validated to be among obstacles in a box without a geometry.
            return if self.contact == ContactRule::Reflect {
                let bounds = self.pipelines[s].kinetics.bounds(&self.sim_box);
                let c = Reflect { grid, bounds };
                advance_sticky((d, b, &c), sticky, state, range, steps, OBSTRUCTED_CHUNK)
            } else {
                let c = Reject { blocker: grid };
                advance_sticky((d, b, &c), sticky, state, range, steps, OBSTRUCTED_CHUNK)
            };
        }
        match self.grids.get(s) {
            None => {
                let chunk = if walled { WALLED_CHUNK } else { FREE_CHUNK };
                advance_species((d, b, &NoContact), state, range, steps, chunk)
            }
            Some(grid) if self.contact == ContactRule::Reflect && !walled => {
                let bounds = self.pipelines[s].kinetics.bounds(&self.sim_box);
                let c = Reflect { grid, bounds };
                advance_species((d, b, &c), state, range, steps, OBSTRUCTED_CHUNK)
            }
            Some(grid) => {
                let chunk = if walled {
                    WALLED_CHUNK
                } else {
                    OBSTRUCTED_CHUNK
                };
                advance_species(
                    (d, b, &Reject { blocker: grid }),
                    state,
                    range,
                    steps,
                    chunk,
                )
            }
        }
    }

    /// Occupancy of each membrane region per species (`None` outside membranes).
    pub fn occupancy(&self, state: &State) -> Option<Vec<Occupancy>> {
        let Some(Shape::Membrane(m)) = self.confining_shape() else {
            return None;
        };
        Some(
            self.pipelines
                .iter()
                .map(|p| {
                    state.positions[p.kinetics.range.clone()]
                        .par_iter()
                        .map(|q| {
                            let mut o = Occupancy::default();
                            if q[2] > m.z_hi_nm {
                                o.top = 1;
                            } else if q[2] < m.z_lo_nm {
                                o.bottom = 1;
                            } else if m.in_pore(q) {
                                o.pores = 1;
                            }
                            o
                        })
                        .reduce(Occupancy::default, |a, b| Occupancy {
                            pores: a.pores + b.pores,
                            top: a.top + b.top,
                            bottom: a.bottom + b.bottom,
                        })
                })
                .collect(),
        )
    }
}

/// The cylinder model of one species as a table over ρ² (with wall
/// hydrodynamics; else D = D0 and the fluid's own velocity), with the walls'
/// soft force: the two wall points on the particle's diameter superposed,
/// F_r(ρ) = −[F(R − a − ρ) − F(R − a + ρ)], F the sphere–plane force at that
/// gap (odd in ρ, so zero on the axis).
fn pore_tensor(
    (r, axis): (f64, [f64; 2]),
    a: f64,
    sigma: f64,
    geometry: &Geometry,
    mean_velocity_dt: Option<f64>,
    (potential, per_pn): (&WallPotential, f64),
) -> PoreTensor {
    let model = geometry.hydrodynamics.map(|m| {
        // Validation keeps a < R; λ from the steric radius (the sphere that touches the wall).
        CylinderMobility::new(a / r, m).expect("validated: the tracer fits the pore")
    });
    let d0_dt = 0.5 * sigma * sigma;
    let open = r - a;
    // [f_z, f_r, f_θ, (∇·D)_r in D0/R, U/V] at radial position ρ.
    let at = |rho: f64| -> [f64; 5] {
        match &model {
            Some(m) => {
                let f = m.eval(rho / r);
                [
                    f.axial,
                    f.radial,
                    f.azimuthal,
                    f.radial_drift,
                    f.velocity_over_mean,
                ]
            }
            None => [1.0, 1.0, 1.0, 0.0, 2.0 * (1.0 - (rho / r).powi(2))],
        }
    };
    let radial_force = |rho: f64| -potential.force_pn(open - rho) + potential.force_pn(open + rho);
    let table = RadialTable::build(open, |rho| {
        let f = at(rho);
        let (s_r, s_t) = (sigma * f[1].max(0.0).sqrt(), sigma * f[2].max(0.0).sqrt());
        // Both drifts grow like ρ near the axis; over ρ they stay finite (read just off the axis there).
        let over_rho = |g: &dyn Fn(f64) -> f64| {
            if rho > 0.0 {
                g(rho) / rho
            } else {
                let h = 1e-6 * open;
                g(h) / h
            }
        };
        let ito = over_rho(&|x| at(x)[3] * d0_dt / r);
        let wall = over_rho(&|x| at(x)[1] * per_pn * radial_force(x));
        [
            sigma * f[0].max(0.0).sqrt(),
            s_r - s_t,
            s_t,
            ito,
            mean_velocity_dt.unwrap_or(0.0) * f[4],
            wall,
        ]
    });
    PoreTensor {
        table,
        axis_nm: axis,
        ito_drift: true,
        force_nm: [0.0; 3],
        inverse_variance: 1.0 / (sigma * sigma),
        flowing: mean_velocity_dt.is_some(),
        potential: !potential.is_none(),
    }
}

/// Mean axial (slit: lateral) mobility ⟨D∥⟩/D0 over the space open to the
/// centre in the wall model the step uses: what a run with wall
/// hydrodynamics must reproduce exactly (those moves have no drift and the
/// equilibrium density is uniform). `None` for membranes.
pub fn mean_axial_mobility(
    geometry: &Geometry,
    radius_nm: f64,
    drag_radius_nm: f64,
) -> Option<f64> {
    match &geometry.shape {
        Shape::Cylinder { radius_nm: r, .. } if geometry.pore_model == PoreModel::Cylinder => {
            CylinderMobility::new(
                radius_nm / r,
                geometry
                    .hydrodynamics
                    .unwrap_or(PerpendicularModel::Brenner),
            )
            .ok()
            .map(|m| m.averaged_axial_mobility())
        }
        shape => crate::space::mobility::mean_parallel_mobility(shape, radius_nm, drag_radius_nm),
    }
}

/// The wall mobility of one species (steric and drag radii `a`, `ah`) as a
/// table over the gap to the nearest wall (both walls superposed in a
/// slit; D = D0 without wall hydrodynamics, `wt` = `None`); in a slit with
/// Poiseuille flow of mean velocity V (`mean_velocity_dt` = VΔt) the flow
/// column is the particle's displacement per step along x, u(z) times the
/// two walls' shear lags superposed, γ(s₁) + γ(s₂) − 1 (far-field plane-wall
/// lag, a model: no published average to check), and the last column the
/// walls' soft force D⊥F/k_BT Δt away from the nearer wall (in a slit the
/// far wall's force subtracts; a plane wall's floor alone acts).
fn mobility_table(
    wt: Option<&WallMobilityTable>,
    shape: &Shape,
    (a, ah): (f64, f64),
    sigma: f64,
    mean_velocity_dt: Option<f64>,
    (potential, per_pn): (&WallPotential, f64),
) -> MobilityTable {
    let d0_dt = 0.5 * sigma * sigma;
    // Node values from D∥/D0, D⊥/D0 and dD⊥/dd (1/nm).
    let node = |par: f64, perp: f64, dperp_dd: f64, flow: f64, force: f64| {
        [
            sigma * par.max(0.0).sqrt(),
            sigma * perp.max(0.0).sqrt(),
            (perp - par) * d0_dt,
            dperp_dd * d0_dt,
            flow,
            perp * per_pn * force,
        ]
    };
    let wall = |z: f64| match wt {
        Some(wt) => single_wall(wt, z, ah),
        None => (1.0, 1.0, 0.0),
    };
    let lag = |z: f64| {
        if wt.is_some() {
            plane_shear_lag(z / ah)
        } else {
            1.0
        }
    };
    match shape {
        Shape::Slit { width_nm } => {
            let w = *width_nm;
            // Symmetric about mid-gap: tabulate the gap to the nearer wall.
            MobilityTable::build(a, 0.5 * (w - 2.0 * a), |h| {
                let (z1, z2) = (a + h, w - a - h);
                let (p1, q1, g1) = wall(z1);
                let (p2, q2, g2) = wall(z2);
                // The far wall's distance shrinks as z grows: its gradient flips sign.
                let (perp, grad) = if wt.is_some() {
                    superpose_two_walls_with_gradient(q1, g1, q2, -g2)
                } else {
                    (1.0, 0.0)
                };
                let par = if wt.is_some() {
                    superpose_two_walls(p1, p2)
                } else {
                    1.0
                };
                let flow = mean_velocity_dt.map_or(0.0, |v| {
                    let s = z1 / w;
                    6.0 * v * s * (1.0 - s) * (lag(z1) + lag(z2) - 1.0)
                });
                let force = potential.force_pn(h) - potential.force_pn(w - 2.0 * a - h);
                node(par, perp, grad / ah, flow, force)
            })
        }
        shape => MobilityTable::build(a, (shape.max_wall_distance_nm() - a).max(a), |h| {
            let (par, perp, grad) = wall(a + h);
            node(par, perp, grad / ah, 0.0, potential.force_pn(h))
        }),
    }
}

/// The flow of a scenario as the step evaluates it (without wall
/// hydrodynamics: the fluid's displacement at the centre).
fn flow_field(scenario: &Scenario, geometry: Option<&Geometry>) -> Flow {
    let dt = scenario.dt_s;
    match (scenario.flow, geometry.map(|g| &g.shape)) {
        (None, _) => Flow::Still,
        (Some(FlowSpec::Shear { rate_per_s }), _) => Flow::Shear {
            rate_dt: rate_per_s * dt,
            z_mid_nm: 0.5 * scenario.sim_box.edges_nm[2],
            lz_nm: scenario.sim_box.edges_nm[2],
        },
        (
            Some(FlowSpec::Poiseuille {
                mean_velocity_nm_per_s: v,
            }),
            Some(Shape::Cylinder { radius_nm, axis_nm }),
        ) => Flow::Tube {
            axis_nm: *axis_nm,
            peak_nm: 2.0 * v * dt,
            inv_r2: 1.0 / (radius_nm * radius_nm),
        },
        (
            Some(FlowSpec::Poiseuille {
                mean_velocity_nm_per_s: v,
            }),
            Some(Shape::Slit { width_nm }),
        ) => Flow::Channel {
            scale_nm: 6.0 * v * dt,
            inv_w: 1.0 / width_nm,
        },
        (
            Some(FlowSpec::Poiseuille {
                mean_velocity_nm_per_s: v,
            }),
            Some(Shape::Membrane(m)),
        ) => Flow::Pores {
            membrane: std::sync::Arc::new((**m).clone()),
            k_dt: 2.0 * v * dt,
            per_pore_mean: true,
        },
        (Some(FlowSpec::PressureDriven { k_per_nm_s, .. }), Some(Shape::Membrane(m))) => {
            Flow::Pores {
                membrane: std::sync::Arc::new((**m).clone()),
                k_dt: k_per_nm_s * dt,
                per_pore_mean: false,
            }
        }
        // Validation admits Poiseuille flow only in cylinders, slits and membranes.
        (Some(_), _) => Flow::Still,
    }
}

#[cfg(test)]
mod box_tests {
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
}

#[cfg(test)]
mod wall_tests {
    use super::*;
    use crate::space::mobility::{brenner_perpendicular_value_and_gradient, faxen_parallel};
    use std::path::Path;

    fn scenario(geometry: &str, edges: [f64; 3]) -> Scenario {
        let text = format!(
            "[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [{}, {}, {}]\n[[species]]\nname = \"t\"\nradius_nm = 2.0\ncount = 1\n\
             diffusivity_m2_per_s = 1e-10\n[integrator]\ndt_s = 1e-10\nsteps = 1\n[geometry]\n{geometry}\n",
            edges[0], edges[1], edges[2]
        );
        Scenario::from_text(&text, Path::new("t.toml"), &[]).unwrap()
    }

    /// Slow reference: node values straight from the Brenner and Faxén formulas.
    fn direct(z_walls: &[f64], a: f64, sigma: f64) -> [f64; 4] {
        let d0_dt = 0.5 * sigma * sigma;
        let walls: Vec<(f64, f64, f64)> = z_walls
            .iter()
            .map(|&z| {
                let (perp, grad) = brenner_perpendicular_value_and_gradient(z / a);
                (faxen_parallel(a / z), perp, grad)
            })
            .collect();
        let (par, perp, grad) = match walls.as_slice() {
            [(p, q, g)] => (*p, *q, *g),
            [(p1, q1, g1), (p2, q2, g2)] => {
                let (q, g) = superpose_two_walls_with_gradient(*q1, *g1, *q2, -*g2);
                (superpose_two_walls(*p1, *p2), q, g)
            }
            _ => unreachable!(),
        };
        [
            sigma * par.sqrt(),
            sigma * perp.sqrt(),
            (perp - par) * d0_dt,
            grad / a * d0_dt,
        ]
    }

    #[test]
    fn mobility_tables_match_direct_formulas() {
        let (a, w) = (2.0, 20.0);
        let sigma = (2.0 * 1e8 * 1e-10f64).sqrt();
        for (geometry, edges, two) in [
            (
                "kind = \"slit\"\nwall_hydrodynamics = true",
                [50.0, 50.0, w],
                true,
            ),
            (
                "kind = \"plane_wall\"\nwall_hydrodynamics = true",
                [50.0, 50.0, w],
                false,
            ),
        ] {
            let s = scenario(geometry, edges);
            let c = Stepper::new(&s, &FixedObstacles::default());
            let table = match &c.pipelines[0].displacement {
                Move::Planar(w) => &w.table,
                _ => panic!("wall hydrodynamics give a planar tensor"),
            };
            let h_max = if two {
                0.5 * (w - 2.0 * a)
            } else {
                w - 2.0 * a
            };
            // Gaps from 1e-9 a to the far end, off the grid nodes.
            for i in 0..2000 {
                let h = (h_max * (i as f64 + 0.37) / 2000.0).max(1e-9 * a * (i + 1) as f64);
                let got = table.eval(h);
                let z = a + h;
                let want = if two {
                    direct(&[z, w - z], a, sigma)
                } else {
                    direct(&[z], a, sigma)
                };
                for k in 0..4 {
                    // Linear interpolation on the √h grid: better than 1e-5 of the scale of each column.
                    let scale = [sigma, sigma, 0.5 * sigma * sigma, 0.5 * sigma * sigma / a][k];
                    assert!(
                        (got[k] - want[k]).abs() < 1e-5 * scale,
                        "{geometry} h = {h}: column {k}: {} vs {}",
                        got[k],
                        want[k]
                    );
                }
            }
            // √D⊥ goes like √h at contact, which the √h grid follows exactly at its first node.
            let near = table.eval(1e-6 * a);
            assert!(
                (near[1] / (sigma * 1e-3) - 1.0).abs() < 1e-3,
                "σ⊥ near contact: {}",
                near[1]
            );
        }
    }

    #[test]
    fn slit_mean_mobility_is_symmetric_and_below_one() {
        let s = scenario(
            "kind = \"slit\"\nwall_hydrodynamics = true",
            [50.0, 50.0, 12.0],
        );
        let shape = &s.geometry.as_ref().unwrap().shape;
        let m = crate::space::mobility::mean_parallel_mobility(shape, 2.0, 2.0).unwrap();
        // Limits: bounded by the mid-gap value (the largest) and contact (Faxén at z = a).
        let mid = superpose_two_walls(faxen_parallel(2.0 / 6.0), faxen_parallel(2.0 / 6.0));
        assert!(
            m < mid && m > superpose_two_walls(faxen_parallel(1.0), faxen_parallel(0.2)),
            "{m}"
        );
    }
}
