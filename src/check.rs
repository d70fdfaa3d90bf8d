//! `thicket check`.

use anyhow::Result;
use serde_json::json;
use std::path::Path;
use std::process::ExitCode;
use thicket_engine::geometry::{PoreLayout, Shape};
use thicket_engine::obstacles::{Estimate, FixedObstacles, ObstacleSpec, Region};
use thicket_engine::Scenario;

/// Monte Carlo points behind each printed fraction: a standard error of at most 5e-4.
const CHECK_SAMPLES: usize = 1_000_000;

/// Validates a scenario and prints what it implies.
pub fn check(config: &Path, sets: &[String], as_json: bool) -> Result<ExitCode> {
    let scenario = Scenario::load(config, sets)?;
    let warnings = scenario.warnings();
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
    let species: Vec<_> = scenario
        .species
        .iter()
        .zip(&open)
        .map(|(s, open)| {
            json!({
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
            "warnings": warnings,
        });
        if let Some(c) = &confinement {
            // The first species' values at the top level; every species under "confinement".
            let first = &c.per_species[0];
            out["geometry"] = c.geometry.clone();
            out["lambda"] = json!(first.lambda);
            out["partition_coefficient_steric"] = json!(first.partition);
            out["models"] = serde_json::Value::Object(
                first
                    .models
                    .iter()
                    .map(|m| (m.0.clone(), json!(m.1)))
                    .collect(),
            );
            out["confinement"] = json!(c
                .per_species
                .iter()
                .map(|p| json!({
                    "species": p.species,
                    "lambda": p.lambda,
                    "partition_coefficient_steric": p.partition,
                    "open_fraction": p.open_fraction,
                    "models": p.models.iter().map(|m| json!({"name": m.0, "value": m.1, "source": m.2})).collect::<Vec<_>>(),
                }))
                .collect::<Vec<_>>());
        }
        println!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(ExitCode::SUCCESS);
    }
    println!("scenario {}: valid", config.display());
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
    println!(
        "  time       Δt = {:e} s × {} steps = {:e} s, {} frames",
        scenario.dt_s,
        scenario.steps,
        scenario.steps as f64 * scenario.dt_s,
        scenario.frames()
    );
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
            for (name, value, source) in &p.models {
                println!("    {name:<58} {value:>12.5e}   ({source})");
            }
        }
    }
    for w in &warnings {
        println!("  warning: {w}");
    }
    Ok(ExitCode::SUCCESS)
}

/// What `check` says about a geometry: text lines, its JSON description and,
/// per species, λ, the steric partition coefficient and the models.
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
    /// (name, value, source).
    models: Vec<(String, f64, String)>,
}

