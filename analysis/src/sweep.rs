//! Sweeps: a grid of runs over scenario keys × seeds, each analysed, joined
//! into `summary.csv` and `summary.json` with model values beside them.
//!
//! Every point leaves `points/pNNNN_sSEED.json` in the output folder as soon
//! as it is done, so an interrupted sweep picks up where it stopped, shards
//! of one sweep (`--shard I/N`, every N-th point) can run on different
//! machines, and a final merge joins whatever points are there.

use crate::estimators::{analyze, AnalyzeOptions};
use crate::models;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::atomic::AtomicBool;
use thicket_engine::run::driver::{run, RunOptions, RunOutcome};
use thicket_engine::Scenario;

/// Errors of a sweep, naming the file and key concerned.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum SweepError {
    /// The sweep file could not be read or parsed.
    #[error("{}: {message}", file.display())]
    Spec {
        /// Sweep file.
        file: PathBuf,
        /// What is wrong.
        message: String,
    },
    /// A grid key is not a key of the scenario, or a value is refused.
    #[error("{}: grid key `{key}` = {value}: {message}", file.display())]
    GridKey {
        /// Sweep file.
        file: PathBuf,
        /// Dotted key.
        key: String,
        /// Value tried.
        value: String,
        /// The scenario's own error.
        message: String,
    },
    /// A run or its analysis failed.
    #[error("sweep point {point} (seed {seed}): {message}")]
    Point {
        /// Point index.
        point: usize,
        /// Seed.
        seed: i64,
        /// What failed.
        message: String,
    },
    /// Output could not be written or read.
    #[error("{}: {message}", path.display())]
    Output {
        /// Path concerned.
        path: PathBuf,
        /// What failed.
        message: String,
    },
}

type Result<T> = std::result::Result<T, SweepError>;

/// The sweep file as written.
#[derive(Debug, Clone, Deserialize, Serialize)]
#[serde(deny_unknown_fields)]
pub struct RawSweep {
    /// Scenario file, relative to the sweep file.
    pub scenario: String,
    /// Seeds: every grid point is run once per seed.
    #[serde(default = "default_seeds")]
    pub seeds: Vec<i64>,
    /// Keys to vary (dotted scenario paths) and their values; the grid is the
    /// Cartesian product, the first key is the x axis of the plot.
    pub grid: toml::Table,
    /// Overrides applied to every point.
    #[serde(default)]
    pub set: toml::Table,
    /// Species to analyse (default: the first).
    #[serde(default)]
    pub species: Option<String>,
    /// Title for the report and plot.
    #[serde(default)]
    pub title: Option<String>,
    /// Extrapolate D_eff to Δt → 0 over the grid key `integrator.dt_s`
    /// (which must list two or more steps), per combination of the other keys.
    #[serde(default)]
    pub extrapolate_dt: bool,
}

/// The largest number of (point, seed) runs one sweep may hold.
pub const MAX_SWEEP_RUNS: usize = 100_000;

/// Stable 64-bit FNV-1a hash of a resolved scenario's text, as hex: the
/// identity of a sweep point, so an edited grid reruns what changed.
pub fn scenario_hash(resolved_toml: &str) -> String {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for b in resolved_toml.bytes() {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0100_0000_01b3);
    }
    format!("{h:016x}")
}

fn default_seeds() -> Vec<i64> {
    vec![1]
}

/// A validated sweep.
#[derive(Debug, Clone)]
pub struct Sweep {
    /// The sweep file.
    pub file: PathBuf,
    /// The scenario file.
    pub scenario_file: PathBuf,
    /// Seeds.
    pub seeds: Vec<i64>,
    /// Grid keys in file order.
    pub keys: Vec<String>,
    /// Points: one value (TOML text) per key.
    pub points: Vec<Vec<toml::Value>>,
    /// Fixed overrides as `KEY=VALUE`.
    pub fixed: Vec<String>,
    /// Species analysed.
    pub species: Option<String>,
    /// Title.
    pub title: String,
    /// Extrapolate D_eff to Δt → 0 over `integrator.dt_s`.
    pub extrapolate_dt: bool,
}

/// The grid key a Δt extrapolation runs over.
pub const DT_KEY: &str = "integrator.dt_s";

/// D_eff/D0 extrapolated to Δt → 0 for one combination of the other grid keys.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct DtExtrapolation {
    /// Values of the other grid keys.
    pub values: BTreeMap<String, toml::Value>,
    /// Contact rule of the runs ("reject" or "reflect").
    pub contact: String,
    /// Leading order fitted: D(Δt) = D(0) + c·Δt^order (½ for rejection, 1 for reflection).
    pub order: f64,
    /// Steps used, s.
    pub dt_s: Vec<f64>,
    /// Extrapolated D_eff/D0.
    pub d_eff_over_d0: f64,
    /// 95 % interval, including the fit's uncertainty (scaled up by the
    /// residual χ²/dof when that exceeds 1, with Student's t for the dof).
    pub d_eff_over_d0_ci95: [f64; 2],
    /// Residual χ² per degree of freedom (None with two steps: an exact fit).
    pub chi2_per_dof: Option<f64>,
}

