//! The per-component integrator: the ledger of one part and how it advances
//! over an interval of event time.
//!
//! Over `[a, b]` the interval is cut where any input changes its formula
//! (a sample instant, the end of a hold), so each piece has inputs that are
//! straight lines or constants. Pieces where an input is in a gap count as
//! unmonitored hours and are integrated at the gap policy's values.
//!
//! * A piece whose inputs are constant is integrated exactly with one
//!   evaluation.
//! * Creep damage and strain on a ramp: the trapezoid rule for very small
//!   temperature and pressure steps, else composite Simpson with enough
//!   panels to keep the temperature step per panel small.
//! * Wear on a ramp is exact: its rate is a polynomial of degree three or
//!   less in time between the inputs' zero crossings, which Simpson's rule
//!   integrates exactly (`wear_exact`).
//! * Hours by class, over design, in the creep range and extrapolated are
//!   booked exactly on the piece's straight lines, from the analytic times
//!   at which they cross class edges and limits (`account_line`), not at
//!   quadrature nodes.
//! * The recent rates are normalised exponentially weighted means
//!   (`physics::remaining`); [`projection`] gives the rates projections
//!   use, conservative while the window settles.

use super::plan::{ComponentPlan, Input, StressPlan, TagPlan, WearPlan};
use super::plan::{GapPolicy, WearModel};
use super::signal::{Breaks, Segment, TagState};
use crate::physics::histogram::{CellHint, TimeAtCondition};
use crate::physics::larson_miller::RangeFlags;
use crate::physics::norton::creep_rate_per_h_ln;
use crate::physics::remaining::{interval_weight, next_weight, projection_rate};
use crate::physics::stress::{hoop_stress_mpa, hoop_stress_per_mpa, remaining_wall_mm};
use crate::physics::wear::{fretting_regime, fretting_sliding_speed_mm_s, FrettingRegime};
use serde::{Deserialize, Serialize};

const MS_PER_H: f64 = 3_600_000.0;
/// Largest temperature step (K) per Simpson panel on a ramp.
const PANEL_TEMPERATURE_STEP_K: f64 = 4.0;
/// Largest relative pressure step per Simpson panel on a ramp.
const PANEL_PRESSURE_STEP: f64 = 0.05;
const MAX_PANELS: usize = 64;
/// Largest temperature step (K) integrated by the trapezoid rule.
const TRAPEZOID_TEMPERATURE_STEP_K: f64 = 0.5;
/// Largest relative pressure step integrated by the trapezoid rule.
const TRAPEZOID_PRESSURE_STEP: f64 = 0.005;

/// Conditions at the newest integrated instant.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct Conditions {
    pub metal_temperature_k: f64,
    pub pressure_mpa: f64,
    pub hoop_stress_mpa: f64,
    /// Rupture life at these conditions, hours (infinite below the creep range).
    #[serde(with = "super::serde_inf")]
    pub rupture_life_h: f64,
    /// Instantaneous life-fraction rate, 1/h.
    pub life_fraction_rate_per_h: f64,
    /// Instantaneous Norton creep strain rate, 1/h.
    pub creep_rate_per_h: f64,
    /// Instantaneous wear depth rate, mm/h.
    pub wear_rate_mm_per_h: f64,
    pub fretting_regime: Option<FrettingRegime>,
    /// Whether the newest piece was unmonitored.
    pub unmonitored: bool,
}

/// Sticky flags: set once and kept, so a report shows what ever happened.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct LedgerFlags {
    /// Rupture life was evaluated outside the material data's range.
    pub extrapolated: RangeFlags,
    /// Some hours were integrated without trustworthy data.
    pub unmonitored: bool,
    /// The metal temperature exceeded the design temperature.
    pub over_design_temperature: bool,
    /// The remaining wall reached the formula floor.
    pub wall_exhausted: bool,
}

/// The ledger of one component.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ComponentState {
    /// Event time (ms) up to which the ledger is integrated.
    pub integrated_to_ms: Option<i64>,
    /// Event time of the first sample seen.
    pub first_sample_ms: Option<i64>,
    /// Robinson life fraction, including the initial value.
    pub life_fraction: f64,
    /// Accumulated Norton creep strain (fraction), including the initial.
    pub creep_strain: f64,
    /// Accumulated wear depth, mm, including the initial.
    pub wear_depth_mm: f64,
    /// Recent rates: normalised exponentially weighted means of the index
    /// rates (see [`crate::physics::remaining`]), exact for a steady
    /// history from the first piece. Projections read them through
    /// [`projection`].
    pub recent_life_fraction_rate_per_h: f64,
    pub recent_creep_strain_rate_per_h: f64,
    pub recent_wear_rate_mm_per_h: f64,
    /// Accumulated weight of the recent rates, `1 − e^(−H/τ)` after H
    /// hours; 0 means no recent rate is known. A ledger stored before this
    /// field existed loads with 0: its old (biased-low) recent rates are
    /// not trusted and are replaced by the first new piece, and it settles
    /// again (conservative).
    #[serde(default)]
    pub recent_weight: f64,
    /// Operating hours (hours in which life fraction, strain or wear grew)
    /// that entered the recent rates; projections settle once it reaches
    /// the plan's minimum. 0 for a ledger stored before it existed.
    #[serde(default)]
    pub recent_window_h: f64,
    /// Hours integrated in all.
    pub integrated_h: f64,
    /// Hours with at least one input in a gap.
    pub unmonitored_h: f64,
    /// Hours at or above the creep threshold temperature.
    pub hours_in_creep_range: f64,
    /// Hours in the creep range with rupture life extrapolated.
    pub extrapolated_h: f64,
    /// Hours above the design temperature.
    pub over_design_h: f64,
    #[serde(with = "super::serde_inf")]
    pub peak_temperature_k: f64,
    pub flags: LedgerFlags,
    pub now: Conditions,
    pub histogram: TimeAtCondition,
    /// Inspection findings and what they set (`engine::inspection`).
    #[serde(default, skip_serializing_if = "super::inspection::InspectionState::is_empty")]
    pub inspection: super::inspection::InspectionState,
    /// Fatigue ledger of the assessed location (`engine::fatigue`); absent
    /// without `[component.fatigue]` and in ledgers stored before it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fatigue: Option<super::fatigue::FatigueState>,
}

