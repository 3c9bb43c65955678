//! Preconditioned MINRES (Paige & Saunders 1975) for symmetric, possibly indefinite systems.
//!
//! faer 0.24 offers conjugate gradients, BiCGSTAB and LSMR but no MINRES, so the Lanczos
//! short recurrences and the Givens rotations are written here by hand, on faer's
//! matrix-free traits: [`minres_faer`] takes any `faer::matrix_free::LinOp` (the operator)
//! and `faer::matrix_free::Precond` (the SPD preconditioner `P⁻¹`), like faer's own Krylov
//! solvers. [`minres`] keeps this crate's narrower [`KktOperator`]/[`Preconditioner`]
//! interface through the adapters [`KktLinOp`] and [`PrecondOp`]. The recurrence follows
//! the published algorithm (also Elman, Silvester & Wathen 2014, Algorithm 4.1 for the
//! preconditioned form).
//!
//! **Stopping rule.** MINRES minimizes the residual in the norm `‖r‖_{P⁻¹} = √(rᵀP⁻¹r)` over
//! the Krylov space; that norm is available at no cost from the rotations. The iteration
//! stops at the first `k` with `‖r_k‖_{P⁻¹} ≤ tol · ‖rhs‖_{P⁻¹}` (relative to the right-hand
//! side, so a warm start does not change the target). The true residual on `K` is
//! recomputed by the caller and reported separately.

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::matrix_free::{LinOp, Precond};
use faer::{MatMut, MatRef, Par};

use super::operator::KktOperator;
use super::precond::Preconditioner;
use crate::error::{Error, Result};
use crate::problem::dot;

/// A [`KktOperator`] seen as a faer `LinOp` (`K·z` on each column; `K` is real symmetric,
/// so the conjugate product is the same).
///
/// ```
/// use faer::matrix_free::LinOp;
/// use tangency::iterative::{minres::KktLinOp, KktOperator};
/// let p = tangency::generate::PoissonControl::new(3).build()?;
/// let op = KktLinOp(&p);
/// assert_eq!((op.nrows(), op.ncols()), (27, 27));
/// # Ok::<(), tangency::Error>(())
/// ```
pub struct KktLinOp<'a>(pub &'a dyn KktOperator);

impl std::fmt::Debug for KktLinOp<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("KktLinOp")
            .field("n", &self.0.n())
            .field("m", &self.0.m())
            .finish()
    }
}

/// Scratch for copying one column in and out plus `extra` values.
fn column_scratch(dim: usize, extra: usize) -> StackReq {
    StackReq::new::<f64>(2 * dim + extra)
}

/// Applies `f(input, output, extra)` to every column, through contiguous scratch copies.
fn by_columns(
    mut out: MatMut<'_, f64>,
    rhs: MatRef<'_, f64>,
    extra: usize,
    stack: &mut MemStack,
    mut f: impl FnMut(&[f64], &mut [f64], &mut [f64]),
) {
    let dim = rhs.nrows();
    let (mut buf, _) = stack.make_with(2 * dim + extra, |_| 0.0f64);
    let (input, rest) = buf.split_at_mut(dim);
    let (output, tmp) = rest.split_at_mut(dim);
    for j in 0..rhs.ncols() {
        // Fast path: contiguous columns (always the case inside MINRES).
        if let (Some(r), Some(o)) = (
            rhs.col(j).try_as_col_major(),
            out.as_mut().col_mut(j).try_as_col_major_mut(),
        ) {
            f(r.as_slice(), o.as_slice_mut(), tmp);
            continue;
        }
        for (i, v) in input.iter_mut().enumerate() {
            *v = rhs[(i, j)];
        }
        f(input, output, tmp);
        for (i, v) in output.iter().enumerate() {
            out[(i, j)] = *v;
        }
    }
}

impl LinOp<f64> for KktLinOp<'_> {
    fn apply_scratch(&self, _rhs_ncols: usize, _par: Par) -> StackReq {
        column_scratch(self.nrows(), self.0.n())
    }
    fn nrows(&self) -> usize {
        self.0.n() + self.0.m()
    }
    fn ncols(&self) -> usize {
        self.nrows()
    }
    fn apply(&self, out: MatMut<'_, f64>, rhs: MatRef<'_, f64>, _par: Par, stack: &mut MemStack) {
        by_columns(out, rhs, self.0.n(), stack, |z, o, tmp| self.0.apply_kkt(z, o, tmp));
    }
    fn conj_apply(&self, out: MatMut<'_, f64>, rhs: MatRef<'_, f64>, par: Par, stack: &mut MemStack) {
        self.apply(out, rhs, par, stack);
    }
}

/// A [`Preconditioner`] of order `dim` seen as a faer `Precond` (applies `P⁻¹`).
pub struct PrecondOp<'a> {
    /// The preconditioner.
    pub precond: &'a dyn Preconditioner,
    /// Its order (`n + m`).
    pub dim: usize,
}

