//! The assessment report: what an integrity engineer brings to an outage
//! planning meeting, for one component, a unit or the whole plant.
//!
//! `lifeledger report` reads a service's ledger (read-only, safe while it
//! runs) and writes three files with the same figures: a self-contained
//! HTML document that prints on A4 and US letter (no scripts, no external
//! assets; inline CSS and SVG), a CSV (one row per figure: component,
//! section, item, value, unit, source) and a JSON.
//!
//! Each component section holds: identity; material with every value's
//! source; the geometry in force and how it was obtained (configuration or
//! inspection record); life consumed now and its daily history; rates and
//! hours to each level; the time-at-condition tables; the inspection
//! records; the alarm events of the period; everything that lowers
//! confidence (unmonitored and extrapolated hours, a settling projection,
//! temperature corrections, replica bounds); the assumptions (curve basis,
//! gap policy, recent-rate window); and projections under stated operating
//! profiles beside the recent-rate one ("what if").
//!
//! The per-component figures reuse [`crate::report::ComponentReport`] (the
//! same numbers `replay` and `ledger` print); this module adds what only
//! the ledger file knows (history, records, alarm journal) and the
//! profiles. CAUTION: a screening document; limits, material data and
//! acceptance come from the governing code and a responsible engineer.

pub mod alarm_performance;
pub mod html;

use crate::alarm::AlarmEvent;
use std::path::{Path, PathBuf};

use anyhow::{Context, Result};
use serde::Serialize;

use crate::engine::component::design_rates;
use crate::engine::plan::StressPlan;
use crate::engine::{ComponentPlan, ComponentState, Engine};
use crate::event_time::rfc3339_ms;
use crate::physics::remaining::hours_to_threshold;
use crate::physics::stress::remaining_wall_mm;
use crate::physics::units::kelvin_to_celsius;
use crate::report::ComponentReport;
use crate::store::inspection::{HistoryPoint, InspectionRow};

/// What the report covers.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Scope {
    Component(String),
    Unit(String),
    Plant,
}

/// A value with its unit and where it comes from.
#[derive(Debug, Clone, Serialize)]
pub struct Sourced {
    pub item: String,
    pub value: String,
    pub unit: String,
    pub source: String,
}

/// The geometry in force.
#[derive(Debug, Clone, Serialize)]
pub struct Geometry {
    /// `hoop` or `fixed_stress`.
    pub stress: String,
    pub basis: Option<String>,
    pub outside_diameter_mm: Option<f64>,
    /// Wall at the ledger's instant, mm.
    pub wall_now_mm: Option<f64>,
    pub wall_as_configured_mm: Option<f64>,
    pub thinning_rate_mm_per_year: Option<f64>,
    pub thinning_rate_uncertainty_mm_per_year: Option<f64>,
    pub fixed_stress_mpa: Option<f64>,
    pub stress_factor: f64,
    /// How the wall was obtained, in words.
    pub obtained: String,
}

/// Hours to each level under one operating profile.
#[derive(Debug, Clone, Serialize)]
pub struct ProfileProjection {
    pub profile: String,
    /// How the rate was found.
    pub basis: String,
    pub life_fraction_rate_per_h: f64,
    /// (level name, level, hours from now; `None`: not reached at this rate).
    pub hours_to: Vec<(String, f64, Option<f64>)>,
}

/// One alarm event of the period.
#[derive(Debug, Clone, Serialize)]
pub struct AlarmLine {
    pub time: String,
    pub index: String,
    pub summary: String,
}

/// Everything of one component.
#[derive(Debug, Clone, Serialize)]
pub struct ComponentAssessment {
    pub figures: ComponentReport,
    pub material: Vec<Sourced>,
    pub material_description: String,
    pub geometry: Geometry,
    pub history: Vec<HistoryPoint>,
    pub inspections: Vec<InspectionRow>,
    /// The records as the ledger applied them (effect, effective instant).
    pub events: Vec<crate::engine::inspection::Event>,
    pub alarms: Vec<AlarmLine>,
    /// Everything that lowers confidence, in words.
    pub confidence: Vec<String>,
    pub temperature_correction_k: f64,
    pub replica_bounds: Option<[f64; 2]>,
    pub projections: Vec<ProfileProjection>,
    pub assumptions: Vec<String>,
}