impl ComponentState {
    /// A fresh ledger at the component's initial state.
    pub fn new(plan: &ComponentPlan) -> Self {
        ComponentState {
            integrated_to_ms: None,
            first_sample_ms: None,
            life_fraction: plan.initial_life_fraction,
            creep_strain: plan.initial_creep_strain,
            wear_depth_mm: plan.initial_wear_depth_mm,
            recent_life_fraction_rate_per_h: 0.0,
            recent_creep_strain_rate_per_h: 0.0,
            recent_wear_rate_mm_per_h: 0.0,
            recent_weight: 0.0,
            recent_window_h: 0.0,
            integrated_h: 0.0,
            unmonitored_h: 0.0,
            hours_in_creep_range: 0.0,
            extrapolated_h: 0.0,
            over_design_h: 0.0,
            peak_temperature_k: f64::NEG_INFINITY,
            flags: LedgerFlags::default(),
            now: Conditions::default(),
            histogram: TimeAtCondition::new(plan.temperature_edges_k.clone(), plan.pressure_edges_mpa.clone()),
            inspection: Default::default(),
            fatigue: plan.fatigue.as_ref().map(super::fatigue::FatigueState::new),
        }
    }

    /// Wear index: depth over allowable depth (0 without a wear model).
    pub fn wear_index(&self, plan: &ComponentPlan) -> f64 {
        plan.wear.as_ref().map_or(0.0, |w| self.wear_depth_mm / w.allowable_depth_mm)
    }
}

/// Rates at design conditions: what a projection falls back on while the
/// recent rates settle.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize)]
pub struct DesignRates {
    /// Life-fraction rate, 1/h, at the design temperature and pressure
    /// (each, when not configured, the constant input or else the newest
    /// integrated value), on the component's curve, stress factor and wall.
    pub life_fraction_rate_per_h: f64,
    /// Norton creep strain rate, 1/h, at the same conditions.
    pub creep_strain_rate_per_h: f64,
    /// Wear depth rate, mm/h, at the newest integrated wear inputs (a wear
    /// contact has no design conditions; with constant inputs this is the
    /// rate at those constants).
    pub wear_rate_mm_per_h: f64,
}

/// The rates a remaining-life projection uses, and whether it is settling.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Projection {
    /// The recent-rate window holds fewer operating hours than
    /// `settling_h`: each rate below is the larger of the recent rate and
    /// the design rate.
    pub settling: bool,
    /// Operating hours in the recent-rate window.
    pub window_h: f64,
    /// Operating hours the window needs before the recent rates are used alone.
    pub settling_h: f64,
    /// Life-fraction rate used for projections, 1/h.
    pub life_fraction_rate_per_h: f64,
    /// Creep strain rate used for projections, 1/h.
    pub creep_strain_rate_per_h: f64,
    /// Wear depth rate used for projections, mm/h.
    pub wear_rate_mm_per_h: f64,
    /// The design rates compared while settling.
    pub design: DesignRates,
}

/// Rates at design conditions for a component in its present state (the
/// wall as thinned by the newest integrated instant).
pub fn design_rates(plan: &ComponentPlan, state: &ComponentState) -> DesignRates {
    let value = |design: Option<f64>, input: Option<Input>, newest: f64| {
        design
            .or(match input {
                Some(Input::Constant(v)) => Some(v),
                _ => None,
            })
            .unwrap_or(newest)
    };
    let p = Point {
        t_k: value(plan.design_temperature_k, plan.metal_temperature, state.now.metal_temperature_k),
        p_mpa: value(plan.design_pressure_mpa, plan.pressure, state.now.pressure_mpa),
        ..Point::default()
    };
    // Before anything is integrated the wall has not thinned (service
    // hours are clamped at zero).
    let tau_ms = state.integrated_to_ms.map_or(f64::NEG_INFINITY, |t| t as f64);
    let start_ms = state.first_sample_ms.unwrap_or(0);
    let r = rates(plan, None, &p, tau_ms, start_ms, plan.creep_threshold_k());
    DesignRates {
        life_fraction_rate_per_h: r.life_per_h,
        creep_strain_rate_per_h: r.strain_per_h,
        wear_rate_mm_per_h: state.now.wear_rate_mm_per_h,
    }
}

/// The projection rates of a component: its recent rates once the window
/// holds `plan.recent_rate_settling_h` operating hours, before that the
/// larger of recent and design rate for each index
/// ([`crate::physics::remaining::projection_rate`]).
pub fn projection(plan: &ComponentPlan, state: &ComponentState) -> Projection {
    let settling = !(state.recent_window_h >= plan.recent_rate_settling_h);
    let design = design_rates(plan, state);
    let known = state.recent_weight > 0.0;
    let pick = |recent: f64, design: f64| projection_rate(known.then_some(recent), design, settling);
    Projection {
        settling,
        window_h: state.recent_window_h,
        settling_h: plan.recent_rate_settling_h,
        life_fraction_rate_per_h: pick(state.recent_life_fraction_rate_per_h, design.life_fraction_rate_per_h),
        creep_strain_rate_per_h: pick(state.recent_creep_strain_rate_per_h, design.creep_strain_rate_per_h),
        wear_rate_mm_per_h: pick(state.recent_wear_rate_mm_per_h, design.wear_rate_mm_per_h),
        design,
    }
}

