//! Reversible binding of a tracer species to the fixed obstacles: the
//! species keys, their validation and the stepped model's constants.
//!
//! The model: a free tracer whose centre ends a step within
//! `binding_layer_nm` of an obstacle's excluded surface binds with
//! probability 1 − exp(−k_on Δt); a bound tracer stays where it bound for a
//! dwell time τ drawn from exp(−k_off t) and moves again from the first step
//! end at or after τ (so it is held ⌈τ/Δt⌉ steps, a geometric number whose
//! per-step release probability is 1 − exp(−k_off Δt)). Free tracers keep a
//! uniform density in the open space, and binding and release balance at
//! each point of the layer, so N_bound/N_free is exactly
//! K = p_on/p_off · V_layer/V_open (REFERENCES.md, "Reversible binding").

use crate::base::error::{EngineError, Result};
use std::path::Path;

/// Allowed binding-layer thickness, nm.
pub const LAYER_RANGE_NM: (f64, f64) = (1e-3, 1e3);
/// Allowed binding and unbinding rates, 1/s.
pub const RATE_RANGE_PER_S: (f64, f64) = (1e-3, 1e15);

/// A species' reversible binding to the fixed obstacles.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BindingSpec {
    /// Thickness δ of the layer around each obstacle's excluded surface in
    /// which a free centre may bind, nm.
    pub layer_nm: f64,
    /// Binding rate k_on of a centre in the layer, 1/s.
    pub on_rate_per_s: f64,
    /// Unbinding rate k_off, 1/s (mean dwell time 1/k_off).
    pub off_rate_per_s: f64,
}

impl BindingSpec {
    /// Probability that a free centre in the layer binds at a step end, 1 − exp(−k_on Δt).
    pub fn p_on(&self, dt_s: f64) -> f64 {
        -(-self.on_rate_per_s * dt_s).exp_m1()
    }

    /// Probability that a bound tracer is released at a given step end, 1 − exp(−k_off Δt).
    pub fn p_off(&self, dt_s: f64) -> f64 {
        -(-self.off_rate_per_s * dt_s).exp_m1()
    }

    /// K per unit layer share: N_bound/N_free = this × V_layer/V_open,
    /// exact for the stepped model; k_on/k_off in the limit Δt → 0.
    pub fn stepped_ratio(&self, dt_s: f64) -> f64 {
        self.p_on(dt_s) / self.p_off(dt_s)
    }

    /// The continuous-time ratio k_on/k_off.
    pub fn rate_ratio(&self) -> f64 {
        self.on_rate_per_s / self.off_rate_per_s
    }
}

/// The binding keys of one `[[species]]` entry, as given.
#[derive(Debug, Clone, Copy, Default)]
pub struct BindingKeys {
    /// `binding_layer_nm`.
    pub layer_nm: Option<f64>,
    /// `binding_rate_per_s`.
    pub on_rate_per_s: Option<f64>,
    /// `unbinding_rate_per_s`.
    pub off_rate_per_s: Option<f64>,
}

/// What binding needs of the rest of the scenario.
#[derive(Debug, Clone, Copy)]
pub struct BindingContext {
    /// The species is a crowder, or some species is.
    pub crowders: bool,
    /// The scenario has a `[geometry]`.
    pub geometry: bool,
    /// The scenario has `[obstacles]` or `[fibres]`.
    pub obstacles: bool,
    /// Every box axis is periodic.
    pub periodic: bool,
}

/// A number as a message shows it: e-notation when very large or small.
fn show(value: f64) -> String {
    let a = value.abs();
    if a != 0.0 && a.is_finite() && !(1e-4..1e7).contains(&a) {
        format!("{value:e}")
    } else {
        value.to_string()
    }
}

fn invalid(file: &Path, key: String, value: String, allowed: impl Into<String>) -> EngineError {
    EngineError::InvalidValue {
        file: file.to_path_buf(),
        key,
        value,
        allowed: allowed.into(),
    }
}

/// Validates species `i`'s binding keys: all three or none, each a finite
/// number in its range, and only for tracers among fixed obstacles in a
/// periodic box without a geometry.
///
/// # Errors
/// [`EngineError::InvalidValue`] naming the key, its value and what is allowed.
pub fn species_binding(
    file: &Path,
    i: usize,
    keys: &BindingKeys,
    context: &BindingContext,
) -> Result<Option<BindingSpec>> {
    let key = |k: &str| format!("species[{i}].{k}");
    let named = [
        ("binding_layer_nm", keys.layer_nm),
        ("binding_rate_per_s", keys.on_rate_per_s),
        ("unbinding_rate_per_s", keys.off_rate_per_s),
    ];
    let Some((first, v)) = named.iter().find_map(|(k, v)| v.map(|v| (*k, v))) else {
        return Ok(None);
    };
    if let Some((missing, _)) = named.iter().find(|(_, v)| v.is_none()) {
        return Err(invalid(
            file,
            key(missing),
            "(missing)".into(),
            format!(
                "binding needs all three of binding_layer_nm, binding_rate_per_s and unbinding_rate_per_s \
                 (there are no defaults); {first} = {v} was given without it"
            ),
        ));
    }
    let refuse = |reason: &str| Err(invalid(file, key(first), show(v), reason));
    if context.crowders {
        return refuse(
            "binding is only implemented for tracers among fixed obstacles, not in a scenario with crowders \
             (role = \"crowder\"); remove the binding keys or the crowders",
        );
    }
    if context.geometry {
        return refuse(
            "binding is only implemented among fixed obstacles in a periodic box, not with a [geometry] \
             (walls, pores, membranes); remove the binding keys or the [geometry]",
        );
    }
    if !context.obstacles {
        return refuse(
            "binding needs surfaces to bind to: add [obstacles] or [fibres], or remove the binding keys",
        );
    }
    if !context.periodic {
        return refuse(
            "binding is only implemented in a periodic box (box.periodic = [true, true, true]); \
             remove the binding keys or the walled axes",
        );
    }
    let check = |k: &str, v: f64, (lo, hi): (f64, f64), unit: &str| {
        if v.is_finite() && v >= lo && v <= hi {
            Ok(v)
        } else {
            Err(invalid(
                file,
                key(k),
                show(v),
                format!("it must be a finite number from {lo:e} to {hi:e} {unit}"),
            ))
        }
    };
    Ok(Some(BindingSpec {
        layer_nm: check(
            "binding_layer_nm",
            keys.layer_nm.unwrap_or_default(),
            LAYER_RANGE_NM,
            "nm",
        )?,
        on_rate_per_s: check(
            "binding_rate_per_s",
            keys.on_rate_per_s.unwrap_or_default(),
            RATE_RANGE_PER_S,
            "per second",
        )?,
        off_rate_per_s: check(
            "unbinding_rate_per_s",
            keys.off_rate_per_s.unwrap_or_default(),
            RATE_RANGE_PER_S,
            "per second",
        )?,
    }))
}