/// λ, partition coefficients and model predictions for a scenario with a geometry.
fn confinement_report(scenario: &Scenario) -> Result<Option<ConfinementReport>> {
    use thicket_analysis::models;
    use thicket_engine::confined::mean_parallel_mobility;
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
        let mut out = Vec::new();
        let mut model = |name: &str, value: f64, source: &str| {
            out.push((name.to_string(), value, source.to_string()))
        };
        let engine_source = "this engine's wall model: Faxén D∥ at the nearest wall (two walls superposed in a slit), averaged over the open space";
        let (lambda, partition) = match &g.shape {
            Shape::PlaneWall { .. } => {
                if let Some(d) =
                    mean_parallel_mobility(&g.shape, a, s.drag_radius_nm).filter(|_| hydro)
                {
                    model(
                        "lateral D_eff/D0 of this run (box-averaged Faxén D∥)",
                        d,
                        engine_source,
                    );
                }
                (None, None)
            }
            Shape::Slit { width_nm } => {
                let h = 0.5 * width_nm;
                let phi = models::partition_slit(a, h)?;
                model(
                    "steric partition Phi = 1 - a/h",
                    phi,
                    "steric exclusion (exact)",
                );
                let d = if hydro {
                    mean_parallel_mobility(&g.shape, a, s.drag_radius_nm).unwrap_or(f64::NAN)
                } else {
                    1.0
                };
                model(
                    "lateral D_eff/D0 of this run",
                    d,
                    if hydro {
                        engine_source
                    } else {
                        "no wall hydrodynamics: D0"
                    },
                );
                (Some(a / h), Some(phi))
            }
            Shape::Cylinder { radius_nm, .. } => {
                let lambda = a / radius_nm;
                for p in models::pore_predictions(lambda)? {
                    model(p.name, p.value, p.source);
                }
                let d = if hydro {
                    mean_parallel_mobility(&g.shape, a, s.drag_radius_nm).unwrap_or(f64::NAN)
                } else {
                    1.0
                };
                model(
                    "axial D_eff/D0 of this run",
                    d,
                    if hydro {
                        engine_source
                    } else {
                        "steric confinement alone leaves axial diffusion free"
                    },
                );
                (Some(lambda), Some(models::partition_cylinder(lambda)?))
            }
            Shape::Membrane(m) => {
                let r_min = m
                    .pores
                    .iter()
                    .map(|p| p.radius_nm)
                    .fold(f64::INFINITY, f64::min);
                let lambda = a / r_min;
                for p in models::pore_predictions(lambda)? {
                    model(p.name, p.value, p.source);
                }
                let phi = m.steric_partition(a);
                let eps = m.porosity();
                let d0 = s.d0_m2_per_s;
                let thickness_m = m.thickness_nm() * 1e-9;
                model(
                    "steric permeability eps Phi D0 / L (m/s)",
                    eps * phi * d0 / thickness_m,
                    "steric prediction, no end correction",
                );
                // A square arrangement has a known end correction; other layouts get the isolated-mouth one.
                let spacing = match m.layout {
                    PoreLayout::Arranged { pores_x, pores_y }
                        if (m.lateral_nm[0] / pores_x as f64
                            - m.lateral_nm[1] / pores_y as f64)
                            .abs()
                            < 1e-9 =>
                    {
                        Some(m.lateral_nm[0] / pores_x as f64)
                    }
                    _ => None,
                };
                let open = r_min - a;
                let equal_pores = m.pores.iter().all(|p| p.radius_nm == r_min);
                let array_ok = spacing.is_none_or(|sp| open / sp <= 0.3);
                if array_ok && equal_pores {
                    let p = models::membrane_steric_permeability_over_d0(
                        eps,
                        m.thickness_nm(),
                        a,
                        r_min,
                        spacing,
                    )?;
                    model(
                        "steric permeability with end correction (m/s)",
                        p * 1e9 * d0,
                        if spacing.is_some() {
                            "slab L + 2a for centres, flanged-pipe end correction 0.8216 (r - a), square-array factor"
                        } else {
                            "slab L + 2a for centres, flanged-pipe end correction 0.8216 (r - a), isolated mouths"
                        },
                    );
                }
                for (name, h) in [
                    ("Renkin", models::renkin_hindrance(lambda).ok()),
                    (
                        "Dechadilok-Deen",
                        models::dechadilok_deen_hindrance(lambda).ok(),
                    ),
                ] {
                    if let Some(h) = h {
                        model(
                            &format!("{name} permeability eps H D0 / L (m/s)"),
                            eps * h * d0 / thickness_m,
                            "hindered-transport model, no end correction",
                        );
                    }
                }
                (Some(lambda), Some(phi))
            }
        };
        per_species.push(SpeciesConfinement {
            species: s.name.clone(),
            lambda,
            partition,
            open_fraction: g.shape.open_fraction(a, &edges),
            models: out,
        });
    }
    if let Shape::Membrane(m) = &g.shape {
        lines.push(format!(
            "           baths: top {} mol/m³, bottom {} mol/m³; tracers do not interact, so the particle count only sets the statistics and fluxes are scaled to these concentrations; steady-state window from {:e} s",
            m.top_concentration_mol_per_m3, m.bottom_concentration_mol_per_m3, g.flux_after_s
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
