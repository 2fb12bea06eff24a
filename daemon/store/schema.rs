//! Identity and schema of the ledger file: how the store recognises its own
//! file, refuses anyone else's, and brings an older ledger up to date.
//!
//! A ledger is an SQLite file whose `PRAGMA application_id` is
//! [`APPLICATION_ID`] and whose `PRAGMA user_version` is the schema version.
//! [`inspect`] looks at an existing file on a read-only connection and says
//! what it is, so that a file we refuse is never written to. [`migrate`]
//! then runs, on the writing connection, every migration the file has not
//! had yet, each in its own transaction together with the new version
//! number, so a crash mid-upgrade leaves the file at a whole version.
//!
//! To change the schema, write a function `vN_what_it_does` and append it to
//! [`MIGRATIONS`]; never edit or reorder the ones already released.

use std::fs::File;
use std::io::Read;
use std::path::Path;

use rusqlite::{Connection, ErrorCode, OpenFlags, Transaction, TransactionBehavior};

use super::StoreError;

/// `PRAGMA application_id` of every lifeledger ledger: the ASCII bytes
/// "LFLG" read as a big-endian integer.
pub const APPLICATION_ID: i32 = 0x4C46_4C47;

/// One step of the schema: takes the file from version `i` to `i + 1`,
/// where `i` is its index in the list.
#[derive(Clone, Copy)]
pub struct Migration {
    /// What the step does, for people reading the code and the logs.
    pub summary: &'static str,
    /// Applies the step inside the transaction it is given.
    pub apply: fn(&Transaction<'_>) -> rusqlite::Result<()>,
}

/// Every schema step, oldest first. Append only.
pub const MIGRATIONS: &[Migration] = &[
    Migration {
        summary: "component, tag, alarm and meta tables; the outbox and its running totals",
        apply: v1_initial,
    },
    Migration { summary: "the alarm journal: every alarm event, newest kept", apply: v2_alarm_journal },
    Migration { summary: "component trends: the status page's points by component and event time", apply: v3_trend },
    Migration { summary: "the reorder window: accepted samples not yet integrated", apply: v4_held },
    Migration {
        summary: "checkpoints: a daily copy of each component's ledger and its tags, for rollback",
        apply: v5_checkpoint,
    },
    Migration {
        summary: "parked lines: outbox batches the database refused as malformed, kept instead of dropped",
        apply: v6_parked_line,
    },
    Migration {
        summary: "inspection records: findings per component, append-only, corrections supersede",
        apply: super::inspection::v7_inspection_record,
    },
    Migration {
        summary: "daily history: one point a day per component, kept for the life of the part",
        apply: super::inspection::v8_history_day,
    },
    Migration {
        summary: "fatigue in the component trends: stress at the fatigue location and fatigue usage",
        apply: v9_trend_fatigue,
    },
    Migration {
        summary: "wear inputs in the component trends: normal load, sliding speed, slip amplitude, frequency",
        apply: super::trend::v10_trend_wear_inputs,
    },
    Migration {
        summary:
            "alarm-event publish cursor: events the broker acknowledged, the rest published again from the journal",
        apply: super::event_cursor::v11_event_publish_cursor,
    },
];

/// The newest schema version this build knows: the number of migrations.
pub const SCHEMA_VERSION: u32 = MIGRATIONS.len() as u32;

/// Version 1: the first ledger layout.
///
/// State tables map a name to JSON text; the store never parses it. The
/// outbox uses `AUTOINCREMENT` so an id is never handed out twice, even
/// after the outbox has been drained empty: a late `remove_through` for an
/// old batch can then never delete lines appended since. `outbox_total`
/// keeps the line and byte counts in one row, updated in the same
/// transactions as the outbox, so reading them costs nothing.
fn v1_initial(tx: &Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE component (name TEXT PRIMARY KEY NOT NULL, state TEXT NOT NULL);
         CREATE TABLE tag (name TEXT PRIMARY KEY NOT NULL, state TEXT NOT NULL);
         CREATE TABLE alarm (key TEXT PRIMARY KEY NOT NULL, record TEXT NOT NULL);
         CREATE TABLE meta (key TEXT PRIMARY KEY NOT NULL, value TEXT NOT NULL);
         CREATE TABLE outbox (id INTEGER PRIMARY KEY AUTOINCREMENT, line TEXT NOT NULL);
         CREATE TABLE outbox_total (
             only INTEGER PRIMARY KEY CHECK (only = 1),
             lines INTEGER NOT NULL,
             bytes INTEGER NOT NULL
         );
         INSERT INTO outbox_total (only, lines, bytes) VALUES (1, 0, 0);",
    )
}

