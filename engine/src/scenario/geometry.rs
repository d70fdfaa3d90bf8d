//! The validated `[geometry]` section: shape, wall hydrodynamics and the
//! membrane settings, built from the raw TOML.

use crate::base::error::{EngineError, Result};
use crate::scenario::species::Species;
use crate::space::mobility::PerpendicularModel;
use crate::space::pore_hydro::PoreModel;
use crate::space::shape::{Membrane, Pore, PoreGrid, PoreLayout, Shape, MAX_PORES};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// A validated `[geometry]` section.
#[derive(Debug, Clone, PartialEq)]
pub struct Geometry {
    /// The confining shape.
    pub shape: Shape,
    /// Wall hydrodynamics: `None` for steric confinement only (D = D0
    /// everywhere), else the perpendicular model (parallel is always Faxén).
    pub hydrodynamics: Option<PerpendicularModel>,
    /// Membranes: start of the steady-state window over which flux and
    /// occupancy are averaged, s (default: half the run).
    pub flux_after_s: f64,
    /// Cylinders with wall hydrodynamics: which pore mobility (default the
    /// cylinder model; the nearest-wall approximation for comparison).
    pub pore_model: PoreModel,
}

impl Geometry {
    /// Periodic flags the shape imposes on the box.
    pub fn periodic(&self) -> [bool; 3] {
        self.shape.periodic()
    }

    /// How the hydrodynamic corrections are applied, for reports and files.
    pub fn hydrodynamics_description(&self) -> String {
        match (self.hydrodynamics, &self.shape) {
            (None, _) => "off: D = D0 everywhere (steric confinement only)".into(),
            (Some(m), Shape::Slit { .. }) => format!(
                "on: D∥ by Faxén's series and D⊥ by the {} for each wall, the two walls combined by linear superposition 1/D = 1/D1 + 1/D2 − 1/D0, with the Itô drift dD⊥/dz",
                m.name()
            ),
            (Some(m), Shape::PlaneWall { .. }) => format!(
                "on: D∥ by Faxén's series and D⊥ by the {} for the wall at z = 0 (the lid at the top has none), with the Itô drift dD⊥/dz",
                m.name()
            ),
            (Some(m), Shape::Cylinder { .. }) if self.pore_model == PoreModel::Cylinder => format!(
                "on, cylinder model: axial, radial and azimuthal mobility by radial position (Bungay & Brenner 1973 on the axis, Faxén and the {} near the wall, section averages of Dechadilok & Deen 2006), with the Itô drift ∇·D",
                m.name()
            ),
            (Some(m), _) => format!(
                "on, nearest-wall planar approximation: D∥ (Faxén) and D⊥ ({}) of a plane wall at the distance of the nearest wall, applied along and across its normal, with the Itô drift ∇·D (curvature included); the opposite walls of a pore are ignored",
                m.name()
            ),
        }
    }

    /// Warnings a careful user would want before running this geometry.
    pub fn warnings(&self, species: &[Species], dt_s: f64, flowing: bool) -> Vec<String> {
        let mut out = Vec::new();
        let Shape::Membrane(m) = &self.shape else {
            return out;
        };
        if flowing
            && (m.top_concentration_mol_per_m3 == 0.0 || m.bottom_concentration_mol_per_m3 == 0.0)
        {
            out.push("geometry: one bath is held at zero, so transits are counted one way only and the sieving coefficient cannot be measured; \
                      give both baths a concentration (equal ones give the best statistics for both directions)".into());
        }
        if m.top_concentration_mol_per_m3 == m.bottom_concentration_mol_per_m3 && !flowing {
            out.push("geometry: both baths hold the same concentration, so there is no net flux; the run measures the partition coefficient (pore_concentration_over_mean_bath)".into());
        }
        let spacing = (m.area_nm2() / m.pores.len() as f64).sqrt();
        if m.reservoir_depth_nm() < 0.5 * spacing {
            out.push(format!(
                "geometry: the reservoirs ({} nm deep) are shallower than half the pore spacing ({:.3} nm), so the baths sit in the field spreading into the mouths; \
                 membrane_permeability then includes part of the reservoirs' access resistance (make box.edges_nm[2] larger)",
                m.reservoir_depth_nm(),
                0.5 * spacing
            ));
        }
        for s in species {
            let sigma = s.step_rms_nm(dt_s);
            if m.reservoir_depth_nm() - s.radius_nm < 10.0 * sigma {
                out.push(format!(
                    "species '{}': the open reservoir depth ({} nm) is under ten rms steps ({:.4} nm): bath emissions land across most of it; a smaller integrator.dt_s or deeper reservoirs keep the baths apart from the slab",
                    s.name,
                    m.reservoir_depth_nm() - s.radius_nm,
                    10.0 * sigma
                ));
            }
        }
        out
    }

