//! Confining geometries: one plane wall, a slit, an infinitely long
//! cylindrical pore, and a membrane slab pierced by cylindrical pores between
//! two reservoirs.
//!
//! Every geometry lives in the box frame with its confining direction along
//! z (the cylinder's axis is z), and answers three questions:
//! - [`Shape::allows`]: may a sphere of radius a have its centre here?
//!   Walls are hard, so the centre keeps at least a from every wall.
//! - [`Shape::reflect`]: fold a centre that stepped too close back inside by
//!   mirroring it in the plane tangent to the excluded surface (specular
//!   reflection of the particle surface; exact at plane walls and, being a
//!   radial fold, at the cylinder).
//! - [`Shape::nearest_wall`]: distance, unit normal and normal divergence of
//!   the nearest wall, which the hydrodynamic corrections need.
//!
//! The layout of each kind in the box:
//! - `plane_wall`: the wall is the face z = 0; the face z = L_z is a
//!   reflecting lid with no hydrodynamic effect; x, y periodic.
//! - `slit`: walls are the faces z = 0 and z = L_z (gap W = L_z, half-width
//!   h = W/2); x, y periodic.
//! - `cylinder`: axis along z through the middle of the box cross-section,
//!   periodic along z (an infinitely long pore); x, y walled.
//! - `membrane`: a slab of thickness L centred in z, pierced along z by
//!   cylindrical pores (a square arrangement or a CSV file), with a reservoir
//!   above and below; x, y periodic; the faces z = 0 and z = L_z are
//!   fixed-concentration baths (see `confined`).

use std::path::PathBuf;

/// Largest number of pores in one membrane (memory and lookup grid bound).
pub const MAX_PORES: usize = 1_000_000;

/// Avogadro constant, 1/mol, exact since the 2019 SI redefinition.
pub const AVOGADRO_PER_MOL: f64 = 6.022_140_76e23;

/// Converts a concentration in mol/m³ to particles per nm³.
pub fn mol_per_m3_to_per_nm3(c_mol_per_m3: f64) -> f64 {
    c_mol_per_m3 * AVOGADRO_PER_MOL * 1e-27
}

/// Converts a number density in particles per nm³ to mol/m³.
pub fn per_nm3_to_mol_per_m3(n_per_nm3: f64) -> f64 {
    n_per_nm3 * 1e27 / AVOGADRO_PER_MOL
}

/// One cylindrical pore through a membrane, axis along z.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Pore {
    /// Axis position (x, y) in nm, inside the box cross-section.
    pub centre_nm: [f64; 2],
    /// Radius, nm.
    pub radius_nm: f64,
}

/// Where a membrane's pores came from.
#[derive(Debug, Clone, PartialEq)]
pub enum PoreLayout {
    /// A square arrangement: `pores_x × pores_y` equal pores, one in the
    /// middle of each cell of the box cross-section.
    Arranged {
        /// Pores along x.
        pores_x: usize,
        /// Pores along y.
        pores_y: usize,
    },
    /// Read from a CSV of `x_nm,y_nm,radius_nm`.
    File {
        /// The CSV path as resolved against the scenario's folder.
        path: PathBuf,
    },
}

/// A membrane slab with cylindrical pores, between two reservoirs.
#[derive(Debug, Clone, PartialEq)]
pub struct Membrane {
    /// Box cross-section [L_x, L_y], nm (periodic).
    pub lateral_nm: [f64; 2],
    /// Box height L_z, nm: the baths sit at z = 0 and z = L_z.
    pub height_nm: f64,
    /// Lower face of the slab, nm.
    pub z_lo_nm: f64,
    /// Upper face of the slab, nm.
    pub z_hi_nm: f64,
    /// The pores.
    pub pores: Vec<Pore>,
    /// How the pores were given.
    pub layout: PoreLayout,
    /// Concentration of the bath at z = L_z (the top reservoir), mol/m³.
    pub top_concentration_mol_per_m3: f64,
    /// Concentration of the bath at z = 0 (the bottom reservoir), mol/m³.
    pub bottom_concentration_mol_per_m3: f64,
    pub grid: PoreGrid,
}

impl Membrane {
    /// Slab thickness L (the pore length), nm.
    pub fn thickness_nm(&self) -> f64 {
        self.z_hi_nm - self.z_lo_nm
    }

    /// Depth of each reservoir from its bath face to the slab face, nm.
    pub fn reservoir_depth_nm(&self) -> f64 {
        self.z_lo_nm
    }

    /// Mid-plane of the slab, where net crossings are counted, nm.
    pub fn mid_plane_nm(&self) -> f64 {
        0.5 * (self.z_lo_nm + self.z_hi_nm)
    }

    /// Cross-section area of the box, nm².
    pub fn area_nm2(&self) -> f64 {
        self.lateral_nm[0] * self.lateral_nm[1]
    }

