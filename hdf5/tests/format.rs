//! The pure-Rust writer's files: read back by our reader, by h5py and
//! h5dump (outside checks), complete as of the last flush after a kill, and
//! reopened for a resumed run; files the HDF5 C library writes (through
//! h5py) read by our reader.

#[path = "../../tests/outside/mod.rs"]
mod outside;

use ndarray::{s, Array1, Array3};
use std::path::Path;
use std::process::Command;
use thicket_hdf5 as hdf5;

const N: usize = 40;

/// The value every test writes at (frame, particle, axis): exact in f32.
fn value(f: usize, i: usize, k: usize) -> f32 {
    (f * 1000 + i * 3 + k) as f32
}

fn ascii<const M: usize>(s: &str) -> hdf5::types::FixedAscii<M> {
    hdf5::types::FixedAscii::from_ascii(s.as_bytes()).unwrap()
}

/// A file in the layout `thicket run` writes: positions appended frame by
/// frame (one chunk per frame, so the chunk index needs several B-tree
/// levels), step hard-linked under image/, string and numeric attributes.
struct Sink {
    file: hdf5::File,
    value: hdf5::Dataset,
    step: hdf5::Dataset,
    frames: usize,
}

impl Sink {
    fn create(path: &Path, chunk_frames: usize) -> Sink {
        let file = hdf5::File::create(path).unwrap();
        let h5md = file.create_group("h5md").unwrap();
        h5md.new_attr::<i32>()
            .shape(2)
            .create("version")
            .unwrap()
            .write(&[1i32, 1])
            .unwrap();
        h5md.new_attr::<hdf5::types::FixedAscii<16>>()
            .create("creator")
            .unwrap()
            .write_scalar(&ascii::<16>("thicket"))
            .unwrap();
        let g = file
            .create_group("particles")
            .and_then(|p| p.create_group("bead"))
            .unwrap();
        let b = g.create_group("box").unwrap();
        b.new_attr::<hdf5::types::FixedAscii<8>>()
            .shape(3)
            .create("boundary")
            .unwrap()
            .write(&[ascii::<8>("periodic"), ascii("none"), ascii("periodic")])
            .unwrap();
        b.new_dataset::<f64>()
            .shape(3)
            .create("edges")
            .unwrap()
            .write(&[100.0f64, 200.0, 300.0])
            .unwrap();
        let pos = g.create_group("position").unwrap();
        let value = pos
            .new_dataset::<f32>()
            .shape((0.., N, 3))
            .chunk((chunk_frames, N, 3))
            .create("value")
            .unwrap();
        value
            .new_attr::<hdf5::types::FixedAscii<8>>()
            .create("unit")
            .unwrap()
            .write_scalar(&ascii::<8>("nm"))
            .unwrap();
        let step = pos
            .new_dataset::<i64>()
            .shape(0..)
            .chunk(16)
            .create("step")
            .unwrap();
        g.create_group("image")
            .unwrap()
            .link_hard("/particles/bead/position/step", "step")
            .unwrap();
        file.flush().unwrap();
        Sink {
            file,
            value,
            step,
            frames: 0,
        }
    }

    fn reopen(path: &Path, frames: usize) -> Sink {
        let file = hdf5::File::open_rw(path).unwrap();
        let value = file.dataset("particles/bead/position/value").unwrap();
        let step = file.dataset("particles/bead/image/step").unwrap();
        value.resize((frames, N, 3)).unwrap();
        step.resize(frames).unwrap();
        Sink {
            file,
            value,
            step,
            frames,
        }
    }

    fn append(&mut self) {
        let f = self.frames;
        self.value.resize((f + 1, N, 3)).unwrap();
        let frame = Array3::from_shape_fn((1, N, 3), |(_, i, k)| value(f, i, k));
        self.value
            .write_slice(&frame, s![f..f + 1, .., ..])
            .unwrap();
        self.step.resize(f + 1).unwrap();
        self.step
            .write_slice(&Array1::from_elem(1, 10 * f as i64), s![f..f + 1])
            .unwrap();
        self.frames += 1;
    }
}

/// Checks a file's datasets hold exactly frames 0..F of [`value`]; returns F.
fn check_frames(path: &Path) -> usize {
    let file = hdf5::File::open(path).unwrap();
    let v = file.dataset("particles/bead/position/value").unwrap();
    let shape = v.shape();
    assert_eq!(&shape[1..], &[N, 3]);
    let frames = shape[0];
    let read: Array3<f32> = v
        .read_slice::<f32, _, ndarray::Ix3>(s![.., .., ..])
        .unwrap();
    for ((f, i, k), x) in read.indexed_iter() {
        assert_eq!(*x, value(f, i, k), "frame {f}, particle {i}, axis {k}");
    }
    let steps = file
        .dataset("particles/bead/position/step")
        .unwrap()
        .read_raw::<i64>()
        .unwrap();
    let expected: Vec<i64> = (0..frames as i64).map(|f| 10 * f).collect();
    assert_eq!(steps, expected);
    frames
}

