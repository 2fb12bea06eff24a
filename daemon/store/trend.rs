//! The component trends: per component, the figures of each
//! `component_state` point (metal temperature, pressure, hoop stress, life
//! fraction, creep strain, wear index, the fatigue figures and a wear
//! contact's inputs) by event time, so the status page can draw a
//! component's recent past, also after a restart.
//!
//! Points are upserted by [`Store::commit`] in the transaction of the batch
//! that produced them, keyed by (component, event time): a batch that rolls
//! back writes none, and a point written again at the same event time (a
//! redelivered or replayed batch) replaces the row instead of adding one.
//!
//! The trend is bounded per component at
//! [`Store::set_trend_points_per_component`] points, the newest kept. To
//! keep commits cheap, a component is not pruned with every point but once
//! it holds more than the bound plus a tenth of it (rounded down), and then
//! back to the bound: between prunings a component may hold up to
//! `keep + keep / 10` points. The store counts each component's rows in
//! memory (from one `count(*)` at the component's first point after
//! start-up), so no commit has to scan a trend to know. A lowered bound
//! takes effect with a component's next point; the trend of a component
//! that no longer gets points (retired) stays as it is.
//!
//! Readers: [`TrendReader`], which opens its own read-only connection per
//! call, for the HTTP API (WAL lets it read while the ledger thread
//! writes), and [`Store::trend`] for tests and tools.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use rusqlite::{Connection, Row};
use serde::Serialize;

use super::{read_only, Store, StoreError};

/// How many points per component the trend keeps when the configuration
/// does not say: one week at the default `series_interval_s` of 60 s, the
/// longest window the status page offers.
pub const DEFAULT_POINTS_PER_COMPONENT: u64 = 7 * 24 * 60;

/// One point of a component's trend, as the status page draws it.
///
/// It serialises as `/api/components/{name}/trend` returns it. A value that
/// is not a number is stored as SQL `NULL`, read back as NaN and serialised
/// as `null`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct TrendPoint {
    /// Event time, ms since the Unix epoch.
    pub t: i64,
    pub metal_temperature_c: f64,
    pub pressure_mpa: f64,
    pub hoop_stress_mpa: f64,
    pub creep_life_fraction: f64,
    pub creep_strain: f64,
    pub wear_index: f64,
    /// Stress at the fatigue location, MPa, and fatigue usage (the open
    /// residue as half cycles); NaN (`null`) for parts without
    /// `[component.fatigue]` and for points written before schema v9.
    pub fatigue_stress_mpa: f64,
    pub fatigue_usage: f64,
    /// The inputs of a wear contact (`wear_load_n`, `wear_sliding_speed_mm_s`,
    /// `wear_slip_mm`, `wear_frequency_hz`); NaN (`null`) for other parts,
    /// for inputs the contact's model does not use and for older points.
    #[serde(flatten)]
    pub wear: WearInputs,
}

/// A wear contact's inputs at a trend point, internal units; NaN where
/// there is none.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct WearInputs {
    /// Normal load, N.
    #[serde(rename = "wear_load_n")]
    pub load_n: f64,
    /// Archard sliding speed, mm/s.
    #[serde(rename = "wear_sliding_speed_mm_s")]
    pub sliding_speed_mm_s: f64,
    /// Fretting slip amplitude, mm.
    #[serde(rename = "wear_slip_mm")]
    pub slip_mm: f64,
    /// Fretting frequency, Hz.
    #[serde(rename = "wear_frequency_hz")]
    pub frequency_hz: f64,
}

impl WearInputs {
    /// No wear inputs (a part that is no wear contact).
    pub const NONE: WearInputs =
        WearInputs { load_n: f64::NAN, sliding_speed_mm_s: f64::NAN, slip_mm: f64::NAN, frequency_hz: f64::NAN };
}

