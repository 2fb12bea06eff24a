//! Alarm-system performance of the report's scope over the period its
//! alarm journal covers: the figures an alarm-management review asks for
//! (ISA-18.2 / IEC 62682, EEMUA 191; common practice, the targets from
//! memory), by the same definitions as the live service's
//! [`crate::alarm::kpi`]: annunciations (events after which an
//! operator alarm waits for an acknowledge), the mean and the peak per
//! 10-minute period, floods (more than 10 in a 10-minute period) and the
//! share of time in flood, chattering alarms (3 or more activations of one
//! alarm within 60 s) and the most frequent alarms. Pure: it takes events.

use crate::alarm::kpi::{annunciates, CHATTER_ACTIVATIONS, FLOOD_PER_10_MIN};
use crate::alarm::{AlarmEvent, Transition};
use serde::Serialize;
use std::collections::BTreeMap;

const TEN_MIN_MS: i64 = 600_000;
const CHATTER_WINDOW_MS: i64 = 60_000;

/// The figures of one report.
#[derive(Debug, Clone, Default, Serialize, PartialEq)]
pub struct AlarmPerformance {
    /// Event time of the first and last journal event considered (RFC 3339).
    pub from: Option<String>,
    pub to: Option<String>,
    /// Annunciations in the period.
    pub annunciations: usize,
    /// Mean annunciations per 10-minute period (the period at least 10 min).
    pub mean_per_10_min: f64,
    /// Most annunciations in one 10-minute period (aligned on the clock).
    pub peak_per_10_min: usize,
    /// 10-minute periods with more than [`FLOOD_PER_10_MIN`].
    pub flood_periods: usize,
    /// Flood periods over all 10-minute periods of the span, percent.
    pub time_in_flood_percent: f64,
    /// Alarms (keys) that activated 3 or more times within 60 s.
    pub chattering: Vec<String>,
    /// Alarms annunciated most often, most first (at most ten).
    pub most_frequent: Vec<(String, usize)>,
}

/// The figures of `events` (any order).
pub fn from_events(events: &[AlarmEvent]) -> AlarmPerformance {
    let mut out = AlarmPerformance::default();
    let (Some(first), Some(last)) = (events.iter().map(|e| e.time_ms).min(), events.iter().map(|e| e.time_ms).max())
    else {
        return out;
    };
    out.from = Some(crate::event_time::rfc3339_ms(first));
    out.to = Some(crate::event_time::rfc3339_ms(last));
    let mut ann: Vec<(i64, String)> = events.iter().filter(|e| annunciates(e)).map(|e| (e.time_ms, e.key())).collect();
    ann.sort();
    out.annunciations = ann.len();
    let periods = ((last - first).max(TEN_MIN_MS) as f64 / TEN_MIN_MS as f64).ceil().max(1.0);
    out.mean_per_10_min = ann.len() as f64 / periods;
    let mut per_period: BTreeMap<i64, usize> = BTreeMap::new();
    let mut per_key: BTreeMap<String, usize> = BTreeMap::new();
    for (t, k) in &ann {
        *per_period.entry(t.div_euclid(TEN_MIN_MS)).or_default() += 1;
        *per_key.entry(k.clone()).or_default() += 1;
    }
    out.peak_per_10_min = per_period.values().copied().max().unwrap_or(0);
    out.flood_periods = per_period.values().filter(|&&n| n > FLOOD_PER_10_MIN).count();
    out.time_in_flood_percent = 100.0 * out.flood_periods as f64 / periods;
    let mut by_key: BTreeMap<String, Vec<i64>> = BTreeMap::new();
    for e in events.iter().filter(|e| e.transition == Transition::Activated) {
        by_key.entry(e.key()).or_default().push(e.time_ms);
    }
    for (k, mut ts) in by_key {
        ts.sort();
        let chatters = ts.windows(CHATTER_ACTIVATIONS).any(|w| w[CHATTER_ACTIVATIONS - 1] - w[0] <= CHATTER_WINDOW_MS);
        if chatters {
            out.chattering.push(k);
        }
    }
    let mut freq: Vec<(String, usize)> = per_key.into_iter().collect();
    freq.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(&b.0)));
    freq.truncate(10);
    out.most_frequent = freq;
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::alarm::{AlarmIndex, AlarmState, Severity};

    fn event(component: &str, t: i64, transition: Transition, state: AlarmState) -> AlarmEvent {
        let mut e: AlarmEvent = serde_json::from_value(serde_json::json!({
            "component": component, "unit": "U1", "index": "metal_temperature_over_design",
            "transition": transition, "state": state, "severity": Severity::Warning,
            "time": "", "time_ms": t, "message": ""
        }))
        .expect("an alarm event from its JSON fields");
        e.index = AlarmIndex::MetalTemperatureOverDesign;
        e
    }

    /// Definitions as the alarm-management guides give them (common
    /// practice): a flood is more than 10 annunciations in a 10-minute
    /// period; chattering is 3 or more activations of one alarm in 60 s.
    #[test]
    fn floods_and_chatter_by_their_definitions() {
        let mut ev = vec![];
        // Eleven different alarms in the first 10 minutes: one flood period.
        for i in 0..11 {
            ev.push(event(&format!("C{i}"), i * 30_000, Transition::Activated, AlarmState::Unacknowledged));
        }
        // One alarm activating three times within 50 s, an hour later.
        for k in 0..3 {
            ev.push(event("CH", 3_600_000 + k * 25_000, Transition::Activated, AlarmState::Unacknowledged));
        }
        // An engineering alert is recorded but not annunciated.
        ev.push(event("EA", 7_200_000, Transition::Activated, AlarmState::Alert));
        let p = from_events(&ev);
        assert_eq!(p.annunciations, 14);
        assert_eq!(p.peak_per_10_min, 11);
        assert_eq!(p.flood_periods, 1);
        // The span is 2 h: 12 periods, one in flood.
        assert!((p.time_in_flood_percent - 100.0 / 12.0).abs() < 1e-9, "{}", p.time_in_flood_percent);
        assert!((p.mean_per_10_min - 14.0 / 12.0).abs() < 1e-9);
        assert_eq!(p.chattering.len(), 1);
        assert!(p.chattering[0].starts_with("CH/"), "{:?}", p.chattering);
        assert_eq!(p.most_frequent[0].1, 3);
    }

    #[test]
    fn no_events_no_figures() {
        assert_eq!(from_events(&[]), AlarmPerformance::default());
    }
}
