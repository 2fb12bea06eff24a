//! Stored-ledger parsing: the typed contents of a loaded ledger file, what
//! the service starts from and what `lifeledger ledger`, backfill, rollback
//! and the assessment report read. No I/O here: the store loads the rows,
//! this module types them.

use crate::alarm::AlarmRecord;
use crate::engine::{ComponentState, EngineState, TagState};

/// What a loaded ledger holds, typed: what the service starts from and
/// what `lifeledger ledger` shows.
pub struct StoredLedger {
    /// Tag cursors, component ledgers and engine counters.
    pub engine: EngineState,
    /// The decoder's rejection counts by reason.
    pub decode_rejected: std::collections::BTreeMap<String, u64>,
    /// Alarm records that parse.
    pub alarms: Vec<AlarmRecord>,
    /// Alarm records that do not parse: (key, why). They start afresh.
    pub unreadable_alarms: Vec<(String, String)>,
    /// Sequence number the next alarm event gets.
    pub next_event_seq: u64,
}

impl StoredLedger {
    /// Type a loaded ledger. A tag or component state that does not parse is
    /// an error naming the ledger and the entry: the service must not start
    /// over a ledger it cannot read. An unreadable alarm record is only
    /// listed: the alarm starts afresh.
    pub fn parse(loaded: &crate::store::Loaded, path: &std::path::Path) -> anyhow::Result<StoredLedger> {
        let mut tags = vec![];
        for (name, json) in &loaded.tags {
            let t: TagState = serde_json::from_str(json)
                .map_err(|e| anyhow::anyhow!("ledger {}: tag {name}: {e}", path.display()))?;
            tags.push((name.clone(), t));
        }
        let mut components = vec![];
        for (name, json) in &loaded.components {
            let c: ComponentState = serde_json::from_str(json)
                .map_err(|e| anyhow::anyhow!("ledger {}: component {name}: {e}", path.display()))?;
            components.push((name.clone(), c));
        }
        let mut counters = crate::engine::Counters::default();
        let mut decode_rejected = Default::default();
        let mut next_event_seq = 1;
        for (k, json) in &loaded.meta {
            match k.as_str() {
                "alarm_event_seq" => next_event_seq = serde_json::from_str(json).unwrap_or(1),
                "engine_counters" => counters = serde_json::from_str(json).unwrap_or_default(),
                "decode_rejected" => decode_rejected = serde_json::from_str(json).unwrap_or_default(),
                _ => {}
            }
        }
        let (mut alarms, mut unreadable_alarms) = (vec![], vec![]);
        for (key, json) in &loaded.alarms {
            match serde_json::from_str::<AlarmRecord>(json) {
                Ok(r) => alarms.push(r),
                Err(e) => unreadable_alarms.push((key.clone(), e.to_string())),
            }
        }
        let held = loaded
            .held
            .iter()
            .map(|h| {
                (
                    h.tag.clone(),
                    crate::engine::HeldSample {
                        seq: h.seq,
                        time_ms: h.time_ms,
                        value: h.value,
                        arrival_ms: h.arrival_ms,
                    },
                )
            })
            .collect();
        Ok(StoredLedger {
            engine: EngineState { tags, components, counters, held },
            decode_rejected,
            alarms,
            unreadable_alarms,
            next_event_seq,
        })
    }
}
