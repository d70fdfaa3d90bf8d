//! The validated `[flow]` and `[forces]` sections and the per-species force
//! keys: what pushes or carries particles besides diffusion.
//!
//! A species' constant force is the sum of `force_pN`, its buoyant weight
//! −(4/3)π a³ (ρ_p − ρ_medium) g ẑ under `forces.gravity_m_per_s2` (a the
//! steric radius), and the bare Coulomb force q e E under
//! `forces.electric_field_V_per_m` (no electrophoretic retardation, no
//! electro-osmosis). It enters the step as the drift D·F/k_BT.
//!
//! A flow is Poiseuille flow along a cylinder's axis (z), along x in a
//! slit, or down through a membrane's pores (filtration from the top bath,
//! the feed, to the bottom one, the permeate), set by its mean velocity or
//! by a pressure gradient (a membrane: the pressure drop across it) with the
//! medium's viscosity (Hagen–Poiseuille: V = G R²/(8η) in a cylinder,
//! G w²/(12η) in a slit of width w, ΔP R²/(8ηL) in a membrane pore of
//! length L); or a uniform shear u_x = γ̇ (z − L_z/2) in a periodic box
//! without obstacles.

use crate::base::error::{EngineError, Result};
use crate::base::medium::BOLTZMANN_J_PER_K;
use crate::scenario::geometry::Geometry;
use crate::scenario::species::Species;
use crate::space::pore_hydro::PoreModel;
use crate::space::shape::Shape;
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Elementary charge, C (exact, SI 2019).
pub const ELEMENTARY_CHARGE_C: f64 = 1.602_176_634e-19;

/// Forces and flow speeds accepted, in pN and m/s (far beyond any colloid).
pub const FORCE_RANGE_PN: f64 = 1e6;
/// Flow speeds accepted, m/s.
pub const VELOCITY_RANGE_M_PER_S: f64 = 1e3;

/// `[flow]` as written.
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFlow {
    /// "poiseuille" (cylinder along z, slit along x) or "shear" (periodic box).
    pub kind: String,
    /// Poiseuille: mean velocity over the pore's or slit's cross-section, m/s.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub mean_velocity_m_per_s: Option<f64>,
    /// Poiseuille: driving pressure gradient, Pa/m (instead of the mean velocity).
    #[serde(
        rename = "pressure_gradient_Pa_per_m",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub pressure_gradient_pa_per_m: Option<f64>,
    /// Poiseuille in a membrane: transmembrane pressure drop, Pa (instead of
    /// the mean velocity; each pore then carries V_i = ΔP R_i²/(8ηL)).
    #[serde(
        rename = "pressure_drop_Pa",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub pressure_drop_pa: Option<f64>,
    /// Shear: rate γ̇, 1/s (u_x = γ̇ (z − L_z/2)).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shear_rate_per_s: Option<f64>,
}

/// `[forces]` as written: fields acting on every species.
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawForces {
    /// Gravitational acceleration along −z, m/s² (needs `medium.density_kg_per_m3`
    /// and each species' `density_kg_per_m3`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub gravity_m_per_s2: Option<f64>,
    /// Uniform electric field [x, y, z], V/m (acts on `charge_e`).
    #[serde(
        rename = "electric_field_V_per_m",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub electric_field_v_per_m: Option<Vec<f64>>,
}

/// A validated flow.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum FlowSpec {
    /// Poiseuille flow of this mean velocity over the section, nm/s.
    Poiseuille {
        /// Mean fluid velocity over the pore's (slit's) whole section, nm/s.
        mean_velocity_nm_per_s: f64,
    },
    /// Filtration through a membrane under a pressure drop ΔP: Poiseuille
    /// flow u = k (R_i² − ρ²) in each pore, k = ΔP/(4ηL).
    PressureDriven {
        /// ΔP, Pa.
        pressure_drop_pa: f64,
        /// k, 1/(nm·s).
        k_per_nm_s: f64,
    },
    /// Uniform shear u_x = γ̇ (z − L_z/2).
    Shear {
        /// γ̇, 1/s.
        rate_per_s: f64,
    },
}

/// What the drive keys of one species say, as written.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct SpeciesDriveKeys {
    /// `force_pN`.
    pub force_pn: Option<[f64; 3]>,
    /// `density_kg_per_m3`.
    pub density_kg_per_m3: Option<f64>,
    /// `charge_e`.
    pub charge_e: Option<f64>,
}

