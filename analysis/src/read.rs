//! Reading H5MD trajectories (the layout `thicket run` writes, and any other
//! H5MD 1.1 file with particle positions).
//!
//! Access is streaming: [`SpeciesReader::blocks`] hands out bounded blocks of
//! particles over all frames (an HDF5 hyperslab `[0..F, p0..p1, 0..D]`) and
//! [`SpeciesReader::frame_windows`] bounded windows of frames over all
//! particles, each sized from a memory budget, so the memory an analysis
//! needs does not grow with the size of the file. Positions come back
//! unwrapped (position + image · edges) and as `f64`, whether the file
//! stores `f32` or `f64`.
//!
//! A file from an interrupted run may have `value`, `step` and `time`
//! datasets of slightly different lengths; the reader uses the shortest and
//! marks the species as truncated (see [`SpeciesMeta::truncated`]).

use std::collections::BTreeMap;
use std::io::{Read, Seek, SeekFrom};
use std::ops::Range;
use std::path::{Path, PathBuf};

use hdf5::types::{
    FixedAscii, FixedUnicode, FloatSize, TypeDescriptor, VarLenAscii, VarLenUnicode,
};
use ndarray::{s, Array3, Ix3};

use crate::error::{Error, ErrorKind, Result};

/// Memory budget for one block of positions when the caller gives none: 64 MiB.
pub const DEFAULT_MEMORY_BUDGET_BYTES: usize = 64 << 20;

/// Name of the `/particles` group holding fixed obstacles, which is not a
/// species of moving particles.
pub const OBSTACLES_GROUP: &str = "obstacles";

/// Largest fixed-length string attribute the reader accepts (1 MiB).
const MAX_STRING_BYTES: usize = 1 << 20;

/// An open H5MD trajectory file.
#[derive(Debug)]
pub struct Trajectory {
    path: PathBuf,
    file: hdf5::File,
    species: Vec<String>,
    parameters: Option<RunParameters>,
}

/// The run description thicket stores under `/parameters/thicket`; every
/// field is optional because other writers store none of it.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct RunParameters {
    /// The resolved scenario (TOML text), attribute `scenario`.
    pub scenario_toml: Option<String>,
    /// The run's seed, attribute `seed`.
    pub seed: Option<u64>,
    /// Version of the engine that wrote the file, attribute `version`.
    pub version: Option<String>,
    /// Frames the run meant to write, attribute `frames_planned`.
    pub frames_planned: Option<u64>,
    /// Integrator time step in s, attribute `dt_s`.
    pub dt_s: Option<f64>,
    /// Per-species parameters from `/parameters/thicket/species/<name>`.
    pub species: BTreeMap<String, SpeciesParameters>,
}

/// Per-species parameters stored by thicket.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SpeciesParameters {
    /// Steric radius in nm.
    pub radius_nm: Option<f64>,
    /// Hydrodynamic (drag) radius in nm.
    pub drag_radius_nm: Option<f64>,
    /// Free-solution diffusivity D0 in m²/s.
    pub d0_m2_per_s: Option<f64>,
    /// Number of particles of the species.
    pub count: Option<u64>,
}

/// What a part of a split ensemble says about itself.
#[derive(Debug, Clone, PartialEq)]
pub struct EnsemblePartInfo {
    /// 0-based index of the part.
    pub index: usize,
    /// Number of parts.
    pub parts: usize,
    /// The whole run's resolved scenario (TOML text).
    pub whole_scenario: String,
    /// Per species: (index of the part's first particle in the whole run, whole count).
    pub species: BTreeMap<String, (usize, usize)>,
}

/// The simulation box of a species (`/particles/<species>/box`).
#[derive(Debug, Clone, PartialEq)]
pub struct SimulationBox {
    /// Spatial dimension (attribute `dimension`).
    pub dimension: usize,
    /// Per axis: `true` where the boundary is "periodic".
    pub periodic: Vec<bool>,
    /// Box edge lengths in nm (dataset `edges`); absent when no axis is periodic.
    pub edges_nm: Option<Vec<f64>>,
}

/// Floating-point type of the stored positions.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub enum StoredPrecision {
    /// 32-bit floats.
    F32,
    /// 64-bit floats.
    F64,
}

/// Lengths of the time-dependent datasets of a species, as found in the file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DatasetLengths {
    /// Frames in `position/value`.
    pub value: usize,
    /// Entries in `position/step` (`None` if absent or of the fixed-interval form).
    pub step: Option<usize>,
    /// Entries in `position/time` (`None` if absent or of the fixed-interval form).
    pub time: Option<usize>,
    /// Frames in `image/value` (`None` if there are no images).
    pub image: Option<usize>,
}

/// Everything known about one species before reading its positions.
#[derive(Debug, Clone)]
pub struct SpeciesMeta {
    /// The species (group name under `/particles`).
    pub name: String,
    /// Number of particles N.
    pub particles: usize,
    /// Spatial dimension D of the positions (the last axis of `value`).
    pub dims: usize,
    /// Frames usable for analysis: the shortest of the time-dependent datasets.
    pub frames: usize,
    /// Lengths of the datasets as stored.
    pub lengths: DatasetLengths,
    /// Frames the run meant to write, if the file says.
    pub frames_planned: Option<u64>,
    /// `true` if datasets differ in length or fewer frames are present than planned.
    pub truncated: bool,
    /// Time of each usable frame in s.
    pub times_s: Vec<f64>,
    /// Integration step of each usable frame, if stored.
    pub steps: Option<Vec<i64>>,
    /// Interval between frames in s (uniform; checked when opening).
    pub frame_interval_s: f64,
    /// The box.
    pub simulation_box: SimulationBox,
    /// `true` if periodic image counts are stored (`image/value`).
    pub has_images: bool,
    /// Type of the stored positions.
    pub precision: StoredPrecision,
    /// D0 in m²/s from `/parameters/thicket/species/<name>`, if stored.
    pub d0_m2_per_s: Option<f64>,
}