/// The whole report.
#[derive(Debug, Clone, Serialize)]
pub struct Assessment {
    pub plant: String,
    pub scope: String,
    pub generated: String,
    pub software: String,
    pub ledger: String,
    pub caution: String,
    pub profile_shift_k: f64,
    pub components: Vec<ComponentAssessment>,
    /// Alarm-system performance of the scope over its journal's period.
    pub alarm_performance: alarm_performance::AlarmPerformance,
}

/// A clone of `plan` whose design conditions are (t_k, p_mpa): the rates
/// of [`design_rates`] are then the rates at those conditions with the
/// ledger's present geometry.
fn rate_at(plan: &ComponentPlan, st: &ComponentState, t_k: f64, p_mpa: Option<f64>) -> f64 {
    let mut p = plan.clone();
    p.design_temperature_k = Some(t_k);
    if p_mpa.is_some() {
        p.design_pressure_mpa = p_mpa;
    }
    design_rates(&p, st).life_fraction_rate_per_h
}

fn hours_to(plan: &ComponentPlan, current: f64, rate: f64) -> Vec<(String, f64, Option<f64>)> {
    let mut v: Vec<(String, f64, Option<f64>)> = plan
        .thresholds
        .life_fraction
        .iter()
        .map(|(n, l)| (n.to_string(), l, hours_to_threshold(current, l, rate)))
        .collect();
    v.push(("exhaustion (Robinson sum 1)".into(), 1.0, hours_to_threshold(current, 1.0, rate)));
    v
}

/// The projections: the ledger's own (recent rates, with settling), design
/// conditions, design + Δ, the measured profile (time at temperature and
/// pressure, class mid-points) and that profile + Δ.
pub fn projections(plan: &ComponentPlan, st: &ComponentState, shift_k: f64) -> Vec<ProfileProjection> {
    if plan.metal_temperature.is_none() {
        return vec![];
    }
    let pr = crate::engine::component::projection(plan, st);
    let d = st.life_fraction;
    let mut out = vec![ProfileProjection {
        profile: "recent operation".into(),
        basis: if pr.settling {
            "the ledger's recent rate; the window is still settling, so the larger of recent and design rate".into()
        } else {
            format!("the ledger's recent rate (exponential window of {:.0} h)", pr.window_h)
        },
        life_fraction_rate_per_h: pr.life_fraction_rate_per_h,
        hours_to: hours_to(plan, d, pr.life_fraction_rate_per_h),
    }];
    if let Some(t) = plan.design_temperature_k {
        for (name, dt) in [("design conditions", 0.0), ("design conditions + shift", shift_k)] {
            if dt == 0.0 && name.ends_with("shift") {
                continue;
            }
            let r = rate_at(plan, st, t + dt, plan.design_pressure_mpa);
            out.push(ProfileProjection {
                profile: if dt == 0.0 { name.into() } else { format!("design conditions {dt:+.0} K") },
                basis: format!(
                    "{:.1} °C{}, present wall",
                    kelvin_to_celsius(t + dt),
                    plan.design_pressure_mpa.map(|p| format!(", {p:.2} MPa")).unwrap_or_default()
                ),
                life_fraction_rate_per_h: r,
                hours_to: hours_to(plan, d, r),
            });
        }
    }
    // The measured profile: hours by (temperature, pressure) class.
    let h = &st.histogram;
    let (te, pe) = (&h.temperature_edges_k, &h.pressure_edges_mpa);
    let w = pe.len() + 1;
    let mid = |edges: &[f64], i: usize| match (i.checked_sub(1).and_then(|j| edges.get(j)), edges.get(i)) {
        (Some(&a), Some(&b)) => 0.5 * (a + b),
        (None, Some(&b)) => b,
        (Some(&a), None) => a,
        (None, None) => f64::NAN,
    };
    for dt in [0.0, shift_k] {
        let (mut sum, mut hours) = (0.0, 0.0);
        for (k, &hk) in h.hours.iter().enumerate() {
            if hk <= 0.0 {
                continue;
            }
            let (ti, pi) = (k / w, k % w);
            let t = mid(te, ti);
            let p = if plan.pressure.is_some() { Some(mid(pe, pi)) } else { None };
            if t.is_finite() {
                sum += hk * rate_at(plan, st, t + dt, p);
                hours += hk;
            }
        }
        if hours > 0.0 {
            let r = sum / hours;
            out.push(ProfileProjection {
                profile: if dt == 0.0 { "measured profile".into() } else { format!("measured profile {dt:+.0} K") },
                basis: format!(
                    "the {hours:.0} h of the time-at-temperature and pressure table, class mid-points{}",
                    if dt == 0.0 { String::new() } else { format!(", every class {dt:+.0} K") }
                ),
                life_fraction_rate_per_h: r,
                hours_to: hours_to(plan, d, r),
            });
        }
        if shift_k == 0.0 {
            break;
        }
    }
    out
}

