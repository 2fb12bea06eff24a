//! Recovery of a poisoned ledger: the way back after a bad gateway clock or
//! a bad historian export put wrong hours into a service's ledger.
//!
//! The daily checkpoints they start from are made by the ledger thread
//! with every commit (`crate::ledger_file::checkpoint_rows`: each
//! component's whole ledger, and the states of the tags it reads, copied
//! once per UTC day of event time; the store keeps them, see
//! `crate::store::checkpoint`). Here:
//!
//! * [`rollback`]: `lifeledger rollback` puts one component, or every
//!   component, back to its newest checkpoint at or before a given time,
//!   rewinds the tags it reads, and records who did it and why in the
//!   alarm journal. The decision of what to restore is a pure function,
//!   tested without a file.
//! * [`backfill`]: `lifeledger backfill` feeds a historian CSV through the
//!   same engine path as `replay` into a stopped service's ledger and
//!   commits the result in one transaction. After a rollback it refills the
//!   hours since the checkpoint; on a new installation it starts the ledger
//!   from the plant's history.
//!
//! * [`resend`]: `lifeledger resend` re-sends components' `component_state`
//!   points for a range of event time from the ledger's trend records to
//!   the database, for a database that lost points it had accepted. It
//!   only reads the ledger.
//!
//! Rollback and backfill change the ledger file of a *stopped* service:
//! both open it with `Store::open_exclusive`, which refuses while any other
//! program has the file open, and keeps everyone else out until they are
//! done.

pub mod backfill;
pub mod resend;
pub mod rollback;

pub use backfill::{backfill, BackfillOutcome};
pub use rollback::{plan_rollback, rollback, RollbackOutcome, RollbackPlan, RollbackRequest, Scope};
