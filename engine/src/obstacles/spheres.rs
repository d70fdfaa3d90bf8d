//! Fixed spherical obstacles: where they are and how they got there.
//!
//! Four ways to place them, all reproducible from the run seed (they draw
//! from [`OBSTACLE_STREAM`], a stream no particle uses, so a resumed run
//! rebuilds the same medium):
//!
//! * random sequential addition (RSA): uniform random centres, each kept only
//!   if it overlaps no earlier obstacle (and no wall); it jams near
//!   φ ≈ 0.3841 for equal spheres (Zhang & Torquato 2013), and a target it
//!   cannot reach stops after a bounded number of attempts, saying what was
//!   reached;
//! * Poisson: independent uniform centres that may overlap freely (the
//!   "overlapping spheres" model of porous media, whose open fraction is
//!   exactly exp(−n·(4/3)π(a+b)³));
//! * simple cubic and face-centred cubic lattices commensurate with the box;
//! * a CSV file of centres and radii, for a measured microstructure.
//!
//! Radii may be fixed, uniform or log-normal; the target is a volume
//! fraction or a count. On walled axes every obstacle lies wholly inside the
//! box; in a cylindrical pore wholly inside the pore, and in a membrane
//! wholly inside its pores (a gel-filled membrane: the reservoirs stay
//! clear). A volume fraction is then relative to the space obstacles may
//! fill (the [`Region`]). All lengths are nm.

use crate::base::error::{EngineError, Result};
use crate::base::rng::{standard_normal, ParticleRng};
use crate::obstacles::fibres;
use crate::scenario::config::Scenario;
use crate::scenario::media::{Generator, ObstacleSpec, RadiusDistribution, Target};
use crate::space::bodies::{Fibres, Spheres};
use crate::space::neighbors::{min_image_distance2, DynamicGrid, ObstacleGrid};
use crate::space::shape::Shape;
use crate::space::sim_box::SimBox;
use crate::space::soft::{SoftField, CUTOFF_TOLERANCE_KT};
use std::f64::consts::PI;
use std::path::Path;

/// Stream index (with the run seed) of sphere placement; particle indices
/// never come near it.
pub const OBSTACLE_STREAM: u64 = u64::MAX;
/// Stream index of the Monte Carlo estimates printed by `check`.
pub const SAMPLING_STREAM: u64 = u64::MAX - 2;
/// Jamming fraction of random sequential addition of equal spheres,
/// φ ≈ 0.3841 (Zhang & Torquato 2013, REFERENCES.md; from memory).
pub const RSA_JAMMING_FRACTION: f64 = 0.3841;
/// Simple cubic lattice of touching spheres: φ = π/6.
pub const SIMPLE_CUBIC_MAX_FRACTION: f64 = PI / 6.0;
/// Face-centred cubic lattice of touching spheres: φ = π/(3√2).
pub const FCC_MAX_FRACTION: f64 = 0.740_480_489_693_061;
/// RSA attempts allowed per obstacle asked for (plus [`RSA_ATTEMPT_FLOOR`]):
/// enough to come within about 1 % of jamming, and a fixed bound on time.
pub const RSA_ATTEMPTS_PER_OBSTACLE: u64 = 1000;
/// Attempts every RSA placement may use whatever its size.
pub const RSA_ATTEMPT_FLOOR: u64 = 2_000_000;
/// Relative difference allowed between a lattice's achieved and requested
/// volume fraction (whole unit cells must fill the box).
pub const LATTICE_FRACTION_TOLERANCE: f64 = 0.005;

/// Everything fixed in a scenario: spheres and fibres.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FixedObstacles {
    /// Spherical obstacles.
    pub spheres: Spheres,
    /// Fibres.
    pub fibres: Fibres,
}

/// A Monte Carlo estimate with its standard error.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Estimate {
    /// The estimate.
    pub value: f64,
    /// Its standard error (0 when exact).
    pub standard_error: f64,
}

impl Spheres {
    /// Sum of sphere volumes over the volume of `region`.
    pub fn volume_fraction_in(&self, region: &Region, sim_box: &SimBox) -> f64 {
        self.nominal_volume_fraction(sim_box) * box_volume(sim_box) / region.volume_nm3(sim_box)
    }
}

fn box_volume(sim_box: &SimBox) -> f64 {
    sim_box.edges_nm.iter().product()
}

/// Where obstacle spheres may lie beyond the box's own walls (plane walls
/// and slits are box faces, which placement already respects).
#[derive(Debug, Clone, Copy, Default)]
pub struct Region<'a> {
    shape: Option<&'a Shape>,
}

impl<'a> Region<'a> {
    /// The region of a scenario: a cylindrical pore or a membrane's pores, or the box.
    pub fn of(scenario: &'a Scenario) -> Self {
        let shape = scenario
            .geometry
            .as_ref()
            .map(|g| &g.shape)
            .filter(|s| matches!(s, Shape::Cylinder { .. } | Shape::Membrane(_)));
        Self { shape }
    }

    /// True when the box faces are the only bounds.
    pub fn is_box(&self) -> bool {
        self.shape.is_none()
    }

    /// Whether a sphere of radius `r` centred at `c` lies wholly inside the region
    /// (the box's own walled axes are checked separately).
    #[inline]
    pub fn allows(&self, c: &[f64; 3], r: f64) -> bool {
        match self.shape {
            None => true,
            Some(Shape::Membrane(m)) => {
                c[2] - r >= m.z_lo_nm
                    && c[2] + r <= m.z_hi_nm
                    && m.pore_at(c[0], c[1]).is_some_and(|(axis, radius)| {
                        (c[0] - axis[0]).hypot(c[1] - axis[1]) + r <= radius
                    })
            }
            Some(shape) => shape.allows(c, r),
        }
    }

    /// Volume obstacles may fill, nm³: the box, the pore, or the membrane's pores.
    pub fn volume_nm3(&self, sim_box: &SimBox) -> f64 {
        match self.shape {
            None => box_volume(sim_box),
            Some(Shape::Membrane(m)) => m.pore_volume_nm3(),
            Some(shape) => shape.open_fraction(0.0, &sim_box.edges_nm) * box_volume(sim_box),
        }
    }

