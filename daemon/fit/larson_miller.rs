//! Larson-Miller master curve fitted to creep-rupture tests.
//!
//! # Model
//!
//! Larson & Miller (Trans. ASME 74, 1952, 765–775): the parameter
//! `P = T·(C + log10 t_r)` (T in K, t_r in h) depends on stress alone. The
//! master curve is a polynomial in `x = log10(σ/MPa)` of order k = 1…3,
//! `P(x) = a0 + a1·x + … + ak·x^k`, so each test gives
//!
//! ```text
//! log10 t_r = (a0 + a1·x + … + ak·x^k)/T − C
//! ```
//!
//! which is linear in the unknowns (a0 … ak, C). Fitting it by ordinary
//! least squares minimises the residual sum of squares in log10 time, the
//! usual criterion for rupture data (scatter is in life, not in stress or
//! temperature), and gives C directly: no scan over C is needed, because
//! the linear solution *is* the global minimiser of that sum over all C.
//! With `--constant` C is held and moved to the left-hand side:
//! `log10 t_r + C = P(x)/T`.
//!
//! # Order of the polynomial
//!
//! Given by the user, or chosen among the orders the data can carry by the
//! Bayesian information criterion (Schwarz, Ann. Stat. 6, 1978, 461–464)
//! `BIC = n·ln(RSS/n) + p·ln n`, p the number of fitted coefficients
//! (including C when it is fitted). BIC rather than AIC: it penalises
//! extra terms more for n ≥ 8, and a lower order turns over less when the
//! curve is extrapolated. `--criterion aic` uses `AIC = n·ln(RSS/n) + 2p`
//! (Akaike, IEEE Trans. Autom. Control 19, 1974, 716–723).
//!
//! # Statistics reported
//!
//! Standard errors from `s²(XᵀX)⁻¹`; the standard error of estimate
//! `SEE = √(RSS/(n−p))` in log10 h; `R² = 1 − RSS/Σ(log10 t − mean)²`;
//! internally studentized residuals `e_i/(SEE·√(1−h_ii))`, with tests
//! beyond `outlier_threshold` (2.5 by default) flagged as outliers.
//!
//! # Minimum curve
//!
//! `log10 t_min = log10 t_mean − k·SEE`, stored as
//! [`MinimumCurveRule::LogTimeOffset`] with offset `k·SEE`. The default
//! k = 1.645 is the one-sided 95 % point of the normal distribution: about
//! 95 % of tests like these lie above the minimum curve, if the scatter is
//! normal in log time and the uncertainty of the fitted coefficients is
//! ignored (common practice for screening; it is not a tolerance bound).

use super::error::{line_list, FitError};
use super::lsq::{least_squares, LsqError, Solution};
use super::RuptureTest;
use crate::physics::material::{LarsonMillerCurve, MinimumCurveRule};
use serde::Serialize;

/// The information criterion used to choose the polynomial order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize, clap::ValueEnum)]
#[serde(rename_all = "snake_case")]
pub enum Criterion {
    /// Bayesian (Schwarz) information criterion, n·ln(RSS/n) + p·ln n.
    #[default]
    Bic,
    /// Akaike information criterion, n·ln(RSS/n) + 2p.
    Aic,
}

impl Criterion {
    fn score(self, n: usize, p: usize, rss: f64) -> f64 {
        let n_f = n as f64;
        let fit = n_f * (rss / n_f).ln();
        match self {
            Criterion::Bic => fit + p as f64 * n_f.ln(),
            Criterion::Aic => fit + 2.0 * p as f64,
        }
    }

    fn name(self) -> &'static str {
        match self {
            Criterion::Bic => "BIC",
            Criterion::Aic => "AIC",
        }
    }
}

/// Options of a Larson-Miller fit.
#[derive(Debug, Clone, PartialEq)]
pub struct LmOptions {
    /// Hold C at this value; `None` fits it.
    pub constant: Option<f64>,
    /// Polynomial order 1…3; `None` chooses it by `criterion`.
    pub order: Option<usize>,
    pub criterion: Criterion,
    /// Minimum curve = mean − k·SEE in log10 time.
    pub k: f64,
    /// |standardized residual| above which a test is flagged.
    pub outlier_threshold: f64,
}

