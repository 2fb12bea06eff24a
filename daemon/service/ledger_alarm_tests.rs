//! The ledger's sensor alarms judged as an alarm-management review would
//! (issue 11): one fault, one alarm. Runs the real ledger thread's code on
//! the demo plant without a broker (samples go in as decoded MQTT
//! messages; nothing is published). The targets are the usual
//! alarm-management performance figures (common practice: ISA-18.2 /
//! IEC 62682 and EEMUA 191): no more than about one alarm per operator per
//! 10 minutes, no floods from one common cause, no chattering.

use super::*;
use crate::alarm::{AlarmEvent, Transition};

/// Wall clock of the test: samples are stamped a day before it.
fn t0() -> i64 {
    now_ms() - 86_400_000
}

/// A ledger on the demo plant with tags on `p/{tag}` (JSON payloads) and
/// `extra` appended to its service settings.
pub(super) fn ledger_with(dir: &std::path::Path, extra: &str) -> Ledger {
    let cfg = crate::settings::load_plan(std::path::Path::new("config/demo/plant.toml")).unwrap();
    let text = format!(
        "[store]\npath = {:?}\n[mqtt]\n[[mqtt.subscription]]\ntopic = \"p/{{tag}}\"\n{extra}",
        dir.join("ledger.db")
    );
    let mut service = ServiceSettings::from_settings(&toml::from_str(&text).unwrap()).unwrap();
    service.store.create_if_missing = true;
    let (client, _eventloop) = AsyncClient::new(rumqttc::MqttOptions::new("unit", "127.0.0.1", 9), 100);
    let (snap_tx, _snap_rx) = watch::channel(Arc::new(Snapshot::default()));
    Ledger::open(cfg, service, client, snap_tx).unwrap()
}

/// The middle of a tag's valid range (engineering units): always accepted.
pub(super) fn good_value(l: &Ledger, tag: &str) -> f64 {
    let tp = l.engine.plan().tags.iter().find(|t| t.name == tag).unwrap();
    tp.valid_range.map_or(10.0, |[lo, hi]| 0.5 * (lo + hi))
}