/// Schema step: the wear inputs beside each trend point, `NULL` for parts
/// that are no wear contact and for rows written before.
pub(super) fn v10_trend_wear_inputs(tx: &rusqlite::Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "ALTER TABLE trend_point ADD COLUMN wear_load_n REAL;
         ALTER TABLE trend_point ADD COLUMN wear_sliding_speed_mm_s REAL;
         ALTER TABLE trend_point ADD COLUMN wear_slip_mm REAL;
         ALTER TABLE trend_point ADD COLUMN wear_frequency_hz REAL;",
    )
}

/// Which points of one component a read returns: the newest `limit` of
/// those at or after `since_ms`, oldest first.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct TrendWindow {
    /// Earliest event time, ms since the epoch; `None`: from the oldest.
    pub since_ms: Option<i64>,
    /// Most points; `None`: all in the window.
    pub limit: Option<usize>,
}

impl TrendWindow {
    /// Every point the trend holds.
    pub const ALL: TrendWindow = TrendWindow { since_ms: None, limit: None };
}

/// Points beyond the bound a component may gather before it is pruned.
fn overshoot(keep: u64) -> u64 {
    keep / 10
}

/// Upserts `points` ((component, point) pairs) and prunes each component
/// that grew past `keep` plus its [`overshoot`] back to the newest `keep`.
/// Runs inside the caller's transaction; `rows` is the caller's count of
/// rows per component, and the counts after this batch are returned, for
/// the caller to take once the transaction has committed.
pub(super) fn upsert(
    conn: &Connection,
    points: &[(String, TrendPoint)],
    keep: u64,
    rows: &BTreeMap<String, u64>,
) -> rusqlite::Result<Vec<(String, u64)>> {
    if points.is_empty() {
        return Ok(vec![]);
    }
    let mut insert = conn.prepare_cached(
        "INSERT INTO trend_point (component, t_ms, metal_temperature_c, pressure_mpa, hoop_stress_mpa,
                                  creep_life_fraction, creep_strain, wear_index, fatigue_stress_mpa, fatigue_usage,
                                  wear_load_n, wear_sliding_speed_mm_s, wear_slip_mm, wear_frequency_hz)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14)
         ON CONFLICT (component, t_ms) DO UPDATE SET
             metal_temperature_c = excluded.metal_temperature_c,
             pressure_mpa = excluded.pressure_mpa,
             hoop_stress_mpa = excluded.hoop_stress_mpa,
             creep_life_fraction = excluded.creep_life_fraction,
             creep_strain = excluded.creep_strain,
             wear_index = excluded.wear_index,
             fatigue_stress_mpa = excluded.fatigue_stress_mpa,
             fatigue_usage = excluded.fatigue_usage,
             wear_load_n = excluded.wear_load_n,
             wear_sliding_speed_mm_s = excluded.wear_sliding_speed_mm_s,
             wear_slip_mm = excluded.wear_slip_mm,
             wear_frequency_hz = excluded.wear_frequency_hz",
    )?;
    let mut written: BTreeMap<&str, u64> = BTreeMap::new();
    for (component, p) in points {
        insert.execute((
            component,
            p.t,
            p.metal_temperature_c,
            p.pressure_mpa,
            p.hoop_stress_mpa,
            p.creep_life_fraction,
            p.creep_strain,
            p.wear_index,
            p.fatigue_stress_mpa,
            p.fatigue_usage,
            p.wear.load_n,
            p.wear.sliding_speed_mm_s,
            p.wear.slip_mm,
            p.wear.frequency_hz,
        ))?;
        *written.entry(component).or_default() += 1;
    }
    let keep_sql = i64::try_from(keep).unwrap_or(i64::MAX);
    let mut counts = Vec::with_capacity(written.len());
    for (component, n) in written {
        // An upsert that replaced a row is counted as one more: the count
        // may run high, which only brings the next pruning (and its exact
        // recount) forward.
        let before = match rows.get(component) {
            Some(&r) => r + n,
            None => count(conn, component)?,
        };
        let after = if before > keep.saturating_add(overshoot(keep)) {
            // The subquery is the time `keep` points below the newest: it
            // and every older point go.
            let mut prune = conn.prepare_cached(
                "DELETE FROM trend_point WHERE component = ?1 AND t_ms <=
                     (SELECT t_ms FROM trend_point WHERE component = ?1 ORDER BY t_ms DESC LIMIT 1 OFFSET ?2)",
            )?;
            prune.execute((component, keep_sql))?;
            count(conn, component)?
        } else {
            before
        };
        counts.push((component.to_string(), after));
    }
    Ok(counts)
}

