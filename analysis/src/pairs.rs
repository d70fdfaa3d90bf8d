//! The pair distribution g(r) of two species in a periodic box and the
//! second virial coefficient it implies.
//!
//! Around each centre of species A, the partners of species B (A's own
//! fellows when A = B) are counted in spherical shells out to a radius R
//! beyond which the pair no longer interacts. With N_B partners in a box of
//! volume V, each centre excludes X = 2B₂ = ∫(1 − e^{−U/k_BT}) dV from
//! them, so the mean count within R is n_R = ρ_far (V_R − X) with
//! ρ_far = N_B/(V − N_X X), N_X the centres that exclude partners (N_A for
//! two species, N_A − 1 for one). Hence
//!
//!   2B₂ = (N_B V_R − n_R V)/(N_B − N_X n_R),
//!
//! exact for a single centre among ideal partners at equilibrium, and
//! good to first order in the centres' density otherwise. g(r) is each
//! shell's count over ρ_far times the shell's volume, and at low density
//! equals e^{−U(r)/k_BT} (McQuarrie, Statistical Mechanics, §13-2; from memory).

use crate::error::{Error, Result};
use crate::read::Trajectory;
use std::f64::consts::PI;

/// Memory the frames read at once may take, bytes.
const WINDOW_BUDGET_BYTES: usize = 256 << 20;

/// The measured pair distribution and B₂ of two species.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PairDistribution {
    /// Centre species A and partner species B.
    pub species: [String; 2],
    /// Shell edges, nm (first 0, last R).
    pub edges_nm: Vec<f64>,
    /// Mean number of partners per centre in each shell.
    pub counts: Vec<f64>,
    /// Standard error of each shell's mean count, from blocks of consecutive frames.
    pub counts_se: Vec<f64>,
    /// Partner density far from a centre, ρ_far = N_B/(V − N_X·2B₂), nm⁻³.
    pub far_density_per_nm3: f64,
    /// g(r) in each shell.
    pub g: Vec<f64>,
    /// 2B₂/2 = B₂, nm³, from the count within R over all frames used.
    pub second_virial_nm3: f64,
    /// Its standard error from blocks of consecutive frames, nm³.
    pub second_virial_se_nm3: f64,
    /// Number of blocks.
    pub blocks: usize,
    /// Frames used (from `first_frame` on).
    pub frames: usize,
    /// Partners per centre N_B, centres N_A.
    pub partners: usize,
    /// Centres N_A.
    pub centres: usize,
    /// N_X, the centres besides the one counted around that exclude a partner (N_A for two species, N_A − 2 for one).
    pub excluders: usize,
}