impl std::fmt::Debug for PrecondOp<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("PrecondOp").field("dim", &self.dim).finish()
    }
}

impl LinOp<f64> for PrecondOp<'_> {
    fn apply_scratch(&self, _rhs_ncols: usize, _par: Par) -> StackReq {
        column_scratch(self.dim, 0)
    }
    fn nrows(&self) -> usize {
        self.dim
    }
    fn ncols(&self) -> usize {
        self.dim
    }
    fn apply(&self, out: MatMut<'_, f64>, rhs: MatRef<'_, f64>, _par: Par, stack: &mut MemStack) {
        by_columns(out, rhs, 0, stack, |r, o, _| self.precond.apply(r, o));
    }
    fn conj_apply(&self, out: MatMut<'_, f64>, rhs: MatRef<'_, f64>, par: Par, stack: &mut MemStack) {
        self.apply(out, rhs, par, stack);
    }
}

impl Precond<f64> for PrecondOp<'_> {}

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

/// Runs preconditioned MINRES on `K z = rhs` from `z0` (zero if `None`).
///
/// Errors: wrong lengths ([`Error::InvalidOption`]), or a preconditioner that is not
/// positive definite (a negative or non-finite `rᵀP⁻¹r`, [`Error::NotApplicable`]). Not converging is **not** an error
/// here: check [`MinresOutcome::converged`].
pub fn minres(
    op: &dyn KktOperator,
    precond: &dyn Preconditioner,
    rhs: &[f64],
    z0: Option<&[f64]>,
    tol: f64,
    max_iter: usize,
) -> Result<MinresOutcome> {
    let dim = op.n() + op.m();
    minres_faer(&KktLinOp(op), &PrecondOp { precond, dim }, rhs, z0, tol, max_iter)
}

/// Runs preconditioned MINRES on `K z = rhs` for any symmetric faer `LinOp` `K` and SPD
/// faer `Precond` (applying `P⁻¹`), from `z0` (zero if `None`); same rules as [`minres`].
///
/// ```
/// use faer::matrix_free::IdentityPrecond;
/// use tangency::iterative::minres::{minres_faer, KktLinOp};
/// let p = tangency::generate::PoissonControl::new(4).build()?;
/// let rhs: Vec<f64> = p.linear().iter().map(|v| -v).chain(p.rhs().iter().copied()).collect();
/// let out = minres_faer(&KktLinOp(&p), &IdentityPrecond { dim: 48 }, &rhs, None, 1e-8, 500)?;
/// assert!(out.converged);
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn minres_faer<O: LinOp<f64> + ?Sized, P: Precond<f64> + ?Sized>(
    op: &O,
    precond: &P,
    rhs: &[f64],
    z0: Option<&[f64]>,
    tol: f64,
    max_iter: usize,
) -> Result<MinresOutcome> {
    let dim = op.nrows();
    if op.ncols() != dim || precond.nrows() != dim || precond.ncols() != dim {
        return Err(Error::InvalidOption(format!(
            "MINRES: the operator ({}×{}) and the preconditioner ({}×{}) must be square of the same order",
            op.nrows(),
            op.ncols(),
            precond.nrows(),
            precond.ncols()
        )));
    }
    let mut buf =
        MemBuffer::try_new(op.apply_scratch(1, Par::Seq).or(precond.apply_scratch(1, Par::Seq))).map_err(|_| {
            Error::Resources {
                detail: format!("MINRES workspace for order {dim}"),
            }
        })?;
    let apply_k = |x: &[f64], out: &mut [f64], buf: &mut MemBuffer| {
        op.apply(
            MatMut::from_column_major_slice_mut(out, dim, 1),
            MatRef::from_column_major_slice(x, dim, 1),
            Par::Seq,
            MemStack::new(buf),
        )
    };
    let apply_p = |r: &[f64], out: &mut [f64], buf: &mut MemBuffer| {
        precond.apply(
            MatMut::from_column_major_slice_mut(out, dim, 1),
            MatRef::from_column_major_slice(r, dim, 1),
            Par::Seq,
            MemStack::new(buf),
        )
    };
    if rhs.len() != dim || z0.is_some_and(|z| z.len() != dim) {
        return Err(Error::InvalidOption(format!(
            "MINRES: right-hand side / warm start must have length n + m = {dim}"
        )));
    }
    let not_spd = |what: &str, v: f64| {
        Err(Error::NotApplicable {
            method: "minres",
            detail: format!(
                "MINRES needs a symmetric positive definite preconditioner, but rᵀP⁻¹r = {v:e} for the {what}"
            ),
        })
    };
    let mut y = vec![0.0; dim];
    apply_p(rhs, &mut y, &mut buf);
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
    apply_k(&x, &mut r1, &mut buf);
    for (r, b) in r1.iter_mut().zip(rhs) {
        *r = b - *r;
    }
    apply_p(&r1, &mut y, &mut buf);
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
        apply_k(&v, &mut y, &mut buf);
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
        apply_p(&r2, &mut y, &mut buf);
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
