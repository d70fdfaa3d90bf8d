//! A validated species: size, count, diffusivity and whether it crowds.

use crate::base::medium;

/// A validated species.
#[derive(Debug, Clone, PartialEq)]
pub struct Species {
    /// Name.
    pub name: String,
    /// Steric radius, nm.
    pub radius_nm: f64,
    /// Drag radius, nm.
    pub drag_radius_nm: f64,
    /// Number of particles.
    pub count: usize,
    /// Free diffusivity, m²/s.
    pub d0_m2_per_s: f64,
    /// Whether `d0_m2_per_s` was given explicitly rather than from Stokes–Einstein.
    pub d0_explicit: bool,
    /// True for a crowder (hard contacts with every particle); tracers only
    /// touch crowders, obstacles and walls.
    pub crowder: bool,
    /// Total constant external force [x, y, z], pN (zero without one).
    pub force_pn: [f64; 3],
    /// Soft interaction with the walls (none by default).
    pub wall_potential: crate::space::potentials::WallPotential,
    /// Reversible binding to the fixed obstacles (none by default).
    pub binding: Option<crate::scenario::binding::BindingSpec>,
    /// Soft interaction with fixed spheres and fibres (none by default).
    pub body_potential: crate::space::potentials::BodyPotential,
}

impl Species {
    /// Free diffusivity in nm²/s, the engine's internal unit.
    pub fn d0_nm2_per_s(&self) -> f64 {
        medium::m2_to_nm2(self.d0_m2_per_s)
    }

    /// Root-mean-square step per axis, √(2 D0 Δt), in nm.
    pub fn step_rms_nm(&self, dt_s: f64) -> f64 {
        (2.0 * self.d0_nm2_per_s() * dt_s).sqrt()
    }
}
