//! Shared helpers of the analysis tests: an H5MD writer following the layout
//! `thicket run` writes, a seeded generator and a brute-force MSD.
#![allow(dead_code)]

use std::path::Path;

use hdf5::types::FixedAscii;
use ndarray::{Array1, Array3};

/// splitmix64 (Steele, Lea & Flood 2014) with Box–Muller normals.
pub struct Rng {
    state: u64,
    spare: Option<f64>,
}

impl Rng {
    pub fn new(seed: u64) -> Self {
        Rng {
            state: seed,
            spare: None,
        }
    }

    pub fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in (0, 1).
    pub fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    /// Standard normal (Box–Muller).
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare.take() {
            return z;
        }
        let (u1, u2) = (self.uniform(), self.uniform());
        let r = (-2.0 * u1.ln()).sqrt();
        let phi = 2.0 * std::f64::consts::PI * u2;
        self.spare = Some(r * phi.sin());
        r * phi.cos()
    }
}

/// Free 3D diffusion: each Cartesian step Gaussian with variance 2·D·Δt
/// (Einstein 1905). D in nm²/s, Δt in s; positions in nm from `start`.
pub fn gaussian_walks(
    seed: u64,
    frames: usize,
    particles: usize,
    d_nm2_per_s: f64,
    dt_s: f64,
) -> Array3<f64> {
    let mut rng = Rng::new(seed);
    let sigma = (2.0 * d_nm2_per_s * dt_s).sqrt();
    let mut x = Array3::zeros((frames, particles, 3));
    for p in 0..particles {
        for a in 0..3 {
            let mut v = 100.0 * rng.uniform();
            for f in 0..frames {
                if f > 0 {
                    v += sigma * rng.normal();
                }
                x[[f, p, a]] = v;
            }
        }
    }
    x
}

/// Brute-force time-averaged MSD of one series at lag m, O(F) per lag.
pub fn brute_msd(x: &[f64], m: usize) -> f64 {
    let f = x.len();
    let mut sum = 0.0;
    for k in 0..f - m {
        let d = x[k + m] - x[k];
        sum += d * d;
    }
    sum / (f - m) as f64
}

/// What to write into a test file.
pub struct Spec<'a> {
    pub species: &'a str,
    /// Positions as stored (wrapped if `images` is given), [F, N, 3], nm.
    pub positions: &'a Array3<f64>,
    pub images: Option<&'a Array3<i32>>,
    pub as_f32: bool,
    pub edges_nm: [f64; 3],
    pub periodic: [bool; 3],
    pub frame_interval_s: f64,
    /// Write /parameters/thicket with this D0 (m²/s) and frames_planned.
    pub parameters: Option<(f64, i64)>,
    /// Lengths of (value, step, time) if they are to differ (a killed run).
    pub lengths: Option<(usize, usize, usize)>,
    pub obstacles: bool,
}

impl<'a> Spec<'a> {
    pub fn new(species: &'a str, positions: &'a Array3<f64>, frame_interval_s: f64) -> Self {
        Spec {
            species,
            positions,
            images: None,
            as_f32: false,
            edges_nm: [1000.0; 3],
            periodic: [true; 3],
            frame_interval_s,
            parameters: None,
            lengths: None,
            obstacles: false,
        }
    }
}

fn ascii<const N: usize>(s: &str) -> FixedAscii<N> {
    FixedAscii::from_ascii(s.as_bytes()).expect("test strings are ASCII")
}

fn str_attr<const N: usize>(loc: &hdf5::Location, name: &str, value: &str) {
    loc.new_attr::<FixedAscii<N>>()
        .create(name)
        .and_then(|a| a.write_scalar(&ascii::<N>(value)))
        .expect("write string attribute");
}

