//! Trajectory files (HDF5 in the H5MD 1.1 layout) and checkpoints.
//!
//! Frames are appended as the run goes and the file is flushed at every
//! checkpoint, so a file from an interrupted run opens in any HDF5 reader with
//! every flushed frame. The checkpoint is a small binary file beside the
//! trajectory (`FILE.h5.ckpt`) holding the exact state, so a resumed run ends
//! with the same datasets as an uninterrupted one.
//!
//! Fixed spheres go to `/particles/obstacles` as one frame:
//! `position/value` [1, M, 3] nm (with `step` and `time`), `radius` [M] nm
//! (time-independent) and `box` as for every species. Fibres, which are not
//! particles, go to `/parameters/thicket/fibres`: `centre` [F, 3] nm,
//! `direction` [F, 3] (unit vectors), and attributes `radius_nm`,
//! `length_nm`; each fibre is the set of points within `radius_nm` of the
//! segment `centre ± (length_nm / 2) · direction`, with periodic images.

use crate::base::error::{EngineError, Result};
use crate::base::rng::ParticleRng;
use crate::obstacles::spheres::FixedObstacles;
use crate::scenario::config::{Precision, Scenario};
use crate::step::state::{State, Tether};
use hdf5::types::FixedAscii;
use hdf5::{Dataset, File, Group, Location};
use ndarray::{s, Array1, Array3};
use std::fmt::Write as _;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};

/// Particles converted and written per HDF5 call: bounds the staging buffer.
const WRITE_BLOCK: usize = 65_536;
/// Target bytes per HDF5 chunk of positions.
const CHUNK_BYTES: usize = 1 << 20;

/// Creator name written to `/h5md/creator`.
pub const CREATOR: &str = "thicket";
/// Creator version.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");

/// Appends frames of a run to an H5MD file.
pub struct TrajectoryWriter {
    path: PathBuf,
    file: File,
    species: Vec<SpeciesSets>,
    precision: Precision,
    /// Periodic axes: image counts are written on these only.
    periodic: [bool; 3],
    frames: usize,
}

struct SpeciesSets {
    range: std::ops::Range<usize>,
    value: Dataset,
    image: Dataset,
    step: Dataset,
    time: Dataset,
}

fn h5(path: &Path) -> impl Fn(hdf5::Error) -> EngineError + '_ {
    move |source| EngineError::Hdf5 {
        file: path.to_path_buf(),
        source,
    }
}

/// Writes a scalar fixed-length ASCII attribute of exactly the string's
/// length (H5MD asks for fixed-length strings; HDF5 converts from the
/// padded in-memory string to the exact stored size).
pub fn write_str_attr(loc: &Location, name: &str, value: &str) -> hdf5::Result<()> {
    fn put<const N: usize>(loc: &Location, name: &str, value: &str) -> hdf5::Result<()> {
        let v = FixedAscii::<N>::from_ascii(value.as_bytes())
            .map_err(|e| hdf5::Error::from(e.to_string().as_str()))?;
        let stored = hdf5::Datatype::from_descriptor(&hdf5::types::TypeDescriptor::FixedAscii(
            value.len().max(1),
        ))?;
        loc.new_attr_builder()
            .empty_as(&stored)
            .create(name)?
            .write_scalar(&v)
    }
    match value.len() {
        0..=15 => put::<16>(loc, name, value),
        16..=255 => put::<256>(loc, name, value),
        256..=4095 => put::<4096>(loc, name, value),
        4096..=32767 => put::<32768>(loc, name, value),
        _ => put::<65536>(loc, name, value),
    }
}

fn f64_attr(loc: &Location, name: &str, v: f64) -> hdf5::Result<()> {
    loc.new_attr::<f64>().create(name)?.write_scalar(&v)
}

fn i64_attr(loc: &Location, name: &str, v: i64) -> hdf5::Result<()> {
    loc.new_attr::<i64>().create(name)?.write_scalar(&v)
}

/// Frames per chunk so that one chunk of positions is about [`CHUNK_BYTES`].
fn chunk_frames(n: usize) -> usize {
    (CHUNK_BYTES / (n * 3 * 4).max(1)).clamp(1, 1024)
}

/// Particles per chunk (all of them, unless one frame alone exceeds the target).
fn chunk_particles(n: usize) -> usize {
    n.min((CHUNK_BYTES / 12).max(1))
}

