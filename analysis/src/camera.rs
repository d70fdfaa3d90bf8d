//! Synthetic single-particle tracks: a camera model applied to a trajectory
//! recorded at a sub-frame interval (the `[camera]` section of a scenario).
//!
//! What one frame `f` of the camera sees, in the order it is decided:
//!
//! 1. **Exposure and motion blur.** The exposure starts at the frame start
//!    `f·Δt` and lasts `t_E`. The detected position is the average of the
//!    `m = t_E/δ` recorded positions at `f·Δt + j·δ`, `j = 0 … m−1` (δ the
//!    recording interval), i.e. the average position over the exposure as a
//!    left Riemann sum. Averaging `m` equally spaced Brownian positions blurs
//!    like a continuous exposure of `t_E (1 − 1/m²)` (see [`effective_exposure_s`]),
//!    so the camera reports that blur factor, and ten samples per exposure
//!    come within 1 % of the continuous blur.
//! 2. **Emitter.** A fluorophore bleaches at an exponentially distributed time
//!    (mean `bleach_lifetime_s`) and, if blinking is on, switches between
//!    emitting and dark as a two-state Markov process; a frame sees it if it
//!    is emitting at the middle of the exposure.
//! 3. **Field of view and focus.** Periodic coordinates of the blurred
//!    position are folded into the box; the particle is detected if the
//!    folded x, y lie inside the field of view and, when a focal depth z_f is
//!    set, its z lies within ± z_f of the focal plane.
//! 4. **Localisation error.** Independent Gaussian noise of σ per axis (fixed,
//!    or photon-limited by [`photon_limited_sigma_nm`]) is added.
//! 5. **Tracks.** A track is a run of detections of one particle in
//!    consecutive frames. A missed frame (out of focus, out of view, dark) or
//!    a crossing of a periodic face (the image of another place of the
//!    sample) ends it; the next detection starts a track with a new id.
//!
//! Only species listed in `camera.labelled_species` (default: all) are seen.
//! Every detection carries its ground-truth region (from the scenario's
//! `[geometry]`, see `tracks` for the names), and every track the region of
//! most of its detections.
//!
//! The camera draws from its own per-particle streams, keyed by the scenario
//! seed and the particle index, so the result does not depend on how the
//! trajectory is read or on the number of threads.
//!
//! The trajectory is read directly with the `hdf5` crate in frame windows of
//! all particles of a species (the layout `thicket run` writes), so memory
//! stays bounded by [`WINDOW_BUDGET_BYTES`] plus the detections themselves.

use crate::tracks::{CameraSummary, SpeciesTruth, Track, TrackSet, TracksError};
use hdf5::File;
use ndarray::{s, Array3, ArrayView3, Ix3};
use std::path::Path;
use thicket_engine::base::rng::{standard_normal, ParticleRng};
use thicket_engine::scenario::config::{
    Blinking, CameraSpec, LocalisationNoise, Projection, RawScenario, Scenario,
};
use thicket_engine::space::shape::Shape;
use thicket_engine::space::sim_box::SimBox;

/// Memory for one window of recorded positions (plus image counts) read from
/// the trajectory: large enough that HDF5 calls are few, small enough for a laptop.
pub const WINDOW_BUDGET_BYTES: usize = 64 << 20;

/// Mixed into the scenario seed for the camera's streams, so the camera noise
/// is independent of the particle motion drawn from the same seed.
const CAMERA_STREAM_SALT: u64 = 0x6361_6D65_7261_0006;

/// Localisation error per axis, nm, of a photon-limited detection:
/// σ² = (s² + a²/12)/N + 8π s⁴ b² / (a² N²),
/// with s the PSF standard deviation, a the pixel size, N the photons
/// collected and b² the background variance per pixel, here the background
/// photon count per pixel (shot noise).
///
/// Source: Thompson, Larson & Webb, Biophys. J. 82, 2775 (2002), eq. 17
/// (from memory). It is the classic least-squares estimate; maximum
/// likelihood does somewhat better, and an EMCCD's excess noise doubles the
/// variance (Mortensen et al., Nat. Methods 7, 377, 2010).
pub fn photon_limited_sigma_nm(
    photons: f64,
    psf_sigma_nm: f64,
    pixel_size_nm: f64,
    background_photons_per_pixel: f64,
) -> f64 {
    let s2 = psf_sigma_nm * psf_sigma_nm;
    let a2 = pixel_size_nm * pixel_size_nm;
    let n = photons;
    ((s2 + a2 / 12.0) / n
        + 8.0 * std::f64::consts::PI * s2 * s2 * background_photons_per_pixel / (a2 * n * n))
        .sqrt()
}