    /// What the region is, for messages.
    pub fn describe(&self) -> &'static str {
        match self.shape {
            None => "the box",
            Some(Shape::Membrane(_)) => "the membrane's pores",
            Some(_) => "the pore",
        }
    }
}

impl FixedObstacles {
    /// Places the spheres and fibres a scenario asks for (none if it asks for none).
    ///
    /// # Errors
    /// [`EngineError::Placement`] when a target cannot be reached, and the
    /// CSV errors of [`read_csv`].
    pub fn build(scenario: &Scenario) -> Result<Self> {
        let spheres = match &scenario.obstacles {
            None => Spheres::default(),
            Some(spec) => place_spheres(
                spec,
                &scenario.sim_box,
                &Region::of(scenario),
                scenario.seed,
                &scenario.source,
            )?,
        };
        let fibres = match &scenario.fibres {
            None => Fibres::default(),
            Some(spec) => fibres::place_fibres(spec, &scenario.sim_box, scenario.seed),
        };
        Ok(Self { spheres, fibres })
    }

    /// True when there is nothing fixed.
    pub fn is_empty(&self) -> bool {
        self.spheres.is_empty() && self.fibres.is_empty()
    }

    /// The obstacles as seen by each species' centre: one grid per species,
    /// the obstacles grown by its radius.
    pub fn grids_for(&self, scenario: &Scenario) -> Vec<ObstacleGrid> {
        scenario
            .species
            .iter()
            .map(|s| {
                ObstacleGrid::build(&self.spheres, &self.fibres, s.radius_nm, &scenario.sim_box)
            })
            .collect()
    }

    /// Fraction of the box covered by obstacles (their union).
    ///
    /// Exact (standard error 0) for non-overlapping spheres without fibres,
    /// else estimated from `samples` uniform points drawn from the seeded
    /// [`SAMPLING_STREAM`].
    pub fn volume_fraction(&self, sim_box: &SimBox, samples: usize, seed: u64) -> Estimate {
        if self.fibres.is_empty() && !self.spheres.may_overlap {
            return Estimate {
                value: self.spheres.nominal_volume_fraction(sim_box),
                standard_error: 0.0,
            };
        }
        let grid = ObstacleGrid::build(&self.spheres, &self.fibres, 0.0, sim_box);
        let open = sample_fraction(sim_box, samples, seed, |p| !grid.blocked(p));
        Estimate {
            value: 1.0 - open.value,
            standard_error: open.standard_error,
        }
    }

    /// Fraction of `region` covered by obstacles: as
    /// [`FixedObstacles::volume_fraction`] but over the space obstacles may
    /// fill (the pore, or a membrane's pores), by Monte Carlo among the
    /// sampled points that fall in it unless exact.
    pub fn volume_fraction_in(
        &self,
        region: &Region,
        sim_box: &SimBox,
        samples: usize,
        seed: u64,
    ) -> Estimate {
        if region.is_box() {
            return self.volume_fraction(sim_box, samples, seed);
        }
        if self.fibres.is_empty() && !self.spheres.may_overlap {
            return Estimate {
                value: self.spheres.volume_fraction_in(region, sim_box),
                standard_error: 0.0,
            };
        }
        let grid = ObstacleGrid::build(&self.spheres, &self.fibres, 0.0, sim_box);
        let share = region.volume_nm3(sim_box) / box_volume(sim_box);
        let covered = sample_fraction(sim_box, samples, seed, |p| {
            region.allows(p, 0.0) && grid.blocked(p)
        });
        Estimate {
            value: covered.value / share,
            standard_error: covered.standard_error / share,
        }
    }

    /// Fraction of the box open to a centre of radius `tracer_radius_nm` that
    /// `allowed` (walls, pores) lets through: outside every obstacle grown by
    /// that radius. Monte Carlo as [`FixedObstacles::open_fraction`].
    pub fn open_fraction_where(
        &self,
        sim_box: &SimBox,
        tracer_radius_nm: f64,
        samples: usize,
        seed: u64,
        allowed: impl Fn(&[f64; 3]) -> bool,
    ) -> Estimate {
        let grid = ObstacleGrid::build(&self.spheres, &self.fibres, tracer_radius_nm, sim_box);
        sample_fraction(sim_box, samples, seed, |p| allowed(p) && !grid.blocked(p))
    }

    /// Fraction of the box open to the centre of a sphere of radius
    /// `tracer_radius_nm`: outside every obstacle grown by that radius and at
    /// least that far from every wall. Estimated from `samples` uniform points
    /// of the seeded [`SAMPLING_STREAM`]; the standard error is binomial.
    pub fn open_fraction(
        &self,
        sim_box: &SimBox,
        tracer_radius_nm: f64,
        samples: usize,
        seed: u64,
    ) -> Estimate {
        let grid = ObstacleGrid::build(&self.spheres, &self.fibres, tracer_radius_nm, sim_box);
        let mut lo = [0.0; 3];
        let mut hi = sim_box.edges_nm;
        for k in 0..3 {
            if !sim_box.periodic[k] {
                lo[k] = tracer_radius_nm;
                hi[k] -= tracer_radius_nm;
            }
        }
        sample_fraction(sim_box, samples, seed, |p| {
            (0..3).all(|k| p[k] >= lo[k] && p[k] <= hi[k]) && !grid.blocked(p)
        })
    }
}

