//! The alarm book: every alarm record of the plant and the ISA-18.2 state
//! machine that moves them.
//!
//! | from | on | to |
//! |---|---|---|
//! | normal | condition becomes active | unacknowledged |
//! | unacknowledged | acknowledge | acknowledged |
//! | unacknowledged | condition clears | rtn_unacknowledged |
//! | acknowledged | condition clears | normal |
//! | acknowledged | escalation (e.g. warning → critical) | unacknowledged |
//! | rtn_unacknowledged | acknowledge | normal |
//! | rtn_unacknowledged | condition active again | unacknowledged |
//! | acknowledged (latching) | condition clears | rtn_unacknowledged |
//! | normal, unacknowledged, acknowledged (engineering alert) | condition active | alert |
//! | alert | condition clears | normal |
//! | any but out_of_service | shelve | shelved |
//! | shelved | unshelve, or shelve end reached | unacknowledged (alert) if active, else normal |
//! | any | remove from service | out_of_service |
//! | out_of_service | return to service, or its end reached | as after a shelve |
//! | not held | plant state suppresses | suppressed (changes recorded, not annunciated) |
//! | suppressed | plant state ends | unacknowledged (alert) if active, else normal |
//!
//! Out of service outranks a shelve, and a shelve a suppression: an alarm
//! released from one returns to the next still in force.
//!
//! * A value is turned into a severity by [`super::deadband::next_severity`]
//!   (levels plus hysteresis), a boolean condition into warning or clear.
//! * Escalation while active (warning → critical) re-enters
//!   `unacknowledged`: the operator acknowledged something less serious.
//!   Stepping down while active keeps the acknowledge state and emits a
//!   `stepped_down` event for the record.
//! * While shelved the condition is still followed (so the record always
//!   shows what the value implies) but no event is emitted except the
//!   shelve and unshelve events themselves. When the shelve is lifted, by
//!   command or by time ([`AlarmBook::tick`], or any evaluation at or after
//!   its end), the alarm takes the state its condition implies: active
//!   means `unacknowledged` even if it was acknowledged before shelving,
//!   since it went unwatched meanwhile.
//! * Records are created on first evaluation and never removed, so an
//!   acknowledge or shelve of an alarm the book has never seen is an error,
//!   while one that has nothing to do (already acknowledged, not shelved)
//!   succeeds with no events: commands may be repeated safely.
//!
//! Time is the caller's: every call takes event time in milliseconds.

use super::command::{AlarmCommand, AlarmTarget, Scope};
use super::deadband::{next_severity, Deadband};
use super::delay::{self, Delay};
use super::event::{AlarmEvent, Transition};
use super::index::{AlarmIndex, Direction, Severity};
use super::rational::{AlarmClass, Rationale, RationaleSettings};
use super::record::{key, AlarmRecord, AlarmState, Shelve};
use super::AlarmError;
use crate::engine::component::projection;
use crate::engine::plan::{ComponentPlan, Levels};
use crate::engine::ComponentState;
use crate::event_time::rfc3339_ms;
use crate::physics::remaining::hours_to_threshold;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

#[path = "service_states.rs"]
mod service_states;
/// Longest out-of-service period a command may ask for, hours (a year).
pub use service_states::MAX_OUT_OF_SERVICE_H;

/// Longest shelve accepted, hours (30 days). ISA-18.2 wants shelving
/// time-limited so that a suppressed alarm comes back to someone's
/// attention; the length is a choice of this program. `[alarms]
/// max_shelve_h` can shorten it, never lengthen it.
pub const MAX_SHELVE_H: f64 = 720.0;
const MS_PER_H: f64 = 3_600_000.0;

/// Book-wide settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct AlarmConfig {
    /// Seconds beyond a tag's hold time without an accepted sample, by the
    /// wall clock, before its sensor-stale alarm (default 60 s: a couple of
    /// missed gateway scans). A tag that never reports is judged from the
    /// service's start.
    #[serde(default = "default_stale_grace")]
    pub stale_grace_s: f64,
    /// Seconds without an accepted sample from any tag before the plant-level
    /// service-health alarm and a not-ready `/readyz` (default 300 s).
    #[serde(default = "default_no_data")]
    pub no_data_alarm_s: f64,
    /// Deadbands by index; an index not listed uses
    /// [`Deadband::default_for`].
    #[serde(default)]
    pub deadbands: BTreeMap<AlarmIndex, Deadband>,
    /// Damage-rate levels (recent life-fraction rate, 1/h) for every
    /// component with a metal temperature. Default: none, not alarmed;
    /// component thresholds do not carry damage-rate levels.
    #[serde(default)]
    pub damage_rate: Levels,
    /// Longest shelve, hours (default and ceiling [`MAX_SHELVE_H`]).
    #[serde(default = "default_max_shelve")]
    pub max_shelve_h: f64,
    /// On- and off-delays by index, seconds of event time; an index not
    /// listed uses [`Delay::default_for`].
    #[serde(default)]
    pub delays: BTreeMap<AlarmIndex, Delay>,
    /// Class, consequence, corrective action and time to respond by index
    /// (any field; the rest from [`Rationale::default_for`]).
    #[serde(default)]
    pub rationale: BTreeMap<AlarmIndex, RationaleSettings>,
    /// The same per component or tag name, over the per-index settings.
    #[serde(default)]
    pub component_rationale: BTreeMap<String, BTreeMap<AlarmIndex, RationaleSettings>>,
    /// Plant states that suppress alarms while they hold
    /// (`[[alarms.plant_state]]`).
    #[serde(default, rename = "plant_state")]
    pub plant_states: Vec<PlantState>,
}

