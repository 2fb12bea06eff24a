//! The ledger store refuses files that are not its own and leaves them
//! exactly as they were: not SQLite, damaged, another program's SQLite
//! database, or a ledger written by a newer lifeledger. Each check compares
//! the file's bytes before and after the refused open.

use std::path::{Path, PathBuf};

use lifeledger::store::{Commit, Store, StoreError, APPLICATION_ID, SCHEMA_VERSION};
use rusqlite::Connection;

fn bytes(path: &Path) -> Vec<u8> {
    std::fs::read(path).unwrap()
}

/// Every file in `dir` with its contents, to see that nothing was added.
fn listing(dir: &Path) -> Vec<(PathBuf, Vec<u8>)> {
    let mut files: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .map(|p| {
            let b = bytes(&p);
            (p, b)
        })
        .collect();
    files.sort();
    files
}

/// Deterministic noise (xorshift64), so the test needs no random source.
fn noise(len: usize, mut seed: u64) -> Vec<u8> {
    (0..len)
        .map(|_| {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            seed as u8
        })
        .collect()
}

fn assert_names_file(err: &StoreError, path: &Path) {
    let text = err.to_string();
    assert!(text.contains(&path.display().to_string()), "error must name the file: {text}");
    assert!(text.contains("not changed"), "error must say the file was kept: {text}");
}

#[test]
fn a_file_of_random_bytes_is_refused_and_untouched() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    std::fs::write(&path, noise(64 * 1024, 0x5eed)).unwrap();
    let before = listing(dir.path());

    let err = Store::open(&path).unwrap_err();
    assert!(matches!(err, StoreError::NotSqlite { .. }), "{err}");
    assert_names_file(&err, &path);
    assert_eq!(listing(dir.path()), before, "no byte changed and no file added");
}

#[test]
fn a_short_text_file_is_refused_and_untouched() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    std::fs::write(&path, "# notes\n").unwrap();
    let before = listing(dir.path());
    let err = Store::open(&path).unwrap_err();
    assert!(matches!(err, StoreError::NotSqlite { .. }), "{err}");
    assert_eq!(listing(dir.path()), before);
}

#[test]
fn the_sqlite_header_followed_by_noise_is_refused_as_damaged_and_untouched() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    let mut content = b"SQLite format 3\0".to_vec();
    content.extend(noise(8 * 4096, 42));
    std::fs::write(&path, &content).unwrap();

    let err = Store::open(&path).unwrap_err();
    assert!(matches!(err, StoreError::Corrupt { .. }), "{err}");
    assert_names_file(&err, &path);
    assert_eq!(bytes(&path), content);
}

#[test]
fn a_ledger_with_a_damaged_page_is_refused_and_untouched() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    {
        let mut store = Store::open(&path).unwrap();
        let components: Vec<(String, String)> =
            (0..2000).map(|i| (format!("c{i:04}"), format!(r#"{{"n":{i},"pad":"{}"}}"#, "x".repeat(100)))).collect();
        store.commit(&Commit { components: &components, ..Default::default() }).unwrap();
    }
    // Closing the last connection checkpointed the log into the main file.
    let mut content = bytes(&path);
    let page_size = 4096;
    assert!(content.len() > 10 * page_size, "the ledger spans many pages");
    for page in [3, 6, 9] {
        let at = page * page_size;
        content[at..at + 64].copy_from_slice(&noise(64, page as u64 + 1));
    }
    std::fs::write(&path, &content).unwrap();

    let err = Store::open(&path).unwrap_err();
    assert!(matches!(err, StoreError::Corrupt { .. }), "{err}");
    assert_names_file(&err, &path);
    assert!(err.to_string().contains("backup"), "error must say what to do: {err}");
    assert_eq!(bytes(&path), content);
}

#[test]
fn another_programs_sqlite_file_is_refused_and_untouched() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    {
        let conn = Connection::open(&path).unwrap();
        conn.execute_batch(
            "PRAGMA application_id = 1234;
             CREATE TABLE recipes (name TEXT, minutes INTEGER);
             INSERT INTO recipes VALUES ('bread', 180);",
        )
        .unwrap();
    }
    let before = listing(dir.path());

    let err = Store::open(&path).unwrap_err();
    assert!(matches!(err, StoreError::Foreign { .. }), "{err}");
    assert_names_file(&err, &path);
    assert!(err.to_string().contains("0x000004D2"), "error must show the foreign id: {err}");
    assert_eq!(listing(dir.path()), before);
}

#[test]
fn an_unmarked_sqlite_file_with_tables_is_refused_and_untouched() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    Connection::open(&path).unwrap().execute_batch("CREATE TABLE t (x); INSERT INTO t VALUES (1);").unwrap();
    let before = listing(dir.path());

    let err = Store::open(&path).unwrap_err();
    assert!(matches!(err, StoreError::Foreign { .. }), "{err}");
    assert_eq!(listing(dir.path()), before);
}

