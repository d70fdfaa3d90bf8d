//! What `thicket check` says about a scenario, computed in one place and
//! returned as one typed report: achieved and open fractions, the long-time
//! regime, λ and partition, the hindrance factors and every model value. The
//! CLI only formats it (text or JSON).

use crate::model_table::{scenario_model_table, ModelTable};
use crate::models::{self, ModelError};
use crate::run_length::{long_time_regime, RegimeEstimate};
use serde::Serialize;
use thicket_engine::obstacles::spheres::{Estimate, FixedObstacles, Region};
pub use thicket_engine::scenario::charge::SurfaceCharge;
use thicket_engine::scenario::drive::FlowSpec;
use thicket_engine::scenario::media::ObstacleSpec;
use thicket_engine::space::potentials::Facing;
use thicket_engine::space::shape::Shape;
use thicket_engine::{EngineError, Scenario};

/// Monte Carlo points behind each fraction: a standard error of at most 5e-4.
pub const CHECK_SAMPLES: usize = 1_000_000;

/// Why a check report could not be built.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CheckError {
    /// The obstacles could not be placed.
    #[error(transparent)]
    Engine(#[from] EngineError),
    /// A model input was out of range (a geometry the validation let through).
    #[error(transparent)]
    Model(#[from] ModelError),
}

/// Everything `check` prints about one scenario.
#[derive(Debug, Clone)]
pub struct CheckReport {
    /// The scenario's warnings, then one per species whose run is shorter
    /// than its long-time regime needs.
    pub warnings: Vec<String>,
    /// Long-time regime estimates, one per species that has one.
    pub regimes: Vec<RegimeEstimate>,
    /// Estimated peak of the large buffers, bytes.
    pub memory_estimate_bytes: f64,
    /// Fixed obstacles, placed exactly as `run` will place them.
    pub obstacles: ObstacleSummary,
    /// One entry per species, in the scenario's order.
    pub species: Vec<SpeciesCheck>,
    /// λ, partition and hindrance per species when there is a geometry.
    pub confinement: Option<Vec<SpeciesConfinement>>,
    /// Forces and flow per species (empty when nothing drives the particles).
    pub drive: Vec<SpeciesDrive>,
    /// Soft wall interactions per species (empty without them).
    pub interactions: Vec<SpeciesInteraction>,
    /// Reversible binding per binding species (empty when none binds).
    pub binding: Vec<SpeciesBinding>,
    /// Soft interactions with obstacles and fibres per species (empty without them).
    pub obstacle_interactions: Vec<ObstacleInteraction>,
    /// Soft interactions between mobile particles per pair of species (empty without them).
    pub pair_interactions: Vec<PairInteraction>,
    /// Surfaces given by charge density, with the potential each gives
    /// (Grahame 1947, planar; empty when every surface gave its potential).
    pub surface_charges: Vec<SurfaceCharge>,
}

/// The soft interaction of one pair of species and its second virial coefficient.
#[derive(Debug, Clone, Serialize)]
pub struct PairInteraction {
    /// The two species' names.
    pub species: [String; 2],
    /// Debye length κ⁻¹, nm (with screened electrostatics).
    pub debye_length_nm: Option<f64>,
    /// Energy at contact, k_BT (all terms; van der Waals at its closest gap).
    pub contact_kt: f64,
    /// Cut-off gap, nm (|U| below 1e-3 k_BT beyond).
    pub cutoff_gap_nm: f64,
    /// Second virial coefficient of the truncated model, nm³ (numerical integral).
    pub second_virial_nm3: f64,
    /// The hard spheres' 2πσ³/3, nm³, for comparison.
    pub second_virial_hard_nm3: f64,
}

/// What the binding model predicts for one species.
#[derive(Debug, Clone, Serialize)]
pub struct SpeciesBinding {
    /// Species name.
    pub species: String,
    /// V_layer/V_open (Monte Carlo over the scenario's own obstacles).
    pub layer_share: f64,
    /// Its standard error.
    pub layer_share_se: f64,
    /// K = N_bound/N_free = p_on/p_off · V_layer/V_open, exact for the stepped model.
    pub k: f64,
    /// Its standard error (from the share's).
    pub k_se: f64,
    /// The continuous-time K = k_on/k_off · V_layer/V_open (the limit Δt → 0).
    pub k_continuous: f64,
    /// Equilibrium bound fraction K/(1 + K).
    pub bound_fraction: f64,
    /// Fast-exchange D_eff/D_free = 1/(1 + K) (Crank §14.2; only when exchange is fast).
    pub fast_exchange_ratio: f64,
    /// Mean dwell time 1/k_off, s.
    pub mean_dwell_s: f64,
}

/// The soft interaction of one species with the obstacles and fibres, and
/// the partition coefficient it implies.
#[derive(Debug, Clone, Serialize)]
pub struct ObstacleInteraction {
    /// Species name.
    pub species: String,
    /// Debye length κ⁻¹, nm (with screened electrostatics).
    pub debye_length_nm: Option<f64>,
    /// Cut-off gap of the neighbour sum, nm (|U| below 1e-3 k_BT beyond).
    pub cutoff_nm: f64,
    /// Energy at contact with a fixed sphere of the mean placed radius, k_BT.
    pub sphere_contact_kt: Option<f64>,
    /// Energy at contact with a fibre, k_BT.
    pub fibre_contact_kt: Option<f64>,
    /// Largest energy left out at the cut-off over the body kinds, k_BT.
    pub energy_at_cutoff_kt: f64,
    /// Boltzmann-weighted partition coefficient K = ⟨e^(−U/k_BT)⟩ over the
    /// box (hard cores 0; Monte Carlo).
    pub partition_boltzmann: f64,
    /// Its standard error.
    pub partition_boltzmann_se: f64,
    /// The steric partition coefficient (open fraction), for comparison.
    pub partition_steric: f64,
    /// Its standard error.
    pub partition_steric_se: f64,
}

/// The soft wall interaction of one species, and the partition it implies.
#[derive(Debug, Clone, Serialize)]
pub struct SpeciesInteraction {
    /// Species name.
    pub species: String,
    /// Debye length κ⁻¹, nm (with screened electrostatics).
    pub debye_length_nm: Option<f64>,
    /// Electrostatic energy at contact, in k_BT (linear superposition approximation).
    pub electrostatic_contact_kt: f64,
    /// Depth of the short-range well, in k_BT.
    pub well_depth_kt: f64,
    /// Boltzmann-weighted partition coefficient against a bulk bath, for a
    /// slit or a cylinder (exact for the model).
    pub partition_boltzmann: Option<f64>,
    /// The steric partition coefficient, for comparison.
    pub partition_steric: Option<f64>,
}

/// What pushes or carries one species, and what published transport
/// results predict for it.
#[derive(Debug, Clone, Serialize)]
pub struct SpeciesDrive {
    /// Species name.
    pub species: String,
    /// Total constant force [x, y, z], pN.
    pub force_pn: [f64; 3],
    /// Drift velocity in free solution D0 F/k_BT, m/s (Einstein).
    pub free_drift_m_per_s: [f64; 3],
    /// k_BT/|F_z|, nm: the height scale of the barometric profile against
    /// a floor (exact, Boltzmann), when a force acts along z.
    pub height_scale_nm: Option<f64>,
    /// Flow quantities and predictions, each with its source.
    pub flow: Vec<Prediction>,
}

/// One predicted or derived number with where it comes from.
#[derive(Debug, Clone, Serialize)]
pub struct Prediction {
    /// What it is.
    pub quantity: String,
    /// Its value.
    pub value: f64,
    /// Source, or how it follows.
    pub source: String,
}

/// The fixed obstacles and the volume fraction they achieve.
#[derive(Debug, Clone)]
pub struct ObstacleSummary {
    /// Number of fixed spheres.
    pub spheres: usize,
    /// How the spheres were made: the generator's name or "from PATH".
    pub placement: String,
    /// Number of fibres.
    pub fibres: usize,
    /// Fibre radius, nm.
    pub fibre_radius_nm: f64,
    /// Fibre length, nm.
    pub fibre_length_nm: f64,
    /// Nominal fibre volume fraction N·πr²ℓ/V.
    pub fibre_volume_fraction_nominal: f64,
    /// Achieved obstacle volume fraction of `region` (Monte Carlo, or exact
    /// with standard error 0 when nothing overlaps).
    pub covered: Estimate,
    /// What the fraction is of ("the box", "the membrane's pores" …).
    pub region: String,
}

impl ObstacleSummary {
    /// True when there are neither spheres nor fibres.
    pub fn is_empty(&self) -> bool {
        self.spheres == 0 && self.fibres == 0
    }
}

/// One species as the scenario defines it, and what it implies.
#[derive(Debug, Clone)]
pub struct SpeciesCheck {
    /// Name.
    pub name: String,
    /// A crowder (mobile obstacle) rather than a tracer.
    pub crowder: bool,
    /// Number of particles.
    pub count: usize,
    /// Contact radius, nm.
    pub radius_nm: f64,
    /// Hydrodynamic radius, nm.
    pub drag_radius_nm: f64,
    /// Free diffusivity, m²/s.
    pub d0_m2_per_s: f64,
    /// D0 given in the scenario (otherwise Stokes–Einstein).
    pub d0_explicit: bool,
    /// RMS step per axis, nm.
    pub step_rms_nm: f64,
    /// RMS step per axis over the radius.
    pub step_over_radius: f64,
    /// N·(4/3)πa³/V of the box.
    pub volume_fraction: f64,
    /// Fraction of the box open to the centre (walls and obstacles).
    pub open: Estimate,
    /// Every published model for this species.
    pub models: ModelTable,
}

/// λ, steric partition and hindrance factors of one species in the
/// scenario's geometry.
#[derive(Debug, Clone, Serialize)]
pub struct SpeciesConfinement {
    /// Species name.
    pub species: String,
    /// λ = a/r_pore (cylinder, membrane's narrowest pore) or a/h (slit).
    pub lambda: Option<f64>,
    /// Steric partition coefficient Φ (exact).
    pub partition: Option<f64>,
    /// Fraction of the box open to the centre, walls alone (exact).
    pub open_fraction: f64,
    /// K_d, K_c, H and W with their sources; `None` for a plane wall.
    pub hindrance: Option<Hindrance>,
}

/// One hindrance factor and where it comes from.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Quoted {
    /// The value; `None` when no source gives one here.
    pub value: Option<f64>,
    /// Its source, or why there is no value.
    pub source: String,
}

