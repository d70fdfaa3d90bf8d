//! Measured partition coefficients and density profiles of confined
//! tracers: across a slit (c(z)), in a cylindrical pore (c(ρ)) and among
//! fixed spheres (c(d), d the distance from the nearest obstacle surface).
//!
//! **Estimator.** Tracers that do not interact are at equilibrium uniform
//! over the space open to their centres, at the density of a bulk reservoir
//! that would be in equilibrium with them; the walls or obstacles only cut
//! space out. The reference (bulk) density is measured in the half of the
//! open space farthest from every surface: |z − W/2| ≤ (W/2 − a)/2 in a slit,
//! ρ ≤ (r − a)/√2 in a pore, d ≥ a + the median excess distance of open
//! points among obstacles. The partition coefficient is
//! K = (particles / whole volume) / reference density, which is the exact
//! steric value ((W − 2a)/W, (1 − a/r)², the open fraction) when the density
//! near the surfaces equals the one far from them, and differs from it when
//! the dynamics depletes or piles up tracers at the walls.
//!
//! **Intervals.** Particles are split into groups by index (index mod G, at
//! most [`MAX_GROUPS`]); each group gives its own K and profile over all
//! frames, and the 95 % interval is mean ± t₀.₉₇₅(G − 1) s/√G over groups
//! (independent tracers make groups independent). Among obstacles the
//! reference volume comes from uniform random sampling, whose binomial
//! error is added in quadrature.
//!
//! Among obstacles the volume at each distance is measured by sampling
//! [`VOLUME_SAMPLES`] uniform points of the box from a fixed stream, so the
//! profile is the density at distance d over the density the same tracers
//! would have if spread uniformly over the open space.

use std::f64::consts::PI;
use std::path::{Path, PathBuf};

use serde::Serialize;
use thicket_engine::base::rng::ParticleRng;
use thicket_engine::obstacles::spheres::FixedObstacles;
use thicket_engine::scenario::media::{Generator, ObstacleSpec};
use thicket_engine::space::shape::Shape;
use thicket_engine::Scenario;

use crate::blocks::{Interval, MIN_BLOCKS};
use crate::error::Result;
use crate::estimators::student_t_quantile;
use crate::models;
use crate::read::{Trajectory, DEFAULT_MEMORY_BUDGET_BYTES};

/// Most particle groups for the intervals.
pub const MAX_GROUPS: usize = 16;

/// Profile bins.
pub const PROFILE_BINS: usize = 40;

/// Uniform points sampled to measure the volume at each obstacle distance.
pub const VOLUME_SAMPLES: usize = 1_000_000;

/// Stream of the volume sampling (distinct from every particle's).
const SAMPLING_STREAM: u64 = u64::MAX - 12;

/// Partition coefficient and density profile of one species.
#[derive(Debug, Clone, Serialize)]
pub struct PartitionAnalysis {
    /// Trajectory file.
    pub file: PathBuf,
    /// Species analysed.
    pub species: String,
    /// "slit", "cylinder" or "obstacles".
    pub geometry: String,
    /// Tracer radius a, nm.
    pub tracer_radius_nm: f64,
    /// Measured partition coefficient K with its 95 % interval.
    pub partition: Interval,
    /// The exact steric value, when one is known.
    pub exact: Option<f64>,
    /// What the exact value is and where it comes from.
    pub exact_source: String,
    /// Among obstacles: the open fraction of this realisation by uniform sampling [value, standard error].
    pub open_fraction_sampled: Option<[f64; 2]>,
    /// Among Poisson obstacles: the standard deviation of the open fraction
    /// between realisations with the same number of spheres in this box.
    pub open_fraction_realisation_sd: Option<f64>,
    /// Where the reference density is measured.
    pub reference_region: String,
    /// How the interval was formed.
    pub interval_rule: String,
    /// The density profile.
    pub profile: DensityProfile,
    /// Where the profile CSV was written, if it was.
    pub profile_csv: Option<PathBuf>,
}