/// A plant state defined from a tag: in force while the tag's newest
/// accepted value (in the tag's own unit) is below `below` (or above
/// `above`); it suppresses the listed indices of the alarms of `units`.
/// A tag with no value yet puts nothing in force: alarms stay annunciated
/// (the conservative side).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlantState {
    /// Recorded on every alarm it suppresses, e.g. "unit U2 offline".
    pub name: String,
    /// Plant units whose alarms it suppresses.
    pub units: Vec<String>,
    pub tag: String,
    #[serde(default)]
    pub below: Option<f64>,
    #[serde(default)]
    pub above: Option<f64>,
    /// Indices suppressed; default the sensor faults and metal temperature
    /// over design, which a unit that is shut down raises for no reason
    /// (transmitters at their rails, cold metal); never the accumulated
    /// indices or service health.
    #[serde(default = "default_suppressed")]
    pub suppress: Vec<AlarmIndex>,
}

fn default_suppressed() -> Vec<AlarmIndex> {
    vec![
        AlarmIndex::SensorStale,
        AlarmIndex::SensorOutOfRange,
        AlarmIndex::SensorBadQuality,
        AlarmIndex::MetalTemperatureOverDesign,
    ]
}

impl PlantState {
    /// Whether the state holds at this value of its tag (own unit).
    pub fn holds(&self, value: f64) -> bool {
        value.is_finite() && (self.below.is_some_and(|b| value < b) || self.above.is_some_and(|a| value > a))
    }

    /// The suppression it makes while in force.
    pub fn rule(&self) -> SuppressionRule {
        SuppressionRule { name: self.name.clone(), units: self.units.clone(), indices: self.suppress.clone() }
    }
}

fn default_max_shelve() -> f64 {
    MAX_SHELVE_H
}

fn default_stale_grace() -> f64 {
    60.0
}
fn default_no_data() -> f64 {
    300.0
}

impl Default for AlarmConfig {
    fn default() -> Self {
        AlarmConfig {
            stale_grace_s: default_stale_grace(),
            no_data_alarm_s: default_no_data(),
            deadbands: BTreeMap::new(),
            damage_rate: Levels::default(),
            max_shelve_h: default_max_shelve(),
            delays: BTreeMap::new(),
            rationale: BTreeMap::new(),
            component_rationale: BTreeMap::new(),
            plant_states: vec![],
        }
    }
}

impl AlarmConfig {
    /// The deadband of an index.
    pub fn deadband(&self, index: AlarmIndex) -> Deadband {
        self.deadbands.get(&index).copied().unwrap_or_else(|| Deadband::default_for(index))
    }

    /// The rationalisation of `component`'s (or tag's) `index`: the
    /// default, then the index's settings, then the component's.
    pub fn rationale(&self, component: &str, index: AlarmIndex) -> Rationale {
        let mut r = Rationale::default_for(index);
        if let Some(s) = self.rationale.get(&index) {
            r = r.with(s);
        }
        if let Some(s) = self.component_rationale.get(component).and_then(|m| m.get(&index)) {
            r = r.with(s);
        }
        r
    }

    /// The on- and off-delay of an index.
    pub fn delay(&self, index: AlarmIndex) -> Delay {
        self.delays.get(&index).copied().unwrap_or_else(|| Delay::default_for(index))
    }
}

/// Every alarm record, keyed by `component/index`.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct AlarmBook {
    #[serde(default)]
    config: AlarmConfig,
    records: BTreeMap<String, AlarmRecord>,
    /// Plant states in force that suppress alarms (the caller sets them
    /// with [`AlarmBook::set_suppression`]; not stored: recomputed).
    #[serde(skip)]
    suppression: Vec<SuppressionRule>,
}

/// A plant state in force and the alarms it suppresses.
#[derive(Debug, Clone, PartialEq)]
pub struct SuppressionRule {
    /// The plant state's name, recorded on each alarm it suppresses.
    pub name: String,
    /// Plant units concerned (an alarm in any of them).
    pub units: Vec<String>,
    /// Indices suppressed (empty: every index).
    pub indices: Vec<AlarmIndex>,
}

impl SuppressionRule {
    /// Whether the rule suppresses a record.
    pub fn matches(&self, rec: &AlarmRecord) -> bool {
        (self.indices.is_empty() || self.indices.contains(&rec.index)) && self.units.iter().any(|u| rec.in_unit(u))
    }
}

/// What a component's alarms look like now, for its retained state topic.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ComponentAlarmSummary {
    pub component: String,
    pub unit: String,
    /// Worst severity of the active operator alarms that are not shelved.
    pub worst_severity: Option<Severity>,
    /// Active operator alarms (condition active, not shelved).
    pub active: usize,
    /// Worst severity of the active engineering alerts (not shelved): for
    /// the integrity engineer, not the operator's console.
    pub worst_alert_severity: Option<Severity>,
    /// Active engineering alerts (not shelved).
    pub alerts: usize,
    /// Alarms waiting for an acknowledge (active or returned to normal).
    pub unacknowledged: usize,
    pub shelved: usize,
    /// Alarms out of service (maintenance, repair).
    pub out_of_service: usize,
    /// Alarms suppressed by a plant state.
    pub suppressed: usize,
    /// Event time of the latest change, RFC 3339.
    pub updated: Option<String>,
    /// Every record of the component, in index order.
    pub alarms: Vec<AlarmRecord>,
    pub caution: &'static str,
}

impl ComponentAlarmSummary {
    /// The summary as one JSON object.
    pub fn to_json(&self) -> String {
        serde_json::to_string(self).expect("an alarm summary always serialises")
    }
}

/// How a record's value is judged: levels with a deadband, or a boolean.
#[derive(Clone, Copy)]
enum Judge<'a> {
    Levels { levels: &'a Levels, deadband: Deadband },
    Condition,
}

