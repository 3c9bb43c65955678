//! Dense symmetric-indefinite backend: faer's blocked Bunch–Kaufman LBLᵀ
//! (`P K Pᵀ = L B Lᵀ`, B block diagonal with 1×1 and 2×2 blocks) on the equilibrated K,
//! with the inertia read off B (Sylvester's law of inertia). faer does not report the
//! inertia; [`block_inertia`] computes it.

use faer::diag::Diag;
use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::lblt::{factor as bk, solve as bk_solve};
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
}

impl Default for DenseParams {
    fn default() -> Self {
        DenseParams {
            pivoting: Pivoting::Partial,
            equilibration_sweeps: 10,
            zero_pivot_factor: 1.0,
            par: Par::rayon(0),
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
            factor_scratch: MemBuffer::new(bk::cholesky_in_place_scratch::<usize, f64>(
                dim,
                params.par,
                Self::spec(params.pivoting),
            )),
        }
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

impl KktBackend for DenseLblt {
    fn method(&self) -> MethodUsed {
        MethodUsed::DenseLblt
    }

    fn dim(&self) -> usize {
        self.factors.nrows()
    }

    fn factor(&mut self, problem: &Problem) -> Result<()> {
        let dim = self.dim();
        kkt::fill_dense(problem, self.factors.as_mut());
        if self.params.equilibration_sweeps > 0 {
            self.scale = kkt::ruiz_dense(self.factors.as_mut(), self.params.equilibration_sweeps);
        } else {
            self.scale.iter_mut().for_each(|s| *s = 1.0);
        }
        let (_info, _perm) = bk::cholesky_in_place(
            self.factors.as_mut(),
            self.subdiag.as_mut(),
            &mut self.perm,
            &mut self.perm_inv,
            if dim < PARALLEL_MIN_DIM {
                Par::Seq
            } else {
                self.params.par
            },
            MemStack::new(&mut self.factor_scratch),
            Self::spec(self.params.pivoting),
        );
        let d: Vec<f64> = (0..dim).map(|i| self.factors[(i, i)]).collect();
        let e: Vec<f64> = (0..dim).map(|i| self.subdiag[i]).collect();
        self.inertia = block_inertia(&d, &e, self.zero_threshold());
        Ok(())
    }

    fn inertia(&self) -> Option<Inertia> {
        Some(self.inertia)
    }

    fn solve_scratch(&self, nrhs: usize) -> StackReq {
        bk_solve::solve_in_place_scratch::<usize, f64>(self.dim(), nrhs, Par::Seq)
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
        for j in 0..rhs.ncols() {
            for i in 0..dim {
                rhs[(i, j)] *= self.scale[i];
            }
        }
    }
}
