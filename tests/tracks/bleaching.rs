//! Bleaching only: track lengths follow the exponential law.

use crate::support::{ok, python, tempdir, thicket, write_scenario};

#[test]
fn track_lengths_follow_the_exponential_law() {
    let dir = tempdir();
    let (dt, tau) = (0.01, 0.2);
    // Particles moving ~0.8 µm in a huge periodic box: no track ends for any
    // reason but bleaching, and the movie (3 s = 15 τ) outlasts every emitter.
    // (D large enough that the motion stays resolvable in f32 at a 1 cm box.)
    let cfg = write_scenario(
        dir.path(),
        [1e7, 1e7, 1e7],
        3000,
        1e-13,
        dt,
        300,
        &format!("frame_interval_s = {dt}\nexposure_s = 0.0\nbleach_lifetime_s = {tau}"),
    );
    ok(&thicket(
        dir.path(),
        &["tracks", cfg.to_str().unwrap(), "--out", "bleach.csv"],
    ));
    let Some(r) = python(&[
        "bleach",
        dir.path().join("bleach.csv").to_str().unwrap(),
        &dt.to_string(),
        &tau.to_string(),
    ]) else {
        return;
    };
    println!("{r}");
    assert_eq!(r["tracks"], 3000, "one track per particle");
    assert!(
        r["max_length"].as_u64().unwrap() < 301,
        "a track reached the end of the movie"
    );
    // Exponential bleaching time (the camera's model, documented in camera.rs):
    // KS test of the lengths, mapped to continuous times, against Exp(τ) (scipy.stats.kstest).
    assert!(
        r["ks_pvalue"].as_f64().unwrap() > 0.01,
        "KS rejects the exponential law: {r}"
    );
    // The same test rejects a lifetime 15 % off, so it can fail.
    assert!(
        r["ks_pvalue_wrong_lifetime"].as_f64().unwrap() < 0.01,
        "the KS test cannot tell the lifetime: {r}"
    );
    // Mean length of a geometric law with p = e^{−Δt/τ}: 1/(1 − p), within 4 standard errors.
    let (m, se, e) = (
        r["mean_length"].as_f64().unwrap(),
        r["mean_length_se"].as_f64().unwrap(),
        r["expected_mean_length"].as_f64().unwrap(),
    );
    assert!(
        (m - e).abs() < 4.0 * se,
        "mean length {m} ± {se}, expected {e}"
    );
}
