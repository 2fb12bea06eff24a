//! The alarm book as a specification: every ISA-18.2 transition, deadband,
//! escalation, the lower-is-worse index, shelving, errors, persistence and
//! the caution on every message.

use super::*;
use crate::engine::plan::Levels;
use crate::engine::ComponentState;
use crate::settings::validate::{plan_settings, DEFAULT_HOURS_TO_CRITICAL, DEFAULT_LIFE_FRACTION};

const C: &str = "U2-SH3-OUTLET-LEG-A";
const U: &str = "U2";
const LF: AlarmIndex = AlarmIndex::CreepLifeFraction;
const H: i64 = 3_600_000;

/// Every index an operator alarm: the ISA-18.2 state machine as the
/// tests specify it (engineering alerts have their own tests).
fn operator_classes() -> std::collections::BTreeMap<AlarmIndex, RationaleSettings> {
    AlarmIndex::ALL
        .into_iter()
        .map(|i| (i, RationaleSettings { class: Some(AlarmClass::Operator), ..Default::default() }))
        .collect()
}

/// A book of operator alarms with the default delays.
fn book() -> AlarmBook {
    AlarmBook::new().with_config(AlarmConfig { rationale: operator_classes(), ..AlarmConfig::default() })
}

/// The same without on- or off-delays: the tests that specify the state
/// machine step by step (delays have their own tests).
fn undelayed() -> AlarmBook {
    AlarmBook::new().with_config(AlarmConfig {
        delays: AlarmIndex::ALL.into_iter().map(|i| (i, Delay::NONE)).collect(),
        rationale: operator_classes(),
        ..AlarmConfig::default()
    })
}

fn lf(book: &mut AlarmBook, value: f64, t: i64) -> Vec<AlarmEvent> {
    book.evaluate(C, U, LF, value, &DEFAULT_LIFE_FRACTION, t)
}

fn state(book: &AlarmBook) -> AlarmState {
    book.record(&format!("{C}/creep_life_fraction")).unwrap().state
}

fn one(events: Vec<AlarmEvent>) -> AlarmEvent {
    assert_eq!(events.len(), 1, "{events:#?}");
    events.into_iter().next().unwrap()
}

#[test]
fn normal_to_unacknowledged_when_the_condition_becomes_active() {
    let mut b = book();
    assert!(lf(&mut b, 0.2, 0).is_empty());
    assert_eq!(state(&b), AlarmState::Normal);
    let e = one(lf(&mut b, 0.35, H));
    assert_eq!(
        (e.transition, e.severity, e.state),
        (Transition::Activated, Some(Severity::Advisory), AlarmState::Unacknowledged)
    );
    let mut b = book();
    let e = one(lf(&mut b, 0.512, H));
    assert_eq!(e.message, "U2-SH3-OUTLET-LEG-A creep life fraction 0.512 reached the warning level 0.5");
    assert_eq!((e.value, e.threshold), (Some(0.512), Some(0.5)));
    assert_eq!(e.time, "1970-01-01T01:00:00.000Z");
    assert_eq!(e.caution, crate::CAUTION);
    // Same severity again: no event.
    assert!(lf(&mut b, 0.52, 2 * H).is_empty());
}

#[test]
fn acknowledge_then_clear_goes_back_to_normal() {
    let mut b = book();
    lf(&mut b, 0.55, 0);
    let e = one(b.acknowledge(C, Some(LF), "operator 7", H).unwrap());
    assert_eq!(
        (e.transition, e.state, e.by.as_deref()),
        (Transition::Acknowledged, AlarmState::Acknowledged, Some("operator 7"))
    );
    assert!(e.message.contains("acknowledged by operator 7"), "{}", e.message);
    // Acknowledging again is harmless.
    assert!(b.acknowledge(C, Some(LF), "operator 7", H).unwrap().is_empty());
    let e = one(lf(&mut b, 0.1, 2 * H));
    assert_eq!((e.transition, e.state, e.severity), (Transition::Cleared, AlarmState::Normal, Some(Severity::Warning)));
    assert!(
        e.message.contains("is back below the warning level 0.5 by more than its deadband 0.01; cleared"),
        "{}",
        e.message
    );
    let r = b.record(&format!("{C}/creep_life_fraction")).unwrap();
    assert_eq!((r.severity, r.condition), (None, None));
}

#[test]
fn clearing_unacknowledged_waits_for_an_acknowledge() {
    let mut b = book();
    lf(&mut b, 0.55, 0);
    let e = one(lf(&mut b, 0.1, H));
    assert_eq!((e.transition, e.state), (Transition::Cleared, AlarmState::RtnUnacknowledged));
    assert!(e.message.ends_with("cleared, awaiting acknowledge"), "{}", e.message);
    assert_eq!(b.current(C).unacknowledged, 1);
    let e = one(b.acknowledge(C, None, "op", 2 * H).unwrap());
    assert_eq!(
        (e.transition, e.state, e.severity),
        (Transition::Acknowledged, AlarmState::Normal, Some(Severity::Warning))
    );
    assert_eq!(state(&b), AlarmState::Normal);
}