/// Per-component working block of the integrator: the plan's values a
/// piece reads, and memos of the last piece. Rates are a pure function of
/// the inputs, so reusing them for bit-identical inputs changes no result;
/// it only saves work when values are steady or when one piece's end is
/// the next piece's start.
///
/// Built from the plan by [`Scratch::new`]. The plan changes in service
/// only through `engine::inspection::derive`, which builds a new scratch
/// when it does; a ledger replaced by an import gets a new scratch too
/// (the histogram hint belongs to the ledger's histogram).
#[derive(Debug, Clone, Default)]
pub struct Scratch {
    /// The plan's values every piece reads, in one small block: read from
    /// the 2 kB plan, their cache lines were evicted between two pieces of
    /// a part (BENCHMARKS.md, "one working block").
    hot: Hot,
    memo: Option<(Point, Rates)>,
    /// The last piece's length: (ms, h, weight of the recent-rate update,
    /// 1/h). Regular sampling repeats the length, so neither the hours'
    /// division, the weight's exponential nor the reciprocal is recomputed.
    length: Option<(i64, f64, f64, f64)>,
    /// Hoop stress per MPa of gauge pressure (stress factor included) and
    /// whether the wall is at the formula floor, when the wall does not
    /// thin in service: every hoop formula is linear in pressure.
    stress_per_mpa: Option<(f64, bool)>,
    /// Histogram cell of the last node (a search hint only).
    classes: CellHint,
    /// The creep threshold and the material data's range, for booking
    /// hours on a line.
    bounds: DataBounds,
}

/// Where a component creeps and where its rupture life is extrapolated:
/// creep at T ≥ `threshold_k` with σ > 0; inside the data for
/// `t_k[0] ≤ T ≤ t_k[1]` and `stress_mpa[0] ≤ σ ≤ stress_mpa[1]` (the
/// stress range as the prepared curve applies it, scatter shift included).
#[derive(Debug, Clone, Copy, Default)]
struct DataBounds {
    threshold_k: f64,
    t_k: [f64; 2],
    stress_mpa: [f64; 2],
}

impl Scratch {
    /// Scratch for one component, with its constant geometry prepared.
    pub fn new(plan: &ComponentPlan) -> Scratch {
        let stress_per_mpa = match plan.stress {
            StressPlan::Hoop {
                basis,
                outside_diameter_mm,
                wall_mm,
                measured_loss_mm,
                thinning_rate_mm_per_year,
                ..
            } if thinning_rate_mm_per_year <= 0.0 => {
                let wall = remaining_wall_mm(wall_mm, measured_loss_mm, 0.0, 0.0);
                Some((
                    hoop_stress_per_mpa(basis, outside_diameter_mm, wall) * plan.stress_factor,
                    wall <= crate::physics::stress::MIN_WALL_MM,
                ))
            }
            _ => None,
        };
        let (stress_mpa, t_k) = plan.curve.data_range();
        let bounds = DataBounds { threshold_k: plan.creep_threshold_k(), t_k, stress_mpa };
        let hot = Hot {
            metal_temperature: plan.metal_temperature,
            pressure: plan.pressure,
            design_temperature_k: plan.design_temperature_k,
            design_pressure_mpa: plan.design_pressure_mpa,
            temperature_correction_k: plan.temperature_correction_k,
            thinning: matches!(plan.stress, StressPlan::Hoop { thinning_rate_mm_per_year, .. } if thinning_rate_mm_per_year > 0.0),
            wear: plan.wear.is_some(),
            fatigue: plan.fatigue.is_some(),
            initial_as_of: plan.initial_as_of_ms.is_some(),
        };
        Scratch { hot, stress_per_mpa, bounds, ..Scratch::default() }
    }

    /// Whether the plan re-bases the initial values at an `as_of` instant.
    #[inline(always)]
    pub(super) fn initial_as_of(&self) -> bool {
        self.hot.initial_as_of
    }
}

/// The plan's values a piece reads (see [`Scratch::hot`]).
#[derive(Debug, Clone, Copy, Default)]
struct Hot {
    metal_temperature: Option<Input>,
    pressure: Option<Input>,
    design_temperature_k: Option<f64>,
    design_pressure_mpa: Option<f64>,
    /// An inspection's temperature correction, K.
    temperature_correction_k: f64,
    /// The wall thins with service time (rates depend on time too).
    thinning: bool,
    /// The part has wear inputs.
    wear: bool,
    /// The part has `[component.fatigue]`.
    fatigue: bool,
    /// The plan has `[component.initial] as_of`.
    initial_as_of: bool,
}

/// Input values at one instant, internal units.
#[derive(Debug, Clone, Copy, Default, PartialEq)]
struct Point {
    t_k: f64,
    p_mpa: f64,
    load_n: f64,
    speed_mm_s: f64,
    slip_mm: f64,
    freq_hz: f64,
}

/// Rates at one instant.
#[derive(Debug, Clone, Copy, Default)]
struct Rates {
    stress_mpa: f64,
    life_per_h: f64,
    strain_per_h: f64,
    wear_mm_per_h: f64,
    creep: bool,
    flags: RangeFlags,
    wall_exhausted: bool,
}

/// A linear (or constant) input over one piece: value(τ) = v0 + k·(τ − a)
/// inside, `v1` exactly at the end.
#[derive(Debug, Clone, Copy, Default)]
struct Line {
    v0: f64,
    v1: f64,
    k: f64,
}

impl Line {
    #[inline]
    fn constant(v: f64) -> Line {
        Line { v0: v, v1: v, k: 0.0 }
    }

    #[inline]
    fn at(&self, dt: f64) -> f64 {
        self.v0 + self.k * dt
    }
}

/// One input's line over [a, b] and whether it is in a gap.
#[inline(always)]
fn line_of(
    input: Option<Input>,
    tags: &[TagState],
    tag_plans: &[TagPlan],
    a: f64,
    b: f64,
    gap_value: impl Fn(Option<f64>) -> f64,
) -> (Line, bool) {
    match input {
        None => (Line::default(), false),
        Some(Input::Constant(v)) => (Line::constant(v), false),
        Some(Input::Tag(id)) => match tags[id as usize].segment(&tag_plans[id as usize], a, b) {
            Segment::Value { va, vb, k } => (Line { v0: va, v1: vb, k }, false),
            Segment::Gap(last) => (Line::constant(gap_value(Some(last))), true),
            Segment::Missing => (Line::constant(gap_value(None)), true),
        },
    }
}

