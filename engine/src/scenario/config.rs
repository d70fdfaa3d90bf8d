//! Scenario files: the one place that parses and validates them.
//!
//! A scenario is read in two stages. The TOML text becomes a [`RawScenario`]
//! (serde, unknown keys rejected with their line), overrides from
//! `--set KEY=VALUE` are applied to it, and [`RawScenario::validate`] turns it
//! into a [`Scenario`] whose values are all checked, with errors that name the
//! file, the key, the value and the allowed range. Nothing downstream sees an
//! unchecked value.

use crate::base::error::{EngineError, Result};
use crate::base::medium;
use crate::scenario::binding::{species_binding, BindingContext, BindingKeys};
pub use crate::scenario::csv::{read_numeric_csv, CsvRow};
use crate::scenario::drive::{
    species_force_pn, thermal_energy_pn_nm, validate_flow, validate_forces, FlowSpec, RawFlow,
    RawForces, SpeciesDriveKeys,
};
use crate::scenario::geometry::Geometry;
use crate::scenario::geometry::RawGeometry;
use crate::scenario::media::Sweep;
use crate::scenario::media::{FibreSpec, Orientation};
use crate::scenario::media::{Generator, ObstacleSpec, RadiusDistribution, Target};
pub use crate::scenario::species::Species;
use crate::space::collisions::ContactRule;
use crate::space::SimBox;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// The largest number of particles of one species (memory: about 70 bytes each).
pub const MAX_COUNT: i64 = 100_000_000;
/// The largest number of steps in one run.
pub const MAX_STEPS: i64 = 1_000_000_000_000;
/// Step length as a fraction of the smallest feature above which `check` warns
/// (a tenth: common practice, REFERENCES.md "Numerics").
pub const STEP_WARNING_FRACTION: f64 = 0.1;
/// Estimated contact bias above which `check` warns.
pub const CONTACT_BIAS_WARNING: f64 = 0.01;
/// Rule of thumb: relative bias of rejection per unit Σℓ (contact_bias_estimate).
const REJECT_BIAS_PER_CONTACT_STEP: f64 = 0.4;
/// Rule of thumb: relative bias of reflection per unit Σℓ²/R (contact_bias_estimate).
const REFLECT_BIAS_PER_CONTACT_STEP: f64 = 0.1;
/// The largest number of fixed obstacles (spheres or fibres) a scenario may ask for.
pub const MAX_OBSTACLES: i64 = 20_000_000;
/// Temperatures the Stokes–Einstein and Langevin formulas are used for, in K
/// (a range wide enough for any lab solvent, narrow enough that kT stays finite).
pub const TEMPERATURE_RANGE_K: (f64, f64) = (1.0, 10_000.0);
/// Viscosities accepted, in Pa·s (dilute gases ~1e-5, pitch ~1e8).
pub const VISCOSITY_RANGE_PA_S: (f64, f64) = (1e-7, 1e10);
/// Particle and drag radii accepted, in nm (down to the tiny radius that stands for a point tracer, up to a centimetre bead).
pub const RADIUS_RANGE_NM: (f64, f64) = (1e-6, 1e7);
/// Box edges accepted, in nm (up to a metre).
pub const EDGE_RANGE_NM: (f64, f64) = (1e-3, 1e9);
/// Time steps accepted, in s (a femtosecond to a week).
pub const DT_RANGE_S: (f64, f64) = (1e-15, 1e6);
/// Explicit diffusivities accepted, in m²/s (far below any gas, far above any liquid).
pub const DIFFUSIVITY_RANGE_M2_PER_S: (f64, f64) = (1e-30, 1e-2);
/// Photon counts accepted (per detection, background per pixel).
pub const PHOTON_RANGE: (f64, f64) = (1e-3, 1e15);
/// Camera rates (blinking) accepted, in 1/s.
pub const RATE_RANGE_PER_S: (f64, f64) = (1e-12, 1e12);
/// The rms step must span at least this many units in the last place of the
/// largest box coordinate, so that rounding does not swallow the motion.
pub const RESOLVE_ULPS: f64 = 16.0;

/// Scenario as written in TOML, before validation.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawScenario {
    /// Seed of all random streams (default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seed: Option<i64>,
    /// Solvent.
    pub medium: RawMedium,
    /// Simulation box.
    #[serde(rename = "box")]
    pub sim_box: RawBox,
    /// Particle species; at least one.
    pub species: Vec<RawSpecies>,
    /// Time stepping.
    pub integrator: RawIntegrator,
    /// Trajectory output.
    #[serde(default)]
    pub output: RawOutput,
    /// Synthetic camera for `thicket tracks`; absent for plain runs.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub camera: Option<RawCamera>,
    /// Fixed spherical obstacles.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub obstacles: Option<RawObstacles>,
    /// Fixed fibres.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fibres: Option<RawFibres>,
    /// Stepper: walls, slit, cylindrical pore or membrane (see `geometry`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub geometry: Option<RawGeometry>,
    /// A flow carrying the particles (see `drive`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flow: Option<RawFlow>,
    /// Fields acting on every species: gravity, an electric field.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub forces: Option<RawForces>,
}

/// `[obstacles]`: fixed spheres.
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawObstacles {
    /// "random" (random sequential addition, non-overlapping), "poisson"
    /// (freely overlapping), "simple_cubic", "fcc", or "file".
    pub placement: String,
    /// Target volume fraction (covered fraction for "poisson"); give this or `count`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub volume_fraction: Option<f64>,
    /// Target number of obstacles; give this or `volume_fraction`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub count: Option<i64>,
    /// Radius in nm ("fixed"), or the median radius ("lognormal").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub radius_nm: Option<f64>,
    /// "fixed" (default), "uniform" or "lognormal".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub radius_distribution: Option<String>,
    /// Smallest radius in nm ("uniform"; optional truncation for "lognormal").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub radius_min_nm: Option<f64>,
    /// Largest radius in nm ("uniform"; optional truncation for "lognormal").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub radius_max_nm: Option<f64>,
    /// Standard deviation of ln(radius) ("lognormal").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub radius_log_sd: Option<f64>,
    /// CSV of x_nm,y_nm,z_nm,radius_nm ("file"); relative to the scenario's folder.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub file: Option<String>,
    /// Whether obstacles read from a file may overlap ("file"; default false).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub allow_overlap: Option<bool>,
    /// Surface potential of the obstacles, mV (screened electrostatics with
    /// species that carry `surface_potential_mV`).
    #[serde(
        rename = "surface_potential_mV",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub surface_potential_mv: Option<f64>,
    /// Surface charge density, mC/m², instead of the potential (turned into
    /// it by the Grahame equation; needs the medium's ionic strength and permittivity).
    #[serde(
        rename = "surface_charge_density_mC_per_m2",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub surface_charge_density_mc_per_m2: Option<f64>,
}

/// `[fibres]`: fixed straight cylinders.
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawFibres {
    /// Fibre radius in nm.
    pub radius_nm: f64,
    /// Nominal volume fraction N·π r²·ℓ / V; give this or `count`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub volume_fraction: Option<f64>,
    /// Number of fibres; give this or `volume_fraction`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub count: Option<i64>,
    /// "isotropic" (default) or "aligned".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub orientation: Option<String>,
    /// Axis of aligned fibres: "x", "y" or "z" (default "z").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub axis: Option<String>,
    /// Length of each fibre's axis in nm (default: the box edge along the
    /// axis when aligned, the smallest edge when isotropic).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub length_nm: Option<f64>,
    /// Surface potential of the fibres, mV (screened electrostatics with
    /// species that carry `surface_potential_mV`).
    #[serde(
        rename = "surface_potential_mV",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub surface_potential_mv: Option<f64>,
    /// Surface charge density, mC/m², instead of the potential (turned into
    /// it by the Grahame equation; needs the medium's ionic strength and permittivity).
    #[serde(
        rename = "surface_charge_density_mC_per_m2",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub surface_charge_density_mc_per_m2: Option<f64>,
}

/// `[medium]`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawMedium {
    /// Temperature in kelvin.
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// Dynamic viscosity; omitted means water at the temperature.
    #[serde(
        rename = "viscosity_Pa_s",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub viscosity_pa_s: Option<f64>,
    /// Density, kg/m³ (needed for buoyancy under `forces.gravity_m_per_s2`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub density_kg_per_m3: Option<f64>,
    /// Ionic strength of a 1:1 electrolyte, mol/L (sets the Debye length
    /// of screened electrostatics).
    #[serde(
        rename = "ionic_strength_mol_per_L",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub ionic_strength_mol_per_l: Option<f64>,
    /// Relative permittivity ε_r of the medium (screened electrostatics).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub relative_permittivity: Option<f64>,
}

/// `[box]`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawBox {
    /// Edge lengths x, y, z in nm.
    pub edges_nm: Vec<f64>,
    /// Periodic per axis (default all periodic); a non-periodic axis has hard
    /// faces that reflect the particle surface.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub periodic: Option<Vec<bool>>,
}

/// One `[[species]]` entry.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawSpecies {
    /// Name (letters, digits, `_` and `-`); also the HDF5 group name.
    pub name: String,
    /// Steric radius in nm (contacts and walls).
    pub radius_nm: f64,
    /// Hydrodynamic (drag) radius in nm; defaults to the steric radius.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub drag_radius_nm: Option<f64>,
    /// Number of particles.
    pub count: i64,
    /// Explicit free diffusivity, overriding Stokes–Einstein.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub diffusivity_m2_per_s: Option<f64>,
    /// "tracer" (default: no contacts with other tracers) or "crowder" (hard
    /// contacts with every particle).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub role: Option<String>,
    /// A constant external force [x, y, z] in pN.
    #[serde(rename = "force_pN", default, skip_serializing_if = "Option::is_none")]
    pub force_pn: Option<Vec<f64>>,
    /// Particle density, kg/m³ (buoyant weight under `forces.gravity_m_per_s2`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub density_kg_per_m3: Option<f64>,
    /// Charge in elementary charges (force under `forces.electric_field_V_per_m`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub charge_e: Option<f64>,
    /// Surface potential, mV (screened electrostatics with charged walls).
    #[serde(
        rename = "surface_potential_mV",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub surface_potential_mv: Option<f64>,
    /// Surface charge density, mC/m², instead of the potential (turned into
    /// it by the Grahame equation; needs the medium's ionic strength and permittivity).
    #[serde(
        rename = "surface_charge_density_mC_per_m2",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub surface_charge_density_mc_per_m2: Option<f64>,
    /// Depth of a short-range attractive well at the walls, in k_BT.
    #[serde(
        rename = "wall_well_depth_kT",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub wall_well_depth_kt: Option<f64>,
    /// Range of that well, nm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub wall_well_range_nm: Option<f64>,
    /// Thickness of the binding layer around the obstacles, nm (binding: all three keys or none).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub binding_layer_nm: Option<f64>,
    /// Binding rate of a centre in the layer, 1/s.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub binding_rate_per_s: Option<f64>,
    /// Unbinding rate, 1/s.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unbinding_rate_per_s: Option<f64>,
    /// Hamaker constant of van der Waals attraction to walls, obstacles and fibres, zJ.
    #[serde(
        rename = "hamaker_constant_zJ",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub hamaker_constant_zj: Option<f64>,
    /// Closest gap of the van der Waals terms, nm (held there below it).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub vdw_closest_gap_nm: Option<f64>,
    /// Depth of a short-range attractive well at obstacles and fibres, in k_BT.
    #[serde(
        rename = "obstacle_well_depth_kT",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub obstacle_well_depth_kt: Option<f64>,
    /// Range of that well, nm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub obstacle_well_range_nm: Option<f64>,
    /// Depth of a short-range attractive well between particles of a crowd, in k_BT.
    #[serde(
        rename = "pair_well_depth_kT",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub pair_well_depth_kt: Option<f64>,
    /// Range of that well, nm.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pair_well_range_nm: Option<f64>,
}