/// Reads the positions of one species; obtained from [`Trajectory::species`].
#[derive(Debug)]
pub struct SpeciesReader<'a> {
    trajectory: &'a Trajectory,
    value: hdf5::Dataset,
    image: Option<hdf5::Dataset>,
    meta: SpeciesMeta,
    check_jumps: bool,
}

/// Unwrapped positions of a contiguous range of particles over all usable frames.
#[derive(Debug, Clone)]
pub struct ParticleBlock {
    /// Index of the first particle of the block within the species.
    pub first_particle: usize,
    /// Positions in nm, shape `[frames, particles in block, dims]`.
    pub positions_nm: Array3<f64>,
    /// Frame-to-frame jumps longer than half a periodic edge, counted only when
    /// the file has no images (a sign that wrapped positions are being read as
    /// unwrapped).
    pub suspicious_jumps: usize,
}

/// Unwrapped positions of all particles over a contiguous range of frames.
#[derive(Debug, Clone)]
pub struct FrameWindow {
    /// Index of the first frame of the window.
    pub first_frame: usize,
    /// Positions in nm, shape `[frames in window, particles, dims]`.
    pub positions_nm: Array3<f64>,
}

impl Trajectory {
    /// Opens an H5MD file and lists its species.
    ///
    /// # Errors
    /// [`ErrorKind::Io`] if the file cannot be read, [`ErrorKind::NotHdf5`] if
    /// it has no HDF5 signature, [`ErrorKind::Missing`] if it has no
    /// `/particles` group or no species other than `obstacles`,
    /// [`ErrorKind::Hdf5`] if the library fails, and [`ErrorKind::BadValue`]
    /// if `/parameters/thicket` holds attributes of the wrong type.
    pub fn open(path: impl AsRef<Path>) -> Result<Self> {
        let path = path.as_ref().to_path_buf();
        check_hdf5_signature(&path)?;
        let file = hdf5::File::open(&path).map_err(|e| Error::hdf5(&path, "/", e))?;
        if !file.link_exists("particles") {
            return Err(Error::missing(
                &path,
                "/particles",
                "an H5MD particles group holding one group per species with position/value",
            ));
        }
        let particles = file
            .group("particles")
            .map_err(|e| Error::hdf5(&path, "/particles", e))?;
        let mut species = Vec::new();
        for name in particles
            .member_names()
            .map_err(|e| Error::hdf5(&path, "/particles", e))?
        {
            if name == OBSTACLES_GROUP {
                continue;
            }
            if particles.group(&name).is_ok() {
                species.push(name);
            }
        }
        if species.is_empty() {
            return Err(Error::missing(
                &path,
                "/particles/<species>",
                "at least one species group besides 'obstacles'",
            ));
        }
        let parameters = read_run_parameters(&path, &file)?;
        Ok(Trajectory {
            path,
            file,
            species,
            parameters,
        })
    }

    /// The file's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Which part of a split ensemble the file holds
    /// (`/parameters/thicket/ensemble_part`, written by `thicket run
    /// --ensemble-part`), or `None` for a whole run.
    ///
    /// # Errors
    /// [`ErrorKind::BadValue`] for a group with missing or out-of-range
    /// attributes, [`ErrorKind::Hdf5`] if the library fails.
    pub fn ensemble_part(&self) -> Result<Option<EnsemblePartInfo>> {
        let name = "/parameters/thicket/ensemble_part";
        if !self.file.link_exists("parameters/thicket/ensemble_part") {
            return Ok(None);
        }
        let path = &self.path;
        let g = self
            .file
            .group(name)
            .map_err(|e| Error::hdf5(path, name, e))?;
        let bad = |attr: &str, value: String| {
            Error::bad_value(
                path,
                format!("{name} attribute {attr}"),
                value,
                "what thicket run --ensemble-part writes: index < parts, and per species first ≤ whole count",
            )
        };
        let int = |attr: &str| -> Result<usize> {
            match attr_i64(path, &g, name, attr)? {
                Some(n) if n >= 0 => Ok(n as usize),
                other => Err(bad(attr, format!("{other:?}"))),
            }
        };
        let (index, parts) = (int("index")?, int("parts")?);
        if index >= parts {
            return Err(bad("index", format!("{index} of {parts} parts")));
        }
        let whole_scenario = attr_strings(path, &g, name, "whole_scenario")?
            .and_then(|v| v.into_iter().next())
            .ok_or_else(|| bad("whole_scenario", "absent".into()))?;
        let mut species = BTreeMap::new();
        for s in &self.species {
            let (first, count) = (
                int(&format!("first_{s}"))?,
                int(&format!("whole_count_{s}"))?,
            );
            if first > count {
                return Err(bad(&format!("first_{s}"), format!("{first} > {count}")));
            }
            species.insert(s.clone(), (first, count));
        }
        Ok(Some(EnsemblePartInfo {
            index,
            parts,
            whole_scenario,
            species,
        }))
    }

