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
    let wrap = |d: f64, l: f64| d - l * (d / l).round();
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
            let mut within = 0usize;
            for i in 0..n_a {
                for j in 0..pb.nrows() {
                    if same && i == j {
                        continue;
                    }
                    let mut r2 = 0.0;
                    for ax in 0..3 {
                        let d = wrap(pb[[j, ax]] - pa[[i, ax]], edges[ax]);
                        r2 += d * d;
                    }
                    if r2 < r_max_nm * r_max_nm {
                        let shell = ((r2.sqrt() / dr) as usize).min(shells - 1);
                        shell_sum[block][shell] += 1.0;
                        within += 1;
                    }
                }
            }
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
    })
}
