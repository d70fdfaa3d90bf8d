//! Reversible binding: the Kolmogorov–Smirnov test of dwell times against
//! the exponential law exp(−k_off t), the fast-exchange model
//! D_eff = D_free/(1 + K) (Crank, The Mathematics of Diffusion, 2nd ed.,
//! §14.2) and the binding summary of a trajectory.

/// Kolmogorov's limiting distribution, Q(λ) = 2 Σ_{k≥1} (−1)^{k−1} e^{−2k²λ²}:
/// the probability that √n·D exceeds λ for a sample of n from the law
/// tested (Kolmogorov 1933; Numerical Recipes 3rd ed. §14.3.3).
pub fn kolmogorov_q(lambda: f64) -> f64 {
    if lambda < 0.2 {
        return 1.0;
    }
    let mut sum = 0.0;
    let mut sign = 1.0;
    for k in 1..=100 {
        let term = (-2.0 * (k * k) as f64 * lambda * lambda).exp();
        sum += sign * term;
        if term < 1e-16 {
            break;
        }
        sign = -sign;
    }
    (2.0 * sum).clamp(0.0, 1.0)
}

/// A one-sample Kolmogorov–Smirnov test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KsTest {
    /// Sample size.
    pub n: usize,
    /// D = sup |F_n − F|.
    pub statistic: f64,
    /// P(D ≥ observed) under the law tested, with Stephens' small-sample
    /// correction λ = (√n + 0.12 + 0.11/√n)·D (Numerical Recipes §14.3.3).
    pub p_value: f64,
}

/// KS test of `samples` against the continuous CDF `cdf`.
pub fn ks_test(samples: &[f64], cdf: impl Fn(f64) -> f64) -> KsTest {
    let mut x = samples.to_vec();
    x.sort_by(f64::total_cmp);
    let n = x.len();
    let mut d: f64 = 0.0;
    for (i, &v) in x.iter().enumerate() {
        let f = cdf(v);
        d = d
            .max((i + 1) as f64 / n as f64 - f)
            .max(f - i as f64 / n as f64);
    }
    let sn = (n as f64).sqrt();
    KsTest {
        n,
        statistic: d,
        p_value: if n == 0 {
            1.0
        } else {
            kolmogorov_q((sn + 0.12 + 0.11 / sn) * d)
        },
    }
}

/// The exponential law of rate `rate` conditioned on t ≤ `cut` (all of it
/// when `cut` is infinite): CDF (1 − e^{−kt})/(1 − e^{−kw}).
pub fn truncated_exponential_cdf(rate: f64, cut: f64) -> impl Fn(f64) -> f64 {
    let norm = -(-rate * cut).exp_m1();
    move |t: f64| (-(-rate * t.clamp(0.0, cut)).exp_m1()) / norm
}

/// Mean of that law: 1/k − w e^{−kw}/(1 − e^{−kw}) (1/k when w is infinite).
pub fn truncated_exponential_mean(rate: f64, cut: f64) -> f64 {
    if cut.is_infinite() {
        return 1.0 / rate;
    }
    1.0 / rate - cut * (-rate * cut).exp() / (-(-rate * cut).exp_m1())
}

/// The fast-exchange ratio D_eff/D_free = 1/(1 + K) (Crank §14.2,
/// instantaneous linear reversible immobilisation): a model that holds when
/// binding and release are fast against diffusion between obstacles.
pub fn fast_exchange_ratio(k: f64) -> f64 {
    1.0 / (1.0 + k)
}

/// Dwell times usable without censoring bias from a run of length
/// `end_s`: events that began at or before `end_s − cut` with a dwell of at
/// most `cut`, which all ended within the run (the completed events alone
/// favour short dwells). Their law is the exponential truncated at `cut`.
pub fn uncensored_dwells(dwell_s: &[f64], bound_s: &[f64], end_s: f64, cut: f64) -> Vec<f64> {
    dwell_s
        .iter()
        .zip(bound_s)
        .filter(|(d, b)| **b <= end_s - cut && **d <= cut)
        .map(|(d, _)| *d)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn kolmogorov_quantiles() {
        // Tabulated critical values of the limiting law (Smirnov 1948; common
        // practice in every statistics handbook): λ = 1.358 at 5 %, 1.628 at 1 %.
        assert!((kolmogorov_q(1.358) - 0.05).abs() < 5e-4);
        assert!((kolmogorov_q(1.628) - 0.01).abs() < 2e-4);
    }

    #[test]
    fn truncated_mean_matches_integral() {
        // Exact identity checked by quadrature: ∫0^w t k e^{−kt} dt / (1 − e^{−kw}).
        let (k, w) = (2.0, 1.5);
        let n = 200_000;
        let h = w / n as f64;
        let num: f64 = (0..n)
            .map(|i| {
                let t = (i as f64 + 0.5) * h;
                t * k * (-k * t).exp() * h
            })
            .sum();
        let want = num / (1.0 - (-k * w).exp());
        assert!((truncated_exponential_mean(k, w) - want).abs() < 1e-8);
    }
}

