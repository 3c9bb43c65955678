//! Iterative (Krylov) solution of the KKT system: preconditioned MINRES with block-diagonal
//! preconditioners, on assembled or matrix-free operators.
//!
//! ```
//! use tangency::iterative::{self, IterativeOptions};
//! use tangency::generate::PoissonControl;
//! let p = PoissonControl::new(10).build()?;
//! let out = iterative::solve(&p, &IterativeOptions::default())?;
//! assert!(out.iterations <= 10);
//! assert!(out.solution.inertia.is_none() && out.solution.verdict.is_none());
//! # Ok::<(), tangency::Error>(())
//! ```
//!
//! Iterative methods do not see the inertia of `K`: the [`Solution`] they return has
//! `inertia` and `verdict` set to `None` (not verified). Its residuals and backward error are
//! recomputed on the original `K`.

use std::time::Instant;

use crate::error::{Error, Result};
use crate::kkt;
use crate::problem::Problem;
use crate::solution::{MethodUsed, Solution, Timing};

pub mod backend;
pub mod minres;
pub mod operator;
pub mod pcg;
pub mod precond;

pub use minres::{minres, MinresOutcome};
pub use operator::{FnOperator, KktOperator, MatrixPair};
pub use pcg::{pcg, PcgOptions, PcgSolution, PcgStatus};
pub use precond::{
    BlockDiagonal, BlockSolve, CholeskyBlock, DiagonalBlock, FirstBlock, Identity, Preconditioner, SecondBlock,
};

/// Default relative tolerance of the preconditioned residual: `1e-10`.
pub const DEFAULT_TOLERANCE: f64 = 1e-10;
/// Default iteration limit: 1000.
pub const DEFAULT_MAX_ITER: usize = 1000;

/// Length of the residual-history tail reported by the command line and in
/// [`Error::NotConverged`]: 10.
pub const HISTORY_TAIL: usize = 10;

/// The last `len` entries of a residual history.
pub fn history_tail(history: &[f64], len: usize) -> &[f64] {
    &history[history.len().saturating_sub(len)..]
}

/// Settings of [`solve`].
#[derive(Clone, Debug)]
pub struct IterativeOptions {
    /// Relative tolerance: stop when `‖r‖_{P⁻¹} ≤ tol·‖rhs‖_{P⁻¹}` (see [`minres()`]).
    pub tol: f64,
    /// Iteration limit; reaching it gives [`Error::NotConverged`].
    pub max_iter: usize,
    /// First preconditioner block (≈ H).
    pub first: FirstBlock,
    /// Second preconditioner block (≈ A H⁻¹ Aᵀ).
    pub second: SecondBlock,
    /// Warm start `[x; y]` (length n + m), if any.
    pub warm_start: Option<Vec<f64>>,
}

impl Default for IterativeOptions {
    /// Tolerance 1e-10, 1000 iterations, Jacobi `P₁`, sparse-Cholesky `P₂`.
    fn default() -> Self {
        IterativeOptions {
            tol: DEFAULT_TOLERANCE,
            max_iter: DEFAULT_MAX_ITER,
            first: FirstBlock::Jacobi,
            second: SecondBlock::Cholesky,
            warm_start: None,
        }
    }
}

/// An iterative solution with the Krylov figures.
#[derive(Clone, Debug)]
pub struct IterativeSolution {
    /// The point, multipliers and certificate (inertia and verdict `None`).
    pub solution: Solution,
    /// Iterations taken.
    pub iterations: usize,
    /// Relative preconditioned residuals, one per iteration (index 0: the start).
    pub residual_history: Vec<f64>,
    /// True relative residual `‖rhs − Kz‖₂ / ‖rhs‖₂` on the original `K`.
    pub relative_residual: f64,
}

