//! Validation of `[component.fatigue]` into the engine's fatigue plan:
//! the material's elastic data and design curve, the through-wall
//! difference's inputs, the gate and the class widths, the alarm levels.

use super::Validator;
use crate::engine::fatigue::{FatiguePlan, ThermalPlan};
use crate::engine::plan::{Input, Levels, StressPlan, TagPlan};
use crate::physics::fatigue::curve::DesignCurve;
use crate::physics::fatigue::interaction::Envelope;
use crate::physics::fatigue::thermal::mean_to_outer_ratio;
use crate::physics::material::Material;
use crate::physics::units::Quantity;
use crate::settings::schema::{FatigueSettings, Interpolation, WallPosition};
use std::collections::HashMap;

/// Default fatigue usage levels: advisory 0.2, warning 0.4, critical 0.7.
/// Lower than the creep life-fraction defaults because the built-in curves
/// are recalled, not read, and leave out the plasticity correction K_e and
/// environmental factors (each of which raises usage); an advisory at a
/// fifth of the curve's cycles leaves time to plan a bore inspection
/// (inspecting the nozzle bores of cycling headers is common practice).
/// Defaults only: the plant's governing code and engineer set the limits.
pub const DEFAULT_FATIGUE_USAGE: Levels = Levels { advisory: Some(0.2), warning: Some(0.4), critical: Some(0.7) };
/// Default creep-fatigue index levels (1 = on the envelope): advisory 0.3,
/// warning 0.5, critical 0.7, the creep life-fraction defaults, since the
/// index reduces to the life fraction without cycles. Defaults only.
pub const DEFAULT_CREEP_FATIGUE: Levels = Levels { advisory: Some(0.3), warning: Some(0.5), critical: Some(0.7) };

fn k_fretting() -> String {
    "fatigue.fretting_knockdown".into()
}

