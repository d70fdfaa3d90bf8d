//! Outputs that fit the field's tools: plot ticks where their labels say,
//! tables that pandas reads as they are, progress in logs.

use crate::support::*;

/// Parses a tick label such as "2·10⁻⁵", "10³" or "0.25".
fn tick_value(label: &str) -> f64 {
    if let Some(pos) = label.find("10") {
        let (mantissa, power) = label.split_at(pos);
        let digits: String = power[2..]
            .chars()
            .map(|c| match c {
                '⁻' => '-',
                '⁰' => '0',
                '¹' => '1',
                '²' => '2',
                '³' => '3',
                '⁴' => '4',
                '⁵' => '5',
                '⁶' => '6',
                '⁷' => '7',
                '⁸' => '8',
                '⁹' => '9',
                other => other,
            })
            .collect();
        if let Ok(k) = digits.parse::<i32>() {
            let m = mantissa.trim_end_matches('·');
            let m: f64 = if m.is_empty() {
                1.0
            } else {
                m.parse().unwrap()
            };
            return m * 10f64.powi(k);
        }
    }
    label.parse().unwrap()
}

/// (x position, label) of every labelled x tick in an SVG written by thicket.
fn svg_ticks(svg: &str) -> Vec<(f64, String)> {
    svg.lines()
        .filter(|l| l.contains(r#"class="xtick""#))
        .map(|l| {
            let x = l.split(r#"x1=""#).nth(1).unwrap();
            let x: f64 = x[..x.find('"').unwrap()].parse().unwrap();
            let label = l.split('>').nth(2).unwrap();
            let label = label[..label.find('<').unwrap()].to_string();
            (x, label)
        })
        .collect()
}

/// Asserts that tick positions are an affine function of the labels'
/// values (of their logarithm on a log axis), to 0.05 px: each label sits
/// exactly where its value belongs.
fn assert_ticks_consistent(ticks: &[(f64, String)], log: bool) {
    assert!(ticks.len() >= 3, "too few ticks: {ticks:?}");
    let pts: Vec<(f64, f64)> = ticks
        .iter()
        .map(|(x, l)| {
            let v = tick_value(l);
            (if log { v.log10() } else { v }, *x)
        })
        .collect();
    let (u0, x0) = pts[0];
    let (u1, x1) = pts[pts.len() - 1];
    let slope = (x1 - x0) / (u1 - u0);
    for (u, x) in &pts {
        let expected = x0 + slope * (u - u0);
        assert!(
            (x - expected).abs() < 0.05,
            "tick at {x} labelled for {expected}: {ticks:?}"
        );
    }
}

/// On log and linear axes every tick label equals its tick's position
/// (read back from the SVG), and the PNG, rasterised from the same SVG,
/// has its tick marks at the same pixel columns.
#[test]
fn tick_labels_sit_where_their_values_belong() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    ok(&thicket(
        dir.path(),
        &[
            "run",
            cfg.to_str().unwrap(),
            "--out",
            "f.h5",
            "--set",
            "species.bead.count=100",
            "--set",
            "integrator.steps=4000",
            "--set",
            "output.record_every_steps=20",
        ],
    ));
    ok(&thicket(dir.path(), &["analyze", "f.h5", "--plot", "f"]));
    // Plots are never overwritten without --force, and a refusal writes nothing.
    let before = std::fs::read(dir.path().join("f_msd.png")).unwrap();
    let again = thicket(dir.path(), &["analyze", "f.h5", "--plot", "f"]);
    assert!(!again.status.success() && stderr(&again).contains("f_msd.svg"));
    assert_eq!(std::fs::read(dir.path().join("f_msd.png")).unwrap(), before);
    ok(&thicket(
        dir.path(),
        &["analyze", "f.h5", "--plot", "f", "--force"],
    ));
    for name in ["f_msd", "f_alpha"] {
        let svg = std::fs::read_to_string(dir.path().join(format!("{name}.svg"))).unwrap();
        let ticks = svg_ticks(&svg);
        assert_ticks_consistent(&ticks, true);
        // Labels at 1, 2 and 5 times powers of ten only.
        for (_, l) in &ticks {
            let v = tick_value(l);
            let m = v / 10f64.powf(v.log10().floor());
            assert!([1.0, 2.0, 5.0].iter().any(|k| (m - k).abs() < 1e-9), "{l}");
        }
        let png = image::open(dir.path().join(format!("{name}.png")))
            .unwrap()
            .to_luma8();
        // The plot frame's bottom edge: the lowest row dark across most of the width (anti-aliased lines are grey).
        let (w, h) = png.dimensions();
        let frame_row = (0..h)
            .rev()
            .find(|&y| (0..w).filter(|&x| png.get_pixel(x, y)[0] < 180).count() > w as usize / 2)
            .expect("the PNG has a plot frame");
        for (x, l) in &ticks {
            let col = x.round() as u32;
            let dark =
                (col.saturating_sub(1)..=col + 1).any(|c| png.get_pixel(c, frame_row + 3)[0] < 200);
            assert!(dark, "{name}.png: no tick mark at column {col} for {l}");
        }
    }
    // The van Hove plot has a linear axis.
    let svg = std::fs::read_to_string(dir.path().join("f_van_hove.svg")).unwrap();
    assert_ticks_consistent(&svg_ticks(&svg), false);
}

/// pandas, the outside reader, reads summary.csv and the curve tables with
/// default options and finds their numbers numeric.
#[test]
fn pandas_reads_the_tables_as_they_are() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    std::fs::write(
        dir.path().join("sweep.toml"),
        format!(
            "scenario = {:?}\nseeds = [1, 2]\n[grid]\n\"species.bead.radius_nm\" = [2.0, 4.0]\n[set]\n\"integrator.steps\" = 2000\n\"species.bead.count\" = 100\n\"output.record_every_steps\" = 20\n",
            cfg.file_name().unwrap().to_str().unwrap()
        ),
    )
    .unwrap();
    ok(&thicket(
        dir.path(),
        &["sweep", "sweep.toml", "--out", "sw"],
    ));
    ok(&thicket(
        dir.path(),
        &["analyze", "sw/runs/p0000_s1.h5", "--plot", "c"],
    ));
    let files = ["sw/summary.csv", "c_msd.csv", "c_van_hove.csv"].map(|f| dir.path().join(f));
    let args: Vec<&str> = files.iter().map(|p| p.to_str().unwrap()).collect();
    let Some(r) = python_json("pandas_check.py", &args) else {
        return;
    };
    let summary = &r[args[0]];
    assert_eq!(summary["rows"], 2);
    for col in [
        "d_eff_over_d0",
        "d_eff_m2_per_s",
        "alpha_long",
        "fit_window_t0_s",
        "species.bead.radius_nm",
    ] {
        assert!(
            summary["numeric"]
                .as_array()
                .unwrap()
                .iter()
                .any(|c| c == col),
            "{col} is not numeric: {summary}"
        );
    }
    // Every column name is plain: no spaces, no colons.
    for c in summary["columns"].as_array().unwrap() {
        let c = c.as_str().unwrap();
        assert!(!c.contains(' ') && !c.contains(':'), "column name '{c}'");
    }
    let msd = &r[args[1]];
    assert!(msd["rows"].as_u64().unwrap() >= 10);
    assert_eq!(
        msd["numeric"], msd["columns"],
        "every curve column is numeric"
    );
    let vh = &r[args[2]];
    assert!(vh["rows"].as_u64().unwrap() >= 100);
    for col in [
        "lag_s",
        "displacement_nm",
        "density_per_nm",
        "gaussian_density_per_nm",
    ] {
        assert!(vh["numeric"].as_array().unwrap().iter().any(|c| c == col));
    }
}

/// Outside a terminal `run` prints plain progress lines, at least one per
/// tenth of the run.
#[test]
fn progress_reaches_logs_every_tenth() {
    let dir = tempdir();
    let cfg = free_config(dir.path());
    let out = thicket(
        dir.path(),
        &[
            "run",
            cfg.to_str().unwrap(),
            "--out",
            "p.h5",
            "--set",
            "species.bead.count=50",
            "--set",
            "integrator.steps=2000",
            "--set",
            "output.record_every_steps=20",
        ],
    );
    ok(&out);
    let err = stderr(&out);
    let lines: Vec<&str> = err
        .lines()
        .filter(|l| l.starts_with("run:") && l.contains('%'))
        .collect();
    assert!(lines.len() >= 10, "progress lines:\n{err}");
    assert!(lines.last().unwrap().contains("100%"), "{err}");
}

// A binding run: `check` prints the model's K and the fast-exchange ratio,
// `analyze` the measured bound fraction, the dwell-time test and the
// fast-exchange caveat, in text and JSON.
#[test]
fn binding_is_checked_and_analysed() {
    let dir = tempdir();
    let config = repo("configs/sticky-fibres.toml");
    let cfg = config.to_str().unwrap();
    let check = ok(&thicket(dir.path(), &["check", cfg]));
    assert!(check.contains("K = N_bound/N_free = p_on/p_off"), "{check}");
    assert!(
        check.contains("fast-exchange D_eff/D_free = 1/(1+K)"),
        "{check}"
    );
    let sets = [
        "--set",
        "species.stickybead.count=200",
        "--set",
        "integrator.steps=20000",
        "--set",
        "output.record_every_steps=500",
    ];
    let mut args = vec!["run", cfg, "--out", "s.h5"];
    args.extend(sets);
    ok(&thicket(dir.path(), &args));
    let text = ok(&thicket(dir.path(), &["analyze", "s.h5"]));
    for needle in [
        "binding of 'stickybead'",
        "bound fraction",
        "KS D =",
        "fast exchange",
        "applies only when binding and release are fast",
    ] {
        assert!(text.contains(needle), "{needle:?} missing: {text}");
    }
    let json: serde_json::Value =
        serde_json::from_str(&ok(&thicket(dir.path(), &["analyze", "s.h5", "--json"]))).unwrap();
    let b = &json["binding"];
    assert!(b["events"].as_u64().unwrap() > 0, "{b}");
    assert!(b["predicted_k"][0].as_f64().unwrap() > 0.0, "{b}");
}

// A charged crowd: `check` prints each pair's B₂ of the model; `analyze`
// refuses a B₂ where the centres' neighbourhoods overlap (and says why),
// gives one for a single centre among ideal probes, and `--plot` writes g(r)
// beside e^(−U/k_BT) as CSV; JSON carries the same.
#[test]
fn pair_interactions_are_checked_and_analysed() {
    let dir = tempdir();
    let config = repo("configs/charged-crowd.toml");
    let cfg = config.to_str().unwrap();
    let check = ok(&thicket(dir.path(), &["check", cfg]));
    assert!(check.contains("pairs      'sorrel'–'bead'"), "{check}");
    assert!(check.contains("second virial coefficient"), "{check}");
    let short = [
        "--set",
        "integrator.steps=2000",
        "--set",
        "output.record_every_steps=50",
    ];
    let mut args = vec!["run", cfg, "--out", "crowd.h5"];
    args.extend(short);
    ok(&thicket(dir.path(), &args));
    let text = ok(&thicket(dir.path(), &["analyze", "crowd.h5"]));
    assert!(
        text.contains("interactions between particles of 'sorrel'"),
        "{text}"
    );
    assert!(text.contains("B₂ not measured"), "{text}");
    // One bead among ideal probes: the exact case.
    let mut args = vec![
        "run",
        cfg,
        "--out",
        "one.h5",
        "--set",
        "species.bead.count=1",
        "--set",
        "species.sorrel.count=3000",
    ];
    args.extend(short);
    ok(&thicket(dir.path(), &args));
    let text = ok(&thicket(
        dir.path(),
        &["analyze", "one.h5", "--plot", "one"],
    ));
    assert!(text.contains("exact for the model"), "{text}");
    let csv = std::fs::read_to_string(dir.path().join("one_pairs.csv")).unwrap();
    assert!(
        csv.starts_with(
            "centre,partner,r_lo_nm,r_hi_nm,mean_count,mean_count_se,g,g_low_density_model\n"
        ),
        "{csv}"
    );
    assert_eq!(
        csv.lines().count(),
        1 + thicket_analysis::pairs::PAIR_SHELLS
    );
    let json: serde_json::Value =
        serde_json::from_str(&ok(&thicket(dir.path(), &["analyze", "one.h5", "--json"]))).unwrap();
    let p = &json["pairs"]["pairs"][0];
    assert!(p["exact"].as_bool().unwrap(), "{p}");
    assert!(
        p["model_second_virial_nm3"].as_f64().unwrap() > 3000.0,
        "{p}"
    );
    assert!(p["second_virial_nm3"][1].as_f64().unwrap() > 0.0, "{p}");
}