/// The number of points `component` has.
fn count(conn: &Connection, component: &str) -> rusqlite::Result<u64> {
    let mut stmt = conn.prepare_cached("SELECT count(*) FROM trend_point WHERE component = ?1")?;
    stmt.query_row([component], |r| r.get(0))
}

/// The points of `component` in `window`, oldest first.
fn points(conn: &Connection, component: &str, window: TrendWindow) -> rusqlite::Result<Vec<TrendPoint>> {
    let since = window.since_ms.unwrap_or(i64::MIN);
    let limit = window.limit.map_or(i64::MAX, |l| i64::try_from(l).unwrap_or(i64::MAX));
    // NULL (a NaN when written) reads back as NaN.
    let value =
        |r: &Row<'_>, i: usize| -> rusqlite::Result<f64> { Ok(r.get::<_, Option<f64>>(i)?.unwrap_or(f64::NAN)) };
    let mut stmt = conn.prepare_cached(
        "SELECT t_ms, metal_temperature_c, pressure_mpa, hoop_stress_mpa, creep_life_fraction, creep_strain, wear_index,
                fatigue_stress_mpa, fatigue_usage, wear_load_n, wear_sliding_speed_mm_s, wear_slip_mm, wear_frequency_hz
         FROM trend_point WHERE component = ?1 AND t_ms >= ?2 ORDER BY t_ms DESC LIMIT ?3",
    )?;
    let rows = stmt.query_map((component, since, limit), |r| {
        Ok(TrendPoint {
            t: r.get(0)?,
            metal_temperature_c: value(r, 1)?,
            pressure_mpa: value(r, 2)?,
            hoop_stress_mpa: value(r, 3)?,
            creep_life_fraction: value(r, 4)?,
            creep_strain: value(r, 5)?,
            wear_index: value(r, 6)?,
            fatigue_stress_mpa: value(r, 7)?,
            fatigue_usage: value(r, 8)?,
            wear: WearInputs {
                load_n: value(r, 9)?,
                sliding_speed_mm_s: value(r, 10)?,
                slip_mm: value(r, 11)?,
                frequency_hz: value(r, 12)?,
            },
        })
    })?;
    let mut newest_first = rows.collect::<rusqlite::Result<Vec<_>>>()?;
    newest_first.reverse();
    Ok(newest_first)
}

impl Store {
    /// How many points each component's trend keeps (the newest); see the
    /// [module docs](self) for when the older ones go.
    /// [`DEFAULT_POINTS_PER_COMPONENT`] until set.
    pub fn set_trend_points_per_component(&mut self, n: u64) {
        self.trend_keep = n;
    }

    /// The points of `component` in `window`, oldest first.
    pub fn trend(&self, component: &str, window: TrendWindow) -> Result<Vec<TrendPoint>, StoreError> {
        points(&self.conn, component, window).map_err(|e| StoreError::sqlite(&self.path, "reading a trend", e))
    }
}

/// Reads component trends of a ledger file from outside the ledger thread,
/// on a read-only connection of its own; cheap to clone.
#[derive(Debug, Clone)]
pub struct TrendReader {
    path: PathBuf,
}

impl TrendReader {
    /// The ledger file it reads.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// A reader of the ledger at `path`, which the ledger thread has
    /// already opened (and so created and brought up to date).
    pub fn new(path: &Path) -> TrendReader {
        TrendReader { path: path.into() }
    }

