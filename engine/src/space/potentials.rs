//! Soft interactions of a sphere with a wall, as functions of the gap h
//! between surface and wall: screened electrostatics in the linear
//! superposition approximation and a short-range attractive well. Pure
//! functions; energies in pN·nm, forces in pN (positive: away from the wall).
//!
//! - Screened electrostatics, sphere of radius a at gap h from a plane
//!   (Bell, Levine & McCartney 1970, linear superposition; from memory):
//!   U(h) = 64π ε_r ε_0 a (k_BT/e)² tanh(eψ₁/4k_BT) tanh(eψ₂/4k_BT) e^(−κh),
//!   so F = κU. The Debye length of a 1:1 electrolyte of ionic strength I is
//!   κ⁻¹ = √(ε_r ε_0 k_BT/(2 N_A e² I)) (I in mol/m³).
//! - Short-range well: U(h) = −ε exp(−(h/w)²), depth ε (given in k_BT) at
//!   contact, range w.
//!
//! In a cylindrical pore the sphere–plane form is applied at the gap to
//! the wall along the radius (the pore wall seen as a plane: an
//! approximation for pores much wider than the Debye length and the
//! sphere); in a slit the two walls add.

/// Vacuum permittivity, F/m (CODATA 2018).
pub const VACUUM_PERMITTIVITY_F_PER_M: f64 = 8.854_187_812_8e-12;
/// Avogadro constant, 1/mol (exact, SI 2019).
pub const AVOGADRO_PER_MOL: f64 = 6.022_140_76e23;
/// Elementary charge, C (exact, SI 2019).
pub const ELEMENTARY_CHARGE_C: f64 = 1.602_176_634e-19;
/// Boltzmann constant, J/K (exact, SI 2019).
const BOLTZMANN_J_PER_K: f64 = 1.380_649e-23;

/// Debye length of a 1:1 electrolyte, nm: κ⁻¹ = √(ε_r ε_0 k_BT/(2 N_A e² I)).
pub fn debye_length_nm(
    relative_permittivity: f64,
    temperature_k: f64,
    ionic_mol_per_l: f64,
) -> f64 {
    let i_mol_per_m3 = ionic_mol_per_l * 1e3;
    (relative_permittivity * VACUUM_PERMITTIVITY_F_PER_M * BOLTZMANN_J_PER_K * temperature_k
        / (2.0 * AVOGADRO_PER_MOL * ELEMENTARY_CHARGE_C * ELEMENTARY_CHARGE_C * i_mol_per_m3))
        .sqrt()
        * 1e9
}

/// The soft interaction of one species with a wall.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct WallPotential {
    /// U(0) of the screened electrostatics, pN·nm (0 without).
    pub electrostatic_pn_nm: f64,
    /// κ, 1/nm.
    pub kappa_per_nm: f64,
    /// Depth ε of the well, pN·nm (0 without).
    pub well_depth_pn_nm: f64,
    /// Range w of the well, nm.
    pub well_range_nm: f64,
}

impl WallPotential {
    /// The electrostatic prefactor U(0) = 64π ε_r ε_0 a (k_BT/e)² tanh(eψ₁/4k_BT)
    /// tanh(eψ₂/4k_BT), pN·nm, for a sphere of radius `a_nm` with surface
    /// potential `psi_particle_mv` and a wall at `psi_wall_mv`.
    pub fn electrostatic_prefactor_pn_nm(
        relative_permittivity: f64,
        temperature_k: f64,
        a_nm: f64,
        psi_particle_mv: f64,
        psi_wall_mv: f64,
    ) -> f64 {
        let kt_j = BOLTZMANN_J_PER_K * temperature_k;
        let thermal_volt = kt_j / ELEMENTARY_CHARGE_C;
        let t = |psi_mv: f64| (psi_mv * 1e-3 / (4.0 * thermal_volt)).tanh();
        let u_j = 64.0
            * std::f64::consts::PI
            * relative_permittivity
            * VACUUM_PERMITTIVITY_F_PER_M
            * a_nm
            * 1e-9
            * thermal_volt
            * thermal_volt
            * t(psi_particle_mv)
            * t(psi_wall_mv);
        u_j * 1e21
    }

    /// Energy at gap `h_nm`, pN·nm.
    pub fn energy_pn_nm(&self, h_nm: f64) -> f64 {
        let h = h_nm.max(0.0);
        let mut u = self.electrostatic_pn_nm * (-self.kappa_per_nm * h).exp();
        if self.well_depth_pn_nm != 0.0 {
            let x = h / self.well_range_nm;
            u -= self.well_depth_pn_nm * (-x * x).exp();
        }
        u
    }

    /// Force at gap `h_nm` along the wall's normal (positive: away), pN.
    pub fn force_pn(&self, h_nm: f64) -> f64 {
        let h = h_nm.max(0.0);
        let mut f = self.kappa_per_nm * self.electrostatic_pn_nm * (-self.kappa_per_nm * h).exp();
        if self.well_depth_pn_nm != 0.0 {
            let x = h / self.well_range_nm;
            f -= self.well_depth_pn_nm * 2.0 * x / self.well_range_nm * (-x * x).exp();
        }
        f
    }

    /// True when it exerts no force.
    pub fn is_none(&self) -> bool {
        self.electrostatic_pn_nm == 0.0 && self.well_depth_pn_nm == 0.0
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn debye_length_of_water_matches_the_handbook_rule() {
        // Common practice: κ⁻¹ ≈ 0.304 nm/√(I/(mol/L)) in water at 25 °C (REFERENCE.md).
        for i in [0.001, 0.01, 0.1] {
            let l = debye_length_nm(78.4, 298.15, i);
            assert!((l * i.sqrt() - 0.304).abs() < 0.002, "{l}");
        }
    }

    #[test]
    fn force_is_minus_the_derivative_of_the_energy() {
        // Exact identity, checked by central differences.
        let p = WallPotential {
            electrostatic_pn_nm: 12.0,
            kappa_per_nm: 1.0 / 3.0,
            well_depth_pn_nm: 8.0,
            well_range_nm: 0.7,
        };
        for h in [0.1, 0.5, 1.0, 2.0, 5.0] {
            let d = 1e-6;
            let numeric = -(p.energy_pn_nm(h + d) - p.energy_pn_nm(h - d)) / (2.0 * d);
            assert!((numeric - p.force_pn(h)).abs() < 1e-6, "{h}");
        }
    }
}