/// `[integrator]`.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawIntegrator {
    /// Time step in seconds.
    pub dt_s: f64,
    /// Number of steps.
    pub steps: i64,
    /// Update order with crowders: "parallel" (default) or "sequential"
    /// (the reference sweep); both give the same result.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sweep: Option<String>,
    /// Hard contacts: "reflect" reflects a move at the contact (contact.rs;
    /// the default without a [geometry]), "reject" rejects a move into
    /// overlap (the default, and the only rule, with a [geometry]).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub contact: Option<String>,
}

/// `[output]`.
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawOutput {
    /// Trajectory file (HDF5); relative paths are taken from the working folder.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub file: Option<String>,
    /// Record a frame every this many steps (default: steps / 100, at least 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub record_every_steps: Option<i64>,
    /// "f32" (default) or "f64" for stored positions.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub precision: Option<String>,
    /// Wall-clock seconds between checkpoints, which flush the trajectory too (default 5).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub checkpoint_interval_s: Option<f64>,
}

/// Stored precision of positions.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Precision {
    /// 32-bit floats (half the file size; about 1e-7 relative).
    F32,
    /// 64-bit floats.
    F64,
}

/// Validated output settings.
#[derive(Debug, Clone, PartialEq)]
pub struct OutputSpec {
    /// Trajectory path from the scenario, if any.
    pub file: Option<PathBuf>,
    /// Steps between frames.
    pub record_every_steps: u64,
    /// Stored precision.
    pub precision: Precision,
    /// Wall-clock seconds between checkpoints.
    pub checkpoint_interval_s: f64,
}

/// A fully validated scenario.
#[derive(Debug, Clone, PartialEq)]
pub struct Scenario {
    /// Path of the scenario file (for messages).
    pub source: PathBuf,
    /// Seed of all random streams.
    pub seed: u64,
    /// Temperature, K.
    pub temperature_k: f64,
    /// Viscosity, Pa·s.
    pub viscosity_pa_s: f64,
    /// True when the viscosity came from the water correlation.
    pub viscosity_is_water: bool,
    /// Box.
    pub sim_box: SimBox,
    /// Species in file order.
    pub species: Vec<Species>,
    /// Time step, s.
    pub dt_s: f64,
    /// Number of steps.
    pub steps: u64,
    /// Output settings.
    pub output: OutputSpec,
    /// Validated `[camera]` section, if the scenario has one.
    pub camera: Option<CameraSpec>,
    /// Fixed spherical obstacles, if any.
    pub obstacles: Option<ObstacleSpec>,
    /// Fixed fibres, if any.
    pub fibres: Option<FibreSpec>,
    /// Update order of particles with hard contacts.
    pub sweep: Sweep,
    /// How hard contacts are handled.
    pub contact: ContactRule,
    /// True when the scenario names `integrator.contact` (else the default).
    pub contact_given: bool,
    /// Confining geometry, if any.
    pub geometry: Option<Geometry>,
    /// The flow carrying the particles, if any.
    pub flow: Option<FlowSpec>,
    /// Soft interactions between mobile particles, if any.
    pub pairs: Option<crate::space::pairs::PairTable>,
    /// Surfaces whose potential was given as a charge density, with the
    /// potential each gives (Grahame); empty when none was.
    pub surface_charges: Vec<crate::scenario::charge::SurfaceCharge>,
    /// The resolved scenario (defaults filled in) as TOML text.
    pub resolved_toml: String,
}

/// Crowder volume fraction above which crowders start on a lattice
/// instead of by random addition (which jams near φ ≈ 0.38 and slows well before).
pub const LATTICE_START_FRACTION: f64 = 0.33;

impl Scenario {
    /// Total number of particles over all species.
    pub fn particle_count(&self) -> usize {
        self.species.iter().map(|s| s.count).sum()
    }

    /// Number of frames recorded, including the initial one.
    pub fn frames(&self) -> u64 {
        self.steps / self.output.record_every_steps + 1
    }

    /// True when particles can touch something (a wall, an obstacle, a
    /// crowder), where the step length matters; free periodic diffusion is
    /// exact for any Δt.
    pub fn has_contacts(&self) -> bool {
        self.sim_box.periodic.iter().any(|p| !p)
            || self.obstacles.is_some()
            || self.fibres.is_some()
            || self.has_crowders()
    }

    /// k_B T, pN·nm.
    pub fn thermal_energy_pn_nm(&self) -> f64 {
        thermal_energy_pn_nm(self.temperature_k)
    }

    /// The drift per step D0 Δt F/k_BT, nm, that species `s`'s constant
    /// force gives it in free solution (Einstein's mobility D0/k_BT).
    pub fn force_drift_nm(&self, s: &Species) -> [f64; 3] {
        let scale = s.d0_nm2_per_s() * self.dt_s / self.thermal_energy_pn_nm();
        s.force_pn.map(|f| f * scale)
    }

    /// True when some species feels a force or a flow carries particles.
    pub fn is_driven(&self) -> bool {
        self.flow.is_some() || self.species.iter().any(|s| s.force_pn != [0.0; 3])
    }

    /// True when some species has a soft interaction with the walls.
    pub fn has_wall_potentials(&self) -> bool {
        self.species.iter().any(|s| !s.wall_potential.is_none())
    }

    /// True when some species has hard contacts with other particles.
    pub fn has_crowders(&self) -> bool {
        self.species.iter().any(|s| s.crowder)
    }

    /// Volume fraction of the fluid space filled by crowders (the box, or a
    /// cylindrical pore within it).
    pub fn crowder_volume_fraction(&self) -> f64 {
        let filled: f64 = self
            .species
            .iter()
            .filter(|s| s.crowder)
            .map(|s| s.count as f64 * 4.0 / 3.0 * std::f64::consts::PI * s.radius_nm.powi(3))
            .sum();
        let fluid = match self.geometry.as_ref().map(|g| &g.shape) {
            Some(shape @ crate::space::shape::Shape::Cylinder { .. }) => {
                shape.open_fraction(0.0, &self.sim_box.edges_nm)
            }
            _ => 1.0,
        };
        filled / (self.sim_box.edges_nm.iter().product::<f64>() * fluid)
    }

    /// Smallest length over which species `s` meets a contact: its radius at
    /// walls, the contact distance a + a' at a particle it touches, a + b at
    /// a sphere of radius b, a + r_f at a fibre.
    pub fn smallest_feature_nm(&self, s: &Species) -> f64 {
        let mut feature = f64::INFINITY;
        if self.sim_box.periodic.iter().any(|p| !p) {
            feature = feature.min(s.radius_nm);
        }
        // A pair meets at the contact distance a_i + a_j: that is the curvature to resolve.
        for other in self.species.iter().filter(|o| s.crowder || o.crowder) {
            feature = feature.min(s.radius_nm + other.radius_nm);
        }
        if let Some(spec) = &self.obstacles {
            let b_min = match spec {
                ObstacleSpec::Generated {
                    radii: RadiusDistribution::Fixed { radius_nm },
                    ..
                } => *radius_nm,
                ObstacleSpec::Generated {
                    radii: RadiusDistribution::Uniform { min_nm, .. },
                    ..
                } => *min_nm,
                ObstacleSpec::Generated {
                    radii:
                        RadiusDistribution::LogNormal {
                            median_nm, min_nm, ..
                        },
                    ..
                } => {
                    if *min_nm > 0.0 {
                        *min_nm
                    } else {
                        *median_nm
                    }
                }
                ObstacleSpec::File { .. } => 0.0,
            };
            feature = feature.min(s.radius_nm + b_min);
        }
        if let Some(f) = &self.fibres {
            feature = feature.min(s.radius_nm + f.radius_nm);
        }
        if let Some(g) = &self.geometry {
            feature = feature.min(g.shape.smallest_feature_nm(s.radius_nm));
        }
        if feature.is_finite() {
            feature
        } else {
            s.radius_nm
        }
    }

    /// Rule of thumb (common practice, calibrated on this project's own Δt
    /// series at φ = 0.3, REFERENCES.md "Numerics"): the relative bias of a
    /// species' long-time diffusivity from the handling of hard contacts.
    /// With Σ the contact surface per open volume (fixed spheres
    /// n·4π(a + b)²/(1 − φ), walls 1/L per wall, partners n·4π(a + a')²·g(σ⁺)
    /// with Carnahan–Starling's contact value) and ℓ the rms step (relative
    /// step for mobile pairs), rejection costs about 0.4·Σℓ (√Δt) and
    /// reflection about 0.1·Σℓ·ℓ/R at a contact distance R (Δt); measured
    /// within a factor of 2. None when the scenario has no such contacts or
    /// its obstacles are not described by a fixed radius and volume fraction.
    pub fn contact_bias_estimate(&self, s: &Species) -> Option<f64> {
        let step = s.step_rms_nm(self.dt_s);
        let volume: f64 = self.sim_box.edges_nm.iter().product();
        // (Σ·ℓ, Σ·ℓ²/R) summed over kinds of contact.
        let (mut first, mut second) = (0.0, 0.0);
        let mut any = false;
        for k in 0..3 {
            if !self.sim_box.periodic[k] {
                let sigma = 2.0 / self.sim_box.edges_nm[k];
                // A plane wall has no curvature: reflection is exact there.
                first += sigma * step;
                any = true;
            }
        }
        let phi_c = self.crowder_volume_fraction();
        let g = if phi_c < 1.0 {
            (1.0 - 0.5 * phi_c) / (1.0 - phi_c).powi(3)
        } else {
            return None;
        };
        for o in self.species.iter().filter(|o| s.crowder || o.crowder) {
            let count = if std::ptr::eq(o, s) {
                o.count.saturating_sub(1)
            } else {
                o.count
            };
            let r = s.radius_nm + o.radius_nm;
            let sigma = count as f64 / volume * 4.0 * std::f64::consts::PI * r * r * g;
            let rel = (step * step + o.step_rms_nm(self.dt_s).powi(2)).sqrt();
            first += sigma * rel;
            second += sigma * rel * rel / r;
            any = true;
        }
        match &self.obstacles {
            None => {}
            Some(ObstacleSpec::Generated {
                radii: RadiusDistribution::Fixed { radius_nm },
                target: Target::VolumeFraction(phi),
                ..
            }) if *phi < 1.0 => {
                let b = *radius_nm;
                let r = s.radius_nm + b;
                let n = phi / (4.0 / 3.0 * std::f64::consts::PI * b.powi(3));
                let sigma = n * 4.0 * std::f64::consts::PI * r * r / (1.0 - phi);
                first += sigma * step;
                second += sigma * step * step / r;
                any = true;
            }
            Some(_) => return None,
        }
        if self.fibres.is_some() {
            return None;
        }
        any.then_some(match self.contact {
            ContactRule::Reject => REJECT_BIAS_PER_CONTACT_STEP * first,
            ContactRule::Reflect => REFLECT_BIAS_PER_CONTACT_STEP * second,
        })
    }

    /// How hard contacts are handled, in words (for `check`); None without contacts.
    pub fn contact_description(&self) -> Option<String> {
        if !self.has_contacts() {
            return None;
        }
        let how = match (self.contact, self.has_crowders()) {
            (ContactRule::Reflect, false) => "a move is reflected at each contact it meets; bias ∝ Δt",
            (ContactRule::Reflect, true) => {
                "a move is reflected at each contact it meets, crowders collide as hard spheres within the step; bias ∝ Δt"
            }
            (ContactRule::Reject, _) => "a move into overlap is rejected; bias ∝ √Δt",
        };
        if self.pairs.is_some() {
            return Some(format!(
                "{} ({}): soft pairs move by a Metropolis test in index order, a move into overlap is rejected; \
                 equilibrium exact at any Δt, dynamics biased ∝ √Δt at hard contacts",
                self.contact.name(),
                if self.contact_given { "as given" } else { "the default with interactions between particles" }
            ));
        }
        let origin = match (self.contact_given, self.geometry.is_some()) {
            (true, _) => "as given",
            (false, false) => "the default",
            (false, true) => {
                "the default with a [geometry]: reflecting contacts are not available with one yet"
            }
        };
        Some(format!("{} ({origin}): {how}", self.contact.name()))
    }

