//! The membrane flux meter: cumulative crossings and bath exchanges per
//! species, the steady-state window that opens at `flux_after_s`, and the
//! permeability, hindrance and partition it yields at the end of a run.

use crate::io::trajectory::AttrValue;
use crate::scenario::geometry::Geometry;
use crate::scenario::Scenario;
use crate::space::shape::{per_nm3_to_mol_per_m3, Shape};
use crate::step::boundary::Counts;
use crate::step::pipeline::{Occupancy, Stepper};
use serde::{Deserialize, Serialize};

/// Columns of the per-frame membrane series `/observables/<species>/membrane`.
pub const MEMBRANE_COLUMNS: [&str; 12] = [
    "exits_bottom",
    "exits_top",
    "entries_bottom",
    "entries_top",
    "crossings_down",
    "crossings_up",
    "rejected_moves",
    "particles_in_pores",
    "particles_in_top_reservoir",
    "particles_in_bottom_reservoir",
    "transits_down",
    "transits_up",
];

/// Running membrane measurements of a run: cumulative counts per species and
/// the steady-state window that opens at `flux_after_s`.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct MembraneMeter {
    /// Cumulative counts per species.
    pub totals: Vec<Counts>,
    /// The steady-state window, once open.
    pub window: Option<Window>,
}

/// Accumulators of the steady-state window.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Window {
    /// Step at which it opened.
    pub start_step: u64,
    /// Counts per species at that step.
    pub start: Vec<Counts>,
    /// Sums over recorded frames of [in pores, top reservoir, bottom reservoir] per species.
    pub occupancy_sums: Vec<[u64; 3]>,
    /// Frames summed.
    pub frames: u64,
}

impl MembraneMeter {
    /// A meter for `species` species with nothing counted.
    pub fn new(species: usize) -> Self {
        Self {
            totals: vec![Counts::default(); species],
            window: None,
        }
    }

    /// Adds the counts of one block.
    pub fn add(&mut self, block: &[Counts]) {
        for (t, b) in self.totals.iter_mut().zip(block) {
            *t += *b;
        }
    }

    /// Records an instant (a frame): opens the window at the first call with
    /// `time_s ≥ flux_after_s`, then sums occupancies.
    pub fn observe(&mut self, step: u64, time_s: f64, flux_after_s: f64, occupancy: &[Occupancy]) {
        if self.window.is_none() && time_s >= flux_after_s {
            self.window = Some(Window {
                start_step: step,
                start: self.totals.clone(),
                occupancy_sums: vec![[0; 3]; occupancy.len()],
                frames: 0,
            });
        }
        if let Some(w) = self.window.as_mut() {
            for (sum, o) in w.occupancy_sums.iter_mut().zip(occupancy) {
                sum[0] += o.pores;
                sum[1] += o.top;
                sum[2] += o.bottom;
            }
            w.frames += 1;
        }
    }

    /// Steady-state results of species `s` from the window's opening to
    /// `step`; `None` before the window opens or when it spans no steps.
    pub fn summary(
        &self,
        stepper: &Stepper,
        scenario: &Scenario,
        s: usize,
        step: u64,
    ) -> Option<MembraneSummary> {
        let Some(Shape::Membrane(m)) = stepper.confining_shape() else {
            return None;
        };
        let w = self.window.as_ref()?;
        let steps = step.checked_sub(w.start_step).filter(|&n| n > 0)? as f64;
        let (c0, c1) = (w.start[s], self.totals[s]);
        let species = &scenario.species[s];
        let area = m.area_nm2();
        let duration_s = steps * scenario.dt_s;
        let net_down = (c1.crossings_down - c0.crossings_down) as i64
            - (c1.crossings_up - c0.crossings_up) as i64;
        let flux_per_s = net_down as f64 / duration_s;
        // A bath at number density c emits c A σ/√(2π) particles per step.
        let sigma = stepper.bath_sigma_nm(s);
        let emitted = [
            (c1.entries_bottom - c0.entries_bottom) as f64,
            (c1.entries_top - c0.entries_top) as f64,
        ];
        let density = [0, 1]
            .map(|f| emitted[f] * (2.0 * std::f64::consts::PI).sqrt() / (area * sigma[f] * steps));
        let flux_density_per_nm2_s = flux_per_s / area;
        let d0 = species.d0_nm2_per_s();
        let a = species.radius_nm;
        let permeability_nm_s = flux_density_per_nm2_s / (density[1] - density[0]);
        // The reservoirs between each bath face and the dilated slab face add resistance H/D0 each.
        let layers_nm = (m.height_nm - m.z_hi_nm - a) + (m.z_lo_nm - a);
        let membrane_nm_s = 1.0 / (1.0 / permeability_nm_s - layers_nm / d0);
        let porosity = m.porosity();
        let frames = w.frames.max(1) as f64;
        let occ = w.occupancy_sums[s];
        let mean_bath = 0.5 * (density[0] + density[1]);
        Some(MembraneSummary {
            window_s: [
                w.start_step as f64 * scenario.dt_s,
                step as f64 * scenario.dt_s,
            ],
            net_crossings_down: net_down,
            flux_particles_per_s: flux_per_s,
            bath_density_per_nm3: density,
            permeability_m_per_s: permeability_nm_s * 1e-9,
            flux_density_at_given_mol_per_m2_s: permeability_nm_s
                * 1e-9
                * (m.top_concentration_mol_per_m3 - m.bottom_concentration_mol_per_m3),
            concentration_scale: per_nm3_to_mol_per_m3(density[0] + density[1])
                / (m.top_concentration_mol_per_m3 + m.bottom_concentration_mol_per_m3),
            membrane_permeability_m_per_s: membrane_nm_s * 1e-9,
            hindrance: membrane_nm_s * m.thickness_nm() / (porosity * d0),
            porosity,
            steric_partition: m.steric_partition(a),
            mean_particles_in_pores: occ[0] as f64 / frames,
            mean_particles_in_top_reservoir: occ[1] as f64 / frames,
            mean_particles_in_bottom_reservoir: occ[2] as f64 / frames,
            pore_concentration_over_mean_bath: occ[0] as f64
                / frames
                / m.pore_volume_nm3()
                / mean_bath,
            rejected_moves: c1.rejected_moves - c0.rejected_moves,
        })
    }
}