    /// The spacing of pores arranged on a square lattice (`pores_x` by
    /// `pores_y` with equal spacings along x and y), nm; `None` otherwise.
    pub fn square_spacing_nm(&self) -> Option<f64> {
        match self.layout {
            PoreLayout::Arranged { pores_x, pores_y }
                if (self.lateral_nm[0] / pores_x as f64 - self.lateral_nm[1] / pores_y as f64)
                    .abs()
                    < 1e-9 =>
            {
                Some(self.lateral_nm[0] / pores_x as f64)
            }
            _ => None,
        }
    }

    /// Porosity ε: open pore area over membrane area.
    pub fn porosity(&self) -> f64 {
        self.pores
            .iter()
            .map(|p| std::f64::consts::PI * p.radius_nm * p.radius_nm)
            .sum::<f64>()
            / self.area_nm2()
    }

    /// Total pore volume Σ π r² L, nm³.
    pub fn pore_volume_nm3(&self) -> f64 {
        self.porosity() * self.area_nm2() * self.thickness_nm()
    }

    /// Steric partition coefficient of the membrane for radius a: the
    /// centre-accessible pore area over the pore area, Σ (r − a)² / Σ r²
    /// (exact; (1 − λ)² for equal pores, REFERENCES.md).
    pub fn steric_partition(&self, radius_nm: f64) -> f64 {
        let open: f64 = self
            .pores
            .iter()
            .map(|p| (p.radius_nm - radius_nm).max(0.0).powi(2))
            .sum();
        let all: f64 = self.pores.iter().map(|p| p.radius_nm * p.radius_nm).sum();
        open / all
    }

    /// Partition coefficient of the pores for radius a with a soft wall
    /// energy `beta_u(h)` (in k_BT at gap h to the nearest wall):
    /// Σ ∫₀^(r−a) exp(−βU(r − a − ρ)) 2ρ dρ / Σ r² (exact for the step's
    /// nearest-wall model, in which the pore wall is the nearest solid
    /// everywhere inside the slab; midpoint rule on 20 000 intervals).
    pub fn boltzmann_partition(&self, radius_nm: f64, beta_u: impl Fn(f64) -> f64) -> f64 {
        let m = 20_000;
        let open: f64 = self
            .pores
            .iter()
            .map(|p| {
                let top = (p.radius_nm - radius_nm).max(0.0);
                let dr = top / m as f64;
                (0..m)
                    .map(|k| {
                        let rho = (k as f64 + 0.5) * dr;
                        (-beta_u(top - rho)).exp() * 2.0 * rho * dr
                    })
                    .sum::<f64>()
            })
            .sum();
        let all: f64 = self.pores.iter().map(|p| p.radius_nm * p.radius_nm).sum();
        open / all
    }

    /// The pore whose cross-section contains (x, y), if any, as
    /// (centre of the nearest image, radius); (x, y) wrapped into the box.
    #[inline(always)]
    pub fn pore_at(&self, x: f64, y: f64) -> Option<([f64; 2], f64)> {
        self.grid.containing(x, y)
    }

    /// True when (x, y, z) lies inside a pore, within the slab.
    pub fn in_pore(&self, p: &[f64; 3]) -> bool {
        p[2] >= self.z_lo_nm && p[2] <= self.z_hi_nm && self.pore_at(p[0], p[1]).is_some()
    }

