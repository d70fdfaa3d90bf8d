//! Memory a scenario will need, estimated before anything large is allocated.
//!
//! Sizes derived from a volume fraction (obstacles, fibres) or given as counts
//! (particles) can ask for more memory than the machine has; allocating them
//! would end in an abort. [`estimate`] adds up the large buffers from the
//! validated scenario alone, and [`check`] refuses a scenario past a limit
//! with the figure and the keys that set it.

use crate::base::error::{EngineError, Result};
use crate::scenario::config::Scenario;
use crate::scenario::media::{ObstacleSpec, Target};
use std::f64::consts::PI;
use std::sync::OnceLock;

/// A limit set by the front end (`--max-memory`), in bytes.
static USER_LIMIT: OnceLock<f64> = OnceLock::new();

/// Sets the process-wide limit every later validated scenario is held to
/// (in place of the available memory). Only the first call counts.
pub fn set_limit(bytes: f64) {
    let _ = USER_LIMIT.set(bytes);
}

/// The limit in force and where it comes from: `--max-memory` if set, else
/// the memory available now, else none.
pub fn current_limit() -> Option<(f64, &'static str)> {
    match USER_LIMIT.get() {
        Some(&b) => Some((b, "--max-memory")),
        None => available_bytes().map(|b| {
            (
                b,
                "memory available on this machine, /proc/meminfo MemAvailable",
            )
        }),
    }
}

/// Parses a size such as `512M`, `8G`, `1.5GiB` or `1000000` (bytes; K, M, G,
/// T are powers of 1024).
pub fn parse_size(text: &str) -> Option<f64> {
    let t = text.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let value: f64 = num.parse().ok()?;
    let scale = match unit.trim().to_ascii_uppercase().as_str() {
        "" | "B" => 1.0,
        "K" | "KB" | "KIB" => 1024.0,
        "M" | "MB" | "MIB" => 1024f64.powi(2),
        "G" | "GB" | "GIB" => 1024f64.powi(3),
        "T" | "TB" | "TIB" => 1024f64.powi(4),
        _ => return None,
    };
    let bytes = value * scale;
    (bytes.is_finite() && bytes > 0.0).then_some(bytes)
}

/// Bytes per free particle: positions, unwrapped positions, images, random stream, kicks.
const BYTES_PER_PARTICLE: f64 = 160.0;
/// Extra bytes per crowder: Verlet list entries (about 60 neighbours of 4 bytes), cell list.
const BYTES_PER_CROWDER: f64 = 320.0;
/// Bytes per obstacle sphere: centre and radius, placement bookkeeping.
const BYTES_PER_SPHERE: f64 = 96.0;
/// Bytes per fibre: centre, direction, placement bookkeeping.
const BYTES_PER_FIBRE: f64 = 128.0;
/// Bytes per grid entry of one obstacle image in one cell (sphere: [f64; 4]; capsule: 56).
const BYTES_PER_GRID_ENTRY: f64 = 48.0;
/// Largest number of cells an obstacle grid allocates (as in `neighbors`).
const MAX_GRID_CELLS: f64 = (1u64 << 24) as f64;
/// Grid cell edge over the excluded radius (as in `neighbors`).
const GRID_CELL_OVER_RADIUS: f64 = 0.7;

/// One large buffer and the keys that set its size.
#[derive(Debug, Clone, PartialEq)]
pub struct Item {
    /// What it holds.
    pub what: String,
    /// Estimated bytes.
    pub bytes: f64,
    /// Scenario keys that change it.
    pub keys: String,
}

/// Estimated peak memory of a run, by buffer.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Estimate {
    /// The large buffers.
    pub items: Vec<Item>,
}

impl Estimate {
    /// Sum over the buffers, in bytes (f64: a request may exceed any integer type).
    pub fn total_bytes(&self) -> f64 {
        self.items.iter().map(|i| i.bytes).sum()
    }

    /// The largest buffer, if any.
    pub fn largest(&self) -> Option<&Item> {
        self.items.iter().max_by(|a, b| a.bytes.total_cmp(&b.bytes))
    }
}

/// Human-readable size (binary units).
pub fn format_bytes(bytes: f64) -> String {
    const UNITS: [&str; 7] = ["B", "KiB", "MiB", "GiB", "TiB", "PiB", "EiB"];
    if !bytes.is_finite() {
        return "an unbounded amount".into();
    }
    let mut v = bytes;
    let mut u = 0;
    while v >= 1024.0 && u + 1 < UNITS.len() {
        v /= 1024.0;
        u += 1;
    }
    if u + 1 == UNITS.len() && v >= 1024.0 {
        return format!("{bytes:.3e} B");
    }
    format!("{v:.1} {}", UNITS[u])
}

/// Memory the kernel reports as available to new allocations
/// (`MemAvailable` in /proc/meminfo), or None where it cannot be read.
pub fn available_bytes() -> Option<f64> {
    let text = std::fs::read_to_string("/proc/meminfo").ok()?;
    parse_mem_available(&text)
}

/// Reads the `MemAvailable:  N kB` line.
fn parse_mem_available(text: &str) -> Option<f64> {
    let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
    let kb: f64 = line.split_whitespace().nth(1)?.parse().ok()?;
    Some(kb * 1024.0)
}