impl Judge<'_> {
    fn level(&self, s: Severity) -> Option<f64> {
        match self {
            Judge::Levels { levels, .. } => s.level(levels),
            Judge::Condition => None,
        }
    }
}

impl AlarmBook {
    /// An empty book with the default configuration.
    pub fn new() -> AlarmBook {
        AlarmBook::default()
    }

    /// This book with another configuration.
    pub fn with_config(mut self, config: AlarmConfig) -> AlarmBook {
        self.set_config(config);
        self
    }

    pub fn config(&self) -> &AlarmConfig {
        &self.config
    }

    /// Take a new configuration: every record gets its rationalisation
    /// again, and a record whose class changed takes the state of its new
    /// class (an engineering alert asks no acknowledge; an operator alarm
    /// active without one does). No events: nothing happened in the plant.
    pub fn set_config(&mut self, config: AlarmConfig) {
        self.config = config;
        for rec in self.records.values_mut() {
            let r = self.config.rationale(&rec.component, rec.index);
            let engineering = r.class == AlarmClass::Engineering;
            if rec.rationale.as_ref() != Some(&r) {
                rec.rationale = Some(r);
            }
            rec.state = match (rec.state, engineering) {
                (AlarmState::Unacknowledged | AlarmState::Acknowledged, true) => AlarmState::Alert,
                (AlarmState::RtnUnacknowledged, true) => AlarmState::Normal,
                (AlarmState::Alert, false) => AlarmState::Unacknowledged,
                (s, _) => s,
            };
        }
    }

    /// A book from stored records, as stored (chain
    /// [`AlarmBook::with_config`] to apply a configuration).
    pub fn from_records(records: impl IntoIterator<Item = AlarmRecord>) -> AlarmBook {
        // As stored: classes and rationalisation follow the configuration
        // given with `with_config` (which may move a record's state).
        let records = records.into_iter().map(|r| (r.key(), r)).collect();
        AlarmBook { config: AlarmConfig::default(), records, suppression: vec![] }
    }

    /// Every record, in key order.
    pub fn records(&self) -> impl Iterator<Item = &AlarmRecord> {
        self.records.values()
    }

    /// One record by key (`component/index`).
    pub fn record(&self, key: &str) -> Option<&AlarmRecord> {
        self.records.get(key)
    }

    /// Names of the components (and tags) that have records or are
    /// affected by a tag's sensor record, sorted.
    pub fn components(&self) -> Vec<&str> {
        let mut v: Vec<&str> = self
            .records
            .values()
            .flat_map(|r| std::iter::once(r.component.as_str()).chain(r.affects.iter().map(String::as_str)))
            .collect();
        v.sort_unstable();
        v.dedup();
        v
    }

    /// Judge a value of `index` against `levels` (the index's direction
    /// decides whether higher or lower is worse). A NaN value changes
    /// nothing; an infinite one (no projection) means clear.
    pub fn evaluate(
        &mut self,
        component: &str,
        unit: &str,
        index: AlarmIndex,
        value: f64,
        levels: &Levels,
        time_ms: i64,
    ) -> Vec<AlarmEvent> {
        if value.is_nan() {
            return vec![];
        }
        let deadband = self.config.deadband(index);
        let delay = self.config.delay(index);
        let mut events = vec![];
        let rec = self.entry(component, unit, index, time_ms, &mut events);
        // The severity held for the deadband is what the condition implied
        // last time (shelved or not).
        let implied = next_severity(index.direction(), levels, &deadband, rec.condition, value);
        let new = delay::filter(&delay, rec.condition, implied, &mut rec.pending, time_ms);
        rec.value = value;
        events.extend(update(rec, new, Judge::Levels { levels, deadband }, time_ms));
        events
    }

    /// Judge a boolean condition (sensor or service fault); active means
    /// warning. `detail` says what is wrong, in words (kept on the record
    /// when not empty).
    pub fn evaluate_condition(
        &mut self,
        component: &str,
        unit: &str,
        index: AlarmIndex,
        active: bool,
        detail: &str,
        time_ms: i64,
    ) -> Vec<AlarmEvent> {
        let delay = self.config.delay(index);
        let mut events = vec![];
        let rec = self.entry(component, unit, index, time_ms, &mut events);
        rec.value = if active { 1.0 } else { 0.0 };
        if !detail.trim().is_empty() {
            rec.detail = Some(detail.trim().to_string());
        }
        let new = delay::filter(&delay, rec.condition, active.then_some(Severity::Warning), &mut rec.pending, time_ms);
        events.extend(update(rec, new, Judge::Condition, time_ms));
        events
    }

    /// Judge a tag's sensor fault (`index` one of the sensor indices): one
    /// record per tag and fault, keyed `tag/index`, listing the components
    /// whose ledgers read the tag (`affects`) and, as its unit, their
    /// plant units joined by commas. One fault of a transmitter shared by
    /// many parts is one alarm, not one per part.
    #[allow(clippy::too_many_arguments)]
    pub fn evaluate_sensor(
        &mut self,
        tag: &str,
        unit: &str,
        affects: &[String],
        index: AlarmIndex,
        active: bool,
        detail: &str,
        time_ms: i64,
    ) -> Vec<AlarmEvent> {
        let mut events = vec![];
        let rec = self.entry(tag, unit, index, time_ms, &mut events);
        if rec.affects != affects {
            rec.affects = affects.to_vec();
        }
        events.extend(self.evaluate_condition(tag, unit, index, active, detail, time_ms));
        events
    }