    /// Numeric steady-state membrane results of a species (attributes of
    /// `/observables/<species>/membrane`, written at the end of a membrane
    /// run), by name; empty when there are none.
    ///
    /// # Errors
    /// [`ErrorKind::Hdf5`] if the library fails on an existing group.
    pub fn membrane_results(&self, species: &str) -> Result<Vec<(String, f64)>> {
        let name = format!("observables/{species}/membrane");
        if !self.file.link_exists("observables")
            || !self.file.link_exists(&format!("observables/{species}"))
            || !self.file.link_exists(&name)
        {
            return Ok(Vec::new());
        }
        let Ok(group) = self.file.group(&name) else {
            return Ok(Vec::new());
        };
        let mut out = Vec::new();
        let names: Vec<String> = group
            .attr_names()
            .map_err(|e| Error::hdf5(&self.path, &name, e))?;
        for attr in names {
            // Text attributes (the definitions) are skipped.
            if let Ok(Some(v)) = attr_f64(&self.path, &group, &name, &attr) {
                out.push((attr, v));
            }
        }
        Ok(out)
    }

    /// Names of the species of moving particles (groups of `/particles`
    /// other than `obstacles`), in the file's order.
    pub fn species_names(&self) -> &[String] {
        &self.species
    }

    /// The contents of `/parameters/thicket`, if the file has it.
    pub fn run_parameters(&self) -> Option<&RunParameters> {
        self.parameters.as_ref()
    }

    /// Opens one species for reading; `None` picks the first species.
    ///
    /// # Errors
    /// [`ErrorKind::UnknownSpecies`] if `name` is not in the file,
    /// [`ErrorKind::Missing`] if the species has no `position/value` (or no
    /// way to know frame times), [`ErrorKind::BadShape`] /
    /// [`ErrorKind::BadValue`] if datasets have shapes, types or values the
    /// reader cannot use (e.g. non-uniform frame times), and
    /// [`ErrorKind::TooLittleData`] if fewer than 2 frames or no particles are present.
    pub fn species(&self, name: Option<&str>) -> Result<SpeciesReader<'_>> {
        let name = match name {
            Some(n) => {
                if !self.species.iter().any(|s| s == n) {
                    return Err(ErrorKind::UnknownSpecies {
                        path: self.path.clone(),
                        species: n.to_string(),
                        available: self.species.clone(),
                    }
                    .into());
                }
                n.to_string()
            }
            None => self.species[0].clone(),
        };
        SpeciesReader::open(self, &name)
    }
}

impl<'a> SpeciesReader<'a> {
    fn open(trajectory: &'a Trajectory, name: &str) -> Result<Self> {
        let path = trajectory.path.as_path();
        let base = format!("/particles/{name}");
        let group = trajectory
            .file
            .group(&base)
            .map_err(|e| Error::hdf5(path, base.clone(), e))?;
        let position_name = format!("{base}/position");
        let value_name = format!("{position_name}/value");
        if !group.link_exists("position") {
            return Err(Error::missing(
                path,
                position_name,
                "a time-dependent position element (group with value, step, time)",
            ));
        }
        let position = group
            .group("position")
            .map_err(|e| Error::hdf5(path, position_name.clone(), e))?;
        if !position.link_exists("value") {
            return Err(Error::missing(
                path,
                value_name,
                "a dataset of shape [frames, particles, dimension]",
            ));
        }
        let value = position
            .dataset("value")
            .map_err(|e| Error::hdf5(path, value_name.clone(), e))?;
        let shape = value.shape();
        if shape.len() != 3 || !(1..=3).contains(&shape[2]) {
            return Err(ErrorKind::BadShape {
                path: path.to_path_buf(),
                object: value_name,
                shape,
                allowed: "[frames, particles, D] with D = 1, 2 or 3".into(),
            }
            .into());
        }
        let (value_frames, particles, dims) = (shape[0], shape[1], shape[2]);
        let precision = match value
            .dtype()
            .and_then(|t| t.to_descriptor())
            .map_err(|e| Error::hdf5(path, value_name.clone(), e))?
        {
            TypeDescriptor::Float(FloatSize::U4) => StoredPrecision::F32,
            TypeDescriptor::Float(FloatSize::U8) => StoredPrecision::F64,
            other => {
                return Err(Error::bad_value(
                    path,
                    value_name,
                    format!("element type {other}"),
                    "32- or 64-bit floating point",
                ))
            }
        };

        let simulation_box = read_box(path, &group, &base, dims)?;

        let (image, image_frames) = if group.link_exists("image") {
            let image_name = format!("{base}/image/value");
            let image = group
                .dataset("image/value")
                .map_err(|e| Error::hdf5(path, image_name.clone(), e))?;
            let ishape = image.shape();
            if ishape.len() != 3 || ishape[1] != particles || ishape[2] != dims {
                return Err(ErrorKind::BadShape {
                    path: path.to_path_buf(),
                    object: image_name,
                    shape: ishape,
                    allowed: format!("[frames, {particles}, {dims}] like position/value"),
                }
                .into());
            }
            match image.dtype().and_then(|t| t.to_descriptor()) {
                Ok(TypeDescriptor::Integer(_)) | Ok(TypeDescriptor::Unsigned(_)) => {}
                Ok(other) => {
                    return Err(Error::bad_value(
                        path,
                        image_name,
                        format!("element type {other}"),
                        "integers (periodic image counts)",
                    ))
                }
                Err(e) => return Err(Error::hdf5(path, image_name, e)),
            }
            let n = ishape[0];
            // Images only matter where edges are known.
            (simulation_box.edges_nm.as_ref().map(|_| image), Some(n))
        } else {
            (None, None)
        };

        let step = read_time_axis::<i64>(path, &position, &position_name, "step")?;
        let time = read_time_axis::<f64>(path, &position, &position_name, "time")?;
        let lengths = DatasetLengths {
            value: value_frames,
            step: step.as_ref().and_then(TimeAxis::len),
            time: time.as_ref().and_then(TimeAxis::len),
            image: image_frames,
        };
        let frames = [
            Some(lengths.value),
            lengths.step,
            lengths.time,
            lengths.image,
        ]
        .into_iter()
        .flatten()
        .min()
        .unwrap_or(0);
        if frames < 2 {
            return Err(ErrorKind::TooLittleData {
                path: Some(path.to_path_buf()),
                what: format!("the number of complete frames of species '{name}'"),
                found: frames,
                needed: 2,
            }
            .into());
        }
        if particles == 0 {
            return Err(ErrorKind::TooLittleData {
                path: Some(path.to_path_buf()),
                what: format!("the number of particles of species '{name}'"),
                found: 0,
                needed: 1,
            }
            .into());
        }

        let params = trajectory.parameters.as_ref();
        let dt_s = params.and_then(|p| p.dt_s);
        let steps = step.map(|s| s.values(frames));
        let times_s = match time {
            Some(t) => t.values(frames),
            None => match (&steps, dt_s) {
                (Some(st), Some(dt)) => st.iter().map(|&k| k as f64 * dt).collect(),
                _ => {
                    return Err(Error::missing(
                        path,
                        format!("{position_name}/time"),
                        "frame times: a time dataset, or a step dataset together with /parameters/thicket attribute dt_s",
                    ))
                }
            },
        };
        let frame_interval_s =
            check_uniform_frames(path, &position_name, &times_s, steps.as_deref())?;

        let frames_planned = params.and_then(|p| p.frames_planned);
        let lengths_differ = [lengths.step, lengths.time, lengths.image]
            .into_iter()
            .flatten()
            .any(|n| n != lengths.value);
        let truncated = lengths_differ || frames_planned.is_some_and(|p| (frames as u64) < p);
        let d0_m2_per_s = params
            .and_then(|p| p.species.get(name))
            .and_then(|s| s.d0_m2_per_s);

        Ok(SpeciesReader {
            trajectory,
            value,
            image,
            meta: SpeciesMeta {
                name: name.to_string(),
                particles,
                dims,
                frames,
                lengths,
                frames_planned,
                truncated,
                times_s,
                steps,
                frame_interval_s,
                simulation_box,
                has_images: image_frames.is_some(),
                precision,
                d0_m2_per_s,
            },
            check_jumps: false,
        })
    }

