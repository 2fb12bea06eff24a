//! Material data as the physics core sees it: plain numbers, already in
//! internal units (K, MPa, hours), each carrying the text of its source.
//!
//! Loading these from the TOML library files is the job of
//! `settings::library`; this module only defines the shape of the data and
//! the small derived quantities that belong with it.

use serde::{Deserialize, Serialize};

/// A number together with where it came from. Every built-in material value
/// carries one, so that `lifeledger materials show` can print it and nobody
/// mistakes a screening value for an authoritative one.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Sourced {
    pub value: f64,
    pub source: String,
}

/// How the minimum (lower-bound) rupture curve is derived from the mean curve.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "rule", rename_all = "snake_case", deny_unknown_fields)]
pub enum MinimumCurveRule {
    /// Minimum rupture stress is `factor` times the mean rupture stress at the
    /// same time and temperature (a ±20 % scatter band gives factor 0.8).
    StressFactor { factor: f64 },
    /// Minimum log10 rupture time is the mean minus `offset` (for example
    /// k standard errors of estimate of the fit, in log10 hours).
    LogTimeOffset { offset: f64 },
}

impl std::fmt::Display for MinimumCurveRule {
    /// The rule in words, for people (`materials show`).
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            MinimumCurveRule::StressFactor { factor } => {
                write!(f, "{factor} × the mean rupture stress at the same time and temperature")
            }
            MinimumCurveRule::LogTimeOffset { offset } => {
                write!(f, "log10 of the mean rupture life minus {offset} (log10 h) at the same stress and temperature")
            }
        }
    }
}

/// Larson-Miller master curve of a grade.
///
/// `P = T · (C + log10 t_r)` with T in K and t_r in hours; the master curve
/// gives P as a polynomial in `x = log10(σ / MPa)`:
/// `P(x) = a0 + a1·x + a2·x² + a3·x³` (`coefficients = [a0, a1, a2, a3]`,
/// any length from 2 to 4).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct LarsonMillerCurve {
    pub constant_c: f64,
    pub coefficients: Vec<f64>,
    /// Stress range of the data behind the curve, MPa `[low, high]`.
    pub stress_range_mpa: [f64; 2],
    /// Temperature range of the data behind the curve, K `[low, high]`.
    pub temperature_range_k: [f64; 2],
    pub minimum: MinimumCurveRule,
    pub source: String,
}

/// Where the constants of a Norton law come from. It decides whether the
/// creep strain computed with them is evidence of its own or only the life
/// fraction said again in other units.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum NortonBasis {
    /// Fitted to measured minimum creep rates (for example by
    /// `lifeledger fit norton`).
    Measured,
    /// Derived from the grade's rupture curve (a tangent to it under an
    /// assumed Monkman-Grant product, as `config/materials/derive.py` does):
    /// the strain follows the life fraction and is no independent evidence.
    DerivedFromRupture,
    /// The grade file does not say. Treated like a derived law when strain
    /// is shown (the cautious reading).
    #[default]
    NotStated,
}

impl NortonBasis {
    /// The note that goes beside a creep strain computed with such a law;
    /// `None` for measured constants.
    pub fn strain_note(self) -> Option<&'static str> {
        match self {
            NortonBasis::Measured => None,
            NortonBasis::DerivedFromRupture => Some(
                "Norton constants derived from the rupture curve, not measured: creep strain restates the life \
                 fraction and is not independent evidence",
            ),
            NortonBasis::NotStated => Some(
                "basis of the Norton constants not stated (measured or derived from the rupture curve): creep \
                 strain may restate the life fraction and is not independent evidence until that is known",
            ),
        }
    }
}

/// Norton-Arrhenius secondary creep law `ε̇ = A · σ^n · exp(−Q / (R·T))`,
/// with ε̇ in 1/h, σ in MPa, Q in J/mol, T in K.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NortonLaw {
    /// Measured, derived from the rupture curve, or not stated (default).
    #[serde(default)]
    pub basis: NortonBasis,
    /// A in 1/h per MPa^n.
    pub a_per_h: f64,
    pub n: f64,
    pub q_j_per_mol: f64,
    pub source: String,
}

/// A published reference rupture strength, kept with the grade so tests and
/// `materials show` can compare the master curve against it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReferenceRuptureStrength {
    pub temperature_c: f64,
    pub hours: f64,
    pub stress_mpa: f64,
    pub source: String,
    /// Why the point is left out of the fit and of the 5 % rule, when it is;
    /// it stays in the file and is still compared with the curve.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub dropped: Option<String>,
}

