//! Human and machine renderings of ledgers: the per-component summary used
//! by `replay`, the status API and the database points, plus the derived
//! design-condition checks of `check-config`.

pub mod fatigue;
pub mod levels;

use crate::engine::component::{projection, Projection};
use crate::engine::plan::{ComponentPlan, Levels, StressPlan};
use crate::engine::{ComponentState, Counters};
use crate::event_time::rfc3339_ms;
use crate::lineproto::Point;
use crate::physics::larson_miller::{rupture_life_h, CurveBasis, RangeFlags};
use crate::physics::material::NortonBasis;
use crate::physics::remaining::hours_to_threshold;
use crate::physics::stress::hoop_stress_mpa;
use crate::physics::temperature::homologous_temperature;
use crate::physics::units::kelvin_to_celsius;
use crate::physics::wear::FrettingRegime;
use crate::settings::schema::{ComponentKind, WearModel};
use serde::Serialize;
use std::collections::BTreeMap;

/// Hours in one histogram class.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ClassHours {
    /// Lower edge (None: open below), in the report unit.
    pub from: Option<f64>,
    /// Upper edge (None: open above).
    pub to: Option<f64>,
    pub hours: f64,
}

/// Time-at-condition histograms, in °C and MPa for people.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Histograms {
    pub temperature_c: Vec<ClassHours>,
    pub pressure_mpa: Vec<ClassHours>,
    /// Hours by temperature class and pressure class together.
    pub temperature_pressure: ClassTable,
}

/// Hours by temperature class (rows) and pressure class (columns): the
/// table in-service life-expectancy calculations of European boiler
/// practice work from. Row `i` is the class below `temperature_edges_c[i]`
/// (above the previous edge); the first row is open below, the last open
/// above; the same for columns and `pressure_edges_mpa`.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ClassTable {
    pub temperature_edges_c: Vec<f64>,
    pub pressure_edges_mpa: Vec<f64>,
    pub hours: Vec<Vec<f64>>,
}

/// A class edge in °C, rid of the rounding the kelvin round trip leaves
/// (edges lie on round degrees by default).
fn edge_c(k: f64) -> f64 {
    (kelvin_to_celsius(k) * 1e6).round() / 1e6
}

/// A component's ledger summary.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct ComponentReport {
    pub component: String,
    pub unit: String,
    /// As the configuration spells it (`wear_contact`).
    pub kind: ComponentKind,
    pub material: String,
    pub curve_basis: CurveBasis,
    pub integrated_to: Option<String>,
    /// Robinson life fraction, shown no higher than [`DISPLAY_CEILING`].
    pub creep_life_fraction: f64,
    /// Creep strain (fraction), shown no higher than [`CREEP_STRAIN_CEILING`].
    pub creep_strain: f64,
    /// Where the Norton constants behind `creep_strain` come from (null when
    /// the part computes no creep strain).
    pub creep_strain_basis: Option<NortonBasis>,
    /// What an operator must know about `creep_strain`: set unless the
    /// Norton constants are measured (derived from the rupture curve, strain
    /// is no independent evidence).
    pub creep_strain_note: Option<String>,
    /// Wear depth, shown no deeper than [`DISPLAY_CEILING`] allowable depths.
    pub wear_depth_mm: f64,
    /// Wear index, shown no higher than [`DISPLAY_CEILING`].
    pub wear_index: f64,
    /// The part is used up: life fraction at or past 1, wear index at or
    /// past 1, or the wall gone (flags `life_exhausted`,
    /// `wear_allowance_exhausted`, `wall_exhausted`).
    pub exhausted: bool,
    /// The ceiling of the shown life fraction and wear index.
    pub display_ceiling: f64,
    /// Recent life-fraction rate, 1/h (normalised exponentially weighted
    /// mean, see `physics::remaining`).
    pub damage_rate_per_h: f64,
    /// Hours to life fraction 1 or wear index 1 at the projection rates,
    /// whichever comes first; null when neither is moving.
    pub remaining_life_h: Option<f64>,
    /// Hours to each alarm level at the projection rate (`index.severity`).
    pub hours_to_threshold: BTreeMap<String, Option<f64>>,
    /// The rates the projections use and whether they are still settling
    /// (then each is the larger of the recent and the design rate).
    pub projection: Projection,
    pub integrated_h: f64,
    pub unmonitored_h: f64,
    pub hours_in_creep_range: f64,
    pub extrapolated_h: f64,
    pub over_design_h: f64,
    pub peak_metal_temperature_c: Option<f64>,
    /// Conditions at the newest integrated instant; null where the part has
    /// no such input or nothing is known yet (see [`conditions_known`]).
    pub metal_temperature_c: Option<f64>,
    pub pressure_mpa: Option<f64>,
    /// Hoop stress, or the configured fixed stress; null for parts without
    /// a metal temperature (wear contacts: no creep assessment).
    pub hoop_stress_mpa: Option<f64>,
    pub creep_rate_per_h: f64,
    /// As the configuration spells it (`gross_slip`).
    pub fretting_regime: Option<FrettingRegime>,
    /// Highest alarm severity whose level is reached, by index.
    pub levels_reached: BTreeMap<String, String>,
    pub flags: Vec<String>,
    pub histograms: Histograms,
    /// The alarm levels of this component (defaults unless configured).
    pub thresholds: crate::engine::plan::Thresholds,
    /// Design metal temperature, °C.
    pub design_temperature_c: Option<f64>,
    /// Fatigue at the assessed location (`[component.fatigue]`); absent
    /// without one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fatigue: Option<fatigue::FatigueReport>,
    /// Attention score (`alarm::attention`: larger needs attention first),
    /// set by the service for its snapshot and API; absent elsewhere.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub attention_score: Option<f64>,
    /// Place in the attention ranking, 1 first (service snapshot and API).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rank: Option<usize>,
}

