//! `lifeledger backfill`: a historian CSV through the same engine path as
//! `replay`, into the ledger of a stopped service.
//!
//! The engine starts from the ledger's stored state (components, tag
//! cursors, counters), [`crate::replay::replay`] streams the file through
//! it exactly as `lifeledger replay` does, and the resulting states are
//! written by `Store::commit` in one transaction: the changed components,
//! every tag, the engine counters, and a checkpoint of each changed
//! component whose checkpoint is due. A crash or an error before the commit
//! leaves the ledger as it was.
//!
//! Rows at or before their tag's cursor are already in the ledger: the
//! engine counts them as duplicates or late arrivals and integrates
//! nothing from them, so a CSV that overlaps the ledger is safe to feed
//! whole. A missing ledger file is created: this is how a new installation
//! starts from its history.
//!
//! What backfill does not do: it evaluates no alarms (the service does, for
//! each component, with its next data), writes no trend points and queues
//! no points for the time-series database (`replay --write-lp` writes the
//! same series as line protocol for import).

use std::path::PathBuf;

use anyhow::Context;
use serde::Serialize;

use super::rollback::Figures;
use crate::engine::{Counters, Engine};
use crate::ledger_file::checkpoint_rows;
use crate::ledger_file::StoredLedger;
use crate::replay::{open_input, ReplayOptions, ReplayOutcome};
use crate::service::ServiceSettings;
use crate::settings::LoadedConfig;
use crate::store::{Commit, Store};

/// One component before and after a backfill.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ComponentChange {
    pub component: String,
    pub integrated_to_ms_before: Option<i64>,
    pub integrated_to_ms_after: Option<i64>,
    pub before: Figures,
    pub after: Figures,
}

/// What a backfill did.
#[derive(Debug, Clone, Serialize)]
pub struct BackfillOutcome {
    pub ledger: PathBuf,
    /// What the CSV held (rows, malformed rows, unknown tags, time span).
    pub input: ReplayOutcome,
    /// The engine's counters before and after.
    pub counters_before: Counters,
    pub counters_after: Counters,
    /// The components the backfill changed, in plan order.
    pub components: Vec<ComponentChange>,
    /// Checkpoints written (one per changed component whose checkpoint was due).
    pub checkpoints_written: usize,
}

/// Feeds `input` (a CSV path, `-` for standard input) into the ledger at
/// `ledger` (`None`: the configuration's `[store] path`), which no other
/// program may have open.
pub fn backfill(
    cfg: &LoadedConfig,
    service: &ServiceSettings,
    ledger: Option<PathBuf>,
    input: &str,
) -> anyhow::Result<BackfillOutcome> {
    let path = ledger.unwrap_or_else(|| service.store.path.clone());
    let mut store = Store::open_exclusive(&path, true)?;
    store.set_checkpoint_days(service.store.checkpoint_days);
    store.set_alarm_journal_max_events(service.store.alarm_journal_max_events);
    store.set_trend_points_per_component(service.store.trend_points_per_component);
    let stored = StoredLedger::parse(&store.load()?, &path)?;
    let mut engine = Engine::new(cfg.plan.clone());
    // Ledgers of components no longer configured stay in the file as they are.
    engine.import_state(stored.engine);
    // Inspection records: accepted ones the states lack, and pending ones
    // (applied at their dates when the backfill reaches them).
    crate::inspection::offer_accepted(&mut engine, &store.inspections(None)?);
    let accepted = crate::inspection::accept_pending(&mut engine, &store, &[], &mut vec![])?;
    // The samples the service left in the reorder window: the replay's
    // final flush integrates them, so their rows go in the same commit.
    let held_in_file = engine.held_seqs();
    let counters_before = engine.counters().clone();
    let before: Vec<_> = engine.components().iter().map(|s| (s.integrated_to_ms, Figures::of(s))).collect();

    let reader = open_input(input, None).with_context(|| format!("backfill: cannot open input {input}"))?;
    let opts =
        ReplayOptions { lp_interval_ms: service.store.series_interval_s.max(1) * 1000, ..ReplayOptions::default() };
    // A daily history point for each day the backfill crosses (the years
    // of history a new installation starts with), then the final states.
    let mut history = vec![];
    let outputs = crate::replay::Outputs { history: Some(&mut history), ..Default::default() };
    let outcome = crate::replay::replay_to(&mut engine, reader, outputs, &opts, |_| {})
        .with_context(|| format!("backfill: reading {input}"))?;

    let changed = engine.take_changed();
    // The replay integrated every held sample the service left in the
    // reorder window (and whatever the input held): the window on disk is
    // emptied in the same transaction.
    debug_assert!(engine.held_len() == 0);
    let plan = engine.plan();
    let components: Vec<(String, String)> = changed
        .iter()
        .map(|&ci| Ok((plan.components[ci].name.clone(), serde_json::to_string(&engine.components()[ci])?)))
        .collect::<serde_json::Result<_>>()?;
    let tags: Vec<(String, String)> = plan
        .tags
        .iter()
        .zip(engine.tags())
        .map(|(t, s)| Ok((t.name.clone(), serde_json::to_string(s)?)))
        .collect::<serde_json::Result<_>>()?;
    let meta = vec![("engine_counters".to_string(), serde_json::to_string(engine.counters())?)];
    let checkpoints = checkpoint_rows(&engine, &changed, &store);
    store
        .commit(&Commit {
            components: &components,
            tags: &tags,
            meta: &meta,
            checkpoints: &checkpoints,
            held_released: &held_in_file,
            inspections_accepted: &accepted,
            history: &{
                history.extend(crate::inspection::history_points(&engine, &changed));
                history
            },
            ..Default::default()
        })
        .with_context(|| format!("backfill of {}: nothing was written", path.display()))?;

    let components = changed
        .iter()
        .map(|&ci| {
            let s = &engine.components()[ci];
            ComponentChange {
                component: plan.components[ci].name.clone(),
                integrated_to_ms_before: before[ci].0,
                integrated_to_ms_after: s.integrated_to_ms,
                before: before[ci].1,
                after: Figures::of(s),
            }
        })
        .collect();
    Ok(BackfillOutcome {
        ledger: path,
        input: outcome,
        counters_before,
        counters_after: engine.counters().clone(),
        components,
        checkpoints_written: checkpoints.len(),
    })
}
