//! The Riccati-recursion backend (Rao, Wright & Rawlings 1998) behind the [`KktBackend`]
//! trait.
//!
//! **Factor** (backward pass, matrices): with `P_N = Q_N` and for `k = N−1 … 0`
//!
//! ```text
//! Mₖ = Rₖ + BₖᵀP_{k+1}Bₖ,   Gₖ = Sₖ + BₖᵀP_{k+1}Aₖ,   Fₖ = Qₖ + AₖᵀP_{k+1}Aₖ,
//! Kₖ = ΓₖGₖ − ΘₖDₖ,        Pₖ = Fₖ + GₖᵀKₖ + Kₖᵀ(Gₖ + MₖKₖ),
//! ```
//!
//! where, without input constraints, `Γₖ = −Mₖ⁻¹` (Cholesky of `Mₖ`) and `Θₖ` is empty.
//! With `Eₖuₖ + Dₖxₖ = eₖ` the stage is reduced by elimination: from the SVD
//! `Eₖ = UΣVᵀ`, `Tₖ = Eₖ⁺ = V₁Σ⁻¹Uᵀ` and `Zₖ = V₂` (a basis of null(Eₖ)); then
//! `Γₖ = −Zₖ(ZₖᵀMₖZₖ)⁻¹Zₖᵀ` and `Θₖ = (I + ΓₖMₖ)Tₖ`. The optimal input is
//! `uₖ = Kₖxₖ + kₖ` with `kₖ = Γₖgₖ + Θₖeₖ`.
//!
//! **Solve** (one backward-forward sweep of vector work): any KKT right-hand side
//! `[−c; b]` is read as linear terms `qₖ, rₖ` (from `−c`), `x̂, cₖ, eₖ` (from `b`); the
//! backward sweep computes `pₖ` and `kₖ`, the forward sweep `uₖ` and `x_{k+1}`, and the
//! multipliers follow as `yₖ = −(Pₖxₖ + pₖ)` (dynamics rows) and
//! `νₖ = −Tₖᵀ(Mₖuₖ + Gₖxₖ + gₖ)` (input-constraint rows).
//!
//! **Inertia.** The recursion is a block elimination of K by congruence: each pair
//! (state, its defining rows) contributes `(nx, nx, 0)` and each stage the inertia of the
//! reduced matrix `ZₖᵀMₖZₖ` plus `(pₖ, pₖ, 0)`. So all `ZₖᵀMₖZₖ` positive definite ⇔
//! inertia `(n, m, 0)` ⇔ unique minimizer. A stage whose reduced matrix is not positive
//! definite is factored by a symmetric eigendecomposition instead of Cholesky (the
//! recursion stays exact while the matrix is nonsingular), is named in the notes, and the
//! inertia counts its eigenvalue signs, so the verdict is `saddle` as for the general
//! backends. A singular stage makes K singular; then the dense backend is factored to
//! report the same inertia as the general backends (up to [`DENSE_FALLBACK_MAX`]).

use std::sync::Arc;

use faer::dyn_stack::{MemStack, StackReq};
use faer::linalg::cholesky::llt::factor::{cholesky_in_place, LltRegularization};
use faer::linalg::matmul::matmul;
use faer::linalg::triangular_solve::{solve_lower_triangular_in_place, solve_upper_triangular_in_place};
use faer::prelude::ReborrowMut;
use faer::{Accum, Mat, MatMut, MatRef, Par, Side};

use super::structure::{Slot, StageStructure};
use super::StageDims;
use crate::backend::dense_lblt::{DenseLblt, DenseParams};
use crate::backend::KktBackend;
use crate::error::{Block, Error, Result};
use crate::problem::Problem;
use crate::solution::{Inertia, MethodUsed};

/// Largest KKT order for which a singular stage triggers a dense factorization to report
/// the exact inertia of K (above it, the inertia counted up to the singular stage is
/// reported with a note).
pub const DENSE_FALLBACK_MAX: usize = 4000;

/// Data and factors of one stage.
#[derive(Clone, Debug)]
struct StageFactor {
    a: Mat<f64>,
    b: Mat<f64>,
    q: Mat<f64>,
    r: Mat<f64>,
    s: Mat<f64>,
    e: Mat<f64>,
    d: Mat<f64>,
    m: Mat<f64>,
    g: Mat<f64>,
    gamma: Mat<f64>,
    theta: Mat<f64>,
    t: Mat<f64>,
    gain: Mat<f64>,
}