/// Density against one coordinate, over the reference density.
#[derive(Debug, Clone, Serialize)]
pub struct DensityProfile {
    /// The coordinate: "z_nm", "rho_nm" or "distance_to_obstacle_surface_nm".
    pub coordinate: String,
    /// Bin centres, nm.
    pub x_nm: Vec<f64>,
    /// Bin width, nm.
    pub bin_nm: f64,
    /// Density over the reference density (1 in open space at equilibrium, 0 where centres cannot go).
    pub density_over_reference: Vec<f64>,
    /// Half-width of its 95 % interval (groups of particles).
    pub ci95: Vec<f64>,
    /// Where the space open to centres begins (slit: z = a; pore: ends at ρ = r − a; obstacles: d = a), nm.
    pub open_from_nm: f64,
}

/// K of a group from its particle-frame count and its count in the reference region.
type KFromCounts = Box<dyn Fn(f64, f64) -> f64>;

/// How positions map to the profile coordinate and the reference region.
enum Kind {
    Slit {
        width: f64,
    },
    Cylinder {
        radius: f64,
        axis: [f64; 2],
    },
    Obstacles {
        finder: SurfaceFinder,
        edges: [f64; 3],
        /// Sampled share of the box per distance bin (last entry: beyond the range).
        shares: Vec<f64>,
        reference_from: f64,
        reference_share: f64,
        reference_share_se: f64,
        open: [f64; 2],
    },
}

/// With soft wall interactions, this estimator's exact value for the model
/// (Boltzmann weights exp(−U/k_BT) over the open space and over the
/// reference region) and a source text that also gives the model's true
/// partition coefficient against a bulk bath; `None` without interactions.
fn boltzmann(
    scenario: &thicket_engine::Scenario,
    sp: &thicket_engine::scenario::species::Species,
    kind: &Kind,
) -> Option<(Option<f64>, String)> {
    let u = sp.wall_potential;
    if u.is_none() {
        return None;
    }
    let kt = scenario.thermal_energy_pn_nm();
    let a = sp.radius_nm;
    // Midpoint rule; the integrands are smooth on the open interval.
    let integrate = |f: &dyn Fn(f64) -> f64, lo: f64, hi: f64| {
        let m = 20_000;
        (0..m)
            .map(|k| f(lo + (k as f64 + 0.5) * (hi - lo) / m as f64) * (hi - lo) / m as f64)
            .sum::<f64>()
    };
    match *kind {
        Kind::Slit { width } => {
            let top = width - 2.0 * a;
            let w = |h: f64| (-(u.energy_pn_nm(h) + u.energy_pn_nm(top - h)) / kt).exp();
            let quarter = 0.25 * top;
            let all = integrate(&w, 0.0, top);
            let central = integrate(&w, quarter, top - quarter);
            let k = (0.5 * top) / width * all / central;
            Some((
                Some(k),
                format!(
                    "Boltzmann-weighted value of this estimator for the wall potentials (exact for the model; relative to the gap's centre); \
                     against a bulk bath the model's partition coefficient is (1/W) int exp(-U/kT) dz = {:.4} (steric {:.4})",
                    all / width,
                    top / width
                ),
            ))
        }
        Kind::Cylinder { radius, .. } => {
            let open = radius - a;
            let w = |rho: f64| {
                (-(u.energy_pn_nm(open - rho) + u.energy_pn_nm(open + rho)) / kt).exp() * 2.0 * rho
            };
            let rho_ref = open / 2f64.sqrt();
            let all = integrate(&w, 0.0, open);
            let central = integrate(&w, 0.0, rho_ref);
            let k = rho_ref * rho_ref / (radius * radius) * all / central;
            Some((
                Some(k),
                format!(
                    "Boltzmann-weighted value of this estimator for the wall potentials (exact for the model; relative to the pore's central half); \
                     against a bulk bath the model's partition coefficient is (1/r^2) int exp(-U/kT) 2 rho d rho = {:.4} (steric {:.4})",
                    all / (radius * radius),
                    (open / radius).powi(2)
                ),
            ))
        }
        Kind::Obstacles { .. } => None,
    }
}

