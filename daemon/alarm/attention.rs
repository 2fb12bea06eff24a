//! Which part needs attention first: the one ranking the status page, the
//! JSON API and the `component_state` series share.
//!
//! Parts are ordered by four tiers, each deciding only among parts equal
//! in the tiers before it:
//!
//! 1. **State needing action** ([`Action`]), the most pressing state of any
//!    alarm that concerns the part (its own and those of the tags it
//!    reads): unacknowledged active > returned to normal unacknowledged >
//!    acknowledged active (and active engineering alerts, which ask no
//!    acknowledge) > shelved, out of service or suppressed > none.
//! 2. **Worst severity** of those alarms (any not in `normal`; for a held
//!    alarm the severity its condition implies now): critical > warning >
//!    advisory > none.
//! 3. **Fraction of the part's own next level**: for each index the part is
//!    tracked for (creep life fraction, creep strain, wear index, fatigue
//!    usage, creep-fatigue index), the value over the next level of that
//!    part's own configuration it has not reached yet (past every level:
//!    over the highest); the largest of them. Resolution 0.1 % of the level,
//!    at most 9.999.
//! 4. **Data quality**, worst first: sensor faults active on the part's
//!    inputs, then unmonitored hours, then the age of its stalest input
//!    (each in classes, see [`quality_class`]).
//!
//! Ties are broken by name (A before B). The ranking is exported as one
//! number, [`attention_score`]: the four tiers as digits of one integer
//! (`((action·4 + severity)·10 000 + per mille of the next level)·1 000 +
//! quality`), so a larger score always ranks higher and dashboards can sort
//! by it. The score is an ordering aid, not a measure of risk: its digits
//! say which tier decided, nothing more.
//!
//! Pure code: no I/O, no clocks. The service gathers the inputs
//! (`service::attention`).

use super::index::{AlarmIndex, Severity};
use super::record::{AlarmRecord, AlarmState};
use crate::engine::plan::Levels;
use serde::Serialize;
use std::cmp::Ordering;

/// The most pressing alarm state of a part (tier 1). Ordered: `None` lowest.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum Action {
    /// No alarm out of `normal`.
    #[default]
    None,
    /// Shelved, out of service or suppressed: followed, not annunciated.
    Held,
    /// Active and acknowledged (or an active engineering alert, which asks
    /// for no acknowledge).
    AcknowledgedActive,
    /// Returned to normal before anyone acknowledged it.
    ReturnedUnacknowledged,
    /// Active, not yet acknowledged.
    UnacknowledgedActive,
}

impl Action {
    fn of(state: AlarmState) -> Action {
        match state {
            AlarmState::Normal => Action::None,
            AlarmState::Shelved | AlarmState::OutOfService | AlarmState::Suppressed => Action::Held,
            AlarmState::Acknowledged | AlarmState::Alert => Action::AcknowledgedActive,
            AlarmState::RtnUnacknowledged => Action::ReturnedUnacknowledged,
            AlarmState::Unacknowledged => Action::UnacknowledgedActive,
        }
    }

    fn digit(self) -> u64 {
        self as u64
    }
}

/// Everything the ranking reads about one part.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct AttentionInput {
    pub action: Action,
    pub severity: Option<Severity>,
    /// Largest value / next own level over the tracked indices (0: none).
    pub next_level_fraction: f64,
    /// Sensor faults active on the part's inputs.
    pub sensor_faults: usize,
    pub unmonitored_h: f64,
    /// Age of the stalest input, seconds; `None` on the plant clock (no
    /// input to age); `f64::INFINITY` for an input that never reported.
    pub data_age_s: Option<f64>,
}

/// Tiers 1 and 2 and the sensor-fault count from the alarms concerning a
/// part (its own and those of the tags it reads).
pub fn from_alarms<'a>(records: impl IntoIterator<Item = &'a AlarmRecord>) -> (Action, Option<Severity>, usize) {
    let mut action = Action::None;
    let mut severity = None;
    let mut faults = 0;
    for r in records {
        if r.state != AlarmState::Normal {
            action = action.max(Action::of(r.state));
            // A held alarm: the severity its condition implies now; a
            // cleared one waiting for its acknowledge: the one it had.
            let s = if r.state.is_held() { r.condition } else { r.condition.or(r.severity) };
            severity = severity.max(s);
        }
        if r.index.is_sensor() && r.is_active() {
            faults += 1;
        }
    }
    (action, severity, faults)
}

