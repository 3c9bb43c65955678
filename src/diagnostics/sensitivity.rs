//! How the solution moves when the data move, from the existing factorization (no
//! refactorization).
//!
//! Differentiating the KKT conditions `Hx + c + Aᵀy = 0`, `Ax = b` gives, for a change
//! `(δH, δc, δA, δb)` of the data,
//!
//! ```text
//! K [dx; dy] = −[δH x + δc + δAᵀy;  δA x − δb],      K = [H Aᵀ; A 0],
//! ```
//!
//! so every derivative is one solve with the K already factored:
//!
//! * **objective**: `∂f*/∂b = −y` and `∂f*/∂c = x` (envelope theorem, no solve at all):
//!   raising `bᵢ` by one unit changes the optimal objective by `−yᵢ`; raising `cⱼ` by one
//!   unit changes it by `xⱼ` ([`objective_sensitivity`]);
//! * **forward mode**: `(dx, dy)` for one direction ([`jvp`]), one solve;
//! * **full Jacobians** `∂x/∂b`, `∂y/∂b`, `∂x/∂c`, `∂y/∂c` ([`jacobians`]), one solve per
//!   column, done in blocks of columns (dense `n×m`, `m×m`, `n×n`, `m×n` results: mind the
//!   size, see [`jacobian_bytes`]);
//! * **reverse mode** ([`adjoint`]): for a loss `ℓ(x, y)` with seeds `ḡx = ∂ℓ/∂x`,
//!   `ḡy = ∂ℓ/∂y`, one solve `K[dx; dy] = [ḡx; ḡy]` (K is symmetric) gives
//!   `∂ℓ/∂c = −dx`, `∂ℓ/∂b = dy`, `∂ℓ/∂H = −½(dx xᵀ + x dxᵀ)`, `∂ℓ/∂A = −(dy xᵀ + y dxᵀ)`:
//!   implicit differentiation of the KKT conditions as in Amos & Kolter (2017), written in
//!   this crate's sign convention.
//!
//! Every solve here is refined on the original K until its normwise backward error reaches
//! the plan's refinement target, and refused ([`Error::Inaccurate`]) if it stays above the
//! acceptance level, exactly like [`Factorization::solve`]. A singular K has no derivatives:
//! the routines return [`Error::Singular`].
//!
//! Derivatives are those of the exact solution map at the returned point; they are as
//! accurate as K is well conditioned (see [`super::condition`]).

use std::collections::HashMap;
use std::fmt::Write as _;

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::{Mat, MatRef};

use crate::error::{Error, Result};
use crate::kkt;
use crate::problem::dot;
use crate::problem::{Matrix, DEFAULT_SYMMETRY_TOLERANCE};
use crate::solution::Solution;
use crate::solver::{normwise, Factorization};

/// First-order change of the optimal objective per unit change of `b` and of `c`.
#[derive(Clone, Debug, PartialEq)]
pub struct ObjectiveSensitivity {
    /// `∂f*/∂b = −y` (length m): raising `bᵢ` by one unit changes the optimal objective by
    /// `−yᵢ`.
    pub wrt_b: Vec<f64>,
    /// `∂f*/∂c = x` (length n): raising `cⱼ` by one unit changes the optimal objective by
    /// `xⱼ`.
    pub wrt_c: Vec<f64>,
}

