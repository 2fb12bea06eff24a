//! The rows of one group commit, built without I/O: what the ledger thread
//! hands the store in one transaction.
//!
//! [`Pending`] is what waits for the next commit besides the batch's
//! messages and events ([`super::step::Batch`]): changed tags and alarm
//! records, reorder-window changes, series and threshold lines, trend
//! points, accepted inspection records. It is kept in memory across failed
//! commits, because every row it stands for is an upsert of whole state or
//! a line not yet queued.
//!
//! [`Pending::rows`] builds one attempt's [`Rows`] from it, the engine, the
//! alarm book and the batch's [`CommitPlan`]; the shell lends them to the
//! store ([`Rows::commit`]) and then reports the outcome:
//!
//! * [`Pending::committed`]: the rows are durable; what they stood for is
//!   forgotten, and the series points now in the outbox are counted;
//! * [`Pending::failed`]: everything goes back into `Pending` except the
//!   alarm events' lines, which each attempt makes afresh from its plan, so
//!   a retried batch never queues an event twice.

use super::step::CommitPlan;
use crate::alarm::AlarmBook;
use crate::engine::{Engine, HeldSample, TagId};
use crate::store::held::HeldRow;
use crate::store::{CheckpointRow, Commit, JournalEntry, TrendPoint};
use std::collections::BTreeSet;

/// What waits for the next commit besides the batch.
#[derive(Debug, Default)]
pub struct Pending {
    /// Tags whose cursor or state changed.
    pub dirty_tags: BTreeSet<usize>,
    /// Alarm records whose state changed.
    pub dirty_alarms: BTreeSet<String>,
    /// Samples that entered the reorder window.
    pub held_added: Vec<(TagId, HeldSample)>,
    /// Sequence numbers of held samples the engine integrated.
    pub held_released: Vec<u64>,
    /// Outbox lines not tied to an alarm event: series, thresholds, health.
    pub lines: Vec<String>,
    /// Trend points for the status page's charts.
    pub trend_points: Vec<(String, TrendPoint)>,
    /// How many of `lines` are `component_state` points (counted once
    /// they are in the outbox).
    pub series_points: u64,
    /// (record id, JSON) of inspection records accepted into the engine.
    pub inspections_accepted: Vec<(i64, String)>,
}

/// The rows of one commit attempt, owned.
#[derive(Debug, Default)]
pub struct Rows {
    /// Indices of the components whose ledgers are written.
    pub changed: Vec<usize>,
    /// (component name, state JSON).
    pub components: Vec<(String, String)>,
    /// (tag name, state JSON).
    pub tags: Vec<(String, String)>,
    /// (alarm key, record JSON).
    pub alarms: Vec<(String, String)>,
    /// (key, JSON): counters and the next event sequence number.
    pub meta: Vec<(String, String)>,
    /// Outbox lines: the pending lines, then the events' points.
    pub outbox: Vec<String>,
    /// The events, numbered, for the alarm journal.
    pub journal: Vec<JournalEntry>,
    /// Trend points taken from `Pending`.
    pub trend_points: Vec<(String, TrendPoint)>,
    /// Series points among `outbox`.
    series_points: u64,
    /// Where the events' lines begin in `outbox`.
    lines_before_events: usize,
}

impl Pending {
    /// Takes the engine's changes since the last call: the components whose
    /// ledgers changed (returned) and, into `self`, the changed tags and
    /// the reorder window's entries and releases.
    pub fn take_engine_changes(&mut self, engine: &mut Engine) -> Vec<usize> {
        let changed = engine.take_changed();
        self.dirty_tags.extend(engine.take_changed_tags());
        let held = engine.take_held_changes();
        self.held_added.extend(held.added);
        self.held_released.extend(held.released);
        changed
    }

    /// Nothing waits here (the batch may still hold messages or events).
    pub fn is_empty(&self) -> bool {
        self.dirty_tags.is_empty()
            && self.dirty_alarms.is_empty()
            && self.held_added.is_empty()
            && self.held_released.is_empty()
            && self.lines.is_empty()
            && self.trend_points.is_empty()
            && self.inspections_accepted.is_empty()
    }

