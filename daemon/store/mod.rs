//! The durable ledger: one SQLite file holding component states, tag
//! cursors, alarm records, service counters, the alarm journal, component
//! trends and the outbox of line-protocol points not yet accepted by the
//! time-series database.
//!
//! The store is generic over JSON text: it stores and returns strings and
//! knows nothing of engine types, so the engine's state can evolve without
//! touching SQL. Trend points are the one exception: plain numbers in
//! columns of their own, so that a window of them is one indexed read. It
//! is plain synchronous Rust; the service owns one [`Store`] on a dedicated
//! thread and sends it batches.
//!
//! # Why it is built this way
//!
//! * **One transaction per batch.** [`Store::commit`] writes component
//!   states, tag cursors, alarms, alarm events, trend points, checkpoints,
//!   counters and outbox lines together, so a crash at any instant leaves them all from
//!   the same batch: the ledger never holds damage whose points are missing
//!   from the outbox, nor a
//!   cursor ahead of the state it guards. MQTT messages are acked only after
//!   `commit` returns (invariant 2).
//! * **SQLite, WAL, `synchronous = FULL`.** SQLite is a single, well-tested
//!   file that operators can inspect with `sqlite3`. Write-ahead logging lets
//!   readers (an operator, a backup) run while the service writes, and costs
//!   one sequential append per commit. `FULL` syncs the log on every commit,
//!   so a committed batch survives power loss, not only a process crash;
//!   with group commit every ~100 ms the extra fsync is cheap.
//! * **Refuse rather than repair.** [`Store::open`] checks an existing file
//!   on a read-only connection first (see [`schema::inspect`]): a file that
//!   is not SQLite, is damaged, belongs to another program or was written by
//!   a newer lifeledger is refused with an error naming the file and the
//!   fix, and is not modified.
//!
//! * **One writer for repairs.** [`Store::open_exclusive`] is for tools
//!   that change the ledger of a stopped service (rollback, backfill): it
//!   takes SQLite's exclusive lock without waiting and refuses, changing
//!   nothing, while any other connection (a running service, a reader) has
//!   the file open; while it is held, nobody else can open the file.
//!
//! The parts: [`schema`] (identity and migrations), [`outbox`] (draining the
//! outbox), [`journal`] (the bounded history of alarm events), [`trend`]
//! (the bounded per-component trends of the status page), [`checkpoint`]
//! (daily copies of each component's ledger, for rollback), [`error`] (what
//! can go wrong, for people).

pub mod checkpoint;
pub mod error;
pub mod event_cursor;
pub mod held;
pub mod inspection;
pub mod journal;
pub mod outbox;
pub mod schema;
pub mod trend;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::Duration;

use rusqlite::{Connection, OpenFlags, TransactionBehavior};

pub use checkpoint::{CheckpointRow, Restore, StoredCheckpoint};
pub use error::StoreError;
pub use event_cursor::JournalEvent;
pub use journal::{JournalEntry, JournalReader};
pub use outbox::OutboxStats;
pub use schema::{APPLICATION_ID, SCHEMA_VERSION};
pub use trend::{TrendPoint, TrendReader, TrendWindow, WearInputs};

/// How long a write waits for a lock held by another connection (an
/// operator's `sqlite3`, a backup) before it fails with "busy".
const BUSY_TIMEOUT: Duration = Duration::from_secs(5);

/// After a checkpoint, SQLite truncates the write-ahead log back to this
/// size, so one burst of writes does not leave a large `-wal` file behind.
const WAL_SIZE_LIMIT_BYTES: i64 = 64 * 1024 * 1024;

/// The durable ledger in one SQLite file. See the [module docs](self).
#[derive(Debug)]
pub struct Store {
    conn: Connection,
    path: PathBuf,
    /// How many alarm events the journal keeps (see [`journal`]).
    journal_max_events: u64,
    /// How many points each component's trend keeps (see [`trend`]).
    trend_keep: u64,
    /// Trend points per component as far as this connection knows: counted
    /// at a component's first point, kept up to date by the commits.
    trend_rows: BTreeMap<String, u64>,
    /// How many days (wall clock) checkpoints are kept (see [`checkpoint`]).
    checkpoint_days: u64,
    /// Event time of each component's newest committed checkpoint.
    checkpoint_newest: BTreeMap<String, i64>,
}

