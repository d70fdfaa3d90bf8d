//! Membrane analysis: steady-state flux, permeability, hindrance and the
//! measured partition coefficient of the pores, each with a 95 % interval
//! from block averages of the per-frame series the engine writes
//! (`/observables/<species>/membrane`, cumulative counts and occupancies);
//! the time-lag estimate for runs that start from an empty membrane; and
//! the concentration profile across the membrane.
//!
//! No mean-squared displacement is computed: particles leaving through a
//! bath face re-enter from a bath, so their tracks jump and an MSD-based
//! diffusivity of a membrane file means nothing.
//!
//! **Definitions** (the engine's, `engine::confined::MembraneMeter::summary`,
//! so `thicket run` and `thicket analyze` print the same numbers): over the
//! steady-state window (from the first frame at or after `flux_after_s` to
//! the last frame) J = net downward mid-plane crossings per second; bath
//! densities from emissions, c = emitted · √(2π)/(A σ steps); bath-to-bath
//! permeability P = J/A/(c_top − c_bottom); membrane permeability
//! P_m = 1/(1/P − H_res/D0) with H_res the two reservoir layers; hindrance
//! P_m L/(ε D0); measured partition K = (particles in pores / pore volume) /
//! ((c_top + c_bottom)/2). For a slab centred between its baths the
//! steady state is the uniform equilibrium at the mean bath concentration
//! plus a part odd about the mid-plane, which integrates to zero over the
//! pores, so K estimates the equilibrium partition coefficient exactly,
//! Σ(r − a)²/Σr² without wall hydrodynamics.
//!
//! **Intervals**: see [`crate::blocks`]. Point values are ratios of window
//! totals; the interval comes from the spread of the same ratio over blocks.
//!
//! **Time lag** (Barrer 1939; Crank, *The Mathematics of Diffusion*, 2nd
//! ed., §4.3.2; references from memory): for a layer of thickness L,
//! initially empty, between a
//! source at fixed concentration and a sink, the amount through it tends to
//! Q(t) = (D C₁/L)(t − L²/(6D)). The estimate fits a straight line to the
//! cumulative amount delivered to the permeate bath over the steady-state
//! window; the intercept on the time axis is t_lag, D_membrane = L²/(6 t_lag).
//! Between thicket's baths the reservoir layers and the pore mouths add to
//! the lag, so this D_membrane is an apparent value that includes them.

use std::collections::BTreeMap;
use std::io::Write;
use std::path::{Path, PathBuf};

use serde::Serialize;
use thicket_engine::obstacles::FixedObstacles;
use thicket_engine::run::membrane::MEMBRANE_COLUMNS;
use thicket_engine::space::shape::{per_nm3_to_mol_per_m3, Membrane, Shape};
use thicket_engine::step::Stepper;
use thicket_engine::Scenario;

use crate::blocks::{
    block_length, block_ranges, block_rule_text, integrated_autocorrelation_time, Interval,
};
use crate::error::{Error, Result};
use crate::models;
use crate::read::Trajectory;

/// Concentration-profile bins per tracer radius along z.
const PROFILE_BINS_PER_RADIUS: f64 = 2.0;

/// Smallest multiple of the estimated t_lag at which the fit may start
/// (Crank's transient decays like exp(−π² D t/L²): at 3 t_lag = L²/(2D)
/// the asymptote is reached to 0.7 % of the amount).
const TIME_LAG_START_MULTIPLE: f64 = 3.0;

/// The membrane report of one species.
#[derive(Debug, Clone, Serialize)]
pub struct MembraneAnalysis {
    /// Trajectory file.
    pub file: PathBuf,
    /// Species analysed.
    pub species: String,
    /// "membrane".
    pub geometry: String,
    /// Why no isotropic D is reported.
    pub note: String,
    /// Steady-state window [start, end], s.
    pub window_s: [f64; 2],
    /// Frames in the window (including its first).
    pub frames_in_window: usize,
    /// How the intervals were formed.
    pub block_rule: String,
    /// Slab thickness L, nm.
    pub thickness_nm: f64,
    /// Porosity ε.
    pub porosity: f64,
    /// Tracer radius over the smallest pore radius.
    pub lambda: f64,
    /// Wall hydrodynamics on in the run.
    pub wall_hydrodynamics: bool,
    /// Net downward mid-plane crossings in the window.
    pub net_crossings_down: i64,
    /// Net flux, particles/s (whole box cross-section).
    pub flux_particles_per_s: Interval,
    /// Flux density at the scenario's bath concentrations, mol/(m² s).
    pub flux_density_at_given_mol_per_m2_s: Interval,
    /// Simulated bath densities [bottom, top], particles/nm³ (from emissions).
    pub bath_density_per_nm3: [f64; 2],
    /// Simulated over given bath concentrations (the sampling level).
    pub concentration_scale: f64,
    /// Bath-to-bath permeability J/A/Δc, m/s.
    pub permeability_bath_to_bath_m_per_s: Interval,
    /// Membrane permeability (reservoir layers removed), m/s.
    pub permeability_m_per_s: Interval,
    /// Steric model permeability with pore-end corrections, m/s
    /// (`models::membrane_steric_permeability_over_d0`); equal pores only.
    pub steric_permeability_m_per_s: Option<f64>,
    /// Plain steric permeability ε Φ D0 / L, m/s (equal pores only).
    pub plain_steric_permeability_m_per_s: Option<f64>,
    /// Measured hindrance H = P_m L/(ε D0) (relative to free diffusion through the open pore area).
    pub hindrance: Interval,
    /// Measured permeability over the steric model value (1 when only steric exclusion and the pore ends act).
    pub permeability_over_steric: Option<Interval>,
    /// Model hindrances H by name, to compare with `hindrance`.
    pub hindrance_models: BTreeMap<String, f64>,
    /// Measured partition coefficient of the pores.
    pub partition: Interval,
    /// Exact steric partition Σ(r − a)²/Σr².
    pub partition_steric: f64,
    /// With soft wall interactions, the Boltzmann-weighted partition of the
    /// step's model (exact for the model; `Space::Membrane::boltzmann_partition`).
    pub partition_boltzmann: Option<f64>,
    /// Filtration: sieving coefficient and transmissions (runs with a flow).
    pub filtration: Option<Filtration>,
    /// Time-lag estimate.
    pub time_lag: TimeLag,
    /// Concentration profile across the membrane.
    pub profile: MembraneProfile,
    /// Where the profile CSV was written, if it was.
    pub profile_csv: Option<PathBuf>,
}

