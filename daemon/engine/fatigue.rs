//! Fatigue at a component's assessed location, booked piece by piece with
//! the creep ledger: the stress history at the location, online rainflow
//! counting with a durable residue, Miner's usage on the design curve, the
//! cycle table, recent cycles, and the creep-fatigue figures reports and
//! alarms read.
//!
//! The stress at the location at the end of each integrated piece is
//! `σ = k_p · σ_hoop + σ_t`: `σ_hoop` the component's pressure hoop stress
//! (without the creep `stress_factor`, which `k_p` replaces at the
//! location), `σ_t = f_t · E · α · ΔT / (1 − ν)` from the measured or the
//! ramp-derived through-wall difference (`physics::fatigue::thermal`), E,
//! α and ν at the metal temperature. A piece with any input in a gap feeds
//! nothing (the counter keeps its extremes; the next trusted value goes on
//! from them), so a gap never makes a cycle of its own.
//!
//! Everything durable is in [`FatigueState`] inside the component's JSON
//! state: the counter's residue with its running extreme, the closed
//! usage, the cycle table and hourly buckets of the last 31 days. The
//! engine calls [`on_piece`] from the one integration path, so replay and
//! live book the same cycles, and a stored state continues exactly.

use super::component::ComponentState;
use super::plan::{ComponentPlan, Input, Levels, TagId, TagPlan};
use super::signal::{Segment, TagState};
use crate::physics::fatigue::curve::{corrected_alternating_stress_mpa, plasticity_factor, DesignCurve};
use crate::physics::fatigue::interaction::Envelope;
use crate::physics::fatigue::rainflow::{Cycle, RainflowCounter};
use crate::physics::fatigue::thermal::{ramp_delta_t_k, thermal_stress_mpa};
use crate::physics::material::ThermoElastic;
use serde::{Deserialize, Serialize};

const MS_PER_H: i64 = 3_600_000;
/// Hourly buckets kept: 31 days.
const BUCKET_HOURS: i64 = 31 * 24;
/// The "month" of the recent figures, hours (30 days).
const MONTH_H: i64 = 30 * 24;

/// How the through-wall temperature difference is found.
#[derive(Debug, Clone, PartialEq)]
pub enum ThermalPlan {
    /// No thermal stress (pressure cycles only).
    None,
    /// Measured: ΔT = ratio · (T_wall − T_fluid); ratio 1 when the wall
    /// tag is taken as the mean wall temperature (mid-wall), the
    /// quasi-steady (T_i − T̄)/(T_i − T_o) when it reads the outer surface.
    Measured { fluid: Input, wall: Input, ratio: f64 },
    /// From the fluid temperature's rate by the quasi-steady hollow
    /// cylinder (`physics::fatigue::thermal::ramp_delta_t_k`).
    Ramp { fluid: TagId, outside_diameter_mm: f64, wall_mm: f64 },
}

/// The fatigue plan of one component, internal units.
#[derive(Debug, Clone)]
pub struct FatiguePlan {
    /// The location assessed, in words.
    pub location: String,
    /// k_p on the pressure hoop stress.
    pub pressure_stress_factor: f64,
    /// f_t on the thermal stress.
    pub thermal_stress_factor: f64,
    pub thermal: ThermalPlan,
    pub curve: DesignCurve,
    pub elastic: ThermoElastic,
    pub envelope: Envelope,
    /// Where the envelope comes from (the grade's code point, or the
    /// innermost one as a conservative stand-in).
    pub envelope_source: String,
    /// Hysteresis gate, MPa.
    pub gate_mpa: f64,
    /// Class widths of the cycle table, MPa.
    pub range_class_mpa: f64,
    pub mean_class_mpa: f64,
    /// Alarm levels of fatigue usage and of the combined damage index.
    pub usage_levels: Levels,
    pub combined_levels: Levels,
    /// Fluid temperature rate of a design start-up, K/min (`check-config`).
    pub design_ramp_k_per_min: f64,
    /// Usage before the ledger started (an earlier assessment).
    pub initial_usage: f64,
    /// Outside diameter and wall at the location, mm, when known (the
    /// design start-stop's thermal stress needs them).
    pub geometry_mm: Option<(f64, f64)>,
    /// S_PS, MPa: with it, ranges above it are raised by the simplified
    /// elastic-plastic factor K_e (`physics::fatigue::curve::plasticity_factor`).
    pub plasticity_limit_mpa: Option<f64>,
    /// Fatigue strength reduction factor of a fretting contact at the
    /// location (≥ 1): multiplies the alternating stress of cycles closed
    /// while the component's fretting contact slips (partial or gross
    /// slip). Only with a fretting wear model. Fretting lowers plain
    /// fatigue strength by factors of about 2-3 and more (Waterhouse,
    /// Fretting Fatigue, 1981, from memory); the shortest lives lie in
    /// partial and mixed slip (Vingsbo & Söderberg, Wear 1988, fretting
    /// maps, from memory), hence both regimes (conservative). No default.
    pub fretting_knockdown: Option<f64>,
}