impl Quoted {
    fn of(value: models::ModelResult<f64>, source: &str) -> Self {
        match value {
            Ok(v) => Quoted {
                value: Some(v),
                source: source.into(),
            },
            Err(e) => Quoted {
                value: None,
                source: e.to_string(),
            },
        }
    }
}

/// The hindered-transport factors of a pore or slit (Deen 1987 notation):
/// H = ΦK_d scales diffusive, W = ΦK_c convective transport.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Hindrance {
    /// Partition coefficient Φ.
    pub partition: Quoted,
    /// Diffusive hindrance K_d (section-averaged D/D0).
    pub kd: Quoted,
    /// Convective hindrance K_c (mean particle over mean fluid velocity).
    pub kc: Quoted,
    /// H = ΦK_d.
    pub h: Quoted,
    /// W = ΦK_c.
    pub w: Quoted,
    /// Membrane Péclet number K_c vL/(K_d D0); `None` without a flow.
    pub peclet: Option<f64>,
}

const DECHADILOK_DEEN: &str = "Dechadilok & Deen (2006)";

/// Hindrance factors of a cylinder at λ: Dechadilok & Deen throughout.
fn cylinder_hindrance(lambda: f64) -> Hindrance {
    let phi = models::partition_cylinder(lambda);
    let h = models::dechadilok_deen_hindrance(lambda);
    let kd = match (&h, &phi) {
        (Ok(h), Ok(p)) => Ok(h / p),
        (Err(e), _) | (_, Err(e)) => Err(e.clone()),
    };
    Hindrance {
        partition: Quoted::of(phi, "steric exclusion (exact)"),
        kd: Quoted::of(kd, DECHADILOK_DEEN),
        kc: Quoted::of(models::dechadilok_deen_kc(lambda), DECHADILOK_DEEN),
        h: Quoted::of(h, DECHADILOK_DEEN),
        w: Quoted::of(
            models::dechadilok_deen_convective_hindrance(lambda),
            DECHADILOK_DEEN,
        ),
        peclet: None,
    }
}

