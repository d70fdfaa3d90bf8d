//! Self-validation: the published checks of the test suite, run at modest
//! size inside the program so a user can trust an install. Each check runs
//! the real engine and analysis code, and names its source (REFERENCES.md),
//! the expected value, the measured value with its standard error, the
//! tolerance and how it was set, and the verdict. Checks are grouped by
//! area; `Mode::Quick` keeps the whole set under a minute on two cores,
//! `Mode::Full` runs larger systems with tighter intervals.

mod camera;
mod crowders;
mod free;
mod membranes;
mod obstruction;
mod pores;
mod walls;

use serde::Serialize;
use std::path::Path;
use std::time::Instant;

/// How large the checks' systems are.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Mode {
    /// Modest sizes: the whole set in under a minute on two cores.
    Quick,
    /// Larger systems and longer runs: tighter intervals, several minutes.
    Full,
}

impl Mode {
    /// `quick` in quick mode, `full` in full mode.
    pub(crate) fn pick<T>(self, quick: T, full: T) -> T {
        match self {
            Mode::Quick => quick,
            Mode::Full => full,
        }
    }
}

/// The physical setting a check belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Area {
    /// Free diffusion and the solvent.
    Free,
    /// Tracers among fixed obstacles and fibres.
    Obstruction,
    /// Mobile hard spheres.
    Crowders,
    /// Plane walls and slits.
    Walls,
    /// Cylindrical pores.
    Pores,
    /// Membranes between reservoirs.
    Membranes,
    /// The single-particle-tracking camera.
    Camera,
}

impl Area {
    /// Every area, in the order the checks run and print.
    pub const ALL: [Area; 7] = [
        Area::Free,
        Area::Obstruction,
        Area::Crowders,
        Area::Walls,
        Area::Pores,
        Area::Membranes,
        Area::Camera,
    ];

    /// Lower-case name, as in the JSON output.
    pub fn name(self) -> &'static str {
        match self {
            Area::Free => "free",
            Area::Obstruction => "obstruction",
            Area::Crowders => "crowders",
            Area::Walls => "walls",
            Area::Pores => "pores",
            Area::Membranes => "membranes",
            Area::Camera => "camera",
        }
    }
}

/// How the measured value is compared with the expected one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Comparison {
    /// |measured − expected| ≤ tolerance.
    Within,
    /// measured ≤ expected + tolerance (an upper bound).
    AtMost,
    /// measured ≥ expected − tolerance (a lower bound).
    AtLeast,
}

/// One check's outcome.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CheckResult {
    /// The area the check belongs to.
    pub area: Area,
    /// What is checked.
    pub name: String,
    /// Where the expected value comes from (see REFERENCES.md).
    pub source: String,
    /// Expected value (a bound for `at_most` / `at_least`).
    pub expected: f64,
    /// Measured value.
    pub measured: f64,
    /// Standard error of the measurement (0 when exact).
    pub standard_error: f64,
    /// Allowed deviation, in the sense of `comparison`.
    pub tolerance: f64,
    /// How the tolerance was set.
    pub tolerance_basis: String,
    /// How measured and expected are compared.
    pub comparison: Comparison,
    /// "pass" or "fail".
    pub verdict: String,
    /// The verdict as a flag.
    pub passed: bool,
    /// Wall time of the computation behind the check, s (shared by the
    /// checks one computation feeds).
    pub seconds: f64,
}

/// A check under construction: name, source, expected and measured values.
pub(crate) struct Check {
    name: String,
    source: String,
    expected: f64,
    measured: f64,
    se: f64,
}

/// Starts a check.
pub(crate) fn check(
    name: impl Into<String>,
    source: impl Into<String>,
    expected: f64,
    measured: f64,
    se: f64,
) -> Check {
    Check {
        name: name.into(),
        source: source.into(),
        expected,
        measured,
        se,
    }
}

impl Check {
    fn finish(
        self,
        tolerance: f64,
        basis: String,
        comparison: Comparison,
        ok: bool,
    ) -> CheckResult {
        let (m, e) = (self.measured, self.expected);
        let inside = match comparison {
            Comparison::Within => (m - e).abs() <= tolerance,
            Comparison::AtMost => m <= e + tolerance,
            Comparison::AtLeast => m >= e - tolerance,
        };
        let passed = ok && inside && m.is_finite() && e.is_finite() && tolerance.is_finite();
        CheckResult {
            area: Area::Free,
            name: self.name,
            source: self.source,
            expected: e,
            measured: m,
            standard_error: self.se,
            tolerance,
            tolerance_basis: basis,
            comparison,
            verdict: if passed { "pass" } else { "fail" }.into(),
            passed,
            seconds: 0.0,
        }
    }

    /// An exact identity tested statistically: within `k` standard errors.
    pub(crate) fn standard_errors(self, k: f64) -> CheckResult {
        let tol = k * self.se;
        let ok = self.se > 0.0;
        self.finish(
            tol,
            format!("{k} standard errors (exact identity; statistical spread only)"),
            Comparison::Within,
            ok,
        )
    }

    /// An approximation tested with the band `band` its source or the test
    /// suite sets (`why`), combined in quadrature with 4 standard errors of
    /// the measurement; fails as too noisy if 2 SE exceed the band.
    pub(crate) fn band(self, band: f64, why: &str) -> CheckResult {
        let stat = 4.0 * self.se;
        let tol = (band * band + stat * stat).sqrt();
        let ok = 2.0 * self.se <= band;
        let basis = if ok {
            format!("{why}, with 4 standard errors in quadrature")
        } else {
            format!("{why}; too noisy to resolve it (2 SE > band): a failure")
        };
        self.finish(tol, basis, Comparison::Within, ok)
    }