#[test]
fn returned_to_normal_reactivates_to_unacknowledged() {
    let mut b = book();
    lf(&mut b, 0.35, 0);
    lf(&mut b, 0.1, H);
    assert_eq!(state(&b), AlarmState::RtnUnacknowledged);
    let e = one(lf(&mut b, 0.36, 2 * H));
    assert_eq!((e.transition, e.state), (Transition::Activated, AlarmState::Unacknowledged));
}

#[test]
fn escalation_reenters_unacknowledged() {
    let mut b = book();
    lf(&mut b, 0.51, 0);
    b.acknowledge(C, Some(LF), "op", H).unwrap();
    let e = one(lf(&mut b, 0.71, 2 * H));
    assert_eq!(
        (e.transition, e.severity, e.state),
        (Transition::Escalated, Some(Severity::Critical), AlarmState::Unacknowledged)
    );
    assert!(e.message.ends_with("reached the critical level 0.7 (was warning)"), "{}", e.message);
    let r = b.record(&format!("{C}/creep_life_fraction")).unwrap();
    assert_eq!(r.acknowledged_by, None);
    // Straight from unacknowledged too, skipping a level.
    let mut b = book();
    lf(&mut b, 0.31, 0);
    let e = one(lf(&mut b, 0.8, H));
    assert_eq!((e.transition, e.severity), (Transition::Escalated, Some(Severity::Critical)));
}

#[test]
fn stepping_down_keeps_the_acknowledge() {
    let mut b = book();
    lf(&mut b, 0.75, 0);
    b.acknowledge(C, Some(LF), "op", H).unwrap();
    let e = one(lf(&mut b, 0.6, 2 * H));
    assert_eq!(
        (e.transition, e.severity, e.state),
        (Transition::SteppedDown, Some(Severity::Warning), AlarmState::Acknowledged)
    );
    assert!(
        e.message.contains("back below the critical level 0.7") && e.message.ends_with("now at the warning level 0.5"),
        "{}",
        e.message
    );
}

#[test]
fn deadband_stops_chattering() {
    let mut b = book();
    // Around the warning level 0.5, inside its 0.01 band once reached.
    let seq = [0.49, 0.501, 0.497, 0.502, 0.4915, 0.5, 0.495, 0.503, 0.492, 0.499];
    let n: usize = seq.iter().enumerate().map(|(k, &v)| lf(&mut b, v, k as i64 * H).len()).sum();
    // 0.49 raises advisory, 0.501 escalates to warning; then nothing.
    assert_eq!(n, 2);
    // Past the band it steps down; back up it escalates again.
    assert_eq!(one(lf(&mut b, 0.489, 20 * H)).transition, Transition::SteppedDown);
    assert_eq!(one(lf(&mut b, 0.5, 21 * H)).transition, Transition::Escalated);
    // Without a band every crossing would be an event.
    let mut b = book().with_config(AlarmConfig {
        deadbands: [(LF, Deadband { fraction: 0.0, minimum: 0.0 })].into(),
        ..book().config().clone()
    });
    let n: usize = seq.iter().enumerate().map(|(k, &v)| lf(&mut b, v, k as i64 * H).len()).sum();
    assert_eq!(n, 9);
}

#[test]
fn hours_to_critical_is_lower_is_worse() {
    let mut b = undelayed();
    let idx = AlarmIndex::HoursToCritical;
    let mut ev = |v: f64, t: i64| b.evaluate(C, U, idx, v, &DEFAULT_HOURS_TO_CRITICAL, t);
    assert!(ev(30_000.0, 0).is_empty());
    let e = one(ev(17_000.0, H));
    assert_eq!((e.transition, e.severity), (Transition::Activated, Some(Severity::Warning)));
    assert_eq!(e.message, "U2-SH3-OUTLET-LEG-A projected hours to critical life fraction 17000 h fell to or below the warning level 17520 h");
    assert_eq!(one(ev(8_000.0, 2 * H)).severity, Some(Severity::Critical));
    // Within 2 % above 8760 h: still critical.
    assert!(ev(8_900.0, 3 * H).is_empty());
    let e = one(ev(9_000.0, 4 * H));
    assert_eq!((e.transition, e.severity), (Transition::SteppedDown, Some(Severity::Warning)));
    assert!(
        e.message.contains("back above the critical level 8760 h by more than its deadband 175.2 h"),
        "{}",
        e.message
    );
    assert!(ev(17_800.0, 5 * H).is_empty());
    // Damage stopped: no projection, the alarm clears.
    let e = one(ev(f64::INFINITY, 6 * H));
    assert_eq!((e.transition, e.value), (Transition::Cleared, None));
    assert!(e.message.contains("not projected"), "{}", e.message);
}

