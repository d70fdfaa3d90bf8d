//! Scenario files: the one place that parses and validates them.
//!
//! A scenario is read in two stages. The TOML text becomes a [`RawScenario`]
//! (serde, unknown keys rejected with their line), overrides from
//! `--set KEY=VALUE` are applied to it, and [`RawScenario::validate`] turns it
//! into a [`Scenario`] whose values are all checked, with errors that name the
//! file, the key, the value and the allowed range. Nothing downstream sees an
//! unchecked value.

use crate::error::{EngineError, Result};
use crate::medium;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// The largest number of particles of one species (memory: about 70 bytes each).
pub const MAX_COUNT: i64 = 100_000_000;
/// The largest number of steps in one run.
pub const MAX_STEPS: i64 = 1_000_000_000_000;
/// Step length as a fraction of the smallest feature above which `check` warns
/// (a tenth: common practice, REFERENCE.md "Numerics").
pub const STEP_WARNING_FRACTION: f64 = 0.1;

/// Scenario as written in TOML, before validation.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawScenario {
    /// Seed of all random streams (default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed: Option<i64>,
    /// Solvent.
    pub medium: RawMedium,
    /// Simulation box.
    #[serde(rename = "box")]
    pub sim_box: RawBox,
    /// Particle species; at least one.
    pub species: Vec<RawSpecies>,
    /// Time stepping.
    pub integrator: RawIntegrator,
    /// Trajectory output.
    #[serde(default)]
    pub output: RawOutput,
}

/// `[medium]`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawMedium {
    /// Temperature in kelvin.
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// Dynamic viscosity; omitted means water at the temperature.
    #[serde(rename = "viscosity_Pa_s", default, skip_serializing_if = "Option::is_none")]
    pub viscosity_pa_s: Option<f64>,
}

/// `[box]`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawBox {
    /// Edge lengths x, y, z in nm.
    pub edges_nm: Vec<f64>,
    /// Periodic per axis (default all periodic); a non-periodic axis has hard
    /// faces that reflect the particle surface.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub periodic: Option<Vec<bool>>,
}

/// One `[[species]]` entry.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawSpecies {
    /// Name (letters, digits, `_` and `-`); also the HDF5 group name.
    pub name: String,
    /// Steric radius in nm (contacts and walls).
    pub radius_nm: f64,
    /// Hydrodynamic (drag) radius in nm; defaults to the steric radius.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drag_radius_nm: Option<f64>,
    /// Number of particles.
    pub count: i64,
    /// Explicit free diffusivity, overriding Stokes–Einstein.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub diffusivity_m2_per_s: Option<f64>,
}

/// `[integrator]`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawIntegrator {
    /// Time step in seconds.
    pub dt_s: f64,
    /// Number of steps.
    pub steps: i64,
}

/// `[output]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawOutput {
    /// Trajectory file (HDF5); relative paths are taken from the working folder.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub file: Option<String>,
    /// Record a frame every this many steps (default: steps / 100, at least 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub record_every_steps: Option<i64>,
    /// "f32" (default) or "f64" for stored positions.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub precision: Option<String>,
    /// Wall-clock seconds between checkpoints (default 60).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub checkpoint_interval_s: Option<f64>,
}

/// Stored precision of positions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Precision {
    /// 32-bit floats (half the file size; about 1e-7 relative).
    F32,
    /// 64-bit floats.
    F64,
}

/// A validated species.
#[derive(Debug, Clone, PartialEq)]
pub struct Species {
    /// Name.
    pub name: String,
    /// Steric radius, nm.
    pub radius_nm: f64,
    /// Drag radius, nm.
    pub drag_radius_nm: f64,
    /// Number of particles.
    pub count: usize,
    /// Free diffusivity, m²/s.
    pub d0_m2_per_s: f64,
    /// Whether `d0_m2_per_s` was given explicitly rather than from Stokes–Einstein.
    pub d0_explicit: bool,
}

impl Species {
    /// Free diffusivity in nm²/s, the engine's internal unit.
    pub fn d0_nm2_per_s(&self) -> f64 {
        medium::m2_to_nm2(self.d0_m2_per_s)
    }

    /// Root-mean-square step per axis, √(2 D0 Δt), in nm.
    pub fn step_rms_nm(&self, dt_s: f64) -> f64 {
        (2.0 * self.d0_nm2_per_s() * dt_s).sqrt()
    }
}