    /// Validates the raw section.
    ///
    /// `periodic_given` is `box.periodic` as written (it must agree with the
    /// shape when given). Crowder species are refused in membranes and
    /// with wall hydrodynamics.
    ///
    /// # Errors
    /// [`EngineError::InvalidValue`] naming file, key, value and allowed
    /// range, or a CSV line for pores read from a file.
    pub fn from_raw(
        raw: &RawGeometry,
        file: &Path,
        periodic_given: Option<&[bool]>,
        edges_nm: &[f64; 3],
        species: &[Species],
        duration_s: f64,
    ) -> Result<Self> {
        let bad = |key: &str, value: String, allowed: String| EngineError::InvalidValue {
            file: file.to_path_buf(),
            key: format!("geometry.{key}"),
            value,
            allowed,
        };
        let kind = raw.kind.as_str();
        let kinds = "allowed: \"plane_wall\", \"slit\", \"cylinder\" or \"membrane\"";
        // Keys each kind uses; any other given key is an error, so a typo'd intent is not ignored.
        let used: &[&str] = match kind {
            "plane_wall" | "slit" => &[],
            "cylinder" => &["pore_radius_nm"],
            "membrane" => &[
                "pore_radius_nm",
                "thickness_nm",
                "pores_x",
                "pores_y",
                "pores_file",
                "top_concentration_mol_per_m3",
                "bottom_concentration_mol_per_m3",
                "flux_after_s",
            ],
            other => return Err(bad("kind", format!("{other:?}"), kinds.into())),
        };
        for (key, given) in raw.given_kind_keys() {
            if given && !used.contains(&key) {
                return Err(bad(
                    key,
                    "(given)".into(),
                    format!("it is not used with kind = \"{kind}\""),
                ));
            }
        }
        let hydro_on = raw.wall_hydrodynamics.unwrap_or(false);
        if let Some(s) = species.iter().find(|s| s.crowder) {
            // Hard contacts between mobile particles are resolved by the crowd kernel, which knows
            // walls and pores but neither baths nor many-body hydrodynamics.
            if kind == "membrane" {
                return Err(bad(
                    "kind",
                    format!("{kind:?}"),
                    format!("a membrane cannot be combined with crowders (species '{}' has role = \"crowder\"): its baths recycle independent particles; use a slit or a cylinder, or fixed [obstacles] in the pores", s.name),
                ));
            }
            if hydro_on {
                return Err(bad(
                    "wall_hydrodynamics",
                    "true".into(),
                    format!("wall hydrodynamics cannot be combined with crowders (species '{}' has role = \"crowder\"): the hydrodynamic coupling of crowded particles near walls is not modelled; set it to false", s.name),
                ));
            }
        }
        let hydrodynamics = match (hydro_on, raw.perpendicular_model.as_deref()) {
            (false, None) => None,
            (false, Some(_)) => return Err(bad("perpendicular_model", "(given)".into(), "it is only used with wall_hydrodynamics = true".into())),
            (true, None | Some("brenner")) => Some(PerpendicularModel::Brenner),
            (true, Some("bevan_prieve")) => Some(PerpendicularModel::BevanPrieve),
            (true, Some(other)) => {
                return Err(bad(
                    "perpendicular_model",
                    format!("{other:?}"),
                    "allowed: \"brenner\" (Brenner 1961 exact series, the default) or \"bevan_prieve\" (Bevan & Prieve 2000 closed form)".into(),
                ))
            }
        };
        if hydrodynamics.is_some() {
            if let Some((i, s)) = species
                .iter()
                .enumerate()
                .find(|(_, s)| s.drag_radius_nm > s.radius_nm)
            {
                return Err(EngineError::InvalidValue {
                    file: file.to_path_buf(),
                    key: format!("species[{i}].drag_radius_nm"),
                    value: s.drag_radius_nm.to_string(),
                    allowed: format!(
                        "with geometry.wall_hydrodynamics = true the drag radius must not exceed the steric radius ({} nm): the wall mobilities are those of a sphere that touches the wall",
                        s.radius_nm
                    ),
                });
            }
        }

        let shape = match kind {
            "plane_wall" => Shape::PlaneWall {
                height_nm: edges_nm[2],
            },
            "slit" => Shape::Slit {
                width_nm: edges_nm[2],
            },
            "cylinder" => {
                let r = positive_key(file, "geometry.pore_radius_nm", raw.pore_radius_nm)?;
                for (k, axis) in ["x", "y"].iter().enumerate() {
                    if 2.0 * r > edges_nm[k] {
                        return Err(EngineError::InvalidValue {
                            file: file.to_path_buf(),
                            key: format!("box.edges_nm[{k}]"),
                            value: edges_nm[k].to_string(),
                            allowed: format!("the box must hold the pore's cross-section: at least its diameter 2 × {r} nm along {axis}"),
                        });
                    }
                }
                tracer_fits(file, "geometry.pore_radius_nm", r, species)?;
                Shape::Cylinder {
                    radius_nm: r,
                    axis_nm: [0.5 * edges_nm[0], 0.5 * edges_nm[1]],
                }
            }
            _ => Shape::Membrane(Box::new(membrane_from_raw(raw, file, edges_nm, species)?)),
        };

        let periodic = shape.periodic();
        if let Some(given) = periodic_given {
            if given != periodic {
                return Err(EngineError::InvalidValue {
                    file: file.to_path_buf(),
                    key: "box.periodic".into(),
                    value: format!("{given:?}"),
                    allowed: format!("geometry.kind = \"{kind}\" needs box.periodic = {periodic:?} (or leave box.periodic out)"),
                });
            }
        }

        let flux_after_s = match raw.flux_after_s {
            None => 0.5 * duration_s,
            Some(t) if t.is_finite() && (0.0..duration_s).contains(&t) => t,
            Some(t) => {
                return Err(bad(
                    "flux_after_s",
                    t.to_string(),
                    format!("it must lie in [0, {duration_s:e}) s, the run's duration"),
                ))
            }
        };
        let pore_model = match (raw.pore_mobility.as_deref(), &shape, hydrodynamics) {
            (None | Some("cylinder"), _, _) => PoreModel::Cylinder,
            (Some("nearest_wall"), Shape::Cylinder { .. }, Some(_)) => PoreModel::NearestWall,
            (Some("nearest_wall"), _, _) => {
                return Err(bad(
                    "pore_mobility",
                    "\"nearest_wall\"".into(),
                    "it is only used with kind = \"cylinder\" and wall_hydrodynamics = true".into(),
                ))
            }
            (Some(other), _, _) => {
                return Err(bad(
                    "pore_mobility",
                    format!("{other:?}"),
                    "allowed: \"cylinder\" (the default: position-dependent mobility of a sphere in a cylinder) or \"nearest_wall\" (planar approximation, for comparison)".into(),
                ))
            }
        };
        if raw.pore_mobility.is_some() && (kind != "cylinder" || hydrodynamics.is_none()) {
            return Err(bad(
                "pore_mobility",
                "(given)".into(),
                "it is only used with kind = \"cylinder\" and wall_hydrodynamics = true".into(),
            ));
        }
        Ok(Geometry {
            shape,
            hydrodynamics,
            flux_after_s,
            pore_model,
        })
    }
}