    /// Drop records (keys) that no longer describe anything, for example
    /// sensor alarms kept per component by an older version. Returns the
    /// records dropped.
    pub fn retire(&mut self, keep: impl Fn(&AlarmRecord) -> bool) -> Vec<AlarmRecord> {
        let gone: Vec<String> = self.records.iter().filter(|(_, r)| !keep(r)).map(|(k, _)| k.clone()).collect();
        gone.iter().filter_map(|k| self.records.remove(k)).collect()
    }

    /// Judge every index that applies to one component from its thresholds:
    ///
    /// * creep life fraction and hours to critical: with a metal
    ///   temperature input; hours to critical is the projection to the
    ///   critical life-fraction level (or the highest one set) at the
    ///   projection rate (the recent rate once settled, before that the
    ///   larger of recent and design rate: `engine::component::projection`),
    ///   infinite (clear) when damage is not increasing;
    /// * creep strain: also needs Norton constants for the material;
    /// * wear index: with a wear plan;
    /// * metal temperature over design: with a design temperature, once
    ///   data has been integrated and only when the newest piece was
    ///   monitored (a gap-filled temperature is not a measurement: the
    ///   alarm keeps its state and the sensor alarms tell the story);
    /// * damage rate: with a metal temperature and book-wide levels, on the
    ///   recent (measured) rate, not the projection rate.
    ///
    /// An index without levels is skipped unless it already has a record
    /// (so removing the levels clears an active alarm).
    pub fn evaluate_component(
        &mut self,
        plan: &ComponentPlan,
        state: &ComponentState,
        time_ms: i64,
    ) -> Vec<AlarmEvent> {
        let th = &plan.thresholds;
        let has_creep = plan.metal_temperature.is_some();
        let critical_lf = th.life_fraction.top();
        let hours = critical_lf
            .and_then(|l| hours_to_threshold(state.life_fraction, l, projection(plan, state).life_fraction_rate_per_h))
            .unwrap_or(f64::INFINITY);
        let over_design = plan
            .design_temperature_k
            .filter(|_| state.integrated_to_ms.is_some() && !state.now.unmonitored)
            .map(|d| state.now.metal_temperature_k - d);
        let damage_rate = self.config.damage_rate;
        let fatigue = crate::engine::fatigue::figures(plan, state);
        let no_levels = Levels::default();
        let (usage_levels, combined_levels) =
            plan.fatigue.as_ref().map_or((&no_levels, &no_levels), |f| (&f.usage_levels, &f.combined_levels));
        let checks: [(AlarmIndex, bool, &Levels, f64); 8] = [
            (AlarmIndex::CreepLifeFraction, has_creep, &th.life_fraction, state.life_fraction),
            (
                AlarmIndex::CreepStrain,
                has_creep && plan.material.norton.is_some(),
                &th.creep_strain,
                state.creep_strain,
            ),
            (AlarmIndex::WearIndex, plan.wear.is_some(), &th.wear_index, state.wear_index(plan)),
            (
                AlarmIndex::MetalTemperatureOverDesign,
                has_creep && over_design.is_some(),
                &th.over_design_temperature_k,
                over_design.unwrap_or(f64::NAN),
            ),
            (AlarmIndex::DamageRate, has_creep, &damage_rate, state.recent_life_fraction_rate_per_h),
            (AlarmIndex::HoursToCritical, has_creep && critical_lf.is_some(), &th.hours_to_critical, hours),
            (
                AlarmIndex::FatigueUsage,
                fatigue.is_some(),
                usage_levels,
                fatigue.as_ref().map_or(0.0, |f| f.fatigue_usage),
            ),
            (
                AlarmIndex::CreepFatigueIndex,
                fatigue.is_some(),
                combined_levels,
                fatigue.as_ref().map_or(0.0, |f| f.creep_fatigue_index),
            ),
        ];
        let mut events = vec![];
        for (index, applies, levels, value) in checks {
            let known = self.records.contains_key(&key(&plan.name, index));
            if applies && (levels.iter().next().is_some() || known) {
                events.extend(self.evaluate(&plan.name, &plan.unit, index, value, levels, time_ms));
            }
        }
        // A replica finding whose class bounds the ledger's life fraction
        // lay outside: standing until a later finding agrees or re-bases.
        // The ledger's value now, against the class bounds of the finding:
        // once re-based to a bound it agrees and the alarm clears.
        let outside = state.inspection.replica_outside
            && state
                .inspection
                .replica_bounds
                .is_some_and(|[lo, hi]| state.life_fraction < lo || state.life_fraction > hi);
        if outside || self.records.contains_key(&key(&plan.name, AlarmIndex::ReplicaBounds)) {
            let detail = if outside {
                "the ledger's life fraction lay outside the bounds of the replica class found; review, and re-base if the finding is trusted"
            } else {
                "the ledger agrees with the replica class found"
            };
            events.extend(self.evaluate_condition(
                &plan.name,
                &plan.unit,
                AlarmIndex::ReplicaBounds,
                outside,
                detail,
                time_ms,
            ));
        }
        events
    }

    /// Acknowledge one alarm (a key, or a component and an index) or every
    /// alarm of a component (no index). Unknown alarms are an error; an
    /// alarm with nothing to acknowledge gives no event.
    pub fn acknowledge(
        &mut self,
        key_or_component: &str,
        index: Option<AlarmIndex>,
        by: &str,
        time_ms: i64,
    ) -> Result<Vec<AlarmEvent>, AlarmError> {
        let keys = self.targets(key_or_component, index)?;
        Ok(self.acknowledge_keys(keys, by, time_ms))
    }

