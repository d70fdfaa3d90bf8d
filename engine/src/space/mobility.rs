//! Wall hydrodynamic mobility corrections for a sphere near a plane wall,
//! and their gradients for the Itô drift.
//!
//! All quantities are dimensionless: mobilities are D/D0 (equal to the
//! mobility ratio by Stokes–Einstein), positions are the centre-to-wall
//! distance z in units of the sphere radius a, and gradients are
//! a · d(D/D0)/dz = d(D/D0)/d(z/a). Multiply a gradient by D0/a to get the
//! Itô drift velocity dD/dz of `dz = (dD/dz) dt + √(2 D(z)) dW`.
//!
//! Direct formulas return `NaN` for arguments outside their domain (they
//! never panic); [`WallMobilityTable`] is the fast path the integrator calls
//! per particle per step, and it clamps a centre that round-off has put
//! slightly inside contact back onto contact.
//!
//! Sources: Faxén's method of reflections (parallel), Brenner (1961, exact
//! series, perpendicular), Bevan & Prieve (2000, closed form, perpendicular),
//! Cox & Brenner (1967, lubrication limit near contact). See REFERENCES.md.

use crate::space::shape::Shape;

/// Below this z/a the Brenner series converges too slowly (the number of
/// terms grows like 1/√(z/a − 1)), so [`brenner_perpendicular`] switches to
/// the lubrication limit [`lubrication_perpendicular`].
///
/// At the switch the two differ by about 3e-8 relative (checked in the
/// tests against the series summed past the switch), so the switch is
/// continuous for every practical purpose.
pub const BRENNER_LUBRICATION_SWITCH_Z_OVER_A: f64 = 1.0001;

/// Relative size of a Brenner series term below which summation stops
/// (two consecutive terms must fall below it).
const BRENNER_RELATIVE_TOLERANCE: f64 = 1e-12;

/// Hard cap on Brenner series terms; about 800 are needed at the switch
/// point, so the cap is never reached there and only guards the loop.
const BRENNER_MAX_TERMS: usize = 20_000;

/// Near-contact coefficient of the O(h/a) term in the Cox–Brenner (1967)
/// lubrication resistance (from memory; the tests check it against the
/// Brenner series at h/a = 1e-4 and 5e-5 to 1e-7 relative).
const COX_BRENNER_LINEAR_COEFFICIENT: f64 = 0.971;

/// Parallel mobility D∥/D0 of a sphere near one plane wall, by Faxén's
/// method of reflections (REFERENCES.md):
/// `1 − 9/16 x + 1/8 x³ − 45/256 x⁴ − 1/16 x⁵` with `x = a/z`.
///
/// `a_over_z` must lie in [0, 1] (z is the centre-to-wall distance, so
/// contact is x = 1 and far from the wall x → 0); otherwise `NaN`.
/// The series is accurate away from contact; at contact it gives 0.324,
/// whereas the exact parallel mobility vanishes (logarithmically) there.
pub fn faxen_parallel(a_over_z: f64) -> f64 {
    if !(0.0..=1.0).contains(&a_over_z) {
        return f64::NAN;
    }
    let x = a_over_z;
    // Horner form of the reflection polynomial.
    1.0 + x * (-9.0 / 16.0 + x * x * (1.0 / 8.0 + x * (-45.0 / 256.0 - x / 16.0)))
}

/// Gradient a · d(D∥/D0)/dz of Faxén's parallel mobility
/// ([`faxen_parallel`]), analytic, as a function of `a_over_z` ∈ [0, 1]
/// (otherwise `NaN`).
///
/// With x = a/z, dx/dz = −x²/a, so a · dD∥/dz = −x² dD∥/dx with
/// dD∥/dx = −9/16 + 3/8 x² − 45/64 x³ − 5/16 x⁴.
pub fn d_faxen_parallel_dz(a_over_z: f64) -> f64 {
    if !(0.0..=1.0).contains(&a_over_z) {
        return f64::NAN;
    }
    let x = a_over_z;
    let d_dx = -9.0 / 16.0 + x * x * (3.0 / 8.0 + x * (-45.0 / 64.0 - x * 5.0 / 16.0));
    -x * x * d_dx
}

/// Perpendicular mobility D⊥/D0 of a sphere near one plane wall, closed form
/// of Bevan & Prieve (2000) (REFERENCES.md):
/// `(6h² + 2h)/(6h² + 9h + 2)` with h = (z − a)/a the gap in units of a.
///
/// `h_over_a` must be ≥ 0 (`+∞` gives 1); otherwise `NaN`.
pub fn bevan_prieve_perpendicular(h_over_a: f64) -> f64 {
    if h_over_a.is_nan() || h_over_a < 0.0 {
        return f64::NAN;
    }
    let h = h_over_a;
    if h <= 1.0 {
        (6.0 * h * h + 2.0 * h) / (6.0 * h * h + 9.0 * h + 2.0)
    } else {
        // Divided through by h² so that large (or infinite) gaps cannot overflow.
        let g = 1.0 / h;
        (6.0 + 2.0 * g) / (6.0 + g * (9.0 + 2.0 * g))
    }
}

