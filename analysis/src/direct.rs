//! Measurements straight from the engine's state, without a trajectory file:
//! unwrapped positions recorded in memory, time-averaged MSD slopes,
//! histograms against flat, and the contact value of g(r). The test suite
//! and `thicket validate` share them, so both measure the same way.

use std::ops::Range;
use std::path::Path;
use thicket_engine::obstacles::spheres::FixedObstacles;
use thicket_engine::space::neighbors::{min_image_distance2, CellList, VerletList};
use thicket_engine::step::boundary::Counts;
use thicket_engine::step::{State, Stepper};
use thicket_engine::{EngineError, Scenario};

/// A validated scenario from TOML text (`name` labels its errors).
///
/// # Errors
/// The scenario's own validation error.
pub fn scenario_from_text(text: &str, name: &str) -> Result<Scenario, EngineError> {
    Scenario::from_text(text, Path::new(name), &[])
}

/// Obstacles, kernel and initial state of a scenario.
///
/// # Errors
/// Placement of the obstacles or of the particles failed.
pub fn prepare(sc: &Scenario) -> Result<(FixedObstacles, Stepper, State), EngineError> {
    let obstacles = FixedObstacles::build(sc)?;
    let dynamics = Stepper::new(sc, &obstacles);
    let state = dynamics.initial_state(sc)?;
    Ok((obstacles, dynamics, state))
}

/// Unwrapped positions of particles `range` every `every` steps, `records`
/// times (the first record is the current state).
pub fn record(
    dynamics: &mut Stepper,
    state: &mut State,
    sc: &Scenario,
    range: Range<usize>,
    every: u64,
    records: usize,
) -> Vec<Vec<[f64; 3]>> {
    let mut out = Vec::with_capacity(records);
    for r in 0..records {
        if r > 0 {
            dynamics.advance(state, every);
        }
        out.push(
            range
                .clone()
                .map(|i| state.unwrapped(i, &sc.sim_box))
                .collect(),
        );
    }
    out
}

/// Mean and standard error of the mean (sample standard deviation / √n).
pub fn mean_se(values: &[f64]) -> (f64, f64) {
    let n = values.len() as f64;
    let mean = values.iter().sum::<f64>() / n;
    let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, (var / n).sqrt())
}

/// Time-averaged squared displacement of particle `p` at a lag of `lag` records.
pub fn ta_msd(tracks: &[Vec<[f64; 3]>], p: usize, lag: usize) -> f64 {
    let origins = tracks.len() - lag;
    let mut sum = 0.0;
    for t in 0..origins {
        let a = tracks[t][p];
        let b = tracks[t + lag][p];
        sum += (0..3).map(|k| (b[k] - a[k]).powi(2)).sum::<f64>();
    }
    sum / origins as f64
}

/// Least-squares slope (nm² per record) of particle `p`'s time-averaged MSD
/// against lag over lags `lo..=hi`: MSD(τ) = 6Dτ + c, the offset c absorbing
/// the short-time regime.
pub fn fitted_slope(tracks: &[Vec<[f64; 3]>], p: usize, lo: usize, hi: usize) -> f64 {
    let lags: Vec<f64> = (lo..=hi).map(|l| l as f64).collect();
    let msd: Vec<f64> = (lo..=hi).map(|l| ta_msd(tracks, p, l)).collect();
    let n = lags.len() as f64;
    let (mx, my) = (lags.iter().sum::<f64>() / n, msd.iter().sum::<f64>() / n);
    let sxy: f64 = lags
        .iter()
        .zip(&msd)
        .map(|(x, y)| (x - mx) * (y - my))
        .sum();
    let sxx: f64 = lags.iter().map(|x| (x - mx).powi(2)).sum();
    sxy / sxx
}

/// Long-time diffusivity (mean, standard error, nm²/s) of particles `range`
/// over several independent realisations: `text(seed)` gives each one's
/// scenario. Records every `record_s` seconds, `records` times, and fits the
/// slope of each particle's time-averaged MSD over lags `lo..=hi` records.
/// The standard error comes from the spread between particles.
///
/// # Errors
/// A scenario that does not validate or cannot be placed.
pub fn long_time_diffusivity(
    text: impl Fn(u64) -> String,
    seeds: &[u64],
    range: impl Fn(&Scenario) -> Range<usize>,
    record_s: f64,
    records: usize,
    lo: usize,
    hi: usize,
) -> Result<(f64, f64), EngineError> {
    let mut per = Vec::new();
    for &seed in seeds {
        let sc = scenario_from_text(&text(seed), "long-time.toml")?;
        let (_obstacles, mut dynamics, mut state) = prepare(&sc)?;
        let every = (record_s / sc.dt_s).round() as u64;
        let tracks = record(&mut dynamics, &mut state, &sc, range(&sc), every, records);
        let rs = every as f64 * sc.dt_s;
        for p in 0..tracks[0].len() {
            per.push(fitted_slope(&tracks, p, lo, hi) / (6.0 * rs));
        }
    }
    Ok(mean_se(&per))
}