/// Counts partners around centres frame by frame.
///
/// # Errors
/// A species missing from the file, a box that is not periodic on every
/// axis or whose half edge is shorter than `r_max_nm`, fewer frames than
/// blocks, or a read failure.
pub fn pair_distribution(
    trajectory: &Trajectory,
    centre: &str,
    partner: &str,
    r_max_nm: f64,
    shells: usize,
    first_frame: usize,
    blocks: usize,
) -> Result<PairDistribution> {
    let a = trajectory.species(Some(centre))?;
    let b = trajectory.species(Some(partner))?;
    let boxed = &a.meta().simulation_box;
    let edges = match &boxed.edges_nm {
        Some(e) if boxed.periodic.iter().all(|&p| p) && e.len() == 3 => [e[0], e[1], e[2]],
        _ => {
            return Err(Error::bad_value(
                trajectory.path(),
                "/particles/<species>/box",
                format!("periodic {:?}", boxed.periodic),
                "a pair distribution needs a box periodic on every axis",
            ))
        }
    };
    let half = edges.iter().cloned().fold(f64::INFINITY, f64::min) / 2.0;
    if !(r_max_nm > 0.0 && r_max_nm <= half) {
        return Err(Error::invalid_option(
            "pair distribution radius",
            r_max_nm,
            format!("above 0 nm and at most half the shortest edge, {half} nm"),
        ));
    }
    let frames = a.meta().frames.min(b.meta().frames);
    if shells == 0 || blocks < 2 || frames < first_frame + blocks {
        return Err(Error::invalid_option(
            "frames and blocks",
            format!("{frames} frames from {first_frame}, {blocks} blocks, {shells} shells"),
            "at least one shell and two blocks, each with a frame",
        ));
    }
    let same = centre == partner;
    let (n_a, n_b) = (a.meta().particles, b.meta().particles);
    let partners = if same { n_a - 1 } else { n_b };
    let excluders = if same { n_a.saturating_sub(2) } else { n_a };
    let used = frames - first_frame;
    let per_block = used / blocks;
    let dr = r_max_nm / shells as f64;
    let mut shell_sum = vec![vec![0.0; shells]; blocks];
    let mut block_sum = vec![0.0; blocks];
    let bytes = 24 * (n_a + if same { 0 } else { n_b });
    let window = (WINDOW_BUDGET_BYTES / bytes.max(1)).max(1);
    let mut f = first_frame;
    while f < first_frame + per_block * blocks {
        let end = (f + window).min(first_frame + per_block * blocks);
        let wa = a.read_frames(f..end)?;
        let wb = if same {
            None
        } else {
            Some(b.read_frames(f..end)?)
        };
        for k in 0..end - f {
            let pa = wa.positions_nm.index_axis(ndarray::Axis(0), k);
            let pb = wb
                .as_ref()
                .map_or(pa, |w| w.positions_nm.index_axis(ndarray::Axis(0), k));
            let block = (f + k - first_frame) / per_block;
            let within = count_frame(pa, pb, same, &edges, r_max_nm, &mut shell_sum[block]);
            block_sum[block] += within as f64;
        }
        f = end;
    }
    let volume: f64 = edges.iter().product();
    let v_r = 4.0 / 3.0 * PI * r_max_nm.powi(3);
    let excluded = |n_r: f64| {
        (partners as f64 * v_r - n_r * volume) / (partners as f64 - excluders as f64 * n_r)
    };
    let norm = (n_a * per_block * blocks) as f64;
    let per_frame = (n_a * per_block) as f64;
    let n_r = block_sum.iter().sum::<f64>() / norm;
    let x = excluded(n_r);
    let per: Vec<f64> = block_sum
        .iter()
        .map(|s| 0.5 * excluded(s / per_frame))
        .collect();
    let mean = per.iter().sum::<f64>() / blocks as f64;
    let var = per.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (blocks - 1) as f64;
    let rho_far = partners as f64 / (volume - excluders as f64 * x);
    let counts: Vec<f64> = (0..shells)
        .map(|k| shell_sum.iter().map(|b| b[k]).sum::<f64>() / norm)
        .collect();
    let counts_se: Vec<f64> = (0..shells)
        .map(|k| {
            let m = counts[k];
            let v = shell_sum
                .iter()
                .map(|b| (b[k] / per_frame - m).powi(2))
                .sum::<f64>()
                / (blocks - 1) as f64;
            (v / blocks as f64).sqrt()
        })
        .collect();
    let g = counts
        .iter()
        .enumerate()
        .map(|(k, c)| {
            let shell = 4.0 / 3.0 * PI * (((k + 1) as f64 * dr).powi(3) - (k as f64 * dr).powi(3));
            c / (rho_far * shell)
        })
        .collect();
    Ok(PairDistribution {
        species: [centre.to_string(), partner.to_string()],
        edges_nm: (0..=shells).map(|k| k as f64 * dr).collect(),
        counts,
        counts_se,
        far_density_per_nm3: rho_far,
        g,
        second_virial_nm3: 0.5 * x,
        second_virial_se_nm3: (var / blocks as f64).sqrt(),
        blocks,
        frames: per_block * blocks,
        partners,
        centres: n_a,
        excluders,
    })
}

