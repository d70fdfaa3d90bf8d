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
use crate::space::shape::{Membrane, Shape};

/// Intervals of each tabulated mobility.
pub const TABLE_INTERVALS: usize = 4096;

/// What a particle at `x` proposes to move by in one step.
pub trait Displacement: Sync {
    /// True when the proposal is a symmetric Gaussian of fixed width across
    /// the walls (a drift along a pore's axis leaves it so), so a fold at a
    /// curved wall can be corrected by its Metropolis ratio.
    fn symmetric(&self) -> bool;
    /// True when each step waits on the previous position (tables, square
    /// roots), so that interleaving several particles pays.
    const INTERLEAVE: bool;

    /// Draws the displacement, nm, of the particle at `x` (periodic images
    /// `n`) from its own stream.
    fn draw(&self, x: &[f64; 3], n: &[i32; 3], g: &mut ParticleRng) -> [f64; 3];
}

/// Free diffusion: √(2 D0 Δt)·ξ on every axis.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Isotropic {
    /// √(2 D0 Δt), nm.
    pub sigma_nm: f64,
}

impl Displacement for Isotropic {
    const INTERLEAVE: bool = false;

    #[inline(always)]
    fn symmetric(&self) -> bool {
        true
    }

    #[inline(always)]
    fn draw(&self, _x: &[f64; 3], _n: &[i32; 3], g: &mut ParticleRng) -> [f64; 3] {
        // x, y, z in order: every kernel draws the same numbers for the same particle.
        [
            self.sigma_nm * standard_normal(g),
            self.sigma_nm * standard_normal(g),
            self.sigma_nm * standard_normal(g),
        ]
    }
}

/// Mobility of one species against the wall gap h = d − a, tabulated on a
/// grid uniform in u = √(h/a). Each node holds `N` values; the wall tables
/// hold [σ∥, σ⊥, (D⊥ − D∥) Δt, (dD⊥/dd) Δt, flow Δt, wall force Δt] in nm,
/// nm, nm², nm, nm, nm (the particle's displacement per step by the flow,
/// lag included, and by the walls' soft force, D⊥F/k_BT Δt away from the
/// nearer wall).
#[derive(Debug, Clone)]
pub struct MobilityTable<const N: usize = 6> {
    inverse_radius: f64,
    inverse_du: f64,
    nodes: Nodes<N>,
}

/// Equally spaced table nodes in single precision (6e-8 relative, far below
/// the interpolation error: half the cache footprint for the hot loop),
/// read by linear interpolation; shared by the wall and the pore tables.
#[derive(Debug, Clone)]
struct Nodes<const N: usize>(Vec<[f32; N]>);

impl<const N: usize> Nodes<N> {
    /// Values at grid coordinate `t` (in intervals, clamped to `intervals`).
    #[inline(always)]
    fn at(&self, t: f64, intervals: usize) -> [f64; N] {
        let t = t.min(intervals as f64);
        let i = t as usize;
        let f = t - i as f64;
        let (a, b) = (&self.0[i], &self.0[i + 1]);
        std::array::from_fn(|k| {
            let (a, b) = (f64::from(a[k]), f64::from(b[k]));
            a + f * (b - a)
        })
    }
}

impl<const N: usize> MobilityTable<N> {
    /// Tabulates `f(h)` for h in [0, h_max].
    pub fn build(radius_nm: f64, h_max_nm: f64, f: impl Fn(f64) -> [f64; N]) -> Self {
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
            nodes: Nodes(nodes),
        }
    }

    /// Interpolated node values at gap `h_nm` (clamped to the table).
    #[inline(always)]
    pub fn eval(&self, h_nm: f64) -> [f64; N] {
        let u = (h_nm.max(0.0) * self.inverse_radius).sqrt();
        self.nodes.at(u * self.inverse_du, TABLE_INTERVALS)
    }
}

