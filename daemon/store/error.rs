//! Errors of the ledger store, written for the operator who has to act on
//! them: each names the ledger file, says what is wrong and what to do.
//!
//! The refusals raised by [`Store::open`](super::Store::open) (not SQLite,
//! corrupt, foreign, newer schema) all promise that the file was left
//! untouched; the store checks the file on a read-only connection before it
//! ever opens it for writing.

use std::path::PathBuf;

/// Everything that can go wrong in the ledger store.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    /// The directory that should hold a new ledger could not be created.
    #[error(
        "ledger store {}: cannot create the directory {} for a new ledger: {source}. \
         Create it by hand with write access for the lifeledger user, or point \
         `store.path` at a writable place",
        path.display(),
        dir.display()
    )]
    CreateDir {
        /// The ledger file that was to be created.
        path: PathBuf,
        /// The directory that could not be created.
        dir: PathBuf,
        /// What the operating system said.
        source: std::io::Error,
    },

    /// The ledger file exists but could not be read to check what it is.
    #[error(
        "ledger store {}: cannot read the file to check it: {source}. \
         Check that it is a regular file readable by the lifeledger user",
        path.display()
    )]
    Read {
        /// The ledger file.
        path: PathBuf,
        /// What the operating system said.
        source: std::io::Error,
    },

    /// No ledger at the configured path (the file is missing or empty) and
    /// the service was not told to create one.
    #[error(
        "ledger store {}: no ledger here ({}). Nothing was created: a ledger that vanished \
         (a data volume that did not mount, a wrong `store.path`) must not silently restart \
         every component from its initial values. If a ledger should be here, mount the data \
         volume, fix `store.path` or restore the backup; if this is the first start of a new \
         installation, start once with `lifeledger run --config FILE --init-ledger`",
        path.display(),
        if *empty { "the file is empty" } else { "the file does not exist" }
    )]
    NoLedger {
        /// The ledger file looked for.
        path: PathBuf,
        /// The file exists but holds nothing (0 bytes, or SQLite without tables).
        empty: bool,
    },

    /// The file does not start with the SQLite header.
    #[error(
        "ledger store {}: the file is not an SQLite database (it does not start with the \
         SQLite header), so it is not a lifeledger ledger. The file was not changed. \
         Check `store.path` in the configuration, or move the file away to start a new ledger",
        path.display()
    )]
    NotSqlite {
        /// The refused file.
        path: PathBuf,
    },

    /// A read-only look at a ledger that is not there yet or is at another
    /// schema version than this build's.
    #[error("ledger store {}: {detail}. The file was not changed", path.display())]
    NotReadable {
        /// The file looked at.
        path: PathBuf,
        /// What is wrong and what to do.
        detail: String,
    },

    /// A tool that needs the ledger to itself found another connection on
    /// it: most likely the service is running.
    #[error(
        "ledger store {}: the ledger is in use by another program (a running `lifeledger run`, \
         `lifeledger ledger`, a backup or an sqlite3 session). The file was not changed. Stop the \
         service (for example `systemctl stop lifeledger`), close the other programs, and try again",
        path.display()
    )]
    InUse {
        /// The ledger file.
        path: PathBuf,
    },

    /// SQLite's `quick_check` found damage.
    #[error(
        "ledger store {}: the file is damaged (SQLite quick_check: {detail}). The file was \
         not changed. Stop lifeledger, restore the ledger from a backup, or salvage it with \
         `sqlite3 {} .recover | sqlite3 new.db` and point `store.path` at the new file",
        path.display(),
        path.display()
    )]
    Corrupt {
        /// The refused file.
        path: PathBuf,
        /// The first problems SQLite reported.
        detail: String,
    },

    /// An SQLite database that belongs to some other program.
    #[error(
        "ledger store {}: the file is an SQLite database of another program ({reason}), not a \
         lifeledger ledger. The file was not changed. Check `store.path` in the configuration; \
         lifeledger needs a file of its own (`run --init-ledger` creates a new ledger in place of a missing or empty file)",
        path.display()
    )]
    Foreign {
        /// The refused file.
        path: PathBuf,
        /// Why it is not ours (its application_id, or tables without our mark).
        reason: String,
    },

    /// The schema version is newer than this build knows how to read.
    #[error(
        "ledger store {}: the ledger has schema version {found}, but this build of lifeledger \
         knows versions up to {known}; it was written by a newer lifeledger. The file was not \
         changed. Run the newer lifeledger again, or restore a backup taken before the upgrade",
        path.display()
    )]
    NewerSchema {
        /// The refused file.
        path: PathBuf,
        /// Schema version found in the file (`PRAGMA user_version`).
        found: i64,
        /// Newest schema version this build knows.
        known: u32,
    },

    /// SQLite would not switch the file to write-ahead logging.
    #[error(
        "ledger store {}: SQLite would not put the ledger in WAL mode (journal mode is \
         {mode:?}). WAL needs shared memory beside the file, which network file systems \
         usually do not give; put the ledger on a local disk",
        path.display()
    )]
    NoWal {
        /// The ledger file.
        path: PathBuf,
        /// The journal mode SQLite reported instead.
        mode: String,
    },

    /// Any other SQLite failure while doing `action`.
    #[error("ledger store {}: {action} failed: {source}. {hint}", path.display())]
    Sqlite {
        /// The ledger file.
        path: PathBuf,
        /// What the store was doing, e.g. "committing a batch".
        action: &'static str,
        /// What SQLite said.
        source: rusqlite::Error,
        /// What to do about it, chosen from SQLite's error code.
        hint: &'static str,
    },
}

impl StoreError {
    /// Wraps an SQLite error with the file, the action and a hint chosen
    /// from the error code.
    pub(crate) fn sqlite(path: impl Into<PathBuf>, action: &'static str, source: rusqlite::Error) -> StoreError {
        let hint = hint_for(&source);
        StoreError::Sqlite { path: path.into(), action, source, hint }
    }
}

/// What an operator can do about a given SQLite failure. Whatever failed
/// inside a transaction was rolled back, so the ledger itself stays whole.
fn hint_for(e: &rusqlite::Error) -> &'static str {
    use rusqlite::ErrorCode as C;
    match e.sqlite_error_code() {
        Some(C::DiskFull) => {
            "The disk holding the ledger is full; nothing of this step was written. \
             Free space on that disk (the outbox shrinks once the database accepts data again)"
        }
        Some(C::ReadOnly) | Some(C::PermissionDenied) | Some(C::CannotOpen) => {
            "Check that the file, its directory and its -wal/-shm companions are writable \
             by the lifeledger user"
        }
        Some(C::DatabaseBusy) | Some(C::DatabaseLocked) => {
            "Another program holds a lock on the ledger; make sure only one lifeledger \
             instance uses this file and close any long-running sqlite3 session on it"
        }
        Some(C::DatabaseCorrupt) | Some(C::NotADatabase) => {
            "The file is damaged; stop lifeledger and restore the ledger from a backup"
        }
        Some(C::SystemIoFailure) => "The disk reported an I/O error; check the disk and the system log",
        _ => "If it persists, report it with this message",
    }
}
