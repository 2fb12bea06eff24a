//! Smooth-bar design fatigue curves, the temperature correction and
//! Miner's rule.
//!
//! The built-in curves are those of ASME Boiler and Pressure Vessel Code
//! Section VIII Division 2, Annex 3-F (smooth-bar design fatigue curves,
//! the same curves as Section III Appendix I), written here **from
//! memory**: they are screening values, not the code. The governing code's
//! own tables must be used for any decision.
//!
//! * Temperature: the code gives each curve at a reference modulus E_FC;
//!   the alternating stress is scaled by E_FC / E_T, E_T the modulus at
//!   the cycle's temperature (VIII-2 5.5.3, from memory). The cycle's
//!   temperature here is the hottest on its path (see `rainflow`), which
//!   gives the lowest E_T: conservative.
//! * Mean stress: the Annex 3-F smooth-bar curves already contain the
//!   largest possible effect of mean stress (VIII-2 Annex 3-F, from
//!   memory), so the code applies no further correction and neither do we;
//!   mean stress is recorded in the cycle table only.
//! * Between tabulated points the code interpolates log-log (Annex 3-F,
//!   3-F.1.2, from memory). Beyond the last tabulated point the last
//!   segment is extended (finite life where a code may allow an endurance
//!   limit: conservative); above the first, the first segment is extended.
//! * The simplified elastic-plastic correction K_e ([`plasticity_factor`])
//!   applies only where the limit S_PS is configured. Not included: weld
//!   and notch factors beyond the configured stress factors, and
//!   environmental factors. Each would raise the damage; see README's
//!   cautions.

use serde::{Deserialize, Serialize};

/// 1 ksi in MPa (exact by the definitions of the pound-force and the inch).
const MPA_PER_KSI: f64 = 6.894_757_293_168_361;

/// A built-in design fatigue curve.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DesignCurve {
    /// Carbon, low-alloy, series 4XX, high-alloy and high-tensile steels,
    /// ultimate tensile strength ≤ 552 MPa, metal temperature ≤ 371 °C.
    AsmeCarbonLowAlloy,
    /// Austenitic steels (series 3XX), nickel-chromium-iron and
    /// nickel-iron-chromium alloys, metal temperature ≤ 427 °C.
    AsmeAustenitic,
}

/// The data of one curve: (cycles, alternating stress amplitude in ksi),
/// descending stress.
#[derive(Debug)]
pub struct CurveData {
    pub name: &'static str,
    /// (N, S_a in ksi) as the code tabulates them.
    pub points_ksi: &'static [(f64, f64)],
    /// Modulus the curve is drawn for, MPa.
    pub reference_modulus_mpa: f64,
    /// Highest metal temperature the code allows the curve for, K.
    pub max_temperature_k: f64,
    pub source: &'static str,
}

/// ASME VIII-2 Table 3-F.1 (Section III Table I-9.1), UTS ≤ 80 ksi,
/// E = 30·10⁶ psi; from memory.
static CARBON_LOW_ALLOY: CurveData = CurveData {
    name: "asme_carbon_low_alloy",
    points_ksi: &[
        (1e1, 580.0),
        (2e1, 410.0),
        (5e1, 275.0),
        (1e2, 205.0),
        (2e2, 155.0),
        (5e2, 105.0),
        (1e3, 83.0),
        (2e3, 64.0),
        (5e3, 48.0),
        (1e4, 38.0),
        (1.2e4, 35.0),
        (2e4, 31.0),
        (5e4, 23.0),
        (1e5, 20.0),
        (2e5, 16.5),
        (5e5, 13.5),
        (1e6, 12.5),
    ],
    reference_modulus_mpa: 30_000.0 * MPA_PER_KSI,
    max_temperature_k: 371.0 + 273.15,
    source: "ASME BPVC Section VIII Division 2 Annex 3-F, smooth-bar design fatigue curve for carbon, low-alloy, \
             series 4XX, high-alloy and high-tensile steels, UTS <= 552 MPa, T <= 371 C (same as Section III \
             Table I-9.1), E_FC = 30e6 psi; from memory, not checked against the code",
};