/// The deterministic part of a step besides the Itô drift: the species'
/// constant external force and the flow that carries it.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Drive {
    /// D0 Δt F/k_BT, nm: the drift per step a free particle gets from its
    /// constant force (Einstein: mobility D0/k_BT). Near walls each
    /// component is scaled by the local mobility D_k/D0.
    pub force_nm: [f64; 3],
    /// The flow, evaluated at the centre (without wall hydrodynamics the
    /// particle moves with the fluid there; with them the wall tables hold
    /// the lagging velocity instead).
    pub flow: Flow,
}

/// A steady flow, as the displacement per step it gives a particle.
#[derive(Debug, Clone, PartialEq, Default)]
pub enum Flow {
    /// No flow.
    #[default]
    Still,
    /// Uniform shear u_x = γ̇ (z − z_mid), z unwrapped (an unbounded linear
    /// shear flow, exact for particles that do not interact).
    Shear {
        /// γ̇ Δt.
        rate_dt: f64,
        /// z of the plane at rest, nm.
        z_mid_nm: f64,
        /// Box edge along z, nm (to unwrap z).
        lz_nm: f64,
    },
    /// Poiseuille flow along a cylinder's axis (z): u = 2V (1 − ρ²/R²).
    Tube {
        /// Axis (x, y), nm.
        axis_nm: [f64; 2],
        /// 2 V Δt, nm: the displacement per step on the axis.
        peak_nm: f64,
        /// 1/R², 1/nm².
        inv_r2: f64,
    },
    /// Plane Poiseuille flow along x between walls at z = 0 and w:
    /// u = 6V (z/w)(1 − z/w).
    Channel {
        /// 6 V Δt, nm.
        scale_nm: f64,
        /// 1/w, 1/nm.
        inv_w: f64,
    },
    /// Filtration through a membrane's pores, downward (from the top bath,
    /// the feed, to the bottom one, the permeate): Poiseuille flow in each
    /// pore, u = −k_i (R_i² − ρ²) ẑ within the slab, and none in the
    /// reservoirs (they are stirred baths: no concentration polarisation).
    Pores {
        /// The membrane.
        membrane: std::sync::Arc<Membrane>,
        /// k Δt, 1/nm: the same k for every pore under a pressure drop, or
        /// 2V/R_i² per pore under a given mean velocity V (`per_pore_mean`).
        k_dt: f64,
        /// True when `k_dt` is 2VΔt and each pore divides it by its R².
        per_pore_mean: bool,
    },
}

impl Flow {
    /// The fluid's displacement per step at `x` (images `n`), nm.
    #[inline(always)]
    pub fn step_at(&self, x: &[f64; 3], n: &[i32; 3]) -> [f64; 3] {
        match *self {
            Flow::Still => [0.0; 3],
            Flow::Shear {
                rate_dt,
                z_mid_nm,
                lz_nm,
            } => [
                rate_dt * (x[2] + f64::from(n[2]) * lz_nm - z_mid_nm),
                0.0,
                0.0,
            ],
            Flow::Tube {
                axis_nm,
                peak_nm,
                inv_r2,
            } => {
                let (dx, dy) = (x[0] - axis_nm[0], x[1] - axis_nm[1]);
                [0.0, 0.0, peak_nm * (1.0 - (dx * dx + dy * dy) * inv_r2)]
            }
            Flow::Channel { scale_nm, inv_w } => {
                let s = x[2] * inv_w;
                [scale_nm * s * (1.0 - s), 0.0, 0.0]
            }
            Flow::Pores {
                ref membrane,
                k_dt,
                per_pore_mean,
            } => {
                if x[2] < membrane.z_lo_nm || x[2] > membrane.z_hi_nm {
                    return [0.0; 3];
                }
                let Some((c, r)) = membrane.pore_at(x[0], x[1]) else {
                    return [0.0; 3];
                };
                let rho2 = (x[0] - c[0]).powi(2) + (x[1] - c[1]).powi(2);
                let r2 = r * r;
                let k = if per_pore_mean { k_dt / r2 } else { k_dt };
                [0.0, 0.0, -k * (r2 - rho2).max(0.0)]
            }
        }
    }

