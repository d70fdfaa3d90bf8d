//! Measured partition coefficients and density profiles against the exact
//! steric values: a slit, a cylindrical pore and Poisson obstacles.

mod confined_support;

use confined_support::*;
use thicket_analysis::models::{partition_cylinder, partition_slit, poisson_open_fraction};
use thicket_analysis::profile::{analyze_partition, PartitionAnalysis};

/// Tracers at rms step 0.3 nm, 4000 steps recorded every 40: the start is
/// already the equilibrium (uniform over the open space), and a tracer
/// crosses the open gap or pore many times ((open width)²/D0 ≈ 400 steps).
fn measure(name: &str, edges: [f64; 3], a: f64, extra: &str) -> PartitionAnalysis {
    let dir = tempfile::tempdir().unwrap();
    let text = scenario_text(17, edges, a, 3_000, 0.3, 4_000, 40, extra);
    let file = run_into(dir.path(), name, &text);
    let r = analyze_partition(&file, None)
        .unwrap()
        .expect("a partition report");
    print!("{}", r.to_table());
    r
}

/// K within 4.5 group standard errors of `exact`, and the SE small enough for a check at `rel`.
fn assert_close(r: &PartitionAnalysis, exact: f64, extra_sd: f64, rel: f64) {
    let se = r.partition.standard_error.expect("an interval");
    let tol = 4.5 * (se * se + extra_sd * extra_sd).sqrt();
    println!(
        "{}: K = {:.4} ± {se:.4} (SE, {} groups) vs exact {exact:.4}; 95 % interval covers it: {}",
        r.geometry,
        r.partition.value,
        r.partition.blocks,
        r.partition.covers(exact)
    );
    assert!(tol < rel * exact, "too noisy for a {rel} check: {tol}");
    assert!(
        (r.partition.value - exact).abs() < tol,
        "K = {} vs {exact} (tolerance {tol})",
        r.partition.value
    );
}

#[test]
fn slit_partition_is_w_minus_2a_over_w() {
    let (w, a) = (12.0, 2.0);
    let r = measure(
        "slit",
        [30.0, 30.0, w],
        a,
        "[geometry]\nkind = \"slit\"\nwall_hydrodynamics = false",
    );
    // REFERENCE.md: steric partition of a slit, (W − 2a)/W = 1 − a/h (exact).
    let exact = partition_slit(a, 0.5 * w).unwrap();
    assert!((exact - (w - 2.0 * a) / w).abs() < 1e-15);
    assert_eq!(r.exact, Some(exact));
    assert_close(&r, exact, 0.0, 0.03);
    // No centre closer than a to a wall: bins wholly inside [0, a) are empty (exact).
    let p = &r.profile;
    for (x, c) in p.x_nm.iter().zip(&p.density_over_reference) {
        if x + 0.5 * p.bin_nm <= a || x - 0.5 * p.bin_nm >= w - a {
            assert_eq!(*c, 0.0, "density at z = {x}");
        }
    }
}

#[test]
fn pore_partition_is_one_minus_lambda_squared() {
    let (radius, a) = (8.0, 2.0);
    let r = measure(
        "pore",
        [16.0, 16.0, 40.0],
        a,
        &format!("[geometry]\nkind = \"cylinder\"\npore_radius_nm = {radius}\nwall_hydrodynamics = false"),
    );
    // REFERENCE.md: steric partition of a cylindrical pore, (1 − λ)² (exact).
    let exact = partition_cylinder(a / radius).unwrap();
    assert_close(&r, exact, 0.0, 0.03);
    let p = &r.profile;
    for (x, c) in p.x_nm.iter().zip(&p.density_over_reference) {
        if x - 0.5 * p.bin_nm >= radius - a {
            assert_eq!(*c, 0.0, "density at rho = {x}");
        }
    }
}

#[test]
fn poisson_obstacles_open_fraction() {
    let (b, a) = (4.0, 1.0);
    let r = measure(
        "gel",
        [80.0, 80.0, 80.0],
        a,
        &format!("[obstacles]\nplacement = \"poisson\"\ncount = 474\nradius_nm = {b}"),
    );
    // REFERENCE.md: open fraction among Poisson spheres, exp(−n (4/3)π(a + b)³) (exact), at the
    // realised density; a realisation differs from it by the spread between realisations.
    let n = 474.0 / 80f64.powi(3);
    let exact = poisson_open_fraction(n, a, b).unwrap();
    assert_eq!(r.exact, Some(exact));
    let sd = r.open_fraction_realisation_sd.unwrap();
    let [sampled, sampled_se] = r.open_fraction_sampled.unwrap();
    println!("sampled open fraction {sampled:.4} ± {sampled_se:.4}, realisation s.d. {sd:.4}");
    assert_close(&r, exact, sd, 0.05);
    // Against this realisation's own open fraction (uniform sampling): the tracers fill exactly it.
    assert_close(&r, sampled, sampled_se, 0.03);
    // The realisation itself against the exact mean, within 4.5 of its s.d.
    assert!((sampled - exact).abs() < 4.5 * (sd * sd + sampled_se * sampled_se).sqrt());
}