impl FixedObstacles {
    /// V_layer/V_open for a tracer of radius `tracer_radius_nm` that binds
    /// within `layer_nm` of the obstacles' excluded surfaces, in a periodic
    /// box: the share of the open points (outside every obstacle grown by
    /// the radius) that lie within the layer (inside some obstacle grown by
    /// the radius plus the layer). Monte Carlo over `samples` uniform points
    /// of the seeded [`SAMPLING_STREAM`]; binomial standard error among the
    /// open points.
    pub fn layer_share(
        &self,
        sim_box: &SimBox,
        tracer_radius_nm: f64,
        layer_nm: f64,
        samples: usize,
        seed: u64,
    ) -> Estimate {
        let open = ObstacleGrid::build(&self.spheres, &self.fibres, tracer_radius_nm, sim_box);
        let near = ObstacleGrid::build(
            &self.spheres,
            &self.fibres,
            tracer_radius_nm + layer_nm,
            sim_box,
        );
        let mut rng = ParticleRng::for_particle(seed, SAMPLING_STREAM);
        let (mut n_open, mut n_layer) = (0usize, 0usize);
        for _ in 0..samples.max(1) {
            let p = [0, 1, 2].map(|k| rng.uniform() * sim_box.edges_nm[k]);
            if !open.blocked(&p) {
                n_open += 1;
                n_layer += near.blocked(&p) as usize;
            }
        }
        let m = n_open.max(1) as f64;
        let q = n_layer as f64 / m;
        Estimate {
            value: q,
            standard_error: (q * (1.0 - q) / m).sqrt(),
        }
    }

    /// The Boltzmann-weighted partition coefficient of species `s` into the
    /// obstacles and fibres, K = ⟨e^(−U/k_BT)⟩ over the box (hard cores
    /// count 0, U summed over every body within the cut-off), by Monte Carlo
    /// over `samples` uniform points of the seeded [`SAMPLING_STREAM`] with
    /// the standard error of the mean; `None` without a soft interaction.
    /// Beside the open fraction (the steric-only K), its ratio to it is the
    /// mean Boltzmann factor over the open space.
    pub fn boltzmann_partition(
        &self,
        scenario: &Scenario,
        s: usize,
        samples: usize,
        seed: u64,
    ) -> Option<Estimate> {
        let sp = &scenario.species[s];
        if sp.body_potential.is_none() || self.is_empty() {
            return None;
        }
        let kt = scenario.thermal_energy_pn_nm();
        let field = SoftField::build(
            &self.spheres,
            &self.fibres,
            &sp.body_potential,
            &scenario.sim_box,
            CUTOFF_TOLERANCE_KT * kt,
            1.0,
        );
        let mut rng = ParticleRng::for_particle(seed, SAMPLING_STREAM);
        let samples = samples.max(2);
        let (mut sum, mut sum2) = (0.0, 0.0);
        for _ in 0..samples {
            let p = [0, 1, 2].map(|k| rng.uniform() * scenario.sim_box.edges_nm[k]);
            let w = field.energy_pn_nm(&p).map_or(0.0, |u| (-u / kt).exp());
            sum += w;
            sum2 += w * w;
        }
        let n = samples as f64;
        let mean = sum / n;
        let var = (sum2 / n - mean * mean).max(0.0) * n / (n - 1.0);
        Some(Estimate {
            value: mean,
            standard_error: (var / n).sqrt(),
        })
    }

    /// The cut-off gap, nm, of species `s`'s soft interaction among these
    /// bodies (0 without one).
    pub fn soft_cutoff_nm(&self, scenario: &Scenario, s: usize) -> f64 {
        let sp = &scenario.species[s];
        if sp.body_potential.is_none() || self.is_empty() {
            return 0.0;
        }
        let largest = self.spheres.radii_nm.iter().cloned().reduce(f64::max);
        let fibre = (!self.fibres.is_empty()).then_some(self.fibres.radius_nm);
        crate::space::soft::cutoff_nm(
            &sp.body_potential,
            largest,
            fibre,
            CUTOFF_TOLERANCE_KT * scenario.thermal_energy_pn_nm(),
        )
    }
}

/// Fraction of uniform points in the box for which `open` holds.
fn sample_fraction(
    sim_box: &SimBox,
    samples: usize,
    seed: u64,
    open: impl Fn(&[f64; 3]) -> bool,
) -> Estimate {
    let mut rng = ParticleRng::for_particle(seed, SAMPLING_STREAM);
    let samples = samples.max(1);
    let mut hits = 0usize;
    for _ in 0..samples {
        let p = [0, 1, 2].map(|k| rng.uniform() * sim_box.edges_nm[k]);
        hits += open(&p) as usize;
    }
    let p = hits as f64 / samples as f64;
    Estimate {
        value: p,
        standard_error: (p * (1.0 - p) / samples as f64).sqrt(),
    }
}

fn placement_error(file: &Path, reason: String) -> EngineError {
    EngineError::Placement {
        file: file.to_path_buf(),
        reason,
    }
}

/// Allowed range of a centre coordinate for a sphere of radius r on axis k.
fn centre_range(sim_box: &SimBox, k: usize, r: f64) -> (f64, f64) {
    if sim_box.periodic[k] {
        (0.0, sim_box.edges_nm[k])
    } else {
        (r, sim_box.edges_nm[k] - r)
    }
}

/// Places spheres as `spec` asks; `scenario_file` is named in messages.
///
/// # Errors
/// [`EngineError::Placement`] for targets that cannot be reached, and the
/// errors of [`read_csv`].
pub fn place_spheres(
    spec: &ObstacleSpec,
    sim_box: &SimBox,
    region: &Region,
    seed: u64,
    scenario_file: &Path,
) -> Result<Spheres> {
    match spec {
        ObstacleSpec::File {
            path,
            allow_overlap,
        } => read_csv(path, sim_box, region, *allow_overlap, scenario_file),
        ObstacleSpec::Generated {
            generator,
            radii,
            target,
        } => {
            let mut rng = ParticleRng::for_particle(seed, OBSTACLE_STREAM);
            match generator {
                Generator::RandomSequential => {
                    random_sequential(radii, *target, sim_box, region, &mut rng, scenario_file)
                }
                Generator::Poisson => {
                    poisson(radii, *target, sim_box, region, &mut rng, scenario_file)
                }
                Generator::SimpleCubic | Generator::FaceCentredCubic if !region.is_box() => {
                    Err(placement_error(
                        scenario_file,
                        format!(
                            "a {} lattice fills the box and cannot follow the curved wall of {}; use placement = \"random\", \"poisson\" or a file",
                            generator.name(),
                            region.describe()
                        ),
                    ))
                }
                Generator::SimpleCubic | Generator::FaceCentredCubic => {
                    lattice(*generator, radii, *target, sim_box, scenario_file)
                }
            }
        }
    }
}