/// Sieving from the transits of one window: the membrane's forward and
/// backward transmission and the sieving coefficient.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Sieving {
    /// Forward transmission a = N_down/(A c_top) with the reservoir layers
    /// removed, nm/s: the flux per unit feed concentration at the membrane face.
    pub forward_nm_per_s: f64,
    /// Backward transmission b (permeate face to feed bath), nm/s.
    pub backward_nm_per_s: f64,
    /// Sieving coefficient S = c_permeate/c_feed when the permeate is what
    /// passes, c_p = N/J_v: S = a/(J_v + b).
    pub coefficient: f64,
    /// Membrane Péclet number read from the transmissions through Deen's
    /// one-dimensional pore equation, b/a = e^(−Pe): Pe = ln(a/b).
    pub peclet: f64,
    /// Diffusive permeability the same equation implies, ε Φ K_d D0/L =
    /// (a − b)/ln(a/b), nm/s: what the membrane would pass per unit
    /// concentration difference without flow, inferred from this run.
    pub diffusive_permeability_nm_per_s: f64,
}

/// The sieving coefficient from counted transits (down from the top bath,
/// up from the bottom one) over `steps` steps of `dt_s`, the simulated bath
/// densities [bottom, top] (per nm³), the box area A (nm²), the diffusive
/// resistances in series on each side [top, bottom] (s/nm: the reservoir
/// layer H/D0 plus, where known, the pore-end access resistance) and the
/// volume flux J_v per unit area (nm/s).
///
/// Tracers do not interact, so the flux is linear in the two bath
/// concentrations, N = α c_top − β c_bottom, and counting transits by their
/// bath of origin gives α and β from one run. The stirred reservoirs are
/// diffusive layers in series on each side (the reservoir r = H/D0 as for
/// the permeability, and the access into the pore mouths, where no fluid
/// moves in this model), so the membrane's own a, b follow from
/// α = a/(1 + a r_top + b r_bottom), β = b/(…): a = α/(1 − α r_top − β r_bottom).
/// With the permeate concentration set by what passes, c_p = N/J_v, the
/// sieving coefficient is S = c_p/c_feed = a/(J_v + b) (the definition of
/// Deen 1987, for well-mixed feed and permeate at the membrane faces).
/// `None` without transits both ways or with a layer correction that fails.
pub fn sieving_from_transits(
    transits: [f64; 2],
    density: [f64; 2],
    area_nm2: f64,
    duration_s: f64,
    layer_resistance_s_per_nm: [f64; 2],
    volume_flux_nm_per_s: f64,
) -> Option<Sieving> {
    if density[0] <= 0.0 || density[1] <= 0.0 || duration_s <= 0.0 {
        return None;
    }
    let alpha = transits[0] / (area_nm2 * duration_s * density[1]);
    let beta = transits[1] / (area_nm2 * duration_s * density[0]);
    let denominator =
        1.0 - alpha * layer_resistance_s_per_nm[0] - beta * layer_resistance_s_per_nm[1];
    if denominator <= 0.0 || !denominator.is_finite() {
        return None;
    }
    let (a, b) = (alpha / denominator, beta / denominator);
    Some(Sieving {
        forward_nm_per_s: a,
        backward_nm_per_s: b,
        coefficient: a / (volume_flux_nm_per_s + b),
        peclet: (a / b).ln(),
        diffusive_permeability_nm_per_s: (a - b) / (a / b).ln(),
    })
}

/// Filtration through the membrane: the measured sieving coefficient and
/// the hindered-transport predictions it is compared with.
#[derive(Debug, Clone, Serialize)]
pub struct Filtration {
    /// Mean fluid velocity in a pore (equal pores), m/s.
    pub mean_pore_velocity_m_per_s: Option<f64>,
    /// Volume flux per unit membrane area J_v, m/s.
    pub volume_flux_m_per_s: f64,
    /// Particles that went from the top bath to the bottom one in the window.
    pub transits_down: i64,
    /// Particles that went from the bottom bath to the top one.
    pub transits_up: i64,
    /// Flux per unit feed concentration at the membrane face, m/s.
    pub forward_transmission_m_per_s: Interval,
    /// Flux per unit permeate concentration back to the feed, m/s.
    pub backward_transmission_m_per_s: Interval,
    /// Measured sieving coefficient S.
    pub sieving_coefficient: Interval,
    /// Péclet number ln(a/b) inferred from the transmissions (Deen's pore equation).
    pub peclet_inferred: Interval,
    /// Diffusive permeability (a − b)/ln(a/b) inferred from the transmissions, m/s.
    pub diffusive_permeability_inferred_m_per_s: Interval,
    /// Its hindrance P L/(ε D0), to compare with ΦK_d.
    pub diffusive_hindrance_inferred: Interval,
    /// Deen's S with the K_d, K_c of each model that applies.
    pub models: Vec<SievingModel>,
    /// How S is measured.
    pub definition: String,
}