/// Measures the partition coefficient and profile of `species` in a slit,
/// a cylindrical pore or among fixed spheres; `Ok(None)` for other files
/// (free, membrane, plane wall, fibres, obstacles inside walls).
///
/// # Errors
/// Read errors of the trajectory.
pub fn analyze_partition(path: &Path, species: Option<&str>) -> Result<Option<PartitionAnalysis>> {
    let Some(scenario) = crate::report::stored_scenario(path) else {
        return Ok(None);
    };
    let trajectory = Trajectory::open(path)?;
    let reader = trajectory.species(species)?;
    let name = reader.meta().name.clone();
    let Some(sp) = scenario.species.iter().find(|s| s.name == name) else {
        return Ok(None);
    };
    let a = sp.radius_nm;
    let has_obstacles = scenario.obstacles.is_some() || scenario.fibres.is_some();
    let kind = match scenario.geometry.as_ref().map(|g| &g.shape) {
        Some(Shape::Slit { width_nm }) if !has_obstacles => Kind::Slit { width: *width_nm },
        Some(Shape::Cylinder { radius_nm, axis_nm }) if !has_obstacles => Kind::Cylinder {
            radius: *radius_nm,
            axis: *axis_nm,
        },
        None if scenario.obstacles.is_some() && scenario.fibres.is_none() => {
            match obstacle_kind(&scenario, a) {
                Some(k) => k,
                None => return Ok(None),
            }
        }
        _ => return Ok(None),
    };
    let n = reader.meta().particles;
    let groups = (n / 2).clamp(1, MAX_GROUPS);
    let mut hist = vec![vec![0.0f64; PROFILE_BINS + 1]; groups];
    let mut reference = vec![0.0f64; groups];
    let mut count = vec![0.0f64; groups];
    let (range, open_from) = match &kind {
        Kind::Slit { width } => (*width, a),
        Kind::Cylinder { radius, .. } => (*radius, radius - a),
        Kind::Obstacles { finder, .. } => (finder.range, a),
    };
    let bin = range / PROFILE_BINS as f64;
    for block in reader.blocks(DEFAULT_MEMORY_BUDGET_BYTES) {
        let block = block?;
        let x = &block.positions_nm;
        let (frames, particles) = (x.shape()[0], x.shape()[1]);
        for p in 0..particles {
            let g = (block.first_particle + p) % groups;
            for f in 0..frames {
                let q = [x[[f, p, 0]], x[[f, p, 1]], x[[f, p, 2]]];
                let (coord, in_reference) = match &kind {
                    Kind::Slit { width } => {
                        (q[2], (q[2] - 0.5 * width).abs() <= 0.5 * (0.5 * width - a))
                    }
                    Kind::Cylinder { radius, axis } => {
                        let rho = (q[0] - axis[0]).hypot(q[1] - axis[1]);
                        (rho, rho <= (radius - a) / 2f64.sqrt())
                    }
                    Kind::Obstacles {
                        finder,
                        edges,
                        reference_from,
                        ..
                    } => {
                        let w = [0, 1, 2].map(|k| q[k].rem_euclid(edges[k]));
                        let d = finder.distance(&w);
                        (d, d >= *reference_from)
                    }
                };
                let i = ((coord / bin).floor().max(0.0) as usize).min(PROFILE_BINS);
                hist[g][i] += 1.0;
                count[g] += 1.0;
                reference[g] += f64::from(u8::from(in_reference));
            }
        }
    }
    // Per group: K and the profile over the reference density.
    let (k_of, reference_text, exact, exact_source): (KFromCounts, String, Option<f64>, String) =
        match &kind {
            Kind::Slit { width } => {
                let w_ref = 0.5 * width - a;
                let w = *width;
                let (exact, source) = match boltzmann(&scenario, sp, &kind) {
                    Some(b) => b,
                    None => (
                        models::partition_slit(a, 0.5 * w).ok(),
                        "(W - 2a)/W = 1 - a/h, exact steric partition of a slit (REFERENCE.md; models::partition_slit)".into(),
                    ),
                };
                (
                    Box::new(move |n, r| n * w_ref / (w * r)),
                    format!(
                        "|z - W/2| <= (W/2 - a)/2 = {:.4} nm (the central half of the open gap)",
                        0.5 * w_ref
                    ),
                    exact,
                    source,
                )
            }
            Kind::Cylinder { radius, .. } => {
                let rho_ref = (radius - a) / 2f64.sqrt();
                let r = *radius;
                let (exact, source) = match boltzmann(&scenario, sp, &kind) {
                    Some(b) => b,
                    None => (
                        models::partition_cylinder(a / r).ok(),
                        "(1 - a/r)^2, exact steric partition of a cylindrical pore (REFERENCE.md; models::partition_cylinder)".into(),
                    ),
                };
                (
                    Box::new(move |n, c| n * rho_ref * rho_ref / (r * r * c)),
                    format!("rho <= (r - a)/sqrt(2) = {rho_ref:.4} nm (the half of the open cross-section nearest the axis)"),
                    exact,
                    source,
                )
            }
            Kind::Obstacles {
                reference_from,
                reference_share,
                ..
            } => {
                let v = *reference_share;
                let poisson = poisson_exact(&scenario, a);
                (
                    Box::new(move |n, r| n * v / r),
                    format!(
                        "distance from the nearest obstacle surface >= {reference_from:.4} nm (the farther half of the open space by sampled volume, {v:.4} of the box)"
                    ),
                    poisson.map(|p| p.0),
                    match poisson {
                        Some(_) => "exp(-n 4/3 pi (a+b)^3), exact open fraction among Poisson (freely overlapping) spheres (REFERENCE.md; models::poisson_open_fraction)".into(),
                        None => "no exact value for these obstacles; compare with the sampled open fraction".into(),
                    },
                )
            }
        };
    let total_n: f64 = count.iter().sum();
    let total_ref: f64 = reference.iter().sum();
    let k_total = k_of(total_n, total_ref);
    let per_group: Vec<f64> = (0..groups).map(|g| k_of(count[g], reference[g])).collect();
    let mut partition = Interval::from_samples(k_total, &per_group);
    let mut rule = format!(
        "{groups} groups of particles (index mod {groups}), all frames each; 95 % = t(0.975, G-1) x s/sqrt(G)"
    );
    if let Kind::Obstacles {
        reference_share,
        reference_share_se,
        ..
    } = &kind
    {
        // Sampling error of the reference volume, in quadrature (normal quantile).
        let rel = reference_share_se / reference_share;
        if let (Some(se), Some(_)) = (partition.standard_error, partition.ci95) {
            let t = student_t_quantile(0.975, (groups - 1) as f64);
            let half = ((t * se).powi(2) + (1.96 * rel * k_total).powi(2)).sqrt();
            partition.standard_error = Some((se * se + (rel * k_total).powi(2)).sqrt());
            partition.ci95 = Some([k_total - half, k_total + half]);
        }
        rule.push_str(&format!(
            "; plus the sampling error of the reference volume ({VOLUME_SAMPLES} uniform points) in quadrature"
        ));
    }
    if groups < MIN_BLOCKS {
        rule.push_str(&format!(
            "; fewer than {MIN_BLOCKS} groups: the interval is unreliable"
        ));
    }
    // Profile: density in each bin over the reference density.
    let bin_volume_share = |i: usize| -> f64 {
        match &kind {
            Kind::Slit { width } => bin / width,
            Kind::Cylinder { radius, .. } => {
                let (r0, r1) = (i as f64 * bin, (i + 1) as f64 * bin);
                (r1 * r1 - r0 * r0) / (radius * radius)
            }
            Kind::Obstacles { shares, .. } => shares[i],
        }
    };
    let reference_share = match &kind {
        Kind::Slit { width } => (0.5 * width - a) / width,
        Kind::Cylinder { radius, .. } => 0.5 * ((radius - a) / radius).powi(2),
        Kind::Obstacles {
            reference_share, ..
        } => *reference_share,
    };
    let ratio = |h: f64, r: f64, i: usize| -> f64 {
        let v = bin_volume_share(i);
        if v > 0.0 && r > 0.0 {
            (h / v) / (r / reference_share)
        } else {
            f64::NAN
        }
    };
    let mut x_nm = Vec::new();
    let mut density = Vec::new();
    let mut ci = Vec::new();
    for i in 0..PROFILE_BINS {
        let h: f64 = hist.iter().map(|g| g[i]).sum();
        let value = ratio(h, total_ref, i);
        let samples: Vec<f64> = (0..groups)
            .map(|g| ratio(hist[g][i], reference[g], i))
            .collect();
        x_nm.push((i as f64 + 0.5) * bin);
        density.push(value);
        ci.push(
            Interval::from_samples(value, &samples)
                .ci95
                .map_or(f64::NAN, |[lo, hi]| 0.5 * (hi - lo)),
        );
    }
    let (open_fraction_sampled, realisation_sd) = match &kind {
        Kind::Obstacles { open, .. } => (Some(*open), poisson_exact(&scenario, a).map(|p| p.1)),
        _ => (None, None),
    };
    Ok(Some(PartitionAnalysis {
        file: path.to_path_buf(),
        species: name,
        geometry: match kind {
            Kind::Slit { .. } => "slit",
            Kind::Cylinder { .. } => "cylinder",
            Kind::Obstacles { .. } => "obstacles",
        }
        .into(),
        tracer_radius_nm: a,
        partition,
        exact,
        exact_source,
        open_fraction_sampled,
        open_fraction_realisation_sd: realisation_sd,
        reference_region: reference_text,
        interval_rule: rule,
        profile: DensityProfile {
            coordinate: match &kind {
                Kind::Slit { .. } => "z_nm",
                Kind::Cylinder { .. } => "rho_nm",
                Kind::Obstacles { .. } => "distance_to_obstacle_surface_nm",
            }
            .into(),
            x_nm,
            bin_nm: bin,
            density_over_reference: density,
            ci95: ci,
            open_from_nm: open_from,
        },
        profile_csv: None,
    }))
}

