//! The second piece of a step: the boundary that folds a proposed end point
//! into the allowed space, counting what happened at it.
//!
//! **Box.** Periodic axes wrap with image counting; walled axes reflect the
//! centre specularly a radius from the face.
//!
//! **Walls.** A centre that steps closer than its radius to a wall is
//! mirrored in the plane tangent to the excluded surface (specular
//! reflection of the particle surface). At a plane this is exact; at a
//! curved wall a mirror does not preserve volume and would distort the
//! density next to it by O(σ/R) (it depletes a concave pore wall), so for a
//! symmetric proposal each fold is accepted with its Metropolis probability
//! (see `Shape::fold`), which makes the uniform density exactly stationary;
//! a refused fold leaves the particle where it was (in a cylinder only its
//! transverse move is undone).
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
//! slab's mid-plane. Each emitted particle remembers its bath (in its z
//! image count, unused on the non-periodic z axis), so that transits from
//! one bath to the other are counted each way: with a filtration flow they
//! give the forward and backward transmission, and so the sieving
//! coefficient, from one run (tracers do not interact: transport is linear
//! in the two bath concentrations).

use crate::base::rng::ParticleRng;
use crate::space::collisions::Bounds;
use crate::space::reflect;
use crate::space::shape::{Membrane, Shape};
use serde::{Deserialize, Serialize};
use std::ops::{Add, AddAssign};

/// The z image of a membrane particle emitted by the top bath (z is not
/// periodic in a membrane, so its image count is free to hold the origin;
/// the trajectory writes 0 for it). A particle placed at the start holds 0.
pub const FROM_TOP: i32 = 1;
/// The z image of a membrane particle emitted by the bottom bath.
pub const FROM_BOTTOM: i32 = 2;

/// Attempts to find an allowed starting point (or bath entry point) for one
/// particle before giving up.
pub const PLACEMENT_ATTEMPTS: u64 = 1_000_000;

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
    /// Particles emitted by the top bath and absorbed by the bottom one.
    #[serde(default)]
    pub transits_down: u64,
    /// Particles emitted by the bottom bath and absorbed by the top one.
    #[serde(default)]
    pub transits_up: u64,
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
            transits_down: self.transits_down + o.transits_down,
            transits_up: self.transits_up + o.transits_up,
        }
    }
}

impl AddAssign for Counts {
    #[inline(always)]
    fn add_assign(&mut self, o: Counts) {
        *self = *self + o;
    }
}

/// Nothing counted (the box).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct NoEvents;

impl AddAssign for NoEvents {
    #[inline(always)]
    fn add_assign(&mut self, _o: NoEvents) {}
}

/// Events a boundary counts: nothing for the box, [`Counts`] for walls and baths.
pub trait Events: Copy + Default + Send + AddAssign {
    /// As membrane counts (all zero when nothing is counted).
    fn counts(self) -> Counts;
}

impl Events for NoEvents {
    fn counts(self) -> Counts {
        Counts::default()
    }
}

impl Events for Counts {
    fn counts(self) -> Counts {
        self
    }
}

/// A folded end point: centre, image counts and what happened on the way.
#[derive(Debug, Clone, Copy)]
pub struct Moved<E> {
    /// New centre, nm.
    pub at: [f64; 3],
    /// New image counts.
    pub image: [i32; 3],
    /// Events of this move.
    pub events: E,
}

/// Where a proposed move ends.
pub trait Boundary: Sync {
    /// What the boundary counts.
    type Events: Events;

    /// Folds the end point `y` of a move from `x` (image `n`) into the
    /// allowed space; `symmetric` says whether the proposal was a symmetric
    /// Gaussian of rms `sigma` (see the module docs).
    fn fold(
        &self,
        x: &[f64; 3],
        n: &[i32; 3],
        y: [f64; 3],
        g: &mut ParticleRng,
        symmetric: bool,
    ) -> Moved<Self::Events>;

    /// A uniformly placed trial start for one particle, or `None` to draw again.
    fn trial_start(&self, g: &mut ParticleRng) -> Option<[f64; 3]>;
}