/// Weighted least-squares line y = a + b·x through (x, y ± se): the
/// intercept a, its standard error (scaled by √(χ²/dof) when that exceeds
/// 1), and χ²/dof (None with two points). None with fewer than two distinct x.
pub fn weighted_intercept(x: &[f64], y: &[f64], se: &[f64]) -> Option<(f64, f64, Option<f64>)> {
    let w: Vec<f64> = se.iter().map(|s| 1.0 / (s * s).max(1e-300)).collect();
    let (mut sw, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for i in 0..x.len() {
        sw += w[i];
        sx += w[i] * x[i];
        sy += w[i] * y[i];
        sxx += w[i] * x[i] * x[i];
        sxy += w[i] * x[i] * y[i];
    }
    let det = sw * sxx - sx * sx;
    if x.len() < 2 || det.abs() <= 1e-12 * sw * sxx {
        return None;
    }
    let a = (sxx * sy - sx * sxy) / det;
    let b = (sw * sxy - sx * sy) / det;
    let mut var_a = sxx / det;
    let dof = x.len() - 2;
    let chi2 = (dof > 0).then(|| {
        (0..x.len())
            .map(|i| w[i] * (y[i] - a - b * x[i]).powi(2))
            .sum::<f64>()
            / dof as f64
    });
    if let Some(c) = chi2 {
        var_a *= c.max(1.0);
    }
    Some((a, var_a.sqrt(), chi2))
}

/// Two-sided 95 % quantile of Student's t with `dof` degrees of freedom
/// (statistical tables [NIST/SEMATECH e-Handbook]; the normal 1.96 for dof 0,
/// i.e. an exact fit whose interval comes from the points' errors alone).
fn t95(dof: usize) -> f64 {
    const T: [f64; 10] = [
        12.706, 4.303, 3.182, 2.776, 2.571, 2.447, 2.365, 2.306, 2.262, 2.228,
    ];
    match dof {
        0 => 1.959_963_984_540_054,
        d if d <= 10 => T[d - 1],
        _ => 1.959_963_984_540_054 + 2.5 / dof as f64,
    }
}

/// The Δt extrapolations of a summary's rows (empty unless the sweep asks).
fn extrapolate_dt(sweep: &Sweep, rows: &[SummaryRow]) -> Vec<DtExtrapolation> {
    if !sweep.extrapolate_dt {
        return Vec::new();
    }
    let z = 1.959_963_984_540_054;
    let mut groups: BTreeMap<String, Vec<&SummaryRow>> = BTreeMap::new();
    for r in rows {
        let mut others = r.values.clone();
        others.remove(DT_KEY);
        groups.entry(format!("{others:?}")).or_default().push(r);
    }
    let mut out = Vec::new();
    for members in groups.values() {
        let first = members[0];
        let contact = Scenario::load(
            &sweep.scenario_file,
            &sweep.overrides(first.point, sweep.seeds[0]),
        )
        .map(|sc| sc.contact)
        .unwrap_or_default();
        let order = match contact {
            thicket_engine::space::collisions::ContactRule::Reject => 0.5,
            thicket_engine::space::collisions::ContactRule::Reflect => 1.0,
        };
        let dt: Vec<f64> = members
            .iter()
            .filter_map(|r| {
                r.values
                    .get(DT_KEY)
                    .and_then(|v| v.as_float().or(v.as_integer().map(|i| i as f64)))
            })
            .collect();
        if dt.len() != members.len() {
            continue;
        }
        let x: Vec<f64> = dt.iter().map(|d| d.powf(order)).collect();
        let y: Vec<f64> = members.iter().map(|r| r.d_eff_over_d0).collect();
        let se: Vec<f64> = members
            .iter()
            .map(|r| (r.d_eff_over_d0_ci95[1] - r.d_eff_over_d0_ci95[0]) / (2.0 * z))
            .collect();
        if let Some((a, sa, chi2)) = weighted_intercept(&x, &y, &se) {
            let half = t95(x.len() - 2) * sa;
            let mut values = first.values.clone();
            values.remove(DT_KEY);
            out.push(DtExtrapolation {
                values,
                contact: contact.name().into(),
                order,
                dt_s: dt,
                d_eff_over_d0: a,
                d_eff_over_d0_ci95: [a - half, a + half],
                chi2_per_dof: chi2,
            });
        }
    }
    out
}

/// One finished (point, seed) run.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
pub struct PointResult {
    /// Point index in the grid.
    pub point: usize,
    /// Seed.
    pub seed: i64,
    /// [`scenario_hash`] of the resolved scenario the result came from
    /// (absent in results of older versions, which are then rerun).
    #[serde(default)]
    pub scenario_hash: Option<String>,
    /// Grid values by key.
    pub values: BTreeMap<String, toml::Value>,
    /// D0 of the analysed species, m²/s.
    pub d0_m2_per_s: f64,
    /// D_eff, m²/s.
    pub d_eff_m2_per_s: f64,
    /// 95 % interval, m²/s.
    pub d_eff_ci95_m2_per_s: [f64; 2],
    /// D_eff/D0.
    pub d_eff_over_d0: f64,
    /// Long-time exponent.
    pub alpha_long: f64,
    /// Which diffusivity D_eff is (e.g. "lateral (x, y)").
    #[serde(default)]
    pub direction: String,
    /// Fit window [t0, t1], s.
    #[serde(default)]
    pub fit_window_s: [f64; 2],
    /// How the window was chosen ("auto", "auto_fallback", "user").
    #[serde(default)]
    pub fit_window_source: String,
    /// Crossover time to the diffusive regime, s, if the MSD showed one.
    #[serde(default)]
    pub crossover_time_s: Option<f64>,
    /// `true` when D_eff is an apparent value (not diffusive in the window).
    #[serde(default)]
    pub apparent: bool,
    /// The run's duration, s.
    #[serde(default)]
    pub duration_s: f64,
    /// For an apparent value: by how much to lengthen the run.
    #[serde(default)]
    pub lengthen_run_by: Option<f64>,
    /// Model predictions of D_eff/D0 for this scenario.
    pub models: BTreeMap<String, f64>,
    /// Trajectory file, relative to the output folder.
    pub trajectory: String,
}

/// One seed's fit within a summary row.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct SeedFit {
    /// Seed.
    pub seed: i64,
    /// D_eff/D0.
    pub d_eff_over_d0: f64,
    /// Its 95 % interval.
    pub d_eff_over_d0_ci95: [f64; 2],
    /// Long-time exponent in the window.
    pub alpha_long: f64,
    /// Fit window [t0, t1], s.
    pub fit_window_s: [f64; 2],
    /// `true` when D_eff is an apparent value.
    pub apparent: bool,
    /// For an apparent value: by how much to lengthen the run.
    pub lengthen_run_by: Option<f64>,
}