/// The exposure a continuous camera would need to blur like the average of
/// `m` recorded positions δ apart: `δ (m² − 1)/m = t_E (1 − 1/m²)`.
///
/// Derivation: for Brownian motion, the mean squared difference of two frame
/// averages is 2D times (the time between frames − the mean |t_i − t_j|
/// within one frame), and the mean of |i − j| over m equally spaced points is
/// (m² − 1)/(3m); a continuous exposure gives t_E/3 (Berglund 2010).
pub fn effective_exposure_s(spec: &CameraSpec) -> f64 {
    let m = spec.samples_per_exposure as f64;
    spec.recording_interval_s * (m * m - 1.0) / m
}

/// Motion-blur factor R = t_E,eff / (6 Δt) of the camera, with the effective
/// exposure of [`effective_exposure_s`]; per axis
/// MSD(nΔt) = 2D nΔt + 2σ² − 4RDΔt (Berglund, Phys. Rev. E 82, 011917, 2010).
pub fn blur_factor(spec: &CameraSpec) -> f64 {
    effective_exposure_s(spec) / (6.0 * spec.frame_interval_s)
}

/// Lateral localisation error per axis, nm, of every detection.
pub fn lateral_sigma_nm(spec: &CameraSpec) -> f64 {
    match spec.noise {
        LocalisationNoise::Fixed { sigma_nm } => sigma_nm,
        LocalisationNoise::PhotonLimited {
            photons_per_detection,
            psf_sigma_nm,
            pixel_size_nm,
            background_photons_per_pixel,
        } => photon_limited_sigma_nm(
            photons_per_detection,
            psf_sigma_nm,
            pixel_size_nm,
            background_photons_per_pixel,
        ),
    }
}

/// Axial localisation error, nm: `localisation_sigma_z_nm`, else the lateral one.
pub fn axial_sigma_nm(spec: &CameraSpec) -> f64 {
    spec.sigma_z_nm.unwrap_or_else(|| lateral_sigma_nm(spec))
}

/// What kind of space the particles of a scene without a `[geometry]`
/// explore, from the box walls: "free" (all axes periodic), "slit" (one
/// walled axis), "channel" (two), "closed_box" (three).
pub fn region_label(sim_box: &SimBox) -> &'static str {
    match sim_box.periodic.iter().filter(|p| !**p).count() {
        0 => "free",
        1 => "slit",
        2 => "channel",
        _ => "closed_box",
    }
}

/// The ground-truth regions of a scene and how to tell them apart.
#[derive(Debug, Clone)]
enum Regions {
    /// One region everywhere.
    Uniform,
    /// A membrane: index 1 ("pore") where the blurred z lies within the slab
    /// (a centre there can only be in a pore; the average over an exposure
    /// that crossed a pore entrance may not lie in one), else 0 ("reservoir").
    Membrane {
        /// Slab faces along z, nm.
        z_lo_nm: f64,
        z_hi_nm: f64,
    },
}

/// Region names and the map of a scenario: from its `[geometry]` (a
/// membrane has "reservoir" and "pore"; a plane wall, slit or cylindrical
/// pore is one region each), else from its box walls ([`region_label`]).
fn regions_of(scenario: &Scenario) -> (Regions, Vec<&'static str>) {
    match scenario.geometry.as_ref().map(|g| &g.shape) {
        None => (Regions::Uniform, vec![region_label(&scenario.sim_box)]),
        Some(Shape::Membrane(m)) => (
            Regions::Membrane {
                z_lo_nm: m.z_lo_nm,
                z_hi_nm: m.z_hi_nm,
            },
            vec!["reservoir", "pore"],
        ),
        Some(Shape::Cylinder { .. }) => (Regions::Uniform, vec!["pore"]),
        Some(shape) => (Regions::Uniform, vec![shape.kind()]),
    }
}

