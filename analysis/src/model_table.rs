//! The one place that evaluates every published model for a scenario, so
//! `analyze`, `models`, `check`, sweeps and the demo print the same names
//! and values.
//!
//! Each entry names the model, the quantity it predicts, the variable it is
//! evaluated at (φ, φ_excl, λ …) and that variable's value; a model that
//! does not apply keeps its row with the reason instead of a value, so
//! nothing vanishes silently.

use crate::models;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::f64::consts::PI;
use thicket_engine::obstacles::spheres::{FixedObstacles, Region};
use thicket_engine::scenario::media::Orientation;
use thicket_engine::scenario::media::{Generator, ObstacleSpec};
use thicket_engine::space::pore_hydro::PoreModel;
use thicket_engine::space::shape::Shape;
use thicket_engine::step::pipeline::mean_axial_mobility;
use thicket_engine::Scenario;

/// A tracer counts as point-like when its radius is at most this fraction
/// of the smallest obstacle radius (Torquato's estimate is for point tracers).
pub const POINT_TRACER_SIZE_RATIO: f64 = 0.05;

/// One model's prediction, or the reason it does not apply.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModelValue {
    /// Unique name with the variable it is evaluated at, e.g.
    /// "Maxwell tracer 2/(2+φ_excl)".
    pub name: String,
    /// What it predicts, e.g. "D_eff/D0", "lateral D_eff/D0", "partition Φ".
    pub quantity: String,
    /// The variable the formula is evaluated at ("φ", "φ_excl", "λ", …).
    pub variable: String,
    /// That variable's value for this scenario.
    pub at: f64,
    /// The prediction; `None` when the model does not apply.
    pub value: Option<f64>,
    /// Why the model does not apply (set exactly when `value` is `None`).
    pub not_applicable: Option<String>,
    /// Literature source.
    pub source: String,
    /// True when the prediction is of the headline D_eff/D0 the analysis
    /// of this scenario reports (isotropic, lateral or axial as the
    /// geometry defines it).
    pub compares_with_d_eff: bool,
}

impl ModelValue {
    fn new(
        name: impl Into<String>,
        quantity: &str,
        variable: &str,
        at: f64,
        value: Result<f64, String>,
        source: &str,
        compares_with_d_eff: bool,
    ) -> Self {
        let (value, not_applicable) = match value {
            Ok(v) if v.is_finite() => (Some(v), None),
            Ok(v) => (None, Some(format!("the formula gives {v}"))),
            Err(reason) => (None, Some(reason)),
        };
        ModelValue {
            name: name.into(),
            quantity: quantity.into(),
            variable: variable.into(),
            at,
            value,
            not_applicable,
            source: source.into(),
            compares_with_d_eff,
        }
    }
}

/// Every model entry for one species of one scenario (or one set of inputs).
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
pub struct ModelTable {
    /// Entries in a fixed order: obstruction, fibres, crowders, confinement.
    pub entries: Vec<ModelValue>,
}

impl ModelTable {
    /// Name → value of the entries that predict the headline D_eff/D0 and
    /// apply (what `analyze --json` prints as `models`).
    pub fn d_eff_over_d0(&self) -> BTreeMap<String, f64> {
        self.entries
            .iter()
            .filter(|e| e.compares_with_d_eff)
            .filter_map(|e| e.value.map(|v| (e.name.clone(), v)))
            .collect()
    }

    /// Name → value of every entry that applies.
    pub fn values(&self) -> BTreeMap<String, f64> {
        self.entries
            .iter()
            .filter_map(|e| e.value.map(|v| (e.name.clone(), v)))
            .collect()
    }

    /// One line per entry: name, value (or "n/a" and the reason it does not
    /// apply), the quantity, the variable it is evaluated at and the source.
    pub fn lines(&self) -> Vec<String> {
        self.entries
            .iter()
            .map(|e| match e.value {
                Some(v) => format!(
                    "{:<46} {:>10}  {}; {} = {:.4}; {}",
                    e.name,
                    format_value(v),
                    e.quantity,
                    e.variable,
                    e.at,
                    e.source
                ),
                None => format!(
                    "{:<46} {:>10}  {}",
                    e.name,
                    "n/a",
                    e.not_applicable.as_deref().unwrap_or("")
                ),
            })
            .collect()
    }
}