/// Solves the KKT system of `problem` by MINRES with the block-diagonal preconditioner of
/// `options`. Non-convergence within `max_iter` is [`Error::NotConverged`].
pub fn solve(problem: &Problem, options: &IterativeOptions) -> Result<IterativeSolution> {
    if !(options.tol > 0.0 && options.tol < 1.0) {
        return Err(Error::InvalidOption(format!(
            "the tolerance must lie in (0, 1), got {}",
            options.tol
        )));
    }
    let t0 = Instant::now();
    // Far from unit size, Krylov norms underflow or overflow: iterate on a power-of-two
    // scaled copy (exact) and certify the answer on the original problem.
    let scaled = unit_scaled(problem);
    let (work, z_factor) = match &scaled {
        Some((p, sigma, tau)) => (p, sigma / tau),
        None => (problem, 1.0),
    };
    let precond = BlockDiagonal::from_problem(work, options.first, options.second)?;
    let factor_s = t0.elapsed().as_secs_f64();
    let t1 = Instant::now();
    let work_rhs = kkt::rhs(work.linear(), work.rhs());
    let warm: Option<Vec<f64>> = options
        .warm_start
        .as_ref()
        .map(|z| z.iter().map(|v| v / z_factor).collect());
    let mut out = minres(
        work,
        &precond,
        &work_rhs,
        warm.as_deref(),
        options.tol,
        options.max_iter,
    )?;
    // Converged in the preconditioned norm is not enough: restart from the iterate with
    // a tighter tolerance while the true residual misses the tolerance (at most 3 times,
    // within the iteration limit).
    let mut r = vec![0.0; work_rhs.len()];
    for _ in 0..3 {
        let true_res = true_relative_residual(work, &out.z, &work_rhs, &mut r);
        let left = options.max_iter.saturating_sub(out.iterations);
        if !out.converged || true_res <= options.tol || left == 0 || !true_res.is_finite() {
            break;
        }
        let reached = out.history.last().copied().unwrap_or(options.tol);
        let tighter = (reached * options.tol / true_res * 0.5).max(f64::EPSILON);
        let again = minres(work, &precond, &work_rhs, Some(&out.z), tighter, left)?;
        let mut history = std::mem::take(&mut out.history);
        history.extend(again.history.iter().skip(1));
        out = MinresOutcome {
            z: again.z,
            iterations: out.iterations + again.iterations,
            converged: again.converged,
            history,
        };
    }
    if z_factor != 1.0 {
        out.z.iter_mut().for_each(|v| *v *= z_factor);
    }
    let solve_s = t1.elapsed().as_secs_f64();
    let rhs = kkt::rhs(problem.linear(), problem.rhs());
    finish(problem, &rhs, out, options, factor_s, solve_s)
}

/// Entries of K and of the right-hand side far outside `[2⁻²⁰⁰, 2²⁰⁰]` make Krylov norms
/// underflow or overflow. Returns a copy with K scaled by σ and `[c; b]` by τ (powers of
/// two: exact, up to subnormal results) that bring both near 1, with σ and τ: the copy's
/// solution maps back by `z = z'·σ/τ`, its residuals by `1/τ`. `None` when no scaling is
/// needed.
pub(crate) fn unit_scaled(problem: &Problem) -> Option<(Problem, f64, f64)> {
    const SAFE: i32 = 200;
    let k_max = problem.hessian().max_abs().max(problem.constraints().max_abs());
    let r_max = crate::problem::inf_norm(problem.linear()).max(crate::problem::inf_norm(problem.rhs()));
    let exponent = |v: f64| {
        if v > 0.0 && v.is_finite() {
            v.log2().round() as i32
        } else {
            0
        }
    };
    let (ek, er) = (exponent(k_max), exponent(r_max));
    if ek.abs() <= SAFE && er.abs() <= SAFE {
        return None;
    }
    let sigma = 2f64.powi((-ek).clamp(-1020, 1020));
    let tau = 2f64.powi((-er).clamp(-1020, 1020));
    let scale = |m: &crate::problem::Matrix| -> crate::problem::Matrix {
        match m {
            crate::problem::Matrix::Dense(d) => {
                crate::problem::Matrix::Dense(faer::Mat::from_fn(d.nrows(), d.ncols(), |i, j| d[(i, j)] * sigma))
            }
            crate::problem::Matrix::Sparse(s) => {
                let mut s = s.clone();
                s.val_mut().iter_mut().for_each(|v| *v *= sigma);
                crate::problem::Matrix::Sparse(s)
            }
        }
    };
    let copy = Problem {
        h: std::sync::Arc::new(scale(problem.hessian())),
        a: std::sync::Arc::new(scale(problem.constraints())),
        norm_k: Default::default(),
        c: problem.linear().iter().map(|v| v * tau).collect(),
        b: problem.rhs().iter().map(|v| v * tau).collect(),
    };
    // K' z' = τ rhs with K' = σK gives z' = (τ/σ) z.
    Some((copy, sigma, tau))
}