impl TrajectoryWriter {
    /// Creates a new trajectory file with the H5MD skeleton and no frames.
    ///
    /// # Errors
    /// [`EngineError::OutputNotWritable`] when the file cannot be created.
    pub fn create(path: &Path, scenario: &Scenario) -> Result<Self> {
        let file = File::with_options()
            .with_fapl(|p| p.libver_v110())
            .create(path)
            .map_err(|e| EngineError::OutputNotWritable {
                file: path.to_path_buf(),
                reason: e.to_string(),
            })?;
        let e = h5(path);
        let h5md = file.create_group("h5md").map_err(&e)?;
        h5md.new_attr::<i32>()
            .shape(2)
            .create("version")
            .and_then(|a| a.write(&[1i32, 1]))
            .map_err(&e)?;
        let author = h5md.create_group("author").map_err(&e)?;
        write_str_attr(&author, "name", "thicket user").map_err(&e)?;
        let creator = h5md.create_group("creator").map_err(&e)?;
        write_str_attr(&creator, "name", CREATOR).map_err(&e)?;
        write_str_attr(&creator, "version", VERSION).map_err(&e)?;
        let units = h5md
            .create_group("modules")
            .and_then(|m| m.create_group("units"))
            .map_err(&e)?;
        units
            .new_attr::<i32>()
            .shape(2)
            .create("version")
            .and_then(|a| a.write(&[1i32, 0]))
            .map_err(&e)?;
        write_str_attr(&units, "system", "SI").map_err(&e)?;

        let params = file
            .create_group("parameters")
            .and_then(|p| p.create_group("thicket"))
            .map_err(&e)?;
        write_str_attr(&params, "scenario", &scenario.resolved_toml).map_err(&e)?;
        params
            .new_attr::<u64>()
            .create("seed")
            .and_then(|a| a.write_scalar(&scenario.seed))
            .map_err(&e)?;
        write_str_attr(&params, "version", VERSION).map_err(&e)?;
        i64_attr(&params, "frames_planned", scenario.frames() as i64).map_err(&e)?;
        i64_attr(
            &params,
            "record_every_steps",
            scenario.output.record_every_steps as i64,
        )
        .map_err(&e)?;
        f64_attr(&params, "dt_s", scenario.dt_s).map_err(&e)?;
        f64_attr(&params, "temperature_K", scenario.temperature_k).map_err(&e)?;
        f64_attr(&params, "viscosity_Pa_s", scenario.viscosity_pa_s).map_err(&e)?;
        let species_params = params.create_group("species").map_err(&e)?;
        for s in &scenario.species {
            let g = species_params.create_group(&s.name).map_err(&e)?;
            f64_attr(&g, "radius_nm", s.radius_nm).map_err(&e)?;
            f64_attr(&g, "drag_radius_nm", s.drag_radius_nm).map_err(&e)?;
            f64_attr(&g, "d0_m2_per_s", s.d0_m2_per_s).map_err(&e)?;
            i64_attr(&g, "count", s.count as i64).map_err(&e)?;
        }

        let particles = file.create_group("particles").map_err(&e)?;
        let mut species = Vec::new();
        let mut start = 0;
        for s in &scenario.species {
            let range = start..start + s.count;
            start = range.end;
            let g = particles.create_group(&s.name).map_err(&e)?;
            write_box(&g, scenario).map_err(&e)?;
            species.push(create_species_sets(&g, range, scenario.output.precision).map_err(&e)?);
        }
        file.flush().map_err(&e)?;
        Ok(Self {
            path: path.to_path_buf(),
            file,
            species,
            precision: scenario.output.precision,
            periodic: scenario.sim_box.periodic,
            frames: 0,
        })
    }

    /// Reopens a trajectory for a resumed run, dropping frames past `frames`.
    ///
    /// # Errors
    /// [`EngineError::Resume`] when the file lacks the expected datasets or
    /// has fewer frames than the checkpoint.
    pub fn reopen(path: &Path, scenario: &Scenario, frames: usize) -> Result<Self> {
        let fail = |reason: String| EngineError::Resume {
            file: path.to_path_buf(),
            reason,
        };
        let file = File::open_rw(path)
            .map_err(|e| fail(format!("the trajectory cannot be opened for writing: {e}")))?;
        let mut species = Vec::new();
        let mut start = 0;
        for s in &scenario.species {
            let range = start..start + s.count;
            start = range.end;
            let base = format!("particles/{}", s.name);
            let open = |name: &str| {
                file.dataset(&format!("{base}/{name}")).map_err(|e| {
                    fail(format!(
                        "dataset /{base}/{name} is missing or unreadable: {e}"
                    ))
                })
            };
            let sets = SpeciesSets {
                range,
                value: open("position/value")?,
                image: open("image/value")?,
                step: open("position/step")?,
                time: open("position/time")?,
            };
            for (name, ds) in [
                ("position/value", &sets.value),
                ("image/value", &sets.image),
                ("position/step", &sets.step),
                ("position/time", &sets.time),
            ] {
                let have = ds.shape().first().copied().unwrap_or(0);
                if have < frames {
                    return Err(fail(format!(
                        "/{base}/{name} has {have} frames but the checkpoint expects {frames}; the file is not the one the checkpoint belongs to"
                    )));
                }
            }
            let n = s.count;
            sets.value.resize((frames, n, 3)).map_err(h5(path))?;
            sets.image.resize((frames, n, 3)).map_err(h5(path))?;
            sets.step.resize(frames).map_err(h5(path))?;
            sets.time.resize(frames).map_err(h5(path))?;
            species.push(sets);
        }
        Ok(Self {
            path: path.to_path_buf(),
            file,
            species,
            precision: scenario.output.precision,
            periodic: scenario.sim_box.periodic,
            frames,
        })
    }

    /// Frames written so far.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Frames written so far.
    pub fn frames(&self) -> usize {
        self.frames
    }