impl StageFactor {
    fn new(nx: usize, nu: usize, p: usize) -> Self {
        StageFactor {
            a: Mat::zeros(nx, nx),
            b: Mat::zeros(nx, nu),
            q: Mat::zeros(nx, nx),
            r: Mat::zeros(nu, nu),
            s: Mat::zeros(nu, nx),
            e: Mat::zeros(p, nu),
            d: Mat::zeros(p, nx),
            m: Mat::zeros(nu, nu),
            g: Mat::zeros(nu, nx),
            gamma: Mat::zeros(nu, nu),
            theta: Mat::zeros(nu, p),
            t: Mat::zeros(nu, p),
            gain: Mat::zeros(nu, nx),
        }
    }
}

/// Scratch matrices of the backward pass (reused across stages and refactorizations).
struct Temps {
    pa: Mat<f64>,
    pb: Mat<f64>,
    gk: Mat<f64>,
    llt_buf: faer::dyn_stack::MemBuffer,
}

impl std::fmt::Debug for Temps {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Temps").finish_non_exhaustive()
    }
}

/// The Riccati factorization of a stage-structured KKT matrix.
///
/// Exposes the feedback gains `Kₖ` (`uₖ = Kₖxₖ + kₖ`; for the classical regulator
/// `u = −K_lqr x` this is `Kₖ = −K_lqr`) and the value-function matrices `Pₖ`
/// (cost-to-go `½xᵀPₖx + pₖᵀx + const`). Reach it through
/// [`KktBackend::riccati`] on [`Factorization::backend`](crate::Factorization::backend):
///
/// ```
/// use faer::mat;
/// use tangency::{stagewise::HorizonBuilder, Method, Options, Plan};
/// let h = HorizonBuilder::new(1, 1, 50)
///     .dynamics(mat![[1.0]].as_ref(), mat![[1.0]].as_ref())
///     .cost(mat![[1.0]].as_ref(), mat![[1.0]].as_ref())
///     .build()?;
/// let p = h.to_problem()?;
/// let opts = Options { method: Method::Riccati, stages: Some(h.dims()), ..Default::default() };
/// let f = Plan::analyze(&p, &opts)?.factor(&p)?;
/// let ric = f.backend().riccati().expect("the Riccati backend");
/// // Scalar DARE P = 1 + P − P²/(1 + P) gives P = (1 + √5)/2 (golden ratio), K = −P/(1+P).
/// let golden = (1.0 + 5f64.sqrt()) / 2.0;
/// assert!((ric.value_matrix(0)[(0, 0)] - golden).abs() < 1e-12);
/// assert!((ric.gain(0)[(0, 0)] + golden / (1.0 + golden)).abs() < 1e-12);
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Debug)]
pub struct RiccatiBackend {
    st: Arc<StageStructure>,
    n: usize,
    m: usize,
    stages: Vec<StageFactor>,
    qn: Mat<f64>,
    p: Vec<Mat<f64>>,
    temps: Temps,
    inertia: Inertia,
    indefinite: Vec<(usize, Inertia)>,
    notes: Vec<String>,
    fallback: Option<DenseLblt>,
}

fn mm(dst: MatMut<'_, f64>, accum: Accum, a: MatRef<'_, f64>, b: MatRef<'_, f64>, alpha: f64) {
    matmul(dst, accum, a, b, alpha, Par::Seq);
}

/// `y += A·x` for a column-major `A`.
#[inline]
fn mv(y: &mut [f64], a: &Mat<f64>, x: &[f64]) {
    for (j, &xj) in x.iter().enumerate().take(a.ncols()) {
        let col = a.col_as_slice(j);
        for (yi, aij) in y.iter_mut().zip(col) {
            *yi += aij * xj;
        }
    }
}

/// `y += Aᵀ·x` for a column-major `A`.
#[inline]
fn mtv(y: &mut [f64], a: &Mat<f64>, x: &[f64]) {
    for (j, yj) in y.iter_mut().enumerate().take(a.ncols()) {
        let col = a.col_as_slice(j);
        *yj += col.iter().zip(x).map(|(p, q)| p * q).sum::<f64>();
    }
}

