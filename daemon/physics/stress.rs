//! Hoop stress in a pressurised cylinder, and wall thinning in service.
//!
//! Formulas (p gauge pressure MPa, Do outside diameter mm, t wall mm,
//! ri = Do/2 − t, ro = Do/2):
//! * thin-wall on outside diameter (Barlow): σ = p·Do / (2t)
//! * mean diameter: σ = p·(Do − t) / (2t); this is the form used for
//!   tube rupture-life assessment in API 579-1/ASME FFS-1 and in EN 12952-3
//!   (from memory).
//! * thick-wall Lamé, hoop stress at the bore (its maximum):
//!   σ = p·(ro² + ri²) / (ro² − ri²) (Timoshenko, *Strength of Materials*
//!   Part II; Roark's Formulas for Stress and Strain, table 13.5).
//!
//! Valid for a cylinder with t < Do/2 under internal pressure only.

use serde::{Deserialize, Serialize};

/// How hoop stress is computed for a component.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StressBasis {
    /// Barlow's formula on outside diameter.
    ThinWall,
    /// Mean-diameter formula.
    MeanDiameter,
    /// Lamé thick-wall hoop stress at the bore.
    Lame,
}

/// Smallest wall (mm) the formulas are evaluated with. A thinner remaining
/// wall means the part is gone; the tiny floor keeps the numbers finite so
/// the damage rate saturates instead of turning into NaN.
pub const MIN_WALL_MM: f64 = 1e-3;

/// Hoop stress in MPa for gauge pressure `p_mpa`, outside diameter
/// `do_mm` and wall `wall_mm`. Negative gauge pressure (vacuum) gives zero:
/// creep under external pressure is not modelled.
#[inline]
pub fn hoop_stress_mpa(basis: StressBasis, p_mpa: f64, do_mm: f64, wall_mm: f64) -> f64 {
    p_mpa.max(0.0) * hoop_stress_per_mpa(basis, do_mm, wall_mm)
}

/// Hoop stress per MPa of gauge pressure: every formula here is linear in
/// pressure, so a part whose wall does not change can compute this once.
#[inline]
pub fn hoop_stress_per_mpa(basis: StressBasis, do_mm: f64, wall_mm: f64) -> f64 {
    let t = wall_mm.clamp(MIN_WALL_MM, do_mm * 0.5 - MIN_WALL_MM);
    match basis {
        StressBasis::ThinWall => do_mm / (2.0 * t),
        StressBasis::MeanDiameter => (do_mm - t) / (2.0 * t),
        StressBasis::Lame => {
            let ro = 0.5 * do_mm;
            let ri = ro - t;
            (ro * ro + ri * ri) / (ro * ro - ri * ri)
        }
    }
}