    fn nearest_wall(&self, p: &[f64; 3]) -> WallContact {
        let [x, y, z] = *p;
        if let Some((c, r)) = self.grid.containing(x, y) {
            let (dx, dy) = (x - c[0], y - c[1]);
            let rho = (dx * dx + dy * dy).sqrt();
            // On the axis the radial direction is arbitrary; any choice is consistent.
            let (ex, ey) = if rho > 0.0 {
                (dx / rho, dy / rho)
            } else {
                (1.0, 0.0)
            };
            let dr = r - rho;
            if z > self.z_hi_nm || z < self.z_lo_nm {
                // Above or below a pore mouth: the nearest solid is the rim circle.
                let dz = if z > self.z_hi_nm {
                    z - self.z_hi_nm
                } else {
                    z - self.z_lo_nm
                };
                let d = (dz * dz + dr * dr).sqrt();
                if d == 0.0 {
                    return WallContact {
                        distance_nm: 0.0,
                        normal: [0.0, 0.0, dz.signum()],
                        normal_divergence_per_nm: 0.0,
                        feature: Feature::Rim { axis_nm: c },
                    };
                }
                // Laplacian of the distance to a circle of radius r: 1/d + (ρ − r)/(ρ d).
                let div = 1.0 / d
                    + if rho > 0.0 {
                        -dr / (rho * d)
                    } else {
                        f64::NEG_INFINITY
                    };
                WallContact {
                    distance_nm: d,
                    normal: [-dr * ex / d, -dr * ey / d, dz / d],
                    normal_divergence_per_nm: div,
                    feature: Feature::Rim { axis_nm: c },
                }
            } else {
                let div = if rho > 0.0 {
                    -1.0 / rho
                } else {
                    f64::NEG_INFINITY
                };
                WallContact {
                    distance_nm: dr,
                    normal: [-ex, -ey, 0.0],
                    normal_divergence_per_nm: div,
                    feature: Feature::Cylinder { axis_nm: c },
                }
            }
        } else if z >= self.z_hi_nm {
            WallContact {
                distance_nm: z - self.z_hi_nm,
                normal: [0.0, 0.0, 1.0],
                normal_divergence_per_nm: 0.0,
                feature: Feature::Plane,
            }
        } else if z <= self.z_lo_nm {
            WallContact {
                distance_nm: self.z_lo_nm - z,
                normal: [0.0, 0.0, -1.0],
                normal_divergence_per_nm: 0.0,
                feature: Feature::Plane,
            }
        } else {
            // Inside the solid: the nearest way out is a face or a pore wall.
            let up = self.z_hi_nm - z;
            let down = z - self.z_lo_nm;
            let mut best = if up <= down {
                WallContact {
                    distance_nm: -up,
                    normal: [0.0, 0.0, 1.0],
                    normal_divergence_per_nm: 0.0,
                    feature: Feature::Plane,
                }
            } else {
                WallContact {
                    distance_nm: -down,
                    normal: [0.0, 0.0, -1.0],
                    normal_divergence_per_nm: 0.0,
                    feature: Feature::Plane,
                }
            };
            if let Some((c, r)) = self.grid.nearest_outside(x, y) {
                let (dx, dy) = (x - c[0], y - c[1]);
                let rho = (dx * dx + dy * dy).sqrt();
                let inside_by = rho - r;
                if inside_by < -best.distance_nm {
                    best = WallContact {
                        distance_nm: -inside_by,
                        normal: [-dx / rho, -dy / rho, 0.0],
                        normal_divergence_per_nm: -1.0 / rho,
                        feature: Feature::Cylinder { axis_nm: c },
                    };
                }
            }
            best
        }
    }
}

/// The nearest wall seen from a centre: what hydrodynamic corrections and
/// reflections need.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WallContact {
    /// Distance from the centre to the wall surface, nm; negative when the
    /// centre is inside the solid.
    pub distance_nm: f64,
    /// Unit normal of the wall at its nearest point, pointing into the fluid.
    pub normal: [f64; 3],
    /// Divergence ∇·n of the normal field, 1/nm (0 at a plane, −1/ρ inside a
    /// cylinder of which ρ is the distance from the axis); it enters the Itô
    /// drift of the nearest-wall approximation. −∞ on a pore axis, where the
    /// normal is undefined.
    pub normal_divergence_per_nm: f64,
    /// Which kind of surface it is.
    pub feature: Feature,
}

/// The kind of wall surface nearest to a point, which fixes how volume
/// changes along its normal.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Feature {
    /// A plane.
    Plane,
    /// The wall of a cylinder along z with this axis (x, y), nm.
    Cylinder {
        /// Axis position, nm.
        axis_nm: [f64; 2],
    },
    /// The rim circle of a pore mouth around this axis (x, y), nm.
    Rim {
        /// Axis position, nm.
        axis_nm: [f64; 2],
    },
}

impl Feature {
    /// Volume element factor at `p`, a distance `d` from this surface
    /// along its normal, up to a constant: 1 at a plane, the distance from
    /// the axis at a cylinder, d times the distance from the axis at a rim
    /// circle (level sets are planes, cylinders and tori).
    #[inline(always)]
    pub fn area_factor(&self, p: &[f64; 3], d: f64) -> f64 {
        match self {
            Feature::Plane => 1.0,
            Feature::Cylinder { axis_nm } => (p[0] - axis_nm[0]).hypot(p[1] - axis_nm[1]),
            Feature::Rim { axis_nm } => d * (p[0] - axis_nm[0]).hypot(p[1] - axis_nm[1]),
        }
    }
}

/// The confining shape.
#[derive(Debug, Clone, PartialEq)]
pub enum Shape {
    /// A wall at z = 0 and a reflecting lid without hydrodynamic effect at z = `height_nm`.
    PlaneWall {
        /// Box height L_z, nm.
        height_nm: f64,
    },
    /// Walls at z = 0 and z = `width_nm`.
    Slit {
        /// Gap W between the walls, nm.
        width_nm: f64,
    },
    /// A cylinder of radius `radius_nm` along z through `axis_nm`, periodic along z.
    Cylinder {
        /// Pore radius, nm.
        radius_nm: f64,
        /// Axis position (x, y), nm.
        axis_nm: [f64; 2],
    },
    /// A membrane with pores between two reservoirs.
    Membrane(Box<Membrane>),
}