impl FatiguePlan {
    /// Tags the fatigue location reads (beyond the component's own).
    pub fn tags(&self) -> Vec<TagId> {
        let inputs = match &self.thermal {
            ThermalPlan::None => vec![],
            ThermalPlan::Measured { fluid, wall, .. } => vec![*fluid, *wall],
            ThermalPlan::Ramp { fluid, .. } => vec![Input::Tag(*fluid)],
        };
        inputs
            .into_iter()
            .filter_map(|i| match i {
                Input::Tag(t) => Some(t),
                Input::Constant(_) => None,
            })
            .collect()
    }
}

/// One cell of the cycle table: class indices (lower edge = index ·
/// width) and the cycles counted in it.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct TableCell {
    pub range_class: i64,
    pub mean_class: i64,
    pub cycles: f64,
}

/// Cycles and usage closed in one hour of event time.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct HourBucket {
    /// Hours since the epoch.
    pub hour: i64,
    pub cycles: f64,
    pub usage: f64,
}

/// The durable fatigue ledger of one component.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct FatigueState {
    pub counter: RainflowCounter,
    /// Miner's usage of the closed cycles (the residue not included),
    /// including the plan's initial usage.
    pub usage: f64,
    /// Closed cycles (full = 1, half = 0.5).
    pub cycles: f64,
    /// Closed cycles whose temperature was above the curve's limit, and
    /// their usage (the curve was used beyond its validity).
    pub cycles_over_curve_temperature: f64,
    pub usage_over_curve_temperature: f64,
    /// Largest stress range closed, MPa.
    pub largest_range_mpa: f64,
    /// Cycle table, sorted by (range class, mean class).
    pub table: Vec<TableCell>,
    /// Hourly buckets of the last 31 days, oldest first.
    pub recent: Vec<HourBucket>,
    /// Stress at the location at the newest booked instant, MPa, and its
    /// thermal part; the through-wall difference, K.
    pub stress_mpa: f64,
    pub thermal_stress_mpa: f64,
    pub delta_t_k: f64,
    /// Event time of the newest sample fed to the counter, ms.
    pub fed_to_ms: Option<i64>,
}

impl FatigueState {
    /// A fresh fatigue ledger at the plan's initial usage.
    pub fn new(f: &FatiguePlan) -> FatigueState {
        FatigueState { usage: f.initial_usage, ..FatigueState::default() }
    }
}

/// Value of an input at the end of a piece, `None` in a gap.
fn end_value(input: Input, tags: &[TagState], tag_plans: &[TagPlan], a: f64, b: f64) -> Option<f64> {
    match input {
        Input::Constant(v) => Some(v),
        Input::Tag(id) => match tags[id as usize].segment(&tag_plans[id as usize], a, b) {
            Segment::Value { vb, .. } => Some(vb),
            _ => None,
        },
    }
}

/// The engine's hook: book the piece `[a_ms, b_ms]` that `state.now`
/// describes at its end. `unmonitored`: one of the component's inputs was
/// in a gap over the piece.
#[allow(clippy::too_many_arguments)]
pub fn on_piece(
    plan: &ComponentPlan,
    f: &FatiguePlan,
    state: &mut ComponentState,
    tags: &[TagState],
    tag_plans: &[TagPlan],
    a_ms: i64,
    b_ms: i64,
    unmonitored: bool,
) {
    if unmonitored {
        return;
    }
    let (a, b) = (a_ms as f64, b_ms as f64);
    let delta_t_k = match &f.thermal {
        ThermalPlan::None => 0.0,
        ThermalPlan::Measured { fluid, wall, ratio } => {
            match (end_value(*fluid, tags, tag_plans, a, b), end_value(*wall, tags, tag_plans, a, b)) {
                (Some(tf), Some(tw)) => ratio * (tw - tf),
                _ => return,
            }
        }
        ThermalPlan::Ramp { fluid, outside_diameter_mm, wall_mm } => {
            match tags[*fluid as usize].segment(&tag_plans[*fluid as usize], a, b) {
                Segment::Value { k, .. } => {
                    let t = state.now.metal_temperature_k;
                    let diff = f.elastic.thermal_diffusivity_mm2_per_s.at_k(t);
                    ramp_delta_t_k(k * 1000.0, *outside_diameter_mm, *wall_mm, diff)
                }
                _ => return,
            }
        }
    };
    let t_k = state.now.metal_temperature_k;
    let e = &f.elastic;
    let modulus = e.youngs_modulus_mpa.at_k(t_k);
    let sigma_t = thermal_stress_mpa(
        f.thermal_stress_factor,
        modulus,
        e.thermal_expansion_per_k.at_k(t_k),
        e.poisson_ratio.value,
        delta_t_k,
    );
    let sigma_p = f.pressure_stress_factor * state.now.hoop_stress_mpa / plan.stress_factor;
    let sigma = sigma_p + sigma_t;
    let knockdown = f.fretting_knockdown.filter(|_| fretting_slips(&state.now)).unwrap_or(1.0);
    let fs = state.fatigue.get_or_insert_with(|| FatigueState::new(f));
    fs.stress_mpa = sigma;
    fs.thermal_stress_mpa = sigma_t;
    fs.delta_t_k = delta_t_k;
    fs.fed_to_ms = Some(b_ms);
    let mut counter = std::mem::take(&mut fs.counter);
    counter.push(sigma, t_k, f.gate_mpa, &mut |c| book(f, fs, &c, b_ms, knockdown));
    fs.counter = counter;
}

