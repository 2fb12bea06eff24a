//! Alarm rationalisation: the class of an alarm (operator alarm or
//! engineering alert), what happens if nobody acts (consequence), what to
//! do (corrective action), how soon (time to respond), and the priority
//! that follows from consequence and time to respond.
//!
//! **Classes.** An *operator alarm* asks for an operator action within a
//! stated time; it is annunciated and must be acknowledged (ISA-18.2). An
//! *engineering alert* is for the integrity engineer: it is delivered (event
//! topic, database) and recorded (journal), but it never asks for an
//! acknowledge and does not count as standing on the operator's console.
//! Accumulated and projected indices (creep life fraction, creep strain,
//! wear index, damage rate, hours to critical) are engineering alerts by
//! default: no operator action in minutes changes them, and a life
//! fraction past its level can never clear, so as an operator alarm it
//! would stand for ever (a standing alarm is bad performance, common
//! practice). Metal temperature over design, sensor faults and service
//! health are operator alarms. `[alarms.classes]` changes it per index.
//!
//! **Priority** from consequence and time to respond, by this matrix (the
//! form alarm-management practice uses, ISA-18.2 / EEMUA 191, common
//! practice; the cells are this program's choice, the plant's alarm
//! philosophy decides):
//!
//! | time to respond | minor | moderate | major | severe |
//! |---|---|---|---|---|
//! | up to 5 min | medium | high | urgent | urgent |
//! | up to 15 min | low | medium | high | urgent |
//! | up to 30 min | low | medium | high | high |
//! | longer | low | low | medium | high |
//!
//! Defaults per index ([`Rationale::default_for`]) are conservative
//! starting points with their reasoning in README ("Rationalisation");
//! `[alarms.rationale.INDEX]` sets them per index and
//! `[alarms.component_rationale."NAME".INDEX]` per component or tag, field
//! by field.

use super::index::AlarmIndex;
use serde::{Deserialize, Serialize};
use std::fmt;

/// Operator alarm or engineering alert.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AlarmClass {
    #[default]
    Operator,
    Engineering,
}

impl AlarmClass {
    pub fn name(self) -> &'static str {
        match self {
            AlarmClass::Operator => "operator",
            AlarmClass::Engineering => "engineering",
        }
    }

    /// The built-in class of an index (see the module notes).
    pub fn default_for(index: AlarmIndex) -> AlarmClass {
        match index {
            AlarmIndex::CreepLifeFraction
            | AlarmIndex::CreepStrain
            | AlarmIndex::WearIndex
            | AlarmIndex::DamageRate
            | AlarmIndex::HoursToCritical
            | AlarmIndex::FatigueUsage
            | AlarmIndex::CreepFatigueIndex
            | AlarmIndex::ReplicaBounds => AlarmClass::Engineering,
            _ => AlarmClass::Operator,
        }
    }
}

/// What happens if nobody acts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Consequence {
    Minor,
    Moderate,
    Major,
    Severe,
}

/// Priority of an alarm, lowest first.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Priority {
    Low,
    Medium,
    High,
    Urgent,
}

impl Priority {
    pub fn name(self) -> &'static str {
        match self {
            Priority::Low => "low",
            Priority::Medium => "medium",
            Priority::High => "high",
            Priority::Urgent => "urgent",
        }
    }

    /// The matrix of the module notes.
    pub fn from(consequence: Consequence, time_to_respond_min: f64) -> Priority {
        use Consequence::*;
        use Priority::*;
        let row = if time_to_respond_min <= 5.0 {
            [Medium, High, Urgent, Urgent]
        } else if time_to_respond_min <= 15.0 {
            [Low, Medium, High, Urgent]
        } else if time_to_respond_min <= 30.0 {
            [Low, Medium, High, High]
        } else {
            [Low, Low, Medium, High]
        };
        row[match consequence {
            Minor => 0,
            Moderate => 1,
            Major => 2,
            Severe => 3,
        }]
    }
}

impl fmt::Display for Priority {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// Rationalisation of one index, as configured (every field optional: the
/// default fills what is not given).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RationaleSettings {
    pub class: Option<AlarmClass>,
    pub consequence: Option<Consequence>,
    pub corrective_action: Option<String>,
    pub time_to_respond_min: Option<f64>,
    /// Latch: once active, ask for an acknowledge after clearing even if
    /// acknowledged while active (default off).
    pub latching: Option<bool>,
}

/// The rationalisation an alarm carries: in its record, every event, the
/// journal and the database.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Rationale {
    pub class: AlarmClass,
    pub consequence: Consequence,
    pub corrective_action: String,
    /// Minutes within which the action must start.
    pub time_to_respond_min: f64,
    /// From consequence and time to respond ([`Priority::from`]).
    pub priority: Priority,
    /// See [`RationaleSettings::latching`].
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub latching: bool,
}