/// A camera ready to image one scenario.
#[derive(Debug, Clone)]
pub struct Camera {
    spec: CameraSpec,
    sim_box: SimBox,
    seed: u64,
    sigma_nm: f64,
    sigma_z_nm: f64,
    /// Probability that an emitting fluorophore still emits one frame later.
    stay_on: f64,
    /// Probability that a dark fluorophore emits one frame later.
    turn_on: f64,
    /// Stationary probability of emitting.
    on_fraction: f64,
    regions: Regions,
    region_names: Vec<&'static str>,
}

impl Camera {
    /// The camera of a scenario's `[camera]` section.
    ///
    /// # Errors
    /// [`TracksError::NoCamera`] when the scenario has none.
    pub fn new(scenario: &Scenario) -> Result<Self, TracksError> {
        let spec = scenario
            .camera
            .clone()
            .ok_or_else(|| TracksError::NoCamera {
                file: scenario.source.clone(),
            })?;
        let mut camera = Self::from_spec(spec, scenario.sim_box, scenario.seed);
        (camera.regions, camera.region_names) = regions_of(scenario);
        Ok(camera)
    }

    /// A camera from a validated spec, the box it looks into and a seed; the
    /// region is named from the box walls ([`region_label`]).
    pub fn from_spec(spec: CameraSpec, sim_box: SimBox, seed: u64) -> Self {
        let (stay_on, turn_on, on_fraction) = match spec.blink {
            None => (1.0, 0.0, 1.0),
            Some(Blinking {
                on_to_off_per_s,
                off_to_on_per_s,
            }) => {
                // Two-state Markov chain over one frame interval, exact.
                let k = on_to_off_per_s + off_to_on_per_s;
                let pi_on = off_to_on_per_s / k;
                let decay = (-k * spec.frame_interval_s).exp();
                (pi_on + (1.0 - pi_on) * decay, pi_on * (1.0 - decay), pi_on)
            }
        };
        let sigma_nm = lateral_sigma_nm(&spec);
        let sigma_z_nm = axial_sigma_nm(&spec);
        Self {
            spec,
            sim_box,
            seed,
            sigma_nm,
            sigma_z_nm,
            stay_on,
            turn_on,
            on_fraction,
            regions: Regions::Uniform,
            region_names: vec![region_label(&sim_box)],
        }
    }

    /// Names of the ground-truth regions, indexed by [`Track::region`].
    pub fn region_names(&self) -> &[&'static str] {
        &self.region_names
    }

    /// The validated camera settings.
    pub fn spec(&self) -> &CameraSpec {
        &self.spec
    }

    /// Recorded positions the camera needs from the start of the run.
    pub fn samples_needed(&self) -> usize {
        (self.spec.frames - 1) * self.spec.samples_per_frame + self.spec.samples_per_exposure
    }

    /// Summary of the camera for the output files.
    pub fn summary(&self) -> CameraSummary {
        CameraSummary {
            frame_interval_s: self.spec.frame_interval_s,
            exposure_s: self.spec.exposure_s,
            effective_exposure_s: effective_exposure_s(&self.spec),
            blur_factor: blur_factor(&self.spec),
            frames: self.spec.frames,
            dims: self.spec.projection.dims(),
            sigma_nm: self.sigma_nm,
            sigma_z_nm: (self.spec.projection == Projection::ThreeD).then_some(self.sigma_z_nm),
            field_of_view_nm: self.spec.field_of_view_nm,
            focal_slab_nm: self.spec.focal_slab_nm,
            bleach_lifetime_s: self.spec.bleach_lifetime_s,
            blink: self
                .spec
                .blink
                .map(|b| [b.on_to_off_per_s, b.off_to_on_per_s]),
        }
    }

    /// Starts imaging `count` particles of species `species`, whose first
    /// particle has index `first_particle` in the scenario.
    pub fn start(&self, species: usize, first_particle: usize, count: usize) -> Imaging<'_> {
        let particles = (0..count)
            .map(|i| {
                let index = first_particle + i;
                let mut rng =
                    ParticleRng::for_particle(self.seed ^ CAMERA_STREAM_SALT, index as u64);
                // 1 − u lies in (0, 1], so the logarithm is finite.
                let bleach_s = self
                    .spec
                    .bleach_lifetime_s
                    .map_or(f64::INFINITY, |tau| -tau * (1.0 - rng.uniform()).ln());
                let on = self.spec.blink.is_none() || rng.uniform() < self.on_fraction;
                Emitter {
                    rng,
                    bleach_s,
                    on,
                    open: None,
                }
            })
            .collect();
        Imaging {
            camera: self,
            species,
            first_particle,
            particles,
            sums: vec![[0.0; 3]; count],
            next_sample: 0,
            heads: Vec::new(),
            detections: Vec::new(),
        }
    }
}