impl Shape {
    /// Short name, as in `geometry.kind`.
    pub fn kind(&self) -> &'static str {
        match self {
            Shape::PlaneWall { .. } => "plane_wall",
            Shape::Slit { .. } => "slit",
            Shape::Cylinder { .. } => "cylinder",
            Shape::Membrane(_) => "membrane",
        }
    }

    /// Which box axes are periodic for this shape.
    pub fn periodic(&self) -> [bool; 3] {
        match self {
            Shape::PlaneWall { .. } | Shape::Slit { .. } | Shape::Membrane(_) => {
                [true, true, false]
            }
            Shape::Cylinder { .. } => [false, false, true],
        }
    }

    /// True when a sphere of radius `radius_nm` may have its centre at `p`
    /// (box coordinates, periodic axes wrapped): every wall at least a away.
    /// For a membrane the bath faces are open and not tested here.
    #[inline(always)]
    pub fn allows(&self, p: &[f64; 3], radius_nm: f64) -> bool {
        match self {
            Shape::PlaneWall { height_nm } => p[2] >= radius_nm && p[2] <= height_nm - radius_nm,
            Shape::Slit { width_nm } => p[2] >= radius_nm && p[2] <= width_nm - radius_nm,
            Shape::Cylinder {
                radius_nm: r,
                axis_nm,
            } => {
                let (dx, dy) = (p[0] - axis_nm[0], p[1] - axis_nm[1]);
                let open = r - radius_nm;
                // A sphere wider than the pore fits nowhere (the square alone would hide that).
                open >= 0.0 && dx * dx + dy * dy <= open * open
            }
            Shape::Membrane(m) => m.nearest_wall(p).distance_nm >= radius_nm,
        }
    }

    /// Nearest wall from `p`. For the plane wall the lid is not a wall (it
    /// has no hydrodynamic effect); for the slit the nearer of the two.
    #[inline(always)]
    pub fn nearest_wall(&self, p: &[f64; 3]) -> WallContact {
        match self {
            Shape::PlaneWall { .. } => WallContact {
                distance_nm: p[2],
                normal: [0.0, 0.0, 1.0],
                normal_divergence_per_nm: 0.0,
                feature: Feature::Plane,
            },
            Shape::Slit { width_nm } => {
                if p[2] <= 0.5 * width_nm {
                    WallContact {
                        distance_nm: p[2],
                        normal: [0.0, 0.0, 1.0],
                        normal_divergence_per_nm: 0.0,
                        feature: Feature::Plane,
                    }
                } else {
                    WallContact {
                        distance_nm: width_nm - p[2],
                        normal: [0.0, 0.0, -1.0],
                        normal_divergence_per_nm: 0.0,
                        feature: Feature::Plane,
                    }
                }
            }
            Shape::Cylinder { radius_nm, axis_nm } => {
                let (dx, dy) = (p[0] - axis_nm[0], p[1] - axis_nm[1]);
                let rho = (dx * dx + dy * dy).sqrt();
                let (ex, ey) = if rho > 0.0 {
                    (dx / rho, dy / rho)
                } else {
                    (1.0, 0.0)
                };
                let div = if rho > 0.0 {
                    -1.0 / rho
                } else {
                    f64::NEG_INFINITY
                };
                WallContact {
                    distance_nm: radius_nm - rho,
                    normal: [-ex, -ey, 0.0],
                    normal_divergence_per_nm: div,
                    feature: Feature::Cylinder { axis_nm: *axis_nm },
                }
            }
            Shape::Membrane(m) => m.nearest_wall(p),
        }
    }

    /// Folds a centre that came closer than `radius_nm` to a wall back
    /// inside by mirroring it in the plane tangent to the excluded surface
    /// at the nearest point: p' = p + 2 (a − d) n. Returns `None` when one
    /// mirror does not bring it back (a step longer than the local feature,
    /// e.g. at a pore rim), so that the caller rejects the move.
    #[inline(always)]
    pub fn reflect(&self, p: &[f64; 3], radius_nm: f64) -> Option<[f64; 3]> {
        match self {
            Shape::PlaneWall { height_nm } => Some([
                p[0],
                p[1],
                crate::space::sim_box::reflect(p[2], radius_nm, height_nm - radius_nm),
            ]),
            Shape::Slit { width_nm } => Some([
                p[0],
                p[1],
                crate::space::sim_box::reflect(p[2], radius_nm, width_nm - radius_nm),
            ]),
            _ => {
                let w = self.nearest_wall(p);
                let push = 2.0 * (radius_nm - w.distance_nm);
                let q = [
                    p[0] + push * w.normal[0],
                    p[1] + push * w.normal[1],
                    p[2] + push * w.normal[2],
                ];
                let ok = match self {
                    // A radial fold may cross the axis when the step is longer than the pore.
                    Shape::Cylinder { .. } => self.allows(&q, radius_nm),
                    Shape::Membrane(m) => {
                        q[2] > 0.0
                            && q[2] < m.height_nm
                            && q[0] >= 0.0
                            && q[0] < m.lateral_nm[0]
                            && q[1] >= 0.0
                            && q[1] < m.lateral_nm[1]
                            && self.allows(&q, radius_nm)
                    }
                    _ => true,
                };
                ok.then_some(q)
            }
        }
    }

    /// The mirror image M(p) = p + 2 (a − d) n of `p` in the excluded
    /// surface of its nearest wall, with the volume factors at p and M(p).
    #[inline(always)]
    fn mirror(&self, p: &[f64; 3], radius_nm: f64) -> ([f64; 3], f64, f64) {
        let w = self.nearest_wall(p);
        let push = 2.0 * (radius_nm - w.distance_nm);
        let q = [
            p[0] + push * w.normal[0],
            p[1] + push * w.normal[1],
            p[2] + push * w.normal[2],
        ];
        (
            q,
            w.feature.area_factor(p, w.distance_nm),
            w.feature.area_factor(&q, 2.0 * radius_nm - w.distance_nm),
        )
    }

    /// A reflection that keeps the uniform density exactly stationary, for
    /// a symmetric Gaussian proposal of rms `sigma_nm` per axis from the
    /// allowed centre `x` to the excluded point `z`: returns the mirror
    /// image y = M(z) and the Metropolis acceptance ratio
    /// `g(M(x) − y) J(x) / (g(z − x) J(y))`, J the volume Jacobian of the
    /// mirror. Accepting y with probability min(1, ratio) (else staying)
    /// balances every fold with its reverse; a plane mirror gives exactly 1,
    /// at a curved wall it removes the fold's O(σ/R) distortion of the
    /// density next to it (Metropolis et al. 1953, detailed balance). `None` when y is not
    /// allowed either.
    #[inline(always)]
    pub fn fold(
        &self,
        x: &[f64; 3],
        z: &[f64; 3],
        radius_nm: f64,
        sigma_nm: f64,
    ) -> Option<([f64; 3], f64)> {
        let y = self.reflect(z, radius_nm)?;
        if matches!(self, Shape::PlaneWall { .. } | Shape::Slit { .. }) {
            return Some((y, 1.0));
        }
        let (mx, ax, amx) = self.mirror(x, radius_nm);
        let (_, az, ay) = self.mirror(z, radius_nm);
        let d2 = |u: &[f64; 3], v: &[f64; 3]| {
            (u[0] - v[0]).powi(2) + (u[1] - v[1]).powi(2) + (u[2] - v[2]).powi(2)
        };
        let log_g = -(d2(&mx, &y) - d2(z, x)) / (2.0 * sigma_nm * sigma_nm);
        // J(x) = A(M x)/A(x), J(y) = A(M y)/A(y) = A(z)/A(y).
        let jacobians = (amx / ax) * (ay / az);
        let ratio = log_g.exp() * jacobians;
        Some((y, if ratio.is_finite() { ratio } else { 0.0 }))
    }

    /// The largest distance the nearest wall can be from an allowed centre, nm.
    pub fn max_wall_distance_nm(&self) -> f64 {
        match self {
            Shape::PlaneWall { height_nm } => *height_nm,
            Shape::Slit { width_nm } => 0.5 * width_nm,
            Shape::Cylinder { radius_nm, .. } => *radius_nm,
            Shape::Membrane(m) => {
                let r_max = m.pores.iter().map(|p| p.radius_nm).fold(0.0, f64::max);
                let lateral = 0.5 * m.lateral_nm[0].hypot(m.lateral_nm[1]);
                (m.reservoir_depth_nm().hypot(lateral)).max(r_max)
            }
        }
    }

    /// Half-width (slit) or pore radius (cylinder, smallest membrane pore)
    /// that sets λ = a / size; `None` for one plane wall.
    pub fn confining_size_nm(&self) -> Option<f64> {
        match self {
            Shape::PlaneWall { .. } => None,
            Shape::Slit { width_nm } => Some(0.5 * width_nm),
            Shape::Cylinder { radius_nm, .. } => Some(*radius_nm),
            Shape::Membrane(m) => Some(
                m.pores
                    .iter()
                    .map(|p| p.radius_nm)
                    .fold(f64::INFINITY, f64::min),
            ),
        }
    }

    /// The narrowest gap a centre of radius a moves in, nm (for the step-length warning).
    pub fn smallest_feature_nm(&self, radius_nm: f64) -> f64 {
        match self {
            Shape::PlaneWall { .. } => radius_nm,
            Shape::Slit { width_nm } => radius_nm.min(width_nm - 2.0 * radius_nm),
            Shape::Cylinder { radius_nm: r, .. } => radius_nm.min(r - radius_nm),
            Shape::Membrane(m) => {
                let r_min = m
                    .pores
                    .iter()
                    .map(|p| p.radius_nm)
                    .fold(f64::INFINITY, f64::min);
                radius_nm.min(r_min - radius_nm)
            }
        }
    }

    /// Fraction of the box volume open to the centre of a sphere of radius a
    /// (exact for every shape here; used for placement and reports).
    pub fn open_fraction(&self, radius_nm: f64, edges_nm: &[f64; 3]) -> f64 {
        let volume = edges_nm[0] * edges_nm[1] * edges_nm[2];
        let a = radius_nm;
        match self {
            Shape::PlaneWall { height_nm } => (height_nm - 2.0 * a) / height_nm,
            Shape::Slit { width_nm } => (width_nm - 2.0 * a) / width_nm,
            Shape::Cylinder { radius_nm: r, .. } => {
                std::f64::consts::PI * (r - a).powi(2) * edges_nm[2] / volume
            }
            Shape::Membrane(m) => {
                // Reservoirs outside the dilated faces, plus pores; the rounded rims are
                // left out (a sliver of order a² per rim).
                let reservoirs = 2.0 * (m.reservoir_depth_nm() - a) * m.area_nm2();
                let pores: f64 = m
                    .pores
                    .iter()
                    .map(|p| std::f64::consts::PI * (p.radius_nm - a).powi(2))
                    .sum::<f64>()
                    * (m.thickness_nm() + 2.0 * a);
                (reservoirs + pores) / volume
            }
        }
    }
}

