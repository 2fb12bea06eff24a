//! The alarm journal: the durable history of alarm events, so that a plant
//! engineer still sees what alarmed and when after the service restarts.
//!
//! Events are appended by [`Store::commit`] in the same transaction as the
//! alarm records, ledgers and cursors of the batch that raised them. The
//! journal therefore holds exactly the events of committed batches: none
//! from a batch that rolled back, and none twice when the broker redelivers
//! a message (the cursors and alarm records committed with the events make
//! the engine drop the duplicate and the alarm book stay quiet).
//!
//! The journal is bounded. Whenever a batch appends events, the same
//! transaction deletes all but the newest [`Store::set_alarm_journal_max_events`]
//! (one ledger file is one plant), so a lowered limit takes effect with the
//! next event. Like the rest of the store it holds JSON text and knows
//! nothing of alarm types.
//!
//! Rollbacks of the ledger (`lifeledger rollback`) are recorded here too,
//! one entry per component rolled back, under the index [`ROLLBACK_INDEX`]
//! and stamped with the wall-clock time of the rollback (alarm events carry
//! event time):
//! they belong in a component's history beside its alarms, but they are
//! not alarm events, so [`Store::alarm_journal_newest`] passes over them.
//!
//! Readers: [`Store::alarm_journal_newest`] on the ledger thread at start-up,
//! and [`JournalReader`], which opens its own read-only connection per call,
//! for the HTTP API (WAL lets it read while the ledger thread writes).

use std::path::{Path, PathBuf};

use rusqlite::{Connection, Row};

use super::{read_only, Store, StoreError};

/// The `alarm_index` of journal entries that record a rollback of the
/// ledger rather than an alarm event.
pub const ROLLBACK_INDEX: &str = "ledger_rollback";

/// How many events the journal keeps when the configuration does not say.
pub const DEFAULT_MAX_EVENTS: u64 = 10_000;

/// One alarm event as the journal stores it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct JournalEntry {
    /// Event time, milliseconds since the Unix epoch.
    pub time_ms: i64,
    /// Component the alarm belongs to.
    pub component: String,
    /// Alarm index name, e.g. `creep_life_fraction`.
    pub index: String,
    /// The whole event as JSON text.
    pub event: String,
}

/// Appends `entries` in order, then prunes to the newest `keep`. Runs
/// inside the caller's transaction.
pub(super) fn append(conn: &Connection, entries: &[JournalEntry], keep: u64) -> rusqlite::Result<()> {
    if entries.is_empty() {
        return Ok(());
    }
    let mut insert = conn
        .prepare_cached("INSERT INTO alarm_journal (time_ms, component, alarm_index, event) VALUES (?1, ?2, ?3, ?4)")?;
    for e in entries {
        insert.execute((e.time_ms, &e.component, &e.index, &e.event))?;
    }
    // The subquery is the id `keep` rows below the newest: it and every
    // older row go. With `keep` rows or fewer it is NULL and nothing goes.
    let keep = i64::try_from(keep).unwrap_or(i64::MAX);
    let mut prune = conn.prepare_cached(
        "DELETE FROM alarm_journal
         WHERE id <= (SELECT id FROM alarm_journal ORDER BY id DESC LIMIT 1 OFFSET ?1)",
    )?;
    prune.execute([keep])?;
    Ok(())
}

/// The newest `limit` entries, newest first, of one component (rollbacks
/// included) or (with `None`) the alarm events of the whole plant
/// (rollbacks left out), each with its id (higher is newer).
fn newest(conn: &Connection, component: Option<&str>, limit: usize) -> rusqlite::Result<Vec<(i64, JournalEntry)>> {
    let limit = i64::try_from(limit).unwrap_or(i64::MAX);
    let row = |r: &Row<'_>| {
        Ok((r.get(0)?, JournalEntry { time_ms: r.get(1)?, component: r.get(2)?, index: r.get(3)?, event: r.get(4)? }))
    };
    const COLUMNS: &str = "SELECT id, time_ms, component, alarm_index, event FROM alarm_journal";
    match component {
        None => {
            let mut stmt =
                conn.prepare_cached(&format!("{COLUMNS} WHERE alarm_index != ?2 ORDER BY id DESC LIMIT ?1"))?;
            let rows = stmt.query_map((limit, ROLLBACK_INDEX), row)?;
            rows.collect()
        }
        Some(c) => {
            let mut stmt = conn.prepare_cached(&format!("{COLUMNS} WHERE component = ?1 ORDER BY id DESC LIMIT ?2"))?;
            let rows = stmt.query_map((c, limit), row)?;
            rows.collect()
        }
    }
}