/// Hours to each life-fraction level at the measured mean metal
/// temperature in the creep range (which carries the oxide correction in
/// force) and design pressure, with the steam-side scale growing by the
/// grade's oxide law and insulating the tube: every `STEP_H`, the scale
/// grows at the present metal temperature (`OxideLaw::grow_mm`) and the
/// metal temperature rises by `q·Δx/k` (`scale_temperature_rise_k`). `None`
/// without an oxide law for the grade or measured hours in the creep range.
pub fn scale_growth_projection(
    plan: &ComponentPlan,
    st: &ComponentState,
    oxide_mm: f64,
    heat_flux_kw_m2: f64,
) -> Option<ProfileProjection> {
    use crate::physics::inspection::{oxide_law_for, scale_temperature_rise_k};
    const STEP_H: f64 = 250.0;
    const HORIZON_H: f64 = 500_000.0;
    let law = oxide_law_for(&plan.material.grade)?;
    let t0 = crate::engine::inspection::mean_creep_range_temperature_k(plan, st)?;
    let p = if plan.pressure.is_some() { plan.design_pressure_mpa } else { None };
    let mut levels: Vec<(String, f64, Option<f64>)> = hours_to(plan, st.life_fraction, 0.0)
        .into_iter()
        .map(|(n, l, _)| (n, l, if st.life_fraction >= l { Some(0.0) } else { None }))
        .collect();
    let (mut d, mut x, mut t, mut h) = (st.life_fraction, oxide_mm, t0, 0.0);
    let first_rate = rate_at(plan, st, t, p);
    while h < HORIZON_H && levels.iter().any(|l| l.2.is_none()) {
        let r = rate_at(plan, st, t, p);
        let d1 = d + r * STEP_H;
        for l in levels.iter_mut().filter(|l| l.2.is_none()) {
            if d1 >= l.1 && r > 0.0 {
                l.2 = Some(h + (l.1 - d) / r);
            }
        }
        let x1 = law.grow_mm(x, t, STEP_H);
        t += scale_temperature_rise_k(heat_flux_kw_m2, x1 - x);
        x = x1;
        d = d1;
        h += STEP_H;
    }
    Some(ProfileProjection {
        profile: format!("measured mean temperature with scale growth ({heat_flux_kw_m2:.0} kW/m²)"),
        basis: format!(
            "starts at {:.1} °C (mean in the creep range, oxide correction included) and {:.2} mm of scale; \
             after {h:.0} h the scale is {x:.2} mm and the metal {:.1} °C ({}; scale conductivity {} W/(m·K), from memory)",
            kelvin_to_celsius(t0),
            oxide_mm,
            kelvin_to_celsius(t),
            law.source,
            crate::physics::inspection::SCALE_CONDUCTIVITY_W_PER_M_K
        ),
        life_fraction_rate_per_h: first_rate,
        hours_to: levels,
    })
}