#[test]
fn a_foreign_file_with_an_unmerged_write_ahead_log_is_not_checkpointed() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    let wal = dir.path().join("ledger.db-wal");
    let conn = Connection::open(&path).unwrap();
    conn.execute_batch(
        "PRAGMA journal_mode = WAL;
         PRAGMA wal_autocheckpoint = 0;
         PRAGMA application_id = 7;
         CREATE TABLE t (x);
         INSERT INTO t VALUES (1);",
    )
    .unwrap();
    // Keep the writer's log unmerged: a closing connection would checkpoint.
    std::mem::forget(conn);
    let (main_before, wal_before) = (bytes(&path), bytes(&wal));
    assert!(!wal_before.is_empty());

    let err = Store::open(&path).unwrap_err();
    assert!(matches!(err, StoreError::Foreign { .. }), "{err}");
    assert_eq!(bytes(&path), main_before);
    assert_eq!(bytes(&wal), wal_before);
}

#[test]
fn a_ledger_from_a_newer_lifeledger_is_refused_and_untouched() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    {
        let mut store = Store::open(&path).unwrap();
        let components = vec![("sh-1".to_string(), r#"{"d":0.1}"#.to_string())];
        store.commit(&Commit { components: &components, ..Default::default() }).unwrap();
    }
    {
        let conn = Connection::open(&path).unwrap();
        let id: i32 = conn.pragma_query_value(None, "application_id", |r| r.get(0)).unwrap();
        assert_eq!(id, APPLICATION_ID);
        conn.pragma_update(None, "user_version", SCHEMA_VERSION + 1).unwrap();
    }
    let before = bytes(&path);

    let err = Store::open(&path).unwrap_err();
    match &err {
        StoreError::NewerSchema { found, known, .. } => {
            assert_eq!((*found, *known), (i64::from(SCHEMA_VERSION) + 1, SCHEMA_VERSION));
        }
        other => panic!("expected NewerSchema, got {other}"),
    }
    assert_names_file(&err, &path);
    assert!(err.to_string().contains("newer lifeledger"), "{err}");
    assert_eq!(bytes(&path), before);
}

#[test]
fn an_empty_file_becomes_a_new_ledger() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    std::fs::write(&path, b"").unwrap();
    let mut store = Store::open(&path).unwrap();
    store.commit(&Commit { outbox: &["m v=1 1".to_string()], ..Default::default() }).unwrap();
    drop(store);

    let conn = Connection::open(&path).unwrap();
    let version: u32 = conn.pragma_query_value(None, "user_version", |r| r.get(0)).unwrap();
    let id: i32 = conn.pragma_query_value(None, "application_id", |r| r.get(0)).unwrap();
    assert_eq!((version, id), (SCHEMA_VERSION, APPLICATION_ID));
}

#[test]
fn reopening_a_ledger_keeps_it() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("ledger.db");
    let meta = vec![("counters".to_string(), r#"{"accepted":5}"#.to_string())];
    Store::open(&path).unwrap().commit(&Commit { meta: &meta, ..Default::default() }).unwrap();
    for _ in 0..3 {
        assert_eq!(Store::open(&path).unwrap().load().unwrap().meta, meta);
    }
}
