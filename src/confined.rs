//! `thicket analyze` and `thicket run` for confined files: the membrane
//! report in place of the MSD report, and the partition coefficient and
//! density profile beside it for slits, pores and obstacles.

use anyhow::{Context, Result};
use std::path::{Path, PathBuf};
use thicket_analysis::membrane::{analyze_membrane, membrane_of, MembraneAnalysis};
use thicket_analysis::profile::{analyze_partition, PartitionAnalysis};
use thicket_analysis::report::stored_scenario;

/// Path of the profile CSV written beside the plots of `prefix`.
pub fn profile_csv_path(prefix: &Path) -> PathBuf {
    let mut name = prefix.as_os_str().to_owned();
    name.push("_profile.csv");
    PathBuf::from(name)
}

/// Refuses a `--plot` prefix whose profile CSV exists unless `force`
/// (nothing is written then).
fn check_free(prefix: Option<&Path>, force: bool) -> Result<()> {
    if let Some(p) = prefix.map(profile_csv_path).filter(|_| !force) {
        anyhow::ensure!(
            !p.exists(),
            "{} exists already; remove it or choose another --plot prefix",
            p.display()
        );
    }
    Ok(())
}

/// True when `file` holds a thicket membrane run.
pub fn is_membrane(file: &Path) -> bool {
    stored_scenario(file).is_some_and(|s| membrane_of(&s).is_some())
}

/// The membrane report of `file` (table or JSON), with the profile CSV when `plot` is given.
pub fn membrane_report(
    file: &Path,
    species: Option<&str>,
    plot: Option<&Path>,
    as_json: bool,
    force: bool,
) -> Result<()> {
    check_free(plot, force)?;
    let mut report = analyze_membrane(file, species)
        .with_context(|| format!("analysing membrane file {}", file.display()))?;
    if let Some(prefix) = plot {
        let path = profile_csv_path(prefix);
        if force && path.exists() {
            // --force was checked by the caller: the profile may be replaced.
            std::fs::remove_file(&path).with_context(|| format!("replacing {}", path.display()))?;
        }
        report.write_profile_csv(&path)?;
        report.profile_csv = Some(path);
        let fig = thicket_analysis::curves::membrane_profile_figure(&report);
        for p in thicket_analysis::curves::write_profile_plot(prefix, &fig)? {
            eprintln!("wrote {}", p.display());
        }
    }
    if as_json {
        println!("{}", serde_json::to_string_pretty(&report)?);
    } else {
        print!("{}", report.to_table());
        println!("{}", thicket_analysis::sweep::CAUTION);
    }
    Ok(())
}

/// Partition and profile of a slit, pore or obstacle file (`None` for
/// others), with the profile CSV written when `plot` is given.
pub fn partition_report(
    file: &Path,
    species: Option<&str>,
    plot: Option<&Path>,
    force: bool,
) -> Result<Option<PartitionAnalysis>> {
    let Some(mut report) = analyze_partition(file, species)
        .with_context(|| format!("measuring the partition coefficient in {}", file.display()))?
    else {
        return Ok(None);
    };
    if let Some(prefix) = plot {
        check_free(Some(prefix), force)?;
        let path = profile_csv_path(prefix);
        if force && path.exists() {
            // --force was checked by the caller: the profile may be replaced.
            std::fs::remove_file(&path).with_context(|| format!("replacing {}", path.display()))?;
        }
        report.write_profile_csv(&path)?;
        report.profile_csv = Some(path);
        let fig = thicket_analysis::curves::partition_profile_figure(&report);
        for p in thicket_analysis::curves::write_profile_plot(prefix, &fig)? {
            eprintln!("wrote {}", p.display());
        }
    }
    Ok(Some(report))
}

/// After a membrane run: the steady-state summary, per species, from the
/// same analysis `thicket analyze` prints.
pub fn print_membrane_summary(out: &Path, species: &[String]) {
    for name in species {
        match analyze_membrane(out, Some(name)) {
            Ok(r) => print!("{}", run_summary(&r)),
            Err(e) => println!("  {name}: no steady-state membrane results ({e})"),
        }
    }
}

/// The few lines `thicket run` prints.
fn run_summary(r: &MembraneAnalysis) -> String {
    let mut s = format!(
        "  {} (steady state {:.3e}..{:.3e} s; model estimates, 95 % intervals; `thicket analyze {}` for the full report):\n",
        r.species,
        r.window_s[0],
        r.window_s[1],
        r.file.display()
    );
    s.push_str(&format!(
        "    net flux through the slab, particles/s   {}\n",
        r.flux_particles_per_s.describe(4)
    ));
    if r.filtration.is_some() {
        s.push_str("    membrane permeability                    not measured under filtration (run the membrane without [flow] and a clean permeate)\n");
    } else {
        s.push_str(&format!(
            "    membrane permeability, m/s               {}\n",
            r.permeability_m_per_s.describe(4)
        ));
        if let Some(st) = r.steric_permeability_m_per_s {
            s.push_str(&format!(
                "      steric model with pore ends, m/s       {st:.4e}\n"
            ));
        }
        s.push_str(&format!(
            "    hindrance H = P L / (eps D0)             {}\n",
            r.hindrance.describe_fixed(4)
        ));
    }
    s.push_str(&format!(
        "    partition K (pores / mean bath)          {}{}\n",
        r.partition.describe_fixed(4),
        if r.filtration.is_some() {
            "  (under flow: not the equilibrium value)"
        } else {
            ""
        }
    ));
    s.push_str(&format!(
        "    steric partition coefficient             {:.4}\n",
        r.partition_steric
    ));
    if let Some(f) = &r.filtration {
        s.push_str(&format!(
            "    sieving coefficient S                    {}\n",
            f.sieving_coefficient.describe_fixed(4)
        ));
        for m in &f.models {
            s.push_str(&format!(
                "      {:.4} at Pe = {:.3}: {}\n",
                m.sieving_coefficient, m.peclet, m.name
            ));
        }
        s.push_str(&format!(
            "    diffusive permeability, m/s              {}  (inferred from the transmissions through Deen's pore equation)\n",
            f.diffusive_permeability_inferred_m_per_s.describe(4)
        ));
    }
    s
}