fn geometry(plan: &ComponentPlan, st: &ComponentState) -> Geometry {
    match plan.stress {
        StressPlan::Hoop {
            basis,
            outside_diameter_mm,
            wall_mm,
            measured_loss_mm,
            thinning_rate_mm_per_year,
            wall_reference_ms,
        } => {
            let now = st.integrated_to_ms.unwrap_or(0);
            let from = wall_reference_ms.or(st.first_sample_ms).unwrap_or(now);
            let service_h = (now - from) as f64 / 3_600_000.0;
            let wall_now = remaining_wall_mm(wall_mm, measured_loss_mm, thinning_rate_mm_per_year, service_h);
            let obtained = match st.inspection.wall {
                Some(w) => {
                    let ids: Vec<String> = st
                        .inspection
                        .events
                        .iter()
                        .filter(|e| matches!(e.finding, crate::engine::inspection::Finding::WallThickness { .. }))
                        .map(|e| format!("#{}", e.id))
                        .collect();
                    format!(
                        "measured {:.2} mm on {} (inspection records {}), thinning {}",
                        w.wall_mm,
                        rfc3339_ms(w.at_ms),
                        ids.join(", "),
                        match w.fit {
                            Some(f) => format!(
                                "re-fitted by least squares to {} measurements{}",
                                f.points,
                                f.slope_uncertainty_mm_per_year
                                    .map(|u| format!(" (standard uncertainty {u:.3} mm/year)"))
                                    .unwrap_or_default()
                            ),
                            None => "at the configured rate".into(),
                        }
                    )
                }
                None => format!(
                    "configuration: {wall_mm:.2} mm nominal{}{}",
                    if measured_loss_mm > 0.0 {
                        format!(" less {measured_loss_mm:.2} mm measured loss")
                    } else {
                        String::new()
                    },
                    wall_reference_ms.map(|t| format!(" as of {}", rfc3339_ms(t))).unwrap_or_default()
                ),
            };
            Geometry {
                stress: "hoop".into(),
                basis: Some(format!("{basis:?}")),
                outside_diameter_mm: Some(outside_diameter_mm),
                wall_now_mm: Some(wall_now),
                wall_as_configured_mm: Some(wall_mm),
                thinning_rate_mm_per_year: Some(thinning_rate_mm_per_year),
                thinning_rate_uncertainty_mm_per_year: st
                    .inspection
                    .wall
                    .and_then(|w| w.fit)
                    .and_then(|f| f.slope_uncertainty_mm_per_year),
                fixed_stress_mpa: None,
                stress_factor: plan.stress_factor,
                obtained,
            }
        }
        StressPlan::Fixed(s) => Geometry {
            stress: "fixed_stress".into(),
            basis: None,
            outside_diameter_mm: None,
            wall_now_mm: None,
            wall_as_configured_mm: None,
            thinning_rate_mm_per_year: None,
            thinning_rate_uncertainty_mm_per_year: None,
            fixed_stress_mpa: Some(s),
            stress_factor: plan.stress_factor,
            obtained: "configuration (fixed stress)".into(),
        },
    }
}

fn material(plan: &ComponentPlan) -> Vec<Sourced> {
    let m = &plan.material;
    let lm = &m.larson_miller;
    let mut v = vec![
        Sourced {
            item: "grade".into(),
            value: m.grade.clone(),
            unit: String::new(),
            source: "material library".into(),
        },
        Sourced {
            item: "melting point".into(),
            value: format!("{:.0}", kelvin_to_celsius(m.melting_point_k.value)),
            unit: "°C".into(),
            source: m.melting_point_k.source.clone(),
        },
        Sourced {
            item: "creep threshold".into(),
            value: format!("{:.0}", kelvin_to_celsius(m.creep_threshold_k())),
            unit: "°C".into(),
            source: m
                .creep_threshold_k
                .as_ref()
                .map_or("0.4 × melting point (common practice)".into(), |s| s.source.clone()),
        },
        Sourced {
            item: "Larson-Miller master curve".into(),
            value: format!(
                "P = T·(C + log10 t_r), C = {}; P(log10 σ) coefficients {}; data {:.0}–{:.0} MPa, {:.0}–{:.0} °C; \
                 minimum curve: {}",
                lm.constant_c,
                lm.coefficients.iter().map(|c| format!("{c:.6}")).collect::<Vec<_>>().join(", "),
                lm.stress_range_mpa[0],
                lm.stress_range_mpa[1],
                kelvin_to_celsius(lm.temperature_range_k[0]),
                kelvin_to_celsius(lm.temperature_range_k[1]),
                lm.minimum
            ),
            unit: String::new(),
            source: lm.source.clone(),
        },
    ];
    if let Some(n) = &m.norton {
        v.push(Sourced {
            item: "Norton creep law A, n, Q".into(),
            value: format!("{:e} /h, {}, {:.0} J/mol", n.a_per_h, n.n, n.q_j_per_mol),
            unit: String::new(),
            source: format!("{} (basis {:?})", n.source, n.basis),
        });
    }
    if let Some(h) = &m.hardness_hv {
        v.push(Sourced {
            item: "hardness".into(),
            value: format!("{}", h.value),
            unit: "HV".into(),
            source: h.source.clone(),
        });
    }
    v
}

