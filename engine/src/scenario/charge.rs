//! Surface charge densities given in place of surface potentials.
//!
//! Each charged surface (a species, the walls, the obstacles, the fibres)
//! takes either `…surface_potential_mV` or `…surface_charge_density_mC_per_m2`,
//! never both. A charge density becomes the potential once, here, by the
//! Grahame equation of a flat surface in a 1:1 electrolyte
//! ([`grahame_potential_mv`]); everything downstream sees the potential only.
//! On spheres and fibres the planar form is an approximation for κa ≫ 1.

use crate::base::error::{EngineError, Result};
use crate::scenario::drive::{electrolyte, MediumKeys};
use crate::space::potentials::grahame_potential_mv;
use serde::Serialize;
use std::path::Path;

/// The largest surface charge density accepted, mC/m² in magnitude (1 C/m²
/// is about six elementary charges per nm², beyond any real surface).
pub const MAX_CHARGE_DENSITY_MC_PER_M2: f64 = 1e3;

/// One surface whose potential came from its charge density.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SurfaceCharge {
    /// The key that gave the charge density, e.g. `species[0].surface_charge_density_mC_per_m2`.
    pub key: String,
    /// The potential key it stands in for, e.g. `species[0].surface_potential_mV`.
    pub potential_key: String,
    /// The charge density, mC/m².
    pub charge_density_mc_per_m2: f64,
    /// The surface potential it gives, mV (Grahame 1947, planar).
    pub potential_mv: f64,
}

fn invalid(file: &Path, key: &str, value: impl ToString, allowed: String) -> EngineError {
    EngineError::InvalidValue {
        file: file.to_path_buf(),
        key: key.into(),
        value: value.to_string(),
        allowed,
    }
}

/// Settles one surface's potential from its two keys: `potential` is left
/// as given when no charge density is given, and set from the charge
/// density otherwise. `prefix` is the surface's key path (`species[0].`,
/// `geometry.wall_`, `obstacles.`, `fibres.`).
///
/// # Errors
/// Both keys given, a charge density out of range, or a charge density
/// without the medium's ionic strength or relative permittivity (each
/// error names the key).
pub fn settle_potential(
    file: &Path,
    prefix: &str,
    potential: &mut Option<f64>,
    charge_density_mc_per_m2: Option<f64>,
    medium: &MediumKeys,
    temperature_k: f64,
) -> Result<Option<SurfaceCharge>> {
    let Some(sigma) = charge_density_mc_per_m2 else {
        return Ok(None);
    };
    let key = format!("{prefix}surface_charge_density_mC_per_m2");
    let potential_key = format!("{prefix}surface_potential_mV");
    if potential.is_some() {
        return Err(invalid(
            file,
            &key,
            sigma,
            format!(
                "give either {potential_key} or {key}, not both (the charge density sets the potential)"
            ),
        ));
    }
    if !(sigma.is_finite() && sigma.abs() <= MAX_CHARGE_DENSITY_MC_PER_M2) {
        return Err(invalid(
            file,
            &key,
            sigma,
            format!(
                "it must be a finite number from -{MAX_CHARGE_DENSITY_MC_PER_M2} to {MAX_CHARGE_DENSITY_MC_PER_M2} mC/m² \
                 (most surfaces: a few to a few hundred)"
            ),
        ));
    }
    for (missing, given, what) in [
        (
            "medium.ionic_strength_mol_per_L",
            medium.ionic_strength_mol_per_l.is_some(),
            "ionic strength (mol/L) of the 1:1 electrolyte",
        ),
        (
            "medium.relative_permittivity",
            medium.relative_permittivity.is_some(),
            "relative permittivity (about 78 for water at 25 °C)",
        ),
    ] {
        if !given {
            return Err(invalid(
                file,
                missing,
                "(missing)",
                format!(
                    "{key} is turned into a surface potential by the Grahame equation, which needs the medium's {what}"
                ),
            ));
        }
    }
    // The same range checks as the screened electrostatics that will use the potential.
    let (eps, _) = electrolyte(file, medium, temperature_k)?;
    let ionic = medium.ionic_strength_mol_per_l.unwrap_or_default();
    let psi = grahame_potential_mv(sigma, eps, temperature_k, ionic);
    *potential = Some(psi);
    Ok(Some(SurfaceCharge {
        key,
        potential_key,
        charge_density_mc_per_m2: sigma,
        potential_mv: psi,
    }))
}

/// An error raised while validating the potentials that came from charge
/// densities, retold with the key the file gave: the charge density and the
/// potential it became.
pub fn name_given_keys(error: EngineError, charges: &[SurfaceCharge]) -> EngineError {
    match error {
        EngineError::InvalidValue {
            file,
            key,
            value,
            allowed,
        } => match charges.iter().find(|c| c.potential_key == key) {
            Some(c) => EngineError::InvalidValue {
                file,
                key: c.key.clone(),
                value: if value.starts_with('(') {
                    value
                } else {
                    format!(
                        "{} (ψ = {:.4} mV by the Grahame equation)",
                        c.charge_density_mc_per_m2, c.potential_mv
                    )
                },
                allowed,
            },
            None => EngineError::InvalidValue {
                file,
                key,
                value,
                allowed,
            },
        },
        other => other,
    }
}