/// Steady-state membrane results of one species over a window.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MembraneSummary {
    /// Window [start, end], s.
    pub window_s: [f64; 2],
    /// Net downward crossings of the mid-plane in the window.
    pub net_crossings_down: i64,
    /// Net flux from top to bottom, particles per second (whole membrane area of the box).
    pub flux_particles_per_s: f64,
    /// Simulated bath densities [bottom, top], particles per nm³, from the
    /// emissions (a bath at density c emits c A σ/√(2π) per step).
    pub bath_density_per_nm3: [f64; 2],
    /// Bath-to-bath permeability J/(c_top − c_bottom), m/s.
    pub permeability_m_per_s: f64,
    /// Flux density at the scenario's bath concentrations, mol/(m² s):
    /// tracers do not interact, so the flux scales with the concentrations
    /// and the particle count only sets the statistics.
    pub flux_density_at_given_mol_per_m2_s: f64,
    /// Simulated over given bath concentrations (the sampling level).
    pub concentration_scale: f64,
    /// Membrane permeability: the bath-to-bath resistance less the two
    /// reservoir layers H/D0 (H from bath face to the face a from the slab), m/s.
    pub membrane_permeability_m_per_s: f64,
    /// Measured hindrance P_m L / (ε D0), to compare with Φ (steric) or the
    /// Renkin and Dechadilok–Deen H (it includes the pore-end resistance).
    pub hindrance: f64,
    /// Porosity ε.
    pub porosity: f64,
    /// Steric partition coefficient Φ of the pores.
    pub steric_partition: f64,
    /// Mean particles inside pores over the window's frames.
    pub mean_particles_in_pores: f64,
    /// Mean particles above the slab.
    pub mean_particles_in_top_reservoir: f64,
    /// Mean particles below the slab.
    pub mean_particles_in_bottom_reservoir: f64,
    /// Mean pore concentration (over the whole pore volume Σ π r² L) over the
    /// mean bath concentration: the partition coefficient when both baths
    /// are equal.
    pub pore_concentration_over_mean_bath: f64,
    /// Moves rejected in the window.
    pub rejected_moves: u64,
}

/// Geometry parameters as attributes for `/parameters/thicket/geometry`.
pub fn geometry_attributes(
    scenario: &Scenario,
    geometry: &Geometry,
) -> Vec<(&'static str, AttrValue)> {
    let f = AttrValue::F64;
    let s = |v: &str| AttrValue::Str(v.to_string());
    let mut attrs = vec![
        ("kind", s(geometry.shape.kind())),
        (
            "wall_hydrodynamics",
            AttrValue::I64(i64::from(geometry.hydrodynamics.is_some())),
        ),
        ("hydrodynamics", s(&geometry.hydrodynamics_description())),
    ];
    if let Some(m) = geometry.hydrodynamics {
        attrs.push(("perpendicular_model", s(m.name())));
        attrs.push(("perpendicular_model_source", s(m.source())));
    }
    match &geometry.shape {
        Shape::PlaneWall { height_nm } => attrs.push(("box_height_nm", f(*height_nm))),
        Shape::Slit { width_nm } => attrs.push(("width_nm", f(*width_nm))),
        Shape::Cylinder { radius_nm, axis_nm } => {
            attrs.push(("pore_radius_nm", f(*radius_nm)));
            attrs.push(("axis_x_nm", f(axis_nm[0])));
            attrs.push(("axis_y_nm", f(axis_nm[1])));
        }
        Shape::Membrane(m) => {
            attrs.extend([
                ("thickness_nm", f(m.thickness_nm())),
                ("slab_bottom_z_nm", f(m.z_lo_nm)),
                ("slab_top_z_nm", f(m.z_hi_nm)),
                ("pores", AttrValue::I64(m.pores.len() as i64)),
                ("porosity", f(m.porosity())),
                ("top_concentration_mol_per_m3", f(m.top_concentration_mol_per_m3)),
                ("bottom_concentration_mol_per_m3", f(m.bottom_concentration_mol_per_m3)),
                ("flux_after_s", f(geometry.flux_after_s)),
                ("recycled_particles", s("particles leaving through a bath face re-enter from a bath; their tracks jump")),
            ]);
            let radii: Vec<String> = m
                .pores
                .iter()
                .map(|p| format!("{},{},{}", p.centre_nm[0], p.centre_nm[1], p.radius_nm))
                .collect();
            if radii.len() <= 1000 {
                attrs.push(("pores_x_y_radius_nm", s(&radii.join(";"))));
            }
        }
    }
    if let Some(size) = geometry.shape.confining_size_nm() {
        attrs.push(("confining_size_nm", f(size)));
        let lambdas: Vec<String> = scenario
            .species
            .iter()
            .map(|sp| format!("{}={}", sp.name, sp.radius_nm / size))
            .collect();
        attrs.push(("lambda_per_species", s(&lambdas.join(";"))));
    }
    attrs
}
