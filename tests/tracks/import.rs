//! Tracks from other pipelines: the same detections in another layout
//! (other column names and order, µm, pixels, seconds, milliseconds, frame
//! numbers with a frame interval, no header) give the same per-track
//! estimates as thicket's own layout (an exact identity up to rounding); the
//! per-track table reads in pandas; its covariance D recovers the true D0;
//! bad options and cells are refused with the file, option, value and what
//! is allowed.

use std::path::{Path, PathBuf};
use std::process::Command;

use crate::support::{fails, ok, repo, tempdir, thicket, write_scenario};

/// Simulates a small free-diffusion movie and returns its CSV (with the
/// truth file beside it): 20 particles, 20 frames.
fn small_movie(dir: &Path) -> PathBuf {
    let scenario = write_scenario(
        dir,
        [3000.0, 3000.0, 3000.0],
        20,
        1e-12,
        0.001,
        200,
        "frame_interval_s = 0.01\nexposure_s = 0.006\nlocalisation_sigma_nm = 20.0",
    );
    ok(&thicket(
        dir,
        &["tracks", scenario.to_str().unwrap(), "--out", "movie.csv"],
    ));
    dir.join("movie.csv")
}

/// Rows (track, frame, time s, x nm, y nm) of thicket's own CSV.
fn own_rows(csv: &Path) -> Vec<(i64, i64, f64, f64, f64)> {
    let text = std::fs::read_to_string(csv).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some("track_id,frame,time_s,x_nm,y_nm"));
    lines
        .map(|l| {
            let f: Vec<&str> = l.split(',').collect();
            (
                f[0].parse().unwrap(),
                f[1].parse().unwrap(),
                f[2].parse().unwrap(),
                f[3].parse().unwrap(),
                f[4].parse().unwrap(),
            )
        })
        .collect()
}

/// The per-track table: header and rows of optional numbers.
fn table(path: &Path) -> (Vec<String>, Vec<Vec<Option<f64>>>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap().split(',').map(String::from).collect();
    let rows = lines
        .map(|l| l.split(',').map(|f| f.parse::<f64>().ok()).collect())
        .collect();
    (header, rows)
}

/// Asserts two per-track tables agree to rounding: ids and counts exactly,
/// estimates to 1e-9 of their scale over the file.
fn same_tables(a: &Path, b: &Path) {
    let (ha, ra) = table(a);
    let (hb, rb) = table(b);
    assert_eq!(ha, hb);
    assert_eq!(ra.len(), rb.len());
    assert!(ra.len() >= 10, "too few tracks: {}", ra.len());
    for c in 0..ha.len() {
        let scale = ra
            .iter()
            .filter_map(|r| r[c])
            .fold(0.0f64, |m, v| m.max(v.abs()));
        for (x, y) in ra.iter().zip(&rb) {
            match (x[c], y[c]) {
                (Some(p), Some(q)) => assert!(
                    (p - q).abs() <= 1e-9 * scale,
                    "{}: {p} vs {q} (track {:?})",
                    ha[c],
                    x[0]
                ),
                (p, q) => assert_eq!(p.is_some(), q.is_some(), "{}: {p:?} vs {q:?}", ha[c]),
            }
        }
    }
    let defined = ra.iter().filter(|r| r[3].is_some()).count();
    assert!(defined >= 10, "too few covariance estimates: {defined}");
}

/// thicket's own CSV copied without its truth file, analysed with the
/// camera's exposure, writing `own_tracks.csv`.
fn own_table(dir: &Path, csv: &Path) -> PathBuf {
    std::fs::copy(csv, dir.join("own.csv")).unwrap();
    ok(&thicket(
        dir,
        &[
            "analyze",
            "own.csv",
            "--exposure",
            "0.006",
            "--tracks-table",
            "own_tracks.csv",
        ],
    ));
    dir.join("own_tracks.csv")
}