fn positive_key(file: &Path, key: &str, value: Option<f64>) -> Result<f64> {
    match value {
        Some(v) if v.is_finite() && v > 0.0 => Ok(v),
        Some(v) => Err(EngineError::InvalidValue {
            file: file.to_path_buf(),
            key: key.into(),
            value: v.to_string(),
            allowed: "it must be a finite number greater than 0".into(),
        }),
        None => Err(EngineError::InvalidValue {
            file: file.to_path_buf(),
            key: key.into(),
            value: "(missing)".into(),
            allowed: "this geometry needs it".into(),
        }),
    }
}

/// Every species must fit through a pore of radius `r`.
fn tracer_fits(file: &Path, key: &str, r: f64, species: &[Species]) -> Result<()> {
    if let Some(s) = species.iter().find(|s| s.radius_nm >= r) {
        return Err(EngineError::InvalidValue {
            file: file.to_path_buf(),
            key: key.into(),
            value: r.to_string(),
            allowed: format!(
                "species '{}' (radius {} nm) is as large as or larger than the pore and cannot enter it: the pore radius must exceed every species radius (λ = a/r_pore < 1)",
                s.name, s.radius_nm
            ),
        });
    }
    Ok(())
}

fn membrane_from_raw(
    raw: &RawGeometry,
    file: &Path,
    edges_nm: &[f64; 3],
    species: &[Species],
) -> Result<Membrane> {
    let bad = |key: &str, value: String, allowed: String| EngineError::InvalidValue {
        file: file.to_path_buf(),
        key: format!("geometry.{key}"),
        value,
        allowed,
    };
    let thickness = positive_key(file, "geometry.thickness_nm", raw.thickness_nm)?;
    let height = edges_nm[2];
    let depth = 0.5 * (height - thickness);
    let a_max = species.iter().map(|s| s.radius_nm).fold(0.0, f64::max);
    if depth <= 2.0 * a_max {
        return Err(bad(
            "thickness_nm",
            thickness.to_string(),
            format!(
                "each reservoir, (box.edges_nm[2] − thickness)/2 = {depth} nm deep, must be deeper than the largest particle's diameter ({} nm); make the box taller or the slab thinner",
                2.0 * a_max
            ),
        ));
    }
    let lateral = [edges_nm[0], edges_nm[1]];
    let (pores, layout) = match (
        &raw.pores_file,
        raw.pores_x,
        raw.pores_y,
        raw.pore_radius_nm,
    ) {
        (Some(name), None, None, None) => {
            let path = PathBuf::from(name);
            // Inputs named by a scenario travel with it: relative paths start at its folder.
            let path = if path.is_relative() {
                file.parent().map(|d| d.join(&path)).unwrap_or(path)
            } else {
                path
            };
            let pores = read_pores_csv(&path, file, lateral, species)?;
            (pores, PoreLayout::File { path })
        }
        (Some(_), _, _, _) => {
            let key = if raw.pore_radius_nm.is_some() {
                "pore_radius_nm"
            } else if raw.pores_x.is_some() {
                "pores_x"
            } else {
                "pores_y"
            };
            return Err(bad(key, "(given)".into(), "give either geometry.pores_file or an arrangement (pore_radius_nm, pores_x, pores_y), not both".into()));
        }
        (None, nx, ny, r) => {
            let r = positive_key(file, "geometry.pore_radius_nm", r)?;
            let count = |key: &str, v: Option<i64>| -> Result<usize> {
                match v {
                    None => Ok(1),
                    Some(n) if (1..=1000).contains(&n) => Ok(n as usize),
                    Some(n) => Err(bad(
                        key,
                        n.to_string(),
                        "it must be a whole number from 1 to 1000".into(),
                    )),
                }
            };
            let (pores_x, pores_y) = (count("pores_x", nx)?, count("pores_y", ny)?);
            tracer_fits(file, "geometry.pore_radius_nm", r, species)?;
            let spacing = [lateral[0] / pores_x as f64, lateral[1] / pores_y as f64];
            for (k, key) in ["pores_x", "pores_y"].iter().enumerate() {
                if 2.0 * r >= spacing[k] {
                    return Err(bad(
                        "pore_radius_nm",
                        r.to_string(),
                        format!(
                            "pores overlap each other: with {} pores along {} in {} nm they are {} nm apart, so the diameter must be smaller than that (fewer geometry.{key} or a smaller radius)",
                            if k == 0 { pores_x } else { pores_y },
                            if k == 0 { "x" } else { "y" },
                            lateral[k],
                            spacing[k]
                        ),
                    ));
                }
            }
            let mut pores = Vec::with_capacity(pores_x * pores_y);
            for j in 0..pores_y {
                for i in 0..pores_x {
                    pores.push(Pore {
                        centre_nm: [(i as f64 + 0.5) * spacing[0], (j as f64 + 0.5) * spacing[1]],
                        radius_nm: r,
                    });
                }
            }
            (pores, PoreLayout::Arranged { pores_x, pores_y })
        }
    };
    let concentration = |key: &str, v: Option<f64>, default: f64| -> Result<f64> {
        match v {
            None => Ok(default),
            Some(c) if c.is_finite() && c >= 0.0 => Ok(c),
            Some(c) => Err(bad(
                key,
                c.to_string(),
                "a concentration must be a finite number ≥ 0 mol/m³".into(),
            )),
        }
    };
    let top = concentration(
        "top_concentration_mol_per_m3",
        raw.top_concentration_mol_per_m3,
        1.0,
    )?;
    let bottom = concentration(
        "bottom_concentration_mol_per_m3",
        raw.bottom_concentration_mol_per_m3,
        0.0,
    )?;
    if top == 0.0 && bottom == 0.0 {
        return Err(bad(
            "top_concentration_mol_per_m3",
            "0".into(),
            "at least one reservoir must hold particles: top or bottom concentration > 0 mol/m³"
                .into(),
        ));
    }
    let grid = PoreGrid::build(&pores, lateral);
    Ok(Membrane {
        lateral_nm: lateral,
        height_nm: height,
        z_lo_nm: depth,
        z_hi_nm: depth + thickness,
        pores,
        layout,
        top_concentration_mol_per_m3: top,
        bottom_concentration_mol_per_m3: bottom,
        grid,
    })
}