/// `∂f*/∂b = −y` and `∂f*/∂c = x` at a solution (the envelope theorem: the derivative of the
/// optimal value is the partial derivative of the Lagrangian
/// `½xᵀHx + cᵀx + yᵀ(Ax − b)` at the solution). No solve is needed.
///
/// ```
/// use tangency::{solve, Options, ProblemBuilder, Triangle};
/// use tangency::diagnostics::sensitivity::objective_sensitivity;
/// // Nocedal & Wright (2006), Example 16.2: y* = (−3, 2) in this crate's convention.
/// let p = ProblemBuilder::new()
///     .hessian_row_major(3, &[6., 2., 1., 2., 5., 2., 1., 2., 4.], Triangle::Full)
///     .linear(&[-8., -3., -3.])
///     .constraints_row_major(2, 3, &[1., 0., 1., 0., 1., 1.])
///     .rhs(&[3., 0.])
///     .build()?;
/// let s = solve(&p, &Options::default())?;
/// let d = objective_sensitivity(&s);
/// assert!((d.wrt_b[0] - 3.0).abs() < 1e-12 && (d.wrt_b[1] + 2.0).abs() < 1e-12);
/// assert!(d.describe(10).contains("raising b_0 by 1 changes the optimal objective by"));
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn objective_sensitivity(s: &Solution) -> ObjectiveSensitivity {
    ObjectiveSensitivity {
        wrt_b: s.y.iter().map(|v| -v).collect(),
        wrt_c: s.x.clone(),
    }
}

impl ObjectiveSensitivity {
    /// The sensitivities in words, at most `limit` lines per vector (the largest in
    /// magnitude first when there are more).
    pub fn describe(&self, limit: usize) -> String {
        let mut out = String::new();
        let mut section = |name: &str, v: &[f64], what: &str| {
            let mut idx: Vec<usize> = (0..v.len()).collect();
            if v.len() > limit {
                idx.sort_by(|&i, &j| v[j].abs().total_cmp(&v[i].abs()));
                idx.truncate(limit);
                let _ = writeln!(out, "  ({} of {} shown, largest first)", limit, v.len());
            }
            for i in idx {
                let _ = writeln!(
                    out,
                    "  raising {name}_{i} by 1 changes the optimal objective by {:+.6e} (= {what}_{i})",
                    v[i]
                );
            }
        };
        section("b", &self.wrt_b, "−y");
        section("c", &self.wrt_c, "x");
        out
    }
}

/// A direction of change of the data `(δH, δc, δA, δb)`; absent parts are zero.
///
/// `δH` must be symmetric (within [`DEFAULT_SYMMETRY_TOLERANCE`] relative to its largest
/// entry), n×n; `δA` m×n; dense or sparse, any pattern.
///
/// ```
/// use tangency::Matrix;
/// use tangency::diagnostics::sensitivity::Perturbation;
/// let dir = Perturbation { b: Some(vec![1.0]), a: Some(Matrix::Dense(faer::mat![[0.0, 1.0]])), ..Default::default() };
/// assert!(dir.h.is_none());
/// ```
#[derive(Clone, Debug, Default)]
pub struct Perturbation {
    /// `δH` (n×n, symmetric).
    pub h: Option<Matrix>,
    /// `δc` (length n).
    pub c: Option<Vec<f64>>,
    /// `δA` (m×n).
    pub a: Option<Matrix>,
    /// `δb` (length m).
    pub b: Option<Vec<f64>>,
}

/// The first-order change of the solution along a [`Perturbation`].
#[derive(Clone, Debug, PartialEq)]
pub struct Tangent {
    /// `dx` (length n).
    pub dx: Vec<f64>,
    /// `dy` (length m).
    pub dy: Vec<f64>,
    /// Directional derivative of the optimal objective,
    /// `½xᵀδH x + δcᵀx + yᵀ(δA x − δb)` (envelope theorem; no solve).
    pub objective: f64,
    /// Normwise backward error of the solve that produced `(dx, dy)`.
    pub backward_error: f64,
}