// Identity: positions in µm, times in s, other names and order, an extra
// text column and a units row give the same per-track D and σ² as nm.
#[test]
fn another_layout_in_micrometres_gives_the_same_estimates() {
    let dir = tempdir();
    let csv = small_movie(dir.path());
    let own = own_table(dir.path(), &csv);
    let mut text = String::from("POSITION_Y,TRACK,LABEL,POSITION_T,POSITION_X\num,,,s,um\n");
    // Reverse row order: the reader must not rely on sorted rows.
    for (id, _, t, x, y) in own_rows(&csv).into_iter().rev() {
        text.push_str(&format!(
            "{},{id},spot {id},{t},{}\n",
            y / 1000.0,
            x / 1000.0
        ));
    }
    std::fs::write(dir.path().join("other.csv"), text).unwrap();
    let out = ok(&thicket(
        dir.path(),
        &[
            "analyze",
            "other.csv",
            "--columns",
            "track=TRACK,time=POSITION_T,x=POSITION_X,y=POSITION_Y",
            "--length-unit",
            "um",
            "--skip-rows",
            "1",
            "--exposure",
            "0.006",
            "--tracks-table",
            "other_tracks.csv",
        ],
    ));
    // The frame interval is recovered from the times; R = t_E/(6Δt) = 0.1 (Berglund 2010).
    assert!(
        out.contains("frame interval 1e-2 s")
            && out.contains("R = 0.1000")
            && out.contains("µm²/s")
            && out.contains("quartiles")
            && !out.contains("bias"),
        "{out}"
    );
    same_tables(&own, &dir.path().join("other_tracks.csv"));
}

// Identity: pixels of a given size, frame numbers with a frame interval and
// no header (columns by number), and times in ms, give the same as nm.
#[test]
fn pixels_and_milliseconds_give_the_same_estimates() {
    let dir = tempdir();
    let csv = small_movie(dir.path());
    let own = own_table(dir.path(), &csv);
    let pixel = 107.5;
    let rows = own_rows(&csv);
    let mut headerless = String::new();
    let mut ms = String::from("Frame,Track,T_ms,X_px,Y_px\n");
    for &(id, f, t, x, y) in &rows {
        headerless.push_str(&format!("{f},{id},{},{}\n", x / pixel, y / pixel));
        ms.push_str(&format!(
            "{f},{id},{},{},{}\n",
            t * 1000.0,
            x / pixel,
            y / pixel
        ));
    }
    std::fs::write(dir.path().join("px.csv"), headerless).unwrap();
    std::fs::write(dir.path().join("ms.csv"), ms).unwrap();
    ok(&thicket(
        dir.path(),
        &[
            "analyze",
            "px.csv",
            "--columns",
            "track=2,frame=1,x=3,y=4",
            "--length-unit",
            "px",
            "--pixel-size",
            "107.5",
            "--frame-interval",
            "0.01",
            "--exposure",
            "0.006",
            "--tracks-table",
            "px_tracks.csv",
        ],
    ));
    same_tables(&own, &dir.path().join("px_tracks.csv"));
    ok(&thicket(
        dir.path(),
        &[
            "analyze",
            "ms.csv",
            "--columns",
            "track=Track,frame=Frame,time=T_ms,x=X_px,y=Y_px",
            "--length-unit",
            "px",
            "--pixel-size",
            "107.5",
            "--time-unit",
            "ms",
            "--exposure",
            "0.006",
            "--tracks-table",
            "ms_tracks.csv",
        ],
    ));
    same_tables(&own, &dir.path().join("ms_tracks.csv"));
}