/// One batch of changes, written by [`Store::commit`] in one transaction.
///
/// Every `(key, JSON)` pair is an upsert: it replaces what the key held. If
/// a key appears twice in one slice, the later pair wins. Outbox lines are
/// appended in slice order.
#[derive(Debug, Clone, Copy, Default)]
pub struct Commit<'a> {
    /// (component name, state JSON).
    pub components: &'a [(String, String)],
    /// (tag name, cursor/state JSON).
    pub tags: &'a [(String, String)],
    /// (alarm key, alarm record JSON).
    pub alarms: &'a [(String, String)],
    /// (key, JSON): service counters and other small records.
    pub meta: &'a [(String, String)],
    /// Line-protocol lines to append to the outbox, one point each, without
    /// a trailing newline.
    pub outbox: &'a [String],
    /// Alarm events raised by this batch, appended to the journal in slice
    /// order; the journal is then pruned to its limit.
    pub alarm_events: &'a [JournalEntry],
    /// (component name, trend point): upserted by event time, then each
    /// component is pruned to its bound (see [`trend`]).
    pub trend_points: &'a [(String, TrendPoint)],
    /// Samples that entered the reorder window (see [`held`]).
    pub held_added: &'a [held::HeldRow<'a>],
    /// Sequence numbers of held samples the engine integrated.
    pub held_released: &'a [u64],
    /// Checkpoints offered for this batch; only those due are written (see
    /// [`checkpoint`]), and old ones of the components written are pruned.
    pub checkpoints: &'a [CheckpointRow],
    /// (record id, JSON): inspection records the ledger accepted in this
    /// batch (see [`inspection`]).
    pub inspections_accepted: &'a [(i64, String)],
    /// (component name, point): the daily history (see [`inspection`]).
    pub history: &'a [(String, inspection::HistoryPoint)],
}

/// Everything but the outbox, the alarm journal and the trends, as [`Store::load`]
/// reads it at start-up.
/// Each list is sorted by key.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Loaded {
    /// (component name, state JSON).
    pub components: Vec<(String, String)>,
    /// (tag name, cursor/state JSON).
    pub tags: Vec<(String, String)>,
    /// (alarm key, alarm record JSON).
    pub alarms: Vec<(String, String)>,
    /// (key, JSON).
    pub meta: Vec<(String, String)>,
    /// The reorder window, in arrival order.
    pub held: Vec<held::LoadedHeld>,
}

/// What [`Store::commit`] reports once the batch is durable.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct CommitStats {
    /// The outbox after this commit: the depth the service compares with its
    /// disk quota before acking more MQTT messages (invariant 5).
    pub outbox: OutboxStats,
}

impl Store {
    /// Opens the ledger at `path`, creating it (and its parent directory) if
    /// it is missing or empty, and upgrading its schema if it is older than
    /// this build.
    ///
    /// An existing file is first checked without being changed; a file that
    /// is not SQLite, is damaged, belongs to another program or has a newer
    /// schema is refused with a [`StoreError`] that says what to do.
    ///
    /// The check reads the file's header with an ordinary file descriptor,
    /// so call this only while the process holds no other connection to the
    /// same file; a second connection uses [`Store::attach`].
    pub fn open(path: &Path) -> Result<Store, StoreError> {
        Store::open_with(path, true)
    }

    /// [`Store::open`], creating a new ledger in place of a missing or
    /// empty file only if `create` is set; otherwise such a file is refused
    /// with [`StoreError::NoLedger`] and nothing is created. The service
    /// opens its ledger this way: a data volume that failed to mount must
    /// not silently restart every component from its initial values.
    pub fn open_with(path: &Path, create: bool) -> Result<Store, StoreError> {
        let found = schema::inspect(path)?;
        if !create && matches!(found, schema::Found::Missing | schema::Found::Blank) {
            return Err(StoreError::NoLedger { path: path.into(), empty: found == schema::Found::Blank });
        }
        if found == schema::Found::Missing {
            if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
                std::fs::create_dir_all(dir).map_err(|source| StoreError::CreateDir {
                    path: path.into(),
                    dir: dir.into(),
                    source,
                })?;
            }
        }

