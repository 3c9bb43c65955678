//! What a solve returns: the point, the multipliers, the verdict and the certificate.

use std::fmt;

/// Eigenvalue sign counts of the KKT matrix (Sylvester's law of inertia).
#[derive(Copy, Clone, Debug, PartialEq, Eq, Default)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Inertia {
    /// Positive eigenvalues.
    pub positive: usize,
    /// Negative eigenvalues.
    pub negative: usize,
    /// Zero eigenvalues (to the documented pivot tolerance).
    pub zero: usize,
}

impl Inertia {
    /// Builds an inertia triple.
    pub fn new(positive: usize, negative: usize, zero: usize) -> Self {
        Inertia {
            positive,
            negative,
            zero,
        }
    }
}

impl fmt::Display for Inertia {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "(+{}, -{}, 0:{})", self.positive, self.negative, self.zero)
    }
}

/// What kind of stationary point was computed.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize), serde(rename_all = "snake_case"))]
#[non_exhaustive]
pub enum Verdict {
    /// The unique global minimizer: inertia of K is (n, m, 0), i.e. `A` has full row rank
    /// and the reduced Hessian `ZᵀHZ` is positive definite.
    Minimizer,
    /// K is nonsingular with another inertia: a stationary point (KKT point) that is not a
    /// minimizer; the objective is unbounded below on the feasible set.
    Saddle,
    /// Minimizers exist but are not unique: the returned point is one of them (see the
    /// solution's notes for the direction of non-uniqueness).
    NonUnique,
}

impl Verdict {
    /// The word used by the command line's JSON.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Minimizer => "minimizer",
            Verdict::Saddle => "saddle",
            Verdict::NonUnique => "non_unique",
        }
    }

    /// One sentence for people.
    pub fn explain(self) -> &'static str {
        match self {
            Verdict::Minimizer => {
                "unique global minimizer: the objective curves upward along every feasible direction"
            }
            Verdict::Saddle => {
                "stationary point, NOT a minimizer: the objective curves downward along some feasible direction and is unbounded below on the feasible set"
            }
            Verdict::NonUnique => "a minimizer, but not the only one: the objective is flat along some feasible direction",
        }
    }
}

impl fmt::Display for Verdict {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

pub use crate::method::MethodUsed;

impl Solution {
    /// A zeroed solution with the right sizes, to be filled by
    /// [`Factorization::solve_into`](crate::Factorization::solve_into).
    pub fn empty(n: usize, m: usize, method: MethodUsed) -> Solution {
        Solution {
            x: vec![0.0; n],
            y: vec![0.0; m],
            objective: 0.0,
            primal_residual: 0.0,
            dual_residual: 0.0,
            backward_error: 0.0,
            forward_error_bound: None,
            refinement_steps: 0,
            inertia: None,
            verdict: None,
            method,
            timing: Timing::default(),
            notes: Vec::new(),
            null_direction: None,
        }
    }
}

/// Wall-clock seconds spent in each phase.
#[derive(Copy, Clone, Debug, Default, PartialEq)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Timing {
    /// Symbolic analysis (structure, ordering, method choice).
    pub analyze_s: f64,
    /// Numeric factorization (including KKT assembly and scaling).
    pub factor_s: f64,
    /// Triangular solves, refinement and certificate.
    pub solve_s: f64,
}

/// A computed stationary point with its certificate.
///
/// Sign convention: `Hx + c + Aᵀy = 0` and `Ax = b`; raising `bᵢ` by one unit changes the
/// optimal objective by `−yᵢ` to first order.
#[derive(Clone, Debug)]
#[cfg_attr(feature = "serde", derive(serde::Serialize))]
pub struct Solution {
    /// Primal point (length n).
    pub x: Vec<f64>,
    /// Multipliers (length m), `Hx + c + Aᵀy = 0`.
    pub y: Vec<f64>,
    /// `½xᵀHx + cᵀx`.
    pub objective: f64,
    /// `‖Ax − b‖∞`.
    pub primal_residual: f64,
    /// `‖Hx + c + Aᵀy‖∞`.
    pub dual_residual: f64,
    /// Normwise backward error of the KKT solve,
    /// `‖r‖∞ / (‖K‖∞‖z‖∞ + ‖rhs‖∞)` with `r = rhs − Kz` on the original (unscaled) K.
    pub backward_error: f64,
    /// Estimated bound on the relative forward error of the equilibrated solution,
    /// `‖D⁻¹(z − z*)‖∞ / ‖D⁻¹z*‖∞ ≲ 2κω/(1 − κω)` with `κ = κ₁(DKD)`, `ω` the backward error
    /// on `DKD` and `D` the Ruiz scaling of K (see [`crate::kkt::equilibrate`] and
    /// [`crate::diagnostics::condition::forward_error_bound`]). Every direct solve returned
    /// `Ok` has a bound at most `Options::accept_forward_error`; `None` for the iterative
    /// methods, whose acceptance is by residual, for direct solves with
    /// `Options::accept_forward_error = +∞` (the rule switched off), and for the distributed path (feature
    /// `mpi`), which is accepted by its backward error and does not estimate κ yet.
    pub forward_error_bound: Option<f64>,
    /// Iterative refinement corrections applied.
    pub refinement_steps: usize,
    /// Inertia of K, when the method observed it.
    pub inertia: Option<Inertia>,
    /// What kind of point `x` is, when it could be certified.
    pub verdict: Option<Verdict>,
    /// The backend that produced the factorization.
    pub method: MethodUsed,
    /// Seconds per phase.
    pub timing: Timing,
    /// Remarks a user should read (fallbacks taken, accuracy concerns).
    pub notes: Vec<String>,
    /// For [`Verdict::NonUnique`]: a unit direction `d` with `Ad = 0` and `ZᵀHd = 0`
    /// (a null vector of the reduced Hessian `ZᵀHZ`, mapped back by `Z`), so `x + t·d` is a
    /// minimizer for every `t`; the returned `x` is the minimizer of minimum 2-norm. `None` otherwise.
    pub null_direction: Option<Vec<f64>>,
}
