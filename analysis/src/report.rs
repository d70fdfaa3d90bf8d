//! Model values for a scenario, as reports print them beside the measurement.

use std::collections::BTreeMap;
use thicket_engine::Scenario;

/// Predicted D_eff/D0 by model name for the species `species` of a
/// scenario: the entries of [`crate::model_table::scenario_model_table`]
/// that predict the headline D_eff/D0 and apply.
pub fn scenario_models(scenario: &Scenario, species: &str) -> BTreeMap<String, f64> {
    crate::model_table::scenario_model_table(scenario, species).d_eff_over_d0()
}

/// The resolved scenario stored in a thicket trajectory, if there is one.
///
/// Returns `None` for files from other writers or with an unreadable scenario.
pub fn stored_scenario(path: &std::path::Path) -> Option<Scenario> {
    let trajectory = crate::read::Trajectory::open(path).ok()?;
    scenario_of(&trajectory, path)
}

/// The resolved scenario stored in an open trajectory read from `path`.
pub fn scenario_of(
    trajectory: &crate::read::Trajectory,
    path: &std::path::Path,
) -> Option<Scenario> {
    let text = trajectory.run_parameters()?.scenario_toml.clone()?;
    Scenario::from_text(&text, path, &[]).ok()
}