/// Draws radii for a target: `count` of them, or as many as bring the summed
/// volume closest to φ·V.
fn draw_radii(
    radii: &RadiusDistribution,
    target: Target,
    sim_box: &SimBox,
    volume_nm3: f64,
    rng: &mut ParticleRng,
    file: &Path,
) -> Result<Vec<f64>> {
    let fail = || {
        placement_error(
            file,
            "the log-normal radius distribution almost never falls inside obstacles.radius_min_nm … radius_max_nm; widen the window".into(),
        )
    };
    let min_edge = sim_box
        .edges_nm
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min);
    let check_size = |r: f64| -> Result<f64> {
        if 2.0 * r >= min_edge {
            Err(placement_error(
                file,
                format!(
                    "an obstacle of radius {r:.4} nm was drawn, larger than the box (smallest edge {min_edge} nm); \
                     set obstacles.radius_max_nm below {:.4} nm",
                    0.5 * min_edge
                ),
            ))
        } else {
            Ok(r)
        }
    };
    let mut out = Vec::new();
    match target {
        Target::Count(n) => {
            for _ in 0..n {
                out.push(check_size(radii.sample(rng).ok_or_else(fail)?)?);
            }
        }
        Target::VolumeFraction(phi) => {
            let goal = phi * volume_nm3;
            let mut sum = 0.0;
            loop {
                let r = check_size(radii.sample(rng).ok_or_else(fail)?)?;
                let v = 4.0 / 3.0 * PI * r.powi(3);
                // Stop where the total lands closest to the goal.
                if sum + v - goal > goal - sum {
                    break;
                }
                sum += v;
                out.push(r);
            }
        }
    }
    Ok(out)
}

/// Consecutive failed RSA trials after which trial centres are drawn from
/// the voxels that may still hold one.
const RSA_VOXEL_AFTER_FAILURES: u64 = 5_000;
/// Voxel edge as a fraction of the radius being placed.
const RSA_VOXEL_OVER_RADIUS: f64 = 0.25;
/// Largest number of voxels (32 MB of indices).
const RSA_MAX_VOXELS: usize = 1 << 23;

/// Voxels of the box that may still hold the centre of a new sphere of
/// radius `radius`: every other voxel lies wholly inside some sphere's
/// exclusion zone. Trial centres drawn uniformly from these voxels are
/// uniform over a superset of the open space, so random sequential addition
/// keeps its statistics while wasting far fewer trials near jamming.
struct OpenVoxels {
    origin: [f64; 3],
    edge: [f64; 3],
    n: [usize; 3],
    list: Vec<u32>,
    radius: f64,
}

impl OpenVoxels {
    fn new(sim_box: &SimBox, radius: f64, spheres: &Spheres, grid: &DynamicGrid) -> Self {
        // Only the region a centre may occupy (a radius from any wall).
        let range = [0, 1, 2].map(|k| centre_range(sim_box, k, radius));
        let span = range.map(|(lo, hi)| (hi - lo).max(0.0));
        let mut target = RSA_VOXEL_OVER_RADIUS * radius;
        let n = loop {
            let n = span.map(|l| ((l / target).ceil() as usize).max(1));
            if n[0] * n[1] * n[2] <= RSA_MAX_VOXELS {
                break n;
            }
            target *= 1.25;
        };
        let edge = [0, 1, 2].map(|k| span[k] / n[k] as f64);
        let origin = range.map(|(lo, _)| lo);
        let mut v = Self {
            origin,
            edge,
            n,
            list: (0..(n[0] * n[1] * n[2]) as u32).collect(),
            radius,
        };
        v.prune(sim_box, spheres, grid);
        v
    }

    fn corner(&self, id: u32) -> [f64; 3] {
        let id = id as usize;
        let ijk = [
            id / (self.n[1] * self.n[2]),
            (id / self.n[2]) % self.n[1],
            id % self.n[2],
        ];
        [0, 1, 2].map(|k| self.origin[k] + ijk[k] as f64 * self.edge[k])
    }

    /// Drops voxels that now lie wholly inside an exclusion zone.
    fn prune(&mut self, sim_box: &SimBox, spheres: &Spheres, grid: &DynamicGrid) {
        let half = self.edge.map(|e| 0.5 * e);
        let r = self.radius;
        let corners: Vec<[f64; 3]> = self.list.iter().map(|&id| self.corner(id)).collect();
        let mut kept = Vec::with_capacity(self.list.len());
        for (&id, lo) in self.list.iter().zip(&corners) {
            let mid = [lo[0] + half[0], lo[1] + half[1], lo[2] + half[2]];
            let covered = grid.any_near(&mid, |j| {
                let j = j as usize;
                let d =
                    crate::space::neighbors::min_image_delta(sim_box, &mid, &spheres.centres_nm[j]);
                let far2: f64 = (0..3).map(|k| (d[k].abs() + half[k]).powi(2)).sum();
                let reach = r + spheres.radii_nm[j];
                far2 < reach * reach
            });
            if !covered {
                kept.push(id);
            }
        }
        self.list = kept;
    }

    fn sample(&self, rng: &mut ParticleRng) -> [f64; 3] {
        let pick = ((rng.uniform() * self.list.len() as f64) as usize).min(self.list.len() - 1);
        let lo = self.corner(self.list[pick]);
        [0, 1, 2].map(|k| lo[k] + rng.uniform() * self.edge[k])
    }
}

