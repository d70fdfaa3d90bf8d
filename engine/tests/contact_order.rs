//! Order of convergence in Δt of the two contact rules, measured on one
//! medium: point tracers among random non-overlapping spheres (radius
//! b = 1 nm, φ = 0.3, D0 = 1 nm²/s), the same three media and starting
//! points for every step and rule (seeds 11 to 16), so that values are
//! compared particle by particle. The step h is the rms step per axis over
//! b; Δt ∝ h², so a bias ∝ h^q is of order p = q/2 in Δt.

mod crowding_support;

use crowding_support::*;
use thicket_analysis::models;

/// Point tracers (a = 1e-4 nm) at φ = 0.3 with contact rule `rule`, step `h`.
fn spheres_text(rule: &str, h: f64, seed: u64) -> String {
    format!(
        "seed = {seed}\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [30.0, 30.0, 30.0]\n\
         [[species]]\nname = \"point\"\nradius_nm = 0.0001\ncount = 2000\ndiffusivity_m2_per_s = 1e-18\n\
         [obstacles]\nplacement = \"random\"\nvolume_fraction = 0.3\nradius_nm = 1.0\n\
         [integrator]\ndt_s = {}\nsteps = 1\ncontact = \"{rule}\"\n",
        h * h / 2.0
    )
}

/// Per-tracer D/D0 at step `h`: records every 0.5 s for 30 s, slope over lags 1–2 s.
fn fixed(rule: &str, h: f64) -> Vec<f64> {
    per_particle(
        |s| spheres_text(rule, h, s),
        &[11, 12, 13, 14, 15, 16],
        0.5,
        30.0,
        (2, 4),
    )
}

/// Element-wise a·x + b·y over the same tracers.
fn combine(a: f64, x: &[f64], b: f64, y: &[f64]) -> Vec<f64> {
    x.iter().zip(y).map(|(x, y)| a * x + b * y).collect()
}

/// Order in Δt of a bias from its values at h and h/2, bias vectors per
/// tracer (so correlated noise is propagated exactly to first order):
/// p = log2(b1/b2)/2, with its standard error.
fn order_in_dt(b1: &[f64], b2: &[f64]) -> (f64, f64) {
    let (m1, _) = mean_se(b1);
    let (m2, _) = mean_se(b2);
    let (_, se_ln) = mean_se(&combine(1.0 / m1, b1, -1.0 / m2, b2));
    let l = 2.0 * std::f64::consts::LN_2;
    ((m1 / m2).ln() / l, se_ln / l)
}

