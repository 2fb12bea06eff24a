//! Inspection records and the daily history of each component.
//!
//! **Inspection records** (`inspection_record`) are append-only: a row is
//! never deleted or edited, except that the ledger thread fills in the
//! `accepted` column once (the record as the engine applies it: effective
//! instant, reference values, JSON text) in the transaction of the batch
//! that holds the component's new state. A correction is a new row whose
//! `supersedes` names the row it corrects. A record is durable once
//! [`Store::append_inspection`] returns: whoever entered it (command line,
//! HTTP API) is told so only then. A running service finds rows not yet
//! accepted with [`Store::pending_inspections`].
//!
//! **Daily history** (`history_day`): per component and UTC day of event
//! time, the ledger's figures at the newest instant of that day (upserted
//! with each commit that changed the component, so a day's row is its last
//! state), kept for the life of the part: about 0.2 kB a day, 70 kB a
//! year per component. The fine trend ([`super::trend`]) stays as it is.
//!
//! Like the rest of the store it knows nothing of engine types: the kind,
//! value, unit and detail of a record are text and numbers as entered.

use std::path::Path;

use rusqlite::{Connection, OptionalExtension, Row};
use serde::{Deserialize, Serialize};

use super::{read_only, Store, StoreError};

/// One inspection record as stored.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InspectionRow {
    pub id: i64,
    pub component: String,
    /// Date of the finding, ms since the epoch (event time).
    pub finding_ms: i64,
    /// When it was entered, wall clock, ms since the epoch.
    pub entered_ms: i64,
    /// Who entered it.
    pub entered_by: String,
    /// Method (ultrasonic thickness, replica, ...).
    pub method: String,
    /// Where on the part.
    pub location: String,
    /// `wall_thickness`, `creep_strain`, `wear_depth`, `replica`, `oxide_thickness`.
    pub kind: String,
    /// The value in `unit` (`None` for a replica class).
    pub value: Option<f64>,
    pub unit: String,
    /// Kind-specific fields as JSON text (`{"class":"B","rebase":false}`,
    /// `{"service_h":60000}`).
    pub detail: String,
    pub notes: String,
    /// The record this one corrects.
    pub supersedes: Option<i64>,
    /// The record as the ledger accepted it (JSON text); `None`: not yet.
    pub accepted: Option<String>,
}

/// A record to append (the id and acceptance come later).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NewInspection {
    pub component: String,
    pub finding_ms: i64,
    pub entered_ms: i64,
    pub entered_by: String,
    pub method: String,
    pub location: String,
    pub kind: String,
    pub value: Option<f64>,
    pub unit: String,
    pub detail: String,
    pub notes: String,
    pub supersedes: Option<i64>,
}

/// One day of a component's history: its figures at `t_ms`, the newest
/// instant of that UTC day the ledger reached.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct HistoryPoint {
    /// Event time, ms since the epoch.
    pub t_ms: i64,
    pub life_fraction: f64,
    pub creep_strain: f64,
    pub wear_depth_mm: f64,
    pub wear_index: f64,
    pub integrated_h: f64,
    pub unmonitored_h: f64,
    pub extrapolated_h: f64,
    /// Recent (projection) rates per hour.
    pub life_fraction_rate_per_h: f64,
    pub creep_strain_rate_per_h: f64,
    pub wear_rate_mm_per_h: f64,
    pub hoop_stress_mpa: f64,
    pub metal_temperature_k: f64,
}

/// Version 7: inspection records, append-only.
pub(super) fn v7_inspection_record(tx: &rusqlite::Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE inspection_record (
             id INTEGER PRIMARY KEY AUTOINCREMENT,
             component TEXT NOT NULL,
             finding_ms INTEGER NOT NULL,
             entered_ms INTEGER NOT NULL,
             entered_by TEXT NOT NULL,
             method TEXT NOT NULL,
             location TEXT NOT NULL,
             kind TEXT NOT NULL,
             value REAL,
             unit TEXT NOT NULL,
             detail TEXT NOT NULL,
             notes TEXT NOT NULL,
             supersedes INTEGER REFERENCES inspection_record (id),
             accepted TEXT
         );
         CREATE INDEX inspection_by_component ON inspection_record (component, id);
         CREATE INDEX inspection_pending ON inspection_record (id) WHERE accepted IS NULL;
         CREATE TRIGGER inspection_no_delete BEFORE DELETE ON inspection_record
         BEGIN SELECT RAISE(ABORT, 'inspection records are never deleted; enter a correction'); END;",
    )
}