fn classes(edges: &[f64], hours: &[f64], conv: impl Fn(f64) -> f64) -> Vec<ClassHours> {
    hours
        .iter()
        .enumerate()
        .map(|(i, &h)| ClassHours {
            from: (i > 0).then(|| conv(edges[i - 1])),
            to: edges.get(i).map(|&e| conv(e)),
            hours: h,
        })
        .collect()
}

/// Largest life fraction and wear index a report, a series point or the
/// status page shows. Robinson's rule predicts rupture at a life fraction
/// of 1, and a wear index of 1 is the allowable depth; ten times that says
/// nothing more about the part, and a ledger integrated on after the wall
/// is gone runs to numbers like 5e23 that nobody can read. Such a part is
/// flagged exhausted; the ledger keeps the true sum, and alarms and
/// projections work from it, so the ceiling can only hide how far past
/// exhaustion a part is, never that it is. It lies above every alarm level
/// a configuration can sensibly set (levels are at or below 1).
pub const DISPLAY_CEILING: f64 = 10.0;

/// Largest creep strain (a fraction: 1 = 100 %) shown, for the same reason:
/// tubes and pipes rupture at strains of tens of percent.
pub const CREEP_STRAIN_CEILING: f64 = 1.0;

/// `v`, or `ceiling` when `v` is above it (NaN stays NaN).
#[inline]
pub fn capped(v: f64, ceiling: f64) -> f64 {
    if v > ceiling {
        ceiling
    } else {
        v
    }
}

/// Flag names for range flags.
pub fn range_flag_names(f: &RangeFlags) -> Vec<&'static str> {
    let mut v = vec![];
    if f.stress_below {
        v.push("stress_below_data_range");
    }
    if f.stress_above {
        v.push("stress_above_data_range");
    }
    if f.temperature_below {
        v.push("temperature_below_data_range");
    }
    if f.temperature_above {
        v.push("temperature_above_data_range");
    }
    v
}

/// The highest severity whose level `value` has reached.
pub fn level_reached(levels: &Levels, value: f64) -> Option<&'static str> {
    levels.iter().filter(|(_, l)| value >= *l).map(|(n, _)| n).last()
}