    /// The points of `component` in `window`, oldest first. Blocking: call
    /// it off the async runtime's worker threads.
    pub fn component(&self, component: &str, window: TrendWindow) -> Result<Vec<TrendPoint>, StoreError> {
        let fail = |e| StoreError::sqlite(&self.path, "reading a trend", e);
        let conn = read_only(&self.path).map_err(fail)?;
        points(&conn, component, window).map_err(fail)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::store::schema;
    use crate::store::tests::{assert_upgraded_with_v1_rows, earlier_ledger, fresh};
    use crate::store::{Commit, JournalEntry};

    /// Start of the test points: 2026-10-01T00:00:00Z.
    const T0: i64 = 1_790_812_800_000;
    const MINUTE: i64 = 60_000;

    /// Point `n` (a minute apart), its life fraction `n / 1000`.
    fn point(n: i64) -> TrendPoint {
        TrendPoint {
            t: T0 + n * MINUTE,
            metal_temperature_c: 540.0 + n as f64,
            pressure_mpa: 17.5,
            hoop_stress_mpa: 68.25,
            creep_life_fraction: n as f64 / 1000.0,
            creep_strain: 1.0e-5 * n as f64,
            wear_index: 0.0,
            fatigue_stress_mpa: 100.0 + n as f64,
            fatigue_usage: 1.0e-6 * n as f64,
            wear: WearInputs { load_n: 80.0 + n as f64, sliding_speed_mm_s: 0.0, slip_mm: 0.04, frequency_hz: 25.0 },
        }
    }

    fn of(component: &str, ns: impl IntoIterator<Item = i64>) -> Vec<(String, TrendPoint)> {
        ns.into_iter().map(|n| (component.to_string(), point(n))).collect()
    }

    /// The point numbers of `points`, in their order.
    fn numbers(points: &[TrendPoint]) -> Vec<i64> {
        points.iter().map(|p| (p.t - T0) / MINUTE).collect()
    }

    fn all(store: &Store, component: &str) -> Vec<i64> {
        numbers(&store.trend(component, TrendWindow::ALL).unwrap())
    }

    #[test]
    fn points_round_trip_through_a_reopen_oldest_first() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        {
            let mut store = Store::open(&path).unwrap();
            // Newer points first within a batch: the read orders by time.
            let mut first = of("sh-1", [2, 1]);
            first.extend(of("sh-2 Überhitzer", [1]));
            store.commit(&Commit { trend_points: &first, ..Default::default() }).unwrap();
            store.commit(&Commit { trend_points: &of("sh-1", [3]), ..Default::default() }).unwrap();
        }
        let store = Store::open(&path).unwrap();
        let sh1 = store.trend("sh-1", TrendWindow::ALL).unwrap();
        assert_eq!(sh1, [point(1), point(2), point(3)]);
        assert_eq!(all(&store, "sh-2 Überhitzer"), [1]);
        assert!(store.trend("none", TrendWindow::ALL).unwrap().is_empty());
    }

    #[test]
    fn a_window_is_the_newest_points_since_a_time_oldest_first() {
        let (dir, mut store) = fresh();
        store.commit(&Commit { trend_points: &of("a", 1..=10), ..Default::default() }).unwrap();
        store.commit(&Commit { trend_points: &of("b", 1..=3), ..Default::default() }).unwrap();
        // The writer stays open, as the ledger thread does.
        let reader = TrendReader::new(&dir.path().join("ledger.db"));
        let read = |since: Option<i64>, limit: Option<usize>| {
            let since_ms = since.map(|n| T0 + n * MINUTE);
            numbers(&reader.component("a", TrendWindow { since_ms, limit }).unwrap())
        };
        assert_eq!(read(None, None), (1..=10).collect::<Vec<_>>());
        assert_eq!(read(Some(8), None), [8, 9, 10], "since_ms is inclusive");
        assert_eq!(read(None, Some(3)), [8, 9, 10], "limit keeps the newest");
        assert_eq!(read(Some(2), Some(2)), [9, 10]);
        assert_eq!(read(Some(11), None), Vec::<i64>::new());
        assert_eq!(read(None, Some(0)), Vec::<i64>::new());
        assert_eq!(numbers(&reader.component("b", TrendWindow::ALL).unwrap()), [1, 2, 3]);
        assert!(reader.component("none", TrendWindow::ALL).unwrap().is_empty());
    }