        let mut flags = OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        if create {
            flags |= OpenFlags::SQLITE_OPEN_CREATE;
        }
        let mut conn = Connection::open_with_flags(path, flags)
            .map_err(|e| StoreError::sqlite(path, "opening the ledger for writing", e))?;
        configure(&conn, path)?;
        schema::migrate(&mut conn, path, schema::MIGRATIONS)?;
        Store::over(conn, path)
    }

    /// Opens the ledger at `path` for a tool that changes the ledger of a
    /// stopped service (rollback, backfill), holding SQLite's exclusive
    /// lock until the store is dropped: no service or reader can open the
    /// file meanwhile.
    ///
    /// Refuses with [`StoreError::InUse`], without waiting and without
    /// changing anything, while any other connection has the file open (a
    /// running service keeps one open all the time). A missing or blank
    /// file is created as a new ledger only if `create` is set; otherwise it
    /// is refused. An older schema is upgraded, as [`Store::open`] does.
    pub fn open_exclusive(path: &Path, create: bool) -> Result<Store, StoreError> {
        // The file itself is looked at first, before this process has any
        // connection to it: closing a file descriptor of the ledger while a
        // connection is open would drop that connection's POSIX locks.
        let found = schema::inspect(path)?;
        match found {
            schema::Found::Ledger(_) => {}
            schema::Found::Missing | schema::Found::Blank if create => {
                if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
                    std::fs::create_dir_all(dir).map_err(|source| StoreError::CreateDir {
                        path: path.into(),
                        dir: dir.into(),
                        source,
                    })?;
                }
            }
            schema::Found::Missing | schema::Found::Blank => {
                return Err(StoreError::NotReadable {
                    path: path.into(),
                    detail: "no ledger here: check `--ledger` or the [store] path of the configuration".into(),
                })
            }
        }
        let mut flags = OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        if create {
            flags |= OpenFlags::SQLITE_OPEN_CREATE;
        }
        let mut conn = Connection::open_with_flags(path, flags)
            .map_err(|e| StoreError::sqlite(path, "opening the ledger for writing", e))?;
        let fail = |e| StoreError::sqlite(path, "locking the ledger", e);
        // No waiting: a lock held by someone else means the file is in use.
        conn.busy_timeout(Duration::ZERO).map_err(fail)?;
        // In WAL mode every open connection keeps a shared lock on the file;
        // with locking_mode EXCLUSIVE the first transaction needs the
        // exclusive lock, gets it only if nobody else has the file open, and
        // keeps it until the connection closes.
        conn.pragma_update(None, "locking_mode", "EXCLUSIVE").map_err(fail)?;
        if let Err(e) = conn.execute_batch("BEGIN IMMEDIATE; SELECT count(*) FROM sqlite_schema; COMMIT") {
            return Err(match e.sqlite_error_code() {
                Some(rusqlite::ErrorCode::DatabaseBusy) | Some(rusqlite::ErrorCode::DatabaseLocked) => {
                    StoreError::InUse { path: path.into() }
                }
                _ => fail(e),
            });
        }
        configure(&conn, path)?;
        // Keep refusing to wait: the lock is ours now.
        conn.busy_timeout(Duration::ZERO).map_err(fail)?;
        schema::migrate(&mut conn, path, schema::MIGRATIONS)?;
        Store::over(conn, path)
    }

    /// The store over an open, configured, up-to-date connection.
    fn over(conn: Connection, path: &Path) -> Result<Store, StoreError> {
        let checkpoint_newest =
            checkpoint::newest(&conn).map_err(|e| StoreError::sqlite(path, "reading the checkpoints", e))?;
        Ok(Store {
            conn,
            path: path.into(),
            journal_max_events: journal::DEFAULT_MAX_EVENTS,
            trend_keep: trend::DEFAULT_POINTS_PER_COMPONENT,
            trend_rows: BTreeMap::new(),
            checkpoint_days: checkpoint::DEFAULT_DAYS,
            checkpoint_newest,
        })
    }

    /// A second connection to a ledger that this process already holds
    /// open with [`Store::open`]: the outbox sender's, beside the ledger
    /// thread's.
    ///
    /// It looks at the file only through SQLite. [`Store::open`] reads the
    /// file's first bytes with an ordinary file descriptor, and closing any
    /// descriptor of a file drops every POSIX lock this process holds on it
    /// (`fcntl(2)`), including the open connection's. Another program's
    /// `sqlite3` (the documented online backup) would then take itself for
    /// the last connection, checkpoint the write-ahead log and delete it
    /// under the running service, whose later commits would go into an
    /// unlinked file and be lost by a crash. SQLite itself shares one set of
    /// locks per file among the connections of a process, so connections it
    /// opens are safe.
    ///
    /// The file must exist and be a ledger at this build's schema version;
    /// it is never created or upgraded here.
    pub fn attach(path: &Path) -> Result<Store, StoreError> {
        let flags = OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_NO_MUTEX;
        let conn = Connection::open_with_flags(path, flags)
            .map_err(|e| StoreError::sqlite(path, "opening a second connection to the ledger", e))?;
        let read = |e| StoreError::sqlite(path, "reading the ledger's identity", e);
        let application_id: i32 = conn.pragma_query_value(None, "application_id", |r| r.get(0)).map_err(read)?;
        let version: i64 = conn.pragma_query_value(None, "user_version", |r| r.get(0)).map_err(read)?;
        if application_id != APPLICATION_ID || version != i64::from(SCHEMA_VERSION) {
            return Err(StoreError::NotReadable {
                path: path.into(),
                detail: format!(
                    "a second connection expects a ledger at schema version {SCHEMA_VERSION} \
                     (application_id 0x{APPLICATION_ID:08X}) that the service has opened, but found \
                     application_id 0x{application_id:08X}, schema version {version}"
                ),
            });
        }
        configure(&conn, path)?;
        Ok(Store {
            conn,
            path: path.into(),
            journal_max_events: journal::DEFAULT_MAX_EVENTS,
            trend_keep: trend::DEFAULT_POINTS_PER_COMPONENT,
            trend_rows: BTreeMap::new(),
            checkpoint_days: checkpoint::DEFAULT_DAYS,
            checkpoint_newest: BTreeMap::new(),
        })
    }

    /// The ledger file this store writes.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Reads every component state, tag cursor, alarm record and meta entry,
    /// all from one consistent snapshot.
    pub fn load(&self) -> Result<Loaded, StoreError> {
        load_from(&self.conn, &self.path)
    }

    /// Writes the whole batch in one transaction and returns once it is on
    /// disk (`synchronous = FULL`). On error nothing of the batch is written.
    pub fn commit(&mut self, c: &Commit<'_>) -> Result<CommitStats, StoreError> {
        let path = &self.path;
        let keep = self.journal_max_events;
        let fail = |e| StoreError::sqlite(path, "committing a batch", e);
        // IMMEDIATE takes the write lock up front, so a busy database fails
        // (after the busy timeout) before any work rather than at COMMIT.
        let tx = self.conn.transaction_with_behavior(TransactionBehavior::Immediate).map_err(fail)?;
        upsert(&tx, "INSERT INTO component (name, state) VALUES (?1, ?2) ON CONFLICT (name) DO UPDATE SET state = excluded.state", c.components).map_err(fail)?;
        upsert(
            &tx,
            "INSERT INTO tag (name, state) VALUES (?1, ?2) ON CONFLICT (name) DO UPDATE SET state = excluded.state",
            c.tags,
        )
        .map_err(fail)?;
        upsert(
            &tx,
            "INSERT INTO alarm (key, record) VALUES (?1, ?2) ON CONFLICT (key) DO UPDATE SET record = excluded.record",
            c.alarms,
        )
        .map_err(fail)?;
        upsert(
            &tx,
            "INSERT INTO meta (key, value) VALUES (?1, ?2) ON CONFLICT (key) DO UPDATE SET value = excluded.value",
            c.meta,
        )
        .map_err(fail)?;
        held::apply(&tx, c.held_added, c.held_released).map_err(fail)?;
        journal::append(&tx, c.alarm_events, keep).map_err(fail)?;
        let trend_rows = trend::upsert(&tx, c.trend_points, self.trend_keep, &self.trend_rows).map_err(fail)?;
        let now = wall_clock_ms();
        let days = i64::try_from(self.checkpoint_days).unwrap_or(i64::MAX);
        let cutoff = now.saturating_sub(days.saturating_mul(86_400_000));
        let checkpoints = checkpoint::write(&tx, c.checkpoints, &self.checkpoint_newest, now, cutoff).map_err(fail)?;
        inspection::accept(&tx, c.inspections_accepted).map_err(fail)?;
        inspection::upsert_history(&tx, c.history).map_err(fail)?;
        outbox::append(&tx, c.outbox).map_err(fail)?;
        let stats = outbox::totals(&tx).map_err(fail)?;
        tx.commit().map_err(fail)?;
        // Only now: a rolled-back batch must leave the counts as they were.
        self.trend_rows.extend(trend_rows);
        self.checkpoint_newest.extend(checkpoints);
        Ok(CommitStats { outbox: stats })
    }
}