/// ASME austenitic smooth-bar curve: at each tabulated N the lower of the
/// pre-2009 Section III Fig. I-9.2.1 curve and the curve adopted in 2009
/// (after NUREG/CR-6909), E = 28.3·10⁶ psi; from memory.
static AUSTENITIC: CurveData = CurveData {
    name: "asme_austenitic",
    points_ksi: &[
        (1e1, 708.0),
        (2e1, 512.0),
        (5e1, 345.0),
        (1e2, 261.0),
        (2e2, 201.0),
        (5e2, 141.0),
        (1e3, 108.0),
        (2e3, 85.6),
        (5e3, 65.3),
        (1e4, 53.4),
        (2e4, 43.5),
        (5e4, 34.1),
        (1e5, 28.4),
        (2e5, 24.4),
        (5e5, 21.3),
        (1e6, 20.0),
    ],
    reference_modulus_mpa: 28_300.0 * MPA_PER_KSI,
    max_temperature_k: 427.0 + 273.15,
    source: "ASME BPVC Section VIII Division 2 Annex 3-F / Section III Appendix I smooth-bar design fatigue curve \
             for austenitic steels, Ni-Cr-Fe and Ni-Fe-Cr alloys, T <= 427 C, E_FC = 28.3e6 psi: at each N the \
             lower of the pre-2009 curve and the 2009 revision; from memory, not checked against the code",
};

impl DesignCurve {
    /// The curve's data.
    pub fn data(self) -> &'static CurveData {
        match self {
            DesignCurve::AsmeCarbonLowAlloy => &CARBON_LOW_ALLOY,
            DesignCurve::AsmeAustenitic => &AUSTENITIC,
        }
    }

    /// Stable name (configuration and reports).
    pub fn name(self) -> &'static str {
        self.data().name
    }

    /// All built-in curves.
    pub const ALL: [DesignCurve; 2] = [DesignCurve::AsmeCarbonLowAlloy, DesignCurve::AsmeAustenitic];

    /// Look a curve up by its name.
    pub fn from_name(name: &str) -> Option<DesignCurve> {
        Self::ALL.into_iter().find(|c| c.name().eq_ignore_ascii_case(name.trim()))
    }

    /// Allowable cycles at an alternating stress amplitude `sa_mpa` read
    /// at the curve's reference modulus.
    ///
    /// Log-log interpolation between tabulated points (ASME VIII-2 Annex
    /// 3-F, from memory): `log N = log Nᵢ + log(Nᵢ₊₁/Nᵢ) · log(Sᵢ/Sa) /
    /// log(Sᵢ/Sᵢ₊₁)`; the end segments are extended beyond the table
    /// (conservative below the last point). `Sa ≤ 0`: infinite.
    pub fn allowable_cycles(self, sa_mpa: f64) -> f64 {
        if sa_mpa.is_nan() {
            return 0.0;
        }
        if sa_mpa <= 0.0 {
            return f64::INFINITY;
        }
        let pts = self.data().points_ksi;
        let sa = sa_mpa / MPA_PER_KSI;
        // The segment whose stress span holds sa (end segments extended).
        let i = pts.windows(2).position(|w| sa >= w[1].1).unwrap_or(pts.len() - 2);
        let ((n0, s0), (n1, s1)) = (pts[i], pts[i + 1]);
        let log_n = n0.log10() + (n1 / n0).log10() * (s0 / sa).log10() / (s0 / s1).log10();
        10f64.powf(log_n)
    }

    /// Alternating stress amplitude (MPa, at the reference modulus) the
    /// curve allows for `n` cycles: the inverse of [`Self::allowable_cycles`].
    pub fn alternating_stress_mpa(self, n: f64) -> f64 {
        let pts = self.data().points_ksi;
        let i = pts.windows(2).position(|w| n <= w[1].0).unwrap_or(pts.len() - 2);
        let ((n0, s0), (n1, s1)) = (pts[i], pts[i + 1]);
        let log_s = s0.log10() + (s1 / s0).log10() * (n / n0).log10() / (n1 / n0).log10();
        10f64.powf(log_s) * MPA_PER_KSI
    }
}

/// Alternating stress amplitude to enter a curve with:
/// `S_a = (Δσ / 2) · E_FC / E_T`, MPa (ASME VIII-2 5.5.3, from memory).
/// `range_mpa` the elastically computed stress range, `modulus_t_mpa` the
/// modulus at the cycle's temperature.
pub fn corrected_alternating_stress_mpa(curve: DesignCurve, range_mpa: f64, modulus_t_mpa: f64) -> f64 {
    0.5 * range_mpa * curve.data().reference_modulus_mpa / modulus_t_mpa
}

