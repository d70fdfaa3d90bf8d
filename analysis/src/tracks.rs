//! Single-particle tracks: the detections a camera produced, their files
//! (CSV for pipelines, HDF5 with the ground truth), per-track estimators of
//! D and σ², and a report of the estimates against the truth.
//!
//! # Files
//! **CSV** (`tracks.csv`), one row per detection, sorted by track then frame,
//! a header row and numbers only:
//!
//! | column | meaning |
//! |---|---|
//! | `track_id` | track number, from 0, in order of first appearance |
//! | `frame` | frame number, from 0 |
//! | `time_s` | start of the frame's exposure, s (`frame × frame interval`) |
//! | `x_nm`, `y_nm` | localised position, nm, in box coordinates |
//! | `z_nm` | only with `projection = "3d"` |
//!
//! **HDF5** (`tracks.h5`), the same detections plus the truth:
//! `/detections/{track_id, frame, time_s, x_nm, y_nm[, z_nm], true_x_nm,
//! true_y_nm, true_z_nm, region_index}` (true = blurred position before
//! localisation error, folded into the box; `region_index` into `/regions`),
//! `/tracks/{track_id, particle, species, species_index, d0_m2_per_s,
//! region, first_frame, frames}` (region: where most of the track's
//! detections were), `/regions` (names: "free", "slit", "channel",
//! "closed_box" from the box walls, or from `[geometry]`: "plane_wall",
//! "slit", "pore" for a cylinder, "reservoir" and "pore" for a membrane),
//! the camera settings as attributes of `/camera`, and the scenario as
//! `/parameters/thicket/scenario`. Every dataset has a `unit` attribute.
//!
//! # Estimators
//! Per axis and per track, with steps Δx_k between consecutive frames:
//! - [`covariance_estimate`]: Vestergaard, Blainey & Flyvbjerg,
//!   Phys. Rev. E 89, 022726 (2014): D̂ = ⟨Δx²⟩/(2Δt) + ⟨Δx_k Δx_{k+1}⟩/Δt,
//!   σ̂² = R⟨Δx²⟩ + (2R − 1)⟨Δx_k Δx_{k+1}⟩.
//! - [`msd_fit_estimate`]: a straight-line fit of the time-averaged MSD over
//!   lags 1…p with the number of lags p chosen to minimise the variance of D̂,
//!   following Michalet, Phys. Rev. E 82, 041914 (2010), who showed that the
//!   best p depends on the reduced localisation error x = σ²/(DΔt) and the
//!   track length. Here the variance is computed exactly for the fitted
//!   model from the covariance of MSD points of a Gaussian process
//!   (Qian, Sheetz & Elson, Biophys. J. 60, 910, 1991, from memory) instead
//!   of Michalet's fitted approximation.

use std::collections::BTreeMap;
use std::fmt::Write as _;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use hdf5::types::FixedAscii;
use ndarray::arr2;
use serde::Serialize;

/// Longest species or region name stored in the HDF5 file (species names are
/// at most 64 characters, config.rs).
const NAME_BYTES: usize = 64;

/// Largest number of MSD lags [`msd_fit_estimate`] considers: the best p
/// stays well below it for any σ and D of practical interest (Michalet 2010).
pub const MAX_FIT_LAGS: usize = 50;

/// CSV rows formatted by one thread at a time (a few MB of text).
const CSV_ROWS_PER_PART: usize = 1 << 17;

/// Tracks shorter than this many detections are left out of the report by
/// default: their estimates are unbiased but so spread out that they hide
/// the bias of the rest.
pub const DEFAULT_MIN_TRACK_FRAMES: usize = 10;

/// Everything that can go wrong with tracks and their files.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum TracksError {
    /// The scenario has no `[camera]` section.
    #[error("{}: the scenario has no [camera] section; `thicket tracks` needs one (see configs/tracks.toml)", file.display())]
    NoCamera {
        /// Scenario path.
        file: PathBuf,
    },
    /// A file could not be read or written.
    #[error("{}: {source}", file.display())]
    Io {
        /// Path concerned.
        file: PathBuf,
        /// Underlying error.
        source: std::io::Error,
    },
    /// The HDF5 library failed on an object of a file.
    #[error("{}: HDF5 error at '{object}': {source}", file.display())]
    Hdf5 {
        /// Path concerned.
        file: PathBuf,
        /// Group, dataset or attribute.
        object: String,
        /// Library error.
        source: hdf5::Error,
    },
    /// A trajectory does not fit the scenario or the camera.
    #[error("{}: {what}; allowed: {allowed}", file.display())]
    Trajectory {
        /// Trajectory path.
        file: PathBuf,
        /// What was found.
        what: String,
        /// What would be allowed.
        allowed: String,
    },
    /// A CSV field, header or row is malformed.
    #[error("{}: line {line}, {column}: {value} is not allowed; {allowed}", file.display())]
    Csv {
        /// CSV path.
        file: PathBuf,
        /// 1-based line number.
        line: usize,
        /// Column (or "header", "row").
        column: String,
        /// The offending text.
        value: String,
        /// What would be allowed.
        allowed: String,
    },
    /// An option describing a tracks CSV or its analysis is not allowed.
    #[error("{}: {option} {value} is not allowed; allowed: {allowed}", file.display())]
    Option {
        /// The CSV the option applies to.
        file: PathBuf,
        /// Option name, e.g. `--length-unit`.
        option: String,
        /// The value given.
        value: String,
        /// What would be allowed.
        allowed: String,
    },
    /// An output (table, plot) could not be written.
    #[error("{}: {message}", file.display())]
    Output {
        /// Path concerned.
        file: PathBuf,
        /// What went wrong.
        message: String,
    },
    /// A tracks HDF5 file lacks what the truth needs.
    #[error("{}: {what}; allowed: {allowed}", file.display())]
    Truth {
        /// HDF5 path.
        file: PathBuf,
        /// What was found.
        what: String,
        /// What would be allowed.
        allowed: String,
    },
}

fn io_err(file: &Path) -> impl Fn(std::io::Error) -> TracksError + '_ {
    move |source| TracksError::Io {
        file: file.to_path_buf(),
        source,
    }
}

fn h5_err<'a>(file: &'a Path, object: &'a str) -> impl Fn(hdf5::Error) -> TracksError + 'a {
    move |source| TracksError::Hdf5 {
        file: file.to_path_buf(),
        object: object.to_string(),
        source,
    }
}

/// One track of the camera, with its ground truth.
#[derive(Debug, Clone, PartialEq)]
pub struct Track {
    /// Track id (assigned by [`TrackSet::assemble`]).
    pub id: usize,
    /// Index of the particle in the scenario (species in file order).
    pub particle: usize,
    /// Index of the species in the scenario.
    pub species: usize,
    /// Frame of the first detection; detections are in consecutive frames.
    pub first_frame: usize,
    /// Ground-truth region where most detections were, index into [`TrackSet::regions`].
    pub region: usize,
    /// Reported positions, nm (z is meaningful only in 3D projection).
    pub positions_nm: Vec<[f64; 3]>,
    /// Blurred positions before localisation error, folded into the box, nm.
    pub true_positions_nm: Vec<[f64; 3]>,
    /// Ground-truth region of each detection, index into [`TrackSet::regions`].
    pub regions: Vec<u8>,
}

/// A species' ground truth.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SpeciesTruth {
    /// Name.
    pub name: String,
    /// Free diffusivity D0, m²/s.
    pub d0_m2_per_s: f64,
}

