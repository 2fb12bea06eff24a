//! Checkpoint rows from the engine, and their typed form.
//!
//! [`checkpoint_rows`] is the one call the ledger thread (and backfill)
//! makes per commit: for every changed component whose checkpoint is due
//! (the store says so from its in-memory index: the component has none, or
//! its `integrated_to_ms` has entered a later UTC day than its newest), it
//! serialises the component's state and the states of the tags it reads,
//! as they are at this commit. The store writes only rows that are due, in
//! the commit's transaction; a batch that fails leaves them due.

use std::collections::BTreeMap;
use std::path::Path;

use crate::engine::{ComponentState, Engine, TagState};
use crate::store::{CheckpointRow, Store, StoredCheckpoint};

/// The checkpoint rows for the next commit: one for each component in
/// `changed` (plan indices, as [`Engine::take_changed`] returns them)
/// whose checkpoint is due in `store`. Components not yet integrated
/// (no sample seen) take none.
pub fn checkpoint_rows(engine: &Engine, changed: &[usize], store: &Store) -> Vec<CheckpointRow> {
    let plan = engine.plan();
    let mut rows = Vec::new();
    for &ci in changed {
        let (Some(cp), Some(st)) = (plan.components.get(ci), engine.components().get(ci)) else { continue };
        let Some(at_ms) = st.integrated_to_ms else { continue };
        if !store.checkpoint_due(&cp.name, at_ms) {
            continue;
        }
        let tags: BTreeMap<&str, &TagState> = engine
            .inputs(ci)
            .iter()
            .map(|&ti| (plan.tags[ti as usize].name.as_str(), &engine.tags()[ti as usize]))
            .collect();
        // Both serialise infallibly (string keys, finite or string-encoded
        // floats); an empty string would be refused when read back.
        rows.push(CheckpointRow {
            component: cp.name.clone(),
            at_ms,
            state: serde_json::to_string(st).unwrap_or_default(),
            tags: serde_json::to_string(&tags).unwrap_or_default(),
        });
    }
    rows
}

/// A checkpoint read back and typed.
#[derive(Debug, Clone, PartialEq)]
pub struct Checkpoint {
    /// Event time the component was integrated to, ms since the epoch.
    pub at_ms: i64,
    /// Wall-clock time the checkpoint was written, ms since the epoch.
    pub written_ms: i64,
    /// The component's whole ledger.
    pub state: ComponentState,
    /// The states of the tags it read, by name.
    pub tags: BTreeMap<String, TagState>,
}

impl Checkpoint {
    /// Types a stored checkpoint; an error names the ledger, the component
    /// and the checkpoint's time.
    pub fn parse(s: &StoredCheckpoint, ledger: &Path) -> anyhow::Result<Checkpoint> {
        let r = &s.row;
        let place = || {
            format!(
                "ledger {}: checkpoint of component {} at {}",
                ledger.display(),
                r.component,
                crate::event_time::rfc3339_ms(r.at_ms)
            )
        };
        let state =
            serde_json::from_str(&r.state).map_err(|e| anyhow::anyhow!("{}: state unreadable: {e}", place()))?;
        let tags =
            serde_json::from_str(&r.tags).map_err(|e| anyhow::anyhow!("{}: tag states unreadable: {e}", place()))?;
        Ok(Checkpoint { at_ms: r.at_ms, written_ms: s.written_ms, state, tags })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::engine::{Quality, Sample};
    use crate::store::Commit;

    #[test]
    fn a_due_component_is_copied_with_the_tags_it_reads() {
        let dir = tempfile::tempdir().unwrap();
        let mut store = Store::open(&dir.path().join("l.db")).unwrap();
        let mut e = crate::engine::tests::engine();
        let t0 = 1_790_812_800_000; // 2026-10-01T00:00:00Z
        for (tag, v) in [("TT", 540.0), ("PT", 170.0), ("TT", 541.0), ("PT", 171.0)] {
            let id = e.tag_id(tag).unwrap();
            let n = e.tags()[id as usize].cursor_ms.map_or(0, |_| 1);
            e.ingest(&Sample { tag: id, time_ms: t0 + n * 60_000, value: v, quality: Quality::Good }).unwrap();
        }
        let changed = e.take_changed();
        let tube = e.plan().components.iter().position(|c| c.name == "TUBE").unwrap();
        assert_eq!(changed, [tube], "only the tube has inputs with samples");
        let rows = checkpoint_rows(&e, &changed, &store);
        assert_eq!(rows.len(), 1);
        let cp = Checkpoint::parse(&StoredCheckpoint { row: rows[0].clone(), written_ms: 0 }, dir.path()).unwrap();
        assert_eq!(cp.at_ms, t0 + 60_000);
        assert_eq!(&cp.state, &e.components()[tube]);
        assert_eq!(cp.tags.keys().collect::<Vec<_>>(), ["PT", "TT"]);
        assert_eq!(&cp.tags["TT"], &e.tags()[e.tag_id("TT").unwrap() as usize]);

        // Once written, the same day is not due again.
        store.commit(&Commit { checkpoints: &rows, ..Default::default() }).unwrap();
        assert!(checkpoint_rows(&e, &changed, &store).is_empty());
    }
}