/// One grid point, all seeds combined.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct SummaryRow {
    /// Point index.
    pub point: usize,
    /// Grid values by key.
    pub values: BTreeMap<String, toml::Value>,
    /// Seeds combined.
    pub seeds: usize,
    /// D0, m²/s.
    pub d0_m2_per_s: f64,
    /// Inverse-variance weighted D_eff, m²/s.
    pub d_eff_m2_per_s: f64,
    /// 95 % interval of the weighted mean, m²/s.
    pub d_eff_ci95_m2_per_s: [f64; 2],
    /// D_eff/D0.
    pub d_eff_over_d0: f64,
    /// 95 % interval of D_eff/D0.
    pub d_eff_over_d0_ci95: [f64; 2],
    /// Mean long-time exponent.
    pub alpha_long: f64,
    /// Which diffusivity D_eff is (e.g. "lateral (x, y)").
    pub direction: String,
    /// `true` when any seed's D_eff is an apparent value, so the combined
    /// value is one too.
    pub apparent: bool,
    /// Seeds whose D_eff is an apparent value.
    pub apparent_seeds: Vec<i64>,
    /// Shortest and longest lag of the seeds' fit windows, s.
    pub fit_window_s: [f64; 2],
    /// For an apparent point: by how much to lengthen the runs (the
    /// largest factor over its seeds).
    pub lengthen_run_by: Option<f64>,
    /// Each seed's fit.
    pub per_seed: Vec<SeedFit>,
    /// Model predictions of D_eff/D0 (from the first seed's scenario).
    pub models: BTreeMap<String, f64>,
}

/// The whole summary (`summary.json`).
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Summary {
    /// Title.
    pub title: String,
    /// Sweep file.
    pub sweep_file: String,
    /// Grid keys.
    pub keys: Vec<String>,
    /// Rows, in point order.
    pub points: Vec<SummaryRow>,
    /// Free-volume fit exp(−γ φ/(1−φ)) against the first key, when it is a fraction.
    pub free_volume_gamma: Option<f64>,
    /// Standard error of γ.
    pub free_volume_gamma_se: Option<f64>,
    /// Points of the grid with no result yet (an unfinished shard).
    pub missing_points: Vec<usize>,
    /// One line per point whose D_eff is an apparent value, saying which
    /// seeds and by how much to lengthen the runs.
    pub too_short: Vec<String>,
    /// The models' D_eff/D0 along the first key on a fine grid (from 0 for
    /// a volume fraction), for smooth curves beside the points.
    pub model_curves: Vec<ModelCurve>,
    /// D_eff/D0 extrapolated to Δt → 0 (with `extrapolate_dt = true`).
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub dt_extrapolation: Vec<DtExtrapolation>,
    /// The usual caution.
    pub caution: String,
}

/// One model's D_eff/D0 against the sweep's first key.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ModelCurve {
    /// Model name, as in the points' `models`.
    pub name: String,
    /// The variable the model is evaluated at (φ, φ_excl, λ, …).
    pub variable: String,
    /// (x, D_eff/D0) pairs, x increasing.
    pub points: Vec<[f64; 2]>,
}

/// Grid points of a model curve.
const CURVE_POINTS: usize = 41;