/// Gradient a · d(D⊥/D0)/dz of the Bevan & Prieve (2000) closed form
/// ([`bevan_prieve_perpendicular`]), analytic:
/// `(42h² + 24h + 4)/(6h² + 9h + 2)²`, which is 1 at contact.
///
/// `h_over_a` must be ≥ 0; otherwise `NaN`.
pub fn d_bevan_prieve_perpendicular_dz(h_over_a: f64) -> f64 {
    if h_over_a.is_nan() || h_over_a < 0.0 {
        return f64::NAN;
    }
    let h = h_over_a;
    if h <= 1.0 {
        let den = 6.0 * h * h + 9.0 * h + 2.0;
        (42.0 * h * h + 24.0 * h + 4.0) / (den * den)
    } else {
        // Divided through by h⁴ so that large (or infinite) gaps cannot overflow.
        let g = 1.0 / h;
        let den = 6.0 + g * (9.0 + 2.0 * g);
        g * g * (42.0 + g * (24.0 + 4.0 * g)) / (den * den)
    }
}

/// Perpendicular mobility near contact from lubrication theory, Cox &
/// Brenner (1967): the resistance is
/// `(a/h)·(1 + (1/5)(h/a) ln(a/h) + 0.971 (h/a) + …)`, so
/// `D⊥/D0 = h/(1 + (h/5) ln(1/h) + 0.971 h)` with h = (z − a)/a.
///
/// Coefficients from memory; the tests confirm them against the Brenner
/// series (agreement better than 1e-6 relative for h ≤ 1e-3). Meant for
/// h ≲ 1e-3; [`brenner_perpendicular`] uses it below
/// [`BRENNER_LUBRICATION_SWITCH_Z_OVER_A`]. `h_over_a` must be ≥ 0;
/// otherwise `NaN`.
pub fn lubrication_perpendicular(h_over_a: f64) -> f64 {
    if h_over_a.is_nan() || h_over_a < 0.0 {
        return f64::NAN;
    }
    let h = h_over_a;
    if h == 0.0 {
        return 0.0;
    }
    h / (1.0 - 0.2 * h * h.ln() + COX_BRENNER_LINEAR_COEFFICIENT * h)
}

/// Gradient a · d(D⊥/D0)/dz of [`lubrication_perpendicular`], analytic:
/// `(1 + h/5)/(1 + (h/5) ln(1/h) + 0.971 h)²`, which is 1 at contact.
/// `h_over_a` must be ≥ 0; otherwise `NaN`.
pub fn d_lubrication_perpendicular_dz(h_over_a: f64) -> f64 {
    if h_over_a.is_nan() || h_over_a < 0.0 {
        return f64::NAN;
    }
    let h = h_over_a;
    if h == 0.0 {
        return 1.0;
    }
    let den = 1.0 - 0.2 * h * h.ln() + COX_BRENNER_LINEAR_COEFFICIENT * h;
    (1.0 + 0.2 * h) / (den * den)
}

/// The Brenner (1961) resistance ratio R = D0/D⊥ and dR/dα, with
/// α = arccosh(z/a), summed without any overflow-prone hyperbolic function.
///
/// With u = e^(−α), k = 2n + 1, every sinh is rewritten through u and
/// expm1, and the factor sinh α is absorbed into the terms, so each term
/// only involves powers of u ≤ 1: valid from just above contact up to
/// z/a = ∞. Returns `(R, dR/dα)`; the derivative is summed term by term.
fn brenner_resistance_series(z_over_a: f64) -> (f64, f64) {
    let alpha = z_over_a.acosh();
    let u = (-alpha).exp();
    let u2 = u * u;
    // b = 1 − u² computed without cancellation near contact.
    let b = -(-2.0 * alpha).exp_m1();
    let one_plus_u2 = 1.0 + u2;
    // v = u^(k − 3), updated by u² per term.
    let mut v = 1.0;
    let mut sum = 0.0;
    let mut d_sum = 0.0;
    let mut small_terms = 0;
    for n in 1..=BRENNER_MAX_TERMS {
        let nf = n as f64;
        let k = 2.0 * nf + 1.0;
        let em = (-k * alpha).exp_m1();
        // u^k and 1 − u^k, the latter accurate when kα is small.
        let uk = 1.0 + em;
        let ak = -em;
        let weight = nf * (nf + 1.0) / ((2.0 * nf - 1.0) * (2.0 * nf + 3.0));
        let kk4 = 0.25 * k * k;
        // After multiplying the bracket by e^(−kα): its numerator is u^(k−2)·p, its
        // denominator q; t = sinh α · u^(k−2) · p.
        let p = 2.0 * u2 * ak + 0.5 * k * b * one_plus_u2 + kk4 * b * b;
        let t = 0.5 * b * v * p;
        let q = ak * ak - kk4 * v * u * b * b;
        let term = weight * t / q;
        sum += term;
        // Term-by-term α-derivatives of t and q.
        let dp = 2.0 * k * u2 * (2.0 * uk - 1.0)
            + 0.5 * k * (4.0 * u2 * u2 - (k - 2.0) * b * one_plus_u2)
            + kk4 * b * (4.0 * u2 - (k - 2.0) * b);
        let dt = 0.5 * v * (one_plus_u2 * p + b * dp);
        let dq = v * u * (2.0 * k * ak * u2 - kk4 * b * (4.0 * u2 - (k - 2.0) * b));
        let d_term = weight * (dt * q - t * dq) / (q * q);
        d_sum += d_term;
        let converged = term.abs() <= BRENNER_RELATIVE_TOLERANCE * sum.abs()
            && d_term.abs() <= BRENNER_RELATIVE_TOLERANCE * d_sum.abs();
        small_terms = if converged { small_terms + 1 } else { 0 };
        if small_terms >= 2 {
            break;
        }
        v *= u2;
    }
    (4.0 / 3.0 * sum, 4.0 / 3.0 * d_sum)
}

