//! Alarm-system performance, as an alarm-management review measures it:
//! how many alarms the operator is asked to handle, floods, standing and
//! chattering alarms, the most frequent ones, and what is shelved, out of
//! service or suppressed. Shown on `/metrics`, in the snapshot
//! (`alarm_kpi`) and on the status page.
//!
//! Counted are *annunciations*: events after which an operator alarm waits
//! for an acknowledge (activation, escalation, and an active alarm coming
//! back from a shelve, out of service or a suppression). Engineering alerts
//! and suppressed changes are recorded, not annunciated, so not counted.
//! Windows are in the alarm journal's time base (event time, see README).
//!
//! The usual targets (ISA-18.2 / IEC 62682 and EEMUA 191, common practice,
//! from memory), for one operator's console: about 1 alarm per 10 minutes
//! (6 per hour) is very likely acceptable; a **flood** is more than 10
//! alarms in 10 minutes, to be under 1 % of the time; fewer than 5
//! **standing** alarms (active for more than 24 h); no **chattering**
//! alarms (3 or more activations of one alarm within 60 s). Pure code: the
//! ledger thread feeds it committed events and reads it with a time.

use crate::alarm::{AlarmBook, AlarmEvent, AlarmState, Transition};
use serde::Serialize;
use std::collections::{BTreeMap, VecDeque};

const MIN_MS: i64 = 60_000;
const TEN_MIN_MS: i64 = 10 * MIN_MS;
const HOUR_MS: i64 = 60 * MIN_MS;
const DAY_MS: i64 = 24 * HOUR_MS;
/// More than this many annunciations in 10 minutes is a flood.
pub const FLOOD_PER_10_MIN: usize = 10;
/// This many activations of one alarm within [`CHATTER_WINDOW_MS`] is
/// chattering.
pub const CHATTER_ACTIVATIONS: usize = 3;
const CHATTER_WINDOW_MS: i64 = MIN_MS;
/// Active longer than this is a standing alarm.
const STANDING_MS: i64 = DAY_MS;

/// Annunciations kept for the last 24 h (event time, alarm key).
#[derive(Debug, Default, Clone)]
pub struct AlarmKpi {
    annunciations: VecDeque<(i64, String)>,
}

/// The figures at one moment.
#[derive(Debug, Clone, Default, Serialize, PartialEq)]
pub struct AlarmKpiReport {
    pub alarms_last_10_min: usize,
    pub alarms_last_hour: usize,
    pub alarms_last_24_h: usize,
    /// Mean annunciations per 10 minutes over the last 24 h.
    pub mean_per_10_min_24_h: f64,
    /// Most annunciations in one 10-minute period (aligned on the clock)
    /// of the last 24 h.
    pub peak_per_10_min_24_h: usize,
    /// 10-minute periods of the last 24 h with more than 10.
    pub floods_24_h: usize,
    /// Share of the last 24 h in flood, percent (flood periods over 144).
    pub time_in_flood_percent_24_h: f64,
    /// Operator alarms active (not held) for more than 24 h.
    pub standing: usize,
    /// Alarms that activated 3 or more times within 60 s in the last hour.
    pub chattering: Vec<String>,
    /// The ten alarms annunciated most often in the last 24 h, most first.
    pub most_frequent_24_h: Vec<(String, usize)>,
    pub active: usize,
    pub unacknowledged: usize,
    pub shelved: usize,
    pub out_of_service: usize,
    pub suppressed: usize,
    /// Active engineering alerts (not counted as alarms).
    pub engineering_alerts: usize,
}

/// Whether an event asks an operator for attention now.
pub fn annunciates(e: &AlarmEvent) -> bool {
    e.state == AlarmState::Unacknowledged
        && matches!(
            e.transition,
            Transition::Activated
                | Transition::Escalated
                | Transition::Unsuppressed
                | Transition::ShelveExpired
                | Transition::Unshelved
                | Transition::ReturnedToService
        )
}

impl AlarmKpi {
    /// Take committed events (in commit order).
    pub fn record(&mut self, events: &[AlarmEvent]) {
        for e in events.iter().filter(|e| annunciates(e)) {
            self.annunciations.push_back((e.time_ms, e.key()));
        }
        // Keep about a day past the newest (events may be a little out of
        // order in time: evaluations lag the newest sample).
        if let Some(newest) = self.annunciations.iter().map(|(t, _)| *t).max() {
            while self.annunciations.front().is_some_and(|(t, _)| *t < newest - 2 * DAY_MS) {
                self.annunciations.pop_front();
            }
        }
    }