/// Reads pores from a CSV of `x_nm,y_nm,radius_nm` (an optional header
/// naming these columns; blank lines and `#` comments skipped).
///
/// Each pore must lie wholly inside the box cross-section (not leave the
/// slab sideways), be wider than every species, and not overlap another.
///
/// # Errors
/// [`EngineError::InvalidValue`] naming `geometry.pores_file` of the
/// scenario when the file cannot be read or is empty, or the CSV file and
/// line of a malformed or impossible row (both lines for an overlap).
pub fn read_pores_csv(
    path: &Path,
    scenario_file: &Path,
    lateral_nm: [f64; 2],
    species: &[Species],
) -> Result<Vec<Pore>> {
    let names = ["x_nm", "y_nm", "radius_nm"];
    let rows = crate::scenario::csv::read_numeric_csv(
        path,
        scenario_file,
        "geometry.pores_file",
        "pore",
        names,
    )?;
    let a_max = species.iter().map(|s| s.radius_nm).fold(0.0, f64::max);
    let mut pores = Vec::new();
    for row in &rows {
        let bad = |allowed: String| row.error(path, allowed);
        let [x, y, r] = row.values;
        if r <= a_max {
            let s = species
                .iter()
                .find(|s| s.radius_nm >= r)
                .map(|s| s.name.as_str())
                .unwrap_or("?");
            return Err(bad(format!("the pore (radius {r} nm) is not wider than species '{s}' (radius {a_max} nm): the tracer is larger than the pore")));
        }
        for (k, axis) in ["x", "y"].iter().enumerate() {
            let c = row.values[k];
            if c - r < 0.0 || c + r > lateral_nm[k] {
                return Err(bad(format!(
                        "the pore leaves the slab: along {axis} it spans {} … {} nm but the membrane (box cross-section) is 0 … {} nm",
                        c - r,
                        c + r,
                        lateral_nm[k]
                    ),
                ));
            }
        }
        if pores.len() >= MAX_PORES {
            return Err(bad(format!(
                "a membrane may have at most {MAX_PORES} pores"
            )));
        }
        pores.push(Pore {
            centre_nm: [x, y],
            radius_nm: r,
        });
    }
    let grid = PoreGrid::build(&pores, lateral_nm);
    for (j, p) in pores.iter().enumerate() {
        for item in grid.candidates(p.centre_nm[0], p.centre_nm[1]) {
            let i = item.index as usize;
            if i >= j {
                continue;
            }
            let d = (p.centre_nm[0] - item.centre[0]).hypot(p.centre_nm[1] - item.centre[1]);
            if d < p.radius_nm + item.radius {
                // Every row became a pore, so pore j is row j.
                return Err(rows[j].error(
                    path,
                    format!(
                        "this pore overlaps the one on line {} (axes {d:.4} nm apart, radii {} and {} nm): pores must not overlap each other",
                        rows[i].line, item.radius, p.radius_nm
                    ),
                ));
            }
        }
    }
    Ok(pores)
}