    /// Appends one frame of every species.
    ///
    /// # Errors
    /// HDF5 write failures.
    pub fn write_frame(&mut self, state: &State, time_s: f64) -> Result<()> {
        let e = h5(&self.path);
        let f = self.frames;
        for sets in &self.species {
            let n = sets.range.len();
            sets.value.resize((f + 1, n, 3)).map_err(&e)?;
            sets.image.resize((f + 1, n, 3)).map_err(&e)?;
            for lo in (0..n).step_by(WRITE_BLOCK) {
                let hi = (lo + WRITE_BLOCK).min(n);
                let base = sets.range.start;
                let pos = &state.positions[base + lo..base + hi];
                match self.precision {
                    Precision::F32 => {
                        let buf =
                            Array3::from_shape_fn((1, hi - lo, 3), |(_, i, k)| pos[i][k] as f32);
                        sets.value
                            .write_slice(&buf, s![f..f + 1, lo..hi, ..])
                            .map_err(&e)?;
                    }
                    Precision::F64 => {
                        let buf = Array3::from_shape_fn((1, hi - lo, 3), |(_, i, k)| pos[i][k]);
                        sets.value
                            .write_slice(&buf, s![f..f + 1, lo..hi, ..])
                            .map_err(&e)?;
                    }
                }
                let im = &state.images[base + lo..base + hi];
                // Image counts mean something on periodic axes only (a membrane keeps a bath mark on z).
                let buf = Array3::from_shape_fn((1, hi - lo, 3), |(_, i, k)| {
                    if self.periodic[k] {
                        im[i][k]
                    } else {
                        0
                    }
                });
                sets.image
                    .write_slice(&buf, s![f..f + 1, lo..hi, ..])
                    .map_err(&e)?;
            }
            // step and time last: a reader takes the shortest length as the frame count.
            sets.step.resize(f + 1).map_err(&e)?;
            sets.step
                .write_slice(&Array1::from_elem(1, state.step as i64), s![f..f + 1])
                .map_err(&e)?;
            sets.time.resize(f + 1).map_err(&e)?;
            sets.time
                .write_slice(&Array1::from_elem(1, time_s), s![f..f + 1])
                .map_err(&e)?;
        }
        self.frames += 1;
        Ok(())
    }

    /// Flushes everything written so far to disk.
    ///
    /// # Errors
    /// HDF5 flush failures.
    pub fn flush(&self) -> Result<()> {
        self.file.flush().map_err(h5(&self.path))
    }

    /// The open file, for writers of extra groups (obstacles, observables).
    pub fn file(&self) -> &File {
        &self.file
    }

    /// Writes fixed obstacles (spheres to `/particles/obstacles`, fibres to
    /// `/parameters/thicket/fibres`); nothing when there are none.
    ///
    /// # Errors
    /// HDF5 write failures.
    pub fn write_obstacles(&self, obstacles: &FixedObstacles, scenario: &Scenario) -> Result<()> {
        let e = h5(&self.path);
        let spheres = &obstacles.spheres;
        if !spheres.is_empty() {
            let g = self
                .file
                .group("particles")
                .and_then(|p| p.create_group("obstacles"))
                .map_err(&e)?;
            write_box(&g, scenario).map_err(&e)?;
            let m = spheres.len();
            let pos = g.create_group("position").map_err(&e)?;
            let value = pos
                .new_dataset::<f64>()
                .shape((1, m, 3))
                .create("value")
                .map_err(&e)?;
            let buf = Array3::from_shape_fn((1, m, 3), |(_, i, k)| spheres.centres_nm[i][k]);
            value.write(&buf).map_err(&e)?;
            write_str_attr(&value, "unit", "nm").map_err(&e)?;
            pos.new_dataset::<i64>()
                .shape(1)
                .create("step")
                .and_then(|d| d.write(&[0i64]))
                .map_err(&e)?;
            let time = pos
                .new_dataset::<f64>()
                .shape(1)
                .create("time")
                .map_err(&e)?;
            time.write(&[0.0f64]).map_err(&e)?;
            write_str_attr(&time, "unit", "s").map_err(&e)?;
            let radius = g
                .new_dataset::<f64>()
                .shape(m)
                .create("radius")
                .map_err(&e)?;
            radius.write(&spheres.radii_nm).map_err(&e)?;
            write_str_attr(&radius, "unit", "nm").map_err(&e)?;
        }
        let fibres = &obstacles.fibres;
        if !fibres.is_empty() {
            let g = self
                .file
                .group("parameters/thicket")
                .and_then(|p| p.create_group("fibres"))
                .map_err(&e)?;
            let f = fibres.len();
            let centre = g
                .new_dataset::<f64>()
                .shape((f, 3))
                .create("centre")
                .map_err(&e)?;
            let buf = ndarray::Array2::from_shape_fn((f, 3), |(i, k)| fibres.centres_nm[i][k]);
            centre.write(&buf).map_err(&e)?;
            write_str_attr(&centre, "unit", "nm").map_err(&e)?;
            let direction = g
                .new_dataset::<f64>()
                .shape((f, 3))
                .create("direction")
                .map_err(&e)?;
            let buf = ndarray::Array2::from_shape_fn((f, 3), |(i, k)| fibres.directions[i][k]);
            direction.write(&buf).map_err(&e)?;
            write_str_attr(&direction, "unit", "1").map_err(&e)?;
            f64_attr(&g, "radius_nm", fibres.radius_nm).map_err(&e)?;
            f64_attr(&g, "length_nm", fibres.length_nm).map_err(&e)?;
            i64_attr(&g, "count", f as i64).map_err(&e)?;
        }
        self.file.flush().map_err(&e)
    }
}