/// Hindrance factors of a slit of half-width h for a sphere of radius a:
/// Dechadilok & Deen for diffusion; for convection only the lag-free value
/// of point tracers is on record.
fn slit_hindrance(a: f64, half_width: f64) -> Hindrance {
    let lambda = a / half_width;
    let phi = models::partition_slit(a, half_width);
    let h = models::dechadilok_deen_slit_hindrance(lambda);
    let kd = match (&h, &phi) {
        (Ok(h), Ok(p)) => Ok(h / p),
        (Err(e), _) | (_, Err(e)) => Err(e.clone()),
    };
    let kc = models::lag_free_kc_slit(lambda);
    let w = match (&kc, &phi) {
        (Ok(k), Ok(p)) => Ok(k * p),
        (Err(e), _) | (_, Err(e)) => Err(e.clone()),
    };
    let lag_free =
        "point tracer without hydrodynamic lag in plane Poiseuille flow (exact for that model)";
    Hindrance {
        partition: Quoted::of(phi, "steric exclusion (exact)"),
        kd: Quoted::of(kd, "Dechadilok & Deen (2006), slit"),
        kc: Quoted::of(kc, lag_free),
        h: Quoted::of(h, "Dechadilok & Deen (2006), slit"),
        w: Quoted::of(w, lag_free),
        peclet: None,
    }
}