/// Integrate one component from its `integrated_to_ms` up to `to_ms`.
#[allow(clippy::too_many_arguments)]
pub fn advance(
    plan: &ComponentPlan,
    comp_tags: &[super::plan::TagId],
    scratch: &mut Scratch,
    state: &mut ComponentState,
    tags: &[TagState],
    tag_plans: &[TagPlan],
    to_ms: i64,
    policy: GapPolicy,
    tau_h: f64,
) {
    // A part without wear inputs takes the piece path for two input lines
    // (temperature and pressure), the wear lines being zero.
    if scratch.hot.wear {
        advance_as::<true>(plan, comp_tags, scratch, state, tags, tag_plans, to_ms, policy, tau_h);
    } else {
        advance_as::<false>(plan, comp_tags, scratch, state, tags, tag_plans, to_ms, policy, tau_h);
    }
}

/// [`advance`] for a part with (`WEAR`) or without wear inputs.
#[allow(clippy::too_many_arguments)]
#[inline(always)]
fn advance_as<const WEAR: bool>(
    plan: &ComponentPlan,
    comp_tags: &[super::plan::TagId],
    scratch: &mut Scratch,
    state: &mut ComponentState,
    tags: &[TagState],
    tag_plans: &[TagPlan],
    to_ms: i64,
    policy: GapPolicy,
    tau_h: f64,
) {
    let Some(from_ms) = state.integrated_to_ms else {
        state.integrated_to_ms = Some(to_ms);
        return;
    };
    if to_ms <= from_ms {
        return;
    }
    // Fast path: no sample instant or end of hold inside the interval (the
    // common case of regular sampling) means one piece.
    //
    // `t` is strictly inside (from, to) when 0 < t − from < to − from. In
    // wrapping u64 arithmetic that is one comparison, exact for every i64
    // `t` because to > from: for t ≤ from, t − from − 1 wraps to
    // 2^64 + (t − from) − 1, not below to − from − 1 since to − t < 2^64;
    // for t > from, t − from never exceeds 2^64 − 1 and does not wrap. The
    // checks are or-ed without branches: all of them are needed in the
    // common case, where none is inside.
    let span_1 = (to_ms.wrapping_sub(from_ms) as u64).wrapping_sub(1);
    let inside = |t: i64| (t.wrapping_sub(from_ms) as u64).wrapping_sub(1) < span_1;
    let mut split = false;
    for &id in comp_tags {
        let st = &tags[id as usize];
        let h = tag_plans[id as usize].max_hold_ms;
        if let Some((t, _)) = st.prev {
            split |= inside(t) | inside(t.saturating_add(h));
        }
        if let Some((t, _)) = st.last {
            split |= inside(t) | inside(t.saturating_add(h));
        }
    }
    if !split {
        integrate_piece::<WEAR>(plan, scratch, state, tags, tag_plans, from_ms, to_ms, policy, tau_h);
        state.integrated_to_ms = Some(to_ms);
        return;
    }
    let mut breaks = Breaks::new();
    for &id in comp_tags {
        tags[id as usize].breakpoints(&tag_plans[id as usize], &mut breaks);
    }
    let pieces = breaks.segments(from_ms, to_ms);
    for w in pieces.windows(2) {
        integrate_piece::<WEAR>(plan, scratch, state, tags, tag_plans, w[0], w[1], policy, tau_h);
    }
    state.integrated_to_ms = Some(to_ms);
}