fn write_box(g: &Group, scenario: &Scenario) -> hdf5::Result<()> {
    let b = g.create_group("box")?;
    b.new_attr::<i32>()
        .create("dimension")?
        .write_scalar(&3i32)?;
    let boundary: Vec<FixedAscii<8>> = scenario
        .sim_box
        .periodic
        .iter()
        .map(|&p| {
            FixedAscii::<8>::from_ascii(if p { "periodic" } else { "none" }).expect("ascii literal")
        })
        .collect();
    b.new_attr::<FixedAscii<8>>()
        .shape(3)
        .create("boundary")?
        .write(&boundary)?;
    let edges = b.new_dataset::<f64>().shape(3).create("edges")?;
    edges.write(&scenario.sim_box.edges_nm)?;
    write_str_attr(&edges, "unit", "nm")
}

fn create_species_sets(
    g: &Group,
    range: std::ops::Range<usize>,
    precision: Precision,
) -> hdf5::Result<SpeciesSets> {
    let n = range.len();
    let chunk = (chunk_frames(n), chunk_particles(n), 3);
    let pos = g.create_group("position")?;
    let value = match precision {
        Precision::F32 => pos.new_dataset::<f32>(),
        Precision::F64 => pos.new_dataset::<f64>(),
    }
    .shape((0.., n, 3))
    .chunk(chunk)
    .create("value")?;
    write_str_attr(&value, "unit", "nm")?;
    let step = pos
        .new_dataset::<i64>()
        .shape(0..)
        .chunk(1024)
        .create("step")?;
    let time = pos
        .new_dataset::<f64>()
        .shape(0..)
        .chunk(1024)
        .create("time")?;
    write_str_attr(&time, "unit", "s")?;
    let img = g.create_group("image")?;
    let image = img
        .new_dataset::<i32>()
        .shape((0.., n, 3))
        .chunk(chunk)
        .create("value")?;
    let base = g.name();
    img.link_hard(&format!("{base}/position/step"), "step")?;
    img.link_hard(&format!("{base}/position/time"), "time")?;
    Ok(SpeciesSets {
        range,
        value,
        image,
        step,
        time,
    })
}

/// Path of the checkpoint that belongs to a trajectory file.
pub fn checkpoint_path(trajectory: &Path) -> PathBuf {
    let mut s = trajectory.as_os_str().to_owned();
    s.push(".ckpt");
    PathBuf::from(s)
}

const CHECKPOINT_MAGIC: &[u8; 8] = b"THKTCK03";
/// Magic of the format before checksums, recognised only to say so.
const CHECKPOINT_MAGIC_V1: &[u8; 8] = b"THKTCK01";
/// Magic of the format before observers saved their parts, recognised only to say so.
const CHECKPOINT_MAGIC_V2: &[u8; 8] = b"THKTCK02";
/// Header: magic, frames, step, particle count, scenario length.
const CHECKPOINT_HEADER: usize = 8 + 4 * 8;
/// Bytes per particle: position (3 × f64), image (3 × i32), generator (4 × u64).
const CHECKPOINT_PER_PARTICLE: usize = 24 + 12 + 32;

/// FNV-1a, 64-bit: detects truncation and flipped bytes in a checkpoint
/// (not an authenticity check; the file is our own).
fn fnv1a64(bytes: &[u8]) -> u64 {
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    for &b in bytes {
        h ^= u64::from(b);
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    }
    h
}

/// Exact run state at a step, with the frames already in the trajectory.
#[derive(Debug, Clone, PartialEq)]
pub struct Checkpoint {
    /// Frames in the trajectory that belong to this state.
    pub frames: u64,
    /// Resolved scenario the run was started with.
    pub resolved_toml: String,
    /// Particle state.
    pub state: State,
    /// Each observer's part, by name (text it wrote and reads back).
    pub parts: Vec<(String, String)>,
}

