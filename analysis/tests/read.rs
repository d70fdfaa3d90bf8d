//! The H5MD reader: layouts, precision, unwrapping, truncation, errors.

mod common;

use common::{gaussian_walks, wrap, write_h5md, Spec};
use ndarray::Array3;
use thicket_analysis::error::ErrorKind;
use thicket_analysis::read::{StoredPrecision, Trajectory};

#[test]
fn metadata_of_a_thicket_file() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("run.h5");
    let x = gaussian_walks(1, 30, 4, 1e6, 1e-6);
    let mut spec = Spec::new("tracer", &x, 1e-6);
    spec.parameters = Some((2.5e-10, 30));
    spec.obstacles = true;
    write_h5md(&path, &spec);

    let t = Trajectory::open(&path).unwrap();
    // The obstacles group is not a species of moving particles.
    assert_eq!(t.species_names(), ["tracer"]);
    let p = t.run_parameters().expect("parameters present");
    assert_eq!(p.seed, Some(42));
    assert_eq!(p.frames_planned, Some(30));
    assert_eq!(p.version.as_deref(), Some("0.1.0"));
    assert!(p
        .scenario_toml
        .as_deref()
        .unwrap()
        .contains("temperature_K"));
    let r = t.species(None).unwrap();
    let m = r.meta();
    assert_eq!((m.frames, m.particles, m.dims), (30, 4, 3));
    assert!(!m.truncated);
    assert_eq!(m.precision, StoredPrecision::F64);
    assert_eq!(m.d0_m2_per_s, Some(2.5e-10));
    assert!((m.frame_interval_s - 1e-6).abs() < 1e-18);
    assert_eq!(m.simulation_box.periodic, vec![true; 3]);
    assert_eq!(m.simulation_box.edges_nm.as_deref(), Some(&[1000.0; 3][..]));
    assert_eq!(m.steps.as_ref().unwrap()[3], 30);
}

#[test]
fn unwraps_with_image_counts() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("wrapped.h5");
    let edges = [20.0, 30.0, 40.0];
    // Steps of ~7 nm in boxes of 20–40 nm cross the faces many times.
    let unwrapped = gaussian_walks(7, 60, 5, 2.5e7, 1e-6);
    let (wrapped, images) = wrap(&unwrapped, edges);
    assert!(images.iter().any(|&n| n != 0), "the test must cross faces");
    let mut spec = Spec::new("tracer", &wrapped, 1e-6);
    spec.images = Some(&images);
    spec.edges_nm = edges;
    write_h5md(&path, &spec);

    let t = Trajectory::open(&path).unwrap();
    let r = t.species(Some("tracer")).unwrap();
    assert!(r.meta().has_images);
    let block = r.read_block(0..5).unwrap();
    let max_err = (&block.positions_nm - &unwrapped)
        .iter()
        .fold(0.0f64, |m, v| m.max(v.abs()));
    // Wrapping and unwrapping round at the scale of the coordinates (~1e2 nm).
    assert!(
        max_err < 1e-10,
        "unwrapped positions differ by {max_err} nm"
    );
    assert_eq!(block.suspicious_jumps, 0);
}

#[test]
fn wrapped_positions_without_images_are_flagged() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("noimages.h5");
    let edges = [20.0; 3];
    let unwrapped = gaussian_walks(8, 60, 3, 2.5e7, 1e-6);
    let (wrapped, _) = wrap(&unwrapped, edges);
    let mut spec = Spec::new("tracer", &wrapped, 1e-6);
    spec.edges_nm = edges;
    write_h5md(&path, &spec);
    let t = Trajectory::open(&path).unwrap();
    let r = t.species(None).unwrap();
    assert!(!r.meta().has_images);
    assert!(r.read_block(0..3).unwrap().suspicious_jumps > 0);
}

#[test]
fn reads_f32_and_f64_alike() {
    let dir = tempfile::tempdir().unwrap();
    let x = gaussian_walks(3, 25, 6, 1e6, 1e-6);
    let mut read = Vec::new();
    for as_f32 in [false, true] {
        let path = dir.path().join(format!("p{as_f32}.h5"));
        let mut spec = Spec::new("tracer", &x, 1e-6);
        spec.as_f32 = as_f32;
        write_h5md(&path, &spec);
        let t = Trajectory::open(&path).unwrap();
        let r = t.species(None).unwrap();
        let expected = if as_f32 {
            StoredPrecision::F32
        } else {
            StoredPrecision::F64
        };
        assert_eq!(r.meta().precision, expected);
        read.push(r.read_block(0..6).unwrap().positions_nm);
    }
    assert_eq!(read[0], x, "f64 must round-trip exactly");
    // f32 keeps 24 bits: relative error at most 2^-24 of each coordinate.
    for (a, b) in read[1].iter().zip(x.iter()) {
        assert!(
            (a - b).abs() <= b.abs() * 2f64.powi(-24) * 1.0001,
            "{a} vs {b}"
        );
    }
}

