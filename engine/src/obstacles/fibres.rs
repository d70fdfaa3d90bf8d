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

use crate::base::rng::ParticleRng;
use crate::scenario::media::{FibreSpec, Orientation};
use crate::space::bodies::Fibres;
use crate::space::sim_box::SimBox;
use std::f64::consts::PI;

/// Stream index (with the run seed) of fibre placement.
pub const FIBRE_STREAM: u64 = u64::MAX - 1;

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
    use crate::scenario::media::Target;

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