/// Version 2: the alarm journal, the durable history of alarm events.
///
/// One row per event, in commit order; `AUTOINCREMENT` keeps ids rising
/// even after pruning has emptied the table, so "newest" is "highest id".
/// The event itself is JSON text (the alarm event message as published);
/// time, component and index are columns so that people with `sqlite3` and
/// the per-component history can select without parsing. `alarm_index` and
/// not `index`, which is an SQL keyword. The index on `(component, id)`
/// serves "the newest events of one component" without a scan.
fn v2_alarm_journal(tx: &Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE alarm_journal (
             id INTEGER PRIMARY KEY AUTOINCREMENT,
             time_ms INTEGER NOT NULL,
             component TEXT NOT NULL,
             alarm_index TEXT NOT NULL,
             event TEXT NOT NULL
         );
         CREATE INDEX alarm_journal_by_component ON alarm_journal (component, id);",
    )
}

/// Version 3: component trends, what the status page draws.
///
/// One row per `component_state` point: its event time and the figures
/// the page plots. The primary key (component, event time) makes a point
/// written again at the same time an update, and `WITHOUT ROWID` stores
/// the rows in that order, so a component's newest points are one range
/// of one B-tree (no second index to keep). Values are nullable: SQLite
/// stores a NaN as `NULL`.
fn v3_trend(tx: &Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE trend_point (
             component TEXT NOT NULL,
             t_ms INTEGER NOT NULL,
             metal_temperature_c REAL,
             pressure_mpa REAL,
             hoop_stress_mpa REAL,
             creep_life_fraction REAL,
             creep_strain REAL,
             wear_index REAL,
             PRIMARY KEY (component, t_ms)
         ) WITHOUT ROWID;",
    )
}

/// Version 4: the reorder window, samples accepted (and acknowledged) but
/// not yet integrated, keyed by arrival order. A value is never NaN here
/// (the engine rejects non-finite values before holding one).
fn v4_held(tx: &Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE held_sample (
             seq INTEGER PRIMARY KEY NOT NULL,
             tag TEXT NOT NULL,
             time_ms INTEGER NOT NULL,
             value REAL NOT NULL,
             arrival_ms INTEGER NOT NULL
         );",
    )
}

/// Version 5: checkpoints, daily copies of each component's ledger for
/// rolling a poisoned ledger back (see [`super::checkpoint`]).
///
/// One row per component and checkpoint: the event time the component was
/// integrated to (`at_ms`), the wall-clock time the row was written
/// (`written_ms`, which retention goes by), the component's state and the
/// states of the tags it reads, both JSON text. The primary key serves
/// "the newest checkpoint of a component at or before a time" as one
/// range of one B-tree.
fn v5_checkpoint(tx: &Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE checkpoint (
             component TEXT NOT NULL,
             at_ms INTEGER NOT NULL,
             written_ms INTEGER NOT NULL,
             state TEXT NOT NULL,
             tags TEXT NOT NULL,
             PRIMARY KEY (component, at_ms)
         ) WITHOUT ROWID;",
    )
}

/// Version 6: lines the database refused as malformed (HTTP 400/422),
/// moved out of the outbox in one transaction so they neither block the
/// points behind them nor vanish: each with when it was parked (wall
/// clock, ms) and the database's answer. `outbox_total.parked_lines`
/// counts them, so reading the count stays one row read.
fn v6_parked_line(tx: &Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "CREATE TABLE parked_line (
             id INTEGER PRIMARY KEY AUTOINCREMENT,
             line TEXT NOT NULL,
             parked_ms INTEGER NOT NULL,
             reason TEXT NOT NULL
         );
         ALTER TABLE outbox_total ADD COLUMN parked_lines INTEGER NOT NULL DEFAULT 0;",
    )
}

/// Version 7: the trend's fatigue figures (stress at the fatigue location,
/// fatigue usage), `NULL` for parts without `[component.fatigue]` and for
/// rows written before.
fn v9_trend_fatigue(tx: &Transaction<'_>) -> rusqlite::Result<()> {
    tx.execute_batch(
        "ALTER TABLE trend_point ADD COLUMN fatigue_stress_mpa REAL;
         ALTER TABLE trend_point ADD COLUMN fatigue_usage REAL;",
    )
}

/// What [`inspect`] found at the ledger path.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Found {
    /// No file: a new ledger will be created.
    Missing,
    /// A file with nothing in it (zero bytes, or an SQLite database without
    /// tables or marks): safe to make into a new ledger.
    Blank,
    /// A lifeledger ledger at this schema version (at most [`SCHEMA_VERSION`]).
    Ledger(u32),
}

/// The 16 bytes every SQLite database file starts with.
const SQLITE_HEADER: &[u8; 16] = b"SQLite format 3\0";

