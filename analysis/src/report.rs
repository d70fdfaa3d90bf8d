//! Model values for a scenario, as reports print them beside the measurement.

use crate::models;
use std::collections::BTreeMap;
use std::f64::consts::PI;
use thicket_engine::obstacles::{FixedObstacles, Region};
use thicket_engine::Scenario;

/// Predicted D_eff/D0 by model name for the species `species` of a scenario.
///
/// - Free diffusion (nothing to touch): 1 by Stokes–Einstein.
/// - Fixed spheres: the obstruction models at the fraction excluded from the
///   tracer centre, φ_excl = Σ (4/3)π(a + b_i)³ / V (REFERENCES.md), with
///   the obstacles placed again from the scenario's seed (as the run did);
///   Mackie–Meares at the obstacles' own fraction, its original variable.
/// - Fibres: Ogston at the fibre volume fraction.
/// - Mobile hard spheres (crowders): the long-time self-diffusion of the
///   crowders themselves, dilute 1 − 2φ and Brady's estimate.
pub fn scenario_models(scenario: &Scenario, species: &str) -> BTreeMap<String, f64> {
    let mut out = BTreeMap::new();
    let Some(tracer) = scenario.species.iter().find(|s| s.name == species) else {
        return out;
    };
    if !scenario.has_contacts() {
        out.insert("free diffusion (Stokes-Einstein)".to_string(), 1.0);
        return out;
    }
    let volume: f64 = scenario.sim_box.edges_nm.iter().product();
    if scenario.obstacles.is_some() || scenario.fibres.is_some() {
        if let Ok(fixed) = FixedObstacles::build(scenario) {
            let spheres = &fixed.spheres;
            if !spheres.is_empty() {
                // Obstacles in a pore fill the pore: fractions are of its volume (bulk models, local φ).
                let region = Region::of(scenario);
                let volume = region.volume_nm3(&scenario.sim_box);
                let phi = spheres.volume_fraction_in(&region, &scenario.sim_box);
                let excluded: f64 = spheres
                    .radii_nm
                    .iter()
                    .map(|b| 4.0 / 3.0 * PI * (tracer.radius_nm + b).powi(3))
                    .sum::<f64>()
                    / volume;
                // Point-like: the tracer is under a twentieth of the smallest obstacle.
                let smallest = spheres
                    .radii_nm
                    .iter()
                    .copied()
                    .fold(f64::INFINITY, f64::min);
                let point_tracer = tracer.radius_nm <= 0.05 * smallest;
                if let Ok(v) = models::maxwell_tracer(excluded) {
                    out.insert("Maxwell tracer 2/(2+phi_excl)".into(), v);
                }
                if let Ok(v) = models::mackie_meares(phi) {
                    out.insert("Mackie-Meares at obstacle phi".into(), v);
                }
                // Torquato's estimate is for a point tracer among non-overlapping spheres.
                if point_tracer && !spheres.may_overlap {
                    if let Ok(v) = models::torquato_tracer(excluded) {
                        out.insert("Torquato three-point".into(), v);
                    }
                }
            }
            let fibres = &fixed.fibres;
            if !fibres.is_empty() {
                let phi = fibres.nominal_volume_fraction(&scenario.sim_box);
                if let Ok(v) = models::ogston_fibres(phi, tracer.radius_nm, fibres.radius_nm) {
                    out.insert("Ogston fibres".into(), v);
                }
            }
        }
    }
    if tracer.crowder {
        let phi: f64 = scenario
            .species
            .iter()
            .filter(|s| s.crowder)
            .map(|s| s.count as f64 * 4.0 / 3.0 * PI * s.radius_nm.powi(3))
            .sum::<f64>()
            / volume;
        if let Ok(v) = models::hard_sphere_self_diffusion_dilute(phi) {
            out.insert("hard spheres, dilute 1-2phi".into(), v);
        }
        if let Ok(v) = models::brady_long_time_self_diffusion(phi) {
            out.insert("hard spheres, Brady 1994 (no HI)".into(), v);
        }
    }
    out
}

/// The resolved scenario stored in a thicket trajectory, if there is one.
///
/// Returns `None` for files from other writers or with an unreadable scenario.
pub fn stored_scenario(path: &std::path::Path) -> Option<Scenario> {
    let trajectory = crate::read::Trajectory::open(path).ok()?;
    let text = trajectory.run_parameters()?.scenario_toml.clone()?;
    Scenario::from_text(&text, path, &[]).ok()
}
