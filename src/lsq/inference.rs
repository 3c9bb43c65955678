//! Inference for the coefficients of a restricted fit: t statistics, two-sided p-values,
//! confidence intervals, and heteroskedasticity-robust (sandwich) covariances HC0–HC3.
//!
//! With `X̃ = W^½F`, residuals `ẽ = W^½(g − Fβ)` and `M = Z(ZᵀX̃ᵀX̃Z)⁻¹Zᵀ` (the
//! covariance divided by `σ̂²`; `Z` an orthonormal basis of the null space of `C`), the
//! restricted estimator is `β = M X̃ᵀ g̃ + (a part fixed by Cβ = d)`, so its covariance under
//! independent errors of any variances is `M X̃ᵀ Ω X̃ M`. The four estimates of `Ω` are
//! those of MacKinnon & White (1985, *Journal of Econometrics* 29) applied to the restricted
//! fit, with the leverages `hᵢ = x̃ᵢᵀ M x̃ᵢ` of its hat matrix `X̃MX̃ᵀ` and the residual
//! degrees of freedom `p − n + rank C`:
//!
//! | kind | `ωᵢ` |
//! |------|------|
//! | HC0  | `ẽᵢ²` (White 1980) |
//! | HC1  | `ẽᵢ² · p/(p − n + rank C)` |
//! | HC2  | `ẽᵢ²/(1 − hᵢ)` |
//! | HC3  | `ẽᵢ²/(1 − hᵢ)²` |

use faer::Mat;

use super::stats::{t_quantile, t_two_sided};
use super::{Fit, LsqProblem};

/// Which heteroskedasticity-robust covariance estimate (see the [module docs](self)).
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum Robust {
    /// `ωᵢ = ẽᵢ²`.
    Hc0,
    /// `ωᵢ = ẽᵢ² · p/dof`.
    Hc1,
    /// `ωᵢ = ẽᵢ²/(1 − hᵢ)`.
    Hc2,
    /// `ωᵢ = ẽᵢ²/(1 − hᵢ)²`.
    Hc3,
}

impl Robust {
    /// All four, in order.
    pub const ALL: [Robust; 4] = [Robust::Hc0, Robust::Hc1, Robust::Hc2, Robust::Hc3];

    /// The name used in reports and JSON (`hc0` … `hc3`).
    pub fn as_str(self) -> &'static str {
        match self {
            Robust::Hc0 => "hc0",
            Robust::Hc1 => "hc1",
            Robust::Hc2 => "hc2",
            Robust::Hc3 => "hc3",
        }
    }
}

/// Inference for one coefficient.
#[derive(Clone, Debug, PartialEq)]
pub struct CoefficientInference {
    /// The estimate `βⱼ`.
    pub estimate: f64,
    /// Its standard error.
    pub std_error: f64,
    /// `βⱼ / se` (`None` when the restrictions fix the coefficient: see `fixed`).
    pub t: Option<f64>,
    /// Two-sided p-value `P(|T| ≥ |t|)` for Student's t with the fit's `dof`.
    pub p_value: Option<f64>,
    /// The confidence interval `βⱼ ± t_{1−α/2}·se`.
    pub interval: (f64, f64),
    /// True when the restrictions determine `βⱼ` alone (row `j` of `Z` vanishes to rounding):
    /// its sampling variance is zero and a t statistic is meaningless.
    pub fixed: bool,
}

/// `‖X̃ eⱼ‖₂` for every column.
fn column_norms(pr: &LsqProblem) -> Vec<f64> {
    let mut sq = vec![0.0; pr.n()];
    pr.f.for_each(|i, j, v| {
        let x = pr.sqrt_w(i) * v;
        sq[j] += x * x;
    });
    sq.into_iter().map(f64::sqrt).collect()
}