/// Alternating stress (MPa, at the curve's modulus) of a range at a
/// temperature: `K_e · (Δσ/2) · E_curve/E_T`, K_e = 1 without S_PS.
pub fn alternating_stress_mpa(f: &FatiguePlan, range_mpa: f64, temperature_k: f64) -> f64 {
    let ke = f.plasticity_limit_mpa.map_or(1.0, |s| plasticity_factor(f.curve, range_mpa, s));
    ke * corrected_alternating_stress_mpa(f.curve, range_mpa, f.elastic.youngs_modulus_mpa.at_k(temperature_k))
}

/// Usage of one cycle on the plan's curve, with E at the cycle's
/// temperature: `count / N(S_a)` (Miner's rule term).
pub fn usage_of(f: &FatiguePlan, c: &Cycle) -> f64 {
    c.count / f.curve.allowable_cycles(alternating_stress_mpa(f, c.range, c.temperature_k))
}

/// Whether the component's fretting contact slips now (partial or gross
/// slip), so the fretting knock-down applies to cycles closing now.
fn fretting_slips(state_now: &super::component::Conditions) -> bool {
    use crate::physics::wear::FrettingRegime;
    matches!(state_now.fretting_regime, Some(FrettingRegime::PartialSlip | FrettingRegime::GrossSlip))
}

/// Book a closed cycle; `knockdown` multiplies its alternating stress.
fn book(f: &FatiguePlan, fs: &mut FatigueState, c: &Cycle, at_ms: i64, knockdown: f64) {
    let u = if knockdown == 1.0 {
        usage_of(f, c)
    } else {
        c.count / f.curve.allowable_cycles(knockdown * alternating_stress_mpa(f, c.range, c.temperature_k))
    };
    fs.usage += u;
    fs.cycles += c.count;
    fs.largest_range_mpa = fs.largest_range_mpa.max(c.range);
    if c.temperature_k > f.curve.data().max_temperature_k {
        fs.cycles_over_curve_temperature += c.count;
        fs.usage_over_curve_temperature += u;
    }
    let rc = (c.range / f.range_class_mpa).floor() as i64;
    let mc = (c.mean / f.mean_class_mpa).floor() as i64;
    match fs.table.binary_search_by(|x| (x.range_class, x.mean_class).cmp(&(rc, mc))) {
        Ok(i) => fs.table[i].cycles += c.count,
        Err(i) => fs.table.insert(i, TableCell { range_class: rc, mean_class: mc, cycles: c.count }),
    }
    let hour = at_ms.div_euclid(MS_PER_H);
    match fs.recent.last_mut() {
        Some(last) if last.hour == hour => {
            last.cycles += c.count;
            last.usage += u;
        }
        _ => fs.recent.push(HourBucket { hour, cycles: c.count, usage: u }),
    }
    let keep_from = hour - BUCKET_HOURS + 1;
    let drop = fs.recent.iter().take_while(|x| x.hour < keep_from).count();
    if drop > 0 {
        fs.recent.drain(..drop);
    }
}

/// Hours to a level at a rate (0 when reached, ∞ when not approaching).
fn hours_to(level: f64, value: f64, rate_per_h: f64) -> f64 {
    if value >= level {
        0.0
    } else if rate_per_h > 0.0 {
        (level - value) / rate_per_h
    } else {
        f64::INFINITY
    }
}

