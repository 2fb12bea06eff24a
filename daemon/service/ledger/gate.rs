//! Intake gating by the outbox's disk quota, pure: the ledger thread stops
//! taking messages (the broker keeps the backlog, nothing is acknowledged)
//! while the outbox is over `[database] outbox_quota_bytes`, and takes
//! them again once the outbox is below 90 % of it. The band between keeps
//! the gate from flapping on every batch the database accepts.

/// Below this share of the quota, a held intake resumes.
pub const RESUME_BELOW: f64 = 0.9;

/// A change of the gate, to log and to raise or clear the service-health
/// alarm with.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum GateChange {
    /// The outbox went over its quota: stop taking messages.
    Hold,
    /// The outbox is below [`RESUME_BELOW`] of its quota again.
    Resume,
}

/// Whether intake is held for the outbox quota.
#[derive(Debug, Default, Clone)]
pub struct IntakeGate {
    holding: bool,
}

impl IntakeGate {
    /// Whether intake is held now.
    pub fn holding(&self) -> bool {
        self.holding
    }

    /// The outbox holds `backlog_bytes` against a quota of `quota_bytes`
    /// (`u64::MAX`: no database, no quota): the change this makes, if any.
    pub fn observe(&mut self, backlog_bytes: u64, quota_bytes: u64) -> Option<GateChange> {
        if quota_bytes == u64::MAX {
            return None;
        }
        let over = backlog_bytes > quota_bytes;
        let under = (backlog_bytes as f64) < RESUME_BELOW * quota_bytes as f64;
        if over && !self.holding {
            self.holding = true;
            Some(GateChange::Hold)
        } else if self.holding && under {
            self.holding = false;
            Some(GateChange::Resume)
        } else {
            None
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Over the quota holds once; between 90 % and the quota it stays as
    /// it was (hysteresis); below 90 % it resumes once.
    #[test]
    fn holds_over_the_quota_and_resumes_below_ninety_percent() {
        let mut g = IntakeGate::default();
        assert_eq!(g.observe(900, 1000), None);
        assert_eq!(g.observe(1000, 1000), None, "at the quota is not over it");
        assert_eq!(g.observe(1001, 1000), Some(GateChange::Hold));
        assert!(g.holding());
        assert_eq!(g.observe(1500, 1000), None, "held once, not again");
        assert_eq!(g.observe(950, 1000), None, "below the quota but above 90 %: still held");
        assert_eq!(g.observe(900, 1000), None, "at 90 %: still held");
        assert!(g.holding());
        assert_eq!(g.observe(899, 1000), Some(GateChange::Resume));
        assert!(!g.holding());
        assert_eq!(g.observe(950, 1000), None, "between the marks after resuming: taking");
    }

    /// Without a database there is no quota and intake is never held.
    #[test]
    fn no_quota_never_holds() {
        let mut g = IntakeGate::default();
        assert_eq!(g.observe(u64::MAX - 1, u64::MAX), None);
        assert!(!g.holding());
    }
}