/// Builds the report `check` prints for `scenario`: obstacles are placed
/// and fractions estimated exactly as `run` will see them (same seed).
///
/// # Errors
/// The obstacles cannot be placed, or a confinement's λ is out of range.
pub fn check_report(scenario: &Scenario) -> Result<CheckReport, CheckError> {
    let mut warnings = scenario.warnings();
    let regimes: Vec<RegimeEstimate> = scenario
        .species
        .iter()
        .filter_map(|s| long_time_regime(scenario, &s.name))
        .collect();
    for r in regimes.iter().filter(|r| r.too_short()) {
        warnings.push(format!(
            "species '{}': the run lasts {:.2e} s, shorter than the {:.2e} s the long-time regime needs (τ_c ≈ {:.2e} s from {} ℓ = {:.1} nm; rule of thumb): D_eff would be an apparent value; raise integrator.steps to at least {}",
            r.species,
            r.duration_s,
            r.recommended_duration_s,
            r.crossover_s,
            r.basis,
            r.length_scale_nm,
            (r.recommended_duration_s / scenario.dt_s).ceil() as u64
        ));
    }
    let volume: f64 = scenario.sim_box.edges_nm.iter().product();
    // Placed exactly as `run` will place them (same seed, same streams).
    let obstacles = FixedObstacles::build(scenario)?;
    let region = Region::of(scenario);
    let covered =
        obstacles.volume_fraction_in(&region, &scenario.sim_box, CHECK_SAMPLES, scenario.seed);
    // Walls, pores and membranes have exact open fractions (geometry.rs); with obstacles too, Monte Carlo.
    let open: Vec<Estimate> = scenario
        .species
        .iter()
        .map(|s| match &scenario.geometry {
            Some(g) if !obstacles.is_empty() => obstacles.open_fraction_where(
                &scenario.sim_box,
                s.radius_nm,
                CHECK_SAMPLES,
                scenario.seed,
                |p| g.shape.allows(p, s.radius_nm),
            ),
            Some(g) => Estimate {
                value: g
                    .shape
                    .open_fraction(s.radius_nm, &scenario.sim_box.edges_nm),
                standard_error: 0.0,
            },
            None => obstacles.open_fraction(
                &scenario.sim_box,
                s.radius_nm,
                CHECK_SAMPLES,
                scenario.seed,
            ),
        })
        .collect();
    let obstacle_interactions = scenario
        .species
        .iter()
        .enumerate()
        .filter_map(|(i, s)| {
            let k = obstacles.boltzmann_partition(scenario, i, CHECK_SAMPLES, scenario.seed)?;
            let kt = scenario.thermal_energy_pn_nm();
            let p = s.body_potential;
            let cut = obstacles.soft_cutoff_nm(scenario, i);
            let spheres = &obstacles.spheres;
            let sphere = (!spheres.is_empty()).then(|| {
                Facing::Sphere(spheres.radii_nm.iter().sum::<f64>() / spheres.len() as f64)
            });
            let fibre = (!obstacles.fibres.is_empty())
                .then_some(Facing::Cylinder(obstacles.fibres.radius_nm));
            let at = |f: Option<Facing>, h: f64| f.map(|f| p.facing(f).energy_pn_nm(h) / kt);
            Some(ObstacleInteraction {
                species: s.name.clone(),
                debye_length_nm: (p.kappa_per_nm > 0.0).then(|| 1.0 / p.kappa_per_nm),
                cutoff_nm: cut,
                sphere_contact_kt: at(sphere, 0.0),
                fibre_contact_kt: at(fibre, 0.0),
                energy_at_cutoff_kt: [at(sphere, cut), at(fibre, cut)]
                    .into_iter()
                    .flatten()
                    .fold(0.0, |m: f64, u| m.max(u.abs())),
                partition_boltzmann: k.value,
                partition_boltzmann_se: k.standard_error,
                partition_steric: open[i].value,
                partition_steric_se: open[i].standard_error,
            })
        })
        .collect();
    let species = scenario
        .species
        .iter()
        .zip(open)
        .map(|(s, open)| {
            let step_rms_nm = s.step_rms_nm(scenario.dt_s);
            SpeciesCheck {
                name: s.name.clone(),
                crowder: s.crowder,
                count: s.count,
                radius_nm: s.radius_nm,
                drag_radius_nm: s.drag_radius_nm,
                d0_m2_per_s: s.d0_m2_per_s,
                d0_explicit: s.d0_explicit,
                step_rms_nm,
                step_over_radius: step_rms_nm / s.radius_nm,
                volume_fraction: s.count as f64 * 4.0 / 3.0
                    * std::f64::consts::PI
                    * s.radius_nm.powi(3)
                    / volume,
                open,
                models: scenario_model_table(scenario, &s.name),
            }
        })
        .collect();
    let placement = match &scenario.obstacles {
        Some(ObstacleSpec::Generated { generator, .. }) => generator.name().to_string(),
        Some(ObstacleSpec::File { path, .. }) => format!("from {}", path.display()),
        None => String::new(),
    };
    Ok(CheckReport {
        warnings,
        regimes,
        memory_estimate_bytes: thicket_engine::scenario::memory::estimate(scenario).total_bytes(),
        obstacles: ObstacleSummary {
            spheres: obstacles.spheres.len(),
            placement,
            fibres: obstacles.fibres.len(),
            fibre_radius_nm: obstacles.fibres.radius_nm,
            fibre_length_nm: obstacles.fibres.length_nm,
            fibre_volume_fraction_nominal: obstacles
                .fibres
                .nominal_volume_fraction(&scenario.sim_box),
            covered,
            region: region.describe().to_string(),
        },
        species,
        confinement: confinement(scenario)?,
        drive: drive(scenario),
        interactions: interactions(scenario),
        binding: binding(scenario, &obstacles),
        obstacle_interactions,
        pair_interactions: pair_interactions(scenario),
        surface_charges: scenario.surface_charges.clone(),
    })
}