impl ComponentReport {
    /// Summarise one component.
    pub fn new(plan: &ComponentPlan, st: &ComponentState) -> ComponentReport {
        let wear_index = st.wear_index(plan);
        let pr = projection(plan, st);
        let wear_index_rate = plan.wear.as_ref().map_or(0.0, |w| pr.wear_rate_mm_per_h / w.allowable_depth_mm);
        let mut remaining: Option<f64> = None;
        let mut take = |h: Option<f64>| {
            if let Some(h) = h {
                remaining = Some(remaining.map_or(h, |r: f64| r.min(h)));
            }
        };
        take(hours_to_threshold(st.life_fraction, 1.0, pr.life_fraction_rate_per_h));
        if plan.wear.is_some() {
            take(hours_to_threshold(wear_index, 1.0, wear_index_rate));
        }
        let th = &plan.thresholds;
        let mut hours_to = BTreeMap::new();
        let mut reached = BTreeMap::new();
        let has_creep = plan.metal_temperature.is_some();
        let indices: [(&str, &Levels, f64, f64, bool); 3] = [
            ("life_fraction", &th.life_fraction, st.life_fraction, pr.life_fraction_rate_per_h, has_creep),
            (
                "creep_strain",
                &th.creep_strain,
                st.creep_strain,
                pr.creep_strain_rate_per_h,
                has_creep && plan.material.norton.is_some(),
            ),
            ("wear_index", &th.wear_index, wear_index, wear_index_rate, plan.wear.is_some()),
        ];
        for (name, levels, value, rate, applies) in indices {
            if !applies {
                continue;
            }
            for (sev, l) in levels.iter() {
                hours_to.insert(format!("{name}.{sev}"), hours_to_threshold(value, l, rate));
            }
            if let Some(sev) = level_reached(levels, value) {
                reached.insert(name.to_string(), sev.to_string());
            }
        }
        let fatigue = fatigue::report(plan, st);
        if let (Some(fr), Some(fp)) = (&fatigue, &plan.fatigue) {
            let fg = &fr.figures;
            for (name, levels, value, hours) in [
                ("fatigue_usage", &fp.usage_levels, fg.fatigue_usage, &fg.hours_to_usage),
                ("creep_fatigue_index", &fp.combined_levels, fg.creep_fatigue_index, &fg.hours_to_combined),
            ] {
                for (sev, _, h) in hours {
                    hours_to.insert(format!("{name}.{sev}"), h.is_finite().then_some(*h));
                }
                if let Some(sev) = level_reached(levels, value) {
                    reached.insert(name.to_string(), sev.to_string());
                }
            }
        }
        let mut flags: Vec<String> = range_flag_names(&st.flags.extrapolated).into_iter().map(String::from).collect();
        if fatigue.as_ref().is_some_and(|f| f.figures.cycles_over_curve_temperature > 0.0) {
            flags.push("fatigue_curve_temperature_exceeded".into());
        }
        if st.flags.unmonitored {
            flags.push("unmonitored_hours".into());
        }
        if st.flags.over_design_temperature {
            flags.push("over_design_temperature".into());
        }
        if st.flags.wall_exhausted {
            flags.push("wall_exhausted".into());
        }
        // Inspection findings (engine::inspection): a replica class whose
        // life-fraction bounds the ledger lay outside, and a metal
        // temperature corrected from an oxide measurement.
        if st.inspection.replica_outside {
            flags.push("outside_replica_bounds".into());
        }
        if st.inspection.temperature_correction_k != 0.0 {
            flags.push("temperature_corrected".into());
        }
        // Robinson's rule: a life fraction of 1 is predicted rupture.
        let life_exhausted = has_creep && st.life_fraction >= 1.0;
        if life_exhausted {
            flags.push("life_exhausted".into());
        }
        let wear_exhausted = plan.wear.is_some() && wear_index >= 1.0;
        if wear_exhausted {
            flags.push("wear_allowance_exhausted".into());
        }
        let strain_basis = plan.material.norton.as_ref().filter(|_| has_creep).map(|n| n.basis);
        let known = conditions_known(plan, st);
        if pr.settling {
            flags.push("projection_settling".into());
        }
        let h = &st.histogram;
        let w = h.pressure_edges_mpa.len() + 1;
        ComponentReport {
            component: plan.name.clone(),
            unit: plan.unit.clone(),
            kind: plan.kind,
            material: plan.material.grade.clone(),
            curve_basis: plan.curve_basis,
            integrated_to: st.integrated_to_ms.map(rfc3339_ms),
            creep_life_fraction: capped(st.life_fraction, DISPLAY_CEILING),
            creep_strain: capped(st.creep_strain, CREEP_STRAIN_CEILING),
            creep_strain_basis: strain_basis,
            creep_strain_note: strain_basis.and_then(NortonBasis::strain_note).map(String::from),
            wear_depth_mm: plan
                .wear
                .as_ref()
                .map_or(st.wear_depth_mm, |w| capped(st.wear_depth_mm, DISPLAY_CEILING * w.allowable_depth_mm)),
            wear_index: capped(wear_index, DISPLAY_CEILING),
            exhausted: life_exhausted || wear_exhausted || st.flags.wall_exhausted,
            display_ceiling: DISPLAY_CEILING,
            damage_rate_per_h: st.recent_life_fraction_rate_per_h,
            remaining_life_h: remaining,
            hours_to_threshold: hours_to,
            projection: pr,
            integrated_h: st.integrated_h,
            unmonitored_h: st.unmonitored_h,
            hours_in_creep_range: st.hours_in_creep_range,
            extrapolated_h: st.extrapolated_h,
            over_design_h: st.over_design_h,
            peak_metal_temperature_c: st
                .peak_temperature_k
                .is_finite()
                .then(|| kelvin_to_celsius(st.peak_temperature_k)),
            metal_temperature_c: (known && has_creep).then(|| kelvin_to_celsius(st.now.metal_temperature_k)),
            pressure_mpa: (known && plan.pressure.is_some()).then_some(st.now.pressure_mpa),
            hoop_stress_mpa: (known && has_creep).then_some(st.now.hoop_stress_mpa),
            creep_rate_per_h: st.now.creep_rate_per_h,
            fretting_regime: st.now.fretting_regime,
            levels_reached: reached,
            flags,
            histograms: Histograms {
                temperature_c: classes(&h.temperature_edges_k, &h.temperature_hours(), edge_c),
                pressure_mpa: classes(&h.pressure_edges_mpa, &h.pressure_hours(), |p| p),
                temperature_pressure: ClassTable {
                    temperature_edges_c: h.temperature_edges_k.iter().map(|&k| edge_c(k)).collect(),
                    pressure_edges_mpa: h.pressure_edges_mpa.clone(),
                    hours: h.hours.chunks(w).map(<[f64]>::to_vec).collect(),
                },
            },
            thresholds: plan.thresholds.clone(),
            design_temperature_c: plan.design_temperature_k.map(kelvin_to_celsius),
            fatigue,
            attention_score: None,
            rank: None,
        }
    }
}