/// Counts, for one frame, the partners `pb` within `r_max` of each centre
/// `pa` (minimum image) into `shells` (equal widths); returns the total.
/// Partners are binned into cells at least `r_max` wide, so each centre
/// looks at 27 cells (every pair when the box holds fewer than 3 per axis).
fn count_frame(
    pa: ndarray::ArrayView2<f64>,
    pb: ndarray::ArrayView2<f64>,
    same: bool,
    edges: &[f64; 3],
    r_max: f64,
    shells: &mut [f64],
) -> usize {
    let dr = r_max / shells.len() as f64;
    let wrap = |d: f64, l: f64| d - l * (d / l).round();
    let cells = edges.map(|l| ((l / r_max).floor() as usize).max(1));
    let mut within = 0;
    let mut count = |i: usize, j: usize, shells: &mut [f64]| {
        if same && i == j {
            return;
        }
        let mut r2 = 0.0;
        for ax in 0..3 {
            let d = wrap(pb[[j, ax]] - pa[[i, ax]], edges[ax]);
            r2 += d * d;
        }
        if r2 < r_max * r_max {
            let shell = ((r2.sqrt() / dr) as usize).min(shells.len() - 1);
            shells[shell] += 1.0;
            within += 1;
        }
    };
    if cells.iter().any(|&c| c < 3) {
        for i in 0..pa.nrows() {
            for j in 0..pb.nrows() {
                count(i, j, shells);
            }
        }
        return within;
    }
    let cell_of = |p: [f64; 3]| -> [usize; 3] {
        [0, 1, 2].map(|ax| {
            let x = p[ax] - edges[ax] * (p[ax] / edges[ax]).floor();
            ((x / edges[ax] * cells[ax] as f64) as usize).min(cells[ax] - 1)
        })
    };
    let index = |c: [usize; 3]| (c[0] * cells[1] + c[1]) * cells[2] + c[2];
    let mut members: Vec<Vec<usize>> = vec![Vec::new(); cells.iter().product()];
    for j in 0..pb.nrows() {
        members[index(cell_of([pb[[j, 0]], pb[[j, 1]], pb[[j, 2]]]))].push(j);
    }
    for i in 0..pa.nrows() {
        let c = cell_of([pa[[i, 0]], pa[[i, 1]], pa[[i, 2]]]);
        for dx in 0..3 {
            for dy in 0..3 {
                for dz in 0..3 {
                    let n =
                        [0, 1, 2].map(|ax| (c[ax] + cells[ax] + [dx, dy, dz][ax] - 1) % cells[ax]);
                    for &j in &members[index(n)] {
                        count(i, j, shells);
                    }
                }
            }
        }
    }
    within
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    #[test]
    fn cells_count_the_same_pairs_as_every_pair() {
        // Pseudo-random points; the cell path against a brute-force count in a box of the same edges.
        let mut x: u64 = 12345;
        let mut next = || {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            (x >> 11) as f64 / (1u64 << 53) as f64
        };
        let edges = [30.0, 24.0, 36.0];
        let pts = |n: usize, next: &mut dyn FnMut() -> f64| {
            Array2::from_shape_fn((n, 3), |(_, ax)| (next() - 0.2) * edges[ax] * 1.3)
        };
        let a = pts(50, &mut next);
        let b = pts(400, &mut next);
        let wrap = |d: f64, l: f64| d - l * (d / l).round();
        for same in [false, true] {
            let pb = if same { a.view() } else { b.view() };
            let mut fast = vec![0.0; 10];
            let got = count_frame(a.view(), pb, same, &edges, 7.5, &mut fast);
            let mut slow = vec![0.0; 10];
            let mut want = 0;
            for i in 0..a.nrows() {
                for j in 0..pb.nrows() {
                    if same && i == j {
                        continue;
                    }
                    let r2: f64 = (0..3)
                        .map(|ax| wrap(pb[[j, ax]] - a[[i, ax]], edges[ax]).powi(2))
                        .sum();
                    if r2 < 7.5 * 7.5 {
                        slow[((r2.sqrt() / 0.75) as usize).min(9)] += 1.0;
                        want += 1;
                    }
                }
            }
            assert!(want > 0);
            assert_eq!(got, want);
            assert_eq!(fast, slow);
        }
    }
}