/// Each interacting pair's contact energy, cut-off and B₂ (REFERENCES.md "Interactions between particles").
fn pair_interactions(scenario: &Scenario) -> Vec<PairInteraction> {
    let kt = scenario.thermal_energy_pn_nm();
    scenario
        .pairs
        .iter()
        .flat_map(|t| t.iter())
        .map(|(a, b, p)| PairInteraction {
            species: [
                scenario.species[a].name.clone(),
                scenario.species[b].name.clone(),
            ],
            debye_length_nm: (p.u.electrostatic_pn_nm != 0.0).then(|| 1.0 / p.u.kappa_per_nm),
            contact_kt: p.u.energy_pn_nm(0.0) / kt,
            cutoff_gap_nm: p.cutoff_gap_nm,
            second_virial_nm3: p.second_virial_nm3(kt),
            second_virial_hard_nm3: 2.0 * std::f64::consts::PI / 3.0 * p.contact_nm.powi(3),
        })
        .collect()
}

/// The binding model's predictions for each binding species: K from the
/// layer share of the scenario's own obstacles (REFERENCES.md "Reversible binding").
fn binding(scenario: &Scenario, obstacles: &FixedObstacles) -> Vec<SpeciesBinding> {
    scenario
        .species
        .iter()
        .filter_map(|s| {
            let spec = s.binding?;
            let share = obstacles.layer_share(
                &scenario.sim_box,
                s.radius_nm,
                spec.layer_nm,
                CHECK_SAMPLES,
                scenario.seed,
            );
            let ratio = spec.stepped_ratio(scenario.dt_s);
            let k = ratio * share.value;
            Some(SpeciesBinding {
                species: s.name.clone(),
                layer_share: share.value,
                layer_share_se: share.standard_error,
                k,
                k_se: ratio * share.standard_error,
                k_continuous: spec.rate_ratio() * share.value,
                bound_fraction: k / (1.0 + k),
                fast_exchange_ratio: crate::binding::fast_exchange_ratio(k),
                mean_dwell_s: 1.0 / spec.off_rate_per_s,
            })
        })
        .collect()
}

