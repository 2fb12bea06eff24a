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
    /// Published rupture strengths used to check the master curve.
    #[serde(default)]
    pub reference_rupture_strengths: Vec<ReferenceRuptureStrength>,
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
