//! The attention ranking in the ledger thread (`alarm::attention`, README
//! "The status page"): the snapshot it publishes carries each component's
//! score and rank, and the `component_state` points it queues carry the
//! score. Runs the real ledger code on the demo plant without a broker.

use super::alarm_tests::{check, feed_all, ledger_with};
use super::*;

/// Wall clock of the test: samples are stamped a day before it.
fn t0() -> i64 {
    now_ms() - 86_400_000
}

#[test]
fn parts_reading_a_silent_transmitter_rank_first_and_their_points_carry_the_score() {
    let dir = tempfile::tempdir().unwrap();
    let mut l = ledger_with(dir.path(), "[database]\nurl = \"http://127.0.0.1:9\"\norg = \"o\"\nbucket = \"b\"\n");
    // A reader of the snapshot, as the HTTP side is (a watch channel
    // without one keeps its old value).
    let rx = l.snapshot_tx.subscribe();
    let start = t0();
    for m in 0..=5 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    check(&mut l);
    l.publish_snapshot(true);
    // U2.SH3.PT-301 (the pressure of three demo parts) falls silent for
    // 10 minutes of event time: one unacknowledged sensor alarm on them.
    for m in 6..=15 {
        feed_all(&mut l, start + m * 60_000, &["U2.SH3.PT-301"]);
    }
    check(&mut l);
    l.publish_snapshot(true);
    let snap = rx.borrow().clone();
    let affected: Vec<String> = l.book.record("U2.SH3.PT-301/sensor_stale").expect("stale alarm").affects.clone();
    assert_eq!(affected.len(), 3, "{affected:?}");
    let mut ranks: Vec<usize> = snap.components.iter().map(|c| c.rank.expect("ranked")).collect();
    ranks.sort_unstable();
    assert_eq!(ranks, (1..=snap.components.len()).collect::<Vec<_>>(), "ranks 1..n");
    let worst_quiet = snap
        .components
        .iter()
        .filter(|c| !l.book.current(&c.component).alarms.iter().any(|r| r.state != crate::alarm::AlarmState::Normal))
        .map(|c| c.rank.unwrap())
        .min()
        .expect("a demo part with no alarm");
    for c in snap.components.iter().filter(|c| affected.contains(&c.component)) {
        let r = c.rank.unwrap();
        assert!(r < worst_quiet, "{} ranks {r} below a part with no alarm at {worst_quiet}", c.component);
    }
    // The next points carry the score of that snapshot.
    for m in 16..=18 {
        feed_all(&mut l, start + m * 60_000, &[]);
    }
    l.commit();
    let store = crate::store::Store::attach(&dir.path().join("ledger.db")).unwrap();
    let lines = store.outbox_batch(usize::MAX, usize::MAX).unwrap();
    let name = &affected[0];
    let want = snap.components.iter().find(|c| &c.component == name).unwrap().attention_score.unwrap();
    let last = lines
        .iter()
        .map(|(_, l)| l)
        .rfind(|l| l.starts_with("component_state,") && l.contains(&format!("component={name},")))
        .unwrap_or_else(|| panic!("no component_state point of {name}"));
    assert!(last.contains(&format!("attention_score={want}")), "{last}");
}
