//! Norton-Arrhenius creep law fitted to minimum-creep-rate tests.
//!
//! # Model
//!
//! `ε̇ = A·σ^n·exp(−Q/(R·T))` (Norton, *The Creep of Steel at High
//! Temperatures*, 1929, with an Arrhenius temperature term as in Frost &
//! Ashby, *Deformation-Mechanism Maps*, 1982), ε̇ in 1/h, σ in MPa, T in
//! K, Q in J/mol, R = 8.314 462 618 J/(mol·K) (CODATA 2018). Taking logs,
//!
//! ```text
//! ln ε̇ = ln A + n·ln σ − Q·(1/(R·T))
//! ```
//!
//! is linear in (ln A, n, Q) and is fitted by ordinary least squares in
//! ln ε̇ (scatter of creep rates is multiplicative). With exactly three
//! tests the 3×3 system is solved exactly and no scatter is estimated;
//! with more, standard errors come from `s²(XᵀX)⁻¹` and residuals are
//! internally studentized as in the Larson-Miller fit.
//!
//! # Data the fit needs
//!
//! Tests at one temperature cannot separate Q from A, and tests at one
//! stress cannot separate n from A: both are errors, as is any set where
//! stress and temperature vary together (collinear). Two temperatures or
//! two stresses do determine the law but cannot show whether its form
//! holds (a change of creep mechanism bends the lines), so that is a
//! warning.

use super::error::{line_list, FitError};
use super::larson_miller::{distinct, range};
use super::lsq::{least_squares, LsqError};
use super::RateTest;
use crate::physics::material::{NortonBasis, NortonLaw};
use crate::physics::norton::GAS_CONSTANT;
use serde::Serialize;

/// Options of a Norton fit.
#[derive(Debug, Clone, PartialEq)]
pub struct NortonOptions {
    /// |standardized residual| above which a test is flagged.
    pub outlier_threshold: f64,
}

impl Default for NortonOptions {
    fn default() -> Self {
        NortonOptions { outlier_threshold: 2.5 }
    }
}

/// One test with its fitted value.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NortonResidual {
    pub line: usize,
    pub heat: Option<String>,
    pub specimen: Option<String>,
    pub temperature_k: f64,
    pub stress_mpa: f64,
    pub rate_per_h: f64,
    pub ln_observed: f64,
    pub ln_fitted: f64,
    /// Observed − fitted, in ln(1/h).
    pub residual: f64,
    pub leverage: f64,
    pub standardized: Option<f64>,
    pub outlier: bool,
}

/// A fitted Norton-Arrhenius law with its statistics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct NortonFit {
    /// ln(A / (1/h per MPa^n)).
    pub ln_a: f64,
    pub a_per_h: f64,
    pub n: f64,
    pub q_j_per_mol: f64,
    /// Standard errors of (ln A, n, Q); `None` for an exact three-test solution.
    pub ln_a_se: Option<f64>,
    pub n_se: Option<f64>,
    pub q_se_j_per_mol: Option<f64>,
    /// Covariance of (ln A, n, Q); `None` for an exact solution.
    pub covariance: Option<Vec<Vec<f64>>>,
    /// True when three tests were solved exactly.
    pub exact: bool,
    pub n_tests: usize,
    pub dof: usize,
    pub rss: f64,
    /// Standard error of estimate in ln ε̇; `None` for an exact solution.
    pub see_ln: Option<f64>,
    pub r_squared: Option<f64>,
    pub outlier_threshold: f64,
    pub stress_range_mpa: [f64; 2],
    pub temperature_range_k: [f64; 2],
    /// Distinct test temperatures, K, ascending.
    pub temperatures_k: Vec<f64>,
    pub residuals: Vec<NortonResidual>,
    pub warnings: Vec<String>,
}

impl NortonFit {
    /// Fitted minimum creep rate in 1/h.
    pub fn rate_per_h(&self, stress_mpa: f64, temperature_k: f64) -> f64 {
        (self.ln_a + self.n * stress_mpa.ln() - self.q_j_per_mol / (GAS_CONSTANT * temperature_k)).exp()
    }

    /// The text for the `source` field of the `[norton]` block.
    pub fn provenance(&self, input_name: &str) -> String {
        let how = if self.exact {
            "exact solution of 3 tests (no scatter estimate)".to_string()
        } else {
            format!(
                "least squares on {} tests, SEE = {:.4} in ln rate, R² = {:.4}",
                self.n_tests,
                self.see_ln.unwrap_or(f64::NAN),
                self.r_squared.unwrap_or(f64::NAN)
            )
        };
        format!(
            "lifeledger fit norton screening fit of {input_name}: {how}; data {:.1}-{:.1} MPa, \
             {:.2}-{:.2} K. Not accepted material data until reviewed by a responsible engineer.",
            self.stress_range_mpa[0],
            self.stress_range_mpa[1],
            self.temperature_range_k[0],
            self.temperature_range_k[1]
        )
    }