    fn acknowledge_keys(&mut self, keys: Vec<String>, by: &str, time_ms: i64) -> Vec<AlarmEvent> {
        let mut events = self.expire_keys(&keys, time_ms);
        for k in keys {
            let rec = self.records.get_mut(&k).expect("target exists");
            let sev = rec.severity;
            let was = rec.state;
            rec.state = match was {
                AlarmState::Unacknowledged => AlarmState::Acknowledged,
                AlarmState::RtnUnacknowledged => AlarmState::Normal,
                _ => continue,
            };
            rec.since_ms = time_ms;
            rec.updated_ms = time_ms;
            rec.acknowledged_by = Some(by.to_string());
            rec.acknowledged_ms = Some(time_ms);
            let threshold = rec.threshold;
            let mut msg = format!(
                "{} {} {} acknowledged by {by}",
                rec.component,
                rec.index.label(),
                sev.map_or("alarm", |s| s.name())
            );
            if was == AlarmState::RtnUnacknowledged {
                msg.push_str("; the condition had already cleared, back to normal");
                rec.severity = None;
                rec.threshold = None;
            }
            let mut e = AlarmEvent::of(rec, Transition::Acknowledged, sev, threshold, time_ms, msg);
            e.by = Some(by.to_string());
            events.push(e);
        }
        events
    }

    /// Shelve one alarm or every alarm of a component until `until_ms`
    /// (after `time_ms`, at most `max_shelve_h` of the configuration, and
    /// never more than [`MAX_SHELVE_H`], later). Shelving a
    /// shelved alarm moves its end and emits a new event.
    #[allow(clippy::too_many_arguments)]
    pub fn shelve(
        &mut self,
        key_or_component: &str,
        index: Option<AlarmIndex>,
        until_ms: i64,
        by: &str,
        reason: &str,
        time_ms: i64,
    ) -> Result<Vec<AlarmEvent>, AlarmError> {
        self.check_shelve(key_or_component, until_ms, time_ms)?;
        let keys = self.targets(key_or_component, index)?;
        Ok(self.shelve_keys(keys, until_ms, by, reason, time_ms))
    }

    /// A shelve end must be ahead and within the longest shelve.
    fn check_shelve(&self, key_or_component: &str, until_ms: i64, time_ms: i64) -> Result<(), AlarmError> {
        if until_ms <= time_ms {
            return Err(AlarmError::ShelveNotAhead {
                target: key_or_component.to_string(),
                until: rfc3339_ms(until_ms),
                now: rfc3339_ms(time_ms),
            });
        }
        // NaN or beyond the ceiling: the ceiling.
        let max_h =
            if self.config.max_shelve_h > 0.0 { self.config.max_shelve_h.min(MAX_SHELVE_H) } else { MAX_SHELVE_H };
        if (until_ms - time_ms) as f64 > max_h * MS_PER_H {
            return Err(AlarmError::ShelveTooLong {
                target: key_or_component.to_string(),
                hours: (until_ms - time_ms) as f64 / MS_PER_H,
                max_h,
            });
        }
        Ok(())
    }

    fn shelve_keys(
        &mut self,
        keys: Vec<String>,
        until_ms: i64,
        by: &str,
        reason: &str,
        time_ms: i64,
    ) -> Vec<AlarmEvent> {
        let mut events = vec![];
        for k in keys {
            let rec = self.records.get_mut(&k).expect("target exists");
            if rec.state == AlarmState::OutOfService {
                // Out of service outranks a shelve: nothing to do.
                continue;
            }
            if rec.state != AlarmState::Shelved {
                rec.state = AlarmState::Shelved;
                rec.since_ms = time_ms;
            }
            // While shelved the record shows what its condition implies
            // (an alarm pending acknowledge after clearing shows clear).
            rec.severity = rec.condition;
            if rec.condition.is_none() {
                rec.threshold = None;
            }
            rec.updated_ms = time_ms;
            rec.shelve = Some(Shelve { until_ms, by: by.to_string(), reason: reason.to_string(), since_ms: time_ms });
            let until = rfc3339_ms(until_ms);
            let mut msg = format!("{} {} shelved by {by} until {until}", rec.component, rec.index.label());
            if !reason.trim().is_empty() {
                msg.push_str(&format!(": {}", reason.trim()));
            }
            let mut e = AlarmEvent::of(rec, Transition::Shelved, rec.condition, rec.threshold, time_ms, msg);
            e.by = Some(by.to_string());
            e.reason = Some(reason.to_string());
            e.shelved_until = Some(until);
            events.push(e);
        }
        events
    }

    /// Lift the shelve of one alarm or of every alarm of a component;
    /// alarms that are not shelved give no event.
    pub fn unshelve(
        &mut self,
        key_or_component: &str,
        index: Option<AlarmIndex>,
        by: &str,
        time_ms: i64,
    ) -> Result<Vec<AlarmEvent>, AlarmError> {
        let keys = self.targets(key_or_component, index)?;
        Ok(self.unshelve_keys(keys, by, time_ms))
    }

    fn unshelve_keys(&mut self, keys: Vec<String>, by: &str, time_ms: i64) -> Vec<AlarmEvent> {
        let mut events = vec![];
        for k in keys {
            let rec = self.records.get_mut(&k).expect("target exists");
            if rec.state == AlarmState::Shelved {
                let mut e = lift_shelve(rec, Transition::Unshelved, &format!("unshelved by {by}"), time_ms);
                e.by = Some(by.to_string());
                events.push(e);
            }
        }
        events
    }

    /// Lift every shelve that has ended by `now_ms`.
    pub fn tick(&mut self, now_ms: i64) -> Vec<AlarmEvent> {
        let keys: Vec<String> = self.records.keys().cloned().collect();
        self.expire_keys(&keys, now_ms)
    }