/// Thermal energy k_B T in pN·nm.
pub fn thermal_energy_pn_nm(temperature_k: f64) -> f64 {
    BOLTZMANN_J_PER_K * temperature_k * 1e21
}

pub(crate) fn invalid(
    file: &Path,
    key: impl Into<String>,
    value: impl ToString,
    allowed: &str,
) -> EngineError {
    EngineError::InvalidValue {
        file: file.to_path_buf(),
        key: key.into(),
        value: value.to_string(),
        allowed: allowed.into(),
    }
}

pub(crate) fn finite_within(file: &Path, key: &str, v: f64, limit: f64, unit: &str) -> Result<f64> {
    if v.is_finite() && v.abs() <= limit {
        Ok(v)
    } else {
        Err(invalid(
            file,
            key,
            v,
            &format!(
                "it must be a finite number from {:e} to {limit:e} {unit}",
                -limit
            ),
        ))
    }
}

/// The total constant force on species `i`, pN, from its keys and the
/// `[forces]` fields.
///
/// # Errors
/// A key out of range, gravity without the densities it needs, a charge
/// without a field (or the reverse is allowed: an uncharged species feels no field).
pub fn species_force_pn(
    file: &Path,
    i: usize,
    species: &Species,
    keys: &SpeciesDriveKeys,
    forces: Option<&RawForces>,
    medium_density_kg_per_m3: Option<f64>,
) -> Result<[f64; 3]> {
    let key = |k: &str| format!("species[{i}].{k}");
    let mut f = [0.0; 3];
    if let Some(given) = keys.force_pn {
        for (k, v) in given.iter().enumerate() {
            f[k] = finite_within(
                file,
                &key(&format!("force_pN[{k}]")),
                *v,
                FORCE_RANGE_PN,
                "pN",
            )?;
        }
    }
    let gravity = forces.and_then(|x| x.gravity_m_per_s2);
    if let Some(g) = gravity {
        let g = finite_within(file, "forces.gravity_m_per_s2", g, 1e6, "m/s²")?;
        let Some(rho_p) = keys.density_kg_per_m3 else {
            return Err(invalid(
                file,
                key("density_kg_per_m3"),
                "(missing)",
                "forces.gravity_m_per_s2 is set, so every species needs its density in kg/m³ (its buoyant weight)",
            ));
        };
        let Some(rho_m) = medium_density_kg_per_m3 else {
            return Err(invalid(
                file,
                "medium.density_kg_per_m3",
                "(missing)",
                "forces.gravity_m_per_s2 is set, so the medium's density in kg/m³ is needed for buoyancy",
            ));
        };
        let a_m = species.radius_nm * 1e-9;
        let volume = 4.0 / 3.0 * std::f64::consts::PI * a_m.powi(3);
        f[2] -= volume * (rho_p - rho_m) * g * 1e12;
    } else if keys.density_kg_per_m3.is_some() {
        return Err(invalid(
            file,
            key("density_kg_per_m3"),
            keys.density_kg_per_m3.unwrap_or(0.0),
            "it is used only with forces.gravity_m_per_s2; set gravity or remove the density",
        ));
    }
    if let Some(q) = keys.charge_e {
        let q = finite_within(file, &key("charge_e"), q, 1e9, "elementary charges")?;
        let field = forces.and_then(|x| x.electric_field_v_per_m.as_ref());
        let Some(e) = field else {
            return Err(invalid(
                file,
                key("charge_e"),
                q,
                "a charge is used only with forces.electric_field_V_per_m = [x, y, z]; set the field or remove the charge",
            ));
        };
        for (k, ek) in e.iter().enumerate() {
            f[k] += q * ELEMENTARY_CHARGE_C * ek * 1e12;
        }
    }
    for (k, v) in f.iter().enumerate() {
        if !v.is_finite() || v.abs() > FORCE_RANGE_PN {
            return Err(invalid(
                file,
                key("(total force)"),
                format!("{v:e} pN along {}", ["x", "y", "z"][k]),
                &format!("the sum of force_pN, buoyant weight and charge × field must stay within ±{FORCE_RANGE_PN:e} pN"),
            ));
        }
    }
    Ok(f)
}

/// Checks `[forces]` on its own (the field's shape).
///
/// # Errors
/// A field that is not three finite numbers.
pub fn validate_forces(file: &Path, forces: &RawForces) -> Result<()> {
    if let Some(e) = &forces.electric_field_v_per_m {
        if e.len() != 3 {
            return Err(invalid(
                file,
                "forces.electric_field_V_per_m",
                format!("{e:?}"),
                "it must list three components [x, y, z] in V/m",
            ));
        }
        for (k, v) in e.iter().enumerate() {
            finite_within(
                file,
                &format!("forces.electric_field_V_per_m[{k}]"),
                *v,
                1e10,
                "V/m",
            )?;
        }
    }
    Ok(())
}