/// Advances a confined state in blocks of at most `block` steps (the run
/// driver's way), `steps` in all, and returns the summed counts per species.
pub fn advance_confined(c: &mut Stepper, state: &mut State, steps: u64, block: u64) -> Vec<Counts> {
    let mut totals = Vec::new();
    let mut done = 0;
    while done < steps {
        let n = block.min(steps - done);
        let counts = c.advance(state, n);
        if totals.is_empty() {
            totals = counts;
        } else {
            for (t, b) in totals.iter_mut().zip(counts) {
                *t += b;
            }
        }
        done += n;
    }
    totals
}

/// Pearson's chi-square of counts against equal expected counts.
pub fn chi_square_flat(counts: &[u64]) -> f64 {
    let total: u64 = counts.iter().sum();
    let expected = total as f64 / counts.len() as f64;
    counts
        .iter()
        .map(|&c| (c as f64 - expected).powi(2) / expected)
        .sum()
}

/// Pearson chi-square critical value, 19 degrees of freedom, upper tail
/// probability 0.001 (standard chi-square table, e.g. the NIST/SEMATECH
/// e-Handbook of Statistical Methods, table 1.3.6.7.4).
pub const CHI2_19_P001: f64 = 43.82;

/// Value at x = 0 of the least-squares quadratic a + b x + c x² through (x, y).
pub fn quadratic_intercept(x: &[f64], y: &[f64]) -> f64 {
    // Normal equations for [a, b, c], solved by Cramer's rule.
    let s = |p: i32| x.iter().map(|v| v.powi(p)).sum::<f64>();
    let t = |p: i32| x.iter().zip(y).map(|(v, w)| v.powi(p) * w).sum::<f64>();
    let m = [[s(0), s(1), s(2)], [s(1), s(2), s(3)], [s(2), s(3), s(4)]];
    let r = [t(0), t(1), t(2)];
    let det = |a: [[f64; 3]; 3]| {
        a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1])
            - a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0])
            + a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0])
    };
    let mut ma = m;
    for row in 0..3 {
        ma[row][0] = r[row];
    }
    det(ma) / det(m)
}

/// Contact value g(σ⁺) of equal hard spheres of diameter σ (every particle of
/// the scenario a crowder of the same radius), by least-squares quadratic
/// extrapolation of g(r) histogrammed in 8 bins of 0.01σ from contact, from
/// `configs` configurations `gap` steps apart after `equilibrate` steps.
/// Returns the mean and standard error over 5 blocks of configurations.
///
/// # Errors
/// Placement failed.
pub fn contact_value(
    sc: &Scenario,
    equilibrate: u64,
    configs: usize,
    gap: u64,
) -> Result<(f64, f64), EngineError> {
    let (_, mut dynamics, mut state) = prepare(sc)?;
    let b = sc.sim_box;
    let n = state.len();
    let (mut radius, mut crowder) = (Vec::new(), Vec::new());
    for s in &sc.species {
        radius.extend(std::iter::repeat_n(s.radius_nm, s.count));
        crowder.extend(std::iter::repeat_n(s.crowder, s.count));
    }
    let sigma = 2.0 * radius[0];
    let bins = 8;
    let width = 0.01 * sigma;
    let cells = CellList::new(&b, sigma + bins as f64 * width);
    let density = n as f64 / b.edges_nm.iter().product::<f64>();
    dynamics.advance(&mut state, equilibrate);
    let blocks = 5;
    let mut estimates = Vec::new();
    for _ in 0..blocks {
        let mut hist = vec![0.0; bins];
        for _ in 0..configs / blocks {
            dynamics.advance(&mut state, gap);
            let list = VerletList::build(
                &cells,
                &state.positions,
                &radius,
                &crowder,
                &b,
                bins as f64 * width,
            );
            for i in 0..n {
                for &j in list.neighbours(i) {
                    let j = j as usize;
                    if j > i {
                        let r = min_image_distance2(&b, &state.positions[i], &state.positions[j])
                            .sqrt();
                        let bin = ((r - sigma) / width) as usize;
                        if bin < bins {
                            hist[bin] += 1.0;
                        }
                    }
                }
            }
        }
        // g in each shell, then the quadratic's intercept at contact.
        let (mut sx, mut sy) = (Vec::new(), Vec::new());
        for (k, h) in hist.iter().enumerate() {
            let r0 = sigma + k as f64 * width;
            let shell = 4.0 / 3.0 * std::f64::consts::PI * ((r0 + width).powi(3) - r0.powi(3));
            sy.push(h / ((configs / blocks) as f64 * 0.5 * n as f64 * density * shell));
            sx.push((k as f64 + 0.5) * width);
        }
        estimates.push(quadratic_intercept(&sx, &sy));
    }
    Ok(mean_se(&estimates))
}