/// Runs tests/tracks/check_track_table.py with the outside checks' Python
/// (pandas provisioned with h5py, numpy and scipy; see tests/outside); None
/// when it cannot be had and the check is skipped.
fn pandas_check(table: &Path, detections: &Path) -> Option<serde_json::Value> {
    let python = crate::outside::require(crate::outside::Tool::Python)?;
    let out = Command::new(python)
        .arg(repo("tests/tracks/check_track_table.py"))
        .args([table, detections])
        .output()
        .expect("python3 runs");
    assert!(
        out.status.success(),
        "check_track_table.py failed:\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    Some(serde_json::from_slice(&out.stdout).expect("the script prints JSON"))
}

// pandas (outside reader) reads the per-track table with default options:
// every column numeric, one row per track; the covariance D over ~200
// seeded tracks of ~100 frames recovers D0 within 4.5 standard errors
// (unbiased per track: Vestergaard, Blainey & Flyvbjerg 2014). The box is
// 200 µm so few tracks leave the field (which would select slow movers).
#[test]
fn per_track_table_reads_in_pandas_and_recovers_d0() {
    let dir = tempdir();
    let scenario = write_scenario(
        dir.path(),
        [200_000.0, 200_000.0, 200_000.0],
        200,
        1e-12,
        0.001,
        1000,
        "frame_interval_s = 0.01\nlocalisation_sigma_nm = 20.0",
    );
    ok(&thicket(
        dir.path(),
        &["tracks", scenario.to_str().unwrap(), "--out", "free.csv"],
    ));
    let text = ok(&thicket(
        dir.path(),
        &["analyze", "free.csv", "--plot", "free"],
    ));
    assert!(
        text.contains("free_tracks.csv") && text.contains("free_d_hist.svg"),
        "{text}"
    );
    let svg = std::fs::read_to_string(dir.path().join("free_d_hist.svg")).unwrap();
    assert!(svg.contains("true D0 of dot"), "the histogram marks D0");
    assert!(dir.path().join("free_d_hist.png").exists());

    // pandas checks are skipped (one line, see tests/outside) when Python cannot be had.
    if let Some(r) = pandas_check(
        &dir.path().join("free_tracks.csv"),
        &dir.path().join("free.csv"),
    ) {
        for (c, numeric) in r["numeric"].as_object().unwrap() {
            assert!(
                numeric.as_bool().unwrap(),
                "column {c} is not numeric in pandas"
            );
        }
        assert!(r["columns"]
            .as_array()
            .unwrap()
            .iter()
            .any(|c| c == "d_cve_um2_per_s"));
        assert_eq!(r["rows"], r["tracks_in_detections"]);
        assert_eq!(r["positions_match"], true);
        let n = r["analysed"].as_f64().unwrap();
        assert!(n >= 150.0, "{r}");
        let (mean, sd, d0) = (
            r["d_cve_mean"].as_f64().unwrap(),
            r["d_cve_sd"].as_f64().unwrap(),
            r["d0"].as_f64().unwrap(),
        );
        assert!((d0 - 1.0).abs() < 1e-12, "D0 = 1 µm²/s, got {d0}");
        let se = sd / n.sqrt();
        assert!(
            (mean - d0).abs() < 4.5 * se,
            "mean {mean} ± {se} vs D0 {d0}"
        );
        assert!(se < 0.03 * d0, "too few tracks to see a bias: se {se}");
    }

    // Outputs are not overwritten without --force.
    let before = std::fs::read(dir.path().join("free_tracks.csv")).unwrap();
    let err = fails(&thicket(
        dir.path(),
        &["analyze", "free.csv", "--plot", "free"],
    ));
    assert!(
        err.contains("free_tracks.csv") && err.contains("--force"),
        "{err}"
    );
    assert_eq!(
        std::fs::read(dir.path().join("free_tracks.csv")).unwrap(),
        before
    );
    ok(&thicket(
        dir.path(),
        &["analyze", "free.csv", "--plot", "free", "--force", "--json"],
    ));
}

// Bad options and cells: refused with exit 2, naming the file, the option
// or column, the value and what is allowed; no output written.
#[test]
fn bad_track_import_options_are_refused() {
    let dir = tempdir();
    std::fs::write(
        dir.path().join("other.csv"),
        "TRACK,T,POSITION_X,POSITION_Y\n0,0,1.0,2.0\n0,0.01,1.1,2.1\n0,0.02,1.2,2.2\n",
    )
    .unwrap();
    let map = "track=TRACK,time=T,x=POSITION_X,y=POSITION_Y";
    let cases: &[(&[&str], &[&str])] = &[
        (
            &["--columns", map, "--length-unit", "furlong"],
            &["--length-unit", "furlong", "nm, um"],
        ),
        (
            &[
                "--columns",
                map,
                "--length-unit",
                "px",
                "--pixel-size",
                "-100",
            ],
            &["--pixel-size", "-100", "> 0"],
        ),
        (
            &["--columns", map, "--length-unit", "px"],
            &["--length-unit", "px", "--pixel-size NM"],
        ),
        (
            &["--columns", map, "--pixel-size", "100"],
            &["--pixel-size", "only with --length-unit px"],
        ),
        (
            &["--columns", map, "--time-unit", "h"],
            &["--time-unit h is not allowed", "s or ms"],
        ),
        (
            &["--columns", "track=TRACK,time=T,x=POSITION_X,y=NOPE"],
            &["--columns y=NOPE", "NOPE", "POSITION_X"],
        ),
        (
            &["--columns", "track=TRACK,when=T,x=POSITION_X,y=POSITION_Y"],
            &["--columns", "when", "keys track, frame, time, x, y, z"],
        ),
        (
            &["--columns", "track=TRACK,x=POSITION_X,y=POSITION_Y"],
            &["--columns", "neither frame", "frame or time"],
        ),
        (
            &["--columns", "track=TRACK,time=T,x=POSITION_X,y=9"],
            &["--columns y=", "9", "from 1 to 4"],
        ),
        (
            &["--columns", map, "--frame-interval", "0"],
            &["--frame-interval", "0", "> 0"],
        ),
        (
            &["--columns", map, "--exposure", "0.5"],
            &["--exposure", "5e-1", "from 0 to the frame interval"],
        ),
        (
            &["--columns", "track=TRACK,frame=T,x=POSITION_X,y=POSITION_Y"],
            &["T", "0.01", "a whole number"],
        ),
        (&[], &["header", "track_id", "--columns"]),
    ];
    for (args, parts) in cases {
        let mut all = vec!["analyze", "other.csv", "--tracks-table", "t.csv"];
        all.extend_from_slice(args);
        let err = fails(&thicket(dir.path(), &all));
        assert!(err.contains("other.csv"), "{args:?}: {err}");
        for p in *parts {
            assert!(err.contains(p), "{args:?}: missing {p:?} in {err}");
        }
        assert!(!dir.path().join("t.csv").exists(), "{args:?} wrote output");
    }

    // A cell that is not a number names its line, column and value.
    std::fs::write(
        dir.path().join("cell.csv"),
        "TRACK,T,POSITION_X,POSITION_Y\n0,0,1.0,2.0\n0,0.01,abc,2.1\n",
    )
    .unwrap();
    let err = fails(&thicket(
        dir.path(),
        &["analyze", "cell.csv", "--columns", map],
    ));
    for p in ["cell.csv", "line 3", "POSITION_X", "abc", "a finite number"] {
        assert!(err.contains(p), "missing {p:?} in {err}");
    }
    // Frame numbers without times need the frame interval.
    std::fs::write(
        dir.path().join("frames.csv"),
        "TRACK,F,POSITION_X,POSITION_Y\n0,0,1.0,2.0\n0,1,1.1,2.1\n0,2,1.2,2.2\n",
    )
    .unwrap();
    let err = fails(&thicket(
        dir.path(),
        &[
            "analyze",
            "frames.csv",
            "--columns",
            "track=TRACK,frame=F,x=POSITION_X,y=POSITION_Y",
        ],
    ));
    assert!(
        err.contains("frames.csv") && err.contains("--frame-interval"),
        "{err}"
    );
    // Header names for a file without a header.
    std::fs::write(dir.path().join("bare.csv"), "0,0,1.0,2.0\n0,1,1.1,2.1\n").unwrap();
    let err = fails(&thicket(
        dir.path(),
        &[
            "analyze",
            "bare.csv",
            "--columns",
            "track=TRACK,frame=F,x=X,y=Y",
        ],
    ));
    assert!(
        err.contains("bare.csv") && err.contains("column numbers"),
        "{err}"
    );
    // Tracks CSV options on a trajectory.
    let err = fails(&thicket(
        dir.path(),
        &["analyze", "run.h5", "--length-unit", "um"],
    ));
    assert!(
        err.contains("run.h5") && err.contains("--length-unit"),
        "{err}"
    );
}
