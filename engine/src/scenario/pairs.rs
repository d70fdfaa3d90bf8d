//! The soft interactions between mobile particles, validated from the
//! species keys: screened electrostatics between two species that both
//! carry `surface_potential_mV`, van der Waals between two that both carry
//! `hamaker_constant_zJ`, and a short-range well between two that both carry
//! `pair_well_depth_kT` and `pair_well_range_nm`.
//!
//! A pair interacts when at least one of its species is a crowder (tracers
//! are ideal among themselves, as for hard contacts). Unlike species combine
//! by common practice: the well's depth is the geometric mean and its range
//! the arithmetic mean (Lorentz–Berthelot), the Hamaker constant the
//! geometric mean, the closest van der Waals gap the larger of the two.

use crate::base::error::Result;
use crate::scenario::drive::{
    electrolyte, finite_within, invalid, thermal_energy_pn_nm, van_der_waals, well, MediumKeys,
};
use crate::scenario::species::Species;
use crate::space::pairs::{PairPotential, PairTable};
use crate::space::potentials::{derjaguin_radius_nm, Facing, WallPotential};
use crate::space::soft::{pair_cutoff_nm, CUTOFF_TOLERANCE_KT};
use std::path::Path;

/// A species' pair-interaction keys, as written.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct PairKeys {
    /// `surface_potential_mV`.
    pub surface_potential_mv: Option<f64>,
    /// `hamaker_constant_zJ`.
    pub hamaker_zj: Option<f64>,
    /// `vdw_closest_gap_nm`.
    pub vdw_closest_gap_nm: Option<f64>,
    /// `pair_well_depth_kT`.
    pub well_depth_kt: Option<f64>,
    /// `pair_well_range_nm`.
    pub well_range_nm: Option<f64>,
}

/// What the rest of the scenario says about where pairs can act.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairSetting<'a> {
    /// The medium's electrolyte keys.
    pub medium: MediumKeys,
    /// Temperature, K.
    pub temperature_k: f64,
    /// True with a `[geometry]`.
    pub has_geometry: bool,
    /// True with `[obstacles]` or `[fibres]`.
    pub has_bodies: bool,
    /// Box edges, nm.
    pub edges_nm: &'a [f64; 3],
    /// Periodic axes.
    pub periodic: &'a [bool; 3],
}

/// True when a species' `surface_potential_mV` and `hamaker_constant_zJ`
/// act between particles rather than at walls or bodies: a crowd in an
/// open box whose walls and bodies carry no interaction of their own.
pub fn pairs_take_species_keys(species: &[Species], has_geometry: bool, has_bodies: bool) -> bool {
    species.iter().any(|s| s.crowder) && !has_geometry && !has_bodies
}