/// A validated simulation box.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SimBox {
    /// Edge lengths, nm.
    pub edges_nm: [f64; 3],
    /// Periodic per axis.
    pub periodic: [bool; 3],
}

/// Validated output settings.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputSpec {
    /// Trajectory path from the scenario, if any.
    pub file: Option<PathBuf>,
    /// Steps between frames.
    pub record_every_steps: u64,
    /// Stored precision.
    pub precision: Precision,
    /// Wall-clock seconds between checkpoints.
    pub checkpoint_interval_s: f64,
}

/// A fully validated scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    /// Path of the scenario file (for messages).
    pub source: PathBuf,
    /// Seed of all random streams.
    pub seed: u64,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Viscosity, Pa·s.
    pub viscosity_pa_s: f64,
    /// True when the viscosity came from the water correlation.
    pub viscosity_is_water: bool,
    /// Box.
    pub sim_box: SimBox,
    /// Species in file order.
    pub species: Vec<Species>,
    /// Time step, s.
    pub dt_s: f64,
    /// Number of steps.
    pub steps: u64,
    /// Output settings.
    pub output: OutputSpec,
    /// The resolved scenario (defaults filled in) as TOML text.
    pub resolved_toml: String,
}

impl Scenario {
    /// Reads, overrides and validates a scenario file.
    ///
    /// # Errors
    /// Any read, parse, override or validation failure, naming file and key.
    pub fn load(path: &Path, overrides: &[String]) -> Result<Self> {
        let text = std::fs::read_to_string(path).map_err(|source| EngineError::ReadScenario {
            file: path.to_path_buf(),
            source,
        })?;
        Self::from_text(&text, path, overrides)
    }

    /// Parses, overrides and validates scenario text; `path` is used in messages.
    ///
    /// # Errors
    /// As [`Scenario::load`].
    pub fn from_text(text: &str, path: &Path, overrides: &[String]) -> Result<Self> {
        let raw = RawScenario::parse(text, path)?;
        let raw = raw.with_overrides(overrides)?;
        raw.validate(path)
    }

    /// Total number of particles over all species.
    pub fn particle_count(&self) -> usize {
        self.species.iter().map(|s| s.count).sum()
    }

    /// Number of frames recorded, including the initial one.
    pub fn frames(&self) -> u64 {
        self.steps / self.output.record_every_steps + 1
    }

    /// True when particles can touch something (a wall), where the step
    /// length matters; free periodic diffusion is exact for any Δt.
    pub fn has_contacts(&self) -> bool {
        self.sim_box.periodic.iter().any(|p| !p)
    }

    /// Warnings a careful user would want before running.
    pub fn warnings(&self) -> Vec<String> {
        let mut out = Vec::new();
        for s in self.species.iter().filter(|_| self.has_contacts()) {
            let step = s.step_rms_nm(self.dt_s);
            let feature = s.radius_nm;
            if step > STEP_WARNING_FRACTION * feature {
                out.push(format!(
                    "species '{}': rms step per axis √(2 D0 Δt) = {:.4} nm is more than a tenth of the \
                     smallest feature (radius {} nm); a smaller integrator.dt_s reduces the \
                     discretisation bias at contacts (common practice)",
                    s.name, step, feature
                ));
            }
        }
        let total = self.particle_count() as f64 * self.frames() as f64 * 3.0;
        let bytes = total * if self.output.precision == Precision::F32 { 4.0 } else { 8.0 } * 1.5;
        if bytes > 20e9 {
            out.push(format!(
                "the trajectory will be about {:.1} GB; raise output.record_every_steps to record fewer frames",
                bytes / 1e9
            ));
        }
        out
    }
}

fn invalid(file: &Path, key: impl Into<String>, value: impl ToString, allowed: impl Into<String>) -> EngineError {
    EngineError::InvalidValue {
        file: file.to_path_buf(),
        key: key.into(),
        value: value.to_string(),
        allowed: allowed.into(),
    }
}

/// Checks that a float is finite and positive.
fn positive(file: &Path, key: &str, value: f64) -> Result<f64> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(invalid(file, key, value, "it must be a finite number greater than 0"))
    }
}