    /// The rows of one attempt to commit `changed` components and the
    /// batch's `plan`: whole ledgers of the changed components and tags,
    /// the changed alarm records of `book`, the counters, and the outbox
    /// lines (none when no database is configured: nothing would ever
    /// drain them). The lines and trend points are taken from `self`;
    /// [`Pending::failed`] gives them back.
    pub fn rows(
        &mut self,
        engine: &Engine,
        book: &AlarmBook,
        changed: Vec<usize>,
        plan: &CommitPlan,
        decode_rejected: &impl serde::Serialize,
        database: bool,
    ) -> Rows {
        let ep = engine.plan();
        let components = changed
            .iter()
            .map(|&ci| {
                (ep.components[ci].name.clone(), serde_json::to_string(&engine.components()[ci]).unwrap_or_default())
            })
            .collect();
        let tags = self
            .dirty_tags
            .iter()
            .map(|&ti| (ep.tags[ti].name.clone(), serde_json::to_string(&engine.tags()[ti]).unwrap_or_default()))
            .collect();
        let alarms = self
            .dirty_alarms
            .iter()
            .filter_map(|k| book.record(k).map(|r| (k.clone(), serde_json::to_string(r).unwrap_or_default())))
            .collect();
        let mut outbox = std::mem::take(&mut self.lines);
        let lines_before_events = outbox.len();
        outbox.extend(plan.events.iter().filter_map(|e| e.to_point(&ep.plant).to_line()));
        if !database {
            outbox.clear();
        }
        let meta = vec![
            ("engine_counters".to_string(), serde_json::to_string(engine.counters()).unwrap_or_default()),
            ("decode_rejected".to_string(), serde_json::to_string(decode_rejected).unwrap_or_default()),
            ("alarm_event_seq".to_string(), plan.next_seq.to_string()),
        ];
        let journal = plan
            .events
            .iter()
            .map(|e| JournalEntry {
                time_ms: e.time_ms,
                component: e.component.clone(),
                index: e.index.name().to_string(),
                event: e.to_json(),
            })
            .collect();
        Rows {
            changed,
            components,
            tags,
            alarms,
            meta,
            outbox,
            journal,
            trend_points: std::mem::take(&mut self.trend_points),
            series_points: std::mem::take(&mut self.series_points),
            lines_before_events: if database { lines_before_events } else { 0 },
        }
    }

    /// The reorder window's entries as the store's rows, named by tag.
    pub fn held_rows<'a>(&'a self, engine: &'a Engine) -> Vec<HeldRow<'a>> {
        let tags = &engine.plan().tags;
        self.held_added
            .iter()
            .map(|(t, h)| HeldRow {
                seq: h.seq,
                tag: tags[*t as usize].name.as_str(),
                time_ms: h.time_ms,
                value: h.value,
                arrival_ms: h.arrival_ms,
            })
            .collect()
    }

    /// `rows` are durable: forget what they stood for. Returns the number
    /// of series points that went into the outbox with them.
    pub fn committed(&mut self, rows: Rows) -> u64 {
        self.dirty_tags.clear();
        self.dirty_alarms.clear();
        self.held_added.clear();
        self.held_released.clear();
        self.inspections_accepted.clear();
        rows.series_points
    }

    /// `rows` were not written: take back their lines (without the events'
    /// lines, made afresh by the next attempt) and trend points, ahead of
    /// anything made since, and mark their components changed again in
    /// `engine`.
    pub fn failed(&mut self, mut rows: Rows, engine: &mut Engine) {
        for &ci in &rows.changed {
            engine.mark_changed(ci);
        }
        rows.outbox.truncate(rows.lines_before_events);
        rows.outbox.append(&mut self.lines);
        self.lines = rows.outbox;
        rows.trend_points.append(&mut self.trend_points);
        self.trend_points = rows.trend_points;
        self.series_points += rows.series_points;
    }
}

impl Rows {
    /// Nothing to write at all.
    pub fn is_empty(&self) -> bool {
        self.components.is_empty()
            && self.tags.is_empty()
            && self.alarms.is_empty()
            && self.outbox.is_empty()
            && self.journal.is_empty()
            && self.trend_points.is_empty()
    }