/// Part of the frames left out at the start of a pair measurement (the
/// crowd settles from its placement; common practice).
pub const SETTLE_FRACTION: f64 = 0.2;
/// Blocks of consecutive frames behind each standard error.
pub const PAIR_BLOCKS: usize = 10;
/// Shells of the reported g(r).
pub const PAIR_SHELLS: usize = 20;
/// Largest share of the box the centres' spheres of radius R may fill
/// together (N_X V_R/V) for B₂ to be estimated: beyond it their
/// neighbourhoods overlap and the first-order correction no longer holds.
pub const DILUTE_OCCUPANCY: f64 = 0.05;

/// One soft pair of a scenario as measured in its trajectory.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PairEntry {
    /// The measurement (centres, partners, g(r), B₂).
    pub measured: PairDistribution,
    /// B₂ of the model, nm³ (numerical integral of the truncated potential).
    pub model_second_virial_nm3: f64,
    /// The hard spheres' 2πσ³/3, nm³.
    pub hard_second_virial_nm3: f64,
    /// e^{−U/k_BT} averaged over each shell's open part (r² weight; 0 inside the core).
    pub g_model: Vec<f64>,
    /// True when the estimate is exact for the model (one centre among ideal
    /// partners); else good to first order in the centres' density.
    pub exact: bool,
    /// N_X V_R/V: the share of the box the centres' spheres of radius R fill.
    pub occupancy: f64,
    /// B₂ measured and its standard error, nm³, when the centres are dilute
    /// enough ([`DILUTE_OCCUPANCY`]); None otherwise (g(r) then holds the
    /// many-body structure, not e^{−U/k_BT}).
    pub second_virial_nm3: Option<[f64; 2]>,
    /// Time of the first frame used, s.
    pub from_s: f64,
}

/// The soft pairs of one species measured in a trajectory.
#[derive(Debug, Clone, serde::Serialize)]
pub struct PairReport {
    /// The species analysed.
    pub species: String,
    /// One entry per soft pair it belongs to.
    pub pairs: Vec<PairEntry>,
}

