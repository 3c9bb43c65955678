//! The refinement probe shared by the backends that factor in single precision (Schur
//! complement, dense LBLᵀ): solve `K z = K z₀` for a fixed `z₀` with the new factors and
//! refine up to three times on the original K in `f64`, exactly as
//! [`crate::solver`] refines every solve.
//!
//! Acceptance rule: the backward error reaches the target, or (single-precision factors)
//! one refinement step contracted it by [`PROBE_CONTRACTION`] or more. The error of
//! refinement with a factorization of `K + E` obeys `e ← (K + E)⁻¹E e`; a contraction by
//! 10³ says the spectral radius of `M = (K + E)⁻¹E` is far below 1 (power-method
//! estimate). Then `K + tE = (K + E)(I − (1 − t)M)` stays nonsingular for every
//! `t ∈ [0, 1]`, so `K` and `K + E` have the same inertia: the inertia read off the
//! single-precision factors is the inertia of K. A NaN (overflow in the factors) meets
//! neither condition.

use faer::{Mat, MatMut};

use crate::kkt;
use crate::problem::Problem;

/// With single-precision factors the probe accepts once one refinement step reduced the
/// backward error by at least this factor (refinement then converges linearly at that rate
/// or better): `1e-3`.
pub const PROBE_CONTRACTION: f64 = 1e-3;

/// What the probe saw.
#[derive(Copy, Clone, Debug)]
pub(crate) struct ProbeOutcome {
    /// Backward error of the first solve, before any refinement: an estimate of the
    /// relative backward error `‖E‖/‖K‖` of the factorization.
    pub first: f64,
}

/// Runs the probe with `solve` applying the factors (`rhs ← K̂⁻¹ rhs`, one column).
/// `Err` carries the backward error reached, for the refusal note.
pub(crate) fn run(
    problem: &Problem,
    single: bool,
    target: f64,
    mut solve: impl FnMut(MatMut<'_, f64>),
) -> std::result::Result<ProbeOutcome, f64> {
    let dim = kkt::dim(problem);
    if dim == 0 {
        return Ok(ProbeOutcome { first: 0.0 });
    }
    let z0: Vec<f64> = (0..dim).map(|i| 1.0 + ((i * 7919) % 13) as f64 / 13.0).collect();
    let zeros = vec![0.0; dim];
    let mut rhs = vec![0.0; dim];
    // rhs = K z0 = −(0 − K z0)
    kkt::residual(problem, &z0, &zeros, &mut rhs);
    rhs.iter_mut().for_each(|v| *v = -*v);
    let norm_k = kkt::norm_inf(problem);
    let mut z = vec![0.0; dim];
    let mut r = rhs.clone();
    let mut col = Mat::<f64>::zeros(dim, 1);
    let mut omega = f64::INFINITY;
    let mut first = f64::NAN;
    for step in 0..4 {
        let previous = omega;
        col.col_as_slice_mut(0).copy_from_slice(&r);
        solve(col.as_mut());
        z.iter_mut().zip(col.col_as_slice(0)).for_each(|(zi, d)| *zi += d);
        kkt::residual(problem, &z, &rhs, &mut r);
        omega = crate::solver::normwise(&r, norm_k, &z, &rhs);
        if step == 0 {
            first = omega;
        }
        let contracted = single && step > 0 && omega <= PROBE_CONTRACTION * previous;
        if omega <= target || contracted {
            return Ok(ProbeOutcome { first });
        }
    }
    Err(omega)
}