/// The camera settings that an analysis of the tracks needs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CameraSummary {
    /// Frame interval Δt, s.
    pub frame_interval_s: f64,
    /// Exposure t_E, s.
    pub exposure_s: f64,
    /// Exposure that the sampled blur corresponds to, s (camera.rs).
    pub effective_exposure_s: f64,
    /// Blur factor R = effective exposure / (6 Δt) (Berglund 2010).
    pub blur_factor: f64,
    /// Frames of the movie.
    pub frames: usize,
    /// Reported coordinates, 2 or 3.
    pub dims: usize,
    /// Lateral localisation error per axis, nm.
    pub sigma_nm: f64,
    /// Axial localisation error, nm, in 3D.
    pub sigma_z_nm: Option<f64>,
    /// Field of view [[x_lo, x_hi], [y_lo, y_hi]], nm.
    pub field_of_view_nm: [[f64; 2]; 2],
    /// Focal slab [z_lo, z_hi], nm.
    pub focal_slab_nm: Option<[f64; 2]>,
    /// Bleaching lifetime, s.
    pub bleach_lifetime_s: Option<f64>,
    /// Blinking rates [on→off, off→on], 1/s.
    pub blink: Option<[f64; 2]>,
}

/// All tracks of one movie with their ground truth.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackSet {
    /// Tracks; `tracks[i].id == i`.
    pub tracks: Vec<Track>,
    /// Species of the scenario, by index.
    pub species: Vec<SpeciesTruth>,
    /// Names of the ground-truth regions (camera.rs: from the geometry).
    pub regions: Vec<String>,
    /// Camera settings.
    pub camera: CameraSummary,
    /// The resolved scenario (TOML).
    pub scenario_toml: String,
}

impl TrackSet {
    /// Orders tracks by first frame, then particle, and numbers them from 0,
    /// so ids reveal nothing about species.
    pub fn assemble(
        mut tracks: Vec<Track>,
        species: Vec<SpeciesTruth>,
        regions: Vec<String>,
        camera: CameraSummary,
        scenario_toml: String,
    ) -> Self {
        tracks.sort_by_key(|t| (t.first_frame, t.particle));
        for (i, t) in tracks.iter_mut().enumerate() {
            t.id = i;
        }
        Self {
            tracks,
            species,
            regions,
            camera,
            scenario_toml,
        }
    }

    /// Number of detections over all tracks.
    pub fn detections(&self) -> usize {
        self.tracks.iter().map(|t| t.positions_nm.len()).sum()
    }

