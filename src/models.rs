//! `thicket models`: published model values for given φ, size ratio and λ.

use anyhow::{Context, Result};
use serde_json::json;
use std::process::ExitCode;
use thicket_analysis::model_table::{self, ModelTable};

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

/// Prints the model table for each φ (spheres and fibres) and each λ (pores).
///
/// The entries, names and values are those `analyze`, `check` and sweeps
/// print for a scenario with the same inputs (one place evaluates them:
/// `thicket_analysis::model_table`); a model that does not apply keeps its
/// row with the reason.
pub fn models(phi: &str, size_ratio: f64, lambda: &str, as_json: bool) -> Result<ExitCode> {
    let phis = parse_list("--phi", phi)?;
    let lambdas = parse_list("--lambda", lambda)?;
    anyhow::ensure!(size_ratio.is_finite() && size_ratio >= 0.0, "--size-ratio {size_ratio}: the tracer-to-obstacle radius ratio a/b must be a finite number ≥ 0");
    for &p in &phis {
        anyhow::ensure!(
            (0.0..1.0).contains(&p),
            "--phi {p}: an obstacle volume fraction must lie in [0, 1)"
        );
    }
    for &l in &lambdas {
        anyhow::ensure!(
            (0.0..1.0).contains(&l),
            "--lambda {l}: λ = a/r_pore must lie in [0, 1)"
        );
    }
    // The obstacle phase seen by the tracer centre has radius a + b (REFERENCES.md).
    let crowd: Vec<(f64, f64, ModelTable)> = phis
        .iter()
        .map(|&p| {
            (
                p,
                p * (1.0 + size_ratio).powi(3),
                model_table::obstacle_inputs_table(p, size_ratio),
            )
        })
        .collect();
    let pores: Vec<(f64, ModelTable)> = lambdas
        .iter()
        .map(|&l| {
            (
                l,
                ModelTable {
                    entries: model_table::pore_models(l, true),
                },
            )
        })
        .collect();
    if as_json {
        let out = json!({
            "size_ratio": size_ratio,
            "obstacles": crowd.iter().map(|(p, pe, t)| json!({
                "phi": p, "phi_excluded": pe,
                "models": t.values(),
                "model_table": t.entries,
            })).collect::<Vec<_>>(),
            "pores": pores.iter().map(|(l, t)| json!({
                "lambda": l,
                "models": t.values(),
                "model_table": t.entries,
            })).collect::<Vec<_>>(),
        });
        println!("{}", serde_json::to_string_pretty(&out)?);
        return Ok(ExitCode::SUCCESS);
    }
    if !crowd.is_empty() {
        println!("Tracer among fixed impermeable spheres (non-overlapping) or random fibres, tracer/obstacle radius ratio a/b = a/r_f = {size_ratio}");
        println!("(D_eff/D0 is the tracer self-diffusivity from the MSD; σ_eff/σ0 is the composite conductivity = (1−φ)·D_eff/D0)");
    }
    for (p, pe, table) in &crowd {
        println!("  φ = {p}, excluded φ_excl = φ(1+a/b)³ = {pe:.4}");
        for line in table.lines() {
            println!("    {line}");
        }
    }
    if !pores.is_empty() {
        println!("Sphere in a cylindrical pore, λ = a/r_pore");
    }
    for (l, table) in &pores {
        println!("  λ = {l}");
        for line in table.lines() {
            println!("    {line}");
        }
    }
    Ok(ExitCode::SUCCESS)
}
