//! Inspection findings as events of a component's ledger, at their date.
//!
//! An inspection record, once the ledger has accepted it, is an [`Event`]
//! with an *effective instant*: the finding's date, or, for a finding
//! entered after the ledger had already integrated past its date, the
//! instant the ledger had reached when it accepted it. Integration is cut
//! at every effective instant ([`advance`]): the ledger is integrated up to
//! it, the finding is applied, and integration continues from the new
//! value. The events live in the component's state, so a restart, a
//! reload, a rollback and `replay` with the same records all go through
//! this one path and give the same ledger.
//!
//! What each kind does (values replace, they are never added):
//!
//! * **Wall thickness** (ultrasonic): the wall is `w` at the finding's date;
//!   hoop stress follows from that date on. With two or more (unsuperseded)
//!   wall findings of different dates, the thinning rate is re-fitted by
//!   least squares (`physics::inspection::fit_wall_line`, shown with its
//!   standard uncertainty); a fitted thickening counts as no thinning. With
//!   one, the configured rate stays. `σ(t) = σ_basis(p, Do, w − r·(t − t₀))`.
//! * **Creep strain**, **wear depth**: the value is re-based:
//!   `ε(t) = ε_measured + (ε_ledger(t) − ε_ledger(t_finding))`.
//! * **Replica class**: bounds `[lo, hi]` on the life fraction from the
//!   class correlation (`ReplicaClass::life_fraction_bounds`); the ledger's
//!   value at the finding is compared with them (shown, and an alarm
//!   evaluator may raise on `outside`); only when the record asks for it
//!   the life fraction is re-based to the nearest bound:
//!   `D(t) = clamp(D(t_f), lo, hi) + (D(t) − D(t_f))`.
//! * **Steam-side oxide**: the oxide law of the grade turns the thickness
//!   and the service hours into an effective metal temperature `T_ox`; the
//!   correction `ΔT = T_ox − T̄` (T̄ the hours-weighted mean of the
//!   measured metal temperature in the creep range, from the
//!   time-at-temperature table, class mid-points) is added to the measured
//!   metal temperature of this component from that date on. Because the
//!   oxide law is convex in temperature, the plain mean is at or below the
//!   oxide-equivalent temperature of a varying history: the correction is
//!   on the high (conservative) side.
//!
//! **Late findings.** When the ledger has already integrated past the
//! finding's date, the increment since the finding is kept:
//! `value = measured + (ledger now − ledger at the finding)`. The ledger's
//! value at the finding is the [`Reference`] the caller supplies (from the
//! durable daily history: the newest point at or before the finding, so the
//! increment is if anything too large: conservative). Without one, the
//! reference is the component's initial values: everything the ledger
//! accrued counts as after the finding (conservative). The reference and the
//! effective instant are stored with the record, so `replay` repeats them.
//!
//! **`[component.initial] as_of`.** The initial values are a re-base at
//! `as_of`: a history that starts before `as_of` is integrated up to it
//! and the values are then set to the initial ones, so nothing is counted
//! twice. A ledger that was already past `as_of` before this rule existed
//! is left as it is (no jump backwards).
//!
//! Pure: no I/O, no clocks, no logging.

use serde::{Deserialize, Serialize};

use super::component::{self, ComponentState, Scratch};
use super::plan::GapPolicy;
use super::plan::{ComponentPlan, StressPlan, TagId, TagPlan};
use super::signal::TagState;
use super::Engine;
use crate::physics::inspection::{fit_wall_line, oxide_law_for, LineFit, ReplicaClass};

/// What was found.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum Finding {
    /// Wall thickness, mm.
    WallThickness { wall_mm: f64 },
    /// Creep strain as a fraction (0.01 = 1 %).
    CreepStrain { strain: f64 },
    /// Wear depth, mm.
    WearDepth { depth_mm: f64 },
    /// Creep-cavitation class of a replica; `rebase`: the engineer chose to
    /// re-base the life fraction into the class's bounds.
    Replica { class: ReplicaClass, rebase: bool },
    /// Steam-side oxide thickness, mm, after `service_h` hours of service.
    OxideThickness { oxide_mm: f64, service_h: f64 },
}