    /// Column names of the CSV file.
    pub fn csv_columns(&self) -> &'static [&'static str] {
        if self.camera.dims == 3 {
            &["track_id", "frame", "time_s", "x_nm", "y_nm", "z_nm"]
        } else {
            &["track_id", "frame", "time_s", "x_nm", "y_nm"]
        }
    }

    /// Writes the CSV file (see the module docs for the columns).
    ///
    /// # Errors
    /// [`TracksError::Io`].
    pub fn write_csv(&self, path: &Path) -> Result<(), TracksError> {
        let file = std::fs::File::create(path).map_err(io_err(path))?;
        let mut w = BufWriter::with_capacity(1 << 20, file);
        writeln!(w, "{}", self.csv_columns().join(",")).map_err(io_err(path))?;
        // Each frame's time once, not once per detection.
        let times: Vec<String> = self.frame_times_s().iter().map(f64::to_string).collect();
        let workers = std::thread::available_parallelism().map_or(1, |n| n.get());
        // Batches of tracks, each formatted in `workers` parts side by side and
        // written in order: bounded memory, same bytes for any thread count.
        let mut start = 0;
        while start < self.tracks.len() {
            let mut parts = Vec::with_capacity(workers);
            let mut end = start;
            for _ in 0..workers {
                let from = end;
                let mut rows = 0;
                while end < self.tracks.len() && rows < CSV_ROWS_PER_PART {
                    rows += self.tracks[end].positions_nm.len();
                    end += 1;
                }
                parts.push(&self.tracks[from..end]);
            }
            let buffers: Vec<Vec<u8>> = std::thread::scope(|scope| {
                let handles: Vec<_> = parts
                    .iter()
                    .map(|part| scope.spawn(|| self.format_rows(part, &times)))
                    .collect();
                handles
                    .into_iter()
                    .map(|h| h.join().expect("formatting threads do not panic"))
                    .collect()
            });
            for b in &buffers {
                w.write_all(b).map_err(io_err(path))?;
            }
            start = end;
        }
        w.flush().map_err(io_err(path))
    }

    /// CSV rows of some tracks.
    fn format_rows(&self, tracks: &[Track], times: &[String]) -> Vec<u8> {
        let dims = self.camera.dims;
        let mut buf: Vec<u8> =
            Vec::with_capacity(tracks.iter().map(|t| t.positions_nm.len()).sum::<usize>() * 48);
        for t in tracks {
            for (k, p) in t.positions_nm.iter().enumerate() {
                let frame = t.first_frame + k;
                push_uint(&mut buf, t.id as u64);
                buf.push(b',');
                push_uint(&mut buf, frame as u64);
                buf.push(b',');
                buf.extend_from_slice(times[frame].as_bytes());
                // Coordinates to 1 pm, far below any localisation error.
                for x in &p[..dims] {
                    buf.push(b',');
                    push_fixed3(&mut buf, *x);
                }
                buf.push(b'\n');
            }
        }
        buf
    }

    /// Start time of every frame, `frame × Δt` without binary noise
    /// (rounded to 12 significant digits).
    pub fn frame_times_s(&self) -> Vec<f64> {
        let dt = self.camera.frame_interval_s;
        (0..self.camera.frames)
            .map(|f| {
                let t = f as f64 * dt;
                format!("{t:.11e}").parse().unwrap_or(t)
            })
            .collect()
    }

    /// Writes the HDF5 file: the detections of the CSV plus the truth (see
    /// the module docs for the layout).
    ///
    /// # Errors
    /// [`TracksError::Hdf5`].
    pub fn write_h5(&self, path: &Path) -> Result<(), TracksError> {
        let e = |object: &'static str| h5_err(path, object);
        let file = hdf5::File::create(path).map_err(e("/"))?;
        let n = self.detections();
        let times = self.frame_times_s();
        let mut track_id = Vec::with_capacity(n);
        let mut frame = Vec::with_capacity(n);
        let mut time_s = Vec::with_capacity(n);
        let mut reported: [Vec<f64>; 3] = std::array::from_fn(|_| Vec::with_capacity(n));
        let mut truth: [Vec<f64>; 3] = std::array::from_fn(|_| Vec::with_capacity(n));
        for t in &self.tracks {
            for (k, (p, q)) in t.positions_nm.iter().zip(&t.true_positions_nm).enumerate() {
                let f = t.first_frame + k;
                track_id.push(t.id as i64);
                frame.push(f as i64);
                time_s.push(times[f]);
                for a in 0..3 {
                    reported[a].push(p[a]);
                    truth[a].push(q[a]);
                }
            }
        }
        let det = file.create_group("detections").map_err(e("/detections"))?;
        write_column(&det, "track_id", &track_id, "1").map_err(e("/detections/track_id"))?;
        write_column(&det, "frame", &frame, "1").map_err(e("/detections/frame"))?;
        write_column(&det, "time_s", &time_s, "s").map_err(e("/detections/time_s"))?;
        for (a, name) in ["x_nm", "y_nm", "z_nm"]
            .iter()
            .enumerate()
            .take(self.camera.dims)
        {
            write_column(&det, name, &reported[a], "nm").map_err(e("/detections"))?;
        }
        for (a, name) in ["true_x_nm", "true_y_nm", "true_z_nm"].iter().enumerate() {
            write_column(&det, name, &truth[a], "nm").map_err(e("/detections"))?;
        }

        let tr = file.create_group("tracks").map_err(e("/tracks"))?;
        let col = |f: &dyn Fn(&Track) -> i64| self.tracks.iter().map(f).collect::<Vec<i64>>();
        write_column(&tr, "track_id", &col(&|t| t.id as i64), "1")
            .map_err(e("/tracks/track_id"))?;
        write_column(&tr, "particle", &col(&|t| t.particle as i64), "1")
            .map_err(e("/tracks/particle"))?;
        write_column(&tr, "species_index", &col(&|t| t.species as i64), "1")
            .map_err(e("/tracks/species_index"))?;
        write_column(&tr, "first_frame", &col(&|t| t.first_frame as i64), "1")
            .map_err(e("/tracks/first_frame"))?;
        write_column(&tr, "frames", &col(&|t| t.positions_nm.len() as i64), "1")
            .map_err(e("/tracks/frames"))?;
        let d0: Vec<f64> = self
            .tracks
            .iter()
            .map(|t| self.species[t.species].d0_m2_per_s)
            .collect();
        write_column(&tr, "d0_m2_per_s", &d0, "m2/s").map_err(e("/tracks/d0_m2_per_s"))?;
        let names: Vec<FixedAscii<NAME_BYTES>> = self
            .tracks
            .iter()
            .map(|t| ascii(&self.species[t.species].name))
            .collect();
        write_column(&tr, "species", &names, "1").map_err(e("/tracks/species"))?;
        let regions: Vec<FixedAscii<NAME_BYTES>> = self
            .tracks
            .iter()
            .map(|t| ascii(self.regions.get(t.region).map_or("unknown", String::as_str)))
            .collect();
        write_column(&tr, "region", &regions, "1").map_err(e("/tracks/region"))?;
        let names: Vec<FixedAscii<NAME_BYTES>> = self.regions.iter().map(|r| ascii(r)).collect();
        write_column(&file, "regions", &names, "1").map_err(e("/regions"))?;
        let per_detection: Vec<i8> = self
            .tracks
            .iter()
            .flat_map(|t| t.regions.iter().map(|&r| r as i8))
            .collect();
        write_column(&det, "region_index", &per_detection, "1")
            .map_err(e("/detections/region_index"))?;

        let cam = file.create_group("camera").map_err(e("/camera"))?;
        let c = &self.camera;
        let f64_attr = |name: &str, v: f64| {
            cam.new_attr::<f64>()
                .create(name)
                .and_then(|a| a.write_scalar(&v))
        };
        f64_attr("frame_interval_s", c.frame_interval_s).map_err(e("/camera"))?;
        f64_attr("exposure_s", c.exposure_s).map_err(e("/camera"))?;
        f64_attr("effective_exposure_s", c.effective_exposure_s).map_err(e("/camera"))?;
        f64_attr("blur_factor", c.blur_factor).map_err(e("/camera"))?;
        f64_attr("localisation_sigma_nm", c.sigma_nm).map_err(e("/camera"))?;
        if let Some(sz) = c.sigma_z_nm {
            f64_attr("localisation_sigma_z_nm", sz).map_err(e("/camera"))?;
        }
        if let Some(tau) = c.bleach_lifetime_s {
            f64_attr("bleach_lifetime_s", tau).map_err(e("/camera"))?;
        }
        if let Some([off, on]) = c.blink {
            f64_attr("blink_on_to_off_per_s", off).map_err(e("/camera"))?;
            f64_attr("blink_off_to_on_per_s", on).map_err(e("/camera"))?;
        }
        cam.new_attr::<i64>()
            .create("frames")
            .and_then(|a| a.write_scalar(&(c.frames as i64)))
            .map_err(e("/camera"))?;
        cam.new_attr::<i64>()
            .create("dims")
            .and_then(|a| a.write_scalar(&(c.dims as i64)))
            .map_err(e("/camera"))?;
        cam.new_attr::<f64>()
            .shape((2, 2))
            .create("field_of_view_nm")
            .and_then(|a| a.write(&arr2(&c.field_of_view_nm)))
            .map_err(e("/camera"))?;
        if let Some(slab) = c.focal_slab_nm {
            cam.new_attr::<f64>()
                .shape(2)
                .create("focal_slab_nm")
                .and_then(|a| a.write(&slab))
                .map_err(e("/camera"))?;
        }
        let params = file
            .create_group("parameters")
            .and_then(|p| p.create_group("thicket"))
            .map_err(e("/parameters/thicket"))?;
        thicket_engine::io::trajectory::write_str_attr(&params, "scenario", &self.scenario_toml)
            .map_err(e("/parameters/thicket"))?;
        thicket_engine::io::trajectory::write_str_attr(
            &params,
            "version",
            thicket_engine::io::trajectory::VERSION,
        )
        .map_err(e("/parameters/thicket"))?;
        file.flush().map_err(e("/"))
    }
}

/// A name as a fixed-length ASCII string, cut at [`NAME_BYTES`] (names are checked shorter).
fn ascii(name: &str) -> FixedAscii<NAME_BYTES> {
    let bytes: Vec<u8> = name.bytes().filter(u8::is_ascii).take(NAME_BYTES).collect();
    FixedAscii::from_ascii(&bytes).unwrap_or_default()
}

/// One 1-D dataset with a `unit` attribute.
fn write_column<T: hdf5::H5Type>(
    group: &hdf5::Group,
    name: &str,
    data: &[T],
    unit: &str,
) -> hdf5::Result<()> {
    let ds = group.new_dataset::<T>().shape(data.len()).create(name)?;
    if !data.is_empty() {
        ds.write(data)?;
    }
    thicket_engine::io::trajectory::write_str_attr(&ds, "unit", unit)
}

/// Appends the decimal digits of `n`.
fn push_uint(out: &mut Vec<u8>, mut n: u64) {
    let mut digits = [0u8; 20];
    let mut i = digits.len();
    loop {
        i -= 1;
        digits[i] = b'0' + (n % 10) as u8;
        n /= 10;
        if n == 0 {
            break;
        }
    }
    out.extend_from_slice(&digits[i..]);
}

/// Appends `v` with three decimals, as `{:.3}` would (except that a value
/// rounding to zero prints without a minus sign), without its slow path.
fn push_fixed3(out: &mut Vec<u8>, v: f64) {
    let scaled = (v * 1000.0).round();
    // Beyond exact integers in an f64, and for NaN or infinities, the slow path.
    if !scaled.is_finite() || scaled.abs() >= 9.0e15 {
        let _ = write!(out, "{v:.3}");
        return;
    }
    let mut n = scaled as i64;
    if n < 0 {
        out.push(b'-');
        n = -n;
    }
    push_uint(out, (n / 1000) as u64);
    let f = (n % 1000) as u32;
    out.extend_from_slice(&[
        b'.',
        b'0' + (f / 100) as u8,
        b'0' + (f / 10 % 10) as u8,
        b'0' + (f % 10) as u8,
    ]);
}