/// One piece `[a_ms, b_ms]` of a component; `WEAR` is whether the part has
/// wear inputs (without them the four wear lines are zero and the rate
/// memo compares temperature and pressure only).
#[allow(clippy::too_many_arguments)]
#[inline]
fn integrate_piece<const WEAR: bool>(
    plan: &ComponentPlan,
    scratch: &mut Scratch,
    state: &mut ComponentState,
    tags: &[TagState],
    tag_plans: &[TagPlan],
    a_ms: i64,
    b_ms: i64,
    policy: GapPolicy,
    tau_h: f64,
) {
    let (a, b) = (a_ms as f64, b_ms as f64);
    // The piece's hours, recent-rate weight and reciprocal hours, computed
    // once per piece length (the same values, bit for bit, as computing
    // them afresh).
    let span_ms = b_ms - a_ms;
    let (dt_h, alpha, per_h) = match scratch.length {
        Some((l, h, a, r)) if l == span_ms => (h, a, r),
        _ => {
            let h = span_ms as f64 / MS_PER_H;
            let (a, r) = (interval_weight(h, tau_h), 1.0 / h);
            scratch.length = Some((span_ms, h, a, r));
            (h, a, r)
        }
    };
    let hot = &scratch.hot;
    let design_t = hot.design_temperature_k;
    let design_p = hot.design_pressure_mpa;
    // Gap values by policy: conservative takes the worse of design and the
    // last good value; hold-last takes the last good value (design when
    // there is none); wear inputs hold their last value.
    let pick = |design: Option<f64>| {
        move |last: Option<f64>| match (policy, last, design) {
            (GapPolicy::Conservative, Some(l), Some(d)) => l.max(d),
            (_, Some(l), _) => l,
            (_, None, Some(d)) => d,
            (_, None, None) => 0.0,
        }
    };
    let hold = |last: Option<f64>| last.unwrap_or(0.0);
    let (mut lt, gt) = line_of(hot.metal_temperature, tags, tag_plans, a, b, pick(design_t));
    if hot.temperature_correction_k != 0.0 {
        // An inspection's correction (engine::inspection), measured and gap values alike.
        lt.v0 += hot.temperature_correction_k;
        lt.v1 += hot.temperature_correction_k;
    }
    let (lp, gp) = line_of(hot.pressure, tags, tag_plans, a, b, pick(design_p));
    let (mut ll, mut ls, mut lsl, mut lf) = (Line::default(), Line::default(), Line::default(), Line::default());
    let mut gw = false;
    if let (true, Some(w)) = (WEAR, &plan.wear) {
        let (x, g1) = line_of(Some(w.normal_load), tags, tag_plans, a, b, hold);
        let (y, g2) = line_of(w.sliding_speed, tags, tag_plans, a, b, hold);
        let (z, g3) = line_of(w.slip_amplitude, tags, tag_plans, a, b, hold);
        let (f, g4) = line_of(w.frequency, tags, tag_plans, a, b, hold);
        ll = x;
        ls = y;
        lsl = z;
        lf = f;
        gw = g1 || g2 || g3 || g4;
    }
    let unmonitored = gt || gp || gw;
    state.integrated_h += dt_h;
    if unmonitored {
        state.unmonitored_h += dt_h;
        state.flags.unmonitored = true;
        if policy == GapPolicy::Exclude {
            state.now.unmonitored = true;
            return;
        }
    }
    let lines = PieceLines { t: lt, p: lp, load: ll, speed: ls, slip: lsl, freq: lf };
    let thinning = hot.thinning;
    let constant = lines.constant() && !thinning;
    let mut eval = RateEval::<WEAR> {
        plan,
        hot,
        memo: &mut scratch.memo,
        stress_per_mpa: scratch.stress_per_mpa,
        start_ms: state.first_sample_ms.unwrap_or(a_ms),
        bounds: scratch.bounds,
    };
    let span = b - a;
    let piece = if constant {
        piece_constant(&mut eval, state, &mut scratch.classes, &lines, a, dt_h)
    } else {
        let dtk = (lt.k * span).abs();
        let pmax = lp.v0.abs().max(lp.v1.abs()).max(1e-9);
        let dp = (lp.k * span).abs();
        // Small steps: the trapezoid rule on the end rates (one new rate
        // evaluation, the start is memoised from the previous piece). Its
        // error on an exponential-like rate is about (k·ΔT)²/12 with
        // k ≈ 0.07 /K, below 2e-4 for ΔT ≤ 0.5 K, and it over-estimates
        // damage for a convex rate (conservative).
        let small = dtk <= TRAPEZOID_TEMPERATURE_STEP_K && dp <= TRAPEZOID_PRESSURE_STEP * pmax && !thinning;
        if small {
            piece_trapezoid(&mut eval, state, &mut scratch.classes, &lines, a, b, dt_h)
        } else {
            let n = ((dtk / PANEL_TEMPERATURE_STEP_K).max(dp / pmax / PANEL_PRESSURE_STEP).ceil() as usize)
                .clamp(1, MAX_PANELS);
            piece_simpson(&mut eval, state, &mut scratch.classes, &lines, a, span, dt_h, n)
        }
    };
    let Piece { d_life, d_strain, mut d_wear, last_rates, last_point } = piece;
    if WEAR && !constant && lines.wear_varies() {
        if let Some(w) = &plan.wear {
            d_wear = wear_exact(w, &lines, span, dt_h);
        }
    }
    state.life_fraction += d_life;
    state.creep_strain += d_strain;
    state.wear_depth_mm += d_wear;
    if dt_h > 0.0 {
        // The normalised recent rates of physics::remaining::update_recent_rate
        // (the interval weight `alpha` is taken above, once per piece length).
        let w = next_weight(state.recent_weight, alpha);
        // α/W' is 1 on the first piece (W = 0): the rates become the
        // piece's, whatever an old ledger held.
        let beta = alpha / w;
        state.recent_weight = w;
        let upd = |recent: f64, rate: f64| recent + beta * (rate - recent);
        state.recent_life_fraction_rate_per_h = upd(state.recent_life_fraction_rate_per_h, d_life * per_h);
        state.recent_creep_strain_rate_per_h = upd(state.recent_creep_strain_rate_per_h, d_strain * per_h);
        state.recent_wear_rate_mm_per_h = upd(state.recent_wear_rate_mm_per_h, d_wear * per_h);
        if d_life > 0.0 || d_strain > 0.0 || d_wear > 0.0 {
            state.recent_window_h += dt_h;
        }
    }
    state.now = Conditions {
        metal_temperature_k: last_point.t_k,
        pressure_mpa: last_point.p_mpa,
        hoop_stress_mpa: last_rates.stress_mpa,
        // 1/0 = ∞ below the creep range.
        rupture_life_h: 1.0 / last_rates.life_per_h,
        life_fraction_rate_per_h: last_rates.life_per_h,
        creep_rate_per_h: last_rates.strain_per_h,
        wear_rate_mm_per_h: last_rates.wear_mm_per_h,
        // Without wear inputs there is no wear model (`hot.wear`).
        fretting_regime: if WEAR {
            plan.wear.as_ref().and_then(|w| match w.model {
                WearModel::Fretting => Some(fretting_regime(last_point.slip_mm, &w.regime_bounds)),
                WearModel::Archard => None,
            })
        } else {
            None
        },
        unmonitored,
    };
    if let (true, Some(f)) = (hot.fatigue, &plan.fatigue) {
        super::fatigue::on_piece(plan, f, state, tags, tag_plans, a_ms, b_ms, unmonitored);
    }
}

/// The six input lines of one piece.
struct PieceLines {
    t: Line,
    p: Line,
    load: Line,
    speed: Line,
    slip: Line,
    freq: Line,
}

impl PieceLines {
    /// Whether every input is constant over the piece.
    #[inline]
    fn constant(&self) -> bool {
        self.t.k == 0.0
            && self.p.k == 0.0
            && self.load.k == 0.0
            && self.speed.k == 0.0
            && self.slip.k == 0.0
            && self.freq.k == 0.0
    }

    /// Whether a wear input changes over the piece.
    #[inline]
    fn wear_varies(&self) -> bool {
        self.load.k != 0.0 || self.speed.k != 0.0 || self.slip.k != 0.0 || self.freq.k != 0.0
    }

    /// The inputs `dt` ms after the piece start.
    #[inline]
    fn at(&self, dt: f64) -> Point {
        Point {
            t_k: self.t.at(dt),
            p_mpa: self.p.at(dt),
            load_n: self.load.at(dt),
            speed_mm_s: self.speed.at(dt),
            slip_mm: self.slip.at(dt),
            freq_hz: self.freq.at(dt),
        }
    }