/// Caveat printed with every binding report.
pub const FAST_EXCHANGE_CAVEAT: &str = "D_eff = D_free/(1 + K) (Crank, The Mathematics of Diffusion, 2nd ed., §14.2) is a model of \
instantaneous exchange: it applies only when binding and release are fast against diffusion between obstacles; \
D_free is the diffusivity in the same obstacles without binding (run the scenario without the binding keys)";

/// What `analyze` measures of a binding species.
#[derive(Debug, Clone, serde::Serialize)]
pub struct BindingReport {
    /// Species name.
    pub species: String,
    /// Frames used for the bound fraction: those from this time on (the
    /// run's second half, past the approach to equilibrium), s.
    pub from_s: f64,
    /// Measured bound fraction with its block-average interval.
    pub bound_fraction: crate::blocks::Interval,
    /// How the blocks were chosen.
    pub block_rule: String,
    /// The model's K = p_on/p_off · V_layer/V_open (exact for the model) and its standard error.
    pub predicted_k: [f64; 2],
    /// K/(1 + K).
    pub predicted_bound_fraction: f64,
    /// Completed binding events in the file.
    pub events: usize,
    /// Dwell cut-off w = 5/k_off, s: events that began at least w before the
    /// end with a dwell of at most w (uncensored; their law is exp(−k_off t) truncated at w).
    pub cut_s: f64,
    /// Mean of those dwell times and its standard error, s.
    pub mean_dwell_s: [f64; 2],
    /// The truncated law's mean, s (1/k_off less the cut's share).
    pub expected_mean_dwell_s: f64,
    /// KS test of those dwell times against exp(−k_off t) truncated at w.
    pub ks_statistic: f64,
    /// Its p-value.
    pub ks_p_value: f64,
    /// Dwell times tested.
    pub ks_n: usize,
    /// Fast-exchange D_eff/D_free = 1/(1 + K).
    pub fast_exchange_ratio: f64,
    /// Measured D_eff, m²/s (the MSD fit of the report).
    pub d_eff_m2_per_s: f64,
    /// D_free the fast-exchange model implies, D_eff·(1 + K), m²/s.
    pub implied_d_free_m2_per_s: f64,
    /// The model's condition.
    pub caveat: String,
}