/// A track as read from a CSV file: detections sorted by frame.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservedTrack {
    /// Track id from the file.
    pub id: i64,
    /// Frames, strictly increasing (gaps allowed).
    pub frames: Vec<i64>,
    /// Positions, nm (z is 0 in a 2D file).
    pub positions_nm: Vec<[f64; 3]>,
}

/// Tracks read from a CSV file.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackTable {
    /// Source file.
    pub path: PathBuf,
    /// Coordinates per detection, 2 or 3.
    pub dims: usize,
    /// Frame interval from the `time_s` column, s (`None` without it).
    pub frame_interval_s: Option<f64>,
    /// Tracks in order of id.
    pub tracks: Vec<ObservedTrack>,
}

impl TrackTable {
    /// Number of detections.
    pub fn detections(&self) -> usize {
        self.tracks.iter().map(|t| t.frames.len()).sum()
    }
}

/// Reads a tracks CSV in thicket's own layout: a header naming at least
/// `track_id`, `frame`, `x_nm` and `y_nm` (optionally `time_s`, `z_nm`;
/// other columns are ignored), then one detection per row in any order.
/// Other layouts: [`crate::track_import::read_csv_with`].
///
/// # Errors
/// [`TracksError::Io`], and [`TracksError::Csv`] naming the line and column
/// of a missing column, a field that is not a number, a repeated frame in a
/// track, or times inconsistent with one frame interval.
pub fn read_csv(path: &Path) -> Result<TrackTable, TracksError> {
    crate::track_import::read_csv_with(path, &crate::track_import::TrackCsvLayout::thicket())
}

/// Per-track covariance-based estimate (Vestergaard, Blainey & Flyvbjerg 2014).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CovarianceEstimate {
    /// D̂ averaged over the axes, nm²/s.
    pub d_nm2_per_s: f64,
    /// D̂ per axis, nm²/s.
    pub d_axes_nm2_per_s: Vec<f64>,
    /// σ̂² per axis, nm².
    pub sigma2_axes_nm2: Vec<f64>,
    /// Steps between consecutive frames that were used.
    pub steps: usize,
}

/// Covariance-based estimator of D and σ² for one track, per axis:
/// D̂ = ⟨Δx_k²⟩/(2Δt) + ⟨Δx_k Δx_{k+1}⟩/Δt and
/// σ̂² = R⟨Δx_k²⟩ + (2R − 1)⟨Δx_k Δx_{k+1}⟩, with R the blur factor
/// (Vestergaard, Blainey & Flyvbjerg, Phys. Rev. E 89, 022726, 2014;
/// REFERENCES.md). Averages run over the steps between consecutive frames and
/// over the pairs of consecutive steps, so a track with gaps uses what it has.
///
/// Both estimates are unbiased and may be negative for a short or noisy
/// track; average them, do not clip them.
///
/// Returns `None` when the track has no two consecutive steps.
pub fn covariance_estimate(
    frames: &[i64],
    positions_nm: &[[f64; 3]],
    dims: usize,
    frame_interval_s: f64,
    blur_factor: f64,
) -> Option<CovarianceEstimate> {
    let n = frames.len().min(positions_nm.len());
    let dims = dims.min(3);
    let mut sum_sq = [0.0; 3];
    let mut sum_next = [0.0; 3];
    let (mut steps, mut pairs) = (0usize, 0usize);
    let mut previous: Option<[f64; 3]> = None;
    for i in 1..n {
        if frames[i] != frames[i - 1] + 1 {
            previous = None;
            continue;
        }
        let d: [f64; 3] = std::array::from_fn(|k| positions_nm[i][k] - positions_nm[i - 1][k]);
        for k in 0..dims {
            sum_sq[k] += d[k] * d[k];
        }
        steps += 1;
        if let Some(p) = previous {
            for k in 0..dims {
                sum_next[k] += p[k] * d[k];
            }
            pairs += 1;
        }
        previous = Some(d);
    }
    if pairs == 0 {
        return None;
    }
    let (dt, r) = (frame_interval_s, blur_factor);
    let mut d_axes = Vec::with_capacity(dims);
    let mut s2_axes = Vec::with_capacity(dims);
    for k in 0..dims {
        let sq = sum_sq[k] / steps as f64;
        let next = sum_next[k] / pairs as f64;
        d_axes.push(sq / (2.0 * dt) + next / dt);
        s2_axes.push(r * sq + (2.0 * r - 1.0) * next);
    }
    Some(CovarianceEstimate {
        d_nm2_per_s: mean(&d_axes),
        d_axes_nm2_per_s: d_axes,
        sigma2_axes_nm2: s2_axes,
        steps,
    })
}

/// Per-track MSD-fit estimate with the number of lags chosen per axis.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MsdFitEstimate {
    /// D̂ averaged over the axes, nm²/s.
    pub d_nm2_per_s: f64,
    /// D̂ per axis, nm²/s.
    pub d_axes_nm2_per_s: Vec<f64>,
    /// Fitted intercept a = 2σ² − 4RDΔt per axis, nm².
    pub offset_axes_nm2: Vec<f64>,
    /// σ̂² = (a + 2R b)/2 per axis, nm², b the fitted slope per frame.
    pub sigma2_axes_nm2: Vec<f64>,
    /// Lags fitted per axis (1 … p).
    pub lags_axes: Vec<usize>,
}

/// Fits MSD(n) = a + b n over lags n = 1 … p of one track, per axis, and
/// returns D̂ = b/(2Δt) and σ̂² = (a + 2R b)/2.
///
/// The number of lags p is the one that minimises the variance of b̂ for the
/// track's own length and fitted (a, b), found by iterating from p = 2 until
/// p repeats, as Michalet (Phys. Rev. E 82, 041914, 2010) proposed. The
/// variance comes from the exact covariance of time-averaged MSD points of
/// a stationary Gaussian process whose steps are correlated only with their
/// neighbours (γ0 = a + b, γ1 = −a/2, what blur and localisation error
/// give): Cov(ρ̂_n, ρ̂_m) = 2/((N−n)(N−m)) Σ_ij Cov(d_i^n, d_j^m)²
/// (Isserlis; Qian, Sheetz & Elson 1991, from memory).
///
/// Returns `None` when the track lacks lags 1 and 2.
pub fn msd_fit_estimate(
    frames: &[i64],
    positions_nm: &[[f64; 3]],
    dims: usize,
    frame_interval_s: f64,
    blur_factor: f64,
) -> Option<MsdFitEstimate> {
    let n = frames.len().min(positions_nm.len());
    let dims = dims.min(3);
    if n < 3 {
        return None;
    }
    let span = (frames[n - 1] - frames[0]) as usize;
    let p_cap = MAX_FIT_LAGS.min(span).min(n - 1);
    // Time-averaged MSD over all pairs at each lag (pairs found by frame difference).
    let mut sums: [Vec<f64>; 3] = std::array::from_fn(|_| vec![0.0; p_cap + 1]);
    let mut counts = vec![0usize; p_cap + 1];
    for i in 0..n {
        for j in i + 1..n {
            let lag = (frames[j] - frames[i]) as usize;
            if lag > p_cap {
                break;
            }
            for (k, axis) in sums.iter_mut().enumerate().take(dims) {
                let d = positions_nm[j][k] - positions_nm[i][k];
                axis[lag] += d * d;
            }
            counts[lag] += 1;
        }
    }
    if p_cap < 2 || counts[1] == 0 || counts[2] == 0 {
        return None;
    }
    let terms = MsdCovariance::new(n, p_cap);
    let mut d_axes = Vec::with_capacity(dims);
    let mut a_axes = Vec::with_capacity(dims);
    let mut s2_axes = Vec::with_capacity(dims);
    let mut p_axes = Vec::with_capacity(dims);
    for axis in sums.iter().take(dims) {
        let rho: Vec<Option<f64>> = (0..=p_cap)
            .map(|l| (l > 0 && counts[l] > 0).then(|| axis[l] / counts[l] as f64))
            .collect();
        let mut p = 2;
        let mut fit = line_fit(&rho, p)?;
        for _ in 0..10 {
            let best = terms.best_lags(fit.0, fit.1);
            if best == p {
                break;
            }
            p = best;
            fit = line_fit(&rho, p)?;
        }
        let (a, b) = fit;
        d_axes.push(b / (2.0 * frame_interval_s));
        a_axes.push(a);
        s2_axes.push(0.5 * (a + 2.0 * blur_factor * b));
        p_axes.push(p);
    }
    Some(MsdFitEstimate {
        d_nm2_per_s: mean(&d_axes),
        d_axes_nm2_per_s: d_axes,
        offset_axes_nm2: a_axes,
        sigma2_axes_nm2: s2_axes,
        lags_axes: p_axes,
    })
}

