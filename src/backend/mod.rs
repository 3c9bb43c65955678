//! Factorization backends. Each one factors the KKT matrix of a [`Problem`] and applies
//! (an approximation of) `K⁻¹`; everything else (refinement on the original K, residuals,
//! verdicts, certificates) is shared and lives in [`crate::solver`].
//!
//! A backend knows nothing about builders, files or the command line.

pub mod dense_lblt;

use faer::dyn_stack::{MemStack, StackReq};
use faer::MatMut;

use crate::error::Result;
use crate::problem::Problem;
use crate::solution::{Inertia, MethodUsed};

/// The interface every factorization backend implements.
///
/// Contract: after [`factor`](KktBackend::factor) succeeded, [`solve_in_place`]
/// (KktBackend::solve_in_place) overwrites each column `r` of `rhs` with an approximation
/// of `K⁻¹r` for the *original* (unscaled) K of the problem last factored. Backends that
/// scale or regularize internally undo it inside `solve_in_place`. Accuracy is checked and
/// improved by the caller, so a backend may return a slightly inexact solve (for example
/// from a regularized factorization); it must never return NaN silently for a
/// factorization it reported as nonsingular.
pub trait KktBackend: Send + Sync + std::fmt::Debug {
    /// Which method this is.
    fn method(&self) -> MethodUsed;
    /// Order of K (`n + m`).
    fn dim(&self) -> usize;
    /// Numeric factorization of the problem's K (same structure as at construction).
    fn factor(&mut self, problem: &Problem) -> Result<()>;
    /// Inertia of K, when the method observes it.
    fn inertia(&self) -> Option<Inertia>;
    /// Pivots whose sign was imposed by regularization rather than observed (0 for exact
    /// methods). When nonzero, the inertia is not evidence on its own.
    fn regularized_pivots(&self) -> usize {
        0
    }
    /// Scratch needed by [`solve_in_place`](KktBackend::solve_in_place) for `nrhs`
    /// right-hand sides.
    fn solve_scratch(&self, nrhs: usize) -> StackReq;
    /// Overwrites `rhs` (N×nrhs) with `K⁻¹·rhs`.
    fn solve_in_place(&self, rhs: MatMut<'_, f64>, stack: &mut MemStack);
    /// Remarks from the last factorization that a user should read (copied into every
    /// solution's notes). Default: none.
    fn notes(&self) -> &[String] {
        &[]
    }
    /// The Riccati factorization (gains, value matrices), when this backend is one.
    fn riccati(&self) -> Option<&crate::stagewise::RiccatiBackend> {
        None
    }
}