    /// Warnings a careful user would want before running.
    pub fn warnings(&self) -> Vec<String> {
        let mut out = Vec::new();
        for s in &self.species {
            if let Some(bias) = self
                .contact_bias_estimate(s)
                .filter(|&b| b > CONTACT_BIAS_WARNING)
            {
                out.push(format!(
                    "species '{}': the hard contacts may bias its diffusivity by about {:.1} % at this step \
                     (integrator.contact = \"{}\"; a rule of thumb from the step and the contact density, good to a \
                     factor of 2); {}",
                    s.name,
                    100.0 * bias,
                    self.contact.name(),
                    match self.contact {
                        ContactRule::Reject if self.pairs.is_some() => {
                            "a smaller integrator.dt_s reduces it like √Δt (reflecting contacts are not available with \
                             interactions between particles)"
                        }
                        ContactRule::Reject if self.geometry.is_some() => {
                            "a smaller integrator.dt_s reduces it like √Δt (reflecting contacts, whose bias shrinks like Δt, \
                             are not available with a [geometry] yet)"
                        }
                        ContactRule::Reject => "integrator.contact = \"reflect\" (the default) shrinks this bias like Δt instead of √Δt",
                        ContactRule::Reflect => "a smaller integrator.dt_s reduces it in proportion",
                    }
                ));
            }
        }
        for s in self.species.iter().filter(|_| self.has_contacts()) {
            let step = s.step_rms_nm(self.dt_s);
            let feature = self.smallest_feature_nm(s);
            if step > STEP_WARNING_FRACTION * feature {
                out.push(format!(
                    "species '{}': rms step per axis √(2 D0 Δt) = {:.4} nm is more than a tenth of the \
                     smallest feature ({} nm: radius at a wall, else a contact distance); a smaller integrator.dt_s \
                     reduces the discretisation bias at contacts (common practice)",
                    s.name, step, feature
                ));
            }
        }
        for s in &self.species {
            // A force pushes across walls and contacts: its drift per step must stay below the features they resolve.
            let force = self.force_drift_nm(s);
            let drift = force.iter().map(|f| f * f).sum::<f64>().sqrt();
            let feature = self.smallest_feature_nm(s);
            if drift > STEP_WARNING_FRACTION * feature {
                out.push(format!(
                    "species '{}': its force moves it {:.4} nm per step, more than a tenth of the smallest feature \
                     ({} nm: radius at a wall, else a contact distance); a smaller integrator.dt_s keeps the drift \
                     resolved there (common practice)",
                    s.name, drift, feature
                ));
            }
        }
        for s in self.species.iter().filter(|s| !s.wall_potential.is_none()) {
            // The interaction must not move a particle by more than a tenth of its range in one step (common practice).
            let p = s.wall_potential;
            let per_pn = s.d0_nm2_per_s() * self.dt_s / self.thermal_energy_pn_nm();
            let mut range = f64::INFINITY;
            let mut force: f64 = 0.0;
            if p.electrostatic_pn_nm != 0.0 {
                range = range.min(1.0 / p.kappa_per_nm);
                force = force.max((p.kappa_per_nm * p.electrostatic_pn_nm).abs());
            }
            if p.well_depth_pn_nm != 0.0 {
                range = range.min(p.well_range_nm);
                // Largest slope of ε exp(−(h/w)²), at h = w/√2.
                force = force
                    .max(p.well_depth_pn_nm * (2.0f64).sqrt() / p.well_range_nm * (-0.5f64).exp());
            }
            let drift = force * per_pn;
            let step = s.step_rms_nm(self.dt_s);
            if drift.max(step) > STEP_WARNING_FRACTION * range {
                out.push(format!(
                    "species '{}': its wall interaction acts over {:.4} nm, but one step moves it up to {:.4} nm by the force \
                     and {:.4} nm rms by diffusion, more than a tenth of that range; a smaller integrator.dt_s resolves the \
                     interaction (common practice)",
                    s.name, range, drift, step
                ));
            }
        }
        for s in self.species.iter().filter(|s| !s.body_potential.is_none()) {
            // The bodies' force must not move a particle by more than a tenth of its range in one step (common practice).
            use crate::space::potentials::Facing;
            let p = s.body_potential;
            let kt = self.thermal_energy_pn_nm();
            let per_pn = s.d0_nm2_per_s() * self.dt_s / kt;
            let mut kinds = Vec::new();
            match &self.obstacles {
                Some(ObstacleSpec::Generated { radii, .. }) if radii.max_nm().is_finite() => {
                    kinds.push(Facing::Sphere(radii.max_nm()))
                }
                // Spheres of unknown size: a plane bounds their force.
                Some(_) => kinds.push(Facing::Plane),
                None => {}
            }
            if let Some(f) = &self.fibres {
                kinds.push(Facing::Cylinder(f.radius_nm));
            }
            let mut range = f64::INFINITY;
            if p.kappa_per_nm > 0.0 {
                range = range.min(1.0 / p.kappa_per_nm);
            }
            if p.well_depth_pn_nm != 0.0 {
                range = range.min(p.well_range_nm);
            }
            if p.hamaker_pn_nm != 0.0 {
                range = range.min(p.closest_gap_nm);
            }
            let mut force: f64 = 0.0;
            for facing in kinds {
                let u = p.facing(facing);
                let cut = crate::space::soft::pair_cutoff_nm(
                    &u,
                    crate::space::soft::CUTOFF_TOLERANCE_KT * kt,
                );
                for k in 0..=4000 {
                    force = force.max(u.force_pn(cut * k as f64 / 4000.0).abs());
                }
            }
            let drift = force * per_pn;
            let step = s.step_rms_nm(self.dt_s);
            if drift.max(step) > STEP_WARNING_FRACTION * range {
                out.push(format!(
                    "species '{}': its interaction with obstacles and fibres acts over {:.4} nm, but one step moves it up to \
                     {:.4} nm by the force near contact and {:.4} nm rms by diffusion, more than a tenth of that range; a \
                     smaller integrator.dt_s resolves the interaction (common practice)",
                    s.name, range, drift, step
                ));
            }
        }
        for (a, b, p) in self.pairs.iter().flat_map(|t| t.iter()) {
            // The pair force must not move a particle by more than a tenth of its range in one step (common practice).
            let u = &p.u;
            let mut range = f64::INFINITY;
            if u.electrostatic_pn_nm != 0.0 {
                range = range.min(1.0 / u.kappa_per_nm);
            }
            if u.well_depth_pn_nm != 0.0 {
                range = range.min(u.well_range_nm);
            }
            if u.hamaker_pn_nm != 0.0 {
                range = range.min(u.closest_gap_nm);
            }
            let force = (0..=4000)
                .map(|k| u.force_pn(p.cutoff_gap_nm * k as f64 / 4000.0).abs())
                .fold(0.0, f64::max);
            for s in [&self.species[a], &self.species[b]] {
                let drift = force * s.d0_nm2_per_s() * self.dt_s / self.thermal_energy_pn_nm();
                let step = s.step_rms_nm(self.dt_s);
                if drift.max(step) > STEP_WARNING_FRACTION * range {
                    out.push(format!(
                        "species '{}': its interaction with '{}' acts over {:.4} nm, but one step moves it up to {:.4} nm by \
                         the force near contact and {:.4} nm rms by diffusion, more than a tenth of that range; the Metropolis \
                         test keeps the equilibrium exact, but more moves are rejected and the dynamics coarsen; a smaller \
                         integrator.dt_s resolves the interaction (common practice)",
                        s.name,
                        if std::ptr::eq(s, &self.species[a]) { &self.species[b].name } else { &self.species[a].name },
                        range,
                        drift,
                        step
                    ));
                }
                if a == b {
                    break;
                }
            }
        }
        if let Some(c) = self
            .camera
            .as_ref()
            .filter(|c| c.exposure_s > 0.0 && c.samples_per_exposure < 10)
        {
            let m = c.samples_per_exposure as f64;
            out.push(format!(
                "camera: the exposure of {:e} s is resolved by only {} recorded positions, so the motion blur is that of an \
                 exposure of {:e} s (t_E (1 − 1/m²)); record more often (output.record_every_steps) for a smoother blur",
                c.exposure_s,
                c.samples_per_exposure,
                c.exposure_s * (1.0 - 1.0 / (m * m))
            ));
        }
        if let Some(g) = &self.geometry {
            out.extend(g.warnings(&self.species, self.dt_s, self.flow.is_some()));
        }
        let phi_c = self.crowder_volume_fraction();
        if phi_c > LATTICE_START_FRACTION {
            // Structural relaxation of dense hard spheres takes several Brownian times a²/D0.
            let tau = self
                .species
                .iter()
                .filter(|s| s.crowder)
                .map(|s| s.radius_nm.powi(2) / s.d0_nm2_per_s())
                .fold(0.0, f64::max);
            out.push(format!(
                "crowders fill φ = {phi_c:.4}, above {LATTICE_START_FRACTION}: they start on a face-centred lattice \
                 (random addition jams near φ ≈ 0.38), which must melt before measurements; the first 20 a²/D0 = {:.3e} s \
                 of the run ({:.0} steps) are a transient to leave out of fits (common practice: check that the MSD no \
                 longer depends on the start). Hard spheres freeze above φ ≈ 0.494, where the lattice stays a crystal",
                20.0 * tau,
                20.0 * tau / self.dt_s
            ));
        }
        let total = self.particle_count() as f64 * self.frames() as f64 * 3.0;
        let bytes = total
            * if self.output.precision == Precision::F32 {
                4.0
            } else {
                8.0
            }
            * 1.5;
        if bytes > 20e9 {
            out.push(format!(
                "the trajectory will be about {:.1} GB; raise output.record_every_steps to record fewer frames",
                bytes / 1e9
            ));
        }
        out
    }
}

fn invalid(
    file: &Path,
    key: impl Into<String>,
    value: impl ToString,
    allowed: impl Into<String>,
) -> EngineError {
    EngineError::InvalidValue {
        file: file.to_path_buf(),
        key: key.into(),
        value: value.to_string(),
        allowed: allowed.into(),
    }
}

/// A number as a message shows it: plain when moderate, in e-notation when
/// very large or small (1e300 rather than three hundred digits).
fn show(value: f64) -> String {
    let a = value.abs();
    if a != 0.0 && a.is_finite() && !(1e-4..1e7).contains(&a) {
        format!("{value:e}")
    } else {
        value.to_string()
    }
}

/// Checks that a float is finite and lies within `[lo, hi]` (a physical range).
fn within(file: &Path, key: &str, value: f64, (lo, hi): (f64, f64), unit: &str) -> Result<f64> {
    if value.is_finite() && value >= lo && value <= hi {
        Ok(value)
    } else {
        Err(invalid(
            file,
            key,
            show(value),
            format!("it must be a finite number from {lo:e} to {hi:e} {unit}"),
        ))
    }
}

/// Checks that a float is finite and positive.
fn positive(file: &Path, key: &str, value: f64) -> Result<f64> {
    if value.is_finite() && value > 0.0 {
        Ok(value)
    } else {
        Err(invalid(
            file,
            key,
            show(value),
            "it must be a finite number greater than 0",
        ))
    }
}

impl RawScenario {
    /// Parses TOML text; unknown keys and wrong types are reported with their line.
    ///
    /// # Errors
    /// [`EngineError::EmptyScenario`] or [`EngineError::ParseScenario`].
    pub fn parse(text: &str, path: &Path) -> Result<Self> {
        if text.trim().is_empty() {
            return Err(EngineError::EmptyScenario {
                file: path.to_path_buf(),
            });
        }
        toml::from_str(text).map_err(|e| EngineError::ParseScenario {
            file: path.to_path_buf(),
            message: e.to_string().trim_end().to_string(),
        })
    }