#[test]
fn shelving_suppresses_and_expiry_restores() {
    let mut b = book();
    lf(&mut b, 0.51, 0);
    b.acknowledge(C, Some(LF), "op", H).unwrap();
    let e = one(b.shelve(C, Some(LF), 9 * H, "op", "thermocouple swap", H).unwrap());
    assert_eq!((e.transition, e.state), (Transition::Shelved, AlarmState::Shelved));
    assert_eq!((e.by.as_deref(), e.reason.as_deref()), (Some("op"), Some("thermocouple swap")));
    assert_eq!(e.shelved_until.as_deref(), Some("1970-01-01T09:00:00.000Z"));
    // No events while shelved, whatever the value does.
    assert!(lf(&mut b, 0.75, 2 * H).is_empty());
    assert!(lf(&mut b, 0.1, 3 * H).is_empty());
    assert!(lf(&mut b, 0.72, 4 * H).is_empty());
    assert!(b.acknowledge(C, Some(LF), "op", 4 * H).unwrap().is_empty());
    assert!(b.tick(8 * H).is_empty());
    assert_eq!(b.current(C).worst_severity, None);
    assert_eq!(b.current(C).shelved, 1);
    // Expiry: active, so unacknowledged at what the condition implies.
    let e = one(b.tick(9 * H));
    assert_eq!(
        (e.transition, e.state, e.severity),
        (Transition::ShelveExpired, AlarmState::Unacknowledged, Some(Severity::Critical))
    );
    assert_eq!(e.threshold, Some(0.7));
    assert!(b.tick(10 * H).is_empty());
    assert_eq!(b.current(C).worst_severity, Some(Severity::Critical));
}

#[test]
fn shelve_expiry_of_a_clear_alarm_is_normal_and_evaluation_expires_too() {
    let mut b = book();
    lf(&mut b, 0.51, 0);
    b.shelve(C, None, 2 * H, "op", "r", 0).unwrap();
    assert!(lf(&mut b, 0.1, H).is_empty());
    // The next evaluation after the end lifts the shelve first.
    let ev = lf(&mut b, 0.1, 3 * H);
    let e = one(ev);
    assert_eq!((e.transition, e.state), (Transition::ShelveExpired, AlarmState::Normal));
    assert!(e.message.ends_with("the condition is clear"), "{}", e.message);
}

#[test]
fn unshelve_by_command() {
    let mut b = book();
    lf(&mut b, 0.31, 0);
    b.shelve(&format!("{C}/creep_life_fraction"), None, 5 * H, "op", "r", 0).unwrap();
    let e = one(b.unshelve(C, Some(LF), "op 2", H).unwrap());
    assert_eq!(
        (e.transition, e.state, e.by.as_deref()),
        (Transition::Unshelved, AlarmState::Unacknowledged, Some("op 2"))
    );
    assert!(b.unshelve(C, Some(LF), "op 2", H).unwrap().is_empty());
    // An alarm that had returned to normal unacknowledged comes back normal.
    lf(&mut b, 0.1, 2 * H);
    assert_eq!(state(&b), AlarmState::RtnUnacknowledged);
    b.shelve(C, Some(LF), 3 * H, "op", "r", 2 * H).unwrap();
    let r = b.record(&format!("{C}/creep_life_fraction")).unwrap();
    assert_eq!((r.severity, r.threshold), (None, None));
    let e = one(b.unshelve(C, Some(LF), "op", 2 * H).unwrap());
    assert_eq!((e.state, e.severity), (AlarmState::Normal, None));
    assert!(b.tick(6 * H).is_empty());
}

#[test]
fn shelve_window_is_checked() {
    let mut b = book();
    lf(&mut b, 0.31, 0);
    let e = b.shelve(C, Some(LF), H, "op", "r", H).unwrap_err();
    assert!(matches!(e, AlarmError::ShelveNotAhead { .. }), "{e}");
    let e = b.shelve(C, Some(LF), 1_000 * H, "op", "r", 0).unwrap_err();
    assert!(e.to_string().contains("at most 720 h"), "{e}");
}

#[test]
fn unknown_alarms_are_errors_that_name_them() {
    let mut b = book();
    lf(&mut b, 0.1, 0);
    let e = b.acknowledge(C, Some(AlarmIndex::WearIndex), "op", 0).unwrap_err().to_string();
    assert!(
        e.contains("no alarm \"U2-SH3-OUTLET-LEG-A/wear_index\"")
            && e.contains("U2-SH3-OUTLET-LEG-A/creep_life_fraction"),
        "{e}"
    );
    let e = b.acknowledge("U9-NOPE", None, "op", 0).unwrap_err().to_string();
    assert!(e.contains("\"U9-NOPE\""), "{e}");
    let e = b.shelve("U9-NOPE", Some(LF), H, "op", "r", 0).unwrap_err().to_string();
    assert!(e.contains("\"U9-NOPE/creep_life_fraction\""), "{e}");
    assert!(b.unshelve("U9-NOPE", None, "op", 0).is_err());
}

#[test]
fn nan_changes_nothing() {
    let mut b = book();
    lf(&mut b, 0.51, 0);
    assert!(lf(&mut b, f64::NAN, H).is_empty());
    assert_eq!(b.record(&format!("{C}/creep_life_fraction")).unwrap().value, 0.51);
}