/// Looks at the file at `path` without changing it and says whether the
/// store may use it. Refuses (with an error naming the file and the fix)
/// a file that is not SQLite, is damaged, belongs to another program, or
/// has a schema newer than this build.
///
/// The file is opened read-only, so SQLite neither rolls back a hot journal
/// nor checkpoints a write-ahead log into it; at most it creates the `-shm`
/// companion that WAL readers need.
///
/// The header is read with an ordinary file descriptor, and closing it
/// drops every POSIX lock this process holds on the file: never call this
/// while the process has a connection to the same file open (see
/// [`Store::attach`](super::Store::attach)).
pub fn inspect(path: &Path) -> Result<Found, StoreError> {
    let mut head = Vec::with_capacity(SQLITE_HEADER.len());
    match File::open(path) {
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Found::Missing),
        Err(e) => return Err(StoreError::Read { path: path.into(), source: e }),
        Ok(f) => {
            f.take(SQLITE_HEADER.len() as u64)
                .read_to_end(&mut head)
                .map_err(|e| StoreError::Read { path: path.into(), source: e })?;
        }
    }
    if head.is_empty() {
        return Ok(Found::Blank);
    }
    if head.as_slice() != SQLITE_HEADER {
        return Err(StoreError::NotSqlite { path: path.into() });
    }

    let flags = OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX;
    let conn =
        Connection::open_with_flags(path, flags).map_err(|e| damaged_or(path, e, "opening the ledger to check it"))?;
    quick_check(&conn, path)?;

    let read = |e| damaged_or(path, e, "reading the ledger's identity");
    let application_id: i32 = conn.pragma_query_value(None, "application_id", |r| r.get(0)).map_err(read)?;
    let version: i64 = conn.pragma_query_value(None, "user_version", |r| r.get(0)).map_err(read)?;
    let tables: i64 = conn.query_row("SELECT count(*) FROM sqlite_schema", [], |r| r.get(0)).map_err(read)?;

    match application_id {
        APPLICATION_ID if version > i64::from(SCHEMA_VERSION) => {
            Err(StoreError::NewerSchema { path: path.into(), found: version, known: SCHEMA_VERSION })
        }
        APPLICATION_ID if version < 0 => {
            Err(StoreError::Corrupt { path: path.into(), detail: format!("negative schema version {version}") })
        }
        // Checked above: 0 <= version <= SCHEMA_VERSION, so it fits.
        APPLICATION_ID => Ok(Found::Ledger(version as u32)),
        0 if tables == 0 && version == 0 => Ok(Found::Blank),
        0 => Err(StoreError::Foreign {
            path: path.into(),
            reason: format!(
                "it has no application_id but already holds {tables} schema objects and user_version {version}"
            ),
        }),
        other => Err(StoreError::Foreign {
            path: path.into(),
            reason: format!("application_id 0x{other:08X}; lifeledger ledgers have 0x{APPLICATION_ID:08X}"),
        }),
    }
}

/// Runs `PRAGMA quick_check`, which reads every page and checks the b-tree
/// structure (but not index contents, which `integrity_check` would), and
/// turns anything but "ok" into [`StoreError::Corrupt`].
fn quick_check(conn: &Connection, path: &Path) -> Result<(), StoreError> {
    let fail = |e| damaged_or(path, e, "checking the ledger for damage");
    let mut stmt = conn.prepare("PRAGMA quick_check(5)").map_err(fail)?;
    let problems: Vec<String> =
        stmt.query_map([], |r| r.get(0)).map_err(fail)?.collect::<Result<_, _>>().map_err(fail)?;
    if problems.len() == 1 && problems[0] == "ok" {
        return Ok(());
    }
    Err(StoreError::Corrupt { path: path.into(), detail: problems.join("; ") })
}

/// Classifies an SQLite error met while checking a file that carries the
/// SQLite header: "not a database" or "corrupt" then means damage.
fn damaged_or(path: &Path, e: rusqlite::Error, action: &'static str) -> StoreError {
    match e.sqlite_error_code() {
        Some(ErrorCode::DatabaseCorrupt) | Some(ErrorCode::NotADatabase) => {
            StoreError::Corrupt { path: path.into(), detail: e.to_string() }
        }
        _ => StoreError::sqlite(path, action, e),
    }
}