impl RawScenario {
    /// Parses TOML text; unknown keys and wrong types are reported with their line.
    ///
    /// # Errors
    /// [`EngineError::EmptyScenario`] or [`EngineError::ParseScenario`].
    pub fn parse(text: &str, path: &Path) -> Result<Self> {
        if text.trim().is_empty() {
            return Err(EngineError::EmptyScenario { file: path.to_path_buf() });
        }
        toml::from_str(text).map_err(|e| EngineError::ParseScenario {
            file: path.to_path_buf(),
            message: e.to_string().trim_end().to_string(),
        })
    }

    /// Applies `KEY=VALUE` overrides by dotted path (`species.0.count=10` or
    /// `species.tracer.count=10` for arrays of tables).
    ///
    /// # Errors
    /// [`EngineError::Override`] for a malformed assignment or a key the
    /// scenario format does not have.
    pub fn with_overrides(self, overrides: &[String]) -> Result<Self> {
        if overrides.is_empty() {
            return Ok(self);
        }
        let mut table = toml::Table::try_from(&self).map_err(|e| EngineError::Override {
            assignment: overrides.join(" "),
            reason: format!("internal: the scenario could not be re-encoded ({e})"),
        })?;
        for assignment in overrides {
            apply_override(&mut table, assignment)?;
            // Re-check after each one so the message names the assignment at fault.
            toml::Value::Table(table.clone())
                .try_into::<RawScenario>()
                .map_err(|e| EngineError::Override {
                    assignment: assignment.clone(),
                    reason: e.to_string().trim_end().to_string(),
                })?;
        }
        toml::Value::Table(table).try_into().map_err(|e: toml::de::Error| EngineError::Override {
            assignment: overrides.join(" "),
            reason: e.to_string(),
        })
    }