#[test]
fn conditions_follow_the_same_states() {
    let mut b = book();
    let idx = AlarmIndex::SensorStale;
    assert!(b.evaluate_condition(C, U, idx, false, "", 0).is_empty());
    let e = one(b.evaluate_condition(C, U, idx, true, "tag TT-301 has had no sample for 20 min", H));
    assert_eq!((e.severity, e.state, e.threshold), (Some(Severity::Warning), AlarmState::Unacknowledged, None));
    assert_eq!(e.message, "U2-SH3-OUTLET-LEG-A sensor stale: tag TT-301 has had no sample for 20 min");
    assert!(b.evaluate_condition(C, U, idx, true, "", 2 * H).is_empty());
    let e = one(b.evaluate_condition(C, U, idx, false, "", 3 * H));
    assert_eq!((e.transition, e.state), (Transition::Cleared, AlarmState::RtnUnacknowledged));
    assert!(e.message.starts_with("U2-SH3-OUTLET-LEG-A sensor stale cleared, awaiting acknowledge"), "{}", e.message);
    let s = one(b.evaluate_condition("service", "", AlarmIndex::ServiceHealth, true, "outbox over quota", 0));
    assert_eq!(s.key(), "service/service_health");
}

#[test]
fn book_round_trips_through_json_and_records() {
    let config = AlarmConfig {
        deadbands: [(AlarmIndex::HoursToCritical, Deadband { fraction: 0.05, minimum: 24.0 })].into(),
        ..AlarmConfig::default()
    };
    let mut b = book().with_config(config.clone());
    lf(&mut b, 0.75, 0);
    b.acknowledge(C, Some(LF), "op", H).unwrap();
    b.evaluate(C, U, AlarmIndex::HoursToCritical, f64::INFINITY, &DEFAULT_HOURS_TO_CRITICAL, H);
    b.evaluate_condition(C, U, AlarmIndex::SensorBadQuality, true, "quality 0x00", H);
    b.shelve(C, Some(AlarmIndex::SensorBadQuality), 5 * H, "op", "known fault", H).unwrap();
    let json = serde_json::to_string(&b).unwrap();
    let back: AlarmBook = serde_json::from_str(&json).unwrap();
    assert_eq!(serde_json::to_string(&back).unwrap(), json);
    assert!(back.record(&format!("{C}/hours_to_critical")).unwrap().value.is_infinite());
    // Record by record, as the store keeps them.
    let stored: Vec<(String, String)> = b.records().map(|r| (r.key(), serde_json::to_string(r).unwrap())).collect();
    assert_eq!(stored.len(), 3);
    assert_eq!(back.config(), &config);
    let restored = AlarmBook::from_records(stored.iter().map(|(_, j)| serde_json::from_str::<AlarmRecord>(j).unwrap()));
    let restored = restored.with_config(config);
    assert_eq!(serde_json::to_string(&restored).unwrap(), json);
    // And it carries on where it left off.
    let mut restored = restored;
    assert_eq!(one(restored.tick(5 * H)).transition, Transition::ShelveExpired);
    assert!(lf(&mut restored, 0.76, 6 * H).is_empty());
}

#[test]
fn summary_of_a_component() {
    let mut b = book();
    lf(&mut b, 0.55, 0);
    b.evaluate_condition(C, U, AlarmIndex::SensorStale, true, "TT", 0);
    b.evaluate(
        C,
        U,
        AlarmIndex::WearIndex,
        0.9,
        &Levels { advisory: None, warning: Some(0.5), critical: Some(0.8) },
        0,
    );
    b.shelve(C, Some(AlarmIndex::WearIndex), H, "op", "r", 0).unwrap();
    b.acknowledge(C, Some(AlarmIndex::SensorStale), "op", 0).unwrap();
    let s = b.current(C);
    assert_eq!((s.worst_severity, s.active, s.unacknowledged, s.shelved), (Some(Severity::Warning), 2, 1, 1));
    assert_eq!(s.unit, "U2");
    assert_eq!(s.alarms.len(), 3);
    let j: serde_json::Value = serde_json::from_str(&s.to_json()).unwrap();
    assert_eq!(j["caution"], crate::CAUTION);
    assert_eq!(j["worst_severity"], "warning");
    assert_eq!(b.components(), vec![C]);
    assert!(b.current("other").alarms.is_empty());
}