/// Grid entries for `n` obstacles of excluded reach `reach` (nm) in a box of `volume` nm³.
fn grid_bytes(n: f64, reach: f64, volume: f64) -> f64 {
    let edge = (GRID_CELL_OVER_RADIUS * reach).max((volume / MAX_GRID_CELLS).cbrt());
    let cells = (volume / edge.powi(3)).min(MAX_GRID_CELLS);
    // An obstacle is listed in every cell its excluded region plus half a cell margin meets.
    let copies = ((2.0 * reach + edge) / edge + 1.0).powi(3);
    n * copies * BYTES_PER_GRID_ENTRY + 4.0 * cells
}

/// Estimates the large buffers of a run of `scenario`.
pub fn estimate(scenario: &Scenario) -> Estimate {
    let mut items = Vec::new();
    let volume: f64 = scenario.sim_box.edges_nm.iter().product();
    for (i, s) in scenario.species.iter().enumerate() {
        let per = BYTES_PER_PARTICLE + if s.crowder { BYTES_PER_CROWDER } else { 0.0 };
        items.push(Item {
            what: format!("{} particles of species '{}'", s.count, s.name),
            bytes: s.count as f64 * per,
            keys: format!("species[{i}].count"),
        });
    }
    let max_radius = scenario
        .species
        .iter()
        .map(|s| s.radius_nm)
        .fold(0.0, f64::max);
    let grids = scenario.species.len() as f64;
    if let Some(ObstacleSpec::Generated { radii, target, .. }) = &scenario.obstacles {
        let n = match *target {
            Target::Count(n) => n as f64,
            // Overlapping placement needs more spheres than φ V / v to cover φ: −ln(1 − φ) V / v.
            Target::VolumeFraction(phi) => -(1.0 - phi).ln() * volume / radii.mean_volume_nm3(),
        };
        items.push(Item {
            what: format!("{n:.3e} obstacle spheres"),
            bytes: n * BYTES_PER_SPHERE,
            keys: "obstacles.volume_fraction or obstacles.count, obstacles radii, box.edges_nm"
                .into(),
        });
        items.push(Item {
            what: "obstacle lookup grids (one per species)".into(),
            bytes: grids * grid_bytes(n, radii.max_nm() + max_radius, volume),
            keys: "obstacles.volume_fraction or obstacles.count, obstacles radii, box.edges_nm"
                .into(),
        });
    }
    if let Some(f) = &scenario.fibres {
        let n = match f.target {
            Target::Count(n) => n as f64,
            Target::VolumeFraction(phi) => phi * volume / (PI * f.radius_nm.powi(2) * f.length_nm),
        };
        items.push(Item {
            what: format!("{n:.3e} fibres"),
            bytes: n * BYTES_PER_FIBRE,
            keys: "fibres.volume_fraction or fibres.count, fibres.radius_nm, fibres.length_nm, box.edges_nm"
                .into(),
        });
        // A capsule's reach along its axis is half its length plus the radii.
        let reach = 0.5 * f.length_nm + f.radius_nm + max_radius;
        items.push(Item {
            what: "fibre lookup grids (one per species)".into(),
            bytes: grids * grid_bytes(n, reach, volume),
            keys: "fibres.volume_fraction or fibres.count, fibres.radius_nm, fibres.length_nm, box.edges_nm"
                .into(),
        });
    }
    Estimate { items }
}

/// Refuses a scenario whose estimate exceeds `limit_bytes`; `limit_source`
/// says where the limit comes from (e.g. "--max-memory" or "available memory").
///
/// # Errors
/// [`EngineError::Memory`] naming the file, the need, the limit and the keys.
pub fn check(scenario: &Scenario, limit_bytes: f64, limit_source: &str) -> Result<Estimate> {
    let est = estimate(scenario);
    let total = est.total_bytes();
    if total.is_finite() && total <= limit_bytes {
        return Ok(est);
    }
    let largest = est.largest().cloned().unwrap_or(Item {
        what: "(nothing)".into(),
        bytes: 0.0,
        keys: String::new(),
    });
    Err(EngineError::Memory {
        file: scenario.source.clone(),
        needed: format_bytes(total),
        limit: format!("{} ({limit_source})", format_bytes(limit_bytes)),
        detail: format!(
            "the largest part is {} ({}); change {}",
            largest.what,
            format_bytes(largest.bytes),
            largest.keys
        ),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_mem_available_in_kib() {
        let text = "MemTotal: 100 kB\nMemFree: 10 kB\nMemAvailable:   2048 kB\n";
        assert_eq!(parse_mem_available(text), Some(2048.0 * 1024.0));
        assert_eq!(parse_mem_available("MemTotal: 1 kB\n"), None);
    }

    #[test]
    fn parses_sizes() {
        assert_eq!(parse_size("512M"), Some(512.0 * 1024.0 * 1024.0));
        assert_eq!(parse_size("2GiB"), Some(2.0 * 1024f64.powi(3)));
        assert_eq!(parse_size("1000"), Some(1000.0));
        assert_eq!(parse_size("-5G"), None);
        assert_eq!(parse_size("lots"), None);
        assert_eq!(parse_size("0"), None);
    }

    #[test]
    fn formats_sizes() {
        assert_eq!(format_bytes(512.0), "512.0 B");
        assert_eq!(format_bytes(3.0 * 1024.0 * 1024.0 * 1024.0), "3.0 GiB");
        assert_eq!(format_bytes(f64::INFINITY), "an unbounded amount");
    }
}
