//! 1-norm condition estimate of the KKT matrix from solves with the existing factorization.
//!
//! `κ₁(K) = ‖K‖₁ ‖K⁻¹‖₁`. `‖K‖₁` is read off the data; `‖K⁻¹‖₁` is estimated by the
//! iteration of Hager (1984) in the refined form of Higham (1988, Algorithm 4.1; the form
//! LAPACK's `xLACN2` implements), which only needs products with `K⁻¹` and `K⁻ᵀ`. K is
//! symmetric, so both are solves with the factorization already computed: no inverse is
//! formed and nothing is refactored.
//!
//! Cost: at most [`MAX_SOLVE_CALLS`] calls to the backend's solve, usually 4 or 5. The
//! estimate is a lower bound of `‖K⁻¹‖₁` (up to rounding) and in practice within a factor 3
//! of it (Higham 2002, §15.3, reports it is "almost always" within a factor 3).
//!
//! The estimator itself ([`norm1_estimate`]) is generic: it takes any operator given by its
//! action on blocks of columns, so it also serves weighted norms such as `‖D K⁻¹‖₁`.
//! Written by hand: faer 0.24 has no condition estimator for its LBLᵀ or sparse factors.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::{Mat, MatMut};

use crate::solver::Factorization;

/// Upper bound on the operator calls of [`norm1_estimate`]: one call for the starting
/// vector and the alternating test vector together, one transpose call, then at most four
/// rounds of two calls (Higham 1988 stops after five iterations).
pub const MAX_SOLVE_CALLS: usize = 10;

/// Iteration limit of the Hager–Higham iteration (`ITMAX = 5` in Higham 1988 and LAPACK).
const MAX_ITERATIONS: usize = 5;

/// Result of [`norm1_estimate`].
#[derive(Copy, Clone, Debug, PartialEq)]
pub struct Norm1Estimate {
    /// Estimate of `‖B‖₁`: a lower bound up to rounding; `+∞` if an operator application
    /// produced a non-finite value (a singular factorization).
    pub estimate: f64,
    /// Operator calls made (each on one or two columns).
    pub calls: usize,
}