    /// True for a flow that moves nothing.
    pub fn is_still(&self) -> bool {
        matches!(self, Flow::Still)
    }
}

impl Drive {
    /// True when neither a force nor a flow acts.
    pub fn is_idle(&self) -> bool {
        self.force_nm == [0.0; 3] && self.flow.is_still()
    }
}

/// Free diffusion carried by a drive: √(2 D0 Δt)·ξ plus the force's drift
/// and the fluid's displacement at the centre.
#[derive(Debug, Clone, PartialEq)]
pub struct Driven {
    /// √(2 D0 Δt), nm.
    pub sigma_nm: f64,
    /// Force and flow.
    pub drive: Drive,
}

impl Displacement for Driven {
    const INTERLEAVE: bool = false;

    #[inline(always)]
    fn symmetric(&self) -> bool {
        // Drifts along z (a pore's axis) leave the move across the wall symmetric.
        self.drive.force_nm[0] == 0.0
            && self.drive.force_nm[1] == 0.0
            && matches!(
                self.drive.flow,
                Flow::Still | Flow::Tube { .. } | Flow::Pores { .. }
            )
    }

    #[inline(always)]
    fn draw(&self, x: &[f64; 3], n: &[i32; 3], g: &mut ParticleRng) -> [f64; 3] {
        let u = self.drive.flow.step_at(x, n);
        let f = &self.drive.force_nm;
        [
            self.sigma_nm * standard_normal(g) + f[0] + u[0],
            self.sigma_nm * standard_normal(g) + f[1] + u[1],
            self.sigma_nm * standard_normal(g) + f[2] + u[2],
        ]
    }
}

/// Free diffusion with the soft force of fixed spheres and fibres:
/// √(2 D0 Δt)·ξ + D0Δt F(x)/k_BT, F summed over the bodies within the
/// cut-off (`space::soft`), plus the species' constant force's drift. The
/// normals are drawn as by [`Isotropic`], so a zero field moves as it does.
#[derive(Debug, Clone)]
pub struct SoftBodies {
    /// √(2 D0 Δt), nm.
    pub sigma_nm: f64,
    /// D0 Δt F/k_BT of the constant force, nm.
    pub force_nm: [f64; 3],
    /// The bodies' field, scaled to the drift per step (nm).
    pub field: std::sync::Arc<crate::space::soft::SoftField>,
}

impl Displacement for SoftBodies {
    const INTERLEAVE: bool = true;

    #[inline(always)]
    fn symmetric(&self) -> bool {
        false
    }

    #[inline(always)]
    fn draw(&self, x: &[f64; 3], _n: &[i32; 3], g: &mut ParticleRng) -> [f64; 3] {
        let noise = [
            self.sigma_nm * standard_normal(g),
            self.sigma_nm * standard_normal(g),
            self.sigma_nm * standard_normal(g),
        ];
        let f = self.field.force(x);
        std::array::from_fn(|k| noise[k] + self.force_nm[k] + f[k])
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
    /// The species' force drift D0 Δt F/k_BT, nm, scaled here by D∥/D0 and D⊥/D0.
    pub force_nm: [f64; 3],
    /// 1/σ0² = 1/(2 D0 Δt), 1/nm²: turns σ_k² into D_k/D0.
    pub inverse_variance: f64,
    /// Whether the table's flow column (along x) is applied.
    pub flowing: bool,
    /// Whether the table's wall-force column is applied.
    pub potential: bool,
}

impl Displacement for PlanarWalls {
    const INTERLEAVE: bool = true;

    #[inline(always)]
    fn symmetric(&self) -> bool {
        false
    }

