//! MINRES behind the factorization interface, for [`Method::Auto`](crate::Method::Auto)
//! when a sparse direct factorization would not fit in memory (see
//! [`crate::solver::Options::memory_budget_bytes`]).
//!
//! "Factoring" builds the block preconditioner (Jacobi `P₁`, sparse-Cholesky `P₂`, see
//! [`super::precond`]); each solve runs MINRES to [`super::DEFAULT_TOLERANCE`]. The caller's
//! iterative refinement on the original K then corrects the solve like any other backend's.
//! The inertia is not observed: the verdict stays `None`.
//!
//! ```
//! use tangency::generate::PoissonControl;
//! use tangency::{MethodUsed, Options, Plan};
//! let p = PoissonControl::new(12).build()?;
//! // A budget of one byte: no direct factorization fits, auto picks MINRES.
//! let plan = Plan::analyze(&p, &Options { memory_budget_bytes: Some(1), ..Default::default() })?;
//! assert_eq!(plan.method(), MethodUsed::Minres);
//! let s = plan.factor(&p)?.solve()?;
//! assert!(s.verdict.is_none() && s.backward_error < 1e-12);
//! # Ok::<(), tangency::Error>(())
//! ```

use faer::dyn_stack::{MemStack, StackReq};
use faer::MatMut;

use super::{minres, BlockDiagonal, FirstBlock, SecondBlock, DEFAULT_MAX_ITER, DEFAULT_TOLERANCE};
use crate::backend::KktBackend;
use crate::error::{Error, Result};
use crate::problem::Problem;
use crate::solution::{Inertia, MethodUsed};

/// Preconditioned MINRES as a [`KktBackend`] (see the [module docs](self)).
pub struct MinresBackend {
    problem: Problem,
    precond: Option<BlockDiagonal>,
    notes: Vec<String>,
    // The first non-converged solve since the last `take_solve_failure` (solves take `&self`).
    failure: std::sync::Mutex<Option<Error>>,
    tol: f64,
    max_iter: usize,
}

impl std::fmt::Debug for MinresBackend {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("MinresBackend")
            .field("n", &self.problem.n())
            .field("m", &self.problem.m())
            .finish_non_exhaustive()
    }
}

impl MinresBackend {
    /// A backend for `problem` (no preconditioner yet: call [`KktBackend::factor`]);
    /// `note` explains why it was chosen.
    pub fn new(problem: &Problem, note: String) -> MinresBackend {
        MinresBackend {
            problem: problem.clone(),
            precond: None,
            notes: vec![note],
            failure: std::sync::Mutex::new(None),
            tol: DEFAULT_TOLERANCE,
            max_iter: DEFAULT_MAX_ITER,
        }
    }

    /// Sets the tolerance and iteration limit of each solve (defaults
    /// [`DEFAULT_TOLERANCE`], [`DEFAULT_MAX_ITER`]).
    pub fn with_limits(mut self, tol: f64, max_iter: usize) -> MinresBackend {
        self.tol = tol;
        self.max_iter = max_iter;
        self
    }
}

impl KktBackend for MinresBackend {
    fn method(&self) -> MethodUsed {
        MethodUsed::Minres
    }
    fn dim(&self) -> usize {
        self.problem.n() + self.problem.m()
    }
    fn factor(&mut self, problem: &Problem) -> Result<()> {
        self.precond = Some(BlockDiagonal::from_problem(
            problem,
            FirstBlock::Jacobi,
            SecondBlock::Cholesky,
        )?);
        self.problem.update_values(problem)?;
        Ok(())
    }
    fn inertia(&self) -> Option<Inertia> {
        None
    }
    fn solve_scratch(&self, _nrhs: usize) -> StackReq {
        StackReq::EMPTY
    }
    fn solve_in_place(&self, mut rhs: MatMut<'_, f64>, _stack: &mut MemStack) {
        let Some(pre) = &self.precond else {
            rhs.fill(f64::NAN);
            return;
        };
        let mut col = vec![0.0; rhs.nrows()];
        for j in 0..rhs.ncols() {
            for (i, v) in col.iter_mut().enumerate() {
                *v = rhs[(i, j)];
            }
            // A non-converged or refused run leaves NaN and records why: the caller reports it
            // (`NotConverged`, CLI exit 4) instead of using the iterate.
            let z = match minres(&self.problem, pre, &col, None, self.tol, self.max_iter) {
                Ok(out) if out.converged => out.z,
                Ok(out) => {
                    let mut r = vec![0.0; col.len()];
                    let true_residual = super::true_relative_residual(&self.problem, &out.z, &col, &mut r);
                    self.record(super::not_converged(&out, true_residual, self.tol));
                    vec![f64::NAN; col.len()]
                }
                Err(e) => {
                    self.record(e);
                    vec![f64::NAN; col.len()]
                }
            };
            for (i, v) in z.iter().enumerate() {
                rhs[(i, j)] = *v;
            }
        }
    }
    fn take_solve_failure(&self) -> Option<Error> {
        self.failure.lock().ok().and_then(|mut f| f.take())
    }
    fn notes(&self) -> &[String] {
        &self.notes
    }
}

impl MinresBackend {
    fn record(&self, err: Error) {
        if let Ok(mut f) = self.failure.lock() {
            f.get_or_insert(err);
        }
    }
}