/// Variance of the least-squares slope b̂ of MSD(n) = a + b n fitted over
/// lags 1 … `lags` of one axis of a gap-free track of `positions` positions,
/// when the true MSD is a + b n for n ≥ 1 (Brownian motion with blur and
/// localisation error): the quantity [`msd_fit_estimate`] minimises.
/// See [`msd_fit_estimate`] for its source. NaN for fewer than 2 lags or
/// more lags than the track has.
pub fn msd_slope_variance(positions: usize, lags: usize, a: f64, b: f64) -> f64 {
    if lags < 2 || lags >= positions {
        return f64::NAN;
    }
    MsdCovariance::new(positions, lags).slope_variances(a, b)[lags]
}

/// Least-squares line a + b n through the MSD values present at lags 1 … p.
fn line_fit(rho: &[Option<f64>], p: usize) -> Option<(f64, f64)> {
    let pts: Vec<(f64, f64)> = (1..=p.min(rho.len() - 1))
        .filter_map(|l| rho[l].map(|v| (l as f64, v)))
        .collect();
    if pts.len() < 2 {
        return None;
    }
    let (mx, my) = (
        mean(&pts.iter().map(|p| p.0).collect::<Vec<_>>()),
        mean(&pts.iter().map(|p| p.1).collect::<Vec<_>>()),
    );
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let b = sxy / sxx;
    Some((my - b * mx, b))
}

/// The covariance of time-averaged MSD points ρ̂_1 … ρ̂_P of a track of N
/// positions whose steps have autocovariance γ0 at lag 0, γ1 at lag 1 and 0
/// beyond, split as C = γ0² S1 + 2 γ0 γ1 S2 + γ1² S3 so that the three
/// matrices depend on N and P only.
struct MsdCovariance {
    lags: usize,
    s: [Vec<f64>; 3],
}

impl MsdCovariance {
    fn new(positions: usize, lags: usize) -> Self {
        let big_n = positions as i64;
        let overlap = |a0: i64, a1: i64, b0: i64, b1: i64| (a1.min(b1) - a0.max(b0)).max(0) as f64;
        let mut s: [Vec<f64>; 3] = std::array::from_fn(|_| vec![0.0; lags * lags]);
        for n in 1..=lags as i64 {
            for m in n..=lags as i64 {
                let (ni, nj) = (big_n - n, big_n - m);
                if ni <= 0 || nj <= 0 {
                    continue;
                }
                let mut acc = [0.0; 3];
                // d_i^n spans steps [i, i+n), d_j^m spans [j, j+m); o = j − i.
                for o in -m..=n {
                    let count = ((ni - 1).min(nj - 1 - o) - 0i64.max(-o) + 1).max(0) as f64;
                    if count == 0.0 {
                        continue;
                    }
                    let same = overlap(0, n, o, o + m);
                    let adjacent =
                        overlap(0, n, o - 1, o + m - 1) + overlap(0, n, o + 1, o + m + 1);
                    acc[0] += count * same * same;
                    acc[1] += count * same * adjacent;
                    acc[2] += count * adjacent * adjacent;
                }
                let scale = 2.0 / (ni as f64 * nj as f64);
                let (i, j) = ((n - 1) as usize, (m - 1) as usize);
                for t in 0..3 {
                    s[t][i * lags + j] = scale * acc[t];
                    s[t][j * lags + i] = scale * acc[t];
                }
            }
        }
        Self { lags, s }
    }

    /// The p in 2 … P with the smallest variance of the least-squares slope.
    fn best_lags(&self, a: f64, b: f64) -> usize {
        let v = self.slope_variances(a, b);
        (2..=self.lags).fold(2, |best, p| if v[p] < v[best] { p } else { best })
    }

    /// Variance of the least-squares slope over lags 1 … p, for p = 0 … P
    /// (NaN below 2), for the model fitted as (a, b).
    fn slope_variances(&self, a: f64, b: f64) -> Vec<f64> {
        // A valid model needs b > 0 and γ0 ≥ 2|γ1| (non-negative step spectrum).
        let b = b.max(1e-9 * (a.abs() + b.abs()) + f64::MIN_POSITIVE);
        let a = a.max(-0.5 * b);
        let (g0, g1) = (a + b, -0.5 * a);
        let (c0, c1, c2) = (g0 * g0, 2.0 * g0 * g1, g1 * g1);
        let cov = |i: usize, j: usize| {
            let k = i * self.lags + j;
            c0 * self.s[0][k] + c1 * self.s[1][k] + c2 * self.s[2][k]
        };
        // Var(b̂_p) = Σ_ij w_i w_j C_ij with w_i = (l_i − l̄)/Sxx, expanded into
        // sums of C, l·C and l·l·C over the leading p × p block, grown one lag at a time.
        let (mut t0, mut t1, mut t2) = (0.0, 0.0, 0.0);
        let mut out = vec![f64::NAN; self.lags + 1];
        for q in 0..self.lags {
            let lq = (q + 1) as f64;
            for j in 0..q {
                let (lj, c) = ((j + 1) as f64, cov(q, j));
                t0 += 2.0 * c;
                t1 += (lq + lj) * c;
                t2 += 2.0 * lq * lj * c;
            }
            let c = cov(q, q);
            t0 += c;
            t1 += lq * c;
            t2 += lq * lq * c;
            let p = q + 1;
            if p >= 2 {
                let mx = (p as f64 + 1.0) / 2.0;
                let sxx = p as f64 * (p as f64 * p as f64 - 1.0) / 12.0;
                out[p] = (t2 - 2.0 * mx * t1 + mx * mx * t0) / (sxx * sxx);
            }
        }
        out
    }
}

fn mean(v: &[f64]) -> f64 {
    if v.is_empty() {
        f64::NAN
    } else {
        v.iter().sum::<f64>() / v.len() as f64
    }
}

/// Ground truth of one track from a tracks HDF5 file.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackTruth {
    /// Particle index in the scenario.
    pub particle: i64,
    /// Species name.
    pub species: String,
    /// True free diffusivity, m²/s.
    pub d0_m2_per_s: f64,
    /// Region label.
    pub region: String,
}

