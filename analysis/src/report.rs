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

/// One line naming a scenario and its point, for plot titles and tables:
/// the scenario file, the species, and what crowds or confines it.
pub fn scenario_line(scenario: &Scenario, species: &str) -> String {
    use thicket_engine::scenario::media::{ObstacleSpec, RadiusDistribution, Target};
    let file = scenario
        .source
        .file_name()
        .map_or_else(String::new, |f| f.to_string_lossy().into_owned());
    let mut parts = vec![file];
    if let Some(s) = scenario.species.iter().find(|s| s.name == species) {
        parts.push(format!("{species} a = {} nm", s.radius_nm));
    }
    match &scenario.obstacles {
        Some(ObstacleSpec::Generated {
            generator,
            radii,
            target,
        }) => {
            let amount = match target {
                Target::VolumeFraction(phi) => format!("φ = {phi}"),
                Target::Count(n) => format!("{n} spheres"),
            };
            let radius = match radii {
                RadiusDistribution::Fixed { radius_nm } => format!(", b = {radius_nm} nm"),
                _ => String::new(),
            };
            parts.push(format!("{} obstacles {amount}{radius}", generator.name()));
        }
        Some(ObstacleSpec::File { path, .. }) => parts.push(format!(
            "obstacles from {}",
            path.file_name()
                .map_or_else(String::new, |f| f.to_string_lossy().into_owned())
        )),
        None => {}
    }
    if let Some(f) = &scenario.fibres {
        let amount = match f.target {
            Target::VolumeFraction(phi) => format!("φ_f = {phi}"),
            Target::Count(n) => format!("{n}"),
        };
        parts.push(format!("fibres {amount}, r_f = {} nm", f.radius_nm));
    }
    if let Some(g) = &scenario.geometry {
        parts.push(g.shape.kind().replace('_', " "));
    }
    parts.push(format!("seed {}", scenario.seed));
    parts.join("; ")
}