    /// Applies `KEY=VALUE` overrides by dotted path (`species.0.count=10` or
    /// `species.tracer.count=10` for arrays of tables).
    ///
    /// # Errors
    /// [`EngineError::Override`] for a malformed assignment or a key the
    /// scenario format does not have.
    pub fn with_overrides(self, overrides: &[String]) -> Result<Self> {
        if overrides.is_empty() {
            return Ok(self);
        }
        let mut table = toml::Table::try_from(&self).map_err(|e| EngineError::Override {
            assignment: overrides.join(" "),
            reason: format!("internal: the scenario could not be re-encoded ({e})"),
        })?;
        for assignment in overrides {
            apply_override(&mut table, assignment)?;
            // Re-check after each one so the message names the assignment at fault.
            toml::Value::Table(table.clone())
                .try_into::<RawScenario>()
                .map_err(|e| EngineError::Override {
                    assignment: assignment.clone(),
                    reason: e.to_string().trim_end().to_string(),
                })?;
        }
        toml::Value::Table(table)
            .try_into()
            .map_err(|e: toml::de::Error| EngineError::Override {
                assignment: overrides.join(" "),
                reason: e.to_string(),
            })
    }

    /// Validates every value and resolves defaults.
    ///
    /// # Errors
    /// [`EngineError::InvalidValue`] naming the first bad key.
    pub fn validate(&self, file: &Path) -> Result<Scenario> {
        // Charge densities become potentials once; the rest reads potentials only.
        let mut settled = self.clone();
        let charges = settled.settle_charge_densities(file)?;
        settled
            .validate_settled(file, self, charges.clone())
            .map_err(|e| crate::scenario::charge::name_given_keys(e, &charges))
    }

    /// Replaces each surface charge density by the surface potential it
    /// gives (Grahame), returning what was converted.
    fn settle_charge_densities(
        &mut self,
        file: &Path,
    ) -> Result<Vec<crate::scenario::charge::SurfaceCharge>> {
        use crate::scenario::charge::settle_potential;
        let any = self
            .species
            .iter()
            .any(|s| s.surface_charge_density_mc_per_m2.is_some())
            || self
                .geometry
                .as_ref()
                .is_some_and(|g| g.wall_surface_charge_density_mc_per_m2.is_some())
            || self
                .obstacles
                .as_ref()
                .is_some_and(|o| o.surface_charge_density_mc_per_m2.is_some())
            || self
                .fibres
                .as_ref()
                .is_some_and(|f| f.surface_charge_density_mc_per_m2.is_some());
        if !any {
            return Ok(Vec::new());
        }
        let temperature_k = within(
            file,
            "medium.temperature_K",
            self.medium.temperature_k,
            TEMPERATURE_RANGE_K,
            "K",
        )?;
        let medium = crate::scenario::drive::MediumKeys {
            ionic_strength_mol_per_l: self.medium.ionic_strength_mol_per_l,
            relative_permittivity: self.medium.relative_permittivity,
        };
        let mut charges = Vec::new();
        let mut settle = |prefix: &str, potential: &mut Option<f64>, sigma: &mut Option<f64>| {
            let c = settle_potential(
                file,
                prefix,
                potential,
                sigma.take(),
                &medium,
                temperature_k,
            )?;
            charges.extend(c);
            Ok::<(), EngineError>(())
        };
        for (i, s) in self.species.iter_mut().enumerate() {
            settle(
                &format!("species[{i}]."),
                &mut s.surface_potential_mv,
                &mut s.surface_charge_density_mc_per_m2,
            )?;
        }
        if let Some(g) = self.geometry.as_mut() {
            settle(
                "geometry.wall_",
                &mut g.wall_surface_potential_mv,
                &mut g.wall_surface_charge_density_mc_per_m2,
            )?;
        }
        if let Some(o) = self.obstacles.as_mut() {
            settle(
                "obstacles.",
                &mut o.surface_potential_mv,
                &mut o.surface_charge_density_mc_per_m2,
            )?;
        }
        if let Some(f) = self.fibres.as_mut() {
            settle(
                "fibres.",
                &mut f.surface_potential_mv,
                &mut f.surface_charge_density_mc_per_m2,
            )?;
        }
        Ok(charges)
    }

