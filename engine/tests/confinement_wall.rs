//! Short-time diffusivities near one plane wall, measured from displacements
//! binned by height, against Brenner's series (D⊥) and Faxén's series (D∥).

mod confinement_support;

use confinement_support::*;
use thicket_analysis::models::{brenner_perpendicular, faxen_parallel};

const A: f64 = 1.0;
/// Lag of each displacement, steps.
const LAG: u64 = 5;
const WINDOWS: usize = 250;
const COUNT: usize = 40_000;
/// Half-width of each height bin, in units of a.
const HALF_BIN: f64 = 0.05;
const HEIGHTS: [f64; 3] = [1.5, 2.0, 3.0];

/// Per height bin: Σ Δz, Σ Δz², Σ (Δx² + Δy²), samples.
#[derive(Default, Clone, Copy)]
struct Bin {
    dz: f64,
    dz2: f64,
    dxy2: f64,
    n: usize,
}

fn measure(seed: u64) -> Vec<Bin> {
    let sigma = 0.02;
    let geometry =
        "kind = \"plane_wall\"\nwall_hydrodynamics = true\nperpendicular_model = \"brenner\"";
    let s = scenario(
        seed,
        [80.0, 80.0, 12.0],
        A,
        COUNT,
        sigma,
        LAG * WINDOWS as u64,
        geometry,
    );
    let mut c = confinement(&s);
    let mut state = c.initial_state(&s).unwrap();
    let mut bins = vec![Bin::default(); HEIGHTS.len()];
    on_threads(2, || {
        for _ in 0..WINDOWS {
            let before = state.clone();
            c.advance(&mut state, LAG);
            for i in 0..state.len() {
                let z0 = before.positions[i][2] / A;
                let Some(b) = HEIGHTS.iter().position(|h| (z0 - h).abs() < HALF_BIN) else {
                    continue;
                };
                let (p0, p1) = (
                    before.unwrapped(i, &s.sim_box),
                    state.unwrapped(i, &s.sim_box),
                );
                let dz = p1[2] - p0[2];
                bins[b].dz += dz;
                bins[b].dz2 += dz * dz;
                bins[b].dxy2 += (p1[0] - p0[0]).powi(2) + (p1[1] - p0[1]).powi(2);
                bins[b].n += 1;
            }
        }
    });
    let tau = LAG as f64 * s.dt_s;
    bins.iter()
        .map(|b| {
            let n = b.n as f64;
            let mean = b.dz / n;
            Bin {
                dz: mean,
                dz2: (b.dz2 / n - mean * mean) / (2.0 * tau * D0_NM2_PER_S),
                dxy2: b.dxy2 / n / (4.0 * tau * D0_NM2_PER_S),
                n: b.n,
            }
        })
        .collect()
}

#[test]
fn short_time_diffusivities_follow_brenner_and_faxen() {
    let bins = measure(5);
    for (h, b) in HEIGHTS.iter().zip(&bins) {
        let perp = brenner_perpendicular(*h);
        let par = faxen_parallel(1.0 / h);
        // Gaussian displacements: relative SE of a variance √(2/n), of two axes √(1/n).
        let (se_perp, se_par) = ((2.0 / b.n as f64).sqrt(), (1.0 / b.n as f64).sqrt());
        println!(
            "z/a = {h}: D⊥/D0 = {:.4} (Brenner {perp:.4}), D∥/D0 = {:.4} (Faxén {par:.4}), {} samples, SE {:.2} % / {:.2} %",
            b.dz2,
            b.dxy2,
            b.n,
            100.0 * se_perp,
            100.0 * se_par
        );
        // The SE must leave the 3 % tolerance at least 4.5 standard errors wide.
        assert!(4.5 * se_perp < 0.03 && 4.5 * se_par < 0.03);
        // REFERENCES.md: Brenner (1961) series for D⊥, e.g. 0.3120, 0.4705, 0.6373 at z/a = 1.5, 2, 3; within 3 %.
        assert!(
            (b.dz2 / perp - 1.0).abs() < 0.03,
            "D⊥ at z/a = {h}: {} vs {perp}",
            b.dz2
        );
        // REFERENCES.md: Faxén's method of reflections for D∥ (0.7214 at z/a = 2); within 3 %.
        assert!(
            (b.dxy2 / par - 1.0).abs() < 0.03,
            "D∥ at z/a = {h}: {} vs {par}",
            b.dxy2
        );
    }
}