/// `‖rhs − Kz‖₂ / ‖rhs‖₂` (the plain 2-norm when `rhs = 0`), leaving the residual in `r`.
pub(crate) fn true_relative_residual(problem: &Problem, z: &[f64], rhs: &[f64], r: &mut [f64]) -> f64 {
    kkt::residual(problem, z, rhs, r);
    let rn = crate::problem::norm2(rhs);
    let r2 = crate::problem::norm2(r);
    if rn > 0.0 {
        r2 / rn
    } else {
        r2
    }
}

/// The [`Solution`] of an iterate `z = [x; y]` of `K z = rhs` whose residual `rhs − K z` is
/// `r`: objective, residuals and backward error on the original K, no inertia or verdict.
pub(crate) fn certified_solution(
    problem: &Problem,
    z: &[f64],
    rhs: &[f64],
    r: &[f64],
    method: MethodUsed,
    (factor_s, solve_s): (f64, f64),
) -> Solution {
    let (n, m) = (problem.n(), problem.m());
    let (x, y) = z.split_at(n);
    let (primal_residual, dual_residual) = problem.residuals(x, y);
    let mut s = Solution::empty(n, m, method);
    s.x.copy_from_slice(x);
    s.y.copy_from_slice(y);
    s.objective = problem.objective(x);
    s.primal_residual = primal_residual;
    s.dual_residual = dual_residual;
    s.backward_error = crate::solver::normwise(r, kkt::norm_inf(problem), z, rhs);
    s.timing = Timing {
        analyze_s: 0.0,
        factor_s,
        solve_s,
    };
    s
}

/// The [`Error::NotConverged`] of a MINRES run that stopped at its iteration limit.
pub(crate) fn not_converged(out: &MinresOutcome, true_residual: f64, tol: f64) -> Error {
    Error::NotConverged {
        method: "minres",
        iterations: out.iterations,
        residual: out.history.last().copied().unwrap_or(f64::NAN),
        true_residual,
        tolerance: tol,
        history_tail: history_tail(&out.history, HISTORY_TAIL).to_vec(),
    }
}

/// Builds the certified [`IterativeSolution`] (or [`Error::NotConverged`]) from a MINRES
/// outcome on `problem`'s KKT system.
pub fn finish(
    problem: &Problem,
    rhs: &[f64],
    out: MinresOutcome,
    options: &IterativeOptions,
    factor_s: f64,
    solve_s: f64,
) -> Result<IterativeSolution> {
    let mut r = vec![0.0; rhs.len()];
    let relative_residual = true_relative_residual(problem, &out.z, rhs, &mut r);
    // Exit as solved only when the TRUE residual on the original K meets the tolerance.
    if !out.converged || relative_residual.is_nan() || relative_residual > options.tol {
        return Err(not_converged(&out, relative_residual, options.tol));
    }
    let mut s = certified_solution(problem, &out.z, rhs, &r, MethodUsed::Minres, (factor_s, solve_s));
    s.notes.push(format!(
        "MINRES: {} iteration(s), relative preconditioned residual {:.2e} (tolerance {:.1e}), true relative residual {:.2e}; \
         inertia and verdict NOT verified (an iterative method does not see the inertia of K)",
        out.iterations,
        out.history.last().copied().unwrap_or(0.0),
        options.tol,
        relative_residual
    ));
    Ok(IterativeSolution {
        solution: s,
        iterations: out.iterations,
        residual_history: out.history,
        relative_residual,
    })
}
