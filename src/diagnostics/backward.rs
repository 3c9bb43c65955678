//! Backward errors of a KKT solve `Kz = r`, `z = [x; y]`, `r = [−c; b]`, on the original K.
//!
//! * normwise (Rigal & Gaches 1967): the smallest `ω` such that `(K + ΔK) z = r + Δr` with
//!   `‖ΔK‖∞ ≤ ω‖K‖∞` and `‖Δr‖∞ ≤ ω‖r‖∞`:
//!   `ω = ‖r − Kz‖∞ / (‖K‖∞‖z‖∞ + ‖r‖∞)` (the formula of [`crate::solver::normwise`], reused).
//! * componentwise (Oettli & Prager 1964): the smallest `ω` with `|ΔK| ≤ ω|K|` and
//!   `|Δr| ≤ ω|r|` entry by entry: `ω = maxᵢ |r − Kz|ᵢ / (|K||z| + |r|)ᵢ`. A perturbation
//!   of this kind keeps every zero of K (in particular the zero block and the sparsity
//!   pattern), so a small componentwise backward error says the answer is exact for a
//!   problem with the same structure and nearby data.
//!
//! Convention for `0/0` in the componentwise formula: a row with zero residual counts 0; a
//! row with a nonzero residual but a zero denominator makes `ω = +∞` (no componentwise
//! perturbation explains it). Higham (2002), Theorem 7.3, states both results.

use crate::kkt;
use crate::problem::Problem;
use crate::solution::Solution;
use crate::solver::normwise;

/// Both backward errors of one solve.
#[derive(Copy, Clone, Debug, PartialEq)]
pub struct BackwardErrors {
    /// Normwise backward error (Rigal & Gaches), ∞-norm.
    pub normwise: f64,
    /// Componentwise backward error (Oettli & Prager).
    pub componentwise: f64,
}

/// Backward errors of `z = [x; y]` as a solution of `Kz = [−c; b]` for `problem`'s K.
///
/// # Panics
/// If `x`, `y`, `c` or `b` have lengths other than n, m, n, m (a programming error).
///
/// ```
/// use tangency::{solve, Options, ProblemBuilder, Triangle};
/// use tangency::diagnostics::backward::backward_errors;
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .rhs(&[1.0])
///     .build()?;
/// // The exact solution has zero backward error; a perturbed one does not.
/// let exact = backward_errors(&p, &[0.5, 0.5], &[-1.0], p.linear(), p.rhs());
/// assert_eq!(exact.componentwise, 0.0);
/// let off = backward_errors(&p, &[0.5, 0.5 + 1e-9], &[-1.0], p.linear(), p.rhs());
/// assert!(off.componentwise > 0.0 && off.normwise <= off.componentwise);
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn backward_errors(problem: &Problem, x: &[f64], y: &[f64], c: &[f64], b: &[f64]) -> BackwardErrors {
    let (n, m) = (problem.n(), problem.m());
    assert!(
        x.len() == n && y.len() == m && c.len() == n && b.len() == m,
        "backward_errors: vectors of the wrong length"
    );
    let z: Vec<f64> = x.iter().chain(y).copied().collect();
    let rhs = kkt::rhs(c, b);
    let mut r = vec![0.0; n + m];
    kkt::residual(problem, &z, &rhs, &mut r);
    BackwardErrors {
        normwise: normwise(&r, kkt::norm_inf(problem), &z, &rhs),
        componentwise: componentwise(problem, &z, &rhs, &r),
    }
}

/// Backward errors of a [`Solution`] of `problem` with the problem's own `c` and `b`.
pub fn of_solution(problem: &Problem, s: &Solution) -> BackwardErrors {
    backward_errors(problem, &s.x, &s.y, problem.linear(), problem.rhs())
}

/// Componentwise backward error `maxᵢ |res|ᵢ / (|K||z| + |rhs|)ᵢ` given the residual
/// `res = rhs − Kz` (Oettli & Prager 1964).
///
/// # Panics
/// If the lengths differ from `n + m`.
pub fn componentwise(problem: &Problem, z: &[f64], rhs: &[f64], res: &[f64]) -> f64 {
    let n = problem.n();
    let dim = kkt::dim(problem);
    assert!(z.len() == dim && rhs.len() == dim && res.len() == dim);
    // denom = |K||z| + |rhs|, by blocks: [|H||x| + |A|ᵀ|y|; |A||x|] + |rhs|.
    let mut denom: Vec<f64> = rhs.iter().map(|v| v.abs()).collect();
    let (x, y) = z.split_at(n);
    {
        let (dx, dy) = denom.split_at_mut(n);
        problem.hessian().abs_mul_add(x, dx);
        problem.constraints().abs_tr_mul_add(y, dx);
        problem.constraints().abs_mul_add(x, dy);
    }
    let mut omega = 0.0f64;
    for (ri, di) in res.iter().zip(&denom) {
        let ri = ri.abs();
        if ri == 0.0 {
            continue;
        }
        if *di == 0.0 || !ri.is_finite() {
            return f64::INFINITY;
        }
        omega = omega.max(ri / di);
    }
    omega
}