/// What reports, alarms and the database read about a component's fatigue.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct FatigueFigures {
    pub location: String,
    pub design_curve: &'static str,
    pub stress_mpa: f64,
    pub thermal_stress_mpa: f64,
    pub delta_t_k: f64,
    /// Usage of the closed cycles plus the residue counted as half cycles.
    pub fatigue_usage: f64,
    pub closed_usage: f64,
    pub residue_usage: f64,
    pub cycles: f64,
    pub residue_half_cycles: f64,
    pub cycles_last_day: f64,
    pub cycles_last_month: f64,
    pub usage_last_month: f64,
    pub largest_range_mpa: f64,
    pub cycles_over_curve_temperature: f64,
    /// Creep damage (the component's life fraction).
    pub creep_damage: f64,
    /// D_f + D_c.
    pub linear_sum: f64,
    /// Combined index on the bilinear envelope (1 on the envelope).
    pub creep_fatigue_index: f64,
    pub envelope: Envelope,
    pub envelope_source: String,
    /// Cycles like the recent ones (mean usage per cycle over 30 days)
    /// that would bring usage to 1; `None` without recent cycles.
    pub remaining_cycles: Option<f64>,
    /// Recent usage rate, 1/h (30 days, or the hours integrated if fewer).
    pub usage_rate_per_h: f64,
    /// (severity, level, hours) to each fatigue usage level.
    #[serde(serialize_with = "ser_hours")]
    pub hours_to_usage: Vec<(&'static str, f64, f64)>,
    /// (severity, level, hours) to each combined-index level.
    #[serde(serialize_with = "ser_hours")]
    pub hours_to_combined: Vec<(&'static str, f64, f64)>,
}

fn ser_hours<S: serde::Serializer>(v: &[(&'static str, f64, f64)], s: S) -> Result<S::Ok, S::Error> {
    use serde::ser::SerializeSeq;
    let mut seq = s.serialize_seq(Some(v.len()))?;
    for (sev, level, h) in v {
        seq.serialize_element(&serde_json::json!({
            "severity": sev,
            "level": level,
            "hours": if h.is_finite() { serde_json::json!(h) } else { serde_json::Value::Null },
        }))?;
    }
    seq.end()
}

/// The fatigue figures of a component with a fatigue plan; `None` without.
pub fn figures(plan: &ComponentPlan, state: &ComponentState) -> Option<FatigueFigures> {
    let f = plan.fatigue.as_ref()?;
    let empty = FatigueState::new(f);
    let fs = state.fatigue.as_ref().unwrap_or(&empty);
    let mut residue_usage = 0.0;
    let mut residue_half = 0.0;
    fs.counter.residue_cycles(&mut |c| {
        residue_usage += usage_of(f, &c);
        residue_half += c.count;
    });
    let now_h = state.integrated_to_ms.unwrap_or(0).div_euclid(MS_PER_H);
    let in_last = |h: i64| fs.recent.iter().filter(move |x| x.hour > now_h - h);
    let cycles_last_day = in_last(24).map(|x| x.cycles).sum::<f64>() + 0.0; // an empty sum is -0.0; show 0
    let cycles_last_month = in_last(MONTH_H).map(|x| x.cycles).sum::<f64>() + 0.0;
    let usage_last_month: f64 = in_last(MONTH_H).map(|x| x.usage).sum();
    let usage = fs.usage + residue_usage;
    let span_h = state.integrated_h.min(MONTH_H as f64);
    let usage_rate = if span_h > 0.0 { usage_last_month / span_h } else { 0.0 };
    let remaining_cycles = (cycles_last_month > 0.0 && usage_last_month > 0.0)
        .then(|| (1.0 - usage).max(0.0) * cycles_last_month / usage_last_month);
    let creep = state.life_fraction;
    let creep_rate = super::component::projection(plan, state).life_fraction_rate_per_h;
    let index = f.envelope.index(usage, creep);
    let index_rate = f.envelope.index_rate(usage, creep, usage_rate, creep_rate);
    Some(FatigueFigures {
        location: f.location.clone(),
        design_curve: f.curve.name(),
        stress_mpa: fs.stress_mpa,
        thermal_stress_mpa: fs.thermal_stress_mpa,
        delta_t_k: fs.delta_t_k,
        fatigue_usage: usage,
        closed_usage: fs.usage,
        residue_usage,
        cycles: fs.cycles,
        residue_half_cycles: residue_half,
        cycles_last_day,
        cycles_last_month,
        usage_last_month,
        largest_range_mpa: fs.largest_range_mpa,
        cycles_over_curve_temperature: fs.cycles_over_curve_temperature,
        creep_damage: creep,
        linear_sum: usage + creep,
        creep_fatigue_index: index,
        envelope: f.envelope,
        envelope_source: f.envelope_source.clone(),
        remaining_cycles,
        usage_rate_per_h: usage_rate,
        hours_to_usage: f.usage_levels.iter().map(|(s, l)| (s, l, hours_to(l, usage, usage_rate))).collect(),
        hours_to_combined: f.combined_levels.iter().map(|(s, l)| (s, l, hours_to(l, index, index_rate))).collect(),
    })
}