/// Validates `[flow]` against the geometry and media it must run in.
///
/// # Errors
/// A key that does not belong to the kind, a missing or doubled speed, or
/// a flow in a setting where it is not defined (named in the message).
pub fn validate_flow(
    file: &Path,
    raw: &RawFlow,
    geometry: Option<&Geometry>,
    viscosity_pa_s: f64,
    has_obstacles: bool,
    has_crowders: bool,
) -> Result<FlowSpec> {
    if has_crowders {
        return Err(invalid(
            file,
            "flow.kind",
            format!("{:?}", raw.kind),
            "flows are not available with crowders (the crowd's step has no drift yet)",
        ));
    }
    if has_obstacles {
        return Err(invalid(
            file,
            "flow.kind",
            format!("{:?}", raw.kind),
            "flows are not available among fixed obstacles or fibres: the flow around them is not modelled",
        ));
    }
    match raw.kind.as_str() {
        "poiseuille" => {
            if raw.shear_rate_per_s.is_some() {
                return Err(invalid(
                    file,
                    "flow.shear_rate_per_s",
                    "(given)",
                    "it is used only with flow.kind = \"shear\"",
                ));
            }
            let g = geometry.ok_or_else(|| {
                invalid(
                    file,
                    "flow.kind",
                    "\"poiseuille\"",
                    "Poiseuille flow needs a [geometry] of kind \"cylinder\" (along z), \"slit\" (along x) or \"membrane\" (down through its pores)",
                )
            })?;
            // The square of the length that sets V from G: R²/8 (cylinder) or w²/12 (slit).
            let (conductance_nm2, channel) = match &g.shape {
                Shape::Cylinder { radius_nm, .. } => (radius_nm * radius_nm / 8.0, "cylinder"),
                Shape::Slit { width_nm } => (width_nm * width_nm / 12.0, "slit"),
                Shape::Membrane(m) => return validate_filtration(file, raw, g, m, viscosity_pa_s),
                other => {
                    return Err(invalid(
                        file,
                        "flow.kind",
                        "\"poiseuille\"",
                        &format!(
                            "Poiseuille flow is available in a \"cylinder\", a \"slit\" or a \"membrane\", not in a {}",
                            other.kind()
                        ),
                    ))
                }
            };
            if raw.pressure_drop_pa.is_some() {
                return Err(invalid(
                    file,
                    "flow.pressure_drop_Pa",
                    "(given)",
                    "it is used only with a membrane; a cylinder or slit takes flow.pressure_gradient_Pa_per_m",
                ));
            }
            if g.hydrodynamics.is_some()
                && channel == "cylinder"
                && g.pore_model != PoreModel::Cylinder
            {
                return Err(invalid(
                    file,
                    "geometry.pore_mobility",
                    "\"nearest_wall\"",
                    "flow with wall hydrodynamics uses the cylinder model's convective lag; the nearest-wall approximation has none (use \"cylinder\")",
                ));
            }
            let v_m_per_s = match (raw.mean_velocity_m_per_s, raw.pressure_gradient_pa_per_m) {
                (Some(v), None) => finite_within(
                    file,
                    "flow.mean_velocity_m_per_s",
                    v,
                    VELOCITY_RANGE_M_PER_S,
                    "m/s",
                )?,
                (None, Some(grad)) => {
                    let grad = finite_within(file, "flow.pressure_gradient_Pa_per_m", grad, 1e15, "Pa/m")?;
                    let v = grad * conductance_nm2 * 1e-18 / viscosity_pa_s;
                    finite_within(file, "flow.pressure_gradient_Pa_per_m", v, VELOCITY_RANGE_M_PER_S, "m/s of mean velocity it gives")
                        .map_err(|_| invalid(file, "flow.pressure_gradient_Pa_per_m", grad, &format!("it gives a mean velocity of {v:e} m/s, beyond ±{VELOCITY_RANGE_M_PER_S:e} m/s")))?
                }
                (Some(_), Some(_)) => {
                    return Err(invalid(
                        file,
                        "flow.pressure_gradient_Pa_per_m",
                        "(given with flow.mean_velocity_m_per_s)",
                        "give the mean velocity or the pressure gradient, not both",
                    ))
                }
                (None, None) => {
                    return Err(invalid(
                        file,
                        "flow.mean_velocity_m_per_s",
                        "(missing)",
                        "Poiseuille flow needs flow.mean_velocity_m_per_s or flow.pressure_gradient_Pa_per_m",
                    ))
                }
            };
            Ok(FlowSpec::Poiseuille {
                mean_velocity_nm_per_s: v_m_per_s * 1e9,
            })
        }
        "shear" => {
            for (k, given) in [
                ("mean_velocity_m_per_s", raw.mean_velocity_m_per_s.is_some()),
                (
                    "pressure_gradient_Pa_per_m",
                    raw.pressure_gradient_pa_per_m.is_some(),
                ),
            ] {
                if given {
                    return Err(invalid(
                        file,
                        format!("flow.{k}"),
                        "(given)",
                        "it is used only with flow.kind = \"poiseuille\"",
                    ));
                }
            }
            if geometry.is_some() {
                return Err(invalid(
                    file,
                    "flow.kind",
                    "\"shear\"",
                    "uniform shear is available in a periodic box without a [geometry]",
                ));
            }
            let rate = raw.shear_rate_per_s.ok_or_else(|| {
                invalid(
                    file,
                    "flow.shear_rate_per_s",
                    "(missing)",
                    "shear needs its rate γ̇ in 1/s",
                )
            })?;
            let rate = finite_within(file, "flow.shear_rate_per_s", rate, 1e12, "1/s")?;
            Ok(FlowSpec::Shear { rate_per_s: rate })
        }
        other => Err(invalid(
            file,
            "flow.kind",
            format!("{other:?}"),
            "allowed: \"poiseuille\" or \"shear\"",
        )),
    }
}