#[test]
fn written_files_read_back_exactly() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.h5");
    {
        // 200 one-frame chunks: more than one B-tree node holds (64).
        let mut sink = Sink::create(&path, 1);
        for _ in 0..200 {
            sink.append();
        }
    }
    assert_eq!(check_frames(&path), 200);
    let file = hdf5::File::open(&path).unwrap();
    let version = file.group("h5md").unwrap().attr("version").unwrap();
    assert_eq!(version.read_raw::<i32>().unwrap(), vec![1, 1]);
    let b = file.group("particles/bead/box").unwrap();
    let boundary = b
        .attr("boundary")
        .unwrap()
        .read_raw::<hdf5::types::FixedAscii<8>>()
        .unwrap();
    let names: Vec<&str> = boundary.iter().map(|s| s.as_str()).collect();
    assert_eq!(names, ["periodic", "none", "periodic"]);
    let edges = b.dataset("edges").unwrap().read_raw::<f64>().unwrap();
    assert_eq!(edges, vec![100.0, 200.0, 300.0]);
    let unit = file
        .dataset("particles/bead/position/value")
        .unwrap()
        .attr("unit")
        .unwrap();
    assert_eq!(
        unit.dtype().unwrap().to_descriptor().unwrap(),
        hdf5::types::TypeDescriptor::FixedAscii(8)
    );
    let mut members = file
        .group("particles/bead")
        .unwrap()
        .member_names()
        .unwrap();
    members.sort();
    assert_eq!(members, ["box", "image", "position"]);
}

/// A resumed run reopens the file, drops frames past the checkpoint and
/// appends again: the result equals an uninterrupted file.
#[test]
fn reopened_files_shrink_and_grow() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.h5");
    {
        let mut sink = Sink::create(&path, 4);
        for _ in 0..30 {
            sink.append();
        }
    }
    {
        let mut sink = Sink::reopen(&path, 17);
        assert_eq!(sink.value.shape(), vec![17, N, 3]);
        for _ in 17..45 {
            sink.append();
        }
        sink.file.flush().unwrap();
    }
    assert_eq!(check_frames(&path), 45);
}

/// The writer process of `a_killed_writer_leaves_every_flushed_frame`.
#[test]
#[ignore = "run by a_killed_writer_leaves_every_flushed_frame as a process to kill"]
fn writer_to_kill() {
    let Ok(path) = std::env::var("THICKET_H5_WRITER_TO_KILL") else {
        return;
    };
    let path = Path::new(&path);
    let progress = path.with_extension("flushed");
    let mut sink = Sink::create(path, 3);
    loop {
        sink.append();
        if sink.frames % 5 == 0 {
            sink.file.flush().unwrap();
            let tmp = path.with_extension("tmp");
            std::fs::write(&tmp, sink.frames.to_string()).unwrap();
            std::fs::rename(&tmp, &progress).unwrap();
        }
        std::thread::sleep(std::time::Duration::from_micros(300));
    }
}

/// SIGKILL at an arbitrary moment leaves a file that opens with every
/// flushed frame (flushes every 5 frames), read by us and, as an outside
/// check, by h5py.
#[test]
fn a_killed_writer_leaves_every_flushed_frame() {
    let dir = tempfile::tempdir().unwrap();
    for (round, wait_flushes) in [2usize, 7, 13].into_iter().enumerate() {
        let path = dir.path().join(format!("killed{round}.h5"));
        let progress = path.with_extension("flushed");
        let mut child = Command::new(std::env::current_exe().unwrap())
            .args(["--ignored", "--exact", "writer_to_kill", "--nocapture"])
            .env("THICKET_H5_WRITER_TO_KILL", &path)
            .stdout(std::process::Stdio::null())
            .spawn()
            .unwrap();
        let started = std::time::Instant::now();
        let flushed = loop {
            let n: usize = std::fs::read_to_string(&progress)
                .ok()
                .and_then(|s| s.parse().ok())
                .unwrap_or(0);
            if n >= 5 * wait_flushes {
                break n;
            }
            assert!(
                started.elapsed().as_secs() < 60,
                "the writer made no progress"
            );
            std::thread::sleep(std::time::Duration::from_millis(1));
        };
        // A few more frames, so the kill may land mid-write or mid-flush.
        std::thread::sleep(std::time::Duration::from_micros(700 * round as u64 + 300));
        child.kill().unwrap();
        child.wait().unwrap();
        let frames = check_frames(&path);
        assert!(
            frames >= flushed && frames % 5 == 0,
            "{frames} frames after a kill that followed {flushed} flushed frames"
        );
        if let Some(python) = outside::require(outside::Tool::Python) {
            let script = "import sys, h5py, numpy as np\n\
                f = h5py.File(sys.argv[1], 'r')\n\
                v = f['particles/bead/position/value'][()]\n\
                F = v.shape[0]\n\
                e = np.fromfunction(lambda f, i, k: f * 1000 + i * 3 + k, (F, 40, 3)).astype(np.float32)\n\
                assert np.array_equal(v, e)\n\
                assert np.array_equal(f['particles/bead/image/step'][()], 10 * np.arange(F))\n\
                print(F)";
            let out = Command::new(python)
                .args(["-c", script, path.to_str().unwrap()])
                .output()
                .unwrap();
            assert!(
                out.status.success(),
                "h5py cannot read the killed writer's file: {}",
                String::from_utf8_lossy(&out.stderr)
            );
            assert_eq!(
                String::from_utf8_lossy(&out.stdout).trim(),
                frames.to_string()
            );
        }
    }
}

