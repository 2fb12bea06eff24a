//! Creep rupture life from the Larson-Miller parameter.
//!
//! `P = T · (C + log10 t_r)`, T in K, t_r in hours (Larson & Miller,
//! Trans. ASME 74, 1952, 765–775). The master curve of a grade gives P as a
//! polynomial in `x = log10 σ` (σ in MPa), so
//! `t_r = 10^(P(x)/T − C)`.
//!
//! Outside the stress range of the data the polynomial is not trusted (a
//! fitted quadratic can turn over); P is continued linearly in x with the
//! slope at the range end, never flatter than [`MIN_EXTRAPOLATION_SLOPE`]
//! so that more stress always means shorter life. Every evaluation outside
//! the stress or temperature range of the data is flagged.

use super::material::{LarsonMillerCurve, MinimumCurveRule};
use serde::{Deserialize, Serialize};

/// Which rupture curve is used.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CurveBasis {
    /// Mean (average) rupture properties.
    Mean,
    /// Lower-bound rupture properties by the grade's minimum-curve rule.
    /// The conservative default.
    #[default]
    Minimum,
}

/// Steepest-allowed flattening of the master curve beyond the data: P must
/// fall by at least this much per decade of stress (common practice of
/// this project; a choice, not a material property).
pub const MIN_EXTRAPOLATION_SLOPE: f64 = -1000.0;

/// Flags raised when an evaluation leaves the data range of the curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
pub struct RangeFlags {
    pub stress_below: bool,
    pub stress_above: bool,
    pub temperature_below: bool,
    pub temperature_above: bool,
}

impl RangeFlags {
    /// Whether any flag is set.
    pub fn any(&self) -> bool {
        self.stress_below || self.stress_above || self.temperature_below || self.temperature_above
    }
}

/// The Larson-Miller parameter `T·(C + log10 t_r)`.
#[inline]
pub fn larson_miller_parameter(temperature_k: f64, rupture_h: f64, constant_c: f64) -> f64 {
    temperature_k * (constant_c + rupture_h.log10())
}

#[inline]
fn poly(c: &[f64], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, a| acc * x + a)
}

#[inline]
fn poly_slope(c: &[f64], x: f64) -> f64 {
    let mut acc = 0.0;
    for (i, a) in c.iter().enumerate().skip(1).rev() {
        acc = acc * x + a * i as f64;
    }
    acc
}

/// Master-curve P at `x = log10 σ` with linear continuation outside the
/// stress range. Returns P and whether x was below/above the range.
#[inline]
pub fn master_parameter(curve: &LarsonMillerCurve, log10_stress: f64) -> (f64, bool, bool) {
    let lo = curve.stress_range_mpa[0].log10();
    let hi = curve.stress_range_mpa[1].log10();
    let c = &curve.coefficients;
    if log10_stress < lo {
        let s = poly_slope(c, lo).min(MIN_EXTRAPOLATION_SLOPE);
        (poly(c, lo) + s * (log10_stress - lo), true, false)
    } else if log10_stress > hi {
        let s = poly_slope(c, hi).min(MIN_EXTRAPOLATION_SLOPE);
        (poly(c, hi) + s * (log10_stress - hi), false, true)
    } else {
        (poly(c, log10_stress), false, false)
    }
}

/// log10 of the mean-curve rupture life in hours.
#[inline]
fn log10_rupture_mean(curve: &LarsonMillerCurve, log10_stress: f64, temperature_k: f64) -> (f64, RangeFlags) {
    let (p, below, above) = master_parameter(curve, log10_stress);
    let flags = RangeFlags {
        stress_below: below,
        stress_above: above,
        temperature_below: temperature_k < curve.temperature_range_k[0],
        temperature_above: temperature_k > curve.temperature_range_k[1],
    };
    (p / temperature_k - curve.constant_c, flags)
}

/// log10 rupture life in hours on the chosen curve; this is the hot path
/// of the engine (one log10 of stress is passed in so callers can reuse it).
#[inline]
pub fn log10_rupture_life_h(
    curve: &LarsonMillerCurve,
    log10_stress: f64,
    temperature_k: f64,
    basis: CurveBasis,
) -> (f64, RangeFlags) {
    match (basis, curve.minimum) {
        (CurveBasis::Mean, _) => log10_rupture_mean(curve, log10_stress, temperature_k),
        (CurveBasis::Minimum, MinimumCurveRule::StressFactor { factor }) => {
            // The minimum curve at σ equals the mean curve at σ / factor.
            log10_rupture_mean(curve, log10_stress - factor.log10(), temperature_k)
        }
        (CurveBasis::Minimum, MinimumCurveRule::LogTimeOffset { offset }) => {
            let (l, f) = log10_rupture_mean(curve, log10_stress, temperature_k);
            (l - offset, f)
        }
    }
}