impl Finding {
    /// The kind's name as the record stores it.
    pub fn kind(&self) -> &'static str {
        match self {
            Finding::WallThickness { .. } => "wall_thickness",
            Finding::CreepStrain { .. } => "creep_strain",
            Finding::WearDepth { .. } => "wear_depth",
            Finding::Replica { .. } => "replica",
            Finding::OxideThickness { .. } => "oxide_thickness",
        }
    }
}

/// The ledger's values at a finding's date (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Reference {
    pub life_fraction: f64,
    pub creep_strain: f64,
    pub wear_depth_mm: f64,
}

/// What applying an event did, kept with it for people and reports.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct Effect {
    /// Life fraction, strain and wear just before and after.
    pub before: Option<Reference>,
    pub after: Option<Reference>,
    /// Oxide: the effective temperature and the correction, K.
    pub oxide_temperature_k: Option<f64>,
    pub temperature_correction_k: Option<f64>,
    /// Replica: the bounds and whether the ledger lay outside them.
    pub bounds: Option<[f64; 2]>,
    pub outside: Option<bool>,
    /// Why the finding changed nothing, when it did not.
    pub not_applied: Option<String>,
}

/// An accepted inspection finding: an event of the component's ledger.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Event {
    /// The record's id in the ledger file.
    pub id: i64,
    /// Date of the finding, ms since the epoch.
    pub finding_ms: i64,
    /// When the ledger applies it (see the module docs).
    pub effective_ms: i64,
    /// The record this one corrects.
    #[serde(default)]
    pub supersedes: Option<i64>,
    pub finding: Finding,
    /// The ledger at the finding, for a finding applied after its date.
    #[serde(default)]
    pub reference: Option<Reference>,
    /// Whether the ledger has applied it.
    #[serde(default)]
    pub applied: bool,
    #[serde(default)]
    pub effect: Effect,
}

/// The re-based wall and how it was found.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct WallBasis {
    pub wall_mm: f64,
    /// Date of the measurement the wall counts from.
    pub at_ms: i64,
    pub thinning_rate_mm_per_year: f64,
    /// The least-squares fit, with two or more measurements.
    pub fit: Option<LineFit>,
}

/// A component's inspection events and what they set.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct InspectionState {
    /// Accepted events, by (effective instant, id).
    pub events: Vec<Event>,
    /// Whether `[component.initial] as_of` has been dealt with.
    #[serde(default)]
    pub initial_rebased: bool,
    /// Temperature correction in force, K (0: none).
    #[serde(default)]
    pub temperature_correction_k: f64,
    #[serde(default)]
    pub wall: Option<WallBasis>,
    /// Replica bounds in force and whether the ledger lay outside them at the finding.
    #[serde(default)]
    pub replica_bounds: Option<[f64; 2]>,
    #[serde(default)]
    pub replica_outside: bool,
}

impl InspectionState {
    /// Nothing recorded (the state's JSON then leaves the field out).
    pub fn is_empty(&self) -> bool {
        *self == InspectionState::default()
    }

    #[inline(always)]
    fn idle(&self, initial_as_of: bool) -> bool {
        (!initial_as_of || self.initial_rebased) && self.events.iter().all(|e| e.applied)
    }

    /// Ids of events superseded by applied events.
    fn superseded(&self) -> Vec<i64> {
        self.events.iter().filter(|e| e.applied).filter_map(|e| e.supersedes).collect()
    }
}

fn values(state: &ComponentState) -> Reference {
    Reference {
        life_fraction: state.life_fraction,
        creep_strain: state.creep_strain,
        wear_depth_mm: state.wear_depth_mm,
    }
}