/// The camera's view of one particle between frames.
#[derive(Debug, Clone)]
struct Emitter {
    rng: ParticleRng,
    /// Time at which the fluorophore bleaches, s.
    bleach_s: f64,
    /// Emitting (not dark) at the middle of the latest exposure.
    on: bool,
    /// The track being extended: its index in `heads` and its periodic cell.
    open: Option<(usize, [i64; 3])>,
}

/// Imaging of one species in progress; fed recorded positions in order.
#[derive(Debug)]
pub struct Imaging<'a> {
    camera: &'a Camera,
    species: usize,
    first_particle: usize,
    particles: Vec<Emitter>,
    /// Per particle, the sum of the recorded positions of the current exposure.
    sums: Vec<[f64; 3]>,
    next_sample: usize,
    heads: Vec<TrackHead>,
    detections: Vec<Detection>,
}

/// A track being built: who, from when, how long so far, and where.
#[derive(Debug, Clone)]
struct TrackHead {
    particle: usize,
    first_frame: usize,
    frames: usize,
    /// Detections per region.
    in_region: [usize; 2],
}

/// One detection, in the order the frames were decided.
#[derive(Debug, Clone)]
struct Detection {
    track: usize,
    reported: [f64; 3],
    folded: [f64; 3],
    region: u8,
}

/// ⌊q⌋ as an integer, without a call into libm (x86-64's baseline has no rounding instruction).
#[inline(always)]
fn floor_to_i64(q: f64) -> i64 {
    let t = q as i64;
    t - i64::from((t as f64) > q)
}

