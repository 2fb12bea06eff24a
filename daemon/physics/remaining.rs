//! Remaining-life projection: hours until an accumulated index reaches a
//! threshold at its recent rate, and the recent rate itself.
//!
//! The recent rate is an exponentially weighted average of the index rate
//! over operating time with time constant τ: after an interval Δt with mean
//! rate r, `rate ← rate + (1 − e^(−Δt/τ))·(r − rate)`. Pure and
//! deterministic, so live and replayed ledgers agree exactly.

/// Hours until `current` reaches `threshold` at `rate_per_h`. `None` when
/// the rate is zero or negative (no projected end); zero when already there.
#[inline]
pub fn hours_to_threshold(current: f64, threshold: f64, rate_per_h: f64) -> Option<f64> {
    if current >= threshold {
        Some(0.0)
    } else if rate_per_h > 0.0 && rate_per_h.is_finite() {
        Some((threshold - current) / rate_per_h)
    } else {
        None
    }
}

/// Update an exponentially weighted recent rate with an interval of
/// `dt_h` hours and mean rate `interval_rate`; `tau_h` is the time constant.
#[inline]
pub fn update_recent_rate(recent: f64, interval_rate: f64, dt_h: f64, tau_h: f64) -> f64 {
    let alpha = -(-dt_h / tau_h).exp_m1();
    recent + alpha * (interval_rate - recent)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn projection() {
        assert!((hours_to_threshold(0.2, 0.5, 1e-5).unwrap() - 30_000.0).abs() < 1e-6);
        assert_eq!(hours_to_threshold(0.6, 0.5, 1e-5), Some(0.0));
        assert_eq!(hours_to_threshold(0.2, 0.5, 0.0), None);
    }

    #[test]
    fn recent_rate_converges_and_splits_exactly() {
        let mut r = 0.0;
        for _ in 0..10_000 {
            r = update_recent_rate(r, 2.0, 1.0, 100.0);
        }
        assert!((r - 2.0).abs() < 1e-12);
        // Two half steps equal one whole step for a constant rate.
        let a = update_recent_rate(update_recent_rate(1.0, 3.0, 0.5, 10.0), 3.0, 0.5, 10.0);
        let b = update_recent_rate(1.0, 3.0, 1.0, 10.0);
        assert!((a - b).abs() < 1e-12);
    }
}
