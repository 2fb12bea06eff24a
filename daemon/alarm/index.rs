//! What is alarmed and how badly: the alarm indices, their direction
//! (whether a higher or a lower value is worse) and the three severities.
//!
//! Index names are part of the external interface (MQTT topics, command
//! messages, database tags, the stored book), so [`AlarmIndex::name`] and
//! the serde names are the same snake_case words and must not change.

use serde::{Deserialize, Serialize};
use std::fmt;

/// How bad an active alarm is. Ordered: advisory < warning < critical.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Severity {
    Advisory,
    Warning,
    Critical,
}

impl Severity {
    /// All severities, lowest first.
    pub const ALL: [Severity; 3] = [Severity::Advisory, Severity::Warning, Severity::Critical];

    /// Stable lower-case name.
    pub fn name(self) -> &'static str {
        match self {
            Severity::Advisory => "advisory",
            Severity::Warning => "warning",
            Severity::Critical => "critical",
        }
    }

    /// This severity's level in `levels`, if set.
    pub fn level(self, levels: &crate::engine::plan::Levels) -> Option<f64> {
        match self {
            Severity::Advisory => levels.advisory,
            Severity::Warning => levels.warning,
            Severity::Critical => levels.critical,
        }
    }
}

impl fmt::Display for Severity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// Which way an index gets worse.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Direction {
    /// The alarm is reached when the value is at or above the level.
    HigherIsWorse,
    /// The alarm is reached when the value is at or below the level
    /// (projected hours: less time left is worse).
    LowerIsWorse,
}

/// One alarmed quantity of a component.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum AlarmIndex {
    /// Robinson creep life fraction (dimensionless, 1 = rupture on the curve).
    CreepLifeFraction,
    /// Accumulated Norton creep strain as a fraction (0.01 = 1 %).
    CreepStrain,
    /// Wear depth over allowable depth (dimensionless).
    WearIndex,
    /// Metal temperature minus design temperature, K.
    MetalTemperatureOverDesign,
    /// Recent life-fraction rate, 1/h.
    DamageRate,
    /// Projected hours to the critical life-fraction level at the recent
    /// rate. Lower is worse.
    HoursToCritical,
    /// A tag has had no fresh sample for longer than its trusted hold.
    SensorStale,
    /// A tag's samples fall outside its valid range.
    SensorOutOfRange,
    /// A tag's samples carry a bad quality code.
    SensorBadQuality,
    /// The service itself is unhealthy (for example the outbox is over quota).
    ServiceHealth,
    /// Miner's fatigue usage at the assessed location, the residue counted
    /// as half cycles (dimensionless, 1 = the design curve's life).
    FatigueUsage,
    /// Combined creep-fatigue damage index on the material's bilinear
    /// envelope (dimensionless, 1 = on the envelope).
    CreepFatigueIndex,
    /// An inspection's microstructure (replica) class bounds the life
    /// fraction, and the ledger's value lay outside those bounds at the
    /// finding: the engineer decides whether to re-base (a condition).
    ReplicaBounds,
}

impl AlarmIndex {
    /// Every index, in a fixed order.
    pub const ALL: [AlarmIndex; 13] = [
        AlarmIndex::CreepLifeFraction,
        AlarmIndex::CreepStrain,
        AlarmIndex::WearIndex,
        AlarmIndex::MetalTemperatureOverDesign,
        AlarmIndex::DamageRate,
        AlarmIndex::HoursToCritical,
        AlarmIndex::SensorStale,
        AlarmIndex::SensorOutOfRange,
        AlarmIndex::SensorBadQuality,
        AlarmIndex::ServiceHealth,
        AlarmIndex::FatigueUsage,
        AlarmIndex::CreepFatigueIndex,
        AlarmIndex::ReplicaBounds,
    ];