    /// Carry out an operator command received at `time_ms`.
    pub fn apply(&mut self, command: &AlarmCommand, time_ms: i64) -> Result<Vec<AlarmEvent>, AlarmError> {
        let target = command.target();
        match command {
            AlarmCommand::Acknowledge { by, .. } => {
                let keys = self.targets_of(target)?;
                Ok(self.acknowledge_keys(keys, by, time_ms))
            }
            AlarmCommand::Shelve { duration_h, by, reason, .. } => {
                let until_ms = time_ms.saturating_add((duration_h * MS_PER_H).round() as i64);
                self.check_shelve(&target.component, until_ms, time_ms)?;
                let keys = self.targets_of(target)?;
                Ok(self.shelve_keys(keys, until_ms, by, reason, time_ms))
            }
            AlarmCommand::Unshelve { by, .. } => {
                let keys = self.targets_of(target)?;
                Ok(self.unshelve_keys(keys, by, time_ms))
            }
            AlarmCommand::RemoveFromService { duration_h, by, reason, .. } => {
                let until_ms = time_ms.saturating_add((duration_h * MS_PER_H).round() as i64);
                let keys = self.targets_of(target)?;
                Ok(self.remove_from_service_keys(keys, until_ms, by, reason, time_ms))
            }
            AlarmCommand::ReturnToService { by, .. } => {
                let keys = self.targets_of(target)?;
                Ok(self.return_to_service_keys(keys, by, time_ms))
            }
        }
    }

    /// The alarms a command target addresses, as a summary (what an HTTP
    /// command answers with): a component's summary for
    /// [`Scope::Component`] and [`Scope::Tag`], else one over the unit or
    /// the plant (named `unit U2` or `all`).
    pub fn summary_of(&self, target: &AlarmTarget) -> ComponentAlarmSummary {
        match target.scope {
            Scope::Component => {
                let c = self.record(&target.component).map_or(target.component.as_str(), |r| r.component.as_str());
                self.current(c)
            }
            Scope::Tag => self.current(&target.component),
            Scope::Unit => summarise(
                &format!("unit {}", target.component),
                &target.component,
                self.records.values().filter(|r| r.in_unit(&target.component)).cloned().collect(),
            ),
            Scope::All => summarise("all", "", self.records.values().cloned().collect()),
        }
    }

    /// A component's alarms now.
    pub fn current(&self, component: &str) -> ComponentAlarmSummary {
        let sensors: Vec<&AlarmRecord> = self
            .records
            .values()
            .filter(|r| r.component != component && r.affects.iter().any(|c| c == component))
            .collect();
        self.current_with(component, sensors)
    }

    /// The summaries of many components at once: the sensor records are
    /// visited once, not once per component (a plant of thousands of parts
    /// publishes them every few seconds).
    pub fn summaries<'a>(&self, components: impl IntoIterator<Item = &'a str>) -> Vec<ComponentAlarmSummary> {
        let mut by_component: std::collections::HashMap<&str, Vec<&AlarmRecord>> = Default::default();
        for r in self.records.values().filter(|r| !r.affects.is_empty()) {
            for c in &r.affects {
                if *c != r.component {
                    by_component.entry(c.as_str()).or_default().push(r);
                }
            }
        }
        components.into_iter().map(|c| self.current_with(c, by_component.get(c).cloned().unwrap_or_default())).collect()
    }

    /// A component's summary given the sensor records that affect it.
    fn current_with(&self, component: &str, sensors: Vec<&AlarmRecord>) -> ComponentAlarmSummary {
        // Keys are `component/index`, so one component's records are a
        // contiguous range of the map (the equality test keeps a component
        // named `A/B` out of `A`'s summary).
        let prefix = format!("{component}/");
        let mut alarms: Vec<AlarmRecord> = self
            .records
            .range(prefix.clone()..)
            .take_while(|(k, _)| k.starts_with(&prefix))
            .map(|(_, r)| r)
            .filter(|r| r.component == component)
            .cloned()
            .collect();
        let unit = alarms.iter().find(|r| r.affects.is_empty()).map(|r| r.unit.clone());
        // The sensor alarms of the tags it reads (after its own).
        alarms.extend(sensors.into_iter().cloned());
        let unit = unit.or_else(|| alarms.first().map(|r| r.unit.clone())).unwrap_or_default();
        summarise(component, &unit, alarms)
    }

    /// The record of `component/index`, created in `normal` if new; a
    /// shelve that has ended by `time_ms` is lifted first (its event goes
    /// to `events`).
    fn entry(
        &mut self,
        component: &str,
        unit: &str,
        index: AlarmIndex,
        time_ms: i64,
        events: &mut Vec<AlarmEvent>,
    ) -> &mut AlarmRecord {
        let config = &self.config;
        let rules = &self.suppression;
        let rec = self.records.entry(key(component, index)).or_insert_with(|| {
            let mut r = AlarmRecord::new(component, unit, index, time_ms);
            r.rationale = Some(config.rationale(component, index));
            if let Some(rule) = rules.iter().find(|x| x.matches(&r)) {
                r.suppressed_by = Some(rule.name.clone());
                r.state = AlarmState::Suppressed;
            }
            r
        });
        rec.unit = unit.to_string();
        rec.updated_ms = time_ms;
        if let Some(e) = expire(rec, time_ms) {
            events.push(e);
        }
        rec
    }

    fn expire_keys(&mut self, keys: &[String], now_ms: i64) -> Vec<AlarmEvent> {
        keys.iter().filter_map(|k| self.records.get_mut(k).and_then(|r| expire(r, now_ms))).collect()
    }

    /// Keys a command target addresses (see [`Scope`]).
    fn targets_of(&self, target: &AlarmTarget) -> Result<Vec<String>, AlarmError> {
        let pick = |f: &dyn Fn(&AlarmRecord) -> bool| -> Vec<String> {
            self.records
                .iter()
                .filter(|(_, r)| f(r) && target.index.is_none_or(|i| r.index == i))
                .map(|(k, _)| k.clone())
                .collect()
        };
        let name = target.component.as_str();
        match target.scope {
            Scope::Component => self.targets(name, target.index),
            Scope::Tag => {
                let keys = pick(&|r| r.component == name && r.index.is_sensor());
                if keys.is_empty() {
                    Err(AlarmError::UnknownTag { tag: name.to_string() })
                } else {
                    Ok(keys)
                }
            }
            Scope::Unit => {
                let keys = pick(&|r| r.in_unit(name));
                if keys.is_empty() {
                    Err(AlarmError::UnknownUnit { unit: name.to_string() })
                } else {
                    Ok(keys)
                }
            }
            Scope::All => Ok(pick(&|_| true)),
        }
    }

    /// Keys addressed by a command: an exact key, a component and index, or
    /// all of a component's alarms (its own and those of the tags it reads).
    fn targets(&self, key_or_component: &str, index: Option<AlarmIndex>) -> Result<Vec<String>, AlarmError> {
        if let Some(rec) = self.records.get(key_or_component) {
            return match index {
                Some(i) if i != rec.index => {
                    Err(AlarmError::UnknownAlarm { key: format!("{key_or_component}/{i}"), known: vec![] })
                }
                _ => Ok(vec![key_or_component.to_string()]),
            };
        }
        let of_component: Vec<String> =
            self.records.iter().filter(|(_, r)| r.concerns(key_or_component)).map(|(k, _)| k.clone()).collect();
        match index {
            Some(i) => {
                let k = key(key_or_component, i);
                if self.records.contains_key(&k) {
                    return Ok(vec![k]);
                }
                // A sensor index of a component: the alarms of the tags it reads.
                let of_tags: Vec<String> = of_component
                    .iter()
                    .filter(|k| self.records.get(*k).is_some_and(|r| r.index == i && r.component != key_or_component))
                    .cloned()
                    .collect();
                if !of_tags.is_empty() {
                    Ok(of_tags)
                } else {
                    Err(AlarmError::UnknownAlarm { key: k, known: of_component })
                }
            }
            None if of_component.is_empty() => {
                Err(AlarmError::UnknownComponent { component: key_or_component.to_string() })
            }
            None => Ok(of_component),
        }
    }
}