/// Forward mode: `(dx, dy)` for the direction `dir` at the solution `s` of `f`'s problem
/// (for any `c`, `b` it was solved with), from `K[dx; dy] = −[δH x + δc + δAᵀy; δA x − δb]`:
/// one refined solve.
///
/// ```
/// use tangency::{Options, Plan, ProblemBuilder, Triangle};
/// use tangency::diagnostics::sensitivity::{jvp, Perturbation};
/// // minimize x0² + x1² s.t. x0 + x1 = b: x = (b/2, b/2), so dx/db = (1/2, 1/2).
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .rhs(&[1.0])
///     .build()?;
/// let f = Plan::analyze(&p, &Options::default())?.factor(&p)?;
/// let s = f.solve()?;
/// let t = jvp(&f, &s, &Perturbation { b: Some(vec![1.0]), ..Default::default() })?;
/// assert!((t.dx[0] - 0.5).abs() < 1e-15 && (t.dx[1] - 0.5).abs() < 1e-15);
/// assert!((t.objective + s.y[0]).abs() < 1e-15); // ∂f*/∂b = −y
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn jvp(f: &Factorization, s: &Solution, dir: &Perturbation) -> Result<Tangent> {
    let p = f.problem();
    let (n, m) = (p.n(), p.m());
    check_solution(s, n, m)?;
    let (x, y) = (&s.x[..], &s.y[..]);
    // top = δH x + δc + δAᵀy, bottom = δA x − δb; rhs = −[top; bottom].
    let mut top = vec![0.0; n];
    let mut bottom = vec![0.0; m];
    let mut objective = 0.0;
    if let Some(dh) = &dir.h {
        check_matrix("δH", dh, n, n)?;
        check_symmetric(dh)?;
        dh.mul_add(x, &mut top);
        objective += 0.5 * dot(x, &top);
    }
    if let Some(dc) = &dir.c {
        check_vec("δc", dc, n)?;
        top.iter_mut().zip(dc).for_each(|(t, v)| *t += v);
        objective += dot(dc, x);
    }
    if let Some(da) = &dir.a {
        check_matrix("δA", da, m, n)?;
        da.tr_mul_add(y, &mut top);
        da.mul_add(x, &mut bottom);
    }
    if let Some(db) = &dir.b {
        check_vec("δb", db, m)?;
        bottom.iter_mut().zip(db).for_each(|(t, v)| *t -= v);
    }
    objective += dot(y, &bottom);
    let mut rhs = Mat::<f64>::zeros(n + m, 1);
    for (i, v) in top.iter().chain(&bottom).enumerate() {
        rhs[(i, 0)] = -v;
    }
    let (z, backward_error) = solve_refined(f, rhs.as_ref())?;
    Ok(Tangent {
        dx: z.col_as_slice(0)[..n].to_vec(),
        dy: z.col_as_slice(0)[n..].to_vec(),
        objective,
        backward_error,
    })
}

/// Which full Jacobians [`jacobians`] computes.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Default)]
pub struct JacobianRequest {
    /// `∂x/∂b` (n×m) and `∂y/∂b` (m×m): m solves. Default: false.
    pub wrt_b: bool,
    /// `∂x/∂c` (n×n) and `∂y/∂c` (m×n): n solves. Default: false.
    pub wrt_c: bool,
}

/// Above this many bytes of results, [`jacobians`] adds a size note (256 MiB).
pub const JACOBIAN_NOTE_BYTES: usize = 256 << 20;

/// Right-hand sides solved together in one backend call by [`jacobians`].
const JACOBIAN_BLOCK: usize = 64;

/// Dense Jacobians of the solution map. Each one is the corresponding block of `K⁻¹` (up
/// to sign): `∂x/∂b = (K⁻¹)ₓᵧ`, `∂y/∂b = (K⁻¹)ᵧᵧ`, `∂x/∂c = −(K⁻¹)ₓₓ`,
/// `∂y/∂c = −(K⁻¹)ᵧₓ = −(∂x/∂b)ᵀ`. They do not depend on `c` or `b`.
#[derive(Clone, Debug)]
pub struct Jacobians {
    /// `∂x/∂b`, n×m (entry `(i, j)` = `∂xᵢ/∂bⱼ`).
    pub x_wrt_b: Option<Mat<f64>>,
    /// `∂y/∂b`, m×m.
    pub y_wrt_b: Option<Mat<f64>>,
    /// `∂x/∂c`, n×n (symmetric).
    pub x_wrt_c: Option<Mat<f64>>,
    /// `∂y/∂c`, m×n.
    pub y_wrt_c: Option<Mat<f64>>,
    /// Largest normwise backward error over the solves.
    pub backward_error: f64,
    /// Solves performed (columns).
    pub solves: usize,
    /// Remarks (size warnings).
    pub notes: Vec<String>,
}

