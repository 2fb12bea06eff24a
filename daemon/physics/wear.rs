//! Sliding and fretting wear.
//!
//! * Archard's law (J. F. Archard, J. Appl. Phys. 24, 1953, 981–988):
//!   `V = K · F · s / H`, wear volume V (mm³) for normal load F (N), sliding
//!   distance s (mm), hardness of the softer surface H (MPa = N/mm²) and a
//!   dimensionless wear coefficient K. Equivalently `V = k · F · s` with the
//!   dimensional coefficient `k = K/H` (mm³/(N·mm); handbooks quote it in
//!   mm³/(N·m), which is 1000 times smaller per mm of sliding).
//! * Fretting work-rate model (as used for steam-generator and heat-exchanger
//!   tube wear, e.g. Frick et al., NUREG/CR-3480, 1984; from memory):
//!   wear volume rate `V̇ = K_w · F_N · v`, with the mean sliding speed of a
//!   sinusoidal slip of amplitude δ at frequency f being `v = 4·δ·f`.
//! * Wear depth is volume over apparent contact area; the wear index is
//!   depth over the allowable depth.
//! * Fretting regimes by slip amplitude (after Vingsbo & Söderberg, Wear 126,
//!   1988, 131–147; boundaries approximate and from memory, configurable).

use serde::{Deserialize, Serialize};

/// Archard wear volume in mm³.
#[inline]
pub fn archard_wear_volume_mm3(k: f64, load_n: f64, sliding_mm: f64, hardness_mpa: f64) -> f64 {
    k * load_n.max(0.0) * sliding_mm.max(0.0) / hardness_mpa
}

/// Mean sliding speed (mm/s) of a sinusoidal slip of amplitude `slip_mm`
/// (half the peak-to-peak travel) at `frequency_hz`: four amplitudes per cycle.
#[inline]
pub fn fretting_sliding_speed_mm_s(slip_mm: f64, frequency_hz: f64) -> f64 {
    4.0 * slip_mm.abs() * frequency_hz.abs()
}

/// Work rate (N·mm/s = mW) dissipated by a normal load sliding at a speed.
#[inline]
pub fn work_rate_mw(load_n: f64, speed_mm_s: f64) -> f64 {
    load_n.max(0.0) * speed_mm_s.max(0.0)
}

/// Fretting regime by slip amplitude. Written in snake case, as the
/// configuration spells the regime bounds (`gross_slip`); the type names
/// (`GrossSlip`) are read too, so ledgers written with either load.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FrettingRegime {
    #[serde(alias = "Stick")]
    Stick,
    #[serde(alias = "PartialSlip")]
    PartialSlip,
    #[serde(alias = "GrossSlip")]
    GrossSlip,
    #[serde(alias = "ReciprocatingSliding")]
    ReciprocatingSliding,
}

impl FrettingRegime {
    /// The regime in plain words, for people ("gross slip").
    pub fn words(self) -> &'static str {
        match self {
            FrettingRegime::Stick => "stick",
            FrettingRegime::PartialSlip => "partial slip",
            FrettingRegime::GrossSlip => "gross slip",
            FrettingRegime::ReciprocatingSliding => "reciprocating sliding",
        }
    }
}

/// Slip-amplitude boundaries between regimes, mm.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RegimeBounds {
    /// Below this: stick (default 0.001 mm = 1 µm, from memory).
    pub stick_mm: f64,
    /// Below this: partial slip (default 0.02 mm = 20 µm, from memory).
    pub partial_slip_mm: f64,
    /// Below this: gross slip; above: reciprocating sliding
    /// (default 0.3 mm = 300 µm, from memory).
    pub gross_slip_mm: f64,
}

impl Default for RegimeBounds {
    fn default() -> Self {
        RegimeBounds { stick_mm: 0.001, partial_slip_mm: 0.02, gross_slip_mm: 0.3 }
    }
}

/// Classify a slip amplitude.
pub fn fretting_regime(slip_mm: f64, b: &RegimeBounds) -> FrettingRegime {
    let s = slip_mm.abs();
    if s < b.stick_mm {
        FrettingRegime::Stick
    } else if s < b.partial_slip_mm {
        FrettingRegime::PartialSlip
    } else if s < b.gross_slip_mm {
        FrettingRegime::GrossSlip
    } else {
        FrettingRegime::ReciprocatingSliding
    }
}

/// Wear depth rate in mm/s from a volume rate (mm³/s) over an apparent
/// contact area (mm²).
#[inline]
pub fn depth_rate_mm_s(volume_rate_mm3_s: f64, contact_area_mm2: f64) -> f64 {
    volume_rate_mm3_s / contact_area_mm2
}

/// Wear index: depth over allowable depth.
#[inline]
pub fn wear_index(depth_mm: f64, allowable_mm: f64) -> f64 {
    depth_mm / allowable_mm
}

#[cfg(test)]
mod tests {
    use super::*;

    // Handbook-style example of Archard's law (worked here by hand, method
    // from ASM Handbook Vol. 18, "Friction, Lubrication and Wear
    // Technology", 1992; from memory): K = 1e-4 (mild wear of steel on
    // steel), F = 10 N, s = 1 km = 1e6 mm, H = 2 GPa = 2000 MPa:
    // V = 1e-4 · 10 · 1e6 / 2000 = 0.5 mm³.
    #[test]
    fn archard_example() {
        let v = archard_wear_volume_mm3(1e-4, 10.0, 1e6, 2000.0);
        assert!((v - 0.5).abs() < 1e-12);
    }

    #[test]
    fn archard_is_linear_in_load_and_distance() {
        let v1 = archard_wear_volume_mm3(2e-5, 50.0, 1e5, 1500.0);
        assert!((archard_wear_volume_mm3(2e-5, 100.0, 1e5, 1500.0) / v1 - 2.0).abs() < 1e-12);
        assert!((archard_wear_volume_mm3(2e-5, 50.0, 3e5, 1500.0) / v1 - 3.0).abs() < 1e-12);
    }

    // Sinusoidal slip x = δ sin(2πft): distance per cycle 4δ (kinematics).
    #[test]
    fn sliding_speed() {
        assert!((fretting_sliding_speed_mm_s(0.05, 30.0) - 6.0).abs() < 1e-12);
    }

    // Written as the configuration and README spell it; both spellings read.
    #[test]
    fn regime_names() {
        let all = [
            (FrettingRegime::Stick, "stick", "Stick"),
            (FrettingRegime::PartialSlip, "partial_slip", "PartialSlip"),
            (FrettingRegime::GrossSlip, "gross_slip", "GrossSlip"),
            (FrettingRegime::ReciprocatingSliding, "reciprocating_sliding", "ReciprocatingSliding"),
        ];
        for (r, snake, type_name) in all {
            assert_eq!(serde_json::to_string(&r).unwrap(), format!("\"{snake}\""));
            assert_eq!(serde_json::from_str::<FrettingRegime>(&format!("\"{snake}\"")).unwrap(), r);
            assert_eq!(serde_json::from_str::<FrettingRegime>(&format!("\"{type_name}\"")).unwrap(), r);
            assert_eq!(r.words(), snake.replace('_', " "));
        }
    }

    #[test]
    fn regimes() {
        let b = RegimeBounds::default();
        assert_eq!(fretting_regime(0.0005, &b), FrettingRegime::Stick);
        assert_eq!(fretting_regime(0.01, &b), FrettingRegime::PartialSlip);
        assert_eq!(fretting_regime(0.1, &b), FrettingRegime::GrossSlip);
        assert_eq!(fretting_regime(1.0, &b), FrettingRegime::ReciprocatingSliding);
    }
}
