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
use faer::prelude::{Reborrow, ReborrowMut};
use faer::{Accum, Mat, MatMut, MatRef, Par, Side};

use super::structure::{Slot, StageStructure};
use super::StageDims;
use crate::backend::dense_lblt::{DenseLblt, DenseParams};
use crate::backend::KktBackend;
use crate::error::{Block, Error, Result};
use crate::problem::{Matrix, Problem};
use crate::solution::{Inertia, MethodUsed};

/// Largest KKT order for which a singular stage triggers a dense factorization to report
/// the exact inertia of K (above it, the inertia counted up to the singular stage is
/// reported with a note).
pub const DENSE_FALLBACK_MAX: usize = 4000;

/// Factors of one stage; its data blocks live in [`RiccatiBackend::data`] at `base`.
#[derive(Clone, Debug)]
struct StageFactor {
    /// Offset of the stage's data blocks (`A, B, Q, R, S, D, E`, column-major) in `data`.
    base: usize,
    /// Input-constraint rows of the stage.
    p: usize,
    m: Mat<f64>,
    g: Mat<f64>,
    gamma: Mat<f64>,
    theta: Mat<f64>,
    t: Mat<f64>,
    gain: Mat<f64>,
    /// Column-major copies for the sweeps, laid out so their loops run over nx entries:
    /// `Gₖᵀ` and `Kₖᵀ` (nx×nu) and `Γₖ` (nu×nu).
    gt: Vec<f64>,
    kt: Vec<f64>,
    gam: Vec<f64>,
}

/// Which data block of a stage.
#[derive(Copy, Clone, Debug)]
enum Blk {
    A,
    B,
    Q,
    R,
    S,
    D,
    E,
}

/// Entries of the data layout per stage: `A, B, Q` (nx×nx, nx×nu, nx×nx), `R` (nu×nu),
/// `S` (nu×nx), `D` (p×nx), `E` (p×nu).
fn stage_len(nx: usize, nu: usize, p: usize) -> usize {
    2 * nx * nx + 2 * nx * nu + nu * nu + p * (nx + nu)
}

/// Offset of a block within its stage, and its shape.
fn blk_place(nx: usize, nu: usize, p: usize, blk: Blk) -> (usize, usize, usize) {
    let (a, b, q) = (0, nx * nx, nx * nx + nx * nu);
    let r = q + nx * nx;
    let s = r + nu * nu;
    let d = s + nu * nx;
    let e = d + p * nx;
    match blk {
        Blk::A => (a, nx, nx),
        Blk::B => (b, nx, nu),
        Blk::Q => (q, nx, nx),
        Blk::R => (r, nu, nu),
        Blk::S => (s, nu, nx),
        Blk::D => (d, p, nx),
        Blk::E => (e, p, nu),
    }
}

impl StageFactor {
    fn new(nx: usize, nu: usize, p: usize, base: usize) -> Self {
        StageFactor {
            base,
            p,
            m: Mat::zeros(nu, nu),
            g: Mat::zeros(nu, nx),
            gamma: Mat::zeros(nu, nu),
            theta: Mat::zeros(nu, p),
            t: Mat::zeros(nu, p),
            gain: Mat::zeros(nu, nx),
            gt: vec![0.0; nx * nu],
            kt: vec![0.0; nx * nu],
            gam: vec![0.0; nu * nu],
        }
    }
}

/// Scratch matrices of the backward pass (reused across stages and refactorizations).
struct Temps {
    /// `Pₖ₊₁[Aₖ Bₖ]` (nx×(nx+nu)).
    pab: Mat<f64>,
    /// `[Aₖ Bₖ]ᵀPₖ₊₁[Aₖ Bₖ]` ((nx+nu)×(nx+nu)).
    hk: Mat<f64>,
    gk: Mat<f64>,
    /// Cholesky factor of `Mₖ` (stages without input constraints).
    l: Mat<f64>,
    /// `L⁻¹Gₖ` (stages without input constraints).
    v: Mat<f64>,
    llt_buf: faer::dyn_stack::MemBuffer,
}

