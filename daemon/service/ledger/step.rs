//! The ledger thread's batch protocol, pure: no I/O, no clock read inside
//! (every instant is an argument), no broker, no store.
//!
//! A [`Batch`] collects what one group commit must make durable before
//! anything leaves the process: the acknowledgement handles of the MQTT
//! messages taken (opaque ids of any type `A`; the shell uses
//! `rumqttc::Publish`), how many of them were samples, and the alarm events
//! raised. The shell asks [`Batch::due`] whether the batch is to be
//! committed now (the group-commit rule), writes the rows with the
//! sequence numbers [`Batch::plan`] gives, and then tells the batch how the
//! commit went:
//!
//! * [`Batch::committed`] hands back, once, "acknowledge these ids and
//!   publish these events" ([`AfterCommit`]); only now does anything reach
//!   the broker;
//! * [`Batch::failed`] hands back nothing: the ids and events stay in the
//!   batch for the next attempt, which numbers the events afresh from the
//!   same base (the durable count moves only with a successful commit), so
//!   a retried batch is never acknowledged, counted or published twice.
//!
//! A message redelivered by the broker after a crash is recognised by the
//! engine, not here: its tag cursor, committed in the same transaction as
//! the ledgers, makes the engine drop the sample as a duplicate (see the
//! tests below, which run the protocol together with the engine).
//!
//! The outbox quota gate is [`super::gate::IntakeGate`]; what a reload may
//! change is decided by [`crate::service::reload::plan`].

use crate::alarm::AlarmEvent;

/// When an open batch must be committed (the group-commit rule).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Due {
    /// Nothing is open: wait for the next message as long as you like.
    Idle,
    /// Commit now: the batch is `interval` old or holds the maximum number
    /// of samples.
    Now,
    /// Take more messages for at most this many milliseconds, then commit.
    /// With an interval of 0: take what is queued, commit when it runs dry.
    Within(u64),
}

/// The rows of one commit attempt that depend on the batch: its events
/// with their sequence numbers, and the count the store keeps for the next.
#[derive(Debug, Clone, PartialEq)]
pub struct CommitPlan {
    /// The batch's events, numbered from the durable count on.
    pub events: Vec<AlarmEvent>,
    /// What the store's `alarm_event_seq` becomes with this commit.
    pub next_seq: u64,
}

/// What to do once a commit succeeded, in this order: acknowledge, then
/// publish.
#[derive(Debug, PartialEq)]
pub struct AfterCommit<A> {
    /// Acknowledgement handles of the committed messages, in arrival order.
    pub ack: Vec<A>,
    /// Committed events with their sequence numbers, to publish.
    pub publish: Vec<AlarmEvent>,
    /// The durable sequence number the next event gets.
    pub next_seq: u64,
}

/// The open batch: what waits for the next commit.
#[derive(Debug)]
pub struct Batch<A> {
    acks: Vec<A>,
    samples: usize,
    events: Vec<AlarmEvent>,
    /// Monotonic instant (ms) at which the batch took its first message.
    opened_ms: Option<u64>,
}

impl<A> Default for Batch<A> {
    fn default() -> Self {
        Batch { acks: vec![], samples: 0, events: vec![], opened_ms: None }
    }
}

impl<A> Batch<A> {
    /// A message taken at the monotonic instant `now_ms`; `sample` when it
    /// carried a sample for a configured tag (counted towards the batch's
    /// size limit). Acknowledged only by [`Batch::committed`].
    pub fn offer(&mut self, ack: A, sample: bool, now_ms: u64) {
        self.opened_ms.get_or_insert(now_ms);
        self.acks.push(ack);
        self.samples += usize::from(sample);
    }

    /// Alarm events raised while the batch was open; published only after
    /// the commit that writes them.
    pub fn note_events(&mut self, events: impl IntoIterator<Item = AlarmEvent>) {
        self.events.extend(events);
    }

    /// The events waiting for the commit (not yet numbered).
    pub fn events(&self) -> &[AlarmEvent] {
        &self.events
    }

    /// Messages waiting for their acknowledgement.
    pub fn messages(&self) -> usize {
        self.acks.len()
    }

    /// Samples in the batch.
    pub fn samples(&self) -> usize {
        self.samples
    }

    /// Nothing to acknowledge and no event to write.
    pub fn is_empty(&self) -> bool {
        self.acks.is_empty() && self.events.is_empty()
    }