impl Validator {
    #[allow(clippy::too_many_arguments)]
    pub(super) fn fatigue(
        &mut self,
        place: &str,
        f: &FatigueSettings,
        material: Option<&Material>,
        stress: Option<&StressPlan>,
        fretting: bool,
        has_metal_temperature: bool,
        tags: &[TagPlan],
        index: &HashMap<&str, usize>,
    ) -> Option<FatiguePlan> {
        let k = |s: &str| format!("fatigue.{s}");
        if f.location.trim().is_empty() {
            self.err(place, &k("location"), "is empty", "name the location assessed, for example \"nozzle bore N1\"");
        }
        for (key, v) in [
            ("pressure_stress_factor", f.pressure_stress_factor),
            ("thermal_stress_factor", f.thermal_stress_factor),
            ("range_class_mpa", f.range_class_mpa),
            ("mean_class_mpa", f.mean_class_mpa),
            ("design_ramp_k_per_min", f.design_ramp_k_per_min),
        ] {
            if !(v.is_finite() && v > 0.0) {
                self.err(place, &k(key), format!("{v} is not a positive number"), "give a positive number");
            }
        }
        if !(f.initial_usage.is_finite() && f.initial_usage >= 0.0) {
            self.err(
                place,
                &k("initial_usage"),
                "must be zero or positive",
                "the usage of an earlier assessment, or 0",
            );
        }
        if f.plasticity_limit_mpa.is_some_and(|v| !(v.is_finite() && v > 0.0)) {
            self.err(
                place,
                &k("plasticity_limit_mpa"),
                "must be a positive stress in MPa",
                "S_PS: the larger of 3·S_m and 2·S_y",
            );
        }
        if let Some(k) = f.fretting_knockdown {
            if !(k.is_finite() && k >= 1.0) {
                self.err(
                    place,
                    &k_fretting(),
                    "must be 1 or more (a reduction of fatigue strength)",
                    "for example 2.0",
                );
            } else if !fretting {
                self.err(
                    place,
                    &k_fretting(),
                    "the component has no fretting contact ([component.wear] with model = \"fretting\")",
                    "add the fretting contact, or leave fretting_knockdown out",
                );
            }
        }
        if !(f.hysteresis_gate_mpa.is_finite() && f.hysteresis_gate_mpa >= 0.0) {
            self.err(place, &k("hysteresis_gate_mpa"), "must be zero or positive (MPa)", "for example 10");
        }
        if !has_metal_temperature {
            self.err(
                place,
                "metal_temperature",
                "fatigue needs the metal temperature (E and α are read at it)",
                "set metal_temperature = \"TAG\"",
            );
        }
        let elastic = match material.map(|m| (m, m.elastic.as_ref())) {
            Some((_, Some(e))) => {
                for (key, t) in [
                    ("youngs_modulus_mpa", &e.youngs_modulus_mpa),
                    ("thermal_expansion_per_k", &e.thermal_expansion_per_k),
                    ("thermal_diffusivity_mm2_per_s", &e.thermal_diffusivity_mm2_per_s),
                ] {
                    if let Some(p) = t.problem() {
                        self.err(place, &format!("material elastic.{key}"), p, "fix the grade's table");
                    }
                }
                if !(0.0..0.5).contains(&e.poisson_ratio.value) {
                    self.err(place, "material elastic.poisson_ratio", "must lie in [0, 0.5)", "0.3 for steels");
                }
                Some(e.clone())
            }
            Some((m, None)) => {
                self.err(
                    place,
                    "fatigue",
                    format!("material \"{}\" has no [elastic] properties (E, α, ν, diffusivity)", m.grade),
                    "add an [elastic] block to a [[material]] grade, with the sources of its values",
                );
                None
            }
            None => None,
        };
        let curve = match &f.design_curve {
            Some(name) => match DesignCurve::from_name(name) {
                Some(c) => Some(c),
                None => {
                    let names: Vec<&str> = DesignCurve::ALL.iter().map(|c| c.name()).collect();
                    self.err(
                        place,
                        &k("design_curve"),
                        format!("unknown curve \"{name}\""),
                        &format!("use one of: {}", names.join(", ")),
                    );
                    None
                }
            },
            None => match material.and_then(|m| m.fatigue.as_ref().and_then(|x| x.design_curve)) {
                Some(c) => Some(c),
                None => {
                    if let Some(m) = material {
                        self.err(
                            place,
                            &k("design_curve"),
                            format!("material \"{}\" has no built-in design fatigue curve", m.grade),
                            "name one with design_curve = \"…\" after checking it against the governing code",
                        );
                    }
                    None
                }
            },
        };
        let (envelope, envelope_source) =
            match material.and_then(|m| m.fatigue.as_ref().and_then(|x| x.creep_fatigue_envelope.as_ref())) {
                Some(p) if p.fatigue > 0.0 && p.fatigue < 1.0 && p.creep > 0.0 && p.creep < 1.0 => {
                    (Envelope { fatigue: p.fatigue, creep: p.creep }, p.source.clone())
                }
                Some(_) => {
                    self.err(
                        place,
                        "material fatigue.creep_fatigue_envelope",
                        "the intersection point must lie inside (0, 1) × (0, 1)",
                        "fix the grade's envelope point",
                    );
                    (Envelope::INNERMOST, String::new())
                }
                None => {
                    if material.is_some() {
                        self.warn(
                            place,
                            "fatigue",
                            "the grade has no creep-fatigue envelope from a code: the innermost of the built-in ones, \
                             (0.1, 0.01) of 9Cr-1Mo-V, is used (conservative)",
                            "add creep_fatigue_envelope to the grade's [fatigue] block if the governing code gives one",
                        );
                    }
                    (
                        Envelope::INNERMOST,
                        "no envelope for the grade: the innermost built-in one, (0.1, 0.01) of 9Cr-1Mo-V after ASME \
                         III-5 Fig. HBB-T-1420-2 from memory, is used (conservative)"
                            .into(),
                    )
                }
            };
        let geometry = match stress {
            Some(StressPlan::Hoop { outside_diameter_mm, wall_mm, .. }) => Some((*outside_diameter_mm, *wall_mm)),
            _ => None,
        };
        let od = f
            .outside_diameter
            .as_ref()
            .and_then(|q| self.quantity(place, &k("outside_diameter"), q, Quantity::Length))
            .or(geometry.map(|g| g.0));
        let wall = f
            .wall
            .as_ref()
            .and_then(|q| self.quantity(place, &k("wall"), q, Quantity::Length))
            .or(geometry.map(|g| g.1));
        let fluid = f
            .fluid_temperature
            .as_ref()
            .and_then(|i| self.input(place, &k("fluid_temperature"), i, Quantity::Temperature, tags, index));
        let wall_t = f
            .wall_temperature
            .as_ref()
            .and_then(|i| self.input(place, &k("wall_temperature"), i, Quantity::Temperature, tags, index));
        let geometry_ok = |v: &mut Validator| match (od, wall) {
            (Some(od), Some(w)) if w > 0.0 && od > 2.0 * w => Some((od, w)),
            _ => {
                v.err(
                    place,
                    &k("wall"),
                    "the through-wall difference needs the location's outside diameter and wall (OD > 2·wall > 0)",
                    "give [component.geometry] or fatigue.outside_diameter and fatigue.wall",
                );
                None
            }
        };
        let thermal = match (f.fluid_temperature.is_some(), f.wall_temperature.is_some()) {
            (false, false) => Some(ThermalPlan::None),
            (false, true) => {
                self.err(
                    place,
                    &k("fluid_temperature"),
                    "wall_temperature is given without fluid_temperature",
                    "give the fluid or inner-surface temperature too",
                );
                None
            }
            (true, true) => {
                let ratio = match f.wall_position {
                    WallPosition::MidWall => Some(1.0),
                    WallPosition::OuterSurface => geometry_ok(self).map(|(od, w)| mean_to_outer_ratio(od, w)),
                };
                match (fluid, wall_t, ratio) {
                    (Some(fl), Some(wa), Some(r)) => Some(ThermalPlan::Measured { fluid: fl, wall: wa, ratio: r }),
                    _ => None,
                }
            }
            (true, false) => match fluid {
                Some(Input::Tag(id)) => {
                    if tags[id as usize].interpolation == Interpolation::Step {
                        self.warn(
                            place,
                            &k("fluid_temperature"),
                            "the tag is stepped: its rate is zero between samples, so the ramp-derived thermal \
                             stress is zero",
                            "use a linearly interpolated tag for the fluid temperature",
                        );
                    }
                    geometry_ok(self).map(|(od, w)| ThermalPlan::Ramp {
                        fluid: id,
                        outside_diameter_mm: od,
                        wall_mm: w,
                    })
                }
                Some(Input::Constant(_)) => {
                    self.err(
                        place,
                        &k("fluid_temperature"),
                        "a constant has no rate of change: the ramp-derived difference needs a tag",
                        "point fluid_temperature at a tag, or give wall_temperature as well",
                    );
                    None
                }
                None => None,
            },
        };
        let usage_levels = self.levels(place, &k("fatigue_usage"), f.fatigue_usage, DEFAULT_FATIGUE_USAGE);
        let combined_levels = self.levels(place, &k("creep_fatigue"), f.creep_fatigue, DEFAULT_CREEP_FATIGUE);
        Some(FatiguePlan {
            location: f.location.clone(),
            pressure_stress_factor: f.pressure_stress_factor,
            thermal_stress_factor: f.thermal_stress_factor,
            thermal: thermal?,
            curve: curve?,
            elastic: elastic?,
            envelope,
            envelope_source,
            gate_mpa: f.hysteresis_gate_mpa,
            range_class_mpa: f.range_class_mpa,
            mean_class_mpa: f.mean_class_mpa,
            usage_levels,
            combined_levels,
            design_ramp_k_per_min: f.design_ramp_k_per_min,
            initial_usage: f.initial_usage,
            plasticity_limit_mpa: f.plasticity_limit_mpa,
            fretting_knockdown: f.fretting_knockdown,
            geometry_mm: match (od, wall) {
                (Some(od), Some(w)) if w > 0.0 && od > 2.0 * w => Some((od, w)),
                _ => None,
            },
        })
    }
}