impl Checkpoint {
    /// Writes atomically (temporary file, then rename), so a kill mid-write
    /// leaves the previous checkpoint intact; a checksum ends the file.
    ///
    /// # Errors
    /// I/O failures.
    pub fn save(&self, path: &Path) -> Result<()> {
        let io = |source| EngineError::Io {
            file: path.to_path_buf(),
            source,
        };
        let n = self.state.len();
        let mut buf = Vec::with_capacity(
            CHECKPOINT_HEADER + self.resolved_toml.len() + n * CHECKPOINT_PER_PARTICLE + 8,
        );
        buf.extend_from_slice(CHECKPOINT_MAGIC);
        for v in [
            self.frames,
            self.state.step,
            n as u64,
            self.resolved_toml.len() as u64,
        ] {
            buf.extend_from_slice(&v.to_le_bytes());
        }
        buf.extend_from_slice(self.resolved_toml.as_bytes());
        for p in &self.state.positions {
            for x in p {
                buf.extend_from_slice(&x.to_le_bytes());
            }
        }
        for im in &self.state.images {
            for x in im {
                buf.extend_from_slice(&x.to_le_bytes());
            }
        }
        for g in &self.state.rngs {
            for w in g.state() {
                buf.extend_from_slice(&w.to_le_bytes());
            }
        }
        // Binding state travels as one more part, so runs without binding keep the format as it was.
        let tethers = (!self.state.binding.tethers.is_empty()).then(|| {
            (
                TETHERS_PART.to_string(),
                tethers_text(&self.state.binding.tethers),
            )
        });
        buf.extend_from_slice(
            &((self.parts.len() + tethers.is_some() as usize) as u64).to_le_bytes(),
        );
        for (name, text) in self.parts.iter().chain(&tethers) {
            for s in [name, text] {
                buf.extend_from_slice(&(s.len() as u64).to_le_bytes());
                buf.extend_from_slice(s.as_bytes());
            }
        }
        let sum = fnv1a64(&buf);
        buf.extend_from_slice(&sum.to_le_bytes());
        let tmp = path.with_extension("ckpt.tmp");
        let mut f = std::fs::File::create(&tmp).map_err(io)?;
        f.write_all(&buf).map_err(io)?;
        f.sync_all().map_err(io)?;
        std::fs::rename(&tmp, path).map_err(io)?;
        // The rename itself reaches the disk only with its folder.
        if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
            if let Ok(d) = std::fs::File::open(dir) {
                let _ = d.sync_all();
            }
        }
        Ok(())
    }

    /// Reads a checkpoint written by [`Checkpoint::save`], checking its
    /// checksum, sizes, finite positions and generator states before
    /// allocating or returning anything.
    ///
    /// # Errors
    /// [`EngineError::Resume`] naming the checkpoint when it is missing,
    /// truncated, damaged or not a checkpoint.
    pub fn load(path: &Path) -> Result<Self> {
        let fail = |reason: String| EngineError::Resume {
            file: path.to_path_buf(),
            reason,
        };
        let mut bytes = Vec::new();
        std::fs::File::open(path)
            .and_then(|mut f| f.read_to_end(&mut bytes))
            .map_err(|e| {
                fail(format!(
                    "no readable checkpoint ({e}); only a run that was interrupted can be resumed"
                ))
            })?;
        let damaged = |what: &str| {
            fail(format!(
                "the checkpoint is damaged ({what}); the trajectory is left as it is; start the run again with --force"
            ))
        };
        match bytes.get(..8) {
            Some(m) if m == CHECKPOINT_MAGIC.as_slice() => {}
            Some(m) if m == CHECKPOINT_MAGIC_V2.as_slice() => {
                return Err(fail(
                    "the checkpoint was written by an older thicket (before observer parts); start the run again with --force".into(),
                ))
            }
            Some(m) if m == CHECKPOINT_MAGIC_V1.as_slice() => {
                return Err(fail(
                    "the checkpoint was written by an older thicket without checksums; start the run again with --force".into(),
                ))
            }
            _ => return Err(fail("the file is not a thicket checkpoint".into())),
        }
        if bytes.len() < CHECKPOINT_HEADER + 8 {
            return Err(damaged("truncated"));
        }
        let (body, tail) = bytes.split_at(bytes.len() - 8);
        let stored = u64::from_le_bytes(tail.try_into().expect("8 bytes"));
        if fnv1a64(body) != stored {
            return Err(damaged("checksum mismatch: truncated or altered"));
        }
        let mut r = Reader { bytes: body, at: 8 };
        let short = || damaged("truncated");
        let frames = r.u64().ok_or_else(short)?;
        let step = r.u64().ok_or_else(short)?;
        let n = r.u64().ok_or_else(short)?;
        let len = r.u64().ok_or_else(short)?;
        let len = usize::try_from(len).map_err(|_| short())?;
        let toml = r.take(len).ok_or_else(short)?;
        let resolved_toml =
            String::from_utf8(toml.to_vec()).map_err(|_| damaged("the scenario is not text"))?;
        // Sizes are checked against the bytes present before any allocation.
        let n = usize::try_from(n)
            .ok()
            .filter(|&n| {
                n.checked_mul(CHECKPOINT_PER_PARTICLE)
                    .is_some_and(|b| b <= body.len() - r.at)
            })
            .ok_or_else(|| damaged("its particle count does not match its size"))?;
        let mut positions = Vec::with_capacity(n);
        for i in 0..n {
            let p = [r.f64(), r.f64(), r.f64()].map(|v| v.unwrap_or(f64::NAN));
            if !p.iter().all(|x| x.is_finite()) {
                return Err(damaged(&format!("particle {i} has a non-finite position")));
            }
            positions.push(p);
        }
        let mut images = Vec::with_capacity(n);
        for _ in 0..n {
            images.push([r.i32(), r.i32(), r.i32()].map(|v| v.unwrap_or(0)));
        }
        let mut rngs = Vec::with_capacity(n);
        for i in 0..n {
            let words = [r.u64(), r.u64(), r.u64(), r.u64()].map(|v| v.unwrap_or(0));
            // xoshiro256 never leaves the all-zero state, so it cannot come from a run.
            if words == [0; 4] {
                return Err(damaged(&format!(
                    "particle {i} has an all-zero generator state"
                )));
            }
            rngs.push(ParticleRng::from_state(words));
        }
        let count = r.u64().ok_or_else(short)?;
        let mut parts = Vec::new();
        for _ in 0..count {
            let mut text = || -> Option<String> {
                let len = usize::try_from(r.u64()?).ok()?;
                String::from_utf8(r.take(len)?.to_vec()).ok()
            };
            let (Some(name), Some(part)) = (text(), text()) else {
                return Err(damaged("an observer's part is truncated or not text"));
            };
            parts.push((name, part));
        }
        if r.at != body.len() {
            return Err(damaged("its particle count does not match its size"));
        }
        let mut binding = crate::step::state::Binding::default();
        if let Some(k) = parts.iter().position(|(name, _)| name == TETHERS_PART) {
            let (_, text) = parts.remove(k);
            binding.tethers =
                parse_tethers(&text, n).ok_or_else(|| damaged("its binding state"))?;
        }
        Ok(Self {
            parts,
            frames,
            resolved_toml,
            state: State {
                positions,
                images,
                rngs,
                step,
                binding,
            },
        })
    }
}