impl Fit {
    /// t statistics, two-sided p-values and `level` confidence intervals (for example 0.95)
    /// of every coefficient, from the standard errors and Student's t with `dof` degrees of
    /// freedom (Gaussian errors). `None` when the fit has no standard errors (ridge, zero
    /// dof, inference off) or `level` is not in (0, 1).
    ///
    /// A coefficient is reported `fixed` (no t, no p-value, a zero-width interval) when its
    /// variance relative to its column's scale, `Mⱼⱼ·‖X̃eⱼ‖²`, is below `n·ε`: for a free
    /// coefficient that ratio is at least about `‖Zᵀeⱼ‖²`.
    pub fn coefficient_inference(&self, problem: &LsqProblem, level: f64) -> Option<Vec<CoefficientInference>> {
        let se = self.standard_errors.as_ref()?;
        let sigma2 = self.sigma2?;
        if !(level > 0.0 && level < 1.0) || self.dof == 0 || sigma2 <= 0.0 {
            return None;
        }
        let nu = self.dof as f64;
        let tq = t_quantile(0.5 + level / 2.0, nu);
        let norms = column_norms(problem);
        let n = problem.n();
        let tiny = n.max(1) as f64 * f64::EPSILON;
        Some(
            self.coefficients
                .iter()
                .zip(se)
                .enumerate()
                .map(|(j, (&b, &s))| {
                    let scaled = (s * s / sigma2) * norms[j] * norms[j];
                    let fixed = s == 0.0 || scaled < tiny;
                    let (t, p_value) = if fixed {
                        (None, None)
                    } else {
                        let t = b / s;
                        (Some(t), Some(t_two_sided(t, nu)))
                    };
                    let half = if fixed { 0.0 } else { tq * s };
                    CoefficientInference {
                        estimate: b,
                        std_error: if fixed { 0.0 } else { s },
                        t,
                        p_value,
                        interval: (b - half, b + half),
                        fixed,
                    }
                })
                .collect(),
        )
    }

    /// The heteroskedasticity-robust covariance `M X̃ᵀ Ω X̃ M` of the restricted estimator
    /// (see the [module docs](self)). `None` without a covariance (ridge, zero dof, inference
    /// off, the augmented method above its size limit), or for HC2/HC3 when some leverage
    /// is 1 to rounding (an observation the fit reproduces exactly).
    ///
    /// Costs `O(p·n²)` time and `O(p·n)` memory (a dense copy of `X̃M`).
    pub fn robust_covariance(&self, problem: &LsqProblem, kind: Robust) -> Option<Mat<f64>> {
        let cov = self.covariance.as_ref()?;
        let sigma2 = self.sigma2?;
        if sigma2 <= 0.0 || self.dof == 0 {
            return None;
        }
        let (p, n) = (problem.p(), problem.n());
        let m = Mat::from_fn(n, n, |i, j| cov[(i, j)] / sigma2);
        // B = X̃ M (p×n), accumulated entry by entry of F (sparse or dense).
        let mut bm = Mat::<f64>::zeros(p, n);
        problem.f.for_each(|i, j, v| {
            let x = problem.sqrt_w(i) * v;
            if x != 0.0 {
                for k in 0..n {
                    bm[(i, k)] += x * m[(j, k)];
                }
            }
        });
        // Leverages hᵢ = (X̃M)ᵢ · x̃ᵢ.
        let mut lev = vec![0.0; p];
        problem
            .f
            .for_each(|i, j, v| lev[i] += bm[(i, j)] * problem.sqrt_w(i) * v);
        let ratio = p as f64 / self.dof as f64;
        let mut omega = vec![0.0; p];
        for i in 0..p {
            let e = problem.sqrt_w(i) * self.residuals[i];
            let e2 = e * e;
            let one_minus_h = 1.0 - lev[i];
            omega[i] = match kind {
                Robust::Hc0 => e2,
                Robust::Hc1 => e2 * ratio,
                Robust::Hc2 | Robust::Hc3 => {
                    if one_minus_h <= 1e3 * f64::EPSILON {
                        return None;
                    }
                    if kind == Robust::Hc2 {
                        e2 / one_minus_h
                    } else {
                        e2 / (one_minus_h * one_minus_h)
                    }
                }
            };
        }
        // V = Bᵀ diag(ω) B.
        let mut wb = bm.clone();
        for i in 0..p {
            for k in 0..n {
                wb[(i, k)] *= omega[i];
            }
        }
        let mut v = bm.transpose() * &wb;
        for j in 0..n {
            for i in 0..j {
                let s = 0.5 * (v[(i, j)] + v[(j, i)]);
                v[(i, j)] = s;
                v[(j, i)] = s;
            }
        }
        Some(v)
    }

    /// Square roots of the diagonal of [`robust_covariance`](Self::robust_covariance).
    pub fn robust_standard_errors(&self, problem: &LsqProblem, kind: Robust) -> Option<Vec<f64>> {
        let v = self.robust_covariance(problem, kind)?;
        Some((0..v.nrows()).map(|j| v[(j, j)].max(0.0).sqrt()).collect())
    }
}