/// A summary over some records.
fn summarise(name: &str, unit: &str, alarms: Vec<AlarmRecord>) -> ComponentAlarmSummary {
    let (alerts, active): (Vec<&AlarmRecord>, Vec<&AlarmRecord>) =
        alarms.iter().filter(|r| r.is_active() && !r.state.is_held()).partition(|r| r.is_engineering());
    ComponentAlarmSummary {
        component: name.to_string(),
        unit: unit.to_string(),
        worst_severity: active.iter().filter_map(|r| r.condition).max(),
        active: active.len(),
        worst_alert_severity: alerts.iter().filter_map(|r| r.condition).max(),
        alerts: alerts.len(),
        unacknowledged: alarms.iter().filter(|r| r.state.needs_acknowledge()).count(),
        shelved: alarms.iter().filter(|r| r.state == AlarmState::Shelved).count(),
        out_of_service: alarms.iter().filter(|r| r.state == AlarmState::OutOfService).count(),
        suppressed: alarms.iter().filter(|r| r.state == AlarmState::Suppressed).count(),
        updated: alarms.iter().map(|r| r.updated_ms).max().map(rfc3339_ms),
        alarms,
        caution: crate::CAUTION,
    }
}

/// Lift a shelve that has ended by `now_ms`.
fn expire(rec: &mut AlarmRecord, now_ms: i64) -> Option<AlarmEvent> {
    if rec.state == AlarmState::OutOfService {
        let until = rec.out_of_service.as_ref()?.until_ms;
        return (now_ms >= until).then(|| {
            let how = format!("out of service ended at {}", rfc3339_ms(until));
            lift_shelve(rec, Transition::ReturnedToService, &how, now_ms)
        });
    }
    let until = rec.shelve.as_ref().filter(|_| rec.state == AlarmState::Shelved)?.until_ms;
    (now_ms >= until)
        .then(|| lift_shelve(rec, Transition::ShelveExpired, &format!("shelve ended at {}", rfc3339_ms(until)), now_ms))
}

/// Return a shelved record to the state its condition implies.
fn lift_shelve(rec: &mut AlarmRecord, transition: Transition, how: &str, time_ms: i64) -> AlarmEvent {
    if transition == Transition::ReturnedToService {
        rec.out_of_service = None;
    } else {
        rec.shelve = None;
    }
    rec.since_ms = time_ms;
    rec.updated_ms = time_ms;
    let tail = match rec.condition {
        _ if rec.suppressed_by.is_some() => {
            rec.state = AlarmState::Suppressed;
            format!("still suppressed ({})", rec.suppressed_by.as_deref().unwrap_or_default())
        }
        Some(s) if rec.is_engineering() => {
            rec.state = AlarmState::Alert;
            format!("the condition is active at {s} (engineering alert)")
        }
        Some(s) => {
            rec.state = AlarmState::Unacknowledged;
            rec.acknowledged_by = None;
            rec.acknowledged_ms = None;
            format!("the condition is active at {s}, awaiting acknowledge")
        }
        None => {
            rec.state = AlarmState::Normal;
            "the condition is clear".to_string()
        }
    };
    let msg = format!("{} {} {how}; {tail}", rec.component, rec.index.label());
    AlarmEvent::of(rec, transition, rec.condition, rec.threshold, time_ms, msg)
}

