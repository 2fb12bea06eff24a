//! lifeledger: a creep and wear life ledger for high-temperature plant parts.
//!
//! The crate is split the way data flows through it:
//!
//! * [`physics`]: pure functions of the trade (hoop stress, Larson-Miller
//!   rupture life, Robinson life fraction, Norton-Arrhenius creep strain,
//!   Archard and fretting wear, time-at-condition histograms). No I/O.
//! * [`engine`]: per-component integrators that turn timestamped tag samples
//!   into ledger increments. Pure and deterministic; live service and replay
//!   call the same code.
//! * [`settings`]: configuration files, the material library and their
//!   validation, turned into the engine's plan.
//! * [`replay`]: historian CSV backfill through the engine.
//! * [`lineproto`]: InfluxDB line protocol encoding shared by replay and the
//!   database sink.
//! * [`fit`]: material constants from creep test data.
//! * [`report`]: human and JSON renderings of ledgers and derived checks.
//! * [`assessment`]: the assessment report (HTML, CSV, JSON) of `lifeledger report`.
//! * [`store`]: the durable ledger (SQLite, one transaction per batch).
//! * [`ledger_file`]: a ledger file's contents typed (the stored ledger,
//!   the daily checkpoints), shared by the service, recovery and reports.
//! * [`recovery`]: rollback, backfill and resend of a poisoned ledger.
//! * [`sink`]: delivery of line protocol to the time-series database.
//! * [`alarm`]: threshold alarms with ISA-18.2 states.
//! * [`inspection`]: inspection records between people, the ledger file and the engine.

// Validation writes `!(x > 0.0)` on purpose: it is also true for NaN, which
// must be refused too.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

pub mod alarm;
pub mod assessment;
pub mod demo;
pub mod engine;
pub mod event_time;
pub mod fit;
pub mod ingest;
pub mod inspection;
pub mod ledger_file;
pub mod lineproto;
pub mod physics;
pub mod recovery;
pub mod replay;
pub mod report;
pub mod series_model;
pub mod service;
pub mod settings;
pub mod shutdown;
pub mod sink;
pub mod store;

/// The caution every output carries. Built-in numbers are screening values.
pub const CAUTION: &str = "Screening estimate only: limits, material data and acceptance \
must come from the plant's governing code and a responsible engineer.";