    /// Validates every value and resolves defaults.
    ///
    /// # Errors
    /// [`EngineError::InvalidValue`] naming the first bad key.
    pub fn validate(&self, file: &Path) -> Result<Scenario> {
        let seed = match self.seed {
            None => 1,
            Some(s) if s >= 0 => s as u64,
            Some(s) => return Err(invalid(file, "seed", s, "it must be a whole number ≥ 0")),
        };

        let temperature_k = positive(file, "medium.temperature_K", self.medium.temperature_k)?;
        let (viscosity_pa_s, viscosity_is_water) = match self.medium.viscosity_pa_s {
            Some(eta) => (positive(file, "medium.viscosity_Pa_s", eta)?, false),
            None => match medium::water_viscosity_pa_s(temperature_k) {
                Some(eta) => (eta, true),
                None => {
                    return Err(invalid(
                        file,
                        "medium.temperature_K",
                        temperature_k,
                        format!(
                            "water viscosity is only known here for liquid water, {} to {} K; \
                             give medium.viscosity_Pa_s for other temperatures or solvents",
                            medium::WATER_T_MIN_K,
                            medium::WATER_T_MAX_K
                        ),
                    ))
                }
            },
        };

        if self.sim_box.edges_nm.len() != 3 {
            return Err(invalid(
                file,
                "box.edges_nm",
                format!("{:?}", self.sim_box.edges_nm),
                "it must list exactly three edge lengths [x, y, z] in nm",
            ));
        }
        let mut edges_nm = [0.0; 3];
        for (k, e) in self.sim_box.edges_nm.iter().enumerate() {
            edges_nm[k] = positive(file, &format!("box.edges_nm[{k}]"), *e)?;
        }
        let periodic = match &self.sim_box.periodic {
            None => [true; 3],
            Some(p) if p.len() == 3 => [p[0], p[1], p[2]],
            Some(p) => {
                return Err(invalid(
                    file,
                    "box.periodic",
                    format!("{p:?}"),
                    "it must list three booleans [x, y, z]",
                ))
            }
        };

        if self.species.is_empty() {
            return Err(invalid(file, "species", "[]", "at least one [[species]] entry is needed"));
        }
        let mut species = Vec::with_capacity(self.species.len());
        for (i, s) in self.species.iter().enumerate() {
            let key = |k: &str| format!("species[{i}].{k}");
            let name_ok = !s.name.is_empty()
                && s.name.len() <= 64
                && s.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-');
            if !name_ok {
                return Err(invalid(
                    file,
                    key("name"),
                    format!("{:?}", s.name),
                    "names are 1 to 64 ASCII letters, digits, '_' or '-'",
                ));
            }
            if s.name == "obstacles" {
                return Err(invalid(file, key("name"), "\"obstacles\"", "the name 'obstacles' is reserved for fixed obstacles"));
            }
            if species.iter().any(|o: &Species| o.name == s.name) {
                return Err(invalid(file, key("name"), format!("{:?}", s.name), "species names must be unique"));
            }
            let radius_nm = positive(file, &key("radius_nm"), s.radius_nm)?;
            let drag_radius_nm = match s.drag_radius_nm {
                Some(r) => positive(file, &key("drag_radius_nm"), r)?,
                None => radius_nm,
            };
            if !(1..=MAX_COUNT).contains(&s.count) {
                return Err(invalid(file, key("count"), s.count, format!("it must be a whole number from 1 to {MAX_COUNT}")));
            }
            let (d0_m2_per_s, d0_explicit) = match s.diffusivity_m2_per_s {
                Some(d) => (positive(file, &key("diffusivity_m2_per_s"), d)?, true),
                None => (
                    medium::stokes_einstein_m2_per_s(temperature_k, viscosity_pa_s, drag_radius_nm * 1e-9),
                    false,
                ),
            };
            for k in 0..3 {
                if edges_nm[k] <= 2.0 * radius_nm {
                    return Err(invalid(
                        file,
                        format!("box.edges_nm[{k}]"),
                        edges_nm[k],
                        format!(
                            "the box must be wider than the diameter of species '{}' ({} nm)",
                            s.name,
                            2.0 * radius_nm
                        ),
                    ));
                }
            }
            species.push(Species {
                name: s.name.clone(),
                radius_nm,
                drag_radius_nm,
                count: s.count as usize,
                d0_m2_per_s,
                d0_explicit,
            });
        }

        let dt_s = positive(file, "integrator.dt_s", self.integrator.dt_s)?;
        if !(1..=MAX_STEPS).contains(&self.integrator.steps) {
            return Err(invalid(
                file,
                "integrator.steps",
                self.integrator.steps,
                format!("it must be a whole number from 1 to {MAX_STEPS}"),
            ));
        }
        let steps = self.integrator.steps as u64;

        let record_every_steps = match self.output.record_every_steps {
            None => (steps / 100).max(1),
            Some(r) if r >= 1 && (r as u64) <= steps && steps % (r as u64) == 0 => r as u64,
            Some(r) => {
                return Err(invalid(
                    file,
                    "output.record_every_steps",
                    r,
                    format!("it must be a whole number ≥ 1 that divides integrator.steps = {steps}"),
                ))
            }
        };
        let precision = match self.output.precision.as_deref() {
            None | Some("f32") => Precision::F32,
            Some("f64") => Precision::F64,
            Some(other) => return Err(invalid(file, "output.precision", format!("{other:?}"), "allowed: \"f32\" or \"f64\"")),
        };
        let checkpoint_interval_s = match self.output.checkpoint_interval_s {
            None => 60.0,
            Some(c) => positive(file, "output.checkpoint_interval_s", c)?,
        };
        let output = OutputSpec {
            file: self.output.file.as_ref().map(PathBuf::from),
            record_every_steps,
            precision,
            checkpoint_interval_s,
        };

        let mut resolved = self.clone();
        resolved.seed = Some(seed as i64);
        resolved.medium.viscosity_pa_s = Some(viscosity_pa_s);
        resolved.sim_box.periodic = Some(periodic.to_vec());
        resolved.output.record_every_steps = Some(record_every_steps as i64);
        resolved.output.precision = Some(if precision == Precision::F32 { "f32" } else { "f64" }.into());
        resolved.output.checkpoint_interval_s = Some(checkpoint_interval_s);
        let resolved_toml = toml::to_string(&resolved).map_err(|e| invalid(file, "(whole scenario)", e, "a scenario that can be written back as TOML"))?;

        Ok(Scenario {
            source: file.to_path_buf(),
            seed,
            temperature_k,
            viscosity_pa_s,
            viscosity_is_water,
            sim_box: SimBox { edges_nm, periodic },
            species,
            dt_s,
            steps,
            output,
            resolved_toml,
        })
    }
}

/// Applies one `a.b.c=value` assignment to a TOML table.
fn apply_override(table: &mut toml::Table, assignment: &str) -> Result<()> {
    let fail = |reason: String| EngineError::Override { assignment: assignment.to_string(), reason };
    let (path, value_text) = assignment
        .split_once('=')
        .ok_or_else(|| fail("expected KEY=VALUE, e.g. integrator.steps=1000".into()))?;
    let parts: Vec<&str> = path.trim().split('.').map(str::trim).collect();
    if parts.iter().any(|p| p.is_empty()) {
        return Err(fail("the key is empty or has an empty part; use a dotted path such as medium.temperature_K".into()));
    }
    set_in_table(table, &parts, parse_value(value_text.trim())).map_err(fail)
}

