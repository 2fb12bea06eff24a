//! Checkpoints: durable copies of each component's whole ledger, and of
//! the states of the tags it reads, one per component per UTC day of event
//! time, so that an operator can roll a poisoned ledger back (see
//! `crate::recovery`).
//!
//! A checkpoint is taken by [`Store::commit`] in the transaction of the
//! batch it belongs to: the ledger thread offers a row for every changed
//! component whose `integrated_to_ms` has entered a UTC day later than the
//! day of the component's newest checkpoint ([`Store::checkpoint_due`]);
//! the first commit of a component's ledger takes one too. The row holds
//! the component's state and its input tags' states exactly as they were
//! at that commit, stamped with the component's `integrated_to_ms` (event
//! time) and with the wall-clock time it was written.
//!
//! Retention is by wall-clock time of writing, not by event time: a
//! checkpoint written more than [`Store::set_checkpoint_days`] days ago is
//! deleted when the component's next checkpoint is written, except that a
//! component's newest checkpoint is always kept. Event time is what a
//! poisoned ledger gets wrong: a sample stamped decades ahead must not be
//! able to age the good checkpoints out.
//!
//! The store keeps, in memory, the event time of each component's newest
//! checkpoint (read once at open, updated only after a commit succeeded),
//! so deciding whether a checkpoint is due costs one map look-up, and a
//! batch that rolls back leaves the next commit to take the checkpoint.
//! Like the rest of the store, rows are JSON text: the store knows nothing
//! of engine types.

use std::collections::BTreeMap;

use rusqlite::{Connection, OptionalExtension, Row};

use super::{Store, StoreError};

/// How many days of checkpoints are kept when the configuration does not
/// say: about a quarter, long enough to notice a poisoned ledger after a
/// holiday shutdown and still find a checkpoint from before.
pub const DEFAULT_DAYS: u64 = 90;

use crate::event_time::utc_day;

/// One checkpoint of one component.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct CheckpointRow {
    /// Component name.
    pub component: String,
    /// The component's `integrated_to_ms` at the checkpoint: event time, ms
    /// since the Unix epoch.
    pub at_ms: i64,
    /// The component's whole state, JSON.
    pub state: String,
    /// The states of the tags the component reads, a JSON object by tag
    /// name.
    pub tags: String,
}

/// A stored checkpoint: the row and when it was written.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct StoredCheckpoint {
    pub row: CheckpointRow,
    /// Wall-clock time the checkpoint was written, ms since the epoch.
    pub written_ms: i64,
}

/// Whether a checkpoint at `at_ms` is due for a component whose newest
/// checkpoint is at `newest_ms`: its first, or the first of a later UTC day.
fn due(newest_ms: Option<i64>, at_ms: i64) -> bool {
    newest_ms.is_none_or(|n| utc_day(at_ms) > utc_day(n))
}

/// Event time of each component's newest checkpoint.
pub(super) fn newest(conn: &Connection) -> rusqlite::Result<BTreeMap<String, i64>> {
    let mut stmt = conn.prepare("SELECT component, max(at_ms) FROM checkpoint GROUP BY component")?;
    let rows = stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
    rows.collect()
}

