//! Block averages of per-frame series and spreads over groups, with the
//! 95 % intervals the membrane and profile reports print.
//!
//! **Block rule.** The integrated autocorrelation time τ_int of each series
//! (in frames, τ_int = ½ + Σ_{k≥1} ρ(k)) is estimated with Sokal's automatic
//! window (the sum stops at the first M ≥ 5 τ_int(M); Sokal, "Monte Carlo
//! methods in statistical mechanics", 1997; from memory). Blocks are at least
//! [`BLOCK_TAUS`] × τ_int long (the slowest of the series that enter an
//! estimate), so that block means are close to independent; the interval is
//! mean ± t₀.₉₇₅(B − 1) · s/√B over the B blocks. With fewer than
//! [`MIN_BLOCKS`] blocks the report says the interval is unreliable.

use crate::estimators::student_t_quantile;
use serde::Serialize;

/// Block length in units of the integrated autocorrelation time (common
/// practice: block means then correlate by about τ_int/b ≲ 0.15).
pub const BLOCK_TAUS: f64 = 6.0;

/// Fewest blocks (or groups) for an interval the report calls reliable.
pub const MIN_BLOCKS: usize = 4;

/// Sokal's window constant c (M ≥ c τ_int(M)).
const SOKAL_WINDOW: f64 = 5.0;

/// A value with its 95 % interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    /// Point estimate.
    pub value: f64,
    /// Standard error from the spread of blocks or groups (`None` with fewer than 2).
    pub standard_error: Option<f64>,
    /// 95 % interval [low, high] (`None` with fewer than 2 blocks or groups).
    pub ci95: Option<[f64; 2]>,
    /// Blocks or groups the spread came from.
    pub blocks: usize,
}

impl Interval {
    /// `value` with the Student-t interval from the spread of `samples`
    /// (one estimate per block or group).
    pub fn from_samples(value: f64, samples: &[f64]) -> Self {
        let b = samples.iter().filter(|v| v.is_finite()).count();
        if b < 2 || b < samples.len() {
            return Self::point(value, samples.len());
        }
        let mean = samples.iter().sum::<f64>() / b as f64;
        let var = samples.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (b - 1) as f64;
        let se = (var / b as f64).sqrt();
        let half = student_t_quantile(0.975, (b - 1) as f64) * se;
        Self {
            value,
            standard_error: Some(se),
            ci95: Some([value - half, value + half]),
            blocks: b,
        }
    }

    /// A value without an interval.
    pub fn point(value: f64, blocks: usize) -> Self {
        Self {
            value,
            standard_error: None,
            ci95: None,
            blocks,
        }
    }

    /// The same interval mapped through a monotone increasing `f` (the
    /// standard error by the central difference of `f` over ± one SE).
    pub fn map(&self, f: impl Fn(f64) -> f64) -> Self {
        Self {
            value: f(self.value),
            standard_error: self
                .standard_error
                .map(|se| 0.5 * (f(self.value + se) - f(self.value - se)).abs()),
            ci95: self.ci95.map(|[lo, hi]| [f(lo), f(hi)]),
            blocks: self.blocks,
        }
    }

    /// True when `x` lies in the interval (false without one).
    pub fn covers(&self, x: f64) -> bool {
        self.ci95.is_some_and(|[lo, hi]| lo <= x && x <= hi)
    }

    /// "value [lo, hi]" in scientific notation with `digits` decimals.
    pub fn describe(&self, digits: usize) -> String {
        match self.ci95 {
            Some([lo, hi]) => format!(
                "{:.d$e}  [{:.d$e}, {:.d$e}]",
                self.value,
                lo,
                hi,
                d = digits
            ),
            None => format!("{:.d$e}  (no interval)", self.value, d = digits),
        }
    }

    /// "value [lo, hi]" in fixed notation with `digits` decimals.
    pub fn describe_fixed(&self, digits: usize) -> String {
        match self.ci95 {
            Some([lo, hi]) => format!("{:.d$}  [{:.d$}, {:.d$}]", self.value, lo, hi, d = digits),
            None => format!("{:.d$}  (no interval)", self.value, d = digits),
        }
    }
}