    /// [`RawScenario::validate`] once charge densities are settled into
    /// potentials; `written` is the scenario as given (its resolved text
    /// keeps the charge densities, so it validates again to the same potentials).
    fn validate_settled(
        &self,
        file: &Path,
        written: &RawScenario,
        surface_charges: Vec<crate::scenario::charge::SurfaceCharge>,
    ) -> Result<Scenario> {
        let seed = match self.seed {
            None => 1,
            Some(s) if s >= 0 => s as u64,
            Some(s) => return Err(invalid(file, "seed", s, "it must be a whole number ≥ 0")),
        };

        let temperature_k = within(
            file,
            "medium.temperature_K",
            self.medium.temperature_k,
            TEMPERATURE_RANGE_K,
            "K",
        )?;
        let (viscosity_pa_s, viscosity_is_water) = match self.medium.viscosity_pa_s {
            Some(eta) => (
                within(
                    file,
                    "medium.viscosity_Pa_s",
                    eta,
                    VISCOSITY_RANGE_PA_S,
                    "Pa·s",
                )?,
                false,
            ),
            None => match medium::water_viscosity_pa_s(temperature_k) {
                Some(eta) => (eta, true),
                None => {
                    return Err(invalid(
                        file,
                        "medium.temperature_K",
                        temperature_k,
                        format!(
                            "water viscosity is only known here for liquid water, {} to {} K; \
                             give medium.viscosity_Pa_s for other temperatures or solvents",
                            medium::WATER_T_MIN_K,
                            medium::WATER_T_MAX_K
                        ),
                    ))
                }
            },
        };

        if self.sim_box.edges_nm.len() != 3 {
            return Err(invalid(
                file,
                "box.edges_nm",
                format!("{:?}", self.sim_box.edges_nm),
                "it must list exactly three edge lengths [x, y, z] in nm",
            ));
        }
        let mut edges_nm = [0.0; 3];
        for (k, e) in self.sim_box.edges_nm.iter().enumerate() {
            edges_nm[k] = within(file, &format!("box.edges_nm[{k}]"), *e, EDGE_RANGE_NM, "nm")?;
        }
        let mut periodic = match &self.sim_box.periodic {
            None => [true; 3],
            Some(p) if p.len() == 3 => [p[0], p[1], p[2]],
            Some(p) => {
                return Err(invalid(
                    file,
                    "box.periodic",
                    format!("{p:?}"),
                    "it must list three booleans [x, y, z]",
                ))
            }
        };

        if self.species.is_empty() {
            return Err(invalid(
                file,
                "species",
                "[]",
                "at least one [[species]] entry is needed",
            ));
        }
        let mut species = Vec::with_capacity(self.species.len());
        for (i, s) in self.species.iter().enumerate() {
            let key = |k: &str| format!("species[{i}].{k}");
            let name_ok = !s.name.is_empty()
                && s.name.len() <= 64
                && s.name
                    .chars()
                    .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-');
            if !name_ok {
                return Err(invalid(
                    file,
                    key("name"),
                    format!("{:?}", s.name),
                    "names are 1 to 64 ASCII letters, digits, '_' or '-'",
                ));
            }
            if s.name == "obstacles" {
                return Err(invalid(
                    file,
                    key("name"),
                    "\"obstacles\"",
                    "the name 'obstacles' is reserved for fixed obstacles",
                ));
            }
            if species.iter().any(|o: &Species| o.name == s.name) {
                return Err(invalid(
                    file,
                    key("name"),
                    format!("{:?}", s.name),
                    "species names must be unique",
                ));
            }
            let radius_nm = within(file, &key("radius_nm"), s.radius_nm, RADIUS_RANGE_NM, "nm")?;
            let drag_radius_nm = match s.drag_radius_nm {
                Some(r) => within(file, &key("drag_radius_nm"), r, RADIUS_RANGE_NM, "nm")?,
                None => radius_nm,
            };
            if !(1..=MAX_COUNT).contains(&s.count) {
                return Err(invalid(
                    file,
                    key("count"),
                    s.count,
                    format!("it must be a whole number from 1 to {MAX_COUNT}"),
                ));
            }
            let (d0_m2_per_s, d0_explicit) = match s.diffusivity_m2_per_s {
                Some(d) => (
                    within(
                        file,
                        &key("diffusivity_m2_per_s"),
                        d,
                        DIFFUSIVITY_RANGE_M2_PER_S,
                        "m²/s",
                    )?,
                    true,
                ),
                None => (
                    medium::stokes_einstein_m2_per_s(
                        temperature_k,
                        viscosity_pa_s,
                        drag_radius_nm * 1e-9,
                    ),
                    false,
                ),
            };
            for (k, &edge) in edges_nm.iter().enumerate() {
                if edge <= 2.0 * radius_nm {
                    return Err(invalid(
                        file,
                        format!("box.edges_nm[{k}]"),
                        edge,
                        format!(
                            "the box must be wider than the diameter of species '{}' ({} nm)",
                            s.name,
                            2.0 * radius_nm
                        ),
                    ));
                }
            }
            let crowder = match s.role.as_deref() {
                None | Some("tracer") => false,
                Some("crowder") => true,
                Some(other) => {
                    return Err(invalid(
                        file,
                        key("role"),
                        format!("{other:?}"),
                        "allowed: \"tracer\" (default) or \"crowder\"",
                    ))
                }
            };
            species.push(Species {
                name: s.name.clone(),
                radius_nm,
                drag_radius_nm,
                count: s.count as usize,
                d0_m2_per_s,
                d0_explicit,
                crowder,
                force_pn: [0.0; 3],
                wall_potential: Default::default(),
                binding: None,
                body_potential: Default::default(),
            });
        }

        let dt_s = within(
            file,
            "integrator.dt_s",
            self.integrator.dt_s,
            DT_RANGE_S,
            "s",
        )?;
        if !(1..=MAX_STEPS).contains(&self.integrator.steps) {
            return Err(invalid(
                file,
                "integrator.steps",
                self.integrator.steps,
                format!("it must be a whole number from 1 to {MAX_STEPS}"),
            ));
        }
        let steps = self.integrator.steps as u64;
        let sweep = match self.integrator.sweep.as_deref() {
            None | Some("parallel") => Sweep::Parallel,
            Some("sequential") => Sweep::Sequential,
            Some(other) => {
                return Err(invalid(
                    file,
                    "integrator.sweep",
                    format!("{other:?}"),
                    "allowed: \"parallel\" (default) or \"sequential\"",
                ))
            }
        };
        let contact = match self.integrator.contact.as_deref() {
            // Reflection's bias shrinks like Δt, rejection's like √Δt; a geometry's walls have only rejection yet.
            None if self.geometry.is_some() => ContactRule::Reject,
            None => ContactRule::Reflect,
            Some(text) => ContactRule::parse(text).ok_or_else(|| {
                invalid(
                    file,
                    "integrator.contact",
                    format!("{text:?}"),
                    "allowed: \"reflect\" (the default without a [geometry]) or \"reject\" (the default with one)",
                )
            })?,
        };
        if contact == ContactRule::Reflect && self.geometry.is_some() {
            return Err(invalid(
                file,
                "integrator.contact",
                "\"reflect\"",
                "reflecting contacts are not implemented with a [geometry] (walls, pores, membranes) yet; \
                 use \"reject\" there, or a box with walls on box.periodic",
            ));
        }
        // A geometry decides which axes are walled, so it comes before anything that uses the box.
        let geometry = match &self.geometry {
            None => None,
            Some(g) => {
                let geometry = Geometry::from_raw(
                    g,
                    file,
                    self.sim_box.periodic.as_deref(),
                    &edges_nm,
                    &species,
                    steps as f64 * dt_s,
                )?;
                periodic = geometry.periodic();
                Some(geometry)
            }
        };
        let crowd_box = SimBox { edges_nm, periodic };
        let obstacles = match &self.obstacles {
            None => None,
            Some(o) => Some(validate_obstacles(o, file, &crowd_box)?),
        };
        let max_species_radius = species.iter().map(|s| s.radius_nm).fold(0.0, f64::max);
        let fibres = match &self.fibres {
            None => None,
            Some(f) => Some(validate_fibres(f, file, &crowd_box, max_species_radius)?),
        };
        for (i, (s, raw)) in species.iter_mut().zip(&self.species).enumerate() {
            s.binding = species_binding(
                file,
                i,
                &BindingKeys {
                    layer_nm: raw.binding_layer_nm,
                    on_rate_per_s: raw.binding_rate_per_s,
                    off_rate_per_s: raw.unbinding_rate_per_s,
                },
                &BindingContext {
                    crowders: self
                        .species
                        .iter()
                        .any(|r| r.role.as_deref() == Some("crowder")),
                    geometry: geometry.is_some(),
                    obstacles: obstacles.is_some() || fibres.is_some(),
                    periodic: periodic.iter().all(|&p| p),
                },
            )?;
        }
        let flow = self.validate_drive(
            file,
            &mut species,
            temperature_k,
            geometry.as_ref(),
            viscosity_pa_s,
            obstacles.is_some() || fibres.is_some(),
            &periodic,
        )?;
        let pair_keys: Vec<crate::scenario::pairs::PairKeys> = self
            .species
            .iter()
            .map(|raw| crate::scenario::pairs::PairKeys {
                surface_potential_mv: raw.surface_potential_mv,
                hamaker_zj: raw.hamaker_constant_zj,
                vdw_closest_gap_nm: raw.vdw_closest_gap_nm,
                well_depth_kt: raw.pair_well_depth_kt,
                well_range_nm: raw.pair_well_range_nm,
            })
            .collect();
        let pairs = crate::scenario::pairs::pair_table(
            file,
            &species,
            &pair_keys,
            &crate::scenario::pairs::PairSetting {
                medium: crate::scenario::drive::MediumKeys {
                    ionic_strength_mol_per_l: self.medium.ionic_strength_mol_per_l,
                    relative_permittivity: self.medium.relative_permittivity,
                },
                temperature_k,
                has_geometry: geometry.is_some(),
                has_bodies: obstacles.is_some() || fibres.is_some(),
                edges_nm: &edges_nm,
                periodic: &periodic,
            },
        )?;
        // Soft pairs move by a Metropolis test in index order: rejection, one sweep.
        let (contact, sweep) = if pairs.is_some() {
            if self.integrator.contact.as_deref() == Some("reflect") {
                return Err(invalid(
                    file,
                    "integrator.contact",
                    "\"reflect\"",
                    "particles with soft interactions between them move by a Metropolis test on each proposal: \
                     use \"reject\" (the default for them)",
                ));
            }
            if self.integrator.sweep.as_deref() == Some("parallel") {
                return Err(invalid(
                    file,
                    "integrator.sweep",
                    "\"parallel\"",
                    "particles with soft interactions between them move one at a time in index order: \
                     use \"sequential\" (the default for them)",
                ));
            }
            (ContactRule::Reject, Sweep::Sequential)
        } else {
            (contact, sweep)
        };
        if species.iter().any(|s| s.crowder) {
            let min_edge = edges_nm.iter().cloned().fold(f64::INFINITY, f64::min);
            if min_edge <= 4.0 * max_species_radius {
                return Err(invalid(
                    file,
                    "box.edges_nm",
                    format!("{:?}", self.sim_box.edges_nm),
                    format!(
                        "with crowders every edge must exceed twice the largest contact distance, 4 × {max_species_radius} nm, \
                         so that each pair has one nearest image"
                    ),
                ));
            }
        }

        let record_every_steps = match self.output.record_every_steps {
            None => (steps / 100).max(1),
            Some(r) if r >= 1 && (r as u64) <= steps && steps % (r as u64) == 0 => r as u64,
            Some(r) => {
                return Err(invalid(
                    file,
                    "output.record_every_steps",
                    r,
                    format!(
                        "it must be a whole number ≥ 1 that divides integrator.steps = {steps}"
                    ),
                ))
            }
        };
        let precision = match self.output.precision.as_deref() {
            None | Some("f32") => Precision::F32,
            Some("f64") => Precision::F64,
            Some(other) => {
                return Err(invalid(
                    file,
                    "output.precision",
                    format!("{other:?}"),
                    "allowed: \"f32\" or \"f64\"",
                ))
            }
        };
        check_steps_resolvable(
            file,
            &species,
            &edges_nm,
            dt_s,
            record_every_steps,
            precision,
        )?;
        let checkpoint_interval_s = match self.output.checkpoint_interval_s {
            None => 5.0,
            Some(c) => positive(file, "output.checkpoint_interval_s", c)?,
        };
        if let Some(f) = &self.output.file {
            if f.trim().is_empty()
                || f.ends_with('/')
                || file.parent().unwrap_or(Path::new(".")).join(f).is_dir()
            {
                return Err(invalid(
                    file,
                    "output.file",
                    format!("{f:?}"),
                    "a path to a trajectory file such as \"run.h5\" (relative to the scenario), not empty and not a folder",
                ));
            }
        }
        let output = OutputSpec {
            // Relative to the scenario file, as every other path in it.
            file: self.output.file.as_ref().map(PathBuf::from).map(|path| {
                if path.is_relative() {
                    file.parent().map(|d| d.join(&path)).unwrap_or(path)
                } else {
                    path
                }
            }),
            record_every_steps,
            precision,
            checkpoint_interval_s,
        };

        let camera = match &self.camera {
            Some(c) => {
                Some(c.validate(file, &edges_nm, &species, dt_s, steps, record_every_steps)?)
            }
            None => None,
        };

        let mut resolved = written.clone();
        resolved.seed = Some(seed as i64);
        resolved.medium.viscosity_pa_s = Some(viscosity_pa_s);
        resolved.sim_box.periodic = Some(periodic.to_vec());
        resolved.output.record_every_steps = Some(record_every_steps as i64);
        resolved.output.precision = Some(
            if precision == Precision::F32 {
                "f32"
            } else {
                "f64"
            }
            .into(),
        );
        resolved.output.checkpoint_interval_s = Some(checkpoint_interval_s);
        resolved.integrator.sweep = Some(
            if sweep == Sweep::Parallel {
                "parallel"
            } else {
                "sequential"
            }
            .into(),
        );
        resolved.integrator.contact = Some(contact.name().into());
        if let Some(o) = resolved.obstacles.as_mut() {
            if o.placement != "file" && o.radius_distribution.is_none() {
                o.radius_distribution = Some("fixed".into());
            }
        }
        if let (Some(f), Some(spec)) = (resolved.fibres.as_mut(), &fibres) {
            f.length_nm = Some(spec.length_nm);
            if f.orientation.is_none() {
                f.orientation = Some("isotropic".into());
            }
        }
        if let (Some(g), Some(spec)) = (resolved.geometry.as_mut(), &geometry) {
            g.wall_hydrodynamics = Some(spec.hydrodynamics.is_some());
            if let Some(m) = spec.hydrodynamics {
                g.perpendicular_model = Some(
                    if m == crate::space::mobility::PerpendicularModel::Brenner {
                        "brenner"
                    } else {
                        "bevan_prieve"
                    }
                    .into(),
                );
            }
            if let crate::space::shape::Shape::Membrane(m) = &spec.shape {
                g.top_concentration_mol_per_m3 = Some(m.top_concentration_mol_per_m3);
                g.bottom_concentration_mol_per_m3 = Some(m.bottom_concentration_mol_per_m3);
                g.flux_after_s = Some(spec.flux_after_s);
                if g.pores_file.is_none() {
                    g.pores_x = Some(g.pores_x.unwrap_or(1));
                    g.pores_y = Some(g.pores_y.unwrap_or(1));
                }
            }
        }
        let resolved_toml = toml::to_string(&resolved).map_err(|e| {
            invalid(
                file,
                "(whole scenario)",
                e,
                "a scenario that can be written back as TOML",
            )
        })?;

        let scenario = Scenario {
            source: file.to_path_buf(),
            seed,
            temperature_k,
            viscosity_pa_s,
            viscosity_is_water,
            sim_box: SimBox { edges_nm, periodic },
            species,
            dt_s,
            steps,
            output,
            camera,
            obstacles,
            fibres,
            sweep,
            contact,
            contact_given: self.integrator.contact.is_some(),
            geometry,
            flow,
            pairs,
            surface_charges,
            resolved_toml,
        };
        Ok(scenario)
    }
}