    /// Marks the batch as taking messages from `now_ms` on (an idle wait
    /// that ended with a message opens it; [`Batch::offer`] does too).
    pub fn open(&mut self, now_ms: u64) {
        self.opened_ms.get_or_insert(now_ms);
    }

    /// The group-commit rule at the monotonic instant `now_ms`: a batch
    /// is committed once it is `interval_ms` old or holds `max_samples`
    /// samples; with an interval of 0 whenever the queue runs dry
    /// (`Within(0)`: take only what is already queued).
    pub fn due(&self, now_ms: u64, interval_ms: u64, max_samples: usize) -> Due {
        let Some(opened) = self.opened_ms else { return Due::Idle };
        if self.samples >= max_samples {
            return Due::Now;
        }
        if interval_ms == 0 {
            return Due::Within(0);
        }
        let age = now_ms.saturating_sub(opened);
        if age >= interval_ms {
            Due::Now
        } else {
            Due::Within(interval_ms - age)
        }
    }

    /// The rows of a commit attempt: the events numbered from `next_seq`
    /// (the durable count). Numbering again after a failed attempt gives
    /// the same numbers, so a consumer sees no gap and no repeat.
    pub fn plan(&mut self, next_seq: u64) -> CommitPlan {
        for (i, e) in self.events.iter_mut().enumerate() {
            e.seq = Some(next_seq + i as u64);
        }
        CommitPlan { events: self.events.clone(), next_seq: next_seq + self.events.len() as u64 }
    }

    /// The commit of `plan` succeeded: hand back, once, what to
    /// acknowledge and publish; the batch is empty and closed afterwards.
    pub fn committed(&mut self, plan: CommitPlan) -> AfterCommit<A> {
        self.samples = 0;
        self.opened_ms = None;
        self.events.clear();
        AfterCommit { ack: std::mem::take(&mut self.acks), publish: plan.events, next_seq: plan.next_seq }
    }

    /// The commit of `plan` failed: nothing is acknowledged or published;
    /// the batch keeps its messages and events for the next attempt.
    pub fn failed(&mut self, plan: CommitPlan) {
        drop(plan);
    }