/// Validates filtration through a membrane: a downward mean velocity or a
/// pressure drop, steric pores only (the nearest-wall approximation of a
/// membrane's pores has no convective lag).
fn validate_filtration(
    file: &Path,
    raw: &RawFlow,
    g: &Geometry,
    m: &crate::space::shape::Membrane,
    viscosity_pa_s: f64,
) -> Result<FlowSpec> {
    if g.hydrodynamics.is_some() {
        return Err(invalid(
            file,
            "geometry.wall_hydrodynamics",
            "true",
            "filtration through a membrane is available with steric pores only (wall_hydrodynamics = false): \
             the membrane's nearest-wall approximation has no convective lag; a single pore with the cylinder model \
             (kind = \"cylinder\") gives the hydrodynamic K_c",
        ));
    }
    if raw.pressure_gradient_pa_per_m.is_some() {
        return Err(invalid(
            file,
            "flow.pressure_gradient_Pa_per_m",
            "(given)",
            "a membrane takes flow.pressure_drop_Pa (across the slab) or flow.mean_velocity_m_per_s",
        ));
    }
    let positive_within = |key: &str, v: f64, limit: f64, unit: &str| -> Result<f64> {
        if v.is_finite() && v > 0.0 && v <= limit {
            Ok(v)
        } else {
            Err(invalid(
                file,
                key,
                v,
                &format!(
                    "it must be a finite number above 0 and at most {limit:e} {unit}: filtration runs from the top bath (feed) down to the bottom bath (permeate)"
                ),
            ))
        }
    };
    match (raw.mean_velocity_m_per_s, raw.pressure_drop_pa) {
        (Some(v), None) => Ok(FlowSpec::Poiseuille {
            mean_velocity_nm_per_s: positive_within(
                "flow.mean_velocity_m_per_s",
                v,
                VELOCITY_RANGE_M_PER_S,
                "m/s",
            )? * 1e9,
        }),
        (None, Some(dp)) => {
            let dp = positive_within("flow.pressure_drop_Pa", dp, 1e9, "Pa")?;
            // u = ΔP (R² − ρ²)/(4ηL): k in 1/(nm s) with lengths in nm.
            let k_per_nm_s = dp / (4.0 * viscosity_pa_s * m.thickness_nm());
            let fastest = m
                .pores
                .iter()
                .map(|p| 0.5 * k_per_nm_s * p.radius_nm * p.radius_nm)
                .fold(0.0, f64::max);
            if fastest * 1e-9 > VELOCITY_RANGE_M_PER_S {
                return Err(invalid(
                    file,
                    "flow.pressure_drop_Pa",
                    dp,
                    &format!(
                        "it drives a mean pore velocity of {:e} m/s, beyond {VELOCITY_RANGE_M_PER_S:e} m/s",
                        fastest * 1e-9
                    ),
                ));
            }
            Ok(FlowSpec::PressureDriven {
                pressure_drop_pa: dp,
                k_per_nm_s,
            })
        }
        (Some(_), Some(_)) => Err(invalid(
            file,
            "flow.pressure_drop_Pa",
            "(given with flow.mean_velocity_m_per_s)",
            "give the mean velocity or the pressure drop, not both",
        )),
        (None, None) => Err(invalid(
            file,
            "flow.mean_velocity_m_per_s",
            "(missing)",
            "filtration needs flow.mean_velocity_m_per_s (in each pore) or flow.pressure_drop_Pa (across the membrane)",
        )),
    }
}