#[test]
fn blocks_and_frame_windows_respect_the_budget_and_agree() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("stream.h5");
    let x = gaussian_walks(4, 40, 10, 1e6, 1e-6);
    write_h5md(&path, &Spec::new("tracer", &x, 1e-6));
    let t = Trajectory::open(&path).unwrap();
    let r = t.species(None).unwrap();
    // 40 frames × 3 axes × 16 bytes (f64 result + f64 stored) = 1920 bytes per particle.
    let budget = 3 * 1920;
    assert_eq!(r.particles_per_block(budget), 3);
    let blocks: Vec<_> = r.blocks(budget).map(Result::unwrap).collect();
    assert_eq!(
        blocks
            .iter()
            .map(|b| b.positions_nm.dim().1)
            .collect::<Vec<_>>(),
        [3, 3, 3, 1]
    );
    let mut joined = Array3::zeros((40, 10, 3));
    for b in &blocks {
        let n = b.positions_nm.dim().1;
        joined
            .slice_mut(ndarray::s![.., b.first_particle..b.first_particle + n, ..])
            .assign(&b.positions_nm);
    }
    assert_eq!(joined, x);
    // 10 particles × 48 bytes per frame: a 1000-byte budget gives 2 frames per window.
    let windows: Vec<_> = r.frame_windows(1000).map(Result::unwrap).collect();
    assert_eq!(windows.len(), 20);
    for w in &windows {
        let n = w.positions_nm.dim().0;
        assert_eq!(
            w.positions_nm,
            x.slice(ndarray::s![w.first_frame..w.first_frame + n, .., ..])
        );
    }
}

#[test]
fn truncated_file_uses_the_shortest_dataset() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("killed.h5");
    let x = gaussian_walks(5, 50, 3, 1e6, 1e-6);
    let mut spec = Spec::new("tracer", &x, 1e-6);
    // A run killed between writing value and time: value 50, step 50, time 49; 200 planned.
    spec.lengths = Some((50, 50, 49));
    spec.parameters = Some((1e-12, 200));
    write_h5md(&path, &spec);
    let t = Trajectory::open(&path).unwrap();
    let r = t.species(None).unwrap();
    let m = r.meta();
    assert_eq!(m.frames, 49);
    assert!(m.truncated);
    assert_eq!(m.frames_planned, Some(200));
    assert_eq!(
        (m.lengths.value, m.lengths.step, m.lengths.time),
        (50, Some(50), Some(49))
    );
    assert_eq!(r.read_block(0..3).unwrap().positions_nm.dim(), (49, 3, 3));
}

#[test]
fn errors_name_the_file_and_what_is_wrong() {
    let dir = tempfile::tempdir().unwrap();

    let missing = dir.path().join("absent.h5");
    let e = Trajectory::open(&missing).unwrap_err();
    assert!(matches!(e.kind(), ErrorKind::Io { .. }), "{e}");

    let text = dir.path().join("notes.h5");
    std::fs::write(&text, "this is not HDF5\n".repeat(100)).unwrap();
    let e = Trajectory::open(&text).unwrap_err();
    assert!(matches!(e.kind(), ErrorKind::NotHdf5 { .. }), "{e}");
    assert!(e.to_string().contains("notes.h5"), "{e}");

    let empty = dir.path().join("empty.h5");
    hdf5::File::create(&empty)
        .unwrap()
        .create_group("h5md")
        .unwrap();
    let e = Trajectory::open(&empty).unwrap_err();
    assert!(
        matches!(e.kind(), ErrorKind::Missing { object, .. } if object == "/particles"),
        "{e}"
    );
    assert!(e.to_string().contains("empty.h5"), "{e}");

    let nopos = dir.path().join("nopos.h5");
    {
        let f = hdf5::File::create(&nopos).unwrap();
        f.create_group("particles")
            .unwrap()
            .create_group("tracer")
            .unwrap()
            .create_group("box")
            .unwrap();
    }
    let t = Trajectory::open(&nopos).unwrap();
    let e = t.species(None).unwrap_err();
    assert!(
        matches!(e.kind(), ErrorKind::Missing { object, .. } if object == "/particles/tracer/position"),
        "{e}"
    );

    let x = gaussian_walks(6, 10, 2, 1e6, 1e-6);
    let ok = dir.path().join("ok.h5");
    write_h5md(&ok, &Spec::new("tracer", &x, 1e-6));
    let t = Trajectory::open(&ok).unwrap();
    let e = t.species(Some("crowder")).unwrap_err();
    assert!(
        matches!(e.kind(), ErrorKind::UnknownSpecies { available, .. } if available == &["tracer".to_string()]),
        "{e}"
    );
    let r = t.species(None).unwrap();
    assert!(
        r.read_block(1..5).is_err(),
        "a range beyond N must be refused"
    );
}