/// The binding report of `species` in the trajectory at `path`, whose
/// stored scenario is `scenario`; `None` when the species does not bind.
/// `d_eff_m2_per_s` is the D_eff the MSD analysis measured.
///
/// # Errors
/// HDF5 failures or missing binding datasets (the analysis' errors, naming
/// the file and dataset), obstacles that cannot be rebuilt.
pub fn binding_report(
    path: &std::path::Path,
    scenario: &thicket_engine::Scenario,
    species: &str,
    d_eff_m2_per_s: f64,
) -> Result<Option<BindingReport>, Box<dyn std::error::Error + Send + Sync>> {
    use crate::blocks::{
        block_length, block_ranges, block_rule_text, integrated_autocorrelation_time, Interval,
    };
    use crate::error::Error;
    let Some(spec) = scenario
        .species
        .iter()
        .find(|s| s.name == species)
        .and_then(|s| s.binding.map(|b| (s, b)))
    else {
        return Ok(None);
    };
    let (s, spec) = spec;
    let file = hdf5::File::open(path).map_err(|e| Error::hdf5(path, "/", e))?;
    let read_f64 = |set: &str| {
        file.dataset(set)
            .and_then(|d| d.read_raw::<f64>())
            .map_err(|e| Error::hdf5(path, set, e))
    };
    let base = format!("observables/{species}");
    let bound_set = format!("{base}/bound/value");
    let bound: Vec<i64> = file
        .dataset(&bound_set)
        .and_then(|d| d.read_raw::<i64>())
        .map_err(|e| Error::hdf5(path, &bound_set, e))?;
    let times = read_f64(&format!("{base}/bound/time"))?;
    let n = s.count;
    let frames = times.len().min(bound.len() / n.max(1));
    let fraction: Vec<f64> = (0..frames)
        .map(|f| bound[f * n..(f + 1) * n].iter().sum::<i64>() as f64 / n as f64)
        .collect();
    let end = times.get(frames.wrapping_sub(1)).copied().unwrap_or(0.0);
    let first = frames / 2;
    let series = &fraction[first..];
    let tau = integrated_autocorrelation_time(series);
    let len = block_length(tau);
    let blocks: Vec<f64> = block_ranges(series.len(), len)
        .into_iter()
        .map(|r| series[r.clone()].iter().sum::<f64>() / r.len() as f64)
        .collect();
    let mean = series.iter().sum::<f64>() / series.len().max(1) as f64;
    let frame_s = if frames > 1 { times[1] - times[0] } else { 0.0 };
    let obstacles = thicket_engine::obstacles::FixedObstacles::build(scenario)?;
    let share = obstacles.layer_share(
        &scenario.sim_box,
        s.radius_nm,
        spec.layer_nm,
        crate::check_report::CHECK_SAMPLES,
        scenario.seed,
    );
    let ratio = spec.stepped_ratio(scenario.dt_s);
    let k = ratio * share.value;
    let dwell = read_f64(&format!("{base}/binding_events/dwell_time"))?;
    let began = read_f64(&format!("{base}/binding_events/bound_time"))?;
    let cut = 5.0 / spec.off_rate_per_s;
    let kept = uncensored_dwells(&dwell, &began, end, cut);
    let ks = ks_test(&kept, truncated_exponential_cdf(spec.off_rate_per_s, cut));
    let m = kept.iter().sum::<f64>() / kept.len().max(1) as f64;
    let var = kept.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (kept.len().max(2) - 1) as f64;
    Ok(Some(BindingReport {
        species: species.to_string(),
        from_s: times.get(first).copied().unwrap_or(0.0),
        bound_fraction: Interval::from_samples(mean, &blocks),
        block_rule: block_rule_text(tau, len, blocks.len(), frame_s),
        predicted_k: [k, ratio * share.standard_error],
        predicted_bound_fraction: k / (1.0 + k),
        events: dwell.len(),
        cut_s: cut,
        mean_dwell_s: [m, (var / kept.len().max(1) as f64).sqrt()],
        expected_mean_dwell_s: truncated_exponential_mean(spec.off_rate_per_s, cut),
        ks_statistic: ks.statistic,
        ks_p_value: ks.p_value,
        ks_n: ks.n,
        fast_exchange_ratio: fast_exchange_ratio(k),
        d_eff_m2_per_s,
        implied_d_free_m2_per_s: d_eff_m2_per_s * (1.0 + k),
        caveat: FAST_EXCHANGE_CAVEAT.to_string(),
    }))
}

impl BindingReport {
    /// The report as text lines.
    pub fn to_table(&self) -> String {
        use std::fmt::Write as _;
        let mut s = String::new();
        let _ = writeln!(s, "binding of '{}' to the obstacles", self.species);
        let _ = writeln!(
            s,
            "  bound fraction   {} measured (frames from {:.3e} s on); K/(1+K) = {:.4} predicted, K = p_on/p_off · V_layer/V_open = {:.4} ± {:.4} (exact for the model)",
            self.bound_fraction.describe(4),
            self.from_s,
            self.predicted_bound_fraction,
            self.predicted_k[0],
            self.predicted_k[1]
        );
        let _ = writeln!(s, "                   {}", self.block_rule);
        let _ = writeln!(
            s,
            "  dwell times      {} events; {} uncensored (began ≥ w = 5/k_off = {:.3e} s before the end, dwell ≤ w): mean {:.4e} ± {:.1e} s against {:.4e} s (exp(-k_off t) truncated at w); KS D = {:.4}, p = {:.3} against exp(-k_off t)",
            self.events,
            self.ks_n,
            self.cut_s,
            self.mean_dwell_s[0],
            self.mean_dwell_s[1],
            self.expected_mean_dwell_s,
            self.ks_statistic,
            self.ks_p_value
        );
        let _ = writeln!(
            s,
            "  fast exchange    D_eff/D_free = 1/(1+K) = {:.4} (model); measured D_eff = {:.4e} m²/s, so the model implies D_free = D_eff (1+K) = {:.4e} m²/s",
            self.fast_exchange_ratio, self.d_eff_m2_per_s, self.implied_d_free_m2_per_s
        );
        let _ = writeln!(s, "  caution          {}", self.caveat);
        s
    }
}