/// Writes the rows of `rows` that are due (judged against `newest` and the
/// rows written before them in this batch), then deletes, for each
/// component written, its checkpoints written before `cutoff_ms` (wall
/// clock), except the one just written. Runs inside the caller's
/// transaction; returns the new newest event time per component written,
/// for the caller to take once the transaction has committed.
pub(super) fn write(
    conn: &Connection,
    rows: &[CheckpointRow],
    newest: &BTreeMap<String, i64>,
    now_ms: i64,
    cutoff_ms: i64,
) -> rusqlite::Result<Vec<(String, i64)>> {
    if rows.is_empty() {
        return Ok(vec![]);
    }
    let mut written: BTreeMap<&str, i64> = BTreeMap::new();
    let mut insert = conn.prepare_cached(
        "INSERT INTO checkpoint (component, at_ms, written_ms, state, tags) VALUES (?1, ?2, ?3, ?4, ?5)
         ON CONFLICT (component, at_ms) DO UPDATE SET
             written_ms = excluded.written_ms, state = excluded.state, tags = excluded.tags",
    )?;
    let mut prune =
        conn.prepare_cached("DELETE FROM checkpoint WHERE component = ?1 AND written_ms < ?2 AND at_ms < ?3")?;
    for r in rows {
        let before = written.get(r.component.as_str()).or_else(|| newest.get(&r.component)).copied();
        if !due(before, r.at_ms) {
            continue;
        }
        insert.execute((&r.component, r.at_ms, now_ms, &r.state, &r.tags))?;
        prune.execute((&r.component, cutoff_ms, r.at_ms))?;
        written.insert(&r.component, r.at_ms);
    }
    Ok(written.into_iter().map(|(c, t)| (c.to_string(), t)).collect())
}

fn stored(r: &Row<'_>) -> rusqlite::Result<StoredCheckpoint> {
    Ok(StoredCheckpoint {
        row: CheckpointRow { component: r.get(0)?, at_ms: r.get(1)?, state: r.get(3)?, tags: r.get(4)? },
        written_ms: r.get(2)?,
    })
}

/// What a rollback writes, in one transaction ([`Store::restore`]).
#[derive(Debug, Clone, Copy, Default)]
pub struct Restore<'a> {
    /// (component name, state JSON, event time of the checkpoint restored):
    /// the state replaces the component's; its checkpoints and trend points
    /// after that time are deleted (they belong to the history rolled back).
    pub components: &'a [(String, String, i64)],
    /// (tag name, state JSON): replaces the tag's state.
    pub tags: &'a [(String, String)],
    /// Journal entries recording the rollback (who, why, what).
    pub journal: &'a [super::JournalEntry],
}

impl Store {
    /// How many days (wall clock) checkpoints are kept; see the
    /// [module docs](self). [`DEFAULT_DAYS`] until set.
    pub fn set_checkpoint_days(&mut self, days: u64) {
        self.checkpoint_days = days;
    }

    /// Whether a checkpoint of `component` at event time `at_ms` would be
    /// written by the next commit: the component has none yet, or its
    /// newest is of an earlier UTC day. Costs one map look-up.
    pub fn checkpoint_due(&self, component: &str, at_ms: i64) -> bool {
        due(self.checkpoint_newest.get(component).copied(), at_ms)
    }

    /// The newest checkpoint of `component` at or before event time
    /// `t_ms`, if any.
    pub fn checkpoint_at_or_before(&self, component: &str, t_ms: i64) -> Result<Option<StoredCheckpoint>, StoreError> {
        let mut stmt = self
            .conn
            .prepare_cached(
                "SELECT component, at_ms, written_ms, state, tags FROM checkpoint
                 WHERE component = ?1 AND at_ms <= ?2 ORDER BY at_ms DESC LIMIT 1",
            )
            .map_err(|e| StoreError::sqlite(&self.path, "reading a checkpoint", e))?;
        stmt.query_row((component, t_ms), stored)
            .optional()
            .map_err(|e| StoreError::sqlite(&self.path, "reading a checkpoint", e))
    }

    /// The event times (oldest first) and write times of every checkpoint
    /// of `component`.
    pub fn checkpoint_times(&self, component: &str) -> Result<Vec<(i64, i64)>, StoreError> {
        let fail = |e| StoreError::sqlite(&self.path, "listing checkpoints", e);
        let mut stmt = self
            .conn
            .prepare_cached("SELECT at_ms, written_ms FROM checkpoint WHERE component = ?1 ORDER BY at_ms")
            .map_err(fail)?;
        let rows = stmt.query_map([component], |r| Ok((r.get(0)?, r.get(1)?))).map_err(fail)?;
        rows.collect::<rusqlite::Result<_>>().map_err(fail)
    }