/// Version 8: the daily history of each component, kept for its life.
pub(super) fn v8_history_day(tx: &rusqlite::Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE history_day (
             component TEXT NOT NULL,
             day INTEGER NOT NULL,
             t_ms INTEGER NOT NULL,
             point TEXT NOT NULL,
             PRIMARY KEY (component, day)
         ) WITHOUT ROWID;",
    )
}

const COLUMNS: &str = "id, component, finding_ms, entered_ms, entered_by, method, location, kind, value, unit, \
                       detail, notes, supersedes, accepted";

fn row(r: &Row<'_>) -> rusqlite::Result<InspectionRow> {
    Ok(InspectionRow {
        id: r.get(0)?,
        component: r.get(1)?,
        finding_ms: r.get(2)?,
        entered_ms: r.get(3)?,
        entered_by: r.get(4)?,
        method: r.get(5)?,
        location: r.get(6)?,
        kind: r.get(7)?,
        value: r.get(8)?,
        unit: r.get(9)?,
        detail: r.get(10)?,
        notes: r.get(11)?,
        supersedes: r.get(12)?,
        accepted: r.get(13)?,
    })
}

fn select(conn: &Connection, component: Option<&str>, pending_only: bool) -> rusqlite::Result<Vec<InspectionRow>> {
    let sql = format!(
        "SELECT {COLUMNS} FROM inspection_record WHERE (?1 IS NULL OR component = ?1) {} ORDER BY id",
        if pending_only { "AND accepted IS NULL" } else { "" }
    );
    let mut stmt = conn.prepare_cached(&sql)?;
    let rows = stmt.query_map([component], row)?;
    rows.collect()
}

/// Marks records accepted (inside the caller's transaction); a record
/// already accepted keeps its first acceptance.
pub(super) fn accept(conn: &Connection, accepted: &[(i64, String)]) -> rusqlite::Result<()> {
    if accepted.is_empty() {
        return Ok(());
    }
    let mut stmt =
        conn.prepare_cached("UPDATE inspection_record SET accepted = ?2 WHERE id = ?1 AND accepted IS NULL")?;
    for (id, json) in accepted {
        stmt.execute((id, json))?;
    }
    Ok(())
}

/// Upserts history points (inside the caller's transaction): one row per
/// component and UTC day, the newest point of the day.
pub(super) fn upsert_history(conn: &Connection, points: &[(String, HistoryPoint)]) -> rusqlite::Result<()> {
    if points.is_empty() {
        return Ok(());
    }
    let mut stmt = conn.prepare_cached(
        "INSERT INTO history_day (component, day, t_ms, point) VALUES (?1, ?2, ?3, ?4)
         ON CONFLICT (component, day) DO UPDATE SET t_ms = excluded.t_ms, point = excluded.point
         WHERE excluded.t_ms >= history_day.t_ms",
    )?;
    for (c, p) in points {
        let json = serde_json::to_string(p).unwrap_or_default();
        stmt.execute((c, crate::event_time::utc_day(p.t_ms), p.t_ms, json))?;
    }
    Ok(())
}

fn history(conn: &Connection, component: &str) -> rusqlite::Result<Vec<HistoryPoint>> {
    let mut stmt = conn.prepare_cached("SELECT point FROM history_day WHERE component = ?1 ORDER BY day")?;
    let rows = stmt.query_map([component], |r| r.get::<_, String>(0))?;
    let mut out = vec![];
    for json in rows {
        if let Ok(p) = serde_json::from_str(&json?) {
            out.push(p);
        }
    }
    Ok(out)
}

