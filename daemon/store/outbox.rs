//! The outbox: line-protocol points that are durable in the ledger but not
//! yet accepted by the time-series database.
//!
//! Lines are appended by [`Store::commit`] in the same transaction as the
//! state they describe, read oldest first in bounded batches by the sink
//! ([`Store::outbox_batch`]), and removed only after the database accepted
//! them ([`Store::outbox_remove_through`]). A crash between sending and
//! removing sends the batch again; every point carries its event timestamp,
//! so the retry overwrites itself (invariant 4: at-least-once delivery).
//!
//! Line and byte totals live in one row (`outbox_total`) changed in the same
//! transactions as the lines, so [`Store::outbox_stats`] is one row read,
//! however deep the outbox has grown while the database was away.

use rusqlite::{Connection, TransactionBehavior};

use super::{Store, StoreError};

/// How much is waiting in the outbox.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct OutboxStats {
    /// Number of lines.
    pub lines: u64,
    /// Sum of the lines' lengths in bytes (UTF-8, without newlines).
    pub bytes: u64,
    /// Lines the database refused as malformed, parked out of the outbox
    /// (see [`Store::outbox_park_through`]); not counted in `lines`.
    pub parked: u64,
}

/// Appends `lines` in order and adds them to the running totals. Runs
/// inside the caller's transaction.
pub(super) fn append(conn: &Connection, lines: &[String]) -> rusqlite::Result<()> {
    if lines.is_empty() {
        return Ok(());
    }
    let mut insert = conn.prepare_cached("INSERT INTO outbox (line) VALUES (?1)")?;
    let mut bytes: u64 = 0;
    for line in lines {
        insert.execute([line])?;
        bytes += line.len() as u64;
    }
    add_to_totals(conn, lines.len() as i64, bytes as i64)
}

/// Reads the running totals.
pub(super) fn totals(conn: &Connection) -> rusqlite::Result<OutboxStats> {
    let mut stmt = conn.prepare_cached("SELECT lines, bytes, parked_lines FROM outbox_total WHERE only = 1")?;
    stmt.query_row([], |r| {
        let lines: i64 = r.get(0)?;
        let bytes: i64 = r.get(1)?;
        let parked: i64 = r.get(2)?;
        // Never negative: every change is paired with the rows it counts.
        Ok(OutboxStats { lines: lines.max(0) as u64, bytes: bytes.max(0) as u64, parked: parked.max(0) as u64 })
    })
}

fn add_to_totals(conn: &Connection, lines: i64, bytes: i64) -> rusqlite::Result<()> {
    let mut stmt =
        conn.prepare_cached("UPDATE outbox_total SET lines = lines + ?1, bytes = bytes + ?2 WHERE only = 1")?;
    stmt.execute((lines, bytes))?;
    Ok(())
}

impl Store {
    /// The oldest lines, oldest first, with their ids: at most `max_lines`
    /// lines whose lengths sum to at most `max_bytes`, except that the
    /// oldest line is always returned even if it alone is longer, so one
    /// oversized point cannot stall the outbox. Empty when the outbox is
    /// empty or `max_lines` is 0.
    pub fn outbox_batch(&self, max_lines: usize, max_bytes: usize) -> Result<Vec<(i64, String)>, StoreError> {
        let fail = |e| StoreError::sqlite(&self.path, "reading the outbox", e);
        if max_lines == 0 {
            return Ok(Vec::new());
        }
        let limit = i64::try_from(max_lines).unwrap_or(i64::MAX);
        let mut stmt = self.conn.prepare_cached("SELECT id, line FROM outbox ORDER BY id LIMIT ?1").map_err(fail)?;
        let mut rows = stmt.query([limit]).map_err(fail)?;
        let mut batch = Vec::new();
        let mut bytes = 0usize;
        while let Some(row) = rows.next().map_err(fail)? {
            let id: i64 = row.get(0).map_err(fail)?;
            let line: String = row.get(1).map_err(fail)?;
            if !batch.is_empty() && bytes.saturating_add(line.len()) > max_bytes {
                break;
            }
            bytes += line.len();
            batch.push((id, line));
        }
        Ok(batch)
    }

    /// Removes every line with an id at or below `id`, once the database has
    /// accepted them. Ids are never reused, so removing through an id twice,
    /// or through an id already gone, is harmless.
    pub fn outbox_remove_through(&mut self, id: i64) -> Result<(), StoreError> {
        let path = &self.path;
        let fail = |e| StoreError::sqlite(path, "removing delivered lines from the outbox", e);
        let tx = self.conn.transaction_with_behavior(TransactionBehavior::Immediate).map_err(fail)?;
        let (lines, bytes): (i64, i64) = tx
            .prepare_cached("SELECT count(*), coalesce(sum(length(CAST(line AS BLOB))), 0) FROM outbox WHERE id <= ?1")
            .and_then(|mut s| s.query_row([id], |r| Ok((r.get(0)?, r.get(1)?))))
            .map_err(fail)?;
        if lines > 0 {
            tx.prepare_cached("DELETE FROM outbox WHERE id <= ?1").and_then(|mut s| s.execute([id])).map_err(fail)?;
            add_to_totals(&tx, -lines, -bytes).map_err(fail)?;
        }
        tx.commit().map_err(fail)
    }