/// The pair measurement of every soft pair species `species` belongs to,
/// or None when it has none (or the run has too few frames for blocks).
///
/// # Errors
/// A read failure.
pub fn pair_report(
    path: &std::path::Path,
    scenario: &thicket_engine::Scenario,
    species: &str,
) -> Result<Option<PairReport>> {
    let Some(table) = scenario.pairs.as_ref() else {
        return Ok(None);
    };
    let Some(s) = scenario.species.iter().position(|sp| sp.name == species) else {
        return Ok(None);
    };
    let trajectory = Trajectory::open(path)?;
    let kt = scenario.thermal_energy_pn_nm();
    let half = scenario
        .sim_box
        .edges_nm
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min)
        / 2.0;
    let mut pairs = Vec::new();
    for (a, b, p) in table.iter().filter(|(a, b, _)| *a == s || *b == s) {
        let (sa, sb) = (&scenario.species[a], &scenario.species[b]);
        // The smaller species is the centre: fewer centres, nearer the exact single-centre case.
        let (centre, partner) = if sa.count <= sb.count {
            (sa, sb)
        } else {
            (sb, sa)
        };
        let centre_meta = trajectory.species(Some(&centre.name))?.meta().clone();
        let meta_frames = centre_meta.frames;
        let first = (SETTLE_FRACTION * meta_frames as f64).ceil() as usize;
        if meta_frames < first + PAIR_BLOCKS {
            continue;
        }
        let reach = p.cutoff_distance_nm().min(half);
        let measured = pair_distribution(
            &trajectory,
            &centre.name,
            &partner.name,
            reach,
            PAIR_SHELLS,
            first,
            PAIR_BLOCKS,
        )?;
        let g_model = (0..PAIR_SHELLS)
            .map(|k| {
                let (lo, hi) = (measured.edges_nm[k], measured.edges_nm[k + 1]);
                let n = 200;
                let (mut w, mut sum) = (0.0, 0.0);
                for q in 0..n {
                    let r = lo + (q as f64 + 0.5) * (hi - lo) / n as f64;
                    w += r * r;
                    if r >= p.contact_nm {
                        sum += r * r * (-p.energy_pn_nm(r) / kt).exp();
                    }
                }
                sum / w
            })
            .collect();
        let exact = centre.count == 1 && !partner.crowder && centre.name != partner.name;
        let volume: f64 = scenario.sim_box.edges_nm.iter().product();
        let occupancy = measured.excluders as f64 * 4.0 / 3.0 * PI * reach.powi(3) / volume;
        let second_virial_nm3 = (exact || occupancy <= DILUTE_OCCUPANCY)
            .then_some([measured.second_virial_nm3, measured.second_virial_se_nm3]);
        pairs.push(PairEntry {
            occupancy,
            second_virial_nm3,
            model_second_virial_nm3: p.second_virial_nm3(kt),
            hard_second_virial_nm3: 2.0 * PI / 3.0 * p.contact_nm.powi(3),
            g_model,
            exact,
            from_s: centre_meta.times_s.get(first).copied().unwrap_or(0.0),
            measured,
        });
    }
    Ok((!pairs.is_empty()).then(|| PairReport {
        species: species.to_string(),
        pairs,
    }))
}

impl PairReport {
    /// The table `analyze` prints.
    pub fn to_table(&self) -> String {
        use std::fmt::Write as _;
        let mut s = String::new();
        let _ = writeln!(s, "interactions between particles of '{}'", self.species);
        for e in &self.pairs {
            let m = &e.measured;
            let measured = match e.second_virial_nm3 {
                Some([b2, se]) => format!(
                    "B₂ = {b2:.4} ± {se:.4} nm³ measured ({} centres, {} partners, frames from {:.3e} s on, {} blocks; {})",
                    m.centres,
                    m.partners,
                    e.from_s,
                    m.blocks,
                    if e.exact {
                        "exact for the model: one centre among ideal partners"
                    } else {
                        "first order in the centres' density"
                    }
                ),
                None => format!(
                    "B₂ not measured: the {} centres' spheres of radius {:.2} nm fill {:.2} of the box together (at most {DILUTE_OCCUPANCY} \
                     for a dilute estimate), so g(r) holds the crowd's structure, not e^(−U/k_BT)",
                    m.centres,
                    m.edges_nm.last().copied().unwrap_or(0.0),
                    e.occupancy
                ),
            };
            let _ = writeln!(
                s,
                "  '{}' around '{}'  {measured}; model B₂ = {:.4} nm³ (numerical integral), hard spheres {:.4} nm³; \
                 g(r) per shell in --plot's _pairs.csv",
                m.species[1], m.species[0], e.model_second_virial_nm3, e.hard_second_virial_nm3
            );
        }
        s
    }

    /// g(r) per shell beside the model's e^{−U/k_BT}, as CSV text.
    pub fn to_csv(&self) -> String {
        use std::fmt::Write as _;
        let mut s = String::from(
            "centre,partner,r_lo_nm,r_hi_nm,mean_count,mean_count_se,g,g_low_density_model\n",
        );
        for e in &self.pairs {
            let m = &e.measured;
            for k in 0..m.counts.len() {
                let _ = writeln!(
                    s,
                    "{},{},{},{},{},{},{},{}",
                    m.species[0],
                    m.species[1],
                    m.edges_nm[k],
                    m.edges_nm[k + 1],
                    m.counts[k],
                    m.counts_se[k],
                    m.g[k],
                    e.g_model[k]
                );
            }
        }
        s
    }
}
