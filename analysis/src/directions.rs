//! Which diffusivities a geometry defines: isotropic in an open periodic
//! medium, lateral in a slit or near a wall, axial in a pore, across and
//! along aligned fibres; none from the MSD in a membrane, whose particles
//! are recycled between baths.
//!
//! An axis bounded by walls (not periodic) has no long-time diffusivity:
//! its MSD levels off at the width of the space, so averaging it with the
//! free axes gives a number that describes nothing.

use serde::Serialize;
use thicket_engine::scenario::media::Orientation;
use thicket_engine::space::shape::Shape;
use thicket_engine::Scenario;

const AXIS_NAMES: [&str; 3] = ["x", "y", "z"];

/// A set of axes whose summed MSD defines one diffusivity.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Direction {
    /// What it is, e.g. "lateral (x, y)".
    pub label: String,
    /// Axis indices (0 = x).
    pub axes: Vec<usize>,
    /// Why these axes, in a line.
    pub reason: String,
}

/// The diffusivities one trajectory defines.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Directions {
    /// The headline diffusivity's axes; `None` where no MSD-based D applies
    /// (a membrane).
    pub headline: Option<Direction>,
    /// Further directions worth a number of their own (along aligned fibres).
    pub others: Vec<Direction>,
    /// Per axis: `true` where walls bound the motion.
    pub bounded: Vec<bool>,
}

/// "x, y" for axes [0, 1].
pub fn axes_text(axes: &[usize]) -> String {
    axes.iter()
        .map(|&a| AXIS_NAMES.get(a).copied().unwrap_or("?"))
        .collect::<Vec<_>>()
        .join(", ")
}

/// Parses an axis selection such as "xy", "z" or "x,y,z" for `dims` dimensions.
///
/// # Errors
/// A message naming the text and what is allowed.
pub fn parse_axes(text: &str, dims: usize) -> Result<Vec<usize>, String> {
    let mut axes = Vec::new();
    for c in text.chars().filter(|c| !matches!(c, ',' | ' ')) {
        let a = match c.to_ascii_lowercase() {
            'x' => 0,
            'y' => 1,
            'z' => 2,
            _ => usize::MAX,
        };
        if a >= dims || axes.contains(&a) {
            return Err(format!(
                "axes '{text}': give distinct axes among {} (e.g. xy or z)",
                AXIS_NAMES[..dims.min(3)].join(", ")
            ));
        }
        axes.push(a);
    }
    if axes.is_empty() {
        return Err(format!(
            "axes '{text}': give at least one axis (e.g. xy or z)"
        ));
    }
    axes.sort_unstable();
    Ok(axes)
}

/// The directions of a trajectory of dimension `dims` and, when the file
/// holds it, its scenario.
///
/// In a thicket scenario an axis that is not periodic ends at reflecting
/// faces or walls, so it is bounded. Without a scenario (another writer's
/// file) every axis counts as free: an H5MD boundary "none" means unbounded
/// space, not a wall.
pub fn directions(scenario: Option<&Scenario>, dims: usize) -> Directions {
    let periodic: Vec<bool> = match scenario {
        Some(s) => (0..dims)
            .map(|a| s.sim_box.periodic.get(a).copied().unwrap_or(true))
            .collect(),
        None => vec![true; dims],
    };
    let bounded: Vec<bool> = periodic.iter().map(|p| !p).collect();
    let free: Vec<usize> = (0..dims).filter(|&a| periodic[a]).collect();
    let shape = scenario.and_then(|s| s.geometry.as_ref()).map(|g| &g.shape);
    if let Some(Shape::Membrane(_)) = shape {
        return Directions {
            headline: None,
            others: Vec::new(),
            bounded,
        };
    }
    if free.is_empty() {
        return Directions {
            headline: None,
            others: Vec::new(),
            bounded,
        };
    }
    let label = |kind: &str, axes: &[usize]| format!("{kind} ({})", axes_text(axes));
    let headline = match shape {
        Some(Shape::Slit { .. }) => Direction {
            label: label("lateral", &free),
            reason: "the slit's walls bound z".into(),
            axes: free.clone(),
        },
        Some(Shape::PlaneWall { .. }) => Direction {
            label: label("lateral", &free),
            reason: "the wall and lid bound z".into(),
            axes: free.clone(),
        },
        Some(Shape::Cylinder { .. }) => Direction {
            label: label("axial", &free),
            reason: "the pore's wall bounds x and y".into(),
            axes: free.clone(),
        },
        _ if free.len() == dims => Direction {
            label: label("isotropic", &free),
            reason: "every axis is periodic and the medium has no preferred direction".into(),
            axes: free.clone(),
        },
        _ => Direction {
            label: label("along the periodic axes", &free),
            reason: format!(
                "reflecting box faces bound {}",
                axes_text(&(0..dims).filter(|a| !periodic[*a]).collect::<Vec<_>>())
            ),
            axes: free.clone(),
        },
    };
    // Aligned fibres make the medium uniaxial: across and along are different diffusivities.
    let aligned = scenario
        .and_then(|s| s.fibres)
        .and_then(|f| match f.orientation {
            Orientation::Aligned { axis } => Some(axis),
            Orientation::Isotropic => None,
        });
    if let Some(axis) = aligned.filter(|a| free.contains(a) && free.len() > 1) {
        let across: Vec<usize> = free.iter().copied().filter(|&a| a != axis).collect();
        return Directions {
            headline: Some(Direction {
                label: label("across the fibres", &across),
                reason: format!(
                    "the fibres are aligned along {}: the medium is uniaxial",
                    AXIS_NAMES[axis]
                ),
                axes: across,
            }),
            others: vec![Direction {
                label: label("along the fibres", &[axis]),
                reason: "parallel to the aligned fibres".into(),
                axes: vec![axis],
            }],
            bounded,
        };
    }
    Directions {
        headline: Some(headline),
        others: Vec::new(),
        bounded,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn axes_parse_and_refuse() {
        assert_eq!(parse_axes("xy", 3).unwrap(), vec![0, 1]);
        assert_eq!(parse_axes("z,x", 3).unwrap(), vec![0, 2]);
        assert!(parse_axes("xx", 3).is_err());
        assert!(parse_axes("w", 3).is_err());
        assert!(parse_axes("z", 2).is_err());
        assert!(parse_axes("", 3).is_err());
    }

    #[test]
    fn every_axis_is_free_without_a_scenario() {
        // H5MD boundary "none" is unbounded space, so another writer's file keeps all axes.
        let d = directions(None, 3);
        assert_eq!(d.headline.unwrap().axes, vec![0, 1, 2]);
        assert_eq!(d.bounded, vec![false; 3]);
        let d = directions(None, 2);
        assert_eq!(d.headline.unwrap().label, "isotropic (x, y)");
    }
}