/// A pore (or a periodic image of one) listed in a lookup cell.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PoreItem {
    /// Axis position, nm.
    pub centre: [f64; 2],
    /// Radius, nm.
    pub radius: f64,
    /// Index in the pore list.
    pub index: u32,
}

/// Uniform 2D grid over the membrane cross-section listing, per cell, the
/// pores (and periodic images) whose disk widened by the largest pore
/// radius reaches into the cell: finds the pore containing a point in a few
/// comparisons, and the nearest pore wall from a point just inside the solid.
#[derive(Debug, Clone, PartialEq)]
pub struct PoreGrid {
    cells: [usize; 2],
    inverse_cell_nm: [f64; 2],
    starts: Vec<u32>,
    items: Vec<PoreItem>,
}

impl PoreGrid {
    pub fn build(pores: &[Pore], lateral: [f64; 2]) -> Self {
        let r_max = pores.iter().map(|p| p.radius_nm).fold(0.0, f64::max);
        let cells =
            [0, 1].map(|k| ((lateral[k] / (2.0 * r_max).max(1e-9)).floor() as usize).clamp(1, 512));
        let cell = [0, 1].map(|k| lateral[k] / cells[k] as f64);
        let margin = r_max;
        let mut lists: Vec<Vec<PoreItem>> = vec![Vec::new(); cells[0] * cells[1]];
        for (index, p) in pores.iter().enumerate() {
            for sx in [-1.0, 0.0, 1.0] {
                for sy in [-1.0, 0.0, 1.0] {
                    let c = [
                        p.centre_nm[0] + sx * lateral[0],
                        p.centre_nm[1] + sy * lateral[1],
                    ];
                    let reach = p.radius_nm + margin;
                    let span = [0, 1].map(|k| {
                        let lo = ((c[k] - reach) / cell[k]).floor().max(0.0) as i64;
                        let hi = ((c[k] + reach) / cell[k])
                            .floor()
                            .min(cells[k] as f64 - 1.0) as i64;
                        (lo, hi)
                    });
                    for ix in span[0].0..=span[0].1 {
                        for iy in span[1].0..=span[1].1 {
                            lists[iy as usize * cells[0] + ix as usize].push(PoreItem {
                                centre: c,
                                radius: p.radius_nm,
                                index: index as u32,
                            });
                        }
                    }
                }
            }
        }
        let mut starts = Vec::with_capacity(lists.len() + 1);
        let mut items = Vec::new();
        for l in lists {
            starts.push(items.len() as u32);
            items.extend(l);
        }
        starts.push(items.len() as u32);
        PoreGrid {
            cells,
            inverse_cell_nm: [1.0 / cell[0], 1.0 / cell[1]],
            starts,
            items,
        }
    }