/// Name of the checkpoint part that holds who is bound.
const TETHERS_PART: &str = "tethers";

/// One line per particle: `-` when free, else the bind and release steps
/// and the dwell time's bits (exact), in hexadecimal.
fn tethers_text(tethers: &[Option<Tether>]) -> String {
    let mut out = String::with_capacity(tethers.len() * 4);
    for t in tethers {
        match t {
            None => out.push_str("-\n"),
            Some(t) => {
                let _ = writeln!(
                    out,
                    "{:x} {:x} {:x}",
                    t.since_step,
                    t.until_step,
                    t.dwell_s.to_bits()
                );
            }
        }
    }
    out
}

/// Reads [`tethers_text`] back; `None` when it is damaged or not `n` lines.
fn parse_tethers(text: &str, n: usize) -> Option<Vec<Option<Tether>>> {
    let out: Option<Vec<Option<Tether>>> = text
        .lines()
        .map(|line| {
            if line == "-" {
                return Some(None);
            }
            let mut w = line.split(' ').map(|v| u64::from_str_radix(v, 16).ok());
            let (since_step, until_step, bits) = (w.next()??, w.next()??, w.next()??);
            let dwell_s = f64::from_bits(bits);
            (w.next().is_none() && dwell_s.is_finite() && since_step < until_step).then_some(Some(
                Tether {
                    since_step,
                    until_step,
                    dwell_s,
                },
            ))
        })
        .collect();
    out.filter(|v| v.len() == n)
}

/// Frames and recorded steps of a trajectory, read without changing it:
/// per species, the length of `position/value` and the `position/step` values.
///
/// # Errors
/// [`EngineError::Resume`] when the file or a dataset cannot be read.
pub fn recorded_steps(path: &Path, scenario: &Scenario) -> Result<Vec<(usize, Vec<i64>)>> {
    let fail = |reason: String| EngineError::Resume {
        file: path.to_path_buf(),
        reason,
    };
    let file = File::open(path).map_err(|e| fail(format!("the trajectory cannot be read: {e}")))?;
    let mut out = Vec::new();
    for s in &scenario.species {
        let base = format!("particles/{}/position", s.name);
        let value = file
            .dataset(&format!("{base}/value"))
            .map_err(|e| fail(format!("dataset /{base}/value is missing: {e}")))?;
        let steps: Vec<i64> = file
            .dataset(&format!("{base}/step"))
            .and_then(|d| d.read_raw::<i64>())
            .map_err(|e| {
                fail(format!(
                    "dataset /{base}/step is missing or unreadable: {e}"
                ))
            })?;
        out.push((value.shape().first().copied().unwrap_or(0), steps));
    }
    Ok(out)
}

struct Reader<'a> {
    bytes: &'a [u8],
    at: usize,
}

impl<'a> Reader<'a> {
    fn take(&mut self, n: usize) -> Option<&'a [u8]> {
        let out = self.bytes.get(self.at..self.at.checked_add(n)?)?;
        self.at += n;
        Some(out)
    }
    fn u64(&mut self) -> Option<u64> {
        self.take(8)
            .map(|b| u64::from_le_bytes(b.try_into().expect("8 bytes")))
    }
    fn f64(&mut self) -> Option<f64> {
        self.take(8)
            .map(|b| f64::from_le_bytes(b.try_into().expect("8 bytes")))
    }
    fn i32(&mut self) -> Option<i32> {
        self.take(4)
            .map(|b| i32::from_le_bytes(b.try_into().expect("4 bytes")))
    }
}

/// A value written as an HDF5 attribute by [`write_attributes`].
#[derive(Debug, Clone, PartialEq)]
pub enum AttrValue {
    /// A float.
    F64(f64),
    /// An integer.
    I64(i64),
    /// A string (fixed-length ASCII; non-ASCII characters are replaced by '?').
    Str(String),
}

/// Spells the symbols of our messages in ASCII (HDF5 attributes here are
/// fixed-length ASCII); anything else becomes '?'.
fn to_ascii(text: &str) -> String {
    let mut out = String::with_capacity(text.len());
    for c in text.chars() {
        let spelled = match c {
            c if c.is_ascii() => {
                out.push(c);
                continue;
            }
            '∥' => "_par",
            '⊥' => "_perp",
            '∇' => "nabla",
            '·' => ".",
            '−' | '–' | '—' => "-",
            'é' | 'è' => "e",
            'ô' => "o",
            'λ' => "lambda",
            'Φ' => "Phi",
            'σ' => "sigma",
            'ε' => "eps",
            '²' => "^2",
            '³' => "^3",
            '×' => "x",
            '…' => "...",
            '√' => "sqrt",
            _ => "?",
        };
        out.push_str(spelled);
    }
    out
}

/// Opens the group at `path` (e.g. `observables/tracer/membrane`), creating
/// missing levels.
fn ensure_group(file: &File, path: &str) -> hdf5::Result<Group> {
    let mut group = file.group("/")?;
    for part in path.split('/').filter(|p| !p.is_empty()) {
        group = match group.group(part) {
            Ok(g) => g,
            Err(_) => group.create_group(part)?,
        };
    }
    Ok(group)
}

