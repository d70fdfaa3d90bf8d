//! Soft interactions between mobile particles: one [`WallPotential`] per
//! pair of species (the sphere–sphere forms: Derjaguin's radius ab/(a + b)
//! in the screened electrostatics, Hamaker's exact sphere–sphere van der
//! Waals, a short-range well), cut off at the gap where |U| falls below a
//! tolerance, and the second virial coefficient each pair implies.
//!
//! B₂ = 2π ∫₀^∞ (1 − e^{−U(r)/k_BT}) r² dr (McQuarrie, Statistical
//! Mechanics, §12-1; from memory): the hard core gives 2πσ³/3 with σ = a + b,
//! the soft part is integrated numerically up to the cut-off (Simpson's rule
//! on a grid fine against the Debye length and the well's range).

use crate::space::potentials::WallPotential;

/// Simpson intervals of the soft part of B₂ (even).
const VIRIAL_INTERVALS: usize = 20_000;

/// The soft interaction of one pair of species.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PairPotential {
    /// U(h) of the pair (radius a, facing a sphere of radius b).
    pub u: WallPotential,
    /// Contact distance a + b, nm.
    pub contact_nm: f64,
    /// Gap beyond which the interaction is cut off, nm.
    pub cutoff_gap_nm: f64,
}

impl PairPotential {
    /// Centre distance beyond which the pair does not interact, nm.
    pub fn cutoff_distance_nm(&self) -> f64 {
        self.contact_nm + self.cutoff_gap_nm
    }

    /// Energy at centre distance `r_nm` ≥ contact, pN·nm (0 beyond the cut-off).
    #[inline]
    pub fn energy_pn_nm(&self, r_nm: f64) -> f64 {
        if r_nm >= self.cutoff_distance_nm() {
            0.0
        } else {
            self.u.energy_pn_nm(r_nm - self.contact_nm)
        }
    }

    /// Energy (pN·nm) and force (pN) at centre distance `r_nm` ≥ contact, in one pass
    /// (both 0 beyond the cut-off).
    #[inline]
    pub fn energy_force(&self, r_nm: f64) -> (f64, f64) {
        if r_nm >= self.cutoff_distance_nm() {
            (0.0, 0.0)
        } else {
            self.u.energy_force(r_nm - self.contact_nm)
        }
    }

    /// B₂ of the truncated model, nm³, at thermal energy `kt_pn_nm`: the
    /// hard core plus the soft part up to the cut-off.
    pub fn second_virial_nm3(&self, kt_pn_nm: f64) -> f64 {
        let sigma = self.contact_nm;
        let hard = 2.0 * std::f64::consts::PI / 3.0 * sigma.powi(3);
        hard + self.soft_virial_nm3(kt_pn_nm)
    }

    /// The soft part of B₂, 2π ∫_σ^{σ+cut} (1 − e^{−U/k_BT}) r² dr, nm³.
    pub fn soft_virial_nm3(&self, kt_pn_nm: f64) -> f64 {
        let (lo, hi) = (self.contact_nm, self.cutoff_distance_nm());
        if hi <= lo {
            return 0.0;
        }
        let n = VIRIAL_INTERVALS;
        let dr = (hi - lo) / n as f64;
        let f = |r: f64| (1.0 - (-self.u.energy_pn_nm(r - lo) / kt_pn_nm).exp()) * r * r;
        let mut sum = f(lo) + f(hi);
        for k in 1..n {
            sum += if k % 2 == 1 { 4.0 } else { 2.0 } * f(lo + k as f64 * dr);
        }
        2.0 * std::f64::consts::PI * sum * dr / 3.0
    }
}

/// The pair interactions of every pair of species (None: hard contact
/// only, or no interaction at all).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct PairTable {
    species: usize,
    pairs: Vec<Option<PairPotential>>,
}

impl PairTable {
    /// An empty table for `species` species.
    pub fn new(species: usize) -> Self {
        Self {
            species,
            pairs: vec![None; species * species],
        }
    }