    /// What is known about the species.
    pub fn meta(&self) -> &SpeciesMeta {
        &self.meta
    }

    /// The trajectory this species belongs to.
    pub fn trajectory(&self) -> &Trajectory {
        self.trajectory
    }

    /// Bytes needed per (frame, particle) element when reading a block:
    /// the f64 result plus the stored value and image.
    fn bytes_per_element(&self) -> usize {
        let stored = match self.meta.precision {
            StoredPrecision::F32 => 4,
            StoredPrecision::F64 => 8,
        };
        let image = if self.image.is_some() { 4 } else { 0 };
        self.meta.dims * (8 + stored + image)
    }

    /// How many particles fit in one block of all frames within `budget_bytes`
    /// (at least 1, at most N).
    pub fn particles_per_block(&self, budget_bytes: usize) -> usize {
        let per_particle = self.bytes_per_element() * self.meta.frames;
        (budget_bytes / per_particle.max(1)).clamp(1, self.meta.particles)
    }

    /// How many frames of all particles fit in one window within
    /// `budget_bytes` (at least 1, at most the number of frames).
    pub fn frames_per_window(&self, budget_bytes: usize) -> usize {
        let per_frame = self.bytes_per_element() * self.meta.particles;
        (budget_bytes / per_frame.max(1)).clamp(1, self.meta.frames)
    }

    /// Reads particles `particles` over all usable frames, unwrapped, in nm.
    ///
    /// # Errors
    /// [`ErrorKind::InvalidOption`] if the range is empty or beyond N,
    /// [`ErrorKind::Hdf5`] if reading fails, [`ErrorKind::BadValue`] if a
    /// position is not finite.
    pub fn read_block(&self, particles: Range<usize>) -> Result<ParticleBlock> {
        if particles.start >= particles.end || particles.end > self.meta.particles {
            return Err(Error::invalid_option(
                "particle range",
                format!("{}..{}", particles.start, particles.end),
                format!("a non-empty range within 0..{}", self.meta.particles),
            ));
        }
        let frames = 0..self.meta.frames;
        let positions_nm = self.read_hyperslab(frames, particles.clone())?;
        let suspicious_jumps = self.count_suspicious_jumps(&positions_nm);
        if self.check_jumps {
            self.refuse_implausible_jumps(&positions_nm, particles.start)?;
        }
        Ok(ParticleBlock {
            first_particle: particles.start,
            positions_nm,
            suspicious_jumps,
        })
    }

    /// Reads frames `frames` of all particles, unwrapped, in nm.
    ///
    /// # Errors
    /// As [`SpeciesReader::read_block`], for a frame range within the usable frames.
    pub fn read_frames(&self, frames: Range<usize>) -> Result<FrameWindow> {
        if frames.start >= frames.end || frames.end > self.meta.frames {
            return Err(Error::invalid_option(
                "frame range",
                format!("{}..{}", frames.start, frames.end),
                format!("a non-empty range within 0..{}", self.meta.frames),
            ));
        }
        let positions_nm = self.read_hyperslab(frames.clone(), 0..self.meta.particles)?;
        Ok(FrameWindow {
            first_frame: frames.start,
            positions_nm,
        })
    }

    /// Iterates over blocks of particles (all frames each) that fit within
    /// `budget_bytes`; see [`DEFAULT_MEMORY_BUDGET_BYTES`].
    pub fn blocks(&self, budget_bytes: usize) -> ParticleBlocks<'_, 'a> {
        ParticleBlocks {
            reader: self,
            next: 0,
            step: self.particles_per_block(budget_bytes),
        }
    }

