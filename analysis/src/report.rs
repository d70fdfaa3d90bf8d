//! Model values for a scenario, as reports print them beside the measurement.

use std::collections::BTreeMap;
use thicket_engine::Scenario;

/// Predicted D_eff/D0 by model name for the species `species` of a scenario.
///
/// Free diffusion (no obstacles, periodic box) predicts D_eff/D0 = 1 by
/// Stokes–Einstein; richer scenarios add their models here.
pub fn scenario_models(scenario: &Scenario, species: &str) -> BTreeMap<String, f64> {
    let mut out = BTreeMap::new();
    if scenario.species.iter().all(|s| s.name != species) {
        return out;
    }
    if !scenario.has_contacts() {
        out.insert("free diffusion (Stokes-Einstein)".to_string(), 1.0);
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