impl Store {
    /// Appends a record in its own transaction and returns its id once it
    /// is on disk. A `supersedes` that names no record of the same
    /// component and kind is refused.
    pub fn append_inspection(&mut self, n: &NewInspection) -> Result<i64, StoreError> {
        let path = self.path.clone();
        let fail = |e| StoreError::sqlite(&path, "appending an inspection record", e);
        let tx = self.conn.transaction_with_behavior(rusqlite::TransactionBehavior::Immediate).map_err(fail)?;
        if let Some(s) = n.supersedes {
            let found: Option<(String, String)> = tx
                .query_row("SELECT component, kind FROM inspection_record WHERE id = ?1", [s], |r| {
                    Ok((r.get(0)?, r.get(1)?))
                })
                .optional()
                .map_err(fail)?;
            match found {
                Some((c, k)) if c == n.component && k == n.kind => {}
                Some((c, k)) => {
                    return Err(StoreError::NotReadable {
                        path: path.clone(),
                        detail: format!(
                            "record {s} is a {k} finding of {c}; a correction must be of the same component and kind"
                        ),
                    })
                }
                None => {
                    return Err(StoreError::NotReadable {
                        path: path.clone(),
                        detail: format!("there is no inspection record {s} to correct"),
                    })
                }
            }
        }
        tx.execute(
            "INSERT INTO inspection_record (component, finding_ms, entered_ms, entered_by, method, location, kind,
                                            value, unit, detail, notes, supersedes)
             VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)",
            rusqlite::params![
                n.component,
                n.finding_ms,
                n.entered_ms,
                n.entered_by,
                n.method,
                n.location,
                n.kind,
                n.value,
                n.unit,
                n.detail,
                n.notes,
                n.supersedes
            ],
        )
        .map_err(fail)?;
        let id = tx.last_insert_rowid();
        tx.commit().map_err(fail)?;
        Ok(id)
    }

    /// Records the ledger has not accepted yet, oldest first.
    pub fn pending_inspections(&self) -> Result<Vec<InspectionRow>, StoreError> {
        select(&self.conn, None, true).map_err(|e| StoreError::sqlite(&self.path, "reading inspection records", e))
    }

    /// Every record (of one component, or all), oldest first.
    pub fn inspections(&self, component: Option<&str>) -> Result<Vec<InspectionRow>, StoreError> {
        select(&self.conn, component, false)
            .map_err(|e| StoreError::sqlite(&self.path, "reading inspection records", e))
    }

    /// The newest history point of `component` at or before `t_ms`.
    pub fn history_at_or_before(&self, component: &str, t_ms: i64) -> Result<Option<HistoryPoint>, StoreError> {
        let fail = |e| StoreError::sqlite(&self.path, "reading the daily history", e);
        let json: Option<String> = self
            .conn
            .query_row(
                "SELECT point FROM history_day WHERE component = ?1 AND t_ms <= ?2 ORDER BY day DESC LIMIT 1",
                (component, t_ms),
                |r| r.get(0),
            )
            .optional()
            .map_err(fail)?;
        Ok(json.and_then(|j| serde_json::from_str(&j).ok()))
    }

    /// The daily history of `component`, oldest first.
    pub fn history(&self, component: &str) -> Result<Vec<HistoryPoint>, StoreError> {
        history(&self.conn, component).map_err(|e| StoreError::sqlite(&self.path, "reading the daily history", e))
    }
}

/// Every inspection record (of one component, or all) of the ledger at
/// `path`, read on a read-only connection (safe while the service runs).
pub fn read_inspections(path: &Path, component: Option<&str>) -> Result<Vec<InspectionRow>, StoreError> {
    let conn = read_only(path).map_err(|e| StoreError::sqlite(path, "opening the ledger for reading", e))?;
    select(&conn, component, false).map_err(|e| StoreError::sqlite(path, "reading inspection records", e))
}

