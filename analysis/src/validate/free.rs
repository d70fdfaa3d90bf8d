//! Free diffusion through the whole pipeline (run → HDF5 → analyze), and the
//! solvent: Stokes–Einstein and the water viscosity table.

use super::{check, Area, Group, Mode, Outcome};
use crate::estimators::{analyze, AnalyzeOptions};
use std::path::Path;
use std::sync::atomic::AtomicBool;
use thicket_engine::base::medium::{stokes_einstein_m2_per_s, water_viscosity_pa_s};
use thicket_engine::run::driver::{run, RunOptions};
use thicket_engine::Scenario;

/// Two-sided 95 % normal quantile: converts the report's interval to an SE.
const Z95: f64 = 1.959_963_984_540_054;

pub(super) fn groups() -> Vec<Group> {
    vec![
        Group {
            area: Area::Free,
            title: "free diffusion through run and analyze",
            source: "Einstein (1905); Stokes–Einstein",
            run: free_diffusion,
        },
        Group {
            area: Area::Free,
            title: "Stokes–Einstein and water viscosity",
            source: "REFERENCES.md worked values; IAPWS 2008 / CRC Handbook",
            run: solvent,
        },
    ]
}

/// Runs a scenario given as text into `dir` with the real driver and
/// analyses species `species` with the real estimator; returns
/// (D_eff/D0, its standard error from the reported 95 % interval).
pub(super) fn measure(
    dir: &Path,
    name: &str,
    text: &str,
    species: &str,
) -> Result<(f64, f64), String> {
    let scenario = Scenario::from_text(text, Path::new(name), &[]).map_err(|e| e.to_string())?;
    let out = dir.join(format!("{name}.h5"));
    let options = RunOptions {
        out: out.clone(),
        force: true,
        resume: false,
    };
    run(&scenario, &options, &AtomicBool::new(false), &mut |_, _| {}).map_err(|e| e.to_string())?;
    let report = analyze(&out, Some(species), &AnalyzeOptions::default())
        .map_err(|e| e.to_string())?
        .report;
    let _ = std::fs::remove_file(&out);
    let d0 = report.d0_m2_per_s.ok_or("no D0 in the file")?;
    let [lo, hi] = report.d_eff_ci95_m2_per_s;
    Ok((report.d_eff_m2_per_s / d0, (hi - lo) / (2.0 * Z95) / d0))
}

fn free_diffusion(mode: Mode, dir: &Path) -> Outcome {
    let (count, steps) = mode.pick((2000, 20_000), (4000, 60_000));
    let text = format!(
        "seed = 7\n[medium]\ntemperature_K = 298.15\n[box]\nedges_nm = [400.0, 400.0, 400.0]\n\
         [[species]]\nname = \"bead\"\nradius_nm = 4.0\ncount = {count}\n[integrator]\ndt_s = 5e-10\nsteps = {steps}\n\
         [output]\nrecord_every_steps = {}\n",
        steps / 100
    );
    let (ratio, se) = measure(dir, "free", &text, "bead")?;
    Ok(vec![check(
        "free diffusion, a = 4 nm in water at 25 °C: D_eff/D0",
        "Einstein (1905) MSD = 6 D t, D0 = k_B T/(6π η a) (Stokes–Einstein); REFERENCES.md",
        1.0,
        ratio,
        se,
    )
    .standard_errors(4.0)])
}

fn solvent(_mode: Mode, _dir: &Path) -> Outcome {
    let mut out = Vec::new();
    // REFERENCES.md worked values: D0 from k_B (exact) and the table η, printed to 4–5 figures.
    for (a_nm, t, eta, printed) in [
        (1.0, 298.15, 0.8900e-3, 2.4537e-10),
        (3.5, 310.15, 0.6913e-3, 9.389e-11),
    ] {
        let d = stokes_einstein_m2_per_s(t, eta, a_nm * 1e-9);
        out.push(
            check(
                format!(
                    "Stokes–Einstein D0, a = {a_nm} nm, T = {t} K, η = {:.4} mPa·s, m²/s",
                    eta * 1e3
                ),
                "Stokes–Einstein D0 = k_B T/(6π η a), k_B exact (SI 2019); REFERENCES.md",
                printed,
                d,
                0.0,
            )
            .printed(
                1e-4 * printed,
                "half a unit in the last printed digit (1e-4 relative)",
            ),
        );
    }
    // The correlation the engine uses, against handbook rows; REFERENCES.md states it holds within about 1 %.
    for (t, c, table) in [(298.15, 25, 0.8900e-3), (310.15, 37, 0.6913e-3)] {
        let eta = water_viscosity_pa_s(t).ok_or("no viscosity in the liquid range")?;
        out.push(
            check(
                format!("water viscosity at {c} °C, mPa·s"),
                "IAPWS 2008 / CRC Handbook table (from memory); REFERENCES.md",
                table * 1e3,
                eta * 1e3,
                0.0,
            )
            .printed(
                0.01 * table * 1e3,
                "1 %: the stated accuracy of the Vogel-type correlation",
            ),
        );
    }
    Ok(out)
}
