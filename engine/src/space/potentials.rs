//! Soft interactions of a sphere with a surface (a wall, a fixed sphere, a
//! fibre or another particle), as functions of the gap h between the two
//! surfaces: screened electrostatics in the linear superposition
//! approximation, van der Waals (Hamaker) and a short-range attractive well.
//! Pure functions; energies in pN·nm, forces in pN (positive: apart).
//!
//! The curvature of what the sphere faces enters through Derjaguin's
//! effective radius R (Israelachvili, Intermolecular and Surface Forces,
//! 3rd ed., §11.4; from memory): R = a facing a plane, ab/(a + b) facing a
//! sphere of radius b, a√(c/(a + c)) facing a cylinder of radius c (the gap's
//! principal curvatures 1/a + 1/c and 1/a).
//!
//! - Screened electrostatics, sphere of radius a at gap h from a plane
//!   (Bell, Levine & McCartney 1970, linear superposition; from memory):
//!   U(h) = 64π ε_r ε_0 a (k_BT/e)² tanh(eψ₁/4k_BT) tanh(eψ₂/4k_BT) e^(−κh),
//!   so F = κU. The Debye length of a 1:1 electrolyte of ionic strength I is
//!   κ⁻¹ = √(ε_r ε_0 k_BT/(2 N_A e² I)) (I in mol/m³).
//!   Facing a sphere or a cylinder, a in the prefactor becomes R.
//! - Van der Waals with Hamaker constant A (Hamaker 1937; from memory):
//!   sphere–plane U = −(A/6)[a/h + a/(h + 2a) + ln(h/(h + 2a))], so
//!   F = −2Aa³/(3h²(h + 2a)²); sphere–sphere at centre distance r,
//!   U = −(A/6)[2ab/P + 2ab/M + ln(P/M)], P = r² − (a + b)², M = r² − (a − b)²,
//!   so F = −(32/3)A r a³b³/(P²M²); sphere–cylinder in Derjaguin's form,
//!   U = −AR/(6h). Below a closest gap δ (a stand-in for the short-range
//!   repulsion, common practice) the energy is held at U(δ) and the force is zero.
//! - Short-range well: U(h) = −ε exp(−(h/w)²), depth ε (given in k_BT) at
//!   contact, range w.
//!
//! - A surface charge density σ becomes a surface potential by the Grahame
//!   equation of a flat surface in a 1:1 electrolyte (Grahame 1947; from
//!   memory): σ = √(8 ε_r ε_0 k_BT n) sinh(eψ/2k_BT), n = 1000 N_A I (I in
//!   mol/L). On spheres and fibres it is an approximation for κa ≫ 1.
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

/// Grahame's charge scale √(8 ε_r ε_0 k_BT n) of a 1:1 electrolyte, C/m²,
/// with n = 1000 N_A I ions of each sign per m³ (I in mol/L).
fn grahame_scale_c_per_m2(
    relative_permittivity: f64,
    temperature_k: f64,
    ionic_mol_per_l: f64,
) -> f64 {
    let n_per_m3 = 1e3 * AVOGADRO_PER_MOL * ionic_mol_per_l;
    (8.0 * relative_permittivity
        * VACUUM_PERMITTIVITY_F_PER_M
        * BOLTZMANN_J_PER_K
        * temperature_k
        * n_per_m3)
        .sqrt()
}

/// Surface potential, mV, of a flat surface carrying charge density
/// `charge_density_mc_per_m2` (mC/m²) in a 1:1 electrolyte of ionic
/// strength `ionic_mol_per_l`: the Grahame equation (Grahame 1947; from
/// memory) σ = √(8 ε_r ε_0 k_BT n) sinh(eψ/2k_BT) solved for ψ,
/// ψ = (2k_BT/e) asinh(σ/√(8 ε_r ε_0 k_BT n)).
///
/// It is the planar form: applied to spheres and fibres it is an
/// approximation valid when their radii far exceed the Debye length (κa ≫ 1).
pub fn grahame_potential_mv(
    charge_density_mc_per_m2: f64,
    relative_permittivity: f64,
    temperature_k: f64,
    ionic_mol_per_l: f64,
) -> f64 {
    let scale = grahame_scale_c_per_m2(relative_permittivity, temperature_k, ionic_mol_per_l);
    let two_kt_over_e_v = 2.0 * BOLTZMANN_J_PER_K * temperature_k / ELEMENTARY_CHARGE_C;
    two_kt_over_e_v * (charge_density_mc_per_m2 * 1e-3 / scale).asinh() * 1e3
}