/// Each species' wall interaction and its Boltzmann partition coefficient.
fn interactions(scenario: &Scenario) -> Vec<SpeciesInteraction> {
    let kt = scenario.thermal_energy_pn_nm();
    let shape = scenario.geometry.as_ref().map(|g| &g.shape);
    scenario
        .species
        .iter()
        .filter(|s| !s.wall_potential.is_none())
        .map(|s| {
            let u = s.wall_potential;
            let a = s.radius_nm;
            let integrate = |f: &dyn Fn(f64) -> f64, hi: f64| {
                let m = 20_000;
                (0..m)
                    .map(|k| f((k as f64 + 0.5) * hi / m as f64) * hi / m as f64)
                    .sum::<f64>()
            };
            let (partition_boltzmann, partition_steric) = match shape {
                Some(Shape::Slit { width_nm }) => {
                    let top = width_nm - 2.0 * a;
                    let w = |h: f64| (-(u.energy_pn_nm(h) + u.energy_pn_nm(top - h)) / kt).exp();
                    (Some(integrate(&w, top) / width_nm), Some(top / width_nm))
                }
                Some(Shape::Cylinder { radius_nm: r, .. }) => {
                    let open = r - a;
                    let w = |rho: f64| {
                        (-(u.energy_pn_nm(open - rho) + u.energy_pn_nm(open + rho)) / kt).exp()
                            * 2.0
                            * rho
                    };
                    (
                        Some(integrate(&w, open) / (r * r)),
                        Some((open / r).powi(2)),
                    )
                }
                Some(Shape::Membrane(m)) => (
                    Some(m.boltzmann_partition(a, |h| u.energy_pn_nm(h) / kt)),
                    Some(m.steric_partition(a)),
                ),
                _ => (None, None),
            };
            SpeciesInteraction {
                species: s.name.clone(),
                debye_length_nm: (u.electrostatic_pn_nm != 0.0).then(|| 1.0 / u.kappa_per_nm),
                electrostatic_contact_kt: u.electrostatic_pn_nm / kt,
                well_depth_kt: u.well_depth_pn_nm / kt,
                partition_boltzmann,
                partition_steric,
            }
        })
        .collect()
}

