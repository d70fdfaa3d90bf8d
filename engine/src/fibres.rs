//! Fixed fibres: random straight cylinders, a model of extracellular matrix.
//!
//! Each fibre is a straight cylinder of radius r_f with hemispherical caps
//! (a capsule: the points within r_f of a segment), with periodic images
//! across the faces of periodic axes. Fibres may overlap each other, as in
//! Ogston's random-fibre model (Ogston, Preston & Wells 1973). Aligned fibres
//! run along a box axis and by default span the box exactly, so each joins
//! its own images into an infinitely long cylinder; isotropic fibres have
//! uniformly random directions and by default the length of the smallest box
//! edge. Positions are drawn from [`FIBRE_STREAM`] with the run seed.

use crate::config::SimBox;
use crate::obstacles::Target;
use crate::rng::ParticleRng;
use std::f64::consts::PI;

/// Stream index (with the run seed) of fibre placement.
pub const FIBRE_STREAM: u64 = u64::MAX - 1;

/// Orientation of the fibres.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Orientation {
    /// Uniformly random directions on the sphere.
    Isotropic,
    /// All along one box axis (0 = x, 1 = y, 2 = z).
    Aligned {
        /// Box axis index.
        axis: usize,
    },
}

/// Validated `[fibres]` section.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FibreSpec {
    /// Fibre radius, nm.
    pub radius_nm: f64,
    /// Length of the axis segment, nm.
    pub length_nm: f64,
    /// Orientation.
    pub orientation: Orientation,
    /// Nominal volume fraction N·π r_f²·ℓ / V, or a count.
    pub target: Target,
}

impl FibreSpec {
    /// Number of fibres the target implies in a box.
    pub fn count(&self, sim_box: &SimBox) -> usize {
        match self.target {
            Target::Count(n) => n,
            Target::VolumeFraction(phi) => {
                let v: f64 = sim_box.edges_nm.iter().product();
                (phi * v / (PI * self.radius_nm.powi(2) * self.length_nm))
                    .round()
                    .max(1.0) as usize
            }
        }
    }
}

/// Placed fibres (all of one radius and length).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Fibres {
    /// Radius, nm.
    pub radius_nm: f64,
    /// Length of each axis segment, nm.
    pub length_nm: f64,
    /// Segment midpoints, nm, inside the box.
    pub centres_nm: Vec<[f64; 3]>,
    /// Unit direction of each segment.
    pub directions: Vec<[f64; 3]>,
}

impl Fibres {
    /// Number of fibres.
    pub fn len(&self) -> usize {
        self.centres_nm.len()
    }

    /// True when there are none.
    pub fn is_empty(&self) -> bool {
        self.centres_nm.is_empty()
    }

    /// Nominal fibre volume fraction N·π r_f²·ℓ / V (overlaps counted twice,
    /// caps not counted): the φ of Ogston's formula.
    pub fn nominal_volume_fraction(&self, sim_box: &SimBox) -> f64 {
        let v: f64 = sim_box.edges_nm.iter().product();
        self.len() as f64 * PI * self.radius_nm.powi(2) * self.length_nm / v
    }
}

/// Places fibres with uniformly random midpoints.
pub fn place_fibres(spec: &FibreSpec, sim_box: &SimBox, seed: u64) -> Fibres {
    let mut rng = ParticleRng::for_particle(seed, FIBRE_STREAM);
    let n = spec.count(sim_box);
    let mut fibres = Fibres {
        radius_nm: spec.radius_nm,
        length_nm: spec.length_nm,
        ..Fibres::default()
    };
    for _ in 0..n {
        let c = [0, 1, 2].map(|k| rng.uniform() * sim_box.edges_nm[k]);
        let d = match spec.orientation {
            Orientation::Aligned { axis } => {
                let mut d = [0.0; 3];
                d[axis] = 1.0;
                d
            }
            Orientation::Isotropic => {
                // Uniform on the sphere: cos θ uniform in [−1, 1] (Archimedes).
                let z = 2.0 * rng.uniform() - 1.0;
                let phi = 2.0 * PI * rng.uniform();
                let s = (1.0 - z * z).max(0.0).sqrt();
                [s * phi.cos(), s * phi.sin(), z]
            }
        };
        fibres.centres_nm.push(c);
        fibres.directions.push(d);
    }
    fibres
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn isotropic_directions_are_unit_and_unbiased() {
        let b = SimBox {
            edges_nm: [100.0; 3],
            periodic: [true; 3],
        };
        let spec = FibreSpec {
            radius_nm: 1.0,
            length_nm: 100.0,
            orientation: Orientation::Isotropic,
            target: Target::Count(20_000),
        };
        let f = place_fibres(&spec, &b, 5);
        let n = f.len() as f64;
        for k in 0..3 {
            let mean: f64 = f.directions.iter().map(|d| d[k]).sum::<f64>() / n;
            let mean_sq: f64 = f.directions.iter().map(|d| d[k] * d[k]).sum::<f64>() / n;
            // Uniform on the sphere: ⟨d_k⟩ = 0 (sd 1/√(3n)), ⟨d_k²⟩ = 1/3 (sd √(4/45 n)); 5 sd.
            assert!(mean.abs() < 5.0 / (3.0 * n).sqrt(), "axis {k}: {mean}");
            assert!(
                (mean_sq - 1.0 / 3.0).abs() < 5.0 * (4.0 / 45.0 / n).sqrt(),
                "axis {k}: {mean_sq}"
            );
        }
        assert!(f
            .directions
            .iter()
            .all(|d| ((d[0] * d[0] + d[1] * d[1] + d[2] * d[2]) - 1.0).abs() < 1e-12));
    }

    #[test]
    fn volume_fraction_target_sets_count() {
        let b = SimBox {
            edges_nm: [200.0; 3],
            periodic: [true; 3],
        };
        let spec = FibreSpec {
            radius_nm: 2.0,
            length_nm: 200.0,
            orientation: Orientation::Aligned { axis: 2 },
            target: Target::VolumeFraction(0.05),
        };
        let f = place_fibres(&spec, &b, 1);
        assert!(
            (f.nominal_volume_fraction(&b) - 0.05).abs() < 0.5 * PI * 4.0 * 200.0 / 8e6 + 1e-12
        );
        assert!(f.directions.iter().all(|d| *d == [0.0, 0.0, 1.0]));
    }
}
