//! `thicket check`.

use anyhow::Result;
use serde_json::json;
use std::path::Path;
use std::process::ExitCode;
use thicket_analysis::model_table::{scenario_model_table, ModelTable};
use thicket_analysis::run_length::{long_time_regime, RegimeEstimate};
use thicket_engine::obstacles::spheres::{Estimate, FixedObstacles, Region};
use thicket_engine::scenario::media::ObstacleSpec;
use thicket_engine::space::shape::Shape;
use thicket_engine::Scenario;

/// Monte Carlo points behind each printed fraction: a standard error of at most 5e-4.
const CHECK_SAMPLES: usize = 1_000_000;

/// Validates a scenario and prints what it implies.
pub fn check(config: &Path, sets: &[String], as_json: bool) -> Result<ExitCode> {
    let scenario = Scenario::load(config, sets)?;
    let mut warnings = scenario.warnings();
    let regimes: Vec<RegimeEstimate> = scenario
        .species
        .iter()
        .filter_map(|s| long_time_regime(&scenario, &s.name))
        .collect();
    for r in regimes.iter().filter(|r| r.too_short()) {
        warnings.push(format!(
            "species '{}': the run lasts {:.2e} s, shorter than the {:.2e} s the long-time regime needs (τ_c ≈ {:.2e} s from {} ℓ = {:.1} nm; rule of thumb): D_eff would be an apparent value; raise integrator.steps to at least {}",
            r.species,
            r.duration_s,
            r.recommended_duration_s,
            r.crossover_s,
            r.basis,
            r.length_scale_nm,
            (r.recommended_duration_s / scenario.dt_s).ceil() as u64
        ));
    }
    let volume: f64 = scenario.sim_box.edges_nm.iter().product();
    // Placed exactly as `run` will place them (same seed, same streams).
    let obstacles = FixedObstacles::build(&scenario)?;
    let region = Region::of(&scenario);
    let covered =
        obstacles.volume_fraction_in(&region, &scenario.sim_box, CHECK_SAMPLES, scenario.seed);
    let open: Vec<_> = scenario
        .species
        .iter()
        .map(|s| {
            obstacles.open_fraction(&scenario.sim_box, s.radius_nm, CHECK_SAMPLES, scenario.seed)
        })
        .collect();
    // Walls, pores and membranes have exact open fractions (geometry.rs); with obstacles too, Monte Carlo.
    let open: Vec<Estimate> = match &scenario.geometry {
        Some(g) if !obstacles.is_empty() => scenario
            .species
            .iter()
            .map(|s| {
                obstacles.open_fraction_where(
                    &scenario.sim_box,
                    s.radius_nm,
                    CHECK_SAMPLES,
                    scenario.seed,
                    |p| g.shape.allows(p, s.radius_nm),
                )
            })
            .collect(),
        Some(g) => scenario
            .species
            .iter()
            .map(|s| Estimate {
                value: g
                    .shape
                    .open_fraction(s.radius_nm, &scenario.sim_box.edges_nm),
                standard_error: 0.0,
            })
            .collect(),
        None => open,
    };
    let tables: Vec<ModelTable> = scenario
        .species
        .iter()
        .map(|s| scenario_model_table(&scenario, &s.name))
        .collect();
    let species: Vec<_> = scenario
        .species
        .iter()
        .zip(&open)
        .zip(&tables)
        .map(|((s, open), table)| {
            json!({
                "models": table.values(),
                "model_table": table.entries,
                "name": s.name,
                "role": if s.crowder { "crowder" } else { "tracer" },
                "open_fraction": open.value,
                "open_fraction_se": open.standard_error,
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
    let confinement = confinement_report(&scenario)?;
    if as_json {
        let mut out = json!({
            "scenario": config.display().to_string(),
            "temperature_K": scenario.temperature_k,
            "viscosity_Pa_s": scenario.viscosity_pa_s,
            "viscosity_source": if scenario.viscosity_is_water { "water correlation" } else { "given" },
            "species": species,
            "obstacle_volume_fraction": covered.value,
            "obstacle_volume_fraction_se": covered.standard_error,
            "obstacle_count": obstacles.spheres.len(),
            "fibre_count": obstacles.fibres.len(),
            "fibre_volume_fraction_nominal": obstacles.fibres.nominal_volume_fraction(&scenario.sim_box),
            "dt_s": scenario.dt_s,
            "steps": scenario.steps,
            "duration_s": scenario.steps as f64 * scenario.dt_s,
            "frames": scenario.frames(),
            "camera_frames": scenario.camera.as_ref().map(|c| c.frames),
            "long_time_regime": regimes,
            "models": tables[0].values(),
            "model_table": tables[0].entries,
            "warnings": warnings,
            "memory_estimate_bytes": thicket_engine::scenario::memory::estimate(&scenario).total_bytes(),
        });
        if let Some(c) = &confinement {
            // The first species' values at the top level; every species under "confinement".
            let first = &c.per_species[0];
            out["geometry"] = c.geometry.clone();
            out["lambda"] = json!(first.lambda);
            out["partition_coefficient_steric"] = json!(first.partition);
            out["confinement"] = json!(c
                .per_species
                .iter()
                .map(|p| json!({
                    "species": p.species,
                    "lambda": p.lambda,
                    "partition_coefficient_steric": p.partition,
                    "open_fraction": p.open_fraction,
                }))
                .collect::<Vec<_>>());
        }
        println!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(ExitCode::SUCCESS);
    }
    println!("scenario {}: valid", config.display());
    println!(
        "  memory     about {} (estimated peak of the large buffers)",
        thicket_engine::scenario::memory::format_bytes(
            thicket_engine::scenario::memory::estimate(&scenario).total_bytes()
        )
    );
    println!(
        "  medium     T = {} K, η = {:.4e} Pa·s ({})",
        scenario.temperature_k,
        scenario.viscosity_pa_s,
        if scenario.viscosity_is_water {
            "water at this temperature"
        } else {
            "given"
        }
    );
    let b = &scenario.sim_box;
    println!(
        "  box        {} × {} × {} nm, periodic {:?}",
        b.edges_nm[0], b.edges_nm[1], b.edges_nm[2], b.periodic
    );
    let camera = scenario
        .camera
        .as_ref()
        .map(|c| {
            format!(
                "; the camera keeps {} frames of {} s",
                c.frames,
                thicket_analysis::format::short(c.frame_interval_s)
            )
        })
        .unwrap_or_default();
    println!(
        "  time       Δt = {} s × {} steps = {} s, {} recorded positions per particle{camera}",
        thicket_analysis::format::short(scenario.dt_s),
        scenario.steps,
        thicket_analysis::format::short(scenario.steps as f64 * scenario.dt_s),
        scenario.frames()
    );
    for r in &regimes {
        println!("  regime     {}", r.describe());
    }
    if !obstacles.spheres.is_empty() {
        let how = match &scenario.obstacles {
            Some(ObstacleSpec::Generated { generator, .. }) => generator.name().to_string(),
            Some(ObstacleSpec::File { path, .. }) => format!("from {}", path.display()),
            None => String::new(),
        };
        println!("  obstacles  {} spheres ({how})", obstacles.spheres.len());
    }
    if !obstacles.fibres.is_empty() {
        println!(
            "  fibres     {} of radius {} nm, length {} nm, nominal φ = N·π r²·ℓ/V = {:.4}",
            obstacles.fibres.len(),
            obstacles.fibres.radius_nm,
            obstacles.fibres.length_nm,
            obstacles.fibres.nominal_volume_fraction(&scenario.sim_box)
        );
    }
    if !obstacles.is_empty() {
        if covered.standard_error > 0.0 {
            println!("  achieved obstacle volume fraction {:.4} ± {:.4} of {} (Monte Carlo, {CHECK_SAMPLES} points)", covered.value, covered.standard_error, region.describe());
        } else {
            println!(
                "  achieved obstacle volume fraction {:.4} of {} (exact: no overlaps)",
                covered.value,
                region.describe()
            );
        }
    }
    println!(
        "  {:<12} {:>8} {:>10} {:>10} {:>14} {:>10} {:>12} {:>17}",
        "species",
        "role",
        "count",
        "radius/nm",
        "D0/(m²/s)",
        "step/a",
        "vol. frac.",
        "open to centre"
    );
    for ((s, j), open) in scenario.species.iter().zip(&species).zip(&open) {
        println!(
            "  {:<12} {:>8} {:>10} {:>10} {:>14.4e} {:>10.4} {:>12.4e} {:>9.4} ± {:.4}",
            s.name,
            if s.crowder { "crowder" } else { "tracer" },
            s.count,
            s.radius_nm,
            s.d0_m2_per_s,
            j["step_over_radius"].as_f64().unwrap_or(f64::NAN),
            j["volume_fraction"].as_f64().unwrap_or(f64::NAN),
            open.value,
            open.standard_error
        );
    }
    if let Some(c) = &confinement {
        for line in &c.lines {
            println!("  {line}");
        }
        for p in &c.per_species {
            let lambda = p
                .lambda
                .map(|l| format!("λ = {l:.4}, "))
                .unwrap_or_default();
            let phi = p
                .partition
                .map(|f| format!("steric partition Φ = {f:.4}, "))
                .unwrap_or_default();
            // With obstacles the species table above gives the open fraction of walls and obstacles together.
            let walls = if obstacles.is_empty() {
                ""
            } else {
                " (walls alone)"
            };
            println!(
                "  species '{}': {lambda}{phi}open to the centre {:.4} of the box{walls}",
                p.species, p.open_fraction
            );
        }
    }
    for (s, table) in scenario.species.iter().zip(&tables) {
        if table.entries.is_empty() {
            continue;
        }
        println!("  models for species '{}':", s.name);
        for line in table.lines() {
            println!("    {line}");
        }
    }
    for w in &warnings {
        println!("  warning: {w}");
    }
    Ok(ExitCode::SUCCESS)
}

/// What `check` says about a geometry: text lines, its JSON description and,
/// per species, λ and the steric partition coefficient.
struct ConfinementReport {
    lines: Vec<String>,
    geometry: serde_json::Value,
    per_species: Vec<SpeciesConfinement>,
}

struct SpeciesConfinement {
    species: String,
    lambda: Option<f64>,
    partition: Option<f64>,
    open_fraction: f64,
}

/// λ and the steric partition coefficient for a scenario with a geometry.
fn confinement_report(scenario: &Scenario) -> Result<Option<ConfinementReport>> {
    use thicket_analysis::models;
    let Some(g) = &scenario.geometry else {
        return Ok(None);
    };
    let edges = scenario.sim_box.edges_nm;
    let mut lines = vec![
        format!("geometry   {}", describe(&g.shape, &edges)),
        format!(
            "           wall hydrodynamics {}",
            g.hydrodynamics_description()
        ),
    ];
    let hydro = g.hydrodynamics.is_some();
    let mut per_species = Vec::new();
    for s in &scenario.species {
        let a = s.radius_nm;
        let (lambda, partition) = match &g.shape {
            Shape::PlaneWall { .. } => (None, None),
            Shape::Slit { width_nm } => {
                let h = 0.5 * width_nm;
                (Some(a / h), Some(models::partition_slit(a, h)?))
            }
            Shape::Cylinder { radius_nm, .. } => {
                let lambda = a / radius_nm;
                (Some(lambda), Some(models::partition_cylinder(lambda)?))
            }
            Shape::Membrane(m) => {
                let r_min = m
                    .pores
                    .iter()
                    .map(|p| p.radius_nm)
                    .fold(f64::INFINITY, f64::min);
                (Some(a / r_min), Some(m.steric_partition(a)))
            }
        };
        per_species.push(SpeciesConfinement {
            species: s.name.clone(),
            lambda,
            partition,
            open_fraction: g.shape.open_fraction(a, &edges),
        });
    }
    if let Shape::Membrane(m) = &g.shape {
        lines.push(format!(
            "           baths: top {} mol/m³, bottom {} mol/m³; tracers do not interact, so the particle count only sets the statistics and fluxes are scaled to these concentrations; steady-state window from {} s",
            m.top_concentration_mol_per_m3,
            m.bottom_concentration_mol_per_m3,
            thicket_analysis::format::short(g.flux_after_s)
        ));
    }
    let geometry = json!({
        "kind": g.shape.kind(),
        "wall_hydrodynamics": hydro,
        "perpendicular_model": g.hydrodynamics.map(|m| m.name()),
        "hydrodynamics": g.hydrodynamics_description(),
        "description": describe(&g.shape, &edges),
    });
    Ok(Some(ConfinementReport {
        lines,
        geometry,
        per_species,
    }))
}

/// One line saying where the walls are.
fn describe(shape: &Shape, edges: &[f64; 3]) -> String {
    match shape {
        Shape::PlaneWall { height_nm } => format!("plane wall at z = 0 (a reflecting lid without hydrodynamic effect at z = {height_nm} nm); x, y periodic"),
        Shape::Slit { width_nm } => format!("slit: walls at z = 0 and z = {width_nm} nm (half-width h = {} nm); x, y periodic", 0.5 * width_nm),
        Shape::Cylinder { radius_nm, axis_nm } => {
            format!("cylindrical pore of radius {radius_nm} nm along z through ({}, {}) nm, periodic along z every {} nm", axis_nm[0], axis_nm[1], edges[2])
        }
        Shape::Membrane(m) => format!(
            "membrane {} nm thick (z = {} … {} nm) with {} pore(s), porosity {:.4}, reservoirs {} nm deep; baths at z = 0 and z = {} nm; x, y periodic",
            m.thickness_nm(),
            m.z_lo_nm,
            m.z_hi_nm,
            m.pores.len(),
            m.porosity(),
            m.reservoir_depth_nm(),
            m.height_nm
        ),
    }
}