impl Imaging<'_> {
    /// Feeds the next recorded positions: unwrapped centres in nm, shape
    /// `[samples, particles, 3]`, continuing where the previous call ended.
    /// Samples past the last frame are ignored.
    ///
    /// # Panics
    /// If the particle axis does not match the count given to [`Camera::start`]
    /// (a programming error, not a user input).
    pub fn push(&mut self, positions_nm: ArrayView3<'_, f64>) {
        self.push_with(positions_nm, None, [0.0; 3]);
    }

    /// As [`Imaging::push`] for positions as stored in a trajectory (`f32` or
    /// `f64`, wrapped into the box) with their periodic image counts: the
    /// centre is position + image · edge (DESIGN.md, trajectory files).
    ///
    /// # Panics
    /// If the shapes of `positions_nm` and `images` differ or do not match the
    /// particle count (programming errors).
    pub fn push_stored<T: Copy + Into<f64>>(
        &mut self,
        positions_nm: ArrayView3<'_, T>,
        images: ArrayView3<'_, i32>,
        edges_nm: [f64; 3],
    ) {
        assert_eq!(
            positions_nm.shape(),
            images.shape(),
            "positions and images of the same frames and particles"
        );
        self.push_with(positions_nm, Some(images), edges_nm);
    }

    fn push_with<T: Copy + Into<f64>>(
        &mut self,
        positions_nm: ArrayView3<'_, T>,
        images: Option<ArrayView3<'_, i32>>,
        edges_nm: [f64; 3],
    ) {
        let n = self.particles.len();
        assert_eq!(
            positions_nm.shape()[1],
            n,
            "one column per particle of the species"
        );
        assert_eq!(positions_nm.shape()[2], 3, "three coordinates per particle");
        // Contiguous rows let the hot loop run over plain slices.
        let positions = positions_nm.as_standard_layout();
        let images = images.as_ref().map(|im| im.as_standard_layout());
        let all_positions = positions.as_slice().expect("standard layout is contiguous");
        let all_images = images
            .as_ref()
            .map(|im| im.as_slice().expect("standard layout is contiguous"));
        self.push_rows(
            all_positions,
            all_images,
            positions.shape()[0],
            n,
            0,
            edges_nm,
        );
    }

    /// The hot loop: `samples` rows of `columns` particles × 3 coordinates,
    /// of which this imaging owns the particles from `first_column` on.
    fn push_rows<T: Copy + Into<f64>>(
        &mut self,
        positions: &[T],
        images: Option<&[i32]>,
        samples: usize,
        columns: usize,
        first_column: usize,
        edges_nm: [f64; 3],
    ) {
        let n = self.particles.len();
        let spec = &self.camera.spec;
        let (spf, m, frames) = (
            spec.samples_per_frame,
            spec.samples_per_exposure,
            spec.frames,
        );
        let edge_row: Vec<f64> = (0..3 * n).map(|i| edges_nm[i % 3]).collect();
        for t in 0..samples {
            let s = self.next_sample;
            self.next_sample += 1;
            let (frame, j) = (s / spf, s % spf);
            if frame >= frames || j >= m {
                continue;
            }
            let span = (t * columns + first_column) * 3..(t * columns + first_column + n) * 3;
            let row = &positions[span.clone()];
            match images {
                // Flat element-wise loops, which the compiler vectorises.
                Some(im) => {
                    for ((sum, &x), (&c, &e)) in self
                        .sums
                        .as_flattened_mut()
                        .iter_mut()
                        .zip(row)
                        .zip(im[span].iter().zip(&edge_row))
                    {
                        *sum += x.into() + c as f64 * e;
                    }
                }
                None => {
                    for (sum, &x) in self.sums.as_flattened_mut().iter_mut().zip(row) {
                        *sum += x.into();
                    }
                }
            }
            if j == m - 1 {
                self.close_frame(frame);
            }
        }
    }

    /// Decides what frame `frame` saw of every particle.
    fn close_frame(&mut self, frame: usize) {
        let cam = self.camera;
        let spec = &cam.spec;
        let inv_m = 1.0 / spec.samples_per_exposure as f64;
        let mid_s = frame as f64 * spec.frame_interval_s + 0.5 * spec.exposure_s;
        let dims = spec.projection.dims();
        for (i, (p, sum)) in self
            .particles
            .iter_mut()
            .zip(self.sums.iter_mut())
            .enumerate()
        {
            let blurred = sum.map(|v| v * inv_m);
            *sum = [0.0; 3];
            if spec.blink.is_some() && frame > 0 {
                let u = p.rng.uniform();
                p.on = u < if p.on { cam.stay_on } else { cam.turn_on };
            }
            let mut folded = blurred;
            let mut cell = [0i64; 3];
            for k in 0..3 {
                if cam.sim_box.periodic[k] {
                    let l = cam.sim_box.edges_nm[k];
                    let mut c = floor_to_i64(blurred[k] / l);
                    let mut x = blurred[k] - c as f64 * l;
                    // The division can round across a face by one ulp; fold back inside.
                    if x < 0.0 {
                        x += l;
                        c -= 1;
                    } else if x >= l {
                        x -= l;
                        c += 1;
                    }
                    folded[k] = x;
                    cell[k] = c;
                }
            }
            let fov = &spec.field_of_view_nm;
            let in_view = (fov[0][0]..fov[0][1]).contains(&folded[0])
                && (fov[1][0]..fov[1][1]).contains(&folded[1]);
            let in_focus = spec
                .focal_slab_nm
                .is_none_or(|[lo, hi]| (lo..=hi).contains(&folded[2]));
            if !(p.on && mid_s < p.bleach_s && in_view && in_focus) {
                p.open = None;
                continue;
            }
            let mut reported = folded;
            for (k, r) in reported.iter_mut().enumerate().take(dims) {
                let sigma = if k == 2 { cam.sigma_z_nm } else { cam.sigma_nm };
                *r += sigma * standard_normal(&mut p.rng);
            }
            let continues = match p.open {
                Some((t, c)) => {
                    c == cell && self.heads[t].first_frame + self.heads[t].frames == frame
                }
                None => false,
            };
            let t = match p.open {
                Some((t, _)) if continues => t,
                _ => {
                    self.heads.push(TrackHead {
                        particle: self.first_particle + i,
                        first_frame: frame,
                        frames: 0,
                        in_region: [0; 2],
                    });
                    self.heads.len() - 1
                }
            };
            p.open = Some((t, cell));
            let region = match &cam.regions {
                Regions::Uniform => 0u8,
                Regions::Membrane { z_lo_nm, z_hi_nm } => {
                    u8::from((*z_lo_nm..=*z_hi_nm).contains(&folded[2]))
                }
            };
            self.heads[t].frames += 1;
            self.heads[t].in_region[region as usize] += 1;
            // One append-only list in frame order: far cheaper than growing one list per track.
            self.detections.push(Detection {
                track: t,
                reported,
                folded,
                region,
            });
        }
    }

    /// Recorded positions consumed so far.
    pub fn samples_seen(&self) -> usize {
        self.next_sample
    }

    /// Ends imaging and returns the tracks (ids not yet assigned).
    pub fn finish(self) -> Vec<Track> {
        let mut tracks: Vec<Track> = self
            .heads
            .iter()
            .map(|h| Track {
                id: 0,
                particle: h.particle,
                species: self.species,
                first_frame: h.first_frame,
                // Where most of its detections were (the first region on a tie).
                region: usize::from(h.in_region[1] > h.in_region[0]),
                positions_nm: Vec::with_capacity(h.frames),
                true_positions_nm: Vec::with_capacity(h.frames),
                regions: Vec::with_capacity(h.frames),
            })
            .collect();
        for d in &self.detections {
            let t = &mut tracks[d.track];
            t.positions_nm.push(d.reported);
            t.true_positions_nm.push(d.folded);
            t.regions.push(d.region);
        }
        tracks
    }
}

