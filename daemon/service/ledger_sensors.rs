//! Sensor-fault alarms of the ledger thread: one alarm per tag and fault,
//! listing the components whose ledgers read the tag, with one fault one
//! alarm and first-out grouping of common causes.
//!
//! * A tag is **stale** when, by the wall clock, no sample of it was
//!   accepted for its hold time plus `[alarms] stale_grace_s` (a tag that
//!   never reported counts from the service's start), or when, in event
//!   time, the newest sample of any tag is more than the tag's hold time
//!   ahead of its own newest sample. It is **out of range** (or stamped at
//!   an implausible time) or of **bad quality** when such a sample was
//!   rejected since the last check, or is the tag's newest sample and not
//!   older than its hold time (a tag that falls silent after a fault is
//!   stale once the fault is that old).
//! * **One fault, one alarm**: bad quality (the source's own verdict)
//!   hides out of range, and either hides stale: a transmitter at its rail
//!   delivers no accepted sample, and saying so twice adds nothing.
//! * **First-out grouping**: tags that go stale in the same check (a
//!   gateway, a broker link, a field bus) raise one alarm, on the first-out
//!   tag (the one silent longest), whose detail names the others; the
//!   others stay silent while it stands. With no sample from any tag for
//!   `[alarms] no_data_alarm_s` the plant-level service-health alarm stands
//!   for all of them.
//! * A tag read by no component raises nothing (nothing depends on it).
//!
//! Judged in event time for the records (the newest event time seen), the
//! silence by the wall clock; see README "Alarms".
//!
//! [`SensorJudge`] owns the per-tag judgement state and judges without
//! reading a clock (the wall-clock time is an argument); the ledger thread
//! only rate-limits the checks and records the events.

use super::*;
use crate::alarm::AlarmBook;
use crate::alarm::AlarmConfig;

/// Most tag names listed in one alarm's detail.
const LIST_MAX: usize = 8;

fn listed(names: &[&str]) -> String {
    if names.len() <= LIST_MAX {
        names.join(", ")
    } else {
        format!("{} and {} more", names[..LIST_MAX].join(", "), names.len() - LIST_MAX)
    }
}

impl Ledger {
    /// The sensor and plant-data alarms, at most every 500 ms of wall time.
    pub(super) fn sensor_check(&mut self) {
        if self.last_sensor_check.elapsed() < Duration::from_millis(500) {
            return;
        }
        self.last_sensor_check = Instant::now();
        let ev = self.sensors.judge(&self.engine, &mut self.book, &self.service.alarms, self.newest_ms, now_ms());
        self.note_events(ev);
    }
}

/// Per-tag sensor judgement: what each tag's samples said since the last
/// check, when each tag last delivered, and the first-out groups.
#[derive(Debug, Clone)]
pub struct SensorJudge {
    /// Per tag: (out of range now, bad quality now).
    sensor: Vec<(bool, bool)>,
    /// Per tag: the same faults seen since the last check.
    sensor_latched: Vec<(bool, bool)>,
    /// Per tag: the first-out tag of the common-cause group whose one
    /// stale alarm stands for this tag's silence too.
    pub(super) stale_leader: Vec<Option<usize>>,
    /// Per tag: (event time, arrival) of the newest sample rejected as a
    /// sensor fault; a fault that old no longer hides the tag's silence.
    last_fault: Vec<Option<(i64, i64)>>,
    /// Per tag: wall-clock time of the newest accepted sample.
    pub(super) last_arrival: Vec<Option<i64>>,
    /// Wall-clock time of the newest accepted sample of any tag.
    pub(super) last_any_arrival: Option<i64>,
    /// Wall-clock start of this run (never-reporting tags count from it).
    pub(super) started_ms: i64,
    /// No accepted sample from any tag for `[alarms] no_data_alarm_s`.
    pub(super) no_plant_data: bool,
}

impl SensorJudge {
    /// For `ntags` tags, started at wall-clock `started_ms`.
    pub fn new(ntags: usize, started_ms: i64) -> SensorJudge {
        SensorJudge {
            sensor: vec![(false, false); ntags],
            sensor_latched: vec![(false, false); ntags],
            stale_leader: vec![None; ntags],
            last_fault: vec![None; ntags],
            last_arrival: vec![None; ntags],
            last_any_arrival: None,
            started_ms,
            no_plant_data: false,
        }
    }