/// Bytes [`jacobians`] allocates for its results for a problem of size `(n, m)`.
pub fn jacobian_bytes(n: usize, m: usize, request: JacobianRequest) -> usize {
    let mut entries = 0usize;
    if request.wrt_b {
        entries = entries.saturating_add(n.saturating_add(m).saturating_mul(m));
    }
    if request.wrt_c {
        entries = entries.saturating_add(n.saturating_add(m).saturating_mul(n));
    }
    entries.saturating_mul(std::mem::size_of::<f64>())
}

/// Full Jacobians by multi-right-hand-side solves (blocks of 64 columns per backend call).
///
/// **Size**: the results are dense, `(n + m)·m` entries for `b` and `(n + m)·n` for `c`
/// ([`jacobian_bytes`]), and the work is one solve per column; a note is added above
/// [`JACOBIAN_NOTE_BYTES`]. For one direction, use [`jvp`]; for the gradient of one scalar
/// loss, use [`adjoint`]: both cost one solve.
///
/// ```
/// use tangency::{Options, Plan, ProblemBuilder, Triangle};
/// use tangency::diagnostics::sensitivity::{jacobians, JacobianRequest};
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .build()?;
/// let f = Plan::analyze(&p, &Options::default())?.factor(&p)?;
/// let j = jacobians(&f, JacobianRequest { wrt_b: true, wrt_c: false })?;
/// let dxdb = j.x_wrt_b.unwrap();
/// assert!((dxdb[(0, 0)] - 0.5).abs() < 1e-15 && (dxdb[(1, 0)] - 0.5).abs() < 1e-15);
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn jacobians(f: &Factorization, request: JacobianRequest) -> Result<Jacobians> {
    let p = f.problem();
    let (n, m) = (p.n(), p.m());
    let dim = n + m;
    let mut out = Jacobians {
        x_wrt_b: None,
        y_wrt_b: None,
        x_wrt_c: None,
        y_wrt_c: None,
        backward_error: 0.0,
        solves: 0,
        notes: Vec::new(),
    };
    let bytes = jacobian_bytes(n, m, request);
    if bytes > JACOBIAN_NOTE_BYTES {
        out.notes.push(format!(
            "the requested Jacobians are dense and take {:.1} MiB ({} solves); for one direction use jvp, \
             for the gradient of a scalar loss use adjoint (one solve each)",
            bytes as f64 / (1u64 << 20) as f64,
            if request.wrt_b { m } else { 0 } + if request.wrt_c { n } else { 0 }
        ));
    }
    // Solves K Z = ±E for the unit vectors e_{offset + j}, j in 0..count, block by block,
    // and scatters the x and y parts of Z into the two result matrices.
    let mut run = |offset: usize, count: usize, sign: f64| -> Result<(Mat<f64>, Mat<f64>)> {
        let mut jx = Mat::<f64>::zeros(n, count);
        let mut jy = Mat::<f64>::zeros(m, count);
        let mut start = 0;
        while start < count {
            let width = JACOBIAN_BLOCK.min(count - start);
            let mut rhs = Mat::<f64>::zeros(dim, width);
            for t in 0..width {
                rhs[(offset + start + t, t)] = sign;
            }
            let (z, omega) = solve_refined(f, rhs.as_ref())?;
            out.backward_error = out.backward_error.max(omega);
            out.solves += width;
            for t in 0..width {
                let col = z.col_as_slice(t);
                jx.col_as_slice_mut(start + t).copy_from_slice(&col[..n]);
                jy.col_as_slice_mut(start + t).copy_from_slice(&col[n..]);
            }
            start += width;
        }
        Ok((jx, jy))
    };
    if request.wrt_b {
        // ∂[−c; b]/∂bⱼ = e_{n+j}.
        let (jx, jy) = run(n, m, 1.0)?;
        out.x_wrt_b = Some(jx);
        out.y_wrt_b = Some(jy);
    }
    if request.wrt_c {
        // ∂[−c; b]/∂cⱼ = −eⱼ.
        let (jx, jy) = run(0, n, -1.0)?;
        out.x_wrt_c = Some(jx);
        out.y_wrt_c = Some(jy);
    }
    Ok(out)
}

