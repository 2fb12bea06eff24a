//! The ledger thread's side of inspection records: picking up records
//! appended to the ledger file (by the command line or the HTTP API),
//! accepting them into the engine, and the daily history points of each
//! commit. See `crate::inspection` for the rules.

use super::Ledger;

impl Ledger {
    /// Accepts records appended since the last look; their acceptance is
    /// written with the next commit, in the same transaction as the
    /// components' new states.
    pub(super) fn take_inspections(&mut self) {
        let mut skipped = vec![];
        match crate::inspection::accept_pending(
            &mut self.engine,
            &self.store,
            &self.pending.inspections_accepted,
            &mut skipped,
        ) {
            Ok(new) if !new.is_empty() => {
                for (id, _) in &new {
                    tracing::info!("inspection record {id} accepted into the ledger");
                }
                self.pending.inspections_accepted.extend(new);
                self.force_commit = true;
                self.commit();
            }
            Ok(_) => {}
            Err(e) => self.log.error("inspection_read", || format!("reading inspection records failed: {e}")),
        }
        for (id, why) in skipped {
            self.log.warn("inspection_skipped", || format!("inspection record {id} not applied: {why}"));
        }
    }

    /// Offers the engine the accepted records its states lack (after a
    /// rollback), at start-up.
    pub(super) fn offer_stored_inspections(&mut self) -> anyhow::Result<()> {
        let rows = self.store.inspections(None)?;
        crate::inspection::offer_accepted(&mut self.engine, &rows);
        Ok(())
    }
}