impl Store {
    /// How many events the journal keeps: from the next batch with events
    /// on, everything older than the newest `n` is deleted in that batch's
    /// transaction. [`DEFAULT_MAX_EVENTS`] until set.
    pub fn set_alarm_journal_max_events(&mut self, n: u64) {
        self.journal_max_events = n;
    }

    /// The newest `limit` alarm events of the plant, newest first, with
    /// their ids; rollback records are left out.
    pub fn alarm_journal_newest(&self, limit: usize) -> Result<Vec<(i64, JournalEntry)>, StoreError> {
        newest(&self.conn, None, limit).map_err(|e| StoreError::sqlite(&self.path, "reading the alarm journal", e))
    }
}

/// Reads the alarm journal of a ledger file from outside the ledger thread,
/// on a read-only connection of its own; cheap to clone.
#[derive(Debug, Clone)]
pub struct JournalReader {
    path: PathBuf,
}

impl JournalReader {
    /// A reader of the ledger at `path`, which the ledger thread has
    /// already opened (and so created and brought up to date).
    pub fn new(path: &Path) -> JournalReader {
        JournalReader { path: path.into() }
    }

    /// The newest `limit` entries of `component` (alarm events and
    /// rollbacks), newest first, with their ids. Blocking: call it off the
    /// async runtime's worker threads.
    pub fn component(&self, component: &str, limit: usize) -> Result<Vec<(i64, JournalEntry)>, StoreError> {
        let fail = |e| StoreError::sqlite(&self.path, "reading the alarm journal", e);
        let conn = read_only(&self.path).map_err(fail)?;
        newest(&conn, Some(component), limit).map_err(fail)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::schema;
    use crate::store::tests::{assert_upgraded_with_v1_rows, earlier_ledger, fresh};
    use crate::store::Commit;

    fn entry(n: i64, component: &str) -> JournalEntry {
        JournalEntry {
            time_ms: 1_790_812_800_000 + n,
            component: component.into(),
            index: "creep_life_fraction".into(),
            event: format!(r#"{{"n":{n},"component":"{component}"}}"#),
        }
    }

    fn numbers(rows: &[(i64, JournalEntry)]) -> Vec<i64> {
        rows.iter().map(|(_, e)| e.time_ms - 1_790_812_800_000).collect()
    }

    #[test]
    fn events_round_trip_through_a_reopen_newest_first() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        let first = vec![entry(1, "sh-1"), entry(2, "sh-2")];
        let second = vec![entry(3, "sh-1 Überhitzer")];
        {
            let mut store = Store::open(&path).unwrap();
            store.commit(&Commit { alarm_events: &first, ..Default::default() }).unwrap();
            store.commit(&Commit { alarm_events: &second, ..Default::default() }).unwrap();
        }
        let store = Store::open(&path).unwrap();
        let rows = store.alarm_journal_newest(10).unwrap();
        let want: Vec<JournalEntry> = second.iter().chain(first.iter().rev()).cloned().collect();
        assert_eq!(rows.iter().map(|(_, e)| e.clone()).collect::<Vec<_>>(), want);
        assert!(rows.windows(2).all(|w| w[0].0 > w[1].0), "ids fall, newest first: {rows:?}");
        assert_eq!(numbers(&store.alarm_journal_newest(2).unwrap()), [3, 2]);
        assert!(store.alarm_journal_newest(0).unwrap().is_empty());
    }

    #[test]
    fn the_reader_sees_one_components_events_newest_first() {
        let (dir, mut store) = fresh();
        let events: Vec<JournalEntry> = (1..=6).map(|n| entry(n, if n % 2 == 0 { "even" } else { "odd" })).collect();
        store.commit(&Commit { alarm_events: &events, ..Default::default() }).unwrap();
        // The writer stays open, as the ledger thread does.
        let reader = JournalReader::new(&dir.path().join("ledger.db"));
        assert_eq!(numbers(&reader.component("even", 10).unwrap()), [6, 4, 2]);
        assert_eq!(numbers(&reader.component("odd", 2).unwrap()), [5, 3]);
        assert!(reader.component("none", 10).unwrap().is_empty());
    }

    #[test]
    fn rollback_records_are_in_a_components_history_but_not_among_the_plants_alarm_events() {
        let (dir, mut store) = fresh();
        let rollback = JournalEntry { index: ROLLBACK_INDEX.into(), ..entry(2, "sh-1") };
        store
            .commit(&Commit { alarm_events: &[entry(1, "sh-1"), rollback, entry(3, "sh-2")], ..Default::default() })
            .unwrap();
        assert_eq!(numbers(&store.alarm_journal_newest(10).unwrap()), [3, 1]);
        let reader = JournalReader::new(&dir.path().join("ledger.db"));
        assert_eq!(numbers(&reader.component("sh-1", 10).unwrap()), [2, 1]);
    }

    #[test]
    fn pruning_keeps_the_newest_n_of_the_plant() {
        let (_dir, mut store) = fresh();
        store.set_alarm_journal_max_events(5);
        for batch in [1..=3, 4..=4, 5..=9] {
            let events: Vec<JournalEntry> = batch.map(|n| entry(n, if n < 7 { "a" } else { "b" })).collect();
            store.commit(&Commit { alarm_events: &events, ..Default::default() }).unwrap();
        }
        assert_eq!(numbers(&store.alarm_journal_newest(100).unwrap()), [9, 8, 7, 6, 5]);

        // A lower limit takes effect with the next batch that has events.
        store.set_alarm_journal_max_events(2);
        store.commit(&Commit { meta: &[("k".into(), "1".into())], ..Default::default() }).unwrap();
        assert_eq!(store.alarm_journal_newest(100).unwrap().len(), 5, "no events, no pruning");
        store.commit(&Commit { alarm_events: &[entry(10, "a")], ..Default::default() }).unwrap();
        assert_eq!(numbers(&store.alarm_journal_newest(100).unwrap()), [10, 9]);

        // A batch larger than the limit keeps only its own newest.
        let big: Vec<JournalEntry> = (11..=20).map(|n| entry(n, "a")).collect();
        store.commit(&Commit { alarm_events: &big, ..Default::default() }).unwrap();
        assert_eq!(numbers(&store.alarm_journal_newest(100).unwrap()), [20, 19]);
    }

    #[test]
    fn a_rolled_back_batch_writes_no_event() {
        let (_dir, mut store) = fresh();
        store.commit(&Commit { alarm_events: &[entry(1, "a")], ..Default::default() }).unwrap();
        // Make the outbox insert, which runs after the journal's, fail.
        store
            .conn
            .execute_batch("CREATE TRIGGER refuse BEFORE INSERT ON outbox BEGIN SELECT RAISE(ABORT, 'refused'); END")
            .unwrap();
        let events = vec![entry(2, "a"), entry(3, "b")];
        let err = store
            .commit(&Commit { alarm_events: &events, outbox: &["x".to_string()], ..Default::default() })
            .unwrap_err();
        assert!(err.to_string().contains("committing a batch"), "{err}");
        assert_eq!(numbers(&store.alarm_journal_newest(100).unwrap()), [1]);

        // The same events committed again (as the ledger thread does after a
        // failed commit) are recorded once, with the next ids.
        store.conn.execute_batch("DROP TRIGGER refuse").unwrap();
        store.commit(&Commit { alarm_events: &events, outbox: &["x".to_string()], ..Default::default() }).unwrap();
        let rows = store.alarm_journal_newest(100).unwrap();
        assert_eq!(numbers(&rows), [3, 2, 1]);
        assert_eq!(rows.iter().map(|(id, _)| *id).collect::<Vec<_>>(), [3, 2, 1]);
    }

    #[test]
    fn a_version_1_ledger_is_upgraded_and_keeps_its_data() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        // A ledger as the release before the journal wrote it.
        earlier_ledger(&path, 1);
        let mut store = Store::open(&path).unwrap();
        assert_upgraded_with_v1_rows(&store);

        // The new journal starts empty and takes events.
        assert!(store.alarm_journal_newest(10).unwrap().is_empty());
        store.commit(&Commit { alarm_events: &[entry(1, "sh-1")], ..Default::default() }).unwrap();
        drop(store);
        assert_eq!(schema::inspect(&path).unwrap(), schema::Found::Ledger(schema::SCHEMA_VERSION));
        assert_eq!(numbers(&Store::open(&path).unwrap().alarm_journal_newest(10).unwrap()), [1]);
    }
}