    /// Moves every line with an id at or below `id` out of the outbox into
    /// the parked lines, in one transaction, with `reason` (the database's
    /// answer) and the wall-clock time: for a batch the database refused as
    /// malformed, which retrying would only refuse again while it blocks
    /// every point behind it. Parked lines are kept, counted
    /// ([`OutboxStats::parked`]) and never counted as delivered. Returns how
    /// many lines were parked (0 if they were gone already).
    pub fn outbox_park_through(&mut self, id: i64, reason: &str) -> Result<u64, StoreError> {
        let path = &self.path;
        let fail = |e| StoreError::sqlite(path, "parking refused lines out of the outbox", e);
        let tx = self.conn.transaction_with_behavior(TransactionBehavior::Immediate).map_err(fail)?;
        let (lines, bytes): (i64, i64) = tx
            .prepare_cached("SELECT count(*), coalesce(sum(length(CAST(line AS BLOB))), 0) FROM outbox WHERE id <= ?1")
            .and_then(|mut s| s.query_row([id], |r| Ok((r.get(0)?, r.get(1)?))))
            .map_err(fail)?;
        if lines > 0 {
            tx.prepare_cached(
                "INSERT INTO parked_line (line, parked_ms, reason)
                 SELECT line, ?2, ?3 FROM outbox WHERE id <= ?1 ORDER BY id",
            )
            .and_then(|mut s| s.execute((id, super::wall_clock_ms(), reason)))
            .map_err(fail)?;
            tx.prepare_cached("DELETE FROM outbox WHERE id <= ?1").and_then(|mut s| s.execute([id])).map_err(fail)?;
            add_to_totals(&tx, -lines, -bytes).map_err(fail)?;
            tx.prepare_cached("UPDATE outbox_total SET parked_lines = parked_lines + ?1 WHERE only = 1")
                .and_then(|mut s| s.execute([lines]))
                .map_err(fail)?;
        }
        tx.commit().map_err(fail)?;
        Ok(lines as u64)
    }

