//! Dense symmetric-indefinite backend: faer's blocked Bunch–Kaufman LBLᵀ
//! (`P K Pᵀ = L B Lᵀ`, B block diagonal with 1×1 and 2×2 blocks) on the equilibrated K,
//! with the inertia read off B (Sylvester's law of inertia). faer does not report the
//! inertia; [`block_inertia`] computes it.
//!
//! **Precision.** From N ≥ [`MIXED_MIN_DIM`] the factorization runs in `f32` by default
//! ([`DensePrecision`]): faer's kernels run at twice the `f64` rate, and the iterative
//! refinement on the original K in `f64` (as for every backend) restores full accuracy.
//! The single-precision factors are used only when
//! - every entry of the equilibrated K̃ is inside the `f32` range and the factors are finite;
//! - a probe solve ([`crate::backend::probe`]) refines as it must: one correction contracts
//!   the backward error by 10³ or more, which says the spectral radius of `(K̃ + E)⁻¹E` is
//!   far below 1 (`K̃ + E` the matrix the `f32` factors represent), so `K̃ + tE` is
//!   nonsingular on `t ∈ [0, 1]` and K̃ has the inertia of the `f32` factors;
//! - no pivot eigenvalue is too close to zero to tell its sign: `|λ| ≤`
//!   [`MIXED_PIVOT_MARGIN`]` · max(ω₀, ε_f32) · max|K̃|`, where ω₀ is the backward error
//!   of the first (unrefined) probe solve, the measured stand-in for the relative backward
//!   error `‖E‖/‖K̃‖` of the `f32` factorization.
//!
//! Otherwise the factorization is redone in `f64`, with a note saying why.
//!
//! **Threads.** faer's blocked LBLᵀ alternates a panel step (one column at a time,
//! matrix-vector products and pivot searches: sequential in effect) with a parallel
//! rank-`b` update of the trailing matrix. Suspected cause of the missing two-core gain (not
//! yet confirmed on a quiet machine): called from outside the rayon pool, the caller runs
//! the panels while the pool's threads spin between parallel regions (spindle's spin
//! barrier), so three threads compete for two cores. [`run_in_pool`] runs the factorization
//! on a pool thread instead; `examples/lblt_threads.rs` compares both, and block sizes 32 to
//! 256. Under load 9 (N = 2000) neither variant beat the sequential factorization, and block
//! 256 was the fastest sequential one (0.49 s against 0.92 s at faer's default 64): to be
//! re-measured quiet before any default changes.

use faer::diag::Diag;
use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::lblt::{factor as bk, solve as bk_solve};
use faer::mat::AsMatMut;
use faer::prelude::ReborrowMut;
use faer::{Mat, MatMut, Par, Spec};

use crate::backend::KktBackend;
use crate::error::Result;
use crate::kkt;
use crate::problem::Problem;
use crate::solution::{Inertia, MethodUsed};

/// Pivot search used by the dense LBLᵀ factorization.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Default)]
#[non_exhaustive]
pub enum Pivoting {
    /// Bunch–Kaufman partial pivoting, also scanning the remaining diagonal for a large
    /// 1×1 pivot (faer's default; fastest).
    #[default]
    Partial,
    /// Rook pivoting (Ashcraft, Grimes & Lewis 1998): bounded entries in L, more robust on
    /// badly scaled matrices, somewhat slower.
    Rook,
}

/// Below this KKT order the factorization runs sequentially whatever
/// [`DenseParams::par`] says: on the 2-core development machine faer's parallel LBLᵀ was
/// slower than the sequential one up to N = 2000 (N = 650: 9.6 vs 6.9 ms; N = 2000: 176 vs
/// 153 ms) and even at N = 4000 (1.19 vs 1.21 s).
pub const PARALLEL_MIN_DIM: usize = 3000;

/// Precision of the dense LBLᵀ factors (see the [module docs](self)).
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
#[non_exhaustive]
pub enum DensePrecision {
    /// Factors in `f64`.
    Double,
    /// Factors in `f32` with refinement in `f64` on the original K (the scheme of LAPACK's
    /// `DSGESV`/`DSPOSV`: Buttari et al. 2007, Int. J. High Perform. Comput. Appl. 21),
    /// accepted only under the rules of the module docs, else refactored in `f64`.
    Mixed,
    /// [`Mixed`](DensePrecision::Mixed) when N ≥ [`MIXED_MIN_DIM`], else
    /// [`Double`](DensePrecision::Double).
    Auto,
}