/// Sets `parts` (a dotted path) to `value`, creating sections on the way; an
/// array of tables is indexed by position or by its entries' `name` key.
fn set_in_table(table: &mut toml::Table, parts: &[&str], value: toml::Value) -> std::result::Result<(), String> {
    let (head, rest) = parts.split_first().ok_or("empty key")?;
    if rest.is_empty() {
        table.insert((*head).to_string(), value);
        return Ok(());
    }
    let entry = table
        .entry((*head).to_string())
        .or_insert_with(|| toml::Value::Table(toml::Table::new()));
    match entry {
        toml::Value::Table(t) => set_in_table(t, rest, value),
        toml::Value::Array(items) => {
            let (selector, inner) = rest.split_first().ok_or("empty key")?;
            if inner.is_empty() {
                return Err(format!("name a key inside `{head}.{selector}`, e.g. {head}.{selector}.count"));
            }
            let index = match selector.parse::<usize>() {
                Ok(i) => i,
                Err(_) => items
                    .iter()
                    .position(|v| v.get("name").and_then(|n| n.as_str()) == Some(*selector))
                    .ok_or_else(|| format!("`{head}` has no entry named '{selector}'"))?,
            };
            let len = items.len();
            match items.get_mut(index) {
                Some(toml::Value::Table(t)) => set_in_table(t, inner, value),
                Some(_) => Err(format!("`{head}.{selector}` is not a section")),
                None => Err(format!("`{head}` has {len} entries; index {index} is out of range")),
            }
        }
        _ => Err(format!("`{head}` is a value, not a section")),
    }
}

/// A value as TOML if it parses (numbers, booleans, arrays, quoted strings),
/// otherwise as a bare string.
fn parse_value(text: &str) -> toml::Value {
    match format!("v = {text}").parse::<toml::Table>() {
        Ok(mut t) => t.remove("v").unwrap_or_else(|| toml::Value::String(text.to_string())),
        Err(_) => toml::Value::String(text.to_string()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const BASIC: &str = r#"
seed = 5
[medium]
temperature_K = 298.15
[box]
edges_nm = [100.0, 100.0, 100.0]
[[species]]
name = "tracer"
radius_nm = 2.0
count = 10
[integrator]
dt_s = 1e-9
steps = 100
"#;

    fn load(text: &str, sets: &[&str]) -> Result<Scenario> {
        let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
        Scenario::from_text(text, Path::new("test.toml"), &sets)
    }

    #[test]
    fn basic_scenario_resolves_defaults() {
        let s = load(BASIC, &[]).unwrap();
        assert_eq!(s.seed, 5);
        assert!(s.viscosity_is_water);
        assert_eq!(s.output.record_every_steps, 1);
        assert_eq!(s.frames(), 101);
        assert_eq!(s.species[0].drag_radius_nm, 2.0);
        // The resolved text parses back to the same scenario.
        let again = load(&s.resolved_toml, &[]).unwrap();
        assert_eq!(again.resolved_toml, s.resolved_toml);
    }

    #[test]
    fn overrides_by_index_and_name() {
        let s = load(BASIC, &["species.0.count=20", "integrator.steps=200"]).unwrap();
        assert_eq!(s.species[0].count, 20);
        assert_eq!(s.steps, 200);
        let s = load(BASIC, &["species.tracer.radius_nm=3.5", "medium.viscosity_Pa_s=1e-3"]).unwrap();
        assert_eq!(s.species[0].radius_nm, 3.5);
        assert_eq!(s.viscosity_pa_s, 1e-3);
    }

    #[test]
    fn override_errors_name_the_assignment() {
        for bad in ["integrator.steps", "=3", "integrator.nosuch=3", "species.9.count=1", "species.x.count=1", "seed.a=1"] {
            let err = load(BASIC, &[bad]).unwrap_err().to_string();
            assert!(err.contains(bad), "{bad}: {err}");
        }
    }

    #[test]
    fn unknown_key_reports_line() {
        let text = BASIC.replace("steps = 100", "steps = 100\nstepz = 3");
        let err = load(&text, &[]).unwrap_err().to_string();
        assert!(err.contains("stepz") && err.contains("line"), "{err}");
    }
}