    #[inline(always)]
    fn draw(&self, x: &[f64; 3], _n: &[i32; 3], g: &mut ParticleRng) -> [f64; 3] {
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
        let mut d = [
            v[0] * standard_normal(g),
            v[0] * standard_normal(g),
            drift + v[1] * standard_normal(g),
        ];
        if self.flowing {
            d[0] += v[4];
        }
        if self.potential {
            d[2] += away * v[5];
        }
        if self.force_nm != [0.0; 3] {
            let (par, perp) = (
                v[0] * v[0] * self.inverse_variance,
                v[1] * v[1] * self.inverse_variance,
            );
            d[0] += par * self.force_nm[0];
            d[1] += par * self.force_nm[1];
            d[2] += perp * self.force_nm[2];
        }
        d
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
    /// The species' force drift D0 Δt F/k_BT, nm, scaled by D∥/D0 along
    /// the wall and D⊥/D0 across it.
    pub force_nm: [f64; 3],
    /// 1/σ0², 1/nm².
    pub inverse_variance: f64,
    /// Whether the walls exert a soft force (the table's last column, along the normal).
    pub potential: bool,
}

impl Displacement for NearestWall {
    const INTERLEAVE: bool = true;

    #[inline(always)]
    fn symmetric(&self) -> bool {
        false
    }

    #[inline(always)]
    fn draw(&self, x: &[f64; 3], _n: &[i32; 3], g: &mut ParticleRng) -> [f64; 3] {
        let xi = [standard_normal(g), standard_normal(g), standard_normal(g)];
        let w = self.shape.nearest_wall(x);
        let v = self.table.eval(w.distance_nm - self.radius_nm);
        let n = w.normal;
        let along_normal = xi[0] * n[0] + xi[1] * n[1] + xi[2] * n[2];
        let mut drift = if self.ito_drift {
            let div = w
                .normal_divergence_per_nm
                .clamp(-self.divergence_cap_per_nm, self.divergence_cap_per_nm);
            v[3] + v[2] * div
        } else {
            0.0
        };
        if self.potential {
            // −∇U(d) = F(d) n with n = ∇d: a gradient field, so the equilibrium is exp(−U(d)/k_BT).
            drift += v[5];
        }
        // D^½ ξ = σ∥ ξ + (σ⊥ − σ∥)(ξ·n) n, then the drift along n.
        let normal_part = (v[1] - v[0]) * along_normal + drift;
        let mut d = [
            v[0] * xi[0] + normal_part * n[0],
            v[0] * xi[1] + normal_part * n[1],
            v[0] * xi[2] + normal_part * n[2],
        ];
        let f = &self.force_nm;
        if *f != [0.0; 3] {
            // (D∥ (I − n n) + D⊥ n n) F / D0.
            let (par, perp) = (
                v[0] * v[0] * self.inverse_variance,
                v[1] * v[1] * self.inverse_variance,
            );
            let f_n = f[0] * n[0] + f[1] * n[1] + f[2] * n[2];
            for k in 0..3 {
                d[k] += par * f[k] + (perp - par) * f_n * n[k];
            }
        }
        d
    }
}

/// Intervals of a pore's radial table (uniform in ρ², fine enough that the
/// √h behaviour next to the wall falls inside the first interval, h < (R − a)/8192·2).
pub const RADIAL_INTERVALS: usize = 8192;

/// One species' mobility in a pore tabulated against ρ² (uniform), so the
/// step needs neither a square root nor a table in √h: values are even in
/// ρ and smooth in ρ² on the axis, and the grid is uniform in the gap h
/// next to the wall.
#[derive(Debug, Clone)]
pub struct RadialTable<const N: usize> {
    inverse_step: f64,
    nodes: Nodes<N>,
}

impl<const N: usize> RadialTable<N> {
    /// Tabulates `f(ρ)` for ρ in [0, ρ_max] on a grid uniform in ρ².
    pub fn build(rho_max_nm: f64, f: impl Fn(f64) -> [f64; N]) -> Self {
        let step = rho_max_nm * rho_max_nm / RADIAL_INTERVALS as f64;
        let nodes = (0..=RADIAL_INTERVALS + 1)
            .map(|i| f((i as f64 * step).sqrt().min(rho_max_nm)).map(|v| v as f32))
            .collect();
        Self {
            inverse_step: 1.0 / step,
            nodes: Nodes(nodes),
        }
    }