    /// Tag `ti` delivered an accepted sample that arrived at `received_ms`.
    pub fn accepted(&mut self, ti: usize, received_ms: i64) {
        self.last_arrival[ti] = Some(received_ms);
        self.last_any_arrival = Some(received_ms);
        self.sensor[ti] = (false, false);
    }

    /// Tag `ti`'s sample of event time `time_ms`, arrived at
    /// `received_ms`, was rejected for `reason`; a value, time or quality
    /// fault counts as a sensor fault.
    pub fn rejected(&mut self, ti: usize, reason: Rejection, time_ms: i64, received_ms: i64) {
        let which = match reason {
            // A sample stamped in the future or before the plant existed is
            // a sensor (gateway clock) fault.
            Rejection::OutOfRange | Rejection::NotFinite | Rejection::ImplausibleTime => 0,
            Rejection::BadQuality => 1,
            _ => return,
        };
        if which == 0 {
            self.sensor[ti].0 = true;
            self.sensor_latched[ti].0 = true;
        } else {
            self.sensor[ti].1 = true;
            self.sensor_latched[ti].1 = true;
        }
        self.last_fault[ti] = Some((time_ms, received_ms));
    }

    /// The configuration changed from tags `old` to tags `new` (names):
    /// arrival times follow their tags; the fault state starts afresh.
    pub fn reloaded(&mut self, old: &[&str], new: &[&str]) {
        let arrivals: HashMap<&str, Option<i64>> = old.iter().copied().zip(self.last_arrival.iter().copied()).collect();
        let mut next = SensorJudge::new(new.len(), self.started_ms);
        next.last_arrival = new.iter().map(|n| arrivals.get(n).copied().flatten()).collect();
        next.last_any_arrival = self.last_any_arrival;
        next.no_plant_data = self.no_plant_data;
        *self = next;
    }