    /// The rows lent to the store as one transaction, with the pending
    /// reorder-window and inspection rows, the day's checkpoints and the
    /// daily history (which read the store's and the engine's state).
    pub fn commit<'a>(
        &'a self,
        pending: &'a Pending,
        held_added: &'a [HeldRow<'a>],
        checkpoints: &'a [CheckpointRow],
        history: &'a [(String, crate::store::inspection::HistoryPoint)],
    ) -> Commit<'a> {
        Commit {
            held_added,
            held_released: &pending.held_released,
            components: &self.components,
            tags: &self.tags,
            alarms: &self.alarms,
            meta: &self.meta,
            outbox: &self.outbox,
            alarm_events: &self.journal,
            trend_points: &self.trend_points,
            checkpoints,
            inspections_accepted: &pending.inspections_accepted,
            history,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::alarm::AlarmIndex;
    use crate::service::ledger::step::Batch;

    fn demo_engine() -> Engine {
        let cfg = crate::settings::load_plan(std::path::Path::new("config/demo/plant.toml")).unwrap();
        Engine::new(cfg.plan)
    }

    fn event(book: &mut AlarmBook, active: bool, t: i64) -> Vec<crate::alarm::AlarmEvent> {
        book.evaluate_condition("lifeledger", "", AlarmIndex::ServiceHealth, active, "unit test", t)
    }

    /// A failed attempt gives back its series lines and trend points, in
    /// their order and ahead of newer ones, but not its events' lines:
    /// the next attempt makes those afresh from the batch, so after any
    /// number of failures the committed outbox holds each event once and
    /// each series line once (issue 10, defect 7: retries re-queued the
    /// same alarm-event lines thousands of times).
    #[test]
    fn a_failed_attempt_gives_back_its_lines_but_never_duplicates_an_event() {
        let mut engine = demo_engine();
        let mut book = AlarmBook::default();
        let mut batch: Batch<u32> = Batch::default();
        let mut pending = Pending::default();
        pending.lines.push("component_state,component=A x=1 1".into());
        pending.series_points = 1;
        let ev = event(&mut book, true, 1_000);
        pending.dirty_alarms.extend(ev.iter().map(|e| e.key()));
        batch.note_events(ev);
        batch.offer(7, true, 0);
        let no_rejects = std::collections::BTreeMap::<String, u64>::new();
        for _ in 0..3 {
            let plan = batch.plan(41);
            let rows = pending.rows(&engine, &book, vec![0], &plan, &no_rejects, true);
            assert_eq!(rows.outbox.iter().filter(|l| l.starts_with("alarm_event,")).count(), 1);
            assert_eq!(rows.journal.len(), 1);
            assert!(rows.journal[0].event.contains("\"seq\":41"), "{}", rows.journal[0].event);
            assert_eq!(rows.alarms.len(), 1, "the changed alarm record is written");
            assert!(rows.meta.contains(&("alarm_event_seq".to_string(), "42".to_string())));
            pending.failed(rows, &mut engine);
            batch.failed(plan);
            // A series line made while the commit failed goes after the old one.
            pending.lines.push(format!("component_state,component=A x=2 {}", pending.lines.len() + 1));
            pending.series_points += 1;
            assert!(!pending.lines.iter().any(|l| l.starts_with("alarm_event,")), "{:?}", pending.lines);
        }
        assert_eq!(engine.take_changed(), vec![0], "the failed component is marked changed again");
        let plan = batch.plan(41);
        let rows = pending.rows(&engine, &book, vec![0], &plan, &no_rejects, true);
        let outbox = rows.outbox.clone();
        assert_eq!(outbox.len(), 5, "{outbox:?}");
        assert!(outbox[0].ends_with(" 1") && outbox[1].ends_with(" 2") && outbox[3].ends_with(" 4"), "{outbox:?}");
        assert!(outbox[4].starts_with("alarm_event,"));
        assert_eq!(pending.committed(rows), 4, "four series points reached the outbox");
        let after = batch.committed(plan);
        assert_eq!(after.ack, vec![7]);
        assert_eq!(after.next_seq, 42);
        assert!(pending.is_empty(), "{pending:?}");
    }

    /// Without a database nothing would ever drain the outbox: no lines
    /// are written, but the journal, records and counters are.
    #[test]
    fn without_a_database_no_outbox_lines_are_written() {
        let mut engine = demo_engine();
        let mut book = AlarmBook::default();
        let mut batch: Batch<u32> = Batch::default();
        let mut pending = Pending::default();
        pending.lines.push("service_health,plant=P up=true 1".into());
        batch.note_events(event(&mut book, true, 1_000));
        let plan = batch.plan(0);
        let rows =
            pending.rows(&engine, &book, vec![], &plan, &std::collections::BTreeMap::<String, u64>::new(), false);
        assert!(rows.outbox.is_empty());
        assert_eq!(rows.journal.len(), 1);
        assert!(!rows.is_empty());
        // A failure gives back nothing to write later: there is no outbox.
        pending.failed(rows, &mut engine);
        assert!(pending.lines.is_empty());
    }

    /// Reorder-window rows carry the tag's name and are kept until a commit
    /// succeeds.
    #[test]
    fn held_rows_are_named_and_kept_until_committed() {
        let engine = demo_engine();
        let mut pending = Pending::default();
        pending.held_added.push((1, HeldSample { seq: 9, time_ms: 5, value: 2.5, arrival_ms: 6 }));
        pending.held_released.push(3);
        let rows = pending.held_rows(&engine);
        assert_eq!(rows.len(), 1);
        assert_eq!(rows[0].tag, engine.plan().tags[1].name);
        assert_eq!((rows[0].seq, rows[0].time_ms, rows[0].value, rows[0].arrival_ms), (9, 5, 2.5, 6));
        drop(rows);
        assert!(!pending.is_empty());
        pending.committed(Rows::default());
        assert!(pending.is_empty());
    }
}