/// Whether a component's present conditions (`ComponentState::now`) are
/// known, so a `component_state` point or a trend point may be written:
/// something has been integrated (before that, `now` holds no instant at
/// all: 0 K, 0 MPa), and a part with a metal temperature input has a
/// temperature above absolute zero (a piece integrated before its
/// temperature tag's first sample, with no design temperature to fill the
/// gap, carries 0 K). Live and replay write their series by this one rule.
pub fn conditions_known(plan: &ComponentPlan, st: &ComponentState) -> bool {
    st.integrated_h > 0.0 && (plan.metal_temperature.is_none() || st.now.metal_temperature_k > 0.0)
}

/// The `component_state` point for the database and line-protocol files.
/// Callers write it only when [`conditions_known`]; the condition fields
/// are left out otherwise.
pub fn component_point(plant: &str, plan: &ComponentPlan, st: &ComponentState, time_ms: i64) -> Point {
    let r = ComponentReport::new(plan, st);
    let mut p = Point::new(crate::series_model::COMPONENT_STATE.name, time_ms * 1_000_000)
        .tag("plant", plant)
        .tag("unit", &plan.unit)
        .tag("component", &plan.name)
        .tag("material", &plan.material.grade);
    if plan.metal_temperature.is_some() {
        if conditions_known(plan, st) {
            p = p
                .float("metal_temperature_k", st.now.metal_temperature_k)
                .float("pressure_mpa", st.now.pressure_mpa)
                .float("hoop_stress_mpa", st.now.hoop_stress_mpa);
        }
        p = p
            .float("creep_life_fraction", r.creep_life_fraction)
            .float("damage_rate_per_h", st.recent_life_fraction_rate_per_h)
            .float("creep_rate_per_h", st.now.creep_rate_per_h)
            .float("creep_strain", r.creep_strain)
            .float("hours_in_creep_range", st.hours_in_creep_range);
    }
    if plan.wear.is_some() {
        p = p.float("wear_depth_mm", r.wear_depth_mm).float("wear_index", r.wear_index);
    }
    if let Some(f) = &r.fatigue {
        let g = &f.figures;
        p = p
            .float("fatigue_stress_mpa", g.stress_mpa)
            .float("fatigue_thermal_stress_mpa", g.thermal_stress_mpa)
            .float("fatigue_usage", g.fatigue_usage)
            .float("creep_fatigue_index", g.creep_fatigue_index)
            .float("fatigue_cycles", g.cycles)
            .float("fatigue_cycles_last_day", g.cycles_last_day)
            .float("fatigue_cycles_last_month", g.cycles_last_month);
    }
    p = levels::with_level_fields(p, plan, &r);
    p = p.boolean("exhausted", r.exhausted);
    if let Some(h) = r.remaining_life_h {
        p = p.float("remaining_life_h", h);
    }
    p.float("unmonitored_h", st.unmonitored_h)
}

