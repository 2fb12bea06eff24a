//! Unit conversions at the edges: everything that arrives in configuration
//! or payloads is converted here, once, to the internal unit system
//! (K, MPa, N, mm, Hz, mm/s, hours).
//!
//! Conversion factors are those of NIST Special Publication 811 (2008),
//! Appendix B: 1 psi = 6.894 757 E+03 Pa, 1 bar = 1.0 E+05 Pa (exact),
//! 1 lbf = 4.448 222 N, 1 in = 25.4 mm (exact), 1 ksi = 6.894 757 MPa,
//! T/K = (t/°F + 459.67)/1.8, T/K = t/°C + 273.15 (exact).
//! Pressure: gauge values are relative to the standard atmosphere,
//! 101.325 kPa (exact, by definition).

use serde::{Deserialize, Serialize};
use std::fmt;

/// The physical quantity a unit measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Quantity {
    Temperature,
    Pressure,
    Force,
    Length,
    Frequency,
    Speed,
    Dimensionless,
}

impl fmt::Display for Quantity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let s = match self {
            Quantity::Temperature => "temperature",
            Quantity::Pressure => "pressure",
            Quantity::Force => "force",
            Quantity::Length => "length",
            Quantity::Frequency => "frequency",
            Quantity::Speed => "speed",
            Quantity::Dimensionless => "dimensionless",
        };
        f.write_str(s)
    }
}

/// Physical plausibility bounds `[low, high]` of each quantity, in internal
/// units: a tag whose configuration gives no `valid_range` rejects samples
/// outside these (as `out_of_range`, like a configured range). They are
/// deliberately generous: they catch what cannot be a plant reading at all
/// (a unit mix-up, a transmitter fault, 1e308), not what is merely unusual,
/// so a tag's own `valid_range` (its calibrated span) is always better.
/// Values are common practice and orders of magnitude, from memory.
///
/// Temperature, K: above absolute zero (0 K itself is rejected by the
/// engine's screen too) and below 3000 K, well above the melting point of
/// every steel and nickel alloy (about 1700–1800 K) and of furnace-gas
/// thermocouple ranges.
pub const PLAUSIBLE_TEMPERATURE_K: [f64; 2] = [0.0, 3000.0];
/// Pressure, MPa gauge: from twice a full vacuum (−0.2 MPa, leaving room
/// for transmitter error near −0.101 MPa) to 1000 MPa, above what any
/// plant equipment holds (supercritical boilers about 30 MPa, hydrocrackers
/// about 20 MPa, high-pressure polyethylene reactors about 300 MPa).
pub const PLAUSIBLE_PRESSURE_MPA: [f64; 2] = [-0.2, 1000.0];
/// Force, N: ±10 MN (about 1000 tonnes-force), beyond any contact load of
/// a support, a valve stem or a bearing; negative for load cells reading
/// tension.
pub const PLAUSIBLE_FORCE_N: [f64; 2] = [-1.0e7, 1.0e7];
/// Length, mm: ±1 m, beyond any slip amplitude or displacement reading.
pub const PLAUSIBLE_LENGTH_MM: [f64; 2] = [-1000.0, 1000.0];
/// Frequency, Hz: 0 to 100 kHz, beyond vibration, rotation (60 000 rpm is
/// 1 kHz) and ultrasound.
pub const PLAUSIBLE_FREQUENCY_HZ: [f64; 2] = [0.0, 1.0e5];
/// Speed, mm/s: ±100 m/s, beyond any sliding speed of a plant wear contact.
pub const PLAUSIBLE_SPEED_MM_S: [f64; 2] = [-1.0e5, 1.0e5];
/// Dimensionless: ±1e6, numbers of ordinary size.
pub const PLAUSIBLE_DIMENSIONLESS: [f64; 2] = [-1.0e6, 1.0e6];