impl Filtration {
    /// Table lines of the filtration results.
    pub fn to_lines(&self) -> String {
        use std::fmt::Write as _;
        let mut s = String::new();
        let w = &mut s;
        let _ = writeln!(
            w,
            "filtration (feed: top bath, permeate: bottom bath; stirred reservoirs)"
        );
        if let Some(v) = self.mean_pore_velocity_m_per_s {
            let _ = writeln!(w, "  mean pore velocity v, m/s                  {v:.4e}");
        }
        let _ = writeln!(
            w,
            "  volume flux J_v, m/s                       {:.4e}",
            self.volume_flux_m_per_s
        );
        let _ = writeln!(
            w,
            "  transits top->bottom / bottom->top         {} / {}",
            self.transits_down, self.transits_up
        );
        let _ = writeln!(
            w,
            "  forward transmission, m/s                  {}",
            self.forward_transmission_m_per_s.describe(4)
        );
        let _ = writeln!(
            w,
            "  backward transmission, m/s                 {}",
            self.backward_transmission_m_per_s.describe(4)
        );
        let _ = writeln!(
            w,
            "  sieving coefficient S                      {}",
            self.sieving_coefficient.describe_fixed(4)
        );
        let _ = writeln!(
            w,
            "  Péclet number ln(forward/backward)         {}",
            self.peclet_inferred.describe_fixed(4)
        );
        let _ = writeln!(
            w,
            "  diffusive permeability inferred, m/s       {}",
            self.diffusive_permeability_inferred_m_per_s.describe(4)
        );
        let _ = writeln!(
            w,
            "    its hindrance P L/(eps D0)               {}  (to compare with Phi K_d: the model's entries below)",
            self.diffusive_hindrance_inferred.describe_fixed(4)
        );
        for m in &self.models {
            let _ = writeln!(
                w,
                "    S = {:.4}  Pe = {:.4}, Phi = {:.4}, K_d = {:.4}, K_c = {:.4}, Phi K_d = {:.4}: {}",
                m.sieving_coefficient,
                m.peclet,
                m.partition,
                m.kd,
                m.kc,
                m.partition * m.kd,
                m.name
            );
        }
        let _ = writeln!(w, "  definition: {}", self.definition);
        s
    }
}

/// Deen's (1987) sieving coefficient for one choice of K_d and K_c.
#[derive(Debug, Clone, Serialize)]
pub struct SievingModel {
    /// What K_d and K_c are taken from.
    pub name: String,
    /// Φ = (1 − λ)².
    pub partition: f64,
    /// Diffusive hindrance K_d.
    pub kd: f64,
    /// Convective hindrance K_c.
    pub kc: f64,
    /// Pe = K_c v L/(K_d D0).
    pub peclet: f64,
    /// S = ΦK_c/(1 − (1 − ΦK_c)e^(−Pe)).
    pub sieving_coefficient: f64,
}

/// Time-lag estimate from the cumulative amount delivered to the permeate.
#[derive(Debug, Clone, Serialize)]
pub struct TimeLag {
    /// Whether the estimate applies to this run.
    pub applies: bool,
    /// Why it applies or not.
    pub reason: String,
    /// Intercept t_lag of the linear asymptote, s.
    pub t_lag_s: Option<f64>,
    /// L²/(6 t_lag), m²/s, with L the slab thickness.
    pub d_membrane_m2_per_s: Option<f64>,
    /// D_membrane / D0.
    pub d_membrane_over_d0: Option<f64>,
    /// Fit window [start, end], s.
    pub fit_window_s: Option<[f64; 2]>,
}

/// c(z) in bins across the box, normalised by the feed bath concentration.
#[derive(Debug, Clone, Serialize)]
pub struct MembraneProfile {
    /// Bin centres, nm.
    pub z_nm: Vec<f64>,
    /// Bin width, nm.
    pub bin_nm: f64,
    /// Slab faces [z_lo, z_hi], nm (the pore region lies between them).
    pub pore_region_nm: [f64; 2],
    /// Region of each bin: "bottom reservoir", "pores", "top reservoir" or "slab face".
    pub region: Vec<String>,
    /// Density per box cross-section over the feed bath density.
    pub c_over_feed: Vec<f64>,
    /// Half-width of its 95 % interval (blocks of frames).
    pub c_over_feed_ci95: Vec<f64>,
    /// Density per open cross-section (the pores within the slab) over the feed density.
    pub c_open_over_feed: Vec<f64>,
    /// Feed bath density, particles/nm³.
    pub feed_density_per_nm3: f64,
}

/// The per-frame membrane series of one species.
struct Series {
    time_s: Vec<f64>,
    step: Vec<i64>,
    rows: Vec<[i64; 12]>,
}

/// The membrane of a scenario, if it has one.
pub fn membrane_of(scenario: &Scenario) -> Option<&Membrane> {
    match scenario.geometry.as_ref().map(|g| &g.shape) {
        Some(Shape::Membrane(m)) => Some(m),
        _ => None,
    }
}

fn read_series(path: &Path, species: &str) -> Result<Series> {
    let file = hdf5::File::open(path).map_err(|e| Error::hdf5(path, "/", e))?;
    let group = format!("observables/{species}/membrane");
    let value_name = format!("{group}/value");
    if !file.link_exists("observables")
        || !file.link_exists(&format!("observables/{species}"))
        || !file.link_exists(&group)
    {
        return Err(Error::missing(
            path,
            format!("/{group}"),
            "the per-frame membrane series a `thicket run` of a membrane writes",
        ));
    }
    let value = file
        .dataset(&value_name)
        .map_err(|e| Error::hdf5(path, &value_name, e))?;
    let shape = value.shape();
    // Files from before the transit counts have the first ten columns only (no sieving).
    const EARLIER_COLUMNS: usize = 10;
    if shape.len() != 2 || (shape[1] != MEMBRANE_COLUMNS.len() && shape[1] != EARLIER_COLUMNS) {
        return Err(crate::error::ErrorKind::BadShape {
            path: path.to_path_buf(),
            object: value_name,
            shape,
            allowed: format!("[frames, {}]", MEMBRANE_COLUMNS.len()),
        }
        .into());
    }
    let width = shape[1];
    let flat: Vec<i64> = value
        .read_raw()
        .map_err(|e| Error::hdf5(path, &value_name, e))?;
    let rows: Vec<[i64; 12]> = flat
        .chunks_exact(width)
        .map(|c| {
            let mut row = [0; 12];
            row[..width].copy_from_slice(c);
            row
        })
        .collect();
    let time_s: Vec<f64> = file
        .dataset(&format!("{group}/time"))
        .and_then(|d| d.read_raw())
        .map_err(|e| Error::hdf5(path, format!("{group}/time"), e))?;
    let step: Vec<i64> = file
        .dataset(&format!("{group}/step"))
        .and_then(|d| d.read_raw())
        .map_err(|e| Error::hdf5(path, format!("{group}/step"), e))?;
    let n = rows.len().min(time_s.len()).min(step.len());
    Ok(Series {
        time_s: time_s[..n].to_vec(),
        step: step[..n].to_vec(),
        rows: rows[..n].to_vec(),
    })
}

/// Column index in the membrane series.
fn col(name: &str) -> usize {
    MEMBRANE_COLUMNS
        .iter()
        .position(|c| *c == name)
        .expect("a membrane column")
}