/// Forces and flow of each species with the predictions that apply.
fn drive(scenario: &Scenario) -> Vec<SpeciesDrive> {
    if !scenario.is_driven() {
        return Vec::new();
    }
    let kt = scenario.thermal_energy_pn_nm();
    let shape = scenario.geometry.as_ref().map(|g| &g.shape);
    let hydro = scenario
        .geometry
        .as_ref()
        .is_some_and(|g| g.hydrodynamics.is_some());
    scenario
        .species
        .iter()
        .map(|s| {
            let d0 = s.d0_nm2_per_s();
            let a = s.radius_nm;
            let mut flow = Vec::new();
            let mut say = |quantity: &str, value: f64, source: &str| {
                flow.push(Prediction {
                    quantity: quantity.into(),
                    value,
                    source: source.into(),
                })
            };
            match (scenario.flow, shape) {
                (None, _) => {}
                (Some(FlowSpec::Shear { rate_per_s }), _) => {
                    say("shear rate, 1/s", rate_per_s, "given");
                    say(
                        "shear Péclet number γ̇a²/D0",
                        rate_per_s * a * a / d0,
                        "definition",
                    );
                    say(
                        "time at which shear doubles the variance along x, s",
                        (3.0_f64).sqrt() / rate_per_s,
                        "⟨Δx²⟩ = 2D0t(1 + γ̇²t²/3) about the mean drift (exact for particles that do not interact)",
                    );
                }
                (Some(FlowSpec::Poiseuille { mean_velocity_nm_per_s: v }), Some(Shape::Cylinder { radius_nm: r, .. })) => {
                    let lambda = a / r;
                    say("mean fluid velocity V, m/s", v * 1e-9, "given or Hagen–Poiseuille V = G R²/(8η)");
                    say("radial Péclet number VR/D0", v * r / d0, "definition (Taylor–Aris)");
                    if hydro {
                        if let Ok(kc) = models::dechadilok_deen_kc(lambda) {
                            say("mean particle velocity, m/s", v * kc * 1e-9, "V·K_c, Dechadilok & Deen (2006) (the cylinder model's lag is fitted to it)");
                        }
                    } else if let Ok(kc) = models::lag_free_kc_cylinder(lambda) {
                        say("mean particle velocity, m/s", v * kc * 1e-9, "V(2 − Φ): Poiseuille flow averaged over the section the centre samples (exact without lag)");
                        let b = r - a;
                        let pe = v * b * b / (r * r) * b / d0;
                        say(
                            "long-time axial dispersion D_eff/D0",
                            1.0 + pe * pe / 48.0,
                            "Taylor (1953), Aris (1956): 1 + Pe²/48 for the profile the centre samples, Pe = V b³/(R² D0), b = R − a (exact asymptote without lag)",
                        );
                    }
                }
                (Some(FlowSpec::Poiseuille { mean_velocity_nm_per_s: v }), Some(Shape::Slit { width_nm })) => {
                    let h = 0.5 * width_nm;
                    say("mean fluid velocity V, m/s", v * 1e-9, "given or Hagen–Poiseuille V = G w²/(12η)");
                    say("Péclet number Vh/D0 (h the half-width)", v * h / d0, "definition");
                    if !hydro {
                        if let Ok(kc) = models::lag_free_kc_slit(a / h) {
                            say("mean particle velocity, m/s", v * kc * 1e-9, "plane Poiseuille flow averaged over the section the centre samples (exact without lag)");
                        }
                    }
                }
                (Some(f), Some(Shape::Membrane(m))) => {
                    let r = m.pores.iter().map(|p| p.radius_nm).fold(f64::INFINITY, f64::min);
                    let lambda = a / r;
                    let length = m.thickness_nm();
                    if let Some(v) = f.pore_mean_velocity_nm_per_s(r) {
                        say("mean pore velocity v, m/s", v * 1e-9, "given or Hagen–Poiseuille v = ΔP R²/(8ηL) in the narrowest pore");
                        if let Some(jv) = f.membrane_volume_flux_nm_per_s(m) {
                            say("volume flux J_v, m/s", jv * 1e-9, "Σ π R_i² v_i / A");
                        }
                        let phi = models::partition_cylinder(lambda).unwrap_or(f64::NAN);
                        let mut deen = |kd: f64, kc: f64, label: &str| {
                            if let Ok(pe) = models::membrane_peclet(kc, kd, v, length, d0) {
                                say(&format!("membrane Péclet K_c vL/(K_d D0), {label}"), pe, "Deen (1987)");
                                if let Ok(sv) = models::deen_sieving_coefficient(phi, kc, pe) {
                                    say(&format!("sieving coefficient, {label}"), sv, "Deen (1987): ΦK_c/(1 − (1 − ΦK_c)e^(−Pe))");
                                }
                            }
                        };
                        if let Ok(kc) = models::lag_free_kc_cylinder(lambda) {
                            deen(1.0, kc, "this run's steric pores (K_d = 1, K_c = 2 − Φ)");
                        }
                        if let (Ok(h), Ok(kc)) = (models::dechadilok_deen_hindrance(lambda), models::dechadilok_deen_kc(lambda)) {
                            deen(h / phi, kc, "pores with wall hydrodynamics (Dechadilok & Deen 2006 K_d, K_c)");
                        }
                    }
                }
                (Some(_), _) => {}
            }
            let free_drift = scenario.force_drift_nm(s).map(|x| x / scenario.dt_s * 1e-9);
            SpeciesDrive {
                species: s.name.clone(),
                force_pn: s.force_pn,
                free_drift_m_per_s: free_drift,
                height_scale_nm: (s.force_pn[2] != 0.0).then(|| kt / s.force_pn[2].abs()),
                flow,
            }
        })
        .collect()
}