    #[inline(always)]
    pub fn candidates(&self, x: f64, y: f64) -> &[PoreItem] {
        let ix = ((x * self.inverse_cell_nm[0]) as usize).min(self.cells[0] - 1);
        let iy = ((y * self.inverse_cell_nm[1]) as usize).min(self.cells[1] - 1);
        let c = iy * self.cells[0] + ix;
        &self.items[self.starts[c] as usize..self.starts[c + 1] as usize]
    }

    #[inline(always)]
    fn containing(&self, x: f64, y: f64) -> Option<([f64; 2], f64)> {
        for it in self.candidates(x, y) {
            let (dx, dy) = (x - it.centre[0], y - it.centre[1]);
            if dx * dx + dy * dy < it.radius * it.radius {
                return Some((it.centre, it.radius));
            }
        }
        None
    }

    fn nearest_outside(&self, x: f64, y: f64) -> Option<([f64; 2], f64)> {
        let mut best: Option<([f64; 2], f64, f64)> = None;
        for it in self.candidates(x, y) {
            let gap = (x - it.centre[0]).hypot(y - it.centre[1]) - it.radius;
            if best.is_none_or(|b| gap < b.2) {
                best = Some((it.centre, it.radius, gap));
            }
        }
        best.map(|b| (b.0, b.1))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn membrane(pores: Vec<Pore>) -> Membrane {
        let lateral = [40.0, 40.0];
        let grid = PoreGrid::build(&pores, lateral);
        Membrane {
            lateral_nm: lateral,
            height_nm: 100.0,
            z_lo_nm: 30.0,
            z_hi_nm: 70.0,
            pores,
            layout: PoreLayout::Arranged {
                pores_x: 1,
                pores_y: 1,
            },
            top_concentration_mol_per_m3: 1.0,
            bottom_concentration_mol_per_m3: 0.0,
            grid,
        }
    }

    /// Slow reference: distance from p to the solid by brute-force sampling of the slab surface.
    fn brute_distance(m: &Membrane, p: [f64; 3]) -> f64 {
        let mut best = f64::INFINITY;
        let inside = |x: f64, y: f64| {
            m.pores
                .iter()
                .any(|q| (x - q.centre_nm[0]).hypot(y - q.centre_nm[1]) < q.radius_nm)
        };
        // Points of the solid near p on a fine grid of (x, y, z) in the slab.
        let n = 160;
        for i in 0..=n {
            for j in 0..=n {
                let x = p[0] - 8.0 + 16.0 * i as f64 / n as f64;
                let y = p[1] - 8.0 + 16.0 * j as f64 / n as f64;
                if inside(x, y) {
                    continue;
                }
                let z = p[2].clamp(m.z_lo_nm, m.z_hi_nm);
                best =
                    best.min(((x - p[0]).powi(2) + (y - p[1]).powi(2) + (z - p[2]).powi(2)).sqrt());
            }
        }
        best
    }

    #[test]
    fn membrane_distance_matches_brute_force() {
        let m = membrane(vec![Pore {
            centre_nm: [20.0, 20.0],
            radius_nm: 6.0,
        }]);
        // Inside the pore, above a mouth (rim), above the face, just below the bottom.
        for p in [
            [22.0, 21.0, 50.0],
            [23.0, 20.0, 71.5],
            [19.0, 17.0, 73.0],
            [31.0, 20.0, 72.0],
            [20.5, 24.0, 28.0],
        ] {
            let d = m.nearest_wall(&p).distance_nm;
            let b = brute_distance(&m, p);
            // The brute force grid spacing is 0.1 nm: its distance errs by at most that.
            assert!((d - b).abs() < 0.1, "{p:?}: {d} vs brute force {b}");
        }
    }

    #[test]
    fn normals_point_into_the_fluid_and_reflection_restores_contact_distance() {
        let shape = Shape::Membrane(Box::new(membrane(vec![Pore {
            centre_nm: [20.0, 20.0],
            radius_nm: 6.0,
        }])));
        let a = 1.0;
        // A point 0.3 nm too close to the pore wall comes back 0.3 nm beyond contact.
        let p = [20.0 + 5.3, 20.0, 50.0];
        let q = shape.reflect(&p, a).unwrap();
        assert!((shape.nearest_wall(&q).distance_nm - 1.3).abs() < 1e-12);
        // Stepping a little into the solid from the pore mirrors back into the pore.
        let p = [20.0 + 6.2, 20.0, 50.0];
        let q = shape.reflect(&p, a).unwrap();
        assert!((q[0] - (20.0 + 5.0 - 1.2)).abs() < 1e-12, "{q:?}");
        // A centre near the face outside the pores goes straight up.
        let q = shape.reflect(&[5.0, 5.0, 70.4], a).unwrap();
        assert!((q[2] - 71.6).abs() < 1e-12);
    }

    #[test]
    fn normal_divergence_matches_finite_difference() {
        // ∇·n by central differences of the normal field, for the rim and the cylinder wall.
        let m = membrane(vec![Pore {
            centre_nm: [20.0, 20.0],
            radius_nm: 6.0,
        }]);
        for p in [[22.0, 21.0, 73.0], [21.0, 23.0, 50.0], [24.0, 18.5, 28.0]] {
            let h = 1e-5;
            let mut div = 0.0;
            for k in 0..3 {
                let mut plus = p;
                let mut minus = p;
                plus[k] += h;
                minus[k] -= h;
                div += (m.nearest_wall(&plus).normal[k] - m.nearest_wall(&minus).normal[k])
                    / (2.0 * h);
            }
            let analytic = m.nearest_wall(&p).normal_divergence_per_nm;
            assert!((div - analytic).abs() < 1e-5, "{p:?}: {div} vs {analytic}");
        }
    }

    #[test]
    fn periodic_images_are_found_across_the_box_edge() {
        let m = membrane(vec![Pore {
            centre_nm: [3.0, 20.0],
            radius_nm: 2.5,
        }]);
        // A point in the solid just past x = 40 ≡ 0 sees the pore through the periodic face.
        let w = m.nearest_wall(&[39.9, 20.0, 50.0]);
        assert!((w.distance_nm - -(0.6)).abs() < 1e-12, "{w:?}");
    }

    /// Runs point-like steps in `shape` with folds, plain or Metropolis-corrected, and returns
    /// the histogram of the open-space coordinate `coord` (uniform when the density is).
    fn fold_histogram(
        shape: &Shape,
        a: f64,
        sigma: f64,
        corrected: bool,
        start: [f64; 3],
        coord: impl Fn(&[f64; 3]) -> f64,
    ) -> Vec<u64> {
        use crate::base::rng::{standard_normal, ParticleRng};
        let mut hist = vec![0u64; 10];
        for k in 0..400u64 {
            let mut g = ParticleRng::for_particle(77, k);
            let mut x = start;
            for step in 0..20_000 {
                let z = [0, 1, 2].map(|i| x[i] + sigma * standard_normal(&mut g));
                if shape.allows(&z, a) {
                    x = z;
                } else if let Some((y, ratio)) = shape.fold(&x, &z, a, sigma) {
                    if !corrected || ratio >= 1.0 || g.uniform() < ratio {
                        x = y;
                    }
                }
                if step >= 2000 && step % 20 == 0 {
                    hist[((coord(&x) * 10.0) as usize).min(9)] += 1;
                }
            }
        }
        hist
    }

    #[test]
    fn corrected_folds_keep_the_density_uniform_at_curved_walls() {
        // A step of 0.15 of the open radius exaggerates the plain fold's bias next to the wall.
        let (r, a, sigma) = (3.0, 1.0, 0.3);
        let shape = Shape::Cylinder {
            radius_nm: r,
            axis_nm: [0.0, 0.0],
        };
        let coord = |p: &[f64; 3]| (p[0] * p[0] + p[1] * p[1]) / ((r - a) * (r - a));
        let plain = fold_histogram(&shape, a, sigma, false, [0.0, 0.0, 0.0], coord);
        let corrected = fold_histogram(&shape, a, sigma, true, [0.0, 0.0, 0.0], coord);
        let mean = |h: &[u64]| h.iter().sum::<u64>() as f64 / h.len() as f64;
        let (pm, cm) = (mean(&plain), mean(&corrected));
        println!("plain {plain:?}\ncorrected {corrected:?}");
        // The outermost tenth of the section (area coordinate ρ²): plain folds deplete it at this concave wall.
        let plain_edge = plain[9] as f64 / pm;
        let corrected_edge = corrected[9] as f64 / cm;
        // Samples are correlated over ~ (r − a)²/σ² = 44 steps; 20-step spacing, 360 000 samples per run:
        // the relative SE of one bin is about √(10 · 2.2 / 360 000) ≈ 0.8 %.
        assert!(
            plain_edge < 0.96,
            "the plain fold should distort the density at the wall: {plain_edge}"
        );
        assert!(
            (corrected_edge - 1.0).abs() < 0.04,
            "corrected fold: edge bin {corrected_edge} of the mean"
        );
    }

    #[test]
    fn open_fraction_of_simple_shapes_is_exact() {
        let edges = [30.0, 30.0, 50.0];
        let cyl = Shape::Cylinder {
            radius_nm: 10.0,
            axis_nm: [15.0, 15.0],
        };
        let f = cyl.open_fraction(2.0, &edges);
        assert!((f - std::f64::consts::PI * 64.0 / 900.0).abs() < 1e-15);
        let slit = Shape::Slit { width_nm: 50.0 };
        assert!((slit.open_fraction(5.0, &edges) - 0.8).abs() < 1e-15);
    }
}
