//! Ordinary linear least squares for the fits, small and dependency-free.
//!
//! Solves `min ‖y − Xβ‖²` by Householder QR of the column-scaled design
//! matrix (Golub & Van Loan, *Matrix Computations*, 4th ed., §5.2 and
//! §5.3): each column is divided by its Euclidean norm first, so columns
//! of very different size (1/T ≈ 10⁻³ next to a constant −1) do not spoil
//! the rank test, then `X_s = Q·R` and `R·β_s = Qᵀy`.
//!
//! Alongside β it returns what the reports need, with the usual
//! definitions of regression analysis (Draper & Smith, *Applied Regression
//! Analysis*, 3rd ed., ch. 5 and 8):
//!
//! * residuals `e = y − Xβ`, `RSS = Σe²`, degrees of freedom `n − p`;
//! * `s² = RSS/(n − p)` and the covariance `s²·(XᵀX)⁻¹`, computed as
//!   `s²·D⁻¹R⁻¹R⁻ᵀD⁻¹` (D the column norms) without forming XᵀX, whose
//!   condition number is the square of X's;
//! * leverages `h_ii`, the diagonal of the hat matrix `X(XᵀX)⁻¹Xᵀ = QQᵀ`.
//!
//! A column whose part orthogonal to the earlier columns is below
//! [`RANK_TOLERANCE`] of its own norm is reported as rank deficient: the
//! data cannot separate that unknown from the ones before it.

/// Relative size below which a column counts as a combination of the
/// columns before it (the scaled R diagonal; about 10⁷ times the double
/// precision rounding of the columns themselves).
pub const RANK_TOLERANCE: f64 = 1e-9;

/// A least-squares solution with its statistics.
#[derive(Debug, Clone, PartialEq)]
pub struct Solution {
    pub beta: Vec<f64>,
    /// `s²(XᵀX)⁻¹`; `None` when there are no degrees of freedom (exact fit).
    pub covariance: Option<Vec<Vec<f64>>>,
    pub fitted: Vec<f64>,
    pub residuals: Vec<f64>,
    /// Diagonal of the hat matrix.
    pub leverage: Vec<f64>,
    pub rss: f64,
    pub dof: usize,
}

impl Solution {
    /// Standard error of estimate `s = √(RSS/(n−p))`; `None` for an exact fit.
    pub fn see(&self) -> Option<f64> {
        (self.dof > 0).then(|| (self.rss / self.dof as f64).sqrt())
    }

    /// Standard errors `√diag(s²(XᵀX)⁻¹)`.
    pub fn standard_errors(&self) -> Option<Vec<f64>> {
        self.covariance.as_ref().map(|c| (0..c.len()).map(|i| c[i][i].sqrt()).collect())
    }

    /// Internally studentized residuals `e_i / (s·√(1 − h_ii))`; `None`
    /// where `h_ii = 1` (the test alone determines a coefficient) or there
    /// is no estimate of s.
    pub fn standardized_residuals(&self) -> Vec<Option<f64>> {
        let s = self.see();
        self.residuals
            .iter()
            .zip(&self.leverage)
            .map(|(e, h)| match s {
                Some(s) if s > 0.0 && 1.0 - h > 1e-10 => Some(e / (s * (1.0 - h).sqrt())),
                _ => None,
            })
            .collect()
    }
}

/// Why a least-squares problem could not be solved.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LsqError {
    /// Fewer rows than unknowns.
    Underdetermined { rows: usize, cols: usize },
    /// Column `column` (0-based) is (numerically) a combination of the
    /// columns before it, or zero.
    RankDeficient { column: usize },
}