    /// Interpolated values at ρ² = `rho2_nm2` (clamped to the table).
    #[inline(always)]
    pub fn eval(&self, rho2_nm2: f64) -> [f64; N] {
        self.nodes
            .at(rho2_nm2 * self.inverse_step, RADIAL_INTERVALS)
    }
}

/// Wall hydrodynamics in a cylindrical pore along z: the position-dependent
/// tensor of a sphere in a cylinder (`space::pore_hydro`), D = D0 (f_r e_r e_r
/// + f_θ e_θ e_θ + f_z e_z e_z), with the Itô drift (∇·D)_r along e_r.
///
/// Across the axis the step is D^½ξ = σ_θ ξ + (σ_r − σ_θ)(ξ·d) d/ρ² with
/// d = (x − x_axis, y − y_axis), and the drift is (drift_r/ρ)·d: no square
/// root, one division.
#[derive(Debug, Clone)]
pub struct PoreTensor {
    /// Nodes [σ_z, σ_r − σ_θ, σ_θ, (∇·D)_r Δt/ρ, U Δt, f_r F_r Δt D0/(k_BT ρ)]
    /// against ρ², U the particle's axial velocity in the flow and F_r the
    /// walls' soft force along e_r (σ in nm, the drifts over ρ dimensionless).
    pub table: RadialTable<6>,
    /// Axis position (x, y), nm.
    pub axis_nm: [f64; 2],
    /// Whether the Itô drift is applied.
    pub ito_drift: bool,
    /// The species' force drift D0 Δt F/k_BT, nm, scaled by f_r, f_θ, f_z.
    pub force_nm: [f64; 3],
    /// 1/σ0², 1/nm².
    pub inverse_variance: f64,
    /// Whether the table's flow column is applied.
    pub flowing: bool,
    /// Whether the table's wall-force column is applied.
    pub potential: bool,
}

impl Displacement for PoreTensor {
    const INTERLEAVE: bool = true;

    #[inline(always)]
    fn symmetric(&self) -> bool {
        false
    }

    #[inline(always)]
    fn draw(&self, x: &[f64; 3], _n: &[i32; 3], g: &mut ParticleRng) -> [f64; 3] {
        let xi = [standard_normal(g), standard_normal(g), standard_normal(g)];
        let (dx, dy) = (x[0] - self.axis_nm[0], x[1] - self.axis_nm[1]);
        let rho2 = dx * dx + dy * dy;
        let v = self.table.eval(rho2);
        // On the axis σ_r = σ_θ, so the projection term vanishes there.
        let inverse_rho2 = if rho2 > 0.0 { 1.0 / rho2 } else { 0.0 };
        let along = (xi[0] * dx + xi[1] * dy) * inverse_rho2 * v[1];
        let mut drift = if self.ito_drift { v[3] } else { 0.0 };
        if self.potential {
            drift += v[5];
        }
        let radial = along + drift;
        let mut d = [
            v[2] * xi[0] + radial * dx,
            v[2] * xi[1] + radial * dy,
            v[0] * xi[2],
        ];
        if self.flowing {
            d[2] += v[4];
        }
        let f = &self.force_nm;
        if *f != [0.0; 3] {
            // (f_θ I + (f_r − f_θ) e_r e_r) F across, f_z F_z along.
            let w = self.inverse_variance;
            let (s_r, s_t) = (v[1] + v[2], v[2]);
            let (f_r, f_t) = (s_r * s_r * w, s_t * s_t * w);
            let proj = (f[0] * dx + f[1] * dy) * inverse_rho2 * (f_r - f_t);
            d[0] += f_t * f[0] + proj * dx;
            d[1] += f_t * f[1] + proj * dy;
            d[2] += v[0] * v[0] * w * f[2];
        }
        d
    }
}