/// Below this KKT order N, [`DensePrecision::Auto`] factors in `f64`: the probe and the
/// extra refinement steps cost more than the faster kernels save.
pub const MIXED_MIN_DIM: usize = 1000;

/// Safety factor between the measured backward error of one `f32` solve and the pivot
/// eigenvalues whose sign is trusted (see the [module docs](self)): 100 (a choice: the
/// backward error of a single solve is a lower bound of the factorization's, of the same
/// order in practice).
pub const MIXED_PIVOT_MARGIN: f64 = 100.0;

/// The probe accepts single-precision factors at once when its backward error reaches
/// this level (a healthy `f64` solve reaches about `1e-16`).
pub const PROBE_BACKWARD_ERROR: f64 = 1e-12;

/// Settings of the dense backend.
#[derive(Copy, Clone, Debug)]
pub struct DenseParams {
    /// Pivot search. Default: [`Pivoting::Partial`].
    pub pivoting: Pivoting,
    /// Ruiz sweeps for symmetric equilibration (0 = off). Default: 10 (stops earlier
    /// once every row maximum is within 10% of 1).
    pub equilibration_sweeps: usize,
    /// A pivot block eigenvalue with `|λ| ≤ tol · N · ε · max|K̃|` counts as zero (K̃ the
    /// equilibrated K, N its order). Default: 1.0.
    pub zero_pivot_factor: f64,
    /// Parallelism for the factorization of K of order at least
    /// [`PARALLEL_MIN_DIM`]; smaller ones always run sequentially. Default: all threads
    /// (faer/rayon).
    pub par: Par,
    /// Precision of the factors. Default: [`DensePrecision::Double`]: single precision did
    /// not pay on the indefinite path in the only (loaded) measurement so far (N = 2000:
    /// 0.361 s against 0.326 s in double), so it stays opt-in until a quiet run of
    /// `scripts/compare_dense.sh` says otherwise.
    pub precision: DensePrecision,
}

impl Default for DenseParams {
    fn default() -> Self {
        DenseParams {
            pivoting: Pivoting::Partial,
            equilibration_sweeps: 10,
            zero_pivot_factor: 1.0,
            par: Par::rayon(0),
            precision: DensePrecision::Double,
        }
    }
}

/// The dense LBLᵀ factorization of one KKT matrix.
pub struct DenseLblt {
    params: DenseParams,
    factors: Mat<f64>,
    subdiag: Diag<f64>,
    perm: Vec<usize>,
    perm_inv: Vec<usize>,
    scale: Vec<f64>,
    inertia: Inertia,
    factor_scratch: MemBuffer,
    // Single-precision factors (empty unless the last factorization used them).
    factors32: Mat<f32>,
    subdiag32: Diag<f32>,
    mixed: bool,
    notes: Vec<String>,
}

impl std::fmt::Debug for DenseLblt {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("DenseLblt")
            .field("dim", &self.factors.nrows())
            .field("params", &self.params)
            .field("inertia", &self.inertia)
            .finish_non_exhaustive()
    }
}

impl DenseLblt {
    /// Allocates storage for a problem of this size (no numeric work).
    pub fn new(problem: &Problem, params: DenseParams) -> Self {
        let dim = kkt::dim(problem);
        DenseLblt {
            params,
            factors: Mat::zeros(dim, dim),
            subdiag: Diag::zeros(dim),
            perm: vec![0; dim],
            perm_inv: vec![0; dim],
            scale: vec![1.0; dim],
            inertia: Inertia::default(),
            factor_scratch: MemBuffer::new(
                bk::cholesky_in_place_scratch::<usize, f64>(dim, params.par, Self::spec(params.pivoting)).or(
                    bk::cholesky_in_place_scratch::<usize, f32>(dim, params.par, Self::spec32(params.pivoting)),
                ),
            ),
            factors32: Mat::zeros(0, 0),
            subdiag32: Diag::zeros(0),
            mixed: false,
            notes: Vec::new(),
        }
    }