/// The alarm indices a part has levels for, with those levels: the
/// indices of its `alarm_threshold` points and `<index>_level` fields.
pub fn indexed_levels(plan: &ComponentPlan) -> Vec<(&'static str, &Levels)> {
    let th = &plan.thresholds;
    let mut out = vec![];
    if plan.metal_temperature.is_some() {
        out.push(("creep_life_fraction", &th.life_fraction));
        if plan.material.norton.is_some() {
            out.push(("creep_strain", &th.creep_strain));
        }
    }
    if plan.wear.is_some() {
        out.push(("wear_index", &th.wear_index));
    }
    if let Some(f) = &plan.fatigue {
        out.push(("fatigue_usage", &f.usage_levels));
        out.push(("creep_fatigue_index", &f.combined_levels));
    }
    out
}

/// `alarm_threshold` points: one per index and severity, for dashboards.
pub fn threshold_points(plant: &str, plan: &ComponentPlan, time_ms: i64) -> Vec<Point> {
    let mut out = vec![];
    for (index, l) in indexed_levels(plan) {
        for (sev, v) in l.iter() {
            out.push(
                Point::new(crate::series_model::ALARM_THRESHOLD.name, time_ms * 1_000_000)
                    .tag("plant", plant)
                    .tag("unit", &plan.unit)
                    .tag("component", &plan.name)
                    .tag("material", &plan.material.grade)
                    .tag("index", index)
                    .tag("severity", sev)
                    .float("value", v),
            );
        }
    }
    out
}

/// A plain-text summary table.
pub fn summary_table(reports: &[ComponentReport]) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "{:<24} {:<12} {:>10} {:>9} {:>9} {:>12} {:>9} {:>9}  {}\n",
        "component",
        "material",
        "life frac",
        "strain %",
        "wear idx",
        "remaining h",
        "creep h",
        "unmon h",
        "levels / flags"
    ));
    for r in reports {
        let levels: Vec<String> = r.levels_reached.iter().map(|(k, v)| format!("{k}:{v}")).collect();
        let mut notes = if r.exhausted { vec!["EXHAUSTED".to_string()] } else { vec![] };
        notes.extend(levels);
        notes.extend(r.flags.iter().cloned());
        // A value at its ceiling is shown as "≥ ceiling": the true sum is
        // beyond it.
        let cell = |v: f64, ceiling: f64, prec: usize| {
            if v >= ceiling {
                format!("≥{ceiling}")
            } else {
                format!("{v:.prec$}")
            }
        };
        s.push_str(&format!(
            "{:<24} {:<12} {:>10} {:>9} {:>9} {:>12} {:>9.1} {:>9.1}  {}\n",
            r.component,
            r.material,
            cell(r.creep_life_fraction, r.display_ceiling, 5),
            cell(r.creep_strain * 100.0, CREEP_STRAIN_CEILING * 100.0, 4),
            cell(r.wear_index, r.display_ceiling, 4),
            r.remaining_life_h.map_or("-".to_string(), |h| format!("{h:.0}")),
            r.hours_in_creep_range,
            r.unmonitored_h,
            notes.join(", ")
        ));
    }
    // Say beside the table when a strain column is no evidence of its own.
    let mut strain_notes: Vec<(&str, Vec<&str>)> = vec![];
    for r in reports {
        if let Some(note) = r.creep_strain_note.as_deref() {
            match strain_notes.iter_mut().find(|(n, _)| *n == note) {
                Some((_, grades)) if !grades.contains(&r.material.as_str()) => grades.push(&r.material),
                Some(_) => {}
                None => strain_notes.push((note, vec![&r.material])),
            }
        }
    }
    for (note, grades) in strain_notes {
        s.push_str(&format!("note on strain % ({}): {note}\n", grades.join(", ")));
    }
    s.push_str(&fatigue::summary_lines(reports));
    s
}