/// Charge density, mC/m², of a flat surface at potential `potential_mv`
/// (the Grahame equation forward; the inverse of [`grahame_potential_mv`]).
pub fn grahame_charge_density_mc_per_m2(
    potential_mv: f64,
    relative_permittivity: f64,
    temperature_k: f64,
    ionic_mol_per_l: f64,
) -> f64 {
    let scale = grahame_scale_c_per_m2(relative_permittivity, temperature_k, ionic_mol_per_l);
    let two_kt_over_e_mv = 2e3 * BOLTZMANN_J_PER_K * temperature_k / ELEMENTARY_CHARGE_C;
    scale * (potential_mv / two_kt_over_e_mv).sinh() * 1e3
}

/// What a sphere faces: sets the Derjaguin radius and the van der Waals form.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum Facing {
    /// A plane wall.
    #[default]
    Plane,
    /// A sphere of this radius, nm.
    Sphere(f64),
    /// A cylinder (fibre, pore seen from inside as a plane) of this radius, nm.
    Cylinder(f64),
}

/// Derjaguin's effective radius of a sphere of radius `a_nm` facing `facing`, nm.
pub fn derjaguin_radius_nm(a_nm: f64, facing: Facing) -> f64 {
    match facing {
        Facing::Plane => a_nm,
        Facing::Sphere(b) => a_nm * b / (a_nm + b),
        Facing::Cylinder(c) => a_nm * (c / (a_nm + c)).sqrt(),
    }
}

/// Surface potential of a sphere of radius `a_nm` carrying `charge_e`
/// elementary charges in an electrolyte of Debye length `debye_nm`, mV:
/// ψ = Qe/(4π ε_r ε_0 a (1 + κa)) (Debye–Hückel, low potential; from memory).
pub fn sphere_surface_potential_mv(
    charge_e: f64,
    a_nm: f64,
    debye_nm: f64,
    relative_permittivity: f64,
) -> f64 {
    let a = a_nm * 1e-9;
    let q = charge_e * ELEMENTARY_CHARGE_C;
    let psi_v = q
        / (4.0
            * std::f64::consts::PI
            * relative_permittivity
            * VACUUM_PERMITTIVITY_F_PER_M
            * a
            * (1.0 + a_nm / debye_nm));
    psi_v * 1e3
}