    /// Stable snake_case name (same as the serde name).
    pub fn name(self) -> &'static str {
        match self {
            AlarmIndex::CreepLifeFraction => "creep_life_fraction",
            AlarmIndex::CreepStrain => "creep_strain",
            AlarmIndex::WearIndex => "wear_index",
            AlarmIndex::MetalTemperatureOverDesign => "metal_temperature_over_design",
            AlarmIndex::DamageRate => "damage_rate",
            AlarmIndex::HoursToCritical => "hours_to_critical",
            AlarmIndex::SensorStale => "sensor_stale",
            AlarmIndex::SensorOutOfRange => "sensor_out_of_range",
            AlarmIndex::SensorBadQuality => "sensor_bad_quality",
            AlarmIndex::ServiceHealth => "service_health",
            AlarmIndex::FatigueUsage => "fatigue_usage",
            AlarmIndex::CreepFatigueIndex => "creep_fatigue_index",
            AlarmIndex::ReplicaBounds => "replica_bounds",
        }
    }

    /// The index with this name.
    pub fn from_name(name: &str) -> Option<AlarmIndex> {
        AlarmIndex::ALL.into_iter().find(|i| i.name() == name)
    }

    /// Words for messages.
    pub fn label(self) -> &'static str {
        match self {
            AlarmIndex::CreepLifeFraction => "creep life fraction",
            AlarmIndex::CreepStrain => "creep strain",
            AlarmIndex::WearIndex => "wear index",
            AlarmIndex::MetalTemperatureOverDesign => "metal temperature above design",
            AlarmIndex::DamageRate => "damage rate",
            AlarmIndex::HoursToCritical => "projected hours to critical life fraction",
            AlarmIndex::SensorStale => "sensor stale",
            AlarmIndex::SensorOutOfRange => "sensor out of range",
            AlarmIndex::SensorBadQuality => "sensor bad quality",
            AlarmIndex::ServiceHealth => "service health",
            AlarmIndex::FatigueUsage => "fatigue usage",
            AlarmIndex::CreepFatigueIndex => "creep-fatigue damage index",
            AlarmIndex::ReplicaBounds => "life fraction outside the replica class bounds",
        }
    }

    /// Which way the index gets worse.
    pub fn direction(self) -> Direction {
        match self {
            AlarmIndex::HoursToCritical => Direction::LowerIsWorse,
            _ => Direction::HigherIsWorse,
        }
    }

    /// Whether the index is a boolean condition (sensor or service fault)
    /// rather than a value compared with levels.
    pub fn is_condition(self) -> bool {
        matches!(
            self,
            AlarmIndex::SensorStale
                | AlarmIndex::SensorOutOfRange
                | AlarmIndex::SensorBadQuality
                | AlarmIndex::ServiceHealth
                | AlarmIndex::ReplicaBounds
        )
    }

    /// Whether the index is a sensor fault, alarmed once per tag (not per
    /// component reading the tag).
    pub fn is_sensor(self) -> bool {
        matches!(self, AlarmIndex::SensorStale | AlarmIndex::SensorOutOfRange | AlarmIndex::SensorBadQuality)
    }

    /// A value of this index as people read it: strain in percent,
    /// temperatures in K, rates per hour, projections in hours.
    pub fn display(self, value: f64) -> String {
        if !value.is_finite() {
            return match self {
                AlarmIndex::HoursToCritical => "not projected (damage not increasing)".into(),
                _ => "not available".into(),
            };
        }
        match self {
            AlarmIndex::CreepStrain => format!("{} %", short(value * 100.0)),
            AlarmIndex::MetalTemperatureOverDesign => format!("{} K", short(value)),
            AlarmIndex::DamageRate => format!("{} /h", short(value)),
            AlarmIndex::HoursToCritical => format!("{} h", short(value)),
            _ => short(value),
        }
    }
}

impl fmt::Display for AlarmIndex {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// A number in at most four significant digits, trailing zeros dropped
/// (0.512, 0.5, 17520, 2.1e-5): enough for a message, the exact value is in
/// the event's `value` field.
pub fn short(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return format!("{}", if v == 0.0 { 0.0 } else { v });
    }
    let mag = v.abs().log10().floor() as i32;
    if (-3..6).contains(&mag) {
        let decimals = (3 - mag).max(0) as usize;
        let s = format!("{v:.decimals$}");
        if s.contains('.') {
            s.trim_end_matches('0').trim_end_matches('.').to_string()
        } else {
            s
        }
    } else {
        let s = format!("{v:.3e}");
        let (m, e) = s.split_once('e').unwrap_or((&s, "0"));
        let m = if m.contains('.') { m.trim_end_matches('0').trim_end_matches('.') } else { m };
        format!("{m}e{e}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_stable_and_match_serde() {
        for i in AlarmIndex::ALL {
            assert_eq!(serde_json::to_string(&i).unwrap(), format!("\"{}\"", i.name()));
            assert_eq!(AlarmIndex::from_name(i.name()), Some(i));
        }
        assert_eq!(AlarmIndex::from_name("creep"), None);
    }

    #[test]
    fn severities_are_ordered() {
        assert!(Severity::Advisory < Severity::Warning && Severity::Warning < Severity::Critical);
    }

    #[test]
    fn only_hours_to_critical_is_lower_is_worse() {
        for i in AlarmIndex::ALL {
            let lower = i.direction() == Direction::LowerIsWorse;
            assert_eq!(lower, i == AlarmIndex::HoursToCritical, "{i}");
        }
    }

    #[test]
    fn short_numbers() {
        assert_eq!(short(0.512), "0.512");
        assert_eq!(short(0.5), "0.5");
        assert_eq!(short(17_520.0), "17520");
        assert_eq!(short(0.51234567), "0.5123");
        assert_eq!(short(2.1e-5), "2.1e-5");
        assert_eq!(short(-3.25), "-3.25");
        assert_eq!(short(0.0), "0");
        assert_eq!(AlarmIndex::CreepStrain.display(0.0052), "0.52 %");
    }
}