/// Writes an H5MD 1.1 file with one species (and optionally obstacles).
pub fn write_h5md(path: &Path, spec: &Spec<'_>) {
    let f = hdf5::File::create(path).expect("create test file");
    let h5md = f.create_group("h5md").unwrap();
    h5md.new_attr::<i32>()
        .shape(2)
        .create("version")
        .unwrap()
        .write(&Array1::from(vec![1i32, 1]))
        .unwrap();
    let author = h5md.create_group("author").unwrap();
    str_attr::<16>(&author, "name", "analysis tests");
    let creator = h5md.create_group("creator").unwrap();
    str_attr::<16>(&creator, "name", "thicket");
    str_attr::<16>(&creator, "version", "0.1.0");
    let units = h5md
        .create_group("modules")
        .unwrap()
        .create_group("units")
        .unwrap();
    units
        .new_attr::<i32>()
        .shape(2)
        .create("version")
        .unwrap()
        .write(&Array1::from(vec![1i32, 0]))
        .unwrap();
    str_attr::<8>(&units, "system", "SI");

    let (frames, n, _) = spec.positions.dim();
    let (lv, ls, lt) = spec.lengths.unwrap_or((frames, frames, frames));
    let particles = f.create_group("particles").unwrap();
    let g = particles.create_group(spec.species).unwrap();
    write_box(&g, spec);
    let pos = g.create_group("position").unwrap();
    let value = spec.positions.slice(ndarray::s![..lv, .., ..]).to_owned();
    let ds = if spec.as_f32 {
        let v = value.mapv(|x| x as f32);
        let ds = pos
            .new_dataset::<f32>()
            .shape((lv, n, 3))
            .chunk((1, n, 3))
            .create("value")
            .unwrap();
        ds.write(&v).unwrap();
        ds
    } else {
        let ds = pos
            .new_dataset::<f64>()
            .shape((lv, n, 3))
            .chunk((1, n, 3))
            .create("value")
            .unwrap();
        ds.write(&value).unwrap();
        ds
    };
    str_attr::<8>(&ds, "unit", "nm");
    let steps: Array1<i64> = (0..ls as i64).map(|k| 10 * k).collect();
    pos.new_dataset_builder()
        .with_data(&steps)
        .create("step")
        .unwrap();
    let times: Array1<f64> = (0..lt).map(|k| k as f64 * spec.frame_interval_s).collect();
    let t = pos
        .new_dataset_builder()
        .with_data(&times)
        .create("time")
        .unwrap();
    str_attr::<8>(&t, "unit", "s");
    if let Some(images) = spec.images {
        let img = g.create_group("image").unwrap();
        let iv = images.slice(ndarray::s![..lv, .., ..]).to_owned();
        img.new_dataset::<i32>()
            .shape((lv, n, 3))
            .chunk((1, n, 3))
            .create("value")
            .unwrap()
            .write(&iv)
            .unwrap();
        let base = format!("/particles/{}/position", spec.species);
        img.link_hard(&format!("{base}/step"), "step").unwrap();
        img.link_hard(&format!("{base}/time"), "time").unwrap();
    }
    if spec.obstacles {
        let o = particles.create_group("obstacles").unwrap();
        write_box(&o, spec);
        let op = o.create_group("position").unwrap();
        op.new_dataset::<f64>()
            .shape((1, 2, 3))
            .create("value")
            .unwrap()
            .write(&Array3::<f64>::from_elem((1, 2, 3), 5.0))
            .unwrap();
    }
    if let Some((d0, planned)) = spec.parameters {
        let p = f
            .create_group("parameters")
            .unwrap()
            .create_group("thicket")
            .unwrap();
        str_attr::<256>(&p, "scenario", "[medium]\ntemperature_K = 298.15\n");
        p.new_attr::<u64>()
            .create("seed")
            .unwrap()
            .write_scalar(&42u64)
            .unwrap();
        str_attr::<16>(&p, "version", "0.1.0");
        p.new_attr::<i64>()
            .create("frames_planned")
            .unwrap()
            .write_scalar(&planned)
            .unwrap();
        p.new_attr::<f64>()
            .create("dt_s")
            .unwrap()
            .write_scalar(&(spec.frame_interval_s / 10.0))
            .unwrap();
        let s = p
            .create_group("species")
            .unwrap()
            .create_group(spec.species)
            .unwrap();
        for (name, v) in [
            ("radius_nm", 2.0),
            ("drag_radius_nm", 2.0),
            ("d0_m2_per_s", d0),
        ] {
            s.new_attr::<f64>()
                .create(name)
                .unwrap()
                .write_scalar(&v)
                .unwrap();
        }
        s.new_attr::<i64>()
            .create("count")
            .unwrap()
            .write_scalar(&(n as i64))
            .unwrap();
    }
}

fn write_box(g: &hdf5::Group, spec: &Spec<'_>) {
    let b = g.create_group("box").unwrap();
    b.new_attr::<i32>()
        .create("dimension")
        .unwrap()
        .write_scalar(&3i32)
        .unwrap();
    let boundary: Array1<FixedAscii<8>> = spec
        .periodic
        .iter()
        .map(|&p| ascii::<8>(if p { "periodic" } else { "none" }))
        .collect();
    b.new_attr::<FixedAscii<8>>()
        .shape(3)
        .create("boundary")
        .unwrap()
        .write(&boundary)
        .unwrap();
    let e = b
        .new_dataset_builder()
        .with_data(&Array1::from(spec.edges_nm.to_vec()))
        .create("edges")
        .unwrap();
    str_attr::<8>(&e, "unit", "nm");
}

/// Wraps unwrapped positions into [0, L) on every axis and returns the
/// wrapped positions and image counts.
pub fn wrap(unwrapped: &Array3<f64>, edges: [f64; 3]) -> (Array3<f64>, Array3<i32>) {
    let mut wrapped = unwrapped.clone();
    let mut images = Array3::<i32>::zeros(unwrapped.dim());
    for ((f, p, a), x) in unwrapped.indexed_iter() {
        let n = (x / edges[a]).floor();
        wrapped[[f, p, a]] = x - n * edges[a];
        images[[f, p, a]] = n as i32;
    }
    (wrapped, images)
}
