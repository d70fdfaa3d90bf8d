//! The soft force and energy of fixed spheres and fibres on one species,
//! summed over every body within a cut-off.
//!
//! Each pair is a sphere of radius a facing a sphere of radius b or a
//! cylinder of radius c, a [`WallPotential`] of the gap h (Derjaguin's
//! radius in the electrostatic prefactor, the sphere–sphere or
//! sphere–cylinder van der Waals form); the force acts along the line from
//! the obstacle's centre, or from the nearest point of the fibre's axis, to
//! the particle's centre. Bodies beyond the cut-off gap (where |U| falls
//! below a tolerance, [`WallPotential::range_nm`]) are left out, so the sum
//! runs over the candidates of an [`ObstacleGrid`] built with the particle's
//! radius grown by the cut-off. For equal spheres and for fibres the force
//! is tabulated against the squared centre distance r² (no square root, no
//! exponential in the step); spheres of several radii are evaluated directly.

use crate::space::bodies::{Fibres, Spheres};
use crate::space::neighbors::ObstacleGrid;
use crate::space::potentials::{BodyPotential, Facing, WallPotential};
use crate::space::SimBox;

/// The energy, in k_BT, below which a body's interaction is cut off (a
/// tolerance of common practice for truncated potentials; `check` prints the cut-off).
pub const CUTOFF_TOLERANCE_KT: f64 = 1e-3;
/// Intervals of each force table in r².
const TABLE_INTERVALS: usize = 8192;
/// Cell edge of the force grid over the grown reach: finer than the contact
/// grid's (a measured sweet spot: fewer candidates outside the cut-off).
const CELL_OVER_REACH: f64 = 0.25;

/// scale·F(r)/r against r², on a grid uniform in r² from contact to the cut-off.
#[derive(Debug, Clone)]
struct SquaredTable {
    r2_lo: f64,
    inverse_dr2: f64,
    /// A fixed length, so the index clamped in [`SquaredTable::at`] needs no bounds check.
    values: Box<[f64; TABLE_INTERVALS + 2]>,
}

impl SquaredTable {
    /// Tabulates `f(r)` for r from `lo` to `hi` (nm).
    fn build(lo: f64, hi: f64, f: impl Fn(f64) -> f64) -> Self {
        let (r2_lo, r2_hi) = (lo * lo, hi * hi);
        let dr2 = (r2_hi - r2_lo).max(1e-12) / TABLE_INTERVALS as f64;
        let values = Box::new(std::array::from_fn(|i| {
            let r = (r2_lo + i as f64 * dr2).sqrt();
            // Rounded through f32 as first tabulated (the same numbers), held as f64 for the lookup.
            f64::from((f(r) / r) as f32)
        }));
        Self {
            r2_lo,
            inverse_dr2: 1.0 / dr2,
            values,
        }
    }

    /// Linear interpolation at `r2` (clamped to the table).
    #[inline(always)]
    fn at(&self, r2: f64) -> f64 {
        let t = ((r2 - self.r2_lo) * self.inverse_dr2).clamp(0.0, TABLE_INTERVALS as f64);
        // Through u32, one conversion each way (t lies in [0, TABLE_INTERVALS]).
        let i = (t as u32).min(TABLE_INTERVALS as u32 - 1);
        let f = t - f64::from(i);
        let i = i as usize;
        let (a, b) = (self.values[i], self.values[i + 1]);
        a + f * (b - a)
    }
}

/// The soft interaction of one species with the fixed spheres and fibres.
#[derive(Debug, Clone)]
pub struct SoftField {
    grid: ObstacleGrid,
    radius_nm: f64,
    cutoff_nm: f64,
    fibre_radius_nm: f64,
    potential: BodyPotential,
    scale: f64,
    sphere_table: Option<SquaredTable>,
    fibre_table: Option<SquaredTable>,
}