/// One sample of `tag` as the intake task hands it over.
pub(super) fn feed(l: &mut Ledger, tag: &str, t_ms: i64, value: f64, quality: &str) {
    let payload = format!(r#"{{"value":{value},"timestamp":{t_ms},"quality":"{quality}"}}"#);
    l.sample(&format!("p/{tag}"), payload.as_bytes(), now_ms());
}

/// Every tag of the plant except `skip`, good, at `t_ms`.
pub(super) fn feed_all(l: &mut Ledger, t_ms: i64, skip: &[&str]) {
    let names: Vec<String> = l.engine.plan().tags.iter().map(|t| t.name.clone()).collect();
    for n in names.iter().filter(|n| !skip.contains(&n.as_str())) {
        let v = good_value(l, n);
        feed(l, n, t_ms, v, "good");
    }
}

/// Run the sensor check now (it is rate-limited to every 500 ms of wall
/// time) and commit; the events it raised.
pub(super) fn check(l: &mut Ledger) -> Vec<AlarmEvent> {
    l.last_sensor_check = Instant::now() - Duration::from_secs(1);
    let before = l.batch.events().len();
    l.sensor_check();
    let ev: Vec<AlarmEvent> = l.batch.events()[before..].to_vec();
    l.commit();
    ev
}

fn activated(ev: &[AlarmEvent]) -> Vec<&AlarmEvent> {
    ev.iter().filter(|e| e.transition == Transition::Activated).collect()
}

#[test]
fn a_shared_transmitter_going_silent_is_one_alarm() {
    // U2.SH3.PT-301 is the pressure input of three demo components.
    let dir = tempfile::tempdir().unwrap();
    let mut l = ledger_with(dir.path(), "");
    let start = t0();
    for m in 0..=5 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    assert!(activated(&check(&mut l)).is_empty(), "all tags fresh: no alarm");
    // PT-301 silent for 10 minutes of event time (its hold is 300 s).
    for m in 6..=15 {
        feed_all(&mut l, start + m * 60_000, &["U2.SH3.PT-301"]);
    }
    let ev = check(&mut l);
    let act: Vec<AlarmEvent> = activated(&ev).into_iter().cloned().collect();
    assert_eq!(act.len(), 1, "one silent transmitter, one alarm: {act:#?}");
    let e = &act[0];
    assert_eq!((e.index, e.component.as_str()), (AlarmIndex::SensorStale, "U2.SH3.PT-301"));
    let affects = l.book.record("U2.SH3.PT-301/sensor_stale").map(|r| r.affects.clone()).unwrap_or_default();
    assert_eq!(affects.len(), 3, "the alarm lists the components the tag feeds: {affects:?}");
    assert!(e.message.contains("3 components"), "{}", e.message);
    // Each affected component's summary shows it.
    let stale_of = |l: &Ledger, c: &str| {
        l.book.current(c).alarms.into_iter().filter(|r| r.index == AlarmIndex::SensorStale).collect::<Vec<_>>()
    };
    for c in &affects {
        let s = stale_of(&l, c);
        assert!(s.len() == 1 && s[0].is_active(), "{c}: {s:#?}");
    }
    // One acknowledge by tag clears it from every component.
    let cmd = br#"{"action":"acknowledge","tag":"U2.SH3.PT-301","by":"operator 7"}"#;
    assert!(l.command(cmd).is_ok());
    for c in &affects {
        assert_eq!(stale_of(&l, c)[0].state, crate::alarm::AlarmState::Acknowledged, "{c}");
    }
}

#[test]
fn an_out_of_range_spike_is_one_alarm_not_also_stale() {
    let dir = tempfile::tempdir().unwrap();
    let mut l = ledger_with(dir.path(), "");
    let start = t0();
    let tag = "U2.SH3.TE-311B";
    for m in 0..=5 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    check(&mut l);
    // The thermocouple reads its burnout value for 6 minutes: more than
    // its hold time without an accepted sample.
    for m in 6..=11 {
        feed_all(&mut l, start + m * 60_000, &[tag]);
        feed(&mut l, tag, start + m * 60_000, 1372.0, "good");
    }
    let act: Vec<AlarmEvent> = activated(&check(&mut l)).into_iter().cloned().collect();
    let indices: Vec<AlarmIndex> = act.iter().map(|e| e.index).collect();
    assert_eq!(indices, vec![AlarmIndex::SensorOutOfRange], "one fault, one alarm: {act:#?}");
    // Bad quality on top of it: the source's own verdict, the one alarm.
    feed(&mut l, tag, start + 12 * 60_000, 0.0, "bad");
    let act: Vec<AlarmEvent> = activated(&check(&mut l)).into_iter().cloned().collect();
    assert!(act.iter().all(|e| e.index != AlarmIndex::SensorStale), "{act:#?}");
}

#[test]
fn a_redelivered_old_out_of_range_sample_raises_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let mut l = ledger_with(dir.path(), "");
    let start = t0();
    let tag = "U2.SH3.TE-311B";
    for m in 0..=5 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    check(&mut l);
    // A broker redelivers an old burnout reading of minute 2.
    feed(&mut l, tag, start + 2 * 60_000 + 1, 1372.0, "good");
    feed(&mut l, tag, start + 3 * 60_000, 0.0, "bad");
    let act: Vec<AlarmEvent> = activated(&check(&mut l)).into_iter().cloned().collect();
    assert!(act.is_empty(), "{act:#?}");
}

#[test]
fn tags_going_silent_together_are_one_first_out_alarm() {
    // A gateway carrying four tags drops out: one cause, one alarm.
    let dir = tempfile::tempdir().unwrap();
    let mut l = ledger_with(dir.path(), "");
    let start = t0();
    let gone = ["U2.SH3.TE-311A", "U2.SH3.TE-311B", "U2.SH3.TE-321", "U2.SH3.PT-301"];
    for m in 0..=5 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    // TE-321 stopped a minute before the others: it is the first out.
    feed_all(&mut l, start + 6 * 60_000, &gone);
    for t in &gone[..3] {
        if *t != "U2.SH3.TE-321" {
            let v = good_value(&l, t);
            feed(&mut l, t, start + 6 * 60_000, v, "good");
        }
    }
    let v = good_value(&l, "U2.SH3.PT-301");
    feed(&mut l, "U2.SH3.PT-301", start + 6 * 60_000, v, "good");
    for m in 7..=16 {
        feed_all(&mut l, start + m * 60_000, &gone);
    }
    let ev = check(&mut l);
    let act: Vec<AlarmEvent> = activated(&ev).into_iter().cloned().collect();
    assert_eq!(act.len(), 1, "{ev:#?} {:?}", l.sensors.stale_leader);
    assert_eq!(act[0].component, "U2.SH3.TE-321");
    let d = act[0].detail.clone().unwrap_or_default();
    assert!(d.contains("first out of 4 tags silent together"), "{d}");
    // Every component of every silent tag shows that one alarm.
    let plan = l.engine.plan().clone();
    for (ti, tp) in plan.tags.iter().enumerate().filter(|(_, t)| gone.contains(&t.name.as_str())) {
        for &ci in l.engine.consumers(ti) {
            let c = &plan.components[ci as usize].name;
            let s = l.book.current(c);
            assert!(
                s.alarms.iter().any(|r| r.index == AlarmIndex::SensorStale && r.is_active()),
                "{c} (reads {}) shows the group's alarm",
                tp.name
            );
        }
    }
    // It stays one alarm while they stay silent.
    assert!(activated(&check(&mut l)).is_empty());
    // They come back: the alarm clears; nothing else was raised to clear.
    // (past the reorder window, so the cursors have moved)
    for m in 17..=25 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    let ev = check(&mut l);
    assert_eq!(ev.len(), 1, "{ev:#?}");
    assert_eq!(ev[0].transition, Transition::Cleared);
}