impl FlowSpec {
    /// Mean fluid velocity in a membrane pore of radius `r_nm`, nm/s
    /// (`None` for flows that are not filtration-type Poiseuille).
    pub fn pore_mean_velocity_nm_per_s(&self, r_nm: f64) -> Option<f64> {
        match *self {
            FlowSpec::Poiseuille {
                mean_velocity_nm_per_s,
            } => Some(mean_velocity_nm_per_s),
            FlowSpec::PressureDriven { k_per_nm_s, .. } => Some(0.5 * k_per_nm_s * r_nm * r_nm),
            FlowSpec::Shear { .. } => None,
        }
    }

    /// Volume flux through a membrane per unit of its area, Σ π R_i² V_i / A, nm/s.
    pub fn membrane_volume_flux_nm_per_s(&self, m: &crate::space::shape::Membrane) -> Option<f64> {
        let mut sum = 0.0;
        for p in &m.pores {
            sum += std::f64::consts::PI
                * p.radius_nm
                * p.radius_nm
                * self.pore_mean_velocity_nm_per_s(p.radius_nm)?;
        }
        Some(sum / m.area_nm2())
    }
}

/// A species' wall-interaction keys, as written.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct WallKeys {
    /// `surface_potential_mV`.
    pub surface_potential_mv: Option<f64>,
    /// `wall_well_depth_kT`.
    pub wall_well_depth_kt: Option<f64>,
    /// `wall_well_range_nm`.
    pub wall_well_range_nm: Option<f64>,
    /// `hamaker_constant_zJ` (van der Waals with the walls too).
    pub hamaker_zj: Option<f64>,
    /// `vdw_closest_gap_nm`.
    pub vdw_closest_gap_nm: Option<f64>,
}

/// The medium's electrolyte keys, as written.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct MediumKeys {
    /// `medium.ionic_strength_mol_per_L`.
    pub ionic_strength_mol_per_l: Option<f64>,
    /// `medium.relative_permittivity`.
    pub relative_permittivity: Option<f64>,
}

