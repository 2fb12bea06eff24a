//! Recovery of a poisoned ledger: the way back after a bad gateway clock or
//! a bad historian export put wrong hours into a service's ledger.
//!
//! [`checkpoint`]: what the ledger thread hands the store with every commit
//! so that each component's whole ledger, and the states of the tags it
//! reads, are copied once per UTC day of event time (the store keeps them,
//! see `crate::store::checkpoint`).

pub mod checkpoint;

pub use checkpoint::{checkpoint_rows, Checkpoint};