impl Default for LmOptions {
    fn default() -> Self {
        LmOptions { constant: None, order: None, criterion: Criterion::Bic, k: 1.645, outlier_threshold: 2.5 }
    }
}

/// How the polynomial order was settled.
#[derive(Debug, Clone, PartialEq, Serialize)]
#[serde(tag = "by", rename_all = "snake_case")]
pub enum OrderChoice {
    /// Given by the user.
    User,
    /// Chosen by an information criterion; the scores of every order
    /// tried (lower is better) and the orders the data could not carry.
    Criterion { criterion: Criterion, scores: Vec<OrderScore>, not_tried: Vec<String> },
}

/// Score of one candidate order.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct OrderScore {
    pub order: usize,
    pub score: f64,
    pub see: f64,
}

/// One test with its fitted value.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LmResidual {
    pub line: usize,
    pub heat: Option<String>,
    pub specimen: Option<String>,
    pub temperature_k: f64,
    pub stress_mpa: f64,
    pub rupture_h: f64,
    /// `T·(C + log10 t_r)` with the fitted (or given) C.
    pub parameter: f64,
    pub log10_observed_h: f64,
    pub log10_fitted_h: f64,
    /// Observed − fitted, log10 h.
    pub residual: f64,
    pub leverage: f64,
    /// Internally studentized residual; `None` when the test alone fixes a
    /// coefficient (leverage 1).
    pub standardized: Option<f64>,
    pub outlier: bool,
}

/// A fitted Larson-Miller master curve with its statistics.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LmFit {
    pub constant_c: f64,
    /// Standard error of C; `None` when C was given.
    pub constant_c_se: Option<f64>,
    pub constant_fixed: bool,
    pub order: usize,
    pub order_choice: OrderChoice,
    /// `[a0, a1, …]` of `P(x)`, x = log10(σ/MPa), P in K·(log10 h).
    pub coefficients: Vec<f64>,
    pub coefficient_se: Vec<f64>,
    /// Covariance of the fitted unknowns in the order (a0 … ak[, C]).
    pub covariance: Vec<Vec<f64>>,
    pub n_tests: usize,
    pub dof: usize,
    /// Residual sum of squares, (log10 h)².
    pub rss: f64,
    /// Standard error of estimate, log10 h.
    pub see_log10_h: f64,
    pub r_squared: f64,
    pub k: f64,
    /// `k·SEE`, log10 h: the minimum curve lies this far below the mean.
    pub minimum_offset_log10_h: f64,
    pub outlier_threshold: f64,
    pub stress_range_mpa: [f64; 2],
    pub temperature_range_k: [f64; 2],
    /// Distinct test temperatures, K, ascending.
    pub temperatures_k: Vec<f64>,
    pub residuals: Vec<LmResidual>,
    pub warnings: Vec<String>,
}

impl LmFit {
    /// Master-curve parameter P at stress `stress_mpa`.
    pub fn parameter(&self, stress_mpa: f64) -> f64 {
        poly(&self.coefficients, stress_mpa.log10())
    }

    /// log10 of the mean rupture life in hours.
    pub fn log10_rupture_life_h(&self, stress_mpa: f64, temperature_k: f64) -> f64 {
        self.parameter(stress_mpa) / temperature_k - self.constant_c
    }

    /// Mean rupture life in hours (no range checks: see the data ranges).
    pub fn rupture_life_h(&self, stress_mpa: f64, temperature_k: f64) -> f64 {
        10f64.powf(self.log10_rupture_life_h(stress_mpa, temperature_k))
    }

    /// Minimum-curve rupture life in hours: `10^(log10 t_mean − k·SEE)`.
    pub fn minimum_rupture_life_h(&self, stress_mpa: f64, temperature_k: f64) -> f64 {
        10f64.powf(self.log10_rupture_life_h(stress_mpa, temperature_k) - self.minimum_offset_log10_h)
    }