    /// Closes the batch's age without committing (the shell committed
    /// rows that held no message, or found nothing to write).
    pub fn reset_age(&mut self) {
        if self.acks.is_empty() {
            self.opened_ms = None;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::alarm::{AlarmBook, AlarmIndex};

    fn events(n: usize) -> Vec<AlarmEvent> {
        // Real events from the alarm book: a service-health condition that
        // comes and goes.
        let mut book = AlarmBook::default();
        let mut out = vec![];
        for i in 0..n {
            out.extend(book.evaluate_condition("lifeledger", "", AlarmIndex::ServiceHealth, i % 2 == 0, "t", i as i64));
        }
        assert_eq!(out.len(), n, "one event per change");
        out
    }

    /// Ack only after commit; publish only after commit, in that order of
    /// the plan; the batch hands them back exactly once.
    #[test]
    fn acknowledges_and_publishes_only_after_the_commit() {
        let mut b = Batch::<u32>::default();
        b.offer(1, true, 0);
        b.offer(2, false, 5);
        b.note_events(events(2));
        assert_eq!(b.messages(), 2);
        assert_eq!(b.samples(), 1);
        let plan = b.plan(7);
        assert_eq!(plan.events.iter().map(|e| e.seq).collect::<Vec<_>>(), [Some(7), Some(8)]);
        assert_eq!(plan.next_seq, 9);
        // Nothing has left yet: the plan is only rows.
        assert_eq!(b.messages(), 2, "no acknowledgement before the commit");
        let after = b.committed(plan);
        assert_eq!(after.ack, [1, 2]);
        assert_eq!(after.publish.len(), 2);
        assert_eq!(after.next_seq, 9);
        assert!(b.is_empty());
        // A second commit of an empty batch acknowledges nothing again.
        let again = b.plan(9);
        let after = b.committed(again);
        assert!(after.ack.is_empty() && after.publish.is_empty());
        assert_eq!(after.next_seq, 9);
    }

    /// A failed commit acknowledges and publishes nothing; the retry
    /// numbers the events from the same durable base (no gap, no repeat)
    /// and hands every id back once.
    #[test]
    fn a_failed_commit_acknowledges_nothing_and_offers_nothing_twice() {
        let mut b = Batch::<&str>::default();
        b.offer("m1", true, 0);
        b.note_events(events(1));
        for _ in 0..3 {
            let plan = b.plan(41);
            assert_eq!(plan.events[0].seq, Some(41));
            b.failed(plan);
            assert_eq!(b.messages(), 1, "kept for the next attempt");
        }
        // More arrive while commits fail.
        b.offer("m2", true, 10);
        b.note_events(events(1));
        let plan = b.plan(41);
        assert_eq!(plan.events.iter().map(|e| e.seq).collect::<Vec<_>>(), [Some(41), Some(42)]);
        let after = b.committed(plan);
        assert_eq!(after.ack, ["m1", "m2"], "each id once, in arrival order");
        assert_eq!(after.publish.len(), 2, "each event once");
        assert_eq!(after.next_seq, 43);
    }

    /// The group-commit rule with time as an input.
    #[test]
    fn group_commit_by_age_size_or_an_empty_queue() {
        let mut b = Batch::<u8>::default();
        assert_eq!(b.due(1_000, 150, 100), Due::Idle);
        b.offer(0, true, 1_000);
        assert_eq!(b.due(1_000, 150, 100), Due::Within(150));
        assert_eq!(b.due(1_100, 150, 100), Due::Within(50));
        assert_eq!(b.due(1_150, 150, 100), Due::Now);
        assert_eq!(b.due(1_000, 0, 100), Due::Within(0), "interval 0: commit when the queue runs dry");
        for i in 1..100 {
            b.offer(i, true, 1_010);
        }
        assert_eq!(b.due(1_010, 150, 100), Due::Now, "full");
        let plan = b.plan(1);
        b.committed(plan);
        assert_eq!(b.due(5_000, 150, 100), Due::Idle, "a committed batch is closed");
        // A batch that opens later is judged from its own first message.
        b.offer(7, false, 6_000);
        assert_eq!(b.due(6_100, 150, 100), Due::Within(50));
    }

    /// Batch and engine together, with the store played by the engine's
    /// exported state (what a commit writes): a crash after the commit
    /// but before the acknowledgement makes the broker redeliver, and the
    /// restored engine counts the redelivered sample as a duplicate, not
    /// twice; a crash after a failed commit re-offers the sample to an
    /// engine that never saw it, which takes it once.
    #[test]
    fn a_redelivered_message_after_a_crash_is_recognised() {
        use crate::engine::{Engine, Sample};
        let cfg = crate::settings::load_plan(std::path::Path::new("config/demo/plant.toml")).unwrap();
        let tag = 0u32;
        let start = 1_790_812_800_000i64; // 2026-10-01T00:00:00Z
        let wall = start + 3_600_000;
        let value = cfg.plan.tags[0].valid_range.map_or(1.0, |[lo, hi]| (lo + hi) / 2.0);
        let sample = |i: i64| Sample { tag, time_ms: start + i * 60_000, value, quality: Default::default() };
        let mut durable = Engine::new(cfg.plan.clone()).export_state();

        // Message 1: committed, acknowledged.
        let mut engine = Engine::new(cfg.plan.clone());
        engine.import_state(durable.clone());
        let mut b = Batch::<u32>::default();
        engine.offer(&sample(0), wall).unwrap();
        b.offer(1, true, 0);
        let plan = b.plan(1);
        durable = engine.export_state();
        assert_eq!(b.committed(plan).ack, [1]);

        // Message 2: the commit fails, then the process dies: not acked.
        engine.offer(&sample(1), wall).unwrap();
        b.offer(2, true, 1);
        let plan = b.plan(1);
        b.failed(plan);
        drop((engine, b));
        // Redelivered to a restarted service: taken once.
        let mut engine = Engine::new(cfg.plan.clone());
        engine.import_state(durable.clone());
        let mut b = Batch::<u32>::default();
        engine.offer(&sample(1), wall).unwrap();
        b.offer(2, true, 0);
        let plan = b.plan(1);
        durable = engine.export_state();
        // The process dies after the commit, before the acknowledgement.
        drop((engine, plan, b));
        let mut engine = Engine::new(cfg.plan.clone());
        engine.import_state(durable.clone());
        let accepted = engine.counters().accepted;
        assert_eq!(accepted, 2, "two distinct samples, each once");
        // The broker redelivers message 2: recognised as a duplicate.
        let r = engine.offer(&sample(1), wall);
        assert!(r.is_err(), "a redelivered sample is dropped: {r:?}");
        assert_eq!(engine.counters().accepted, accepted, "nothing counted twice");
        // ... and it is acknowledged after the next commit all the same.
        let mut b = Batch::<u32>::default();
        b.offer(2, true, 0);
        let plan = b.plan(1);
        assert_eq!(b.committed(plan).ack, [2]);
    }
}