    /// Whether the factors in use are single precision (see [`DensePrecision::Mixed`]).
    pub fn mixed_precision(&self) -> bool {
        self.mixed
    }

    fn wants_mixed(&self) -> bool {
        match self.params.precision {
            DensePrecision::Double => false,
            DensePrecision::Mixed => true,
            DensePrecision::Auto => self.dim() >= MIXED_MIN_DIM,
        }
    }

    fn par_for(&self) -> Par {
        if self.dim() < PARALLEL_MIN_DIM {
            Par::Seq
        } else {
            self.params.par
        }
    }

    /// Tries the factorization of the equilibrated K̃ (in `self.factors`, left intact) in
    /// `f32`; `Err(reason)` when the rules of the module docs refuse it.
    fn try_single(&mut self, problem: &Problem) -> std::result::Result<(), String> {
        let dim = self.dim();
        let mut mx = 0.0f64;
        for j in 0..dim {
            for v in &self.factors.col_as_slice(j)[j..] {
                mx = mx.max(v.abs());
            }
        }
        if mx.is_nan() || mx > f32::MAX as f64 / 4.0 {
            return Err(format!(
                "the (equilibrated) K has entries of magnitude {mx:.1e}, outside the single-precision range"
            ));
        }
        if self.factors32.nrows() != dim {
            self.factors32 = Mat::zeros(dim, dim);
            self.subdiag32 = Diag::zeros(dim);
        }
        // Lower triangle only: faer's LBLᵀ never reads the strict upper one.
        for j in 0..dim {
            let (dst, src) = (
                &mut self.factors32.col_as_slice_mut(j)[j..],
                &self.factors.col_as_slice(j)[j..],
            );
            dst.iter_mut().zip(src).for_each(|(d, v)| *d = *v as f32);
        }
        let par = self.par_for();
        let spec = Self::spec32(self.params.pivoting);
        let (factors32, subdiag32, perm, perm_inv, scratch) = (
            &mut self.factors32,
            &mut self.subdiag32,
            &mut self.perm,
            &mut self.perm_inv,
            &mut self.factor_scratch,
        );
        run_in_pool(par, || {
            bk::cholesky_in_place(
                factors32.as_mut(),
                subdiag32.as_mut(),
                perm,
                perm_inv,
                par,
                MemStack::new(scratch),
                spec,
            );
        });
        let d: Vec<f64> = (0..dim).map(|i| self.factors32[(i, i)] as f64).collect();
        let e: Vec<f64> = (0..dim).map(|i| self.subdiag32[i] as f64).collect();
        if d.iter().chain(&e).any(|v| !v.is_finite()) {
            return Err("the single-precision factors overflowed".to_string());
        }
        self.mixed = true;
        let outcome = crate::backend::probe::run(problem, true, PROBE_BACKWARD_ERROR, |col| {
            let mut buf = MemBuffer::new(self.solve_scratch(1));
            self.solve_in_place(col, MemStack::new(&mut buf));
        })
        .map_err(|omega| {
            format!(
                "a probe solve on K kept a backward error of {omega:.1e} after refinement:                  K is too ill-conditioned for single-precision factors"
            )
        })?;
        let tol = MIXED_PIVOT_MARGIN * outcome.first.max(f32::EPSILON as f64) * mx;
        let (smallest, _) = smallest_block_eigenvalue(&d, &e);
        if smallest <= tol {
            return Err(format!(
                "a single-precision pivot eigenvalue of magnitude {smallest:.1e} is within                  {tol:.1e} of zero (its sign is not certain)"
            ));
        }
        self.inertia = block_inertia(&d, &e, 0.0);
        Ok(())
    }

    fn spec32(p: Pivoting) -> Spec<bk::LbltParams, f32> {
        let mut s: bk::LbltParams = Spec::<bk::LbltParams, f32>::default().config;
        s.pivoting = match p {
            Pivoting::Partial => bk::PivotingStrategy::PartialDiag,
            Pivoting::Rook => bk::PivotingStrategy::RookDiag,
        };
        s.into()
    }

    fn spec(p: Pivoting) -> Spec<bk::LbltParams, f64> {
        let mut s: bk::LbltParams = Spec::<bk::LbltParams, f64>::default().config;
        s.pivoting = match p {
            Pivoting::Partial => bk::PivotingStrategy::PartialDiag,
            Pivoting::Rook => bk::PivotingStrategy::RookDiag,
        };
        s.into()
    }