fn format_value(v: f64) -> String {
    if v != 0.0 && (v.abs() < 1e-3 || v.abs() >= 1e4) {
        format!("{v:.4e}")
    } else {
        format!("{v:.4}")
    }
}

fn reason(e: models::ModelError) -> String {
    e.to_string()
}

/// Models of a tracer among fixed impermeable spheres: the obstacles'
/// volume fraction `phi` and the fraction `phi_excl` they exclude from the
/// tracer's centre (spheres grown by the tracer radius; REFERENCES.md).
/// `point_tracer`: the tracer is at most [`POINT_TRACER_SIZE_RATIO`] of the
/// smallest obstacle; `overlapping`: the obstacles may overlap.
pub fn obstruction_models(
    phi: f64,
    phi_excl: f64,
    point_tracer: bool,
    overlapping: bool,
    compares: bool,
) -> Vec<ModelValue> {
    let dilute = |f: fn(f64) -> models::ModelResult<f64>| -> Result<f64, String> {
        if phi_excl >= 1.0 {
            Err(format!("φ_excl = {phi_excl:.4} ≥ 1: the exclusion shells overlap and fill the space, beyond any dilute-sphere formula"))
        } else {
            f(phi_excl).map_err(reason)
        }
    };
    let torquato = if overlapping {
        Err("for random non-overlapping spheres; these obstacles overlap".to_string())
    } else if !point_tracer {
        Err(format!(
            "for a point tracer (radius ≤ {POINT_TRACER_SIZE_RATIO} of the obstacles'); this tracer is larger"
        ))
    } else if phi_excl >= models::RANDOM_CLOSE_PACKING {
        Err(format!(
            "φ_excl = {phi_excl:.4} is beyond random close packing ({})",
            models::RANDOM_CLOSE_PACKING
        ))
    } else {
        models::torquato_tracer(phi_excl).map_err(reason)
    };
    vec![
        ModelValue::new(
            "Maxwell tracer 2/(2+φ_excl)",
            "D_eff/D0",
            "φ_excl",
            phi_excl,
            dilute(models::maxwell_tracer),
            "Maxwell (1873), tracer form",
            compares,
        ),
        ModelValue::new(
            "Torquato three-point, tracer form (φ_excl)",
            "D_eff/D0",
            "φ_excl",
            phi_excl,
            torquato,
            "Torquato, J. Appl. Phys. 58, 3790 (1985); Kim & Torquato (1991)",
            compares,
        ),
        ModelValue::new(
            "Mackie-Meares ((1-φ)/(1+φ))² at obstacle φ",
            "D_eff/D0",
            "φ",
            phi,
            models::mackie_meares(phi).map_err(reason),
            "Mackie & Meares, Proc. R. Soc. A 232, 498 (1955)",
            compares,
        ),
        ModelValue::new(
            "Maxwell conductivity 2(1-φ_excl)/(2+φ_excl)",
            "σ_eff/σ0 (composite conductivity, not D_eff/D0)",
            "φ_excl",
            phi_excl,
            dilute(models::maxwell_conductivity),
            "Maxwell (1873), conductivity form = Hashin-Shtrikman upper bound (1962)",
            false,
        ),
    ]
}

/// Models of a tracer of radius `tracer_radius` among fibres of radius
/// `fibre_radius` at volume fraction `phi`; Ogston's model is for randomly
/// oriented fibres, so `aligned` fibres get a reason instead.
pub fn fibre_models(
    phi: f64,
    tracer_radius: f64,
    fibre_radius: f64,
    aligned: bool,
    compares: bool,
) -> Vec<ModelValue> {
    let ogston = if aligned {
        Err("for randomly oriented fibres; these are aligned (diffusion along them is free, across them see the per-axis values)".to_string())
    } else {
        models::ogston_fibres(phi, tracer_radius, fibre_radius).map_err(reason)
    };
    vec![ModelValue::new(
        "Ogston exp(-√φ_f (a+r_f)/r_f)",
        "D_eff/D0",
        "φ_f",
        phi,
        ogston,
        "Ogston, Preston & Wells, Proc. R. Soc. A 333, 297 (1973)",
        compares,
    )]
}