/// The soft wall interaction of species `i`: screened electrostatics when
/// it and the walls carry surface potentials, and a short-range well.
///
/// # Errors
/// A potential on one side only, electrostatics without the medium's ionic
/// strength and permittivity, a well without both depth and range, or a
/// setting without walls that take it (named in the message).
#[allow(clippy::too_many_arguments)]
pub fn species_wall_potential(
    file: &Path,
    i: usize,
    species: &Species,
    raw: &WallKeys,
    medium: &MediumKeys,
    temperature_k: f64,
    geometry: Option<&Geometry>,
    wall_potential_mv: Option<f64>,
    bodies_charged: bool,
) -> Result<crate::space::potentials::WallPotential> {
    use crate::space::potentials::WallPotential;
    let key = |k: &str| format!("species[{i}].{k}");
    let mut p = WallPotential::default();
    // The species' potential meets the walls' when they have one, else the obstacles' or fibres'.
    let surface_potential_mv = raw
        .surface_potential_mv
        .filter(|_| wall_potential_mv.is_some() || !bodies_charged);
    // Van der Waals acts at the walls of any geometry (else only at obstacles and fibres).
    let vdw = (raw.hamaker_zj.is_some() || raw.vdw_closest_gap_nm.is_some()) && geometry.is_some();
    let wants = surface_potential_mv.is_some()
        || raw.wall_well_depth_kt.is_some()
        || raw.wall_well_range_nm.is_some()
        || vdw;
    if !wants {
        return Ok(p);
    }
    let first_key = if surface_potential_mv.is_some() {
        "surface_potential_mV"
    } else if raw.wall_well_depth_kt.is_some() || raw.wall_well_range_nm.is_some() {
        "wall_well_depth_kT"
    } else {
        "hamaker_constant_zJ"
    };
    let shape_ok = match geometry {
        Some(g) => match &g.shape {
            Shape::PlaneWall { .. } | Shape::Slit { .. } => true,
            Shape::Cylinder { .. } => {
                g.hydrodynamics.is_none() || g.pore_model == PoreModel::Cylinder
            }
            Shape::Membrane(_) => true,
        },
        None => false,
    };
    if !shape_ok {
        return Err(invalid(
            file,
            key(first_key),
            "(given)",
            "wall interactions act at the walls of a [geometry] of kind \"plane_wall\" (the floor), \"slit\", \"cylinder\" \
             (with pore_mobility = \"cylinder\" under wall hydrodynamics) or \"membrane\" (pore walls and faces); not in an open box (among obstacles or fibres, give them surface_potential_mV)",
        ));
    }
    if species.crowder {
        return Err(invalid(
            file,
            key(first_key),
            "(given)",
            "wall interactions are not available for crowders yet",
        ));
    }
    if vdw {
        if let Some((hamaker, gap)) =
            van_der_waals(file, i, raw.hamaker_zj, raw.vdw_closest_gap_nm)?
        {
            p.hamaker_pn_nm = hamaker;
            p.closest_gap_nm = gap;
            p.radius_nm = species.radius_nm;
        }
    }
    match (surface_potential_mv, wall_potential_mv) {
        (Some(psi), Some(psi_wall)) => {
            let psi = finite_within(file, &key("surface_potential_mV"), psi, 1e3, "mV")?;
            let psi_wall = finite_within(file, "geometry.wall_surface_potential_mV", psi_wall, 1e3, "mV")?;
            let (eps, kappa) = electrolyte(file, medium, temperature_k)?;
            p.kappa_per_nm = kappa;
            p.electrostatic_pn_nm = WallPotential::electrostatic_prefactor_pn_nm(
                eps,
                temperature_k,
                species.radius_nm,
                psi,
                psi_wall,
            );
        }
        (Some(_), None) => {
            return Err(invalid(
                file,
                key("surface_potential_mV"),
                "(given)",
                "screened electrostatics needs the walls' potential too: geometry.wall_surface_potential_mV \
                 (or their charge density, geometry.wall_surface_charge_density_mC_per_m2)",
            ))
        }
        (None, _) => {}
    }
    if let Some((depth, range)) = well(
        file,
        (&key("wall_well_depth_kT"), &key("wall_well_range_nm")),
        (raw.wall_well_depth_kt, raw.wall_well_range_nm),
        temperature_k,
        "the walls",
    )? {
        p.well_depth_pn_nm = depth;
        p.well_range_nm = range;
    }
    if let Some(Shape::Membrane(m)) = geometry.map(|g| &g.shape) {
        // The baths emit as if diffusion were free at their faces: the walls' pull must have died out there.
        let reach = p.range_nm(1e-3 * thermal_energy_pn_nm(temperature_k));
        let room = m.reservoir_depth_nm() - species.radius_nm;
        if reach >= room {
            return Err(invalid(
                file,
                key(first_key),
                "(given)",
                &format!(
                    "in a membrane the wall interaction must fade (below 0.001 k_BT) before the bath faces: it reaches {reach:.2} nm \
                     from the membrane's faces, but the reservoirs leave {room:.2} nm for the centre; deepen the reservoirs \
                     (box.edges_nm[2]) or shorten the interaction"
                ),
            ));
        }
    }
    Ok(p)
}

/// The medium's relative permittivity and κ (1/nm) for screened electrostatics.
pub(crate) fn electrolyte(
    file: &Path,
    medium: &MediumKeys,
    temperature_k: f64,
) -> Result<(f64, f64)> {
    use crate::space::potentials::debye_length_nm;
    let ionic = medium.ionic_strength_mol_per_l.ok_or_else(|| {
        invalid(
            file,
            "medium.ionic_strength_mol_per_L",
            "(missing)",
            "screened electrostatics needs the ionic strength of the (1:1) electrolyte in mol/L",
        )
    })?;
    if !(ionic.is_finite() && ionic > 0.0 && ionic <= 10.0) {
        return Err(invalid(
            file,
            "medium.ionic_strength_mol_per_L",
            ionic,
            "it must be a finite number above 0 and at most 10 mol/L",
        ));
    }
    let eps = medium.relative_permittivity.ok_or_else(|| {
        invalid(
            file,
            "medium.relative_permittivity",
            "(missing)",
            "screened electrostatics needs the medium's relative permittivity (about 78 for water at 25 °C)",
        )
    })?;
    if !(eps.is_finite() && (1.0..=1000.0).contains(&eps)) {
        return Err(invalid(
            file,
            "medium.relative_permittivity",
            eps,
            "it must be a finite number from 1 to 1000",
        ));
    }
    Ok((eps, 1.0 / debye_length_nm(eps, temperature_k, ionic)))
}