// Δt series of both rules at φ = 0.3, reflection at h = 0.64, 0.32, 0.16,
// 0.08 and rejection at h = 0.08, 0.04 (the contact_series example runs
// longer series); one value's standard error is about 0.002. The Δt → 0
// limit is the reflecting Richardson value D(0.08) + (D(0.08) − D(0.16))/3
// (leading order Δt). Asserted:
// - rejection's order in Δt, from its biases at 0.08 and 0.04 against that
//   limit, is ½ within 4 SE and below 1 by more than 4 SE (move rejection's
//   bias ∝ √Δt, REFERENCES.md "Numerics");
// - reflection at h = 0.32 (1/16 of the steps) is closer to the limit than
//   rejection at h = 0.08, by more than 4 SE;
// - at h = 0.08 rejection's bias exceeds 20 SE, while reflection agrees
//   within 4 SE with rejection's own extrapolation to Δt → 0 (linear in h,
//   from 0.08 and 0.04), a value that owes nothing to reflection;
// - each rule's value extrapolated to Δt → 0 lies within 2 % of Torquato's
//   three-point estimate 0.859 for point tracers (REFERENCES.md, from
//   memory) and below the Maxwell–Hashin–Shtrikman upper bound 2/(2 + φ)
//   (REFERENCES.md) within 4 SE.
// Reflection's local order is printed: its bias is too small at h ≤ 0.16 for
// this test's statistics to pin the order at 4 SE (longer series: ≈ Δt).
#[test]
#[cfg_attr(
    debug_assertions,
    ignore = "statistical and heavy: runs in `cargo test --release`"
)]
fn fixed_spheres_order_of_convergence_per_contact_rule() {
    let [r64, r32, r16, r08] = [0.64, 0.32, 0.16, 0.08].map(|h| fixed("reflect", h));
    let [j08, j04] = [0.08, 0.04].map(|h| fixed("reject", h));
    let d = |v: &[f64]| mean_se(v);

    // The limit, per tracer, and each run's bias against it.
    let zero = combine(4.0 / 3.0, &r08, -1.0 / 3.0, &r16);
    let (zero_reflect, zero_reflect_se) = d(&zero);
    let bias = |v: &[f64]| combine(1.0, &zero, -1.0, v);
    let (p_hi, sp_hi) = order_in_dt(&bias(&r64), &bias(&r32));
    let (p_lo, sp_lo) = order_in_dt(&bias(&r32), &bias(&r16));
    println!(
        "reflect: D/D0 at h = 0.64, 0.32, 0.16, 0.08: {:?}; Δt → 0: {zero_reflect:.4} ± {zero_reflect_se:.4}; \
         local order in Δt {p_hi:.2} ± {sp_hi:.2} (0.64/0.32), {p_lo:.2} ± {sp_lo:.2} (0.32/0.16)",
        [&r64, &r32, &r16, &r08].map(|v| d(v))
    );

    let (p_reject, sp_reject) = order_in_dt(&bias(&j08), &bias(&j04));
    let (b08, s08) = d(&bias(&j08));
    let (b04, s04) = d(&bias(&j04));
    println!(
        "reject: D/D0 at h = 0.08, 0.04: {:?}; biases {b08:.4} ± {s08:.4}, {b04:.4} ± {s04:.4}; order in Δt {p_reject:.3} ± {sp_reject:.3}",
        [&j08, &j04].map(|v| d(v))
    );
    assert!(
        (p_reject - 0.5).abs() < 4.0 * sp_reject,
        "rejection's order {p_reject} ± {sp_reject} is not ½"
    );
    assert!(
        p_reject + 4.0 * sp_reject < 1.0,
        "rejection's order {p_reject} ± {sp_reject} cannot be told from 1"
    );

    // Reflection at 4× the step against rejection.
    let (ahead, ahead_se) = d(&combine(1.0, &r32, -1.0, &j08));
    println!("reflect at 0.32 minus reject at 0.08: {ahead:.4} ± {ahead_se:.4}");
    assert!(
        ahead > 4.0 * ahead_se,
        "reflection at h = 0.32 not ahead of rejection at 0.08: {ahead} ± {ahead_se}"
    );

    // At h = 0.08: rejection far off; reflection on rejection's own Δt → 0 value.
    assert!(b08 > 20.0 * s08, "rejection's bias at 0.08: {b08} ± {s08}");
    let zero_j = combine(2.0, &j04, -1.0, &j08);
    let (zero_reject, zero_reject_se) = d(&zero_j);
    let (gap, gap_se) = d(&combine(1.0, &r08, -1.0, &zero_j));
    println!(
        "reject Δt → 0 (linear in h): {zero_reject:.4} ± {zero_reject_se:.4}; reflect at 0.08 minus it: {gap:.4} ± {gap_se:.4}"
    );
    assert!(
        gap.abs() < 4.0 * gap_se,
        "reflection at h = 0.08 vs rejection extrapolated: {gap} ± {gap_se}"
    );

    let torquato = models::torquato_tracer(0.3).unwrap();
    let maxwell = models::maxwell_tracer(0.3).unwrap();
    for (name, zero, se) in [
        ("reflect", zero_reflect, zero_reflect_se),
        ("reject", zero_reject, zero_reject_se),
    ] {
        assert!(
            (zero / torquato - 1.0).abs() < 0.02,
            "{name}: Δt → 0 {zero} vs Torquato {torquato}"
        );
        assert!(
            zero < maxwell + 4.0 * se,
            "{name}: Δt → 0 {zero} ± {se} above Maxwell {maxwell}"
        );
    }
}