/// Long-time self-diffusion of mobile hard spheres at crowder fraction
/// `phi`; they predict the crowders' own D, so `is_crowder` says whether
/// the analysed species is one of them.
pub fn crowder_models(phi: f64, is_crowder: bool) -> Vec<ModelValue> {
    let applies = |f: fn(f64) -> models::ModelResult<f64>| -> Result<f64, String> {
        if is_crowder {
            f(phi).map_err(reason)
        } else {
            Err(
                "predicts the crowders' own self-diffusion; this species is a tracer among them"
                    .into(),
            )
        }
    };
    vec![
        ModelValue::new(
            "hard spheres, dilute 1-2φ_c",
            "D_eff/D0",
            "φ_c",
            phi,
            applies(models::hard_sphere_self_diffusion_dilute),
            "Hanna, Hess & Klein (1982); Ackerson & Fleishman (1982)",
            is_crowder,
        ),
        ModelValue::new(
            "hard spheres, Brady 1/(1+2φ_c g(σ⁺)) (no HI)",
            "D_eff/D0",
            "φ_c",
            phi,
            applies(models::brady_long_time_self_diffusion),
            "Brady, J. Fluid Mech. 272, 109 (1994), Carnahan-Starling g(σ⁺)",
            is_crowder,
        ),
    ]
}

/// Models of a sphere in a cylindrical pore at λ = a/r_pore: steric
/// partition, Renkin's centreline and Dechadilok–Deen's cross-section
/// averaged hindrance.
pub fn pore_models(lambda: f64, compares: bool) -> Vec<ModelValue> {
    let dd = models::dechadilok_deen_hindrance(lambda).map_err(reason);
    let partition = models::partition_cylinder(lambda).map_err(reason);
    let averaged = match (&dd, &partition) {
        (Ok(h), Ok(p)) => Ok(h / p),
        (Err(e), _) | (_, Err(e)) => Err(e.clone()),
    };
    vec![
        ModelValue::new(
            "steric partition Φ = (1-λ)²",
            "partition Φ",
            "λ",
            lambda,
            partition,
            "steric exclusion (exact)",
            false,
        ),
        ModelValue::new(
            "Renkin centreline K_d",
            "axial D/D0 on the pore axis",
            "λ",
            lambda,
            models::renkin_centreline_kd(lambda).map_err(reason),
            "Renkin, J. Gen. Physiol. 38, 225 (1954)",
            false,
        ),
        ModelValue::new(
            "Renkin hindrance H = Φ K_d",
            "hindrance H",
            "λ",
            lambda,
            models::renkin_hindrance(lambda).map_err(reason),
            "Renkin, J. Gen. Physiol. 38, 225 (1954)",
            false,
        ),
        ModelValue::new(
            "Dechadilok-Deen hindrance H",
            "hindrance H",
            "λ",
            lambda,
            dd,
            "Dechadilok & Deen, Ind. Eng. Chem. Res. 45, 6953 (2006)",
            false,
        ),
        ModelValue::new(
            "Dechadilok-Deen averaged K_d = H/Φ",
            "axial D_eff/D0 (cross-section average)",
            "λ",
            lambda,
            averaged,
            "Dechadilok & Deen, Ind. Eng. Chem. Res. 45, 6953 (2006)",
            compares,
        ),
        ModelValue::new(
            "Dechadilok-Deen K_c",
            "convective hindrance K_c (mean particle / mean fluid velocity)",
            "λ",
            lambda,
            models::dechadilok_deen_kc(lambda).map_err(reason),
            "Dechadilok & Deen, Ind. Eng. Chem. Res. 45, 6953 (2006) (from memory)",
            false,
        ),
        ModelValue::new(
            "Dechadilok-Deen W = Φ K_c",
            "convective hindrance W",
            "λ",
            lambda,
            models::dechadilok_deen_convective_hindrance(lambda).map_err(reason),
            "Dechadilok & Deen, Ind. Eng. Chem. Res. 45, 6953 (2006) (from memory)",
            false,
        ),
        ModelValue::new(
            "point tracer K_c = 2-Φ (no lag)",
            "convective hindrance K_c (mean particle / mean fluid velocity)",
            "λ",
            lambda,
            models::lag_free_kc_cylinder(lambda).map_err(reason),
            "Poiseuille flow averaged over r < R - a (exact without hydrodynamic lag)",
            false,
        ),
    ]
}