    /// Iterates over windows of frames (all particles each) that fit within
    /// `budget_bytes`, for per-frame statistics.
    pub fn frame_windows(&self, budget_bytes: usize) -> FrameWindows<'_, 'a> {
        FrameWindows {
            reader: self,
            next: 0,
            step: self.frames_per_window(budget_bytes),
        }
    }

    fn read_hyperslab(&self, frames: Range<usize>, particles: Range<usize>) -> Result<Array3<f64>> {
        let path = self.trajectory.path.as_path();
        let value_name = || format!("/particles/{}/position/value", self.meta.name);
        let d = self.meta.dims;
        let sel = s![frames.clone(), particles.clone(), 0..d];
        let mut out: Array3<f64> = match self.meta.precision {
            // Read in the stored type and widen here, so HDF5 never converts in place.
            StoredPrecision::F32 => self
                .value
                .read_slice::<f32, _, Ix3>(sel)
                .map_err(|e| Error::hdf5(path, value_name(), e))?
                .mapv(f64::from),
            StoredPrecision::F64 => self
                .value
                .read_slice::<f64, _, Ix3>(sel)
                .map_err(|e| Error::hdf5(path, value_name(), e))?,
        };
        if let Some(((f, p, a), v)) = out.indexed_iter().find(|(_, v)| !v.is_finite()) {
            return Err(Error::bad_value(
                path,
                value_name(),
                format!(
                    "the non-finite value {v} at frame {}, particle {}, axis {a}",
                    frames.start + f,
                    particles.start + p
                ),
                "finite positions",
            ));
        }
        if let (Some(image), Some(edges)) = (&self.image, &self.meta.simulation_box.edges_nm) {
            let image_name = format!("/particles/{}/image/value", self.meta.name);
            let counts = image
                .read_slice::<i32, _, Ix3>(s![frames, particles, 0..d])
                .map_err(|e| Error::hdf5(path, image_name, e))?;
            ndarray::Zip::indexed(&mut out)
                .and(&counts)
                .for_each(|(_, _, a), x, &n| *x += f64::from(n) * edges[a]);
        }
        Ok(out)
    }

    /// Refuse unwrapped frame-to-frame jumps that no Brownian motion makes
    /// (by default off): more than half a periodic edge and more than ten
    /// rms displacements at D0 in one frame, the mark of a wrong image count.
    /// For analyses whose particles never jump (not membranes, whose baths
    /// re-insert particles).
    pub fn check_image_jumps(&mut self, on: bool) {
        self.check_jumps = on;
    }

    fn refuse_implausible_jumps(&self, positions: &Array3<f64>, first: usize) -> Result<()> {
        let b = &self.meta.simulation_box;
        let (Some(edges), true) = (b.edges_nm.as_ref(), self.meta.has_images) else {
            return Ok(());
        };
        // D0 in nm²/s gives the rms step per frame; without it, half an edge alone.
        let sigma = self.meta.d0_m2_per_s.map_or(0.0, |d0| {
            (2.0 * d0 * 1e18 * self.meta.frame_interval_s).sqrt()
        });
        for (a, edge) in edges.iter().enumerate().take(self.meta.dims) {
            if !b.periodic.get(a).copied().unwrap_or(false) {
                continue;
            }
            let limit = (0.5 * edge).max(10.0 * sigma);
            for p in 0..positions.shape()[1] {
                let series = positions.slice(s![.., p, a]);
                if let Some((f, w)) = series
                    .windows(2)
                    .into_iter()
                    .enumerate()
                    .find(|(_, w)| (w[1] - w[0]).abs() > limit)
                {
                    return Err(Error::bad_value(
                        &self.trajectory.path,
                        format!("/particles/{}/image/value", self.meta.name),
                        format!(
                            "a jump of {:.4e} nm along axis {a} between frames {f} and {} of particle {} (more than half the periodic edge {edge} nm and ten rms steps at D0): a wrong image count",
                            w[1] - w[0],
                            f + 1,
                            first + p
                        ),
                        "image counts that change by the particle's crossings of the box only",
                    ));
                }
            }
        }
        Ok(())
    }

    fn count_suspicious_jumps(&self, positions: &Array3<f64>) -> usize {
        let b = &self.meta.simulation_box;
        let Some(edges) = b.edges_nm.as_ref() else {
            return 0;
        };
        if self.meta.has_images {
            return 0;
        }
        let mut jumps = 0;
        for (a, edge) in edges.iter().enumerate().take(self.meta.dims) {
            if !b.periodic.get(a).copied().unwrap_or(false) {
                continue;
            }
            let half = 0.5 * edge;
            for p in 0..positions.shape()[1] {
                let series = positions.slice(s![.., p, a]);
                jumps += series
                    .windows(2)
                    .into_iter()
                    .filter(|w| (w[1] - w[0]).abs() > half)
                    .count();
            }
        }
        jumps
    }
}

/// Iterator over particle blocks; see [`SpeciesReader::blocks`].
#[derive(Debug)]
pub struct ParticleBlocks<'r, 'a> {
    reader: &'r SpeciesReader<'a>,
    next: usize,
    step: usize,
}

impl Iterator for ParticleBlocks<'_, '_> {
    type Item = Result<ParticleBlock>;

    fn next(&mut self) -> Option<Self::Item> {
        let n = self.reader.meta.particles;
        if self.next >= n {
            return None;
        }
        let end = (self.next + self.step).min(n);
        let range = self.next..end;
        self.next = end;
        Some(self.reader.read_block(range))
    }
}

/// Iterator over frame windows; see [`SpeciesReader::frame_windows`].
#[derive(Debug)]
pub struct FrameWindows<'r, 'a> {
    reader: &'r SpeciesReader<'a>,
    next: usize,
    step: usize,
}