/// Mean measured metal temperature over the hours in the creep range, K,
/// from the time-at-temperature table (class mid-points; an open end
/// class at its inner edge). `None` without such hours.
pub fn mean_creep_range_temperature_k(plan: &ComponentPlan, state: &ComponentState) -> Option<f64> {
    let edges = &state.histogram.temperature_edges_k;
    let hours = state.histogram.temperature_hours();
    let threshold = plan.creep_threshold_k();
    let (mut sum, mut h) = (0.0, 0.0);
    for (i, &hi) in hours.iter().enumerate() {
        let mid = match (i.checked_sub(1).and_then(|j| edges.get(j)), edges.get(i)) {
            (Some(&a), Some(&b)) => 0.5 * (a + b),
            (None, Some(&b)) => b,
            (Some(&a), None) => a,
            (None, None) => continue,
        };
        if mid >= threshold && hi > 0.0 {
            sum += mid * hi;
            h += hi;
        }
    }
    (h > 0.0).then(|| sum / h)
}

/// Applies event `k` of the state at the ledger's current instant.
fn apply_event(plan: &ComponentPlan, state: &mut ComponentState, k: usize) {
    let ev = state.inspection.events[k].clone();
    let now = values(state);
    let at = ev.reference.unwrap_or(now);
    let mut effect = Effect { before: Some(now), ..Effect::default() };
    match ev.finding {
        Finding::CreepStrain { strain } => state.creep_strain = strain + (now.creep_strain - at.creep_strain),
        Finding::WearDepth { depth_mm } => {
            if plan.wear.is_some() {
                state.wear_depth_mm = depth_mm + (now.wear_depth_mm - at.wear_depth_mm);
            } else {
                effect.not_applied = Some("the component has no wear model".into());
            }
        }
        Finding::Replica { class, rebase } => {
            let b = class.life_fraction_bounds();
            let outside = at.life_fraction < b[0] || at.life_fraction > b[1];
            effect.bounds = Some(b);
            effect.outside = Some(outside);
            if rebase {
                state.life_fraction = at.life_fraction.clamp(b[0], b[1]) + (now.life_fraction - at.life_fraction);
            }
        }
        Finding::OxideThickness { oxide_mm, service_h } => match oxide_law_for(&plan.material.grade) {
            None => {
                effect.not_applied = Some(format!("no oxide growth law is built in for grade {}", plan.material.grade))
            }
            Some(law) => {
                match (law.effective_temperature_k(oxide_mm, service_h), mean_creep_range_temperature_k(plan, state)) {
                    (Some(t_ox), Some(t_mean)) => {
                        effect.oxide_temperature_k = Some(t_ox);
                        effect.temperature_correction_k = Some(t_ox - t_mean);
                    }
                    (None, _) => effect.not_applied = Some("oxide thickness and service hours must be positive".into()),
                    (_, None) => {
                        effect.not_applied =
                            Some("no measured hours in the creep range to compare the oxide with".into())
                    }
                }
            }
        },
        Finding::WallThickness { .. } => {
            if !matches!(plan.stress, StressPlan::Hoop { .. }) {
                effect.not_applied = Some("the component has a fixed stress, not a wall".into());
            }
        }
    }
    effect.after = Some(values(state));
    let e = &mut state.inspection.events[k];
    e.applied = true;
    e.effect = effect;
}