/// Tier 3: the largest fraction of its next own level any index has
/// reached. `indices` are (value, that index's levels); an index without a
/// positive level, or with a value that is not a number, is skipped.
/// Past every level the fraction is value over the highest (≥ 1).
pub fn next_level_fraction<'a>(indices: impl IntoIterator<Item = (f64, &'a Levels)>) -> f64 {
    let mut worst = 0.0f64;
    for (value, levels) in indices {
        if !value.is_finite() {
            continue;
        }
        let set: Vec<f64> = levels.iter().map(|(_, l)| l).filter(|l| *l > 0.0 && l.is_finite()).collect();
        let Some(top) = set.iter().copied().reduce(f64::max) else { continue };
        let next = set.iter().copied().filter(|l| *l > value).reduce(f64::min).unwrap_or(top);
        worst = worst.max(value.max(0.0) / next);
    }
    worst
}

/// Tier 4 as one class 0..=999 (larger is worse): sensor faults (0..9) as
/// hundreds, unmonitored hours as tens, data age as units.
///
/// * unmonitored hours `h`: 0 for none, else `1 + ⌊3·log10(1 + h)⌋`, at
///   most 9 (20 h → 4, 1 000 h → 9);
/// * data age `s` seconds: 0 under a minute or on the plant clock, else
///   `1 + ⌊3·log10(s / 60)⌋`, at most 9 (10 min → 4, 1 h → 6, never
///   reported → 9).
pub fn quality_class(sensor_faults: usize, unmonitored_h: f64, data_age_s: Option<f64>) -> u64 {
    let log_class = |x: f64| -> u64 {
        if x.is_nan() {
            return 0;
        }
        (1.0 + (3.0 * x.log10()).floor()).clamp(1.0, 9.0) as u64
    };
    let faults = sensor_faults.min(9) as u64;
    let unmonitored = if unmonitored_h > 0.0 { log_class(1.0 + unmonitored_h) } else { 0 };
    let age = match data_age_s {
        Some(s) if s >= 60.0 => log_class(s / 60.0),
        _ => 0,
    };
    faults * 100 + unmonitored * 10 + age
}

/// The ranking as one number: larger needs attention first. Exactly
/// monotone with [`compare`] (the tiers are its digits).
pub fn attention_score(a: &AttentionInput) -> f64 {
    let severity = a.severity.map_or(0, |s| s as u64 + 1);
    let fraction = if a.next_level_fraction.is_nan() { 0.0 } else { a.next_level_fraction.clamp(0.0, 9.999) };
    let per_mille = (fraction * 1000.0).floor() as u64;
    let quality = quality_class(a.sensor_faults, a.unmonitored_h, a.data_age_s);
    (((a.action.digit() * 4 + severity) * 10_000 + per_mille) * 1_000 + quality) as f64
}

/// The order of two named parts: the one needing attention first is
/// `Less`; equal scores by name.
pub fn compare(a: (&str, &AttentionInput), b: (&str, &AttentionInput)) -> Ordering {
    attention_score(b.1).total_cmp(&attention_score(a.1)).then_with(|| a.0.cmp(b.0))
}

/// Indices of `parts` in ranking order (first needs attention first).
pub fn rank(parts: &[(&str, AttentionInput)]) -> Vec<usize> {
    let scores: Vec<f64> = parts.iter().map(|(_, a)| attention_score(a)).collect();
    let mut order: Vec<usize> = (0..parts.len()).collect();
    order.sort_by(|&i, &j| scores[j].total_cmp(&scores[i]).then_with(|| parts[i].0.cmp(parts[j].0)));
    order
}

/// The indices whose fraction tier 3 considers, by name.
pub const TRACKED: [AlarmIndex; 5] = [
    AlarmIndex::CreepLifeFraction,
    AlarmIndex::CreepStrain,
    AlarmIndex::WearIndex,
    AlarmIndex::FatigueUsage,
    AlarmIndex::CreepFatigueIndex,
];

#[cfg(test)]
mod tests {
    use super::*;

    fn levels(a: Option<f64>, w: Option<f64>, c: Option<f64>) -> Levels {
        Levels { advisory: a, warning: w, critical: c }
    }

    fn rec(component: &str, index: AlarmIndex, state: AlarmState, condition: Option<Severity>) -> AlarmRecord {
        let mut r = AlarmRecord::new(component, "U1", index, 0);
        r.state = state;
        r.condition = condition;
        r.severity = condition;
        r
    }