/// The models' D_eff/D0 along the first key: the scenario of the first
/// point with that key set to each value of a fine grid, evaluated by the
/// one model table. A volume-fraction key starts at 0, where every
/// obstruction model is exactly 1.
fn model_curves(sweep: &Sweep) -> Vec<ModelCurve> {
    let key = &sweep.keys[0];
    let numbers: Vec<(f64, bool)> = sweep
        .points
        .iter()
        .filter_map(|p| {
            let v = &p[0];
            v.as_float()
                .map(|f| (f, false))
                .or(v.as_integer().map(|i| (i as f64, true)))
        })
        .collect();
    if numbers.is_empty() {
        return Vec::new();
    }
    let integer = numbers.iter().all(|n| n.1);
    let fraction = key.ends_with("volume_fraction");
    let hi = numbers.iter().map(|n| n.0).fold(f64::MIN, f64::max);
    let lo = if fraction {
        0.0
    } else {
        numbers.iter().map(|n| n.0).fold(f64::MAX, f64::min)
    };
    if hi.is_nan() || lo.is_nan() || hi <= lo {
        return Vec::new();
    }
    let mut xs: Vec<f64> = (0..CURVE_POINTS)
        .map(|k| lo + (hi - lo) * k as f64 / (CURVE_POINTS - 1) as f64)
        .map(|x| if integer { x.round() } else { x })
        .collect();
    xs.dedup();
    let mut curves: Vec<ModelCurve> = Vec::new();
    let mut add = |name: &str, variable: &str, x: f64, y: f64| match curves
        .iter_mut()
        .find(|c| c.name == name)
    {
        Some(c) => c.points.push([x, y]),
        None => curves.push(ModelCurve {
            name: name.to_string(),
            variable: variable.to_string(),
            points: vec![[x, y]],
        }),
    };
    let mut at_zero: Vec<String> = Vec::new();
    for x in xs {
        let mut sets = sweep.fixed.clone();
        for (k, v) in sweep.keys.iter().zip(&sweep.points[0]).skip(1) {
            sets.push(format!("{k}={v}"));
        }
        let value = if integer {
            format!("{}", x as i64)
        } else {
            format!("{x:?}")
        };
        sets.push(format!("{key}={value}"));
        sets.push(format!("seed={}", sweep.seeds[0]));
        let Ok(scenario) = Scenario::load(&sweep.scenario_file, &sets) else {
            if fraction && x == 0.0 {
                at_zero.push(String::new());
            }
            continue;
        };
        let species = sweep
            .species
            .clone()
            .or_else(|| default_species(&scenario))
            .unwrap_or_default();
        let table = crate::model_table::scenario_model_table(&scenario, &species);
        for e in table.entries.iter().filter(|e| e.compares_with_d_eff) {
            if let Some(v) = e.value {
                add(&e.name, &e.variable, x, v);
            }
        }
    }
    // No obstacles at φ = 0 (a value the scenario itself may refuse): every obstruction model gives 1.
    if !at_zero.is_empty() {
        for c in curves.iter_mut().filter(|c| c.variable.starts_with('φ')) {
            c.points.insert(0, [0.0, 1.0]);
        }
    }
    curves
}

/// The species an analysis picks by default: the first that is not a crowder.
pub fn default_species(scenario: &Scenario) -> Option<String> {
    scenario
        .species
        .iter()
        .find(|s| !s.crowder)
        .or(scenario.species.first())
        .map(|s| s.name.clone())
}

/// The caution every report carries.
pub const CAUTION: &str = "Model estimates only: not, on their own, a basis for clinical, dosing or safety decisions, which follow local codes and licensed practice.";

impl Sweep {
    /// Reads and validates a sweep file: every grid value is tried on the
    /// scenario, so a key that does not exist is refused before any run.
    ///
    /// # Errors
    /// [`SweepError::Spec`] or [`SweepError::GridKey`].
    pub fn load(file: &Path) -> Result<Self> {
        let spec_err = |message: String| SweepError::Spec {
            file: file.to_path_buf(),
            message,
        };
        let text = std::fs::read_to_string(file)
            .map_err(|e| spec_err(format!("cannot read the sweep file: {e}")))?;
        let raw: RawSweep =
            toml::from_str(&text).map_err(|e| spec_err(e.to_string().trim_end().to_string()))?;
        let base = file.parent().unwrap_or(Path::new("."));
        let scenario_file = base.join(&raw.scenario);
        if raw.seeds.is_empty() {
            return Err(spec_err("key `seeds` = []: give at least one seed".into()));
        }
        let mut seen = std::collections::BTreeSet::new();
        if let Some(dup) = raw.seeds.iter().find(|s| !seen.insert(**s)) {
            return Err(spec_err(format!(
                "key `seeds` = {:?}: seed {dup} is listed twice; each seed must appear once (a repeated seed repeats the same run)",
                raw.seeds
            )));
        }
        if raw.grid.is_empty() {
            return Err(spec_err(
                "section [grid] is empty: give at least one key with a list of values".into(),
            ));
        }
        let mut keys = Vec::new();
        let mut lists = Vec::new();
        for (key, value) in &raw.grid {
            let list = value.as_array().filter(|a| !a.is_empty()).ok_or_else(|| {
                spec_err(format!(
                    "grid key `{key}` = {value}: give a non-empty list of values"
                ))
            })?;
            keys.push(key.clone());
            lists.push(list.clone());
        }
        let runs = lists.iter().map(|l| l.len() as f64).product::<f64>() * raw.seeds.len() as f64;
        if runs > MAX_SWEEP_RUNS as f64 {
            return Err(spec_err(format!(
                "the grid ({}) × {} seed(s) makes {runs:e} runs, more than {MAX_SWEEP_RUNS}; shorten the [grid] lists or `seeds`",
                keys.iter()
                    .zip(&lists)
                    .map(|(k, l)| format!("{k}: {} values", l.len()))
                    .collect::<Vec<_>>()
                    .join(", "),
                raw.seeds.len()
            )));
        }
        let mut points: Vec<Vec<toml::Value>> = vec![vec![]];
        for list in &lists {
            points = points
                .into_iter()
                .flat_map(|p| {
                    list.iter().map(move |v| {
                        let mut q = p.clone();
                        q.push(v.clone());
                        q
                    })
                })
                .collect();
        }
        let fixed: Vec<String> = raw.set.iter().map(|(k, v)| format!("{k}={v}")).collect();
        let sweep = Sweep {
            file: file.to_path_buf(),
            scenario_file,
            seeds: raw.seeds,
            keys,
            points,
            fixed,
            species: raw.species,
            title: raw.title.unwrap_or_else(|| "sweep".into()),
            extrapolate_dt: raw.extrapolate_dt,
        };
        if sweep.extrapolate_dt {
            let steps = sweep
                .keys
                .iter()
                .position(|k| k == DT_KEY)
                .map_or(0, |i| lists[i].len());
            if steps < 2 {
                return Err(spec_err(format!(
                    "key `extrapolate_dt` = true needs the grid key `{DT_KEY}` with two or more steps (e.g. [4e-6, 2e-6, 1e-6])"
                )));
            }
        }
        // Validate every value on its own, so the message names the key at fault.
        for (k, list) in sweep.keys.iter().zip(&lists) {
            for v in list {
                let mut sets = sweep.fixed.clone();
                sets.push(format!("{k}={v}"));
                Scenario::load(&sweep.scenario_file, &sets).map_err(|e| SweepError::GridKey {
                    file: file.to_path_buf(),
                    key: k.clone(),
                    value: v.to_string(),
                    message: e.to_string(),
                })?;
            }
        }
        Ok(sweep)
    }