#[test]
fn sensor_alarms_kept_per_component_by_an_older_version_are_retired() {
    let dir = tempfile::tempdir().unwrap();
    {
        let mut l = ledger_with(dir.path(), "");
        let ev = l.book.evaluate_condition(
            "U2-SH3-OUTLET-LEG-A",
            "U2",
            AlarmIndex::SensorStale,
            true,
            "tag U2.SH3.TE-311A",
            t0(),
        );
        l.note_events(ev);
        l.commit();
    }
    let l = ledger_with(dir.path(), "");
    assert!(l.book.record("U2-SH3-OUTLET-LEG-A/sensor_stale").is_none(), "the per-component record is gone");
}

#[test]
fn a_tag_that_falls_silent_after_a_fault_becomes_stale() {
    // The demo's failing thermocouple: burn-out spikes, then silence.
    let dir = tempfile::tempdir().unwrap();
    let mut l = ledger_with(dir.path(), "");
    let start = t0();
    let tag = "U2.SH3.TE-311B";
    for m in 0..=5 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    feed_all(&mut l, start + 6 * 60_000, &[tag]);
    feed(&mut l, tag, start + 6 * 60_000, 5000.0, "good");
    let act: Vec<AlarmIndex> = activated(&check(&mut l)).iter().map(|e| e.index).collect();
    assert_eq!(act, vec![AlarmIndex::SensorOutOfRange]);
    // Silent past its hold time: now stale (the fault has changed: no
    // data at all); the out-of-range alarm clears after its off-delay, an
    // hour without a fault.
    let mut ev = vec![];
    for m in 7..=20 {
        feed_all(&mut l, start + m * 60_000, &[tag]);
        ev.extend(check(&mut l));
    }
    let act: Vec<AlarmIndex> = activated(&ev).iter().map(|e| e.index).collect();
    assert_eq!(act, vec![AlarmIndex::SensorStale], "{ev:#?}");
    assert!(!ev.iter().any(|e| e.transition == Transition::Cleared), "out of range stands: {ev:#?}");
    let mut ev = vec![];
    for m in 21..=80 {
        feed_all(&mut l, start + m * 60_000, &[tag]);
        ev.extend(check(&mut l));
    }
    let seen: Vec<(AlarmIndex, Transition)> = ev.iter().map(|e| (e.index, e.transition)).collect();
    assert_eq!(seen, vec![(AlarmIndex::SensorOutOfRange, Transition::Cleared)], "{ev:#?}");
}