    /// The figures at `now_ms` (alarm clock), with the book's records for
    /// what stands now.
    pub fn report(&self, now_ms: i64, book: &AlarmBook) -> AlarmKpiReport {
        let within = |ms: i64| self.annunciations.iter().filter(move |(t, _)| *t > now_ms - ms && *t <= now_ms);
        let day: Vec<&(i64, String)> = within(DAY_MS).collect();
        let mut buckets: BTreeMap<i64, usize> = BTreeMap::new();
        let mut per_key: BTreeMap<&str, usize> = BTreeMap::new();
        for (t, k) in &day {
            *buckets.entry(t.div_euclid(TEN_MIN_MS)).or_default() += 1;
            *per_key.entry(k.as_str()).or_default() += 1;
        }
        let floods = buckets.values().filter(|&&n| n > FLOOD_PER_10_MIN).count();
        let mut most: Vec<(String, usize)> = per_key.iter().map(|(k, n)| (k.to_string(), *n)).collect();
        most.sort_by(|a, b| b.1.cmp(&a.1).then(a.0.cmp(&b.0)));
        most.truncate(10);
        // Chattering: per key, 3 activations within 60 s in the last hour.
        let mut times: BTreeMap<&str, Vec<i64>> = BTreeMap::new();
        for (t, k) in within(HOUR_MS) {
            times.entry(k.as_str()).or_default().push(*t);
        }
        let chattering = times
            .into_iter()
            .filter(|(_, ts)| {
                let mut ts = ts.clone();
                ts.sort_unstable();
                ts.windows(CHATTER_ACTIVATIONS).any(|w| w[CHATTER_ACTIVATIONS - 1] - w[0] <= CHATTER_WINDOW_MS)
            })
            .map(|(k, _)| k.to_string())
            .collect();
        let mut r = AlarmKpiReport {
            alarms_last_10_min: within(TEN_MIN_MS).count(),
            alarms_last_hour: within(HOUR_MS).count(),
            alarms_last_24_h: day.len(),
            mean_per_10_min_24_h: day.len() as f64 / 144.0,
            peak_per_10_min_24_h: buckets.values().copied().max().unwrap_or(0),
            floods_24_h: floods,
            time_in_flood_percent_24_h: floods as f64 / 144.0 * 100.0,
            chattering,
            most_frequent_24_h: most,
            ..AlarmKpiReport::default()
        };
        for rec in book.records() {
            match rec.state {
                AlarmState::Shelved => r.shelved += 1,
                AlarmState::OutOfService => r.out_of_service += 1,
                AlarmState::Suppressed => r.suppressed += 1,
                AlarmState::Alert => r.engineering_alerts += 1,
                AlarmState::Unacknowledged | AlarmState::Acknowledged if rec.is_active() => {
                    r.active += 1;
                    if now_ms - rec.since_ms > STANDING_MS {
                        r.standing += 1;
                    }
                }
                _ => {}
            }
            if rec.state.needs_acknowledge() {
                r.unacknowledged += 1;
            }
        }
        r
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::alarm::AlarmIndex;

    fn ann(book: &mut AlarmBook, tag: &str, t: i64) -> Vec<AlarmEvent> {
        let mut ev = book.evaluate_sensor(tag, "U1", &["C".into()], AlarmIndex::SensorBadQuality, true, "bad", t);
        ev.extend(book.evaluate_sensor(tag, "U1", &["C".into()], AlarmIndex::SensorBadQuality, false, "", t + 1));
        // Off-delay 60 s: clear it for real.
        ev.extend(book.evaluate_sensor(tag, "U1", &["C".into()], AlarmIndex::SensorBadQuality, false, "", t + 61_000));
        ev.extend(book.acknowledge(tag, None, "op", t + 61_000).unwrap());
        ev
    }

    /// A book whose bad-quality alarm clears 60 s after the fault.
    fn book_60s() -> AlarmBook {
        AlarmBook::new().with_config(crate::alarm::AlarmConfig {
            delays: [(AlarmIndex::SensorBadQuality, crate::alarm::Delay { on_delay_s: 0.0, off_delay_s: 60.0 })].into(),
            ..Default::default()
        })
    }

    #[test]
    fn floods_chatter_and_rates_by_their_definitions() {
        let mut book = book_60s();
        let mut k = AlarmKpi::default();
        let t0 = 1_800_000_000_000 - 1_800_000_000_000 % TEN_MIN_MS; // on a 10-minute boundary
                                                                     // 12 different tags each annunciate once inside one 10-minute
                                                                     // period: more than 10, a flood (ISA-18.2 definition, from memory).
        for i in 0..12 {
            k.record(&ann(&mut book, &format!("T{i}"), t0 + i * 30_000));
        }
        // One tag annunciates 3 times within 60 s... its off-delay keeps
        // it active, so a second tag blinks with 62 s spacing: not chatter.
        for j in 0..3 {
            k.record(&ann(&mut book, "SLOW", t0 + HOUR_MS / 2 + j * 125_000));
        }
        let r = k.report(t0 + HOUR_MS - 1, &book);
        assert_eq!(r.alarms_last_hour, 15);
        assert_eq!(r.floods_24_h, 1);
        assert!((r.time_in_flood_percent_24_h - 100.0 / 144.0).abs() < 1e-9);
        assert_eq!(r.peak_per_10_min_24_h, 12);
        assert!(r.chattering.is_empty(), "{:?}", r.chattering);
        assert_eq!(r.most_frequent_24_h[0], ("SLOW/sensor_bad_quality".to_string(), 3));
        // Without the off-delay the same blinking within a minute chatters.
        let mut book = AlarmBook::new().with_config(crate::alarm::AlarmConfig {
            delays: [(AlarmIndex::SensorBadQuality, crate::alarm::Delay::NONE)].into(),
            ..Default::default()
        });
        let mut k = AlarmKpi::default();
        for j in 0..3 {
            let t = t0 + j * 20_000;
            let mut ev = book.evaluate_sensor("FAST", "U1", &["C".into()], AlarmIndex::SensorBadQuality, true, "b", t);
            ev.extend(book.evaluate_sensor(
                "FAST",
                "U1",
                &["C".into()],
                AlarmIndex::SensorBadQuality,
                false,
                "",
                t + 5,
            ));
            k.record(&ev);
        }
        assert_eq!(k.report(t0 + 2 * MIN_MS, &book).chattering, vec!["FAST/sensor_bad_quality".to_string()]);
        // An alarm active for more than a day is standing.
        let mut book = AlarmBook::new();
        book.evaluate_sensor("OLD", "U1", &["C".into()], AlarmIndex::SensorStale, true, "silent", t0);
        assert_eq!(AlarmKpi::default().report(t0 + DAY_MS + 1, &book).standing, 1);
        assert_eq!(AlarmKpi::default().report(t0 + DAY_MS - 1, &book).standing, 0);
    }
}