/// Builds the component section from the engine (state imported from the
/// ledger) and what the ledger file holds for it.
pub fn component(
    engine: &Engine,
    ci: usize,
    history: Vec<HistoryPoint>,
    inspections: Vec<InspectionRow>,
    alarms: Vec<AlarmLine>,
    shift_k: f64,
) -> ComponentAssessment {
    let plan = &engine.plan().components[ci];
    let st = &engine.components()[ci];
    let figures = ComponentReport::new(plan, st);
    let mut confidence = vec![];
    if st.unmonitored_h > 0.0 {
        confidence.push(format!(
            "{:.1} h unmonitored (an input missing or stale), integrated by the gap policy",
            st.unmonitored_h
        ));
    }
    if st.extrapolated_h > 0.0 {
        confidence
            .push(format!("{:.1} h outside the material data's range (extrapolated rupture life)", st.extrapolated_h));
    }
    if figures.projection.settling {
        confidence.push(format!(
            "the recent-rate window holds {:.0} h of operation, below the {:.0} h it needs to settle: projections use the larger of recent and design rate",
            figures.projection.window_h, plan.recent_rate_settling_h
        ));
    }
    if st.inspection.temperature_correction_k != 0.0 {
        confidence.push(format!(
            "metal temperature corrected by {:+.1} K from a steam-side oxide measurement (built-in oxide law, not authoritative)",
            st.inspection.temperature_correction_k
        ));
    }
    if let Some(b) = st.inspection.replica_bounds {
        confidence.push(format!(
            "replica assessment bounds the life fraction to {:.2}–{:.2}{}",
            b[0],
            b[1],
            if st.inspection.replica_outside { "; the ledger lay OUTSIDE these bounds at the finding" } else { "" }
        ));
    }
    if let Some(n) = &figures.creep_strain_note {
        confidence.push(n.clone());
    }
    for f in &figures.flags {
        if f.starts_with("stress_") || f.starts_with("temperature_") || f.contains("exhausted") {
            confidence.push(format!("flag: {}", f.replace('_', " ")));
        }
    }
    if confidence.is_empty() {
        confidence.push("none recorded".into());
    }
    let assumptions = vec![
        format!("rupture life on the {:?} Larson-Miller curve of the grade", plan.curve_basis).to_lowercase(),
        format!("gap policy: {:?}", engine.plan().gap_policy).to_lowercase(),
        format!(
            "recent rates: exponential window of {:.0} h, settled after {:.0} h of operation",
            engine.plan().recent_rate_window_h, plan.recent_rate_settling_h
        ),
        "life fraction by Robinson's time-fraction rule; hoop stress by the configured formula".into(),
        "inspection findings re-base the ledger at their dates (see the records below); built-in correlations are screening values".into(),
    ];
    let projections = {
        let mut p = projections(plan, st, shift_k);
        // The newest applied, unsuperseded oxide finding with a heat flux.
        let scale = inspections
            .iter()
            .rev()
            .filter(|r| r.kind == "oxide_thickness" && !inspections.iter().any(|o| o.supersedes == Some(r.id)))
            .filter(|r| st.inspection.events.iter().any(|e| e.id == r.id && e.applied))
            .find_map(|r| {
                let d: crate::inspection::Detail = serde_json::from_str(&r.detail).ok()?;
                let x =
                    crate::inspection::finding_of(&r.kind, r.value, &r.unit, &r.detail).ok().and_then(|f| match f {
                        crate::engine::inspection::Finding::OxideThickness { oxide_mm, .. } => Some(oxide_mm),
                        _ => None,
                    })?;
                Some((x, d.heat_flux_kw_m2?))
            });
        if let Some((x, q)) = scale {
            p.extend(scale_growth_projection(plan, st, x, q));
        }
        p
    };
    ComponentAssessment {
        material: material(plan),
        material_description: plan.material.description.clone(),
        geometry: geometry(plan, st),
        history,
        inspections,
        events: st.inspection.events.clone(),
        alarms,
        confidence,
        temperature_correction_k: st.inspection.temperature_correction_k,
        replica_bounds: st.inspection.replica_bounds,
        projections,
        assumptions,
        figures,
    }
}