/// Gradients of a scalar loss `ℓ(x(H, c, A, b), y(H, c, A, b))` with respect to the data.
#[derive(Clone, Debug)]
pub struct Adjoint {
    /// `∂ℓ/∂H`, symmetrized: `−½(dx xᵀ + x dxᵀ)`, so that `dℓ = ⟨∂ℓ/∂H, δH⟩` for every
    /// symmetric `δH`. Stored like `H`: dense for a dense `H`; for a sparse `H`, only the
    /// entries on its sparsity pattern (same pattern, both triangles).
    pub h: Matrix,
    /// `∂ℓ/∂c = −dx` (length n).
    pub c: Vec<f64>,
    /// `∂ℓ/∂A = −(dy xᵀ + y dxᵀ)`, stored like `A` (on its pattern when sparse).
    pub a: Matrix,
    /// `∂ℓ/∂b = dy` (length m).
    pub b: Vec<f64>,
    /// The adjoint solution `(dx, dy) = K⁻¹[ḡx; ḡy]`.
    pub dz: Vec<f64>,
    /// Normwise backward error of the adjoint solve.
    pub backward_error: f64,
}

/// Reverse mode: given `ḡx = ∂ℓ/∂x` (length n) and `ḡy = ∂ℓ/∂y` (length m) at the solution
/// `s`, returns `∂ℓ/∂H`, `∂ℓ/∂c`, `∂ℓ/∂A`, `∂ℓ/∂b` with one refined solve
/// (Amos & Kolter 2017, implicit differentiation of the KKT conditions).
///
/// ```
/// use tangency::{Options, Plan, ProblemBuilder, Triangle};
/// use tangency::diagnostics::sensitivity::adjoint;
/// // minimize x0² + x1² s.t. x0 + x1 = b: x0 = b/2, so for ℓ = x0, ∂ℓ/∂b = 1/2.
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .rhs(&[1.0])
///     .build()?;
/// let f = Plan::analyze(&p, &Options::default())?.factor(&p)?;
/// let s = f.solve()?;
/// let g = adjoint(&f, &s, &[1.0, 0.0], &[0.0])?;
/// assert!((g.b[0] - 0.5).abs() < 1e-15);
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn adjoint(f: &Factorization, s: &Solution, gx: &[f64], gy: &[f64]) -> Result<Adjoint> {
    let p = f.problem();
    let (n, m) = (p.n(), p.m());
    check_solution(s, n, m)?;
    check_vec("ḡx", gx, n)?;
    check_vec("ḡy", gy, m)?;
    let mut rhs = Mat::<f64>::zeros(n + m, 1);
    for (i, v) in gx.iter().chain(gy).enumerate() {
        rhs[(i, 0)] = *v;
    }
    // K is symmetric, so the adjoint system Kᵀd = ḡ is a solve with K.
    let (d, backward_error) = solve_refined(f, rhs.as_ref())?;
    let dz = d.col_as_slice(0).to_vec();
    let (dx, dy) = dz.split_at(n);
    let (x, y) = (&s.x[..], &s.y[..]);
    // ∂ℓ/∂H = −½(dx xᵀ + x dxᵀ), ∂ℓ/∂A = −(dy xᵀ + y dxᵀ): rank-2 outer products.
    let h = outer_on(p.hessian(), dx, x, x, dx, -0.5);
    let a = outer_on(p.constraints(), dy, x, y, dx, -1.0);
    Ok(Adjoint {
        h,
        c: dx.iter().map(|v| -v).collect(),
        a,
        b: dy.to_vec(),
        dz: dz.clone(),
        backward_error,
    })
}

