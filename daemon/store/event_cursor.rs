//! The alarm-event publish cursor: how far the broker has acknowledged the
//! alarm event messages published from the journal.
//!
//! Alarm event messages are published from the durable alarm journal, not
//! from memory (`service::event_publish`): every event of a committed
//! batch is in the journal with its sequence number, and the cursor says
//! "the broker acknowledged (QoS 1 PUBACK) every event up to sequence N".
//! At start and on every connection the publisher sends the journal's
//! events after N again, so a crash or a broker outage between the commit
//! and the publish delays an event message but never loses it (a consumer
//! may see one twice and drops it by its sequence number).
//!
//! One row in `event_publish_cursor` (schema step 10). The step starts the
//! cursor at the newest sequence number already in the journal: those
//! events were published by the build that wrote them, and sending up to
//! the journal's whole history again at the upgrade would flood consumers.

use rusqlite::{OptionalExtension, Transaction};

use super::{Store, StoreError};

/// Schema step: the cursor table, started at the newest event already in
/// the journal, and an index on the events' sequence numbers so that
/// "the events after N" is a range read.
pub(super) fn v11_event_publish_cursor(tx: &Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE event_publish_cursor (
             id INTEGER PRIMARY KEY CHECK (id = 1),
             published_seq INTEGER NOT NULL
         );
         CREATE INDEX alarm_journal_by_seq ON alarm_journal (json_extract(event, '$.seq'))
             WHERE json_extract(event, '$.seq') IS NOT NULL;
         INSERT INTO event_publish_cursor (id, published_seq)
             SELECT 1, COALESCE(MAX(json_extract(event, '$.seq')), 0) FROM alarm_journal;",
    )
}

/// One journal event to publish: its sequence number and its JSON text.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct JournalEvent {
    pub seq: u64,
    pub event: String,
}

impl Store {
    /// The sequence number up to which the broker acknowledged every
    /// alarm event message (0: none yet).
    pub fn published_seq(&self) -> Result<u64, StoreError> {
        let v: Option<i64> = self
            .conn
            .query_row("SELECT published_seq FROM event_publish_cursor WHERE id = 1", [], |r| r.get(0))
            .optional()
            .map_err(|e| StoreError::sqlite(&self.path, "reading the event publish cursor", e))?;
        Ok(v.map_or(0, |v| u64::try_from(v).unwrap_or(0)))
    }

    /// Records that the broker acknowledged every alarm event message up
    /// to `seq`. Never moves the cursor backwards.
    pub fn set_published_seq(&self, seq: u64) -> Result<(), StoreError> {
        let seq = i64::try_from(seq).unwrap_or(i64::MAX);
        self.conn
            .execute(
                "INSERT INTO event_publish_cursor (id, published_seq) VALUES (1, ?1)
                 ON CONFLICT (id) DO UPDATE SET published_seq = MAX(published_seq, excluded.published_seq)",
                [seq],
            )
            .map_err(|e| StoreError::sqlite(&self.path, "writing the event publish cursor", e))?;
        Ok(())
    }

    /// The journal's alarm events with a sequence number above `after`, in
    /// sequence order, at most `limit` of them.
    pub fn journal_events_after(&self, after: u64, limit: usize) -> Result<Vec<JournalEvent>, StoreError> {
        let after = i64::try_from(after).unwrap_or(i64::MAX);
        let limit = i64::try_from(limit).unwrap_or(i64::MAX);
        let read = |e| StoreError::sqlite(&self.path, "reading the alarm journal's events to publish", e);
        let mut stmt = self
            .conn
            .prepare_cached(
                "SELECT json_extract(event, '$.seq'), event FROM alarm_journal
                 WHERE json_extract(event, '$.seq') IS NOT NULL AND json_extract(event, '$.seq') > ?1
                 ORDER BY json_extract(event, '$.seq') LIMIT ?2",
            )
            .map_err(read)?;
        let rows = stmt
            .query_map((after, limit), |r| {
                let seq: i64 = r.get(0)?;
                Ok(JournalEvent { seq: u64::try_from(seq).unwrap_or(0), event: r.get(1)? })
            })
            .map_err(read)?;
        rows.collect::<Result<Vec<_>, _>>().map_err(read)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::JournalEntry;

    fn entry(seq: u64) -> JournalEntry {
        JournalEntry {
            time_ms: seq as i64,
            component: "C".into(),
            index: "creep_life_fraction".into(),
            event: format!("{{\"seq\":{seq},\"component\":\"C\"}}"),
        }
    }

    /// The cursor starts at 0 on a new ledger, never moves back, and the
    /// events after it come in sequence order, limited.
    #[test]
    fn events_after_the_cursor_in_order() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("l.db");
        let mut store = Store::open_with(&path, true).unwrap();
        assert_eq!(store.published_seq().unwrap(), 0);
        let entries: Vec<JournalEntry> = (1..=5).map(entry).collect();
        store.commit(&crate::store::Commit { alarm_events: &entries, ..Default::default() }).unwrap();
        let after = store.journal_events_after(2, 2).unwrap();
        assert_eq!(after.iter().map(|e| e.seq).collect::<Vec<_>>(), [3, 4]);
        assert!(after[0].event.contains("\"seq\":3"));
        store.set_published_seq(4).unwrap();
        store.set_published_seq(3).unwrap();
        assert_eq!(store.published_seq().unwrap(), 4, "never backwards");
        assert_eq!(store.journal_events_after(4, 10).unwrap().len(), 1);
    }

    /// A ledger written before the cursor existed starts it at the newest
    /// event of its journal, so an upgrade does not send the journal's
    /// history again; events without a number (older builds) are skipped.
    #[test]
    fn an_upgraded_ledger_starts_at_its_newest_event() {
        use crate::store::schema::{migrate, MIGRATIONS};
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("old.db");
        let mut conn = rusqlite::Connection::open(&path).unwrap();
        let before = &MIGRATIONS[..MIGRATIONS.len() - 1];
        migrate(&mut conn, &path, before).unwrap();
        for (i, event) in ["{\"component\":\"C\"}", "{\"seq\":7}", "{\"seq\":9}"].iter().enumerate() {
            conn.execute(
                "INSERT INTO alarm_journal (time_ms, component, alarm_index, event) VALUES (?1, 'C', 'x', ?2)",
                (i as i64, event),
            )
            .unwrap();
        }
        migrate(&mut conn, &path, MIGRATIONS).unwrap();
        drop(conn);
        let store = Store::open_with(&path, false).unwrap();
        assert_eq!(store.published_seq().unwrap(), 9);
        assert!(store.journal_events_after(9, 10).unwrap().is_empty());
        assert_eq!(store.journal_events_after(0, 10).unwrap().iter().map(|e| e.seq).collect::<Vec<_>>(), [7, 9]);
    }
}
