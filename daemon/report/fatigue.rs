//! The fatigue part of a component's report and of `check-config`: the
//! engine's fatigue figures, the cycle table with its class edges, and the
//! allowable cycles of a design start-stop.

use crate::engine::component::ComponentState;
use crate::engine::fatigue::{figures, FatigueFigures, ThermalPlan};
use crate::engine::plan::{ComponentPlan, StressPlan};
use crate::physics::fatigue::thermal::{ramp_delta_t_k, thermal_stress_mpa};
use crate::physics::stress::hoop_stress_mpa;
use crate::physics::units::kelvin_to_celsius;
use serde::Serialize;

/// One cell of the cycle table, with its class edges in MPa.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct CycleClass {
    pub range_from_mpa: f64,
    pub range_to_mpa: f64,
    pub mean_from_mpa: f64,
    pub mean_to_mpa: f64,
    pub cycles: f64,
}

/// A component's fatigue report.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct FatigueReport {
    #[serde(flatten)]
    pub figures: FatigueFigures,
    /// Closed cycles by stress range and mean stress class.
    pub cycle_table: Vec<CycleClass>,
    /// Highest temperature the design curve is valid for, °C.
    pub curve_max_temperature_c: f64,
    /// What an operator must know about these figures.
    pub caution: &'static str,
}

/// The caution that goes with every fatigue figure.
pub const CAUTION: &str = "Fatigue usage from built-in design curves recalled from ASME VIII-2 Annex 3-F, without \
    weld or environmental factors (and without the plasticity factor K_e unless S_PS is configured), and a \
    creep-fatigue envelope recalled from ASME III-5: screening figures, not an assessment. Use the governing \
    code's curves and a licensed engineer's judgement.";

/// The fatigue report of a component with a fatigue plan.
pub fn report(plan: &ComponentPlan, st: &ComponentState) -> Option<FatigueReport> {
    let f = plan.fatigue.as_ref()?;
    let figures = figures(plan, st)?;
    let table = st.fatigue.as_ref().map_or(vec![], |fs| {
        fs.table
            .iter()
            .map(|c| CycleClass {
                range_from_mpa: c.range_class as f64 * f.range_class_mpa,
                range_to_mpa: (c.range_class + 1) as f64 * f.range_class_mpa,
                mean_from_mpa: c.mean_class as f64 * f.mean_class_mpa,
                mean_to_mpa: (c.mean_class + 1) as f64 * f.mean_class_mpa,
                cycles: c.cycles,
            })
            .collect()
    });
    Some(FatigueReport {
        figures,
        cycle_table: table,
        curve_max_temperature_c: kelvin_to_celsius(f.curve.data().max_temperature_k),
        caution: CAUTION,
    })
}

/// Allowable cycles of a design start-stop, for `check-config`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct FatigueDesignCheck {
    pub location: String,
    pub design_curve: &'static str,
    /// Pressure stress at the location at design pressure, MPa.
    pub pressure_stress_at_design_mpa: f64,
    /// Thermal stress magnitude of the design ramp at design temperature
    /// by the quasi-steady hollow cylinder, MPa (0 without thermal stress
    /// or without the location's geometry).
    pub thermal_stress_of_design_ramp_mpa: f64,
    /// Range of the design start-stop: heating at no pressure to cooling
    /// at full pressure, `k_p·σ_hoop + 2·|σ_t|` (conservative).
    pub design_cycle_range_mpa: f64,
    pub alternating_stress_mpa: f64,
    pub allowable_cycles: f64,
    pub envelope: crate::physics::fatigue::interaction::Envelope,
    pub envelope_source: String,
    pub warnings: Vec<String>,
}

/// The design start-stop of a component with a fatigue plan.
pub fn design_check(plan: &ComponentPlan) -> Option<FatigueDesignCheck> {
    let f = plan.fatigue.as_ref()?;
    let mut warnings = vec![];
    let t = plan.design_temperature_k.unwrap_or_else(|| {
        warnings.push("no design temperature: E and α are read at 20 °C".into());
        293.15
    });
    let hoop = match (plan.stress, plan.design_pressure_mpa) {
        (StressPlan::Hoop { basis, outside_diameter_mm, wall_mm, measured_loss_mm, .. }, Some(p)) => {
            hoop_stress_mpa(basis, p, outside_diameter_mm, wall_mm - measured_loss_mm)
        }
        (StressPlan::Fixed(s), _) => s,
        _ => {
            warnings.push("no design pressure: the pressure stress is taken as 0".into());
            0.0
        }
    };
    let sigma_p = f.pressure_stress_factor * hoop;
    let e = &f.elastic;
    let geometry = match f.thermal {
        ThermalPlan::None => None,
        _ => f.geometry_mm,
    };
    if geometry.is_none() && f.thermal != ThermalPlan::None {
        warnings.push("no geometry at the location: the design ramp's thermal stress is not shown".into());
    }
    let sigma_t = match geometry {
        Some((outside_diameter_mm, wall_mm)) => {
            let dt = ramp_delta_t_k(
                f.design_ramp_k_per_min / 60.0,
                outside_diameter_mm,
                wall_mm,
                e.thermal_diffusivity_mm2_per_s.at_k(t),
            );
            thermal_stress_mpa(
                f.thermal_stress_factor,
                e.youngs_modulus_mpa.at_k(t),
                e.thermal_expansion_per_k.at_k(t),
                e.poisson_ratio.value,
                dt,
            )
            .abs()
        }
        _ => 0.0,
    };
    let range = sigma_p + 2.0 * sigma_t;
    let sa = crate::engine::fatigue::alternating_stress_mpa(f, range, t);
    if f.plasticity_limit_mpa.is_some_and(|s| range > s) {
        warnings.push("the design range exceeds S_PS: the simplified elastic-plastic factor K_e is applied".into());
    }
    if t > f.curve.data().max_temperature_k {
        warnings.push(format!(
            "design temperature {:.0} °C is above the curve's limit of {:.0} °C: the governing code's \
             elevated-temperature fatigue curves apply",
            kelvin_to_celsius(t),
            kelvin_to_celsius(f.curve.data().max_temperature_k)
        ));
    }
    Some(FatigueDesignCheck {
        location: f.location.clone(),
        design_curve: f.curve.name(),
        pressure_stress_at_design_mpa: sigma_p,
        thermal_stress_of_design_ramp_mpa: sigma_t,
        design_cycle_range_mpa: range,
        alternating_stress_mpa: sa,
        allowable_cycles: f.curve.allowable_cycles(sa),
        envelope: f.envelope,
        envelope_source: f.envelope_source.clone(),
        warnings,
    })
}

