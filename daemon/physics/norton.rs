//! Norton-Arrhenius secondary creep: `ε̇ = A · σ^n · exp(−Q / (R·T))`.
//!
//! ε̇ in 1/h, σ in MPa, Q in J/mol, T in K; R = 8.314 462 618 J/(mol·K)
//! (CODATA 2018). Norton's power law (F. H. Norton, *The Creep of Steel at
//! High Temperatures*, 1929) with an Arrhenius temperature term, as in
//! Frost & Ashby, *Deformation-Mechanism Maps* (1982). It describes the
//! steady (secondary) stage only: primary and tertiary creep are not
//! included, so accumulated strain is a lower estimate late in life.

use super::material::NortonLaw;

/// Molar gas constant, J/(mol·K), CODATA 2018 (exact since the 2019 SI).
pub const GAS_CONSTANT: f64 = 8.314_462_618;

/// Minimum creep rate in 1/h. Uses `ln σ` so the engine can share one
/// logarithm between rupture life and creep rate.
#[inline]
pub fn creep_rate_per_h_ln(law: &NortonLaw, ln_stress: f64, temperature_k: f64) -> f64 {
    law.a_per_h * (law.n * ln_stress - law.q_j_per_mol / (GAS_CONSTANT * temperature_k)).exp()
}

/// Minimum creep rate in 1/h at `stress_mpa` and `temperature_k`.
#[inline]
pub fn creep_rate_per_h(law: &NortonLaw, stress_mpa: f64, temperature_k: f64) -> f64 {
    if stress_mpa <= 0.0 {
        return 0.0;
    }
    creep_rate_per_h_ln(law, stress_mpa.ln(), temperature_k)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn law() -> NortonLaw {
        NortonLaw {
            basis: crate::physics::material::NortonBasis::Measured,
            a_per_h: 1.0e10,
            n: 5.0,
            q_j_per_mol: 300_000.0,
            source: "test".into(),
        }
    }

    // Power law: doubling stress multiplies the rate by 2^n.
    #[test]
    fn stress_exponent() {
        let l = law();
        let r = creep_rate_per_h(&l, 200.0, 850.0) / creep_rate_per_h(&l, 100.0, 850.0);
        assert!((r - 32.0).abs() < 1e-9);
    }

    // Arrhenius: ratio of rates at T1, T2 is exp(Q/R (1/T1 − 1/T2)).
    #[test]
    fn activation_energy() {
        let l = law();
        let r = creep_rate_per_h(&l, 100.0, 900.0) / creep_rate_per_h(&l, 100.0, 850.0);
        let expect = (300_000.0 / GAS_CONSTANT * (1.0 / 850.0 - 1.0 / 900.0)).exp();
        assert!((r / expect - 1.0).abs() < 1e-12);
    }
}