    /// The inputs at the piece end, exactly (a sample value when the end is
    /// a sample instant), so the next piece's start hits the rate memo.
    #[inline]
    fn end(&self) -> Point {
        Point {
            t_k: self.t.v1,
            p_mpa: self.p.v1,
            load_n: self.load.v1,
            speed_mm_s: self.speed.v1,
            slip_mm: self.slip.v1,
            freq_hz: self.freq.v1,
        }
    }
}

/// Rate evaluation for one piece, through the component's memo.
struct RateEval<'a, const WEAR: bool> {
    plan: &'a ComponentPlan,
    /// The plan's per-piece values ([`Scratch::hot`]). Where its wall
    /// thins with service time, rates depend on time too and the memo
    /// (keyed by inputs only) is not used.
    hot: &'a Hot,
    memo: &'a mut Option<(Point, Rates)>,
    stress_per_mpa: Option<(f64, bool)>,
    start_ms: i64,
    /// The creep threshold, and where rupture life is extrapolated (for
    /// booking hours on a line).
    bounds: DataBounds,
}

impl<const WEAR: bool> RateEval<'_, WEAR> {
    /// Rates at inputs `p` and event time `tau_ms`.
    #[inline(always)]
    fn at(&mut self, p: &Point, tau_ms: f64) -> Rates {
        if !self.hot.thinning {
            if let Some((mp, mr)) = &*self.memo {
                // Without wear inputs every point's wear fields are zero.
                let same = if WEAR { mp == p } else { mp.t_k == p.t_k && mp.p_mpa == p.p_mpa };
                if same {
                    return *mr;
                }
            }
        }
        let r = rates(self.plan, self.stress_per_mpa, p, tau_ms, self.start_ms, self.bounds.threshold_k);
        match self.memo {
            // Without wear inputs the memo's wear fields stay zero: only
            // temperature, pressure and the rates are stored.
            Some((mp, mr)) if !WEAR => {
                mp.t_k = p.t_k;
                mp.p_mpa = p.p_mpa;
                *mr = r;
            }
            _ => *self.memo = Some((*p, r)),
        }
        r
    }
}

/// What one piece adds, and the rates and inputs at its end.
struct Piece {
    d_life: f64,
    d_strain: f64,
    d_wear: f64,
    last_rates: Rates,
    last_point: Point,
}

/// A piece with constant inputs: exact, one evaluation.
#[inline]
fn piece_constant<const WEAR: bool>(
    eval: &mut RateEval<WEAR>,
    state: &mut ComponentState,
    classes: &mut CellHint,
    lines: &PieceLines,
    a: f64,
    dt_h: f64,
) -> Piece {
    let p = lines.at(0.0);
    let r = eval.at(&p, a);
    account_node(eval.hot, state, classes, &p, &r, dt_h);
    Piece {
        d_life: r.life_per_h * dt_h,
        d_strain: r.strain_per_h * dt_h,
        d_wear: r.wear_mm_per_h * dt_h,
        last_rates: r,
        last_point: p,
    }
}

/// A piece with small steps: the trapezoid rule on the end rates.
#[inline]
fn piece_trapezoid<const WEAR: bool>(
    eval: &mut RateEval<WEAR>,
    state: &mut ComponentState,
    classes: &mut CellHint,
    lines: &PieceLines,
    a: f64,
    b: f64,
    dt_h: f64,
) -> Piece {
    let p0 = lines.at(0.0);
    let r0 = eval.at(&p0, a);
    let p1 = lines.end();
    let r1 = eval.at(&p1, b);
    let w = 0.5 * dt_h;
    account_line(eval, state, classes, (&p0, &r0), (&p1, &r1), dt_h);
    Piece {
        d_life: w * (r0.life_per_h + r1.life_per_h),
        d_strain: w * (r0.strain_per_h + r1.strain_per_h),
        d_wear: w * (r0.wear_mm_per_h + r1.wear_mm_per_h),
        last_rates: r1,
        last_point: p1,
    }
}

/// A piece with larger steps: composite Simpson over `n` panels, nodes at
/// panel ends and midpoints, weights h/6 · (1, 4, 1) per panel. Kept out of
/// line: the common pieces are constant or small, and this loop's code in
/// the middle of theirs slows them.
#[inline(never)]
#[allow(clippy::too_many_arguments)]
fn piece_simpson<const WEAR: bool>(
    eval: &mut RateEval<WEAR>,
    state: &mut ComponentState,
    classes: &mut CellHint,
    lines: &PieceLines,
    a: f64,
    span: f64,
    dt_h: f64,
    n: usize,
) -> Piece {
    let h = span / n as f64;
    let w = dt_h / n as f64 / 6.0;
    let (mut d_life, mut d_strain, mut d_wear) = (0.0, 0.0, 0.0);
    let mut p0 = lines.at(0.0);
    let mut r0 = eval.at(&p0, a);
    let (p_start, r_start) = (p0, r0);
    for i in 0..n {
        let xm = h * (i as f64 + 0.5);
        let x1 = if i + 1 == n { span } else { h * (i + 1) as f64 };
        let pm = lines.at(xm);
        let p1 = if i + 1 == n { lines.end() } else { lines.at(x1) };
        let rm = eval.at(&pm, a + xm);
        let r1 = eval.at(&p1, a + x1);
        d_life += w * (r0.life_per_h + 4.0 * rm.life_per_h + r1.life_per_h);
        d_strain += w * (r0.strain_per_h + 4.0 * rm.strain_per_h + r1.strain_per_h);
        d_wear += w * (r0.wear_mm_per_h + 4.0 * rm.wear_mm_per_h + r1.wear_mm_per_h);
        r0 = r1;
        p0 = p1;
    }
    account_line(eval, state, classes, (&p_start, &r_start), (&p0, &r0), dt_h);
    Piece { d_life, d_strain, d_wear, last_rates: r0, last_point: p0 }
}

