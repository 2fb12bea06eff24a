//! Exponential back-off with full jitter, for retrying database writes.
//!
//! After the n-th consecutive failure the ceiling is
//! `min(max, initial · 2ⁿ)` and the delay is drawn uniformly from
//! `[0, ceiling]` ("full jitter", as described in the AWS Architecture Blog
//! post *Exponential Backoff And Jitter*, 2015). Jitter keeps a fleet of
//! instances from hammering a database that just came back in lock-step.
//!
//! The type is pure: it does not sleep or read clocks; the caller sleeps
//! for the returned duration. The random source is seeded, so tests can
//! fix it.

use std::time::Duration;

use rand::rngs::StdRng;
use rand::{Rng, SeedableRng};

use super::DatabaseSettings;

/// Retry delays that grow exponentially up to a cap, with full jitter.
#[derive(Debug, Clone)]
pub struct Backoff {
    initial_s: f64,
    max_s: f64,
    failures: u32,
    rng: StdRng,
}

impl Backoff {
    /// Back-off from `initial` doubling to `max`, seeded from the OS.
    pub fn new(initial: Duration, max: Duration) -> Backoff {
        Backoff::with_rng(initial, max, StdRng::from_entropy())
    }

    /// Same as [`Backoff::new`] with a fixed seed: reproducible delays.
    pub fn with_seed(initial: Duration, max: Duration, seed: u64) -> Backoff {
        Backoff::with_rng(initial, max, StdRng::seed_from_u64(seed))
    }

    /// Back-off with the settings' `backoff_initial_s` and `backoff_max_s`.
    /// Assumes the settings were validated (positive, finite).
    pub fn from_settings(s: &DatabaseSettings) -> Backoff {
        Backoff::new(Duration::from_secs_f64(s.backoff_initial_s), Duration::from_secs_f64(s.backoff_max_s))
    }

    fn with_rng(initial: Duration, max: Duration, rng: StdRng) -> Backoff {
        let max_s = max.as_secs_f64();
        Backoff { initial_s: initial.as_secs_f64().min(max_s), max_s, failures: 0, rng }
    }

    /// The ceiling the next delay is drawn under: `min(max, initial · 2ⁿ)`
    /// after n failures since the last [`Backoff::reset`].
    pub fn ceiling(&self) -> Duration {
        // 2^failures overflows f64 to infinity long after it passes max;
        // `min` then gives max, so no special case is needed.
        let grown = self.initial_s * 2f64.powi(self.failures.min(1024) as i32);
        Duration::from_secs_f64(grown.min(self.max_s))
    }

    /// Records one more failure and returns how long to wait before the
    /// next attempt: uniform in `[0, ceiling]`.
    #[must_use = "sleep for the returned delay before retrying"]
    pub fn next_delay(&mut self) -> Duration {
        let cap = self.ceiling().as_secs_f64();
        self.failures = self.failures.saturating_add(1);
        Duration::from_secs_f64(self.rng.gen_range(0.0..=cap))
    }

    /// Forgets the failures after a success: the next ceiling is `initial`.
    pub fn reset(&mut self) {
        self.failures = 0;
    }

    /// Consecutive failures since the last reset.
    pub fn failures(&self) -> u32 {
        self.failures
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn ms(v: u64) -> Duration {
        Duration::from_millis(v)
    }

    #[test]
    fn ceiling_doubles_up_to_the_cap() {
        let mut b = Backoff::with_seed(ms(500), ms(60_000), 1);
        let mut ceilings = Vec::new();
        for _ in 0..12 {
            ceilings.push(b.ceiling().as_millis());
            let _ = b.next_delay();
        }
        assert_eq!(ceilings, [500, 1000, 2000, 4000, 8000, 16000, 32000, 60000, 60000, 60000, 60000, 60000]);
    }

    #[test]
    fn delays_stay_within_zero_and_ceiling_and_are_spread() {
        let mut b = Backoff::with_seed(ms(100), ms(1_000), 7);
        let mut at_cap = Vec::new();
        for _ in 0..10_000 {
            let cap = b.ceiling();
            let d = b.next_delay();
            assert!(d <= cap, "{d:?} above ceiling {cap:?}");
            if cap == ms(1_000) {
                at_cap.push(d.as_secs_f64());
            }
        }
        // Full jitter: uniform on [0, 1 s], so mean near 0.5 s and both
        // ends of the range visited.
        let mean = at_cap.iter().sum::<f64>() / at_cap.len() as f64;
        assert!((mean - 0.5).abs() < 0.02, "mean {mean}");
        assert!(at_cap.iter().any(|&d| d < 0.05) && at_cap.iter().any(|&d| d > 0.95));
    }

    #[test]
    fn never_exceeds_the_cap_even_after_many_failures() {
        let mut b = Backoff::with_seed(ms(500), ms(60_000), 3);
        for _ in 0..5_000 {
            assert!(b.next_delay() <= ms(60_000));
        }
        assert_eq!(b.ceiling(), ms(60_000));
    }

    #[test]
    fn reset_starts_over_and_seed_reproduces() {
        let mut a = Backoff::with_seed(ms(500), ms(60_000), 42);
        let mut b = Backoff::with_seed(ms(500), ms(60_000), 42);
        let da: Vec<_> = (0..5).map(|_| a.next_delay()).collect();
        let db: Vec<_> = (0..5).map(|_| b.next_delay()).collect();
        assert_eq!(da, db);
        assert_eq!(a.failures(), 5);
        a.reset();
        assert_eq!(a.ceiling(), ms(500));
        assert!(a.next_delay() <= ms(500));
    }

    #[test]
    fn initial_above_max_is_clamped() {
        let b = Backoff::with_seed(ms(5_000), ms(1_000), 0);
        assert_eq!(b.ceiling(), ms(1_000));
    }
}