/// Random sequential addition, largest radii first.
fn random_sequential(
    radii: &RadiusDistribution,
    target: Target,
    sim_box: &SimBox,
    region: &Region,
    rng: &mut ParticleRng,
    file: &Path,
) -> Result<Spheres> {
    let volume = region.volume_nm3(sim_box);
    let mut want = draw_radii(radii, target, sim_box, volume, rng, file)?;
    let asked = match target {
        Target::VolumeFraction(phi) => format!("φ = {phi} was asked for"),
        Target::Count(n) => format!(
            "{n} obstacles (φ = {:.4}) were asked for",
            Spheres {
                centres_nm: Vec::new(),
                radii_nm: want.clone(),
                may_overlap: false
            }
            .volume_fraction_in(region, sim_box)
        ),
    };
    // Larger first: small spheres fill the gaps that large ones leave, so a polydisperse target is reachable.
    want.sort_by(|a, b| b.total_cmp(a));
    let r_max = want.first().copied().unwrap_or(0.0);
    let mut grid = DynamicGrid::new(sim_box, 2.0 * r_max);
    let mut spheres = Spheres::default();
    let budget = RSA_ATTEMPT_FLOOR + RSA_ATTEMPTS_PER_OBSTACLE * want.len() as u64;
    let mut attempts = 0u64;
    let mut failures = 0u64;
    let mut voxels: Option<OpenVoxels> = None;
    for (n, &r) in want.iter().enumerate() {
        // A voxel list pruned for a larger radius may have dropped room a smaller sphere could use.
        if voxels.as_ref().is_some_and(|v| v.radius > r) {
            voxels = None;
        }
        loop {
            if attempts >= budget || voxels.as_ref().is_some_and(|v| v.list.is_empty()) {
                let reached = spheres.volume_fraction_in(region, sim_box);
                let why = if attempts >= budget {
                    format!("after {attempts} attempts without finding room for the next")
                } else {
                    "when no room was left for the next (the packing is jammed)".to_string()
                };
                return Err(placement_error(
                    file,
                    format!(
                        "random sequential addition reached φ = {reached:.4} of {} ({n} of {} obstacles) {why}; {asked}. \
                         It jams near φ ≈ {RSA_JAMMING_FRACTION} for equal spheres (Zhang & Torquato 2013); \
                         ask for less, use a lattice, or use placement = \"poisson\" for overlapping obstacles",
                        region.describe(),
                        want.len()
                    ),
                ));
            }
            if voxels.is_none() && failures >= RSA_VOXEL_AFTER_FAILURES {
                voxels = Some(OpenVoxels::new(sim_box, r, &spheres, &grid));
                failures = 0;
                continue;
            }
            attempts += 1;
            let c = match &voxels {
                Some(v) => v.sample(rng),
                None => [0, 1, 2].map(|k| {
                    let (lo, hi) = centre_range(sim_box, k, r);
                    lo + rng.uniform() * (hi - lo)
                }),
            };
            let inside = (0..3).all(|k| {
                let (lo, hi) = centre_range(sim_box, k, r);
                c[k] >= lo && c[k] <= hi && c[k] < sim_box.edges_nm[k]
            }) && region.allows(&c, r);
            let clash = !inside
                || grid.any_near(&c, |j| {
                    let j = j as usize;
                    let reach = r + spheres.radii_nm[j];
                    min_image_distance2(sim_box, &c, &spheres.centres_nm[j]) < reach * reach
                });
            if clash {
                failures += 1;
                // Re-prune once the list has been tried about once per voxel in vain.
                if let Some(v) = voxels.as_mut() {
                    if failures > v.list.len() as u64 + 1000 {
                        v.prune(sim_box, &spheres, &grid);
                        failures = 0;
                    }
                }
                continue;
            }
            grid.insert(spheres.len() as u32, &c);
            spheres.centres_nm.push(c);
            spheres.radii_nm.push(r);
            failures = 0;
            break;
        }
    }
    Ok(spheres)
}

/// Knuth's multiplication method for small means, a normal approximation
/// rounded to the nearest whole number above 1e4 (relative error of the
/// count's law far below any statistical resolution there).
fn poisson_count(mean: f64, rng: &mut ParticleRng) -> usize {
    if mean < 1e4 {
        // Split the mean so exp(−m) never underflows.
        let mut total = 0usize;
        let mut left = mean;
        while left > 0.0 {
            let m = left.min(500.0);
            left -= m;
            let limit = (-m).exp();
            let mut prod = rng.uniform();
            while prod > limit {
                total += 1;
                prod *= rng.uniform();
            }
        }
        total
    } else {
        (mean + mean.sqrt() * standard_normal(rng)).round().max(0.0) as usize
    }
}

/// Freely overlapping spheres at independent uniform centres. For a volume
/// fraction target the count is Poisson with mean −ln(1 − φ)·V/⟨v⟩, so that
/// the expected covered fraction is φ (a Poisson process of intensity n
/// leaves exp(−n⟨v⟩) uncovered).
fn poisson(
    radii: &RadiusDistribution,
    target: Target,
    sim_box: &SimBox,
    region: &Region,
    rng: &mut ParticleRng,
    file: &Path,
) -> Result<Spheres> {
    let volume = region.volume_nm3(sim_box);
    let count = match target {
        Target::Count(n) => n,
        Target::VolumeFraction(phi) => {
            poisson_count(-(1.0 - phi).ln() * volume / radii.mean_volume_nm3(), rng)
        }
    };
    let radii_nm = draw_radii(radii, Target::Count(count), sim_box, volume, rng, file)?;
    let mut centres_nm = Vec::with_capacity(radii_nm.len());
    for &r in &radii_nm {
        // Uniform over the centres the region allows, by rejection from the box.
        let mut tries = 0u64;
        let c = loop {
            let c = [0, 1, 2].map(|k| {
                let (lo, hi) = centre_range(sim_box, k, r);
                lo + rng.uniform() * (hi - lo)
            });
            if region.allows(&c, r) {
                break c;
            }
            tries += 1;
            if tries >= RSA_ATTEMPT_FLOOR {
                return Err(placement_error(
                    file,
                    format!(
                        "no place was found for an obstacle of radius {r:.4} nm wholly inside {} in {tries} tries; \
                         obstacles.radius_nm must be smaller than the pore radius",
                        region.describe()
                    ),
                ));
            }
        };
        centres_nm.push(c);
    }
    Ok(Spheres {
        centres_nm,
        radii_nm,
        may_overlap: true,
    })
}