/// For generated Poisson spheres of one radius b in a periodic box: the
/// exact open fraction exp(−n (4/3)π(a + b)³) at the realised density n,
/// and the standard deviation of a realisation's open fraction given the
/// realised count N (the spheres are then N independent uniform centres).
/// With x = v/V, v = (4/3)π(a + b)³ and V∩(r) the lens volume of two such
/// spheres at distance r (derived here from independence of the centres):
/// Var = (1/V) ∫₀^{2R} 4πr² [(1 − (2v − V∩)/V)^N − (1 − 2x)^N] dr
///       + (1 − 2x)^N − (1 − x)^{2N},
/// the conditional form of the Boolean-model covariance (Chiu, Stoyan,
/// Kendall & Mecke, *Stochastic Geometry*, ch. 3; from memory). The mean given N is
/// (1 − x)^N, which differs from the exponential by N x²/2 relative
/// (below 10⁻³ for any box much larger than the spheres).
fn poisson_exact(scenario: &Scenario, a: f64) -> Option<(f64, f64)> {
    let Some(ObstacleSpec::Generated {
        generator: Generator::Poisson,
        ..
    }) = &scenario.obstacles
    else {
        return None;
    };
    let fixed = FixedObstacles::build(scenario).ok()?;
    let radii = &fixed.spheres.radii_nm;
    let b = *radii.first()?;
    if radii.iter().any(|r| (r - b).abs() > 1e-12 * b) {
        return None;
    }
    let volume: f64 = scenario.sim_box.edges_nm.iter().product();
    let count = radii.len() as f64;
    let p = models::poisson_open_fraction(count / volume, a, b).ok()?;
    let big_r = a + b;
    let v = 4.0 / 3.0 * PI * big_r.powi(3);
    let lens = |r: f64| PI / 12.0 * (4.0 * big_r + r) * (2.0 * big_r - r).powi(2);
    let power = |y: f64| (count * (-y).ln_1p()).exp();
    let far = power(2.0 * v / volume);
    // Simpson's rule over [0, 2R] (smooth integrand).
    let steps = 2000;
    let h = 2.0 * big_r / steps as f64;
    let f = |r: f64| 4.0 * PI * r * r * (power((2.0 * v - lens(r)) / volume) - far);
    let mut s = f(0.0) + f(2.0 * big_r);
    for i in 1..steps {
        s += f(i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
    }
    let near = power(v / volume);
    let var = s * h / 3.0 / volume + far - near * near;
    Some((p, var.max(0.0).sqrt()))
}

/// Sets up the obstacle profile: the surface finder and the sampled volume
/// at each distance. `None` without spheres or outside a fully periodic box.
fn obstacle_kind(scenario: &Scenario, a: f64) -> Option<Kind> {
    if !scenario.sim_box.periodic.iter().all(|&p| p) {
        return None;
    }
    let fixed = FixedObstacles::build(scenario).ok()?;
    let spheres = &fixed.spheres;
    if spheres.is_empty() {
        return None;
    }
    let b_max = spheres.radii_nm.iter().copied().fold(0.0, f64::max);
    let edges = scenario.sim_box.edges_nm;
    let range = a + 2.0 * (a + b_max);
    let finder = SurfaceFinder::new(&spheres.centres_nm, &spheres.radii_nm, edges, range);
    let bin = range / PROFILE_BINS as f64;
    let mut counts = vec![0usize; PROFILE_BINS + 1];
    let mut distances = Vec::with_capacity(VOLUME_SAMPLES);
    let mut rng = ParticleRng::for_particle(scenario.seed, SAMPLING_STREAM);
    let mut open = 0usize;
    for _ in 0..VOLUME_SAMPLES {
        let p = [0, 1, 2].map(|k| rng.uniform() * edges[k]);
        let d = finder.distance(&p);
        counts[((d / bin).floor().max(0.0) as usize).min(PROFILE_BINS)] += 1;
        if d >= a {
            open += 1;
            distances.push(d);
        }
    }
    if distances.is_empty() {
        return None;
    }
    // The farther half of the open space: at or beyond the median distance of open points.
    distances.sort_by(f64::total_cmp);
    let reference_from = distances[distances.len() / 2];
    let in_reference = distances.iter().filter(|&&d| d >= reference_from).count();
    let m = VOLUME_SAMPLES as f64;
    let share = in_reference as f64 / m;
    let po = open as f64 / m;
    Some(Kind::Obstacles {
        finder,
        edges,
        shares: counts.iter().map(|&c| c as f64 / m).collect(),
        reference_from,
        reference_share: share,
        reference_share_se: (share * (1.0 - share) / m).sqrt(),
        open: [po, (po * (1.0 - po) / m).sqrt()],
    })
}

/// Distance from a point to the nearest sphere surface (negative inside),
/// exact up to `range`; beyond it returns `range` or more.
struct SurfaceFinder {
    centres: Vec<[f64; 3]>,
    radii: Vec<f64>,
    edges: [f64; 3],
    cells: [usize; 3],
    /// Sphere indices per cell (flat index).
    members: Vec<Vec<u32>>,
    range: f64,
}

impl SurfaceFinder {
    fn new(centres: &[[f64; 3]], radii: &[f64], edges: [f64; 3], range: f64) -> Self {
        let reach = radii.iter().copied().fold(0.0, f64::max) + range;
        let cells = edges.map(|e| ((e / reach).floor() as usize).max(1));
        let mut members = vec![Vec::new(); cells[0] * cells[1] * cells[2]];
        for (i, c) in centres.iter().enumerate() {
            let ijk = [0, 1, 2].map(|k| Self::axis(c[k], edges[k], cells[k]));
            members[(ijk[0] * cells[1] + ijk[1]) * cells[2] + ijk[2]].push(i as u32);
        }
        Self {
            centres: centres.to_vec(),
            radii: radii.to_vec(),
            edges,
            cells,
            members,
            range,
        }
    }

    fn axis(x: f64, edge: f64, cells: usize) -> usize {
        ((x.rem_euclid(edge) / edge * cells as f64) as usize).min(cells - 1)
    }

    fn distance(&self, p: &[f64; 3]) -> f64 {
        let mut best = f64::INFINITY;
        let mut check = |i: u32| {
            let c = &self.centres[i as usize];
            let d2: f64 = (0..3)
                .map(|k| {
                    let mut d = p[k] - c[k];
                    d -= self.edges[k] * (d / self.edges[k]).round();
                    d * d
                })
                .sum();
            best = best.min(d2.sqrt() - self.radii[i as usize]);
        };
        if self.cells.iter().any(|&c| c < 3) {
            // Too few cells for a 27-cell search without repeats: every sphere.
            (0..self.centres.len() as u32).for_each(&mut check);
        } else {
            let ijk = [0, 1, 2].map(|k| Self::axis(p[k], self.edges[k], self.cells[k]) as i64);
            for dx in -1..=1i64 {
                for dy in -1..=1i64 {
                    for dz in -1..=1i64 {
                        let c = [ijk[0] + dx, ijk[1] + dy, ijk[2] + dz];
                        let w = [0, 1, 2].map(|k| c[k].rem_euclid(self.cells[k] as i64) as usize);
                        for &i in
                            &self.members[(w[0] * self.cells[1] + w[1]) * self.cells[2] + w[2]]
                        {
                            check(i);
                        }
                    }
                }
            }
        }
        best.min(self.range)
    }
}

impl PartitionAnalysis {
    /// A human-readable table.
    pub fn to_table(&self) -> String {
        use std::fmt::Write as _;
        let mut s = String::new();
        let w = &mut s;
        let _ = writeln!(
            w,
            "partition       {} of '{}' (a = {} nm)",
            self.geometry, self.species, self.tracer_radius_nm
        );
        let _ = writeln!(
            w,
            "  measured K                                 {}",
            self.partition.describe_fixed(4)
        );
        match self.exact {
            Some(e) => {
                let _ = writeln!(
                    w,
                    "  exact for the model                        {e:.4}  {}",
                    self.exact_source
                );
            }
            None => {
                let _ = writeln!(
                    w,
                    "  exact for the model                        -  {}",
                    self.exact_source
                );
            }
        }
        if let Some([v, se]) = self.open_fraction_sampled {
            let _ = writeln!(
                w,
                "  open fraction of this realisation (sampled) {v:.4} ± {:.4} (95 %)",
                1.96 * se
            );
        }
        if let Some(sd) = self.open_fraction_realisation_sd {
            let _ = writeln!(
                w,
                "  s.d. of the open fraction between realisations with this many spheres {sd:.4}"
            );
        }
        let _ = writeln!(w, "  reference density in {}", self.reference_region);
        let _ = writeln!(w, "  intervals: {}", self.interval_rule);
        let _ = writeln!(
            w,
            "  profile: density/reference against {} ({} bins of {:.3} nm; open to centres from {:.3} nm){}",
            self.profile.coordinate,
            self.profile.x_nm.len(),
            self.profile.bin_nm,
            self.profile.open_from_nm,
            self.profile_csv
                .as_ref()
                .map_or(String::new(), |p| format!("; written to {}", p.display()))
        );
        let k = self.profile.x_nm.len().div_ceil(10).max(1);
        for i in (0..self.profile.x_nm.len()).step_by(k) {
            let _ = writeln!(
                w,
                "    {:>8.3}  {:>7.4} ± {:.4}",
                self.profile.x_nm[i], self.profile.density_over_reference[i], self.profile.ci95[i]
            );
        }
        s
    }

    /// Writes the profile as CSV to `path`; refuses to overwrite.
    ///
    /// # Errors
    /// [`crate::error::ErrorKind::Output`] when the file exists or cannot be written.
    pub fn write_profile_csv(&self, path: &Path) -> Result<()> {
        let p = &self.profile;
        let mut text = format!("{},density_over_reference,ci95_half_width\n", p.coordinate);
        for i in 0..p.x_nm.len() {
            text.push_str(&format!(
                "{},{},{}\n",
                p.x_nm[i], p.density_over_reference[i], p.ci95[i]
            ));
        }
        crate::membrane::write_new(path, &text)
    }
}