/// The temperature × pressure class table of one component as text: a row
/// per temperature class that holds hours, a column per pressure class,
/// with totals. Empty for a component without a metal temperature.
pub fn class_table_text(r: &ComponentReport) -> String {
    let t = &r.histograms.temperature_pressure;
    let rows: Vec<(usize, &Vec<f64>)> =
        t.hours.iter().enumerate().filter(|(_, row)| row.iter().any(|&h| h > 0.0)).collect();
    if rows.is_empty() {
        return String::new();
    }
    let label = |edges: &[f64], i: usize| match i {
        0 => format!("< {}", edges[0]),
        i if i == edges.len() => format!(">= {}", edges[i - 1]),
        i => format!("{}-{}", edges[i - 1], edges[i]),
    };
    let pe: Vec<f64> = t.pressure_edges_mpa.iter().map(|p| (p * 1000.0).round() / 1000.0).collect();
    let cols = pe.len() + 1;
    let mut s = format!("{}: hours by temperature class (degC, rows) and pressure class (MPa, columns)\n", r.component);
    s.push_str(&format!("  {:<12}", "degC \\ MPa"));
    for j in 0..cols {
        s.push_str(&format!(" {:>12}", label(&pe, j)));
    }
    s.push_str(&format!(" {:>10}\n", "all"));
    let mut col_sum = vec![0.0; cols];
    for (i, row) in rows {
        s.push_str(&format!("  {:<12}", label(&t.temperature_edges_c, i)));
        for (j, &h) in row.iter().enumerate() {
            col_sum[j] += h;
            if h > 0.0 {
                s.push_str(&format!(" {h:>12.1}"));
            } else {
                s.push_str(&format!(" {:>12}", "."));
            }
        }
        s.push_str(&format!(" {:>10.1}\n", row.iter().sum::<f64>()));
    }
    s.push_str(&format!("  {:<12}", "all"));
    for h in &col_sum {
        s.push_str(&format!(" {h:>12.1}"));
    }
    s.push_str(&format!(" {:>10.1}\n", col_sum.iter().sum::<f64>()));
    s
}

/// Counter summary line.
pub fn counters_line(c: &Counters) -> String {
    format!(
        "samples accepted {}, uncertain {}, rejected {} (not finite {}, out of range {}, bad quality {}, duplicate {}, late {}, unknown tag {}, implausible time {})",
        c.accepted, c.uncertain, c.rejected(), c.not_finite, c.out_of_range, c.bad_quality, c.duplicate, c.late, c.unknown_tag,
        c.implausible_time
    )
}

/// Derived design-condition values of one component, for `check-config`.
#[derive(Debug, Clone, Serialize)]
pub struct DesignCheck {
    pub component: String,
    pub material: String,
    /// Hoop stress at design pressure (stress factor included), for parts
    /// whose stress comes from pressure and geometry; null otherwise.
    pub hoop_stress_at_design_mpa: Option<f64>,
    /// The configured fixed stress (stress factor included), for parts on a
    /// fixed stress; null otherwise.
    pub fixed_stress_mpa: Option<f64>,
    /// The stress factor both stresses above include.
    pub stress_factor: f64,
    /// Wear model of a wear contact (`archard`, `fretting`); null otherwise.
    pub wear_model: Option<WearModel>,
    /// Allowable wear depth of a wear contact, mm.
    pub allowable_wear_depth_mm: Option<f64>,
    /// Whether creep is assessed (the part has a metal temperature input).
    pub creep_assessed: bool,
    pub homologous_temperature: Option<f64>,
    pub creep_threshold_c: f64,
    pub in_creep_range: Option<bool>,
    pub rupture_life_minimum_h: Option<f64>,
    pub rupture_life_mean_h: Option<f64>,
    /// Hours at design conditions to each life-fraction level from the
    /// initial value, on the configured curve, in rising severity (the
    /// order of [`crate::engine::plan::Levels::iter`]); written as a JSON
    /// object keyed by level, as before.
    #[serde(serialize_with = "ordered_map")]
    pub hours_to_levels_at_design: Vec<(String, f64)>,
    pub warnings: Vec<String>,
    /// What moves this part's ledger on (see [`advance_rule`]).
    pub advances_with: String,
    /// Allowable cycles of a design start-stop at the fatigue location.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fatigue: Option<fatigue::FatigueDesignCheck>,
}