/// h5dump (HDF5 1.10 and later) lists and prints the writer's file.
#[test]
fn h5dump_reads_the_written_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("t.h5");
    {
        let mut sink = Sink::create(&path, 7);
        for _ in 0..100 {
            sink.append();
        }
    }
    let Some(h5dump) = outside::require(outside::Tool::H5dump) else {
        return;
    };
    let out = Command::new(h5dump)
        .args([
            "-d",
            "/particles/bead/position/value",
            "-s",
            "99,39,0",
            "-c",
            "1,1,3",
            path.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "h5dump failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("( 100, 40, 3 ) / ( H5S_UNLIMITED, 40, 3 )"),
        "{text}"
    );
    let last = format!(
        "{}, {}, {}",
        value(99, 39, 0),
        value(99, 39, 1),
        value(99, 39, 2)
    );
    assert!(text.contains(&last), "h5dump shows no {last}: {text}");
}

/// Files of the HDF5 C library (written by h5py, in its oldest and newest
/// formats, so with every chunk index it uses) read through our reader.
#[test]
fn reads_files_the_c_library_writes() {
    let Some(python) = outside::require(outside::Tool::Python) else {
        return;
    };
    let dir = tempfile::tempdir().unwrap();
    let script = "import sys, h5py, numpy as np\n\
        for libver in ('earliest', 'latest'):\n\
        \x20   f = h5py.File(sys.argv[1] + '/' + libver + '.h5', 'w', libver=(libver, 'latest'))\n\
        \x20   g = f.create_group('particles/bead')\n\
        \x20   v = g.create_dataset('position/value', shape=(0, 40, 3), maxshape=(None, 40, 3), chunks=(4, 40, 3), dtype='f4')\n\
        \x20   for fr in range(30):\n\
        \x20       v.resize(fr + 1, axis=0)\n\
        \x20       v[fr] = np.fromfunction(lambda i, k: fr * 1000 + i * 3 + k, (40, 3))\n\
        \x20   g['position/step'] = 10 * np.arange(30, dtype='i8')\n\
        \x20   g['image/step'] = g['position/step']\n\
        \x20   v.attrs['unit'] = np.bytes_('nm')\n\
        \x20   g.attrs['names'] = ['alpha', 'beta']\n\
        \x20   g.attrs['scale'] = np.array([0.5, 1.5])\n\
        \x20   g.attrs['count'] = np.int64(40)\n\
        \x20   f.close()\n";
    let out = Command::new(python)
        .args(["-c", script, dir.path().to_str().unwrap()])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "h5py failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    for libver in ["earliest", "latest"] {
        let path = dir.path().join(format!("{libver}.h5"));
        assert_eq!(check_frames(&path), 30, "{libver}");
        let file = hdf5::File::open(&path).unwrap();
        let g = file.group("particles/bead").unwrap();
        let names = g
            .attr("names")
            .unwrap()
            .read_raw::<hdf5::types::VarLenUnicode>()
            .unwrap();
        let names: Vec<&str> = names.iter().map(|s| s.as_str()).collect();
        assert_eq!(names, ["alpha", "beta"], "{libver}");
        assert_eq!(
            g.attr("scale").unwrap().read_raw::<f64>().unwrap(),
            vec![0.5, 1.5]
        );
        assert_eq!(g.attr("count").unwrap().read_scalar::<i64>().unwrap(), 40);
        let unit = file
            .dataset("particles/bead/position/value")
            .unwrap()
            .attr("unit")
            .unwrap()
            .read_scalar::<hdf5::types::FixedAscii<8>>()
            .unwrap();
        assert_eq!(unit.as_str(), "nm");
    }
}