    fn part(action: Action, severity: Option<Severity>, fraction: f64) -> AttentionInput {
        AttentionInput { action, severity, next_level_fraction: fraction, ..Default::default() }
    }

    fn names(parts: &[(&str, AttentionInput)]) -> Vec<String> {
        rank(parts).into_iter().map(|i| parts[i].0.to_string()).collect()
    }

    /// The case the ranking exists for: a part with two unacknowledged
    /// sensor warnings and 20 unmonitored hours, far from its own levels,
    /// ranks above parts with no alarm that are closer to theirs.
    #[test]
    fn unacknowledged_sensor_warnings_rank_above_parts_without_alarm() {
        let sensors = [
            rec("TE-OUT-B", AlarmIndex::SensorStale, AlarmState::Unacknowledged, Some(Severity::Warning)),
            rec("PT-OUT-B", AlarmIndex::SensorOutOfRange, AlarmState::Unacknowledged, Some(Severity::Warning)),
        ];
        let (action, severity, faults) = from_alarms(&sensors);
        assert_eq!((action, severity, faults), (Action::UnacknowledgedActive, Some(Severity::Warning), 2));
        let lf = levels(Some(0.3), Some(0.5), Some(0.7));
        let leg_b = AttentionInput {
            action,
            severity,
            next_level_fraction: next_level_fraction([(0.05, &lf)]),
            sensor_faults: faults,
            unmonitored_h: 20.0,
            data_age_s: Some(30.0),
        };
        let quiet = |f: f64| AttentionInput {
            next_level_fraction: next_level_fraction([(f, &lf)]),
            data_age_s: Some(5.0),
            ..Default::default()
        };
        let parts =
            vec![("A-HEADER", quiet(0.28)), ("B-TUBE", quiet(0.29)), ("OUTLET-LEG-B", leg_b), ("C-PIPE", quiet(0.1))];
        assert_eq!(names(&parts)[0], "OUTLET-LEG-B");
    }

    /// Tier 1: each state outranks the one below it, whatever the lower
    /// tiers say.
    #[test]
    fn tier_state_needing_action() {
        use AlarmState::*;
        let order = [Unacknowledged, RtnUnacknowledged, Acknowledged, Shelved, Normal];
        let inputs: Vec<(String, AttentionInput)> = order
            .iter()
            .enumerate()
            .map(|(i, &s)| {
                // The lower tiers favour the later, less pressing states.
                let sev = if s == Normal { None } else { Some(Severity::Advisory) };
                let (action, _, _) = from_alarms(&[rec("P", AlarmIndex::CreepLifeFraction, s, sev)]);
                let a = AttentionInput {
                    action,
                    severity: if i >= 3 { Some(Severity::Critical) } else { sev },
                    next_level_fraction: i as f64,
                    sensor_faults: i,
                    unmonitored_h: 100.0 * i as f64,
                    data_age_s: Some(3600.0 * i as f64),
                };
                (format!("Z{i}"), a)
            })
            .collect();
        let parts: Vec<(&str, AttentionInput)> = inputs.iter().map(|(n, a)| (n.as_str(), a.clone())).collect();
        assert_eq!(names(&parts), ["Z0", "Z1", "Z2", "Z3", "Z4"]);
        // Out of service and suppressed are held like shelved; an active
        // engineering alert counts as acknowledged active.
        assert_eq!(Action::of(OutOfService), Action::Held);
        assert_eq!(Action::of(Suppressed), Action::Held);
        assert_eq!(Action::of(Alert), Action::AcknowledgedActive);
        // The most pressing record decides.
        let recs = [
            rec("P", AlarmIndex::CreepLifeFraction, Acknowledged, Some(Severity::Critical)),
            rec("P", AlarmIndex::WearIndex, RtnUnacknowledged, None),
        ];
        assert_eq!(from_alarms(&recs).0, Action::ReturnedUnacknowledged);
    }

