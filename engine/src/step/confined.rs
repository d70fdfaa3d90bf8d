//! Step kernels for confined particles: walls that reflect the particle
//! surface, optional hydrodynamic wall corrections with their Itô drift, and
//! membrane reservoirs held at fixed concentration with a flux counter.
//!
//! Particles do not interact, so, as in `integrate`, each one runs through a
//! whole block of steps on its own random stream (particle-major); results
//! do not depend on the number of threads, and event counts are integer sums.
//!
//! **Wall hydrodynamics.** With corrections on, the diffusion tensor is
//! D = D∥ (I − n n) + D⊥ n n, with n the normal of the nearest wall,
//! D∥ from Faxén's series and D⊥ from Brenner's series or the Bevan–Prieve
//! closed form (`mobility`), each a function of the centre-to-wall
//! distance. An Euler–Maruyama step is
//! Δx = ∇·D Δt + √(2Δt) D^½ ξ, and ∇·D = [dD⊥/dd + (D⊥ − D∥) ∇·n] n
//! (n = ∇d, so (n·∇)n = 0): the Itô drift that keeps the equilibrium
//! density uniform; along a plane wall it is dz = (dD⊥/dz) dt + √(2 D⊥) dW.
//! The slit combines its two walls by linear superposition of resistances
//! (REFERENCES.md). In a cylindrical pore and a membrane the *nearest-wall
//! planar approximation* is used: only the nearest wall counts, treated as
//! a plane at its distance (the opposite side of a pore is ignored). On a
//! pore axis the normal is undefined and the curvature term (D⊥ − D∥)∇·n
//! diverges like 1/ρ; it is capped at |∇·n| ≤ 1/σ, σ = √(2 D0 Δt), which
//! changes the drift only within one rms step of the axis.
//!
//! The mobilities are tabulated per species on a grid uniform in
//! u = √(h/a), h the gap between surface and wall, with linear
//! interpolation: the grid is fine where they vary fastest (near contact),
//! and √D⊥, which goes like √h, is linear in u there.
//!
//! **Walls.** A centre that steps closer than its radius to a wall is
//! mirrored in the plane tangent to the excluded surface (specular
//! reflection of the particle surface). At a plane this is exact; at a
//! curved wall a mirror does not preserve volume and would distort the
//! density next to it by O(σ/R) (it depletes a concave pore wall), so
//! without hydrodynamics each fold is accepted
//! with its Metropolis probability (see `geometry::Shape::fold`), which
//! makes the uniform density exactly stationary; a refused fold leaves the
//! particle where it was (in a cylinder only its transverse move is undone).
//!
//! **Membrane reservoirs.** The box faces z = 0 and z = L_z are baths held
//! at the bottom and top concentrations. A particle that steps out through a
//! face is absorbed by that bath and, at once, a bath emits one: the top bath
//! with probability c_top/(c_top + c_bottom). An emitted particle enters at a
//! uniform lateral position and at the depth a bath particle would land at in
//! one Gaussian step: δ = σ √(−2 ln U₁) · U₂ (a Rayleigh jump length times a
//! uniform fraction of it), exactly the entry distribution of a uniform bath
//! for a step of rms σ. Emissions from each bath are then in the ratio of the
//! concentrations, so the mean density is that of fixed-concentration
//! (Dirichlet) reservoirs, at an absolute level set by the particle count;
//! the level reached is measured from the emissions: a bath at concentration
//! c emits c A σ/√(2π) particles per step. A recycled particle starts a new
//! track (its trajectory jumps), so mean-squared displacements of membrane
//! runs are not meaningful. The flux counter counts net crossings of the
//! slab's mid-plane.

use crate::base::error::{EngineError, Result};
use crate::base::rng::{standard_normal, ParticleRng};
use crate::io::trajectory::{write_attributes, AttrValue, ObservableSeries, TrajectoryWriter};
use crate::obstacles::spheres::FixedObstacles;
use crate::scenario::config::Scenario;
use crate::scenario::geometry::Geometry;
use crate::space::mobility::{
    superpose_two_walls, superpose_two_walls_with_gradient, PerpendicularModel, WallMobilityTable,
};
use crate::space::neighbors::ObstacleGrid;
use crate::space::shape::{per_nm3_to_mol_per_m3, Membrane, Shape};
use crate::space::sim_box::reflect;
use crate::step::kernels::{draw_starts, State};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::ops::{Add, Range};
use std::path::{Path, PathBuf};

/// Particles handed to one rayon task.
const PAR_CHUNK: usize = 1024;

/// Particles stepped together with wall hydrodynamics (see `lanes`).
const LANES: usize = 8;

/// Intervals of each tabulated mobility.
pub const TABLE_INTERVALS: usize = 4096;

/// Attempts to find an allowed starting point (or bath entry point) for one
/// particle before giving up.
pub const PLACEMENT_ATTEMPTS: u64 = 1_000_000;

/// Columns of the per-frame membrane series `/observables/<species>/membrane`.
pub const MEMBRANE_COLUMNS: [&str; 10] = [
    "exits_bottom",
    "exits_top",
    "entries_bottom",
    "entries_top",
    "crossings_down",
    "crossings_up",
    "rejected_moves",
    "particles_in_pores",
    "particles_in_top_reservoir",
    "particles_in_bottom_reservoir",
];

/// Mobility of one species against the wall gap h = d − a, tabulated on a
/// grid uniform in u = √(h/a). Each node holds
/// [σ∥, σ⊥, (D⊥ − D∥) Δt, (dD⊥/dd) Δt] in nm, nm, nm², nm.
#[derive(Debug, Clone)]
struct MobilityTable {
    inverse_radius: f64,
    inverse_du: f64,
    /// Single precision (6e-8 relative, far below the interpolation error):
    /// half the cache footprint for the hot loop.
    nodes: Vec<[f32; 4]>,
}

impl MobilityTable {
    /// Tabulates `f(h)` for h in [0, h_max].
    fn build(radius_nm: f64, h_max_nm: f64, f: impl Fn(f64) -> [f64; 4]) -> Self {
        let u_max = (h_max_nm.max(1e-9 * radius_nm) / radius_nm).sqrt();
        let du = u_max / TABLE_INTERVALS as f64;
        let nodes = (0..=TABLE_INTERVALS + 1)
            .map(|i| {
                let u = i as f64 * du;
                f(radius_nm * u * u).map(|v| v as f32)
            })
            .collect();
        Self {
            inverse_radius: 1.0 / radius_nm,
            inverse_du: 1.0 / du,
            nodes,
        }
    }