/// Perpendicular mobility D⊥/D0 and its gradient a · d(D⊥/D0)/dz from the
/// Brenner series, without the near-contact switch (needs z/a > 1).
fn brenner_series_value_and_gradient(z_over_a: f64) -> (f64, f64) {
    let (r, dr_dalpha) = brenner_resistance_series(z_over_a);
    let alpha = z_over_a.acosh();
    // dα/dz = 1/sinh α = 2u/(1 − u²), finite for large z.
    let u = (-alpha).exp();
    let dalpha_dz = 2.0 * u / (-(-2.0 * alpha).exp_m1());
    (1.0 / r, -dr_dalpha * dalpha_dz / (r * r))
}

/// Perpendicular mobility D⊥/D0 of a sphere near one plane wall from
/// Brenner's (1961) exact series (REFERENCES.md), z/a = centre-to-wall
/// distance over radius.
///
/// The series is summed in a rewritten form that involves only e^(−α)
/// (no overflow up to z/a = ∞), until two consecutive terms fall below
/// 1e-12 of the sum (cap 20 000 terms). Below
/// [`BRENNER_LUBRICATION_SWITCH_Z_OVER_A`] = 1.0001, where convergence is
/// slow, the Cox–Brenner lubrication limit [`lubrication_perpendicular`]
/// is used instead (3e-8 relative from the series at the switch).
/// `z_over_a` must be ≥ 1; otherwise `NaN`.
pub fn brenner_perpendicular(z_over_a: f64) -> f64 {
    brenner_perpendicular_value_and_gradient(z_over_a).0
}

/// Gradient a · d(D⊥/D0)/dz of [`brenner_perpendicular`], by analytic
/// term-by-term differentiation of the Brenner (1961) series, then
/// d/dz = (1/sinh α) d/dα. Its accuracy is that of the summation: about
/// 1e-11 relative, 3e-11 at the switch point, by comparison with a
/// 40-digit evaluation made while writing it (the tests compare it with a
/// central difference to 1e-7).
/// Below [`BRENNER_LUBRICATION_SWITCH_Z_OVER_A`] it is the gradient of the
/// lubrication limit. `z_over_a` must be ≥ 1; otherwise `NaN`.
pub fn d_brenner_perpendicular_dz(z_over_a: f64) -> f64 {
    brenner_perpendicular_value_and_gradient(z_over_a).1
}

/// [`brenner_perpendicular`] and [`d_brenner_perpendicular_dz`] together,
/// sharing one summation of the Brenner (1961) series.
pub fn brenner_perpendicular_value_and_gradient(z_over_a: f64) -> (f64, f64) {
    if z_over_a.is_nan() || z_over_a < 1.0 {
        return (f64::NAN, f64::NAN);
    }
    if z_over_a < BRENNER_LUBRICATION_SWITCH_Z_OVER_A {
        let h = z_over_a - 1.0;
        return (
            lubrication_perpendicular(h),
            d_lubrication_perpendicular_dz(h),
        );
    }
    if z_over_a == f64::INFINITY {
        return (1.0, 0.0);
    }
    brenner_series_value_and_gradient(z_over_a)
}

/// Which formula gives the perpendicular wall mobility.
///
/// `Brenner` is the exact series (Brenner 1961) with the Cox–Brenner
/// lubrication limit very near contact; `BevanPrieve` is the closed form of
/// Bevan & Prieve (2000), at most about 2.3e-3 from the series (largest
/// near z/a ≈ 7; under 1e-3 at the REFERENCES.md check points).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum PerpendicularModel {
    /// Brenner (1961) exact series; the default.
    #[default]
    Brenner,
    /// Bevan & Prieve (2000) closed form.
    BevanPrieve,
}

impl PerpendicularModel {
    /// D⊥/D0 and a · d(D⊥/D0)/dz at `z_over_a` ≥ 1 (`NaN` below), by the
    /// model's formula (see [`brenner_perpendicular`],
    /// [`bevan_prieve_perpendicular`]).
    pub fn value_and_gradient(self, z_over_a: f64) -> (f64, f64) {
        match self {
            PerpendicularModel::Brenner => brenner_perpendicular_value_and_gradient(z_over_a),
            PerpendicularModel::BevanPrieve => {
                let h = z_over_a - 1.0;
                (
                    bevan_prieve_perpendicular(h),
                    d_bevan_prieve_perpendicular_dz(h),
                )
            }
        }
    }

    /// D⊥/D0 at `z_over_a` ≥ 1 (`NaN` below) by the model's formula.
    pub fn value(self, z_over_a: f64) -> f64 {
        match self {
            PerpendicularModel::Brenner => brenner_perpendicular(z_over_a),
            PerpendicularModel::BevanPrieve => bevan_prieve_perpendicular(z_over_a - 1.0),
        }
    }