    /// The threshold below which a pivot eigenvalue counts as zero.
    fn zero_threshold(&self) -> f64 {
        let dim = self.factors.nrows();
        let mut mx = 0.0f64;
        // The diagonal blocks are bounded by max|K̃| ≈ 1 after equilibration, but K̃ is
        // gone by now (factored in place); use 1 when equilibrated, else the B maximum.
        if self.params.equilibration_sweeps > 0 {
            mx = 1.0;
        } else {
            for i in 0..dim {
                mx = mx.max(self.factors[(i, i)].abs()).max(self.subdiag[i].abs());
            }
        }
        self.params.zero_pivot_factor * dim as f64 * f64::EPSILON * mx
    }
}

/// Inertia of a block-diagonal B given by its diagonal `d` and the subdiagonal entries `e`
/// of its 2×2 blocks (`e[i] ≠ 0` starts a 2×2 block at `i`), counting eigenvalues with
/// `|λ| ≤ tol` as zero.
pub fn block_inertia(d: &[f64], e: &[f64], tol: f64) -> Inertia {
    let mut inertia = Inertia::default();
    let mut count = |lambda: f64| {
        if lambda.abs() <= tol || lambda.is_nan() {
            inertia.zero += 1;
        } else if lambda > 0.0 {
            inertia.positive += 1;
        } else {
            inertia.negative += 1;
        }
    };
    let mut i = 0;
    while i < d.len() {
        if e[i] != 0.0 && i + 1 < d.len() {
            let (a, b, c) = (d[i], e[i], d[i + 1]);
            // Eigenvalues of [a b; b c]: mean ± radius; the smaller one from det / larger
            // for accuracy.
            let mean = 0.5 * (a + c);
            let radius = (0.5 * (a - c)).hypot(b);
            let big = if mean >= 0.0 { mean + radius } else { mean - radius };
            let det = a * c - b * b;
            let small = if big != 0.0 { det / big } else { 0.0 };
            count(big);
            count(small);
            i += 2;
        } else {
            count(d[i]);
            i += 1;
        }
    }
    inertia
}

/// Runs `op` on a thread of the rayon pool when `par` is parallel and the caller is not
/// already one (see the module docs, "Threads"); directly otherwise.
pub fn run_in_pool<R: Send>(par: Par, op: impl FnOnce() -> R + Send) -> R {
    match par {
        Par::Seq => op(),
        _ if rayon::current_thread_index().is_some() => op(),
        _ => {
            let mut out = None;
            rayon::scope(|_| out = Some(op()));
            out.expect("the scope ran the operation")
        }
    }
}

/// The smallest absolute eigenvalue among the 1×1 and 2×2 blocks of B (as in
/// [`block_inertia`]), with its position.
fn smallest_block_eigenvalue(d: &[f64], e: &[f64]) -> (f64, usize) {
    let mut best = (f64::INFINITY, 0);
    let mut i = 0;
    while i < d.len() {
        let lambda = if e[i] != 0.0 && i + 1 < d.len() {
            let (a, b, c) = (d[i], e[i], d[i + 1]);
            let mean = 0.5 * (a + c);
            let radius = (0.5 * (a - c)).hypot(b);
            let big = if mean >= 0.0 { mean + radius } else { mean - radius };
            let small = if big != 0.0 { (a * c - b * b) / big } else { 0.0 };
            let step = 2;
            let v = small.abs().min(big.abs());
            if v < best.0 {
                best = (v, i);
            }
            i += step;
            continue;
        } else {
            d[i].abs()
        };
        if lambda < best.0 {
            best = (lambda, i);
        }
        i += 1;
    }
    best
}

impl KktBackend for DenseLblt {
    fn method(&self) -> MethodUsed {
        MethodUsed::DenseLblt
    }

    fn dim(&self) -> usize {
        self.factors.nrows()
    }