/// The truth and camera settings stored beside a tracks CSV.
#[derive(Debug, Clone, PartialEq)]
pub struct Truth {
    /// The HDF5 file.
    pub path: PathBuf,
    /// Frame interval, s.
    pub frame_interval_s: f64,
    /// Blur factor R of the camera.
    pub blur_factor: f64,
    /// Lateral localisation error, nm.
    pub sigma_nm: f64,
    /// Axial localisation error, nm (3D only).
    pub sigma_z_nm: Option<f64>,
    /// Reported coordinates.
    pub dims: usize,
    /// Truth by track id.
    pub tracks: BTreeMap<i64, TrackTruth>,
}

/// The tracks HDF5 file that `thicket tracks` writes beside `csv`
/// (same name, extension `.h5`).
pub fn truth_path_for(csv: &Path) -> PathBuf {
    csv.with_extension("h5")
}

/// Reads the truth and camera settings of a tracks HDF5 file.
///
/// # Errors
/// [`TracksError::Hdf5`] for unreadable objects, [`TracksError::Truth`]
/// for columns of different lengths.
pub fn read_truth(path: &Path) -> Result<Truth, TracksError> {
    let file = hdf5::File::open(path).map_err(h5_err(path, "/"))?;
    let cam = file.group("camera").map_err(h5_err(path, "/camera"))?;
    let f64_attr = |name: &str| cam.attr(name).and_then(|a| a.read_scalar::<f64>());
    let frame_interval_s =
        f64_attr("frame_interval_s").map_err(h5_err(path, "/camera frame_interval_s"))?;
    let blur_factor = f64_attr("blur_factor").map_err(h5_err(path, "/camera blur_factor"))?;
    let sigma_nm =
        f64_attr("localisation_sigma_nm").map_err(h5_err(path, "/camera localisation_sigma_nm"))?;
    let sigma_z_nm = f64_attr("localisation_sigma_z_nm").ok();
    let dims = cam
        .attr("dims")
        .and_then(|a| a.read_scalar::<i64>())
        .map_err(h5_err(path, "/camera dims"))? as usize;
    let ints = |name: &'static str| {
        file.dataset(name)
            .and_then(|d| d.read_raw::<i64>())
            .map_err(h5_err(path, name))
    };
    let strings = |name: &'static str| {
        file.dataset(name)
            .and_then(|d| d.read_raw::<FixedAscii<NAME_BYTES>>())
            .map(|v| v.iter().map(|s| s.as_str().to_string()).collect::<Vec<_>>())
            .map_err(h5_err(path, name))
    };
    let ids = ints("/tracks/track_id")?;
    let particles = ints("/tracks/particle")?;
    let d0 = file
        .dataset("/tracks/d0_m2_per_s")
        .and_then(|d| d.read_raw::<f64>())
        .map_err(h5_err(path, "/tracks/d0_m2_per_s"))?;
    let species = strings("/tracks/species")?;
    let regions = strings("/tracks/region")?;
    let n = ids.len();
    if [particles.len(), d0.len(), species.len(), regions.len()]
        .iter()
        .any(|&l| l != n)
    {
        return Err(TracksError::Truth {
            file: path.to_path_buf(),
            what: "the /tracks columns differ in length".into(),
            allowed: "one entry per track in every /tracks column".into(),
        });
    }
    let tracks = (0..n)
        .map(|i| {
            (
                ids[i],
                TrackTruth {
                    particle: particles[i],
                    species: species[i].clone(),
                    d0_m2_per_s: d0[i],
                    region: regions[i].clone(),
                },
            )
        })
        .collect();
    Ok(Truth {
        path: path.to_path_buf(),
        frame_interval_s,
        blur_factor,
        sigma_nm,
        sigma_z_nm,
        dims,
        tracks,
    })
}

/// Options of [`analyze_track_table`].
#[derive(Debug, Clone, PartialEq)]
pub struct TrackAnalysisOptions {
    /// Shortest track analysed, in detections. By default, [`DEFAULT_MIN_TRACK_FRAMES`].
    pub min_track_frames: usize,
    /// Blur factor R to use; by default from `exposure_s`, else the truth
    /// file's, else 1/6 (exposure equal to the frame interval).
    pub blur_factor: Option<f64>,
    /// Exposure time t_E per frame, s (0 ≤ t_E ≤ Δt): R = t_E/(6Δt)
    /// (Berglund 2010), unless `blur_factor` is given.
    pub exposure_s: Option<f64>,
}

impl Default for TrackAnalysisOptions {
    fn default() -> Self {
        Self {
            min_track_frames: DEFAULT_MIN_TRACK_FRAMES,
            blur_factor: None,
            exposure_s: None,
        }
    }
}

/// Mean, spread and bias of one per-track estimate over a group of tracks.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct EstimateStats {
    /// Tracks with an estimate.
    pub tracks: usize,
    /// Mean over tracks.
    pub mean: f64,
    /// Standard deviation over tracks (the spread a user sees).
    pub sd: f64,
    /// Standard error of the mean, sd/√tracks.
    pub se: f64,
    /// Median over tracks.
    pub median: f64,
    /// Lower quartile over tracks.
    pub q25: f64,
    /// Upper quartile over tracks.
    pub q75: f64,
    /// The true value, when known.
    pub truth: Option<f64>,
    /// Relative bias, mean/truth − 1.
    pub bias: Option<f64>,
    /// Standard error of the relative bias, se/truth.
    pub bias_se: Option<f64>,
}

impl EstimateStats {
    fn of(values: &[f64], truth: Option<f64>) -> Self {
        let n = values.len();
        let m = mean(values);
        let sd = if n > 1 {
            (values.iter().map(|v| (v - m).powi(2)).sum::<f64>() / (n - 1) as f64).sqrt()
        } else {
            f64::NAN
        };
        let se = sd / (n as f64).sqrt();
        let mut sorted = values.to_vec();
        sorted.sort_by(f64::total_cmp);
        // Linear interpolation between order statistics (common practice; numpy's default).
        let quantile = |q: f64| {
            if n == 0 {
                return f64::NAN;
            }
            let h = q * (n - 1) as f64;
            let (i, f) = (h.floor() as usize, h.fract());
            sorted[i] + f * (sorted[(i + 1).min(n - 1)] - sorted[i])
        };
        let median = quantile(0.5);
        let known = truth.filter(|t| *t != 0.0);
        Self {
            tracks: n,
            mean: m,
            sd,
            se,
            median,
            q25: quantile(0.25),
            q75: quantile(0.75),
            truth,
            bias: known.map(|t| m / t - 1.0),
            bias_se: known.map(|t| se / t.abs()),
        }
    }
}

/// Estimates of one group of tracks (one species in one region).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GroupReport {
    /// Species ("all" without a truth file).
    pub species: String,
    /// Region ("unknown" without a truth file).
    pub region: String,
    /// Tracks analysed.
    pub tracks: usize,
    /// Detections in them.
    pub detections: usize,
    /// Mean track length, detections.
    pub mean_track_frames: f64,
    /// Covariance estimator: D, m²/s.
    pub covariance_d_m2_per_s: EstimateStats,
    /// Covariance estimator: lateral σ² (x, y), nm².
    pub covariance_sigma2_nm2: EstimateStats,
    /// Covariance estimator: axial σ², nm² (3D only).
    pub covariance_sigma2_z_nm2: Option<EstimateStats>,
    /// MSD fit: D, m²/s.
    pub msd_fit_d_m2_per_s: EstimateStats,
    /// MSD fit: lateral σ², nm².
    pub msd_fit_sigma2_nm2: EstimateStats,
    /// MSD fit: median number of lags fitted.
    pub msd_fit_median_lags: f64,
}