/// The CSV of the same figures: `component,section,item,value,unit,source`.
pub fn csv(a: &Assessment) -> String {
    fn q(s: &str) -> String {
        if s.contains([',', '"', '\n']) {
            format!("\"{}\"", s.replace('"', "\"\""))
        } else {
            s.to_string()
        }
    }
    let mut out = String::from("component,section,item,value,unit,source\n");
    let mut row = |c: &str, sec: &str, item: &str, value: String, unit: &str, src: &str| {
        out.push_str(&[q(c), q(sec), q(item), q(&value), q(unit), q(src)].join(","));
        out.push('\n');
    };
    row("", "report", "plant", a.plant.clone(), "", "");
    row("", "report", "generated", a.generated.clone(), "", "");
    row("", "report", "software", a.software.clone(), "", "");
    row("", "report", "caution", a.caution.clone(), "", "");
    for c in &a.components {
        let f = &c.figures;
        let n = f.component.as_str();
        row(n, "identity", "unit", f.unit.clone(), "", "configuration");
        row(n, "identity", "kind", format!("{:?}", f.kind).to_lowercase(), "", "configuration");
        row(n, "identity", "integrated to", f.integrated_to.clone().unwrap_or_default(), "", "ledger");
        for m in &c.material {
            row(n, "material", &m.item, m.value.clone(), &m.unit, &m.source);
        }
        let g = &c.geometry;
        if let Some(w) = g.wall_now_mm {
            row(n, "geometry", "wall now", format!("{w:.3}"), "mm", &g.obtained);
        }
        if let Some(r) = g.thinning_rate_mm_per_year {
            row(n, "geometry", "thinning rate", format!("{r:.4}"), "mm/year", &g.obtained);
        }
        if let Some(s) = g.fixed_stress_mpa {
            row(n, "geometry", "fixed stress", format!("{s}"), "MPa", &g.obtained);
        }
        row(n, "life", "creep life fraction", format!("{:.6}", f.creep_life_fraction), "", "ledger");
        row(n, "life", "creep strain", format!("{:.6}", f.creep_strain), "", "ledger");
        row(n, "life", "wear depth", format!("{:.6}", f.wear_depth_mm), "mm", "ledger");
        row(n, "hours", "integrated", format!("{:.2}", f.integrated_h), "h", "ledger");
        row(n, "hours", "unmonitored", format!("{:.2}", f.unmonitored_h), "h", "ledger");
        row(n, "hours", "extrapolated", format!("{:.2}", f.extrapolated_h), "h", "ledger");
        row(n, "hours", "in creep range", format!("{:.2}", f.hours_in_creep_range), "h", "ledger");
        row(n, "hours", "over design temperature", format!("{:.2}", f.over_design_h), "h", "ledger");
        for p in &c.projections {
            row(
                n,
                "projection",
                &format!("{}: life fraction rate", p.profile),
                format!("{:e}", p.life_fraction_rate_per_h),
                "1/h",
                &p.basis,
            );
            for (lvl, v, h) in &p.hours_to {
                row(
                    n,
                    "projection",
                    &format!("{}: hours to {lvl} ({v})", p.profile),
                    h.map_or("not reached".into(), |h| format!("{h:.0}")),
                    "h",
                    &p.basis,
                );
            }
        }
        for cl in &f.histograms.temperature_c {
            let label = format!(
                "{} to {} °C",
                cl.from.map_or("below".into(), |v| format!("{v:.0}")),
                cl.to.map_or("above".into(), |v| format!("{v:.0}"))
            );
            row(n, "time at temperature", &label, format!("{:.2}", cl.hours), "h", "ledger");
        }
        for p in &c.history {
            row(n, "history", &rfc3339_ms(p.t_ms), format!("{:.6}", p.life_fraction), "life fraction", "daily history");
        }
        for r in &c.inspections {
            row(
                n,
                "inspection",
                &format!("#{} {} {}", r.id, r.kind, rfc3339_ms(r.finding_ms)),
                r.value.map(|v| v.to_string()).unwrap_or_else(|| r.detail.clone()),
                &r.unit,
                &format!("{}; {}; {}", r.entered_by, r.method, r.location),
            );
        }
        for al in &c.alarms {
            row(n, "alarm", &format!("{} {}", al.time, al.index), al.summary.clone(), "", "alarm journal");
        }
        for s in &c.confidence {
            row(n, "confidence", "", s.clone(), "", "");
        }
        for s in &c.assumptions {
            row(n, "assumption", "", s.clone(), "", "");
        }
    }
    let p = &a.alarm_performance;
    let src = "alarm journal (ISA-18.2 / IEC 62682 definitions)";
    let scope = a.scope.clone();
    row(&scope, "alarm performance", "annunciations", p.annunciations.to_string(), "", src);
    row(&scope, "alarm performance", "mean per 10 min", format!("{:.3}", p.mean_per_10_min), "", src);
    row(&scope, "alarm performance", "peak per 10 min", p.peak_per_10_min.to_string(), "", src);
    row(&scope, "alarm performance", "flood periods", p.flood_periods.to_string(), "", src);
    row(&scope, "alarm performance", "time in flood", format!("{:.2}", p.time_in_flood_percent), "%", src);
    row(&scope, "alarm performance", "chattering alarms", p.chattering.len().to_string(), "", src);
    out
}

