//! Plot files: both formats written, SVG always with text.

mod common;

use common::{gaussian_walks, write_h5md, Spec};
use thicket_analysis::estimators::{analyze, AnalyzeOptions};
use thicket_analysis::plot::{alpha_figure, msd_figure, render_png, render_svg, write_plots};

const PNG_SIGNATURE: [u8; 8] = [0x89, b'P', b'N', b'G', b'\r', b'\n', 0x1a, b'\n'];

#[test]
fn writes_svg_and_png_for_msd_and_alpha() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("walk.h5");
    let x = gaussian_walks(2, 150, 8, 1e6, 1e-3);
    let mut spec = Spec::new("tracer", &x, 1e-3);
    spec.parameters = Some((1e-12, 150));
    spec.periodic = [false; 3];
    write_h5md(&path, &spec);
    let a = analyze(&path, None, &AnalyzeOptions::default()).unwrap();
    let prefix = dir.path().join("out");
    let files = write_plots(&prefix, &a.msd, &a.report).unwrap();
    let names: Vec<String> = files
        .iter()
        .map(|p| p.file_name().unwrap().to_string_lossy().into_owned())
        .collect();
    assert_eq!(
        names,
        [
            "out_msd.svg",
            "out_msd.png",
            "out_alpha.svg",
            "out_alpha.png"
        ]
    );
    for f in &files {
        let bytes = std::fs::read(f).unwrap();
        if f.extension().unwrap() == "png" {
            assert_eq!(bytes[..8], PNG_SIGNATURE, "{}", f.display());
        } else {
            let svg = String::from_utf8(bytes).unwrap();
            assert!(svg.starts_with("<svg") && svg.trim_end().ends_with("</svg>"));
            assert!(
                svg.contains("<text") && svg.contains("lag τ / s"),
                "SVG must carry its labels"
            );
        }
    }
    let msd_svg = std::fs::read_to_string(&files[0]).unwrap();
    assert!(msd_svg.contains("6·D0") && msd_svg.contains("fit window"));
    let alpha_svg = std::fs::read_to_string(&files[2]).unwrap();
    assert!(alpha_svg.contains("α = 1"));

    // The PNG path without a font (no text at all) must also work.
    let bare = dir.path().join("bare.png");
    render_png(&alpha_figure(&a.msd, &a.report), &bare, false).unwrap();
    assert_eq!(std::fs::read(&bare).unwrap()[..8], PNG_SIGNATURE);
    // A figure renders the same SVG twice (no hidden state).
    let fig = msd_figure(&a.msd, &a.report);
    assert_eq!(render_svg(&fig), render_svg(&fig));
}

#[test]
fn unwritable_prefix_is_an_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("walk.h5");
    let x = gaussian_walks(3, 120, 4, 1e6, 1e-3);
    write_h5md(&path, &Spec::new("tracer", &x, 1e-3));
    let a = analyze(&path, None, &AnalyzeOptions::default()).unwrap();
    let e = write_plots(dir.path().join("no/such/dir/out"), &a.msd, &a.report).unwrap_err();
    assert!(e.to_string().contains("out_msd.svg"), "{e}");
}