/// Analyses the membrane trajectory `path` for `species` (default: the first).
///
/// # Errors
/// A file without a stored membrane scenario or without its membrane
/// series, a steady-state window with fewer than 3 frames, and read errors.
pub fn analyze_membrane(path: &Path, species: Option<&str>) -> Result<MembraneAnalysis> {
    let scenario = crate::report::stored_scenario(path).ok_or_else(|| {
        Error::missing(
            path,
            "/parameters/thicket scenario",
            "the scenario `thicket run` stores (a membrane analysis needs its geometry)",
        )
    })?;
    let trajectory = Trajectory::open(path)?;
    let reader = trajectory.species(species)?;
    let name = reader.meta().name.clone();
    let geometry = scenario.geometry.as_ref();
    let m = membrane_of(&scenario).ok_or_else(|| {
        Error::bad_value(
            path,
            "/parameters/thicket/geometry kind",
            geometry
                .map_or("no geometry", |g| g.shape.kind())
                .to_string(),
            "membrane",
        )
    })?;
    let geometry = geometry.expect("a membrane has a geometry");
    let s = scenario
        .species
        .iter()
        .position(|sp| sp.name == name)
        .ok_or_else(|| {
            Error::missing(
                path,
                format!("species '{name}' in the stored scenario"),
                "it",
            )
        })?;
    let sp = &scenario.species[s];
    let series = read_series(path, &name)?;
    let k0 = series
        .time_s
        .iter()
        .position(|&t| t >= geometry.flux_after_s)
        .ok_or_else(|| {
            Error::from(crate::error::ErrorKind::TooLittleData {
                path: Some(path.to_path_buf()),
                what: format!(
                    "the steady-state window (frames at or after flux_after_s = {:e} s)",
                    geometry.flux_after_s
                ),
                found: 0,
                needed: 3,
            })
        })?;
    let last = series.rows.len() - 1;
    if last < k0 + 2 {
        return Err(crate::error::ErrorKind::TooLittleData {
            path: Some(path.to_path_buf()),
            what: format!(
                "the steady-state window (frames at or after flux_after_s = {:e} s)",
                geometry.flux_after_s
            ),
            found: last + 1 - k0,
            needed: 3,
        }
        .into());
    }
    let confinement = Stepper::new(&scenario, &FixedObstacles::default());
    let sigma = confinement.bath_sigma_nm(s);
    let area = m.area_nm2();
    let d0 = sp.d0_nm2_per_s();
    let a = sp.radius_nm;
    let dt = scenario.dt_s;
    let porosity = m.porosity();
    let layers_nm = (m.height_nm - m.z_hi_nm - a) + (m.z_lo_nm - a);
    let pore_volume = m.pore_volume_nm3();
    let given = [
        m.bottom_concentration_mol_per_m3,
        m.top_concentration_mol_per_m3,
    ];
    let (c_net, c_eb, c_et, c_pores) = (
        [col("crossings_down"), col("crossings_up")],
        col("entries_bottom"),
        col("entries_top"),
        col("particles_in_pores"),
    );

    // Sums over frames i ∈ (from, to]: steps, net crossings, emissions; occupancy at frames in [occ_from, to].
    struct Window {
        steps: f64,
        net: f64,
        emitted: [f64; 2],
        transits: [f64; 2],
        pores: f64,
        frames: f64,
    }
    let c_transits = [col("transits_down"), col("transits_up")];
    let window = |from: usize, to: usize, occ_from: usize| -> Window {
        let (r0, r1) = (&series.rows[from], &series.rows[to]);
        let pores: i64 = (occ_from..=to).map(|i| series.rows[i][c_pores]).sum();
        Window {
            steps: (series.step[to] - series.step[from]) as f64,
            net: ((r1[c_net[0]] - r0[c_net[0]]) - (r1[c_net[1]] - r0[c_net[1]])) as f64,
            emitted: [(r1[c_eb] - r0[c_eb]) as f64, (r1[c_et] - r0[c_et]) as f64],
            transits: c_transits.map(|c| (r1[c] - r0[c]) as f64),
            pores: pores as f64,
            frames: (to + 1 - occ_from) as f64,
        }
    };
    struct Derived {
        flux: f64,
        density: [f64; 2],
        permeability: f64,
        partition: f64,
        sieving: Option<Sieving>,
    }
    let volume_flux = scenario
        .flow
        .and_then(|f| f.membrane_volume_flux_nm_per_s(m))
        .unwrap_or(0.0);
    let lambda = geometry
        .shape
        .confining_size_nm()
        .map_or(f64::NAN, |r| a / r);
    let equal_pores = m
        .pores
        .windows(2)
        .all(|w| (w[0].radius_nm - w[1].radius_nm).abs() <= 1e-12 * w[0].radius_nm);
    let spacing = m.square_spacing_nm();
    // Each side: the reservoir layer H/D0 and, for equal pores, the access into the mouths (a + Δ f)/(εΦD0),
    // the end terms of the steric permeability model that the diffusive test checks.
    let access = if equal_pores {
        let r = m.pores.first().map_or(f64::NAN, |p| p.radius_nm);
        let open = r - a;
        let f = spacing.map_or(Ok(1.0), |sp| models::square_array_access_factor(open, sp));
        match (f, models::partition_cylinder(lambda)) {
            (Ok(f), Ok(phi)) => {
                (a + models::FLANGED_PIPE_END_CORRECTION * open * f) / (porosity * phi * d0)
            }
            _ => 0.0,
        }
    } else {
        0.0
    };
    let layer_resistance = [
        (m.height_nm - m.z_hi_nm - a) / d0 + access,
        (m.z_lo_nm - a) / d0 + access,
    ];
    let derive = |w: &Window| -> Derived {
        let flux = w.net / (w.steps * dt);
        let density = [0, 1].map(|f| {
            w.emitted[f] * (2.0 * std::f64::consts::PI).sqrt() / (area * sigma[f] * w.steps)
        });
        let permeability = flux / area / (density[1] - density[0]);
        let mean_bath = 0.5 * (density[0] + density[1]);
        Derived {
            flux,
            density,
            permeability,
            partition: w.pores / w.frames / pore_volume / mean_bath,
            sieving: (volume_flux > 0.0)
                .then(|| {
                    sieving_from_transits(
                        w.transits,
                        density,
                        area,
                        w.steps * dt,
                        layer_resistance,
                        volume_flux,
                    )
                })
                .flatten(),
        }
    };

    // Block rule from the per-frame increments and occupancies of the window.
    let increments = |c: usize| -> Vec<f64> {
        (k0 + 1..=last)
            .map(|i| (series.rows[i][c] - series.rows[i - 1][c]) as f64)
            .collect()
    };
    let net_per_frame: Vec<f64> = (k0 + 1..=last)
        .map(|i| {
            let (r0, r1) = (&series.rows[i - 1], &series.rows[i]);
            ((r1[c_net[0]] - r0[c_net[0]]) - (r1[c_net[1]] - r0[c_net[1]])) as f64
        })
        .collect();
    let occupancy: Vec<f64> = (k0 + 1..=last)
        .map(|i| series.rows[i][c_pores] as f64)
        .collect();
    // Transport (crossings, emissions) and occupancy correlate over different times: one block length each.
    let tau_flux = [
        integrated_autocorrelation_time(&net_per_frame),
        integrated_autocorrelation_time(&increments(c_et)),
        integrated_autocorrelation_time(&increments(c_eb)),
    ]
    .into_iter()
    .fold(0.5, f64::max);
    let tau_occupancy = tau_flux.max(integrated_autocorrelation_time(&occupancy));
    let n_inc = last - k0;
    let frame_s = (series.time_s[last] - series.time_s[k0]) / n_inc as f64;
    let blocks_of = |tau: f64| -> (usize, Vec<Derived>) {
        let len = block_length(tau).min(n_inc / 2).max(1);
        let blocks = block_ranges(n_inc, len)
            .iter()
            .map(|r| derive(&window(k0 + r.start, k0 + r.end, k0 + r.start + 1)))
            .collect();
        (len, blocks)
    };
    let (len_flux, flux_blocks) = blocks_of(tau_flux);
    let (len, occupancy_blocks) = blocks_of(tau_occupancy);
    let block_rule = format!(
        "flux and permeability: {}; partition and profile: {}",
        block_rule_text(tau_flux, len_flux, flux_blocks.len(), frame_s),
        block_rule_text(tau_occupancy, len, occupancy_blocks.len(), frame_s)
    );

    let total_window = window(k0, last, k0);
    let total = derive(&total_window);
    let interval = |value: f64, blocks: &[Derived], f: &dyn Fn(&Derived) -> f64| {
        Interval::from_samples(value, &blocks.iter().map(f).collect::<Vec<_>>())
    };
    let flux = interval(total.flux, &flux_blocks, &|d| d.flux);
    let bath_p = interval(total.permeability, &flux_blocks, &|d| d.permeability);
    // P_m = 1/(1/P − H_res/D0) rises monotonically with P (where finite): map the interval's ends.
    let to_membrane = |p: f64| {
        let inv = 1.0 / p - layers_nm / d0;
        if inv > 0.0 {
            1.0 / inv
        } else {
            f64::INFINITY
        }
    };
    let membrane_nm_s = bath_p.map(to_membrane);
    let permeability = membrane_nm_s.map(|p| p * 1e-9);
    let hindrance = membrane_nm_s.map(|p| p * m.thickness_nm() / (porosity * d0));
    let partition = interval(total.partition, &occupancy_blocks, &|d| d.partition);
    let flux_density = bath_p.map(|p| p * 1e-9 * (given[1] - given[0]));

    let r = m.pores.first().map_or(f64::NAN, |p| p.radius_nm);
    let steric = if equal_pores {
        models::membrane_steric_permeability_over_d0(porosity, m.thickness_nm(), a, r, spacing)
            .ok()
            .map(|p| p * d0 * 1e-9)
    } else {
        None
    };
    let plain = if equal_pores {
        models::partition_cylinder(lambda)
            .ok()
            .map(|phi| porosity * phi * d0 / m.thickness_nm() * 1e-9)
    } else {
        None
    };
    let mut hindrance_models = BTreeMap::new();
    if equal_pores {
        if let Ok(v) = models::partition_cylinder(lambda) {
            hindrance_models.insert("steric partition (1-lambda)^2".to_string(), v);
        }
        if let Ok(v) = models::renkin_hindrance(lambda) {
            hindrance_models.insert("Renkin 1954 H".to_string(), v);
        }
        if let Ok(v) = models::dechadilok_deen_hindrance(lambda) {
            hindrance_models.insert("Dechadilok-Deen 2006 H".to_string(), v);
        }
        if let (Some(st), Some(pl)) = (steric, plain) {
            hindrance_models.insert(
                "steric with pore-end corrections".to_string(),
                models::partition_cylinder(lambda).unwrap_or(f64::NAN) * st / pl,
            );
        }
    }
    let permeability_over_steric = steric.map(|st| permeability.map(|p| p / st));
    let filtration = total.sieving.map(|sv| {
        let pick = |f: &dyn Fn(&Sieving) -> f64| {
            let samples: Vec<f64> = flux_blocks
                .iter()
                .filter_map(|d| d.sieving.as_ref().map(f))
                .collect();
            Interval::from_samples(f(&sv), &samples)
        };
        let velocity = if equal_pores {
            scenario
                .flow
                .and_then(|f| f.pore_mean_velocity_nm_per_s(r))
        } else {
            None
        };
        let model = |kd: f64, kc: f64, name: &str| -> Option<SievingModel> {
            let phi = models::partition_cylinder(lambda).ok()?;
            let pe = models::membrane_peclet(kc, kd, velocity?, m.thickness_nm(), d0).ok()?;
            Some(SievingModel {
                name: name.into(),
                partition: phi,
                kd,
                kc,
                peclet: pe,
                sieving_coefficient: models::deen_sieving_coefficient(phi, kc, pe).ok()?,
            })
        };
        let mut sieving_models = Vec::new();
        if geometry.hydrodynamics.is_none() {
            sieving_models.extend(model(
                1.0,
                models::lag_free_kc_cylinder(lambda).unwrap_or(f64::NAN),
                "Deen 1987 with this run's own pores: K_d = 1 and K_c = 2 - Phi (steric pores, no hydrodynamic lag)",
            ));
        }
        if let (Ok(h), Ok(kc)) = (
            models::dechadilok_deen_hindrance(lambda),
            models::dechadilok_deen_kc(lambda),
        ) {
            let phi = models::partition_cylinder(lambda).unwrap_or(f64::NAN);
            sieving_models.extend(model(
                h / phi,
                kc,
                "Deen 1987 with Dechadilok-Deen 2006 K_d and K_c (pores with wall hydrodynamics)",
            ));
        }
        Filtration {
            mean_pore_velocity_m_per_s: velocity.map(|v| v * 1e-9),
            volume_flux_m_per_s: volume_flux * 1e-9,
            transits_down: total_window.transits[0] as i64,
            transits_up: total_window.transits[1] as i64,
            forward_transmission_m_per_s: pick(&|x| x.forward_nm_per_s * 1e-9),
            backward_transmission_m_per_s: pick(&|x| x.backward_nm_per_s * 1e-9),
            sieving_coefficient: pick(&|x| x.coefficient),
            peclet_inferred: pick(&|x| x.peclet),
            diffusive_permeability_inferred_m_per_s: pick(&|x| x.diffusive_permeability_nm_per_s * 1e-9),
            diffusive_hindrance_inferred: pick(&|x| {
                x.diffusive_permeability_nm_per_s * m.thickness_nm() / (porosity * d0)
            }),
            models: sieving_models,
            definition: format!(
                "transits counted by bath of origin give the flux per feed concentration (forward) and per permeate \
                 concentration (backward), each with the diffusive layers in series on its side removed (stirred reservoir H/D0{}); \
                 S = forward/(J_v + backward): the permeate over the feed concentration at the membrane faces when the permeate \
                 is what passes (Deen 1987). Through Deen's one-dimensional pore equation the transmissions also give \
                 Pe = ln(forward/backward) and the diffusive permeability eps Phi K_d D0/L = (forward - backward)/Pe. \
                 No fluid moves outside the pores in this model",
                if access > 0.0 {
                    " and the pore-mouth access resistance (a + 0.8216 r_open f)/(eps Phi D0) of the steric model"
                } else {
                    "; pores of unequal radii: no access term"
                }
            ),
        }
    });

    let time_lag = time_lag(&series, m, k0, last, d0);
    let profile = profile(&reader, m, a, k0, last, len, total.density)?;
    Ok(MembraneAnalysis {
        file: path.to_path_buf(),
        species: name,
        geometry: "membrane".into(),
        note: "no MSD-based diffusivity: particles leaving through a bath face re-enter from a bath, so their tracks jump".into(),
        window_s: [series.time_s[k0], series.time_s[last]],
        frames_in_window: last + 1 - k0,
        block_rule,
        thickness_nm: m.thickness_nm(),
        porosity,
        lambda,
        wall_hydrodynamics: geometry.hydrodynamics.is_some(),
        net_crossings_down: total_window.net as i64,
        flux_particles_per_s: flux,
        flux_density_at_given_mol_per_m2_s: flux_density,
        bath_density_per_nm3: total.density,
        concentration_scale: per_nm3_to_mol_per_m3(total.density[0] + total.density[1])
            / (given[0] + given[1]),
        permeability_bath_to_bath_m_per_s: bath_p.map(|p| p * 1e-9),
        permeability_m_per_s: permeability,
        steric_permeability_m_per_s: steric,
        plain_steric_permeability_m_per_s: plain,
        hindrance,
        permeability_over_steric,
        hindrance_models,
        partition,
        partition_steric: m.steric_partition(a),
        partition_boltzmann: (!sp.wall_potential.is_none()).then(|| {
            let kt = scenario.thermal_energy_pn_nm();
            m.boltzmann_partition(a, |h| sp.wall_potential.energy_pn_nm(h) / kt)
        }),
        filtration,
        time_lag,
        profile,
        profile_csv: None,
    })
}