impl Iterator for FrameWindows<'_, '_> {
    type Item = Result<FrameWindow>;

    fn next(&mut self) -> Option<Self::Item> {
        let n = self.reader.meta.frames;
        if self.next >= n {
            return None;
        }
        let end = (self.next + self.step).min(n);
        let range = self.next..end;
        self.next = end;
        Some(self.reader.read_frames(range))
    }
}

/// Looks for the HDF5 signature at offsets 0, 512, 1024, 2048, … (where the
/// format allows a superblock to start).
fn check_hdf5_signature(path: &Path) -> Result<()> {
    const SIGNATURE: [u8; 8] = [0x89, b'H', b'D', b'F', b'\r', b'\n', 0x1a, b'\n'];
    let io = |source| ErrorKind::Io {
        path: path.to_path_buf(),
        source,
    };
    let mut file = std::fs::File::open(path).map_err(io)?;
    let len = file.metadata().map_err(io)?.len();
    let mut offset = 0u64;
    while offset + 8 <= len {
        let mut buf = [0u8; 8];
        file.seek(SeekFrom::Start(offset)).map_err(io)?;
        file.read_exact(&mut buf).map_err(io)?;
        if buf == SIGNATURE {
            return Ok(());
        }
        offset = if offset == 0 { 512 } else { offset * 2 };
    }
    Err(ErrorKind::NotHdf5 {
        path: path.to_path_buf(),
    }
    .into())
}

/// The `step` or `time` element of a time-dependent group, in either H5MD form.
enum TimeAxis<T> {
    /// One entry per frame.
    Explicit(Vec<T>),
    /// Fixed interval: frame k is at `offset + k · increment`.
    Fixed { increment: T, offset: T },
}

impl<T: Copy + Default + std::ops::Add<Output = T> + std::ops::Mul<Output = T> + FromIndex>
    TimeAxis<T>
{
    fn len(&self) -> Option<usize> {
        match self {
            TimeAxis::Explicit(v) => Some(v.len()),
            TimeAxis::Fixed { .. } => None,
        }
    }

    fn values(&self, frames: usize) -> Vec<T> {
        match self {
            TimeAxis::Explicit(v) => v[..frames].to_vec(),
            TimeAxis::Fixed { increment, offset } => (0..frames)
                .map(|k| *offset + T::from_index(k) * *increment)
                .collect(),
        }
    }
}

/// Conversion of a frame index to the element type of a time axis.
trait FromIndex {
    fn from_index(k: usize) -> Self;
}

impl FromIndex for i64 {
    fn from_index(k: usize) -> Self {
        k as i64
    }
}

impl FromIndex for f64 {
    fn from_index(k: usize) -> Self {
        k as f64
    }
}

/// Reads `step` or `time` of a time-dependent element; `None` if absent.
fn read_time_axis<T: hdf5::H5Type + Copy + Default>(
    path: &Path,
    element: &hdf5::Group,
    element_name: &str,
    name: &str,
) -> Result<Option<TimeAxis<T>>> {
    if !element.link_exists(name) {
        return Ok(None);
    }
    let full = format!("{element_name}/{name}");
    let ds = element
        .dataset(name)
        .map_err(|e| Error::hdf5(path, full.clone(), e))?;
    let shape = ds.shape();
    match shape.len() {
        0 => {
            let increment = ds
                .read_scalar::<T>()
                .map_err(|e| Error::hdf5(path, full.clone(), e))?;
            let offset = if ds
                .attr_names()
                .is_ok_and(|n| n.iter().any(|a| a == "offset"))
            {
                ds.attr("offset")
                    .and_then(|a| a.read_scalar::<T>())
                    .map_err(|e| Error::hdf5(path, format!("{full} attribute offset"), e))?
            } else {
                T::default()
            };
            Ok(Some(TimeAxis::Fixed { increment, offset }))
        }
        1 => Ok(Some(TimeAxis::Explicit(
            ds.read_raw::<T>().map_err(|e| Error::hdf5(path, full, e))?,
        ))),
        _ => Err(ErrorKind::BadShape {
            path: path.to_path_buf(),
            object: full,
            shape,
            allowed: "[frames] or a scalar increment".into(),
        }
        .into()),
    }
}

/// Checks that frames are equally spaced in time and returns the interval.
///
/// Frames count as uniform if the integer steps have one constant
/// increment, or, without steps, if every time lies within 1e-3 of an
/// interval of the uniform grid through the first and last frame.
fn check_uniform_frames(
    path: &Path,
    element: &str,
    times: &[f64],
    steps: Option<&[i64]>,
) -> Result<f64> {
    let n = times.len();
    let interval = (times[n - 1] - times[0]) / (n - 1) as f64;
    if !(interval.is_finite() && interval > 0.0) {
        return Err(Error::bad_value(
            path,
            format!("{element}/time"),
            format!("times from {:e} s to {:e} s", times[0], times[n - 1]),
            "finite, increasing frame times",
        ));
    }
    if let Some(st) = steps {
        let inc = st[1] - st[0];
        if inc > 0 && st.windows(2).all(|w| w[1] - w[0] == inc) {
            return Ok(interval);
        }
        if let Some((k, w)) = st
            .windows(2)
            .enumerate()
            .find(|(_, w)| w[1] - w[0] != inc || inc <= 0)
        {
            return Err(Error::bad_value(
                path,
                format!("{element}/step"),
                format!(
                    "steps {} → {} at frames {k}–{} after an increment of {inc}",
                    w[0],
                    w[1],
                    k + 1
                ),
                "strictly increasing steps with one constant increment (equally spaced frames)",
            ));
        }
    }
    for (k, &t) in times.iter().enumerate() {
        let expected = times[0] + k as f64 * interval;
        let off = (t - expected).abs();
        // A NaN time must fail too.
        if off.is_nan() || off > 1e-3 * interval {
            return Err(Error::bad_value(
                path,
                format!("{element}/time"),
                format!("time {t:e} s at frame {k} where the uniform grid has {expected:e} s"),
                "equally spaced frames (within 1e-3 of the interval)",
            ));
        }
    }
    Ok(interval)
}