    /// Tier 2: within one state, the worse severity first.
    #[test]
    fn tier_worst_severity() {
        let parts = vec![
            ("A", part(Action::AcknowledgedActive, Some(Severity::Advisory), 2.0)),
            ("B", part(Action::AcknowledgedActive, Some(Severity::Critical), 0.1)),
            ("C", part(Action::AcknowledgedActive, Some(Severity::Warning), 1.5)),
        ];
        assert_eq!(names(&parts), ["B", "C", "A"]);
        // A record returned to normal unacknowledged keeps the severity it had.
        let mut r = rec("P", AlarmIndex::CreepLifeFraction, AlarmState::RtnUnacknowledged, None);
        r.severity = Some(Severity::Warning);
        assert_eq!(from_alarms([&r]).1, Some(Severity::Warning));
    }

    /// Tier 3: the fraction of the part's own next level, not the raw value.
    #[test]
    fn tier_fraction_of_own_next_level() {
        // 0.25 of a 0.3 advisory (83 %) needs attention before 0.45 of a
        // default-style 0.6 advisory (75 %), though 0.45 is the larger.
        let own = levels(Some(0.3), Some(0.5), Some(0.7));
        let lax = levels(Some(0.6), Some(0.8), Some(0.9));
        let a = next_level_fraction([(0.25, &own)]);
        let b = next_level_fraction([(0.45, &lax)]);
        assert!((a - 0.25 / 0.3).abs() < 1e-12 && (b - 0.75).abs() < 1e-12);
        let parts = vec![("B", part(Action::None, None, b)), ("A", part(Action::None, None, a))];
        assert_eq!(names(&parts), ["A", "B"]);
        // Past the advisory the next level is the warning; past all, the
        // highest; the worst index decides; levels left unset are skipped.
        assert!((next_level_fraction([(0.4, &own)]) - 0.8).abs() < 1e-12);
        assert!((next_level_fraction([(1.4, &own)]) - 2.0).abs() < 1e-12);
        let strain = levels(None, Some(0.005), Some(0.01));
        assert!((next_level_fraction([(0.1, &own), (0.004, &strain)]) - 0.8).abs() < 1e-12);
        assert_eq!(next_level_fraction([(0.9, &Levels::default())]), 0.0);
        assert_eq!(next_level_fraction([(f64::NAN, &own)]), 0.0);
    }

    /// Tier 4: sensor faults, then unmonitored hours, then data age.
    #[test]
    fn tier_data_quality() {
        let q = |faults, h, age| AttentionInput {
            sensor_faults: faults,
            unmonitored_h: h,
            data_age_s: age,
            next_level_fraction: 0.5,
            ..Default::default()
        };
        let parts = vec![
            ("A", q(0, 0.0, Some(5.0))),
            ("B", q(0, 0.0, Some(7200.0))),
            ("C", q(0, 20.0, Some(5.0))),
            ("D", q(1, 0.0, Some(5.0))),
            ("E", q(0, 0.0, None)),
            ("F", q(0, 0.0, Some(f64::INFINITY))),
        ];
        assert_eq!(names(&parts), ["D", "C", "F", "B", "A", "E"]);
        assert_eq!(quality_class(0, 20.0, None), 40);
        assert_eq!(quality_class(0, 0.0, Some(600.0)), 4);
        assert_eq!(quality_class(12, 1e6, Some(f64::INFINITY)), 999);
    }

    /// The score orders like the ranking, and equal scores go by name.
    #[test]
    fn score_is_monotone_with_the_ranking_and_ties_go_by_name() {
        let mut parts = vec![];
        for (i, action) in [Action::None, Action::Held, Action::UnacknowledgedActive].into_iter().enumerate() {
            for sev in [None, Some(Severity::Advisory), Some(Severity::Critical)] {
                for f in [0.0, 0.5, 12.0] {
                    for faults in [0, 3] {
                        let mut a = part(action, sev, f);
                        a.sensor_faults = faults;
                        a.unmonitored_h = i as f64;
                        parts.push(a);
                    }
                }
            }
        }
        let key = |a: &AttentionInput| {
            (a.action, a.severity, (a.next_level_fraction.min(9.999) * 1000.0).floor() as u64, a.sensor_faults)
        };
        for a in &parts {
            for b in &parts {
                let lex = key(a).cmp(&key(b));
                let by_score = attention_score(a).total_cmp(&attention_score(b));
                assert_eq!(lex, by_score, "{a:?} vs {b:?}");
            }
        }
        let same = part(Action::None, None, 0.2);
        assert_eq!(compare(("A", &same), ("B", &same)), Ordering::Less);
        assert_eq!(names(&[("B", same.clone()), ("A", same)]), ["A", "B"]);
    }
}