#[test]
fn reads_a_minimal_file_from_another_writer() {
    // No /parameters, no box, f32 positions, fixed-interval time (a scalar
    // increment with an offset attribute) and no step: all allowed by H5MD 1.1.
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("other.h5");
    let x = gaussian_walks(9, 12, 2, 1e6, 1e-6);
    {
        let f = hdf5::File::create(&path).unwrap();
        let pos = f
            .create_group("particles")
            .and_then(|p| p.create_group("beads"))
            .and_then(|g| g.create_group("position"))
            .unwrap();
        pos.new_dataset_builder()
            .with_data(&x.mapv(|v| v as f32))
            .create("value")
            .unwrap();
        let time = pos.new_dataset::<f64>().create("time").unwrap();
        time.write_scalar(&0.5).unwrap();
        time.new_attr::<f64>()
            .create("offset")
            .unwrap()
            .write_scalar(&2.0)
            .unwrap();
    }
    let t = Trajectory::open(&path).unwrap();
    assert!(t.run_parameters().is_none());
    let r = t.species(Some("beads")).unwrap();
    let m = r.meta();
    assert_eq!((m.frames, m.particles), (12, 2));
    assert_eq!(m.times_s[0], 2.0);
    assert_eq!(m.times_s[11], 2.0 + 11.0 * 0.5);
    assert_eq!(m.frame_interval_s, 0.5);
    assert_eq!(m.d0_m2_per_s, None);
    assert!(!m.truncated && !m.has_images);
    assert_eq!(m.simulation_box.edges_nm, None);
}

#[test]
fn non_uniform_frame_times_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("uneven.h5");
    let x = gaussian_walks(10, 5, 2, 1e6, 1e-6);
    {
        let f = hdf5::File::create(&path).unwrap();
        let pos = f
            .create_group("particles")
            .and_then(|p| p.create_group("beads"))
            .and_then(|g| g.create_group("position"))
            .unwrap();
        pos.new_dataset_builder()
            .with_data(&x)
            .create("value")
            .unwrap();
        let times = ndarray::Array1::from(vec![0.0, 1.0, 2.0, 4.0, 5.0]);
        pos.new_dataset_builder()
            .with_data(&times)
            .create("time")
            .unwrap();
    }
    let t = Trajectory::open(&path).unwrap();
    let e = t.species(None).unwrap_err();
    assert!(
        matches!(e.kind(), ErrorKind::BadValue { object, .. } if object.ends_with("position/time")),
        "{e}"
    );
    assert!(e.to_string().contains("at frame 1"), "{e}");
}

/// Regression (#11): one corrupted image count made D_eff/D0 = 4e15 with
/// exit 0. An MSD analysis now refuses the file, naming the frame and the
/// particle; the intact file analyses normally (D_eff near the walk's D, an
/// outside value: the Gaussian walks' own diffusivity).
#[test]
fn a_corrupted_image_count_is_refused_with_its_frame_and_particle() {
    use thicket_analysis::error::ErrorKind;
    use thicket_analysis::estimators::{analyze, AnalyzeOptions};
    let dir = tempfile::tempdir().unwrap();
    let edges = [200.0, 200.0, 200.0];
    let unwrapped = gaussian_walks(11, 120, 40, 1e6, 1e-3);
    let (wrapped, mut images) = wrap(&unwrapped, edges);
    let intact = dir.path().join("intact.h5");
    let mut spec = Spec::new("tracer", &wrapped, 1e-3);
    spec.images = Some(&images);
    spec.edges_nm = edges;
    spec.parameters = Some((1e-12, 120));
    write_h5md(&intact, &spec);
    let ok = analyze(&intact, None, &AnalyzeOptions::default()).unwrap();
    assert!((ok.report.d_eff_m2_per_s / 1e-12 - 1.0).abs() < 0.3);

    images[[57, 13, 1]] += 1000;
    let broken = dir.path().join("broken.h5");
    let mut spec = Spec::new("tracer", &wrapped, 1e-3);
    spec.images = Some(&images);
    spec.edges_nm = edges;
    spec.parameters = Some((1e-12, 120));
    write_h5md(&broken, &spec);
    let err = analyze(&broken, None, &AnalyzeOptions::default()).unwrap_err();
    assert!(matches!(err.kind(), ErrorKind::BadValue { .. }), "{err}");
    let text = err.to_string();
    assert!(
        text.contains("image/value")
            && text.contains("frames 56 and 57")
            && text.contains("particle 13"),
        "{text}"
    );
}