/// Species with fewer particles than this per thread are imaged on fewer threads.
const MIN_PARTICLES_PER_WORKER: usize = 256;

/// Recorded positions as stored: `f32` or `f64`.
enum Stored {
    F32(Array3<f32>),
    F64(Array3<f64>),
}

/// One window of recorded positions of all particles of a species.
struct Window {
    positions: Stored,
    images: Array3<i32>,
    samples: usize,
}

impl Window {
    /// Hands the particles of one imaging to it.
    fn feed(
        &self,
        imaging: &mut Imaging<'_>,
        columns: usize,
        first_column: usize,
        edges_nm: [f64; 3],
    ) {
        let images = self
            .images
            .as_slice()
            .expect("read_slice gives standard layout");
        match &self.positions {
            Stored::F32(p) => imaging.push_rows(
                p.as_slice().expect("read_slice gives standard layout"),
                Some(images),
                self.samples,
                columns,
                first_column,
                edges_nm,
            ),
            Stored::F64(p) => imaging.push_rows(
                p.as_slice().expect("read_slice gives standard layout"),
                Some(images),
                self.samples,
                columns,
                first_column,
                edges_nm,
            ),
        }
    }
}

/// Images every species of a trajectory written by `thicket run` for
/// `scenario`, and assembles the tracks with their ground truth.
///
/// The trajectory must come from the same scenario apart from its
/// `[camera]` section (so one simulation can be imaged by several cameras).
///
/// Uses as many threads as the machine offers; see [`image_trajectory_on`].
///
/// # Errors
/// [`TracksError::NoCamera`], [`TracksError::Hdf5`] for unreadable files,
/// [`TracksError::Trajectory`] when the file does not belong to the scenario
/// or holds too few recorded positions.
pub fn image_trajectory(path: &Path, scenario: &Scenario) -> Result<TrackSet, TracksError> {
    let threads = std::thread::available_parallelism().map_or(1, |n| n.get());
    image_trajectory_on(path, scenario, threads)
}