/// Sets what the applied, unsuperseded events decide on the plan (wall,
/// temperature correction) and the state (replica bounds); rebuilds the
/// rate memo when the plan changed.
pub fn derive(plan: &mut ComponentPlan, scratch: &mut Scratch, state: &mut ComponentState) {
    let gone = state.inspection.superseded();
    let live = |e: &&Event| e.applied && !gone.contains(&e.id);
    // Wall: the newest measurement, the rate re-fitted with two or more dates.
    let mut walls: Vec<(i64, f64)> = state
        .inspection
        .events
        .iter()
        .filter(live)
        .filter_map(|e| match e.finding {
            Finding::WallThickness { wall_mm } => Some((e.finding_ms, wall_mm)),
            _ => None,
        })
        .collect();
    walls.sort_by_key(|w| w.0);
    let before = (plan.stress, plan.temperature_correction_k);
    if let (Some(&(at_ms, wall_mm)), StressPlan::Hoop { basis, outside_diameter_mm, thinning_rate_mm_per_year, .. }) =
        (walls.last(), plan.stress)
    {
        let t0 = walls[0].0;
        let pts: Vec<(f64, f64)> = walls.iter().map(|&(t, w)| ((t - t0) as f64 / 3_600_000.0, w)).collect();
        let fit = fit_wall_line(&pts);
        let rate = match fit {
            Some(f) => (-f.slope_mm_per_year).max(0.0),
            None => state.inspection.wall.map_or(thinning_rate_mm_per_year, |w| w.thinning_rate_mm_per_year),
        };
        plan.stress = StressPlan::Hoop {
            basis,
            outside_diameter_mm,
            wall_mm,
            measured_loss_mm: 0.0,
            thinning_rate_mm_per_year: rate,
            wall_reference_ms: Some(at_ms),
        };
        state.inspection.wall = Some(WallBasis { wall_mm, at_ms, thinning_rate_mm_per_year: rate, fit });
    }
    // Temperature correction: the newest applied oxide finding that gave one.
    let oxide = state
        .inspection
        .events
        .iter()
        .filter(live)
        .filter(|e| matches!(e.finding, Finding::OxideThickness { .. }))
        .filter_map(|e| e.effect.temperature_correction_k)
        .next_back();
    plan.temperature_correction_k = oxide.unwrap_or(0.0);
    state.inspection.temperature_correction_k = plan.temperature_correction_k;
    let replica = state
        .inspection
        .events
        .iter()
        .filter(live)
        .rfind(|e| matches!(e.finding, Finding::Replica { .. }))
        .map(|e| (e.effect.bounds, e.effect.outside.unwrap_or(false)));
    if let Some((b, o)) = replica {
        state.inspection.replica_bounds = b;
        state.inspection.replica_outside = o;
    }
    if before != (plan.stress, plan.temperature_correction_k) {
        *scratch = Scratch::new(plan);
    }
}

/// Applies what is due at the ledger's current instant `at`: events whose
/// effective instant is at or before it, in order.
fn apply_due(plan: &mut ComponentPlan, scratch: &mut Scratch, state: &mut ComponentState, at: i64) -> bool {
    let mut any = false;
    for k in 0..state.inspection.events.len() {
        let e = &state.inspection.events[k];
        if !e.applied && e.effective_ms <= at {
            apply_event(plan, state, k);
            // Each event sees the wall and correction of those before it.
            derive(plan, scratch, state);
            any = true;
        }
    }
    any
}

/// [`component::advance`] with the component's inspection events (and
/// `[component.initial] as_of`) applied at their instants.
/// Inlined into the engine's intake: with no finding pending (the common
/// case) it is one check and the plain advance.
#[allow(clippy::too_many_arguments)]
#[inline(always)]
pub fn advance(
    plan: &mut ComponentPlan,
    comp_tags: &[TagId],
    scratch: &mut Scratch,
    state: &mut ComponentState,
    tags: &[TagState],
    tag_plans: &[TagPlan],
    to_ms: i64,
    policy: GapPolicy,
    tau_h: f64,
) {
    if state.inspection.idle(scratch.initial_as_of()) {
        component::advance(plan, comp_tags, scratch, state, tags, tag_plans, to_ms, policy, tau_h);
    } else {
        advance_through_findings(plan, comp_tags, scratch, state, tags, tag_plans, to_ms, policy, tau_h);
    }
}