/// The design start-stop as `check-config` prints it.
pub fn design_check_text(f: &FatigueDesignCheck) -> String {
    let mut s = format!(
        "  fatigue at {}\n    design start-stop range          {:.1} MPa (pressure {:.1} MPa + 2 × thermal {:.1} MPa)\n    \
         allowable cycles ({})  {:.0} at Sa {:.1} MPa\n    creep-fatigue envelope           ({}, {})\n",
        f.location,
        f.design_cycle_range_mpa,
        f.pressure_stress_at_design_mpa,
        f.thermal_stress_of_design_ramp_mpa,
        f.design_curve,
        f.allowable_cycles,
        f.alternating_stress_mpa,
        f.envelope.fatigue,
        f.envelope.creep
    );
    for w in &f.warnings {
        s.push_str(&format!("    warning: {w}\n"));
    }
    s
}

/// Lines under the summary table for the components with fatigue: usage
/// (closed plus residue), cycles, the creep-fatigue index, and the caution.
pub fn summary_lines(reports: &[super::ComponentReport]) -> String {
    let mut s = String::new();
    for r in reports {
        if let Some(f) = &r.fatigue {
            let g = &f.figures;
            s.push_str(&format!(
                "fatigue {} at {}: usage {:.5} ({:.5} closed + {:.5} residue), {} cycles ({} last day, {} last \
                 month), largest range {:.0} MPa, creep-fatigue index {:.4} (envelope ({}, {})), curve {}\n",
                r.component,
                g.location,
                g.fatigue_usage,
                g.closed_usage,
                g.residue_usage,
                g.cycles,
                g.cycles_last_day,
                g.cycles_last_month,
                g.largest_range_mpa,
                g.creep_fatigue_index,
                g.envelope.fatigue,
                g.envelope.creep,
                g.design_curve
            ));
        }
    }
    if !s.is_empty() {
        s.push_str(&format!("note on fatigue: {CAUTION}\n"));
    }
    s
}

/// A grade's elastic and fatigue data as `materials show` prints them
/// (empty for a grade without them).
pub fn material_text(m: &crate::physics::material::Material) -> String {
    let mut s = String::new();
    if let Some(e) = &m.elastic {
        s.push_str("\nelastic and thermal (fatigue)\n");
        for (name, t, scale, unit) in [
            ("E", &e.youngs_modulus_mpa, 1e-3, "GPa"),
            ("alpha", &e.thermal_expansion_per_k, 1e6, "1e-6/K"),
            ("diffusivity", &e.thermal_diffusivity_mm2_per_s, 1.0, "mm²/s"),
        ] {
            let row: Vec<String> = t
                .temperature_c
                .iter()
                .zip(&t.values)
                .map(|(c, v)| format!("{c:.0} °C {}", (v * scale * 1000.0).round() / 1000.0))
                .collect();
            s.push_str(&format!("  {name:<17}  {unit}: {}\n  {:<17}  source: {}\n", row.join(", "), "", t.source));
        }
        s.push_str(&format!(
            "  {:<17}  {}   source: {}\n",
            "Poisson ratio", e.poisson_ratio.value, e.poisson_ratio.source
        ));
    }
    if let Some(f) = &m.fatigue {
        s.push_str(&format!(
            "  {:<17}  {}\n  {:<17}  source: {}\n",
            "design curve",
            f.design_curve.map_or("none built in", |c| c.name()),
            "",
            f.curve_source
        ));
        match &f.creep_fatigue_envelope {
            Some(p) => {
                s.push_str(&format!("  {:<17}  ({}, {})   source: {}\n", "c-f envelope", p.fatigue, p.creep, p.source))
            }
            None => s.push_str(&format!(
                "  {:<17}  none from a code: the innermost built-in (0.1, 0.01) is used (conservative)\n",
                "c-f envelope"
            )),
        }
    }
    s
}