#[test]
fn bad_quality_at_shutdown_is_suppressed_by_the_plant_state_and_recorded() {
    // Issue 11: reporting bad quality during a shutdown raised 62 alarms in
    // 8 s. With "unit U2 offline" defined from the main steam pressure,
    // none is annunciated and each is recorded as suppressed.
    let dir = tempfile::tempdir().unwrap();
    let state =
        "[[alarms.plant_state]]\nname = \"unit U2 offline\"\nunits = [\"U2\"]\ntag = \"U2.MS.PT-401\"\nbelow = 5.0\n";
    let mut l = ledger_with(dir.path(), state);
    let start = t0();
    for m in 0..=5 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    assert!(activated(&check(&mut l)).is_empty());
    // Shutdown: pressure falls to 0 bar; then every other tag reports bad
    // quality (transmitters de-energised).
    let others: Vec<String> =
        l.engine.plan().tags.iter().map(|t| t.name.clone()).filter(|n| n != "U2.MS.PT-401").collect();
    for m in 6..=9 {
        feed_all(&mut l, start + m * 60_000, &["U2.MS.PT-401"]);
        feed(&mut l, "U2.MS.PT-401", start + m * 60_000, 0.0, "good");
    }
    check(&mut l);
    let mut ev = vec![];
    for m in 10..=20 {
        feed(&mut l, "U2.MS.PT-401", start + m * 60_000, 0.0, "good");
        for n in &others {
            feed(&mut l, n, start + m * 60_000, 0.0, "bad");
        }
        ev.extend(check(&mut l));
    }
    let annunciated: Vec<&AlarmEvent> = ev
        .iter()
        .filter(|e| e.transition == Transition::Activated && e.state != crate::alarm::AlarmState::Suppressed)
        .collect();
    assert!(annunciated.is_empty(), "nothing annunciated while offline: {annunciated:#?}");
    let recorded = ev
        .iter()
        .filter(|e| e.index == AlarmIndex::SensorBadQuality && e.state == crate::alarm::AlarmState::Suppressed)
        .count();
    assert_eq!(recorded, others.len(), "each tag's bad quality recorded as suppressed");
    assert!(ev
        .iter()
        .all(|e| e.message.contains("unit U2 offline") || e.state != crate::alarm::AlarmState::Suppressed));
}

/// The alarm events in the store's journal, oldest first.
fn journal(dir: &std::path::Path) -> Vec<AlarmEvent> {
    let store = Store::attach(&dir.join("ledger.db")).unwrap();
    let mut rows = store.alarm_journal_newest(10_000).unwrap();
    rows.reverse();
    rows.into_iter().map(|(_, r)| serde_json::from_str(&r.event).unwrap()).collect()
}

#[test]
fn events_are_numbered_without_gaps_across_commits_and_restarts() {
    let dir = tempfile::tempdir().unwrap();
    let start = t0();
    {
        let mut l = ledger_with(dir.path(), "");
        for m in 0..=5 {
            feed_all(&mut l, start + m * 60_000, &[]);
        }
        check(&mut l);
        for m in 6..=15 {
            feed_all(&mut l, start + m * 60_000, &["U2.SH3.PT-301"]);
        }
        check(&mut l);
        assert!(l.command(br#"{"action":"acknowledge","all":true,"by":"op"}"#).is_ok());
        l.commit();
    }
    let mut l = ledger_with(dir.path(), "");
    for m in 16..=25 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    check(&mut l);
    let seqs: Vec<u64> = journal(dir.path()).iter().map(|e| e.seq.expect("every journal event numbered")).collect();
    assert!(seqs.len() >= 3, "{seqs:?}");
    let want: Vec<u64> = (1..=seqs.len() as u64).collect();
    assert_eq!(seqs, want, "numbered 1, 2, 3 … across commits and a restart");
    let e = journal(dir.path()).pop().unwrap();
    assert!(e.to_point("p").to_line().unwrap().contains(&format!("seq={}i", e.seq.unwrap())));
}

#[test]
fn commands_are_stamped_on_the_alarm_clock_in_order_with_the_events() {
    // Issue 11: an acknowledge was stamped by the wall clock, days after
    // the event-time events around it. Data here is a day behind the wall
    // clock (a backfill); the acknowledge follows the activation by
    // moments, not by a day.
    let dir = tempfile::tempdir().unwrap();
    let mut l = ledger_with(dir.path(), "");
    let start = t0();
    for m in 0..=5 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    check(&mut l);
    for m in 6..=15 {
        feed_all(&mut l, start + m * 60_000, &["U2.SH3.PT-301"]);
    }
    check(&mut l);
    assert!(l.command(br#"{"action":"acknowledge","tag":"U2.SH3.PT-301","by":"op"}"#).is_ok());
    l.commit();
    let j = journal(dir.path());
    // Every event is in event time: a component's evaluation carries the
    // time its ledger reached (up to the reorder window behind the newest
    // sample), the acknowledge the alarm clock, after all of them.
    let ack = j.iter().find(|e| e.transition == Transition::Acknowledged).unwrap();
    let newest = start + 15 * 60_000;
    assert!(j.iter().all(|e| e.time_ms <= ack.time_ms && e.time_ms > newest - 10 * 60_000), "{j:#?}");
    assert!(ack.time_ms >= newest && ack.time_ms < newest + 60_000, "{} vs {newest}", ack.time_ms);
}
