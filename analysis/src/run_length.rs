//! How long a run must be for its MSD to reach the long-time (diffusive)
//! regime, so that D_eff is a true long-time value and not an apparent one.
//!
//! Among obstacles or crowders the MSD bends from D0 to D_eff over a
//! transient. Its length grows with the obstacle spacing ℓ and with the
//! strength of the obstruction: α(τ) − 1 decays like (D0/D_eff − 1)·τ_s/τ
//! with τ_s = ℓ²/D0, so the crossover is taken as
//! τ_c = [`CROSSOVER_FACTOR`] · (D0/D_eff − 1) · ℓ²/D0, with D_eff/D0 from
//! the scenario's first applicable model. The factor is a rule of thumb
//! calibrated on the crossover times measured in this project's demo
//! scenarios (a 3.5 nm tracer among 15 nm beads at φ = 0.05 … 0.3, where
//! the measured crossovers were 0.4–1.8 times this estimate), not a
//! published constant. The automatic fit window needs lags past the
//! crossover, and lags only up to a quarter of the run, so the run should
//! last [`DURATION_OVER_CROSSOVER`] τ_c.
//!
//! Walls and pores without obstacles need no transient: particles start in
//! equilibrium across the gap, where the lateral or axial MSD is linear
//! from the first lag.

use crate::model_table::scenario_model_table;
use serde::Serialize;
use std::f64::consts::PI;
use thicket_engine::obstacles::spheres::{FixedObstacles, Region};
use thicket_engine::Scenario;

/// τ_c = this × (D0/D_eff − 1) × ℓ²/D0 (rule of thumb, see the module docs).
pub const CROSSOVER_FACTOR: f64 = 5.0;

/// Recommended run length in crossover times: lags up to a quarter of the
/// run then reach 3 τ_c, enough for an automatic window past the crossover.
pub const DURATION_OVER_CROSSOVER: f64 = 12.0;

/// The estimate for one species of a scenario.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct RegimeEstimate {
    /// Species.
    pub species: String,
    /// What sets the length scale, e.g. "mean spacing of the obstacles".
    pub basis: String,
    /// The length scale ℓ, nm.
    pub length_scale_nm: f64,
    /// D_eff/D0 used for the strength of the obstruction, and its model.
    pub predicted_d_eff_over_d0: f64,
    /// The model that gave it.
    pub predicted_by: String,
    /// Estimated crossover time τ_c, s.
    pub crossover_s: f64,
    /// Recommended run duration, s.
    pub recommended_duration_s: f64,
    /// The scenario's run duration, s.
    pub duration_s: f64,
}

impl RegimeEstimate {
    /// `true` when the run is shorter than recommended.
    pub fn too_short(&self) -> bool {
        self.duration_s < self.recommended_duration_s
    }

    /// One line for reports.
    pub fn describe(&self) -> String {
        format!(
            "species '{}': long-time regime after about τ_c = {:.2e} s ({}, ℓ = {:.1} nm, D_eff/D0 ≈ {:.3} by {}; rule of thumb); runs of at least {:.2e} s give a diffusive fit window, this one lasts {:.2e} s",
            self.species,
            self.crossover_s,
            self.basis,
            self.length_scale_nm,
            self.predicted_d_eff_over_d0,
            self.predicted_by,
            self.recommended_duration_s,
            self.duration_s
        )
    }
}

/// The crossover estimate for species `species`, or `None` where nothing
/// slows it over a transient (free, or walls and pores alone) or the
/// species is unknown.
pub fn long_time_regime(scenario: &Scenario, species: &str) -> Option<RegimeEstimate> {
    let tracer = scenario.species.iter().find(|s| s.name == species)?;
    let mut spacing: Option<(f64, String)> = None;
    let mut consider = |length: f64, basis: &str| {
        if length.is_finite() && length > 0.0 && spacing.as_ref().is_none_or(|s| length < s.0) {
            spacing = Some((length, basis.to_string()));
        }
    };
    if scenario.obstacles.is_some() || scenario.fibres.is_some() {
        let fixed = FixedObstacles::build(scenario).ok()?;
        if !fixed.spheres.is_empty() {
            let volume = Region::of(scenario).volume_nm3(&scenario.sim_box);
            let n = fixed.spheres.len() as f64 / volume;
            consider(n.powf(-1.0 / 3.0), "mean spacing of the obstacles n^(-1/3)");
        }
        if !fixed.fibres.is_empty() {
            let volume: f64 = scenario.sim_box.edges_nm.iter().product();
            let length_density = fixed.fibres.len() as f64 * fixed.fibres.length_nm / volume;
            consider(
                length_density.powf(-0.5),
                "mean spacing of the fibres (length per volume)^(-1/2)",
            );
        }
    }
    let volume: f64 = scenario.sim_box.edges_nm.iter().product();
    let crowders: usize = scenario
        .species
        .iter()
        .filter(|s| s.crowder)
        .map(|s| s.count)
        .sum();
    if crowders > 0 {
        consider(
            (crowders as f64 / volume).powf(-1.0 / 3.0),
            "mean spacing of the crowders n^(-1/3)",
        );
    }
    let (length, basis) = spacing?;
    let table = scenario_model_table(scenario, species);
    let (ratio, by) = table
        .entries
        .iter()
        .filter(|e| e.compares_with_d_eff)
        .find_map(|e| e.value.map(|v| (v, e.name.clone())))
        .or_else(|| {
            // Crowders alone around a tracer: dilute hard spheres, 1 − 2φ (REFERENCES.md).
            let phi: f64 = scenario
                .species
                .iter()
                .filter(|s| s.crowder)
                .map(|s| s.count as f64 * 4.0 / 3.0 * PI * s.radius_nm.powi(3))
                .sum::<f64>()
                / volume;
            Some((
                (1.0 - 2.0 * phi).max(0.05),
                "dilute hard spheres 1-2φ_c".to_string(),
            ))
        })?;
    let ratio = ratio.clamp(0.01, 1.0);
    let d0 = tracer.d0_nm2_per_s();
    let crossover = CROSSOVER_FACTOR * (1.0 / ratio - 1.0) * length * length / d0;
    Some(RegimeEstimate {
        species: species.to_string(),
        basis,
        length_scale_nm: length,
        predicted_d_eff_over_d0: ratio,
        predicted_by: by,
        crossover_s: crossover,
        recommended_duration_s: DURATION_OVER_CROSSOVER * crossover,
        duration_s: scenario.steps as f64 * scenario.dt_s,
    })
}

/// By how much to lengthen a run of `duration_s` whose fit was apparent:
/// the larger of what the measured crossover (when the MSD showed one) and
/// the estimate ask for; at least twice as long.
pub fn lengthen_factor(
    duration_s: f64,
    measured_crossover_s: Option<f64>,
    estimate: Option<&RegimeEstimate>,
) -> f64 {
    let measured = measured_crossover_s.map_or(0.0, |t| DURATION_OVER_CROSSOVER * t);
    let estimated = estimate.map_or(0.0, |e| e.recommended_duration_s);
    (measured.max(estimated) / duration_s).max(2.0)
}