impl Quantity {
    /// The physical plausibility bounds of this quantity, internal units
    /// (see [`PLAUSIBLE_TEMPERATURE_K`] and its neighbours).
    pub fn plausible_range(self) -> [f64; 2] {
        match self {
            Quantity::Temperature => PLAUSIBLE_TEMPERATURE_K,
            Quantity::Pressure => PLAUSIBLE_PRESSURE_MPA,
            Quantity::Force => PLAUSIBLE_FORCE_N,
            Quantity::Length => PLAUSIBLE_LENGTH_MM,
            Quantity::Frequency => PLAUSIBLE_FREQUENCY_HZ,
            Quantity::Speed => PLAUSIBLE_SPEED_MM_S,
            Quantity::Dimensionless => PLAUSIBLE_DIMENSIONLESS,
        }
    }
}

/// Standard atmosphere in MPa (exact by definition).
pub const STANDARD_ATMOSPHERE_MPA: f64 = 0.101_325;
/// NIST SP 811 B.8: 1 psi = 6.894 757 E+03 Pa.
pub const PSI_TO_PA: f64 = 6.894_757e3;
/// NIST SP 811 B.8: 1 lbf = 4.448 222 N.
pub const LBF_TO_N: f64 = 4.448_222;
/// NIST SP 811 B.8: 1 in = 2.54 E-02 m exactly.
pub const INCH_TO_MM: f64 = 25.4;
/// Offset between the Celsius and Kelvin scales (exact).
pub const CELSIUS_OFFSET_K: f64 = 273.15;
/// Standard acceleration of gravity (exact), for kgf and Vickers hardness.
pub const STANDARD_GRAVITY: f64 = 9.806_65;

/// A unit of measurement accepted in configuration and payloads. The
/// conversion to internal units is `internal = value · scale + offset`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Unit {
    pub name: &'static str,
    pub quantity: Quantity,
    pub scale: f64,
    pub offset: f64,
    /// For pressures: the value is absolute and must be turned into a
    /// gauge (differential) pressure for hoop stress.
    pub absolute: bool,
}

const fn u(name: &'static str, quantity: Quantity, scale: f64, offset: f64) -> Unit {
    Unit { name, quantity, scale, offset, absolute: false }
}

const fn abs(name: &'static str, scale: f64) -> Unit {
    Unit { name, quantity: Quantity::Pressure, scale, offset: -STANDARD_ATMOSPHERE_MPA, absolute: true }
}

/// Every accepted unit spelling. Pressure units without a suffix are gauge;
/// `a` or `_abs` marks absolute (for example `bara`, `MPa_abs`, `psia`).
const UNITS: &[Unit] = &[
    u("K", Quantity::Temperature, 1.0, 0.0),
    u("degC", Quantity::Temperature, 1.0, CELSIUS_OFFSET_K),
    u("°C", Quantity::Temperature, 1.0, CELSIUS_OFFSET_K),
    u("C", Quantity::Temperature, 1.0, CELSIUS_OFFSET_K),
    u("degF", Quantity::Temperature, 1.0 / 1.8, 459.67 / 1.8),
    u("°F", Quantity::Temperature, 1.0 / 1.8, 459.67 / 1.8),
    u("F", Quantity::Temperature, 1.0 / 1.8, 459.67 / 1.8),
    u("MPa", Quantity::Pressure, 1.0, 0.0),
    u("MPag", Quantity::Pressure, 1.0, 0.0),
    u("kPa", Quantity::Pressure, 1e-3, 0.0),
    u("kPag", Quantity::Pressure, 1e-3, 0.0),
    u("Pa", Quantity::Pressure, 1e-6, 0.0),
    u("bar", Quantity::Pressure, 0.1, 0.0),
    u("barg", Quantity::Pressure, 0.1, 0.0),
    u("psi", Quantity::Pressure, PSI_TO_PA * 1e-6, 0.0),
    u("psig", Quantity::Pressure, PSI_TO_PA * 1e-6, 0.0),
    u("ksi", Quantity::Pressure, PSI_TO_PA * 1e-3, 0.0),
    abs("MPaa", 1.0),
    abs("MPa_abs", 1.0),
    abs("kPaa", 1e-3),
    abs("kPa_abs", 1e-3),
    abs("bara", 0.1),
    abs("bar_abs", 0.1),
    abs("psia", PSI_TO_PA * 1e-6),
    u("N", Quantity::Force, 1.0, 0.0),
    u("kN", Quantity::Force, 1e3, 0.0),
    u("lbf", Quantity::Force, LBF_TO_N, 0.0),
    u("mm", Quantity::Length, 1.0, 0.0),
    u("um", Quantity::Length, 1e-3, 0.0),
    u("µm", Quantity::Length, 1e-3, 0.0),
    u("m", Quantity::Length, 1e3, 0.0),
    u("in", Quantity::Length, INCH_TO_MM, 0.0),
    u("mil", Quantity::Length, INCH_TO_MM * 1e-3, 0.0),
    u("Hz", Quantity::Frequency, 1.0, 0.0),
    u("rpm", Quantity::Frequency, 1.0 / 60.0, 0.0),
    u("mm/s", Quantity::Speed, 1.0, 0.0),
    u("m/s", Quantity::Speed, 1e3, 0.0),
    u("1", Quantity::Dimensionless, 1.0, 0.0),
    u("%", Quantity::Dimensionless, 0.01, 0.0),
];