    /// Interpolated node values at gap `h_nm` (clamped to the table).
    #[inline(always)]
    fn eval(&self, h_nm: f64) -> [f64; 4] {
        let u = (h_nm.max(0.0) * self.inverse_radius).sqrt();
        let t = (u * self.inverse_du).min(TABLE_INTERVALS as f64);
        let i = t as usize;
        let f = t - i as f64;
        let (a, b) = (
            self.nodes[i].map(f64::from),
            self.nodes[i + 1].map(f64::from),
        );
        [
            a[0] + f * (b[0] - a[0]),
            a[1] + f * (b[1] - a[1]),
            a[2] + f * (b[2] - a[2]),
            a[3] + f * (b[3] - a[3]),
        ]
    }
}

/// How one species moves in the geometry.
#[derive(Debug, Clone)]
struct SpeciesMotion {
    range: Range<usize>,
    radius_nm: f64,
    /// √(2 D0 Δt), nm.
    sigma_nm: f64,
    /// Tabulated wall mobilities when hydrodynamics are on.
    table: Option<MobilityTable>,
    /// Cap on |∇·n| in the curvature drift, 1/nm.
    divergence_cap_per_nm: f64,
    /// Step rms across each bath face [bottom, top], nm, for emissions.
    bath_sigma_nm: [f64; 2],
}

/// Event counts of one species, cumulative over a run.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
pub struct Counts {
    /// Particles absorbed by the bottom bath (z < 0).
    pub exits_bottom: u64,
    /// Particles absorbed by the top bath (z > L_z).
    pub exits_top: u64,
    /// Particles emitted by the bottom bath.
    pub entries_bottom: u64,
    /// Particles emitted by the top bath.
    pub entries_top: u64,
    /// Downward crossings of the slab's mid-plane (through a pore).
    pub crossings_down: u64,
    /// Upward crossings of the slab's mid-plane.
    pub crossings_up: u64,
    /// Moves rejected because one reflection did not bring the centre back
    /// (steps longer than the local feature); should stay a tiny fraction.
    pub rejected_moves: u64,
}

impl Add for Counts {
    type Output = Counts;
    fn add(self, o: Counts) -> Counts {
        Counts {
            exits_bottom: self.exits_bottom + o.exits_bottom,
            exits_top: self.exits_top + o.exits_top,
            entries_bottom: self.entries_bottom + o.entries_bottom,
            entries_top: self.entries_top + o.entries_top,
            crossings_down: self.crossings_down + o.crossings_down,
            crossings_up: self.crossings_up + o.crossings_up,
            rejected_moves: self.rejected_moves + o.rejected_moves,
        }
    }
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

/// The prepared kernels of a confined scenario.
#[derive(Debug, Clone)]
pub struct Confinement {
    shape: Shape,
    edges_nm: [f64; 3],
    hydrodynamics: Option<PerpendicularModel>,
    ito_drift: bool,
    species: Vec<SpeciesMotion>,
    /// Fixed obstacles as seen by each species' centre (empty without obstacles).
    grids: Vec<ObstacleGrid>,
}

/// D∥/D0, D⊥/D0 and a·dD⊥/dz of one plane wall at centre distance `z_nm`,
/// for a sphere of drag radius `drag_nm` (Faxén; Brenner or Bevan–Prieve).
fn single_wall(table: &WallMobilityTable, z_nm: f64, drag_nm: f64) -> (f64, f64, f64) {
    let m = table.eval(z_nm / drag_nm);
    (m.parallel, m.perpendicular, m.d_perpendicular_dz_times_a)
}

impl Confinement {
    /// Prepares the kernels of `scenario`, whose geometry is `geometry`.
    pub fn new(scenario: &Scenario, geometry: &Geometry) -> Self {
        let wall_table = geometry.hydrodynamics.map(WallMobilityTable::new);
        let mut start = 0;
        let species = scenario
            .species
            .iter()
            .map(|s| {
                let range = start..start + s.count;
                start = range.end;
                let a = s.radius_nm;
                let ah = s.drag_radius_nm;
                let sigma = s.step_rms_nm(scenario.dt_s);
                let d0_dt = 0.5 * sigma * sigma;
                // Node values from D∥/D0, D⊥/D0 and dD⊥/dd (1/nm).
                let node = |par: f64, perp: f64, dperp_dd: f64| {
                    [
                        sigma * par.max(0.0).sqrt(),
                        sigma * perp.max(0.0).sqrt(),
                        (perp - par) * d0_dt,
                        dperp_dd * d0_dt,
                    ]
                };
                let table = wall_table.as_ref().map(|wt| match &geometry.shape {
                    Shape::Slit { width_nm } => {
                        let w = *width_nm;
                        // Symmetric about mid-gap: tabulate the gap to the nearer wall.
                        MobilityTable::build(a, 0.5 * (w - 2.0 * a), |h| {
                            let (z1, z2) = (a + h, w - a - h);
                            let (p1, q1, g1) = single_wall(wt, z1, ah);
                            let (p2, q2, g2) = single_wall(wt, z2, ah);
                            // The far wall's distance shrinks as z grows: its gradient flips sign.
                            let (perp, grad) = superpose_two_walls_with_gradient(q1, g1, q2, -g2);
                            node(superpose_two_walls(p1, p2), perp, grad / ah)
                        })
                    }
                    shape => {
                        MobilityTable::build(a, (shape.max_wall_distance_nm() - a).max(a), |h| {
                            let (par, perp, grad) = single_wall(wt, a + h, ah);
                            node(par, perp, grad / ah)
                        })
                    }
                });
                let bath_sigma_nm = match (&geometry.shape, &table) {
                    (Shape::Membrane(m), Some(t)) => {
                        let face_gap = m.reservoir_depth_nm() - a;
                        [t.eval(face_gap)[1]; 2]
                    }
                    _ => [sigma; 2],
                };
                SpeciesMotion {
                    range,
                    radius_nm: a,
                    sigma_nm: sigma,
                    table,
                    divergence_cap_per_nm: 1.0 / sigma,
                    bath_sigma_nm,
                }
            })
            .collect();
        Self {
            shape: geometry.shape.clone(),
            edges_nm: scenario.sim_box.edges_nm,
            hydrodynamics: geometry.hydrodynamics,
            ito_drift: true,
            species,
            grids: Vec::new(),
        }
    }

    /// The same kernels among fixed obstacles: a move whose end point lies
    /// inside an obstacle (grown by the particle's radius) is rejected whole,
    /// as in the unconfined obstructed kernel. Obstacles exert no
    /// hydrodynamic effect; only walls do.
    pub fn with_obstacles(mut self, scenario: &Scenario, obstacles: &FixedObstacles) -> Self {
        self.grids = if obstacles.is_empty() {
            Vec::new()
        } else {
            obstacles.grids_for(scenario)
        };
        self
    }

