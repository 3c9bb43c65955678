//! [`Options`] of the whole pipeline, their defaults, and the default memory budget of
//! [`Method::Auto`].

use crate::backend::dense_lblt::DenseParams;
use crate::backend::null_space::NullSpaceParams;
use crate::backend::schur::SchurParams;
use crate::backend::sparse_ldlt::SparseParams;
pub use crate::method::Method;

/// Largest KKT order for which a singular factorization is handed to the (dense)
/// null-space rank analysis: 6000 (a dense copy of about 290 MB).
pub const NULL_SPACE_RESCUE_MAX_DIM: usize = 6000;

/// Default number of refinement corrections at most.
pub const DEFAULT_MAX_REFINEMENT_STEPS: usize = 10;
/// Default refinement target for the normwise backward error: `4ε ≈ 8.9e-16`.
pub const DEFAULT_REFINEMENT_TARGET: f64 = 4.0 * f64::EPSILON;
/// Default acceptance level of the backward error for the iterative (MINRES) backend: a
/// backward error above `√ε ≈ 1.5e-8` after refinement is refused with
/// [`Error::Inaccurate`](crate::Error::Inaccurate) rather than returned. Direct methods are accepted by their
/// forward-error bound instead ([`DEFAULT_ACCEPT_FORWARD_ERROR`]).
pub const DEFAULT_ACCEPT_BACKWARD_ERROR: f64 = 1.490_116_119_384_765_6e-8;
/// Default acceptance level of the forward-error bound of a direct solve: `1e-2`, the
/// estimated relative error of the equilibrated solution (see [`Solution::forward_error_bound`](crate::Solution::forward_error_bound)).
/// A solve whose bound is larger, or missing (`κω ≥ 1`), falls back to dense LBLᵀ while
/// the problem has order at most [`DENSE_FALLBACK_MAX_DIM`] and ends with
/// [`Error::Uncertified`](crate::Error::Uncertified) otherwise.
pub const DEFAULT_ACCEPT_FORWARD_ERROR: f64 = 1e-2;
/// Largest KKT order for which a solve that fails the forward-error rule is repeated with
/// dense LBLᵀ: 6000 (a dense copy of about 290 MB).
pub const DENSE_FALLBACK_MAX_DIM: usize = 6000;

