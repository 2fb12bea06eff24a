//! Where a component stands against its own alarm levels, as numbers for
//! the database: one `<index>_level` field per index with levels on every
//! `component_state` point (0 below the advisory level, 1 advisory reached,
//! 2 warning, 3 critical), so dashboards colour each part by its own
//! configured levels instead of one fixed scale for all parts.
//!
//! The level is the highest severity whose configured level the reported
//! value has reached (`report::level_reached`, value >= level), the same
//! rule as `ComponentReport::levels_reached`; it is no alarm state (alarms
//! add deadbands, delays and acknowledgement).

use super::{indexed_levels, level_reached, ComponentReport};
use crate::engine::plan::ComponentPlan;
use crate::lineproto::Point;

/// The number of a severity name: 0 for none, 1 advisory, 2 warning,
/// 3 critical.
pub fn level_number(severity: Option<&str>) -> i64 {
    match severity {
        Some("advisory") => 1,
        Some("warning") => 2,
        Some("critical") => 3,
        _ => 0,
    }
}

/// The value `r` reports for an alarm index, where the part has one.
fn reported_value(r: &ComponentReport, index: &str) -> Option<f64> {
    match index {
        "creep_life_fraction" => Some(r.creep_life_fraction),
        "creep_strain" => Some(r.creep_strain),
        "wear_index" => Some(r.wear_index),
        "fatigue_usage" => r.fatigue.as_ref().map(|f| f.figures.fatigue_usage),
        "creep_fatigue_index" => r.fatigue.as_ref().map(|f| f.figures.creep_fatigue_index),
        _ => None,
    }
}

/// `p` with an `<index>_level` field for every index the part has levels
/// for (the indices of `alarm_threshold` points).
pub fn with_level_fields(mut p: Point, plan: &ComponentPlan, r: &ComponentReport) -> Point {
    for (index, levels) in indexed_levels(plan) {
        if let Some(v) = reported_value(r, index) {
            p = p.int(&format!("{index}_level"), level_number(level_reached(levels, v)));
        }
    }
    p
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::plan::Levels;

    // The order advisory < warning < critical is ISA-18.2's priority
    // order applied to lifeledger's three severities (common practice).
    #[test]
    fn numbers_follow_the_severity_order() {
        let l = Levels { advisory: Some(0.2), warning: Some(0.35), critical: Some(0.5) };
        let n = |v| level_number(level_reached(&l, v));
        assert_eq!([n(0.0), n(0.199), n(0.2), n(0.249), n(0.35), n(0.5), n(2.0)], [0, 0, 1, 1, 2, 3, 3]);
        // A part without an advisory level goes from 0 straight to warning.
        let l = Levels { advisory: None, warning: Some(0.5), critical: None };
        assert_eq!(level_number(level_reached(&l, 0.6)), 2);
    }
}
