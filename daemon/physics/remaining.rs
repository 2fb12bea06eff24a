//! Remaining-life projection: hours until an accumulated index reaches a
//! threshold at a rate, the recent rate itself, and the rule that keeps a
//! projection conservative while the recent rate settles.
//!
//! The recent rate is a *normalised* exponentially weighted mean of the
//! index rate over integrated time with time constant τ. After an interval
//! Δt with mean rate r, with α = 1 − e^(−Δt/τ):
//!
//! ```text
//! W ← W + α·(1 − W)            (W = 1 − e^(−H/τ) after H hours; 0 at start)
//! rate ← rate + (α/W)·(r − rate)
//! ```
//!
//! This is Σ wᵢ·rᵢ / Σ wᵢ with weights wᵢ that fall off as e^(−age/τ): the
//! plain update `rate ← rate + α·(r − rate)` started at zero carries the
//! factor W (24 % of the true rate after 200 h at τ = 720 h), the
//! normalised one is exact for a steady history from the first interval
//! and tends to the plain one once W → 1 (common practice for bias-corrected
//! exponential averages). Pure and deterministic, so live and replayed
//! ledgers agree exactly.
//!
//! While the window holds fewer operating hours than a minimum, the recent
//! rate rests on too little of the plant's duty to project from: the
//! projection then takes the larger of the recent rate and the rate at
//! design conditions ([`projection_rate`]) and says it is settling.

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

/// Weight α = 1 − e^(−Δt/τ) of an interval of `dt_h` hours for a time
/// constant of `tau_h` hours.
#[inline]
pub fn interval_weight(dt_h: f64, tau_h: f64) -> f64 {
    -(-dt_h / tau_h).exp_m1()
}

/// The accumulated weight after an interval of weight `alpha`:
/// `W + α·(1 − W)`.
#[inline]
pub fn next_weight(weight: f64, alpha: f64) -> f64 {
    weight + alpha * (1.0 - weight)
}

/// One step of the normalised recent rate: `recent` with accumulated
/// weight `weight` takes an interval of `dt_h` hours at mean rate
/// `interval_rate`. Returns the new rate and weight. With `weight = 0` the
/// result is the interval's rate.
#[inline]
pub fn update_recent_rate(recent: f64, weight: f64, interval_rate: f64, dt_h: f64, tau_h: f64) -> (f64, f64) {
    let alpha = interval_weight(dt_h, tau_h);
    let w = next_weight(weight, alpha);
    (recent + alpha / w * (interval_rate - recent), w)
}

/// The rate a projection uses: the recent rate once settled; while
/// settling the larger of the recent rate (zero when none is known yet) and
/// the rate at design conditions, so that a projection is never more
/// optimistic than either.
#[inline]
pub fn projection_rate(recent: Option<f64>, design: f64, settling: bool) -> f64 {
    let r = recent.unwrap_or(0.0);
    if settling {
        r.max(design)
    } else {
        r
    }
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
    fn steady_rate_is_exact_from_the_first_step() {
        // A steady history: the normalised mean is the rate itself after
        // any number of steps of any length.
        let (mut r, mut w) = (0.0, 0.0);
        for dt in [0.1, 1.0, 5.0, 0.25, 100.0] {
            (r, w) = update_recent_rate(r, w, 2.5, dt, 720.0);
            assert_eq!(r, 2.5);
        }
        // The weight is 1 − e^(−H/τ) after H hours (closed form).
        let h: f64 = 0.1 + 1.0 + 5.0 + 0.25 + 100.0;
        assert!((w - (1.0 - (-h / 720.0).exp())).abs() < 1e-15);
    }

    #[test]
    fn recent_rate_weights_fall_off_exponentially() {
        // Two steps, rates a then b, of 10 h each with τ = 20 h: weights
        // e^(−10/20)·(1 − e^(−10/20)) for a and (1 − e^(−10/20)) for b,
        // normalised (worked by hand).
        let (r, w) = update_recent_rate(0.0, 0.0, 1.0, 10.0, 20.0);
        let (r, _) = update_recent_rate(r, w, 3.0, 10.0, 20.0);
        let q = (-0.5f64).exp();
        let (wa, wb) = (q * (1.0 - q), 1.0 - q);
        assert!((r - (wa * 1.0 + wb * 3.0) / (wa + wb)).abs() < 1e-14);
        // Two half steps equal one whole step for a constant rate.
        let (a, wa) = update_recent_rate(1.0, 0.5, 3.0, 0.5, 10.0);
        let (a, wa) = update_recent_rate(a, wa, 3.0, 0.5, 10.0);
        let (b, wb) = update_recent_rate(1.0, 0.5, 3.0, 1.0, 10.0);
        assert!((a - b).abs() < 1e-12 && (wa - wb).abs() < 1e-15);
    }

    #[test]
    fn settling_takes_the_larger_rate() {
        assert_eq!(projection_rate(Some(1e-6), 2e-6, true), 2e-6);
        assert_eq!(projection_rate(Some(3e-6), 2e-6, true), 3e-6);
        assert_eq!(projection_rate(None, 2e-6, true), 2e-6);
        assert_eq!(projection_rate(Some(1e-6), 2e-6, false), 1e-6);
    }
}