/// Where each stored entry of the sparse `H` and `A` goes in `data`, computed once per
/// pattern so a refactorization copies values without classifying entries again (a copy
/// of the pattern tells whether a problem still has it). Pairs are (index into the
/// block's stored values, offset in `data`).
#[derive(Clone, Debug)]
struct ScatterMap {
    /// The blocks `H` and `A` whose pattern this map describes (those it was built from, or
    /// the last ones found to have the same pattern), held (shared) so that their storage
    /// cannot be freed and reused by another matrix: a block is immutable behind its
    /// reference count, so the same block has the same pattern. The refactorization loop,
    /// which passes the [`Factorization`](crate::Factorization)'s problem (sharing the
    /// caller's blocks), compares the pattern once instead of on every call (the comparison
    /// read as many bytes as the value copy itself: about 5% of refactor + solve at N = 200
    /// in the bench).
    pattern: (Arc<Matrix>, Arc<Matrix>),
    /// `Qₖ, Sₖ, Rₖ` entries of `H`, as runs (see [`runs`]).
    h_put: Vec<(u32, u32, u32)>,
    /// `Dₖ, Eₖ` entries of `A`, as runs.
    a_put: Vec<(u32, u32, u32)>,
    /// `−Aₖ, −Bₖ` entries of `A` (stored negated), as runs.
    a_neg: Vec<(u32, u32, u32)>,
    /// Unit entries of the identity blocks of `A` (must stay 1).
    a_unit: Vec<u32>,
    /// Entries outside the stage structure (must stay 0).
    h_zero: Vec<u32>,
    a_zero: Vec<u32>,
}

/// Merges (source, destination) pairs, in storage order, into runs
/// (source, destination, length) of consecutive entries on both sides: a dense stage block
/// stored column by column becomes one run per block column, copied like a slice.
fn runs(pairs: &[(u32, u32)]) -> Vec<(u32, u32, u32)> {
    let mut out: Vec<(u32, u32, u32)> = Vec::new();
    for &(src, dst) in pairs {
        match out.last_mut() {
            Some((s, d, len)) if *s + *len == src && *d + *len == dst => *len += 1,
            _ => out.push((src, dst, 1)),
        }
    }
    out
}

/// Outcome of the copy through a [`ScatterMap`].
enum MapScatter {
    Done,
    /// The problem's pattern is not the one of the map.
    OtherPattern,
    /// A value breaks the structure (the slow scatter names it).
    Broken,
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
    /// The stage data blocks (see [`blk_place`]), then `Q_N` at `qn_base`.
    data: Vec<f64>,
    qn_base: usize,
    map: Option<ScatterMap>,
    /// The `Pₖ` (nx×nx), column-major one after the other.
    p_flat: Vec<f64>,
    temps: Temps,
    inertia: Inertia,
    indefinite: Vec<(usize, Inertia)>,
    notes: Vec<String>,
    fallback: Option<DenseLblt>,
}

fn mm(dst: MatMut<'_, f64>, accum: Accum, a: MatRef<'_, f64>, b: MatRef<'_, f64>, alpha: f64) {
    matmul(dst, accum, a, b, alpha, Par::Seq);
}

/// A data block of one stage as a matrix view.
fn view<'a>(data: &'a [f64], nx: usize, nu: usize, s: &StageFactor, blk: Blk) -> MatRef<'a, f64> {
    let (off, r, c) = blk_place(nx, nu, s.p, blk);
    let at = s.base + off;
    MatRef::from_column_major_slice(&data[at..at + r * c], r, c)
}

/// The column-major entries of a data block of one stage.
fn block<'a>(data: &'a [f64], nx: usize, nu: usize, s: &StageFactor, blk: Blk) -> &'a [f64] {
    let (off, r, c) = blk_place(nx, nu, s.p, blk);
    &data[s.base + off..s.base + off + r * c]
}

/// `y += A·x` for a column-major `A` given by its entries (`y.len()` rows).
#[inline]
fn mv_cm(y: &mut [f64], a: &[f64], x: &[f64]) {
    if y.is_empty() {
        return;
    }
    for (col, &xj) in a.chunks_exact(y.len()).zip(x) {
        for (yi, aij) in y.iter_mut().zip(col) {
            *yi += aij * xj;
        }
    }
}