/// Runs one cached upsert statement over `rows`.
fn upsert(conn: &Connection, sql: &str, rows: &[(String, String)]) -> rusqlite::Result<()> {
    if rows.is_empty() {
        return Ok(());
    }
    let mut stmt = conn.prepare_cached(sql)?;
    for (key, json) in rows {
        stmt.execute((key, json))?;
    }
    Ok(())
}

/// Reads a ledger without changing it, for tools that look at the ledger
/// of a service that may be running (WAL lets them read while it writes):
/// the same as [`Store::load`], but the file is never created, upgraded or
/// written. A missing or empty file, or one that is not a ledger of a
/// version this build reads, is an error that says so.
pub fn read_ledger(path: &Path) -> Result<Loaded, StoreError> {
    match schema::inspect(path)? {
        schema::Found::Ledger(v) if v == SCHEMA_VERSION => {}
        schema::Found::Ledger(v) => {
            return Err(StoreError::NotReadable {
                path: path.into(),
                detail: format!(
                    "schema version {v}, this build reads {SCHEMA_VERSION}; start the service once to upgrade it"
                ),
            })
        }
        schema::Found::Missing | schema::Found::Blank => {
            return Err(StoreError::NotReadable {
                path: path.into(),
                detail: "no ledger here yet: has the service run with this [store] path?".into(),
            })
        }
    }
    let conn = read_only(path).map_err(|e| StoreError::sqlite(path, "opening the ledger for reading", e))?;
    load_from(&conn, path)
}