/// As [`image_trajectory`] on at most `threads` threads (species are split
/// into blocks of at least 256 particles). The tracks do not depend on it.
///
/// # Errors
/// As [`image_trajectory`].
pub fn image_trajectory_on(
    path: &Path,
    scenario: &Scenario,
    threads: usize,
) -> Result<TrackSet, TracksError> {
    let camera = Camera::new(scenario)?;
    let h5 = |object: &str| {
        let object = object.to_string();
        move |source| TracksError::Hdf5 {
            file: path.to_path_buf(),
            object,
            source,
        }
    };
    let file = File::open(path).map_err(h5("/"))?;
    check_same_scenario(path, &file, scenario)?;
    let needed = camera.samples_needed();
    let mut tracks = Vec::new();
    let mut first = 0;
    for (index, species) in scenario.species.iter().enumerate() {
        if !camera.spec.labelled.get(index).copied().unwrap_or(true) {
            // Unlabelled (e.g. crowders): not seen, but their indices still key the streams.
            first += species.count;
            continue;
        }
        let base = format!("/particles/{}", species.name);
        let value = file
            .dataset(&format!("{base}/position/value"))
            .map_err(h5(&format!("{base}/position/value")))?;
        let image = file
            .dataset(&format!("{base}/image/value"))
            .map_err(h5(&format!("{base}/image/value")))?;
        let shape = value.shape();
        let recorded = shape
            .first()
            .copied()
            .unwrap_or(0)
            .min(image.shape().first().copied().unwrap_or(0));
        if shape.len() != 3 || shape[1] != species.count || shape[2] != 3 {
            return Err(TracksError::Trajectory {
                file: path.to_path_buf(),
                what: format!("{base}/position/value has shape {shape:?}"),
                allowed: format!(
                    "[frames, {}, 3] for the scenario's species '{}'",
                    species.count, species.name
                ),
            });
        }
        if recorded < needed {
            return Err(TracksError::Trajectory {
                file: path.to_path_buf(),
                what: format!("{base}/position/value holds {recorded} recorded positions"),
                allowed: format!(
                    "the camera needs {needed} ({} frames); was the run interrupted?",
                    camera.spec.frames
                ),
            });
        }
        // Contiguous blocks of particles, one imaging each, run side by side;
        // per-particle streams make the result independent of the split.
        let workers = threads
            .min(species.count.div_ceil(MIN_PARTICLES_PER_WORKER))
            .max(1);
        let ranges: Vec<std::ops::Range<usize>> = (0..workers)
            .map(|w| species.count * w / workers..species.count * (w + 1) / workers)
            .collect();
        let mut imagings: Vec<Imaging<'_>> = ranges
            .iter()
            .map(|r| camera.start(index, first + r.start, r.len()))
            .collect();
        let window = (WINDOW_BUDGET_BYTES / (species.count * 3 * 12).max(1)).clamp(1, needed);
        // Read positions in the stored type: HDF5's own f32 → f64 conversion is slow.
        let stored_f32 = value
            .dtype()
            .map(|t| t.size() == 4)
            .map_err(h5(&format!("{base}/position/value")))?;
        let read = |f0: usize, f1: usize| -> Result<Window, TracksError> {
            let img: Array3<i32> = image
                .read_slice::<i32, _, Ix3>(s![f0..f1, .., ..])
                .map_err(h5(&format!("{base}/image/value")))?;
            let pos = if stored_f32 {
                Stored::F32(
                    value
                        .read_slice::<f32, _, Ix3>(s![f0..f1, .., ..])
                        .map_err(h5(&format!("{base}/position/value")))?,
                )
            } else {
                Stored::F64(
                    value
                        .read_slice::<f64, _, Ix3>(s![f0..f1, .., ..])
                        .map_err(h5(&format!("{base}/position/value")))?,
                )
            };
            Ok(Window {
                positions: pos,
                images: img,
                samples: f1 - f0,
            })
        };
        let edges = scenario.sim_box.edges_nm;
        let columns = species.count;
        let mut next = Some(read(0, window)?);
        let mut f0 = window;
        while let Some(current) = next.take() {
            std::thread::scope(|scope| -> Result<(), TracksError> {
                for (imaging, r) in imagings.iter_mut().zip(&ranges) {
                    let current = &current;
                    let first_column = r.start;
                    scope.spawn(move || current.feed(imaging, columns, first_column, edges));
                }
                // Read the next window while the current one is imaged.
                if f0 < needed {
                    let f1 = (f0 + window).min(needed);
                    next = Some(read(f0, f1)?);
                    f0 = f1;
                }
                Ok(())
            })?;
        }
        let finished: Vec<Vec<Track>> = std::thread::scope(|scope| {
            let handles: Vec<_> = imagings
                .into_iter()
                .map(|im| scope.spawn(move || im.finish()))
                .collect();
            handles
                .into_iter()
                .map(|h| h.join().expect("imaging threads do not panic"))
                .collect()
        });
        tracks.extend(finished.into_iter().flatten());
        first += species.count;
    }
    let species = scenario
        .species
        .iter()
        .map(|s| SpeciesTruth {
            name: s.name.clone(),
            d0_m2_per_s: s.d0_m2_per_s,
        })
        .collect();
    Ok(TrackSet::assemble(
        tracks,
        species,
        camera
            .region_names()
            .iter()
            .map(|r| r.to_string())
            .collect(),
        camera.summary(),
        scenario.resolved_toml.clone(),
    ))
}

