//! `analyze` on a run with Poiseuille flow in a cylinder: the MSD is taken
//! about the mean drift, so D_eff is the Taylor–Aris dispersion coefficient
//! (Taylor 1953, Aris 1956: D0(1 + Pe²/48), exact asymptote for the profile
//! the centres sample) and the mean velocity is V(2 − Φ) (exact for tracers
//! without lag, REFERENCES.md).

mod confined_support;

use confined_support::*;
use thicket_analysis::estimators::{analyze_file, AnalyzeOptions};
use thicket_analysis::models::lag_free_kc_cylinder;

#[test]
fn analyze_reports_taylor_aris_dispersion_and_the_mean_velocity_under_flow() {
    let (r, a, sigma) = (10.0, 0.01, 0.3);
    let d0 = D0_M2_PER_S * 1e18;
    let v = 6.0 * d0 / r; // V R/D0 = 6
    let per_tau = (2.0 * (r / sigma).powi(2)) as u64; // R²/D0 in steps
    let steps = 40 * per_tau;
    let extra = format!(
        "[geometry]\nkind = \"cylinder\"\npore_radius_nm = {r}\n[flow]\nkind = \"poiseuille\"\nmean_velocity_m_per_s = {:e}\n",
        v * 1e-9
    );
    let text = scenario_text(
        17,
        [2.0 * r, 2.0 * r, 50.0],
        a,
        2000,
        sigma,
        steps,
        per_tau / 2,
        &extra,
    );
    let dir = tempfile::tempdir().unwrap();
    let file = run_into(dir.path(), "taylor", &text);
    let report = analyze_file(&file, None, &AnalyzeOptions::default()).unwrap();
    let d = report.d_eff_over_d0.unwrap();
    let [lo, hi] = report.d_eff_over_d0_ci95.unwrap();
    let b = r - a;
    let pe = v * b * b / (r * r) * b / d0;
    let expected = 1.0 + pe * pe / 48.0;
    let u = report
        .mean_velocity_m_per_s
        .clone()
        .expect("a mean velocity under flow")[2]
        * 1e9;
    let u_exact = v * lag_free_kc_cylinder(a / r).unwrap();
    println!(
        "D_eff/D0 = {d:.4} [{lo:.4}, {hi:.4}] (window {:?} s), Taylor–Aris {expected:.4}; ⟨u⟩/V = {:.5}, exact {:.5}",
        report.fit_window_s,
        u / v,
        u_exact / v
    );
    assert!(report
        .warnings
        .iter()
        .any(|w| w.contains("about the mean drift")));
    // 95 % interval half-width ≈ 2 SE: 4.5 SE is 2.25 half-widths.
    let half = 0.5 * (hi - lo);
    assert!(
        (d - expected).abs() < 2.25 * half,
        "{d} vs {expected} ± {half}"
    );
    assert!(half < 0.1 * expected, "too noisy for the check: ±{half}");
    // The mean velocity is exact in expectation; its spread over 2000 tracers is far below 1 %.
    assert!((u / u_exact - 1.0).abs() < 0.01, "{u} vs {u_exact}");
}
