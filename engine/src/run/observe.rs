//! Observers: everything that watches a run. The driver calls each at the
//! start (or on resume), after every block of steps, at every recorded
//! frame and at the end; each saves its own part of the one checkpoint.
//! A stepper never knows who watches it.

use crate::base::error::{EngineError, Result};
use crate::io::trajectory::{
    write_attributes, AttrValue, BindingEvents, ObservableSeries, TrajectoryWriter,
};
use crate::run::membrane::{geometry_attributes, MembraneMeter, MEMBRANE_COLUMNS};
use crate::scenario::geometry::Geometry;
use crate::scenario::Scenario;
use crate::space::shape::Shape;
use crate::step::boundary::Counts;
use crate::step::pipeline::Stepper;
use crate::step::state::State;

/// One watcher of a run.
pub trait Observer {
    /// Name of its part in the checkpoint.
    fn name(&self) -> &'static str;

    /// A new trajectory: records what it records at step 0.
    ///
    /// # Errors
    /// HDF5 failures.
    fn start(
        &mut self,
        _w: &mut TrajectoryWriter,
        _stepper: &Stepper,
        _state: &State,
    ) -> Result<()> {
        Ok(())
    }

    /// A resumed run: restores its `part` of the checkpoint (None when it saved none).
    ///
    /// # Errors
    /// A missing or damaged part; HDF5 failures.
    fn resume(&mut self, _w: &mut TrajectoryWriter, _part: Option<&str>) -> Result<()> {
        Ok(())
    }

    /// After every block of steps, with the block's events per species.
    fn block(&mut self, _state: &State, _events: &[Counts]) {}

    /// At every recorded frame.
    ///
    /// # Errors
    /// HDF5 failures.
    fn frame(
        &mut self,
        _w: &mut TrajectoryWriter,
        _stepper: &Stepper,
        _state: &State,
        _time_s: f64,
    ) -> Result<()> {
        Ok(())
    }

    /// Its part of the checkpoint, if it keeps state.
    ///
    /// # Errors
    /// Serialisation failures.
    fn save(&self) -> Result<Option<String>> {
        Ok(None)
    }

    /// At the end of a completed run.
    ///
    /// # Errors
    /// HDF5 failures.
    fn finish(
        &mut self,
        _w: &mut TrajectoryWriter,
        _stepper: &Stepper,
        _state: &State,
    ) -> Result<()> {
        Ok(())
    }
}

/// Writes the particles' positions and images at every recorded frame.
pub struct Frames;

impl Observer for Frames {
    fn name(&self) -> &'static str {
        "frames"
    }

    fn start(&mut self, w: &mut TrajectoryWriter, _stepper: &Stepper, state: &State) -> Result<()> {
        w.write_frame(state, 0.0)
    }

    fn frame(
        &mut self,
        w: &mut TrajectoryWriter,
        _stepper: &Stepper,
        state: &State,
        time_s: f64,
    ) -> Result<()> {
        w.write_frame(state, time_s)
    }
}

/// Reports the step reached after every block.
pub struct Progress<'a> {
    /// Called with (step, steps).
    pub report: &'a mut dyn FnMut(u64, u64),
    /// Steps of the run.
    pub steps: u64,
}

impl Observer for Progress<'_> {
    fn name(&self) -> &'static str {
        "progress"
    }

    fn start(
        &mut self,
        _w: &mut TrajectoryWriter,
        _stepper: &Stepper,
        state: &State,
    ) -> Result<()> {
        (self.report)(state.step, self.steps);
        Ok(())
    }

    fn resume(&mut self, _w: &mut TrajectoryWriter, _part: Option<&str>) -> Result<()> {
        Ok(())
    }

    fn block(&mut self, state: &State, _events: &[Counts]) {
        (self.report)(state.step, self.steps);
    }
}

/// A confined run's record: the geometry's parameters, and in a membrane the
/// flux meter with its per-frame series and end-of-run summary.
pub struct WallsAndBaths<'a> {
    scenario: &'a Scenario,
    geometry: &'a Geometry,
    meter: MembraneMeter,
    series: Vec<ObservableSeries>,
}

