//! The outbox sender: drains points from the ledger's outbox to the
//! time-series database, oldest first, at least once.
//!
//! It uses its own connection to the ledger file (SQLite in WAL mode lets it
//! read while the ledger thread writes), opened with
//! [`Store::attach`](crate::store::Store::attach): through SQLite only, so
//! the ledger thread's file locks stay intact. A batch is removed from the outbox
//! only after the database accepted it; a failed batch is retried with
//! exponential backoff and jitter. A batch the database refuses as
//! malformed (HTTP 400/422) is parked: moved in one transaction to the
//! ledger's `parked_line` table, counted, never counted as delivered. Because every point carries its event
//! time, a batch that was accepted but not yet removed when the process
//! died is simply written again and overwrites itself.

use super::shutdown::ShutdownListener;
use crate::sink::{Backoff, DatabaseSettings, Writer};
use crate::store::Store;
use std::path::PathBuf;
use std::time::Duration;
use tokio::sync::watch;

/// What the outbox sender last learned of the database, for the ledger
/// thread (snapshot, `/metrics`, the service-health alarm).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct DatabaseLink {
    /// Whether the last write got an answer (`None` before the first).
    pub reachable: Option<bool>,
    /// While the database refuses the service itself (HTTP 401, 403, 404,
    /// 413: a wrong token, organisation or bucket): its answer. The points
    /// stay in the outbox and are retried; cleared by the next write it takes.
    pub refusal: Option<String>,
}

impl DatabaseLink {
    fn took() -> DatabaseLink {
        DatabaseLink { reachable: Some(true), refusal: None }
    }
}

/// Run until shutdown; on shutdown, one last pass with a short deadline.
pub async fn run_sender(
    settings: DatabaseSettings,
    ledger_path: PathBuf,
    reachable: watch::Sender<DatabaseLink>,
    mut shutdown: ShutdownListener,
) {
    let writer = match Writer::new(&settings) {
        Ok(w) => w,
        Err(e) => {
            tracing::error!("database writer: {e}");
            return;
        }
    };
    // `attach`, not `open`: the ledger thread holds the file open, and only
    // a connection opened through SQLite leaves its locks intact (see
    // `Store::attach`).
    let mut store = match tokio::task::block_in_place(|| Store::attach(&ledger_path)) {
        Ok(s) => s,
        Err(e) => {
            tracing::error!("outbox sender cannot open the ledger: {e}");
            return;
        }
    };
    let mut backoff = Backoff::from_settings(&settings);
    let mut stopping = false;
    loop {
        let batch = match tokio::task::block_in_place(|| store.outbox_batch(settings.batch_lines.max(1), 8 << 20)) {
            Ok(b) => b,
            Err(e) => {
                tracing::error!("outbox read failed: {e}");
                Vec::new()
            }
        };
        if batch.is_empty() {
            if stopping {
                break;
            }
            tokio::select! {
                _ = tokio::time::sleep(Duration::from_millis(200)) => {}
                _ = shutdown.stopped() => { stopping = true; }
            }
            continue;
        }
        let last_id = batch.last().map(|(id, _)| *id).unwrap_or(0);
        let lines: Vec<String> = batch.into_iter().map(|(_, l)| l).collect();
        match writer.write_lines(&lines).await {
            Ok(()) => {
                backoff.reset();
                reachable.send_if_modified(|l| replace(l, DatabaseLink::took()));
                if let Err(e) = tokio::task::block_in_place(|| store.outbox_remove_through(last_id)) {
                    tracing::error!("outbox cleanup failed (points will be written again): {e}");
                }
            }
            Err(e) if e.is_bad_data() => {
                // The database refuses these lines as they are; retrying
                // would block everything behind them. Park them (kept in
                // the ledger, counted, never counted as delivered), say so
                // loudly, and move on.
                reachable.send_if_modified(|l| replace(l, DatabaseLink::took()));
                let reason = e.to_string();
                match tokio::task::block_in_place(|| store.outbox_park_through(last_id, &reason)) {
                    Ok(n) => tracing::error!(
                        lines = n,
                        "database refused a batch as malformed; its lines are parked in the ledger \
                         (table parked_line), not delivered: {e}; first line: {}",
                        lines[0]
                    ),
                    Err(pe) => {
                        tracing::error!("database refused a batch as malformed ({e}) and parking it failed: {pe}");
                        if stopping {
                            break;
                        }
                        let d = backoff.next_delay();
                        tokio::select! {
                            _ = tokio::time::sleep(d) => {}
                            _ = shutdown.stopped() => { stopping = true; }
                        }
                    }
                }
            }
            Err(e) => {
                // Unreachable, or reachable but refusing the service itself.
                let link = if e.is_retryable() {
                    DatabaseLink { reachable: Some(false), refusal: reachable.borrow().refusal.clone() }
                } else {
                    DatabaseLink { reachable: Some(true), refusal: Some(e.to_string()) }
                };
                reachable.send_if_modified(|l| replace(l, link));
                if stopping {
                    tracing::warn!(
                        "database unreachable at shutdown; {} points stay in the outbox for the next start: {e}",
                        lines.len()
                    );
                    break;
                }
                let d = backoff.next_delay();
                tracing::warn!("database write failed, retrying in {:.1} s: {e}", d.as_secs_f64());
                tokio::select! {
                    _ = tokio::time::sleep(d) => {}
                    _ = shutdown.stopped() => { stopping = true; }
                }
            }
        }
    }
}

/// Sets `*slot` to `new`; whether it changed (for `send_if_modified`).
fn replace(slot: &mut DatabaseLink, new: DatabaseLink) -> bool {
    if *slot == new {
        false
    } else {
        *slot = new;
        true
    }
}
