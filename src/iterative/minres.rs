//! Preconditioned MINRES (Paige & Saunders 1975) for symmetric, possibly indefinite systems.
//!
//! faer 0.24 offers conjugate gradients, BiCGSTAB and LSMR but no MINRES, so the Lanczos
//! short recurrences and the Givens rotations are written here by hand. They are written on
//! plain slices and this crate's [`KktOperator`]/[`Preconditioner`] traits rather than on
//! faer's `LinOp`/`Precond` (whose stack-based interface adds nothing for one right-hand
//! side); the recurrence follows the published algorithm (also Elman, Silvester & Wathen
//! 2014, Algorithm 4.1 for the preconditioned form).
//!
//! **Stopping rule.** MINRES minimizes the residual in the norm `‖r‖_{P⁻¹} = √(rᵀP⁻¹r)` over
//! the Krylov space; that norm is available at no cost from the rotations. The iteration
//! stops at the first `k` with `‖r_k‖_{P⁻¹} ≤ tol · ‖rhs‖_{P⁻¹}` (relative to the right-hand
//! side, so a warm start does not change the target). The true residual on `K` is
//! recomputed by the caller and reported separately.

use super::operator::KktOperator;
use super::precond::Preconditioner;
use crate::error::{Error, Result};

/// Outcome of a MINRES run (converged or not).
#[derive(Clone, Debug)]
pub struct MinresOutcome {
    /// The last iterate `[x; y]`.
    pub z: Vec<f64>,
    /// Iterations taken (operator applications after the initial residual).
    pub iterations: usize,
    /// Whether the stopping rule was met.
    pub converged: bool,
    /// `‖r_k‖_{P⁻¹} / ‖rhs‖_{P⁻¹}` for k = 0, 1, …, iterations.
    pub history: Vec<f64>,
}

/// `v = rᵀP⁻¹r` is admissible (finite and non-negative).
fn spd_ok(v: f64) -> bool {
    v.is_finite() && v >= 0.0
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

/// Runs preconditioned MINRES on `K z = rhs` from `z0` (zero if `None`).
///
/// Errors: wrong lengths, or a preconditioner that is not positive definite (a negative or
/// non-finite `rᵀP⁻¹r`), as [`Error::InvalidOption`]. Not converging is **not** an error
/// here: check [`MinresOutcome::converged`].
pub fn minres(
    op: &dyn KktOperator,
    precond: &dyn Preconditioner,
    rhs: &[f64],
    z0: Option<&[f64]>,
    tol: f64,
    max_iter: usize,
) -> Result<MinresOutcome> {
    let (n, m) = (op.n(), op.m());
    let dim = n + m;
    if rhs.len() != dim || z0.is_some_and(|z| z.len() != dim) {
        return Err(Error::InvalidOption(format!(
            "MINRES: right-hand side / warm start must have length n + m = {dim}"
        )));
    }
    let not_spd = |what: &str, v: f64| {
        Err(Error::InvalidOption(format!(
            "MINRES needs a symmetric positive definite preconditioner, but rᵀP⁻¹r = {v:e} for the {what}"
        )))
    };
    let mut tmp = vec![0.0; n];
    let mut y = vec![0.0; dim];
    precond.apply(rhs, &mut y);
    let bnorm2 = dot(rhs, &y);
    if !spd_ok(bnorm2) {
        return not_spd("right-hand side", bnorm2);
    }
    let bnorm = bnorm2.sqrt();
    let mut x = z0.map(|z| z.to_vec()).unwrap_or_else(|| vec![0.0; dim]);
    if bnorm == 0.0 {
        // rhs = 0: z = 0 is the exact solution.
        x.fill(0.0);
        return Ok(MinresOutcome {
            z: x,
            iterations: 0,
            converged: true,
            history: vec![0.0],
        });
    }
    // r1 = rhs − K x0.
    let mut r1 = vec![0.0; dim];
    op.apply_kkt(&x, &mut r1, &mut tmp);
    for (r, b) in r1.iter_mut().zip(rhs) {
        *r = b - *r;
    }
    precond.apply(&r1, &mut y);
    let beta1_sq = dot(&r1, &y);
    if !spd_ok(beta1_sq) {
        return not_spd("initial residual", beta1_sq);
    }
    let beta1 = beta1_sq.sqrt();
    let mut history = vec![beta1 / bnorm];
    if beta1 <= tol * bnorm {
        return Ok(MinresOutcome {
            z: x,
            iterations: 0,
            converged: true,
            history,
        });
    }
    let mut r2 = r1.clone();
    let mut v = vec![0.0; dim];
    let mut w = vec![0.0; dim];
    let mut w1 = vec![0.0; dim];
    let mut w2 = vec![0.0; dim];
    let (mut beta, mut oldb) = (beta1, 0.0f64);
    let (mut dbar, mut epsln, mut phibar) = (0.0f64, 0.0f64, beta1);
    let (mut cs, mut sn) = (-1.0f64, 0.0f64);
    let mut converged = false;
    let mut itn = 0;
    while itn < max_iter {
        itn += 1;
        // Lanczos step: v = y/β, y = K v − (β/β_old) r1 − (α/β) r2.
        let s = 1.0 / beta;
        for (vi, yi) in v.iter_mut().zip(&y) {
            *vi = s * yi;
        }
        op.apply_kkt(&v, &mut y, &mut tmp);
        if itn >= 2 {
            let f = beta / oldb;
            for (yi, ri) in y.iter_mut().zip(&r1) {
                *yi -= f * ri;
            }
        }
        let alfa = dot(&v, &y);
        let f = alfa / beta;
        for (yi, ri) in y.iter_mut().zip(&r2) {
            *yi -= f * ri;
        }
        std::mem::swap(&mut r1, &mut r2);
        r2.copy_from_slice(&y);
        precond.apply(&r2, &mut y);
        oldb = beta;
        let b2 = dot(&r2, &y);
        // A rounding-level negative value (|·| ≤ 1e-14·‖rhs‖²_{P⁻¹}) counts as zero.
        let b2 = if b2 < 0.0 && -b2 <= 1e-14 * bnorm2 { 0.0 } else { b2 };
        if !spd_ok(b2) {
            return not_spd("Lanczos vector", b2);
        }
        beta = b2.sqrt();
        // Apply the previous rotation, then build the new one (Givens).
        let oldeps = epsln;
        let delta = cs * dbar + sn * alfa;
        let gbar = sn * dbar - cs * alfa;
        epsln = sn * beta;
        dbar = -cs * beta;
        let gamma = gbar.hypot(beta).max(f64::EPSILON);
        cs = gbar / gamma;
        sn = beta / gamma;
        let phi = cs * phibar;
        phibar *= sn;
        // Update the search direction and the iterate.
        std::mem::swap(&mut w1, &mut w2);
        std::mem::swap(&mut w2, &mut w);
        let denom = 1.0 / gamma;
        for i in 0..dim {
            w[i] = (v[i] - oldeps * w1[i] - delta * w2[i]) * denom;
            x[i] += phi * w[i];
        }
        history.push(phibar / bnorm);
        if phibar <= tol * bnorm || beta == 0.0 {
            converged = true;
            break;
        }
    }
    Ok(MinresOutcome {
        z: x,
        iterations: itn,
        converged,
        history,
    })
}
