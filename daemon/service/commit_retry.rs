//! When the ledger thread tries a failed commit again, and when it gives
//! up.
//!
//! A commit can fail for a moment (an operator's `sqlite3` holding a write
//! lock past the busy timeout) or for good (a full disk, a ledger file the
//! service user may not write). Retrying at once would spin: millions of
//! attempts and log lines a minute, while nothing is acknowledged. So a
//! failed commit is retried after a wait that doubles from
//! [`FIRST_RETRY`] up to [`LONGEST_RETRY`], and the ledger takes no new
//! messages while it waits (the broker keeps them). Once commits have failed
//! without a break for the configured limit, the service gives up and the
//! process ends with an error, so that the service manager restarts it and
//! someone is told; until then readiness says not ready.
//!
//! [`CommitRetry`] is plain state over instants the caller passes in, so it
//! is tested without clocks.

use std::time::{Duration, Instant};

/// Wait before the first retry of a failed commit.
pub const FIRST_RETRY: Duration = Duration::from_millis(250);
/// Longest wait between two attempts.
pub const LONGEST_RETRY: Duration = Duration::from_secs(10);

/// What to do after a failed commit.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AfterFailure {
    /// Try again after this wait.
    RetryIn(Duration),
    /// Commits have failed without a break for the whole limit: stop.
    GiveUp {
        /// Since the first failure of the run.
        failing_for: Duration,
    },
}

/// Retry state of the ledger's commits. See the [module docs](self).
#[derive(Debug, Clone)]
pub struct CommitRetry {
    give_up_after: Duration,
    /// Since when commits fail (the first failure of the current run of them).
    failing_since: Option<Instant>,
    /// No attempt before this instant.
    next_try: Option<Instant>,
    /// The wait after the next failure.
    delay: Duration,
}

impl CommitRetry {
    /// No failure yet; gives up once commits have failed for `give_up_after`.
    pub fn new(give_up_after: Duration) -> CommitRetry {
        CommitRetry { give_up_after, failing_since: None, next_try: None, delay: FIRST_RETRY }
    }

    /// Changes the limit (a reload), keeping the current run of failures.
    pub fn set_give_up_after(&mut self, give_up_after: Duration) {
        self.give_up_after = give_up_after;
    }

    /// How long to wait before the next attempt; `None` when one may be
    /// made now.
    pub fn wait(&self, now: Instant) -> Option<Duration> {
        self.next_try.and_then(|t| t.checked_duration_since(now)).filter(|d| !d.is_zero())
    }

    /// Allows the next attempt at once (the last one before shutdown).
    pub fn try_now(&mut self) {
        self.next_try = None;
    }

    /// Whether commits are failing now.
    pub fn failing(&self) -> bool {
        self.failing_since.is_some()
    }

    /// A commit succeeded: back to normal. Returns how long commits had
    /// been failing, if they had.
    pub fn succeeded(&mut self, now: Instant) -> Option<Duration> {
        self.next_try = None;
        self.delay = FIRST_RETRY;
        self.failing_since.take().map(|since| now.saturating_duration_since(since))
    }

    /// A commit failed at `now`: wait longer each time, and never past the
    /// instant the limit runs out, so that the last attempt is made then.
    pub fn failed(&mut self, now: Instant) -> AfterFailure {
        let since = *self.failing_since.get_or_insert(now);
        let failing_for = now.saturating_duration_since(since);
        if failing_for >= self.give_up_after {
            return AfterFailure::GiveUp { failing_for };
        }
        let wait = self.delay.min(self.give_up_after - failing_for);
        self.delay = (self.delay * 2).min(LONGEST_RETRY);
        self.next_try = Some(now + wait);
        AfterFailure::RetryIn(wait)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const LIMIT: Duration = Duration::from_secs(300);

    /// The waits after `n` failures in a row, each attempt made as soon as
    /// allowed.
    fn waits(n: usize) -> Vec<Duration> {
        let mut r = CommitRetry::new(LIMIT);
        let mut now = Instant::now();
        (0..n)
            .map(|_| match r.failed(now) {
                AfterFailure::RetryIn(d) => {
                    now += d;
                    d
                }
                other => panic!("gave up early: {other:?}"),
            })
            .collect()
    }

    #[test]
    fn waits_double_from_the_first_retry_up_to_the_longest() {
        let ms: Vec<u64> = waits(9).iter().map(|d| d.as_millis() as u64).collect();
        assert_eq!(ms, [250, 500, 1000, 2000, 4000, 8000, 10_000, 10_000, 10_000]);
    }

    #[test]
    fn no_attempt_is_allowed_before_the_wait_is_over() {
        let mut r = CommitRetry::new(LIMIT);
        let t0 = Instant::now();
        assert_eq!(r.wait(t0), None);
        assert_eq!(r.failed(t0), AfterFailure::RetryIn(FIRST_RETRY));
        assert!(r.failing());
        assert_eq!(r.wait(t0), Some(FIRST_RETRY));
        assert_eq!(r.wait(t0 + Duration::from_millis(100)), Some(Duration::from_millis(150)));
        assert_eq!(r.wait(t0 + FIRST_RETRY), None);
        r.failed(t0 + FIRST_RETRY);
        r.try_now();
        assert_eq!(r.wait(t0 + FIRST_RETRY), None, "shutdown may try at once");
    }

    #[test]
    fn a_success_ends_the_failure_and_restarts_the_waits() {
        let mut r = CommitRetry::new(LIMIT);
        let t0 = Instant::now();
        r.failed(t0);
        r.failed(t0 + Duration::from_secs(1));
        assert_eq!(r.succeeded(t0 + Duration::from_secs(3)), Some(Duration::from_secs(3)));
        assert!(!r.failing());
        assert_eq!(r.wait(t0 + Duration::from_secs(3)), None);
        assert_eq!(r.failed(t0 + Duration::from_secs(4)), AfterFailure::RetryIn(FIRST_RETRY));
        assert_eq!(r.succeeded(t0 + Duration::from_secs(5)), Some(Duration::from_secs(1)));
        assert_eq!(r.succeeded(t0 + Duration::from_secs(6)), None, "nothing was failing");
    }

    #[test]
    fn failing_without_a_break_for_the_limit_gives_up_with_a_last_attempt_at_the_limit() {
        let mut r = CommitRetry::new(Duration::from_secs(15));
        let t0 = Instant::now();
        let mut now = t0;
        let mut attempts = 0;
        let failing_for = loop {
            attempts += 1;
            match r.failed(now) {
                AfterFailure::RetryIn(d) => now += d,
                AfterFailure::GiveUp { failing_for } => break failing_for,
            }
        };
        assert_eq!(failing_for, Duration::from_secs(15), "the last attempt is made when the limit runs out");
        // 0, 0.25, 0.75, 1.75, 3.75, 7.75, 15: seven attempts, not millions.
        assert_eq!(attempts, 7);
    }

    #[test]
    fn a_success_in_between_restarts_the_limit() {
        let mut r = CommitRetry::new(Duration::from_secs(15));
        let t0 = Instant::now();
        r.failed(t0);
        r.succeeded(t0 + Duration::from_secs(14));
        let later = t0 + Duration::from_secs(20);
        assert!(matches!(r.failed(later), AfterFailure::RetryIn(_)), "a new run of failures starts its own clock");
    }
}