/// Reads what the report needs from the ledger at `path` and the
/// configuration's plan, and builds it. `beside_the_service`: called in
/// the process that holds the ledger open (the HTTP API).
pub fn build(
    cfg: &crate::settings::LoadedConfig,
    path: &Path,
    scope: &Scope,
    shift_k: f64,
    generated_ms: i64,
    beside_the_service: bool,
) -> Result<Assessment> {
    // Inside the running service, never a plain file descriptor on the
    // ledger (see `store::read_ledger_beside`).
    let loaded =
        if beside_the_service { crate::store::read_ledger_beside(path)? } else { crate::store::read_ledger(path)? };
    let stored = crate::ledger_file::StoredLedger::parse(&loaded, path)?;
    let mut engine = Engine::new(cfg.plan.clone());
    engine.import_state(stored.engine);
    let journal = crate::store::JournalReader::new(path);
    let mut components = vec![];
    let mut scope_events: Vec<AlarmEvent> = vec![];
    for (ci, plan) in engine.plan().components.iter().enumerate() {
        let take = match scope {
            Scope::Component(n) => &plan.name == n,
            Scope::Unit(u) => &plan.unit == u,
            Scope::Plant => true,
        };
        if !take {
            continue;
        }
        let history = crate::store::inspection::read_history(path, &plan.name)?;
        let inspections = crate::store::inspection::read_inspections(path, Some(&plan.name))?;
        let entries = journal.component(&plan.name, 500)?;
        scope_events.extend(entries.iter().filter_map(|(_, e)| serde_json::from_str::<AlarmEvent>(&e.event).ok()));
        let alarms = entries
            .into_iter()
            .map(|(_, e)| {
                let v: serde_json::Value = serde_json::from_str(&e.event).unwrap_or_default();
                let summary = ["transition", "severity", "state", "message"]
                    .iter()
                    .filter_map(|k| v.get(*k).and_then(|x| x.as_str()).map(String::from))
                    .collect::<Vec<_>>()
                    .join(" · ");
                AlarmLine { time: rfc3339_ms(e.time_ms), index: e.index.clone(), summary }
            })
            .collect();
        components.push(component(&engine, ci, history, inspections, alarms, shift_k));
    }
    if components.is_empty() {
        anyhow::bail!(
            "no component matches {}: see the [[component]] names and units of the configuration",
            match scope {
                Scope::Component(n) => format!("component {n:?}"),
                Scope::Unit(u) => format!("unit {u:?}"),
                Scope::Plant => "the plant".into(),
            }
        );
    }
    Ok(Assessment {
        plant: engine.plan().plant.clone(),
        scope: match scope {
            Scope::Component(n) => format!("component {n}"),
            Scope::Unit(u) => format!("unit {u}"),
            Scope::Plant => "whole plant".into(),
        },
        generated: rfc3339_ms(generated_ms),
        software: format!("lifeledger {}", env!("CARGO_PKG_VERSION")),
        ledger: path.display().to_string(),
        caution: crate::CAUTION.to_string(),
        profile_shift_k: shift_k,
        alarm_performance: alarm_performance::from_events(&scope_events),
        components,
    })
}

/// Writes `report.html`, `report.csv` and `report.json` into `dir`;
/// returns their paths.
pub fn write(a: &Assessment, dir: &Path) -> Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir).with_context(|| format!("cannot create {}", dir.display()))?;
    let files =
        [("report.html", html::render(a)), ("report.csv", csv(a)), ("report.json", serde_json::to_string_pretty(a)?)];
    let mut out = vec![];
    for (name, text) in files {
        let p = dir.join(name);
        std::fs::write(&p, text).with_context(|| format!("cannot write {}", p.display()))?;
        out.push(p);
    }
    Ok(out)
}
