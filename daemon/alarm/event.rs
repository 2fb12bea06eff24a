//! Alarm events: what changed, in plain words, for the MQTT event topic
//! (JSON), the time-series database (`alarm_event` points) and the store's
//! alarm journal (the same JSON, read back at start-up).
//!
//! Every event carries [`crate::CAUTION`]: the levels it compares against
//! are defaults or configuration, and only the plant's governing code and
//! a responsible engineer can make them limits.

use super::index::{AlarmIndex, Severity};
use super::record::{AlarmRecord, AlarmState};
use crate::event_time::rfc3339_ms;
use crate::lineproto::Point;
use serde::{Deserialize, Serialize};

/// What happened to an alarm.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Transition {
    /// The condition became active (from normal or rtn_unacknowledged).
    Activated,
    /// A higher severity was reached while active; needs a new acknowledge.
    Escalated,
    /// A lower severity while still active (past the deadband); the
    /// acknowledge state is kept.
    SteppedDown,
    /// The condition cleared (past the deadband).
    Cleared,
    /// An operator acknowledged.
    Acknowledged,
    /// An operator shelved the alarm.
    Shelved,
    /// An operator unshelved the alarm.
    Unshelved,
    /// The shelve time ran out.
    ShelveExpired,
    /// A person removed the alarm from service.
    RemovedFromService,
    /// Back in service, by command or because its end was reached.
    ReturnedToService,
    /// A plant state began to suppress the alarm (emitted for an alarm that
    /// was not normal; a normal one is suppressed silently).
    Suppressed,
    /// The plant state ended; emitted when the condition is active (the
    /// alarm is annunciated now) or the alarm was not normal.
    Unsuppressed,
}

impl Transition {
    /// Stable snake_case name.
    pub fn name(self) -> &'static str {
        match self {
            Transition::Activated => "activated",
            Transition::Escalated => "escalated",
            Transition::SteppedDown => "stepped_down",
            Transition::Cleared => "cleared",
            Transition::Acknowledged => "acknowledged",
            Transition::Shelved => "shelved",
            Transition::Unshelved => "unshelved",
            Transition::ShelveExpired => "shelve_expired",
            Transition::RemovedFromService => "removed_from_service",
            Transition::ReturnedToService => "returned_to_service",
            Transition::Suppressed => "suppressed",
            Transition::Unsuppressed => "unsuppressed",
        }
    }
}

/// One alarm event.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AlarmEvent {
    /// Durable sequence number, one more than the event before it (given
    /// by the service when the event is committed; consumers detect a
    /// missed event by a gap).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub seq: Option<u64>,
    pub component: String,
    pub unit: String,
    pub index: AlarmIndex,
    pub transition: Transition,
    /// Severity concerned (the cleared one for `cleared`); `None` when no
    /// severity applies (for example unshelving an alarm that is clear).
    pub severity: Option<Severity>,
    /// State after the event.
    pub state: AlarmState,
    /// Latest value in the index's unit; `None` when not finite (an
    /// infinite projection).
    pub value: Option<f64>,
    /// Level of `severity`; `None` for conditions.
    pub threshold: Option<f64>,
    /// Event time, RFC 3339 UTC.
    pub time: String,
    pub time_ms: i64,
    pub message: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub by: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub reason: Option<String>,
    /// End of the shelve, RFC 3339, for `shelved` events.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub shelved_until: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub detail: Option<String>,
    /// For a sensor alarm (`component` is then the tag): the components
    /// whose ledgers read the tag.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub affects: Vec<String>,
    /// Class, consequence, corrective action, time to respond and
    /// priority of the alarm (absent in events recorded before them).
    #[serde(default, skip_serializing_if = "Option::is_none", flatten)]
    pub rationale: Option<super::rational::Rationale>,
    /// Always this build's [`crate::CAUTION`], also for an event read back
    /// from the journal.
    #[serde(skip_deserializing, default = "caution")]
    pub caution: &'static str,
}

fn caution() -> &'static str {
    crate::CAUTION
}

impl AlarmEvent {
    /// An event from a record as it stands after the transition.
    pub(crate) fn of(
        rec: &AlarmRecord,
        transition: Transition,
        severity: Option<Severity>,
        threshold: Option<f64>,
        time_ms: i64,
        message: String,
    ) -> AlarmEvent {
        AlarmEvent {
            seq: None,
            component: rec.component.clone(),
            unit: rec.unit.clone(),
            index: rec.index,
            transition,
            severity,
            state: rec.state,
            value: rec.value.is_finite().then_some(rec.value),
            threshold,
            time: rfc3339_ms(time_ms),
            time_ms,
            message,
            by: None,
            reason: None,
            shelved_until: None,
            detail: rec.detail.clone(),
            affects: rec.affects.clone(),
            rationale: rec.rationale.clone(),
            caution: crate::CAUTION,
        }
    }

    /// The key of the alarm this event is about.
    pub fn key(&self) -> String {
        super::record::key(&self.component, self.index)
    }

    /// The event as one JSON object.
    pub fn to_json(&self) -> String {
        serde_json::to_string(self).expect("an alarm event always serialises")
    }

    /// The `alarm_event` database point: tags plant, unit, component,
    /// index, severity, state, class, priority; fields value, threshold,
    /// message, transition, consequence, corrective_action,
    /// time_to_respond_min and, for a sensor alarm, `affects` (component
    /// names, comma-separated).
    pub fn to_point(&self, plant: &str) -> Point {
        let mut p = Point::new(crate::series_model::ALARM_EVENT.name, self.time_ms.saturating_mul(1_000_000))
            .tag("plant", plant)
            .tag("unit", &self.unit)
            .tag("component", &self.component)
            .tag("index", self.index.name())
            .tag("severity", self.severity.map_or("", |s| s.name()))
            .tag("state", self.state.name());
        if let Some(v) = self.value {
            p = p.float("value", v);
        }
        if let Some(t) = self.threshold {
            p = p.float("threshold", t);
        }
        p = p.string("message", &self.message).string("transition", self.transition.name());
        if let Some(n) = self.seq {
            p = p.int("seq", n as i64);
        }
        if let Some(r) = &self.rationale {
            p = p
                .tag("class", r.class.name())
                .tag("priority", r.priority.name())
                .string("consequence", consequence_name(r.consequence))
                .string("corrective_action", &r.corrective_action)
                .float("time_to_respond_min", r.time_to_respond_min);
        }
        if !self.affects.is_empty() {
            p = p.string("affects", &self.affects.join(","));
        }
        p
    }
}

fn consequence_name(c: super::rational::Consequence) -> &'static str {
    use super::rational::Consequence::*;
    match c {
        Minor => "minor",
        Moderate => "moderate",
        Major => "major",
        Severe => "severe",
    }
}
