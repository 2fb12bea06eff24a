//! Delivery of line protocol to the time-series database.
//!
//! The ledger store keeps an outbox of points the database has not yet
//! accepted; the outbox sender (elsewhere) drains it through this module.
//! The pieces here are deliberately small and free of policy:
//!
//! * [`DatabaseSettings`]: the `[database]` section of the configuration
//!   (where to write, with which token, batch size, timeouts, back-off,
//!   outbox quota).
//! * [`Writer`]: one write attempt of a batch of lines to the InfluxDB v2
//!   write API (`POST {url}/api/v2/write?org=..&bucket=..&precision=ns`),
//!   and a readiness ping.
//! * [`SinkError`]: why an attempt failed, sorted by what the caller must do
//!   with the lines: retry them later ([`SinkError::is_retryable`]), park them
//!   as bad data ([`SinkError::is_bad_data`]), or keep them and fix the
//!   configuration.
//! * [`Backoff`]: exponential back-off with full jitter between retries.
//!
//! Idempotency (design invariant 4) is not enforced here but relied on:
//! every line carries its event timestamp, so writing a batch again
//! overwrites the same points instead of adding new ones. With
//! VictoriaMetrics this holds only when it runs with
//! `-dedup.minScrapeInterval=1ms` (see `tests/sink_victoria.rs`).

mod backoff;
mod error;
mod settings;
mod writer;

pub use backoff::Backoff;
pub use error::SinkError;
pub use settings::{read_ca_file, redacted_url, DatabaseSettings};
pub use writer::Writer;