fn symmetrize(mut p: MatMut<'_, f64>) {
    let n = p.nrows();
    for j in 0..n {
        for i in j + 1..n {
            let v = 0.5 * (p[(i, j)] + p[(j, i)]);
            p[(i, j)] = v;
            p[(j, i)] = v;
        }
    }
}

impl RiccatiBackend {
    /// Allocates storage for the structure `st` (no numeric work).
    pub fn new(problem: &Problem, st: Arc<StageStructure>) -> Self {
        let StageDims { nx, nu, horizon } = st.dims();
        let stages = (0..horizon)
            .map(|k| StageFactor::new(nx, nu, st.constraint_rows(k).len()))
            .collect();
        let llt_req =
            faer::linalg::cholesky::llt::factor::cholesky_in_place_scratch::<f64>(nu, Par::Seq, Default::default());
        RiccatiBackend {
            n: problem.n(),
            m: problem.m(),
            stages,
            qn: Mat::zeros(nx, nx),
            p: (0..=horizon).map(|_| Mat::zeros(nx, nx)).collect(),
            temps: Temps {
                pa: Mat::zeros(nx, nx),
                pb: Mat::zeros(nx, nu),
                gk: Mat::zeros(nu, nx),
                llt_buf: faer::dyn_stack::MemBuffer::new(llt_req),
            },
            inertia: Inertia::default(),
            indefinite: Vec::new(),
            notes: Vec::new(),
            fallback: None,
            st,
        }
    }

    /// The stage dimensions.
    pub fn dims(&self) -> StageDims {
        self.st.dims()
    }

