//! `thicket check`.

use anyhow::Result;
use serde_json::json;
use std::path::Path;
use std::process::ExitCode;
use thicket_analysis::check_report::{
    check_report, Hindrance, Quoted, SpeciesConfinement, CHECK_SAMPLES,
};
use thicket_analysis::model_table::ModelTable;
use thicket_engine::space::shape::Shape;
use thicket_engine::Scenario;

/// Validates a scenario and prints what it implies (computed by
/// [`check_report`]; this function only formats it).
pub fn check(config: &Path, sets: &[String], as_json: bool) -> Result<ExitCode> {
    let scenario = Scenario::load(config, sets)?;
    let report = check_report(&scenario)?;
    let warnings = &report.warnings;
    let regimes = &report.regimes;
    let obstacles = &report.obstacles;
    let covered = obstacles.covered;
    let tables: Vec<&ModelTable> = report.species.iter().map(|s| &s.models).collect();
    let species: Vec<_> = report
        .species
        .iter()
        .map(|s| {
            json!({
                "models": s.models.values(),
                "model_table": s.models.entries,
                "name": s.name,
                "role": if s.crowder { "crowder" } else { "tracer" },
                "open_fraction": s.open.value,
                "open_fraction_se": s.open.standard_error,
                "radius_m": s.radius_nm * 1e-9,
                "drag_radius_m": s.drag_radius_nm * 1e-9,
                "d0_m2_per_s": s.d0_m2_per_s,
                "d0_source": if s.d0_explicit { "given" } else { "Stokes–Einstein" },
                "count": s.count,
                "step_rms_per_axis_m": s.step_rms_nm * 1e-9,
                "step_over_radius": s.step_over_radius,
                "volume_fraction": s.volume_fraction,
            })
        })
        .collect();
    let confinement = confinement_text(&scenario, report.confinement.as_deref());
    if as_json {
        let mut out = json!({
            "scenario": config.display().to_string(),
            "temperature_K": scenario.temperature_k,
            "viscosity_Pa_s": scenario.viscosity_pa_s,
            "viscosity_source": if scenario.viscosity_is_water { "water correlation" } else { "given" },
            "species": species,
            "obstacle_volume_fraction": covered.value,
            "obstacle_volume_fraction_se": covered.standard_error,
            "obstacle_count": obstacles.spheres,
            "fibre_count": obstacles.fibres,
            "fibre_volume_fraction_nominal": obstacles.fibre_volume_fraction_nominal,
            "contact": scenario.has_contacts().then(|| scenario.contact.name()),
            "contact_description": scenario.contact_description(),
            "dt_s": scenario.dt_s,
            "steps": scenario.steps,
            "duration_s": scenario.steps as f64 * scenario.dt_s,
            "frames": scenario.frames(),
            "camera_frames": scenario.camera.as_ref().map(|c| c.frames),
            "long_time_regime": regimes,
            "models": tables[0].values(),
            "model_table": tables[0].entries,
            "warnings": warnings,
            "memory_estimate_bytes": report.memory_estimate_bytes,
            "drive": report.drive,
            "wall_interactions": report.interactions,
            "binding": report.binding,
            "obstacle_interactions": report.obstacle_interactions,
            "pair_interactions": report.pair_interactions,
            "surface_charges": report.surface_charges,
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
                    "hindrance": p.hindrance,
                }))
                .collect::<Vec<_>>());
        }
        println!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(ExitCode::SUCCESS);
    }
    println!("scenario {}: valid", config.display());
    println!(
        "  memory     about {} (estimated peak of the large buffers)",
        thicket_engine::scenario::memory::format_bytes(report.memory_estimate_bytes)
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
    for r in regimes {
        println!("  regime     {}", r.describe());
    }
    if obstacles.spheres > 0 {
        println!(
            "  obstacles  {} spheres ({})",
            obstacles.spheres, obstacles.placement
        );
    }
    if obstacles.fibres > 0 {
        println!(
            "  fibres     {} of radius {} nm, length {} nm, nominal φ = N·π r²·ℓ/V = {:.4}",
            obstacles.fibres,
            obstacles.fibre_radius_nm,
            obstacles.fibre_length_nm,
            obstacles.fibre_volume_fraction_nominal
        );
    }
    if let Some(contact) = scenario.contact_description() {
        println!("  contacts   {contact}");
    }
    if !obstacles.is_empty() {
        if covered.standard_error > 0.0 {
            println!("  achieved obstacle volume fraction {:.4} ± {:.4} of {} (Monte Carlo, {CHECK_SAMPLES} points)", covered.value, covered.standard_error, obstacles.region);
        } else {
            println!(
                "  achieved obstacle volume fraction {:.4} of {} (exact: no overlaps)",
                covered.value, obstacles.region
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
    for s in &report.species {
        println!(
            "  {:<12} {:>8} {:>10} {:>10} {:>14.4e} {:>10.4} {:>12.4e} {:>9.4} ± {:.4}",
            s.name,
            if s.crowder { "crowder" } else { "tracer" },
            s.count,
            s.radius_nm,
            s.d0_m2_per_s,
            s.step_over_radius,
            s.volume_fraction,
            s.open.value,
            s.open.standard_error
        );
    }
    if let Some(c) = &confinement {
        for line in &c.lines {
            println!("  {line}");
        }
        for p in c.per_species {
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
            if let Some(h) = &p.hindrance {
                println!("    hindrance  {}", hindrance_line(h));
            }
        }
    }
    for c in &report.surface_charges {
        println!(
            "  charge     {} = {} mC/m² gives ψ = {:.4} mV (Grahame 1947, flat surface in a 1:1 electrolyte; \
             an approximation on spheres and fibres, for κa ≫ 1)",
            c.key, c.charge_density_mc_per_m2, c.potential_mv
        );
    }
    for i in &report.interactions {
        let debye = i
            .debye_length_nm
            .map(|l| format!("Debye length {l:.4} nm, "))
            .unwrap_or_default();
        let partition = match (i.partition_boltzmann, i.partition_steric) {
            (Some(b), Some(st)) => format!(
                "; partition coefficient against a bulk bath {b:.4} (Boltzmann-weighted, exact for the model) against {st:.4} steric"
            ),
            _ => String::new(),
        };
        println!(
            "  walls      species '{}': {debye}electrostatic energy at contact {:.4} k_BT (linear superposition, Bell, Levine & McCartney 1970), well {:.4} k_BT{partition}",
            i.species, i.electrostatic_contact_kt, i.well_depth_kt
        );
    }
    for b in &report.binding {
        println!(
            "  binding    species '{}': layer share V_layer/V_open = {:.4} ± {:.4} (Monte Carlo); K = N_bound/N_free = p_on/p_off · V_layer/V_open = {:.4} ± {:.4} \
             (exact for the model; k_on/k_off · V_layer/V_open = {:.4} as Δt → 0); bound fraction K/(1+K) = {:.4}; mean dwell 1/k_off = {:.3e} s",
            b.species, b.layer_share, b.layer_share_se, b.k, b.k_se, b.k_continuous, b.bound_fraction, b.mean_dwell_s
        );
        println!(
            "             fast-exchange D_eff/D_free = 1/(1+K) = {:.4} (Crank, The Mathematics of Diffusion, 2nd ed., §14.2): a model, valid only when binding and release are fast against diffusion between obstacles",
            b.fast_exchange_ratio
        );
    }
    for i in &report.obstacle_interactions {
        let debye = i
            .debye_length_nm
            .map(|l| format!("Debye length {l:.4} nm, "))
            .unwrap_or_default();
        let contact = [
            ("sphere", i.sphere_contact_kt),
            ("fibre", i.fibre_contact_kt),
        ]
        .into_iter()
        .filter_map(|(k, u)| u.map(|u| format!("{u:.4} k_BT at contact with a {k}")))
        .collect::<Vec<_>>()
        .join(", ");
        println!(
            "  obstacles  species '{}': {debye}{contact}; cut-off gap {:.4} nm (at most {:.1e} k_BT left out); \
             partition coefficient K = ⟨e^(−U/k_BT)⟩ = {:.4} ± {:.4} (Boltzmann-weighted, Monte Carlo over the box) \
             against {:.4} ± {:.4} steric (open fraction)",
            i.species,
            i.cutoff_nm,
            i.energy_at_cutoff_kt,
            i.partition_boltzmann,
            i.partition_boltzmann_se,
            i.partition_steric,
            i.partition_steric_se
        );
    }
    for p in &report.pair_interactions {
        let debye = p
            .debye_length_nm
            .map(|l| format!("Debye length {l:.4} nm, "))
            .unwrap_or_default();
        println!(
            "  pairs      '{}'–'{}': {debye}{:.4} k_BT at contact; cut-off gap {:.4} nm; second virial coefficient \
             B₂ = {:.4} nm³ per pair against {:.4} nm³ for hard spheres (numerical integral of the model)",
            p.species[0], p.species[1], p.contact_kt, p.cutoff_gap_nm, p.second_virial_nm3, p.second_virial_hard_nm3
        );
    }
    for d in &report.drive {
        let f = d.force_pn;
        if f != [0.0; 3] {
            let v = d.free_drift_m_per_s;
            let height = d
                .height_scale_nm
                .map(|h| format!("; k_BT/|F_z| = {h:.4e} nm (barometric height against a floor)"))
                .unwrap_or_default();
            println!(
                "  force      species '{}': F = [{:.4e}, {:.4e}, {:.4e}] pN, free drift D0F/k_BT = [{:.4e}, {:.4e}, {:.4e}] m/s{height}",
                d.species, f[0], f[1], f[2], v[0], v[1], v[2]
            );
        }
        if !d.flow.is_empty() {
            println!("  flow       species '{}':", d.species);
            for p in &d.flow {
                println!("    {:<58} {:.4e}  ({})", p.quantity, p.value, p.source);
            }
        }
    }
    for (s, table) in report.species.iter().zip(&tables) {
        if table.entries.is_empty() {
            continue;
        }
        println!("  models for species '{}':", s.name);
        for line in table.lines() {
            println!("    {line}");
        }
    }
    for w in warnings {
        println!("  warning: {w}");
    }
    Ok(ExitCode::SUCCESS)
}

/// How `check` shows a geometry: text lines, its JSON description and the
/// library's per-species λ, partition and hindrance.
struct ConfinementText<'a> {
    lines: Vec<String>,
    geometry: serde_json::Value,
    per_species: &'a [SpeciesConfinement],
}

/// Formats the scenario's geometry around the report's per-species values.
fn confinement_text<'a>(
    scenario: &Scenario,
    per_species: Option<&'a [SpeciesConfinement]>,
) -> Option<ConfinementText<'a>> {
    let g = scenario.geometry.as_ref()?;
    let per_species = per_species?;
    let edges = scenario.sim_box.edges_nm;
    let mut lines = vec![
        format!("geometry   {}", describe(&g.shape, &edges)),
        format!(
            "           wall hydrodynamics {}",
            g.hydrodynamics_description()
        ),
    ];
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
        "wall_hydrodynamics": g.hydrodynamics.is_some(),
        "perpendicular_model": g.hydrodynamics.map(|m| m.name()),
        "hydrodynamics": g.hydrodynamics_description(),
        "description": describe(&g.shape, &edges),
    });
    Some(ConfinementText {
        lines,
        geometry,
        per_species,
    })
}

/// K_d and H, then K_c and W, on one line, each pair with its source
/// (named once when all four share it).
fn hindrance_line(h: &Hindrance) -> String {
    let (diffusive, diffusive_source) = pair([("K_d", &h.kd), ("H = ΦK_d", &h.h)]);
    let (convective, convective_source) = pair([("K_c", &h.kc), ("W = ΦK_c", &h.w)]);
    let peclet = h
        .peclet
        .map(|pe| format!("; Pe = {pe:.4}"))
        .unwrap_or_default();
    if diffusive_source == convective_source {
        format!("{diffusive}, {convective} ({diffusive_source}){peclet}")
    } else {
        format!("{diffusive} ({diffusive_source}); {convective} ({convective_source}){peclet}")
    }
}

/// Two factors as "A = …, B = …" (or "n/a" with the reason) and the first one's source.
fn pair<'a>(items: [(&str, &'a Quoted); 2]) -> (String, &'a str) {
    let text: Vec<String> = items
        .iter()
        .map(|(label, q)| match q.value {
            Some(v) => format!("{label} = {v:.4}"),
            None => format!("{label} n/a ({})", q.source),
        })
        .collect();
    (text.join(", "), items[0].1.source.as_str())
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
