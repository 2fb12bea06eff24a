//! The reorder window on disk: samples the engine accepted but holds until
//! event time has moved a window past them.
//!
//! The MQTT messages of those samples are acknowledged at the batch's
//! commit like any other, so the samples must be as durable as the ledgers
//! they will change: each batch inserts the samples that entered the window
//! and deletes those the engine integrated, in the batch's transaction. At
//! start-up the service hands the rows back to the engine.

use rusqlite::{Connection, Transaction};

/// One held sample, as stored.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HeldRow<'a> {
    /// Arrival order, unique within the ledger.
    pub seq: u64,
    pub tag: &'a str,
    /// Event time, ms since the epoch.
    pub time_ms: i64,
    /// Value in internal units (already screened).
    pub value: f64,
    /// Wall-clock arrival, ms since the epoch.
    pub arrival_ms: i64,
}

/// A held sample as loaded (owned tag name).
#[derive(Debug, Clone, PartialEq)]
pub struct LoadedHeld {
    pub seq: u64,
    pub tag: String,
    pub time_ms: i64,
    pub value: f64,
    pub arrival_ms: i64,
}

/// Insert the samples that entered the window, then delete the released.
pub(crate) fn apply(tx: &Transaction<'_>, added: &[HeldRow<'_>], released: &[u64]) -> rusqlite::Result<()> {
    if !added.is_empty() {
        let mut stmt = tx.prepare_cached(
            "INSERT OR REPLACE INTO held_sample (seq, tag, time_ms, value, arrival_ms) VALUES (?1, ?2, ?3, ?4, ?5)",
        )?;
        for h in added {
            stmt.execute((h.seq as i64, h.tag, h.time_ms, h.value, h.arrival_ms))?;
        }
    }
    if !released.is_empty() {
        let mut stmt = tx.prepare_cached("DELETE FROM held_sample WHERE seq = ?1")?;
        for q in released {
            stmt.execute([*q as i64])?;
        }
    }
    Ok(())
}

/// Every held sample, in arrival order.
pub(crate) fn load(conn: &Connection) -> rusqlite::Result<Vec<LoadedHeld>> {
    let mut stmt = conn.prepare_cached("SELECT seq, tag, time_ms, value, arrival_ms FROM held_sample ORDER BY seq")?;
    let rows = stmt.query_map([], |r| {
        Ok(LoadedHeld {
            seq: r.get::<_, i64>(0)? as u64,
            tag: r.get(1)?,
            time_ms: r.get(2)?,
            value: r.get(3)?,
            arrival_ms: r.get(4)?,
        })
    })?;
    rows.collect()
}