    #[test]
    fn a_point_written_again_at_the_same_time_replaces_the_old_one() {
        let (_dir, mut store) = fresh();
        store.commit(&Commit { trend_points: &of("a", 1..=3), ..Default::default() }).unwrap();
        // A redelivered batch: the same times again, one with new figures.
        let mut again = of("a", 2..=3);
        again[1].1.creep_life_fraction = 0.5;
        store.commit(&Commit { trend_points: &again, ..Default::default() }).unwrap();
        // And twice within one batch: the later wins.
        let mut twice = of("a", [1, 1]);
        twice[1].1.pressure_mpa = 18.0;
        store.commit(&Commit { trend_points: &twice, ..Default::default() }).unwrap();

        let got = store.trend("a", TrendWindow::ALL).unwrap();
        assert_eq!(numbers(&got), [1, 2, 3], "no time twice");
        assert_eq!(got[0].pressure_mpa, 18.0);
        assert_eq!(got[1], point(2));
        assert_eq!(got[2].creep_life_fraction, 0.5);
    }

    #[test]
    fn pruning_keeps_the_newest_n_of_each_component() {
        let (_dir, mut store) = fresh();
        store.set_trend_points_per_component(10);
        // One point a commit, as the ledger thread writes them: the bound
        // plus its tenth (11) may stand, the twelfth point prunes to 10.
        for n in 1..=11 {
            store.commit(&Commit { trend_points: &of("a", [n]), ..Default::default() }).unwrap();
        }
        assert_eq!(all(&store, "a"), (1..=11).collect::<Vec<_>>(), "within the overshoot");
        store.commit(&Commit { trend_points: &of("a", [12]), ..Default::default() }).unwrap();
        assert_eq!(all(&store, "a"), (3..=12).collect::<Vec<_>>(), "the newest 10");

        // Components are bounded each on their own.
        store.commit(&Commit { trend_points: &of("b", 1..=5), ..Default::default() }).unwrap();
        assert_eq!(all(&store, "b"), (1..=5).collect::<Vec<_>>());
        assert_eq!(all(&store, "a"), (3..=12).collect::<Vec<_>>());

        // A batch larger than the bound keeps only its own newest.
        store.commit(&Commit { trend_points: &of("a", 13..=40), ..Default::default() }).unwrap();
        assert_eq!(all(&store, "a"), (31..=40).collect::<Vec<_>>());

        // Rewritten points count as written (the count runs high) but the
        // pruning recounts, so no more than the bound goes.
        for _ in 0..3 {
            store.commit(&Commit { trend_points: &of("b", [5]), ..Default::default() }).unwrap();
        }
        store.commit(&Commit { trend_points: &of("b", 6..=8), ..Default::default() }).unwrap();
        assert_eq!(all(&store, "b"), (1..=8).collect::<Vec<_>>());

        // A lower bound takes effect with the component's next point.
        store.set_trend_points_per_component(2);
        store.commit(&Commit { trend_points: &of("b", [9]), ..Default::default() }).unwrap();
        assert_eq!(all(&store, "b"), [8, 9]);
        assert_eq!(all(&store, "a").len(), 10, "no point, no pruning");
    }