impl<'a> WallsAndBaths<'a> {
    /// The observer of a scenario with a geometry.
    pub fn new(scenario: &'a Scenario, geometry: &'a Geometry) -> Self {
        Self {
            scenario,
            geometry,
            meter: MembraneMeter::new(scenario.species.len()),
            series: Vec::new(),
        }
    }

    fn is_membrane(&self) -> bool {
        matches!(self.geometry.shape, Shape::Membrane(_))
    }
}

impl Observer for WallsAndBaths<'_> {
    fn name(&self) -> &'static str {
        "membrane_meter"
    }

    fn start(&mut self, w: &mut TrajectoryWriter, stepper: &Stepper, state: &State) -> Result<()> {
        write_attributes(
            w,
            "parameters/thicket/geometry",
            &geometry_attributes(self.scenario, self.geometry),
        )?;
        if self.is_membrane() {
            for s in &self.scenario.species {
                self.series.push(ObservableSeries::create(
                    w,
                    &format!("{}/membrane", s.name),
                    &MEMBRANE_COLUMNS,
                    "1",
                )?);
            }
        }
        self.frame(w, stepper, state, 0.0)
    }

    fn resume(&mut self, w: &mut TrajectoryWriter, part: Option<&str>) -> Result<()> {
        let fail = |reason: String| EngineError::Resume {
            file: w.path().to_path_buf(),
            reason,
        };
        let text = part.ok_or_else(|| fail("the checkpoint holds no membrane counters".into()))?;
        let meter: MembraneMeter = toml::from_str(text).map_err(|e| {
            fail(format!(
                "the checkpoint's membrane counters are damaged ({e})"
            ))
        })?;
        if meter.totals.len() != self.scenario.species.len() {
            return Err(fail(
                "the checkpoint's membrane counters belong to a scenario with another number of species".into(),
            ));
        }
        self.meter = meter;
        if self.is_membrane() {
            for s in &self.scenario.species {
                self.series.push(ObservableSeries::reopen(
                    w,
                    &format!("{}/membrane", s.name),
                    MEMBRANE_COLUMNS.len(),
                    w.frames(),
                )?);
            }
        }
        Ok(())
    }

    fn block(&mut self, _state: &State, events: &[Counts]) {
        self.meter.add(events);
    }

    /// One row of counts and occupancies per species, and the steady-state window.
    fn frame(
        &mut self,
        _w: &mut TrajectoryWriter,
        stepper: &Stepper,
        state: &State,
        time_s: f64,
    ) -> Result<()> {
        let Some(occupancy) = stepper.occupancy(state) else {
            return Ok(());
        };
        self.meter
            .observe(state.step, time_s, self.geometry.flux_after_s, &occupancy);
        for ((series, c), o) in self
            .series
            .iter_mut()
            .zip(&self.meter.totals)
            .zip(&occupancy)
        {
            let row = [
                c.exits_bottom,
                c.exits_top,
                c.entries_bottom,
                c.entries_top,
                c.crossings_down,
                c.crossings_up,
                c.rejected_moves,
                o.pores,
                o.top,
                o.bottom,
                c.transits_down,
                c.transits_up,
            ]
            .map(|v| v as i64);
            series.append(state.step, time_s, &row)?;
        }
        Ok(())
    }

    fn save(&self) -> Result<Option<String>> {
        toml::to_string(&self.meter)
            .map(Some)
            .map_err(|e| EngineError::Io {
                file: "membrane counters".into(),
                source: std::io::Error::other(e.to_string()),
            })
    }

    /// The steady-state summary of each species as attributes of
    /// `/observables/<species>/membrane`.
    fn finish(&mut self, w: &mut TrajectoryWriter, stepper: &Stepper, state: &State) -> Result<()> {
        let scenario = self.scenario;
        for (s, sp) in scenario.species.iter().enumerate() {
            let Some(r) = self.meter.summary(stepper, scenario, s, state.step) else {
                continue;
            };
            let f = AttrValue::F64;
            let attrs = [
                ("window_start_s", f(r.window_s[0])),
                ("window_end_s", f(r.window_s[1])),
                ("net_crossings_down", AttrValue::I64(r.net_crossings_down)),
                ("flux_particles_per_s", f(r.flux_particles_per_s)),
                ("simulated_top_bath_density_per_nm3", f(r.bath_density_per_nm3[1])),
                ("simulated_bottom_bath_density_per_nm3", f(r.bath_density_per_nm3[0])),
                ("concentration_scale", f(r.concentration_scale)),
                ("permeability_m_per_s", f(r.permeability_m_per_s)),
                ("flux_density_at_given_concentrations_mol_per_m2_s", f(r.flux_density_at_given_mol_per_m2_s)),
                ("membrane_permeability_m_per_s", f(r.membrane_permeability_m_per_s)),
                ("hindrance_measured", f(r.hindrance)),
                ("porosity", f(r.porosity)),
                ("partition_coefficient_steric", f(r.steric_partition)),
                ("mean_particles_in_pores", f(r.mean_particles_in_pores)),
                ("mean_particles_in_top_reservoir", f(r.mean_particles_in_top_reservoir)),
                ("mean_particles_in_bottom_reservoir", f(r.mean_particles_in_bottom_reservoir)),
                ("pore_concentration_over_mean_bath", f(r.pore_concentration_over_mean_bath)),
                ("rejected_moves", AttrValue::I64(r.rejected_moves as i64)),
                (
                    "definitions",
                    AttrValue::Str(
                        "J = net mid-plane crossings downward per second; simulated bath densities from emissions (c = emitted sqrt(2 pi)/(A sigma steps)); \
                         permeability = J/A/(c_top - c_bottom); membrane_permeability removes the two reservoir layers H/D0; \
                         hindrance_measured = membrane_permeability L/(porosity D0); tracers do not interact, so fluxes scale to the given \
                         concentrations: flux_density_at_given_concentrations = permeability (c_top - c_bottom) as given"
                            .into(),
                    ),
                ),
            ];
            write_attributes(w, &format!("observables/{}/membrane", sp.name), &attrs)?;
        }
        Ok(())
    }
}