/// `y += Aᵀ·x` for a column-major `A` given by its entries (`x.len()` rows).
#[inline]
fn mtv_cm(y: &mut [f64], a: &[f64], x: &[f64]) {
    if x.is_empty() {
        return;
    }
    for (yj, col) in y.iter_mut().zip(a.chunks_exact(x.len())) {
        *yj += dot(col, x);
    }
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
        *yj += dot(a.col_as_slice(j), x);
    }
}

/// `aᵀb` over the common length, with four partial sums (the short dot products of the
/// sweeps then vectorize; the summation order differs from a left-to-right sum only by
/// rounding).
#[inline]
fn dot(a: &[f64], b: &[f64]) -> f64 {
    let len = a.len().min(b.len());
    let (ca, cb) = (a[..len].chunks_exact(4), b[..len].chunks_exact(4));
    let (ra, rb) = (ca.remainder(), cb.remainder());
    let mut acc = [0.0f64; 4];
    for (p, q) in ca.zip(cb) {
        acc[0] += p[0] * q[0];
        acc[1] += p[1] * q[1];
        acc[2] += p[2] * q[2];
        acc[3] += p[3] * q[3];
    }
    let mut sum = (acc[0] + acc[2]) + (acc[1] + acc[3]);
    for (p, q) in ra.iter().zip(rb) {
        sum += p * q;
    }
    sum
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
        let mut base = 0;
        let stages = (0..horizon)
            .map(|k| {
                let p = st.constraint_rows(k).len();
                let s = StageFactor::new(nx, nu, p, base);
                base += stage_len(nx, nu, p);
                s
            })
            .collect();
        let llt_req =
            faer::linalg::cholesky::llt::factor::cholesky_in_place_scratch::<f64>(nu, Par::Seq, Default::default());
        let mut backend = RiccatiBackend {
            n: problem.n(),
            m: problem.m(),
            stages,
            data: vec![0.0; base + nx * nx],
            qn_base: base,
            map: None,
            p_flat: vec![0.0; (horizon + 1) * nx * nx],
            temps: Temps {
                pab: Mat::zeros(nx, nx + nu),
                hk: Mat::zeros(nx + nu, nx + nu),
                gk: Mat::zeros(nu, nx),
                l: Mat::zeros(nu, nu),
                v: Mat::zeros(nu, nx),
                llt_buf: faer::dyn_stack::MemBuffer::new(llt_req),
            },
            inertia: Inertia::default(),
            indefinite: Vec::new(),
            notes: Vec::new(),
            fallback: None,
            st,
        };
        backend.map = backend.build_map(problem);
        backend
    }

    /// Offset in `data` of a stage slot (`None` for slots that are not stored).
    fn slot_offset(&self, slot: Slot) -> Option<(usize, bool)> {
        let StageDims { nx, nu, horizon } = self.st.dims();
        let at = |k: usize, blk: Blk, i: usize, j: usize| {
            let s = &self.stages[k];
            let (off, r, _) = blk_place(nx, nu, s.p, blk);
            s.base + off + j * r + i
        };
        match slot {
            Slot::Q(k, i, j) if k == horizon => Some((self.qn_base + j * nx + i, false)),
            Slot::Q(k, i, j) => Some((at(k, Blk::Q, i, j), false)),
            Slot::S(k, i, j) => Some((at(k, Blk::S, i, j), false)),
            Slot::R(k, i, j) => Some((at(k, Blk::R, i, j), false)),
            Slot::A(k, i, j) => Some((at(k, Blk::A, i, j), true)),
            Slot::B(k, i, j) => Some((at(k, Blk::B, i, j), true)),
            Slot::D(k, i, j) if k < horizon => Some((at(k, Blk::D, i, j), false)),
            Slot::E(k, i, j) if k < horizon => Some((at(k, Blk::E, i, j), false)),
            _ => None,
        }
    }

    /// The [`ScatterMap`] of a sparse problem (`None` for dense storage, or when the
    /// pattern cannot be described by one: sizes beyond `u32`, incomplete identities).
    fn build_map(&self, problem: &Problem) -> Option<ScatterMap> {
        let (Matrix::Sparse(h), Matrix::Sparse(a)) = (problem.hessian(), problem.constraints()) else {
            return None;
        };
        let small = |x: usize| u32::try_from(x).is_ok();
        if !small(self.data.len()) || !small(h.val().len()) || !small(a.val().len()) {
            return None;
        }
        let (mut h_put, mut a_put, mut a_neg) = (Vec::new(), Vec::new(), Vec::new());
        let mut map = ScatterMap {
            pattern: (Arc::clone(&problem.h), Arc::clone(&problem.a)),
            h_put: Vec::new(),
            a_put: Vec::new(),
            a_neg: Vec::new(),
            a_unit: Vec::new(),
            h_zero: Vec::new(),
            a_zero: Vec::new(),
        };
        let cp = h.symbolic().col_ptr();
        for j in 0..h.ncols() {
            for idx in cp[j]..cp[j + 1] {
                let i = h.symbolic().row_idx()[idx];
                match self.st.slot_h(i, j).ok().map(|slot| (slot, self.slot_offset(slot))) {
                    Some((Slot::Mirror, _)) => {}
                    Some((_, Some((off, _)))) => h_put.push((idx as u32, off as u32)),
                    _ => map.h_zero.push(idx as u32),
                }
            }
        }
        let cp = a.symbolic().col_ptr();
        for j in 0..a.ncols() {
            for idx in cp[j]..cp[j + 1] {
                let i = a.symbolic().row_idx()[idx];
                match self
                    .st
                    .slot_a(i, j, 1.0)
                    .ok()
                    .map(|slot| (slot, self.slot_offset(slot)))
                {
                    Some((Slot::Identity, _)) => map.a_unit.push(idx as u32),
                    Some((_, Some((off, true)))) => a_neg.push((idx as u32, off as u32)),
                    Some((_, Some((off, false)))) => a_put.push((idx as u32, off as u32)),
                    _ => map.a_zero.push(idx as u32),
                }
            }
        }
        (map.h_put, map.a_put, map.a_neg) = (runs(&h_put), runs(&a_put), runs(&a_neg));
        (map.a_unit.len() == self.st.dims().n_dynamics_rows()).then_some(map)
    }

    /// Copies the values of `problem` into `data` through the map.
    fn scatter_mapped(&mut self, problem: &Problem) -> MapScatter {
        let (Some(map), Matrix::Sparse(h), Matrix::Sparse(a)) =
            (&mut self.map, problem.hessian(), problem.constraints())
        else {
            return MapScatter::OtherPattern;
        };
        let (ph, pa) = &map.pattern;
        if !(Arc::ptr_eq(ph, &problem.h) && Arc::ptr_eq(pa, &problem.a)) {
            let same = ph.check_same_structure(&problem.h, Block::H).is_ok()
                && pa.check_same_structure(&problem.a, Block::A).is_ok();
            if !same {
                return MapScatter::OtherPattern;
            }
            map.pattern = (Arc::clone(&problem.h), Arc::clone(&problem.a));
        }
        let map = &*map;
        let (hv, av) = (h.val(), a.val());
        let broken = map.a_unit.iter().any(|&i| av[i as usize] != 1.0)
            || map.h_zero.iter().any(|&i| hv[i as usize] != 0.0)
            || map.a_zero.iter().any(|&i| av[i as usize] != 0.0);
        if broken {
            return MapScatter::Broken;
        }
        let data = &mut self.data;
        for (vals, list) in [(hv, &map.h_put), (av, &map.a_put)] {
            for &(src, dst, len) in list {
                let (src, dst, len) = (src as usize, dst as usize, len as usize);
                data[dst..dst + len].copy_from_slice(&vals[src..src + len]);
            }
        }
        for &(src, dst, len) in &map.a_neg {
            let (src, dst, len) = (src as usize, dst as usize, len as usize);
            for (d, v) in data[dst..dst + len].iter_mut().zip(&av[src..src + len]) {
                *d = -v;
            }
        }
        MapScatter::Done
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
        let nx = self.st.dims().nx;
        MatRef::from_column_major_slice(&self.p_flat[k * nx * nx..(k + 1) * nx * nx], nx, nx)
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

    /// Copies the stage data of `problem` into `data`: through the [`ScatterMap`] when the
    /// pattern is the mapped one (a new pattern gets a new map), else entry by entry,
    /// which also names the first entry that breaks the structure.
    fn scatter(&mut self, problem: &Problem) -> Result<()> {
        match self.scatter_mapped(problem) {
            MapScatter::Done => return Ok(()),
            MapScatter::OtherPattern => {
                self.map = self.build_map(problem);
                if let MapScatter::Done = self.scatter_mapped(problem) {
                    return Ok(());
                }
            }
            MapScatter::Broken => {}
        }
        self.scatter_checked(problem)
    }

    /// The entry-by-entry scatter with the structure check.
    fn scatter_checked(&mut self, problem: &Problem) -> Result<()> {
        let dims = self.st.dims();
        let horizon = dims.horizon;
        self.data.fill(0.0);
        let mut bad: Option<(Block, usize, usize, f64, String)> = None;
        let mut identities = 0usize;
        {
            let mut data = std::mem::take(&mut self.data);
            let this = &*self;
            let mut put = |slot: Slot, v: f64| {
                if let Some((off, neg)) = this.slot_offset(slot) {
                    data[off] = if neg { -v } else { v };
                }
            };
            problem.hessian().for_each(|i, j, v| {
                if v == 0.0 || bad.is_some() {
                    return;
                }
                match this.st.slot_h(i, j) {
                    Ok(slot @ (Slot::Q(..) | Slot::S(..) | Slot::R(..))) => put(slot, v),
                    Ok(_) => {}
                    Err(why) => bad = Some((Block::H, i, j, v, why)),
                }
            });
            problem.constraints().for_each(|i, j, v| {
                if v == 0.0 || bad.is_some() {
                    return;
                }
                match this.st.slot_a(i, j, v) {
                    Ok(slot @ (Slot::A(..) | Slot::B(..))) => put(slot, v),
                    Ok(Slot::Identity) => identities += 1,
                    Ok(slot @ (Slot::D(k, ..) | Slot::E(k, ..))) if k < horizon => put(slot, v),
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
            self.data = data;
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
        let StageDims { nx, nu, .. } = self.st.dims();
        let zero_scale = (self.n + self.m) as f64 * f64::EPSILON;
        let (before, after) = self.p_flat.split_at_mut((k + 1) * nx * nx);
        let p_next = MatRef::from_column_major_slice(&after[..nx * nx], nx, nx);
        let pk_flat = &mut before[k * nx * nx..];
        let t = &mut self.temps;
        let s = &mut self.stages[k];
        let data = &self.data;
        let pdim = s.p;
        // [A B] is stored contiguously (A then B, column-major): two products give
        // [A B]ᵀP[A B] = [[AᵀPA, ·], [BᵀPA, BᵀPB]], fewer and larger calls than five
        // separate products (measured with callgrind on the nx = 12, nu = 4 bench).
        let w = nx + nu;
        let ab = MatRef::from_column_major_slice(&data[s.base..s.base + nx * w], nx, w);
        mm(t.pab.as_mut(), Accum::Replace, p_next, ab, 1.0);
        mm(t.hk.as_mut(), Accum::Replace, ab.transpose(), t.pab.as_ref(), 1.0);
        // P_k starts as F = Q + AᵀPA; G = S + BᵀPA; M = R + BᵀPB.
        let (q, r, sc) = (
            block(data, nx, nu, s, Blk::Q),
            block(data, nx, nu, s, Blk::R),
            block(data, nx, nu, s, Blk::S),
        );
        for j in 0..nx {
            let hcol = t.hk.col_as_slice(j);
            for ((dst, h), qv) in pk_flat[j * nx..(j + 1) * nx]
                .iter_mut()
                .zip(&hcol[..nx])
                .zip(&q[j * nx..(j + 1) * nx])
            {
                *dst = qv + h;
            }
            for ((dst, h), sv) in
                s.g.col_as_slice_mut(j)
                    .iter_mut()
                    .zip(&hcol[nx..])
                    .zip(&sc[j * nu..(j + 1) * nu])
            {
                *dst = sv + h;
            }
        }
        for j in 0..nu {
            let hcol = t.hk.col_as_slice(nx + j);
            for ((dst, h), rv) in
                s.m.col_as_slice_mut(j)
                    .iter_mut()
                    .zip(&hcol[nx..])
                    .zip(&r[j * nu..(j + 1) * nu])
            {
                *dst = rv + h;
            }
        }
        symmetrize(s.m.as_mut());
        let mut p_k = MatMut::from_column_major_slice_mut(pk_flat, nx, nx);
        if pdim == 0 {
            // No input constraints (Z = I): with Mₖ = LLᵀ and V = L⁻¹Gₖ,
            // Kₖ = −Mₖ⁻¹Gₖ = −L⁻ᵀV, Γₖ = −Mₖ⁻¹ and Pₖ = Fₖ − VᵀV (the general formula below
            // with Gₖ + MₖKₖ = 0), all by triangular solves on preallocated storage.
            // An indefinite Mₖ goes on to the general path.
            t.l.copy_from(&s.m);
            let stack = MemStack::new(&mut t.llt_buf);
            let ok = cholesky_in_place(
                t.l.as_mut(),
                LltRegularization::default(),
                Par::Seq,
                stack,
                Default::default(),
            )
            .is_ok();
            if ok {
                t.v.copy_from(&s.g);
                solve_lower_triangular_in_place(t.l.as_ref(), t.v.as_mut(), Par::Seq);
                s.gain.copy_from(&t.v);
                solve_upper_triangular_in_place(t.l.transpose(), s.gain.as_mut(), Par::Seq);
                for j in 0..nx {
                    s.gain.col_as_slice_mut(j).iter_mut().for_each(|x| *x = -*x);
                }
                mm(p_k.rb_mut(), Accum::Add, t.v.transpose(), t.v.as_ref(), -1.0);
                symmetrize(p_k.rb_mut());
                s.gamma.fill(0.0);
                for i in 0..nu {
                    s.gamma[(i, i)] = -1.0;
                }
                solve_lower_triangular_in_place(t.l.as_ref(), s.gamma.as_mut(), Par::Seq);
                solve_upper_triangular_in_place(t.l.transpose(), s.gamma.as_mut(), Par::Seq);
                symmetrize(s.gamma.as_mut());
                return Ok(Some(Inertia::new(nu, 0, 0)));
            }
        }
        // Null-space basis Z (nu×nr) and T = E⁺.
        let nr = nu - pdim;
        let z: Mat<f64> = if pdim == 0 {
            Mat::identity(nu, nu)
        } else {
            let svd = view(data, nx, nu, s, Blk::E).svd().map_err(|_| Error::Stage {
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
            let d = view(data, nx, nu, s, Blk::D);
            mm(s.gain.as_mut(), Accum::Add, s.theta.as_ref(), d, -1.0);
        }
        // P_k = F + GᵀK + Kᵀ(G + M K).
        t.gk.copy_from(&s.g);
        mm(t.gk.as_mut(), Accum::Add, s.m.as_ref(), s.gain.as_ref(), 1.0);
        mm(p_k.rb_mut(), Accum::Add, s.g.transpose(), s.gain.as_ref(), 1.0);
        mm(p_k.rb_mut(), Accum::Add, s.gain.transpose(), t.gk.as_ref(), 1.0);
        symmetrize(p_k.rb_mut());
        Ok(Some(Inertia::new(reduced.positive + pdim, reduced.negative + pdim, 0)))
    }

    /// Copies the factors of stage `k` into the column-major arrays the sweeps read.
    fn flatten(&mut self, k: usize) {
        let StageDims { nx, nu, .. } = self.st.dims();
        let s = &mut self.stages[k];
        for j in 0..nx {
            let (g, kg) = (s.g.col_as_slice(j), s.gain.col_as_slice(j));
            for i in 0..nu {
                s.gt[i * nx + j] = g[i];
                s.kt[i * nx + j] = kg[i];
            }
        }
        for j in 0..nu {
            s.gam[j * nu..(j + 1) * nu].copy_from_slice(&s.gamma.col_as_slice(j)[..nu]);
        }
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
        self.p_flat[horizon * nx * nx..].copy_from_slice(&self.data[self.qn_base..self.qn_base + nx * nx]);
        let pair = (horizon + 1) * nx;
        let mut inertia = Inertia::new(pair, pair, 0);
        for k in (0..horizon).rev() {
            match self.stage_backward(k)? {
                Some(stage) => {
                    self.flatten(k);
                    let nr = self.stages[k].m.nrows() - self.stages[k].p;
                    if stage.positive - self.stages[k].p != nr {
                        self.indefinite.push((k, stage));
                        self.notes.push(format!(
                            "stage {k}: the reduced input Hessian Zₖᵀ(Rₖ + BₖᵀPₖ₊₁Bₖ)Zₖ is not positive definite \
                             ({} negative eigenvalue(s)); factored by eigendecomposition, the point is not a minimizer",
                            stage.negative - self.stages[k].p
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
            for (zi, v) in z.iter_mut().zip(rhs.rb().col(col).iter()) {
                *zi = *v;
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
                mv_cm(sv, &self.p_flat[(k + 1) * nx * nx..(k + 2) * nx * nx], ck);
                let (a, b) = (
                    block(&self.data, nx, nu, s, Blk::A),
                    block(&self.data, nx, nu, s, Blk::B),
                );
                // g = r_k + Bᵀ s, with r_k = −z[u_k]
                let g = &mut gv[k * nu..(k + 1) * nu];
                for (gi, zi) in g.iter_mut().zip(&z[uo..uo + nu]) {
                    *gi = -zi;
                }
                mtv_cm(g, b, sv);
                // f = q_k + Aᵀ s  → p_k accumulates from f
                let pk = &mut p_here[k * nx..];
                for (pi, zi) in pk.iter_mut().zip(&z[xo..xo + nx]) {
                    *pi = -zi;
                }
                mtv_cm(pk, a, sv);
                // k_k = Γ g + Θ e
                let kk = &mut kv[k * nu..(k + 1) * nu];
                kk.fill(0.0);
                mv_cm(kk, &s.gam, g);
                let rows = self.st.constraint_rows(k);
                if !rows.is_empty() {
                    let e = &mut ev[..rows.len()];
                    for (ei, &r) in e.iter_mut().zip(rows) {
                        *ei = z[n + r];
                    }
                    mv(kk, &s.theta, e);
                }
                // p_k = f + Gᵀ k + Kᵀ (g + M k); without input constraints k = −M⁻¹g, so
                // g + M k = 0 and the last term drops.
                mv_cm(&mut pk[..nx], &s.gt, kk);
                if !rows.is_empty() {
                    tu.copy_from_slice(g);
                    mv(tu, &s.m, kk);
                    mv_cm(&mut pk[..nx], &s.kt, tu);
                }
            }
            // Forward sweep.
            for i in 0..nx {
                z[i] = z[n + i];
            }
            for k in 0..horizon {
                let s = &self.stages[k];
                let (xo, uo) = (dims.x_offset(k), dims.u_offset(k));
                let w = nx + nu;
                // u_k = K x_k + k_k
                let (head, tail) = z.split_at_mut(uo);
                let uk = &mut tail[..nu];
                uk.copy_from_slice(&kv[k * nu..(k + 1) * nu]);
                mtv_cm(uk, &s.kt, &head[xo..xo + nx]);
                // x_{k+1} = [A B][x_k; u_k] + c_k ([A B] is stored contiguously)
                tx.copy_from_slice(&z[n + dims.state_rows(k + 1)..][..nx]);
                mv_cm(tx, &self.data[s.base..s.base + nx * w], &z[xo..xo + w]);
                z[xo + w..xo + w + nx].copy_from_slice(tx);
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
                mv_cm(tx, &self.p_flat[k * nx * nx..(k + 1) * nx * nx], &z[xo..xo + nx]);
                let yo = n + dims.state_rows(k);
                for (yi, ti) in z[yo..yo + nx].iter_mut().zip(tx.iter()) {
                    *yi = -ti;
                }
            }
            for (o, zi) in rhs.rb_mut().col_mut(col).iter_mut().zip(z.iter()) {
                *o = *zi;
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