/// Simplified elastic-plastic correction K_e of ASME VIII-2 5.5.3 (from
/// memory) for a stress range `range_mpa` against the limit of the
/// primary-plus-secondary stress range `s_ps_mpa` (S_PS, the larger of
/// 3·S_m and 2·S_y at the cycle's temperature):
/// `K_e = 1` for `ΔS ≤ S_PS`; `1 + (1 − n)/(n·(m − 1)) · (ΔS/S_PS − 1)` up
/// to `ΔS = m·S_PS`; `1/n` beyond. Material constants (VIII-2 Table 5.13,
/// from memory): low-alloy steels m = 2.0, n = 0.2 (taken for the whole
/// ferritic curve: it rises faster than carbon steel's m = 3.0, the
/// conservative choice); austenitic steels m = 1.7, n = 0.3. The code
/// applies it to the primary-plus-secondary range; applied here to the
/// location's range, which includes the stress factors (conservative).
pub fn plasticity_factor(curve: DesignCurve, range_mpa: f64, s_ps_mpa: f64) -> f64 {
    let (m, n) = match curve {
        DesignCurve::AsmeCarbonLowAlloy => (2.0, 0.2),
        DesignCurve::AsmeAustenitic => (1.7, 0.3),
    };
    let x = range_mpa / s_ps_mpa;
    if x <= 1.0 {
        1.0
    } else if x < m {
        1.0 + (1.0 - n) / (n * (m - 1.0)) * (x - 1.0)
    } else {
        1.0 / n
    }
}

/// Usage of `count` cycles (1 or 0.5) of range `range_mpa`: `count / N`
/// (Miner's rule term; Palmgren-Miner, common practice).
pub fn cycle_usage(curve: DesignCurve, range_mpa: f64, modulus_t_mpa: f64, count: f64) -> f64 {
    let n = curve.allowable_cycles(corrected_alternating_stress_mpa(curve, range_mpa, modulus_t_mpa));
    count / n
}

/// Miner's rule, `D_f = Σ nᵢ / Nᵢ` (Palmgren 1924, Miner 1945; common
/// practice): cycle counts and allowable cycles in pairs.
pub fn miner_sum(pairs: impl IntoIterator<Item = (f64, f64)>) -> f64 {
    pairs.into_iter().map(|(n, big_n)| n / big_n).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tabulated_points_are_returned_exactly() {
        for c in DesignCurve::ALL {
            for &(n, s) in c.data().points_ksi {
                let got = c.allowable_cycles(s * MPA_PER_KSI);
                assert!((got / n - 1.0).abs() < 1e-9, "{}: {n} cycles at {s} ksi gave {got}", c.name());
                let back = c.alternating_stress_mpa(n) / MPA_PER_KSI;
                assert!((back / s - 1.0).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn curve_falls_monotonically_and_extends_past_its_ends() {
        for c in DesignCurve::ALL {
            let mut prev = 0.0;
            for k in 0..400 {
                let sa = 2000.0 * 0.98f64.powi(k);
                let n = c.allowable_cycles(sa);
                assert!(n > prev && n.is_finite(), "{} at {sa}", c.name());
                prev = n;
            }
        }
        assert_eq!(DesignCurve::AsmeAustenitic.allowable_cycles(0.0), f64::INFINITY);
    }

    #[test]
    fn plasticity_factor_by_hand() {
        // Low alloy (m = 2, n = 0.2) at ΔS = 1.5·S_PS: 1 + 0.8/(0.2·1)·0.5 = 3;
        // at and beyond m·S_PS: 1/n = 5; continuous at m (hand-worked).
        let c = DesignCurve::AsmeCarbonLowAlloy;
        assert_eq!(plasticity_factor(c, 100.0, 200.0), 1.0);
        assert!((plasticity_factor(c, 300.0, 200.0) - 3.0).abs() < 1e-12);
        assert!((plasticity_factor(c, 399.999_999, 200.0) - 5.0).abs() < 1e-6);
        assert_eq!(plasticity_factor(c, 900.0, 200.0), 5.0);
        let a = DesignCurve::AsmeAustenitic;
        assert!((plasticity_factor(a, 1.7 * 200.0 - 1e-9, 200.0) - 1.0 / 0.3).abs() < 1e-6);
    }

    #[test]
    fn log_log_midpoint_between_two_rows() {
        // Halfway in log stress between 1e3 (83 ksi) and 2e3 (64 ksi) the
        // cycles are halfway in log N: sqrt(2)·1e3 (hand-worked from the
        // interpolation rule).
        let sa = (83.0f64 * 64.0).sqrt() * MPA_PER_KSI;
        let n = DesignCurve::AsmeCarbonLowAlloy.allowable_cycles(sa);
        assert!((n / (2f64.sqrt() * 1e3) - 1.0).abs() < 1e-12);
    }
}