/// Book-keeping at one quadrature node carrying `w_h` hours.
#[inline]
fn account_node(hot: &Hot, state: &mut ComponentState, classes: &mut CellHint, p: &Point, r: &Rates, w_h: f64) {
    if hot.metal_temperature.is_some() {
        state.histogram.add_hinted(p.t_k, p.p_mpa, w_h, classes);
        if p.t_k > state.peak_temperature_k {
            state.peak_temperature_k = p.t_k;
        }
        if let Some(d) = hot.design_temperature_k {
            if p.t_k > d {
                state.over_design_h += w_h;
                state.flags.over_design_temperature = true;
            }
        }
    }
    account_creep(state, r, w_h);
}

/// Creep-range, extrapolation and wall flags of one node carrying `w_h` hours.
#[inline]
fn account_creep(state: &mut ComponentState, r: &Rates, w_h: f64) {
    if r.creep {
        state.hours_in_creep_range += w_h;
        if r.flags.any() {
            state.extrapolated_h += w_h;
            let f = &mut state.flags.extrapolated;
            f.stress_below |= r.flags.stress_below;
            f.stress_above |= r.flags.stress_above;
            f.temperature_below |= r.flags.temperature_below;
            f.temperature_above |= r.flags.temperature_above;
        }
    }
    state.flags.wall_exhausted |= r.wall_exhausted;
}

/// Book-keeping for a piece of `dt_h` hours on which temperature and
/// pressure are straight lines between the two end nodes: hours by class,
/// over design, in the creep range and extrapolated, each exact (the times
/// at which a line crosses an edge are analytic). The peak is at an end.
///
/// Every condition booked is a line on one side of a constant, so it holds
/// on one stretch of the piece; when all hold alike at both ends they hold
/// throughout, and the piece is booked whole (the common case of small
/// steps inside one class).
#[inline(always)]
fn account_line<const WEAR: bool>(
    eval: &RateEval<WEAR>,
    state: &mut ComponentState,
    classes: &mut CellHint,
    (p0, r0): (&Point, &Rates),
    (p1, r1): (&Point, &Rates),
    dt_h: f64,
) {
    let hot = eval.hot;
    if hot.metal_temperature.is_some() {
        state.histogram.add_line_hinted((p0.t_k, p0.p_mpa), (p1.t_k, p1.p_mpa), dt_h, classes);
        let peak = p0.t_k.max(p1.t_k);
        if peak > state.peak_temperature_k {
            state.peak_temperature_k = peak;
        }
        if let Some(d) = hot.design_temperature_k {
            let over = if p0.t_k > d && p1.t_k > d {
                dt_h
            } else if p0.t_k <= d && p1.t_k <= d {
                0.0
            } else {
                len(stretch(p0.t_k, p1.t_k, d, true)) * dt_h
            };
            if over > 0.0 {
                state.over_design_h += over;
                state.flags.over_design_temperature = true;
            }
        }
    }
    let b = &eval.bounds;
    let whole = match (r0.creep, r1.creep) {
        (true, true) => r0.flags == r1.flags,
        (false, false) => {
            hot.metal_temperature.is_none()
                || ((p0.t_k >= b.threshold_k) == (p1.t_k >= b.threshold_k)
                    && (r0.stress_mpa > 0.0) == (r1.stress_mpa > 0.0))
        }
        _ => false,
    };
    if whole {
        account_creep(state, r0, dt_h);
    } else {
        account_creep_line(eval, state, (p0, r0), (p1, r1), dt_h);
    }
    state.flags.wall_exhausted |= r0.wall_exhausted | r1.wall_exhausted;
}

/// The stretch `[from, to]` of a piece (as fractions of it, 0 to 1) on
/// which a line from `v0` to `v1` is above `c` (`above`) or below it, the
/// constant `c` itself included when `inclusive` (which matters only for a
/// level line); empty when `from ≥ to`.
#[inline]
fn stretch_of(v0: f64, v1: f64, c: f64, above: bool, inclusive: bool) -> (f64, f64) {
    if v0 == v1 {
        let holds = if above { v0 > c } else { v0 < c } || (inclusive && v0 == c);
        return if holds { (0.0, 1.0) } else { (1.0, 0.0) };
    }
    let u = ((c - v0) / (v1 - v0)).clamp(0.0, 1.0);
    if (v1 > v0) == above {
        (u, 1.0)
    } else {
        (0.0, u)
    }
}

/// [`stretch_of`] strictly above or below `c`.
#[inline]
fn stretch(v0: f64, v1: f64, c: f64, above: bool) -> (f64, f64) {
    stretch_of(v0, v1, c, above, false)
}

/// Where two stretches overlap.
#[inline]
fn meet(a: (f64, f64), b: (f64, f64)) -> (f64, f64) {
    (a.0.max(b.0), a.1.min(b.1))
}

/// Length of a stretch (0 when empty).
#[inline]
fn len(a: (f64, f64)) -> f64 {
    (a.1 - a.0).max(0.0)
}