/// How a component's ledger advances: with the samples of its tags, or,
/// when every input is a constant, with the plant clock.
pub fn advance_rule(plan: &crate::engine::Plan, ci: usize) -> String {
    let tags: Vec<&str> = plan.components[ci].tags().iter().map(|&t| plan.tags[t as usize].name.as_str()).collect();
    if tags.is_empty() {
        "the plant clock (every input is a constant): the newest event time of the plant's data in replay, \
         the wall clock in the service"
            .into()
    } else {
        format!("the samples of {}", tags.join(", "))
    }
}

/// Serialize name–value pairs as a map.
fn ordered_map<S: serde::Serializer>(pairs: &[(String, f64)], s: S) -> Result<S::Ok, S::Error> {
    s.collect_map(pairs.iter().map(|(k, v)| (k, v)))
}

/// Values an engineer sanity-checks before trusting a configuration.
pub fn design_check(plan: &ComponentPlan) -> DesignCheck {
    let mut warnings = vec![];
    let tm = plan.material.melting_point_k.value;
    let threshold = plan.creep_threshold_k();
    let creep_assessed = plan.metal_temperature.is_some();
    // A wear contact without a configured stress carries a fixed stress of
    // 0 (it does not creep): no stress to show.
    let hoop = match (plan.stress, plan.design_pressure_mpa) {
        (StressPlan::Hoop { basis, outside_diameter_mm, wall_mm, measured_loss_mm, .. }, Some(p)) => {
            Some(hoop_stress_mpa(basis, p, outside_diameter_mm, wall_mm - measured_loss_mm) * plan.stress_factor)
        }
        _ => None,
    };
    let fixed = match plan.stress {
        StressPlan::Fixed(s) if creep_assessed && !(plan.wear.is_some() && s == 0.0) => Some(s * plan.stress_factor),
        _ => None,
    };
    let sigma = hoop.or(fixed);
    let t = plan.design_temperature_k;
    let mut life_min = None;
    let mut life_mean = None;
    let mut hours_to = Vec::new();
    if let (Some(s), Some(t)) = (sigma, t) {
        if t >= threshold && s > 0.0 {
            let (lmin, f) = rupture_life_h(&plan.material.larson_miller, s, t, CurveBasis::Minimum);
            let (lmean, _) = rupture_life_h(&plan.material.larson_miller, s, t, CurveBasis::Mean);
            life_min = Some(lmin);
            life_mean = Some(lmean);
            for n in range_flag_names(&f) {
                warnings.push(format!("rupture life at design conditions is extrapolated: {n}"));
            }
            let life = if plan.curve_basis == CurveBasis::Minimum { lmin } else { lmean };
            for (sev, l) in plan.thresholds.life_fraction.iter() {
                hours_to.push((format!("life_fraction.{sev}"), ((l - plan.initial_life_fraction).max(0.0)) * life));
            }
            if life < 100_000.0 {
                warnings.push(format!(
                    "rupture life at design conditions is only {life:.0} h on the {} curve",
                    match plan.curve_basis {
                        CurveBasis::Minimum => "minimum",
                        CurveBasis::Mean => "mean",
                    }
                ));
            }
        }
    }
    if plan.design_temperature_k.is_none() && plan.metal_temperature.is_some() {
        warnings.push("no design temperature: gaps cannot be filled at design conditions".into());
    }
    DesignCheck {
        component: plan.name.clone(),
        material: plan.material.grade.clone(),
        hoop_stress_at_design_mpa: hoop,
        fixed_stress_mpa: fixed,
        stress_factor: plan.stress_factor,
        wear_model: plan.wear.as_ref().map(|w| w.model),
        allowable_wear_depth_mm: plan.wear.as_ref().map(|w| w.allowable_depth_mm),
        creep_assessed,
        homologous_temperature: t.filter(|_| creep_assessed).map(|t| homologous_temperature(t, tm)),
        creep_threshold_c: kelvin_to_celsius(threshold),
        in_creep_range: t.filter(|_| creep_assessed).map(|t| t >= threshold),
        rupture_life_minimum_h: life_min,
        rupture_life_mean_h: life_mean,
        hours_to_levels_at_design: hours_to,
        warnings,
        advances_with: String::new(),
        fatigue: fatigue::design_check(plan),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::component::tests::{closed_form_life_h, component, steady};

    /// Hours to each life-fraction level and to exhaustion against the
    /// closed form (level − current)/rate, with current = 0.2 + H·rate from
    /// the Larson-Miller definition (see `closed_form_life_h`).
    #[test]
    fn hours_to_level_match_the_closed_form_settling_or_settled() {
        // (hours, °C, bar, the rate the projection must use)
        let recent = |t: f64, p: f64| 1.0 / closed_form_life_h(t, p);
        let design = recent(560.0, 180.0);
        for (hours, t, p, rate, settling) in [
            (10.0, 580.0, 180.0, recent(580.0, 180.0), true),
            (200.0, 580.0, 180.0, recent(580.0, 180.0), false),
            (2000.0, 580.0, 180.0, recent(580.0, 180.0), false),
            (10.0, 540.0, 150.0, design, true),
            (200.0, 540.0, 150.0, recent(540.0, 150.0), false),
        ] {
            let e = steady(hours, t, p);
            let plan = &e.plan().components[0];
            let r = ComponentReport::new(plan, component(&e, "TUBE"));
            let current = 0.2 + hours * recent(t, p);
            assert!((r.creep_life_fraction / current - 1.0).abs() < 1e-9);
            assert_eq!(r.projection.settling, settling);
            assert_eq!(r.flags.contains(&"projection_settling".to_string()), settling);
            for (level, key) in [(0.3, "advisory"), (0.5, "warning"), (0.7, "critical")] {
                let want = (level - current) / rate;
                let got = r.hours_to_threshold[&format!("life_fraction.{key}")].unwrap();
                assert!((got / want - 1.0).abs() < 1e-9, "{hours} h at {t} °C, {key}: {got} h, closed form {want} h");
            }
            let want = (1.0 - current) / rate;
            let got = r.remaining_life_h.unwrap();
            assert!((got / want - 1.0).abs() < 1e-9, "{hours} h at {t} °C: remaining {got} h, closed form {want} h");
        }
    }

    #[test]
    fn the_class_table_is_in_the_report_on_round_celsius_edges() {
        let e = steady(10.0, 555.0, 150.0);
        let r = ComponentReport::new(&e.plan().components[0], component(&e, "TUBE"));
        let t = &r.histograms.temperature_pressure;
        // 10 K classes from 500 °C (design 560 °C less 60 K) on round degrees.
        assert_eq!(t.temperature_edges_c[0], 500.0);
        assert!(
            t.temperature_edges_c.iter().all(|c| c.fract() == 0.0 && c % 10.0 == 0.0),
            "{:?}",
            t.temperature_edges_c
        );
        assert_eq!(t.hours.len(), t.temperature_edges_c.len() + 1);
        assert!(t.hours.iter().all(|row| row.len() == t.pressure_edges_mpa.len() + 1));
        // All 10 h in [550, 560) °C and [14.4, 18) MPa (six classes to
        // 1.2 × 18 MPa: edges every 3.6 MPa).
        let ti = t.temperature_edges_c.iter().position(|&c| c == 560.0).unwrap();
        let pi = t.pressure_edges_mpa.iter().position(|&p| (p - 18.0).abs() < 1e-9).unwrap();
        assert!((t.hours[ti][pi] - 10.0).abs() < 1e-9, "{:?}", t.hours);
        let total: f64 = t.hours.iter().flatten().sum();
        assert!((total - 10.0).abs() < 1e-9);
        // The text form (`lifeledger ledger`): one class row, and totals.
        let text = class_table_text(&r);
        let lines: Vec<&str> = text.lines().collect();
        assert_eq!(lines.len(), 4, "{text}");
        assert!(lines[1].contains("< 3.6") && lines[1].contains(">= 21.6"), "{text}");
        assert!(lines[2].trim_start().starts_with("550-560") && lines[2].trim_end().ends_with("10.0"), "{text}");
        assert!(lines[3].trim_start().starts_with("all"), "{text}");
    }

    use crate::engine::Conditions;
    use crate::physics::wear::FrettingRegime;

    // Ledgers store the regime snake case; one stored with the type's name
    // (`GrossSlip`) still loads, to the same regime.
    #[test]
    fn stored_conditions_load_with_either_regime_spelling() {
        let now = Conditions { fretting_regime: Some(FrettingRegime::GrossSlip), ..Conditions::default() };
        let text = serde_json::to_string(&now).unwrap();
        assert!(text.contains("\"fretting_regime\":\"gross_slip\""), "{text}");
        let old = text.replace("gross_slip", "GrossSlip");
        assert_eq!(serde_json::from_str::<Conditions>(&old).unwrap(), now);
    }
}