    /// [`scenario_hash`] of the resolved scenario of one point and seed.
    ///
    /// # Errors
    /// [`SweepError::Point`] if the point's scenario does not validate.
    pub fn point_hash(&self, point: usize, seed: i64) -> Result<String> {
        Scenario::load(&self.scenario_file, &self.overrides(point, seed))
            .map(|s| scenario_hash(&s.resolved_toml))
            .map_err(|e| SweepError::Point {
                point,
                seed,
                message: e.to_string(),
            })
    }

    /// Overrides for one point and seed.
    pub fn overrides(&self, point: usize, seed: i64) -> Vec<String> {
        let mut sets = self.fixed.clone();
        for (k, v) in self.keys.iter().zip(&self.points[point]) {
            sets.push(format!("{k}={v}"));
        }
        sets.push(format!("seed={seed}"));
        sets
    }
}

fn point_json(dir: &Path, point: usize, seed: i64) -> PathBuf {
    dir.join("points").join(format!("p{point:04}_s{seed}.json"))
}

impl Sweep {
    /// Every (point, seed) run in order; the k-th belongs to shard k mod N
    /// (0-based) of N, the order `run_sweep` shards by.
    pub fn runs(&self) -> Vec<(usize, i64)> {
        (0..self.points.len())
            .flat_map(|p| self.seeds.iter().map(move |&s| (p, s)))
            .collect()
    }

    /// `true` when `dir` holds a result of this run made from the scenario
    /// the sweep now gives it.
    pub fn has_result(&self, dir: &Path, point: usize, seed: i64) -> bool {
        let path = point_json(dir, point, seed);
        path.exists()
            && self
                .point_hash(point, seed)
                .is_ok_and(|h| read_point(&path).is_ok_and(|r| r.scenario_hash == Some(h)))
    }
}

/// Writes `bytes` to a temporary file beside `path` and renames it over
/// `path`: readers see the old file or the new one, never part of one. The
/// temporary name carries the host and process, so writers on several
/// machines sharing the folder never write one temporary file.
///
/// # Errors
/// The write or the rename failed.
pub fn write_atomically(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let host = std::fs::read_to_string("/proc/sys/kernel/hostname").unwrap_or_default();
    let mut name = path.file_name().unwrap_or_default().to_os_string();
    name.push(format!(".{}.{}.tmp", host.trim(), std::process::id()));
    let tmp = path.with_file_name(name);
    let written = std::fs::write(&tmp, bytes).and_then(|_| std::fs::rename(&tmp, path));
    if written.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    written
}

/// Runs the sweep's (point, seed) pairs selected by `shard` = (i, n) — every
/// n-th pair starting at i (1-based) — skipping pairs whose result exists
/// unless `force`. `progress(done, total)` is called as pairs finish.
///
/// # Errors
/// The first failing run or analysis, or unwritable output.
pub fn run_sweep(
    sweep: &Sweep,
    dir: &Path,
    shard: (usize, usize),
    force: bool,
    stop: &AtomicBool,
    progress: &(dyn Fn(usize, usize) + Sync),
) -> Result<Vec<PointResult>> {
    let out_err = |path: &Path, e: std::io::Error| SweepError::Output {
        path: path.to_path_buf(),
        message: e.to_string(),
    };
    std::fs::create_dir_all(dir.join("points")).map_err(|e| out_err(dir, e))?;
    std::fs::create_dir_all(dir.join("runs")).map_err(|e| out_err(dir, e))?;
    let (shard_i, shard_n) = shard;
    let pairs: Vec<(usize, i64)> = sweep
        .runs()
        .into_iter()
        .enumerate()
        .filter(|(k, _)| k % shard_n == shard_i - 1)
        .map(|(_, pair)| pair)
        .collect();
    let total = pairs.len();
    let done = std::sync::atomic::AtomicUsize::new(0);
    progress(0, total);
    let results: Vec<Result<Option<PointResult>>> = pairs
        .par_iter()
        .map(|&(point, seed)| {
            let result = if !force && sweep.has_result(dir, point, seed) {
                read_point(&point_json(dir, point, seed)).map(Some)
            } else {
                run_point(sweep, dir, point, seed, stop)
            };
            let n = done.fetch_add(1, std::sync::atomic::Ordering::Relaxed) + 1;
            progress(n, total);
            result
        })
        .collect();
    let mut out = Vec::new();
    for r in results {
        if let Some(p) = r? {
            out.push(p);
        }
    }
    Ok(out)
}