    /// Judge every tag now (`now`: wall-clock ms; `newest`: the newest
    /// event time seen): the alarm events the book raised.
    pub fn judge(
        &mut self,
        engine: &Engine,
        book: &mut AlarmBook,
        alarms: &AlarmConfig,
        newest: Option<i64>,
        now: i64,
    ) -> Vec<AlarmEvent> {
        let mut out = vec![];
        let t = newest.unwrap_or(now);
        let grace_ms = (alarms.stale_grace_s * 1000.0) as i64;
        let silent_ms = now - self.last_any_arrival.unwrap_or(self.started_ms);
        let no_data = !engine.plan().tags.is_empty() && silent_ms > (alarms.no_data_alarm_s * 1000.0) as i64;
        if no_data != self.no_plant_data {
            self.no_plant_data = no_data;
            let detail = if no_data {
                format!("no sample accepted from any tag for {} s", silent_ms / 1000)
            } else {
                "plant data arriving again".to_string()
            };
            if no_data {
                tracing::error!("{detail}: the ledgers are not moving");
            } else {
                tracing::info!("{detail}");
            }
            let ev = book.evaluate_condition(PLANT_DATA_ALARM, "", AlarmIndex::ServiceHealth, no_data, &detail, t);
            out.extend(ev);
        }
        // Plant states first, so alarms raised in this check already see them.
        let rules = plant_state_rules(engine, alarms);
        let ev = book.set_suppression(rules, t);
        out.extend(ev);
        let plan = engine.plan();
        let ntags = plan.tags.len();
        // Per tag: (stale, out of range, bad quality) before grouping.
        let mut faults = Vec::with_capacity(ntags);
        for (ti, tp) in plan.tags.iter().enumerate() {
            let event_stale = match (newest, engine.tags()[ti].cursor_ms) {
                (Some(n), Some(last)) => n - last > tp.max_hold_ms,
                _ => false,
            };
            let wall_stale =
                now - self.last_arrival[ti].unwrap_or(self.started_ms) > tp.max_hold_ms.saturating_add(grace_ms);
            // A fault seen since the last check counts even if a good
            // sample has cleared it since, so a short fault still alarms;
            // one standing with no sample since ends once the tag has been
            // silent for its hold time (then the tag is stale instead).
            let fault_fresh = self.last_fault[ti].is_some_and(|(t_ev, arrival)| {
                newest.is_none_or(|n| n - t_ev <= tp.max_hold_ms)
                    && now - arrival <= tp.max_hold_ms.saturating_add(grace_ms)
            });
            let oor = (self.sensor[ti].0 && fault_fresh) || self.sensor_latched[ti].0;
            let badq = (self.sensor[ti].1 && fault_fresh) || self.sensor_latched[ti].1;
            faults.push((event_stale || wall_stale, oor && !badq, badq));
        }
        for l in &mut self.sensor_latched {
            *l = (false, false);
        }
        // Stale, for alarming: not explained by a fresh value or quality
        // fault, and read by some component. (An out-of-range alarm held
        // by its off-delay does not hide a silence that follows it: the
        // fault has changed, no data at all now.)
        let read = |ti: usize| !engine.consumers(ti).is_empty();
        let stale: Vec<bool> =
            (0..ntags).map(|ti| faults[ti].0 && !faults[ti].1 && !faults[ti].2 && read(ti)).collect();
        // First-out grouping: a group holds while its leader is stale.
        for ti in 0..ntags {
            if let Some(lead) = self.stale_leader[ti] {
                if !stale[ti] || !stale[lead] {
                    self.stale_leader[ti] = None;
                }
            }
        }
        let was_alarmed = |ti: usize| {
            book.record(&crate::alarm::record::key(&plan.tags[ti].name, AlarmIndex::SensorStale))
                .is_some_and(|r| r.is_active())
        };
        let newly: Vec<usize> =
            (0..ntags).filter(|&ti| stale[ti] && self.stale_leader[ti].is_none() && !was_alarmed(ti)).collect();
        if newly.len() > 1 {
            // The one silent longest is the first out.
            let lead = *newly
                .iter()
                .min_by_key(|&&ti| (self.last_arrival[ti].unwrap_or(i64::MIN), engine.tags()[ti].cursor_ms))
                .expect("two or more");
            for &ti in &newly {
                if ti != lead {
                    self.stale_leader[ti] = Some(lead);
                }
            }
        }
        let mut followers: Vec<Vec<usize>> = vec![vec![]; ntags];
        for ti in 0..ntags {
            if let Some(lead) = self.stale_leader[ti] {
                followers[lead].push(ti);
            }
        }
        // The components some tags feed: sorted names, their units joined,
        // and words for the detail.
        let describe = |tags: &[usize]| -> (Vec<String>, String, String) {
            let mut cis: Vec<u32> = tags.iter().flat_map(|&t| engine.consumers(t).iter().copied()).collect();
            cis.sort_unstable();
            cis.dedup();
            let mut affects: Vec<String> = cis.iter().map(|&ci| plan.components[ci as usize].name.clone()).collect();
            affects.sort();
            let mut units: Vec<&str> = cis.iter().map(|&ci| plan.components[ci as usize].unit.as_str()).collect();
            units.sort_unstable();
            units.dedup();
            let parts = match affects.len() {
                1 => format!("affects {}", affects[0]),
                n => format!(
                    "affects {n} components: {}",
                    listed(&affects.iter().map(String::as_str).collect::<Vec<_>>())
                ),
            };
            (affects, units.join(","), parts)
        };
        let mut evaluations = vec![];
        for (ti, tp) in plan.tags.iter().enumerate() {
            if engine.consumers(ti).is_empty() {
                continue;
            }
            let (affects, unit, parts) = describe(&[ti]);
            let (_, oor, badq) = faults[ti];
            // With no data from any tag the plant-level alarm stands for
            // every silence that begins: no new stale alarm, but one
            // already standing stays (no fleeting clear and re-raise).
            let stale_alarm = stale[ti] && self.stale_leader[ti].is_none() && (!no_data || was_alarmed(ti));
            // A first-out alarm lists every component of its group.
            let group: Vec<usize> = std::iter::once(ti).chain(followers[ti].iter().copied()).collect();
            let (group_affects, group_unit, group_parts) = describe(&group);
            let stale_detail = if followers[ti].is_empty() {
                format!("tag {} silent; {parts}", tp.name)
            } else {
                let names: Vec<&str> = followers[ti].iter().map(|&f| plan.tags[f].name.as_str()).collect();
                format!(
                    "tag {} silent, first out of {} tags silent together ({}): one cause likely; {group_parts}",
                    tp.name,
                    names.len() + 1,
                    listed(&names)
                )
            };
            let key = crate::alarm::record::key(&tp.name, AlarmIndex::SensorStale);
            if stale_alarm || book.record(&key).is_some() {
                evaluations.push((
                    tp.name.clone(),
                    group_unit,
                    group_affects,
                    AlarmIndex::SensorStale,
                    stale_alarm,
                    stale_detail,
                ));
            }
            for (index, active, detail) in [
                (
                    AlarmIndex::SensorOutOfRange,
                    oor,
                    format!("tag {} out of range or at an implausible time; {parts}", tp.name),
                ),
                (AlarmIndex::SensorBadQuality, badq, format!("tag {} reports bad quality; {parts}", tp.name)),
            ] {
                // No record until the fault first happens.
                let key = crate::alarm::record::key(&tp.name, index);
                if !active && book.record(&key).is_none() {
                    continue;
                }
                evaluations.push((tp.name.clone(), unit.clone(), affects.clone(), index, active, detail));
            }
        }
        for (name, unit, affects, index, active, detail) in evaluations {
            let detail = if active { detail } else { String::new() };
            let ev = book.evaluate_sensor(&name, &unit, &affects, index, active, &detail, t);
            out.extend(ev);
        }
        out
    }
}

