//! Robinson's life-fraction rule for creep damage.
//!
//! `D = Σ Δt_i / t_r(σ_i, T_i)` (E. L. Robinson, Trans. ASME 74, 1952,
//! 777–781; also API 579-1/ASME FFS-1 Part 10). Failure is expected near
//! D = 1; scatter in real parts is large, which is why alarm limits sit
//! well below 1.

/// Life-fraction increment for `dt_h` hours at a rupture life of
/// `rupture_h` hours.
#[inline]
pub fn life_fraction_increment(dt_h: f64, rupture_h: f64) -> f64 {
    if rupture_h.is_infinite() {
        0.0
    } else {
        dt_h / rupture_h.max(f64::MIN_POSITIVE)
    }
}

/// Total life fraction for a sequence of (hours, rupture life) blocks.
pub fn life_fraction(blocks: &[(f64, f64)]) -> f64 {
    blocks.iter().map(|&(dt, tr)| life_fraction_increment(dt, tr)).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    // Textbook example of the rule (common practice): 2000 h at a condition
    // with 10 000 h life, then 3000 h at a condition with 5000 h life,
    // D = 0.2 + 0.6 = 0.8.
    #[test]
    fn two_blocks() {
        let d = life_fraction(&[(2000.0, 10_000.0), (3000.0, 5000.0)]);
        assert!((d - 0.8).abs() < 1e-15);
    }

    #[test]
    fn infinite_life_adds_nothing() {
        assert_eq!(life_fraction_increment(1.0, f64::INFINITY), 0.0);
        assert!(life_fraction_increment(1.0, 0.0).is_finite());
    }
}