/// Integrated autocorrelation time of `x` in samples (≥ ½; ½ for
/// uncorrelated data), with Sokal's automatic window. Constant or too short
/// series give ½.
pub fn integrated_autocorrelation_time(x: &[f64]) -> f64 {
    let n = x.len();
    if n < 4 {
        return 0.5;
    }
    let mean = x.iter().sum::<f64>() / n as f64;
    let c0 = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n as f64;
    if c0 <= 0.0 {
        return 0.5;
    }
    let mut tau = 0.5;
    for m in 1..n / 2 {
        let ck = (0..n - m)
            .map(|i| (x[i] - mean) * (x[i + m] - mean))
            .sum::<f64>()
            / n as f64;
        tau += ck / c0;
        if m as f64 >= SOKAL_WINDOW * tau {
            break;
        }
    }
    tau.max(0.5)
}

/// Block length in samples for series whose slowest integrated
/// autocorrelation time is `tau` samples: ⌈[`BLOCK_TAUS`] · τ⌉, at least 1.
pub fn block_length(tau: f64) -> usize {
    (BLOCK_TAUS * tau).ceil().max(1.0) as usize
}

/// Index ranges of the blocks of `n` samples, each `len` long; the last
/// takes the remainder (so every sample is used). Empty when `n < len`.
pub fn block_ranges(n: usize, len: usize) -> Vec<std::ops::Range<usize>> {
    let len = len.max(1);
    let b = n / len;
    (0..b)
        .map(|i| i * len..if i + 1 == b { n } else { (i + 1) * len })
        .collect()
}

/// The block rule in words, for reports.
pub fn block_rule_text(tau: f64, len: usize, blocks: usize, frame_s: f64) -> String {
    let mut s = format!(
        "{blocks} blocks of {len} frames ({:.3e} s): at least {BLOCK_TAUS} x the slowest integrated autocorrelation time ({tau:.2} frames, Sokal window); 95 % = t(0.975, B-1) x s/sqrt(B)",
        len as f64 * frame_s
    );
    if blocks < MIN_BLOCKS {
        s.push_str(&format!(
            "; fewer than {MIN_BLOCKS} blocks: the interval is unreliable, run longer"
        ));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ar1_autocorrelation_time() {
        // AR(1) with coefficient φ: τ_int = ½ (1 + φ)/(1 − φ) (textbook identity).
        let phi: f64 = 0.8;
        let mut state = 0x2545_f491_4f6c_dd1du64;
        let mut normal = || {
            // Box–Muller from a xorshift stream: enough for a test of the estimator.
            let mut u = || {
                state ^= state << 13;
                state ^= state >> 7;
                state ^= state << 17;
                (state >> 11) as f64 / (1u64 << 53) as f64
            };
            let (a, b) = (u().max(1e-300), u());
            (-2.0 * a.ln()).sqrt() * (2.0 * std::f64::consts::PI * b).cos()
        };
        let mut x = vec![0.0; 200_000];
        for i in 1..x.len() {
            x[i] = phi * x[i - 1] + normal();
        }
        let tau = integrated_autocorrelation_time(&x);
        let exact = 0.5 * (1.0 + phi) / (1.0 - phi);
        // Sokal's window bias is O(e^(−5)) and the noise a few per cent at this length.
        assert!((tau / exact - 1.0).abs() < 0.1, "{tau} vs {exact}");
    }

    #[test]
    fn blocks_cover_all_samples() {
        let r = block_ranges(23, 5);
        assert_eq!(r.len(), 4);
        assert_eq!(r.last().unwrap().end, 23);
        assert!(block_ranges(3, 5).is_empty());
    }

    #[test]
    fn interval_of_known_samples() {
        // Samples 1..=5: mean 3, s = √2.5, t(0.975, 4) = 2.776 (tables).
        let i = Interval::from_samples(3.0, &[1.0, 2.0, 3.0, 4.0, 5.0]);
        let half = 2.776_445 * (2.5f64 / 5.0).sqrt();
        let [lo, hi] = i.ci95.unwrap();
        assert!((hi - 3.0 - half).abs() < 1e-5 && (3.0 - lo - half).abs() < 1e-5);
    }
}
