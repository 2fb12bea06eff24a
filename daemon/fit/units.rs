//! The units a test file was written in (its column names), so reports and
//! plots can show results in them beside the SI units the fit works in:
//! an engineer with data in °F and ksi checks the fit against those
//! numbers, not against their conversion.
//!
//! Conversions as the reader applies them (NIST SP 811, 2008, appendix
//! B.8): T/K = t/°C + 273.15; T/K = (t/°F + 459.67)/1.8; 1 psi =
//! 6.894 757 kPa, 1 ksi = 6.894 757 MPa. The Rankine temperature is
//! T/°R = 1.8·T/K, so a Larson-Miller parameter with T in °R is 1.8 times
//! the one with T in K (same C, same hours).

use serde::Serialize;

const KSI_MPA: f64 = crate::physics::units::PSI_TO_PA * 1e-3;

/// Temperature and stress units of a test file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct InputUnits {
    /// `degC`, `K` or `degF` (unit names as the configuration spells them).
    pub temperature: &'static str,
    /// `MPa`, `ksi` or `psi`.
    pub stress: &'static str,
}

impl Default for InputUnits {
    fn default() -> Self {
        InputUnits { temperature: "degC", stress: "MPa" }
    }
}

impl InputUnits {
    /// The units named by a header's columns (`temperature_f`, `stress_ksi`, …).
    pub fn from_columns(columns: &[String]) -> InputUnits {
        let mut u = InputUnits::default();
        for c in columns {
            match c.to_ascii_lowercase().as_str() {
                "temperature_c" => u.temperature = "degC",
                "temperature_k" => u.temperature = "K",
                "temperature_f" => u.temperature = "degF",
                "stress_mpa" => u.stress = "MPa",
                "stress_ksi" => u.stress = "ksi",
                "stress_psi" => u.stress = "psi",
                _ => {}
            }
        }
        u
    }

    /// Whether temperatures were given in °F (K and °C are shown anyway).
    pub fn fahrenheit(&self) -> bool {
        self.temperature == "degF"
    }

    /// The stress unit when it is not MPa: its symbol and MPa per unit.
    pub fn stress_alt(&self) -> Option<(&'static str, f64)> {
        match self.stress {
            "ksi" => Some(("ksi", KSI_MPA)),
            "psi" => Some(("psi", KSI_MPA * 1e-3)),
            _ => None,
        }
    }
}

/// Kelvin to degrees Fahrenheit.
pub fn kelvin_to_fahrenheit(k: f64) -> f64 {
    k * 1.8 - 459.67
}

/// A number with up to `decimals` decimals, trailing zeros dropped.
pub fn trimmed(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn conversions_agree_with_nist_sp_811() {
        // 1000 °F = 810.927 78 K (NIST SP 811 B.8 formula) and back.
        assert!((kelvin_to_fahrenheit((1000.0 + 459.67) / 1.8) - 1000.0).abs() < 1e-9);
        // Water boils at 212 °F = 373.15 K (fact of the trade).
        assert!((kelvin_to_fahrenheit(373.15) - 212.0).abs() < 1e-9);
        assert!((KSI_MPA - 6.894757).abs() < 1e-12);
        let u = InputUnits::from_columns(&["temperature_f".into(), "STRESS_KSI".into(), "rupture_h".into()]);
        assert!(u.fahrenheit());
        assert_eq!(u.stress_alt().map(|s| s.0), Some("ksi"));
        assert_eq!(InputUnits::from_columns(&["temperature_c".into(), "stress_mpa".into()]).stress_alt(), None);
        assert_eq!(trimmed(42.0000001, 2), "42");
        assert_eq!(trimmed(68.947, 1), "68.9");
    }
}