/// Writes (or replaces) attributes on the group at `path`, creating it if
/// needed: geometry parameters under `/parameters/thicket/geometry`,
/// measured summaries under `/observables`.
///
/// # Errors
/// HDF5 failures.
pub fn write_attributes(
    writer: &TrajectoryWriter,
    path: &str,
    attrs: &[(&str, AttrValue)],
) -> Result<()> {
    let e = h5(&writer.path);
    let group = ensure_group(&writer.file, path).map_err(&e)?;
    for (name, value) in attrs {
        if group.attr(name).is_ok() {
            group.delete_attr(name).map_err(&e)?;
        }
        match value {
            AttrValue::F64(v) => f64_attr(&group, name, *v),
            AttrValue::I64(v) => i64_attr(&group, name, *v),
            AttrValue::Str(s) => write_str_attr(&group, name, &to_ascii(s)),
        }
        .map_err(&e)?;
    }
    Ok(())
}

/// An H5MD observable time series under `/observables/<name>`: `value`
/// (frames × columns, i64), `step` and `time`, appended frame by frame; the
/// `columns` attribute names the columns, comma-separated.
pub struct ObservableSeries {
    path: PathBuf,
    value: Dataset,
    step: Dataset,
    time: Dataset,
    columns: usize,
    rows: usize,
}

impl ObservableSeries {
    /// Creates an empty series with the named columns.
    ///
    /// # Errors
    /// HDF5 failures.
    pub fn create(
        writer: &TrajectoryWriter,
        name: &str,
        columns: &[&str],
        unit: &str,
    ) -> Result<Self> {
        let e = h5(&writer.path);
        let g = ensure_group(&writer.file, &format!("observables/{name}")).map_err(&e)?;
        let value = g
            .new_dataset::<i64>()
            .shape((0.., columns.len()))
            .chunk((256, columns.len()))
            .create("value")
            .map_err(&e)?;
        write_str_attr(&value, "unit", unit).map_err(&e)?;
        write_str_attr(&value, "columns", &columns.join(",")).map_err(&e)?;
        let step = g
            .new_dataset::<i64>()
            .shape(0..)
            .chunk(1024)
            .create("step")
            .map_err(&e)?;
        let time = g
            .new_dataset::<f64>()
            .shape(0..)
            .chunk(1024)
            .create("time")
            .map_err(&e)?;
        write_str_attr(&time, "unit", "s").map_err(&e)?;
        Ok(Self {
            path: writer.path.clone(),
            value,
            step,
            time,
            columns: columns.len(),
            rows: 0,
        })
    }

    /// Reopens a series for a resumed run, keeping its first `rows` rows.
    ///
    /// # Errors
    /// [`EngineError::Resume`] when the series is missing, has another
    /// width or fewer rows.
    pub fn reopen(
        writer: &TrajectoryWriter,
        name: &str,
        columns: usize,
        rows: usize,
    ) -> Result<Self> {
        let fail = |reason: String| EngineError::Resume {
            file: writer.path.clone(),
            reason,
        };
        let open = |set: &str| {
            writer
                .file
                .dataset(&format!("observables/{name}/{set}"))
                .map_err(|e| {
                    fail(format!(
                        "dataset /observables/{name}/{set} is missing or unreadable: {e}"
                    ))
                })
        };
        let (value, step, time) = (open("value")?, open("step")?, open("time")?);
        let shape = value.shape();
        if shape.len() != 2
            || shape[1] != columns
            || shape[0] < rows
            || step.shape().first().copied().unwrap_or(0) < rows
        {
            return Err(fail(format!("/observables/{name} does not match the checkpoint ({shape:?}, expected at least {rows} rows of {columns})")));
        }
        let e = h5(&writer.path);
        value.resize((rows, columns)).map_err(&e)?;
        step.resize(rows).map_err(&e)?;
        time.resize(rows).map_err(&e)?;
        Ok(Self {
            path: writer.path.clone(),
            value,
            step,
            time,
            columns,
            rows,
        })
    }

    /// Appends one row.
    ///
    /// # Errors
    /// HDF5 failures; a row of the wrong width is refused.
    pub fn append(&mut self, step: u64, time_s: f64, values: &[i64]) -> Result<()> {
        let e = h5(&self.path);
        if values.len() != self.columns {
            return Err(EngineError::Hdf5 {
                file: self.path.clone(),
                source: hdf5::Error::from("observable row of the wrong width"),
            });
        }
        let f = self.rows;
        self.value.resize((f + 1, self.columns)).map_err(&e)?;
        let row = ndarray::Array2::from_shape_fn((1, self.columns), |(_, k)| values[k]);
        self.value.write_slice(&row, s![f..f + 1, ..]).map_err(&e)?;
        self.step.resize(f + 1).map_err(&e)?;
        self.step
            .write_slice(&Array1::from_elem(1, step as i64), s![f..f + 1])
            .map_err(&e)?;
        self.time.resize(f + 1).map_err(&e)?;
        self.time
            .write_slice(&Array1::from_elem(1, time_s), s![f..f + 1])
            .map_err(&e)?;
        self.rows += 1;
        Ok(())
    }
}