    /// Feedback gain `Kₖ` (nu×nx) of stage `k < N`: the optimal input is `uₖ = Kₖxₖ + kₖ`.
    ///
    /// # Panics
    /// If `k ≥ N`.
    pub fn gain(&self, k: usize) -> MatRef<'_, f64> {
        self.stages[k].gain.as_ref()
    }

    /// Value-function matrix `Pₖ` (nx×nx) for `k = 0 … N` (`P_N = Q_N`).
    ///
    /// # Panics
    /// If `k > N`.
    pub fn value_matrix(&self, k: usize) -> MatRef<'_, f64> {
        self.p[k].as_ref()
    }

    /// Stages whose reduced matrix `ZₖᵀMₖZₖ` (`Mₖ = Rₖ + BₖᵀPₖ₊₁Bₖ`) is not positive
    /// definite, with its inertia.
    pub fn indefinite_stages(&self) -> &[(usize, Inertia)] {
        &self.indefinite
    }

    /// True when a singular stage made the backend fall back to the dense factorization.
    pub fn used_dense_fallback(&self) -> bool {
        self.fallback.is_some()
    }

    fn scatter(&mut self, problem: &Problem) -> Result<()> {
        let dims = self.st.dims();
        let horizon = dims.horizon;
        for s in &mut self.stages {
            s.q.fill(0.0);
            s.r.fill(0.0);
            s.s.fill(0.0);
            s.a.fill(0.0);
            s.b.fill(0.0);
            s.e.fill(0.0);
            s.d.fill(0.0);
        }
        self.qn.fill(0.0);
        let mut bad: Option<(Block, usize, usize, f64, String)> = None;
        let mut identities = 0usize;
        {
            let (stages, qn, st) = (&mut self.stages, &mut self.qn, &self.st);
            problem.hessian().for_each(|i, j, v| {
                if v == 0.0 || bad.is_some() {
                    return;
                }
                match st.slot_h(i, j) {
                    Ok(Slot::Q(k, a, b)) if k == horizon => qn[(a, b)] = v,
                    Ok(Slot::Q(k, a, b)) => stages[k].q[(a, b)] = v,
                    Ok(Slot::S(k, a, b)) => stages[k].s[(a, b)] = v,
                    Ok(Slot::R(k, a, b)) => stages[k].r[(a, b)] = v,
                    Ok(_) => {}
                    Err(why) => bad = Some((Block::H, i, j, v, why)),
                }
            });
            problem.constraints().for_each(|i, j, v| {
                if v == 0.0 || bad.is_some() {
                    return;
                }
                match st.slot_a(i, j, v) {
                    Ok(Slot::A(k, a, b)) => stages[k].a[(a, b)] = -v,
                    Ok(Slot::B(k, a, b)) => stages[k].b[(a, b)] = -v,
                    Ok(Slot::Identity) => identities += 1,
                    Ok(Slot::D(k, l, b)) if k < horizon => stages[k].d[(l, b)] = v,
                    Ok(Slot::E(k, l, b)) if k < horizon => stages[k].e[(l, b)] = v,
                    Ok(_) => {
                        bad = Some((
                            Block::A,
                            i,
                            j,
                            v,
                            "lies in a terminal-state constraint row, which the Riccati backend does not take".into(),
                        ))
                    }
                    Err(why) => bad = Some((Block::A, i, j, v, why)),
                }
            });
        }
        if bad.is_none() && identities != dims.n_dynamics_rows() {
            return Err(Error::StructureChanged {
                detail: format!(
                    "the identity blocks of the initial-state and dynamics rows have {identities} unit entries, \
                     expected {}",
                    dims.n_dynamics_rows()
                ),
            });
        }
        if let Some((block, row, col, value, detail)) = bad {
            return Err(Error::NotStageStructured {
                dims,
                block,
                row,
                col,
                value,
                detail,
            });
        }
        Ok(())
    }

    /// Backward pass for stage `k`; returns the stage's reduced inertia, or `Ok(None)` if
    /// the reduced matrix is singular.
    fn stage_backward(&mut self, k: usize) -> Result<Option<Inertia>> {
        let StageDims { nx: _, nu, .. } = self.st.dims();
        let zero_scale = (self.n + self.m) as f64 * f64::EPSILON;
        let (before, after) = self.p.split_at_mut(k + 1);
        let p_next = &after[0];
        let p_k = &mut before[k];
        let t = &mut self.temps;
        let s = &mut self.stages[k];
        let pdim = s.e.nrows();
        mm(t.pa.as_mut(), Accum::Replace, p_next.as_ref(), s.a.as_ref(), 1.0);
        mm(t.pb.as_mut(), Accum::Replace, p_next.as_ref(), s.b.as_ref(), 1.0);
        s.m.copy_from(&s.r);
        mm(s.m.as_mut(), Accum::Add, s.b.transpose(), t.pb.as_ref(), 1.0);
        symmetrize(s.m.as_mut());
        s.g.copy_from(&s.s);
        mm(s.g.as_mut(), Accum::Add, s.b.transpose(), t.pa.as_ref(), 1.0);
        // P_k starts as F = Q + AᵀPA.
        p_k.copy_from(&s.q);
        mm(p_k.as_mut(), Accum::Add, s.a.transpose(), t.pa.as_ref(), 1.0);
        // Null-space basis Z (nu×nr) and T = E⁺.
        let nr = nu - pdim;
        let z: Mat<f64> = if pdim == 0 {
            Mat::identity(nu, nu)
        } else {
            let svd = s.e.svd().map_err(|_| Error::Stage {
                stage: k,
                block: super::StageBlock::E,
                row: None,
                col: None,
                detail: "the SVD of Eₖ did not converge".into(),
            })?;
            let sig = svd.S().column_vector();
            let smax = sig[0];
            let smin = sig[pdim - 1];
            if smin.is_nan() || smin <= super::horizon::rank_tolerance(pdim, nu, smax) {
                return Err(Error::Stage {
                    stage: k,
                    block: super::StageBlock::E,
                    row: None,
                    col: None,
                    detail: format!(
                        "Eₖ lost full row rank (smallest singular value {smin:.3e}); analyze the problem again \
                         to fall back to a general backend"
                    ),
                });
            }
            let v = svd.V();
            let u = svd.U();
            for i in 0..nu {
                for l in 0..pdim {
                    let mut acc = 0.0;
                    for c in 0..pdim {
                        acc += v[(i, c)] / sig[c] * u[(l, c)];
                    }
                    s.t[(i, l)] = acc;
                }
            }
            v.subcols(pdim, nr).to_owned()
        };
        // Reduced matrix Mt = Zᵀ M Z (nr×nr).
        let mut mz = Mat::<f64>::zeros(nu, nr);
        mm(mz.as_mut(), Accum::Replace, s.m.as_ref(), z.as_ref(), 1.0);
        let mut mt = Mat::<f64>::zeros(nr, nr);
        mm(mt.as_mut(), Accum::Replace, z.transpose(), mz.as_ref(), 1.0);
        symmetrize(mt.as_mut());
        // W = Mt⁻¹ Zᵀ (nr×nu), by Cholesky when positive definite.
        let mut w: Mat<f64> = z.transpose().to_owned();
        let mut reduced = Inertia::new(nr, 0, 0);
        let chol_ok = {
            let mut l = mt.clone();
            let stack = MemStack::new(&mut t.llt_buf);
            match cholesky_in_place(
                l.as_mut(),
                LltRegularization::default(),
                Par::Seq,
                stack,
                Default::default(),
            ) {
                Ok(_) => {
                    solve_lower_triangular_in_place(l.as_ref(), w.as_mut(), Par::Seq);
                    solve_upper_triangular_in_place(l.transpose(), w.as_mut(), Par::Seq);
                    true
                }
                Err(_) => false,
            }
        };
        if !chol_ok {
            let evd = mt.self_adjoint_eigen(Side::Lower).map_err(|_| Error::Stage {
                stage: k,
                block: super::StageBlock::R,
                row: None,
                col: None,
                detail: "the eigendecomposition of the stage matrix did not converge".into(),
            })?;
            let lam = evd.S().column_vector();
            let lam_max = (0..nr).fold(0.0f64, |a, i| a.max(lam[i].abs()));
            let tol = zero_scale * lam_max;
            reduced = Inertia::default();
            for i in 0..nr {
                if lam[i].abs() <= tol || lam[i].is_nan() {
                    reduced.zero += 1;
                } else if lam[i] > 0.0 {
                    reduced.positive += 1;
                } else {
                    reduced.negative += 1;
                }
            }
            if reduced.zero > 0 {
                return Ok(None);
            }
            let uvec = evd.U();
            // W = U Λ⁻¹ Uᵀ Zᵀ
            let mut ut_zt = Mat::<f64>::zeros(nr, nu);
            mm(ut_zt.as_mut(), Accum::Replace, uvec.transpose(), z.transpose(), 1.0);
            for i in 0..nr {
                for j in 0..nu {
                    ut_zt[(i, j)] /= lam[i];
                }
            }
            mm(w.as_mut(), Accum::Replace, uvec, ut_zt.as_ref(), 1.0);
        }
        // Γ = −Z W, symmetric.
        mm(s.gamma.as_mut(), Accum::Replace, z.as_ref(), w.as_ref(), -1.0);
        symmetrize(s.gamma.as_mut());
        // Θ = T + Γ (M T);  K = Γ G − Θ D.
        if pdim > 0 {
            let mut mtm = Mat::<f64>::zeros(nu, pdim);
            mm(mtm.as_mut(), Accum::Replace, s.m.as_ref(), s.t.as_ref(), 1.0);
            s.theta.copy_from(&s.t);
            mm(s.theta.as_mut(), Accum::Add, s.gamma.as_ref(), mtm.as_ref(), 1.0);
        }
        mm(s.gain.as_mut(), Accum::Replace, s.gamma.as_ref(), s.g.as_ref(), 1.0);
        if pdim > 0 {
            mm(s.gain.as_mut(), Accum::Add, s.theta.as_ref(), s.d.as_ref(), -1.0);
        }
        // P_k = F + GᵀK + Kᵀ(G + M K).
        t.gk.copy_from(&s.g);
        mm(t.gk.as_mut(), Accum::Add, s.m.as_ref(), s.gain.as_ref(), 1.0);
        mm(p_k.as_mut(), Accum::Add, s.g.transpose(), s.gain.as_ref(), 1.0);
        mm(p_k.as_mut(), Accum::Add, s.gain.transpose(), t.gk.as_ref(), 1.0);
        symmetrize(p_k.as_mut());
        Ok(Some(Inertia::new(reduced.positive + pdim, reduced.negative + pdim, 0)))
    }

    fn scratch_len(&self) -> usize {
        let StageDims { nx, nu, horizon } = self.st.dims();
        self.n + self.m + (horizon + 1) * nx + 2 * horizon * nu + 2 * nx + 2 * nu
    }
}