/// `scale · (u vᵀ + p qᵀ)` shaped and stored like `like`: dense for a dense block (filled
/// column by column, vectorizable), on the same pattern for a sparse one. With `scale` a
/// power of two (here −½ and −1) and `(p, q) = (v, u)`, the result is exactly symmetric.
fn outer_on(like: &Matrix, u: &[f64], v: &[f64], p: &[f64], q: &[f64], scale: f64) -> Matrix {
    match like {
        Matrix::Sparse(s) => {
            let mut out = s.clone();
            let cp = s.symbolic().col_ptr().to_vec();
            let ri = s.symbolic().row_idx().to_vec();
            let val = out.val_mut();
            for j in 0..s.ncols() {
                for k in cp[j]..cp[j + 1] {
                    let i = ri[k];
                    val[k] = scale * (u[i] * v[j] + p[i] * q[j]);
                }
            }
            Matrix::Sparse(out)
        }
        _ => {
            let mut out = Mat::<f64>::zeros(like.nrows(), like.ncols());
            for j in 0..like.ncols() {
                let (vj, qj) = (scale * v[j], scale * q[j]);
                for ((o, ui), pi) in out.col_as_slice_mut(j).iter_mut().zip(u).zip(p) {
                    *o = ui * vj + pi * qj;
                }
            }
            Matrix::Dense(out)
        }
    }
}

/// Solves `K Z = R` for a block of right-hand sides with the backend's factors, then
/// refines each column on the original K (the same acceptance rules as
/// [`Factorization::solve`]: plan options `refinement_target`, `max_refinement_steps`,
/// `accept_backward_error`). Returns `Z` and the largest normwise backward error.
///
/// Refuses a singular K ([`Error::Singular`]), whose solves have no meaning: even when the
/// rank analysis resolved the solve itself (redundant rows dropped, a non-unique
/// minimizer), the derivatives of (x, y) are not defined there.
pub(crate) fn solve_refined(f: &Factorization, rhs: MatRef<'_, f64>) -> Result<(Mat<f64>, f64)> {
    f.verdict()?;
    if let Some(inertia) = f.inertia().filter(|i| i.zero > 0) {
        return Err(Error::Singular {
            inertia,
            detail: "the derivatives of (x, y) are not defined at a singular KKT matrix (dependent constraints \
                     make the multipliers non-unique; a flat reduced Hessian makes x non-unique)"
                .to_string(),
        });
    }
    let backend = f.backend();
    let opts = f.plan().options();
    let problem = f.problem();
    let norm_k = f.norm_inf();
    let (dim, k) = (rhs.nrows(), rhs.ncols());
    let r0 = rhs.to_owned();
    let mut z = r0.clone();
    let mut buf = MemBuffer::new(backend.solve_scratch(k));
    backend.solve_in_place(z.as_mut(), MemStack::new(&mut buf));
    let mut res = Mat::<f64>::zeros(dim, k);
    let mut omega = vec![0.0; k];
    for (j, w) in omega.iter_mut().enumerate() {
        kkt::residual(problem, z.col_as_slice(j), r0.col_as_slice(j), res.col_as_slice_mut(j));
        *w = normwise(res.col_as_slice(j), norm_k, z.col_as_slice(j), r0.col_as_slice(j));
    }
    let mut active: Vec<usize> = (0..k)
        .filter(|&j| omega[j] > opts.refinement_target && omega[j].is_finite())
        .collect();
    let mut steps = 0;
    let mut trial = vec![0.0; dim];
    let mut trial_res = vec![0.0; dim];
    while !active.is_empty() && steps < opts.max_refinement_steps {
        let mut corr = Mat::<f64>::zeros(dim, active.len());
        for (t, &j) in active.iter().enumerate() {
            corr.col_as_slice_mut(t).copy_from_slice(res.col_as_slice(j));
        }
        backend.solve_in_place(corr.as_mut(), MemStack::new(&mut buf));
        steps += 1;
        let mut next = Vec::with_capacity(active.len());
        for (t, &j) in active.iter().enumerate() {
            for ((tv, zv), cv) in trial.iter_mut().zip(z.col_as_slice(j)).zip(corr.col_as_slice(t)) {
                *tv = zv + cv;
            }
            kkt::residual(problem, &trial, r0.col_as_slice(j), &mut trial_res);
            let w = normwise(&trial_res, norm_k, &trial, r0.col_as_slice(j));
            if w < omega[j] {
                z.col_as_slice_mut(j).copy_from_slice(&trial);
                res.col_as_slice_mut(j).copy_from_slice(&trial_res);
                let keep_going = w <= 0.5 * omega[j] && w > opts.refinement_target;
                omega[j] = w;
                if keep_going {
                    next.push(j);
                }
            }
        }
        active = next;
    }
    let worst = omega
        .iter()
        .fold(0.0f64, |a, &w| if w.is_nan() { f64::INFINITY } else { a.max(w) });
    // `worst` is never NaN (mapped to +∞ above).
    if worst > opts.accept_backward_error {
        return Err(Error::Inaccurate {
            backward_error: worst,
            steps,
            limit: opts.accept_backward_error,
        });
    }
    Ok((z, worst))
}