fn read_point(path: &Path) -> Result<PointResult> {
    let text = std::fs::read_to_string(path).map_err(|e| SweepError::Output {
        path: path.to_path_buf(),
        message: e.to_string(),
    })?;
    serde_json::from_str(&text).map_err(|e| SweepError::Output {
        path: path.to_path_buf(),
        message: format!("not a sweep point result ({e}); delete it to rerun the point"),
    })
}

/// Runs and analyses one (point, seed); `None` if stopped by `stop`.
fn run_point(
    sweep: &Sweep,
    dir: &Path,
    point: usize,
    seed: i64,
    stop: &AtomicBool,
) -> Result<Option<PointResult>> {
    let fail = |message: String| SweepError::Point {
        point,
        seed,
        message,
    };
    let scenario = Scenario::load(&sweep.scenario_file, &sweep.overrides(point, seed))
        .map_err(|e| fail(e.to_string()))?;
    let rel = format!("runs/p{point:04}_s{seed}.h5");
    let out = dir.join(&rel);
    let options = RunOptions {
        out: out.clone(),
        force: true,
        resume: false,
    };
    match run(&scenario, &options, stop, &mut |_, _| {}).map_err(|e| fail(e.to_string()))? {
        RunOutcome::Completed { .. } => {}
        RunOutcome::Interrupted { .. } => return Ok(None),
    }
    let analysis = analyze(&out, sweep.species.as_deref(), &AnalyzeOptions::default())
        .map_err(|e| fail(e.to_string()))?;
    let report = analysis.report;
    let d0 = report
        .d0_m2_per_s
        .ok_or_else(|| fail("the trajectory does not give D0".into()))?;
    let species_name = report.species.clone();
    let duration_s = scenario.steps as f64 * scenario.dt_s;
    let lengthen_run_by = report.apparent.then(|| {
        let estimate = crate::run_length::long_time_regime(&scenario, &species_name);
        crate::run_length::lengthen_factor(duration_s, report.crossover_time_s, estimate.as_ref())
    });
    let result = PointResult {
        point,
        seed,
        scenario_hash: Some(scenario_hash(&scenario.resolved_toml)),
        values: sweep
            .keys
            .iter()
            .cloned()
            .zip(sweep.points[point].iter().cloned())
            .collect(),
        d0_m2_per_s: d0,
        d_eff_m2_per_s: report.d_eff_m2_per_s,
        d_eff_ci95_m2_per_s: report.d_eff_ci95_m2_per_s,
        d_eff_over_d0: report.d_eff_m2_per_s / d0,
        alpha_long: report.alpha_long,
        direction: report.direction.clone(),
        fit_window_s: report.fit_window_s,
        fit_window_source: serde_json::to_value(report.fit_window_source)
            .ok()
            .and_then(|v| v.as_str().map(String::from))
            .unwrap_or_default(),
        crossover_time_s: report.crossover_time_s,
        apparent: report.apparent,
        duration_s,
        lengthen_run_by,
        models: report.models.clone(),
        trajectory: rel,
    };
    let json_path = point_json(dir, point, seed);
    let text = serde_json::to_string_pretty(&result).map_err(|e| fail(e.to_string()))?;
    // Write then rename, so a killed sweep never leaves half a result.
    write_atomically(&json_path, text.as_bytes()).map_err(|e| SweepError::Output {
        path: json_path.clone(),
        message: e.to_string(),
    })?;
    Ok(Some(result))
}

/// Joins every point result present in `dir` into a summary.
///
/// # Errors
/// Unreadable point files.
pub fn summarize(sweep: &Sweep, dir: &Path) -> Result<Summary> {
    let mut rows = Vec::new();
    let mut missing = Vec::new();
    for point in 0..sweep.points.len() {
        let mut results = Vec::new();
        for &seed in &sweep.seeds {
            let path = point_json(dir, point, seed);
            if path.exists() {
                let r = read_point(&path)?;
                // A result of another scenario (the grid was edited since) is not this point's.
                if r.scenario_hash.is_some()
                    && r.scenario_hash == sweep.point_hash(point, seed).ok()
                {
                    results.push(r);
                }
            }
        }
        if results.is_empty() {
            missing.push(point);
            continue;
        }
        rows.push(combine(point, &results));
    }
    let (gamma, gamma_se) = fit_gamma(sweep, &rows);
    let dt_extrapolation = extrapolate_dt(sweep, &rows);
    let too_short = rows
        .iter()
        .filter(|r| r.apparent)
        .map(|r| {
            let values: Vec<String> = r.values.iter().map(|(k, v)| format!("{k} = {v}")).collect();
            format!(
                "point {} ({}): D_eff is an apparent value for seed(s) {:?} — the MSD was not diffusive in the fit window; lengthen integrator.steps about ×{:.1}",
                r.point,
                values.join(", "),
                r.apparent_seeds,
                r.lengthen_run_by.unwrap_or(2.0)
            )
        })
        .collect();
    Ok(Summary {
        title: sweep.title.clone(),
        sweep_file: sweep.file.display().to_string(),
        keys: sweep.keys.clone(),
        points: rows,
        free_volume_gamma: gamma,
        free_volume_gamma_se: gamma_se,
        missing_points: missing,
        too_short,
        model_curves: model_curves(sweep),
        dt_extrapolation,
        caution: CAUTION.into(),
    })
}