    /// A computed value against a printed one: within the rounding `tol`.
    pub(crate) fn printed(self, tol: f64, why: &str) -> CheckResult {
        self.finish(tol, why.into(), Comparison::Within, true)
    }

    /// A one-sided bound: measured ≤ expected + tol (or ≥ expected − tol).
    pub(crate) fn bound(self, comparison: Comparison, tol: f64, why: &str) -> CheckResult {
        self.finish(tol, why.into(), comparison, true)
    }
}

/// A check that could not run (its error, as a failed result).
pub(crate) fn broken(name: &str, source: &str, err: impl std::fmt::Display) -> CheckResult {
    let mut r = check(name, source, f64::NAN, f64::NAN, f64::NAN).finish(
        0.0,
        format!("could not run: {err}"),
        Comparison::Within,
        false,
    );
    r.verdict = "fail".into();
    r
}

/// What a group of checks returns: its results, or why it could not run.
pub(crate) type Outcome = Result<Vec<CheckResult>, String>;

/// One computation and the checks it feeds.
struct Group {
    area: Area,
    title: &'static str,
    source: &'static str,
    run: fn(Mode, &Path) -> Outcome,
}

fn groups() -> Vec<Group> {
    let mut g = Vec::new();
    g.extend(free::groups());
    g.extend(obstruction::groups());
    g.extend(crowders::groups());
    g.extend(walls::groups());
    g.extend(pores::groups());
    g.extend(membranes::groups());
    g.extend(camera::groups());
    g
}

/// Runs every check in working folder `dir`; `progress(area, title)` is
/// called before each computation.
pub fn run_checks(mode: Mode, dir: &Path, progress: &dyn Fn(Area, &str)) -> Vec<CheckResult> {
    let mut out = Vec::new();
    for group in groups() {
        progress(group.area, group.title);
        let started = Instant::now();
        // A check that panics is a failed check, not the end of the others.
        let attempt =
            std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| (group.run)(mode, dir)));
        let results = match attempt {
            Ok(Ok(r)) if !r.is_empty() => r,
            Ok(Ok(_)) => vec![broken(group.title, group.source, "no result")],
            Ok(Err(e)) => vec![broken(group.title, group.source, e)],
            Err(_) => vec![broken(group.title, group.source, "the check panicked")],
        };
        let seconds = started.elapsed().as_secs_f64();
        out.extend(results.into_iter().map(|mut r| {
            r.area = group.area;
            r.seconds = seconds;
            r
        }));
    }
    out
}

/// A number for the table: 4 decimals, or 4 significant digits when tiny or huge.
fn num(v: f64) -> String {
    if v == 0.0 || !v.is_finite() || (1e-3..1e4).contains(&v.abs()) {
        format!("{v:.4}")
    } else {
        format!("{v:.4e}")
    }
}

/// A readable table of results, grouped by area.
pub fn table(results: &[CheckResult]) -> String {
    let mut s = String::new();
    for area in Area::ALL {
        let these: Vec<&CheckResult> = results.iter().filter(|r| r.area == area).collect();
        if these.is_empty() {
            continue;
        }
        s.push_str(&format!("\n[{}]\n", area.name()));
        for r in these {
            let (rel, pm) = match r.comparison {
                Comparison::Within => (format!("expected {}", num(r.expected)), "±"),
                Comparison::AtMost => (format!("at most {}", num(r.expected)), "+"),
                Comparison::AtLeast => (format!("at least {}", num(r.expected)), "−"),
            };
            s.push_str(&format!(
                "{}  {}\n      {rel}  measured {} ± {}  tolerance {pm}{} ({})\n      source: {}\n",
                if r.passed { "PASS" } else { "FAIL" },
                r.name,
                num(r.measured),
                num(r.standard_error),
                num(r.tolerance),
                r.tolerance_basis,
                r.source
            ));
        }
    }
    let passed = results.iter().filter(|r| r.passed).count();
    s.push_str(&format!("\n{passed} of {} checks passed\n", results.len()));
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn verdicts_follow_the_comparison() {
        assert!(check("x", "s", 1.0, 1.03, 0.01).standard_errors(4.0).passed);
        assert!(!check("x", "s", 1.0, 1.05, 0.01).standard_errors(4.0).passed);
        // A zero standard error cannot back a statistical verdict.
        assert!(!check("x", "s", 1.0, 1.0, 0.0).standard_errors(4.0).passed);
        let upper = |m: f64| check("x", "s", 1.0, m, 0.0).bound(Comparison::AtMost, 0.1, "b");
        assert!(upper(1.05).passed && !upper(1.2).passed && upper(-5.0).passed);
        let lower = |m: f64| check("x", "s", 1.0, m, 0.0).bound(Comparison::AtLeast, 0.0, "b");
        assert!(lower(1.0).passed && !lower(0.99).passed);
        assert!(!check("x", "s", f64::NAN, 1.0, 0.0).printed(1.0, "r").passed);
    }

    #[test]
    fn a_band_adds_the_spread_in_quadrature_and_refuses_noise() {
        let r = check("x", "s", 1.0, 1.0, 0.0075).band(0.03, "3 %");
        assert!((r.tolerance - 0.03f64.hypot(0.03)).abs() < 1e-15);
        assert!(r.passed && r.verdict == "pass");
        // 2 SE beyond the band: too noisy to say anything, so a failure even at the expected value.
        let r = check("x", "s", 1.0, 1.0, 0.02).band(0.03, "3 %");
        assert!(!r.passed && r.verdict == "fail");
        assert!(!broken("x", "s", "no").passed);
    }
}