    /// Short name for reports.
    pub fn name(self) -> &'static str {
        match self {
            PerpendicularModel::Brenner => "Brenner series",
            PerpendicularModel::BevanPrieve => "Bevan-Prieve closed form",
        }
    }

    /// Literature source for reports.
    pub fn source(self) -> &'static str {
        match self {
            PerpendicularModel::Brenner => {
                "Brenner, Chem. Eng. Sci. 16, 242 (1961); Cox & Brenner (1967) near contact"
            }
            PerpendicularModel::BevanPrieve => "Bevan & Prieve, J. Chem. Phys. 113, 1228 (2000)",
        }
    }
}

/// Gradient a · d(D⊥/D0)/dz of the perpendicular wall mobility by the chosen
/// model ([`d_brenner_perpendicular_dz`] or
/// [`d_bevan_prieve_perpendicular_dz`]); `z_over_a` ≥ 1, otherwise `NaN`.
pub fn d_perpendicular_dz(model: PerpendicularModel, z_over_a: f64) -> f64 {
    model.value_and_gradient(z_over_a).1
}

/// Both wall mobilities at one position and their gradients, all
/// dimensionless (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WallMobility {
    /// D∥/D0 (Faxén).
    pub parallel: f64,
    /// D⊥/D0 (the table's [`PerpendicularModel`]).
    pub perpendicular: f64,
    /// a · d(D∥/D0)/dz.
    pub d_parallel_dz_times_a: f64,
    /// a · d(D⊥/D0)/dz.
    pub d_perpendicular_dz_times_a: f64,
}

/// Precomputed wall mobilities for the integrator's hot loop.
///
/// Only the Brenner (1961) series is tabulated: Faxén's polynomial, the
/// Bevan–Prieve closed form and the lubrication limit are cheaper than a
/// lookup and are evaluated directly. The Brenner value and gradient are
/// stored on a grid uniform in ln(z/a − 1) from z/a = 1.0001 to 1000 (step
/// 0.02, about 800 nodes), dense near the wall where they vary fastest,
/// and read by 4-point (cubic) Lagrange interpolation; tests hold it to
/// 1e-5 relative of the direct formula (it does much better). Beyond
/// z/a = 1000 the series needs only a few terms and is summed directly.
#[derive(Debug, Clone)]
pub struct WallMobilityTable {
    model: PerpendicularModel,
    /// ln(z/a − 1) at the first node.
    log_gap_first: f64,
    /// Reciprocal of the node spacing in ln(z/a − 1).
    inverse_step: f64,
    /// [D⊥/D0, a · dD⊥/dz / D0] at each node (empty for Bevan–Prieve).
    nodes: Vec<[f64; 2]>,
}

impl WallMobilityTable {
    /// Upper end of the tabulated range, z/a.
    pub const Z_MAX_OVER_A: f64 = 1000.0;
    /// Node spacing in ln(z/a − 1).
    const LOG_GAP_STEP: f64 = 0.02;

    /// Builds the table for `model` (a few milliseconds for Brenner).
    pub fn new(model: PerpendicularModel) -> Self {
        let log_gap_first = (BRENNER_LUBRICATION_SWITCH_Z_OVER_A - 1.0).ln();
        let log_gap_last = (Self::Z_MAX_OVER_A - 1.0).ln();
        let nodes = match model {
            PerpendicularModel::BevanPrieve => Vec::new(),
            PerpendicularModel::Brenner => {
                // One node beyond each end so interpolation up to Z_MAX stays centred.
                let intervals =
                    ((log_gap_last - log_gap_first) / Self::LOG_GAP_STEP).ceil() as usize;
                (0..=intervals + 2)
                    .map(|i| {
                        let log_gap = log_gap_first + (i as f64 - 1.0) * Self::LOG_GAP_STEP;
                        let (d, dd) = brenner_series_value_and_gradient(1.0 + log_gap.exp());
                        [d, dd]
                    })
                    .collect()
            }
        };
        WallMobilityTable {
            model,
            log_gap_first: log_gap_first - Self::LOG_GAP_STEP,
            inverse_step: 1.0 / Self::LOG_GAP_STEP,
            nodes,
        }
    }

    /// The perpendicular model the table was built for.
    pub fn model(&self) -> PerpendicularModel {
        self.model
    }

    /// Wall mobilities at `z_over_a`. A value below 1 (a centre that
    /// round-off put just inside contact) is treated as contact; `NaN`
    /// gives `NaN` fields.
    pub fn eval(&self, z_over_a: f64) -> WallMobility {
        if z_over_a.is_nan() {
            return WallMobility {
                parallel: f64::NAN,
                perpendicular: f64::NAN,
                d_parallel_dz_times_a: f64::NAN,
                d_perpendicular_dz_times_a: f64::NAN,
            };
        }
        let z = z_over_a.max(1.0);
        let x = 1.0 / z;
        let (perpendicular, d_perpendicular) = match self.model {
            PerpendicularModel::BevanPrieve => self.model.value_and_gradient(z),
            PerpendicularModel::Brenner => {
                if (BRENNER_LUBRICATION_SWITCH_Z_OVER_A..=Self::Z_MAX_OVER_A).contains(&z) {
                    self.interpolate((z - 1.0).ln())
                } else {
                    brenner_perpendicular_value_and_gradient(z)
                }
            }
        };
        WallMobility {
            parallel: faxen_parallel(x),
            perpendicular,
            d_parallel_dz_times_a: d_faxen_parallel_dz(x),
            d_perpendicular_dz_times_a: d_perpendicular,
        }
    }