/// One species' particle range, and its bound series and events when it binds.
type Binder = (
    std::ops::Range<usize>,
    Option<(ObservableSeries, BindingEvents)>,
);

/// Binding to the obstacles: each binding species' bound state at every
/// frame (`/observables/<species>/bound`, 1 bound, 0 free) and its completed
/// events (`/observables/<species>/binding_events`), written at frames;
/// events completed since the last frame wait in the checkpoint.
pub struct Tethers<'a> {
    scenario: &'a Scenario,
    /// Per species: its particle range and its series and events when it binds.
    binders: Vec<Binder>,
    /// Completed events not yet written: (species, dwell s, bound at s, particle within species).
    pending: Vec<(usize, f64, f64, i64)>,
}

impl<'a> Tethers<'a> {
    /// The observer of a scenario in which some species binds.
    pub fn new(scenario: &'a Scenario) -> Self {
        let mut start = 0;
        let binders = scenario
            .species
            .iter()
            .map(|s| {
                start += s.count;
                (start - s.count..start, None)
            })
            .collect();
        Self {
            scenario,
            binders,
            pending: Vec::new(),
        }
    }

    fn binds(&self, s: usize) -> bool {
        self.scenario.species[s].binding.is_some()
    }
}

/// What `/observables/<species>/bound` holds.
const BOUND_MEANING: &str = "1 when the tracer is bound to an obstacle at the frame, 0 when free";