    /// Writes a rollback in one transaction: component and tag states
    /// replaced, the rolled-back components' later checkpoints and trend
    /// points deleted, the journal entries appended. On error nothing is
    /// written.
    pub fn restore(&mut self, r: &Restore<'_>) -> Result<(), StoreError> {
        let path = &self.path;
        let keep = self.journal_max_events;
        let fail = |e| StoreError::sqlite(path, "writing the rollback", e);
        let tx = self.conn.transaction_with_behavior(rusqlite::TransactionBehavior::Immediate).map_err(fail)?;
        {
            let mut state = tx
                .prepare_cached(
                    "INSERT INTO component (name, state) VALUES (?1, ?2)
                     ON CONFLICT (name) DO UPDATE SET state = excluded.state",
                )
                .map_err(fail)?;
            let mut later =
                tx.prepare_cached("DELETE FROM checkpoint WHERE component = ?1 AND at_ms > ?2").map_err(fail)?;
            let mut trend =
                tx.prepare_cached("DELETE FROM trend_point WHERE component = ?1 AND t_ms > ?2").map_err(fail)?;
            // The daily history past the restored instant goes too.
            let mut history =
                tx.prepare_cached("DELETE FROM history_day WHERE component = ?1 AND t_ms > ?2").map_err(fail)?;
            for (name, json, at_ms) in r.components {
                state.execute((name, json)).map_err(fail)?;
                later.execute((name, at_ms)).map_err(fail)?;
                trend.execute((name, at_ms)).map_err(fail)?;
                history.execute((name, at_ms)).map_err(fail)?;
            }
        }
        super::upsert(
            &tx,
            "INSERT INTO tag (name, state) VALUES (?1, ?2) ON CONFLICT (name) DO UPDATE SET state = excluded.state",
            r.tags,
        )
        .map_err(fail)?;
        super::journal::append(&tx, r.journal, keep).map_err(fail)?;
        let newest = newest(&tx).map_err(fail)?;
        tx.commit().map_err(fail)?;
        self.checkpoint_newest = newest;
        // Trend counts are recounted at each component's next point.
        self.trend_rows.clear();
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::event_time::MS_PER_DAY;
    use crate::store::tests::{assert_upgraded_with_v1_rows, earlier_ledger, fresh};
    use crate::store::{Commit, JournalEntry, TrendPoint, TrendWindow};

    /// 2026-10-01T00:00:00Z (checked with Python:
    /// datetime(2026,10,1,tzinfo=timezone.utc).timestamp()).
    const OCT_1: i64 = 1_790_812_800_000;
    const H: i64 = 3_600_000;

    fn row(component: &str, at_ms: i64, state: &str) -> CheckpointRow {
        CheckpointRow { component: component.into(), at_ms, state: state.into(), tags: "{}".into() }
    }

    fn times(store: &Store, component: &str) -> Vec<i64> {
        store.checkpoint_times(component).unwrap().into_iter().map(|(t, _)| t).collect()
    }

    #[test]
    fn days_are_utc_days_also_before_the_epoch() {
        assert_eq!(utc_day(0), 0);
        assert_eq!(utc_day(MS_PER_DAY - 1), 0);
        assert_eq!(utc_day(MS_PER_DAY), 1);
        assert_eq!(utc_day(-1), -1);
        // 2026-10-01 is day 20727 (1 790 812 800 s / 86 400 s).
        assert_eq!(utc_day(OCT_1), 20_727);
    }

    #[test]
    fn one_checkpoint_per_component_per_day_the_first_of_the_day_kept() {
        let (_dir, mut store) = fresh();
        // First commit of a ledger: due.
        assert!(store.checkpoint_due("sh-1", OCT_1 + 5 * H));
        store.commit(&Commit { checkpoints: &[row("sh-1", OCT_1 + 5 * H, "a")], ..Default::default() }).unwrap();
        // The same day again: not due, and not written if offered anyway.
        assert!(!store.checkpoint_due("sh-1", OCT_1 + 23 * H));
        store.commit(&Commit { checkpoints: &[row("sh-1", OCT_1 + 23 * H, "b")], ..Default::default() }).unwrap();
        assert_eq!(times(&store, "sh-1"), [OCT_1 + 5 * H]);
        // Past midnight: due; two offers in one batch keep the first.
        assert!(store.checkpoint_due("sh-1", OCT_1 + 24 * H));
        let batch = [row("sh-1", OCT_1 + 24 * H + 1, "c"), row("sh-1", OCT_1 + 30 * H, "d"), row("sh-2", OCT_1, "e")];
        store.commit(&Commit { checkpoints: &batch, ..Default::default() }).unwrap();
        assert_eq!(times(&store, "sh-1"), [OCT_1 + 5 * H, OCT_1 + 24 * H + 1]);
        assert_eq!(times(&store, "sh-2"), [OCT_1]);
        let c = store.checkpoint_at_or_before("sh-1", OCT_1 + 24 * H + 1).unwrap().unwrap();
        assert_eq!(c.row, batch[0]);
        assert_eq!(store.checkpoint_at_or_before("sh-1", OCT_1 + 24 * H).unwrap().unwrap().row.state, "a");
        assert_eq!(store.checkpoint_at_or_before("sh-1", OCT_1).unwrap(), None);
    }

    #[test]
    fn a_failed_commit_leaves_the_checkpoint_due() {
        let (_dir, mut store) = fresh();
        store
            .conn
            .execute_batch("CREATE TRIGGER refuse BEFORE INSERT ON outbox BEGIN SELECT RAISE(ABORT, 'refused'); END")
            .unwrap();
        let batch = [row("sh-1", OCT_1, "a")];
        let out = ["x".to_string()];
        store.commit(&Commit { checkpoints: &batch, outbox: &out, ..Default::default() }).unwrap_err();
        assert!(times(&store, "sh-1").is_empty());
        assert!(store.checkpoint_due("sh-1", OCT_1), "the rolled-back batch must not count");
        store.conn.execute_batch("DROP TRIGGER refuse").unwrap();
        store.commit(&Commit { checkpoints: &batch, outbox: &out, ..Default::default() }).unwrap();
        assert_eq!(times(&store, "sh-1"), [OCT_1]);
    }

    #[test]
    fn old_checkpoints_go_by_wall_clock_but_the_newest_stays() {
        let (_dir, mut store) = fresh();
        store.set_checkpoint_days(2);
        let now = now_ms();
        // Written "long ago" (wall clock), at event times far in the future:
        // event time does not protect them, write time decides.
        for (i, written) in [now - 10 * MS_PER_DAY, now - 3 * MS_PER_DAY, now - MS_PER_DAY].into_iter().enumerate() {
            store
                .conn
                .execute(
                    "INSERT INTO checkpoint VALUES ('sh-1', ?1, ?2, '{}', '{}')",
                    (OCT_1 + 1_000 * MS_PER_DAY + i as i64 * MS_PER_DAY, written),
                )
                .unwrap();
        }
        store
            .conn
            .execute("INSERT INTO checkpoint VALUES ('sh-2', ?1, ?2, '{}', '{}')", (OCT_1, now - 50 * MS_PER_DAY))
            .unwrap();
        // Reopen so that the store reads the newest event times.
        let path = store.path().to_path_buf();
        drop(store);
        let mut store = Store::open(&path).unwrap();
        store.set_checkpoint_days(2);
        // A new day for sh-1, and for sh-2 an offer of the same day (not due).
        let batch = [row("sh-1", OCT_1 + 1_010 * MS_PER_DAY, "new"), row("sh-2", OCT_1 + H, "same day")];
        store.commit(&Commit { checkpoints: &batch, ..Default::default() }).unwrap();
        assert_eq!(
            times(&store, "sh-1"),
            [OCT_1 + 1_002 * MS_PER_DAY, OCT_1 + 1_010 * MS_PER_DAY],
            "written 10 and 3 days ago: gone; 1 day ago and now: kept"
        );
        assert_eq!(times(&store, "sh-2"), [OCT_1], "the newest is kept however old, and sh-2 wrote nothing new");
        // Written now: the write time is the wall clock.
        let (_, written) = store.checkpoint_times("sh-1").unwrap()[1];
        assert!((written - now).abs() < 60_000, "{written} vs {now}");
    }

    #[test]
    fn a_restore_replaces_states_drops_later_history_and_journals_it() {
        let (_dir, mut store) = fresh();
        let point = |t: i64| TrendPoint {
            t,
            metal_temperature_c: 540.0,
            pressure_mpa: 17.0,
            hoop_stress_mpa: 70.0,
            creep_life_fraction: 0.1,
            creep_strain: 0.0,
            wear_index: 0.0,
            fatigue_stress_mpa: 0.0,
            fatigue_usage: 0.0,
            wear: crate::store::WearInputs { load_n: 0.0, sliding_speed_mm_s: 0.0, slip_mm: 0.0, frequency_hz: 0.0 },
        };
        for day in 0..3 {
            let t = OCT_1 + day * MS_PER_DAY;
            let trend = [("sh-1".to_string(), point(t)), ("sh-2".to_string(), point(t))];
            let components = [("sh-1".to_string(), format!("{{\"day\":{day}}}"))];
            store
                .commit(&Commit {
                    components: &components,
                    checkpoints: &[row("sh-1", t, &day.to_string()), row("sh-2", t, "x")],
                    trend_points: &trend,
                    ..Default::default()
                })
                .unwrap();
        }
        let entry = JournalEntry {
            time_ms: now_ms(),
            component: "sh-1".into(),
            index: "ledger_rollback".into(),
            event: r#"{"by":"A. Operator"}"#.into(),
        };
        store
            .restore(&Restore {
                components: &[("sh-1".into(), r#"{"day":0}"#.into(), OCT_1)],
                tags: &[("TI-1".into(), r#"{"cursor_ms":1}"#.into())],
                journal: std::slice::from_ref(&entry),
            })
            .unwrap();
        let loaded = store.load().unwrap();
        assert_eq!(loaded.components, [("sh-1".to_string(), r#"{"day":0}"#.to_string())]);
        assert_eq!(loaded.tags, [("TI-1".to_string(), r#"{"cursor_ms":1}"#.to_string())]);
        assert_eq!(times(&store, "sh-1"), [OCT_1]);
        assert_eq!(times(&store, "sh-2").len(), 3, "other components keep theirs");
        assert_eq!(store.trend("sh-1", TrendWindow::ALL).unwrap().len(), 1);
        assert_eq!(store.trend("sh-2", TrendWindow::ALL).unwrap().len(), 3);
        let journal = crate::store::JournalReader::new(store.path()).component("sh-1", 5).unwrap();
        assert_eq!(journal.iter().map(|(_, e)| e.clone()).collect::<Vec<_>>(), [entry]);
        // The next day after the restored checkpoint is due again.
        assert!(store.checkpoint_due("sh-1", OCT_1 + MS_PER_DAY));
    }

    #[test]
    fn a_version_3_ledger_is_upgraded_and_keeps_its_data() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        earlier_ledger(&path, 3);
        let mut store = Store::open(&path).unwrap();
        assert_upgraded_with_v1_rows(&store);
        assert!(store.checkpoint_due("sh-1", OCT_1));
        store.commit(&Commit { checkpoints: &[row("sh-1", OCT_1, "a")], ..Default::default() }).unwrap();
        assert_eq!(times(&store, "sh-1"), [OCT_1]);
    }

    fn now_ms() -> i64 {
        super::super::wall_clock_ms()
    }
}
