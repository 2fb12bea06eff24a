//! Creep-fatigue interaction: the linear damage sum and the bilinear
//! damage envelope of the high-temperature design codes.
//!
//! ASME BPVC Section III Division 5 (formerly Subsection NH), HBB-T-1420
//! and Fig. HBB-T-1420-2, bounds the pair (fatigue damage D_f, creep
//! damage D_c) by two straight lines from (0, 1) through an intersection
//! point (f₀, c₀) to (1, 0). The code's intersection points, **from
//! memory**: 304 and 316 stainless (0.3, 0.3); 2.25Cr-1Mo (0.1, 0.1);
//! 9Cr-1Mo-V (0.1, 0.01); Alloy 800H (0.1, 0.1). The linear sum
//! D_f + D_c ≤ 1 is the envelope through (0.5, 0.5).

use serde::{Deserialize, Serialize};

/// A bilinear envelope through (0, 1), (fatigue, creep) and (1, 0).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Envelope {
    /// Fatigue damage at the intersection point, 0 < f₀ < 1.
    pub fatigue: f64,
    /// Creep damage at the intersection point, 0 < c₀ < 1.
    pub creep: f64,
}

impl Envelope {
    /// The linear damage sum D_f + D_c as an envelope.
    pub const LINEAR: Envelope = Envelope { fatigue: 0.5, creep: 0.5 };

    /// The innermost of the code's envelopes (9Cr-1Mo-V, (0.1, 0.01), from
    /// memory), used for a grade for which no envelope is known: it lies
    /// inside every other one (conservative).
    pub const INNERMOST: Envelope = Envelope { fatigue: 0.1, creep: 0.01 };

    /// Combined damage index: the factor by which (D_f, D_c) would have to
    /// be scaled from the origin to reach the envelope, so 1 on the
    /// envelope. For the ray through the point it is the linear form of
    /// the segment the ray meets: `D_c + D_f·(1 − c₀)/f₀` above the
    /// intersection's ray (D_c·f₀ ≥ D_f·c₀), `D_f + D_c·(1 − f₀)/c₀`
    /// below. Dimensionless; for the linear envelope `D_f + D_c`.
    pub fn index(&self, d_fatigue: f64, d_creep: f64) -> f64 {
        let (f0, c0) = (self.fatigue, self.creep);
        if d_creep * f0 >= d_fatigue * c0 {
            d_creep + d_fatigue * (1.0 - c0) / f0
        } else {
            d_fatigue + d_creep * (1.0 - f0) / c0
        }
    }

    /// Rate of the index for damage rates (ṙ_f, ṙ_c) at the point
    /// (D_f, D_c): the segment's linear form applied to the rates.
    pub fn index_rate(&self, d_fatigue: f64, d_creep: f64, rate_fatigue: f64, rate_creep: f64) -> f64 {
        let (f0, c0) = (self.fatigue, self.creep);
        let upper = if d_fatigue == 0.0 && d_creep == 0.0 {
            rate_creep * f0 >= rate_fatigue * c0
        } else {
            d_creep * f0 >= d_fatigue * c0
        };
        if upper {
            rate_creep + rate_fatigue * (1.0 - c0) / f0
        } else {
            rate_fatigue + rate_creep * (1.0 - f0) / c0
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn envelope_corners_and_linear_sum() {
        for e in [Envelope { fatigue: 0.3, creep: 0.3 }, Envelope { fatigue: 0.1, creep: 0.01 }, Envelope::LINEAR] {
            for (f, c) in [(0.0, 1.0), (e.fatigue, e.creep), (1.0, 0.0)] {
                assert!((e.index(f, c) - 1.0).abs() < 1e-12, "{e:?} at ({f}, {c})");
            }
            // Midpoints of both segments lie on the envelope too.
            let m1 = (0.5 * e.fatigue, 0.5 * (1.0 + e.creep));
            let m2 = (0.5 * (1.0 + e.fatigue), 0.5 * e.creep);
            assert!((e.index(m1.0, m1.1) - 1.0).abs() < 1e-12);
            assert!((e.index(m2.0, m2.1) - 1.0).abs() < 1e-12);
            // Homogeneous of degree one.
            assert!((e.index(0.02, 0.04) * 2.0 - e.index(0.04, 0.08)).abs() < 1e-12);
        }
        assert!((Envelope::LINEAR.index(0.2, 0.3) - 0.5).abs() < 1e-12);
    }

    #[test]
    fn innermost_envelope_is_inside_the_others() {
        for e in [Envelope { fatigue: 0.3, creep: 0.3 }, Envelope { fatigue: 0.1, creep: 0.1 }, Envelope::LINEAR] {
            for k in 0..=100 {
                let a = k as f64 / 100.0 * std::f64::consts::FRAC_PI_2;
                let (f, c) = (a.cos(), a.sin());
                assert!(Envelope::INNERMOST.index(f, c) >= e.index(f, c) - 1e-12);
            }
        }
    }
}