/// The plant states in force now, from their tags' newest accepted
/// values (in the tag's own unit).
fn plant_state_rules(engine: &Engine, alarms: &AlarmConfig) -> Vec<crate::alarm::SuppressionRule> {
    let plan = engine.plan();
    alarms
        .plant_states
        .iter()
        .filter(|ps| {
            plan.tags.iter().position(|t| t.name == ps.tag).is_some_and(|ti| {
                let tp = &plan.tags[ti];
                engine.tags()[ti].last.is_some_and(|(_, v)| ps.holds(tp.unit.from_internal(v)))
            })
        })
        .map(|ps| ps.rule())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Time is an argument: tags that never report are judged silent once
    /// their hold time plus the grace has passed since the start by the
    /// `now` given, not before, and all of them together are one
    /// first-out alarm (common practice: one cause, one alarm).
    #[test]
    fn never_reporting_tags_are_one_first_out_alarm_after_their_hold_time() {
        let cfg = crate::settings::load_plan(std::path::Path::new("config/demo/plant.toml")).unwrap();
        let engine = Engine::new(cfg.plan.clone());
        let mut alarms: AlarmConfig = toml::from_str("").unwrap();
        alarms.no_data_alarm_s = 1e9; // the plant-level alarm out of the way
        let mut book = AlarmBook::default().with_config(alarms.clone());
        let start = 1_790_812_800_000i64;
        let mut judge = SensorJudge::new(cfg.plan.tags.len(), start);
        let grace_ms = (alarms.stale_grace_s * 1000.0) as i64;
        let hold = cfg.plan.tags.iter().map(|t| t.max_hold_ms).min().unwrap();
        let before = judge.judge(&engine, &mut book, &alarms, None, start + hold + grace_ms);
        assert!(before.is_empty(), "nothing at exactly hold + grace: {before:#?}");
        let all = cfg.plan.tags.iter().map(|t| t.max_hold_ms).max().unwrap();
        let ev = judge.judge(&engine, &mut book, &alarms, None, start + all + grace_ms + 1);
        let stale: Vec<&AlarmEvent> = ev.iter().filter(|e| e.index == AlarmIndex::SensorStale).collect();
        assert_eq!(stale.len(), 1, "one first-out alarm for the tags silent together: {ev:#?}");
    }
}