impl Rationale {
    /// The built-in rationalisation of an index (README "Rationalisation").
    pub fn default_for(index: AlarmIndex) -> Rationale {
        use Consequence::*;
        let (consequence, minutes, action) = match index {
            AlarmIndex::MetalTemperatureOverDesign => (
                Moderate,
                30.0,
                "bring the metal temperature back below design (firing rate, attemperation, load); check the \
                 thermocouple against its neighbours",
            ),
            AlarmIndex::SensorStale | AlarmIndex::SensorOutOfRange | AlarmIndex::SensorBadQuality => (
                Moderate,
                60.0,
                "check the transmitter, its wiring and the data path; meanwhile the ledger fills the gap by its gap \
                 policy and counts unmonitored hours",
            ),
            AlarmIndex::ServiceHealth => {
                (Major, 30.0, "restore the data feed or the service: while it lasts no part is monitored")
            }
            AlarmIndex::CreepLifeFraction | AlarmIndex::CreepStrain => (
                Major,
                7.0 * 24.0 * 60.0,
                "integrity engineer: review the part's remaining life and plan an inspection (replica, hardness, \
                 diameter) by the plant's code",
            ),
            AlarmIndex::FatigueUsage | AlarmIndex::CreepFatigueIndex => (
                Major,
                7.0 * 24.0 * 60.0,
                "integrity engineer: review the cycles counted at the assessed location and plan a surface \
                 crack inspection (magnetic particle, dye penetrant or ultrasonic) by the plant's code",
            ),
            AlarmIndex::ReplicaBounds => (
                Major,
                7.0 * 24.0 * 60.0,
                "integrity engineer: the replica class and the ledger disagree; review the finding and the \
                 ledger's inputs, and decide whether to re-base the life fraction (lifeledger inspection ... --rebase)",
            ),
            AlarmIndex::WearIndex => (
                Major,
                7.0 * 24.0 * 60.0,
                "integrity engineer: plan a wall-thickness or contact inspection at the next opportunity",
            ),
            AlarmIndex::DamageRate | AlarmIndex::HoursToCritical => (
                Moderate,
                24.0 * 60.0,
                "integrity engineer: review the operating conditions driving damage and the inspection plan",
            ),
        };
        Rationale {
            class: AlarmClass::default_for(index),
            consequence,
            corrective_action: action.to_string(),
            time_to_respond_min: minutes,
            priority: Priority::from(consequence, minutes),
            latching: false,
        }
    }

    /// This rationalisation with the fields `s` sets replaced.
    pub fn with(mut self, s: &RationaleSettings) -> Rationale {
        if let Some(c) = s.class {
            self.class = c;
        }
        if let Some(c) = s.consequence {
            self.consequence = c;
        }
        if let Some(a) = &s.corrective_action {
            self.corrective_action = a.clone();
        }
        if let Some(m) = s.time_to_respond_min {
            self.time_to_respond_min = m;
        }
        if let Some(l) = s.latching {
            self.latching = l;
        }
        self.priority = Priority::from(self.consequence, self.time_to_respond_min);
        self
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn priority_rises_with_consequence_and_falls_with_time() {
        // The matrix is monotonic: a worse consequence or less time never
        // lowers the priority (the shape every rationalisation matrix has,
        // common practice).
        let cons = [Consequence::Minor, Consequence::Moderate, Consequence::Major, Consequence::Severe];
        let times = [1.0, 5.0, 10.0, 15.0, 20.0, 30.0, 60.0, 1e4];
        for (i, c) in cons.iter().enumerate() {
            for (j, t) in times.iter().enumerate() {
                let p = Priority::from(*c, *t);
                if i > 0 {
                    assert!(Priority::from(cons[i - 1], *t) <= p, "{c:?} {t}");
                }
                if j > 0 {
                    assert!(Priority::from(*c, times[j - 1]) >= p, "{c:?} {t}");
                }
            }
        }
        assert_eq!(Priority::from(Consequence::Severe, 2.0), Priority::Urgent);
        assert_eq!(Priority::from(Consequence::Minor, 600.0), Priority::Low);
    }

    #[test]
    fn accumulated_indices_are_engineering_alerts_by_default() {
        for i in AlarmIndex::ALL {
            let eng = matches!(
                i,
                AlarmIndex::CreepLifeFraction
                    | AlarmIndex::CreepStrain
                    | AlarmIndex::WearIndex
                    | AlarmIndex::DamageRate
                    | AlarmIndex::HoursToCritical
                    | AlarmIndex::FatigueUsage
                    | AlarmIndex::CreepFatigueIndex
                    | AlarmIndex::ReplicaBounds
            );
            assert_eq!(Rationale::default_for(i).class == AlarmClass::Engineering, eng, "{i}");
        }
        let r = Rationale::default_for(AlarmIndex::SensorStale)
            .with(&RationaleSettings { time_to_respond_min: Some(5.0), ..Default::default() });
        assert_eq!((r.consequence, r.priority), (Consequence::Moderate, Priority::High));
    }
}