/// [`advance`] with findings (or an `as_of` re-base) still to apply.
#[allow(clippy::too_many_arguments)]
#[inline(never)]
fn advance_through_findings(
    plan: &mut ComponentPlan,
    comp_tags: &[TagId],
    scratch: &mut Scratch,
    state: &mut ComponentState,
    tags: &[TagState],
    tag_plans: &[TagPlan],
    to_ms: i64,
    policy: GapPolicy,
    tau_h: f64,
) {
    loop {
        let Some(from) = state.integrated_to_ms else {
            component::advance(plan, comp_tags, scratch, state, tags, tag_plans, to_ms, policy, tau_h);
            return;
        };
        if !state.inspection.initial_rebased && plan.initial_as_of_ms.is_some_and(|a| a <= from) {
            // Started at or after as_of (or was past it already): the
            // initial values are where the ledger began.
            state.inspection.initial_rebased = true;
        }
        apply_due(plan, scratch, state, from);
        if from >= to_ms {
            return;
        }
        let initial = plan.initial_as_of_ms.filter(|_| !state.inspection.initial_rebased);
        let next = state
            .inspection
            .events
            .iter()
            .filter(|e| !e.applied)
            .map(|e| e.effective_ms)
            .chain(initial)
            .filter(|&t| t > from)
            .min();
        let stop = next.map_or(to_ms, |n| n.min(to_ms));
        component::advance(plan, comp_tags, scratch, state, tags, tag_plans, stop, policy, tau_h);
        if initial == Some(stop) {
            state.life_fraction = plan.initial_life_fraction;
            state.creep_strain = plan.initial_creep_strain;
            state.wear_depth_mm = plan.initial_wear_depth_mm;
            state.inspection.initial_rebased = true;
        }
        if stop == to_ms {
            apply_due(plan, scratch, state, to_ms);
            return;
        }
    }
}

/// A record as entered, before the ledger has accepted it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct NewFinding {
    pub id: i64,
    pub finding_ms: i64,
    pub supersedes: Option<i64>,
    pub finding: Finding,
}

impl Engine {
    /// Index of the component called `name`.
    pub fn component_index(&self, name: &str) -> Option<usize> {
        self.plan.components.iter().position(|c| c.name == name)
    }

    /// The effective instant a new finding for component `ci` would get
    /// now, and whether it needs a [`Reference`] (it is late).
    pub fn inspection_instant(&self, ci: usize, finding_ms: i64) -> (i64, bool) {
        match self.components[ci].integrated_to_ms {
            Some(t) if t > finding_ms => (t, true),
            _ => (finding_ms, false),
        }
    }

    /// Accepts a new finding for component `ci`: its effective instant is
    /// the finding's date or the ledger's current instant, whichever is
    /// later; a late finding takes `reference` (the ledger at the finding,
    /// from the caller's history), else the initial values. Applied at
    /// once when due. Returns the event as stored with the state.
    pub fn accept_inspection(&mut self, ci: usize, f: NewFinding, reference: Option<Reference>) -> Event {
        let (effective_ms, late) = self.inspection_instant(ci, f.finding_ms);
        let plan = &self.plan.components[ci];
        let reference = late.then(|| {
            reference.unwrap_or(Reference {
                life_fraction: plan.initial_life_fraction,
                creep_strain: plan.initial_creep_strain,
                wear_depth_mm: plan.initial_wear_depth_mm,
            })
        });
        let ev = Event {
            id: f.id,
            finding_ms: f.finding_ms,
            effective_ms,
            supersedes: f.supersedes,
            finding: f.finding,
            reference,
            applied: false,
            effect: Effect::default(),
        };
        self.offer_event(ci, ev.clone());
        self.components[ci].inspection.events.iter().find(|e| e.id == ev.id).cloned().unwrap_or(ev)
    }

    /// Offers an already accepted event (from a records file or the ledger
    /// after a rollback): kept at its effective instant, applied when the
    /// ledger reaches it (at once if it already has). An event whose id the
    /// state holds is ignored.
    pub fn offer_event(&mut self, ci: usize, mut ev: Event) {
        let st = &mut self.components[ci];
        if st.inspection.events.iter().any(|e| e.id == ev.id) {
            return;
        }
        ev.applied = false;
        ev.effect = Effect::default();
        let pos = st.inspection.events.partition_point(|e| (e.effective_ms, e.id) <= (ev.effective_ms, ev.id));
        st.inspection.events.insert(pos, ev);
        if let Some(at) = st.integrated_to_ms {
            if apply_due(&mut self.plan.components[ci], &mut self.scratch[ci], st, at) {
                self.changed[ci] = true;
            }
        }
        self.changed[ci] = true;
    }

    /// Re-derives every component's plan adjustments from its state (after
    /// an import).
    pub(super) fn derive_inspections(&mut self) {
        for ci in 0..self.components.len() {
            derive(&mut self.plan.components[ci], &mut self.scratch[ci], &mut self.components[ci]);
        }
    }
}

#[cfg(test)]
mod tests;