    /// The law in the project's material format.
    pub fn law(&self, input_name: &str) -> NortonLaw {
        NortonLaw {
            // Fitted to minimum creep rates from tests: measured constants.
            basis: NortonBasis::Measured,
            a_per_h: self.a_per_h,
            n: self.n,
            q_j_per_mol: self.q_j_per_mol,
            source: self.provenance(input_name),
        }
    }
}

/// Fit `ln ε̇ = ln A + n ln σ − Q/(R T)` to minimum-creep-rate tests.
pub fn fit_norton(tests: &[RateTest], opts: &NortonOptions) -> Result<NortonFit, FitError> {
    if !opts.outlier_threshold.is_finite() || opts.outlier_threshold <= 0.0 {
        return Err(FitError::InvalidOption {
            message: format!("--outlier-threshold {}: must be positive", opts.outlier_threshold),
        });
    }
    let n_tests = tests.len();
    for t in tests {
        let ok = [t.temperature_k, t.stress_mpa, t.rate_per_h].iter().all(|v| v.is_finite() && *v > 0.0);
        if !ok {
            return Err(FitError::input(
                "tests",
                t.line,
                format!(
                    "temperature {} K, stress {} MPa and rate {} 1/h must all be positive and finite",
                    t.temperature_k, t.stress_mpa, t.rate_per_h
                ),
            ));
        }
    }
    if n_tests < 3 {
        return Err(FitError::TooFewTests {
            message: format!(
                "the Norton-Arrhenius law has 3 unknowns (A, n, Q), so at least 3 tests are needed; the file has {n_tests}"
            ),
        });
    }
    let lines: Vec<usize> = tests.iter().map(|t| t.line).collect();
    let temperatures = distinct(tests.iter().map(|t| t.temperature_k));
    let stresses = distinct(tests.iter().map(|t| t.stress_mpa));
    if temperatures.len() < 2 {
        return Err(FitError::Collinear {
            message: format!(
                "all {n_tests} tests (lines {}) are at one temperature, {:.2} K, so the activation energy Q \
                 cannot be separated from A; add tests at a second temperature",
                line_list(&lines),
                temperatures[0]
            ),
        });
    }
    if stresses.len() < 2 {
        return Err(FitError::Collinear {
            message: format!(
                "all {n_tests} tests (lines {}) are at one stress, {} MPa, so the stress exponent n \
                 cannot be separated from A; add tests at a second stress",
                line_list(&lines),
                stresses[0]
            ),
        });
    }
    let rows: Vec<Vec<f64>> =
        tests.iter().map(|t| vec![1.0, t.stress_mpa.ln(), -1.0 / (GAS_CONSTANT * t.temperature_k)]).collect();
    let y: Vec<f64> = tests.iter().map(|t| t.rate_per_h.ln()).collect();
    let sol = least_squares(&rows, &y).map_err(|e| match e {
        LsqError::Underdetermined { rows, .. } => {
            FitError::TooFewTests { message: format!("{rows} tests for 3 unknowns") }
        }
        LsqError::RankDeficient { .. } => FitError::Collinear {
            message: format!(
                "stress and temperature vary together in these tests (lines {}), so the stress \
                 exponent n and the activation energy Q cannot be separated; add tests that change \
                 stress at a fixed temperature, or temperature at a fixed stress",
                line_list(&lines)
            ),
        },
    })?;
    let exact = sol.dof == 0;
    let se = sol.standard_errors();
    let std_res = sol.standardized_residuals();
    let see_ln = sol.see();
    let mean = y.iter().sum::<f64>() / n_tests as f64;
    let tss: f64 = y.iter().map(|v| (v - mean).powi(2)).sum();
    let r_squared = (!exact && tss > 0.0).then(|| 1.0 - sol.rss / tss);
    let residuals: Vec<NortonResidual> = tests
        .iter()
        .enumerate()
        .map(|(i, t)| NortonResidual {
            line: t.line,
            heat: t.heat.clone(),
            specimen: t.specimen.clone(),
            temperature_k: t.temperature_k,
            stress_mpa: t.stress_mpa,
            rate_per_h: t.rate_per_h,
            ln_observed: y[i],
            ln_fitted: sol.fitted[i],
            residual: sol.residuals[i],
            leverage: sol.leverage[i],
            standardized: std_res[i],
            outlier: std_res[i].is_some_and(|z| z.abs() > opts.outlier_threshold),
        })
        .collect();
    let (ln_a, n, q) = (sol.beta[0], sol.beta[1], sol.beta[2]);
    let mut warnings = Vec::new();
    if exact {
        warnings.push(
            "exactly three tests: the law passes through them exactly, with no estimate of scatter \
             or of the uncertainty of A, n and Q"
                .to_string(),
        );
    }
    if temperatures.len() == 2 {
        warnings
            .push("tests at only two temperatures: the Arrhenius form (one Q over the range) cannot be checked".into());
    }
    if stresses.len() == 2 {
        warnings.push("tests at only two stresses: the power-law form (one n over the range) cannot be checked".into());
    }
    if !(1.0..=20.0).contains(&n) {
        warnings.push(format!(
            "fitted n = {n:.3} lies outside 1…20, the range of creep mechanisms in metals (Frost & Ashby 1982)"
        ));
    }
    if q <= 0.0 {
        warnings.push(format!("fitted Q = {q:.0} J/mol is not positive: the rates do not rise with temperature"));
    }
    let outliers: Vec<usize> = residuals.iter().filter(|r| r.outlier).map(|r| r.line).collect();
    if !outliers.is_empty() {
        warnings.push(format!(
            "{} test(s) with |standardized residual| > {}: line(s) {}",
            outliers.len(),
            opts.outlier_threshold,
            line_list(&outliers)
        ));
    }
    Ok(NortonFit {
        ln_a,
        a_per_h: ln_a.exp(),
        n,
        q_j_per_mol: q,
        ln_a_se: se.as_ref().map(|s| s[0]),
        n_se: se.as_ref().map(|s| s[1]),
        q_se_j_per_mol: se.as_ref().map(|s| s[2]),
        covariance: sol.covariance.clone(),
        exact,
        n_tests,
        dof: sol.dof,
        rss: sol.rss,
        see_ln,
        r_squared,
        outlier_threshold: opts.outlier_threshold,
        stress_range_mpa: range(tests.iter().map(|t| t.stress_mpa)),
        temperature_range_k: range(tests.iter().map(|t| t.temperature_k)),
        temperatures_k: temperatures,
        residuals,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rt(line: usize, t: f64, s: f64, r: f64) -> RateTest {
        RateTest { line, temperature_k: t, stress_mpa: s, rate_per_h: r, heat: None, specimen: None }
    }

    // Hand-made exact system: with A = 1e10, n = 5, Q = 300 kJ/mol the
    // rates at (850 K, 100 MPa), (850 K, 200 MPa), (900 K, 100 MPa) fix the
    // law uniquely (three equations, three unknowns).
    #[test]
    fn three_tests_are_solved_exactly() {
        let law = |t: f64, s: f64| 1e10 * s.powf(5.0) * (-300_000.0 / (GAS_CONSTANT * t)).exp();
        let tests = vec![
            rt(2, 850.0, 100.0, law(850.0, 100.0)),
            rt(3, 850.0, 200.0, law(850.0, 200.0)),
            rt(4, 900.0, 100.0, law(900.0, 100.0)),
        ];
        let fit = fit_norton(&tests, &NortonOptions::default()).unwrap();
        assert!(fit.exact && fit.n_se.is_none());
        assert!((fit.n - 5.0).abs() < 1e-9);
        assert!((fit.q_j_per_mol / 300_000.0 - 1.0).abs() < 1e-9);
        assert!((fit.a_per_h / 1e10 - 1.0).abs() < 1e-6);
    }

    #[test]
    fn degenerate_sets_are_errors() {
        let one_t = vec![rt(2, 850.0, 100.0, 1e-5), rt(3, 850.0, 150.0, 1e-4), rt(4, 850.0, 200.0, 1e-3)];
        assert!(fit_norton(&one_t, &NortonOptions::default()).unwrap_err().to_string().contains("one temperature"));
        let one_s = vec![rt(2, 850.0, 100.0, 1e-5), rt(3, 875.0, 100.0, 1e-4), rt(4, 900.0, 100.0, 1e-3)];
        assert!(fit_norton(&one_s, &NortonOptions::default()).unwrap_err().to_string().contains("one stress"));
        // ln σ exactly linear in 1/T: n and Q cannot be told apart.
        let k = |t: f64| (1000.0 * (1.0 / t)).exp();
        let coupled = vec![
            rt(2, 800.0, k(800.0), 1e-5),
            rt(3, 850.0, k(850.0), 1e-4),
            rt(4, 900.0, k(900.0), 1e-3),
            rt(5, 950.0, k(950.0), 1e-2),
        ];
        let e = fit_norton(&coupled, &NortonOptions::default()).unwrap_err().to_string();
        assert!(e.contains("vary together") && e.contains("lines 2-5"), "{e}");
        assert!(matches!(fit_norton(&one_t[..2], &NortonOptions::default()), Err(FitError::TooFewTests { .. })));
    }
}