    fn factor(&mut self, problem: &Problem) -> Result<()> {
        let dim = self.dim();
        self.notes.clear();
        self.mixed = false;
        kkt::fill_dense(problem, self.factors.as_mut());
        if self.params.equilibration_sweeps > 0 {
            self.scale = kkt::ruiz_dense(self.factors.as_mut(), self.params.equilibration_sweeps);
        } else {
            self.scale.iter_mut().for_each(|s| *s = 1.0);
        }
        if self.wants_mixed() {
            match self.try_single(problem) {
                Ok(()) => {
                    self.notes.push(
                        "dense LBLᵀ factors in single precision; refinement in double precision on the original K"
                            .to_string(),
                    );
                    return Ok(());
                }
                Err(reason) => {
                    self.mixed = false;
                    self.factors32 = Mat::zeros(0, 0);
                    self.subdiag32 = Diag::zeros(0);
                    self.notes.push(format!(
                        "single-precision dense LBLᵀ factors refused ({reason}); refactored in double precision"
                    ));
                }
            }
        }
        let par = self.par_for();
        let spec = Self::spec(self.params.pivoting);
        let (factors, subdiag, perm, perm_inv, scratch) = (
            &mut self.factors,
            &mut self.subdiag,
            &mut self.perm,
            &mut self.perm_inv,
            &mut self.factor_scratch,
        );
        run_in_pool(par, || {
            bk::cholesky_in_place(
                factors.as_mut(),
                subdiag.as_mut(),
                perm,
                perm_inv,
                par,
                MemStack::new(scratch),
                spec,
            );
        });
        let d: Vec<f64> = (0..dim).map(|i| self.factors[(i, i)]).collect();
        let e: Vec<f64> = (0..dim).map(|i| self.subdiag[i]).collect();
        self.inertia = block_inertia(&d, &e, self.zero_threshold());
        Ok(())
    }

    fn inertia(&self) -> Option<Inertia> {
        Some(self.inertia)
    }

    fn solve_scratch(&self, nrhs: usize) -> StackReq {
        let dim = self.dim();
        bk_solve::solve_in_place_scratch::<usize, f64>(dim, nrhs, Par::Seq).or(faer::linalg::temp_mat_scratch::<f32>(
            dim, nrhs,
        )
        .and(bk_solve::solve_in_place_scratch::<usize, f32>(dim, nrhs, Par::Seq)))
    }

    fn solve_in_place(&self, mut rhs: MatMut<'_, f64>, stack: &mut MemStack) {
        let dim = self.dim();
        for j in 0..rhs.ncols() {
            for i in 0..dim {
                rhs[(i, j)] *= self.scale[i];
            }
        }
        // SAFETY-free: the permutation arrays were produced by faer's factorization.
        let perm = faer::perm::PermRef::new_checked(&self.perm, &self.perm_inv, dim);
        if self.mixed {
            // Each column is brought to unit max-norm before rounding to f32 (so that a
            // residual of any magnitude is representable), and scaled back after.
            let k = rhs.ncols();
            let (mut t, stack) = faer::linalg::temp_mat_zeroed::<f32, _, _>(dim, k, stack);
            let mut t = t.as_mat_mut();
            let mut norms = Vec::with_capacity(k);
            for j in 0..k {
                let mx = (0..dim).fold(0.0f64, |a, i| a.max(rhs[(i, j)].abs()));
                let s = if mx > 0.0 && mx.is_finite() { mx } else { 1.0 };
                norms.push(s);
                for i in 0..dim {
                    t[(i, j)] = (rhs[(i, j)] / s) as f32;
                }
            }
            bk_solve::solve_in_place_with_conj(
                self.factors32.as_ref(),
                self.factors32.diagonal(),
                self.subdiag32.as_ref(),
                faer::Conj::No,
                perm,
                t.rb_mut(),
                Par::Seq,
                stack,
            );
            for (j, s) in norms.iter().enumerate() {
                for i in 0..dim {
                    rhs[(i, j)] = t[(i, j)] as f64 * s;
                }
            }
        } else {
            bk_solve::solve_in_place_with_conj(
                self.factors.as_ref(),
                self.factors.diagonal(),
                self.subdiag.as_ref(),
                faer::Conj::No,
                perm,
                rhs.rb_mut(),
                Par::Seq,
                stack,
            );
        }
        for j in 0..rhs.ncols() {
            for i in 0..dim {
                rhs[(i, j)] *= self.scale[i];
            }
        }
    }

    fn notes(&self) -> &[String] {
        &self.notes
    }
}