/// Time lag from the membrane series: applies when the run starts with
/// empty pores and an empty permeate reservoir and the permeate bath is held at 0.
fn time_lag(series: &Series, m: &Membrane, k0: usize, last: usize, d0: f64) -> TimeLag {
    let first = &series.rows[0];
    let feed_top = m.top_concentration_mol_per_m3 >= m.bottom_concentration_mol_per_m3;
    let (permeate_conc, permeate_res, exits, entries) = if feed_top {
        (
            m.bottom_concentration_mol_per_m3,
            col("particles_in_bottom_reservoir"),
            col("exits_bottom"),
            col("entries_bottom"),
        )
    } else {
        (
            m.top_concentration_mol_per_m3,
            col("particles_in_top_reservoir"),
            col("exits_top"),
            col("entries_top"),
        )
    };
    let not = |reason: String| TimeLag {
        applies: false,
        reason,
        t_lag_s: None,
        d_membrane_m2_per_s: None,
        d_membrane_over_d0: None,
        fit_window_s: None,
    };
    if permeate_conc != 0.0 {
        return not("does not apply: the permeate bath is not held at zero".into());
    }
    if series.step[0] != 0 || first[col("particles_in_pores")] != 0 || first[permeate_res] != 0 {
        return not(format!(
            "does not apply: the run did not start from an empty membrane (first frame: {} particles in the pores, {} in the permeate reservoir; thicket fills the pores with the steady profile to shorten the transient)",
            first[col("particles_in_pores")],
            first[permeate_res]
        ));
    }
    let t: Vec<f64> = series.time_s.clone();
    let q: Vec<f64> = series
        .rows
        .iter()
        .map(|r| (r[exits] - r[entries]) as f64)
        .collect();
    match time_lag_fit(&t[..=last], &q[..=last], series.time_s[k0]) {
        Some((t_lag, window)) if t_lag > 0.0 => {
            let d = m.thickness_nm().powi(2) / (6.0 * t_lag);
            TimeLag {
                applies: true,
                reason: "the run started from an empty membrane with the permeate bath at zero; the reservoir layers and pore mouths add to the lag, so D_membrane = L^2/(6 t_lag) is an apparent value that includes them".into(),
                t_lag_s: Some(t_lag),
                d_membrane_m2_per_s: Some(d * 1e-18),
                d_membrane_over_d0: Some(d / d0),
                fit_window_s: Some(window),
            }
        }
        _ => not(
            "the cumulative transmitted amount shows no positive time-axis intercept in the window"
                .into(),
        ),
    }
}