    /// Obstacle grid of species `s`, if there are obstacles.
    fn grid(&self, s: usize) -> Option<&ObstacleGrid> {
        self.grids.get(s)
    }

    /// The same kernels without the Itô drift term: only to show the
    /// spurious pile-up at walls that its absence causes (REFERENCES.md).
    /// Has no effect without wall hydrodynamics.
    pub fn without_ito_drift(mut self) -> Self {
        self.ito_drift = false;
        self
    }

    /// The confining shape.
    pub fn shape(&self) -> &Shape {
        &self.shape
    }

    /// Wall hydrodynamics model, if on.
    pub fn hydrodynamics(&self) -> Option<PerpendicularModel> {
        self.hydrodynamics
    }

    /// Step rms across each bath face [bottom, top] of species `s`, nm:
    /// the σ by which emissions are drawn and bath concentrations measured.
    pub fn bath_sigma_nm(&self, s: usize) -> [f64; 2] {
        self.species[s].bath_sigma_nm
    }

    /// Initial state: each particle uniform in the space open to its centre,
    /// drawn by rejection from its own stream (thread-independent). In a
    /// membrane the density follows the steady state roughly, to shorten the
    /// transient: the top concentration above the slab, the bottom one below
    /// and a linear profile between them in the pores.
    ///
    /// # Errors
    /// [`EngineError::Placement`] if no allowed point is found.
    pub fn initial_state(&self, scenario: &Scenario) -> Result<State> {
        let n = scenario.particle_count();
        let mut rngs: Vec<ParticleRng> = (0..n as u64)
            .map(|i| ParticleRng::for_particle(scenario.seed, i))
            .collect();
        let mut positions = vec![[0.0; 3]; n];
        let edges = self.edges_nm;
        // Sampling box of the centre: the pore's square for a cylinder, else the box.
        let (lo, hi) = match &self.shape {
            Shape::Cylinder { radius_nm, axis_nm } => (
                [axis_nm[0] - radius_nm, axis_nm[1] - radius_nm, 0.0],
                [axis_nm[0] + radius_nm, axis_nm[1] + radius_nm, edges[2]],
            ),
            _ => ([0.0; 3], edges),
        };
        let weight = |z: f64| -> f64 {
            match &self.shape {
                Shape::Membrane(m) => {
                    let (top, bottom) = (
                        m.top_concentration_mol_per_m3,
                        m.bottom_concentration_mol_per_m3,
                    );
                    let c = if z >= m.z_hi_nm {
                        top
                    } else if z <= m.z_lo_nm {
                        bottom
                    } else {
                        bottom + (top - bottom) * (z - m.z_lo_nm) / m.thickness_nm()
                    };
                    c / top.max(bottom)
                }
                _ => 1.0,
            }
        };
        for (s, sp) in self.species.iter().enumerate() {
            let r = sp.range.clone();
            let placed = draw_starts(
                &mut positions[r.clone()],
                &mut rngs[r],
                PLACEMENT_ATTEMPTS,
                |g| {
                    let c = [0, 1, 2].map(|k| lo[k] + g.uniform() * (hi[k] - lo[k]));
                    let keep = g.uniform() < weight(c[2]);
                    (keep
                        && self.shape.allows(&c, sp.radius_nm)
                        && !self.grid(s).is_some_and(|grid| grid.blocked(&c)))
                    .then_some(c)
                },
            );
            if !placed {
                let sp = &scenario.species[s];
                return Err(EngineError::Placement {
                    file: scenario.source.clone(),
                    reason: format!("species '{}' (radius {} nm) found no allowed starting point in the {} in {PLACEMENT_ATTEMPTS} tries", sp.name, sp.radius_nm, self.shape.kind()),
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

    /// Advances every particle by `steps` steps; returns the events of this
    /// block per species (all zero but `rejected_moves` outside membranes).
    pub fn advance(&self, state: &mut State, steps: u64) -> Vec<Counts> {
        let hydro = self.species.iter().any(|s| s.table.is_some());
        let counts = self
            .species
            .iter()
            .enumerate()
            .map(|(s, sp)| {
                let grid = self.grid(s);
                let r = sp.range.clone();
                let pos = &mut state.positions[r.clone()];
                let img = &mut state.images[r.clone()];
                let rng = &mut state.rngs[r];
                pos.par_chunks_mut(PAR_CHUNK)
                    .zip(img.par_chunks_mut(PAR_CHUNK))
                    .zip(rng.par_chunks_mut(PAR_CHUNK))
                    .map(|((p, im), g)| {
                        // One monomorphised loop per geometry and hydrodynamics setting; with
                        // hydrodynamics every step waits on the previous position (wall distance,
                        // square root, table), so LANES particles are interleaved (see `lanes`).
                        let (lo, hi) = (sp.radius_nm, self.edges_nm[2] - sp.radius_nm);
                        match (&self.shape, hydro) {
                            (Shape::PlaneWall { .. }, false) => lanes::<1>(
                                p,
                                im,
                                g,
                                steps,
                                guarded(grid, |x, n, g, _| {
                                    self.planar_step::<false>(x, n, g, sp, lo, hi, false)
                                }),
                            ),
                            (Shape::PlaneWall { .. }, true) => lanes::<LANES>(
                                p,
                                im,
                                g,
                                steps,
                                guarded(grid, |x, n, g, _| {
                                    self.planar_step::<true>(x, n, g, sp, lo, hi, false)
                                }),
                            ),
                            (Shape::Slit { .. }, false) => lanes::<1>(
                                p,
                                im,
                                g,
                                steps,
                                guarded(grid, |x, n, g, _| {
                                    self.planar_step::<false>(x, n, g, sp, lo, hi, true)
                                }),
                            ),
                            (Shape::Slit { .. }, true) => lanes::<LANES>(
                                p,
                                im,
                                g,
                                steps,
                                guarded(grid, |x, n, g, _| {
                                    self.planar_step::<true>(x, n, g, sp, lo, hi, true)
                                }),
                            ),
                            (Shape::Cylinder { .. }, false) => lanes::<1>(
                                p,
                                im,
                                g,
                                steps,
                                guarded(grid, |x, n, g, c| {
                                    self.cylinder_step::<false>(x, n, g, sp, c)
                                }),
                            ),
                            (Shape::Cylinder { .. }, true) => lanes::<LANES>(
                                p,
                                im,
                                g,
                                steps,
                                guarded(grid, |x, n, g, c| {
                                    self.cylinder_step::<true>(x, n, g, sp, c)
                                }),
                            ),
                            (Shape::Membrane(m), false) => lanes::<1>(
                                p,
                                im,
                                g,
                                steps,
                                guarded(grid, |x, n, g, c| {
                                    self.membrane_step::<false>(m, x, n, g, sp, c)
                                }),
                            ),
                            (Shape::Membrane(m), true) => lanes::<LANES>(
                                p,
                                im,
                                g,
                                steps,
                                guarded(grid, |x, n, g, c| {
                                    self.membrane_step::<true>(m, x, n, g, sp, c)
                                }),
                            ),
                        }
                    })
                    .reduce(Counts::default, |a, b| a + b)
            })
            .collect();
        state.step += steps;
        counts
    }

    /// One step between plane walls: the allowed centres span z in
    /// [`lo`, `hi`]; hydrodynamic walls at both (`two_walls`, a slit) or at
    /// the bottom only (a plane wall and its lid); x and y periodic.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn planar_step<const HYDRO: bool>(
        &self,
        x: &mut [f64; 3],
        n: &mut [i32; 3],
        g: &mut ParticleRng,
        sp: &SpeciesMotion,
        lo: f64,
        hi: f64,
        two_walls: bool,
    ) {
        let (s_par, s_perp, drift) = match sp.table.as_ref() {
            Some(table) if HYDRO => {
                // Gap to the nearer wall, and the direction away from it, without a branch
                // (which side a particle is on is unpredictable across interleaved particles).
                let (below, above) = (x[2] - lo, if two_walls { hi - x[2] } else { f64::INFINITY });
                let h = below.min(above);
                let away = if below <= above { 1.0 } else { -1.0 };
                let v = table.eval(h);
                (v[0], v[1], if self.ito_drift { away * v[3] } else { 0.0 })
            }
            _ => (sp.sigma_nm, sp.sigma_nm, 0.0),
        };
        x[0] += s_par * standard_normal(g);
        x[1] += s_par * standard_normal(g);
        x[2] += drift + s_perp * standard_normal(g);
        wrap(&mut x[0], &mut n[0], self.edges_nm[0]);
        wrap(&mut x[1], &mut n[1], self.edges_nm[1]);
        x[2] = reflect(x[2], lo, hi);
    }

    /// Displacement of one step at `x` in a cylinder or membrane: isotropic,
    /// or with the nearest-wall tensor and its Itô drift.
    #[inline(always)]
    fn displacement<const HYDRO: bool>(
        &self,
        x: &[f64; 3],
        g: &mut ParticleRng,
        sp: &SpeciesMotion,
    ) -> [f64; 3] {
        let xi = [standard_normal(g), standard_normal(g), standard_normal(g)];
        let table = match sp.table.as_ref() {
            Some(t) if HYDRO => t,
            _ => return xi.map(|v| sp.sigma_nm * v),
        };
        let w = self.shape.nearest_wall(x);
        let v = table.eval(w.distance_nm - sp.radius_nm);
        let n = w.normal;
        let along_normal = xi[0] * n[0] + xi[1] * n[1] + xi[2] * n[2];
        let drift = if self.ito_drift {
            let div = w
                .normal_divergence_per_nm
                .clamp(-sp.divergence_cap_per_nm, sp.divergence_cap_per_nm);
            v[3] + v[2] * div
        } else {
            0.0
        };
        // D^½ ξ = σ∥ ξ + (σ⊥ − σ∥)(ξ·n) n, then the drift along n.
        let normal_part = (v[1] - v[0]) * along_normal + drift;
        [
            v[0] * xi[0] + normal_part * n[0],
            v[0] * xi[1] + normal_part * n[1],
            v[0] * xi[2] + normal_part * n[2],
        ]
    }

    /// Where a move from the allowed `x` to the excluded `y` ends: reflected
    /// at the wall, or `None` (rejected). Without hydrodynamics the proposal
    /// is a symmetric Gaussian and the fold is accepted with its Metropolis
    /// probability ([`Shape::fold`]), which keeps the density exactly uniform
    /// at curved walls; with hydrodynamics (a drifted, position-dependent
    /// proposal) the plain fold is used.
    #[inline(always)]
    fn resolve_contact<const HYDRO: bool>(
        &self,
        x: &[f64; 3],
        y: &[f64; 3],
        g: &mut ParticleRng,
        sp: &SpeciesMotion,
    ) -> Option<[f64; 3]> {
        if HYDRO {
            return self.shape.reflect(y, sp.radius_nm);
        }
        let (q, ratio) = self.shape.fold(x, y, sp.radius_nm, sp.sigma_nm)?;
        (ratio >= 1.0 || g.uniform() < ratio).then_some(q)
    }

    /// One step in an infinitely long cylinder along z, periodic in z.
    #[inline(always)]
    fn cylinder_step<const HYDRO: bool>(
        &self,
        x: &mut [f64; 3],
        n: &mut [i32; 3],
        g: &mut ParticleRng,
        sp: &SpeciesMotion,
        c: &mut Counts,
    ) {
        let d = self.displacement::<HYDRO>(x, g, sp);
        let mut y = [x[0] + d[0], x[1] + d[1], x[2] + d[2]];
        if !self.shape.allows(&y, sp.radius_nm) {
            match self.resolve_contact::<HYDRO>(x, &y, g, sp) {
                Some(q) => y = q,
                None => {
                    // Only the transverse move is undone: the axial one is independent of it.
                    c.rejected_moves += 1;
                    y = [x[0], x[1], y[2]];
                }
            }
        }
        wrap(&mut y[2], &mut n[2], self.edges_nm[2]);
        *x = y;
    }

    /// One step in a membrane with pores between two baths; x and y periodic.
    #[inline(always)]
    fn membrane_step<const HYDRO: bool>(
        &self,
        m: &Membrane,
        x: &mut [f64; 3],
        n: &mut [i32; 3],
        g: &mut ParticleRng,
        sp: &SpeciesMotion,
        c: &mut Counts,
    ) {
        let [lx, ly, lz] = self.edges_nm;
        let d = self.displacement::<HYDRO>(x, g, sp);
        let mut y = [x[0] + d[0], x[1] + d[1], x[2] + d[2]];
        if y[2] >= lz || y[2] <= 0.0 {
            if y[2] >= lz {
                c.exits_top += 1;
            } else {
                c.exits_bottom += 1;
            }
            let (top, bottom) = (
                m.top_concentration_mol_per_m3,
                m.bottom_concentration_mol_per_m3,
            );
            let from_top = g.uniform() < top / (top + bottom);
            if from_top {
                c.entries_top += 1;
            } else {
                c.entries_bottom += 1;
            }
            *x = self.emit(m, g, sp, from_top);
            return;
        }
        let mut m_im = *n;
        wrap(&mut y[0], &mut m_im[0], lx);
        wrap(&mut y[1], &mut m_im[1], ly);
        if !self.shape.allows(&y, sp.radius_nm) {
            match self.resolve_contact::<HYDRO>(x, &y, g, sp) {
                Some(mut q) => {
                    wrap(&mut q[0], &mut m_im[0], lx);
                    wrap(&mut q[1], &mut m_im[1], ly);
                    y = q;
                }
                None => {
                    c.rejected_moves += 1;
                    return;
                }
            }
        }
        let mid = m.mid_plane_nm();
        if (x[2] < mid) != (y[2] < mid) {
            if y[2] < mid {
                c.crossings_down += 1;
            } else {
                c.crossings_up += 1;
            }
        }
        *x = y;
        *n = m_im;
    }

    /// A particle emitted by a bath: uniform across the face, at the depth
    /// a bath particle lands at in one step (see the module docs).
    fn emit(
        &self,
        m: &Membrane,
        g: &mut ParticleRng,
        sp: &SpeciesMotion,
        from_top: bool,
    ) -> [f64; 3] {
        let sigma = sp.bath_sigma_nm[usize::from(from_top)];
        let deepest = m.reservoir_depth_nm() - sp.radius_nm;
        for _ in 0..PLACEMENT_ATTEMPTS {
            let jump = sigma * (-2.0 * (1.0 - g.uniform()).ln()).sqrt();
            let depth = (jump * g.uniform()).min(deepest);
            let x = g.uniform() * m.lateral_nm[0];
            let y = g.uniform() * m.lateral_nm[1];
            let z = if from_top { m.height_nm - depth } else { depth };
            let q = [x, y, z];
            if z > 0.0 && z < m.height_nm && self.shape.allows(&q, sp.radius_nm) {
                return q;
            }
        }
        // Unreachable for a validated membrane (reservoirs deeper than a diameter).
        [
            0.5 * m.lateral_nm[0],
            0.5 * m.lateral_nm[1],
            if from_top {
                m.z_hi_nm + 0.5 * (m.height_nm - m.z_hi_nm)
            } else {
                0.5 * m.z_lo_nm
            },
        ]
    }

    /// Occupancy of each membrane region per species (`None` outside membranes).
    pub fn occupancy(&self, state: &State) -> Option<Vec<Occupancy>> {
        let Shape::Membrane(m) = &self.shape else {
            return None;
        };
        Some(
            self.species
                .iter()
                .map(|sp| {
                    state.positions[sp.range.clone()]
                        .par_iter()
                        .map(|p| {
                            let mut o = Occupancy::default();
                            if p[2] > m.z_hi_nm {
                                o.top = 1;
                            } else if p[2] < m.z_lo_nm {
                                o.bottom = 1;
                            } else if m.in_pore(p) {
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

/// Runs `steps` steps of `step` over a chunk of particles, `K` at a time:
/// each step of one particle is followed by the same step of the next K − 1,
/// so that independent chains of dependent operations overlap in the
/// processor. Each particle draws from its own stream in the same order as
/// alone, so K changes speed, never results.
#[inline(always)]
fn lanes<const K: usize>(
    p: &mut [[f64; 3]],
    im: &mut [[i32; 3]],
    g: &mut [ParticleRng],
    steps: u64,
    mut step: impl FnMut(&mut [f64; 3], &mut [i32; 3], &mut ParticleRng, &mut Counts),
) -> Counts {
    let mut c = Counts::default();
    let mut pg = p.chunks_exact_mut(K);
    let mut ig = im.chunks_exact_mut(K);
    let mut gg = g.chunks_exact_mut(K);
    for ((p, im), g) in (&mut pg).zip(&mut ig).zip(&mut gg) {
        let mut x: [[f64; 3]; K] = p.try_into().expect("a chunk of K");
        let mut n: [[i32; 3]; K] = im.try_into().expect("a chunk of K");
        for _ in 0..steps {
            for j in 0..K {
                step(&mut x[j], &mut n[j], &mut g[j], &mut c);
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
        for _ in 0..steps {
            step(&mut x, &mut n, g, &mut c);
        }
        *p = x;
        *im = n;
    }
    c
}

/// `step` with rejection at fixed obstacles: a move ending inside one is
/// undone, with the events it counted.
#[inline(always)]
fn guarded<'a>(
    grid: Option<&'a ObstacleGrid>,
    mut step: impl FnMut(&mut [f64; 3], &mut [i32; 3], &mut ParticleRng, &mut Counts) + 'a,
) -> impl FnMut(&mut [f64; 3], &mut [i32; 3], &mut ParticleRng, &mut Counts) + 'a {
    move |x, n, g, c| match grid {
        None => step(x, n, g, c),
        Some(grid) => {
            let (x0, n0, c0) = (*x, *n, *c);
            step(x, n, g, c);
            if grid.blocked(x) {
                (*x, *n, *c) = (x0, n0, c0);
            }
        }
    }
}

/// Periodic wrap of one coordinate into [0, l) with image counting.
#[inline(always)]
fn wrap(x: &mut f64, image: &mut i32, l: f64) {
    if *x >= l {
        *x -= l;
        *image += 1;
    } else if *x < 0.0 {
        *x += l;
        *image -= 1;
        // Round-off can land exactly on l.
        if *x >= l {
            *x = 0.0;
        }
    }
}

/// Mean parallel mobility ⟨D∥⟩/D0 over the space open to the centre, in
/// this engine's wall model (Faxén, two walls superposed in a slit, the
/// nearest wall in a cylinder): the long-time lateral D_eff/D0 in a slit and
/// axial D_eff/D0 in a cylindrical pore that a run with wall hydrodynamics
/// must reproduce exactly (x and z moves there have no drift, and the
/// equilibrium density is uniform). `None` for membranes.
///
/// Evaluated by composite Simpson quadrature with 20 000 intervals.
pub fn mean_parallel_mobility(shape: &Shape, radius_nm: f64, drag_radius_nm: f64) -> Option<f64> {
    let table = WallMobilityTable::default();
    let par = |z: f64| table.eval(z / drag_radius_nm).parallel;
    let simpson = |lo: f64, hi: f64, f: &dyn Fn(f64) -> f64| -> f64 {
        let n = 20_000;
        let h = (hi - lo) / n as f64;
        let mut s = f(lo) + f(hi);
        for i in 1..n {
            s += f(lo + i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
        }
        s * h / 3.0
    };
    let a = radius_nm;
    match shape {
        Shape::PlaneWall { height_nm } => {
            Some(simpson(a, height_nm - a, &|z| par(z)) / (height_nm - 2.0 * a))
        }
        Shape::Slit { width_nm } => {
            let w = *width_nm;
            Some(simpson(a, w - a, &|z| superpose_two_walls(par(z), par(w - z))) / (w - 2.0 * a))
        }
        Shape::Cylinder { radius_nm: r, .. } => {
            let open = r - a;
            Some(simpson(0.0, open, &|rho| par(r - rho) * 2.0 * rho) / (open * open))
        }
        Shape::Membrane(_) => None,
    }
}

/// Running membrane measurements of a run: cumulative counts per species and
/// the steady-state window that opens at `flux_after_s`.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct MembraneMeter {
    /// Cumulative counts per species.
    pub totals: Vec<Counts>,
    /// The steady-state window, once open.
    pub window: Option<Window>,
}

/// Accumulators of the steady-state window.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Window {
    /// Step at which it opened.
    pub start_step: u64,
    /// Counts per species at that step.
    pub start: Vec<Counts>,
    /// Sums over recorded frames of [in pores, top reservoir, bottom reservoir] per species.
    pub occupancy_sums: Vec<[u64; 3]>,
    /// Frames summed.
    pub frames: u64,
}

impl MembraneMeter {
    /// A meter for `species` species with nothing counted.
    pub fn new(species: usize) -> Self {
        Self {
            totals: vec![Counts::default(); species],
            window: None,
        }
    }

    /// Adds the counts of one block.
    pub fn add(&mut self, block: &[Counts]) {
        for (t, b) in self.totals.iter_mut().zip(block) {
            *t = *t + *b;
        }
    }

    /// Records an instant (a frame): opens the window at the first call with
    /// `time_s ≥ flux_after_s`, then sums occupancies.
    pub fn observe(&mut self, step: u64, time_s: f64, flux_after_s: f64, occupancy: &[Occupancy]) {
        if self.window.is_none() && time_s >= flux_after_s {
            self.window = Some(Window {
                start_step: step,
                start: self.totals.clone(),
                occupancy_sums: vec![[0; 3]; occupancy.len()],
                frames: 0,
            });
        }
        if let Some(w) = self.window.as_mut() {
            for (sum, o) in w.occupancy_sums.iter_mut().zip(occupancy) {
                sum[0] += o.pores;
                sum[1] += o.top;
                sum[2] += o.bottom;
            }
            w.frames += 1;
        }
    }

    /// Steady-state results of species `s` from the window's opening to
    /// `step`; `None` before the window opens or when it spans no steps.
    pub fn summary(
        &self,
        confinement: &Confinement,
        scenario: &Scenario,
        s: usize,
        step: u64,
    ) -> Option<MembraneSummary> {
        let Shape::Membrane(m) = confinement.shape() else {
            return None;
        };
        let w = self.window.as_ref()?;
        let steps = step.checked_sub(w.start_step).filter(|&n| n > 0)? as f64;
        let (c0, c1) = (w.start[s], self.totals[s]);
        let species = &scenario.species[s];
        let area = m.area_nm2();
        let duration_s = steps * scenario.dt_s;
        let net_down = (c1.crossings_down - c0.crossings_down) as i64
            - (c1.crossings_up - c0.crossings_up) as i64;
        let flux_per_s = net_down as f64 / duration_s;
        // A bath at number density c emits c A σ/√(2π) particles per step.
        let sigma = confinement.bath_sigma_nm(s);
        let emitted = [
            (c1.entries_bottom - c0.entries_bottom) as f64,
            (c1.entries_top - c0.entries_top) as f64,
        ];
        let density = [0, 1]
            .map(|f| emitted[f] * (2.0 * std::f64::consts::PI).sqrt() / (area * sigma[f] * steps));
        let flux_density_per_nm2_s = flux_per_s / area;
        let d0 = species.d0_nm2_per_s();
        let a = species.radius_nm;
        let permeability_nm_s = flux_density_per_nm2_s / (density[1] - density[0]);
        // The reservoirs between each bath face and the dilated slab face add resistance H/D0 each.
        let layers_nm = (m.height_nm - m.z_hi_nm - a) + (m.z_lo_nm - a);
        let membrane_nm_s = 1.0 / (1.0 / permeability_nm_s - layers_nm / d0);
        let porosity = m.porosity();
        let frames = w.frames.max(1) as f64;
        let occ = w.occupancy_sums[s];
        let mean_bath = 0.5 * (density[0] + density[1]);
        Some(MembraneSummary {
            window_s: [
                w.start_step as f64 * scenario.dt_s,
                step as f64 * scenario.dt_s,
            ],
            net_crossings_down: net_down,
            flux_particles_per_s: flux_per_s,
            bath_density_per_nm3: density,
            permeability_m_per_s: permeability_nm_s * 1e-9,
            flux_density_at_given_mol_per_m2_s: permeability_nm_s
                * 1e-9
                * (m.top_concentration_mol_per_m3 - m.bottom_concentration_mol_per_m3),
            concentration_scale: per_nm3_to_mol_per_m3(density[0] + density[1])
                / (m.top_concentration_mol_per_m3 + m.bottom_concentration_mol_per_m3),
            membrane_permeability_m_per_s: membrane_nm_s * 1e-9,
            hindrance: membrane_nm_s * m.thickness_nm() / (porosity * d0),
            porosity,
            steric_partition: m.steric_partition(a),
            mean_particles_in_pores: occ[0] as f64 / frames,
            mean_particles_in_top_reservoir: occ[1] as f64 / frames,
            mean_particles_in_bottom_reservoir: occ[2] as f64 / frames,
            pore_concentration_over_mean_bath: occ[0] as f64
                / frames
                / m.pore_volume_nm3()
                / mean_bath,
            rejected_moves: c1.rejected_moves - c0.rejected_moves,
        })
    }
}

/// Steady-state membrane results of one species over a window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MembraneSummary {
    /// Window [start, end], s.
    pub window_s: [f64; 2],
    /// Net downward crossings of the mid-plane in the window.
    pub net_crossings_down: i64,
    /// Net flux from top to bottom, particles per second (whole membrane area of the box).
    pub flux_particles_per_s: f64,
    /// Simulated bath densities [bottom, top], particles per nm³, from the
    /// emissions (a bath at density c emits c A σ/√(2π) per step).
    pub bath_density_per_nm3: [f64; 2],
    /// Bath-to-bath permeability J/(c_top − c_bottom), m/s.
    pub permeability_m_per_s: f64,
    /// Flux density at the scenario's bath concentrations, mol/(m² s):
    /// tracers do not interact, so the flux scales with the concentrations
    /// and the particle count only sets the statistics.
    pub flux_density_at_given_mol_per_m2_s: f64,
    /// Simulated over given bath concentrations (the sampling level).
    pub concentration_scale: f64,
    /// Membrane permeability: the bath-to-bath resistance less the two
    /// reservoir layers H/D0 (H from bath face to the face a from the slab), m/s.
    pub membrane_permeability_m_per_s: f64,
    /// Measured hindrance P_m L / (ε D0), to compare with Φ (steric) or the
    /// Renkin and Dechadilok–Deen H (it includes the pore-end resistance).
    pub hindrance: f64,
    /// Porosity ε.
    pub porosity: f64,
    /// Steric partition coefficient Φ of the pores.
    pub steric_partition: f64,
    /// Mean particles inside pores over the window's frames.
    pub mean_particles_in_pores: f64,
    /// Mean particles above the slab.
    pub mean_particles_in_top_reservoir: f64,
    /// Mean particles below the slab.
    pub mean_particles_in_bottom_reservoir: f64,
    /// Mean pore concentration (over the whole pore volume Σ π r² L) over the
    /// mean bath concentration: the partition coefficient when both baths
    /// are equal.
    pub pore_concentration_over_mean_bath: f64,
    /// Moves rejected in the window.
    pub rejected_moves: u64,
}

/// A confined run's extra state beside the particles: the kernels, the
/// membrane meter, and its observables in the trajectory.
pub struct ConfinedRun {
    confinement: Confinement,
    meter: MembraneMeter,
    series: Vec<ObservableSeries>,
    flux_after_s: f64,
}

/// Sidecar checkpoint of the meter, next to the run's checkpoint.
#[derive(Debug, Clone, Serialize, Deserialize)]
struct Sidecar {
    /// The last two saved meters, newest last, so that a kill between the
    /// two checkpoint files still leaves the one matching the main checkpoint.
    saved: Vec<SavedMeter>,
}

#[derive(Debug, Clone, Serialize, Deserialize)]
struct SavedMeter {
    step: u64,
    meter: MembraneMeter,
}

/// Path of the confined-run sidecar beside a run checkpoint.
pub fn sidecar_path(checkpoint: &Path) -> PathBuf {
    let mut s = checkpoint.as_os_str().to_owned();
    s.push(".confined");
    PathBuf::from(s)
}

impl ConfinedRun {
    /// Prepares the kernels of a scenario with a geometry, among its fixed obstacles.
    pub fn new(scenario: &Scenario, geometry: &Geometry, obstacles: &FixedObstacles) -> Self {
        Self {
            confinement: Confinement::new(scenario, geometry).with_obstacles(scenario, obstacles),
            meter: MembraneMeter::new(scenario.species.len()),
            series: Vec::new(),
            flux_after_s: geometry.flux_after_s,
        }
    }

    /// The kernels.
    pub fn confinement(&self) -> &Confinement {
        &self.confinement
    }

    /// Initial state (see [`Confinement::initial_state`]).
    ///
    /// # Errors
    /// [`EngineError::Placement`].
    pub fn initial_state(&self, scenario: &Scenario) -> Result<State> {
        self.confinement.initial_state(scenario)
    }

    /// Advances the particles and counts events.
    pub fn advance(&mut self, state: &mut State, steps: u64) {
        let block = self.confinement.advance(state, steps);
        self.meter.add(&block);
    }

    /// Writes the geometry to `/parameters/thicket/geometry` and creates the
    /// membrane series, for a new trajectory.
    ///
    /// # Errors
    /// HDF5 failures.
    pub fn start(
        &mut self,
        writer: &TrajectoryWriter,
        scenario: &Scenario,
        geometry: &Geometry,
    ) -> Result<()> {
        write_attributes(
            writer,
            "parameters/thicket/geometry",
            &geometry_attributes(scenario, geometry),
        )?;
        if matches!(geometry.shape, Shape::Membrane(_)) {
            for s in &scenario.species {
                self.series.push(ObservableSeries::create(
                    writer,
                    &format!("{}/membrane", s.name),
                    &MEMBRANE_COLUMNS,
                    "1",
                )?);
            }
        }
        Ok(())
    }

    /// Restores the meter saved with the checkpoint at `step` and reopens the
    /// series at the trajectory's frame count, for `--resume`.
    ///
    /// # Errors
    /// [`EngineError::Resume`] when the sidecar is missing or holds no meter
    /// for `step`.
    pub fn resume(
        &mut self,
        writer: &TrajectoryWriter,
        scenario: &Scenario,
        checkpoint: &Path,
        step: u64,
    ) -> Result<()> {
        let path = sidecar_path(checkpoint);
        let fail = |reason: String| EngineError::Resume {
            file: path.clone(),
            reason,
        };
        let text = std::fs::read_to_string(&path)
            .map_err(|e| fail(format!("the confined-run checkpoint cannot be read ({e})")))?;
        let sidecar: Sidecar = toml::from_str(&text)
            .map_err(|e| fail(format!("the confined-run checkpoint is damaged ({e})")))?;
        let saved = sidecar
            .saved
            .into_iter()
            .rev()
            .find(|m| m.step == step)
            .ok_or_else(|| {
                fail(format!(
                    "it holds no counters for step {step}, the step of the run checkpoint"
                ))
            })?;
        if saved.meter.totals.len() != scenario.species.len() {
            return Err(fail(
                "it belongs to a scenario with another number of species".into(),
            ));
        }
        self.meter = saved.meter;
        if matches!(self.confinement.shape, Shape::Membrane(_)) {
            for s in &scenario.species {
                self.series.push(ObservableSeries::reopen(
                    writer,
                    &format!("{}/membrane", s.name),
                    MEMBRANE_COLUMNS.len(),
                    writer.frames(),
                )?);
            }
        }
        Ok(())
    }

    /// Records the frame just written: one row of counts and occupancies per
    /// species, and the steady-state window.
    ///
    /// # Errors
    /// HDF5 failures.
    pub fn record(&mut self, state: &State, time_s: f64) -> Result<()> {
        let Some(occupancy) = self.confinement.occupancy(state) else {
            return Ok(());
        };
        self.meter
            .observe(state.step, time_s, self.flux_after_s, &occupancy);
        for ((series, c), o) in self
            .series
            .iter_mut()
            .zip(&self.meter.totals)
            .zip(&occupancy)
        {
            let row = [
                c.exits_bottom,
                c.exits_top,
                c.entries_bottom,
                c.entries_top,
                c.crossings_down,
                c.crossings_up,
                c.rejected_moves,
                o.pores,
                o.top,
                o.bottom,
            ]
            .map(|v| v as i64);
            series.append(state.step, time_s, &row)?;
        }
        Ok(())
    }

    /// Saves the meter beside the run checkpoint (atomically; keeps the
    /// previous one too).
    ///
    /// # Errors
    /// I/O failures.
    pub fn save(&self, checkpoint: &Path, step: u64) -> Result<()> {
        let path = sidecar_path(checkpoint);
        let io = |source| EngineError::Io {
            file: path.clone(),
            source,
        };
        let mut saved = std::fs::read_to_string(&path)
            .ok()
            .and_then(|t| toml::from_str::<Sidecar>(&t).ok())
            .map(|s| s.saved)
            .unwrap_or_default();
        saved.retain(|m| m.step != step);
        saved.push(SavedMeter {
            step,
            meter: self.meter.clone(),
        });
        let keep = saved.len().saturating_sub(2);
        saved.drain(..keep);
        let text = toml::to_string(&Sidecar { saved }).map_err(|e| EngineError::Io {
            file: path.clone(),
            source: std::io::Error::other(e.to_string()),
        })?;
        let tmp = path.with_extension("confined.tmp");
        std::fs::write(&tmp, text).map_err(io)?;
        std::fs::rename(&tmp, &path).map_err(io)
    }

    /// Writes the steady-state summary of each species to
    /// `/observables/<species>/membrane` (attributes) at the end of a run.
    ///
    /// # Errors
    /// HDF5 failures.
    pub fn finish(&self, writer: &TrajectoryWriter, scenario: &Scenario, step: u64) -> Result<()> {
        for (s, sp) in scenario.species.iter().enumerate() {
            let Some(r) = self.meter.summary(&self.confinement, scenario, s, step) else {
                continue;
            };
            let f = AttrValue::F64;
            let attrs = [
                ("window_start_s", f(r.window_s[0])),
                ("window_end_s", f(r.window_s[1])),
                ("net_crossings_down", AttrValue::I64(r.net_crossings_down)),
                ("flux_particles_per_s", f(r.flux_particles_per_s)),
                ("simulated_top_bath_density_per_nm3", f(r.bath_density_per_nm3[1])),
                ("simulated_bottom_bath_density_per_nm3", f(r.bath_density_per_nm3[0])),
                ("concentration_scale", f(r.concentration_scale)),
                ("permeability_m_per_s", f(r.permeability_m_per_s)),
                ("flux_density_at_given_concentrations_mol_per_m2_s", f(r.flux_density_at_given_mol_per_m2_s)),
                ("membrane_permeability_m_per_s", f(r.membrane_permeability_m_per_s)),
                ("hindrance_measured", f(r.hindrance)),
                ("porosity", f(r.porosity)),
                ("partition_coefficient_steric", f(r.steric_partition)),
                ("mean_particles_in_pores", f(r.mean_particles_in_pores)),
                ("mean_particles_in_top_reservoir", f(r.mean_particles_in_top_reservoir)),
                ("mean_particles_in_bottom_reservoir", f(r.mean_particles_in_bottom_reservoir)),
                ("pore_concentration_over_mean_bath", f(r.pore_concentration_over_mean_bath)),
                ("rejected_moves", AttrValue::I64(r.rejected_moves as i64)),
                (
                    "definitions",
                    AttrValue::Str(
                        "J = net mid-plane crossings downward per second; simulated bath densities from emissions (c = emitted sqrt(2 pi)/(A sigma steps)); \
                         permeability = J/A/(c_top - c_bottom); membrane_permeability removes the two reservoir layers H/D0; \
                         hindrance_measured = membrane_permeability L/(porosity D0); tracers do not interact, so fluxes scale to the given \
                         concentrations: flux_density_at_given_concentrations = permeability (c_top - c_bottom) as given"
                            .into(),
                    ),
                ),
            ];
            write_attributes(writer, &format!("observables/{}/membrane", sp.name), &attrs)?;
        }
        Ok(())
    }

    /// The meter (counts and window).
    pub fn meter(&self) -> &MembraneMeter {
        &self.meter
    }
}

/// Geometry parameters as attributes for `/parameters/thicket/geometry`.
fn geometry_attributes(scenario: &Scenario, geometry: &Geometry) -> Vec<(&'static str, AttrValue)> {
    let f = AttrValue::F64;
    let s = |v: &str| AttrValue::Str(v.to_string());
    let mut attrs = vec![
        ("kind", s(geometry.shape.kind())),
        (
            "wall_hydrodynamics",
            AttrValue::I64(i64::from(geometry.hydrodynamics.is_some())),
        ),
        ("hydrodynamics", s(&geometry.hydrodynamics_description())),
    ];
    if let Some(m) = geometry.hydrodynamics {
        attrs.push(("perpendicular_model", s(m.name())));
        attrs.push(("perpendicular_model_source", s(m.source())));
    }
    match &geometry.shape {
        Shape::PlaneWall { height_nm } => attrs.push(("box_height_nm", f(*height_nm))),
        Shape::Slit { width_nm } => attrs.push(("width_nm", f(*width_nm))),
        Shape::Cylinder { radius_nm, axis_nm } => {
            attrs.push(("pore_radius_nm", f(*radius_nm)));
            attrs.push(("axis_x_nm", f(axis_nm[0])));
            attrs.push(("axis_y_nm", f(axis_nm[1])));
        }
        Shape::Membrane(m) => {
            attrs.extend([
                ("thickness_nm", f(m.thickness_nm())),
                ("slab_bottom_z_nm", f(m.z_lo_nm)),
                ("slab_top_z_nm", f(m.z_hi_nm)),
                ("pores", AttrValue::I64(m.pores.len() as i64)),
                ("porosity", f(m.porosity())),
                ("top_concentration_mol_per_m3", f(m.top_concentration_mol_per_m3)),
                ("bottom_concentration_mol_per_m3", f(m.bottom_concentration_mol_per_m3)),
                ("flux_after_s", f(geometry.flux_after_s)),
                ("recycled_particles", s("particles leaving through a bath face re-enter from a bath; their tracks jump")),
            ]);
            let radii: Vec<String> = m
                .pores
                .iter()
                .map(|p| format!("{},{},{}", p.centre_nm[0], p.centre_nm[1], p.radius_nm))
                .collect();
            if radii.len() <= 1000 {
                attrs.push(("pores_x_y_radius_nm", s(&radii.join(";"))));
            }
        }
    }
    if let Some(size) = geometry.shape.confining_size_nm() {
        attrs.push(("confining_size_nm", f(size)));
        let lambdas: Vec<String> = scenario
            .species
            .iter()
            .map(|sp| format!("{}={}", sp.name, sp.radius_nm / size))
            .collect();
        attrs.push(("lambda_per_species", s(&lambdas.join(";"))));
    }
    attrs
}

#[cfg(test)]
mod tests {
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
            let c = Confinement::new(&s, s.geometry.as_ref().unwrap());
            let table = c.species[0].table.as_ref().unwrap();
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
        let m = mean_parallel_mobility(shape, 2.0, 2.0).unwrap();
        // Limits: bounded by the mid-gap value (the largest) and contact (Faxén at z = a).
        let mid = superpose_two_walls(faxen_parallel(2.0 / 6.0), faxen_parallel(2.0 / 6.0));
        assert!(
            m < mid && m > superpose_two_walls(faxen_parallel(1.0), faxen_parallel(0.2)),
            "{m}"
        );
    }
}