/// Inverse-variance weighted mean of the seeds' D_eff (each seed's SE from
/// its 95 % interval), which also spans the spread between realisations.
fn combine(point: usize, results: &[PointResult]) -> SummaryRow {
    let z = 1.959_963_984_540_054;
    let mut wsum = 0.0;
    let mut dsum = 0.0;
    for r in results {
        let se = ((r.d_eff_ci95_m2_per_s[1] - r.d_eff_ci95_m2_per_s[0]) / (2.0 * z))
            .max(f64::MIN_POSITIVE);
        let w = 1.0 / (se * se);
        wsum += w;
        dsum += w * r.d_eff_m2_per_s;
    }
    let d = dsum / wsum;
    let mut se = (1.0 / wsum).sqrt();
    if results.len() > 1 {
        // Widen to the observed scatter between seeds when it exceeds the within-run errors.
        let n = results.len() as f64;
        let mean = results.iter().map(|r| r.d_eff_m2_per_s).sum::<f64>() / n;
        let var = results
            .iter()
            .map(|r| (r.d_eff_m2_per_s - mean).powi(2))
            .sum::<f64>()
            / (n - 1.0);
        se = se.max((var / n).sqrt());
    }
    let d0 = results[0].d0_m2_per_s;
    let ci = [d - z * se, d + z * se];
    SummaryRow {
        point,
        values: results[0].values.clone(),
        seeds: results.len(),
        d0_m2_per_s: d0,
        d_eff_m2_per_s: d,
        d_eff_ci95_m2_per_s: ci,
        d_eff_over_d0: d / d0,
        d_eff_over_d0_ci95: [ci[0] / d0, ci[1] / d0],
        alpha_long: results.iter().map(|r| r.alpha_long).sum::<f64>() / results.len() as f64,
        direction: results[0].direction.clone(),
        apparent: results.iter().any(|r| r.apparent),
        apparent_seeds: results
            .iter()
            .filter(|r| r.apparent)
            .map(|r| r.seed)
            .collect(),
        fit_window_s: [
            results
                .iter()
                .map(|r| r.fit_window_s[0])
                .fold(f64::INFINITY, f64::min),
            results
                .iter()
                .map(|r| r.fit_window_s[1])
                .fold(0.0, f64::max),
        ],
        lengthen_run_by: results
            .iter()
            .filter_map(|r| r.lengthen_run_by)
            .reduce(f64::max),
        per_seed: results
            .iter()
            .map(|r| SeedFit {
                seed: r.seed,
                d_eff_over_d0: r.d_eff_over_d0,
                d_eff_over_d0_ci95: [
                    r.d_eff_ci95_m2_per_s[0] / r.d0_m2_per_s,
                    r.d_eff_ci95_m2_per_s[1] / r.d0_m2_per_s,
                ],
                alpha_long: r.alpha_long,
                fit_window_s: r.fit_window_s,
                apparent: r.apparent,
                lengthen_run_by: r.lengthen_run_by,
            })
            .collect(),
        models: results[0].models.clone(),
    }
}

/// Fits γ of the free-volume form to D_eff/D0 against the first key when
/// that key's values are fractions in [0, 1), leaving out apparent values.
fn fit_gamma(sweep: &Sweep, rows: &[SummaryRow]) -> (Option<f64>, Option<f64>) {
    let key = &sweep.keys[0];
    if !key.ends_with("volume_fraction") {
        return (None, None);
    }
    let mut phis = Vec::new();
    let mut ratios = Vec::new();
    let mut weights = Vec::new();
    for r in rows {
        let Some(phi) = r
            .values
            .get(key)
            .and_then(|v| v.as_float().or(v.as_integer().map(|i| i as f64)))
        else {
            continue;
        };
        // Apparent values are biased towards D0; they would bend γ.
        if phi <= 0.0 || phi >= 1.0 || r.d_eff_over_d0 <= 0.0 || r.apparent {
            continue;
        }
        let half = (r.d_eff_over_d0_ci95[1] - r.d_eff_over_d0_ci95[0]) / 2.0;
        phis.push(phi);
        ratios.push(r.d_eff_over_d0);
        // Weight ln-ratio points by their inverse variance, (ratio / SE)².
        weights.push((r.d_eff_over_d0 / (half / 1.96).max(1e-12)).powi(2));
    }
    match models::fit_free_volume_gamma(&phis, &ratios, &weights) {
        Ok(fit) => (Some(fit.gamma), Some(fit.gamma_standard_error)),
        Err(_) => (None, None),
    }
}