/// Time lag from a cumulative transmitted amount `q` at times `t`: least
/// squares line through the points with t ≥ max(`from_s`, 3 × the lag
/// estimated from the window's end) and its time-axis intercept. Returns
/// (t_lag, fit window), or `None` with fewer than 3 points or no flux.
pub fn time_lag_fit(t: &[f64], q: &[f64], from_s: f64) -> Option<(f64, [f64; 2])> {
    let fit = |from: f64| -> Option<(f64, f64)> {
        let pts: Vec<(f64, f64)> = t
            .iter()
            .zip(q)
            .filter(|(ti, _)| **ti >= from)
            .map(|(a, b)| (*a, *b))
            .collect();
        if pts.len() < 3 {
            return None;
        }
        let n = pts.len() as f64;
        let (mt, mq) = (
            pts.iter().map(|p| p.0).sum::<f64>() / n,
            pts.iter().map(|p| p.1).sum::<f64>() / n,
        );
        let sxy: f64 = pts.iter().map(|p| (p.0 - mt) * (p.1 - mq)).sum();
        let sxx: f64 = pts.iter().map(|p| (p.0 - mt).powi(2)).sum();
        let slope = sxy / sxx;
        (slope > 0.0).then_some((slope, mt - mq / slope))
    };
    let mut from = from_s;
    let (_, mut lag) = fit(from)?;
    // Move the start out to 3 t_lag if the given start is earlier (a few rounds converge).
    for _ in 0..5 {
        let wanted = (TIME_LAG_START_MULTIPLE * lag).max(from_s);
        if wanted <= from {
            break;
        }
        from = wanted;
        match fit(from) {
            Some((_, l)) => lag = l,
            None => return None,
        }
    }
    let end = *t.last()?;
    Some((lag, [from, end]))
}