/// Rupture life in hours at stress `stress_mpa` and metal temperature
/// `temperature_k`, with range flags. Zero or negative stress gives an
/// infinite life.
pub fn rupture_life_h(
    curve: &LarsonMillerCurve,
    stress_mpa: f64,
    temperature_k: f64,
    basis: CurveBasis,
) -> (f64, RangeFlags) {
    if stress_mpa <= 0.0 {
        return (f64::INFINITY, RangeFlags::default());
    }
    let (l, f) = log10_rupture_life_h(curve, stress_mpa.log10(), temperature_k, basis);
    (10f64.powf(l), f)
}

/// The stress in MPa that gives rupture in `hours` at `temperature_k`
/// (the rupture strength), found by bisection on log10 σ. `None` when no
/// stress between 0.01 MPa and 10 GPa gives that life.
pub fn rupture_strength_mpa(
    curve: &LarsonMillerCurve,
    temperature_k: f64,
    hours: f64,
    basis: CurveBasis,
) -> Option<f64> {
    let target = hours.log10();
    let f = |x: f64| log10_rupture_life_h(curve, x, temperature_k, basis).0 - target;
    let (mut lo, mut hi) = (-2.0f64, 4.0f64);
    let (flo, fhi) = (f(lo), f(hi));
    // Life falls with stress: f(lo) > 0 > f(hi) when a root exists.
    if !(flo > 0.0 && fhi < 0.0) {
        return None;
    }
    for _ in 0..200 {
        let mid = 0.5 * (lo + hi);
        if f(mid) > 0.0 {
            lo = mid;
        } else {
            hi = mid;
        }
        if hi - lo < 1e-13 {
            break;
        }
    }
    Some(10f64.powf(0.5 * (lo + hi)))
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// A synthetic curve used across unit tests (not a real grade).
    pub(crate) fn test_curve() -> LarsonMillerCurve {
        LarsonMillerCurve {
            constant_c: 20.0,
            coefficients: vec![28000.0, -1500.0, -800.0],
            stress_range_mpa: [20.0, 300.0],
            temperature_range_k: [723.0, 923.0],
            minimum: MinimumCurveRule::StressFactor { factor: 0.8 },
            source: "synthetic test curve".into(),
        }
    }

    // The textbook use of the parameter (Larson & Miller 1952; numbers
    // worked by hand here): with C = 20, a test that ruptures in 1000 h at
    // 600 °C has P = 873.15 · (20 + 3) = 20082.45; the same P at 550 °C
    // (823.15 K) gives t_r = 10^(P/T − 20) = 10^4.3969 ≈ 24 940 h.
    #[test]
    fn lmp_equivalence_worked_example() {
        let p = larson_miller_parameter(873.15, 1000.0, 20.0);
        assert!((p - 20082.45).abs() < 1e-9);
        let t_r = 10f64.powf(p / 823.15 - 20.0);
        assert!((t_r / 24_940.0 - 1.0).abs() < 0.01, "{t_r}");
    }

    #[test]
    fn strength_inverts_life() {
        let c = test_curve();
        for basis in [CurveBasis::Mean, CurveBasis::Minimum] {
            let s = rupture_strength_mpa(&c, 823.15, 100_000.0, basis).unwrap();
            let (t, _) = rupture_life_h(&c, s, 823.15, basis);
            assert!((t / 100_000.0 - 1.0).abs() < 1e-9, "{basis:?} {s} {t}");
        }
    }

    #[test]
    fn minimum_below_mean() {
        let c = test_curve();
        let m = rupture_strength_mpa(&c, 823.15, 1e5, CurveBasis::Mean).unwrap();
        let n = rupture_strength_mpa(&c, 823.15, 1e5, CurveBasis::Minimum).unwrap();
        assert!((n / m - 0.8).abs() < 1e-9);
    }

    #[test]
    fn extrapolation_is_flagged_and_monotone() {
        let c = test_curve();
        let (t_in, f_in) = rupture_life_h(&c, 100.0, 823.0, CurveBasis::Mean);
        assert!(!f_in.any());
        let (t_hi, f_hi) = rupture_life_h(&c, 600.0, 823.0, CurveBasis::Mean);
        assert!(f_hi.stress_above && t_hi < t_in);
        let (t_lo, f_lo) = rupture_life_h(&c, 5.0, 823.0, CurveBasis::Mean);
        assert!(f_lo.stress_below && t_lo > t_in);
        let (_, f_t) = rupture_life_h(&c, 100.0, 1000.0, CurveBasis::Mean);
        assert!(f_t.temperature_above);
    }

    proptest::proptest! {
        #[test]
        fn life_falls_with_stress_and_temperature(s in 1.0f64..2000.0, t in 600.0f64..1100.0) {
            let c = test_curve();
            let (a, _) = rupture_life_h(&c, s, t, CurveBasis::Minimum);
            let (b, _) = rupture_life_h(&c, s * 1.01, t, CurveBasis::Minimum);
            let (d, _) = rupture_life_h(&c, s, t + 1.0, CurveBasis::Minimum);
            proptest::prop_assert!(b < a && d < a);
        }
    }
}