/// The report of `thicket analyze tracks.csv`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TracksReport {
    /// The CSV file.
    pub file: String,
    /// The truth file, if found.
    pub truth_file: Option<String>,
    /// Frame interval used, s.
    pub frame_interval_s: f64,
    /// Blur factor R used.
    pub blur_factor: f64,
    /// Where R came from.
    pub blur_factor_source: String,
    /// Coordinates per detection.
    pub dims: usize,
    /// Tracks in the file.
    pub tracks_in_file: usize,
    /// Tracks long enough to analyse.
    pub tracks_analysed: usize,
    /// Detections in the file.
    pub detections: usize,
    /// Shortest track analysed.
    pub min_track_frames: usize,
    /// Exposure time given, s (R = t_E/(6Δt)).
    pub exposure_s: Option<f64>,
    /// One entry per species and region.
    pub groups: Vec<GroupReport>,
    /// Estimates of every track of the file, in order of id (left out of
    /// the JSON report; see [`crate::track_outputs::write_track_table`]).
    #[serde(skip)]
    pub per_track: Vec<TrackEstimate>,
}

/// The estimates of one track of a file.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackEstimate {
    /// Track id.
    pub id: i64,
    /// Detections.
    pub positions: usize,
    /// Long enough to enter the report's groups.
    pub analysed: bool,
    /// Species from the truth file.
    pub species: Option<String>,
    /// True D0 from the truth file, m²/s.
    pub d0_m2_per_s: Option<f64>,
    /// Covariance estimate, when the track has two consecutive steps.
    pub covariance: Option<CovarianceEstimate>,
    /// MSD-fit estimate, when the track has lags 1 and 2.
    pub msd_fit: Option<MsdFitEstimate>,
}

/// Per-track estimates of a table of tracks, grouped by species and region
/// when the truth is known, with bias (mean/truth − 1) and spread.
///
/// # Errors
/// [`TracksError::Csv`] when no frame interval is known (no `time_s` column
/// and no truth), [`TracksError::Truth`] when the truth does not match the
/// table (a track id it lacks, other coordinates or frame interval).
pub fn analyze_track_table(
    table: &TrackTable,
    truth: Option<&Truth>,
    options: &TrackAnalysisOptions,
) -> Result<TracksReport, TracksError> {
    let mismatch = |what: String, allowed: &str| TracksError::Truth {
        file: truth.map_or_else(|| table.path.clone(), |t| t.path.clone()),
        what,
        allowed: allowed.to_string(),
    };
    let frame_interval_s = match (truth, table.frame_interval_s) {
        (Some(t), Some(dt)) if (t.frame_interval_s - dt).abs() > 1e-6 * dt => {
            return Err(mismatch(
                format!("frame interval {:e} s where the CSV's time_s column gives {dt:e} s", t.frame_interval_s),
                "the tracks HDF5 file written together with this CSV",
            ))
        }
        (Some(t), _) => t.frame_interval_s,
        (None, Some(dt)) => dt,
        (None, None) => {
            return Err(TracksError::Csv {
                file: table.path.clone(),
                line: 1,
                column: "header".into(),
                value: "no time column".into(),
                allowed: "a time column, --frame-interval S, or the tracks .h5 file beside the CSV, so the frame interval is known, and tracks spanning at least two frames".into(),
            })
        }
    };
    if let Some(t) = truth.filter(|t| t.dims != table.dims) {
        return Err(mismatch(
            format!(
                "{} coordinates per detection where the CSV has {}",
                t.dims, table.dims
            ),
            "the tracks HDF5 file written together with this CSV",
        ));
    }
    if let Some(te) = options.exposure_s {
        if !(te.is_finite() && te >= 0.0 && te <= frame_interval_s * (1.0 + 1e-9)) {
            return Err(TracksError::Option {
                file: table.path.clone(),
                option: "--exposure".into(),
                value: format!("{te:e}"),
                allowed: format!("an exposure time in seconds from 0 to the frame interval, {frame_interval_s:e} s"),
            });
        }
    }
    let (blur_factor, blur_factor_source) = match (options.blur_factor, options.exposure_s, truth) {
        (Some(r), _, _) => (r, "given".to_string()),
        (None, Some(te), _) => (
            te / (6.0 * frame_interval_s),
            format!("exposure {te:e} s given: R = t_E/(6Δt)"),
        ),
        (None, None, Some(t)) => (
            t.blur_factor,
            format!("camera settings in {}", t.path.display()),
        ),
        (None, None, None) => (
            1.0 / 6.0,
            "assumed: exposure equal to the frame interval (R = 1/6); no truth file and no --exposure".to_string(),
        ),
    };

    #[derive(Default)]
    struct Acc {
        d0: Option<f64>,
        detections: usize,
        cve_d: Vec<f64>,
        cve_s2: Vec<f64>,
        cve_s2z: Vec<f64>,
        msd_d: Vec<f64>,
        msd_s2: Vec<f64>,
        lags: Vec<f64>,
        tracks: usize,
    }
    let mut groups: BTreeMap<(String, String), Acc> = BTreeMap::new();
    let lateral = table.dims.min(2);
    let mut per_track = Vec::with_capacity(table.tracks.len());
    for t in &table.tracks {
        let analysed = t.frames.len() >= options.min_track_frames.max(3);
        let row = truth.and_then(|tr| tr.tracks.get(&t.id));
        if analysed && truth.is_some() && row.is_none() {
            return Err(mismatch(
                format!("no truth for track {}", t.id),
                "a truth file with every track id of the CSV",
            ));
        }
        let covariance = covariance_estimate(
            &t.frames,
            &t.positions_nm,
            table.dims,
            frame_interval_s,
            blur_factor,
        );
        let msd_fit = msd_fit_estimate(
            &t.frames,
            &t.positions_nm,
            table.dims,
            frame_interval_s,
            blur_factor,
        );
        if analysed {
            let key = row.map_or_else(
                || ("all".to_string(), "unknown".to_string()),
                |r| (r.species.clone(), r.region.clone()),
            );
            let acc = groups.entry(key).or_default();
            acc.d0 = row.map(|r| r.d0_m2_per_s);
            acc.tracks += 1;
            acc.detections += t.frames.len();
            if let Some(c) = &covariance {
                acc.cve_d.push(c.d_nm2_per_s * 1e-18);
                acc.cve_s2.push(mean(&c.sigma2_axes_nm2[..lateral]));
                if table.dims == 3 {
                    acc.cve_s2z.push(c.sigma2_axes_nm2[2]);
                }
            }
            if let Some(m) = &msd_fit {
                acc.msd_d.push(m.d_nm2_per_s * 1e-18);
                acc.msd_s2.push(mean(&m.sigma2_axes_nm2[..lateral]));
                acc.lags.extend(m.lags_axes.iter().map(|&p| p as f64));
            }
        }
        per_track.push(TrackEstimate {
            id: t.id,
            positions: t.frames.len(),
            analysed,
            species: row.map(|r| r.species.clone()),
            d0_m2_per_s: row.map(|r| r.d0_m2_per_s),
            covariance,
            msd_fit,
        });
    }
    let sigma2 = truth.map(|t| t.sigma_nm * t.sigma_nm);
    let sigma2_z = truth.and_then(|t| t.sigma_z_nm).map(|s| s * s);
    let groups: Vec<GroupReport> = groups
        .into_iter()
        .map(|((species, region), a)| GroupReport {
            species,
            region,
            tracks: a.tracks,
            detections: a.detections,
            mean_track_frames: a.detections as f64 / a.tracks.max(1) as f64,
            covariance_d_m2_per_s: EstimateStats::of(&a.cve_d, a.d0),
            covariance_sigma2_nm2: EstimateStats::of(&a.cve_s2, sigma2),
            covariance_sigma2_z_nm2: (table.dims == 3)
                .then(|| EstimateStats::of(&a.cve_s2z, sigma2_z)),
            msd_fit_d_m2_per_s: EstimateStats::of(&a.msd_d, a.d0),
            msd_fit_sigma2_nm2: EstimateStats::of(&a.msd_s2, sigma2),
            msd_fit_median_lags: EstimateStats::of(&a.lags, None).median,
        })
        .collect();
    Ok(TracksReport {
        file: table.path.display().to_string(),
        truth_file: truth.map(|t| t.path.display().to_string()),
        frame_interval_s,
        blur_factor,
        blur_factor_source,
        dims: table.dims,
        tracks_in_file: table.tracks.len(),
        tracks_analysed: groups.iter().map(|g| g.tracks).sum(),
        detections: table.detections(),
        min_track_frames: options.min_track_frames,
        exposure_s: options.exposure_s,
        groups,
        per_track,
    })
}