impl RawScenario {
    /// Validates `[flow]`, `[forces]` and each species' force and wall
    /// interaction keys, storing each species' total force and wall
    /// potential; returns the flow.
    #[allow(clippy::too_many_arguments)]
    fn validate_drive(
        &self,
        file: &Path,
        species: &mut [Species],
        temperature_k: f64,
        geometry: Option<&Geometry>,
        viscosity_pa_s: f64,
        has_obstacles: bool,
        periodic: &[bool; 3],
    ) -> Result<Option<FlowSpec>> {
        if let Some(f) = &self.forces {
            validate_forces(file, f)?;
        }
        let medium_density = match self.medium.density_kg_per_m3 {
            None => None,
            Some(d) => Some(positive(file, "medium.density_kg_per_m3", d)?),
        };
        let has_crowders = species.iter().any(|s| s.crowder);
        let bodies = crate::scenario::drive::Bodies {
            spheres: self.obstacles.is_some(),
            fibres: self.fibres.is_some(),
            sphere_potential_mv: self.obstacles.as_ref().and_then(|o| o.surface_potential_mv),
            fibre_potential_mv: self.fibres.as_ref().and_then(|f| f.surface_potential_mv),
        };
        // In an open crowd a species' potential and Hamaker constant act between particles (pairs.rs).
        let pairs_take = crate::scenario::pairs::pairs_take_species_keys(
            species,
            geometry.is_some(),
            bodies.spheres || bodies.fibres,
        );
        for (i, (s, raw)) in species.iter_mut().zip(&self.species).enumerate() {
            let force_pn = match &raw.force_pn {
                None => None,
                Some(v) if v.len() == 3 => Some([v[0], v[1], v[2]]),
                Some(v) => {
                    return Err(invalid(
                        file,
                        format!("species[{i}].force_pN"),
                        format!("{v:?}"),
                        "it must list three components [x, y, z] in pN",
                    ))
                }
            };
            if let Some(d) = raw.density_kg_per_m3 {
                positive(file, &format!("species[{i}].density_kg_per_m3"), d)?;
            }
            let keys = SpeciesDriveKeys {
                force_pn,
                density_kg_per_m3: raw.density_kg_per_m3,
                charge_e: raw.charge_e,
            };
            s.force_pn = species_force_pn(file, i, s, &keys, self.forces.as_ref(), medium_density)?;
            s.wall_potential = crate::scenario::drive::species_wall_potential(
                file,
                i,
                s,
                &crate::scenario::drive::WallKeys {
                    surface_potential_mv: raw.surface_potential_mv.filter(|_| !pairs_take),
                    wall_well_depth_kt: raw.wall_well_depth_kt,
                    wall_well_range_nm: raw.wall_well_range_nm,
                    hamaker_zj: raw.hamaker_constant_zj,
                    vdw_closest_gap_nm: raw.vdw_closest_gap_nm,
                },
                &crate::scenario::drive::MediumKeys {
                    ionic_strength_mol_per_l: self.medium.ionic_strength_mol_per_l,
                    relative_permittivity: self.medium.relative_permittivity,
                },
                temperature_k,
                geometry,
                self.geometry
                    .as_ref()
                    .and_then(|g| g.wall_surface_potential_mv),
                bodies.sphere_potential_mv.is_some() || bodies.fibre_potential_mv.is_some(),
            )?;
            s.body_potential = crate::scenario::drive::species_body_potential(
                file,
                i,
                s,
                &crate::scenario::drive::BodyKeys {
                    surface_potential_mv: raw.surface_potential_mv,
                    hamaker_zj: raw.hamaker_constant_zj,
                    vdw_closest_gap_nm: raw.vdw_closest_gap_nm,
                    well_depth_kt: raw.obstacle_well_depth_kt,
                    well_range_nm: raw.obstacle_well_range_nm,
                },
                &crate::scenario::drive::MediumKeys {
                    ionic_strength_mol_per_l: self.medium.ionic_strength_mol_per_l,
                    relative_permittivity: self.medium.relative_permittivity,
                },
                temperature_k,
                &bodies,
                geometry.is_some(),
                has_crowders,
            )?;
            if s.binding.is_some() && (!s.body_potential.is_none() || s.force_pn != [0.0; 3]) {
                // The binding model's exact K assumes a uniform free density in the open space.
                return Err(invalid(
                    file,
                    format!("species[{i}].binding_layer_nm"),
                    "(given)",
                    "binding cannot be combined with soft obstacle interactions or a force yet: the binding model's \
                     K = p_on/p_off · V_layer/V_open needs a uniform free density; use an obstacle well \
                     (obstacle_well_depth_kT) or binding, not both",
                ));
            }
            if s.force_pn != [0.0; 3] {
                let refuse = if s.crowder || has_crowders {
                    Some("forces are not available with crowders yet (the crowd's step has no drift)")
                } else if matches!(
                    geometry.map(|g| &g.shape),
                    Some(crate::space::shape::Shape::Membrane(_))
                ) {
                    Some("forces are not available in a membrane yet (its baths assume free diffusion at their faces)")
                } else {
                    None
                };
                if let Some(reason) = refuse {
                    return Err(invalid(
                        file,
                        format!("species[{i}] (force)"),
                        format!("{:?} pN", s.force_pn),
                        reason,
                    ));
                }
            }
        }
        if let Some(psi) = self
            .geometry
            .as_ref()
            .and_then(|g| g.wall_surface_potential_mv)
        {
            if self
                .species
                .iter()
                .all(|s| s.surface_potential_mv.is_none())
            {
                return Err(invalid(
                    file,
                    "geometry.wall_surface_potential_mV",
                    psi,
                    "no species carries surface_potential_mV (or surface_charge_density_mC_per_m2), so the walls' potential would act on nothing",
                ));
            }
        }
        for (key, psi) in [
            ("obstacles.surface_potential_mV", bodies.sphere_potential_mv),
            ("fibres.surface_potential_mV", bodies.fibre_potential_mv),
        ] {
            if let Some(psi) = psi {
                if self
                    .species
                    .iter()
                    .all(|s| s.surface_potential_mv.is_none())
                {
                    return Err(invalid(
                        file,
                        key,
                        psi,
                        "no species carries surface_potential_mV (or surface_charge_density_mC_per_m2), so this potential would act on nothing",
                    ));
                }
            }
        }
        let Some(raw) = &self.flow else {
            return Ok(None);
        };
        let flow = validate_flow(
            file,
            raw,
            geometry,
            viscosity_pa_s,
            has_obstacles,
            has_crowders,
        )?;
        if matches!(flow, FlowSpec::Shear { .. }) && !(periodic[0] && periodic[2]) {
            return Err(invalid(
                file,
                "box.periodic",
                format!("{periodic:?}"),
                "uniform shear (u along x, varying along z) needs a box periodic in x and z",
            ));
        }
        Ok(Some(flow))
    }
}

/// Refuses a time step whose rms step crosses the box in one go, or whose
/// motion is lost to rounding at the box size (in f64 while integrating, in
/// the output precision per recorded frame).
fn check_steps_resolvable(
    file: &Path,
    species: &[Species],
    edges_nm: &[f64; 3],
    dt_s: f64,
    record_every_steps: u64,
    precision: Precision,
) -> Result<()> {
    let min_edge = edges_nm.iter().cloned().fold(f64::INFINITY, f64::min);
    let max_edge = edges_nm.iter().cloned().fold(0.0, f64::max);
    let output_eps = match precision {
        Precision::F32 => f64::from(f32::EPSILON),
        Precision::F64 => f64::EPSILON,
    };
    for s in species {
        let step = s.step_rms_nm(dt_s);
        if !(step.is_finite() && step < min_edge) {
            return Err(invalid(
                file,
                "integrator.dt_s",
                dt_s,
                format!(
                    "species '{}' would move {step:e} nm (rms per axis) in one step, more than the smallest box edge {min_edge} nm; \
                     lower integrator.dt_s or enlarge box.edges_nm",
                    s.name
                ),
            ));
        }
        let f64_floor = RESOLVE_ULPS * f64::EPSILON * max_edge;
        if step < f64_floor {
            return Err(invalid(
                file,
                "integrator.dt_s",
                dt_s,
                format!(
                    "species '{}' would move {step:e} nm (rms per axis) per step, below what f64 resolves at a box edge of {max_edge} nm \
                     (at least {f64_floor:e} nm); raise integrator.dt_s or shrink box.edges_nm",
                    s.name
                ),
            ));
        }
        let frame_step = s.step_rms_nm(dt_s * record_every_steps as f64);
        let out_floor = RESOLVE_ULPS * output_eps * max_edge;
        if frame_step < out_floor {
            return Err(invalid(
                file,
                "output.precision",
                format!("\"{}\"", if precision == Precision::F32 { "f32" } else { "f64" }),
                format!(
                    "species '{}' moves {frame_step:e} nm (rms per axis) between recorded frames, below what this precision resolves at a box edge of {max_edge} nm \
                     (at least {out_floor:e} nm); use output.precision = \"f64\", raise output.record_every_steps or integrator.dt_s, or shrink box.edges_nm",
                    s.name
                ),
            ));
        }
    }
    Ok(())
}

/// Exactly one of a volume fraction and a count, validated.
fn target(
    file: &Path,
    section: &str,
    volume_fraction: Option<f64>,
    count: Option<i64>,
) -> Result<Target> {
    match (volume_fraction, count) {
        (Some(phi), None) => {
            if phi.is_finite() && phi > 0.0 && phi < 1.0 {
                Ok(Target::VolumeFraction(phi))
            } else {
                Err(invalid(
                    file,
                    format!("{section}.volume_fraction"),
                    phi,
                    "an impossible fraction: it must lie strictly between 0 and 1",
                ))
            }
        }
        (None, Some(n)) => {
            if (1..=MAX_OBSTACLES).contains(&n) {
                Ok(Target::Count(n as usize))
            } else {
                Err(invalid(
                    file,
                    format!("{section}.count"),
                    n,
                    format!("it must be a whole number from 1 to {MAX_OBSTACLES}"),
                ))
            }
        }
        (Some(phi), Some(n)) => Err(invalid(
            file,
            format!("{section}.count"),
            n,
            format!(
                "give either {section}.volume_fraction (here {phi}) or {section}.count, not both"
            ),
        )),
        (None, None) => Err(invalid(
            file,
            format!("{section}.volume_fraction"),
            "(missing)",
            format!("give {section}.volume_fraction or {section}.count"),
        )),
    }
}

/// Validates `[obstacles]`.
fn validate_obstacles(o: &RawObstacles, file: &Path, sim_box: &SimBox) -> Result<ObstacleSpec> {
    let unused = |key: &str, why: &str| {
        invalid(file, format!("obstacles.{key}"), "(given)", why.to_string())
    };
    let generator = match o.placement.as_str() {
        "random" => Generator::RandomSequential,
        "poisson" => Generator::Poisson,
        "simple_cubic" => Generator::SimpleCubic,
        "fcc" => Generator::FaceCentredCubic,
        "file" => {
            let name = o
                .file
                .as_deref()
                .ok_or_else(|| invalid(file, "obstacles.file", "(missing)", "placement = \"file\" needs obstacles.file, a CSV of x_nm,y_nm,z_nm,radius_nm"))?;
            let why = "it is not used with placement = \"file\" (the file gives centres and radii)";
            for (key, given) in [
                ("volume_fraction", o.volume_fraction.is_some()),
                ("count", o.count.is_some()),
                ("radius_nm", o.radius_nm.is_some()),
                ("radius_distribution", o.radius_distribution.is_some()),
                ("radius_min_nm", o.radius_min_nm.is_some()),
                ("radius_max_nm", o.radius_max_nm.is_some()),
                ("radius_log_sd", o.radius_log_sd.is_some()),
            ] {
                if given {
                    return Err(unused(key, why));
                }
            }
            let path = PathBuf::from(name);
            // Inputs named by a scenario travel with it: relative paths start at its folder.
            let path = if path.is_relative() { file.parent().map(|d| d.join(&path)).unwrap_or(path) } else { path };
            return Ok(ObstacleSpec::File { path, allow_overlap: o.allow_overlap.unwrap_or(false) });
        }
        other => {
            return Err(invalid(
                file,
                "obstacles.placement",
                format!("{other:?}"),
                "allowed: \"random\" (non-overlapping, random sequential addition), \"poisson\" (overlapping), \"simple_cubic\", \"fcc\" or \"file\"",
            ))
        }
    };
    for (key, given) in [
        ("file", o.file.is_some()),
        ("allow_overlap", o.allow_overlap.is_some()),
    ] {
        if given {
            return Err(unused(key, "it is only used with placement = \"file\""));
        }
    }
    let target = target(file, "obstacles", o.volume_fraction, o.count)?;
    let only = |key: &str, given: bool, dist: &str| -> Result<()> {
        if given {
            Err(unused(
                key,
                &format!("it is not used with radius_distribution = \"{dist}\""),
            ))
        } else {
            Ok(())
        }
    };
    let need = |key: &str, v: Option<f64>, dist: &str| -> Result<f64> {
        let v = v.ok_or_else(|| {
            invalid(
                file,
                format!("obstacles.{key}"),
                "(missing)",
                format!("radius_distribution = \"{dist}\" needs obstacles.{key}"),
            )
        })?;
        positive(file, &format!("obstacles.{key}"), v)
    };
    let radii = match o.radius_distribution.as_deref().unwrap_or("fixed") {
        "fixed" => {
            only("radius_min_nm", o.radius_min_nm.is_some(), "fixed")?;
            only("radius_max_nm", o.radius_max_nm.is_some(), "fixed")?;
            only("radius_log_sd", o.radius_log_sd.is_some(), "fixed")?;
            RadiusDistribution::Fixed {
                radius_nm: need("radius_nm", o.radius_nm, "fixed")?,
            }
        }
        "uniform" => {
            only("radius_nm", o.radius_nm.is_some(), "uniform")?;
            only("radius_log_sd", o.radius_log_sd.is_some(), "uniform")?;
            let min_nm = need("radius_min_nm", o.radius_min_nm, "uniform")?;
            let max_nm = need("radius_max_nm", o.radius_max_nm, "uniform")?;
            if max_nm < min_nm {
                return Err(invalid(
                    file,
                    "obstacles.radius_max_nm",
                    max_nm,
                    format!("it must be at least obstacles.radius_min_nm = {min_nm}"),
                ));
            }
            RadiusDistribution::Uniform { min_nm, max_nm }
        }
        "lognormal" => {
            let median_nm = need("radius_nm", o.radius_nm, "lognormal")?;
            let log_sd = need("radius_log_sd", o.radius_log_sd, "lognormal")?;
            let min_nm = match o.radius_min_nm {
                Some(v) => positive(file, "obstacles.radius_min_nm", v)?,
                None => 0.0,
            };
            let max_nm = match o.radius_max_nm {
                Some(v) => positive(file, "obstacles.radius_max_nm", v)?,
                None => f64::INFINITY,
            };
            if max_nm <= min_nm {
                return Err(invalid(
                    file,
                    "obstacles.radius_max_nm",
                    max_nm,
                    format!("it must exceed obstacles.radius_min_nm = {min_nm}"),
                ));
            }
            RadiusDistribution::LogNormal {
                median_nm,
                log_sd,
                min_nm,
                max_nm,
            }
        }
        other => {
            return Err(invalid(
                file,
                "obstacles.radius_distribution",
                format!("{other:?}"),
                "allowed: \"fixed\" (default), \"uniform\" or \"lognormal\"",
            ))
        }
    };
    let min_edge = sim_box
        .edges_nm
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min);
    let r_max = radii.max_nm();
    if r_max.is_finite() && 2.0 * r_max >= min_edge {
        let key = if matches!(radii, RadiusDistribution::Fixed { .. }) {
            "obstacles.radius_nm"
        } else {
            "obstacles.radius_max_nm"
        };
        return Err(invalid(
            file,
            key,
            r_max,
            format!("obstacles must be smaller than the box: the diameter must stay below the smallest edge, {min_edge} nm"),
        ));
    }
    Ok(ObstacleSpec::Generated {
        generator,
        radii,
        target,
    })
}