    /// Sets the interaction of species `a` and `b` (both orders).
    pub fn set(&mut self, a: usize, b: usize, p: PairPotential) {
        self.pairs[a * self.species + b] = Some(p);
        self.pairs[b * self.species + a] = Some(p);
    }

    /// The interaction of species `a` with `b`.
    #[inline]
    pub fn get(&self, a: usize, b: usize) -> Option<&PairPotential> {
        self.pairs[a * self.species + b].as_ref()
    }

    /// True when no pair interacts softly.
    pub fn is_empty(&self) -> bool {
        self.pairs.iter().all(Option::is_none)
    }

    /// The largest cut-off gap of any pair, nm.
    pub fn largest_cutoff_gap_nm(&self) -> f64 {
        self.pairs
            .iter()
            .flatten()
            .map(|p| p.cutoff_gap_nm)
            .fold(0.0, f64::max)
    }

    /// Every interacting pair (a ≤ b) with its potential.
    pub fn iter(&self) -> impl Iterator<Item = (usize, usize, &PairPotential)> {
        (0..self.species).flat_map(move |a| {
            (a..self.species).filter_map(move |b| self.get(a, b).map(|p| (a, b, p)))
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::space::potentials::Facing;

    fn pair(electrostatic: f64, depth: f64) -> PairPotential {
        PairPotential {
            u: WallPotential {
                electrostatic_pn_nm: electrostatic,
                kappa_per_nm: 1.0,
                well_depth_pn_nm: depth,
                well_range_nm: 0.5,
                radius_nm: 2.0,
                facing: Facing::Sphere(3.0),
                ..Default::default()
            },
            contact_nm: 5.0,
            cutoff_gap_nm: 12.0,
        }
    }

    #[test]
    fn hard_spheres_have_the_textbook_virial() {
        // B₂ = 2πσ³/3 for hard spheres of contact distance σ (exact).
        let p = pair(0.0, 0.0);
        let expected = 2.0 * std::f64::consts::PI / 3.0 * 125.0;
        assert!((p.second_virial_nm3(4.1) - expected).abs() < 1e-9 * expected);
    }

    #[test]
    fn a_square_of_known_integral_is_reproduced() {
        // Weak repulsion: 1 − e^{−βU} ≈ βU, and ∫ U0 e^{−κh} (σ + h)² dh is closed-form.
        let kt = 4.114;
        let u0 = 1e-6 * kt;
        let p = pair(u0, 0.0);
        let s: f64 = 5.0;
        let cut: f64 = 12.0;
        // ∫₀^c e^{−h} (s + h)² dh = [−e^{−h}((s + h)² + 2(s + h) + 2)]₀^c.
        let g = |h: f64| -(-h).exp() * ((s + h).powi(2) + 2.0 * (s + h) + 2.0);
        let integral = g(cut) - g(0.0);
        let expected = 2.0 * std::f64::consts::PI * u0 / kt * integral;
        let got = p.soft_virial_nm3(kt);
        assert!(
            (got - expected).abs() < 1e-6 * expected,
            "{got} vs {expected}"
        );
    }

    #[test]
    fn attraction_lowers_and_repulsion_raises_the_virial() {
        let kt = 4.114;
        let hard = pair(0.0, 0.0).second_virial_nm3(kt);
        assert!(pair(2.0 * kt, 0.0).second_virial_nm3(kt) > hard);
        assert!(pair(0.0, 3.0 * kt).second_virial_nm3(kt) < hard);
    }

    #[test]
    fn the_table_is_symmetric_and_cut_off() {
        let mut t = PairTable::new(3);
        let p = pair(1.0, 0.0);
        t.set(0, 2, p);
        assert_eq!(t.get(2, 0), Some(&p));
        assert!(t.get(1, 1).is_none());
        assert_eq!(t.iter().count(), 1);
        assert_eq!(t.largest_cutoff_gap_nm(), 12.0);
        assert_eq!(p.energy_pn_nm(17.5), 0.0);
        assert!(p.energy_pn_nm(5.5) > 0.0);
    }
}