/// The pair table of a scenario, or None when no pair interacts softly.
///
/// # Errors
/// A pair key with no partner that carries it too, a pair interaction
/// where the crowd cannot take one yet (a `[geometry]`, walled box faces,
/// obstacles or fibres), a value out of range, or a box too small for the cut-off.
pub fn pair_table(
    file: &Path,
    species: &[Species],
    keys: &[PairKeys],
    setting: &PairSetting,
) -> Result<Option<PairTable>> {
    let kt = thermal_energy_pn_nm(setting.temperature_k);
    let key = |i: usize, k: &str| format!("species[{i}].{k}");
    let open = pairs_take_species_keys(species, setting.has_geometry, setting.has_bodies);
    // The well keys belong to pairs alone; the others only in an open crowd.
    for (i, k) in keys.iter().enumerate() {
        let well_given = k.well_depth_kt.is_some() || k.well_range_nm.is_some();
        if !well_given {
            continue;
        }
        let first = if k.well_depth_kt.is_some() {
            "pair_well_depth_kT"
        } else {
            "pair_well_range_nm"
        };
        if !species.iter().any(|s| s.crowder) {
            return Err(invalid(
                file,
                key(i, first),
                "(given)",
                "a well between particles acts in a crowd: at least one species must have role = \"crowder\" \
                 (tracers are ideal among themselves)",
            ));
        }
        if !open {
            return Err(invalid(
                file,
                key(i, first),
                "(given)",
                "interactions between mobile particles are available in an open box only yet \
                 (no [geometry], [obstacles] or [fibres])",
            ));
        }
    }
    if !open {
        return Ok(None);
    }
    if let Some(k) = setting.periodic.iter().position(|p| !p) {
        let i = keys
            .iter()
            .position(|k| *k != PairKeys::default())
            .unwrap_or(0);
        if keys.iter().any(|k| *k != PairKeys::default()) {
            return Err(invalid(
                file,
                format!("box.periodic[{k}]"),
                "false",
                &format!(
                    "interactions between mobile particles (species[{i}]) need a box periodic on every axis yet: \
                     the step's Metropolis test assumes unfolded moves"
                ),
            ));
        }
    }
    let n = species.len();
    let interacts = |a: usize, b: usize| species[a].crowder || species[b].crowder;
    let mut psi = vec![None; n];
    let mut vdw = vec![None; n];
    let mut wells = vec![None; n];
    for (i, k) in keys.iter().enumerate() {
        if let Some(v) = k.surface_potential_mv {
            psi[i] = Some(finite_within(
                file,
                &key(i, "surface_potential_mV"),
                v,
                1e3,
                "mV",
            )?);
        }
        vdw[i] = van_der_waals(file, i, k.hamaker_zj, k.vdw_closest_gap_nm)?;
        wells[i] = well(
            file,
            (&key(i, "pair_well_depth_kT"), &key(i, "pair_well_range_nm")),
            (k.well_depth_kt, k.well_range_nm),
            setting.temperature_k,
            "other particles",
        )?;
    }
    // Every key must meet a partner that carries it too.
    for i in 0..n {
        let partner = |has: &dyn Fn(usize) -> bool| (0..n).any(|j| interacts(i, j) && has(j));
        for (given, name, has) in [
            (
                psi[i].is_some(),
                "surface_potential_mV",
                &(|j: usize| psi[j].is_some()) as &dyn Fn(usize) -> bool,
            ),
            (vdw[i].is_some(), "hamaker_constant_zJ", &|j: usize| {
                vdw[j].is_some()
            }),
            (wells[i].is_some(), "pair_well_depth_kT", &|j: usize| {
                wells[j].is_some()
            }),
        ] {
            if given && !partner(has) {
                return Err(invalid(
                    file,
                    key(i, name),
                    "(given)",
                    &format!(
                        "in a crowd in an open box this key acts between particles, but no species that species '{}' meets \
                         (crowders meet everyone, tracers only crowders) carries {name} too",
                        species[i].name
                    ),
                ));
            }
        }
    }
    let mut table = PairTable::new(n);
    let mut electrolyte_of = None;
    for a in 0..n {
        for b in a..n {
            // A lone particle has no pair with its own species.
            if !interacts(a, b) || (a == b && species[a].count < 2) {
                continue;
            }
            let (ra, rb) = (species[a].radius_nm, species[b].radius_nm);
            let mut u = WallPotential {
                radius_nm: ra,
                facing: Facing::Sphere(rb),
                ..Default::default()
            };
            if let (Some(pa), Some(pb)) = (psi[a], psi[b]) {
                let (eps, kappa) = match electrolyte_of {
                    Some(e) => e,
                    None => *electrolyte_of.insert(electrolyte(
                        file,
                        &setting.medium,
                        setting.temperature_k,
                    )?),
                };
                u.kappa_per_nm = kappa;
                u.electrostatic_pn_nm = WallPotential::electrostatic_prefactor_pn_nm(
                    eps,
                    setting.temperature_k,
                    derjaguin_radius_nm(ra, Facing::Sphere(rb)),
                    pa,
                    pb,
                );
            }
            if let (Some((ha, ga)), Some((hb, gb))) = (vdw[a], vdw[b]) {
                if ha * hb < 0.0 {
                    return Err(invalid(
                        file,
                        key(b, "hamaker_constant_zJ"),
                        hb,
                        &format!(
                            "the pair's Hamaker constant is the geometric mean of the two species' (common practice), which needs \
                             both of one sign; species[{a}] has {ha} zJ"
                        ),
                    ));
                }
                u.hamaker_pn_nm = ha.signum() * (ha * hb).sqrt();
                u.closest_gap_nm = ga.max(gb);
            }
            if let (Some((da, wa)), Some((db, wb))) = (wells[a], wells[b]) {
                u.well_depth_pn_nm = (da * db).sqrt();
                u.well_range_nm = 0.5 * (wa + wb);
            }
            if u.is_none() {
                continue;
            }
            let cut = pair_cutoff_nm(&u, CUTOFF_TOLERANCE_KT * kt);
            let p = PairPotential {
                u,
                contact_nm: ra + rb,
                cutoff_gap_nm: cut,
            };
            // One nearest image per pair within the cut-off.
            let min_edge = setting
                .edges_nm
                .iter()
                .cloned()
                .fold(f64::INFINITY, f64::min);
            if min_edge <= 2.0 * p.cutoff_distance_nm() {
                return Err(invalid(
                    file,
                    "box.edges_nm",
                    format!("{:?}", setting.edges_nm),
                    &format!(
                        "the interaction of species '{}' and '{}' reaches {:.2} nm between centres (cut where |U| < {} k_BT); \
                         every edge must exceed twice that, so that each pair has one nearest image",
                        species[a].name,
                        species[b].name,
                        p.cutoff_distance_nm(),
                        CUTOFF_TOLERANCE_KT
                    ),
                ));
            }
            table.set(a, b, p);
        }
    }
    Ok((!table.is_empty()).then_some(table))
}