fn bad(detail: String) -> Error {
    Error::InvalidSensitivityInput { detail }
}

fn check_solution(s: &Solution, n: usize, m: usize) -> Result<()> {
    if s.x.len() != n || s.y.len() != m {
        return Err(bad(format!(
            "the solution has x of length {} and y of length {}, but the factored problem has n = {n}, m = {m}",
            s.x.len(),
            s.y.len()
        )));
    }
    Ok(())
}

fn check_vec(name: &str, v: &[f64], len: usize) -> Result<()> {
    if v.len() != len {
        return Err(bad(format!("{name} has length {}, expected {len}", v.len())));
    }
    if let Some((i, x)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
        return Err(bad(format!("{name} has the non-finite value {x} at row {i} (0-based)")));
    }
    Ok(())
}

fn check_matrix(name: &str, mat: &Matrix, rows: usize, cols: usize) -> Result<()> {
    if mat.nrows() != rows || mat.ncols() != cols {
        return Err(bad(format!(
            "{name} is {}×{}, expected {rows}×{cols}",
            mat.nrows(),
            mat.ncols()
        )));
    }
    let mut first_bad = None;
    mat.for_each(|i, j, v| {
        if !v.is_finite() && first_bad.is_none() {
            first_bad = Some((i, j, v));
        }
    });
    if let Some((i, j, v)) = first_bad {
        return Err(bad(format!(
            "{name} has the non-finite value {v} at row {i}, column {j} (0-based)"
        )));
    }
    Ok(())
}

/// `δH` must be symmetric: the perturbed H must stay in the space of symmetric matrices.
fn check_symmetric(dh: &Matrix) -> Result<()> {
    let mut entries: HashMap<(usize, usize), f64> = HashMap::new();
    dh.for_each(|i, j, v| *entries.entry((i, j)).or_insert(0.0) += v);
    let scale = entries.values().fold(0.0f64, |a, v| a.max(v.abs()));
    let tol = DEFAULT_SYMMETRY_TOLERANCE * scale;
    let mut worst: Option<(usize, usize, f64, f64)> = None;
    for (&(i, j), &v) in &entries {
        if i < j {
            let w = entries.get(&(j, i)).copied().unwrap_or(0.0);
            let gap = (v - w).abs();
            if gap > tol && worst.is_none_or(|(_, _, a, b)| gap > (a - b).abs()) {
                worst = Some((i, j, v, w));
            }
        } else if i > j && !entries.contains_key(&(j, i)) && v.abs() > tol {
            let gap = v.abs();
            if worst.is_none_or(|(_, _, a, b)| gap > (a - b).abs()) {
                worst = Some((j, i, 0.0, v));
            }
        }
    }
    if let Some((i, j, v, w)) = worst {
        return Err(bad(format!(
            "δH must be symmetric: δH[{i},{j}] = {v:e} but δH[{j},{i}] = {w:e} \
             (tolerance {DEFAULT_SYMMETRY_TOLERANCE:.0e} relative to max|δH|; 0-based, worst pair)"
        )));
    }
    Ok(())
}