/// `[geometry]`: confining walls, as written (validated by
/// [`crate::scenario::geometry::Geometry::from_raw`]). Sizes along z come from
/// `box.edges_nm[2]`: the slit's gap, the plane wall's box height, the
/// membrane's total height (slab centred, reservoirs above and below).
#[derive(Debug, Clone, Default, Serialize, Deserialize, PartialEq)]
#[serde(deny_unknown_fields)]
pub struct RawGeometry {
    /// "plane_wall", "slit", "cylinder" or "membrane".
    pub kind: String,
    /// Hydrodynamic wall corrections of D with the Itô drift. By default, this is disabled.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub wall_hydrodynamics: Option<bool>,
    /// "brenner" (default) or "bevan_prieve", with `wall_hydrodynamics = true`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub perpendicular_model: Option<String>,
    /// "cylinder" (default) or "nearest_wall": the pore mobility with
    /// `wall_hydrodynamics = true` in a "cylinder".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pore_mobility: Option<String>,
    /// Pore radius in nm ("cylinder"; "membrane" with arranged pores).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pore_radius_nm: Option<f64>,
    /// Slab thickness (pore length) in nm ("membrane").
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub thickness_nm: Option<f64>,
    /// Pores along x in a square arrangement ("membrane", default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pores_x: Option<i64>,
    /// Pores along y in a square arrangement ("membrane", default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pores_y: Option<i64>,
    /// CSV of pores `x_nm,y_nm,radius_nm` ("membrane"), instead of an
    /// arrangement; relative to the scenario's folder.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pores_file: Option<String>,
    /// Bath concentration at z = L_z ("membrane", default 1).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub top_concentration_mol_per_m3: Option<f64>,
    /// Bath concentration at z = 0 ("membrane", default 0).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub bottom_concentration_mol_per_m3: Option<f64>,
    /// Start of the steady-state window for flux averages, s ("membrane",
    /// default half the run).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub flux_after_s: Option<f64>,
    /// Surface potential of the walls, mV (screened electrostatics with
    /// species that carry `surface_potential_mV`).
    #[serde(
        rename = "wall_surface_potential_mV",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub wall_surface_potential_mv: Option<f64>,
    /// Surface charge density of the walls, mC/m², instead of their
    /// potential (turned into it by the Grahame equation).
    #[serde(
        rename = "wall_surface_charge_density_mC_per_m2",
        default,
        skip_serializing_if = "Option::is_none"
    )]
    pub wall_surface_charge_density_mc_per_m2: Option<f64>,
}

impl RawGeometry {
    /// The kind-specific keys and whether each was given.
    pub fn given_kind_keys(&self) -> [(&'static str, bool); 8] {
        [
            ("pore_radius_nm", self.pore_radius_nm.is_some()),
            ("thickness_nm", self.thickness_nm.is_some()),
            ("pores_x", self.pores_x.is_some()),
            ("pores_y", self.pores_y.is_some()),
            ("pores_file", self.pores_file.is_some()),
            (
                "top_concentration_mol_per_m3",
                self.top_concentration_mol_per_m3.is_some(),
            ),
            (
                "bottom_concentration_mol_per_m3",
                self.bottom_concentration_mol_per_m3.is_some(),
            ),
            ("flux_after_s", self.flux_after_s.is_some()),
        ]
    }
}