    /// Cubic Lagrange interpolation of the stored Brenner value and gradient.
    fn interpolate(&self, log_gap: f64) -> (f64, f64) {
        let position = (log_gap - self.log_gap_first) * self.inverse_step;
        // Left node of the 4-point stencil, kept inside the table.
        let last_start = self.nodes.len() - 4;
        let i = ((position.floor() as usize).saturating_sub(1)).min(last_start);
        let t = position - (i as f64 + 1.0);
        // Lagrange weights for nodes at −1, 0, 1, 2 relative to node i + 1.
        let w = [
            -t * (t - 1.0) * (t - 2.0) / 6.0,
            (t + 1.0) * (t - 1.0) * (t - 2.0) / 2.0,
            -(t + 1.0) * t * (t - 2.0) / 2.0,
            (t + 1.0) * t * (t - 1.0) / 6.0,
        ];
        let mut value = 0.0;
        let mut gradient = 0.0;
        for (weight, node) in w.iter().zip(&self.nodes[i..i + 4]) {
            value += weight * node[0];
            gradient += weight * node[1];
        }
        (value, gradient)
    }
}

impl Default for WallMobilityTable {
    /// The table for the default model, [`PerpendicularModel::Brenner`].
    fn default() -> Self {
        WallMobilityTable::new(PerpendicularModel::default())
    }
}

/// Mobility between two parallel walls (a slit) from the single-wall
/// mobilities `d1`, `d2` (each D/D0 for one wall alone), by linear
/// superposition of the wall resistances: `1/D = 1/D1 + 1/D2 − 1/D0`.
///
/// This is a common approximation (Oseen-type linear superposition,
/// REFERENCES.md), not an exact two-wall solution. Written as
/// `d1·d2/(d1 + d2 − d1·d2)` so that contact with one wall (d = 0) gives 0
/// without dividing by zero; if both are 0 the result is 0.
pub fn superpose_two_walls(d1: f64, d2: f64) -> f64 {
    let den = d1 + d2 - d1 * d2;
    if den == 0.0 {
        return 0.0;
    }
    d1 * d2 / den
}

/// [`superpose_two_walls`] and its derivative along one coordinate, given
/// each wall's mobility and its derivative along that same coordinate
/// (for a slit of width W and z measured from wall 1, wall 2 has
/// z₂ = W − z, so pass its gradient with the sign flipped).
///
/// Returns `(D/D0, d(D/D0)/dz)` in the units of the inputs' derivatives.
pub fn superpose_two_walls_with_gradient(d1: f64, d1_dz: f64, d2: f64, d2_dz: f64) -> (f64, f64) {
    let num = d1 * d2;
    let den = d1 + d2 - d1 * d2;
    if den == 0.0 {
        return (0.0, 0.0);
    }
    let num_dz = d1_dz * d2 + d1 * d2_dz;
    let den_dz = d1_dz + d2_dz - d1_dz * d2 - d1 * d2_dz;
    (num / den, (num_dz * den - num * den_dz) / (den * den))
}