/// Settings of the whole pipeline (public fields, `..Default::default()` friendly).
///
/// ```
/// use tangency::{Method, Options};
/// let opts = Options { method: Method::Dense, max_refinement_steps: 3, ..Default::default() };
/// assert_eq!(opts.refinement_target, tangency::pipeline::DEFAULT_REFINEMENT_TARGET);
/// ```
#[derive(Copy, Clone, Debug)]
pub struct Options {
    /// Factorization method. Default: [`Method::Auto`].
    pub method: Method,
    /// Settings of the dense backend.
    pub dense: DenseParams,
    /// Settings of the Schur-complement backend.
    pub schur: SchurParams,
    /// Settings of the null-space backend (also used for the rank analysis of singular K).
    pub null_space: NullSpaceParams,
    /// Settings of the sparse backend.
    pub sparse: SparseParams,
    /// Maximum refinement corrections. Default: [`DEFAULT_MAX_REFINEMENT_STEPS`].
    pub max_refinement_steps: usize,
    /// Stop refining once the backward error is at most this. Default:
    /// [`DEFAULT_REFINEMENT_TARGET`].
    pub refinement_target: f64,
    /// Iterative (MINRES) backend, and direct methods with `accept_forward_error = +∞`:
    /// refuse solutions whose backward error stays above this. Default:
    /// [`DEFAULT_ACCEPT_BACKWARD_ERROR`].
    pub accept_backward_error: f64,
    /// Direct methods: refuse (after the dense fallback) solutions whose forward-error bound
    /// is above this or missing. Default: [`DEFAULT_ACCEPT_FORWARD_ERROR`]. `+∞` switches
    /// the rule off: solves are then accepted by `accept_backward_error`, no condition
    /// number is estimated (cheaper) and `Solution::forward_error_bound` is `None`. For
    /// callers that certify the answer otherwise (the inequality solver's Newton steps).
    pub accept_forward_error: f64,
    /// Largest KKT order for which a singular K found by another method is handed to the
    /// dense null-space rank analysis; larger sparse problems are analyzed with the sparse
    /// factors (see [`crate::backend::sparse_singular`]). Default: [`NULL_SPACE_RESCUE_MAX_DIM`].
    pub singular_rescue_max_dim: usize,
    /// Stage dimensions `(nx, nu, N)` for [`Method::Riccati`] (layout in
    /// [`crate::stagewise`]). Default: `None`.
    pub stages: Option<crate::stagewise::StageDims>,
    /// Memory [`Method::Auto`] may spend on a sparse direct factorization. When the
    /// estimate from the symbolic analysis ([`SparseAnalysis::numeric_bytes`](crate::backend::sparse_ldlt::SparseAnalysis::numeric_bytes): the values of
    /// `L` at 8 bytes per stored entry, the factorization workspace, the scaled K values and
    /// scaling vectors) exceeds it, auto uses preconditioned MINRES instead
    /// ([`crate::iterative::backend`]), with a note. Default: `None`, meaning
    /// [`default_memory_budget`] (half of `MemAvailable`).
    pub memory_budget_bytes: Option<u64>,
    /// Tolerance of each MINRES solve when auto falls back to it (see
    /// [`crate::iterative::minres()`]). Default: [`crate::iterative::DEFAULT_TOLERANCE`].
    pub iterative_tol: f64,
    /// Iteration limit of each MINRES solve when auto falls back to it; reaching it gives
    /// [`Error::NotConverged`](crate::Error::NotConverged). Default: [`crate::iterative::DEFAULT_MAX_ITER`].
    pub iterative_max_iter: usize,
}

/// Fraction of `MemAvailable` (from `/proc/meminfo`) that [`default_memory_budget`] allows a
/// direct factorization: 0.5 (common practice: leave room for the rest of the process and
/// for the system).
pub const MEMORY_BUDGET_FRACTION: f64 = 0.5;
/// Budget used when `/proc/meminfo` cannot be read (non-Linux systems): 4 GiB.
pub const FALLBACK_MEMORY_BUDGET: u64 = 4 << 30;

/// The default memory budget of [`Method::Auto`]: [`MEMORY_BUDGET_FRACTION`] of the
/// `MemAvailable` line of `/proc/meminfo`, or [`FALLBACK_MEMORY_BUDGET`] when it cannot be
/// read.
///
/// ```
/// assert!(tangency::pipeline::default_memory_budget() > 0);
/// ```
pub fn default_memory_budget() -> u64 {
    std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|text| {
            text.lines()
                .find(|l| l.starts_with("MemAvailable:"))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|kb| kb.parse::<u64>().ok())
        })
        .map(|kb| (kb as f64 * 1024.0 * MEMORY_BUDGET_FRACTION) as u64)
        .filter(|b| *b > 0)
        .unwrap_or(FALLBACK_MEMORY_BUDGET)
}

impl Default for Options {
    fn default() -> Self {
        Options {
            method: Method::Auto,
            dense: DenseParams::default(),
            schur: SchurParams::default(),
            null_space: NullSpaceParams::default(),
            sparse: SparseParams::default(),
            max_refinement_steps: DEFAULT_MAX_REFINEMENT_STEPS,
            refinement_target: DEFAULT_REFINEMENT_TARGET,
            accept_backward_error: DEFAULT_ACCEPT_BACKWARD_ERROR,
            accept_forward_error: DEFAULT_ACCEPT_FORWARD_ERROR,
            singular_rescue_max_dim: NULL_SPACE_RESCUE_MAX_DIM,
            stages: None,
            memory_budget_bytes: None,
            iterative_tol: crate::iterative::DEFAULT_TOLERANCE,
            iterative_max_iter: crate::iterative::DEFAULT_MAX_ITER,
        }
    }
}