/// Periodic wrap of one coordinate into [0, l) with image counting.
#[inline(always)]
pub fn wrap(x: &mut f64, image: &mut i32, l: f64) {
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

/// The box alone ([`Bounds`]): periodic axes wrap, walled axes reflect the
/// centre into [`lower_nm`, `upper_nm`].
impl Boundary for Bounds {
    type Events = NoEvents;

    #[inline(always)]
    fn fold(
        &self,
        _x: &[f64; 3],
        n: &[i32; 3],
        mut y: [f64; 3],
        _g: &mut ParticleRng,
        _symmetric: bool,
    ) -> Moved<NoEvents> {
        let mut m = *n;
        for k in 0..3 {
            if self.periodic[k] {
                let l = self.edges_nm[k];
                if y[k] >= l {
                    y[k] -= l;
                    m[k] += 1;
                } else if y[k] < 0.0 {
                    y[k] += l;
                    m[k] -= 1;
                }
            } else {
                y[k] = reflect(y[k], self.lower_nm[k], self.upper_nm[k]);
            }
        }
        Moved {
            at: y,
            image: m,
            events: NoEvents,
        }
    }

    fn trial_start(&self, g: &mut ParticleRng) -> Option<[f64; 3]> {
        Some(
            [0, 1, 2]
                .map(|k| self.lower_nm[k] + g.uniform() * (self.upper_nm[k] - self.lower_nm[k])),
        )
    }
}

/// Confining walls and baths: a plane wall, a slit, a cylindrical pore or a
/// membrane, for one species.
#[derive(Debug, Clone)]
pub struct Walls {
    /// The shape.
    pub shape: Shape,
    /// Box edges, nm.
    pub edges_nm: [f64; 3],
    /// Particle radius, nm.
    pub radius_nm: f64,
    /// √(2 D0 Δt), nm: the width a Metropolis fold assumes.
    pub sigma_nm: f64,
    /// Step rms across each bath face [bottom, top], nm, for emissions.
    pub bath_sigma_nm: [f64; 2],
}

impl Walls {
    /// Where a move from the allowed `x` to the excluded `y` ends: reflected
    /// at the wall, or `None` (rejected). For a symmetric proposal the fold
    /// is accepted with its Metropolis probability ([`Shape::fold`]); for a
    /// drifted, position-dependent one the plain fold is used.
    #[inline(always)]
    fn resolve_contact(
        &self,
        x: &[f64; 3],
        y: &[f64; 3],
        g: &mut ParticleRng,
        symmetric: bool,
    ) -> Option<[f64; 3]> {
        if !symmetric {
            return self.shape.reflect(y, self.radius_nm);
        }
        let (q, ratio) = self.shape.fold(x, y, self.radius_nm, self.sigma_nm)?;
        (ratio >= 1.0 || g.uniform() < ratio).then_some(q)
    }

    #[inline(always)]
    fn planar(&self, n: &[i32; 3], mut y: [f64; 3]) -> Moved<Counts> {
        let (lo, hi) = (self.radius_nm, self.edges_nm[2] - self.radius_nm);
        let mut m = *n;
        wrap(&mut y[0], &mut m[0], self.edges_nm[0]);
        wrap(&mut y[1], &mut m[1], self.edges_nm[1]);
        y[2] = reflect(y[2], lo, hi);
        Moved {
            at: y,
            image: m,
            events: Counts::default(),
        }
    }

    /// An infinitely long cylinder along z, periodic in z.
    #[inline(always)]
    fn cylinder(
        &self,
        x: &[f64; 3],
        n: &[i32; 3],
        mut y: [f64; 3],
        g: &mut ParticleRng,
        symmetric: bool,
    ) -> Moved<Counts> {
        let mut c = Counts::default();
        if !self.shape.allows(&y, self.radius_nm) {
            match self.resolve_contact(x, &y, g, symmetric) {
                Some(q) => y = q,
                None => {
                    // Only the transverse move is undone: the axial one is independent of it.
                    c.rejected_moves += 1;
                    y = [x[0], x[1], y[2]];
                }
            }
        }
        let mut m = *n;
        wrap(&mut y[2], &mut m[2], self.edges_nm[2]);
        Moved {
            at: y,
            image: m,
            events: c,
        }
    }

    /// A membrane with pores between two baths; x and y periodic.
    #[inline(always)]
    fn membrane(
        &self,
        mb: &Membrane,
        x: &[f64; 3],
        n: &[i32; 3],
        mut y: [f64; 3],
        g: &mut ParticleRng,
        symmetric: bool,
    ) -> Moved<Counts> {
        let [lx, ly, lz] = self.edges_nm;
        let mut c = Counts::default();
        let stay = |c: Counts| Moved {
            at: *x,
            image: *n,
            events: c,
        };
        if y[2] >= lz || y[2] <= 0.0 {
            // The z image (z is not periodic here) holds which bath emitted the particle.
            if y[2] >= lz {
                c.exits_top += 1;
                c.transits_up += u64::from(n[2] == FROM_BOTTOM);
            } else {
                c.exits_bottom += 1;
                c.transits_down += u64::from(n[2] == FROM_TOP);
            }
            let (top, bottom) = (
                mb.top_concentration_mol_per_m3,
                mb.bottom_concentration_mol_per_m3,
            );
            let from_top = g.uniform() < top / (top + bottom);
            if from_top {
                c.entries_top += 1;
            } else {
                c.entries_bottom += 1;
            }
            return Moved {
                at: self.emit(mb, g, from_top),
                image: [n[0], n[1], if from_top { FROM_TOP } else { FROM_BOTTOM }],
                events: c,
            };
        }
        let mut m = *n;
        wrap(&mut y[0], &mut m[0], lx);
        wrap(&mut y[1], &mut m[1], ly);
        if !self.shape.allows(&y, self.radius_nm) {
            match self.resolve_contact(x, &y, g, symmetric) {
                Some(mut q) => {
                    wrap(&mut q[0], &mut m[0], lx);
                    wrap(&mut q[1], &mut m[1], ly);
                    y = q;
                }
                None => {
                    c.rejected_moves += 1;
                    return stay(c);
                }
            }
        }
        let mid = mb.mid_plane_nm();
        if (x[2] < mid) != (y[2] < mid) {
            if y[2] < mid {
                c.crossings_down += 1;
            } else {
                c.crossings_up += 1;
            }
        }
        Moved {
            at: y,
            image: m,
            events: c,
        }
    }

    /// A particle emitted by a bath: uniform across the face, at the depth
    /// a bath particle lands at in one step (see the module docs).
    fn emit(&self, m: &Membrane, g: &mut ParticleRng, from_top: bool) -> [f64; 3] {
        let sigma = self.bath_sigma_nm[usize::from(from_top)];
        let deepest = m.reservoir_depth_nm() - self.radius_nm;
        for _ in 0..PLACEMENT_ATTEMPTS {
            let jump = sigma * (-2.0 * (1.0 - g.uniform()).ln()).sqrt();
            let depth = (jump * g.uniform()).min(deepest);
            let x = g.uniform() * m.lateral_nm[0];
            let y = g.uniform() * m.lateral_nm[1];
            let z = if from_top { m.height_nm - depth } else { depth };
            let q = [x, y, z];
            if z > 0.0 && z < m.height_nm && self.shape.allows(&q, self.radius_nm) {
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
}

/// Plane walls normal to z (one wall and a lid, or a slit); x and y periodic.
#[derive(Debug, Clone)]
pub struct Slab(pub Walls);

/// A cylindrical pore along z, periodic in z.
#[derive(Debug, Clone)]
pub struct Pore(pub Walls);

/// A membrane between two baths; x and y periodic.
#[derive(Debug, Clone)]
pub struct Baths {
    /// The walls (shape, radius, step widths).
    pub walls: Walls,
    /// The membrane of `walls.shape`, kept apart so the step needs no match.
    pub membrane: Membrane,
}

impl Boundary for Slab {
    type Events = Counts;

    #[inline(always)]
    fn fold(
        &self,
        _x: &[f64; 3],
        n: &[i32; 3],
        y: [f64; 3],
        _g: &mut ParticleRng,
        _s: bool,
    ) -> Moved<Counts> {
        self.0.planar(n, y)
    }

    fn trial_start(&self, g: &mut ParticleRng) -> Option<[f64; 3]> {
        self.0.trial_start(g)
    }
}

impl Boundary for Pore {
    type Events = Counts;

    #[inline(always)]
    fn fold(
        &self,
        x: &[f64; 3],
        n: &[i32; 3],
        y: [f64; 3],
        g: &mut ParticleRng,
        symmetric: bool,
    ) -> Moved<Counts> {
        self.0.cylinder(x, n, y, g, symmetric)
    }

    fn trial_start(&self, g: &mut ParticleRng) -> Option<[f64; 3]> {
        self.0.trial_start(g)
    }
}

impl Boundary for Baths {
    type Events = Counts;

    #[inline(always)]
    fn fold(
        &self,
        x: &[f64; 3],
        n: &[i32; 3],
        y: [f64; 3],
        g: &mut ParticleRng,
        symmetric: bool,
    ) -> Moved<Counts> {
        self.walls.membrane(&self.membrane, x, n, y, g, symmetric)
    }

    fn trial_start(&self, g: &mut ParticleRng) -> Option<[f64; 3]> {
        self.walls.trial_start(g)
    }
}

impl Walls {
    /// Uniform in the space open to the centre. In a membrane the density
    /// follows the steady state roughly, to shorten the transient: the top
    /// concentration above the slab, the bottom one below and a linear
    /// profile between them in the pores.
    pub fn trial_start(&self, g: &mut ParticleRng) -> Option<[f64; 3]> {
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
        let c = [0, 1, 2].map(|k| lo[k] + g.uniform() * (hi[k] - lo[k]));
        let keep = g.uniform() < weight(c[2]);
        (keep && self.shape.allows(&c, self.radius_nm)).then_some(c)
    }
}