/// The scenario stored in the trajectory must equal ours except for `[camera]`
/// and the output file name.
fn check_same_scenario(path: &Path, file: &File, scenario: &Scenario) -> Result<(), TracksError> {
    let stored: String = file
        .group("parameters/thicket")
        .and_then(|g| g.attr("scenario"))
        .and_then(|a| {
            a.read_scalar::<hdf5::types::VarLenAscii>()
                .map(|s| s.as_str().to_string())
                .or_else(|_| read_fixed_text(&a))
        })
        .map_err(|source| TracksError::Hdf5 {
            file: path.to_path_buf(),
            object: "/parameters/thicket/scenario".into(),
            source,
        })?;
    let strip = |text: &str, origin: &Path| -> Option<RawScenario> {
        let mut raw = RawScenario::parse(text, origin).ok()?;
        raw.camera = None;
        raw.output.file = None;
        Some(raw)
    };
    let ours = strip(&scenario.resolved_toml, &scenario.source);
    let theirs = strip(&stored, path);
    if ours.is_none() || ours != theirs {
        return Err(TracksError::Trajectory {
            file: path.to_path_buf(),
            what: "the trajectory was simulated from a different scenario".into(),
            allowed: format!(
                "a trajectory of {} with the same --set options (only [camera] may differ); rerun without --trajectory to simulate it",
                scenario.source.display()
            ),
        });
    }
    Ok(())
}

/// Reads a fixed-length ASCII scalar attribute of any length up to 64 KiB.
fn read_fixed_text(a: &hdf5::Attribute) -> hdf5::Result<String> {
    use hdf5::types::FixedAscii;
    let n = a.dtype()?.size();
    fn get<const N: usize>(a: &hdf5::Attribute) -> hdf5::Result<String> {
        Ok(a.read_scalar::<FixedAscii<N>>()?.as_str().to_string())
    }
    match n {
        0..=255 => get::<256>(a),
        256..=4095 => get::<4096>(a),
        4096..=32767 => get::<32768>(a),
        _ => get::<65536>(a),
    }
}

/// Simulates the first species of a scenario by free diffusion in memory (no
/// HDF5) and images it with the scenario's camera, handing the camera
/// `window` recorded positions at a time. The tracks are those
/// [`image_trajectory`] gives for the same positions; the self-checks and
/// tests use it to exercise the camera without a trajectory file.
///
/// # Errors
/// [`TracksError::NoCamera`] when the scenario has no `[camera]`.
pub fn image_free_in_memory(scenario: &Scenario, window: usize) -> Result<TrackSet, TracksError> {
    use thicket_engine::step::pipeline::advance_free;
    use thicket_engine::step::state::{kinetics, State};
    let camera = Camera::new(scenario)?;
    let mut kin = kinetics(scenario);
    // Only the first species is simulated and imaged.
    kin.truncate(1);
    let mut state = State::initial(scenario);
    let n = scenario.species[0].count;
    let needed = camera.samples_needed();
    let mut imaging = camera.start(0, 0, n);
    let mut done = 0;
    while done < needed {
        let w = window.max(1).min(needed - done);
        let mut buf = Array3::<f64>::zeros((w, n, 3));
        for t in 0..w {
            if done + t > 0 {
                advance_free(
                    &mut state,
                    &kin,
                    &scenario.sim_box,
                    scenario.output.record_every_steps,
                );
            }
            for i in 0..n {
                let p = state.unwrapped(i, &scenario.sim_box);
                for k in 0..3 {
                    buf[[t, i, k]] = p[k];
                }
            }
        }
        imaging.push(buf.view());
        done += w;
    }
    let species = vec![SpeciesTruth {
        name: scenario.species[0].name.clone(),
        d0_m2_per_s: scenario.species[0].d0_m2_per_s,
    }];
    Ok(TrackSet::assemble(
        imaging.finish(),
        species,
        camera
            .region_names()
            .iter()
            .map(|r| r.to_string())
            .collect(),
        camera.summary(),
        scenario.resolved_toml.clone(),
    ))
}