/// Profile of the window's frames, with block intervals.
fn profile(
    reader: &crate::read::SpeciesReader<'_>,
    m: &Membrane,
    a: f64,
    k0: usize,
    last: usize,
    block_frames: usize,
    density: [f64; 2],
) -> Result<MembraneProfile> {
    let lz = m.height_nm;
    let bins = ((lz / a * PROFILE_BINS_PER_RADIUS).round() as usize).clamp(10, 2000);
    let width = lz / bins as f64;
    let frames = reader.meta().frames.min(last + 1);
    let mut per_frame: Vec<Vec<f64>> = Vec::new();
    let budget = crate::read::DEFAULT_MEMORY_BUDGET_BYTES;
    let step = reader.frames_per_window(budget);
    let mut f = k0;
    while f < frames {
        let end = (f + step).min(frames);
        let w = reader.read_frames(f..end)?;
        for fr in 0..end - f {
            let mut h = vec![0.0; bins];
            for p in 0..w.positions_nm.shape()[1] {
                let z = w.positions_nm[[fr, p, 2]];
                let i = ((z / width).floor().max(0.0) as usize).min(bins - 1);
                h[i] += 1.0;
            }
            per_frame.push(h);
        }
        f = end;
    }
    let feed = density[0].max(density[1]);
    let area = m.area_nm2();
    let norm = |counts: &[f64], n: usize| -> Vec<f64> {
        counts
            .iter()
            .map(|c| c / n.max(1) as f64 / (area * width) / feed)
            .collect()
    };
    let sum = |range: std::ops::Range<usize>| -> Vec<f64> {
        let mut s = vec![0.0; bins];
        for h in &per_frame[range] {
            for (a, b) in s.iter_mut().zip(h) {
                *a += b;
            }
        }
        s
    };
    let all = norm(&sum(0..per_frame.len()), per_frame.len());
    let ranges = block_ranges(per_frame.len(), block_frames);
    let block_profiles: Vec<Vec<f64>> = ranges
        .iter()
        .map(|r| norm(&sum(r.clone()), r.len()))
        .collect();
    let ci: Vec<f64> = (0..bins)
        .map(|i| {
            let samples: Vec<f64> = block_profiles.iter().map(|b| b[i]).collect();
            Interval::from_samples(all[i], &samples)
                .ci95
                .map_or(f64::NAN, |[lo, hi]| 0.5 * (hi - lo))
        })
        .collect();
    let pore_area = m.porosity() * area;
    let mut region = Vec::with_capacity(bins);
    let mut open = Vec::with_capacity(bins);
    let mut z = Vec::with_capacity(bins);
    for (i, c) in all.iter().enumerate() {
        let (lo, hi) = (i as f64 * width, (i + 1) as f64 * width);
        // Fraction of the bin inside the slab, where only the pores are open.
        let inside = ((hi.min(m.z_hi_nm) - lo.max(m.z_lo_nm)) / width).clamp(0.0, 1.0);
        region.push(
            if inside >= 1.0 {
                "pores"
            } else if inside > 0.0 {
                "slab face"
            } else if lo >= m.z_hi_nm {
                "top reservoir"
            } else {
                "bottom reservoir"
            }
            .to_string(),
        );
        let open_area = inside * pore_area + (1.0 - inside) * area;
        open.push(c * area / open_area);
        z.push(lo + 0.5 * width);
    }
    Ok(MembraneProfile {
        z_nm: z,
        bin_nm: width,
        pore_region_nm: [m.z_lo_nm, m.z_hi_nm],
        region,
        c_over_feed: all,
        c_over_feed_ci95: ci,
        c_open_over_feed: open,
        feed_density_per_nm3: feed,
    })
}

