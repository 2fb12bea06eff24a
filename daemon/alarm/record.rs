//! One alarm's durable record (a component's index, or a tag's sensor
//! fault): its ISA-18.2 state, what its condition
//! implies now, and who acknowledged or shelved it.
//!
//! The record keeps two things apart: `condition`, what the latest value
//! implies (kept up to date even while shelved), and `state`, what the
//! operator sees. The state machine lives in [`super::book`]; this file only
//! holds the data, serialisable so the store can keep it as JSON keyed by
//! [`AlarmRecord::key`] and a restart resumes exactly where it stopped.

use super::index::{AlarmIndex, Severity};
use serde::{Deserialize, Serialize};

/// ISA-18.2 alarm states.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AlarmState {
    /// Condition clear, nothing to acknowledge.
    Normal,
    /// Condition active, not yet acknowledged.
    Unacknowledged,
    /// Condition active, acknowledged.
    Acknowledged,
    /// Condition cleared before anyone acknowledged it.
    RtnUnacknowledged,
    /// Suppressed by an operator until a time or until unshelved.
    Shelved,
    /// Condition active on an engineering alert: delivered and recorded,
    /// no acknowledge asked, not on the operator's console.
    Alert,
    /// Removed from service (maintenance, repair) by a person, with a
    /// reason and an end: followed silently.
    OutOfService,
    /// Suppressed by design while a plant state holds (for example the
    /// unit offline): followed, its changes recorded, not annunciated.
    Suppressed,
}

impl AlarmState {
    /// Stable snake_case name.
    pub fn name(self) -> &'static str {
        match self {
            AlarmState::Normal => "normal",
            AlarmState::Unacknowledged => "unacknowledged",
            AlarmState::Acknowledged => "acknowledged",
            AlarmState::RtnUnacknowledged => "rtn_unacknowledged",
            AlarmState::Shelved => "shelved",
            AlarmState::Alert => "alert",
            AlarmState::OutOfService => "out_of_service",
            AlarmState::Suppressed => "suppressed",
        }
    }

    /// Whether the alarm is held silent (shelved, out of service or
    /// suppressed): its condition is followed, nothing is annunciated.
    pub fn is_held(self) -> bool {
        matches!(self, AlarmState::Shelved | AlarmState::OutOfService | AlarmState::Suppressed)
    }

    /// Whether an operator still has to acknowledge.
    pub fn needs_acknowledge(self) -> bool {
        matches!(self, AlarmState::Unacknowledged | AlarmState::RtnUnacknowledged)
    }
}

/// Who shelved an alarm, why and until when.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Shelve {
    /// Event time (ms) the shelve ends.
    pub until_ms: i64,
    pub by: String,
    pub reason: String,
    /// Event time (ms) it was shelved.
    pub since_ms: i64,
}

/// One alarm: a component and an index.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct AlarmRecord {
    pub component: String,
    pub unit: String,
    pub index: AlarmIndex,
    pub state: AlarmState,
    /// What the latest value implies after deadband (`None`: clear).
    pub condition: Option<Severity>,
    /// The severity last annunciated: while active the current one; in
    /// `rtn_unacknowledged` the one that cleared unacknowledged.
    pub severity: Option<Severity>,
    /// Latest value (index unit; 1 or 0 for conditions).
    #[serde(with = "crate::engine::serde_inf")]
    pub value: f64,
    /// Level of `severity`, if it has one (conditions have none).
    pub threshold: Option<f64>,
    /// Words from the caller for condition alarms (which tag, what fault).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub detail: Option<String>,
    /// Event time (ms) the record entered its state.
    pub since_ms: i64,
    /// Event time (ms) of the latest evaluation or command.
    pub updated_ms: i64,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub acknowledged_by: Option<String>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub acknowledged_ms: Option<i64>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub shelve: Option<Shelve>,
    /// For a sensor alarm (one per tag: `component` is then the tag's
    /// name): the components whose ledgers read the tag, sorted. Empty for
    /// a component's own alarms.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub affects: Vec<String>,
    /// A change of condition waiting for its on- or off-delay.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub pending: Option<super::delay::Pending>,
    /// Class, consequence, corrective action, time to respond, priority.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub rationale: Option<super::rational::Rationale>,
    /// Who removed it from service, why and until when.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub out_of_service: Option<Shelve>,
    /// The plant state suppressing it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub suppressed_by: Option<String>,
}

impl AlarmRecord {
    /// A record in `normal` that has not seen a value yet.
    pub fn new(component: &str, unit: &str, index: AlarmIndex, time_ms: i64) -> AlarmRecord {
        AlarmRecord {
            component: component.to_string(),
            unit: unit.to_string(),
            index,
            state: AlarmState::Normal,
            condition: None,
            severity: None,
            value: f64::NAN,
            threshold: None,
            detail: None,
            since_ms: time_ms,
            updated_ms: time_ms,
            acknowledged_by: None,
            acknowledged_ms: None,
            shelve: None,
            affects: vec![],
            pending: None,
            rationale: None,
            out_of_service: None,
            suppressed_by: None,
        }
    }

    /// The store key: `component/index`.
    pub fn key(&self) -> String {
        key(&self.component, self.index)
    }

    /// Whether the condition is active.
    pub fn is_active(&self) -> bool {
        self.condition.is_some()
    }

    /// Whether the alarm latches: once active it asks for an acknowledge
    /// after it clears, even if acknowledged while active.
    pub fn is_latching(&self) -> bool {
        self.rationale.as_ref().is_some_and(|r| r.latching)
    }

    /// Whether the record is an engineering alert (no acknowledge asked).
    pub fn is_engineering(&self) -> bool {
        self.rationale.as_ref().is_some_and(|r| r.class == super::rational::AlarmClass::Engineering)
    }

    /// Whether this record concerns `component`: its own alarm, or a
    /// sensor alarm of a tag the component reads.
    pub fn concerns(&self, component: &str) -> bool {
        self.component == component || self.affects.iter().any(|c| c == component)
    }

    /// Whether this record belongs to plant unit `unit` (a sensor alarm
    /// belongs to every unit of the components it affects).
    pub fn in_unit(&self, unit: &str) -> bool {
        self.unit.split(',').any(|u| u == unit)
    }
}

/// The key of a component's index: `component/index`.
pub fn key(component: &str, index: AlarmIndex) -> String {
    format!("{component}/{}", index.name())
}
