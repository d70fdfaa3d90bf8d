//! What a scenario puts in the medium: validated specifications of fixed
//! obstacles and fibres, and the update order of hard contacts.

use crate::base::rng::{standard_normal, ParticleRng};
use crate::space::SimBox;
use std::f64::consts::PI;
use std::path::PathBuf;

/// Redraws allowed for one truncated log-normal radius before giving up.
const TRUNCATION_REDRAWS: usize = 10_000;

/// How generated obstacles are placed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Generator {
    /// Random sequential addition: non-overlapping.
    RandomSequential,
    /// Independent uniform centres: freely overlapping.
    Poisson,
    /// Simple cubic lattice.
    SimpleCubic,
    /// Face-centred cubic lattice.
    FaceCentredCubic,
}

impl Generator {
    /// The name used in scenario files.
    pub fn name(self) -> &'static str {
        match self {
            Self::RandomSequential => "random",
            Self::Poisson => "poisson",
            Self::SimpleCubic => "simple_cubic",
            Self::FaceCentredCubic => "fcc",
        }
    }
}

/// Distribution of obstacle radii.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum RadiusDistribution {
    /// Every obstacle has this radius.
    Fixed {
        /// Radius, nm.
        radius_nm: f64,
    },
    /// Uniform between two radii.
    Uniform {
        /// Smallest radius, nm.
        min_nm: f64,
        /// Largest radius, nm.
        max_nm: f64,
    },
    /// Log-normal: ln r is normal with mean ln(median) and standard deviation
    /// `log_sd`, optionally truncated to [min, max] by redrawing.
    LogNormal {
        /// Median radius, nm.
        median_nm: f64,
        /// Standard deviation of ln r.
        log_sd: f64,
        /// Smallest radius kept, nm (0 for none).
        min_nm: f64,
        /// Largest radius kept, nm (infinite for none).
        max_nm: f64,
    },
}

impl RadiusDistribution {
    /// One radius from `rng`; `None` when a truncated log-normal keeps
    /// missing its window.
    pub fn sample(&self, rng: &mut ParticleRng) -> Option<f64> {
        match *self {
            Self::Fixed { radius_nm } => Some(radius_nm),
            Self::Uniform { min_nm, max_nm } => Some(min_nm + (max_nm - min_nm) * rng.uniform()),
            Self::LogNormal {
                median_nm,
                log_sd,
                min_nm,
                max_nm,
            } => {
                for _ in 0..TRUNCATION_REDRAWS {
                    let r = median_nm * (log_sd * standard_normal(rng)).exp();
                    if (min_nm..=max_nm).contains(&r) {
                        return Some(r);
                    }
                }
                None
            }
        }
    }

    /// Largest radius the distribution can produce (infinite for an
    /// untruncated log-normal).
    pub fn max_nm(&self) -> f64 {
        match *self {
            Self::Fixed { radius_nm } => radius_nm,
            Self::Uniform { max_nm, .. } => max_nm,
            Self::LogNormal { max_nm, .. } => max_nm,
        }
    }

    /// Mean sphere volume ⟨(4/3)π r³⟩, nm³.
    pub fn mean_volume_nm3(&self) -> f64 {
        let k = 4.0 / 3.0 * PI;
        match *self {
            Self::Fixed { radius_nm } => k * radius_nm.powi(3),
            Self::Uniform { min_nm, max_nm } => {
                if max_nm == min_nm {
                    k * min_nm.powi(3)
                } else {
                    k * (max_nm.powi(4) - min_nm.powi(4)) / (4.0 * (max_nm - min_nm))
                }
            }
            Self::LogNormal {
                median_nm,
                log_sd,
                min_nm,
                max_nm,
            } => {
                // Simpson's rule over the standard normal variable of ln r,
                // restricted to the truncation window (and to ±12 standard deviations).
                let z_of = |r: f64| {
                    if r <= 0.0 {
                        -12.0
                    } else {
                        ((r / median_nm).ln() / log_sd).clamp(-12.0, 12.0)
                    }
                };
                let (z0, z1) = if log_sd == 0.0 {
                    (0.0, 0.0)
                } else {
                    (
                        z_of(min_nm),
                        if max_nm.is_finite() {
                            z_of(max_nm)
                        } else {
                            12.0
                        },
                    )
                };
                if log_sd == 0.0 || z1 <= z0 {
                    return k * median_nm.powi(3);
                }
                let n = 4000;
                let h = (z1 - z0) / n as f64;
                let (mut num, mut den) = (0.0, 0.0);
                for i in 0..=n {
                    let z = z0 + i as f64 * h;
                    let w = if i == 0 || i == n {
                        1.0
                    } else if i % 2 == 1 {
                        4.0
                    } else {
                        2.0
                    };
                    let pdf = (-0.5 * z * z).exp();
                    num += w * pdf * (3.0 * log_sd * z).exp();
                    den += w * pdf;
                }
                k * median_nm.powi(3) * num / den
            }
        }
    }
}

/// What a generated placement aims for.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Target {
    /// Fraction of the box volume covered by obstacles (for overlapping
    /// obstacles, the covered fraction of the union).
    VolumeFraction(f64),
    /// Number of obstacles.
    Count(usize),
}

/// Validated `[obstacles]` section.
#[derive(Debug, Clone, PartialEq)]
pub enum ObstacleSpec {
    /// Obstacles generated from the seed.
    Generated {
        /// Placement method.
        generator: Generator,
        /// Radii.
        radii: RadiusDistribution,
        /// Volume fraction or count.
        target: Target,
    },
    /// Obstacles read from a CSV file.
    File {
        /// Resolved path of the CSV file.
        path: PathBuf,
        /// Whether obstacles in the file may overlap each other. By default, this is disabled.
        allow_overlap: bool,
    },
}

/// Orientation of the fibres.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Orientation {
    /// Uniformly random directions on the sphere.
    Isotropic,
    /// All along one box axis (0 = x, 1 = y, 2 = z).
    Aligned {
        /// Box axis index.
        axis: usize,
    },
}

/// Validated `[fibres]` section.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FibreSpec {
    /// Fibre radius, nm.
    pub radius_nm: f64,
    /// Length of the axis segment, nm.
    pub length_nm: f64,
    /// Orientation.
    pub orientation: Orientation,
    /// Nominal volume fraction N·π r_f²·ℓ / V, or a count.
    pub target: Target,
}

impl FibreSpec {
    /// Number of fibres the target implies in a box.
    pub fn count(&self, sim_box: &SimBox) -> usize {
        match self.target {
            Target::Count(n) => n,
            Target::VolumeFraction(phi) => {
                let v: f64 = sim_box.edges_nm.iter().product();
                (phi * v / (PI * self.radius_nm.powi(2) * self.length_nm))
                    .round()
                    .max(1.0) as usize
            }
        }
    }
}

/// Update order of particles with hard contacts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Sweep {
    /// Propose in parallel, resolve conflicts in index order (the default).
    Parallel,
    /// One particle after the other in index order: the reference.
    Sequential,
}
