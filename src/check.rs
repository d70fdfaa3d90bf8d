//! `thicket check`.

use anyhow::Result;
use serde_json::json;
use std::path::Path;
use std::process::ExitCode;
use thicket_engine::Scenario;

/// Validates a scenario and prints what it implies.
pub fn check(config: &Path, sets: &[String], as_json: bool) -> Result<ExitCode> {
    let scenario = Scenario::load(config, sets)?;
    let warnings = scenario.warnings();
    let volume: f64 = scenario.sim_box.edges_nm.iter().product();
    let species: Vec<_> = scenario
        .species
        .iter()
        .map(|s| {
            json!({
                "name": s.name,
                "radius_m": s.radius_nm * 1e-9,
                "drag_radius_m": s.drag_radius_nm * 1e-9,
                "d0_m2_per_s": s.d0_m2_per_s,
                "d0_source": if s.d0_explicit { "given" } else { "Stokes–Einstein" },
                "count": s.count,
                "step_rms_per_axis_m": s.step_rms_nm(scenario.dt_s) * 1e-9,
                "step_over_radius": s.step_rms_nm(scenario.dt_s) / s.radius_nm,
                "volume_fraction": s.count as f64 * 4.0 / 3.0 * std::f64::consts::PI * s.radius_nm.powi(3) / volume,
            })
        })
        .collect();
    if as_json {
        let out = json!({
            "scenario": config.display().to_string(),
            "temperature_K": scenario.temperature_k,
            "viscosity_Pa_s": scenario.viscosity_pa_s,
            "viscosity_source": if scenario.viscosity_is_water { "water correlation" } else { "given" },
            "species": species,
            "obstacle_volume_fraction": 0.0,
            "dt_s": scenario.dt_s,
            "steps": scenario.steps,
            "duration_s": scenario.steps as f64 * scenario.dt_s,
            "frames": scenario.frames(),
            "warnings": warnings,
        });
        println!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(ExitCode::SUCCESS);
    }
    println!("scenario {}: valid", config.display());
    println!(
        "  medium     T = {} K, η = {:.4e} Pa·s ({})",
        scenario.temperature_k,
        scenario.viscosity_pa_s,
        if scenario.viscosity_is_water { "water at this temperature" } else { "given" }
    );
    let b = &scenario.sim_box;
    println!(
        "  box        {} × {} × {} nm, periodic {:?}",
        b.edges_nm[0], b.edges_nm[1], b.edges_nm[2], b.periodic
    );
    println!("  time       Δt = {:e} s × {} steps = {:e} s, {} frames", scenario.dt_s, scenario.steps, scenario.steps as f64 * scenario.dt_s, scenario.frames());
    println!("  {:<12} {:>10} {:>10} {:>14} {:>10} {:>12}", "species", "count", "radius/nm", "D0/(m²/s)", "step/a", "vol. frac.");
    for (s, j) in scenario.species.iter().zip(&species) {
        println!(
            "  {:<12} {:>10} {:>10} {:>14.4e} {:>10.4} {:>12.4e}",
            s.name,
            s.count,
            s.radius_nm,
            s.d0_m2_per_s,
            j["step_over_radius"].as_f64().unwrap_or(f64::NAN),
            j["volume_fraction"].as_f64().unwrap_or(f64::NAN)
        );
    }
    for w in &warnings {
        println!("  warning: {w}");
    }
    Ok(ExitCode::SUCCESS)
}