impl ObservableSeries {
    /// Creates an empty series of one column per particle (a species'
    /// per-particle state at each frame); the `meaning` attribute of `value`
    /// says what its numbers are.
    ///
    /// # Errors
    /// HDF5 failures.
    pub fn create_per_particle(
        writer: &TrajectoryWriter,
        name: &str,
        width: usize,
        unit: &str,
        meaning: &str,
    ) -> Result<Self> {
        let e = h5(&writer.path);
        let g = ensure_group(&writer.file, &format!("observables/{name}")).map_err(&e)?;
        let value = g
            .new_dataset::<i64>()
            .shape((0.., width))
            .chunk((chunk_frames(width), width.max(1)))
            .create("value")
            .map_err(&e)?;
        write_str_attr(&value, "unit", unit).map_err(&e)?;
        write_str_attr(&value, "meaning", &to_ascii(meaning)).map_err(&e)?;
        let step = g
            .new_dataset::<i64>()
            .shape(0..)
            .chunk(1024)
            .create("step")
            .map_err(&e)?;
        let time = g
            .new_dataset::<f64>()
            .shape(0..)
            .chunk(1024)
            .create("time")
            .map_err(&e)?;
        write_str_attr(&time, "unit", "s").map_err(&e)?;
        Ok(Self {
            path: writer.path.clone(),
            value,
            step,
            time,
            columns: width,
            rows: 0,
        })
    }
}

/// Completed binding events of one species under
/// `/observables/<species>/binding_events`: `dwell_time` (s), `bound_time`
/// (s, when the event began) and `particle` (index within the species), one
/// entry per event in order of release, appended at each frame.
pub struct BindingEvents {
    path: PathBuf,
    dwell: Dataset,
    bound: Dataset,
    particle: Dataset,
    rows: usize,
}

/// Group of a species' binding events under `/observables`.
fn events_group(species: &str) -> String {
    format!("observables/{species}/binding_events")
}

impl BindingEvents {
    /// Creates the empty event datasets of `species`.
    ///
    /// # Errors
    /// HDF5 failures.
    pub fn create(writer: &TrajectoryWriter, species: &str) -> Result<Self> {
        let e = h5(&writer.path);
        let g = ensure_group(&writer.file, &events_group(species)).map_err(&e)?;
        let f64_set = |name: &str, meaning: &str| -> hdf5::Result<Dataset> {
            let d = g.new_dataset::<f64>().shape(0..).chunk(4096).create(name)?;
            write_str_attr(&d, "unit", "s")?;
            write_str_attr(&d, "meaning", meaning)?;
            Ok(d)
        };
        let dwell = f64_set(
            "dwell_time",
            "dwell time of each completed binding event, drawn from exp(-k_off t); the tracer was held \
             until the first step end at or after it",
        )
        .map_err(&e)?;
        let bound = f64_set(
            "bound_time",
            "time at which the event began (the tracer bound)",
        )
        .map_err(&e)?;
        let particle = g
            .new_dataset::<i64>()
            .shape(0..)
            .chunk(4096)
            .create("particle")
            .map_err(&e)?;
        write_str_attr(
            &particle,
            "meaning",
            "index of the tracer within its species",
        )
        .map_err(&e)?;
        Ok(Self {
            path: writer.path.clone(),
            dwell,
            bound,
            particle,
            rows: 0,
        })
    }

    /// Reopens the datasets for a resumed run, keeping their first `rows` entries.
    ///
    /// # Errors
    /// [`EngineError::Resume`] when a dataset is missing or shorter.
    pub fn reopen(writer: &TrajectoryWriter, species: &str, rows: usize) -> Result<Self> {
        let group = events_group(species);
        let fail = |reason: String| EngineError::Resume {
            file: writer.path.clone(),
            reason,
        };
        let e = h5(&writer.path);
        let open = |set: &str| -> Result<Dataset> {
            let d = writer
                .file
                .dataset(&format!("{group}/{set}"))
                .map_err(|err| {
                    fail(format!(
                        "dataset /{group}/{set} is missing or unreadable: {err}"
                    ))
                })?;
            if d.shape().first().copied().unwrap_or(0) < rows {
                return Err(fail(format!(
                    "/{group}/{set} holds fewer than the checkpoint's {rows} events"
                )));
            }
            d.resize(rows).map_err(&e)?;
            Ok(d)
        };
        Ok(Self {
            path: writer.path.clone(),
            dwell: open("dwell_time")?,
            bound: open("bound_time")?,
            particle: open("particle")?,
            rows,
        })
    }

    /// Events written so far.
    pub fn rows(&self) -> usize {
        self.rows
    }

    /// Appends events given as (dwell s, bound at s, particle index).
    ///
    /// # Errors
    /// HDF5 failures.
    pub fn append(&mut self, events: &[(f64, f64, i64)]) -> Result<()> {
        if events.is_empty() {
            return Ok(());
        }
        let e = h5(&self.path);
        let (a, b) = (self.rows, self.rows + events.len());
        let col = |k: usize| Array1::from_iter(events.iter().map(|v| [v.0, v.1][k]));
        self.dwell.resize(b).map_err(&e)?;
        self.dwell.write_slice(&col(0), s![a..b]).map_err(&e)?;
        self.bound.resize(b).map_err(&e)?;
        self.bound.write_slice(&col(1), s![a..b]).map_err(&e)?;
        self.particle.resize(b).map_err(&e)?;
        self.particle
            .write_slice(&Array1::from_iter(events.iter().map(|v| v.2)), s![a..b])
            .map_err(&e)?;
        self.rows = b;
        Ok(())
    }
}