/// Validates `[fibres]`; `max_species_radius_nm` bounds the reach of a fibre's excluded region.
fn validate_fibres(
    f: &RawFibres,
    file: &Path,
    sim_box: &SimBox,
    max_species_radius_nm: f64,
) -> Result<FibreSpec> {
    let radius_nm = positive(file, "fibres.radius_nm", f.radius_nm)?;
    let target = target(file, "fibres", f.volume_fraction, f.count)?;
    let orientation = match f.orientation.as_deref().unwrap_or("isotropic") {
        "isotropic" => {
            if f.axis.is_some() {
                return Err(invalid(
                    file,
                    "fibres.axis",
                    "(given)",
                    "it is only used with orientation = \"aligned\"",
                ));
            }
            Orientation::Isotropic
        }
        "aligned" => {
            let axis = match f.axis.as_deref().unwrap_or("z") {
                "x" => 0,
                "y" => 1,
                "z" => 2,
                other => {
                    return Err(invalid(
                        file,
                        "fibres.axis",
                        format!("{other:?}"),
                        "allowed: \"x\", \"y\" or \"z\"",
                    ))
                }
            };
            Orientation::Aligned { axis }
        }
        other => {
            return Err(invalid(
                file,
                "fibres.orientation",
                format!("{other:?}"),
                "allowed: \"isotropic\" (default) or \"aligned\"",
            ))
        }
    };
    let min_edge = sim_box
        .edges_nm
        .iter()
        .cloned()
        .fold(f64::INFINITY, f64::min);
    let longest = match orientation {
        Orientation::Isotropic => min_edge,
        Orientation::Aligned { axis } => sim_box.edges_nm[axis],
    };
    let length_nm = match f.length_nm {
        None => longest,
        Some(l) => {
            let l = positive(file, "fibres.length_nm", l)?;
            if l > longest {
                return Err(invalid(
                    file,
                    "fibres.length_nm",
                    l,
                    format!("a fibre may be at most {longest} nm long here (the box edge it could lie along), so that it does not meet its own periodic image"),
                ));
            }
            l
        }
    };
    if 2.0 * (radius_nm + max_species_radius_nm) >= min_edge {
        return Err(invalid(
            file,
            "fibres.radius_nm",
            radius_nm,
            format!(
                "fibre plus particle radius must stay below half the smallest box edge ({} nm)",
                0.5 * min_edge
            ),
        ));
    }
    Ok(FibreSpec {
        radius_nm,
        length_nm,
        orientation,
        target,
    })
}

/// Applies one `a.b.c=value` assignment to a TOML table.
fn apply_override(table: &mut toml::Table, assignment: &str) -> Result<()> {
    let fail = |reason: String| EngineError::Override {
        assignment: assignment.to_string(),
        reason,
    };
    let (path, value_text) = assignment
        .split_once('=')
        .ok_or_else(|| fail("expected KEY=VALUE, e.g. integrator.steps=1000".into()))?;
    let parts: Vec<&str> = path.trim().split('.').map(str::trim).collect();
    if parts.iter().any(|p| p.is_empty()) {
        return Err(fail(
            "the key is empty or has an empty part; use a dotted path such as medium.temperature_K"
                .into(),
        ));
    }
    set_in_table(table, &parts, parse_value(value_text.trim())).map_err(fail)
}

/// Sets `parts` (a dotted path) to `value`, creating sections on the way; an
/// array of tables is indexed by position or by its entries' `name` key.
fn set_in_table(
    table: &mut toml::Table,
    parts: &[&str],
    value: toml::Value,
) -> std::result::Result<(), String> {
    let (head, rest) = parts.split_first().ok_or("empty key")?;
    if rest.is_empty() {
        table.insert((*head).to_string(), value);
        return Ok(());
    }
    let entry = table
        .entry((*head).to_string())
        .or_insert_with(|| toml::Value::Table(toml::Table::new()));
    match entry {
        toml::Value::Table(t) => set_in_table(t, rest, value),
        toml::Value::Array(items) => {
            let (selector, inner) = rest.split_first().ok_or("empty key")?;
            if inner.is_empty() {
                return Err(format!(
                    "name a key inside `{head}.{selector}`, e.g. {head}.{selector}.count"
                ));
            }
            let index = match selector.parse::<usize>() {
                Ok(i) => i,
                Err(_) => items
                    .iter()
                    .position(|v| v.get("name").and_then(|n| n.as_str()) == Some(*selector))
                    .ok_or_else(|| format!("`{head}` has no entry named '{selector}'"))?,
            };
            let len = items.len();
            match items.get_mut(index) {
                Some(toml::Value::Table(t)) => set_in_table(t, inner, value),
                Some(_) => Err(format!("`{head}.{selector}` is not a section")),
                None => Err(format!(
                    "`{head}` has {len} entries; index {index} is out of range"
                )),
            }
        }
        _ => Err(format!("`{head}` is a value, not a section")),
    }
}

/// A value as TOML if it parses (numbers, booleans, arrays, quoted strings),
/// otherwise as a bare string.
fn parse_value(text: &str) -> toml::Value {
    match format!("v = {text}").parse::<toml::Table>() {
        Ok(mut t) => t
            .remove("v")
            .unwrap_or_else(|| toml::Value::String(text.to_string())),
        Err(_) => toml::Value::String(text.to_string()),
    }
}

/// `[camera]`: the synthetic microscope of `thicket tracks`, as written.
///
/// The camera looks at a trajectory recorded every
/// `output.record_every_steps × integrator.dt_s` (the recording interval),
/// which must resolve the exposure: frame interval and exposure are whole
/// multiples of it.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawCamera {
    /// Time between the starts of consecutive frames, s.
    pub frame_interval_s: f64,
    /// Exposure of each frame, s, starting at the frame start (default: the
    /// frame interval; 0 means instantaneous snapshots without blur).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub exposure_s: Option<f64>,
    /// Gaussian localisation error per lateral axis, nm (default 0; not
    /// together with `[camera.photons]`).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub localisation_sigma_nm: Option<f64>,
    /// Gaussian localisation error along z, nm, for `projection = "3d"`
    /// (default: the lateral error of each detection).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub localisation_sigma_z_nm: Option<f64>,
    /// Field of view [x, y], nm, centred on the box (default: the whole box).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub field_of_view_nm: Option<Vec<f64>>,
    /// Height of the focal plane, nm (default: the middle of the box along z).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub focal_plane_z_nm: Option<f64>,
    /// Half-depth z_f of the focal slab, nm: a particle further than z_f from
    /// the focal plane is not detected (default: no limit).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub focal_depth_nm: Option<f64>,
    /// Mean photobleaching lifetime of a fluorophore, s (default: no bleaching).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub bleach_lifetime_s: Option<f64>,
    /// Blinking: rate of switching from emitting to dark, 1/s (default: no blinking).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub blink_on_to_off_per_s: Option<f64>,
    /// Blinking: rate of switching from dark back to emitting, 1/s.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub blink_off_to_on_per_s: Option<f64>,
    /// "2d" (default: x, y reported) or "3d" (x, y, z reported).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub projection: Option<String>,
    /// Names of the species that carry a fluorescent label (default: all);
    /// the others, e.g. crowders, are not seen.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub labelled_species: Option<Vec<String>>,
    /// Photon-limited localisation error instead of a fixed σ.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub photons: Option<RawPhotons>,
}

/// `[camera.photons]`: what sets a photon-limited localisation error.
#[derive(Debug, Clone, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawPhotons {
    /// Photons collected from the particle in one detection.
    pub photons_per_detection: f64,
    /// Standard deviation of the point-spread function, nm.
    pub psf_sigma_nm: f64,
    /// Camera pixel size in the sample plane, nm.
    pub pixel_size_nm: f64,
    /// Background photons per pixel per frame (default 0).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub background_photons_per_pixel: Option<f64>,
}

/// Coordinates a camera reports.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Projection {
    /// x and y (a widefield image).
    TwoD,
    /// x, y and z (3D localisation).
    ThreeD,
}

impl Projection {
    /// Number of reported coordinates.
    pub fn dims(self) -> usize {
        match self {
            Projection::TwoD => 2,
            Projection::ThreeD => 3,
        }
    }
}

/// How the localisation error of a detection is set.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LocalisationNoise {
    /// A fixed Gaussian σ per lateral axis, nm.
    Fixed {
        /// σ, nm.
        sigma_nm: f64,
    },
    /// σ from the photon count (formula in `thicket_analysis::camera`).
    PhotonLimited {
        /// Photons per detection.
        photons_per_detection: f64,
        /// PSF standard deviation, nm.
        psf_sigma_nm: f64,
        /// Pixel size, nm.
        pixel_size_nm: f64,
        /// Background photons per pixel.
        background_photons_per_pixel: f64,
    },
}

/// Two-state blinking rates.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Blinking {
    /// Emitting → dark, 1/s.
    pub on_to_off_per_s: f64,
    /// Dark → emitting, 1/s.
    pub off_to_on_per_s: f64,
}

/// A validated `[camera]`.
#[derive(Debug, Clone, PartialEq)]
pub struct CameraSpec {
    /// Time between frame starts, s.
    pub frame_interval_s: f64,
    /// Exposure, s (0: instantaneous).
    pub exposure_s: f64,
    /// Interval between recorded positions, s.
    pub recording_interval_s: f64,
    /// Recorded positions per frame interval.
    pub samples_per_frame: usize,
    /// Recorded positions averaged into one detection (1 when the exposure is 0).
    pub samples_per_exposure: usize,
    /// Frames whose exposure lies inside the run.
    pub frames: usize,
    /// Lateral localisation error.
    pub noise: LocalisationNoise,
    /// Axial localisation error, nm, if given.
    pub sigma_z_nm: Option<f64>,
    /// Field of view as [[x_lo, x_hi], [y_lo, y_hi]], nm, in box coordinates.
    pub field_of_view_nm: [[f64; 2]; 2],
    /// Focal slab [z_lo, z_hi], nm, if limited.
    pub focal_slab_nm: Option<[f64; 2]>,
    /// Bleaching lifetime, s, if any.
    pub bleach_lifetime_s: Option<f64>,
    /// Blinking, if any.
    pub blink: Option<Blinking>,
    /// Reported coordinates.
    pub projection: Projection,
    /// Per species (scenario order): carries a label, so the camera sees it.
    pub labelled: Vec<bool>,
}