    #[test]
    fn after_a_reopen_the_count_starts_from_the_file() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        {
            let mut store = Store::open(&path).unwrap();
            store.commit(&Commit { trend_points: &of("a", 1..=10), ..Default::default() }).unwrap();
        }
        let mut store = Store::open(&path).unwrap();
        store.set_trend_points_per_component(5);
        store.commit(&Commit { trend_points: &of("a", [11]), ..Default::default() }).unwrap();
        assert_eq!(all(&store, "a"), (7..=11).collect::<Vec<_>>());
    }

    #[test]
    fn a_value_that_is_not_a_number_comes_back_as_nan_and_infinity_as_infinity() {
        let (_dir, mut store) = fresh();
        let mut p = point(1);
        p.metal_temperature_c = f64::NAN;
        p.wear_index = f64::INFINITY;
        store.commit(&Commit { trend_points: &[("a".into(), p)], ..Default::default() }).unwrap();
        let got = store.trend("a", TrendWindow::ALL).unwrap();
        assert!(got[0].metal_temperature_c.is_nan());
        assert_eq!(got[0].wear_index, f64::INFINITY);
        assert_eq!(got[0].creep_life_fraction, p.creep_life_fraction);
        let json = serde_json::to_value(got[0]).unwrap();
        assert!(json["metal_temperature_c"].is_null() && json["wear_index"].is_null(), "{json}");
        assert_eq!(json["t"], p.t);
    }

    #[test]
    fn a_rolled_back_batch_writes_no_point() {
        let (_dir, mut store) = fresh();
        store.set_trend_points_per_component(3);
        store.commit(&Commit { trend_points: &of("a", 1..=3), ..Default::default() }).unwrap();
        // Make the outbox insert, which runs after the trend's, fail.
        store
            .conn
            .execute_batch("CREATE TRIGGER refuse BEFORE INSERT ON outbox BEGIN SELECT RAISE(ABORT, 'refused'); END")
            .unwrap();
        let batch = of("a", 4..=5);
        let outbox = ["x".to_string()];
        let err = store.commit(&Commit { trend_points: &batch, outbox: &outbox, ..Default::default() }).unwrap_err();
        assert!(err.to_string().contains("committing a batch"), "{err}");
        assert_eq!(all(&store, "a"), [1, 2, 3], "neither the points nor their pruning stayed");

        // The same points committed again (as the ledger thread does after
        // a failed commit) are written once, and pruned from a true count.
        store.conn.execute_batch("DROP TRIGGER refuse").unwrap();
        store.commit(&Commit { trend_points: &batch, outbox: &outbox, ..Default::default() }).unwrap();
        assert_eq!(all(&store, "a"), [3, 4, 5]);
    }

    #[test]
    fn a_version_2_ledger_is_upgraded_and_keeps_its_data() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        // A ledger as the release before the trends wrote it, with an
        // alarm event in its journal.
        earlier_ledger(&path, 2);
        let conn = Connection::open(&path).unwrap();
        conn.execute(
            r#"INSERT INTO alarm_journal (time_ms, component, alarm_index, event)
               VALUES (5, 'sh-1', 'creep_life_fraction', '{"n":1}')"#,
            [],
        )
        .unwrap();
        drop(conn);

        let mut store = Store::open(&path).unwrap();
        assert_upgraded_with_v1_rows(&store);
        let journal: Vec<JournalEntry> = store.alarm_journal_newest(10).unwrap().into_iter().map(|(_, e)| e).collect();
        let event = JournalEntry {
            time_ms: 5,
            component: "sh-1".into(),
            index: "creep_life_fraction".into(),
            event: r#"{"n":1}"#.into(),
        };
        assert_eq!(journal, [event]);

        // The new trend starts empty and takes points.
        assert!(store.trend("sh-1", TrendWindow::ALL).unwrap().is_empty());
        store.commit(&Commit { trend_points: &of("sh-1", [1]), ..Default::default() }).unwrap();
        drop(store);
        assert_eq!(schema::inspect(&path).unwrap(), schema::Found::Ledger(schema::SCHEMA_VERSION));
        assert_eq!(all(&Store::open(&path).unwrap(), "sh-1"), [1]);
    }
}