/// Models of a sphere of radius `a` in a slit of half-width `h`.
pub fn slit_models(a: f64, h: f64, compares: bool) -> Vec<ModelValue> {
    let lambda = a / h;
    let partition = models::partition_slit(a, h).map_err(reason);
    let dd = models::dechadilok_deen_slit_hindrance(lambda).map_err(reason);
    let averaged = match (&dd, &partition) {
        (Ok(h), Ok(p)) => Ok(h / p),
        (Err(e), _) | (_, Err(e)) => Err(e.clone()),
    };
    vec![
        ModelValue::new(
            "steric partition Φ = 1-a/h",
            "partition Φ",
            "λ = a/h",
            lambda,
            partition,
            "steric exclusion (exact)",
            false,
        ),
        ModelValue::new(
            "Dechadilok-Deen slit hindrance H",
            "hindrance H",
            "λ = a/h",
            lambda,
            dd,
            "Dechadilok & Deen (2006), slit (from memory)",
            false,
        ),
        ModelValue::new(
            "Dechadilok-Deen slit averaged K_d = H/Φ",
            "lateral D_eff/D0 (gap average)",
            "λ = a/h",
            lambda,
            averaged,
            "Dechadilok & Deen (2006), slit (from memory)",
            compares,
        ),
        ModelValue::new(
            "point tracer slit K_c (no lag)",
            "convective hindrance K_c (mean particle / mean fluid velocity)",
            "λ = a/h",
            lambda,
            models::lag_free_kc_slit(lambda).map_err(reason),
            "plane Poiseuille flow 3/2 (1-ζ²) averaged over the open gap (exact without hydrodynamic lag)",
            false,
        ),
        ModelValue::new(
            "point tracer slit W = Φ K_c (no lag)",
            "convective hindrance W",
            "λ = a/h",
            lambda,
            models::lag_free_kc_slit(lambda)
                .and_then(|kc| Ok(kc * models::partition_slit(a, h)?))
                .map_err(reason),
            "plane Poiseuille flow 3/2 (1-ζ²) averaged over the open gap (exact without hydrodynamic lag)",
            false,
        ),
    ]
}