/// µm²/s in one m²/s.
const UM2_PER_S_IN_M2_PER_S: f64 = 1e12;

/// A number with four significant digits, fixed-point for 1e-3…1e5.
fn sig4(v: f64) -> String {
    if !v.is_finite() {
        return "—".into();
    }
    let mag = if v == 0.0 {
        0
    } else {
        v.abs().log10().floor() as i32
    };
    if (-3..5).contains(&mag) {
        format!("{v:.*}", (3 - mag).max(0) as usize)
    } else {
        format!("{v:.3e}")
    }
}

impl TracksReport {
    /// The report as a readable table (D in µm²/s; the JSON keeps m²/s).
    pub fn to_text(&self) -> String {
        let mut out = String::new();
        let _ = writeln!(
            out,
            "tracks {}: {} tracks, {} detections, {}D",
            self.file, self.tracks_in_file, self.detections, self.dims
        );
        let _ = writeln!(
            out,
            "  frame interval {:e} s, blur factor R = {:.4} ({}); {} tracks of ≥ {} detections analysed",
            self.frame_interval_s, self.blur_factor, self.blur_factor_source, self.tracks_analysed, self.min_track_frames
        );
        let with_truth = self.truth_file.is_some();
        if let Some(t) = &self.truth_file {
            let _ = writeln!(out, "  truth from {t}; bias = mean over tracks / truth − 1 (± its standard error); spread = sd over tracks / truth");
        } else {
            let _ = writeln!(out, "  no truth file beside the CSV: the distribution of the per-track estimates over tracks (mean, sd, quartiles)");
        }
        let pct = |v: Option<f64>| v.map_or("—".to_string(), |v| format!("{:+.1} %", 100.0 * v));
        for g in &self.groups {
            let _ = writeln!(
                out,
                "\n  species {} in region {}: {} tracks, mean length {:.1} frames",
                g.species, g.region, g.tracks, g.mean_track_frames
            );
            if with_truth {
                let _ = writeln!(
                    out,
                    "    {:<26} {:>12} {:>12} {:>16} {:>10}",
                    "estimate", "mean", "truth", "bias", "spread"
                );
            } else {
                let _ = writeln!(
                    out,
                    "    {:<26} {:>12} {:>12} {:>12} {:>24}",
                    "estimate", "mean", "sd", "median", "quartiles"
                );
            }
            // (label, statistics, factor from the stored unit to the printed one)
            let rows: [(&str, &EstimateStats, f64); 4] = [
                (
                    "D, covariance (µm²/s)",
                    &g.covariance_d_m2_per_s,
                    UM2_PER_S_IN_M2_PER_S,
                ),
                (
                    "D, MSD fit (µm²/s)",
                    &g.msd_fit_d_m2_per_s,
                    UM2_PER_S_IN_M2_PER_S,
                ),
                ("σ², covariance (nm²)", &g.covariance_sigma2_nm2, 1.0),
                ("σ², MSD fit (nm²)", &g.msd_fit_sigma2_nm2, 1.0),
            ];
            for (name, st, k) in rows {
                let fmt = |v: f64| sig4(k * v);
                if with_truth {
                    let bias = match (st.bias, st.bias_se) {
                        (Some(b), Some(se)) => format!("{} ± {:.1}", pct(Some(b)), 100.0 * se),
                        _ => "—".into(),
                    };
                    let spread = st.truth.filter(|t| *t != 0.0).map_or_else(
                        || fmt(st.sd),
                        |t| format!("{:.1} %", 100.0 * st.sd / t.abs()),
                    );
                    let _ = writeln!(
                        out,
                        "    {:<26} {:>12} {:>12} {:>16} {:>10}",
                        name,
                        fmt(st.mean),
                        st.truth.map_or("—".into(), fmt),
                        bias,
                        spread
                    );
                } else {
                    let _ = writeln!(
                        out,
                        "    {:<26} {:>12} {:>12} {:>12} {:>24}",
                        name,
                        fmt(st.mean),
                        fmt(st.sd),
                        fmt(st.median),
                        format!("{} … {}", fmt(st.q25), fmt(st.q75))
                    );
                }
            }
            if let Some(z) = &g.covariance_sigma2_z_nm2 {
                let _ = writeln!(
                    out,
                    "    {:<26} {:>12.1} {:>12} {:>16}",
                    "σ²_z, covariance (nm²)",
                    z.mean,
                    z.truth.map_or("—".into(), |t| format!("{t:.1}")),
                    pct(z.bias)
                );
            }
            let root = |v: f64| {
                if v >= 0.0 {
                    format!("{:.1} nm", v.sqrt())
                } else {
                    "— (mean σ² < 0)".into()
                }
            };
            let _ = writeln!(
                out,
                "    σ = √(mean σ²): covariance {}, MSD fit {}",
                root(g.covariance_sigma2_nm2.mean),
                root(g.msd_fit_sigma2_nm2.mean)
            );
            let _ = writeln!(
                out,
                "    MSD fit used a median of {} lags",
                g.msd_fit_median_lags
            );
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // The fast formatter must print what `{:.3}` prints.
    #[test]
    fn fixed3_matches_the_standard_formatter() {
        let mut x = 0.123_456_789f64;
        for i in 0..20_000 {
            x = (x * 7919.0 + 0.1).fract()
                * 10f64.powi(i % 9 - 2)
                * if i % 3 == 0 { -1.0 } else { 1.0 };
            let mut buf = Vec::new();
            push_fixed3(&mut buf, x);
            let want = format!("{x:.3}");
            let want = if want == "-0.000" {
                "0.000".to_string()
            } else {
                want
            };
            assert_eq!(String::from_utf8(buf).unwrap(), want, "{x:e}");
        }
        let mut buf = Vec::new();
        push_uint(&mut buf, 0);
        push_uint(&mut buf, 1_234_567_890);
        assert_eq!(buf, b"01234567890");
    }
}