    /// The text for the `source` field of the material block.
    pub fn provenance(&self, input_name: &str) -> String {
        let c = if self.constant_fixed {
            format!("C = {} (given)", self.constant_c)
        } else {
            format!("C = {:.4} ± {:.4} (fitted)", self.constant_c, self.constant_c_se.unwrap_or(f64::NAN))
        };
        let order = match &self.order_choice {
            OrderChoice::User => format!("order {} (given)", self.order),
            OrderChoice::Criterion { criterion, .. } => {
                format!("order {} (by {})", self.order, criterion.name())
            }
        };
        format!(
            "lifeledger fit larson-miller screening fit of {input_name}: {} tests, {c}, {order}, \
             SEE = {:.4} log10 h, R² = {:.4}; minimum = mean − {}·SEE in log10 time. \
             Not accepted material data until reviewed by a responsible engineer.",
            self.n_tests, self.see_log10_h, self.r_squared, self.k
        )
    }

    /// The curve in the project's material format.
    pub fn curve(&self, input_name: &str) -> LarsonMillerCurve {
        LarsonMillerCurve {
            constant_c: self.constant_c,
            coefficients: self.coefficients.clone(),
            stress_range_mpa: self.stress_range_mpa,
            temperature_range_k: self.temperature_range_k,
            minimum: MinimumCurveRule::LogTimeOffset { offset: self.minimum_offset_log10_h },
            source: self.provenance(input_name),
        }
    }
}

pub(crate) fn poly(c: &[f64], x: f64) -> f64 {
    c.iter().rev().fold(0.0, |acc, a| acc * x + a)
}

fn poly_slope(c: &[f64], x: f64) -> f64 {
    c.iter().enumerate().skip(1).rev().fold(0.0, |acc, (i, a)| acc * x + a * i as f64)
}

/// Distinct values (relative tolerance 1e-9), ascending.
pub(crate) fn distinct(values: impl Iterator<Item = f64>) -> Vec<f64> {
    let mut v: Vec<f64> = values.collect();
    v.sort_by(f64::total_cmp);
    v.dedup_by(|a, b| (*a - *b).abs() <= 1e-9 * b.abs().max(a.abs()));
    v
}

pub(crate) fn range(values: impl Iterator<Item = f64>) -> [f64; 2] {
    values.fold([f64::INFINITY, f64::NEG_INFINITY], |[lo, hi], v| [lo.min(v), hi.max(v)])
}

fn validate(opts: &LmOptions) -> Result<(), FitError> {
    let bad = |m: String| Err(FitError::InvalidOption { message: m });
    if let Some(c) = opts.constant {
        if !c.is_finite() || c <= 0.0 {
            return bad(format!(
                "--constant {c}: the Larson-Miller constant must be a positive number (typically 15 to 25)"
            ));
        }
    }
    if let Some(o) = opts.order {
        if !(1..=3).contains(&o) {
            return bad(format!("--order {o}: the master curve order must be 1, 2 or 3"));
        }
    }
    if !opts.k.is_finite() || opts.k < 0.0 {
        return bad(format!("--k {}: the minimum-curve factor must be zero or positive", opts.k));
    }
    if !opts.outlier_threshold.is_finite() || opts.outlier_threshold <= 0.0 {
        return bad(format!("--outlier-threshold {}: must be positive", opts.outlier_threshold));
    }
    Ok(())
}

/// Unknowns for `order` (polynomial coefficients, plus C when fitted).
fn unknowns(order: usize, fixed: bool) -> usize {
    order + 1 + usize::from(!fixed)
}

fn design(tests: &[RuptureTest], order: usize, constant: Option<f64>) -> (Vec<Vec<f64>>, Vec<f64>) {
    let rows = tests
        .iter()
        .map(|t| {
            let x = t.stress_mpa.log10();
            let mut row: Vec<f64> = (0..=order).map(|j| x.powi(j as i32) / t.temperature_k).collect();
            if constant.is_none() {
                row.push(-1.0);
            }
            row
        })
        .collect();
    let y = tests.iter().map(|t| t.rupture_h.log10() + constant.unwrap_or(0.0)).collect();
    (rows, y)
}