/// λ, partition and hindrance of each species in the scenario's geometry.
fn confinement(scenario: &Scenario) -> Result<Option<Vec<SpeciesConfinement>>, CheckError> {
    let Some(g) = &scenario.geometry else {
        return Ok(None);
    };
    let edges = scenario.sim_box.edges_nm;
    let mut out = Vec::new();
    for s in &scenario.species {
        let a = s.radius_nm;
        let (lambda, partition, hindrance) = match &g.shape {
            Shape::PlaneWall { .. } => (None, None, None),
            Shape::Slit { width_nm } => {
                let h = 0.5 * width_nm;
                (
                    Some(a / h),
                    Some(models::partition_slit(a, h)?),
                    Some(slit_hindrance(a, h)),
                )
            }
            Shape::Cylinder { radius_nm, .. } => {
                let lambda = a / radius_nm;
                (
                    Some(lambda),
                    Some(models::partition_cylinder(lambda)?),
                    Some(cylinder_hindrance(lambda)),
                )
            }
            Shape::Membrane(m) => {
                let r_min = m
                    .pores
                    .iter()
                    .map(|p| p.radius_nm)
                    .fold(f64::INFINITY, f64::min);
                let lambda = a / r_min;
                let mut h = cylinder_hindrance(lambda);
                if let (Some(v), Some(kd), Some(kc)) = (
                    scenario
                        .flow
                        .and_then(|f| f.pore_mean_velocity_nm_per_s(r_min)),
                    h.kd.value,
                    h.kc.value,
                ) {
                    h.peclet =
                        models::membrane_peclet(kc, kd, v, m.thickness_nm(), s.d0_nm2_per_s()).ok();
                }
                (Some(lambda), Some(m.steric_partition(a)), Some(h))
            }
        };
        out.push(SpeciesConfinement {
            species: s.name.clone(),
            lambda,
            partition,
            open_fraction: g.shape.open_fraction(a, &edges),
            hindrance,
        });
    }
    Ok(Some(out))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cylinder_hindrance_is_the_published_set() {
        // REFERENCES.md: Φ = (1 − λ)² exact; Dechadilok & Deen H = 0.2033 at λ = 0.3 (this
        // page's own evaluation); H = ΦK_d and W = ΦK_c by definition (Deen 1987).
        let h = cylinder_hindrance(0.3);
        let v = |q: &Quoted| q.value.unwrap();
        assert!((v(&h.partition) - 0.49).abs() < 1e-15);
        assert!((v(&h.h) - 0.2033).abs() < 1e-4);
        assert!((v(&h.partition) * v(&h.kd) - v(&h.h)).abs() < 1e-15);
        assert!((v(&h.partition) * v(&h.kc) - v(&h.w)).abs() < 1e-15);
        assert!(h.kd.source.contains("Dechadilok"));
        // Beyond the fit range the factor keeps its row with the reason.
        let wide = cylinder_hindrance(0.97);
        assert!(wide.kd.value.is_none() && wide.kd.source.contains("0.95"));
    }

    #[test]
    fn slit_hindrance_is_the_published_set() {
        // REFERENCES.md (Dechadilok & Deen 2006, slit, from memory): λ = 0.2 → H/Φ = 0.7290;
        // Φ = 1 − a/h exact.
        let h = slit_hindrance(1.0, 5.0);
        assert!((h.partition.value.unwrap() - 0.8).abs() < 1e-15);
        assert!((h.kd.value.unwrap() - 0.7290).abs() < 5e-4);
        // Lag-free K_c of plane Poiseuille flow over |ζ| ≤ 0.8: 1.5(1 − 0.64/3) = 1.18 (exact).
        assert!((h.kc.value.unwrap() - 1.18).abs() < 1e-12);
    }
}
