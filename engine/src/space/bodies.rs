//! Bodies that occupy space: placed spheres and fibres, as plain data that
//! neighbour searches and obstacles read.

use crate::space::SimBox;
use std::f64::consts::PI;

fn box_volume(sim_box: &SimBox) -> f64 {
    sim_box.edges_nm.iter().product()
}

/// Fixed spheres: centres (inside the box) and radii, nm.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Spheres {
    /// Centres, nm, in [0, L) on every axis.
    pub centres_nm: Vec<[f64; 3]>,
    /// Radii, nm.
    pub radii_nm: Vec<f64>,
    /// True when the spheres may overlap each other (Poisson, or a file that allows it).
    pub may_overlap: bool,
}

impl Spheres {
    /// Number of spheres.
    pub fn len(&self) -> usize {
        self.radii_nm.len()
    }

    /// True when there are none.
    pub fn is_empty(&self) -> bool {
        self.radii_nm.is_empty()
    }

    /// Sum of sphere volumes over the box volume (the covered fraction when
    /// they do not overlap).
    pub fn nominal_volume_fraction(&self, sim_box: &SimBox) -> f64 {
        let v: f64 = self
            .radii_nm
            .iter()
            .map(|r| 4.0 / 3.0 * PI * r.powi(3))
            .sum();
        v / box_volume(sim_box)
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