/// Simple cubic or fcc lattice filling the box with whole unit cells.
fn lattice(
    generator: Generator,
    radii: &RadiusDistribution,
    target: Target,
    sim_box: &SimBox,
    file: &Path,
) -> Result<Spheres> {
    let name = generator.name();
    let r = match *radii {
        RadiusDistribution::Fixed { radius_nm } => radius_nm,
        _ => {
            return Err(placement_error(
                file,
                format!(
                "a {name} lattice takes one radius: set obstacles.radius_distribution = \"fixed\""
            ),
            ))
        }
    };
    let (basis, max_fraction): (&[[f64; 3]], f64) = match generator {
        Generator::SimpleCubic => (&[[0.5, 0.5, 0.5]], SIMPLE_CUBIC_MAX_FRACTION),
        _ => (
            &[
                [0.25, 0.25, 0.25],
                [0.75, 0.75, 0.25],
                [0.75, 0.25, 0.75],
                [0.25, 0.75, 0.75],
            ],
            FCC_MAX_FRACTION,
        ),
    };
    let per_cell = basis.len();
    let v = 4.0 / 3.0 * PI * r.powi(3);
    let volume = box_volume(sim_box);
    let e = sim_box.edges_nm;
    let cells = match target {
        Target::VolumeFraction(phi) => {
            if phi > max_fraction {
                return Err(placement_error(
                    file,
                    format!("spheres on a {name} lattice touch at φ = {max_fraction:.4}; φ = {phi} is impossible"),
                ));
            }
            let a = (per_cell as f64 * v / phi).cbrt();
            let n = e.map(|l| ((l / a).round() as usize).max(1));
            let achieved = (per_cell * n[0] * n[1] * n[2]) as f64 * v / volume;
            if ((achieved - phi) / phi).abs() > LATTICE_FRACTION_TOLERANCE {
                return Err(placement_error(
                    file,
                    format!(
                        "φ = {phi} at radius {r} nm needs a {name} lattice constant of {a:.4} nm, so the box holds \
                         {:.3} × {:.3} × {:.3} unit cells; whole cells ({} × {} × {}) give φ = {achieved:.4}. Make each \
                         edge a whole multiple of {a:.4} nm (e.g. box.edges_nm = [{:.4}, {:.4}, {:.4}]) or change the radius",
                        e[0] / a,
                        e[1] / a,
                        e[2] / a,
                        n[0],
                        n[1],
                        n[2],
                        n[0] as f64 * a,
                        n[1] as f64 * a,
                        n[2] as f64 * a
                    ),
                ));
            }
            n
        }
        Target::Count(count) => {
            let total = count / per_cell;
            let scale = (total as f64 / volume).cbrt();
            let n = e.map(|l| ((l * scale).round() as usize).max(1));
            if count % per_cell != 0 || n[0] * n[1] * n[2] != total {
                let m = ((count as f64 / per_cell as f64).cbrt().floor() as usize).max(1);
                return Err(placement_error(
                    file,
                    format!(
                        "{count} obstacles cannot fill this box with whole {name} unit cells of {per_cell} sites each; \
                         in a cubic box use {per_cell}·m³, e.g. {} or {}",
                        per_cell * m.pow(3),
                        per_cell * (m + 1).pow(3)
                    ),
                ));
            }
            n
        }
    };
    let h = [0, 1, 2].map(|k| e[k] / cells[k] as f64);
    let nearest = match generator {
        Generator::SimpleCubic => h[0].min(h[1]).min(h[2]),
        _ => [(h[0], h[1]), (h[1], h[2]), (h[0], h[2])]
            .iter()
            .map(|(a, b)| 0.5 * (a * a + b * b).sqrt())
            .fold(f64::INFINITY, f64::min),
    };
    if 2.0 * r > nearest {
        return Err(placement_error(
            file,
            format!(
                "on this {name} lattice neighbouring sites are {nearest:.4} nm apart, less than the obstacle diameter {}; \
                 spheres on a {name} lattice touch at φ = {max_fraction:.4}, so the fraction asked for is impossible",
                2.0 * r
            ),
        ));
    }
    let mut spheres = Spheres::default();
    for i in 0..cells[0] {
        for j in 0..cells[1] {
            for k in 0..cells[2] {
                for b in basis {
                    let c = [
                        (i as f64 + b[0]) * h[0],
                        (j as f64 + b[1]) * h[1],
                        (k as f64 + b[2]) * h[2],
                    ];
                    for (ax, &x) in c.iter().enumerate() {
                        let (lo, hi) = centre_range(sim_box, ax, r);
                        if x < lo || x > hi {
                            return Err(placement_error(
                                file,
                                format!(
                                    "a {name} lattice site at {x:.4} nm on axis {} puts an obstacle of radius {r} nm through \
                                     the wall; walled axes need sites at least a radius from the faces",
                                    ["x", "y", "z"][ax]
                                ),
                            ));
                        }
                    }
                    spheres.centres_nm.push(c);
                    spheres.radii_nm.push(r);
                }
            }
        }
    }
    Ok(spheres)
}