/// A master curve with its range ends and extrapolation lines worked out
/// once, for the engine's hot path. Gives the same numbers as
/// [`log10_rupture_life_h`] (to rounding) without recomputing logarithms of
/// the range ends on every call.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PreparedCurve {
    c: f64,
    coeffs: [f64; 4],
    lo: f64,
    hi: f64,
    p_lo: f64,
    p_hi: f64,
    s_lo: f64,
    s_hi: f64,
    t_lo: f64,
    t_hi: f64,
    /// Minimum curve: shift of log10 σ (stress-factor rule).
    shift: f64,
    /// Minimum curve: offset of log10 t (log-time rule).
    offset: f64,
}

impl PreparedCurve {
    /// Prepare a curve for one basis.
    pub fn new(curve: &LarsonMillerCurve, basis: CurveBasis) -> PreparedCurve {
        let mut coeffs = [0.0; 4];
        for (d, s) in coeffs.iter_mut().zip(&curve.coefficients) {
            *d = *s;
        }
        let lo = curve.stress_range_mpa[0].log10();
        let hi = curve.stress_range_mpa[1].log10();
        let (shift, offset) = match (basis, curve.minimum) {
            (CurveBasis::Mean, _) => (0.0, 0.0),
            (CurveBasis::Minimum, MinimumCurveRule::StressFactor { factor }) => (factor.log10(), 0.0),
            (CurveBasis::Minimum, MinimumCurveRule::LogTimeOffset { offset }) => (0.0, offset),
        };
        PreparedCurve {
            c: curve.constant_c,
            coeffs,
            lo,
            hi,
            p_lo: poly(&coeffs, lo),
            p_hi: poly(&coeffs, hi),
            s_lo: poly_slope(&coeffs, lo).min(MIN_EXTRAPOLATION_SLOPE),
            s_hi: poly_slope(&coeffs, hi).min(MIN_EXTRAPOLATION_SLOPE),
            t_lo: curve.temperature_range_k[0],
            t_hi: curve.temperature_range_k[1],
            shift,
            offset,
        }
    }

    /// The data range as this curve applies it: stress in MPa (the
    /// minimum curve's stress factor included) and temperature in K.
    /// Inside both, [`PreparedCurve::log10_rupture_life_h`] raises no flag
    /// (to rounding at the ends).
    pub fn data_range(&self) -> ([f64; 2], [f64; 2]) {
        let s = |x: f64| 10f64.powf(x + self.shift);
        ([s(self.lo), s(self.hi)], [self.t_lo, self.t_hi])
    }

    /// log10 rupture life (h) at `log10_stress` and `temperature_k`.
    #[inline]
    pub fn log10_rupture_life_h(&self, log10_stress: f64, temperature_k: f64) -> (f64, RangeFlags) {
        let x = log10_stress - self.shift;
        let (p, below, above) = if x < self.lo {
            (self.p_lo + self.s_lo * (x - self.lo), true, false)
        } else if x > self.hi {
            (self.p_hi + self.s_hi * (x - self.hi), false, true)
        } else {
            let a = &self.coeffs;
            (((a[3] * x + a[2]) * x + a[1]) * x + a[0], false, false)
        };
        let flags = RangeFlags {
            stress_below: below,
            stress_above: above,
            temperature_below: temperature_k < self.t_lo,
            temperature_above: temperature_k > self.t_hi,
        };
        (p / temperature_k - self.c - self.offset, flags)
    }
}

#[cfg(test)]
mod prepared_tests {
    use super::tests::test_curve;
    use super::*;

    proptest::proptest! {
        #[test]
        fn prepared_agrees_with_direct(s in 1.0f64..2000.0, t in 600.0f64..1100.0) {
            let c = test_curve();
            for basis in [CurveBasis::Mean, CurveBasis::Minimum] {
                let p = PreparedCurve::new(&c, basis);
                let (a, fa) = p.log10_rupture_life_h(s.log10(), t);
                let (b, fb) = log10_rupture_life_h(&c, s.log10(), t, basis);
                proptest::prop_assert!((a - b).abs() < 1e-9, "{} {}", a, b);
                proptest::prop_assert_eq!(fa, fb);
            }
        }
    }
}