/// Solve the least-squares problem for the design matrix given by `rows`
/// (n rows of p entries) and observations `y`.
pub fn least_squares(rows: &[Vec<f64>], y: &[f64]) -> Result<Solution, LsqError> {
    let n = rows.len();
    assert_eq!(n, y.len(), "one observation per row");
    let p = rows.first().map_or(0, Vec::len);
    assert!(rows.iter().all(|r| r.len() == p), "rows of equal length");
    if n < p || p == 0 {
        return Err(LsqError::Underdetermined { rows: n, cols: p });
    }
    // Column-major scaled copy.
    let mut norms = vec![0.0; p];
    let mut a: Vec<Vec<f64>> = (0..p).map(|j| rows.iter().map(|r| r[j]).collect()).collect();
    for (j, col) in a.iter_mut().enumerate() {
        let d = col.iter().map(|v| v * v).sum::<f64>().sqrt();
        if d == 0.0 || !d.is_finite() {
            return Err(LsqError::RankDeficient { column: j });
        }
        norms[j] = d;
        col.iter_mut().for_each(|v| *v /= d);
    }
    let mut qty = y.to_vec();
    // Householder vectors v_k (length n − k) with their βk = 2/(vᵀv).
    let mut reflectors: Vec<(Vec<f64>, f64)> = Vec::with_capacity(p);
    for k in 0..p {
        let norm = a[k][k..].iter().map(|v| v * v).sum::<f64>().sqrt();
        if norm < RANK_TOLERANCE {
            return Err(LsqError::RankDeficient { column: k });
        }
        let alpha = if a[k][k] > 0.0 { -norm } else { norm };
        let mut v: Vec<f64> = a[k][k..].to_vec();
        v[0] -= alpha;
        let vtv: f64 = v.iter().map(|x| x * x).sum();
        let tau = 2.0 / vtv;
        let apply = |col: &mut [f64]| {
            let dot: f64 = v.iter().zip(col.iter()).map(|(a, b)| a * b).sum();
            let f = tau * dot;
            col.iter_mut().zip(&v).for_each(|(c, vi)| *c -= f * vi);
        };
        for col in a.iter_mut().skip(k + 1) {
            apply(&mut col[k..]);
        }
        apply(&mut qty[k..]);
        a[k][k] = alpha;
        a[k][k + 1..].iter_mut().for_each(|x| *x = 0.0);
        reflectors.push((v, tau));
    }
    // R is a[j][i] for i ≤ j (column j, row i). Back substitution.
    let r = |i: usize, j: usize| a[j][i];
    let mut beta_s = vec![0.0; p];
    for i in (0..p).rev() {
        let s: f64 = (i + 1..p).map(|j| r(i, j) * beta_s[j]).sum();
        beta_s[i] = (qty[i] - s) / r(i, i);
    }
    let beta: Vec<f64> = beta_s.iter().zip(&norms).map(|(b, d)| b / d).collect();
    let fitted: Vec<f64> = rows.iter().map(|row| row.iter().zip(&beta).map(|(x, b)| x * b).sum()).collect();
    let residuals: Vec<f64> = y.iter().zip(&fitted).map(|(y, f)| y - f).collect();
    let rss: f64 = residuals.iter().map(|e| e * e).sum();
    let dof = n - p;
    // Thin Q: apply the reflectors in reverse order to the first p unit vectors.
    let mut leverage = vec![0.0; n];
    for j in 0..p {
        let mut q = vec![0.0; n];
        q[j] = 1.0;
        for (k, (v, tau)) in reflectors.iter().enumerate().rev() {
            let dot: f64 = v.iter().zip(&q[k..]).map(|(a, b)| a * b).sum();
            let f = tau * dot;
            q[k..].iter_mut().zip(v).for_each(|(c, vi)| *c -= f * vi);
        }
        leverage.iter_mut().zip(&q).for_each(|(h, qi)| *h += qi * qi);
    }
    let covariance = (dof > 0).then(|| {
        // Columns of R⁻¹ (upper triangular) by back substitution of R·c = e_j.
        let back = |j: usize| -> Vec<f64> {
            let mut c = vec![0.0; p];
            c[j] = 1.0 / r(j, j);
            for i in (0..j).rev() {
                let s: f64 = (i + 1..=j).map(|k| r(i, k) * c[k]).sum();
                c[i] = -s / r(i, i);
            }
            c
        };
        let cols: Vec<Vec<f64>> = (0..p).map(back).collect();
        let rinv = |i: usize, k: usize| cols[k][i];
        let s2 = rss / dof as f64;
        let mut cov = vec![vec![0.0; p]; p];
        for i in 0..p {
            for j in 0..p {
                let m: f64 = (i.max(j)..p).map(|k| rinv(i, k) * rinv(j, k)).sum();
                cov[i][j] = s2 * m / (norms[i] * norms[j]);
            }
        }
        cov
    });
    Ok(Solution { beta, covariance, fitted, residuals, leverage, rss, dof })
}

#[cfg(test)]
mod tests {
    use super::*;

    // Straight line through (0,1), (1,3), (2,4), (3,4), worked by hand:
    // x̄ = 1.5, ȳ = 3, Sxy = 5, Sxx = 5, so β = (1.5, 1.0), residuals
    // (−0.5, 0.5, 0.5, −0.5), RSS = 1, s² = 0.5; Var(slope) = s²/Sxx,
    // Var(intercept) = s²(1/n + x̄²/Sxx), Cov = −s²·x̄/Sxx.
    #[test]
    fn straight_line_by_hand() {
        let rows: Vec<Vec<f64>> = (0..4).map(|i| vec![1.0, i as f64]).collect();
        let sol = least_squares(&rows, &[1.0, 3.0, 4.0, 4.0]).unwrap();
        assert!((sol.beta[0] - 1.5).abs() < 1e-12 && (sol.beta[1] - 1.0).abs() < 1e-12);
        assert!((sol.rss - 1.0).abs() < 1e-12);
        let cov = sol.covariance.unwrap();
        assert!((cov[1][1] - 0.1).abs() < 1e-12);
        assert!((cov[0][0] - 0.35).abs() < 1e-12);
        assert!((cov[0][1] + 0.15).abs() < 1e-12 && (cov[1][0] + 0.15).abs() < 1e-12);
        // Leverages of a straight line: 1/n + (x − x̄)²/Sxx; they sum to p.
        let h: f64 = sol.leverage.iter().sum();
        assert!((h - 2.0).abs() < 1e-12);
        assert!((sol.leverage[0] - (0.25 + 2.25 / 5.0)).abs() < 1e-12);
    }

    #[test]
    fn collinear_columns_are_found() {
        let rows: Vec<Vec<f64>> = (0..5).map(|i| vec![1.0, i as f64, 2.0 * i as f64 - 1.0]).collect();
        assert_eq!(least_squares(&rows, &[0.0; 5]), Err(LsqError::RankDeficient { column: 2 }));
        let rows: Vec<Vec<f64>> = (0..5).map(|_| vec![1.0, 0.0]).collect();
        assert_eq!(least_squares(&rows, &[0.0; 5]), Err(LsqError::RankDeficient { column: 1 }));
    }

    #[test]
    fn square_system_is_exact() {
        let rows = vec![vec![2.0, 1.0, 0.0], vec![1.0, 3.0, 1.0], vec![0.0, 1.0, 4.0]];
        let sol = least_squares(&rows, &[3.0, 5.0, 5.0]).unwrap();
        for b in &sol.beta {
            assert!((b - 1.0).abs() < 1e-12);
        }
        assert!(sol.covariance.is_none() && sol.see().is_none());
    }
}