fn coefficient_name(j: usize, order: usize, fixed: bool) -> String {
    if !fixed && j == order + 1 {
        "the constant C".into()
    } else {
        format!("coefficient a{j}")
    }
}

fn solve(tests: &[RuptureTest], order: usize, constant: Option<f64>) -> Result<Solution, FitError> {
    let (rows, y) = design(tests, order, constant);
    least_squares(&rows, &y).map_err(|e| match e {
        LsqError::Underdetermined { rows, cols } => {
            FitError::TooFewTests { message: format!("{rows} tests for {cols} unknowns") }
        }
        LsqError::RankDeficient { column } => FitError::Collinear {
            message: format!(
                "{} of the order-{order} master curve is not separable from the other terms \
                 with these tests (lines {}); use a lower --order, fix C with --constant, \
                 or add tests at other stresses and temperatures",
                coefficient_name(column, order, constant.is_some()),
                line_list(&tests.iter().map(|t| t.line).collect::<Vec<_>>())
            ),
        },
    })
}

/// Fit a Larson-Miller master curve to rupture tests.
///
/// Errors: invalid options; a single temperature while C is fitted (C and
/// a0 cannot be separated); fewer distinct stresses than order + 1; fewer
/// tests than unknowns + 1 (SEE needs a degree of freedom); numerically
/// collinear data.
pub fn fit_larson_miller(tests: &[RuptureTest], opts: &LmOptions) -> Result<LmFit, FitError> {
    validate(opts)?;
    let n = tests.len();
    let fixed = opts.constant.is_some();
    let lines: Vec<usize> = tests.iter().map(|t| t.line).collect();
    for t in tests {
        let ok = t.temperature_k.is_finite()
            && t.temperature_k > 0.0
            && t.stress_mpa.is_finite()
            && t.stress_mpa > 0.0
            && t.rupture_h.is_finite()
            && t.rupture_h > 0.0;
        if !ok {
            return Err(FitError::input(
                "tests",
                t.line,
                format!(
                    "temperature {} K, stress {} MPa and rupture time {} h must all be positive and finite",
                    t.temperature_k, t.stress_mpa, t.rupture_h
                ),
            ));
        }
    }
    if n == 0 {
        return Err(FitError::TooFewTests { message: "no tests given".into() });
    }
    let temperatures = distinct(tests.iter().map(|t| t.temperature_k));
    let stresses = distinct(tests.iter().map(|t| t.stress_mpa));
    if !fixed && temperatures.len() < 2 {
        return Err(FitError::Collinear {
            message: format!(
                "all {n} tests (lines {}) are at one temperature, {:.2} K, so the constant C cannot be \
                 separated from the curve; give C with --constant (20 is the classic choice of \
                 Larson & Miller 1952) or add tests at another temperature",
                line_list(&lines),
                temperatures[0]
            ),
        });
    }
    let feasible = |order: usize| -> Result<(), FitError> {
        let p = unknowns(order, fixed);
        if n < p + 1 {
            return Err(FitError::TooFewTests {
                message: format!(
                    "an order-{order} master curve{} has {p} unknowns, so at least {} tests are needed \
                     (one more than the unknowns, to estimate the scatter); the file has {n}",
                    if fixed { " with C given" } else { " with C fitted" },
                    p + 1
                ),
            });
        }
        if stresses.len() < order + 1 {
            return Err(FitError::Collinear {
                message: format!(
                    "an order-{order} master curve needs at least {} distinct stresses; the tests have {}",
                    order + 1,
                    stresses.len()
                ),
            });
        }
        Ok(())
    };

    let (order, sol, choice) = match opts.order {
        Some(order) => {
            feasible(order)?;
            (order, solve(tests, order, opts.constant)?, OrderChoice::User)
        }
        None => {
            let mut best: Option<(usize, Solution, f64)> = None;
            let mut scores = Vec::new();
            let mut not_tried = Vec::new();
            let mut first_error = None;
            for order in 1..=3 {
                let attempt = feasible(order).and_then(|_| solve(tests, order, opts.constant));
                match attempt {
                    Ok(sol) => {
                        let score = opts.criterion.score(n, unknowns(order, fixed), sol.rss);
                        scores.push(OrderScore { order, score, see: sol.see().unwrap_or(f64::NAN) });
                        if best.as_ref().is_none_or(|b| score < b.2) {
                            best = Some((order, sol, score));
                        }
                    }
                    Err(e) => {
                        not_tried.push(format!("order {order}: {e}"));
                        first_error.get_or_insert(e);
                    }
                }
            }
            match best {
                Some((order, sol, _)) => {
                    (order, sol, OrderChoice::Criterion { criterion: opts.criterion, scores, not_tried })
                }
                None => return Err(first_error.expect("at least one order was tried")),
            }
        }
    };

    let see = sol.see().expect("n > p was checked");
    let se = sol.standard_errors().expect("n > p was checked");
    let cov = sol.covariance.clone().expect("n > p was checked");
    let (constant_c, constant_c_se) = match opts.constant {
        Some(c) => (c, None),
        None => (sol.beta[order + 1], Some(se[order + 1])),
    };
    let coefficients = sol.beta[..=order].to_vec();
    let coefficient_se = se[..=order].to_vec();
    let log_t: Vec<f64> = tests.iter().map(|t| t.rupture_h.log10()).collect();
    let mean = log_t.iter().sum::<f64>() / n as f64;
    let tss: f64 = log_t.iter().map(|v| (v - mean).powi(2)).sum();
    let r_squared = if tss > 0.0 { 1.0 - sol.rss / tss } else { f64::NAN };
    let std_res = sol.standardized_residuals();
    let residuals: Vec<LmResidual> = tests
        .iter()
        .enumerate()
        .map(|(i, t)| {
            let fitted = sol.fitted[i] - opts.constant.unwrap_or(0.0);
            let standardized = std_res[i];
            LmResidual {
                line: t.line,
                heat: t.heat.clone(),
                specimen: t.specimen.clone(),
                temperature_k: t.temperature_k,
                stress_mpa: t.stress_mpa,
                rupture_h: t.rupture_h,
                parameter: t.temperature_k * (constant_c + log_t[i]),
                log10_observed_h: log_t[i],
                log10_fitted_h: fitted,
                residual: sol.residuals[i],
                leverage: sol.leverage[i],
                standardized,
                outlier: standardized.is_some_and(|z| z.abs() > opts.outlier_threshold),
            }
        })
        .collect();

    let stress_range_mpa = range(tests.iter().map(|t| t.stress_mpa));
    let temperature_range_k = range(tests.iter().map(|t| t.temperature_k));
    let mut warnings = Vec::new();
    if !fixed && !(10.0..=40.0).contains(&constant_c) {
        warnings.push(format!(
            "fitted C = {constant_c:.2} lies outside 10…40, where Larson-Miller constants of metals \
             usually fall (about 20 for steels, Larson & Miller 1952); the data may mix mechanisms \
             or heats. Consider --constant 20."
        ));
    }
    // Life must fall as stress rises: dP/dx < 0 over the data range.
    let (x0, x1) = (stress_range_mpa[0].log10(), stress_range_mpa[1].log10());
    let rising: Vec<f64> =
        (0..=100).map(|i| x0 + (x1 - x0) * i as f64 / 100.0).filter(|&x| poly_slope(&coefficients, x) >= 0.0).collect();
    if let (Some(a), Some(b)) = (rising.first(), rising.last()) {
        warnings.push(format!(
            "the master curve does not fall with stress between {:.1} and {:.1} MPa (life would grow \
             with stress there); use a lower --order",
            10f64.powf(*a),
            10f64.powf(*b)
        ));
    }
    let outliers: Vec<usize> = residuals.iter().filter(|r| r.outlier).map(|r| r.line).collect();
    if !outliers.is_empty() {
        warnings.push(format!(
            "{} test(s) with |standardized residual| > {}: line(s) {}; check them before accepting the fit",
            outliers.len(),
            opts.outlier_threshold,
            line_list(&outliers)
        ));
    }
    if fixed && temperatures.len() < 2 {
        warnings.push(format!(
            "all tests are at one temperature ({:.2} K): the given C carries the whole temperature \
             dependence, and temperature_range_k is that single temperature (the material check \
             wants low < high; widen it only with a documented reason)",
            temperatures[0]
        ));
    }
    let p = unknowns(order, fixed);
    if n < 2 * p + 2 {
        warnings.push(format!(
            "only {n} tests for {p} unknowns: the standard errors and the minimum curve rest on {} degree(s) of freedom",
            n - p
        ));
    }

    Ok(LmFit {
        constant_c,
        constant_c_se,
        constant_fixed: fixed,
        order,
        order_choice: choice,
        coefficients,
        coefficient_se,
        covariance: cov,
        n_tests: n,
        dof: sol.dof,
        rss: sol.rss,
        see_log10_h: see,
        r_squared,
        k: opts.k,
        minimum_offset_log10_h: opts.k * see,
        outlier_threshold: opts.outlier_threshold,
        stress_range_mpa,
        temperature_range_k,
        temperatures_k: temperatures,
        residuals,
        warnings,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn test(line: usize, t: f64, s: f64, h: f64) -> RuptureTest {
        RuptureTest { line, temperature_k: t, stress_mpa: s, rupture_h: h, heat: None, specimen: None }
    }

    /// Exact data on P = 30000 − 4000·x with C = 20 (numbers chosen here).
    fn exact(c: f64) -> Vec<RuptureTest> {
        let mut v = Vec::new();
        let mut line = 2;
        for t in [823.15, 873.15, 923.15] {
            for s in [50.0, 80.0, 120.0, 200.0] {
                let p = 30000.0 - 4000.0 * f64::log10(s);
                v.push(test(line, t, s, 10f64.powf(p / t - c)));
                line += 1;
            }
        }
        v
    }

    #[test]
    fn recovers_exact_constants() {
        let tests = exact(20.0);
        let fit = fit_larson_miller(&tests, &LmOptions { order: Some(1), ..Default::default() }).unwrap();
        assert!((fit.constant_c - 20.0).abs() < 1e-8, "{}", fit.constant_c);
        assert!((fit.coefficients[0] - 30000.0).abs() < 1e-5);
        assert!((fit.coefficients[1] + 4000.0).abs() < 1e-5);
        assert!(fit.see_log10_h < 1e-9);
    }

    #[test]
    fn single_temperature_needs_given_constant() {
        let tests: Vec<_> = exact(20.0).into_iter().filter(|t| t.temperature_k == 873.15).collect();
        let e = fit_larson_miller(&tests, &LmOptions::default()).unwrap_err().to_string();
        assert!(e.contains("one temperature") && e.contains("lines 6-9"), "{e}");
        let fit = fit_larson_miller(&tests, &LmOptions { constant: Some(20.0), order: Some(1), ..Default::default() })
            .unwrap();
        assert!((fit.coefficients[1] + 4000.0).abs() < 1e-6);
    }

    #[test]
    fn too_few_tests_and_stresses() {
        let all = exact(20.0);
        let tests = vec![all[0].clone(), all[4].clone(), all[8].clone(), all[1].clone()];
        let e = fit_larson_miller(&tests, &LmOptions { order: Some(3), ..Default::default() }).unwrap_err();
        assert!(matches!(e, FitError::TooFewTests { .. }), "{e}");
        let tests: Vec<_> = exact(20.0).into_iter().filter(|t| t.stress_mpa < 100.0).collect();
        let e = fit_larson_miller(&tests, &LmOptions { order: Some(2), ..Default::default() }).unwrap_err();
        assert!(e.to_string().contains("at least 3 distinct stresses; the tests have 2"), "{e}");
    }
}