/// [`read_ledger`] for a reader inside the process that holds the ledger
/// open (the HTTP handlers of the running service): it looks at the file
/// through SQLite only, never with a plain file descriptor, whose closing
/// would drop the ledger thread's POSIX locks (see [`Store::attach`]).
pub fn read_ledger_beside(path: &Path) -> Result<Loaded, StoreError> {
    let conn = read_only(path).map_err(|e| StoreError::sqlite(path, "opening the ledger for reading", e))?;
    load_from(&conn, path)
}

/// Every component state, tag cursor, alarm record and meta entry from one
/// read transaction on `conn`.
fn load_from(conn: &Connection, path: &Path) -> Result<Loaded, StoreError> {
    let fail = |e| StoreError::sqlite(path, "loading the ledger", e);
    // A read transaction, so the four tables come from the same commit
    // even if another connection writes meanwhile.
    let tx = conn.unchecked_transaction().map_err(fail)?;
    let read = |sql: &str| -> rusqlite::Result<Vec<(String, String)>> {
        let mut stmt = tx.prepare_cached(sql)?;
        let rows = stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?;
        rows.collect()
    };
    let loaded = Loaded {
        components: read("SELECT name, state FROM component ORDER BY name").map_err(fail)?,
        tags: read("SELECT name, state FROM tag ORDER BY name").map_err(fail)?,
        alarms: read("SELECT key, record FROM alarm ORDER BY key").map_err(fail)?,
        meta: read("SELECT key, value FROM meta ORDER BY key").map_err(fail)?,
        held: held::load(&tx).map_err(fail)?,
    };
    tx.finish().map_err(fail)?;
    Ok(loaded)
}

/// The wall clock, ms since the Unix epoch: when a checkpoint is written.
pub(crate) fn wall_clock_ms() -> i64 {
    let since = std::time::SystemTime::now().duration_since(std::time::UNIX_EPOCH).unwrap_or_default();
    i64::try_from(since.as_millis()).unwrap_or(i64::MAX)
}

/// A read-only connection to the ledger at `path`, for readers outside the
/// ledger thread (WAL lets them read while it writes).
pub(crate) fn read_only(path: &Path) -> rusqlite::Result<Connection> {
    let conn = Connection::open_with_flags(path, OpenFlags::SQLITE_OPEN_READ_ONLY | OpenFlags::SQLITE_OPEN_NO_MUTEX)?;
    conn.busy_timeout(BUSY_TIMEOUT)?;
    Ok(conn)
}