/// Error for a unit spelling that is not recognised.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("unknown unit {given:?}; accepted {quantity_hint}")]
pub struct UnknownUnit {
    pub given: String,
    pub quantity_hint: String,
}

impl Unit {
    /// Parse a unit spelling, for example `degC`, `bar`, `psia`, `kN`.
    pub fn parse(s: &str) -> Result<Unit, UnknownUnit> {
        let t = s.trim();
        UNITS
            .iter()
            .find(|u| u.name == t)
            .or_else(|| UNITS.iter().find(|u| u.name.eq_ignore_ascii_case(t)))
            .copied()
            .ok_or_else(|| UnknownUnit {
                given: s.to_string(),
                quantity_hint: "units: ".to_string() + &Unit::spellings(None).join(", "),
            })
    }

    /// Parse a unit and require that it measures `quantity`.
    pub fn parse_for(s: &str, quantity: Quantity) -> Result<Unit, UnknownUnit> {
        match Unit::parse(s) {
            Ok(u) if u.quantity == quantity => Ok(u),
            _ => Err(UnknownUnit {
                given: s.to_string(),
                quantity_hint: format!("{quantity} units: {}", Unit::spellings(Some(quantity)).join(", ")),
            }),
        }
    }

    /// The accepted spellings, optionally for one quantity.
    pub fn spellings(quantity: Option<Quantity>) -> Vec<&'static str> {
        UNITS.iter().filter(|u| quantity.is_none_or(|q| q == u.quantity)).map(|u| u.name).collect()
    }

    /// Convert a value in this unit to the internal unit of its quantity.
    /// Absolute pressures come out as gauge pressure (minus one standard
    /// atmosphere), which is what a pressure-retaining wall carries when
    /// its outside is at atmospheric pressure.
    #[inline]
    pub fn to_internal(&self, value: f64) -> f64 {
        value * self.scale + self.offset
    }

    /// The inverse of [`Unit::to_internal`].
    #[inline]
    pub fn from_internal(&self, internal: f64) -> f64 {
        (internal - self.offset) / self.scale
    }

    /// The plausibility bounds of this unit's quantity, expressed in this
    /// unit (low below high: every scale is positive).
    pub fn plausible_range(&self) -> [f64; 2] {
        let [lo, hi] = self.quantity.plausible_range();
        [self.from_internal(lo), self.from_internal(hi)]
    }
}

/// °C to K.
#[inline]
pub fn celsius_to_kelvin(t_c: f64) -> f64 {
    t_c + CELSIUS_OFFSET_K
}