/// Estimates `‖B‖₁` for an `N×N` operator `B` given by `apply(block, transpose)`, which must
/// overwrite each column `v` of `block` with `B·v` (`transpose == false`) or `Bᵀ·v`
/// (`transpose == true`).
///
/// Hager (1984) / Higham (1988, Algorithm 4.1), including Higham's alternating-sign test
/// vector `xᵢ = (−1)ⁱ(1 + i/(N−1))`, which is solved together with the starting vector in
/// the first call. At most [`MAX_SOLVE_CALLS`] calls. For `N = 0` the estimate is 0.
///
/// ```
/// use tangency::diagnostics::condition::norm1_estimate;
/// // B = diag(1, −5, 3): ‖B‖₁ = 5.
/// let d = [1.0, -5.0, 3.0];
/// let est = norm1_estimate(3, |mut v, _t| {
///     for j in 0..v.ncols() { for i in 0..3 { v[(i, j)] *= d[i]; } }
/// });
/// assert_eq!(est.estimate, 5.0);
/// ```
pub fn norm1_estimate(dim: usize, apply: impl FnMut(MatMut<'_, f64>, bool)) -> Norm1Estimate {
    norm1_estimate_in(&mut Norm1Scratch::new(dim), apply)
}

/// Work vectors of [`norm1_estimate_in`] for operators of one order (allocated once, so that
/// repeated estimates do not allocate).
#[derive(Clone, Debug)]
pub struct Norm1Scratch {
    first: Mat<f64>,
    v: Mat<f64>,
    xi: Vec<f64>,
}

impl Norm1Scratch {
    /// Work vectors for operators of order `dim`.
    pub fn new(dim: usize) -> Self {
        Norm1Scratch {
            first: Mat::zeros(dim, 2),
            v: Mat::zeros(dim, 1),
            xi: vec![0.0; dim],
        }
    }

    /// The operator order these vectors are for.
    pub fn dim(&self) -> usize {
        self.xi.len()
    }
}

/// [`norm1_estimate`] with caller-provided work vectors (no allocation); the order is
/// `scratch.dim()`.
pub fn norm1_estimate_in(scratch: &mut Norm1Scratch, mut apply: impl FnMut(MatMut<'_, f64>, bool)) -> Norm1Estimate {
    let dim = scratch.dim();
    if dim == 0 {
        return Norm1Estimate {
            estimate: 0.0,
            calls: 0,
        };
    }
    let mut calls = 0;
    let Norm1Scratch { first, v, xi } = scratch;
    // Column 0: the starting vector e/N; column 1: the alternating test vector.
    for i in 0..dim {
        first[(i, 0)] = 1.0 / dim as f64;
        let mag = if dim > 1 {
            1.0 + i as f64 / (dim - 1) as f64
        } else {
            1.0
        };
        first[(i, 1)] = if i % 2 == 0 { mag } else { -mag };
    }
    apply(first.as_mut(), false);
    calls += 1;
    let alt_est = 2.0 * norm1_col(first, 1) / (3.0 * dim as f64);
    let finish = |est: f64, calls: usize| Norm1Estimate {
        estimate: if est.is_nan() { f64::INFINITY } else { est.max(alt_est) },
        calls,
    };
    if !alt_est.is_finite() {
        return finish(f64::INFINITY, calls);
    }
    let mut est = norm1_col(first, 0);
    if dim == 1 || !est.is_finite() {
        return finish(if est.is_finite() { est } else { f64::INFINITY }, calls);
    }
    for i in 0..dim {
        xi[i] = sign(first[(i, 0)]);
        v[(i, 0)] = xi[i];
    }
    apply(v.as_mut(), true);
    calls += 1;
    let mut j = argmax_abs(v);
    let mut iter = 2;
    loop {
        v.fill(0.0);
        v[(j, 0)] = 1.0;
        apply(v.as_mut(), false);
        calls += 1;
        let old = est;
        est = norm1_col(v, 0);
        if !est.is_finite() {
            return finish(f64::INFINITY, calls);
        }
        let same_signs = (0..dim).all(|i| sign(v[(i, 0)]) == xi[i]);
        if same_signs || est <= old {
            est = est.max(old);
            break;
        }
        for i in 0..dim {
            xi[i] = sign(v[(i, 0)]);
            v[(i, 0)] = xi[i];
        }
        apply(v.as_mut(), true);
        calls += 1;
        let last = j;
        j = argmax_abs(v);
        if v[(last, 0)].abs() == v[(j, 0)].abs() || iter >= MAX_ITERATIONS {
            break;
        }
        iter += 1;
    }
    finish(est, calls)
}

fn sign(v: f64) -> f64 {
    if v >= 0.0 {
        1.0
    } else {
        -1.0
    }
}

fn norm1_col(m: &Mat<f64>, j: usize) -> f64 {
    m.col(j).iter().map(|v| v.abs()).sum()
}

fn argmax_abs(m: &Mat<f64>) -> usize {
    let mut best = 0;
    for i in 0..m.nrows() {
        if m[(i, 0)].abs() > m[(best, 0)].abs() {
            best = i;
        }
    }
    best
}

/// A condition estimate of K with the figures it was made from.
#[derive(Copy, Clone, Debug, PartialEq)]
pub struct ConditionEstimate {
    /// `‖K‖₁` of the original K (equal to `‖K‖∞`, K being symmetric).
    pub norm: f64,
    /// Estimate of `‖K⁻¹‖₁` (a lower bound up to rounding; `+∞` for a singular
    /// factorization).
    pub inverse_norm: f64,
    /// `κ₁(K) ≈ norm · inverse_norm` (`+∞` when K is singular; 0 for an empty K).
    pub kappa: f64,
    /// Solves with the factorization that the estimate cost (calls to the backend; the
    /// first one carries two right-hand sides).
    pub solves: usize,
}

impl ConditionEstimate {
    /// The normwise forward-error bound implied by this estimate for a solution with
    /// normwise backward error `backward_error`: see [`forward_error_bound`].
    pub fn forward_error_bound(&self, backward_error: f64) -> f64 {
        forward_error_bound(self.kappa, backward_error)
    }

    /// Decimal digits a solution with backward error near `ε` can be expected to carry,
    /// `⌊−log₁₀(κ ε)⌋` clamped to `[0, 16]`: a rule of thumb (common practice).
    pub fn trusted_digits(&self) -> u32 {
        let loss = (self.kappa * f64::EPSILON).log10();
        if !loss.is_finite() {
            return if self.kappa.is_finite() { 16 } else { 0 };
        }
        (-loss).floor().clamp(0.0, 16.0) as u32
    }
}

/// Estimates `κ₁(K)` from solves with `f`'s factors (no refactorization, no inverse).
///
/// Works on any backend, and on a singular factorization too: there the solves overflow
/// and the estimate is `+∞`, or they stay finite and the estimate is huge (of order
/// `1/ε` or more), which says the same thing.
///
/// ```
/// use tangency::{Method, Options, Plan, ProblemBuilder, Triangle};
/// use tangency::diagnostics::condition::estimate;
/// // K = [2 0 1; 0 2 1; 1 1 0]: ‖K‖₁ = 3, K⁻¹ = [¼ −¼ ½; −¼ ¼ ½; ½ ½ −1], ‖K⁻¹‖₁ = 2: κ₁ = 6.
/// // (The estimate is a lower bound; on this tiny K the path it takes depends on the sign of
/// // a zero entry of K⁻¹x as rounded by the backend, so the example pins the dense one.)
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .build()?;
/// let dense = Options { method: Method::Dense, ..Default::default() };
/// let f = Plan::analyze(&p, &dense)?.factor(&p)?;
/// let k = estimate(&f);
/// assert!((k.kappa - 6.0).abs() < 1e-12);
/// assert!(k.solves <= tangency::diagnostics::condition::MAX_SOLVE_CALLS);
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn estimate(f: &Factorization) -> ConditionEstimate {
    let backend = f.backend();
    let dim = backend.dim();
    let norm = f.norm_inf();
    let mut buf = MemBuffer::new(backend.solve_scratch(2));
    let est = norm1_estimate(dim, |block, _transpose| {
        // K is symmetric: K⁻ᵀ = K⁻¹.
        backend.solve_in_place(block, MemStack::new(&mut buf));
    });
    // A factorization that observed zero pivots has a singular K: its solves are those of a
    // regularized or reduced system (for example dependent rows dropped by the rank
    // analysis), so the estimate of that operator would understate κ(K) = ∞.
    let singular = f.inertia().is_some_and(|i| i.zero > 0);
    let kappa = if dim == 0 {
        0.0
    } else if est.estimate.is_finite() && !singular {
        norm * est.estimate
    } else {
        f64::INFINITY
    };
    ConditionEstimate {
        norm,
        inverse_norm: est.estimate,
        kappa,
        solves: est.calls,
    }
}

/// Normwise relative forward-error bound estimate `‖Δz‖∞/‖z‖∞ ≲ 2κω/(1 − κω)` for a
/// solution of `Kz = r` with normwise backward error `ω` (as in [`crate::solver::normwise`]:
/// perturbations of K and of the right-hand side measured by `‖K‖∞` and `‖r‖∞`) and
/// `κ = κ∞(K) = κ₁(K)` (Higham 2002, Theorem 7.2).
///
/// Two reasons make it an estimate rather than a guarantee: `κ` is itself an estimate (a
/// lower bound, usually within a factor 3), and a backward error computed in floating
/// point omits the rounding committed while forming the residual, which is of order `ε`.
/// `ω` is therefore taken as at least `ε` (common practice). Returns `+∞` when `κω ≥ 1` (no
/// bound: a matrix that close may be singular).
///
/// ```
/// use tangency::diagnostics::condition::forward_error_bound;
/// assert!((forward_error_bound(1e6, 1e-12) - 2e-6).abs() < 1e-11);
/// assert!((forward_error_bound(1e6, 0.0) - 2e6 * f64::EPSILON).abs() < 1e-15); // floored at ε
/// assert_eq!(forward_error_bound(1e17, 1e-16), f64::INFINITY);
/// ```
pub fn forward_error_bound(kappa: f64, backward_error: f64) -> f64 {
    let t = kappa * backward_error.max(f64::EPSILON);
    if t.is_nan() || t >= 1.0 {
        return f64::INFINITY;
    }
    2.0 * t / (1.0 - t)
}