/// Reads `/particles/<species>/box`; a missing box is taken as open (no
/// periodic axis), since positions can still be analysed.
fn read_box(path: &Path, species: &hdf5::Group, base: &str, dims: usize) -> Result<SimulationBox> {
    let open = SimulationBox {
        dimension: dims,
        periodic: vec![false; dims],
        edges_nm: None,
    };
    if !species.link_exists("box") {
        return Ok(open);
    }
    let name = format!("{base}/box");
    let group = species
        .group("box")
        .map_err(|e| Error::hdf5(path, name.clone(), e))?;
    let dimension = match attr_i64(path, &group, &name, "dimension")? {
        Some(d) if d == dims as i64 => dims,
        Some(d) => {
            return Err(Error::bad_value(
                path,
                format!("{name} attribute dimension"),
                format!("dimension {d}"),
                format!("{dims}, the last axis of position/value"),
            ))
        }
        None => dims,
    };
    let periodic = match attr_strings(path, &group, &name, "boundary")? {
        None => vec![false; dims],
        Some(b) if b.len() == 1 || b.len() == dims => {
            let mut out = Vec::with_capacity(dims);
            for k in 0..dims {
                let s = &b[if b.len() == 1 { 0 } else { k }];
                match s.as_str() {
                    "periodic" => out.push(true),
                    "none" => out.push(false),
                    other => {
                        return Err(Error::bad_value(
                            path,
                            format!("{name} attribute boundary"),
                            format!("\"{other}\" for axis {k}"),
                            "\"periodic\" or \"none\"",
                        ))
                    }
                }
            }
            out
        }
        Some(b) => {
            return Err(ErrorKind::BadShape {
                path: path.to_path_buf(),
                object: format!("{name} attribute boundary"),
                shape: vec![b.len()],
                allowed: format!("[{dims}] (one string per dimension)"),
            }
            .into())
        }
    };
    let edges_nm = if group.link_exists("edges") {
        let ename = format!("{name}/edges");
        let ds = group
            .dataset("edges")
            .map_err(|e| Error::hdf5(path, ename.clone(), e))?;
        let edges: Vec<f64> = match ds.shape().len() {
            0 => vec![
                ds.read_scalar::<f64>()
                    .map_err(|e| Error::hdf5(path, ename.clone(), e))?;
                dims
            ],
            1 => ds
                .read_raw::<f64>()
                .map_err(|e| Error::hdf5(path, ename.clone(), e))?,
            // A [D, D] matrix is a triclinic box; only its diagonal is an edge for a cuboid.
            _ => {
                return Err(ErrorKind::BadShape {
                    path: path.to_path_buf(),
                    object: ename,
                    shape: ds.shape(),
                    allowed: format!("[{dims}] (a cuboid box)"),
                }
                .into())
            }
        };
        if edges.len() != dims || edges.iter().any(|e| !(e.is_finite() && *e > 0.0)) {
            return Err(Error::bad_value(
                path,
                ename,
                format!("edges {edges:?}"),
                format!("{dims} finite, positive lengths"),
            ));
        }
        Some(edges)
    } else {
        if periodic.iter().any(|&p| p) {
            return Err(Error::missing(
                path,
                format!("{name}/edges"),
                "box edges, required when a boundary is periodic",
            ));
        }
        None
    };
    Ok(SimulationBox {
        dimension,
        periodic,
        edges_nm,
    })
}

/// Reads `/parameters/thicket`, if present.
fn read_run_parameters(path: &Path, file: &hdf5::File) -> Result<Option<RunParameters>> {
    let name = "/parameters/thicket";
    if !file.link_exists("parameters") {
        return Ok(None);
    }
    let parameters = file
        .group("parameters")
        .map_err(|e| Error::hdf5(path, "/parameters", e))?;
    if !parameters.link_exists("thicket") {
        return Ok(None);
    }
    let g = parameters
        .group("thicket")
        .map_err(|e| Error::hdf5(path, name, e))?;
    let mut out = RunParameters {
        scenario_toml: attr_strings(path, &g, name, "scenario")?.and_then(|v| v.into_iter().next()),
        seed: attr_u64(path, &g, name, "seed")?,
        version: attr_strings(path, &g, name, "version")?.and_then(|v| v.into_iter().next()),
        frames_planned: match attr_i64(path, &g, name, "frames_planned")? {
            Some(n) if n >= 0 => Some(n as u64),
            Some(n) => {
                return Err(Error::bad_value(
                    path,
                    format!("{name} attribute frames_planned"),
                    n.to_string(),
                    "a non-negative frame count",
                ))
            }
            None => None,
        },
        dt_s: attr_f64(path, &g, name, "dt_s")?,
        species: BTreeMap::new(),
    };
    if g.link_exists("species") {
        let sname = format!("{name}/species");
        let sg = g
            .group("species")
            .map_err(|e| Error::hdf5(path, sname.clone(), e))?;
        for member in sg
            .member_names()
            .map_err(|e| Error::hdf5(path, sname.clone(), e))?
        {
            let Ok(one) = sg.group(&member) else { continue };
            let oname = format!("{sname}/{member}");
            let count = match attr_i64(path, &one, &oname, "count")? {
                Some(n) if n >= 0 => Some(n as u64),
                Some(_) | None => None,
            };
            out.species.insert(
                member,
                SpeciesParameters {
                    radius_nm: attr_f64(path, &one, &oname, "radius_nm")?,
                    drag_radius_nm: attr_f64(path, &one, &oname, "drag_radius_nm")?,
                    d0_m2_per_s: attr_f64(path, &one, &oname, "d0_m2_per_s")?,
                    count,
                },
            );
        }
    }
    Ok(Some(out))
}

