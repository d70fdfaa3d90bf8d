//! Self-validation: a fixed set of published checks, run at modest size, so
//! a user can trust an install. Each check names its source, the expected
//! value, the measured value with its standard error, the tolerance and the
//! verdict.

use crate::estimators::{analyze, AnalyzeOptions};
use crate::models;
use serde::Serialize;
use std::path::Path;
use std::sync::atomic::AtomicBool;
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::run::{run, RunOptions};
use thicket_engine::Scenario;

/// One check's outcome.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CheckResult {
    /// What is checked.
    pub name: String,
    /// Where the expected value comes from.
    pub source: String,
    /// Expected value.
    pub expected: f64,
    /// Measured value.
    pub measured: f64,
    /// Standard error of the measurement (0 when exact).
    pub standard_error: f64,
    /// Allowed |measured − expected|.
    pub tolerance: f64,
    /// How the tolerance was set.
    pub tolerance_basis: String,
    /// |measured − expected| ≤ tolerance.
    pub passed: bool,
}

impl CheckResult {
    fn new(
        name: &str,
        source: &str,
        expected: f64,
        measured: f64,
        se: f64,
        tolerance: f64,
        basis: &str,
    ) -> Self {
        Self {
            name: name.into(),
            source: source.into(),
            expected,
            measured,
            standard_error: se,
            tolerance,
            tolerance_basis: basis.into(),
            passed: (measured - expected).abs() <= tolerance && measured.is_finite(),
        }
    }
}

/// A check that could not run (its error, as a failed result).
fn broken(name: &str, source: &str, err: impl std::fmt::Display) -> CheckResult {
    CheckResult {
        name: name.into(),
        source: source.into(),
        expected: f64::NAN,
        measured: f64::NAN,
        standard_error: f64::NAN,
        tolerance: 0.0,
        tolerance_basis: format!("could not run: {err}"),
        passed: false,
    }
}

const Z95: f64 = 1.959_963_984_540_054;

/// Runs a scenario given as text in `dir` and analyses species `species`;
/// returns (D_eff/D0, its standard error).
fn measure(dir: &Path, name: &str, text: &str, species: &str) -> Result<(f64, f64), String> {
    let scenario = Scenario::from_text(text, Path::new(name), &[]).map_err(|e| e.to_string())?;
    let out = dir.join(format!("{name}.h5"));
    let options = RunOptions {
        out: out.clone(),
        force: true,
        resume: false,
    };
    run(&scenario, &options, &AtomicBool::new(false), &mut |_, _| {}).map_err(|e| e.to_string())?;
    let report = analyze(&out, Some(species), &AnalyzeOptions::default())
        .map_err(|e| e.to_string())?
        .report;
    let d0 = report.d0_m2_per_s.ok_or("no D0 in the file")?;
    let [lo, hi] = report.d_eff_ci95_m2_per_s;
    Ok((report.d_eff_m2_per_s / d0, (hi - lo) / (2.0 * Z95) / d0))
}

fn free_text(seed: u64) -> String {
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [400.0, 400.0, 400.0]\n\
         [[species]]\nname = \"bead\"\nradius_nm = 4.0\ncount = 2000\n[integrator]\ndt_s = 5e-10\nsteps = 20000\n\
         [output]\nrecord_every_steps = 200\n"
    )
}

fn maxwell_text(phi: f64, seed: u64) -> String {
    // A point-like tracer (0.01 nm) among 10 nm spheres; D0 given so the step is fixed.
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [150.0, 150.0, 150.0]\n\
         [[species]]\nname = \"point\"\nradius_nm = 0.01\ncount = 2000\ndiffusivity_m2_per_s = 1e-10\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = {phi}\nradius_nm = 10.0\n\
         [integrator]\ndt_s = 2e-10\nsteps = 100000\n[output]\nrecord_every_steps = 1000\n"
    )
}