/// K to °C.
#[inline]
pub fn kelvin_to_celsius(t_k: f64) -> f64 {
    t_k - CELSIUS_OFFSET_K
}

/// Vickers hardness number (kgf/mm²) to MPa (N/mm²): H = HV · g.
#[inline]
pub fn vickers_to_mpa(hv: f64) -> f64 {
    hv * STANDARD_GRAVITY
}

#[cfg(test)]
mod tests {
    use super::*;

    fn close(a: f64, b: f64, rel: f64) -> bool {
        (a - b).abs() <= rel * b.abs().max(1e-300)
    }

    // Reference: NIST SP 811 (2008) Appendix B.8 and B.9.
    #[test]
    fn nist_sp811_factors() {
        assert!(close(Unit::parse("psi").unwrap().to_internal(1.0), 6.894757e-3, 1e-12));
        assert!(close(Unit::parse("bar").unwrap().to_internal(1.0), 0.1, 1e-15));
        assert!(close(Unit::parse("kN").unwrap().to_internal(1.0), 1000.0, 1e-15));
        assert!(close(Unit::parse("lbf").unwrap().to_internal(1.0), 4.448222, 1e-12));
        assert!(close(Unit::parse("in").unwrap().to_internal(1.0), 25.4, 1e-15));
        // 32 °F is the ice point, 273.15 K; 212 °F is 373.15 K.
        assert!(close(Unit::parse("degF").unwrap().to_internal(32.0), 273.15, 1e-12));
        assert!(close(Unit::parse("degF").unwrap().to_internal(212.0), 373.15, 1e-12));
        assert!(close(Unit::parse("degC").unwrap().to_internal(540.0), 813.15, 1e-15));
        // Absolute pressure: one standard atmosphere absolute is zero gauge.
        assert!(Unit::parse("bara").unwrap().to_internal(1.01325).abs() < 1e-12);
    }

    #[test]
    fn unknown_and_wrong_quantity_units_are_named() {
        let e = Unit::parse("furlongs").unwrap_err();
        assert!(e.to_string().contains("furlongs"));
        let e = Unit::parse_for("bar", Quantity::Temperature).unwrap_err();
        assert!(e.to_string().contains("temperature units"));
        assert!(e.to_string().contains("degC"));
    }

    #[test]
    fn round_trip() {
        for name in Unit::spellings(None) {
            let u = Unit::parse(name).unwrap();
            let x = 123.456;
            assert!(close(u.from_internal(u.to_internal(x)), x, 1e-12), "{name}");
        }
    }

    // Absolute zero in the units people use: −273.15 °C and −459.67 °F
    // (NIST SP 811 B.9); a full vacuum is −1.01325 bar gauge and 0 bar
    // absolute (standard atmosphere, exact), inside the pressure bounds.
    #[test]
    fn plausible_ranges_in_each_unit() {
        let lo = |u: &str| Unit::parse(u).unwrap().plausible_range()[0];
        assert!((lo("degC") + 273.15).abs() < 1e-9);
        assert!((lo("degF") + 459.67).abs() < 1e-9);
        assert_eq!(lo("K"), 0.0);
        assert!(lo("bar") < -1.01325 && lo("bara") < 0.0);
        for name in Unit::spellings(None) {
            let u = Unit::parse(name).unwrap();
            let [lo, hi] = u.plausible_range();
            assert!(lo < hi && lo.is_finite() && hi.is_finite(), "{name}");
            let [ilo, ihi] = u.quantity.plausible_range();
            assert!(close(u.to_internal(hi), ihi, 1e-12) && (u.to_internal(lo) - ilo).abs() <= 1e-9 * ihi, "{name}");
        }
    }

    #[test]
    fn vickers() {
        // 200 HV = 200 kgf/mm² = 1961.33 N/mm² (definition of HV, ISO 6507-1).
        assert!(close(vickers_to_mpa(200.0), 1961.33, 1e-12));
    }
}