/// Writes `summary.csv` and `summary.json` into `dir`; returns their paths.
///
/// # Errors
/// Unwritable files.
pub fn write_summary(summary: &Summary, dir: &Path) -> Result<Vec<PathBuf>> {
    let out_err = |path: &Path, e: String| SweepError::Output {
        path: path.to_path_buf(),
        message: e,
    };
    let json_path = dir.join("summary.json");
    let json =
        serde_json::to_string_pretty(summary).map_err(|e| out_err(&json_path, e.to_string()))?;
    write_atomically(&json_path, json.as_bytes())
        .map_err(|e| out_err(&json_path, e.to_string()))?;
    let model_names: Vec<String> = {
        let mut names: Vec<String> = summary
            .points
            .iter()
            .flat_map(|r| r.models.keys().cloned())
            .collect();
        names.sort();
        names.dedup();
        names
    };
    let mut csv = String::new();
    let mut header: Vec<String> = vec!["point".into()];
    header.extend(summary.keys.iter().cloned());
    header.extend(
        [
            "seeds",
            "d0_m2_per_s",
            "d_eff_m2_per_s",
            "d_eff_ci95_low_m2_per_s",
            "d_eff_ci95_high_m2_per_s",
            "d_eff_over_d0",
            "d_eff_over_d0_ci95_low",
            "d_eff_over_d0_ci95_high",
            "alpha_long",
            "direction",
            "fit_window_t0_s",
            "fit_window_t1_s",
            "apparent",
            "apparent_seeds",
            "lengthen_run_by",
        ]
        .map(String::from),
    );
    // Plain names a CSV reader takes as they are; summary.json keeps the full model names.
    header.extend(
        model_names
            .iter()
            .map(|m| format!("model_{}", crate::format::snake(m))),
    );
    csv.push_str(
        &header
            .iter()
            .map(|h| csv_field(h))
            .collect::<Vec<_>>()
            .join(","),
    );
    csv.push('\n');
    for r in &summary.points {
        let mut fields = vec![r.point.to_string()];
        for k in &summary.keys {
            fields.push(
                r.values
                    .get(k)
                    .map(|v| csv_field(&v.to_string()))
                    .unwrap_or_default(),
            );
        }
        for v in [
            r.d0_m2_per_s,
            r.d_eff_m2_per_s,
            r.d_eff_ci95_m2_per_s[0],
            r.d_eff_ci95_m2_per_s[1],
            r.d_eff_over_d0,
            r.d_eff_over_d0_ci95[0],
            r.d_eff_over_d0_ci95[1],
            r.alpha_long,
        ] {
            fields.push(crate::format::csv(v));
        }
        fields.insert(1 + summary.keys.len(), r.seeds.to_string());
        fields.push(csv_field(&r.direction));
        fields.push(crate::format::csv(r.fit_window_s[0]));
        fields.push(crate::format::csv(r.fit_window_s[1]));
        fields.push(if r.apparent { "yes" } else { "no" }.into());
        fields.push(
            r.apparent_seeds
                .iter()
                .map(|s| s.to_string())
                .collect::<Vec<_>>()
                .join(";"),
        );
        fields.push(
            r.lengthen_run_by
                .map(|f| format!("{f:.2}"))
                .unwrap_or_default(),
        );
        for m in &model_names {
            fields.push(
                r.models
                    .get(m)
                    .map(|&v| crate::format::csv(v))
                    .unwrap_or_default(),
            );
        }
        csv.push_str(&fields.join(","));
        csv.push('\n');
    }
    let csv_path = dir.join("summary.csv");
    write_atomically(&csv_path, csv.as_bytes()).map_err(|e| out_err(&csv_path, e.to_string()))?;
    Ok(vec![csv_path, json_path])
}

/// Quotes a CSV field when it holds a comma or a quote.
fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Exact identities of least squares: a line through noiseless points is
    // recovered, and with two points the intercept's error is the
    // propagation of the points' errors, Var a = (x₂² s₁² + x₁² s₂²)/(x₂ − x₁)².
    #[test]
    fn weighted_intercept_recovers_lines_and_propagates_errors() {
        let x = [1.0, 2.0, 4.0];
        let y: Vec<f64> = x.iter().map(|v| 0.86 - 0.03 * v).collect();
        let (a, _, chi2) = weighted_intercept(&x, &y, &[0.01, 0.01, 0.01]).unwrap();
        assert!((a - 0.86).abs() < 1e-12 && chi2.unwrap() < 1e-20);
        let (a, sa, chi2) = weighted_intercept(&[1.0, 4.0], &[0.80, 0.70], &[0.01, 0.02]).unwrap();
        assert!((a - (4.0 * 0.80 - 0.70) / 3.0).abs() < 1e-12);
        let expect = ((16.0 * 1e-4 + 4e-4) / 9.0f64).sqrt();
        assert!((sa - expect).abs() < 1e-12 && chi2.is_none());
        // A poor fit widens the interval by √(χ²/dof).
        let (_, tight, _) = weighted_intercept(&x, &[0.83, 0.80, 0.74], &[0.01; 3]).unwrap();
        let (_, wide, c) = weighted_intercept(&x, &[0.83, 0.78, 0.74], &[0.01; 3]).unwrap();
        assert!(c.unwrap() > 1.0 && wide > tight);
        assert!(weighted_intercept(&[1.0, 1.0], &[0.8, 0.7], &[0.01, 0.01]).is_none());
    }

    // Student's t two-sided 95 % points (NIST/SEMATECH e-Handbook table).
    #[test]
    fn t_quantiles_match_the_table() {
        assert_eq!(t95(1), 12.706);
        assert_eq!(t95(4), 2.776);
        assert!((t95(0) - 1.96).abs() < 1e-3);
    }
}
