//! `thicket models`: published model values for given φ, size ratio and λ.

use anyhow::{Context, Result};
use serde_json::json;
use std::process::ExitCode;
use thicket_analysis::models;

/// Parses a comma-separated list of numbers.
pub fn parse_list(flag: &str, text: &str) -> Result<Vec<f64>> {
    text.split(',')
        .map(|s| {
            let v: f64 = s.trim().parse().with_context(|| format!("{flag} {text}: '{}' is not a number; give a comma-separated list such as 0.1,0.2,0.3", s.trim()))?;
            anyhow::ensure!(v.is_finite(), "{flag} {text}: {v} is not finite");
            Ok(v)
        })
        .collect()
}

/// Model name → value, as reports and JSON print them.
pub fn as_map(
    predictions: &[models::ModelPrediction],
) -> serde_json::Map<String, serde_json::Value> {
    predictions
        .iter()
        .map(|m| (m.name.to_string(), json!(m.value)))
        .collect()
}

/// Prints crowding, fibre and pore model values.
pub fn models(phi: &str, size_ratio: f64, lambda: &str, as_json: bool) -> Result<ExitCode> {
    let phis = parse_list("--phi", phi)?;
    let lambdas = parse_list("--lambda", lambda)?;
    anyhow::ensure!(size_ratio.is_finite() && size_ratio >= 0.0, "--size-ratio {size_ratio}: the tracer-to-obstacle radius ratio a/b must be a finite number ≥ 0");
    let mut crowd = Vec::new();
    for &p in &phis {
        // The obstacle phase seen by the tracer centre has radius a + b (REFERENCES.md).
        let phi_excl = p * (1.0 + size_ratio).powi(3);
        let spheres = models::crowding_predictions(phi_excl).with_context(|| {
            format!("--phi {p} with --size-ratio {size_ratio}: the excluded fraction φ(1+a/b)³ = {phi_excl:.4} must be below 1")
        })?;
        let conductivity = models::maxwell_conductivity(phi_excl)?;
        let fibres = models::fibre_predictions(p, size_ratio, 1.0)
            .with_context(|| format!("--phi {p}: must lie in [0, 1)"))?;
        crowd.push((p, phi_excl, spheres, conductivity, fibres));
    }
    let mut pores = Vec::new();
    for &l in &lambdas {
        pores.push((
            l,
            models::pore_predictions(l)
                .with_context(|| format!("--lambda {l}: λ = a/r_pore must lie in [0, 1)"))?,
        ));
    }
    if as_json {
        let out = json!({
            "size_ratio": size_ratio,
            "crowding": crowd.iter().map(|(p, pe, s, c, f)| json!({
                "phi": p, "phi_excluded": pe,
                "spheres_tracer_d_eff_over_d0": as_map(s),
                "maxwell_conductivity_sigma_eff_over_sigma0": c,
                "fibres_d_eff_over_d0": as_map(f),
            })).collect::<Vec<_>>(),
            "pores": pores.iter().map(|(l, ms)| json!({
                "lambda": l,
                "models": as_map(ms),
            })).collect::<Vec<_>>(),
        });
        println!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(ExitCode::SUCCESS);
    }
    println!(
        "Tracer among fixed impermeable spheres, tracer/obstacle radius ratio a/b = {size_ratio}"
    );
    println!("(D_eff/D0 is the tracer self-diffusivity from the MSD; σ_eff/σ0 is the composite conductivity = (1−φ)·D_eff/D0)");
    for (p, pe, spheres, c, _) in &crowd {
        println!("  φ = {p:<6} excluded φ(1+a/b)³ = {pe:.4}");
        for m in spheres {
            println!("    {:<44} {:>8.4}   {}", m.name, m.value, m.source);
        }
        println!(
            "    {:<44} {c:>8.4}   Maxwell (1873), conductivity form",
            "Maxwell conductivity sigma_eff/sigma0"
        );
    }
    println!("Tracer among random fibres, tracer/fibre radius ratio a/r_f = {size_ratio}");
    for (p, _, _, _, fibres) in &crowd {
        for m in fibres {
            println!(
                "  φ = {p:<6} {:<40} {:>8.4}   {}",
                m.name, m.value, m.source
            );
        }
    }
    println!("Sphere in a cylindrical pore, λ = a/r_pore");
    for (l, ms) in &pores {
        for m in ms {
            println!(
                "  λ = {l:<6} {:<40} {:>8.4}   {}",
                m.name, m.value, m.source
            );
        }
    }
    println!("These are model estimates, not a basis on their own for clinical, dosing or safety decisions.");
    Ok(ExitCode::SUCCESS)
}