/// Mean parallel mobility ⟨D∥⟩/D0 over the space open to the centre, in
/// this engine's wall model (Faxén, two walls superposed in a slit, the
/// nearest wall in a cylinder): the long-time lateral D_eff/D0 in a slit and
/// axial D_eff/D0 in a cylindrical pore that a run with wall hydrodynamics
/// must reproduce exactly (x and z moves there have no drift, and the
/// equilibrium density is uniform). `None` for membranes.
///
/// Evaluated by composite Simpson quadrature with 20 000 intervals.
pub fn mean_parallel_mobility(shape: &Shape, radius_nm: f64, drag_radius_nm: f64) -> Option<f64> {
    let table = WallMobilityTable::default();
    let par = |z: f64| table.eval(z / drag_radius_nm).parallel;
    let simpson = |lo: f64, hi: f64, f: &dyn Fn(f64) -> f64| -> f64 {
        let n = 20_000;
        let h = (hi - lo) / n as f64;
        let mut s = f(lo) + f(hi);
        for i in 1..n {
            s += f(lo + i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
        }
        s * h / 3.0
    };
    let a = radius_nm;
    match shape {
        Shape::PlaneWall { height_nm } => {
            Some(simpson(a, height_nm - a, &|z| par(z)) / (height_nm - 2.0 * a))
        }
        Shape::Slit { width_nm } => {
            let w = *width_nm;
            Some(simpson(a, w - a, &|z| superpose_two_walls(par(z), par(w - z))) / (w - 2.0 * a))
        }
        Shape::Cylinder { radius_nm: r, .. } => {
            let open = r - a;
            Some(simpson(0.0, open, &|rho| par(r - rho) * 2.0 * rho) / (open * open))
        }
        Shape::Membrane(_) => None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Slow, obviously-correct reference: the REFERENCES.md Brenner series
    /// evaluated literally with sinh, for moderate z/a where it cannot overflow.
    fn brenner_literal(z_over_a: f64) -> f64 {
        let alpha = z_over_a.acosh();
        let mut sum = 0.0;
        for n in 1..100_000u32 {
            let nf = f64::from(n);
            let k = 2.0 * nf + 1.0;
            let numerator = 2.0 * (k * alpha).sinh() + k * (2.0 * alpha).sinh();
            let denominator =
                4.0 * ((nf + 0.5) * alpha).sinh().powi(2) - k * k * alpha.sinh().powi(2);
            let term = nf * (nf + 1.0) / ((2.0 * nf - 1.0) * (2.0 * nf + 3.0))
                * (numerator / denominator - 1.0);
            sum += term;
            if term.abs() < 1e-16 * sum.abs() {
                break;
            }
        }
        1.0 / (4.0 / 3.0 * alpha.sinh() * sum)
    }

    fn relative(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    /// Central difference with step `step`.
    fn central(f: impl Fn(f64) -> f64, x: f64, step: f64) -> f64 {
        (f(x + step) - f(x - step)) / (2.0 * step)
    }

    #[test]
    fn brenner_matches_reference_check_values() {
        // REFERENCES.md: Brenner 1961 series, z/a = 1.1 → 0.0873
        assert!((brenner_perpendicular(1.1) - 0.0873).abs() < 6e-5);
        // REFERENCES.md: Brenner 1961 series, z/a = 1.5 → 0.3120
        assert!((brenner_perpendicular(1.5) - 0.3120).abs() < 6e-5);
        // REFERENCES.md: Brenner 1961 series, z/a = 2 → 0.4705
        assert!((brenner_perpendicular(2.0) - 0.4705).abs() < 6e-5);
        // REFERENCES.md: Brenner 1961 series, z/a = 3 → 0.6373
        assert!((brenner_perpendicular(3.0) - 0.6373).abs() < 6e-5);
    }

    #[test]
    fn bevan_prieve_matches_reference_check_values() {
        // REFERENCES.md: Bevan & Prieve 2000 closed form, z/a = 1.1 → 0.0878
        assert!((bevan_prieve_perpendicular(0.1) - 0.0878).abs() < 6e-5);
        // REFERENCES.md: Bevan & Prieve 2000 closed form, z/a = 1.5 → 0.3125
        assert!((bevan_prieve_perpendicular(0.5) - 0.3125).abs() < 6e-5);
        // REFERENCES.md: Bevan & Prieve 2000 closed form, z/a = 2 → 0.4706
        assert!((bevan_prieve_perpendicular(1.0) - 0.4706).abs() < 6e-5);
        // REFERENCES.md: Bevan & Prieve 2000 closed form, z/a = 3 → 0.6364
        assert!((bevan_prieve_perpendicular(2.0) - 0.6364).abs() < 6e-5);
        // Exact rationals of the same form: h = 1/2 → 5/16, h = 1 → 8/17.
        assert!((bevan_prieve_perpendicular(0.5) - 5.0 / 16.0).abs() < 1e-15);
        assert!((bevan_prieve_perpendicular(1.0) - 8.0 / 17.0).abs() < 1e-15);
    }

    #[test]
    fn faxen_matches_reference_check_value() {
        // REFERENCES.md: Faxén parallel, z/a = 2 → 0.7214
        assert!((faxen_parallel(0.5) - 0.7214).abs() < 6e-5);
        // Exact value of the polynomial at x = 1/2: 1 − 9/32 + 1/64 − 45/4096 − 1/512.
        let exact = 1.0 - 9.0 / 32.0 + 1.0 / 64.0 - 45.0 / 4096.0 - 1.0 / 512.0;
        assert!((faxen_parallel(0.5) - exact).abs() < 1e-15);
    }

    #[test]
    fn stable_brenner_sum_agrees_with_literal_series() {
        // Independent check: the overflow-free rewrite against the literal formula.
        for &z in &[1.0002, 1.001, 1.01, 1.1, 1.5, 2.0, 3.0, 10.0, 50.0] {
            let stable = brenner_perpendicular(z);
            let literal = brenner_literal(z);
            assert!(
                relative(stable, literal) < 1e-10,
                "z/a = {z}: {stable} vs {literal}"
            );
        }
    }

    #[test]
    fn brenner_far_field_follows_leading_reflection() {
        // Far field of the series: D⊥/D0 = 1 − 9/8 (a/z) + O((a/z)³) (Lorentz 1907 reflection).
        for &z in &[1e4, 1e6, 1e9] {
            let x = 1.0 / z;
            let d = brenner_perpendicular(z);
            assert!((d - (1.0 - 9.0 / 8.0 * x)).abs() < 1.0 * x * x * x + 1e-14);
            // Its gradient: a · dD⊥/dz = 9/8 (a/z)² + O((a/z)⁴).
            let g = d_brenner_perpendicular_dz(z);
            assert!(relative(g, 9.0 / 8.0 * x * x) < 1e-6);
        }
        // Huge and infinite distances: no overflow, mobility → 1.
        assert!((brenner_perpendicular(1e300) - 1.0).abs() < 1e-15);
        assert_eq!(brenner_perpendicular(f64::INFINITY), 1.0);
        assert_eq!(d_brenner_perpendicular_dz(f64::INFINITY), 0.0);
    }

    #[test]
    fn all_mobilities_tend_to_one_far_from_the_wall() {
        // Limit: any wall correction vanishes at infinite distance.
        assert_eq!(faxen_parallel(0.0), 1.0);
        assert_eq!(bevan_prieve_perpendicular(f64::INFINITY), 1.0);
        assert!((bevan_prieve_perpendicular(1e12) - 1.0).abs() < 1e-11);
        assert!((brenner_perpendicular(1e12) - 1.0).abs() < 1e-11);
        assert_eq!(d_faxen_parallel_dz(0.0), 0.0);
        assert_eq!(d_bevan_prieve_perpendicular_dz(f64::INFINITY), 0.0);
    }

    #[test]
    fn perpendicular_mobility_vanishes_linearly_at_contact() {
        // Lubrication: D⊥/D0 → h/a, so the value is 0 and the gradient 1 at contact.
        assert_eq!(brenner_perpendicular(1.0), 0.0);
        assert_eq!(d_brenner_perpendicular_dz(1.0), 1.0);
        assert_eq!(bevan_prieve_perpendicular(0.0), 0.0);
        assert_eq!(d_bevan_prieve_perpendicular_dz(0.0), 1.0);
        let h = 1e-9;
        assert!(relative(brenner_perpendicular(1.0 + h), h) < 1e-7);
    }

    #[test]
    fn lubrication_limit_joins_the_series() {
        // Cox & Brenner 1967 near-contact form (from memory) against the series itself.
        for &h in &[1e-3, 3e-4, 1e-4, 5e-5] {
            let (series, _) = brenner_series_value_and_gradient(1.0 + h);
            let lubrication = lubrication_perpendicular(h);
            // The neglected terms are O(h² ln h): 1e-6 up to h = 1e-3, 1e-7 from the switch down.
            let tolerance = if h > 1e-4 { 1e-6 } else { 1e-7 };
            assert!(
                relative(lubrication, series) < tolerance,
                "h = {h}: {lubrication} vs {series}"
            );
        }
        // Continuity across the switch, value and gradient.
        let s = BRENNER_LUBRICATION_SWITCH_Z_OVER_A;
        let below = brenner_perpendicular_value_and_gradient(s * (1.0 - 1e-15));
        let above = brenner_perpendicular_value_and_gradient(s);
        assert!(relative(below.0, above.0) < 1e-7);
        assert!(relative(below.1, above.1) < 1e-6);
    }

    #[test]
    fn gradients_match_central_differences() {
        // Faxén: analytic gradient against a central difference in z/a.
        let faxen_of_z = |z: f64| faxen_parallel(1.0 / z);
        for &z in &[1.05, 1.5, 2.0, 5.0, 30.0] {
            let fd = central(faxen_of_z, z, 1e-5 * z);
            assert!(
                relative(d_faxen_parallel_dz(1.0 / z), fd) < 1e-7,
                "z/a = {z}"
            );
        }
        // Bevan–Prieve, including the large-gap branch.
        for &h in &[1e-3, 0.1, 0.9, 1.2, 10.0, 300.0] {
            let fd = central(bevan_prieve_perpendicular, h, 1e-5 * h);
            assert!(
                relative(d_bevan_prieve_perpendicular_dz(h), fd) < 1e-7,
                "h = {h}"
            );
        }
        // Lubrication form.
        for &h in &[1e-6, 1e-5, 1e-4] {
            let fd = central(lubrication_perpendicular, h, 1e-4 * h);
            assert!(
                relative(d_lubrication_perpendicular_dz(h), fd) < 1e-7,
                "h = {h}"
            );
        }
        // Brenner: term-by-term analytic gradient against a central difference.
        for &z in &[1.0002f64, 1.001, 1.01, 1.1, 1.5, 2.0, 3.0, 10.0, 100.0] {
            let step = 1e-4 * (z - 1.0).min(1.0);
            let fd = central(brenner_perpendicular, z, step);
            let analytic = d_brenner_perpendicular_dz(z);
            assert!(
                relative(analytic, fd) < 1e-7,
                "z/a = {z}: {analytic} vs {fd}"
            );
        }
    }

    #[test]
    fn mobilities_rise_monotonically_away_from_the_wall() {
        // Theory: every wall correction weakens with distance; values stay in [0, 1].
        let mut previous = [f64::NEG_INFINITY; 3];
        for i in 0..=400 {
            let z = 1.0 + 10f64.powf(-6.0 + 0.025 * f64::from(i));
            let now = [
                faxen_parallel(1.0 / z),
                brenner_perpendicular(z),
                bevan_prieve_perpendicular(z - 1.0),
            ];
            for (n, p) in now.iter().zip(&previous) {
                assert!(*n > *p && (0.0..=1.0).contains(n), "z/a = {z}");
            }
            // Perpendicular is the more hindered direction once Faxén is meaningful.
            if z > 1.1 {
                assert!(now[1] < now[0], "z/a = {z}");
            }
            previous = now;
        }
    }

    #[test]
    fn closed_form_stays_close_to_the_series() {
        // REFERENCES.md pairs: the closed form is within 1e-3 of the series at 1.1, 1.5, 2, 3.
        for &z in &[1.1, 1.5, 2.0, 3.0] {
            let gap = (bevan_prieve_perpendicular(z - 1.0) - brenner_perpendicular(z)).abs();
            assert!(gap < 1e-3, "z/a = {z}");
        }
    }

    #[test]
    fn out_of_domain_gives_nan_not_panic() {
        assert!(faxen_parallel(-0.1).is_nan());
        assert!(faxen_parallel(1.5).is_nan());
        assert!(d_faxen_parallel_dz(f64::NAN).is_nan());
        assert!(brenner_perpendicular(0.99).is_nan());
        assert!(d_brenner_perpendicular_dz(-3.0).is_nan());
        assert!(bevan_prieve_perpendicular(-0.01).is_nan());
        assert!(lubrication_perpendicular(f64::NAN).is_nan());
        assert!(PerpendicularModel::BevanPrieve.value(0.5).is_nan());
    }

    #[test]
    fn model_enum_dispatches_to_the_formulas() {
        let z = 1.7;
        assert_eq!(
            PerpendicularModel::Brenner.value(z),
            brenner_perpendicular(z)
        );
        assert_eq!(
            PerpendicularModel::Brenner.value_and_gradient(z),
            (brenner_perpendicular(z), d_brenner_perpendicular_dz(z))
        );
        assert_eq!(
            PerpendicularModel::BevanPrieve.value_and_gradient(z),
            (
                bevan_prieve_perpendicular(z - 1.0),
                d_bevan_prieve_perpendicular_dz(z - 1.0)
            )
        );
        assert_eq!(
            d_perpendicular_dz(PerpendicularModel::BevanPrieve, z),
            d_bevan_prieve_perpendicular_dz(z - 1.0)
        );
    }

    #[test]
    fn table_matches_direct_formulas() {
        // The fast path against direct evaluation, 1e-5 relative, across and beyond its range.
        for model in [PerpendicularModel::Brenner, PerpendicularModel::BevanPrieve] {
            let table = WallMobilityTable::new(model);
            assert_eq!(table.model(), model);
            for i in 0..=3000 {
                // Offsets chosen off the node grid, from 1e-7 to 1e4 in z/a − 1.
                let z = 1.0 + 10f64.powf(-7.0 + 11.0 * (f64::from(i) + 0.37) / 3000.0);
                let got = table.eval(z);
                let (perpendicular, d_perpendicular) = model.value_and_gradient(z);
                let want = [
                    faxen_parallel(1.0 / z),
                    perpendicular,
                    d_faxen_parallel_dz(1.0 / z),
                    d_perpendicular,
                ];
                let have = [
                    got.parallel,
                    got.perpendicular,
                    got.d_parallel_dz_times_a,
                    got.d_perpendicular_dz_times_a,
                ];
                for (h, w) in have.iter().zip(&want) {
                    assert!(relative(*h, *w) < 1e-5, "{model:?} z/a = {z}: {h} vs {w}");
                }
            }
        }
    }

    #[test]
    fn table_is_continuous_at_its_ends_and_clamps_inside_contact() {
        let table = WallMobilityTable::default();
        for &z in &[
            BRENNER_LUBRICATION_SWITCH_Z_OVER_A,
            WallMobilityTable::Z_MAX_OVER_A,
        ] {
            let below = table.eval(z * (1.0 - 1e-12));
            let above = table.eval(z * (1.0 + 1e-12));
            assert!(relative(below.perpendicular, above.perpendicular) < 1e-6);
            assert!(
                relative(
                    below.d_perpendicular_dz_times_a,
                    above.d_perpendicular_dz_times_a
                ) < 1e-6
            );
        }
        // Round-off just inside contact is read as contact.
        assert_eq!(table.eval(0.999_999), table.eval(1.0));
        assert_eq!(table.eval(1.0).perpendicular, 0.0);
        assert!(table.eval(f64::NAN).perpendicular.is_nan());
        assert_eq!(table.eval(f64::INFINITY).perpendicular, 1.0);
    }

    #[test]
    fn slit_superposition() {
        // Identities of 1/D = 1/D1 + 1/D2 − 1 (REFERENCES.md two-wall superposition).
        assert_eq!(superpose_two_walls(1.0, 1.0), 1.0);
        assert_eq!(superpose_two_walls(0.0, 0.7), 0.0);
        assert_eq!(superpose_two_walls(0.0, 0.0), 0.0);
        assert!((superpose_two_walls(0.5, 0.5) - 1.0 / 3.0).abs() < 1e-15);
        assert!((superpose_two_walls(0.4, 1.0) - 0.4).abs() < 1e-15);
        assert_eq!(superpose_two_walls(0.3, 0.8), superpose_two_walls(0.8, 0.3));
        // Gradient across a slit of width 5a against a central difference.
        let width = 5.0;
        let slit = |z: f64| {
            superpose_two_walls(brenner_perpendicular(z), brenner_perpendicular(width - z))
        };
        for &z in &[1.2, 2.0, 2.5, 3.7] {
            let (value, gradient) = superpose_two_walls_with_gradient(
                brenner_perpendicular(z),
                d_brenner_perpendicular_dz(z),
                brenner_perpendicular(width - z),
                -d_brenner_perpendicular_dz(width - z),
            );
            assert!(relative(value, slit(z)) < 1e-14);
            let fd = central(slit, z, 1e-5);
            if z == 2.5 {
                // Mid-slit symmetry: the gradient vanishes.
                assert!(gradient.abs() < 1e-12);
            } else {
                assert!(relative(gradient, fd) < 1e-7, "z/a = {z}");
            }
        }
    }
}