/// Sites of a face-centred lattice holding at least `count` spheres of
/// radius `radius_nm`, as evenly spread over the box as whole cells allow:
/// each axis gets its own cell edge (whole cells along a periodic edge;
/// on a walled axis the sites stay a radius from the faces). A start for
/// mobile hard spheres denser than random addition reaches. Returns the
/// sites, or the closest approach the densest fitting lattice would need.
///
/// # Errors
/// A message saying the spheres do not fit on any such lattice.
pub fn fcc_sites_for(
    sim_box: &SimBox,
    radius_nm: f64,
    count: usize,
) -> std::result::Result<Vec<[f64; 3]>, String> {
    const BASIS: [[f64; 3]; 4] = [
        [0.25, 0.25, 0.25],
        [0.75, 0.75, 0.25],
        [0.75, 0.25, 0.75],
        [0.25, 0.75, 0.75],
    ];
    let span = [0, 1, 2].map(|k| {
        let (lo, hi) = centre_range(sim_box, k, radius_nm);
        (lo, (hi - lo).max(0.0))
    });
    // On a walled axis a site layer sits at (i + ¼)c and (i + ¾)c of the span, with the
    // outer layers c/4 inside it; the span then holds n cells of edge c = span/(n − ½).
    let edge = |k: usize, n: usize| {
        if sim_box.periodic[k] {
            span[k].1 / n as f64
        } else {
            span[k].1 / (n as f64 - 0.5).max(0.5)
        }
    };
    let nearest = |n: [usize; 3]| {
        let c = [0, 1, 2].map(|k| edge(k, n[k]));
        let mut d = f64::INFINITY;
        for k in 0..3 {
            // A repeat along a periodic axis with one cell meets its own image.
            if n[k] > 1 || sim_box.periodic[k] {
                d = d.min(c[k]);
            }
            let j = (k + 1) % 3;
            d = d.min(0.5 * c[k].hypot(c[j]));
        }
        d
    };
    let volume: f64 = span.iter().map(|s| s.1.max(1e-300)).product();
    let c0 = (4.0 * volume / count.max(1) as f64).cbrt();
    let mut n = [0, 1, 2].map(|k| ((span[k].1 / c0).floor() as usize).max(1));
    // Add cells where the cell edge is longest until the sites suffice.
    while 4 * n[0] * n[1] * n[2] < count {
        let k = (0..3)
            .max_by(|&a, &b| edge(a, n[a]).total_cmp(&edge(b, n[b])))
            .expect("three axes");
        n[k] += 1;
    }
    let d = nearest(n);
    if d < 2.0 * radius_nm {
        return Err(format!(
            "{count} spheres of radius {radius_nm} nm do not fit on a face-centred lattice in this box: \
             {} × {} × {} cells put neighbouring sites {d:.4} nm apart, less than the diameter {}",
            n[0],
            n[1],
            n[2],
            2.0 * radius_nm
        ));
    }
    let c = [0, 1, 2].map(|k| edge(k, n[k]));
    let mut sites = Vec::with_capacity(4 * n[0] * n[1] * n[2]);
    for i in 0..n[0] {
        for j in 0..n[1] {
            for l in 0..n[2] {
                for b in &BASIS {
                    let ijk = [i, j, l];
                    let site = [0, 1, 2].map(|k| {
                        let shift = if sim_box.periodic[k] { 0.0 } else { -0.25 };
                        span[k].0 + (ijk[k] as f64 + b[k] + shift) * c[k]
                    });
                    sites.push(site);
                }
            }
        }
    }
    // A walled axis with n cells holds 2n layers: the last half cell is cut off.
    sites.retain(|p| {
        (0..3).all(|k| p[k] >= span[k].0 - 1e-9 && p[k] <= span[k].0 + span[k].1 + 1e-9)
    });
    if sites.len() < count {
        return Err(format!(
            "{count} spheres of radius {radius_nm} nm need more sites than a face-centred lattice in this box holds ({})",
            sites.len()
        ));
    }
    Ok(sites)
}

/// Reads obstacles from a CSV file with columns `x_nm, y_nm, z_nm, radius_nm`.
///
/// Blank lines and lines starting with `#` are skipped; the first other line
/// may be a header. Centres must lie in [0, L) on periodic axes, and spheres
/// wholly inside the box on walled axes. Unless `allow_overlap`, no two
/// spheres may overlap.
///
/// # Errors
/// [`EngineError::InvalidValue`] naming `obstacles.file` when the file cannot
/// be read, or naming the CSV file and line for a malformed or impossible
/// row; [`EngineError::Placement`] for overlaps, naming both lines.
pub fn read_csv(
    path: &Path,
    sim_box: &SimBox,
    region: &Region,
    allow_overlap: bool,
    scenario_file: &Path,
) -> Result<Spheres> {
    let names = ["x_nm", "y_nm", "z_nm", "radius_nm"];
    let rows = crate::scenario::csv::read_numeric_csv(
        path,
        scenario_file,
        "obstacles.file",
        "obstacle",
        names,
    )?;
    let mut spheres = Spheres {
        may_overlap: allow_overlap,
        ..Spheres::default()
    };
    for row in &rows {
        let bad = |allowed: String| row.error(path, allowed);
        let v = row.values;
        let r = v[3];
        for k in 0..3 {
            let l = sim_box.edges_nm[k];
            if sim_box.periodic[k] {
                if 2.0 * r >= l {
                    return Err(bad(format!(
                        "the obstacle (diameter {}) is larger than the box along {} ({l} nm)",
                        2.0 * r,
                        names[k]
                    )));
                }
                if !(0.0..l).contains(&v[k]) {
                    return Err(bad(format!(
                        "{} = {} lies outside the periodic box [0, {l}) nm",
                        names[k], v[k]
                    )));
                }
            } else if v[k] - r < 0.0 || v[k] + r > l {
                return Err(bad(format!("the obstacle overlaps the wall: along {} it spans {} … {} nm but the box is 0 … {l} nm", names[k], v[k] - r, v[k] + r),
                ));
            }
        }
        if !region.allows(&[v[0], v[1], v[2]], r) {
            return Err(bad(format!(
                    "the obstacle (radius {r} nm) must lie wholly inside {}; it crosses or lies beyond its wall",
                    region.describe()
                ),
            ));
        }
        spheres.centres_nm.push([v[0], v[1], v[2]]);
        spheres.radii_nm.push(r);
    }
    if !allow_overlap {
        if let Some((i, j)) = find_sphere_overlap(&spheres, sim_box) {
            let d =
                min_image_distance2(sim_box, &spheres.centres_nm[i], &spheres.centres_nm[j]).sqrt();
            return Err(placement_error(
                path,
                format!(
                    "the obstacle on line {} overlaps the one on line {} (centres {d:.4} nm apart, radii {} and {} nm); \
                     set obstacles.allow_overlap = true if the microstructure has overlapping obstacles",
                    // Every row became a sphere, so sphere i is row i.
                    rows[j].line, rows[i].line, spheres.radii_nm[j], spheres.radii_nm[i]
                ),
            ));
        }
    }
    Ok(spheres)
}