/// The cut-off gap, nm, of one pair: where |U| falls below `tolerance_pn_nm`
/// ([`WallPotential::range_nm`] for the electrostatics and the well; for
/// van der Waals the gap where the model's own energy falls below it, found
/// by bisection). Facing a cylinder, whose van der Waals energy is
/// Derjaguin's −AR/(6h), a form for gaps small against the radii, the
/// van der Waals cut-off is capped at the sum of the radii; `check` prints
/// the energy left out there.
pub fn pair_cutoff_nm(u: &WallPotential, tolerance_pn_nm: f64) -> f64 {
    let short = WallPotential {
        hamaker_pn_nm: 0.0,
        ..*u
    }
    .range_nm(tolerance_pn_nm);
    if u.hamaker_pn_nm == 0.0 {
        return short;
    }
    let vdw = WallPotential {
        electrostatic_pn_nm: 0.0,
        well_depth_pn_nm: 0.0,
        ..*u
    };
    let cap = match u.facing {
        Facing::Cylinder(c) => u.radius_nm + c,
        _ => f64::INFINITY,
    };
    let (mut lo, mut hi) = (u.closest_gap_nm, u.closest_gap_nm.max(1e-3));
    while vdw.energy_pn_nm(hi).abs() > tolerance_pn_nm && hi < cap {
        hi *= 2.0;
    }
    if hi >= cap {
        return short.max(cap);
    }
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if vdw.energy_pn_nm(mid).abs() > tolerance_pn_nm {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    short.max(hi)
}

/// The cut-off gap, nm, of `potential` among spheres no larger than
/// `largest_sphere_nm` and fibres of `fibre_radius_nm`: the largest
/// [`pair_cutoff_nm`] over the body kinds (the electrostatic range grows with
/// Derjaguin's radius, so the largest sphere sets it; a plane bounds
/// spheres of unknown size).
pub fn cutoff_nm(
    potential: &BodyPotential,
    largest_sphere_nm: Option<f64>,
    fibre_radius_nm: Option<f64>,
    tolerance_pn_nm: f64,
) -> f64 {
    let mut cut: f64 = 0.0;
    if let Some(b) = largest_sphere_nm {
        let facing = if b.is_finite() {
            Facing::Sphere(b)
        } else {
            Facing::Plane
        };
        cut = cut.max(pair_cutoff_nm(&potential.facing(facing), tolerance_pn_nm));
    }
    if let Some(c) = fibre_radius_nm {
        cut = cut.max(pair_cutoff_nm(
            &potential.facing(Facing::Cylinder(c)),
            tolerance_pn_nm,
        ));
    }
    cut
}

impl SoftField {
    /// The field of `potential` among `spheres` and `fibres`, its forces
    /// multiplied by `scale` (D0Δt/k_BT, nm/pN, for a drift per step; 1 for
    /// pN), cut off where |U| < `tolerance_pn_nm`.
    pub fn build(
        spheres: &Spheres,
        fibres: &Fibres,
        potential: &BodyPotential,
        sim_box: &SimBox,
        tolerance_pn_nm: f64,
        scale: f64,
    ) -> Self {
        let a = potential.radius_nm;
        let largest = spheres
            .radii_nm
            .iter()
            .cloned()
            .fold(None, |m: Option<f64>, r| Some(m.map_or(r, |m| m.max(r))));
        let fibre_radius = (!fibres.is_empty()).then_some(fibres.radius_nm);
        let cut = cutoff_nm(potential, largest, fibre_radius, tolerance_pn_nm);
        let grid =
            ObstacleGrid::build_with(spheres, fibres, a + cut, sim_box, CELL_OVER_REACH, 0.0);
        let equal = largest.filter(|&b| spheres.radii_nm.iter().all(|&r| r == b));
        let sphere_table = equal.map(|b| {
            let u = potential.facing(Facing::Sphere(b));
            SquaredTable::build(a + b, a + b + cut, |r| scale * u.force_pn(r - a - b))
        });
        let fibre_table = fibre_radius.map(|c| {
            let u = potential.facing(Facing::Cylinder(c));
            SquaredTable::build(a + c, a + c + cut, |r| scale * u.force_pn(r - a - c))
        });
        Self {
            grid,
            radius_nm: a,
            cutoff_nm: cut,
            fibre_radius_nm: fibre_radius.unwrap_or(0.0),
            potential: *potential,
            scale,
            sphere_table,
            fibre_table,
        }
    }

    /// The cut-off gap, nm.
    pub fn cutoff_nm(&self) -> f64 {
        self.cutoff_nm
    }

    /// The sphere of radius b whose grown reach² the grid stores.
    #[inline(always)]
    fn sphere_radius(&self, reach2: f64) -> f64 {
        reach2.sqrt() - self.radius_nm - self.cutoff_nm
    }

    /// The summed force on a particle centred at `p` (inside the box, open),
    /// times the scale, [x, y, z].
    #[inline(always)]
    pub fn force(&self, p: &[f64; 3]) -> [f64; 3] {
        let (spheres, capsules) = self.grid.candidates(p);
        let mut f = [0.0; 3];
        match &self.sphere_table {
            Some(t) => {
                for q in spheres {
                    let d = [p[0] - q[0], p[1] - q[1], p[2] - q[2]];
                    let r2 = d[0] * d[0] + d[1] * d[1] + d[2] * d[2];
                    if r2 < q[3] {
                        let c = t.at(r2);
                        f[0] += c * d[0];
                        f[1] += c * d[1];
                        f[2] += c * d[2];
                    }
                }
            }
            None => {
                for q in spheres {
                    let d = [p[0] - q[0], p[1] - q[1], p[2] - q[2]];
                    let r2 = d[0] * d[0] + d[1] * d[1] + d[2] * d[2];
                    if r2 < q[3] {
                        let b = self.sphere_radius(q[3]);
                        let r = r2.sqrt();
                        let u = self.potential.facing(Facing::Sphere(b));
                        let c = self.scale * u.force_pn(r - self.radius_nm - b) / r;
                        f[0] += c * d[0];
                        f[1] += c * d[1];
                        f[2] += c * d[2];
                    }
                }
            }
        }
        if let Some(t) = &self.fibre_table {
            for cap in capsules {
                let w = axis_offset(p, &cap.centre, &cap.direction, cap.half_length);
                let r2 = w[0] * w[0] + w[1] * w[1] + w[2] * w[2];
                if r2 < cap.reach2 {
                    let c = t.at(r2);
                    f[0] += c * w[0];
                    f[1] += c * w[1];
                    f[2] += c * w[2];
                }
            }
        }
        f
    }

    /// The summed energy, pN·nm, of a particle centred at `p` (inside the
    /// box), evaluated directly; `None` inside a hard core.
    pub fn energy_pn_nm(&self, p: &[f64; 3]) -> Option<f64> {
        let a = self.radius_nm;
        let (spheres, capsules) = self.grid.candidates(p);
        let mut u = 0.0;
        for q in spheres {
            let r2 = (p[0] - q[0]).powi(2) + (p[1] - q[1]).powi(2) + (p[2] - q[2]).powi(2);
            if r2 < q[3] {
                let b = self.sphere_radius(q[3]);
                let h = r2.sqrt() - a - b;
                if h < 0.0 {
                    return None;
                }
                u += self.potential.facing(Facing::Sphere(b)).energy_pn_nm(h);
            }
        }
        for cap in capsules {
            let w = axis_offset(p, &cap.centre, &cap.direction, cap.half_length);
            let r2 = w[0] * w[0] + w[1] * w[1] + w[2] * w[2];
            if r2 < cap.reach2 {
                let c = self.fibre_radius_nm;
                let h = r2.sqrt() - a - c;
                if h < 0.0 {
                    return None;
                }
                u += self.potential.facing(Facing::Cylinder(c)).energy_pn_nm(h);
            }
        }
        Some(u)
    }

    /// The pair interaction with one body kind.
    pub fn pair(&self, facing: Facing) -> WallPotential {
        self.potential.facing(facing)
    }
}

/// From the nearest point of the segment `centre ± half_length·direction` to `p`.
#[inline(always)]
fn axis_offset(
    p: &[f64; 3],
    centre: &[f64; 3],
    direction: &[f64; 3],
    half_length: f64,
) -> [f64; 3] {
    let v = [p[0] - centre[0], p[1] - centre[1], p[2] - centre[2]];
    let t = (v[0] * direction[0] + v[1] * direction[1] + v[2] * direction[2])
        .clamp(-half_length, half_length);
    [
        v[0] - t * direction[0],
        v[1] - t * direction[1],
        v[2] - t * direction[2],
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    fn potential() -> BodyPotential {
        BodyPotential {
            radius_nm: 3.0,
            kappa_per_nm: 1.0,
            sphere_electrostatic_pn: 4.0,
            fibre_electrostatic_pn: 3.0,
            well_depth_pn_nm: 2.0,
            well_range_nm: 0.5,
            hamaker_pn_nm: 5.0,
            closest_gap_nm: 0.3,
        }
    }

    fn bodies(radii: &[f64]) -> (Spheres, Fibres, SimBox) {
        let b = SimBox {
            edges_nm: [40.0; 3],
            periodic: [true; 3],
        };
        let spheres = Spheres {
            centres_nm: radii
                .iter()
                .enumerate()
                .map(|(i, _)| [5.0 + 12.0 * i as f64, 20.0, 20.0])
                .collect(),
            radii_nm: radii.to_vec(),
            may_overlap: false,
        };
        let fibres = Fibres {
            radius_nm: 1.5,
            length_nm: 40.0,
            centres_nm: vec![[20.0, 8.0, 20.0]],
            directions: vec![[0.0, 0.0, 1.0]],
        };
        (spheres, fibres, b)
    }

    /// Force as minus the numerical gradient of the energy (exact identity).
    fn check_gradient(field: &SoftField, p: [f64; 3], tol: f64) {
        let f = field.force(&p);
        for k in 0..3 {
            let h = 1e-5;
            let (mut up, mut down) = (p, p);
            up[k] += h;
            down[k] -= h;
            let g = -(field.energy_pn_nm(&up).unwrap() - field.energy_pn_nm(&down).unwrap())
                / (2.0 * h);
            assert!(
                (g - f[k]).abs() < tol * (1.0 + g.abs()),
                "{p:?} axis {k}: table {} vs gradient {g}",
                f[k]
            );
        }
    }

    #[test]
    fn force_is_minus_the_gradient_of_the_summed_energy() {
        for radii in [&[5.0, 5.0, 5.0][..], &[4.0, 5.0, 6.5][..]] {
            let (s, f, b) = bodies(radii);
            let field = SoftField::build(&s, &f, &potential(), &b, 1e-4, 1.0);
            assert!(field.cutoff_nm() > 5.0);
            for p in [
                [11.0, 27.5, 21.0],
                [17.2, 13.0, 3.0],
                [30.0, 14.0, 38.0],
                [1.0, 29.5, 19.0],
            ] {
                check_gradient(&field, p, 1e-3);
            }
        }
    }

    #[test]
    fn energy_is_none_inside_a_hard_core_and_zero_far_away() {
        let (s, f, b) = bodies(&[5.0]);
        let field = SoftField::build(&s, &f, &potential(), &b, 1e-2, 1.0);
        assert_eq!(field.energy_pn_nm(&[5.0, 20.0, 27.0]), None);
        assert_eq!(field.energy_pn_nm(&[20.0, 9.0, 5.0]), None);
        // Far from both bodies (beyond every cut-off): nothing.
        let far = [38.0, 28.0, 0.0];
        assert_eq!(field.energy_pn_nm(&far), Some(0.0));
        assert_eq!(field.force(&far), [0.0; 3]);
    }
}