impl MembraneAnalysis {
    /// A human-readable table.
    pub fn to_table(&self) -> String {
        let mut s = String::new();
        let w = &mut s;
        use std::fmt::Write as _;
        let _ = writeln!(w, "file            {}", self.file.display());
        let _ = writeln!(
            w,
            "species         {} (membrane, L = {} nm, porosity {:.4}, lambda = {:.4}, wall hydrodynamics {})",
            self.species,
            self.thickness_nm,
            self.porosity,
            self.lambda,
            if self.wall_hydrodynamics { "on" } else { "off" }
        );
        let _ = writeln!(w, "note            {}", self.note);
        let _ = writeln!(
            w,
            "window          {:.4e} .. {:.4e} s ({} frames); {} net crossings down",
            self.window_s[0], self.window_s[1], self.frames_in_window, self.net_crossings_down
        );
        let _ = writeln!(w, "intervals       95 %: {}", self.block_rule);
        let _ = writeln!(
            w,
            "steady state                                 value  [95 % interval]"
        );
        let _ = writeln!(
            w,
            "  net flux, particles/s                      {}",
            self.flux_particles_per_s.describe(4)
        );
        let _ = writeln!(
            w,
            "  flux at the given concentrations, mol/m2/s {}",
            self.flux_density_at_given_mol_per_m2_s.describe(4)
        );
        if self.filtration.is_some() {
            let _ = writeln!(
                w,
                "  permeability                               not measured under filtration (run the membrane without [flow] and a clean permeate)"
            );
        } else {
            let _ = writeln!(
                w,
                "  permeability bath to bath, m/s             {}",
                self.permeability_bath_to_bath_m_per_s.describe(4)
            );
            let _ = writeln!(
                w,
                "  membrane permeability P_m, m/s             {}",
                self.permeability_m_per_s.describe(4)
            );
            if let Some(st) = self.steric_permeability_m_per_s {
                let _ = writeln!(
                    w,
                    "    steric model (pore ends, Φ), m/s         {st:.4e}{}",
                    if self.wall_hydrodynamics {
                        "  (no wall hydrodynamics in this model)"
                    } else {
                        ""
                    }
                );
            }
            if let Some(pl) = self.plain_steric_permeability_m_per_s {
                let _ = writeln!(w, "    plain steric eps Φ D0/L, m/s             {pl:.4e}");
            }
            if let Some(r) = &self.permeability_over_steric {
                let _ = writeln!(
                    w,
                    "    P_m / steric model                       {}",
                    r.describe_fixed(4)
                );
            }
            let _ = writeln!(
                w,
                "  hindrance H = P_m L/(eps D0)               {}",
                self.hindrance.describe_fixed(4)
            );
            for (k, v) in &self.hindrance_models {
                let _ = writeln!(w, "    {k:<41}{v:.4}");
            }
        }
        let _ = writeln!(
            w,
            "  partition K (pores / mean bath)            {}{}",
            self.partition.describe_fixed(4),
            if self.filtration.is_some() {
                "  (under flow: not the equilibrium value)"
            } else {
                ""
            }
        );
        let _ = writeln!(
            w,
            "    exact steric sum(r-a)^2/sum r^2          {:.4}",
            self.partition_steric
        );
        if let Some(k) = self.partition_boltzmann {
            let _ = writeln!(
                w,
                "    Boltzmann-weighted, wall potential       {k:.4}  (exact for the model, at equilibrium)"
            );
        }
        let _ = writeln!(
            w,
            "  bath densities bottom/top, 1/nm3           {:.4e} / {:.4e} (scale {:.3e} of the given)",
            self.bath_density_per_nm3[0], self.bath_density_per_nm3[1], self.concentration_scale
        );
        if let Some(f) = &self.filtration {
            s.push_str(&f.to_lines());
        }
        let w = &mut s;
        match (self.time_lag.t_lag_s, self.time_lag.d_membrane_over_d0) {
            (Some(t), Some(d)) => {
                let _ = writeln!(
                    w,
                    "time lag        t_lag = {t:.4e} s, D_membrane = L^2/(6 t_lag) = {:.4e} m2/s ({d:.4} D0); {}",
                    self.time_lag.d_membrane_m2_per_s.unwrap_or(f64::NAN),
                    self.time_lag.reason
                );
            }
            _ => {
                let _ = writeln!(w, "time lag        {}", self.time_lag.reason);
            }
        }
        let _ = writeln!(
            w,
            "profile         c(z)/c_feed in {} bins of {:.3} nm; pores between z = {} and {} nm{}",
            self.profile.z_nm.len(),
            self.profile.bin_nm,
            self.profile.pore_region_nm[0],
            self.profile.pore_region_nm[1],
            self.profile_csv
                .as_ref()
                .map_or(String::new(), |p| format!("; written to {}", p.display()))
        );
        let _ = writeln!(
            w,
            "  region             z_nm   c/c_feed (box area)   c/c_feed (open area)"
        );
        // A coarse view: every k-th bin, at most 16 rows.
        let k = self.profile.z_nm.len().div_ceil(16).max(1);
        for i in (0..self.profile.z_nm.len()).step_by(k) {
            let _ = writeln!(
                w,
                "  {:<16} {:>7.2}   {:>8.4} ± {:<8.4}   {:>8.4}",
                self.profile.region[i],
                self.profile.z_nm[i],
                self.profile.c_over_feed[i],
                self.profile.c_over_feed_ci95[i],
                self.profile.c_open_over_feed[i]
            );
        }
        s
    }

    /// Writes the concentration profile as CSV to `path`; refuses to
    /// overwrite an existing file.
    ///
    /// # Errors
    /// [`crate::error::ErrorKind::Output`] when the file exists or cannot be written.
    pub fn write_profile_csv(&self, path: &Path) -> Result<()> {
        let p = &self.profile;
        let mut text = String::from(
            "z_nm,region,c_over_feed,c_over_feed_ci95_half_width,c_open_area_over_feed\n",
        );
        for i in 0..p.z_nm.len() {
            text.push_str(&format!(
                "{},{},{},{},{}\n",
                p.z_nm[i],
                p.region[i],
                p.c_over_feed[i],
                p.c_over_feed_ci95[i],
                p.c_open_over_feed[i]
            ));
        }
        write_new(path, &text)
    }
}

/// Writes `text` to a new file at `path` (never overwrites).
pub(crate) fn write_new(path: &Path, text: &str) -> Result<()> {
    let fail = |message: String| -> Error {
        crate::error::ErrorKind::Output {
            path: path.to_path_buf(),
            message,
        }
        .into()
    };
    let mut f = std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(path)
        .map_err(|e| {
            if e.kind() == std::io::ErrorKind::AlreadyExists {
                fail("it exists already; remove it or choose another --plot prefix".into())
            } else {
                fail(e.to_string())
            }
        })?;
    f.write_all(text.as_bytes())
        .map_err(|e| fail(e.to_string()))
}
