//! Out of service and suppression by plant state: the two ways, besides a
//! shelve, an alarm is held silent while its condition is still followed.
//!
//! * **Out of service** (ISA-18.2): a person removes an alarm from service
//!   for maintenance or repair, with a reason and an end (at most
//!   [`MAX_OUT_OF_SERVICE_H`]); at the end, or when returned by command, it
//!   takes the state its condition implies, as after a shelve. Unlike a
//!   shelve (an operator's short-term measure, at most 720 h) it is meant
//!   for the time a repair takes; both are recorded with who and why.
//! * **Suppressed by design**: while a plant state the caller judges (for
//!   example "unit U2 offline": a pressure tag below a level) is in force,
//!   the alarms it names are `suppressed`: their changes are still recorded
//!   as events with state `suppressed` (journal, database, event topic),
//!   but nothing asks for an operator's attention. When the state ends
//!   each takes the state its condition implies: an active one is
//!   annunciated then.

use super::*;

/// Longest out-of-service period a command may ask for, hours (one year):
/// a repair that takes longer should be a configuration change, reviewed as
/// such. A choice of this program.
pub const MAX_OUT_OF_SERVICE_H: f64 = 8_784.0;

impl AlarmBook {
    pub(super) fn remove_from_service_keys(
        &mut self,
        keys: Vec<String>,
        until_ms: i64,
        by: &str,
        reason: &str,
        time_ms: i64,
    ) -> Vec<AlarmEvent> {
        let mut events = vec![];
        for k in keys {
            let rec = self.records.get_mut(&k).expect("target exists");
            rec.state = AlarmState::OutOfService;
            rec.since_ms = time_ms;
            rec.updated_ms = time_ms;
            rec.shelve = None;
            rec.severity = rec.condition;
            if rec.condition.is_none() {
                rec.threshold = None;
            }
            rec.out_of_service =
                Some(Shelve { until_ms, by: by.to_string(), reason: reason.to_string(), since_ms: time_ms });
            let until = rfc3339_ms(until_ms);
            let msg = format!(
                "{} {} removed from service by {by} until {until}: {}",
                rec.component,
                rec.index.label(),
                reason.trim()
            );
            let mut e = AlarmEvent::of(rec, Transition::RemovedFromService, rec.condition, rec.threshold, time_ms, msg);
            e.by = Some(by.to_string());
            e.reason = Some(reason.to_string());
            e.shelved_until = Some(until);
            events.push(e);
        }
        events
    }

    pub(super) fn return_to_service_keys(&mut self, keys: Vec<String>, by: &str, time_ms: i64) -> Vec<AlarmEvent> {
        let mut events = vec![];
        for k in keys {
            let rec = self.records.get_mut(&k).expect("target exists");
            if rec.state == AlarmState::OutOfService {
                let how = format!("returned to service by {by}");
                let mut e = lift_shelve(rec, Transition::ReturnedToService, &how, time_ms);
                e.by = Some(by.to_string());
                events.push(e);
            }
        }
        events
    }

    /// The plant states in force now and what they suppress. Records a
    /// rule newly matches become `suppressed` (an event only for one that
    /// was not normal); records no rule matches any more leave it (an
    /// event when their condition is active: they are annunciated now).
    /// Shelved and out-of-service records keep their state and return to
    /// the suppression, if still in force, when released.
    pub fn set_suppression(&mut self, rules: Vec<SuppressionRule>, time_ms: i64) -> Vec<AlarmEvent> {
        let mut events = vec![];
        if rules == self.suppression {
            return events;
        }
        for rec in self.records.values_mut() {
            let want = rules.iter().find(|r| r.matches(rec)).map(|r| r.name.clone());
            if want == rec.suppressed_by {
                continue;
            }
            let was = rec.suppressed_by.take();
            rec.suppressed_by = want.clone();
            rec.updated_ms = time_ms;
            if matches!(rec.state, AlarmState::Shelved | AlarmState::OutOfService) {
                continue;
            }
            match (was, want) {
                (None, Some(name)) => {
                    let shown = rec.state != AlarmState::Normal;
                    rec.state = AlarmState::Suppressed;
                    rec.since_ms = time_ms;
                    if shown {
                        let msg = format!("{} {} suppressed: {name}", rec.component, rec.index.label());
                        events.push(AlarmEvent::of(
                            rec,
                            Transition::Suppressed,
                            rec.condition,
                            rec.threshold,
                            time_ms,
                            msg,
                        ));
                    }
                }
                (Some(name), None) if rec.state == AlarmState::Suppressed => {
                    rec.since_ms = time_ms;
                    match rec.condition {
                        Some(s) => {
                            rec.state =
                                if rec.is_engineering() { AlarmState::Alert } else { AlarmState::Unacknowledged };
                            rec.severity = Some(s);
                            rec.acknowledged_by = None;
                            rec.acknowledged_ms = None;
                            let msg = format!(
                                "{} {} no longer suppressed ({name} ended); the condition is active at {s}",
                                rec.component,
                                rec.index.label()
                            );
                            events.push(AlarmEvent::of(
                                rec,
                                Transition::Unsuppressed,
                                Some(s),
                                rec.threshold,
                                time_ms,
                                msg,
                            ));
                        }
                        None => {
                            rec.state = AlarmState::Normal;
                            rec.severity = None;
                            rec.threshold = None;
                        }
                    }
                }
                _ => {}
            }
        }
        self.suppression = rules;
        events
    }

    /// The plant states in force.
    pub fn suppression(&self) -> &[SuppressionRule] {
        &self.suppression
    }
}
