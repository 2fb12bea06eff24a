//! Alarms with ISA-18.2 states: threshold alarms on the ledger indices
//! (creep life fraction, creep strain, wear index, metal temperature above
//! design, damage rate, projected hours to the critical life fraction) and
//! condition alarms for sensor and service faults.
//!
//! Pure code, like the engine: no I/O, no clocks, no tasks. The shell feeds
//! the [`AlarmBook`] ledgers, conditions and operator commands with event
//! time in milliseconds and publishes the [`AlarmEvent`]s it returns (MQTT
//! event topic, database) and [`AlarmBook::current`] (retained per-component
//! state topic); it stores [`AlarmBook::records`] so alarms survive restarts.
//!
//! * [`index`]: what is alarmed, which way is worse, the severities;
//! * [`deadband`]: levels with hysteresis;
//! * [`delay`]: on-delay and off-delay in event time;
//! * [`rational`]: classes (operator alarm, engineering alert),
//!   consequence, corrective action, time to respond and priority;
//! * [`record`]: one alarm's durable record and the ISA-18.2 states;
//! * [`book`]: the state machine over all records;
//! * [`event`]: events as JSON and as line-protocol points;
//! * [`command`]: acknowledge / shelve / unshelve command messages.
//!
//! Levels are defaults or configuration, not limits: every event and
//! summary carries [`crate::CAUTION`].

pub mod attention;
pub mod book;
pub mod command;
pub mod deadband;
pub mod delay;
pub mod event;
pub mod index;
pub mod kpi;
pub mod rational;
pub mod record;

#[cfg(test)]
mod tests;
#[cfg(test)]
mod tests_isa;

pub use book::{
    AlarmBook, AlarmConfig, ComponentAlarmSummary, PlantState, SuppressionRule, MAX_OUT_OF_SERVICE_H, MAX_SHELVE_H,
};
pub use command::{carries_token, parse_command, tokens_match, AlarmCommand, AlarmTarget, Scope};
pub use deadband::Deadband;
pub use delay::Delay;
pub use event::{AlarmEvent, Transition};
pub use index::{AlarmIndex, Direction, Severity};
pub use rational::{AlarmClass, Consequence, Priority, Rationale, RationaleSettings};
pub use record::{AlarmRecord, AlarmState, Shelve};

/// Errors of alarm commands and look-ups, worded for the operator who sent
/// the command.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum AlarmError {
    #[error("no alarm \"{key}\" in the alarm book{}", known_list(.known))]
    UnknownAlarm { key: String, known: Vec<String> },
    #[error("no alarms recorded for component \"{component}\" (check the component name, or give a full key component/index)")]
    UnknownComponent { component: String },
    #[error("no sensor alarms recorded for tag \"{tag}\" (check the tag name; a tag has sensor alarms once it is read by a component)")]
    UnknownTag { tag: String },
    #[error("no alarms recorded for plant unit \"{unit}\" (check the unit name)")]
    UnknownUnit { unit: String },
    #[error("cannot shelve \"{target}\" until {until}: that is not after the command time {now}")]
    ShelveNotAhead { target: String, until: String, now: String },
    #[error("cannot shelve \"{target}\" for {hours:.1} h: at most {max_h} h is allowed")]
    ShelveTooLong { target: String, hours: f64, max_h: f64 },
    #[error("alarm command is not a valid JSON object: {problem}")]
    CommandJson { problem: String },
    #[error("alarm command field \"{field}\": {problem}")]
    Command { field: String, problem: String },
}

fn known_list(known: &[String]) -> String {
    if known.is_empty() {
        String::new()
    } else {
        format!("; this component has {}", known.join(", "))
    }
}
