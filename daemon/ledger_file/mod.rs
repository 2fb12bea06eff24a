//! A ledger file's contents, typed: the bridge between the rows the store
//! reads and writes and the engine's and alarm book's own types. No I/O
//! here: the store loads and writes the rows.
//!
//! * [`stored`]: [`StoredLedger::parse`], what a loaded ledger holds
//!   (tag cursors, component ledgers, counters, alarm records, the next
//!   event sequence number): what the service starts from and what
//!   `lifeledger ledger`, backfill, rollback and the assessment report read.
//! * [`checkpoint`]: the daily checkpoint rows the ledger thread (and
//!   backfill) hands the store with every commit, and their typed form
//!   read back for rollback.
//!
//! It sits below the service, recovery and reports, which all use it, and
//! above the engine, the alarm book and the store, which it joins.

pub mod checkpoint;
pub mod stored;

pub use checkpoint::{checkpoint_rows, Checkpoint};
pub use stored::StoredLedger;