/// Remaining wall in mm after `service_h` hours of thinning at
/// `rate_mm_per_year` (365.25-day years) from a wall of `wall_mm` that
/// already lost `measured_loss_mm`. Never below [`MIN_WALL_MM`].
#[inline]
pub fn remaining_wall_mm(wall_mm: f64, measured_loss_mm: f64, rate_mm_per_year: f64, service_h: f64) -> f64 {
    let thinning = rate_mm_per_year.max(0.0) * service_h.max(0.0) / (365.25 * 24.0);
    (wall_mm - measured_loss_mm.max(0.0) - thinning).max(MIN_WALL_MM)
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    // Closed-form identities (textbook algebra, no source needed):
    // mean-diameter = Barlow − p/2; Lamé at the bore → Barlow on inside
    // diameter + p for thin walls: p(ro²+ri²)/(ro²−ri²) ≈ p·ri/t + ... .
    #[test]
    fn identities() {
        let (p, d, t) = (10.0, 50.8, 5.0);
        let barlow = hoop_stress_mpa(StressBasis::ThinWall, p, d, t);
        let mean = hoop_stress_mpa(StressBasis::MeanDiameter, p, d, t);
        assert!((barlow - 50.8).abs() < 1e-12);
        assert!((barlow - mean - p / 2.0).abs() < 1e-12);
        let lame = hoop_stress_mpa(StressBasis::Lame, p, d, t);
        // Lamé lies between mean-diameter and Barlow for moderate walls.
        assert!(lame > mean && lame < barlow + p);
    }

    // Worked example (from memory, common textbook exercise): a pipe of
    // 273.1 mm OD, 20 mm wall at 17 MPa: Barlow 116.07 MPa, mean-diameter
    // 107.57 MPa; Lamé at the bore (ro 136.55, ri 116.55) 108.24 MPa.
    #[test]
    fn worked_pipe_example() {
        let b = hoop_stress_mpa(StressBasis::ThinWall, 17.0, 273.1, 20.0);
        let m = hoop_stress_mpa(StressBasis::MeanDiameter, 17.0, 273.1, 20.0);
        let l = hoop_stress_mpa(StressBasis::Lame, 17.0, 273.1, 20.0);
        assert!((b - 116.0675).abs() < 1e-3, "{b}");
        assert!((m - 107.5675).abs() < 1e-3, "{m}");
        assert!((l - 108.24).abs() < 5e-3, "{l}");
    }

    // Lamé from its derivation rather than its final formula (Timoshenko,
    // *Strength of Materials* Part II, thick-walled cylinder): the stresses
    // are σr = A − B/r², σθ = A + B/r²; the boundary conditions σr(ri) = −p
    // and σr(ro) = 0 fix A and B (solved here as a 2×2 linear system), and
    // the hoop stress at the bore is σθ(ri). Equilibrium of half the
    // cylinder (common practice, a free-body fact): ∫ σθ dr over the wall
    // equals p·ri, checked by Simpson quadrature.
    #[test]
    fn lame_from_boundary_conditions_and_equilibrium() {
        for (p, d, t) in [(17.0, 273.1, 20.0), (30.0, 100.0, 25.0), (5.0, 600.0, 8.0)] {
            let (ro, ri) = (0.5 * d, 0.5 * d - t);
            // [1, −1/ri²; 1, −1/ro²] · [A, B] = [−p, 0], by Cramer's rule.
            let (a11, a12, a21, a22) = (1.0, -1.0 / (ri * ri), 1.0, -1.0 / (ro * ro));
            let det = a11 * a22 - a12 * a21;
            let a = (-p * a22 - a12 * 0.0) / det;
            let b = (a11 * 0.0 - a21 * -p) / det;
            let hoop = |r: f64| a + b / (r * r);
            let lame = hoop_stress_mpa(StressBasis::Lame, p, d, t);
            assert!((lame - hoop(ri)).abs() < 1e-9 * lame, "{lame} {}", hoop(ri));
            let n = 200;
            let h = (ro - ri) / n as f64;
            let mut integral = hoop(ri) + hoop(ro);
            for i in 1..n {
                integral += if i % 2 == 1 { 4.0 } else { 2.0 } * hoop(ri + h * i as f64);
            }
            integral *= h / 3.0;
            assert!((integral - p * ri).abs() < 1e-7 * p * ri, "{integral} {}", p * ri);
        }
    }

    #[test]
    fn thinning() {
        // 0.1 mm/year for one 8766-hour year removes 0.1 mm.
        let w = remaining_wall_mm(5.0, 0.2, 0.1, 8766.0);
        assert!((w - 4.7).abs() < 1e-12);
        assert_eq!(remaining_wall_mm(1.0, 2.0, 0.0, 0.0), MIN_WALL_MM);
    }

    proptest! {
        #[test]
        fn stress_rises_as_wall_falls(p in 0.1f64..40.0, d in 20.0f64..800.0, f in 0.02f64..0.4) {
            let t = d * f;
            for basis in [StressBasis::ThinWall, StressBasis::MeanDiameter, StressBasis::Lame] {
                let s1 = hoop_stress_mpa(basis, p, d, t);
                let s2 = hoop_stress_mpa(basis, p, d, t * 0.9);
                prop_assert!(s2 > s1);
                prop_assert!(s1.is_finite() && s1 > 0.0);
            }
        }
    }
}