/// A well's depth (pN·nm) and range (nm) from its two keys, both or none.
pub(crate) fn well(
    file: &Path,
    (depth_key, range_key): (&str, &str),
    (depth, range): (Option<f64>, Option<f64>),
    temperature_k: f64,
    at: &str,
) -> Result<Option<(f64, f64)>> {
    match (depth, range) {
        (Some(depth), Some(range)) => {
            if !(depth.is_finite() && (0.0..=100.0).contains(&depth)) {
                return Err(invalid(
                    file,
                    depth_key,
                    depth,
                    "it must be a finite number from 0 to 100 k_BT",
                ));
            }
            if !(range.is_finite() && range > 0.0 && range <= 1e4) {
                return Err(invalid(
                    file,
                    range_key,
                    range,
                    "it must be a finite number above 0 and at most 1e4 nm",
                ));
            }
            Ok(Some((depth * thermal_energy_pn_nm(temperature_k), range)))
        }
        (None, None) => Ok(None),
        (Some(_), None) => Err(invalid(
            file,
            range_key,
            "(missing)",
            &format!("a well at {at} needs both its depth and its range ({range_key})"),
        )),
        (None, Some(_)) => Err(invalid(
            file,
            depth_key,
            "(missing)",
            &format!("a well at {at} needs both its depth ({depth_key}) and its range"),
        )),
    }
}

/// The Hamaker constant (pN·nm, the same number as in zJ) and closest gap
/// (nm) of species `i`, both or none.
pub(crate) fn van_der_waals(
    file: &Path,
    i: usize,
    hamaker_zj: Option<f64>,
    gap_nm: Option<f64>,
) -> Result<Option<(f64, f64)>> {
    let key = |k: &str| format!("species[{i}].{k}");
    match (hamaker_zj, gap_nm) {
        (None, None) => Ok(None),
        (Some(a), Some(d)) => {
            if !(a.is_finite() && a != 0.0 && a.abs() <= 1e3) {
                return Err(invalid(
                    file,
                    key("hamaker_constant_zJ"),
                    a,
                    "it must be a finite non-zero number from -1000 to 1000 zJ (most media: 1 to 100 zJ)",
                ));
            }
            if !(d.is_finite() && d > 0.0 && d <= 100.0) {
                return Err(invalid(
                    file,
                    key("vdw_closest_gap_nm"),
                    d,
                    "it must be a finite number above 0 and at most 100 nm (commonly 0.1 to 0.5 nm)",
                ));
            }
            Ok(Some((a, d)))
        }
        (Some(_), None) => Err(invalid(
            file,
            key("vdw_closest_gap_nm"),
            "(missing)",
            "van der Waals needs both the Hamaker constant and the closest gap (vdw_closest_gap_nm) below which it is held",
        )),
        (None, Some(_)) => Err(invalid(
            file,
            key("hamaker_constant_zJ"),
            "(missing)",
            "van der Waals needs both the Hamaker constant (hamaker_constant_zJ) and the closest gap",
        )),
    }
}

/// A species' keys for its soft interaction with obstacles and fibres, as written.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct BodyKeys {
    /// `surface_potential_mV`.
    pub surface_potential_mv: Option<f64>,
    /// `hamaker_constant_zJ`.
    pub hamaker_zj: Option<f64>,
    /// `vdw_closest_gap_nm`.
    pub vdw_closest_gap_nm: Option<f64>,
    /// `obstacle_well_depth_kT`.
    pub well_depth_kt: Option<f64>,
    /// `obstacle_well_range_nm`.
    pub well_range_nm: Option<f64>,
}

/// What the scenario's obstacles and fibres are, for their soft interactions.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Bodies {
    /// True with `[obstacles]`.
    pub spheres: bool,
    /// True with `[fibres]`.
    pub fibres: bool,
    /// `obstacles.surface_potential_mV`.
    pub sphere_potential_mv: Option<f64>,
    /// `fibres.surface_potential_mV`.
    pub fibre_potential_mv: Option<f64>,
}