/// Brings the ledger on `conn` up to the last version in `migrations`,
/// one transaction per step. The version is read again inside each step's
/// write transaction, so two processes racing to upgrade cannot both apply
/// the same step.
pub fn migrate(conn: &mut Connection, path: &Path, migrations: &[Migration]) -> Result<(), StoreError> {
    let fail = |e| StoreError::sqlite(path, "upgrading the ledger schema", e);
    loop {
        let tx = conn.transaction_with_behavior(TransactionBehavior::Immediate).map_err(fail)?;
        let version: i64 = tx.pragma_query_value(None, "user_version", |r| r.get(0)).map_err(fail)?;
        let Some(step) = usize::try_from(version).ok().and_then(|v| migrations.get(v)) else {
            // Up to date (inspect has already refused newer versions).
            return Ok(());
        };
        (step.apply)(&tx).map_err(fail)?;
        tx.pragma_update(None, "user_version", version + 1).map_err(fail)?;
        tx.pragma_update(None, "application_id", APPLICATION_ID).map_err(fail)?;
        tx.commit().map_err(fail)?;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pragma(conn: &Connection, name: &str) -> i64 {
        conn.pragma_query_value(None, name, |r| r.get(0)).unwrap()
    }

    #[test]
    fn a_missing_file_is_missing() {
        let dir = tempfile::tempdir().unwrap();
        assert_eq!(inspect(&dir.path().join("nothing.db")).unwrap(), Found::Missing);
    }

    #[test]
    fn an_empty_file_and_an_empty_database_are_blank() {
        let dir = tempfile::tempdir().unwrap();
        let empty = dir.path().join("empty.db");
        std::fs::write(&empty, b"").unwrap();
        assert_eq!(inspect(&empty).unwrap(), Found::Blank);

        let vacuumed = dir.path().join("vacuumed.db");
        Connection::open(&vacuumed).unwrap().execute_batch("VACUUM").unwrap();
        assert!(std::fs::metadata(&vacuumed).unwrap().len() > 0);
        assert_eq!(inspect(&vacuumed).unwrap(), Found::Blank);
    }

    #[test]
    fn migrations_from_an_empty_file_reach_the_current_version() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        std::fs::write(&path, b"").unwrap();
        let mut conn = Connection::open(&path).unwrap();
        migrate(&mut conn, &path, MIGRATIONS).unwrap();
        assert_eq!(pragma(&conn, "user_version"), i64::from(SCHEMA_VERSION));
        assert_eq!(pragma(&conn, "application_id"), i64::from(APPLICATION_ID));
        drop(conn);
        assert_eq!(inspect(&path).unwrap(), Found::Ledger(SCHEMA_VERSION));
    }

    #[test]
    fn migrating_twice_changes_nothing() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        let mut conn = Connection::open(&path).unwrap();
        migrate(&mut conn, &path, MIGRATIONS).unwrap();
        migrate(&mut conn, &path, MIGRATIONS).unwrap();
        assert_eq!(pragma(&conn, "user_version"), i64::from(SCHEMA_VERSION));
    }

    /// How a later version slots in: a function appended to the list.
    fn example_step(tx: &Transaction<'_>) -> rusqlite::Result<()> {
        tx.execute_batch("ALTER TABLE component ADD COLUMN updated_at TEXT")
    }

    /// The released migrations followed by `step`.
    fn with_step(summary: &'static str, apply: fn(&Transaction<'_>) -> rusqlite::Result<()>) -> Vec<Migration> {
        let mut all = MIGRATIONS.to_vec();
        all.push(Migration { summary, apply });
        all
    }

    #[test]
    fn a_later_migration_runs_on_a_current_ledger_and_keeps_its_data() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        let mut conn = Connection::open(&path).unwrap();
        migrate(&mut conn, &path, MIGRATIONS).unwrap();
        conn.execute("INSERT INTO component (name, state) VALUES ('sh-1', '{}')", []).unwrap();

        migrate(&mut conn, &path, &with_step("example column", example_step)).unwrap();
        assert_eq!(pragma(&conn, "user_version"), i64::from(SCHEMA_VERSION) + 1);
        let (name, stamp): (String, Option<String>) =
            conn.query_row("SELECT name, updated_at FROM component", [], |r| Ok((r.get(0)?, r.get(1)?))).unwrap();
        assert_eq!((name.as_str(), stamp), ("sh-1", None));
    }

    #[test]
    fn a_failing_migration_leaves_the_previous_version() {
        fn broken(tx: &Transaction<'_>) -> rusqlite::Result<()> {
            tx.execute_batch("CREATE TABLE half_done (x); SELECT * FROM no_such_table")
        }
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        let mut conn = Connection::open(&path).unwrap();
        migrate(&mut conn, &path, MIGRATIONS).unwrap();
        let err = migrate(&mut conn, &path, &with_step("broken", broken)).unwrap_err();
        assert!(err.to_string().contains("upgrading the ledger schema"), "{err}");
        assert_eq!(pragma(&conn, "user_version"), i64::from(SCHEMA_VERSION));
        let half: i64 =
            conn.query_row("SELECT count(*) FROM sqlite_schema WHERE name = 'half_done'", [], |r| r.get(0)).unwrap();
        assert_eq!(half, 0, "the failed step must roll back whole");
    }
}