/// One material grade with everything the engine needs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Material {
    /// Short key used in configuration, for example `"2.25Cr-1Mo"`.
    pub grade: String,
    #[serde(default)]
    pub aliases: Vec<String>,
    #[serde(default)]
    pub description: String,
    /// Solidus or melting temperature in K.
    pub melting_point_k: Sourced,
    /// Temperature below which creep is neglected, K. When absent the
    /// rule of thumb 0.4·Tm applies (see [`Material::creep_threshold_k`]).
    #[serde(default)]
    pub creep_threshold_k: Option<Sourced>,
    pub larson_miller: LarsonMillerCurve,
    #[serde(default)]
    pub norton: Option<NortonLaw>,
    /// Vickers hardness HV (kgf/mm²) at service temperature, for wear.
    #[serde(default)]
    pub hardness_hv: Option<Sourced>,
    /// Why the mean rupture curve has not been checked against a second
    /// published source (absent: it has been, see tests/material_library.rs).
    /// `materials show` prints it and check-config warns for every creep
    /// part that uses the grade.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub unchecked_curve: Option<String>,
    /// Published rupture strengths used to check the master curve.
    #[serde(default)]
    pub reference_rupture_strengths: Vec<ReferenceRuptureStrength>,
    /// Elastic and thermal properties by temperature (fatigue needs them;
    /// a grade without them still serves creep and wear).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub elastic: Option<ThermoElastic>,
    /// Fatigue curve and creep-fatigue envelope of the grade.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub fatigue: Option<MaterialFatigue>,
}

/// A property tabulated against temperature, with its source.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Tabulated {
    /// Temperatures, °C, rising.
    pub temperature_c: Vec<f64>,
    /// Values at those temperatures, in the unit the key names.
    pub values: Vec<f64>,
    pub source: String,
}

impl Tabulated {
    /// The value at `t_k` (K): straight-line interpolation between
    /// tabulated temperatures, the end segments extended beyond the table
    /// (common practice for smooth property tables). Needs two or more
    /// points (checked when the library loads).
    pub fn at_k(&self, t_k: f64) -> f64 {
        let t = t_k - 273.15;
        let ts = &self.temperature_c;
        let n = ts.len();
        if n == 1 {
            return self.values[0];
        }
        let i = ts.windows(2).position(|w| t <= w[1]).unwrap_or(n - 2);
        let (t0, t1, v0, v1) = (ts[i], ts[i + 1], self.values[i], self.values[i + 1]);
        v0 + (v1 - v0) * (t - t0) / (t1 - t0)
    }

    /// What is wrong with the table, if anything (for validation).
    pub fn problem(&self) -> Option<String> {
        if self.temperature_c.len() < 2 || self.temperature_c.len() != self.values.len() {
            return Some("needs two or more temperatures and as many values".into());
        }
        if self.temperature_c.windows(2).any(|w| !(w[0] < w[1])) {
            return Some("temperatures must rise".into());
        }
        if self.values.iter().chain(&self.temperature_c).any(|v| !v.is_finite())
            || self.values.iter().any(|v| *v <= 0.0)
        {
            return Some("values must be finite and positive".into());
        }
        None
    }
}

/// Elastic and thermal properties the thermal stress needs.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ThermoElastic {
    /// Young's modulus E, MPa.
    pub youngs_modulus_mpa: Tabulated,
    /// Instantaneous (differential) coefficient of thermal expansion α, 1/K.
    pub thermal_expansion_per_k: Tabulated,
    /// Poisson's ratio ν.
    pub poisson_ratio: Sourced,
    /// Thermal diffusivity a = λ/(ρ·c), mm²/s (the ramp-derived
    /// through-wall difference needs it).
    pub thermal_diffusivity_mm2_per_s: Tabulated,
}

/// A grade's fatigue data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct MaterialFatigue {
    /// Built-in design fatigue curve for the grade (see
    /// `physics::fatigue::curve`), absent when none of them applies.
    #[serde(default)]
    pub design_curve: Option<super::fatigue::curve::DesignCurve>,
    /// Why this curve (or why none).
    pub curve_source: String,
    /// Intersection point of the creep-fatigue envelope, when a code gives
    /// one for the grade.
    #[serde(default)]
    pub creep_fatigue_envelope: Option<EnvelopePoint>,
}

/// The (fatigue, creep) damage intersection of a bilinear envelope.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EnvelopePoint {
    pub fatigue: f64,
    pub creep: f64,
    pub source: String,
}

impl Material {
    /// Creep threshold in K: the grade's own value, else 0.4·Tm.
    pub fn creep_threshold_k(&self) -> f64 {
        match &self.creep_threshold_k {
            Some(s) => s.value,
            None => super::temperature::default_creep_threshold_k(self.melting_point_k.value),
        }
    }
}