impl RawCamera {
    /// Validates the camera against the box and the recording of the run.
    ///
    /// # Errors
    /// [`EngineError::InvalidValue`] naming the first bad `camera.` key.
    pub fn validate(
        &self,
        file: &Path,
        edges_nm: &[f64; 3],
        species: &[Species],
        dt_s: f64,
        steps: u64,
        record_every_steps: u64,
    ) -> Result<CameraSpec> {
        let recording_interval_s = dt_s * record_every_steps as f64;
        let frame_interval_s = positive(file, "camera.frame_interval_s", self.frame_interval_s)?;
        // Whole multiples within round-off: 0.01 / 0.001 is 9.999999999999998.
        let whole = |t: f64| {
            let r = t / recording_interval_s;
            let n = r.round();
            (n >= 1.0 && (r - n).abs() <= 1e-6 * n).then_some(n as usize)
        };
        let multiple_hint = format!(
            "it must be a whole multiple of the recording interval output.record_every_steps × integrator.dt_s = {record_every_steps} × {dt_s:e} s = {recording_interval_s:e} s"
        );
        let samples_per_frame = whole(frame_interval_s).ok_or_else(|| {
            invalid(
                file,
                "camera.frame_interval_s",
                frame_interval_s,
                multiple_hint.clone(),
            )
        })?;
        let exposure_s = self.exposure_s.unwrap_or(frame_interval_s);
        if !(exposure_s.is_finite()
            && (0.0..=frame_interval_s * (1.0 + 1e-9)).contains(&exposure_s))
        {
            return Err(invalid(
                file,
                "camera.exposure_s",
                exposure_s,
                format!("it must lie from 0 to camera.frame_interval_s = {frame_interval_s:e} s: an exposure cannot be longer than the frame interval"),
            ));
        }
        let samples_per_exposure = if exposure_s == 0.0 {
            1
        } else {
            whole(exposure_s).ok_or_else(|| {
                invalid(
                    file,
                    "camera.exposure_s",
                    exposure_s,
                    format!("0, or {}", multiple_hint.trim_start_matches("it must be ")),
                )
            })?
        };
        let recorded = steps / record_every_steps;
        let needed = samples_per_frame as u64 + samples_per_exposure as u64 - 1;
        if recorded < needed {
            return Err(invalid(
                file,
                "integrator.steps",
                steps,
                format!(
                    "with [camera] the run must last at least two frames: integrator.steps ≥ {} (frame interval {frame_interval_s:e} s plus exposure at dt_s = {dt_s:e} s)",
                    needed * record_every_steps
                ),
            ));
        }
        let frames =
            ((recorded + 1 - samples_per_exposure as u64) / samples_per_frame as u64 + 1) as usize;

        let nonnegative = |key: &str, v: f64| -> Result<f64> {
            if v.is_finite() && v >= 0.0 {
                Ok(v)
            } else {
                Err(invalid(
                    file,
                    key,
                    v,
                    "it must be a finite number ≥ 0 (a localisation error cannot be negative)",
                ))
            }
        };
        let largest_edge = edges_nm.iter().cloned().fold(0.0, f64::max);
        // A noise or pixel wider than the whole box carries no position at all.
        let at_most_box = |key: &str, v: f64| -> Result<f64> {
            if v <= largest_edge {
                Ok(v)
            } else {
                Err(invalid(
                    file,
                    key,
                    v,
                    format!("it must not exceed the largest box edge, {largest_edge} nm"),
                ))
            }
        };
        let noise = match (&self.photons, self.localisation_sigma_nm) {
            (Some(_), Some(s)) => {
                return Err(invalid(
                    file,
                    "camera.localisation_sigma_nm",
                    s,
                    "give either a fixed camera.localisation_sigma_nm or a [camera.photons] section, not both",
                ))
            }
            (None, s) => LocalisationNoise::Fixed { sigma_nm: at_most_box("camera.localisation_sigma_nm", nonnegative("camera.localisation_sigma_nm", s.unwrap_or(0.0))?)? },
            (Some(p), None) => LocalisationNoise::PhotonLimited {
                photons_per_detection: within(file, "camera.photons.photons_per_detection", p.photons_per_detection, PHOTON_RANGE, "photons")?,
                psf_sigma_nm: at_most_box("camera.photons.psf_sigma_nm", positive(file, "camera.photons.psf_sigma_nm", p.psf_sigma_nm)?)?,
                pixel_size_nm: at_most_box("camera.photons.pixel_size_nm", positive(file, "camera.photons.pixel_size_nm", p.pixel_size_nm)?)?,
                background_photons_per_pixel: match p.background_photons_per_pixel {
                    None => 0.0,
                    Some(b) if b.is_finite() && (0.0..=PHOTON_RANGE.1).contains(&b) => b,
                    Some(b) => return Err(invalid(file, "camera.photons.background_photons_per_pixel", b, format!("it must be a finite number from 0 to {:e}", PHOTON_RANGE.1))),
                },
            },
        };
        let projection = match self.projection.as_deref() {
            None | Some("2d") => Projection::TwoD,
            Some("3d") => Projection::ThreeD,
            Some(other) => {
                return Err(invalid(
                    file,
                    "camera.projection",
                    format!("{other:?}"),
                    "allowed: \"2d\" or \"3d\"",
                ))
            }
        };
        let sigma_z_nm = match self.localisation_sigma_z_nm {
            None => None,
            Some(s) if projection == Projection::TwoD => {
                return Err(invalid(
                    file,
                    "camera.localisation_sigma_z_nm",
                    s,
                    "it is used only with camera.projection = \"3d\"",
                ))
            }
            Some(s) => Some(at_most_box(
                "camera.localisation_sigma_z_nm",
                nonnegative("camera.localisation_sigma_z_nm", s)?,
            )?),
        };

        let mut field_of_view_nm = [[0.0, edges_nm[0]], [0.0, edges_nm[1]]];
        if let Some(fov) = &self.field_of_view_nm {
            if fov.len() != 2 {
                return Err(invalid(
                    file,
                    "camera.field_of_view_nm",
                    format!("{fov:?}"),
                    "it must list two widths [x, y] in nm",
                ));
            }
            for k in 0..2 {
                let w = fov[k];
                if !(w.is_finite() && w > 0.0 && w <= edges_nm[k]) {
                    return Err(invalid(
                        file,
                        format!("camera.field_of_view_nm[{k}]"),
                        w,
                        format!("it must lie in (0, {}] nm: the field of view is centred on the box and cannot be wider than box.edges_nm[{k}]", edges_nm[k]),
                    ));
                }
                let lo = 0.5 * (edges_nm[k] - w);
                field_of_view_nm[k] = [lo, lo + w];
            }
        }

        let lz = edges_nm[2];
        let plane = self.focal_plane_z_nm.unwrap_or(0.5 * lz);
        if !(plane.is_finite() && (0.0..=lz).contains(&plane)) {
            return Err(invalid(
                file,
                "camera.focal_plane_z_nm",
                plane,
                format!("it must lie inside the box, 0 to {lz} nm along z"),
            ));
        }
        let focal_slab_nm = match self.focal_depth_nm {
            None => None,
            Some(zf) => {
                let max = plane.min(lz - plane);
                if !(zf.is_finite() && zf > 0.0 && zf <= max * (1.0 + 1e-12)) {
                    return Err(invalid(
                        file,
                        "camera.focal_depth_nm",
                        zf,
                        format!(
                            "it must lie in (0, {max}] nm: the focal slab focal_plane_z_nm ± focal_depth_nm = {plane} ± {zf} nm must lie inside the box, 0 to {lz} nm along z"
                        ),
                    ));
                }
                Some([plane - zf, plane + zf])
            }
        };

        let bleach_lifetime_s = match self.bleach_lifetime_s {
            None => None,
            Some(t) => Some(within(
                file,
                "camera.bleach_lifetime_s",
                t,
                (1.0 / RATE_RANGE_PER_S.1, 1.0 / RATE_RANGE_PER_S.0),
                "s",
            )?),
        };
        let blink = match (self.blink_on_to_off_per_s, self.blink_off_to_on_per_s) {
            (None, None) => None,
            (Some(off), Some(on)) => Some(Blinking {
                on_to_off_per_s: within(
                    file,
                    "camera.blink_on_to_off_per_s",
                    off,
                    RATE_RANGE_PER_S,
                    "1/s",
                )?,
                off_to_on_per_s: within(
                    file,
                    "camera.blink_off_to_on_per_s",
                    on,
                    RATE_RANGE_PER_S,
                    "1/s",
                )?,
            }),
            (Some(v), None) => return Err(invalid(
                file,
                "camera.blink_on_to_off_per_s",
                v,
                "blinking needs both camera.blink_on_to_off_per_s and camera.blink_off_to_on_per_s",
            )),
            (None, Some(v)) => return Err(invalid(
                file,
                "camera.blink_off_to_on_per_s",
                v,
                "blinking needs both camera.blink_on_to_off_per_s and camera.blink_off_to_on_per_s",
            )),
        };

        let labelled = match &self.labelled_species {
            None => vec![true; species.len()],
            Some(names) => {
                if let Some(bad) = names
                    .iter()
                    .find(|n| !species.iter().any(|s| &s.name == *n))
                {
                    let known: Vec<&str> = species.iter().map(|s| s.name.as_str()).collect();
                    return Err(invalid(
                        file,
                        "camera.labelled_species",
                        format!("{bad:?}"),
                        format!("names of [[species]] entries: {known:?}"),
                    ));
                }
                if names.is_empty() {
                    return Err(invalid(
                        file,
                        "camera.labelled_species",
                        "[]",
                        "at least one species must carry a label",
                    ));
                }
                species.iter().map(|s| names.contains(&s.name)).collect()
            }
        };

        Ok(CameraSpec {
            frame_interval_s,
            exposure_s,
            recording_interval_s,
            samples_per_frame,
            samples_per_exposure,
            frames,
            noise,
            sigma_z_nm,
            field_of_view_nm,
            focal_slab_nm,
            bleach_lifetime_s,
            blink,
            projection,
            labelled,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const BASIC: &str = r#"
seed = 5
[medium]
temperature_K = 298.15
[box]
edges_nm = [100.0, 100.0, 100.0]
[[species]]
name = "tracer"
radius_nm = 2.0
count = 10
[integrator]
dt_s = 1e-9
steps = 100
"#;

    fn load(text: &str, sets: &[&str]) -> Result<Scenario> {
        let sets: Vec<String> = sets.iter().map(|s| s.to_string()).collect();
        Scenario::from_text(text, Path::new("test.toml"), &sets)
    }

    #[test]
    fn basic_scenario_resolves_defaults() {
        let s = load(BASIC, &[]).unwrap();
        assert_eq!(s.seed, 5);
        assert!(s.viscosity_is_water);
        assert_eq!(s.output.record_every_steps, 1);
        assert_eq!(s.frames(), 101);
        assert_eq!(s.species[0].drag_radius_nm, 2.0);
        // The resolved text parses back to the same scenario.
        let again = load(&s.resolved_toml, &[]).unwrap();
        assert_eq!(again.resolved_toml, s.resolved_toml);
    }

    #[test]
    fn overrides_by_index_and_name() {
        let s = load(BASIC, &["species.0.count=20", "integrator.steps=200"]).unwrap();
        assert_eq!(s.species[0].count, 20);
        assert_eq!(s.steps, 200);
        let s = load(
            BASIC,
            &["species.tracer.radius_nm=3.5", "medium.viscosity_Pa_s=1e-3"],
        )
        .unwrap();
        assert_eq!(s.species[0].radius_nm, 3.5);
        assert_eq!(s.viscosity_pa_s, 1e-3);
    }

    #[test]
    fn override_errors_name_the_assignment() {
        for bad in [
            "integrator.steps",
            "=3",
            "integrator.nosuch=3",
            "species.9.count=1",
            "species.x.count=1",
            "seed.a=1",
        ] {
            let err = load(BASIC, &[bad]).unwrap_err().to_string();
            assert!(err.contains(bad), "{bad}: {err}");
        }
    }

    #[test]
    fn unknown_key_reports_line() {
        let text = BASIC.replace("steps = 100", "steps = 100\nstepz = 3");
        let err = load(&text, &[]).unwrap_err().to_string();
        assert!(err.contains("stepz") && err.contains("line"), "{err}");
    }
}
