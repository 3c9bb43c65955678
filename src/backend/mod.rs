//! Factorization backends. Each one factors the KKT matrix of a [`Problem`] and applies
//! (an approximation of) `K⁻¹`; everything else (refinement on the original K, residuals,
//! verdicts, certificates) is shared and lives in [`crate::solver`].
//!
//! A backend knows nothing about builders, files or the command line.

pub mod auto;
pub mod dense_lblt;
pub mod null_space;
pub mod ordering;
pub mod probe;
pub mod schur;
pub mod sparse_capacitance;
pub mod sparse_ldlt;
pub mod sparse_singular;

use faer::dyn_stack::{MemStack, StackReq};
use faer::MatMut;

use crate::error::Result;
use crate::problem::Problem;
use crate::solution::{Inertia, MethodUsed, Verdict};

/// What a backend that handles singular K (rank analysis, reduced Hessian) found about one
/// right-hand side `(c, b)`: returned by [`KktBackend::singular_findings`].
#[derive(Clone, Debug, Default, PartialEq)]
pub struct SingularFindings {
    /// The verdict for this right-hand side (`None` when it cannot be certified).
    pub verdict: Option<Verdict>,
    /// For [`Verdict::NonUnique`]: a unit null direction of the reduced Hessian, mapped to x.
    pub null_direction: Option<Vec<f64>>,
    /// Remarks for the user (dropped rows, non-uniqueness).
    pub notes: Vec<String>,
}

/// The interface every factorization backend implements.
///
/// Contract: after [`factor`](KktBackend::factor) succeeded, [`solve_in_place`](KktBackend::solve_in_place)
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
    /// True when [`inertia`](KktBackend::inertia) is the inertia of K itself: observed
    /// without forced pivots, or confirmed another way despite them (see
    /// `sparse_ldlt`). Default: no forced pivots.
    fn inertia_certified(&self) -> bool {
        self.regularized_pivots() == 0
    }
    /// Scratch needed by [`solve_in_place`](KktBackend::solve_in_place) for `nrhs`
    /// right-hand sides.
    fn solve_scratch(&self, nrhs: usize) -> StackReq;
    /// Overwrites `rhs` (N×nrhs) with `K⁻¹·rhs`.
    fn solve_in_place(&self, rhs: MatMut<'_, f64>, stack: &mut MemStack);
    /// The Riccati factorization (gains, value matrices), when this backend is one.
    fn riccati(&self) -> Option<&crate::stagewise::RiccatiBackend> {
        None
    }
    /// Why the last [`solve_in_place`](KktBackend::solve_in_place) could not deliver a
    /// solution, for backends whose solves can fail (an iterative method that did not
    /// converge fills the right-hand side with NaN and reports here). Taken once: the next
    /// call returns `None`. Default: `None` (direct solves do not fail).
    fn take_solve_failure(&self) -> Option<crate::error::Error> {
        None
    }
    /// Remarks about the last factorization a user should read (for example a fallback
    /// taken, with the reason). Default: none.
    fn notes(&self) -> &[String] {
        &[]
    }
    /// For a singular K (inertia with zeros): backends that can still solve it (the
    /// null-space backend, through the rank analysis of [`crate::diagnostics::rank`])
    /// check the right-hand side `(c, b)` and return the verdict, or the
    /// [`Error::Infeasible`](crate::Error::Infeasible) /
    /// [`Error::Unbounded`](crate::Error::Unbounded) diagnosis. In that case
    /// [`solve_in_place`](KktBackend::solve_in_place) applies a generalized inverse (minimum-norm
    /// multipliers, minimum-norm point when it is not unique). Default: `None` (the backend
    /// cannot solve a singular K).
    fn singular_findings(&self, problem: &Problem, c: &[f64], b: &[f64]) -> Option<Result<SingularFindings>> {
        let _ = (problem, c, b);
        None
    }
}