    /// The parked lines, oldest first: (line, wall-clock ms parked, reason).
    pub fn parked_lines(&self) -> Result<Vec<(String, i64, String)>, StoreError> {
        let fail = |e| StoreError::sqlite(&self.path, "reading the parked lines", e);
        let mut stmt =
            self.conn.prepare_cached("SELECT line, parked_ms, reason FROM parked_line ORDER BY id").map_err(fail)?;
        let rows = stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?))).map_err(fail)?;
        rows.collect::<rusqlite::Result<Vec<_>>>().map_err(fail)
    }

    /// Lines and bytes waiting in the outbox (one row read).
    pub fn outbox_stats(&self) -> Result<OutboxStats, StoreError> {
        totals(&self.conn).map_err(|e| StoreError::sqlite(&self.path, "reading the outbox totals", e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::Commit;

    fn fresh() -> (tempfile::TempDir, Store) {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::open(&dir.path().join("ledger.db")).unwrap();
        (dir, store)
    }

    fn append(store: &mut Store, lines: &[&str]) -> OutboxStats {
        let lines: Vec<String> = lines.iter().map(|l| l.to_string()).collect();
        store.commit(&Commit { outbox: &lines, ..Default::default() }).unwrap().outbox
    }

    /// The totals the counter row must always agree with.
    fn recount(store: &Store) -> OutboxStats {
        let (lines, bytes): (i64, i64) = store
            .conn
            .query_row("SELECT count(*), coalesce(sum(length(CAST(line AS BLOB))), 0) FROM outbox", [], |r| {
                Ok((r.get(0)?, r.get(1)?))
            })
            .unwrap();
        OutboxStats { lines: lines as u64, bytes: bytes as u64, parked: 0 }
    }

    fn lines_of(batch: &[(i64, String)]) -> Vec<&str> {
        batch.iter().map(|(_, l)| l.as_str()).collect()
    }

    #[test]
    fn lines_come_back_oldest_first_across_commits() {
        let (_dir, mut store) = fresh();
        append(&mut store, &["1", "2"]);
        append(&mut store, &["3"]);
        append(&mut store, &["4", "5", "6"]);
        let batch = store.outbox_batch(100, usize::MAX).unwrap();
        assert_eq!(lines_of(&batch), ["1", "2", "3", "4", "5", "6"]);
        assert!(batch.windows(2).all(|w| w[0].0 < w[1].0), "ids rise: {batch:?}");
    }

    #[test]
    fn a_batch_respects_both_limits() {
        let (_dir, mut store) = fresh();
        append(&mut store, &["aaaa", "bbbb", "cccc", "dddd"]);
        assert_eq!(lines_of(&store.outbox_batch(3, usize::MAX).unwrap()), ["aaaa", "bbbb", "cccc"]);
        assert_eq!(lines_of(&store.outbox_batch(10, 8).unwrap()), ["aaaa", "bbbb"]);
        assert_eq!(lines_of(&store.outbox_batch(10, 11).unwrap()), ["aaaa", "bbbb"]);
        assert!(store.outbox_batch(0, usize::MAX).unwrap().is_empty());
    }

    #[test]
    fn an_oversized_first_line_is_still_sent_alone() {
        let (_dir, mut store) = fresh();
        append(&mut store, &["a long line", "b"]);
        assert_eq!(lines_of(&store.outbox_batch(10, 3).unwrap()), ["a long line"]);
    }

    #[test]
    fn remove_through_drops_exactly_the_delivered_prefix() {
        let (_dir, mut store) = fresh();
        append(&mut store, &["1", "2", "3", "4"]);
        let batch = store.outbox_batch(2, usize::MAX).unwrap();
        store.outbox_remove_through(batch.last().unwrap().0).unwrap();
        assert_eq!(lines_of(&store.outbox_batch(10, usize::MAX).unwrap()), ["3", "4"]);

        // Again, or for an id already gone: nothing more goes.
        store.outbox_remove_through(batch.last().unwrap().0).unwrap();
        store.outbox_remove_through(batch[0].0).unwrap();
        assert_eq!(lines_of(&store.outbox_batch(10, usize::MAX).unwrap()), ["3", "4"]);
    }

    #[test]
    fn a_refused_batch_is_parked_whole_and_counted_not_dropped() {
        let (_dir, mut store) = fresh();
        append(&mut store, &["bad one", "bad two", "good"]);
        let batch = store.outbox_batch(2, usize::MAX).unwrap();
        let n = store.outbox_park_through(batch.last().unwrap().0, "HTTP 400: unable to parse").unwrap();
        assert_eq!(n, 2);
        assert_eq!(lines_of(&store.outbox_batch(10, usize::MAX).unwrap()), ["good"]);
        assert_eq!(store.outbox_stats().unwrap(), OutboxStats { lines: 1, bytes: 4, parked: 2 });
        let parked = store.parked_lines().unwrap();
        let texts: Vec<&str> = parked.iter().map(|(l, _, _)| l.as_str()).collect();
        assert_eq!(texts, ["bad one", "bad two"]);
        assert!(parked.iter().all(|(_, ms, why)| *ms > 0 && why.contains("HTTP 400")));
        // Parking through the same id again parks nothing more.
        assert_eq!(store.outbox_park_through(batch.last().unwrap().0, "again").unwrap(), 0);
        assert_eq!(store.outbox_stats().unwrap().parked, 2);
        assert_eq!(store.outbox_stats().unwrap(), recount_with_parked(&store));
    }

    /// The totals as counted from the rows themselves.
    fn recount_with_parked(store: &Store) -> OutboxStats {
        let parked: i64 = store.conn.query_row("SELECT count(*) FROM parked_line", [], |r| r.get(0)).unwrap();
        OutboxStats { parked: parked as u64, ..recount(store) }
    }

    #[test]
    fn ids_are_not_reused_after_the_outbox_drains_empty() {
        let (_dir, mut store) = fresh();
        append(&mut store, &["old"]);
        let old_id = store.outbox_batch(1, usize::MAX).unwrap()[0].0;
        store.outbox_remove_through(old_id).unwrap();
        append(&mut store, &["new"]);
        // A late remove for the old batch must not touch the new line.
        store.outbox_remove_through(old_id).unwrap();
        let batch = store.outbox_batch(10, usize::MAX).unwrap();
        assert_eq!(lines_of(&batch), ["new"]);
        assert!(batch[0].0 > old_id);
    }

    #[test]
    fn stats_follow_appends_and_removals_and_survive_a_reopen() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        let mut store = Store::open(&path).unwrap();
        assert_eq!(store.outbox_stats().unwrap(), OutboxStats::default());

        // Multi-byte UTF-8 counts in bytes, as the HTTP body will.
        let after = append(&mut store, &["abc", "é=1", "ü"]);
        assert_eq!(after, OutboxStats { lines: 3, bytes: 3 + 4 + 2, parked: 0 });
        assert_eq!(store.outbox_stats().unwrap(), after);
        assert_eq!(recount(&store), after);

        let first = store.outbox_batch(1, usize::MAX).unwrap()[0].0;
        store.outbox_remove_through(first).unwrap();
        assert_eq!(store.outbox_stats().unwrap(), OutboxStats { lines: 2, bytes: 6, parked: 0 });
        assert_eq!(recount(&store), store.outbox_stats().unwrap());

        drop(store);
        let store = Store::open(&path).unwrap();
        assert_eq!(store.outbox_stats().unwrap(), OutboxStats { lines: 2, bytes: 6, parked: 0 });

        let mut store = store;
        store.outbox_remove_through(i64::MAX).unwrap();
        assert_eq!(store.outbox_stats().unwrap(), OutboxStats::default());
        assert_eq!(recount(&store), OutboxStats::default());
    }
}