/// Everything a report compares with for species `species` of `scenario`:
/// obstruction, fibre and crowder models, and the confinement's partition,
/// hindrance and this engine's own wall model. Obstacles are placed again
/// from the scenario's seed, exactly as the run placed them.
///
/// An unknown species gives an empty table.
pub fn scenario_model_table(scenario: &Scenario, species: &str) -> ModelTable {
    let mut entries = Vec::new();
    let Some(tracer) = scenario.species.iter().find(|s| s.name == species) else {
        return ModelTable::default();
    };
    let a = tracer.radius_nm;
    let geometry = scenario.geometry.as_ref();
    let is_membrane = matches!(geometry.map(|g| &g.shape), Some(Shape::Membrane(_)));
    // A membrane's particles are recycled between baths: no D_eff to compare with.
    let compares = !is_membrane;
    if !scenario.has_contacts() {
        entries.push(ModelValue::new(
            "free diffusion (Stokes-Einstein)",
            "D_eff/D0",
            "—",
            0.0,
            Ok(1.0),
            "Einstein (1905): nothing to touch",
            true,
        ));
    }
    if scenario.obstacles.is_some() || scenario.fibres.is_some() {
        match FixedObstacles::build(scenario) {
            Ok(fixed) => {
                let region = Region::of(scenario);
                let spheres = &fixed.spheres;
                if !spheres.is_empty() {
                    let volume = region.volume_nm3(&scenario.sim_box);
                    let nominal = spheres.volume_fraction_in(&region, &scenario.sim_box);
                    let nominal_excl: f64 = spheres
                        .radii_nm
                        .iter()
                        .map(|b| 4.0 / 3.0 * PI * (a + b).powi(3))
                        .sum::<f64>()
                        / volume;
                    // Overlapping spheres cover 1 − exp(−nominal) of space (Poisson identity, REFERENCES.md).
                    let poisson = matches!(
                        scenario.obstacles,
                        Some(ObstacleSpec::Generated {
                            generator: Generator::Poisson,
                            ..
                        })
                    );
                    let (phi, phi_excl) = if poisson {
                        (1.0 - (-nominal).exp(), 1.0 - (-nominal_excl).exp())
                    } else {
                        (nominal, nominal_excl)
                    };
                    let smallest = spheres
                        .radii_nm
                        .iter()
                        .copied()
                        .fold(f64::INFINITY, f64::min);
                    entries.extend(obstruction_models(
                        phi,
                        phi_excl,
                        a <= POINT_TRACER_SIZE_RATIO * smallest,
                        spheres.may_overlap,
                        compares,
                    ));
                }
                if !fixed.fibres.is_empty() {
                    let aligned = matches!(
                        scenario.fibres.map(|f| f.orientation),
                        Some(Orientation::Aligned { .. })
                    );
                    entries.extend(fibre_models(
                        fixed.fibres.nominal_volume_fraction(&scenario.sim_box),
                        a,
                        fixed.fibres.radius_nm,
                        aligned,
                        compares,
                    ));
                }
            }
            Err(e) => entries.push(ModelValue::new(
                "obstruction models",
                "D_eff/D0",
                "φ",
                f64::NAN,
                Err(format!("the obstacles could not be placed again: {e}")),
                "—",
                compares,
            )),
        }
    }
    if scenario.species.iter().any(|s| s.crowder) {
        let volume: f64 = scenario.sim_box.edges_nm.iter().product();
        let phi: f64 = scenario
            .species
            .iter()
            .filter(|s| s.crowder)
            .map(|s| s.count as f64 * 4.0 / 3.0 * PI * s.radius_nm.powi(3))
            .sum::<f64>()
            / volume;
        entries.extend(crowder_models(phi, tracer.crowder));
    }
    if let Some(g) = geometry {
        let hydro = g.hydrodynamics.is_some();
        let wall_model = |quantity: &str, compares: bool| {
            let (value, source) = if hydro {
                (
                    mean_axial_mobility(g, a, tracer.drag_radius_nm)
                        .ok_or_else(|| "no parallel mobility for this shape".to_string()),
                    match &g.shape {
                        Shape::Slit { .. } => "this engine's wall model: Faxén D∥ of each wall, the two superposed, averaged over the gap",
                        Shape::Cylinder { .. } if g.pore_model == PoreModel::Cylinder => "this engine's pore model: axial mobility of a sphere in a cylinder by radial position (Bungay & Brenner 1973 on the axis, Faxén near the wall), whose section average is Dechadilok & Deen's (2006) K_d",
                        Shape::Cylinder { .. } => "this engine's wall model: Faxén D∥ at the nearest wall (planar approximation of the pore, pore_mobility = \"nearest_wall\"), averaged over the open cross-section",
                        _ => "this engine's wall model: Faxén D∥ at the wall, averaged over the open space",
                    },
                )
            } else {
                (
                    Ok(1.0),
                    "this engine without wall hydrodynamics: steric walls leave motion along them free",
                )
            };
            ModelValue::new(
                "this engine's wall model ⟨D∥⟩/D0",
                quantity,
                "a",
                a,
                value,
                source,
                compares,
            )
        };
        match &g.shape {
            Shape::PlaneWall { .. } => entries.push(wall_model("lateral D_eff/D0", true)),
            Shape::Slit { width_nm } => {
                entries.extend(slit_models(a, 0.5 * width_nm, true));
                entries.push(wall_model("lateral D_eff/D0", true));
            }
            Shape::Cylinder { radius_nm, .. } => {
                entries.extend(pore_models(a / radius_nm, true));
                entries.push(wall_model("axial D_eff/D0", true));
            }
            Shape::Membrane(m) => {
                let r_min = m
                    .pores
                    .iter()
                    .map(|p| p.radius_nm)
                    .fold(f64::INFINITY, f64::min);
                let lambda = a / r_min;
                entries.extend(pore_models(lambda, false));
                entries.extend(membrane_models(scenario, tracer, m, lambda));
            }
        }
    }
    ModelTable { entries }
}