/// Sets the per-connection behaviour the durability promises rest on, and
/// checks that SQLite took it.
fn configure(conn: &Connection, path: &Path) -> Result<(), StoreError> {
    let fail = |e| StoreError::sqlite(path, "configuring the ledger connection", e);
    conn.busy_timeout(BUSY_TIMEOUT).map_err(fail)?;
    let mode: String = conn.pragma_update_and_check(None, "journal_mode", "WAL", |r| r.get(0)).map_err(fail)?;
    if !mode.eq_ignore_ascii_case("wal") {
        return Err(StoreError::NoWal { path: path.into(), mode });
    }
    conn.pragma_update(None, "synchronous", "FULL").map_err(fail)?;
    conn.pragma_update(None, "journal_size_limit", WAL_SIZE_LIMIT_BYTES).map_err(fail)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pairs(items: &[(&str, &str)]) -> Vec<(String, String)> {
        items.iter().map(|(k, v)| (k.to_string(), v.to_string())).collect()
    }

    /// A new ledger in a temporary directory (kept while the handle lives).
    pub(super) fn fresh() -> (tempfile::TempDir, Store) {
        let dir = tempfile::tempdir().unwrap();
        let store = Store::open(&dir.path().join("ledger.db")).unwrap();
        (dir, store)
    }

    /// Writes at `path` a ledger as an earlier release left it: schema
    /// `version` (the first `version` migrations), a row in every table of
    /// version 1, closed. Check it with [`assert_upgraded_with_v1_rows`].
    pub(super) fn earlier_ledger(path: &Path, version: u32) {
        let mut conn = Connection::open(path).unwrap();
        conn.pragma_update(None, "journal_mode", "WAL").unwrap();
        schema::migrate(&mut conn, path, &schema::MIGRATIONS[..version as usize]).unwrap();
        conn.execute_batch(
            r#"INSERT INTO component VALUES ('sh-1', '{"d":0.5}');
               INSERT INTO tag VALUES ('TI-101', '{"cursor_ms":1}');
               INSERT INTO alarm VALUES ('sh-1/creep_life_fraction', '{"state":"acknowledged"}');
               INSERT INTO meta VALUES ('engine_counters', '{"accepted":7}');
               INSERT INTO outbox (line) VALUES ('m v=1 1');
               UPDATE outbox_total SET lines = 1, bytes = 7;"#,
        )
        .unwrap();
        drop(conn);
        assert_eq!(schema::inspect(path).unwrap(), schema::Found::Ledger(version));
    }

    /// `store`, opened on an [`earlier_ledger`], is at this build's schema
    /// version and holds the version-1 rows as they were.
    pub(super) fn assert_upgraded_with_v1_rows(store: &Store) {
        let version: i64 = store.conn.pragma_query_value(None, "user_version", |r| r.get(0)).unwrap();
        assert_eq!(version, i64::from(SCHEMA_VERSION));
        let pair = |k: &str, v: &str| vec![(k.to_string(), v.to_string())];
        assert_eq!(
            store.load().unwrap(),
            Loaded {
                components: pair("sh-1", r#"{"d":0.5}"#),
                tags: pair("TI-101", r#"{"cursor_ms":1}"#),
                alarms: pair("sh-1/creep_life_fraction", r#"{"state":"acknowledged"}"#),
                meta: pair("engine_counters", r#"{"accepted":7}"#),
                held: vec![],
            }
        );
        let outbox: Vec<String> = store.outbox_batch(10, usize::MAX).unwrap().into_iter().map(|(_, l)| l).collect();
        assert_eq!(outbox, ["m v=1 1"]);
        assert_eq!(store.outbox_stats().unwrap().lines, 1);
    }

    #[test]
    fn the_exclusive_store_refuses_while_anyone_else_has_the_ledger_open() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        let components = pairs(&[("sh-1", r#"{"d":0.5}"#)]);
        let mut service = Store::open(&path).unwrap();
        service.commit(&Commit { components: &components, ..Default::default() }).unwrap();
        // An idle writer (a service between two commits) and a reader both
        // keep the file in use.
        let err = Store::open_exclusive(&path, false).unwrap_err();
        assert!(matches!(err, StoreError::InUse { .. }), "{err}");
        let text = err.to_string();
        assert!(text.contains("ledger.db") && text.contains("in use") && text.contains("Stop the service"), "{text}");
        assert!(text.contains("not changed"), "{text}");
        drop(service);
        let reader = read_only(&path).unwrap();
        reader.query_row("SELECT count(*) FROM component", [], |r| r.get::<_, i64>(0)).unwrap();
        assert!(matches!(Store::open_exclusive(&path, true), Err(StoreError::InUse { .. })));
        drop(reader);

        // Alone, it opens and writes; after it, the service opens again.
        let mut tool = Store::open_exclusive(&path, false).unwrap();
        assert_eq!(tool.load().unwrap().components, components);
        let changed = pairs(&[("sh-1", r#"{"d":0.25}"#)]);
        tool.commit(&Commit { components: &changed, ..Default::default() }).unwrap();
        drop(tool);
        assert_eq!(Store::open(&path).unwrap().load().unwrap().components, changed);
    }

    #[test]
    fn the_exclusive_store_creates_a_ledger_only_when_asked() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("new/ledger.db");
        let err = Store::open_exclusive(&path, false).unwrap_err();
        assert!(err.to_string().contains("no ledger here"), "{err}");
        assert!(!path.exists(), "refusing must not create the file");
        drop(Store::open_exclusive(&path, true).unwrap());
        assert_eq!(schema::inspect(&path).unwrap(), schema::Found::Ledger(SCHEMA_VERSION));
        // A ledger made by the tool is an ordinary WAL ledger for the service.
        let store = Store::open(&path).unwrap();
        let mode: String = store.conn.pragma_query_value(None, "journal_mode", |r| r.get(0)).unwrap();
        assert_eq!(mode, "wal");
    }

    #[test]
    fn open_with_creates_a_ledger_only_when_asked() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("new/ledger.db");
        let err = Store::open_with(&path, false).unwrap_err();
        assert!(matches!(err, StoreError::NoLedger { empty: false, .. }), "{err}");
        let text = err.to_string();
        assert!(text.contains("new/ledger.db") && text.contains("--init-ledger"), "{text}");
        assert!(!path.exists() && !path.parent().unwrap().exists(), "refusing must create nothing");

        // A 0-byte file (a file created by hand, a volume not yet filled)
        // is refused as well, and stays 0 bytes.
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, b"").unwrap();
        let err = Store::open_with(&path, false).unwrap_err();
        assert!(matches!(err, StoreError::NoLedger { empty: true, .. }), "{err}");
        assert_eq!(std::fs::metadata(&path).unwrap().len(), 0);

        drop(Store::open_with(&path, true).unwrap());
        // Once there, the ledger opens without the flag.
        let store = Store::open_with(&path, false).unwrap();
        assert_eq!(store.load().unwrap(), Loaded::default());
    }

    #[test]
    fn the_store_can_move_to_its_own_thread() {
        fn is_send<T: Send>() {}
        is_send::<Store>();
        is_send::<StoreError>();
    }

    #[test]
    fn open_creates_the_file_and_its_parent_directories() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("var/lib/lifeledger/ledger.db");
        let store = Store::open(&path).unwrap();
        assert_eq!(store.path(), path);
        assert!(path.is_file());
        assert_eq!(store.load().unwrap(), Loaded::default());
    }

    #[test]
    fn a_second_connection_attaches_to_an_open_ledger_and_sees_its_commits() {
        let (_dir, mut store) = fresh();
        let second = Store::attach(store.path()).unwrap();
        let sync: i64 = second.conn.pragma_query_value(None, "synchronous", |r| r.get(0)).unwrap();
        assert_eq!(sync, 2, "the second connection syncs as fully as the first");
        store.commit(&Commit { outbox: &["m v=1 1".to_string()], ..Default::default() }).unwrap();
        assert_eq!(second.outbox_stats().unwrap().lines, 1);
    }

    #[test]
    fn attach_neither_creates_nor_takes_a_file_that_is_not_a_current_ledger() {
        let dir = tempfile::tempdir().unwrap();
        let missing = dir.path().join("missing.db");
        let err = Store::attach(&missing).unwrap_err();
        assert!(err.to_string().contains("missing.db"), "{err}");
        assert!(!missing.exists(), "attach must not create a ledger");

        let foreign = dir.path().join("foreign.db");
        Connection::open(&foreign).unwrap().execute_batch("CREATE TABLE t (x)").unwrap();
        let err = Store::attach(&foreign).unwrap_err();
        assert!(err.to_string().contains("schema version 0"), "{err}");

        let older = dir.path().join("older.db");
        earlier_ledger(&older, 1);
        let err = Store::attach(&older).unwrap_err();
        assert!(err.to_string().contains("schema version 1"), "{err}");
    }

    #[test]
    fn the_connection_runs_in_wal_mode_with_full_sync() {
        let (_dir, store) = fresh();
        let mode: String = store.conn.pragma_query_value(None, "journal_mode", |r| r.get(0)).unwrap();
        let sync: i64 = store.conn.pragma_query_value(None, "synchronous", |r| r.get(0)).unwrap();
        assert_eq!(mode, "wal");
        assert_eq!(sync, 2, "2 is FULL");
    }

    #[test]
    fn every_table_round_trips_through_a_reopen() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("ledger.db");
        let components = pairs(&[("sh-2", r#"{"d":0.25}"#), ("sh-1", r#"{"d":0.5,"name":"Überhitzer ä"}"#)]);
        let tags = pairs(&[("TI-101", r#"{"cursor":"2024-01-01T00:00:00Z"}"#)]);
        let alarms = pairs(&[("sh-1/creep", r#"{"state":"normal"}"#)]);
        let meta = pairs(&[("counters", r#"{"duplicates":3}"#)]);
        let outbox = vec!["a,x=1 v=1 1".to_string(), "b v=2 2".to_string()];
        let events = vec![JournalEntry {
            time_ms: 1_700_000_000_000,
            component: "sh-1".into(),
            index: "creep".into(),
            event: r#"{"state":"unacknowledged"}"#.into(),
        }];
        let point = TrendPoint {
            t: 1_700_000_000_000,
            metal_temperature_c: 545.5,
            pressure_mpa: 17.0,
            hoop_stress_mpa: 70.25,
            creep_life_fraction: 0.125,
            creep_strain: 2.5e-4,
            wear_index: 0.0,
            fatigue_stress_mpa: 120.5,
            fatigue_usage: 0.001,
            wear: trend::WearInputs { load_n: 80.5, sliding_speed_mm_s: 1.25, slip_mm: 0.04, frequency_hz: 25.0 },
        };
        let trend_points = vec![("sh-1".to_string(), point)];
        {
            let mut store = Store::open(&path).unwrap();
            let batch = Commit {
                components: &components,
                tags: &tags,
                alarms: &alarms,
                meta: &meta,
                outbox: &outbox,
                alarm_events: &events,
                trend_points: &trend_points,
                held_added: &[
                    held::HeldRow { seq: 3, tag: "TI-101", time_ms: 7, value: 0.1 + 0.2, arrival_ms: 9 },
                    held::HeldRow { seq: 4, tag: "TI-101", time_ms: 8, value: 1.0, arrival_ms: 9 },
                ],
                held_released: &[4],
                checkpoints: &[],
                ..Default::default()
            };
            store.commit(&batch).unwrap();
        }
        let store = Store::open(&path).unwrap();
        let loaded = store.load().unwrap();
        let mut sorted = components.clone();
        sorted.sort();
        assert_eq!(
            loaded,
            Loaded {
                components: sorted,
                tags,
                alarms,
                meta,
                held: vec![held::LoadedHeld {
                    seq: 3,
                    tag: "TI-101".into(),
                    time_ms: 7,
                    value: 0.1 + 0.2,
                    arrival_ms: 9
                }]
            }
        );
        let lines: Vec<String> = store.outbox_batch(10, usize::MAX).unwrap().into_iter().map(|(_, l)| l).collect();
        assert_eq!(lines, outbox);
        let journal: Vec<JournalEntry> = store.alarm_journal_newest(10).unwrap().into_iter().map(|(_, e)| e).collect();
        assert_eq!(journal, events);
        assert_eq!(store.trend("sh-1", TrendWindow::ALL).unwrap(), [point]);
    }

    #[test]
    fn a_later_commit_replaces_the_value_of_a_key_and_keeps_the_others() {
        let (_dir, mut store) = fresh();
        let first = pairs(&[("a", "1"), ("b", "2")]);
        store
            .commit(&Commit { components: &first, tags: &first, alarms: &first, meta: &first, ..Default::default() })
            .unwrap();
        let second = pairs(&[("b", "20"), ("c", "30")]);
        store
            .commit(&Commit {
                components: &second,
                tags: &second,
                alarms: &second,
                meta: &second,
                ..Default::default()
            })
            .unwrap();

        let want = pairs(&[("a", "1"), ("b", "20"), ("c", "30")]);
        let loaded = store.load().unwrap();
        assert_eq!(
            loaded,
            Loaded { components: want.clone(), tags: want.clone(), alarms: want.clone(), meta: want, held: vec![] }
        );
    }

    #[test]
    fn within_one_batch_the_last_pair_for_a_key_wins() {
        let (_dir, mut store) = fresh();
        let twice = pairs(&[("a", "old"), ("a", "new")]);
        store.commit(&Commit { components: &twice, ..Default::default() }).unwrap();
        assert_eq!(store.load().unwrap().components, pairs(&[("a", "new")]));
    }

    #[test]
    fn a_failed_commit_writes_nothing() {
        let (_dir, mut store) = fresh();
        // Make the outbox insert fail after the component upsert has run.
        store
            .conn
            .execute_batch("CREATE TRIGGER refuse BEFORE INSERT ON outbox BEGIN SELECT RAISE(ABORT, 'refused'); END")
            .unwrap();
        let components = pairs(&[("c", "1")]);
        let err = store
            .commit(&Commit { components: &components, outbox: &["x".to_string()], ..Default::default() })
            .unwrap_err();
        assert!(err.to_string().contains("committing a batch"), "{err}");
        assert!(err.to_string().contains("ledger.db"), "{err}");
        assert_eq!(store.load().unwrap(), Loaded::default());
        assert_eq!(store.outbox_stats().unwrap(), OutboxStats::default());
    }

    #[test]
    fn a_large_batch_lands_whole() {
        let (_dir, mut store) = fresh();
        let components: Vec<(String, String)> =
            (0..10_000).map(|i| (format!("c{i:05}"), format!(r#"{{"n":{i}}}"#))).collect();
        let outbox: Vec<String> = (0..10_000).map(|i| format!("m v={i}i {i}")).collect();
        let stats = store.commit(&Commit { components: &components, outbox: &outbox, ..Default::default() }).unwrap();
        let bytes: usize = outbox.iter().map(String::len).sum();
        assert_eq!(stats.outbox, OutboxStats { lines: 10_000, bytes: bytes as u64, parked: 0 });
        assert_eq!(store.load().unwrap().components, components);
    }
}