impl KktBackend for RiccatiBackend {
    fn method(&self) -> MethodUsed {
        MethodUsed::Riccati
    }

    fn dim(&self) -> usize {
        self.n + self.m
    }

    fn factor(&mut self, problem: &Problem) -> Result<()> {
        self.scatter(problem)?;
        let StageDims { nx, horizon, .. } = self.st.dims();
        self.indefinite.clear();
        self.notes.clear();
        self.fallback = None;
        self.p[horizon].copy_from(&self.qn);
        let pair = (horizon + 1) * nx;
        let mut inertia = Inertia::new(pair, pair, 0);
        for k in (0..horizon).rev() {
            match self.stage_backward(k)? {
                Some(stage) => {
                    let nr = self.stages[k].m.nrows() - self.stages[k].e.nrows();
                    if stage.positive - self.stages[k].e.nrows() != nr {
                        self.indefinite.push((k, stage));
                        self.notes.push(format!(
                            "stage {k}: the reduced input Hessian Zₖᵀ(Rₖ + BₖᵀPₖ₊₁Bₖ)Zₖ is not positive definite \
                             ({} negative eigenvalue(s)); factored by eigendecomposition, the point is not a minimizer",
                            stage.negative - self.stages[k].e.nrows()
                        ));
                    }
                    inertia.positive += stage.positive;
                    inertia.negative += stage.negative;
                }
                None => {
                    self.notes.push(format!(
                        "stage {k}: the reduced input Hessian Zₖᵀ(Rₖ + BₖᵀPₖ₊₁Bₖ)Zₖ is singular, so K is singular"
                    ));
                    if self.n + self.m <= DENSE_FALLBACK_MAX {
                        let mut dense = DenseLblt::new(problem, DenseParams::default());
                        dense.factor(problem)?;
                        self.inertia = dense.inertia().unwrap_or_default();
                        self.notes
                            .push("inertia taken from a dense LBLᵀ factorization of K (singular stage)".to_string());
                        self.fallback = Some(dense);
                    } else {
                        inertia.zero += 1;
                        self.inertia = inertia;
                        self.notes.push(format!(
                            "the inertia counts stages {k} … {} only (K too large for a dense check)",
                            horizon - 1
                        ));
                    }
                    return Ok(());
                }
            }
        }
        self.indefinite.reverse();
        self.inertia = inertia;
        Ok(())
    }