/// Permeability predictions of a membrane for one species, m/s.
fn membrane_models(
    scenario: &Scenario,
    tracer: &thicket_engine::scenario::config::Species,
    m: &thicket_engine::space::shape::Membrane,
    lambda: f64,
) -> Vec<ModelValue> {
    let _ = scenario;
    let a = tracer.radius_nm;
    let d0 = tracer.d0_m2_per_s;
    let eps = m.porosity();
    let phi = m.steric_partition(a);
    let thickness_m = m.thickness_nm() * 1e-9;
    let r_min = a / lambda;
    let quantity = "permeability (m/s)";
    let mut out = vec![ModelValue::new(
        "steric permeability ε Φ D0/L",
        quantity,
        "λ",
        lambda,
        Ok(eps * phi * d0 / thickness_m),
        "steric prediction, no end correction",
        false,
    )];
    // A square arrangement has a known end correction; other layouts get the isolated-mouth one.
    let spacing = m.square_spacing_nm();
    let open = r_min - a;
    let equal_pores = m.pores.iter().all(|p| p.radius_nm == r_min);
    let corrected = if !equal_pores {
        Err("for pores of one radius".to_string())
    } else if spacing.is_some_and(|sp| open / sp > 0.3) {
        Err("the square-array access factor holds for open radius ≤ 0.3 of the spacing".into())
    } else {
        models::membrane_steric_permeability_over_d0(eps, m.thickness_nm(), a, r_min, spacing)
            .map(|p| p * 1e9 * d0)
            .map_err(reason)
    };
    out.push(ModelValue::new(
        "steric permeability with end correction",
        quantity,
        "λ",
        lambda,
        corrected,
        if spacing.is_some() {
            "slab L + 2a for centres, flanged-pipe end correction 0.8216 (r - a), square-array factor"
        } else {
            "slab L + 2a for centres, flanged-pipe end correction 0.8216 (r - a), isolated mouths"
        },
        false,
    ));
    for (name, h, source) in [
        (
            "Renkin permeability ε H D0/L",
            models::renkin_hindrance(lambda),
            "Renkin (1954) hindrance, no end correction",
        ),
        (
            "Dechadilok-Deen permeability ε H D0/L",
            models::dechadilok_deen_hindrance(lambda),
            "Dechadilok & Deen (2006) hindrance, no end correction",
        ),
    ] {
        out.push(ModelValue::new(
            name,
            quantity,
            "λ",
            lambda,
            h.map(|h| eps * h * d0 / thickness_m).map_err(reason),
            source,
            false,
        ));
    }
    out
}

/// The `models` verb's table for given inputs: obstruction models at
/// obstacle fraction `phi` with tracer/obstacle radius ratio `size_ratio`
/// (φ_excl = φ(1 + a/b)³ for non-overlapping spheres of one radius), fibre
/// models at `phi` with the same ratio a/r_f, and nothing else. Entries and
/// values are those [`scenario_model_table`] gives for such a scenario.
pub fn obstacle_inputs_table(phi: f64, size_ratio: f64) -> ModelTable {
    let phi_excl = phi * (1.0 + size_ratio).powi(3);
    let mut entries = obstruction_models(
        phi,
        phi_excl,
        size_ratio <= POINT_TRACER_SIZE_RATIO,
        false,
        true,
    );
    entries.extend(fibre_models(phi, size_ratio, 1.0, false, true));
    ModelTable { entries }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn excluded_fraction_beyond_one_keeps_its_row_with_a_reason() {
        // φ = 0.3 with a/b = 0.5: φ_excl = 0.3 · 1.5³ = 1.0125 ≥ 1.
        let table = obstacle_inputs_table(0.3, 0.5);
        let maxwell = &table.entries[0];
        assert!(maxwell.value.is_none());
        assert!(maxwell.not_applicable.as_deref().unwrap().contains("≥ 1"));
        // Mackie–Meares at obstacle φ still applies: ((1 − 0.3)/(1 + 0.3))² (Mackie & Meares 1955).
        let mm = table
            .entries
            .iter()
            .find(|e| e.variable == "φ" && e.name.starts_with("Mackie"))
            .unwrap();
        assert!((mm.value.unwrap() - (0.7f64 / 1.3).powi(2)).abs() < 1e-15);
    }

    #[test]
    fn point_tracer_gets_torquato_and_a_large_one_a_reason() {
        // REFERENCES.md: Torquato's tracer form 0.859 at φ = 0.3 for a point tracer.
        let point = obstacle_inputs_table(0.3, 0.0);
        let t = point
            .entries
            .iter()
            .find(|e| e.name.starts_with("Torquato"))
            .unwrap();
        assert!((t.value.unwrap() - 0.859).abs() < 2e-3);
        let large = obstacle_inputs_table(0.1, 0.2);
        let t = large
            .entries
            .iter()
            .find(|e| e.name.starts_with("Torquato"))
            .unwrap();
        assert!(t.value.is_none() && t.not_applicable.is_some());
    }
}