fn has_attr(loc: &hdf5::Location, attr: &str) -> bool {
    loc.attr_names()
        .is_ok_and(|names| names.iter().any(|n| n == attr))
}

fn open_attr(
    path: &Path,
    loc: &hdf5::Location,
    owner: &str,
    attr: &str,
) -> Result<Option<hdf5::Attribute>> {
    if !has_attr(loc, attr) {
        return Ok(None);
    }
    loc.attr(attr)
        .map(Some)
        .map_err(|e| Error::hdf5(path, format!("{owner} attribute {attr}"), e))
}

/// Reads a numeric scalar attribute as `T`, if present; wrong types are errors.
fn attr_scalar<T: hdf5::H5Type>(
    path: &Path,
    loc: &hdf5::Location,
    owner: &str,
    attr: &str,
    allowed: &str,
) -> Result<Option<T>> {
    let Some(a) = open_attr(path, loc, owner, attr)? else {
        return Ok(None);
    };
    let desc = a
        .dtype()
        .and_then(|t| t.to_descriptor())
        .map_err(|e| Error::hdf5(path, format!("{owner} attribute {attr}"), e))?;
    let numeric = matches!(
        desc,
        TypeDescriptor::Integer(_) | TypeDescriptor::Unsigned(_) | TypeDescriptor::Float(_)
    );
    if !numeric || a.size() != 1 {
        return Err(Error::bad_value(
            path,
            format!("{owner} attribute {attr}"),
            format!("type {desc} with {} element(s)", a.size()),
            allowed,
        ));
    }
    a.read_raw::<T>()
        .map(|v| v.into_iter().next())
        .map_err(|e| Error::hdf5(path, format!("{owner} attribute {attr}"), e))
}

fn attr_f64(path: &Path, loc: &hdf5::Location, owner: &str, attr: &str) -> Result<Option<f64>> {
    attr_scalar::<f64>(path, loc, owner, attr, "a numeric scalar")
}

fn attr_i64(path: &Path, loc: &hdf5::Location, owner: &str, attr: &str) -> Result<Option<i64>> {
    attr_scalar::<i64>(path, loc, owner, attr, "an integer scalar")
}

fn attr_u64(path: &Path, loc: &hdf5::Location, owner: &str, attr: &str) -> Result<Option<u64>> {
    attr_scalar::<u64>(path, loc, owner, attr, "an unsigned integer scalar")
}

/// Reads a string attribute (scalar or array, fixed- or variable-length)
/// as a list of strings, if present.
fn attr_strings(
    path: &Path,
    loc: &hdf5::Location,
    owner: &str,
    attr: &str,
) -> Result<Option<Vec<String>>> {
    let Some(a) = open_attr(path, loc, owner, attr)? else {
        return Ok(None);
    };
    let object = || format!("{owner} attribute {attr}");
    let desc = a
        .dtype()
        .and_then(|t| t.to_descriptor())
        .map_err(|e| Error::hdf5(path, object(), e))?;
    let strings = match desc {
        TypeDescriptor::FixedAscii(n) => read_fixed_ascii(&a, n),
        TypeDescriptor::FixedUnicode(n) => read_fixed_unicode(&a, n),
        TypeDescriptor::VarLenAscii => a
            .read_raw::<VarLenAscii>()
            .map(|v| Some(v.iter().map(|s| s.as_str().to_owned()).collect())),
        TypeDescriptor::VarLenUnicode => a
            .read_raw::<VarLenUnicode>()
            .map(|v| Some(v.iter().map(|s| s.as_str().to_owned()).collect())),
        other => {
            return Err(Error::bad_value(
                path,
                object(),
                format!("type {other}"),
                "a string (fixed- or variable-length)",
            ))
        }
    };
    match strings {
        Ok(Some(v)) => Ok(Some(
            v.into_iter()
                .map(|s| s.trim_end_matches(['\0', ' ']).to_owned())
                .collect(),
        )),
        Ok(None) => Err(Error::bad_value(
            path,
            object(),
            "a fixed-length string longer than 1 MiB",
            "strings up to 1 MiB",
        )),
        Err(e) => Err(Error::hdf5(path, object(), e)),
    }
}

/// Reads fixed-length strings of `n` bytes into the smallest buffer size of
/// a short list that holds them (the string type needs its size at compile time).
macro_rules! fixed_reader {
    ($fn_name:ident, $ty:ident) => {
        fn $fn_name(a: &hdf5::Attribute, n: usize) -> hdf5::Result<Option<Vec<String>>> {
            fn read<const N: usize>(a: &hdf5::Attribute) -> hdf5::Result<Option<Vec<String>>> {
                Ok(Some(
                    a.read_raw::<$ty<N>>()?
                        .iter()
                        .map(|s| s.as_str().to_owned())
                        .collect(),
                ))
            }
            match n {
                0..=64 => read::<64>(a),
                65..=1024 => read::<1024>(a),
                1025..=16384 => read::<16384>(a),
                16385..=MAX_STRING_BYTES => read::<MAX_STRING_BYTES>(a),
                _ => Ok(None),
            }
        }
    };
}

fixed_reader!(read_fixed_ascii, FixedAscii);
fixed_reader!(read_fixed_unicode, FixedUnicode);