    fn inertia(&self) -> Option<Inertia> {
        Some(self.inertia)
    }

    fn solve_scratch(&self, nrhs: usize) -> StackReq {
        let own = StackReq::new::<f64>(self.scratch_len());
        match &self.fallback {
            Some(d) => own.or(d.solve_scratch(nrhs)),
            None => own,
        }
    }

    fn solve_in_place(&self, mut rhs: MatMut<'_, f64>, stack: &mut MemStack) {
        if let Some(dense) = &self.fallback {
            dense.solve_in_place(rhs, stack);
            return;
        }
        let StageDims { nx, nu, horizon } = self.st.dims();
        let n = self.n;
        let dim = self.n + self.m;
        let (mut buf, _) = stack.make_with::<f64>(self.scratch_len(), |_| 0.0);
        let (z, rest) = buf.split_at_mut(dim);
        let (pv, rest) = rest.split_at_mut((horizon + 1) * nx);
        let (kv, rest) = rest.split_at_mut(horizon * nu);
        let (gv, rest) = rest.split_at_mut(horizon * nu);
        let (sv, rest) = rest.split_at_mut(nx);
        let (tx, rest) = rest.split_at_mut(nx);
        let (tu, rest) = rest.split_at_mut(nu);
        let (ev, _) = rest.split_at_mut(nu);
        let dims = self.st.dims();
        for col in 0..rhs.ncols() {
            for (i, zi) in z.iter_mut().enumerate() {
                *zi = rhs[(i, col)];
            }
            // Backward sweep: p_N = q_N = −z[x_N].
            let xn = dims.x_offset(horizon);
            for i in 0..nx {
                pv[horizon * nx + i] = -z[xn + i];
            }
            for k in (0..horizon).rev() {
                let s = &self.stages[k];
                let (xo, uo) = (dims.x_offset(k), dims.u_offset(k));
                let ck = &z[n + dims.state_rows(k + 1)..n + dims.state_rows(k + 2)];
                // s = P_{k+1} c_k + p_{k+1}
                let (p_here, p_next) = pv.split_at_mut((k + 1) * nx);
                sv.copy_from_slice(&p_next[..nx]);
                mv(sv, &self.p[k + 1], ck);
                // g = r_k + Bᵀ s, with r_k = −z[u_k]
                let g = &mut gv[k * nu..(k + 1) * nu];
                for (gi, zi) in g.iter_mut().zip(&z[uo..uo + nu]) {
                    *gi = -zi;
                }
                mtv(g, &s.b, sv);
                // f = q_k + Aᵀ s  → p_k accumulates from f
                let pk = &mut p_here[k * nx..];
                for (pi, zi) in pk.iter_mut().zip(&z[xo..xo + nx]) {
                    *pi = -zi;
                }
                mtv(pk, &s.a, sv);
                // k_k = Γ g + Θ e
                let kk = &mut kv[k * nu..(k + 1) * nu];
                kk.fill(0.0);
                mv(kk, &s.gamma, g);
                let rows = self.st.constraint_rows(k);
                if !rows.is_empty() {
                    let e = &mut ev[..rows.len()];
                    for (ei, &r) in e.iter_mut().zip(rows) {
                        *ei = z[n + r];
                    }
                    mv(kk, &s.theta, e);
                }
                // p_k = f + Gᵀ k + Kᵀ (g + M k)
                mtv(pk, &s.g, kk);
                tu.copy_from_slice(g);
                mv(tu, &s.m, kk);
                mtv(pk, &s.gain, tu);
            }
            // Forward sweep.
            for i in 0..nx {
                z[i] = z[n + i];
            }
            for k in 0..horizon {
                let s = &self.stages[k];
                let (xo, uo) = (dims.x_offset(k), dims.u_offset(k));
                let (head, tail) = z.split_at_mut(uo);
                let xk = &head[xo..xo + nx];
                let (uk, tail) = tail.split_at_mut(nu);
                uk.copy_from_slice(&kv[k * nu..(k + 1) * nu]);
                mv(uk, &s.gain, xk);
                // x_{k+1} = A x + B u + c_k
                tx.copy_from_slice(&tail[n - uo - nu + dims.state_rows(k + 1)..][..nx]);
                mv(tx, &s.a, xk);
                mv(tx, &s.b, uk);
                tail[..nx].copy_from_slice(tx);
            }
            // Input-constraint multipliers ν_k = −Tᵀ(M u + G x + g) (before y overwrites b).
            for k in 0..horizon {
                let rows = self.st.constraint_rows(k);
                if rows.is_empty() {
                    continue;
                }
                let s = &self.stages[k];
                let (xo, uo) = (dims.x_offset(k), dims.u_offset(k));
                tu.copy_from_slice(&gv[k * nu..(k + 1) * nu]);
                mv(tu, &s.m, &z[uo..uo + nu]);
                mv(tu, &s.g, &z[xo..xo + nx]);
                let e = &mut ev[..rows.len()];
                e.fill(0.0);
                mtv(e, &s.t, tu);
                for (&r, ei) in rows.iter().zip(e.iter()) {
                    z[n + r] = -ei;
                }
            }
            // Dynamics multipliers y_k = −(P_k x_k + p_k).
            for k in 0..=horizon {
                let xo = dims.x_offset(k);
                tx.copy_from_slice(&pv[k * nx..(k + 1) * nx]);
                mv(tx, &self.p[k], &z[xo..xo + nx]);
                let yo = n + dims.state_rows(k);
                for (yi, ti) in z[yo..yo + nx].iter_mut().zip(tx.iter()) {
                    *yi = -ti;
                }
            }
            let mut out = rhs.rb_mut().col_mut(col);
            for (i, zi) in z.iter().enumerate() {
                out[i] = *zi;
            }
        }
    }

    fn notes(&self) -> &[String] {
        &self.notes
    }

    fn riccati(&self) -> Option<&RiccatiBackend> {
        Some(self)
    }
}