/// The soft interaction of one species with one surface (a wall, a fixed
/// sphere, a fibre or another particle), as a function of the gap.
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
    /// Hamaker constant A, pN·nm (0 without van der Waals).
    pub hamaker_pn_nm: f64,
    /// Closest gap δ of the van der Waals terms, nm (held at U(δ) below).
    pub closest_gap_nm: f64,
    /// Radius a of the moving sphere, nm (van der Waals only).
    pub radius_nm: f64,
    /// What the sphere faces (van der Waals only; the other terms carry
    /// the curvature in their prefactor).
    pub facing: Facing,
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
        if self.hamaker_pn_nm != 0.0 {
            u += self.van_der_waals(h_nm.max(self.closest_gap_nm)).0;
        }
        u
    }

    /// Van der Waals energy and force (pN·nm, pN; negative force: attraction) at gap `h` > 0.
    fn van_der_waals(&self, h: f64) -> (f64, f64) {
        let (a, big_a) = (self.radius_nm, self.hamaker_pn_nm);
        match self.facing {
            Facing::Plane => {
                let s = h + 2.0 * a;
                (
                    -big_a / 6.0 * (a / h + a / s + (h / s).ln()),
                    -2.0 * big_a * a.powi(3) / (3.0 * h * h * s * s),
                )
            }
            Facing::Sphere(b) => {
                let r = h + a + b;
                let p = r * r - (a + b) * (a + b);
                let m = r * r - (a - b) * (a - b);
                (
                    -big_a / 6.0 * (2.0 * a * b / p + 2.0 * a * b / m + (p / m).ln()),
                    -32.0 / 3.0 * big_a * r * (a * b).powi(3) / (p * p * m * m),
                )
            }
            Facing::Cylinder(_) => {
                let rd = derjaguin_radius_nm(a, self.facing);
                (-big_a * rd / (6.0 * h), -big_a * rd / (6.0 * h * h))
            }
        }
    }

    /// Force at gap `h_nm` along the wall's normal (positive: away), pN.
    pub fn force_pn(&self, h_nm: f64) -> f64 {
        let h = h_nm.max(0.0);
        let mut f = self.kappa_per_nm * self.electrostatic_pn_nm * (-self.kappa_per_nm * h).exp();
        if self.well_depth_pn_nm != 0.0 {
            let x = h / self.well_range_nm;
            f -= self.well_depth_pn_nm * 2.0 * x / self.well_range_nm * (-x * x).exp();
        }
        if self.hamaker_pn_nm != 0.0 && h_nm > self.closest_gap_nm {
            f += self.van_der_waals(h_nm).1;
        }
        f
    }

    /// Energy (pN·nm) and force (pN, positive: away) at gap `h_nm`, as
    /// [`Self::energy_pn_nm`] and [`Self::force_pn`] but with one exponential per term.
    #[inline]
    pub fn energy_force(&self, h_nm: f64) -> (f64, f64) {
        let h = h_nm.max(0.0);
        let e = self.electrostatic_pn_nm * (-self.kappa_per_nm * h).exp();
        let (mut u, mut f) = (e, self.kappa_per_nm * e);
        if self.well_depth_pn_nm != 0.0 {
            let x = h / self.well_range_nm;
            let w = self.well_depth_pn_nm * (-x * x).exp();
            u -= w;
            f -= w * 2.0 * x / self.well_range_nm;
        }
        if self.hamaker_pn_nm != 0.0 {
            let (v, g) = self.van_der_waals(h_nm.max(self.closest_gap_nm));
            u += v;
            if h_nm > self.closest_gap_nm {
                f += g;
            }
        }
        (u, f)
    }

    /// True when it exerts no force.
    pub fn is_none(&self) -> bool {
        self.electrostatic_pn_nm == 0.0 && self.well_depth_pn_nm == 0.0 && self.hamaker_pn_nm == 0.0
    }

    /// The gap beyond which |U| stays below `tolerance_pn_nm`: the cut-off
    /// of a neighbour sum (each term bounded separately; van der Waals by
    /// its far-field decay, never below δ).
    pub fn range_nm(&self, tolerance_pn_nm: f64) -> f64 {
        let mut h: f64 = 0.0;
        let e = self.electrostatic_pn_nm.abs();
        if e > tolerance_pn_nm && self.kappa_per_nm > 0.0 {
            h = h.max((e / tolerance_pn_nm).ln() / self.kappa_per_nm);
        }
        let w = self.well_depth_pn_nm.abs();
        if w > tolerance_pn_nm {
            h = h.max(self.well_range_nm * (w / tolerance_pn_nm).ln().sqrt());
        }
        if self.hamaker_pn_nm != 0.0 {
            // |U| is at most AR/(6h) (Derjaguin's bound, above every exact form).
            let rd = derjaguin_radius_nm(self.radius_nm, self.facing);
            h = h.max(self.hamaker_pn_nm.abs() * rd / (6.0 * tolerance_pn_nm));
            h = h.max(self.closest_gap_nm);
        }
        h
    }
}

/// The soft interaction of one species with fixed spheres and fibres:
/// the terms of a [`WallPotential`] whose curvature enters per body through
/// Derjaguin's radius (electrostatics) and the van der Waals form.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct BodyPotential {
    /// Radius a of the moving sphere, nm.
    pub radius_nm: f64,
    /// κ, 1/nm.
    pub kappa_per_nm: f64,
    /// U(0)/R of the screened electrostatics facing a fixed sphere, pN (per
    /// nm of Derjaguin radius R; 0 without).
    pub sphere_electrostatic_pn: f64,
    /// The same facing a fibre, pN.
    pub fibre_electrostatic_pn: f64,
    /// Depth ε of the well at contact, pN·nm (0 without).
    pub well_depth_pn_nm: f64,
    /// Range w of the well, nm.
    pub well_range_nm: f64,
    /// Hamaker constant A, pN·nm (0 without van der Waals).
    pub hamaker_pn_nm: f64,
    /// Closest gap δ of the van der Waals terms, nm.
    pub closest_gap_nm: f64,
}

impl BodyPotential {
    /// True when it exerts no force on any body.
    pub fn is_none(&self) -> bool {
        self.sphere_electrostatic_pn == 0.0
            && self.fibre_electrostatic_pn == 0.0
            && self.well_depth_pn_nm == 0.0
            && self.hamaker_pn_nm == 0.0
    }