/// Move a record to the severity `new` now implied (value already set).
fn update(rec: &mut AlarmRecord, new: Option<Severity>, judge: Judge<'_>, time_ms: i64) -> Option<AlarmEvent> {
    let before = rec.condition;
    rec.condition = new;
    if rec.state.is_held() {
        // Followed silently; the severity shown is the condition's.
        rec.severity = new;
        rec.threshold = new.and_then(|s| judge.level(s));
        if rec.state != AlarmState::Suppressed {
            return None;
        }
        // Suppressed by a plant state: recorded, not annunciated.
        let transition = match (before, new) {
            (None, Some(_)) => Transition::Activated,
            (Some(o), Some(n)) if n > o => Transition::Escalated,
            (Some(_), None) => Transition::Cleared,
            _ => return None,
        };
        let sev = new.or(before).expect("a change has a severity");
        let by = rec.suppressed_by.clone().unwrap_or_default();
        let what = match transition {
            Transition::Cleared => "cleared".to_string(),
            t => format!("{} at {sev}", t.name()),
        };
        let msg = format!(
            "{} {} {what} while suppressed ({by}): recorded, not annunciated",
            rec.component,
            rec.index.label()
        );
        return Some(AlarmEvent::of(rec, transition, Some(sev), judge.level(sev), time_ms, msg));
    }
    let shown = matches!(rec.state, AlarmState::Unacknowledged | AlarmState::Acknowledged | AlarmState::Alert);
    let engineering = rec.is_engineering();
    let old = rec.severity.filter(|_| shown);
    let transition = match (old, new) {
        (None, None) => return None,
        (None, Some(_)) => Transition::Activated,
        (Some(o), Some(s)) if s > o => Transition::Escalated,
        (Some(o), Some(s)) if s < o => Transition::SteppedDown,
        (Some(_), Some(_)) => return None,
        (Some(_), None) => Transition::Cleared,
    };
    let was = rec.state;
    rec.state = match (transition, was) {
        // An engineering alert is delivered and recorded, never asks for
        // an acknowledge, and is gone from view once clear.
        (Transition::Activated | Transition::Escalated, _) if engineering => AlarmState::Alert,
        (Transition::Activated | Transition::Escalated, _) => AlarmState::Unacknowledged,
        (Transition::Cleared, AlarmState::Unacknowledged) => AlarmState::RtnUnacknowledged,
        // A latching alarm asks for an acknowledge after it clears.
        (Transition::Cleared, AlarmState::Acknowledged) if rec.is_latching() => AlarmState::RtnUnacknowledged,
        (Transition::Cleared, _) => AlarmState::Normal,
        _ => was,
    };
    if rec.state != was {
        rec.since_ms = time_ms;
    }
    if rec.state == AlarmState::Unacknowledged && was != AlarmState::Unacknowledged {
        rec.acknowledged_by = None;
        rec.acknowledged_ms = None;
    }
    let (sev, threshold) = match new {
        Some(s) => (s, judge.level(s)),
        None => (old.expect("cleared from a severity"), rec.threshold),
    };
    let msg = message(rec, transition, old, sev, threshold, judge);
    match transition {
        Transition::Cleared if rec.state == AlarmState::Normal => {
            rec.severity = None;
            rec.threshold = None;
        }
        Transition::Cleared => {}
        _ => {
            rec.severity = Some(sev);
            rec.threshold = threshold;
        }
    }
    Some(AlarmEvent::of(rec, transition, Some(sev), threshold, time_ms, msg))
}

/// Plain words for a value transition.
fn message(
    rec: &AlarmRecord,
    transition: Transition,
    old: Option<Severity>,
    sev: Severity,
    threshold: Option<f64>,
    judge: Judge<'_>,
) -> String {
    let (c, i) = (&rec.component, rec.index);
    let head = format!("{c} {}", i.label());
    let detail = rec.detail.as_deref().map(|d| format!(": {d}")).unwrap_or_default();
    let deadband = match judge {
        Judge::Levels { deadband, .. } => Some(deadband),
        Judge::Condition => None,
    };
    let lvl = |l: Option<f64>| l.map_or("(no level)".to_string(), |l| i.display(l));
    let (reach, back) = match i.direction() {
        Direction::HigherIsWorse => ("reached", "below"),
        Direction::LowerIsWorse => ("fell to or below", "above"),
    };
    let value = i.display(rec.value);
    let awaiting = if rec.state == AlarmState::RtnUnacknowledged { ", awaiting acknowledge" } else { "" };
    match (transition, deadband) {
        (Transition::Activated, None) => format!("{head}{detail}"),
        (Transition::Escalated, None) => format!("{head} rose to {sev}{detail}"),
        (Transition::SteppedDown, None) => format!("{head} eased to {sev}{detail}"),
        (Transition::Cleared, None) => format!("{head} cleared{awaiting}{detail}"),
        (Transition::Activated, Some(_)) => {
            format!("{head} {value} {reach} the {sev} level {}", lvl(threshold))
        }
        (Transition::Escalated, Some(_)) => {
            format!(
                "{head} {value} {reach} the {sev} level {} (was {})",
                lvl(threshold),
                old.map_or("clear", |o| o.name())
            )
        }
        (Transition::SteppedDown | Transition::Cleared, Some(db)) => {
            let o = old.expect("stepping from a severity");
            let old_level = judge.level(o).or(rec.threshold);
            let band =
                old_level.map_or("its deadband".to_string(), |l| format!("its deadband {}", i.display(db.width(l))));
            let moved = format!("{head} {value} is back {back} the {o} level {} by more than {band}", lvl(old_level));
            if transition == Transition::Cleared {
                format!("{moved}; cleared{awaiting}")
            } else {
                format!("{moved}; now at the {sev} level {}", lvl(threshold))
            }
        }
        _ => format!("{head} {}", transition.name()),
    }
}
