//! The first piece of a step: the displacement a particle proposes.
//!
//! Free particles draw an isotropic Gaussian √(2 D0 Δt)·ξ. Near walls with
//! hydrodynamics the diffusion tensor is D = D∥ (I − n n) + D⊥ n n, with n
//! the normal of the nearest wall, D∥ from Faxén's series and D⊥ from
//! Brenner's series or the Bevan–Prieve closed form (`space::mobility`),
//! each a function of the centre-to-wall distance. An Euler–Maruyama step is
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
//! A force or a flow enters here, as one more term of the displacement.

use crate::base::rng::{standard_normal, ParticleRng};
use crate::space::shape::Shape;

/// Intervals of each tabulated mobility.
pub const TABLE_INTERVALS: usize = 4096;

/// What a particle at `x` proposes to move by in one step.
pub trait Displacement: Sync {
    /// True when the proposal is a symmetric Gaussian of fixed width, so a
    /// fold at a curved wall can be corrected by its Metropolis ratio.
    const SYMMETRIC: bool;
    /// True when each step waits on the previous position (tables, square
    /// roots), so that interleaving several particles pays.
    const INTERLEAVE: bool;

    /// Draws the displacement, nm, from the particle's own stream.
    fn draw(&self, x: &[f64; 3], g: &mut ParticleRng) -> [f64; 3];
}

/// Free diffusion: √(2 D0 Δt)·ξ on every axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Isotropic {
    /// √(2 D0 Δt), nm.
    pub sigma_nm: f64,
}

impl Displacement for Isotropic {
    const SYMMETRIC: bool = true;
    const INTERLEAVE: bool = false;

    #[inline(always)]
    fn draw(&self, _x: &[f64; 3], g: &mut ParticleRng) -> [f64; 3] {
        // x, y, z in order: every kernel draws the same numbers for the same particle.
        [
            self.sigma_nm * standard_normal(g),
            self.sigma_nm * standard_normal(g),
            self.sigma_nm * standard_normal(g),
        ]
    }
}

/// Mobility of one species against the wall gap h = d − a, tabulated on a
/// grid uniform in u = √(h/a). Each node holds
/// [σ∥, σ⊥, (D⊥ − D∥) Δt, (dD⊥/dd) Δt] in nm, nm, nm², nm.
#[derive(Debug, Clone)]
pub struct MobilityTable {
    inverse_radius: f64,
    inverse_du: f64,
    /// Single precision (6e-8 relative, far below the interpolation error):
    /// half the cache footprint for the hot loop.
    nodes: Vec<[f32; 4]>,
}

impl MobilityTable {
    /// Tabulates `f(h)` for h in [0, h_max].
    pub fn build(radius_nm: f64, h_max_nm: f64, f: impl Fn(f64) -> [f64; 4]) -> Self {
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
    pub fn eval(&self, h_nm: f64) -> [f64; 4] {
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

/// Wall hydrodynamics between plane walls normal to z: the centre spans
/// [`lower_nm`, `upper_nm`]; walls at both (a slit) or at the bottom only.
#[derive(Debug, Clone)]
pub struct PlanarWalls {
    /// Tabulated mobility against the gap to the nearer wall.
    pub table: MobilityTable,
    /// Lowest centre position, nm.
    pub lower_nm: f64,
    /// Highest centre position, nm.
    pub upper_nm: f64,
    /// True for a slit (two hydrodynamic walls).
    pub two_walls: bool,
    /// Whether the Itô drift is applied (off only to show what it prevents).
    pub ito_drift: bool,
}

impl Displacement for PlanarWalls {
    const SYMMETRIC: bool = false;
    const INTERLEAVE: bool = true;

    #[inline(always)]
    fn draw(&self, x: &[f64; 3], g: &mut ParticleRng) -> [f64; 3] {
        // Gap to the nearer wall, and the direction away from it, without a branch
        // (which side a particle is on is unpredictable across interleaved particles).
        let below = x[2] - self.lower_nm;
        let above = if self.two_walls {
            self.upper_nm - x[2]
        } else {
            f64::INFINITY
        };
        let h = below.min(above);
        let away = if below <= above { 1.0 } else { -1.0 };
        let v = self.table.eval(h);
        let drift = if self.ito_drift { away * v[3] } else { 0.0 };
        [
            v[0] * standard_normal(g),
            v[0] * standard_normal(g),
            drift + v[1] * standard_normal(g),
        ]
    }
}

/// Wall hydrodynamics in a cylinder or membrane: the tensor of the nearest
/// wall, treated as a plane, with its Itô drift including curvature.
#[derive(Debug, Clone)]
pub struct NearestWall {
    /// The confining shape.
    pub shape: Shape,
    /// Tabulated mobility against the gap to the nearest wall.
    pub table: MobilityTable,
    /// Particle radius, nm.
    pub radius_nm: f64,
    /// Cap on |∇·n| in the curvature drift, 1/nm.
    pub divergence_cap_per_nm: f64,
    /// Whether the Itô drift is applied.
    pub ito_drift: bool,
}

impl Displacement for NearestWall {
    const SYMMETRIC: bool = false;
    const INTERLEAVE: bool = true;

    #[inline(always)]
    fn draw(&self, x: &[f64; 3], g: &mut ParticleRng) -> [f64; 3] {
        let xi = [standard_normal(g), standard_normal(g), standard_normal(g)];
        let w = self.shape.nearest_wall(x);
        let v = self.table.eval(w.distance_nm - self.radius_nm);
        let n = w.normal;
        let along_normal = xi[0] * n[0] + xi[1] * n[1] + xi[2] * n[2];
        let drift = if self.ito_drift {
            let div = w
                .normal_divergence_per_nm
                .clamp(-self.divergence_cap_per_nm, self.divergence_cap_per_nm);
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
}

/// Wall hydrodynamics in a cylindrical pore along z: the position-dependent
/// tensor of a sphere in a cylinder (`space::pore_hydro`), D = D0 (f_r e_r e_r
/// + f_θ e_θ e_θ + f_z e_z e_z), with the Itô drift (∇·D)_r along e_r.
#[derive(Debug, Clone)]
pub struct PoreTensor {
    /// Nodes [σ_z, σ_r, σ_θ, (∇·D)_r Δt] against the gap h = (R − a) − r.
    pub table: MobilityTable,
    /// Axis position (x, y), nm.
    pub axis_nm: [f64; 2],
    /// R − a, nm: the largest distance of the centre from the axis.
    pub open_nm: f64,
    /// Whether the Itô drift is applied.
    pub ito_drift: bool,
}

impl Displacement for PoreTensor {
    const SYMMETRIC: bool = false;
    const INTERLEAVE: bool = true;

    #[inline(always)]
    fn draw(&self, x: &[f64; 3], g: &mut ParticleRng) -> [f64; 3] {
        let xi = [standard_normal(g), standard_normal(g), standard_normal(g)];
        let (dx, dy) = (x[0] - self.axis_nm[0], x[1] - self.axis_nm[1]);
        let rho = (dx * dx + dy * dy).sqrt();
        let v = self.table.eval(self.open_nm - rho);
        // On the axis f_r = f_θ, so any radial direction serves.
        let (c, s) = if rho > 0.0 {
            (dx / rho, dy / rho)
        } else {
            (1.0, 0.0)
        };
        let drift = if self.ito_drift { v[3] } else { 0.0 };
        let radial = drift + v[1] * xi[0];
        let around = v[2] * xi[1];
        [
            radial * c - around * s,
            radial * s + around * c,
            v[0] * xi[2],
        ]
    }
}