/// The first pair (i < j) of overlapping spheres, if any (grid search).
pub fn find_sphere_overlap(spheres: &Spheres, sim_box: &SimBox) -> Option<(usize, usize)> {
    let r_max = spheres.radii_nm.iter().cloned().fold(0.0, f64::max);
    let mut grid = DynamicGrid::new(sim_box, 2.0 * r_max);
    for (j, c) in spheres.centres_nm.iter().enumerate() {
        let mut hit = None;
        grid.any_near(c, |i| {
            let i = i as usize;
            let reach = spheres.radii_nm[i] + spheres.radii_nm[j];
            let clash = min_image_distance2(sim_box, c, &spheres.centres_nm[i]) < reach * reach;
            if clash {
                hit = Some(i);
            }
            clash
        });
        if let Some(i) = hit {
            return Some((i, j));
        }
        grid.insert(j as u32, c);
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cube(l: f64) -> SimBox {
        SimBox {
            edges_nm: [l; 3],
            periodic: [true; 3],
        }
    }

    #[test]
    fn rsa_reaches_moderate_fraction_without_overlap() {
        let b = cube(60.0);
        let mut rng = ParticleRng::for_particle(3, OBSTACLE_STREAM);
        let s = random_sequential(
            &RadiusDistribution::Fixed { radius_nm: 3.0 },
            Target::VolumeFraction(0.3),
            &b,
            &Region::default(),
            &mut rng,
            Path::new("t"),
        )
        .unwrap();
        assert!((s.nominal_volume_fraction(&b) - 0.3).abs() < 0.002);
        assert_eq!(find_sphere_overlap(&s, &b), None);
    }

    #[test]
    fn rsa_above_jamming_stops_with_what_was_reached() {
        let b = cube(30.0);
        let mut rng = ParticleRng::for_particle(3, OBSTACLE_STREAM);
        let err = random_sequential(
            &RadiusDistribution::Fixed { radius_nm: 2.0 },
            Target::VolumeFraction(0.45),
            &b,
            &Region::default(),
            &mut rng,
            Path::new("t"),
        )
        .unwrap_err()
        .to_string();
        assert!(err.contains("reached φ = 0.3"), "{err}");
    }

    #[test]
    fn lognormal_mean_volume_matches_closed_form() {
        // Untruncated: ⟨r³⟩ = median³ exp(9 s²/2) (moments of the log-normal law).
        let d = RadiusDistribution::LogNormal {
            median_nm: 2.0,
            log_sd: 0.3,
            min_nm: 0.0,
            max_nm: f64::INFINITY,
        };
        let want = 4.0 / 3.0 * PI * 8.0 * (4.5f64 * 0.09).exp();
        assert!((d.mean_volume_nm3() / want - 1.0).abs() < 1e-6);
        let u = RadiusDistribution::Uniform {
            min_nm: 1.0,
            max_nm: 3.0,
        };
        assert!((u.mean_volume_nm3() - 4.0 / 3.0 * PI * (81.0 - 1.0) / 8.0).abs() < 1e-9);
    }

    #[test]
    fn poisson_count_has_right_mean_and_variance() {
        let mut rng = ParticleRng::for_particle(1, 2);
        let n = 20_000;
        let xs: Vec<f64> = (0..n)
            .map(|_| poisson_count(7.5, &mut rng) as f64)
            .collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        // Poisson law: mean = variance = 7.5; 5 standard errors.
        assert!(
            (mean - 7.5).abs() < 5.0 * (7.5f64 / n as f64).sqrt(),
            "mean {mean}"
        );
        assert!(
            (var - 7.5).abs() < 5.0 * 7.5 * (2.0f64 / n as f64).sqrt(),
            "var {var}"
        );
    }

    #[test]
    fn fcc_sites_hold_dense_spheres_without_overlap() {
        // φ = 0.5 of 2048 spheres of radius 1 nm in a periodic cube: 8³ cells, neighbours c/√2 apart.
        let count = 2048usize;
        let l = (count as f64 * 4.0 / 3.0 * PI / 0.5).cbrt();
        let b = cube(l);
        let sites = fcc_sites_for(&b, 1.0, count).unwrap();
        assert_eq!(sites.len(), count);
        let spheres = Spheres {
            centres_nm: sites,
            radii_nm: vec![1.0; count],
            may_overlap: false,
        };
        assert_eq!(find_sphere_overlap(&spheres, &b), None);
        // Walls on z: sites keep a radius from the faces; a denser fill than fcc allows is refused.
        let walled = SimBox {
            edges_nm: [l, l, l],
            periodic: [true, true, false],
        };
        let sites = fcc_sites_for(&walled, 1.0, 1500).unwrap();
        assert!(sites.iter().all(|p| p[2] >= 1.0 && p[2] <= l - 1.0));
        let spheres = Spheres {
            radii_nm: vec![1.0; sites.len()],
            centres_nm: sites,
            may_overlap: false,
        };
        assert_eq!(find_sphere_overlap(&spheres, &walled), None);
        let too_many = (0.75 * l.powi(3) / (4.0 / 3.0 * PI)) as usize;
        assert!(fcc_sites_for(&b, 1.0, too_many).is_err());
    }

    #[test]
    fn fcc_lattice_hits_fraction_in_commensurate_box() {
        let r = 2.0f64;
        let phi = 0.3;
        let a = (4.0 * 4.0 / 3.0 * PI * r.powi(3) / phi).cbrt();
        let b = cube(5.0 * a);
        let s = lattice(
            Generator::FaceCentredCubic,
            &RadiusDistribution::Fixed { radius_nm: r },
            Target::VolumeFraction(phi),
            &b,
            Path::new("t"),
        )
        .unwrap();
        assert_eq!(s.len(), 4 * 125);
        assert!((s.nominal_volume_fraction(&b) - phi).abs() < 1e-9);
        assert_eq!(find_sphere_overlap(&s, &b), None);
        let err = lattice(
            Generator::FaceCentredCubic,
            &RadiusDistribution::Fixed { radius_nm: r },
            Target::VolumeFraction(0.75),
            &b,
            Path::new("t"),
        );
        assert!(err.unwrap_err().to_string().contains("impossible"));
    }
}