/// Creep-range and extrapolated hours of a piece whose conditions change
/// inside it, from the crossing times: creep where T ≥ threshold and
/// σ > 0, extrapolated where, in addition, T or σ is outside the data.
/// Stress is a line in pressure (every hoop formula is linear in pressure;
/// a thinning wall is taken as the straight line between the end stresses).
#[inline(never)]
fn account_creep_line<const WEAR: bool>(
    eval: &RateEval<WEAR>,
    state: &mut ComponentState,
    (p0, r0): (&Point, &Rates),
    (p1, r1): (&Point, &Rates),
    dt_h: f64,
) {
    if eval.hot.metal_temperature.is_none() {
        return;
    }
    let b = &eval.bounds;
    let (t0, t1) = (p0.t_k, p1.t_k);
    // Unclamped stress lines, so that σ > 0 falls where p > 0.
    let (s0, s1) = match eval.stress_per_mpa {
        Some((k, _)) => (k * p0.p_mpa, k * p1.p_mpa),
        None => (r0.stress_mpa, r1.stress_mpa),
    };
    // The same comparisons as the rates at a node: creep at T ≥ threshold
    // and σ > 0, inside the data for t_lo ≤ T ≤ t_hi and s_lo ≤ σ ≤ s_hi.
    let creep = meet(stretch_of(t0, t1, b.threshold_k, true, true), stretch(s0, s1, 0.0, true));
    let c = len(creep);
    if c <= 0.0 {
        return;
    }
    state.hours_in_creep_range += c * dt_h;
    let t_in = meet(stretch_of(t0, t1, b.t_k[0], true, true), stretch_of(t0, t1, b.t_k[1], false, true));
    let s_in = meet(stretch_of(s0, s1, b.stress_mpa[0], true, true), stretch_of(s0, s1, b.stress_mpa[1], false, true));
    let inside = len(meet(creep, meet(t_in, s_in)));
    // A stretch of extrapolation per flag (a bound met exactly at a point
    // is no stretch).
    let some = |x: (f64, f64)| len(meet(creep, x)) > 0.0;
    let f = &mut state.flags.extrapolated;
    f.temperature_below |= some(stretch(t0, t1, b.t_k[0], false));
    f.temperature_above |= some(stretch(t0, t1, b.t_k[1], true));
    f.stress_below |= some(stretch(s0, s1, b.stress_mpa[0], false));
    f.stress_above |= some(stretch(s0, s1, b.stress_mpa[1], true));
    let extrapolated = (c - inside).max(0.0);
    if extrapolated > 0.0 {
        state.extrapolated_h += extrapolated * dt_h;
    }
}

/// Wear depth rate (mm/h) at one instant: volume rate `K·F·v` (Archard,
/// with K/H) or `K_w·F·4δf` (fretting) over the contact area.
#[inline(always)]
fn wear_rate_mm_per_h(w: &WearPlan, p: &Point) -> f64 {
    let speed = match w.model {
        WearModel::Archard => p.speed_mm_s.abs(),
        WearModel::Fretting => fretting_sliding_speed_mm_s(p.slip_mm, p.freq_hz),
    };
    let vol_rate_mm3_s = w.volume_coefficient * p.load_n.max(0.0) * speed;
    vol_rate_mm3_s / w.contact_area_mm2 * 3600.0
}

/// Wear depth (mm) over a piece of `dt_h` hours (`span` ms) whose wear
/// inputs are straight lines. The rate is a product of at most three of
/// them (load × speed, or load × slip × frequency): a polynomial of degree
/// three or less wherever no input changes sign, on which Simpson's rule
/// is exact (its error term is the fourth derivative; Abramowitz & Stegun
/// 25.4.5). The piece is cut where an input crosses zero (the rate takes
/// the load's positive part and the speed's magnitude) and each part
/// integrated by one Simpson panel.
#[inline(never)]
fn wear_exact(w: &WearPlan, lines: &PieceLines, span: f64, dt_h: f64) -> f64 {
    let mut cuts = [0.0f64; 6];
    let mut n = 1;
    for l in [&lines.load, &lines.speed, &lines.slip, &lines.freq] {
        if (l.v0 < 0.0 && l.v1 > 0.0) || (l.v0 > 0.0 && l.v1 < 0.0) {
            cuts[n] = l.v0 / (l.v0 - l.v1);
            n += 1;
        }
    }
    cuts[n] = 1.0;
    n += 1;
    cuts[..n].sort_unstable_by(f64::total_cmp);
    let rate = |u: f64| {
        let p = if u == 1.0 { lines.end() } else { lines.at(u * span) };
        wear_rate_mm_per_h(w, &p)
    };
    let mut depth = 0.0;
    let mut f0 = rate(0.0);
    for c in cuts[..n].windows(2) {
        let (u0, u1) = (c[0], c[1]);
        if u1 <= u0 {
            continue;
        }
        let f1 = rate(u1);
        depth += (u1 - u0) * dt_h / 6.0 * (f0 + 4.0 * rate(0.5 * (u0 + u1)) + f1);
        f0 = f1;
    }
    depth
}

/// Damage, strain and wear rates at one instant.
#[inline(always)]
fn rates(
    plan: &ComponentPlan,
    stress_per_mpa: Option<(f64, bool)>,
    p: &Point,
    tau_ms: f64,
    start_ms: i64,
    threshold_k: f64,
) -> Rates {
    let mut r = Rates::default();
    let sigma = if let Some((k, exhausted)) = stress_per_mpa {
        r.wall_exhausted = exhausted;
        p.p_mpa.max(0.0) * k
    } else {
        match plan.stress {
            StressPlan::Fixed(s) => s * plan.stress_factor,
            StressPlan::Hoop {
                basis,
                outside_diameter_mm,
                wall_mm,
                measured_loss_mm,
                thinning_rate_mm_per_year,
                wall_reference_ms,
            } => {
                let service_h = (tau_ms - wall_reference_ms.unwrap_or(start_ms) as f64) / MS_PER_H;
                let wall = remaining_wall_mm(wall_mm, measured_loss_mm, thinning_rate_mm_per_year, service_h);
                r.wall_exhausted = wall <= crate::physics::stress::MIN_WALL_MM;
                hoop_stress_mpa(basis, p.p_mpa, outside_diameter_mm, wall) * plan.stress_factor
            }
        }
    };
    r.stress_mpa = sigma;
    if plan.metal_temperature.is_some() && p.t_k >= threshold_k && sigma > 0.0 {
        r.creep = true;
        let ln_s = sigma.ln();
        let (l10, flags) = plan.curve.log10_rupture_life_h(ln_s * std::f64::consts::LOG10_E, p.t_k);
        r.flags = flags;
        // 10^x as exp(x·ln 10): same value to rounding, several times faster.
        r.life_per_h = (-l10 * std::f64::consts::LN_10).exp();
        if let Some(n) = &plan.material.norton {
            r.strain_per_h = creep_rate_per_h_ln(n, ln_s, p.t_k);
        }
    }
    if let Some(w) = &plan.wear {
        r.wear_mm_per_h = wear_rate_mm_per_h(w, p);
    }
    r
}

#[cfg(test)]
pub(crate) mod tests;