/// The soft interaction of species `i` with the fixed spheres and fibres:
/// screened electrostatics when it and they carry surface potentials, van
/// der Waals, and a short-range well.
///
/// # Errors
/// A key without bodies (or walls) to act on, a setting the step does not
/// support (crowders, a `[geometry]`), or a value out of range.
#[allow(clippy::too_many_arguments)]
pub fn species_body_potential(
    file: &Path,
    i: usize,
    species: &Species,
    raw: &BodyKeys,
    medium: &MediumKeys,
    temperature_k: f64,
    bodies: &Bodies,
    has_geometry: bool,
    has_crowders: bool,
) -> Result<crate::space::potentials::BodyPotential> {
    use crate::space::potentials::{BodyPotential, WallPotential};
    let key = |k: &str| format!("species[{i}].{k}");
    let any_body = bodies.spheres || bodies.fibres;
    let charged = bodies.sphere_potential_mv.is_some() || bodies.fibre_potential_mv.is_some();
    let psi = raw.surface_potential_mv.filter(|_| charged);
    let vdw = raw.hamaker_zj.is_some() || raw.vdw_closest_gap_nm.is_some();
    let well_given = raw.well_depth_kt.is_some() || raw.well_range_nm.is_some();
    if vdw && !any_body && !has_geometry && !has_crowders {
        return Err(invalid(
            file,
            key(if raw.hamaker_zj.is_some() {
                "hamaker_constant_zJ"
            } else {
                "vdw_closest_gap_nm"
            }),
            "(given)",
            "van der Waals acts at walls ([geometry]), obstacles, fibres or between the particles of a crowd; the scenario has none",
        ));
    }
    if well_given && !any_body {
        return Err(invalid(
            file,
            key(if raw.well_depth_kt.is_some() { "obstacle_well_depth_kT" } else { "obstacle_well_range_nm" }),
            "(given)",
            "a well at obstacles needs [obstacles] or [fibres] (at walls: wall_well_depth_kT and wall_well_range_nm)",
        ));
    }
    let wants = psi.is_some() || (vdw && any_body) || well_given;
    let mut p = BodyPotential {
        radius_nm: species.radius_nm,
        ..Default::default()
    };
    if !wants {
        return Ok(p);
    }
    let first_key = if psi.is_some() {
        "surface_potential_mV"
    } else if well_given {
        "obstacle_well_depth_kT"
    } else {
        "hamaker_constant_zJ"
    };
    let refuse = if species.crowder || has_crowders {
        Some("soft interactions with obstacles and fibres are not available with crowders yet")
    } else if has_geometry {
        Some("soft interactions with obstacles and fibres are not available with a [geometry] yet (in an open box only)")
    } else {
        None
    };
    if let Some(reason) = refuse {
        return Err(invalid(file, key(first_key), "(given)", reason));
    }
    if let Some(psi) = psi {
        let psi = finite_within(file, &key("surface_potential_mV"), psi, 1e3, "mV")?;
        let (eps, kappa) = electrolyte(file, medium, temperature_k)?;
        p.kappa_per_nm = kappa;
        // The prefactor is linear in Derjaguin's radius: stored per nm of it.
        let per_nm = |k: &str, psi_body: f64| -> Result<f64> {
            let psi_body = finite_within(file, k, psi_body, 1e3, "mV")?;
            Ok(WallPotential::electrostatic_prefactor_pn_nm(
                eps,
                temperature_k,
                1.0,
                psi,
                psi_body,
            ))
        };
        if let Some(v) = bodies.sphere_potential_mv {
            p.sphere_electrostatic_pn = per_nm("obstacles.surface_potential_mV", v)?;
        }
        if let Some(v) = bodies.fibre_potential_mv {
            p.fibre_electrostatic_pn = per_nm("fibres.surface_potential_mV", v)?;
        }
    }
    if let Some((hamaker, gap)) = van_der_waals(file, i, raw.hamaker_zj, raw.vdw_closest_gap_nm)? {
        p.hamaker_pn_nm = hamaker;
        p.closest_gap_nm = gap;
    }
    if let Some((depth, range)) = well(
        file,
        (
            &key("obstacle_well_depth_kT"),
            &key("obstacle_well_range_nm"),
        ),
        (raw.well_depth_kt, raw.well_range_nm),
        temperature_k,
        "obstacles and fibres",
    )? {
        p.well_depth_pn_nm = depth;
        p.well_range_nm = range;
    }
    Ok(p)
}