#[test]
fn commands_drive_the_book() {
    let mut b = book();
    lf(&mut b, 0.55, 0);
    let cmd = parse_command(br#"{"action":"shelve","component":"U2-SH3-OUTLET-LEG-A","index":"creep_life_fraction","duration_h":8,"by":"operator 7","reason":"probe swap"}"#).unwrap();
    let e = one(b.apply(&cmd, H).unwrap());
    assert_eq!(e.shelved_until.as_deref(), Some("1970-01-01T09:00:00.000Z"));
    let cmd = parse_command(
        br#"{"action":"unshelve","component":"U2-SH3-OUTLET-LEG-A/creep_life_fraction","by":"operator 7"}"#,
    )
    .unwrap();
    assert_eq!(one(b.apply(&cmd, 2 * H).unwrap()).state, AlarmState::Unacknowledged);
    let cmd =
        parse_command(br#"{"action":"acknowledge","component":"U2-SH3-OUTLET-LEG-A","by":"operator 7"}"#).unwrap();
    assert_eq!(one(b.apply(&cmd, 3 * H).unwrap()).state, AlarmState::Acknowledged);
    let cmd =
        parse_command(br#"{"action":"acknowledge","component":"U2-OTHER","index":"creep_strain","by":"operator 7"}"#)
            .unwrap();
    assert!(b.apply(&cmd, 3 * H).unwrap_err().to_string().contains("U2-OTHER/creep_strain"));
}

/// Events of all eight transitions, from one alarm's life.
fn every_kind_of_event() -> Vec<AlarmEvent> {
    let mut b = book();
    let mut all = vec![];
    all.extend(lf(&mut b, 0.35, 0));
    all.extend(lf(&mut b, 0.75, H));
    all.extend(b.acknowledge(C, None, "op", H).unwrap());
    all.extend(lf(&mut b, 0.6, 2 * H));
    all.extend(lf(&mut b, 0.1, 3 * H));
    all.extend(lf(&mut b, 0.35, 4 * H));
    all.extend(b.shelve(C, None, 6 * H, "op", "r", 4 * H).unwrap());
    all.extend(b.unshelve(C, None, "op", 5 * H).unwrap());
    all.extend(b.shelve(C, None, 6 * H, "op", "r", 5 * H).unwrap());
    all.extend(b.tick(7 * H));
    all.extend(b.evaluate_condition(C, U, AlarmIndex::SensorOutOfRange, true, "TT above 900 degC", 7 * H));
    let kinds: std::collections::BTreeSet<&str> = all.iter().map(|e| e.transition.name()).collect();
    assert_eq!(kinds.len(), 8, "{kinds:?}");
    all
}

#[test]
fn every_event_carries_the_caution() {
    for e in &every_kind_of_event() {
        let j: serde_json::Value = serde_json::from_str(&e.to_json()).unwrap();
        assert_eq!(j["caution"], crate::CAUTION, "{}", e.to_json());
        assert!(j["message"].as_str().unwrap().starts_with(C));
        assert_eq!(j["time_ms"], e.time_ms);
    }
}

#[test]
fn events_read_back_from_their_json_are_the_same_events() {
    // The alarm journal stores `to_json` and the ledger reads it back.
    for e in every_kind_of_event() {
        let back: AlarmEvent =
            serde_json::from_str(&e.to_json()).unwrap_or_else(|err| panic!("{err}: {}", e.to_json()));
        assert_eq!(back, e);
    }
}

#[test]
fn event_as_a_database_point() {
    let mut b = book();
    let e = one(lf(&mut b, 0.512, 1_700_000_000_000));
    let p = e.to_point("North Works");
    assert_eq!(p.measurement, "alarm_event");
    assert_eq!(p.time_ns, 1_700_000_000_000_000_000);
    let tags: Vec<(&str, &str)> = p.tags.iter().map(|(k, v)| (k.as_str(), v.as_str())).collect();
    assert_eq!(
        tags,
        [
            ("plant", "North Works"),
            ("unit", U),
            ("component", C),
            ("index", "creep_life_fraction"),
            ("severity", "warning"),
            ("state", "unacknowledged"),
            // Life fraction made an operator alarm by `book()`; consequence
            // major, a week to respond: medium by the matrix.
            ("class", "operator"),
            ("priority", "medium")
        ]
    );
    let line = p.to_line().unwrap();
    assert!(line.contains("value=0.512,threshold=0.5,message=\"U2-SH3-OUTLET-LEG-A creep life fraction 0.512 reached the warning level 0.5\""), "{line}");
}

// The engine tests' plant: a tube and a fretting support.
use crate::engine::tests::TEST_CONFIG as CONFIG;

#[test]
fn component_evaluation_runs_the_indices_that_apply() {
    let plan = plan_settings("test", toml::from_str(CONFIG).unwrap()).unwrap().plan;
    let tube = plan.components.iter().find(|c| c.name == "TUBE").unwrap();
    let support = plan.components.iter().find(|c| c.name == "SUPPORT").unwrap();
    let mut b = undelayed();

    let mut st = ComponentState::new(tube);
    st.integrated_to_ms = Some(0);
    st.life_fraction = 0.55;
    st.recent_life_fraction_rate_per_h = 0.15 / 10_000.0; // 10 000 h to 0.7
                                                          // A settled recent rate (a window of 1000 operating hours).
    st.recent_weight = 1.0 - (-1000.0f64 / 720.0).exp();
    st.recent_window_h = 1000.0;
    st.creep_strain = 0.001;
    st.now.metal_temperature_k = tube.design_temperature_k.unwrap() + 3.0;
    let ev = b.evaluate_component(tube, &st, H);
    let mut got: Vec<(&str, Option<Severity>)> = ev.iter().map(|e| (e.index.name(), e.severity)).collect();
    got.sort();
    assert_eq!(
        got,
        [
            ("creep_life_fraction", Some(Severity::Warning)),
            ("hours_to_critical", Some(Severity::Warning)),
            ("metal_temperature_over_design", Some(Severity::Warning)),
        ]
    );
    let keys: Vec<String> = b.records().map(|r| r.key()).collect();
    assert_eq!(
        keys,
        [
            "TUBE/creep_life_fraction",
            "TUBE/creep_strain",
            "TUBE/hours_to_critical",
            "TUBE/metal_temperature_over_design"
        ]
    );
    let hours = b.record("TUBE/hours_to_critical").unwrap().value;
    assert!((hours - 10_000.0).abs() < 1e-6, "{hours}");

    // An unmonitored temperature leaves the over-design alarm as it was.
    st.now.unmonitored = true;
    st.now.metal_temperature_k = 0.0;
    assert!(b.evaluate_component(tube, &st, 2 * H).is_empty());

    let mut st = ComponentState::new(support);
    st.wear_depth_mm = 0.85;
    let e = one(b.evaluate_component(support, &st, H));
    assert_eq!((e.index, e.severity), (AlarmIndex::WearIndex, Some(Severity::Critical)));
    assert!(b.record("SUPPORT/creep_life_fraction").is_none());

    // Book-wide damage-rate levels switch that index on.
    let mut b = book().with_config(AlarmConfig {
        damage_rate: Levels { advisory: None, warning: Some(1e-5), critical: None },
        ..undelayed().config().clone()
    });
    let mut st = ComponentState::new(tube);
    st.recent_life_fraction_rate_per_h = 2e-5;
    let ev = b.evaluate_component(tube, &st, H);
    assert!(
        ev.iter()
            .any(|e| e.index == AlarmIndex::DamageRate
                && e.message.contains("2e-5 /h reached the warning level 1e-5 /h")),
        "{ev:#?}"
    );
}

#[test]
fn hours_to_critical_while_settling_uses_the_larger_design_rate() {
    let plan = plan_settings("test", toml::from_str(CONFIG).unwrap()).unwrap().plan;
    let tube = plan.components.iter().find(|c| c.name == "TUBE").unwrap();
    assert_eq!(tube.recent_rate_settling_h, 168.0, "the documented default");
    // Design rupture life of the test tube, from the definitions: hoop
    // stress on the mean diameter σ = p·(Do − t)/(2t) at 180 bar; the
    // minimum curve by the stress-factor rule is the mean curve at σ/0.8;
    // Larson-Miller T·(C + log10 t_r) = P(log10 σ) with the synthetic
    // grade's C = 20, P(x) = 28000 − 1500x − 800x², at 560 °C.
    let sigma: f64 = 18.0 * (50.8 - 6.0) / 12.0 / 0.8;
    let x = sigma.log10();
    let life_h = 10f64.powf((28000.0 - 1500.0 * x - 800.0 * x * x) / (560.0 + 273.15) - 20.0);
    let mut st = ComponentState::new(tube);
    st.integrated_to_ms = Some(0);
    st.first_sample_ms = Some(0);
    st.life_fraction = 0.55;
    // Ten operating hours at a rate far below the design rate.
    st.recent_life_fraction_rate_per_h = 1e-9;
    st.recent_weight = 1.0 - (-10.0f64 / 720.0).exp();
    st.recent_window_h = 10.0;
    let mut b = book();
    b.evaluate_component(tube, &st, H);
    let hours = b.record("TUBE/hours_to_critical").unwrap().value;
    let want = (0.7 - 0.55) * life_h;
    assert!((hours / want - 1.0).abs() < 1e-9, "settling: {hours} h, design projection {want} h");
    // Settled: the recent rate alone.
    st.recent_window_h = 168.0;
    b.evaluate_component(tube, &st, 2 * H);
    let hours = b.record("TUBE/hours_to_critical").unwrap().value;
    assert!((hours / (0.15 / 1e-9) - 1.0).abs() < 1e-9, "settled: {hours} h");
}

/// `[alarms] max_shelve_h` shortens the longest shelve below the built-in
/// ceiling of 720 h (30 days); it cannot lengthen it. ISA-18.2 asks that
/// shelving be time-limited (common practice: the length is the plant's
/// choice).
#[test]
fn a_configured_shelve_limit_is_enforced_and_never_above_the_ceiling() {
    assert_eq!(AlarmConfig::default().max_shelve_h, MAX_SHELVE_H, "default: the ceiling, 720 h");
    let mut b = book().with_config(AlarmConfig { max_shelve_h: 24.0, ..book().config().clone() });
    lf(&mut b, 0.4, 0);
    let e = b.shelve(C, Some(LF), 25 * H, "op", "r", 0).unwrap_err();
    assert!(matches!(e, AlarmError::ShelveTooLong { max_h, .. } if max_h == 24.0), "{e}");
    let cmd = parse_command(
        br#"{"action":"shelve","component":"U2-SH3-OUTLET-LEG-A","duration_h":100,"by":"op","reason":"r"}"#,
    )
    .unwrap();
    assert!(b.apply(&cmd, 0).is_err(), "a command beyond the configured limit is refused");
    assert_eq!(b.current(C).shelved, 0);
    b.shelve(C, Some(LF), 24 * H, "op", "r", 0).unwrap();
    assert_eq!(b.current(C).shelved, 1);
    // A configured value above the ceiling does not lengthen it.
    let mut b = book().with_config(AlarmConfig { max_shelve_h: 10_000.0, ..book().config().clone() });
    lf(&mut b, 0.4, 0);
    assert!(b.shelve(C, Some(LF), 721 * H, "op", "r", 0).is_err());
}

#[test]
fn sensor_alarms_are_per_tag_and_acknowledged_by_tag_component_unit_or_all() {
    let mut b = book();
    let affects = vec!["A".to_string(), "B".to_string(), "C".to_string()];
    let ev = b.evaluate_sensor("PT-1", "U1,U2", &affects, AlarmIndex::SensorStale, true, "tag PT-1 silent", 0);
    assert_eq!(one(ev).component, "PT-1");
    b.evaluate("A", "U1", LF, 0.55, &DEFAULT_LIFE_FRACTION, 0);
    b.evaluate("D", "U3", LF, 0.55, &DEFAULT_LIFE_FRACTION, 0);
    // Every component it affects shows it; one record only.
    for c in ["A", "B", "C"] {
        assert!(b.current(c).alarms.iter().any(|r| r.component == "PT-1"), "{c}");
    }
    assert_eq!(b.records().filter(|r| r.index == AlarmIndex::SensorStale).count(), 1);
    let cmd = |json: &str| parse_command(json.as_bytes()).unwrap();
    // By component: its own alarms and those of the tags it reads.
    let ev = b.apply(&cmd(r#"{"action":"acknowledge","component":"B","by":"op 7"}"#), H).unwrap();
    assert_eq!(one(ev).component, "PT-1");
    assert_eq!(b.record("PT-1/sensor_stale").unwrap().acknowledged_by.as_deref(), Some("op 7"));
    // By unit: the tag's alarm belongs to both units of its components.
    let ev = b.apply(&cmd(r#"{"action":"acknowledge","unit":"U1","by":"op 7"}"#), H).unwrap();
    assert_eq!(one(ev).key(), "A/creep_life_fraction");
    assert!(matches!(
        b.apply(&cmd(r#"{"action":"acknowledge","unit":"U9","by":"op"}"#), H),
        Err(AlarmError::UnknownUnit { .. })
    ));
    assert!(matches!(
        b.apply(&cmd(r#"{"action":"acknowledge","tag":"A","by":"op"}"#), H),
        Err(AlarmError::UnknownTag { .. })
    ));
    // All: what is left.
    let ev = b.apply(&cmd(r#"{"action":"acknowledge","all":true,"by":"op 8"}"#), 2 * H).unwrap();
    assert_eq!(one(ev).key(), "D/creep_life_fraction");
    assert_eq!(b.summary_of(cmd(r#"{"action":"acknowledge","all":true,"by":"op"}"#).target()).unacknowledged, 0);
    // By tag, shelving.
    let ev = b.apply(&cmd(r#"{"action":"shelve","tag":"PT-1","by":"op","reason":"TX swap","duration_h":4}"#), 3 * H);
    assert_eq!(one(ev.unwrap()).state, AlarmState::Shelved);
}

/// Uniform noise in [-1, 1] from a fixed linear congruential sequence
/// (Numerical Recipes' 32-bit constants, from memory), so the test is
/// repeatable.
fn noise(n: usize) -> Vec<f64> {
    let mut x: u32 = 12_345;
    (0..n)
        .map(|_| {
            x = x.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            (x as f64 / u32::MAX as f64) * 2.0 - 1.0
        })
        .collect()
}

/// Activations of the over-design alarm for a metal temperature at
/// `mean_k` from design with ±`amp_k` noise, one sample a second.
fn over_design_activations(book: &mut AlarmBook, mean_k: f64, amp_k: f64, seconds: usize) -> usize {
    let levels = Levels { advisory: None, warning: Some(0.0), critical: None };
    noise(seconds)
        .into_iter()
        .enumerate()
        .map(|(s, n)| {
            book.evaluate(C, U, AlarmIndex::MetalTemperatureOverDesign, mean_k + amp_k * n, &levels, s as i64 * 1000)
                .into_iter()
                .filter(|e| e.transition == Transition::Activated)
                .count()
        })
        .sum()
}

#[test]
fn noise_around_the_design_temperature_does_not_chatter_with_the_defaults() {
    // The scenario measured in issue 11: a tube at design + 0.3 K with
    // ±1.5 K of thermocouple noise activated 5 times in 180 s. An alarm
    // that comes and goes with noise is a chattering alarm (common
    // practice: ISA-18.2 / EEMUA 191 count it as bad performance).
    let mut b = book();
    let n = over_design_activations(&mut b, 0.3, 1.5, 180);
    assert!(n <= 1, "design + 0.3 K: {n} activations in 180 s");
    // Just below design, noise alone crossing the level is not an
    // exceedance held for the on-delay: no alarm at all.
    let mut b = book();
    let n = over_design_activations(&mut b, -0.3, 1.5, 600);
    assert_eq!(n, 0, "design - 0.3 K: {n} activations in 600 s");
    // A real, lasting exceedance still alarms, once.
    let mut b = book();
    assert_eq!(over_design_activations(&mut b, 5.0, 1.5, 600), 1);
}

#[test]
fn life_fraction_is_an_engineering_alert_that_never_stands_on_the_console() {
    // Issue 11: life fraction and wear levels can never clear, so as
    // operator alarms they stood unacknowledged or acknowledged for ever.
    let mut b = AlarmBook::new();
    let e = one(b.evaluate(C, U, LF, 0.55, &DEFAULT_LIFE_FRACTION, 0));
    assert_eq!((e.transition, e.state), (Transition::Activated, AlarmState::Alert));
    let r = e.rationale.clone().expect("events carry their rationalisation");
    assert_eq!(r.class, AlarmClass::Engineering);
    assert!(e.to_json().contains("\"class\":\"engineering\"") && e.to_json().contains("\"priority\":"));
    let s = b.current(C);
    assert_eq!((s.active, s.unacknowledged, s.worst_severity), (0, 0, None), "not on the operator's console");
    assert_eq!((s.alerts, s.worst_alert_severity), (1, Some(Severity::Warning)), "but delivered and recorded");
    // Nothing to acknowledge; escalation is a new alert, still no acknowledge.
    assert!(b.acknowledge(C, Some(LF), "op", H).unwrap().is_empty());
    let e = one(b.evaluate(C, U, LF, 0.75, &DEFAULT_LIFE_FRACTION, 2 * H));
    assert_eq!((e.transition, e.state), (Transition::Escalated, AlarmState::Alert));
    // Made an operator alarm by configuration, the record asks for an
    // acknowledge again (without an event: nothing happened in the plant).
    let cfg = AlarmConfig { rationale: operator_classes(), ..AlarmConfig::default() };
    b.set_config(cfg);
    assert_eq!(state(&b), AlarmState::Unacknowledged);
    // A record stored unacknowledged by an older version becomes an alert.
    let stored: Vec<AlarmRecord> = b.records().cloned().collect();
    let b = AlarmBook::from_records(stored).with_config(AlarmConfig::default());
    assert_eq!(state(&b), AlarmState::Alert);
}

#[test]
fn rationalisation_is_per_index_then_per_component() {
    let mut cfg = AlarmConfig::default();
    cfg.rationale
        .insert(AlarmIndex::SensorStale, RationaleSettings { time_to_respond_min: Some(10.0), ..Default::default() });
    cfg.component_rationale.insert(
        "TE-1".into(),
        [(
            AlarmIndex::SensorStale,
            RationaleSettings {
                consequence: Some(Consequence::Severe),
                corrective_action: Some("switch to the spare element".into()),
                ..Default::default()
            },
        )]
        .into(),
    );
    let mut b = AlarmBook::new().with_config(cfg);
    let e = one(b.evaluate_sensor("TE-1", U, &[C.to_string()], AlarmIndex::SensorStale, true, "silent", 0));
    let r = e.rationale.unwrap();
    assert_eq!((r.class, r.consequence, r.time_to_respond_min), (AlarmClass::Operator, Consequence::Severe, 10.0));
    assert_eq!(r.corrective_action, "switch to the spare element");
    assert_eq!(r.priority, Priority::Urgent, "severe within 15 min, by the matrix");
    let e = one(b.evaluate_sensor("TE-2", U, &[C.to_string()], AlarmIndex::SensorStale, true, "silent", 0));
    assert_eq!(e.rationale.unwrap().priority, Priority::Medium, "moderate within 15 min");
}

#[test]
fn summaries_at_once_equal_one_by_one() {
    let mut b = book();
    let affects = vec!["A".to_string(), "B".to_string()];
    b.evaluate_sensor("PT-1", "U1", &affects, AlarmIndex::SensorStale, true, "silent", 0);
    b.evaluate("A", "U1", LF, 0.55, &DEFAULT_LIFE_FRACTION, 0);
    assert_eq!(b.components(), ["A", "B", "PT-1"], "B is listed: its state shows the tag's alarm");
    let names = b.components();
    let together = b.summaries(names.iter().copied());
    let one_by_one: Vec<ComponentAlarmSummary> = names.iter().map(|c| b.current(c)).collect();
    assert_eq!(together, one_by_one);
}

#[test]
fn journal_events_written_before_rationalisation_still_read() {
    let old = r#"{"component":"C","unit":"U2","index":"creep_life_fraction","transition":"activated","severity":"warning","state":"unacknowledged","value":0.51,"threshold":0.5,"time":"1970-01-01T00:00:00.000Z","time_ms":0,"message":"m","caution":"x"}"#;
    let e: AlarmEvent = serde_json::from_str(old).unwrap();
    assert_eq!((e.seq, e.rationale.is_none(), e.affects.is_empty()), (None, true, true));
    // And a new one round-trips with everything.
    let mut b = AlarmBook::new();
    let mut e = one(b.evaluate_sensor("T", "U", &["C".into()], AlarmIndex::SensorStale, true, "silent", 0));
    e.seq = Some(7);
    let back: AlarmEvent = serde_json::from_str(&e.to_json()).unwrap();
    assert_eq!(back, e);
}