/// Runs every check in a temporary folder under `dir`; `progress(name)` is
/// called before each.
pub fn run_checks(dir: &Path, progress: &dyn Fn(&str)) -> Vec<CheckResult> {
    let mut out = Vec::new();

    let name = "free diffusion: D_eff/D0 = 1";
    let source = "Stokes–Einstein D0 = k_B T/(6π η a); MSD = 6 D t (Einstein 1905)";
    progress(name);
    out.push(match measure(dir, "free", &free_text(7), "bead") {
        Ok((ratio, se)) => {
            CheckResult::new(name, source, 1.0, ratio, se, 4.0 * se, "4 standard errors")
        }
        Err(e) => broken(name, source, e),
    });

    for phi in [0.1, 0.2] {
        let name = format!("point tracer among random spheres, φ = {phi}: D_eff/D0");
        let source =
            "Maxwell (1873) tracer form 2/(2+φ); REFERENCE.md: simulations sit just under it";
        progress(&name);
        let expected = models::maxwell_tracer(phi).unwrap_or(f64::NAN);
        out.push(
            match measure(
                dir,
                &format!("maxwell{phi}"),
                &maxwell_text(phi, 11),
                "point",
            ) {
                Ok((ratio, se)) => CheckResult::new(
                    &name,
                    source,
                    expected,
                    ratio,
                    se,
                    0.03 * expected,
                    "3 % of the model (an approximation, not an exact value)",
                ),
                Err(e) => broken(&name, source, e),
            },
        );
    }

    let name = "open fraction among Poisson spheres";
    let source = "exact identity exp(−n·(4/3)π(a+b)³) for freely overlapping spheres";
    progress(name);
    out.push(poisson_check(name, source));
    out
}

fn poisson_check(name: &str, source: &str) -> CheckResult {
    // Large and dense enough that one box's own fluctuation is a few 1e-4; four boxes averaged.
    let mut values = Vec::new();
    let mut expected = f64::NAN;
    for seed in 1..=4 {
        let text = format!(
            "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [1000.0, 1000.0, 1000.0]\n\
             [[species]]\nname = \"probe\"\nradius_nm = 2.0\ncount = 1\n\
             [obstacles]\nplacement = \"poisson\"\ncount = 200000\nradius_nm = 5.0\n\
             [integrator]\ndt_s = 1e-9\nsteps = 1\n"
        );
        let scenario = match Scenario::from_text(&text, Path::new("poisson"), &[]) {
            Ok(s) => s,
            Err(e) => return broken(name, source, e),
        };
        let fixed = match FixedObstacles::build(&scenario) {
            Ok(f) => f,
            Err(e) => return broken(name, source, e),
        };
        let n = fixed.spheres.len() as f64 / scenario.sim_box.edges_nm.iter().product::<f64>();
        expected = models::poisson_open_fraction(n, 2.0, 5.0).unwrap_or(f64::NAN);
        values.push(
            fixed
                .open_fraction(&scenario.sim_box, 2.0, 1_000_000, seed)
                .value,
        );
    }
    let m = values.len() as f64;
    let mean = values.iter().sum::<f64>() / m;
    let se = (values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (m - 1.0) / m).sqrt();
    let tol = (4.0 * se).max(1e-3);
    CheckResult::new(
        name,
        source,
        expected,
        mean,
        se,
        tol,
        "1e-3 (REFERENCE.md), or 4 standard errors over four boxes if larger",
    )
}

/// A readable table of results.
pub fn table(results: &[CheckResult]) -> String {
    let mut s = String::new();
    for r in results {
        s.push_str(&format!(
            "{}  {}\n      expected {:.4}  measured {:.4} ± {:.4}  tolerance ±{:.4} ({})\n      source: {}\n",
            if r.passed { "PASS" } else { "FAIL" },
            r.name,
            r.expected,
            r.measured,
            r.standard_error,
            r.tolerance,
            r.tolerance_basis,
            r.source
        ));
    }
    let passed = results.iter().filter(|r| r.passed).count();
    s.push_str(&format!("{passed} of {} checks passed\n", results.len()));
    s
}