/// The daily history of `component` of the ledger at `path`, read-only.
pub fn read_history(path: &Path, component: &str) -> Result<Vec<HistoryPoint>, StoreError> {
    let conn = read_only(path).map_err(|e| StoreError::sqlite(path, "opening the ledger for reading", e))?;
    history(&conn, component).map_err(|e| StoreError::sqlite(path, "reading the daily history", e))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn new(kind: &str, value: f64, supersedes: Option<i64>) -> NewInspection {
        NewInspection {
            component: "sh-1".into(),
            finding_ms: 1_700_000_000_000,
            entered_ms: 1_700_000_100_000,
            entered_by: "A. Engineer".into(),
            method: "ultrasonic".into(),
            location: "bend 3".into(),
            kind: kind.into(),
            value: Some(value),
            unit: "mm".into(),
            detail: "{}".into(),
            notes: String::new(),
            supersedes,
        }
    }

    #[test]
    fn records_append_are_accepted_once_and_are_never_deleted() {
        let dir = tempfile::tempdir().unwrap();
        let mut s = Store::open(&dir.path().join("l.db")).unwrap();
        let a = s.append_inspection(&new("wall_thickness", 5.9, None)).unwrap();
        let b = s.append_inspection(&new("wall_thickness", 5.8, Some(a))).unwrap();
        assert!(b > a);
        assert!(s.append_inspection(&new("creep_strain", 0.1, Some(a))).is_err(), "kind must match");
        assert!(s.append_inspection(&new("wall_thickness", 0.1, Some(999))).is_err(), "no such record");
        assert_eq!(s.pending_inspections().unwrap().len(), 2);
        s.commit(&super::super::Commit { inspections_accepted: &[(a, "{\"x\":1}".into())], ..Default::default() })
            .unwrap();
        s.commit(&super::super::Commit { inspections_accepted: &[(a, "{\"x\":2}".into())], ..Default::default() })
            .unwrap();
        let all = s.inspections(Some("sh-1")).unwrap();
        assert_eq!(all[0].accepted.as_deref(), Some("{\"x\":1}"), "first acceptance kept");
        assert_eq!(s.pending_inspections().unwrap().len(), 1);
        let err = s.conn.execute("DELETE FROM inspection_record", []).unwrap_err();
        assert!(err.to_string().contains("never deleted"), "{err}");
    }

    #[test]
    fn history_keeps_the_newest_point_of_each_day() {
        let dir = tempfile::tempdir().unwrap();
        let mut s = Store::open(&dir.path().join("l.db")).unwrap();
        let p = |t_ms: i64, lf: f64| HistoryPoint {
            t_ms,
            life_fraction: lf,
            creep_strain: 0.0,
            wear_depth_mm: 0.0,
            wear_index: 0.0,
            integrated_h: 0.0,
            unmonitored_h: 0.0,
            extrapolated_h: 0.0,
            life_fraction_rate_per_h: 0.0,
            creep_strain_rate_per_h: 0.0,
            wear_rate_mm_per_h: 0.0,
            hoop_stress_mpa: 0.0,
            metal_temperature_k: 0.0,
        };
        let day = 86_400_000;
        let pts = vec![
            ("c".to_string(), p(day + 10, 0.1)),
            ("c".to_string(), p(day + 20, 0.2)),
            ("c".to_string(), p(2 * day + 5, 0.3)),
        ];
        s.commit(&super::super::Commit { history: &pts, ..Default::default() }).unwrap();
        // An older point of the same day does not replace a newer one.
        s.commit(&super::super::Commit { history: &[("c".to_string(), p(day + 15, 9.0))], ..Default::default() })
            .unwrap();
        let h = s.history("c").unwrap();
        assert_eq!(h.iter().map(|p| p.life_fraction).collect::<Vec<_>>(), vec![0.2, 0.3]);
        assert_eq!(s.history_at_or_before("c", 2 * day).unwrap().unwrap().life_fraction, 0.2);
        assert_eq!(s.history_at_or_before("c", day).unwrap(), None);
    }
}