    /// The interaction with one body as a function of the gap: a fixed
    /// sphere (`Facing::Sphere(b)`), a fibre (`Facing::Cylinder(c)`) or, as
    /// the bound of both, a plane.
    pub fn facing(&self, facing: Facing) -> WallPotential {
        let per_radius = match facing {
            Facing::Cylinder(_) => self.fibre_electrostatic_pn,
            _ => self.sphere_electrostatic_pn,
        };
        WallPotential {
            electrostatic_pn_nm: per_radius * derjaguin_radius_nm(self.radius_nm, facing),
            kappa_per_nm: self.kappa_per_nm,
            well_depth_pn_nm: self.well_depth_pn_nm,
            well_range_nm: self.well_range_nm,
            hamaker_pn_nm: self.hamaker_pn_nm,
            closest_gap_nm: self.closest_gap_nm,
            radius_nm: self.radius_nm,
            facing,
        }
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
    fn energy_and_force_together_match_each_alone() {
        let p = WallPotential {
            electrostatic_pn_nm: 7.0,
            kappa_per_nm: 0.9,
            well_depth_pn_nm: 3.0,
            well_range_nm: 0.7,
            hamaker_pn_nm: 5.0,
            closest_gap_nm: 0.3,
            radius_nm: 2.0,
            facing: Facing::Sphere(4.0),
        };
        for k in 0..200 {
            let h = 0.05 * k as f64;
            let (u, f) = p.energy_force(h);
            assert!(
                (u - p.energy_pn_nm(h)).abs() <= 1e-12 * (1.0 + u.abs()),
                "{h}"
            );
            assert!((f - p.force_pn(h)).abs() <= 1e-12 * (1.0 + f.abs()), "{h}");
        }
    }

    #[test]
    fn grahame_potential_matches_a_hand_computed_value() {
        // Grahame 1947 (from memory), by hand: I = 0.01 mol/L, ε_r = 78.4, T = 298.15 K give
        // √(8 ε_r ε_0 k_BT n) = 11.7331 mC/m² and 2k_BT/e = 51.3852 mV, so σ = −50 mC/m²
        // gives ψ = 51.3852 mV · asinh(−50/11.7331) = 51.3852 × (−2.15625) = −110.799 mV.
        let psi = grahame_potential_mv(-50.0, 78.4, 298.15, 0.01);
        assert!((psi - -110.799).abs() < 0.002, "{psi}");
        // Israelachvili, Intermolecular and Surface Forces, 3rd ed., §14.6 (from memory):
        // σ ≈ 0.117 √(c/(mol/L)) sinh(ψ/51.4 mV) C/m² in water at 25 °C; three digits.
        for (c, psi) in [(0.001, -20.0), (0.01, 40.0), (0.1, -100.0)] {
            let sigma = grahame_charge_density_mc_per_m2(psi, 78.4, 298.15, c);
            let rule = 117.0 * f64::sqrt(c) * (psi / 51.4_f64).sinh();
            assert!(
                (sigma / rule - 1.0).abs() < 0.005,
                "{c} {psi}: {sigma} vs {rule}"
            );
        }
    }

    #[test]
    fn grahame_charge_of_the_potential_of_a_charge_is_that_charge() {
        // Exact identity σ(ψ(σ)) = σ, to rounding.
        for sigma in [-300.0, -50.0, -1.0, -1e-6, 0.0, 0.3, 20.0, 160.0] {
            for (eps, t, i) in [
                (78.4, 298.15, 0.01),
                (30.0, 350.0, 1e-4),
                (78.4, 280.0, 2.0),
            ] {
                let psi = grahame_potential_mv(sigma, eps, t, i);
                let back = grahame_charge_density_mc_per_m2(psi, eps, t, i);
                assert!(
                    (back - sigma).abs() <= 1e-12 * sigma.abs(),
                    "{sigma} → {psi} mV → {back}"
                );
                // The sign follows the charge.
                assert_eq!(psi.signum(), sigma.signum(), "{sigma}");
            }
        }
    }

    #[test]
    fn grahame_reduces_to_the_debye_huckel_capacitor_at_low_charge() {
        // Exact limit: ψ → σ/(ε_r ε_0 κ) as σ → 0, the cubic term σ²/(6 scale²) ≈ 1e-8 relative here.
        let (eps, t, i, sigma) = (78.4, 298.15, 0.01, 0.01);
        let psi = grahame_potential_mv(sigma, eps, t, i);
        let linear_v =
            sigma * 1e-3 * debye_length_nm(eps, t, i) * 1e-9 / (eps * VACUUM_PERMITTIVITY_F_PER_M);
        assert!(
            (psi / (linear_v * 1e3) - 1.0).abs() < 1e-6,
            "{psi} vs {}",
            linear_v * 1e3
        );
    }

    #[test]
    fn force_is_minus_the_derivative_of_the_energy() {
        // Exact identity, checked by central differences.
        let p = WallPotential {
            electrostatic_pn_nm: 12.0,
            kappa_per_nm: 1.0 / 3.0,
            well_depth_pn_nm: 8.0,
            well_range_nm: 0.7,
            ..Default::default()
        };
        for h in [0.1, 0.5, 1.0, 2.0, 5.0] {
            let d = 1e-6;
            let numeric = -(p.energy_pn_nm(h + d) - p.energy_pn_nm(h - d)) / (2.0 * d);
            assert!((numeric - p.force_pn(h)).abs() < 1e-6, "{h}");
        }
    }

    fn van_der_waals(a: f64, facing: Facing) -> WallPotential {
        WallPotential {
            hamaker_pn_nm: 40.0,
            closest_gap_nm: 0.3,
            radius_nm: a,
            facing,
            ..Default::default()
        }
    }

    #[test]
    fn van_der_waals_force_is_minus_the_derivative_in_every_form() {
        // Exact identity, checked by central differences.
        for facing in [Facing::Plane, Facing::Sphere(7.0), Facing::Cylinder(4.0)] {
            let p = van_der_waals(5.0, facing);
            for h in [0.4, 1.0, 3.0, 10.0] {
                let d = 1e-6;
                let numeric = -(p.energy_pn_nm(h + d) - p.energy_pn_nm(h - d)) / (2.0 * d);
                let exact = p.force_pn(h);
                assert!(
                    (numeric - exact).abs() < 1e-6 * exact.abs().max(1.0),
                    "{facing:?} {h}"
                );
                assert!(exact < 0.0, "attractive");
            }
            // Held below the closest gap.
            assert_eq!(p.energy_pn_nm(0.1), p.energy_pn_nm(0.3));
            assert_eq!(p.force_pn(0.1), 0.0);
        }
    }

    #[test]
    fn sphere_forms_approach_the_plane_and_derjaguin_limits() {
        // Exact limits: a sphere of radius b → ∞ is a plane; at h ≪ a, b the
        // Hamaker form tends to Derjaguin's −AR/(6h).
        let plane = van_der_waals(5.0, Facing::Plane);
        let huge = van_der_waals(5.0, Facing::Sphere(1e7));
        for h in [0.5, 2.0, 8.0] {
            let (e, f) = (plane.energy_pn_nm(h), plane.force_pn(h));
            assert!((huge.energy_pn_nm(h) / e - 1.0).abs() < 1e-4, "{h}");
            assert!((huge.force_pn(h) / f - 1.0).abs() < 1e-4, "{h}");
        }
        let (a, b, h) = (500.0, 300.0, 0.1);
        let s = WallPotential {
            closest_gap_nm: 0.01,
            ..van_der_waals(a, Facing::Sphere(b))
        };
        let r = derjaguin_radius_nm(a, Facing::Sphere(b));
        let derjaguin = -40.0 * r / (6.0 * h);
        assert!((s.energy_pn_nm(h) / derjaguin - 1.0).abs() < 0.01);
    }

    #[test]
    fn cut_off_range_bounds_the_energy() {
        let p = WallPotential {
            electrostatic_pn_nm: 30.0,
            kappa_per_nm: 1.0,
            well_depth_pn_nm: 10.0,
            well_range_nm: 0.5,
            hamaker_pn_nm: 20.0,
            closest_gap_nm: 0.3,
            radius_nm: 4.0,
            facing: Facing::Sphere(6.0),
        };
        let tol = 0.01;
        let h = p.range_nm(tol);
        assert!(h > 0.0);
        // Each of three terms below tol beyond the range, so the sum below 3 tol.
        for x in [h, 1.5 * h, 3.0 * h] {
            assert!(p.energy_pn_nm(x).abs() < 3.0 * tol, "{x}");
        }
    }

    #[test]
    fn derjaguin_radii_and_charged_sphere_potential() {
        // Exact geometry; Debye–Hückel ψ for Q = 10 e, a = 3 nm, κ⁻¹ = 1 nm,
        // ε_r = 78.4: 10·1.602e-19/(4π·78.4·8.854e-12·3e-9·4) ≈ 15.3 mV (by hand).
        assert_eq!(derjaguin_radius_nm(2.0, Facing::Plane), 2.0);
        assert_eq!(derjaguin_radius_nm(2.0, Facing::Sphere(2.0)), 1.0);
        assert!((derjaguin_radius_nm(2.0, Facing::Cylinder(2.0)) - 2.0_f64.sqrt()).abs() < 1e-12);
        let psi = sphere_surface_potential_mv(10.0, 3.0, 1.0, 78.4);
        assert!((psi - 15.3).abs() < 0.1, "{psi}");
    }
}