impl Observer for Tethers<'_> {
    fn name(&self) -> &'static str {
        "binding"
    }

    fn start(&mut self, w: &mut TrajectoryWriter, stepper: &Stepper, state: &State) -> Result<()> {
        for s in 0..self.binders.len() {
            if self.binds(s) {
                let name = &self.scenario.species[s].name;
                let width = self.binders[s].0.len();
                self.binders[s].1 = Some((
                    ObservableSeries::create_per_particle(
                        w,
                        &format!("{name}/bound"),
                        width,
                        "1",
                        BOUND_MEANING,
                    )?,
                    BindingEvents::create(w, name)?,
                ));
            }
        }
        self.frame(w, stepper, state, 0.0)
    }

    fn resume(&mut self, w: &mut TrajectoryWriter, part: Option<&str>) -> Result<()> {
        let fail = |reason: &str| EngineError::Resume {
            file: w.path().to_path_buf(),
            reason: format!("the checkpoint's binding record is {reason}"),
        };
        let text = part.ok_or_else(|| fail("missing"))?;
        let mut lines = text.lines();
        let rows: Vec<usize> = lines
            .next()
            .ok_or_else(|| fail("empty"))?
            .split(' ')
            .map(|v| v.parse().map_err(|_| fail("damaged")))
            .collect::<Result<_>>()?;
        if rows.len() != self.binders.len() {
            return Err(fail("for another number of species"));
        }
        for line in lines {
            let v: Vec<&str> = line.split(' ').collect();
            let parsed = (|| {
                let s: usize = v.first()?.parse().ok()?;
                let dwell = f64::from_bits(u64::from_str_radix(v.get(1)?, 16).ok()?);
                let at = f64::from_bits(u64::from_str_radix(v.get(2)?, 16).ok()?);
                let i: i64 = v.get(3)?.parse().ok()?;
                (v.len() == 4 && s < rows.len()).then_some((s, dwell, at, i))
            })();
            self.pending.push(parsed.ok_or_else(|| fail("damaged"))?);
        }
        for (s, &events) in rows.iter().enumerate() {
            if self.binds(s) {
                let name = &self.scenario.species[s].name;
                let width = self.binders[s].0.len();
                self.binders[s].1 = Some((
                    ObservableSeries::reopen(w, &format!("{name}/bound"), width, w.frames())?,
                    BindingEvents::reopen(w, name, events)?,
                ));
            }
        }
        Ok(())
    }

    fn block(&mut self, state: &State, _events: &[Counts]) {
        let dt = self.scenario.dt_s;
        for r in &state.binding.released {
            let i = r.particle as usize;
            if let Some(s) = self
                .binders
                .iter()
                .position(|(range, _)| range.contains(&i))
            {
                let within = (i - self.binders[s].0.start) as i64;
                self.pending
                    .push((s, r.tether.dwell_s, r.tether.since_step as f64 * dt, within));
            }
        }
    }

    fn frame(
        &mut self,
        _w: &mut TrajectoryWriter,
        _stepper: &Stepper,
        state: &State,
        time_s: f64,
    ) -> Result<()> {
        for (s, (range, sets)) in self.binders.iter_mut().enumerate() {
            let Some((series, events)) = sets else {
                continue;
            };
            let row: Vec<i64> = state.binding.tethers[range.clone()]
                .iter()
                .map(|t| t.is_some() as i64)
                .collect();
            series.append(state.step, time_s, &row)?;
            let done: Vec<(f64, f64, i64)> = self
                .pending
                .iter()
                .filter(|p| p.0 == s)
                .map(|p| (p.1, p.2, p.3))
                .collect();
            events.append(&done)?;
        }
        self.pending.clear();
        Ok(())
    }

    fn save(&self) -> Result<Option<String>> {
        let mut text = self
            .binders
            .iter()
            .map(|(_, sets)| sets.as_ref().map_or(0, |(_, e)| e.rows()).to_string())
            .collect::<Vec<_>>()
            .join(" ");
        for (s, dwell, at, i) in &self.pending {
            text.push_str(&format!(
                "\n{s} {:x} {:x} {i}",
                dwell.to_bits(),
                at.to_bits()
            ));
        }
        Ok(Some(text))
    }
}
