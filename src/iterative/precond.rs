//! Block-diagonal preconditioners `P = diag(P₁, P₂)` for MINRES on `K = [H Aᵀ; A 0]`.
//!
//! With `P₁ = H` and `P₂ = A H⁻¹ Aᵀ` exactly, `P⁻¹K` has the three eigenvalues
//! `1, (1 ± √5)/2` and MINRES stops in at most three iterations (Murphy, Golub & Wathen
//! 2000). The cheap variants approximate both blocks:
//!
//! * `P₁`: [`FirstBlock::Jacobi`] (`diag(H)`) or [`FirstBlock::Cholesky`] (sparse Cholesky
//!   of `H + σI`, faer's sparse `LLᵀ`);
//! * `P₂`: [`SecondBlock::Diagonal`] (`diag(A D⁻¹ Aᵀ)`) or [`SecondBlock::Cholesky`]
//!   (sparse Cholesky of `A D⁻¹ Aᵀ`), where `D = diag(H)` (with the Jacobi floor below).
//!   When `H` is diagonal, `A D⁻¹ Aᵀ` is the exact Schur complement. `A D⁻¹ Aᵀ` is
//!   assembled by faer's sparse-sparse product of `B = A D^{-1/2}` and `Bᵀ`;
//! * `P₂`: [`SecondBlock::Matching`] (Pearson & Wathen 2012, Numer. Linear Algebra Appl. 19,
//!   "A new approximation of the Schur complement in preconditioners for PDE-constrained
//!   optimization"), for `A = [A₁ A₂]` with two square m×m blocks (`n = 2m`): with
//!   `D = diag(D₁, D₂)` and `B_i = A_i D_i^{-1/2}`, `S = A D⁻¹ Aᵀ = B₁B₁ᵀ + B₂B₂ᵀ` is
//!   approximated by `Ŝ = (B₁ + σB₂)(B₁ + σB₂)ᵀ`, applied through **one** sparse
//!   factorization of the m×m matrix `M = B₁ + σB₂` (Cholesky when `M` is symmetric and
//!   positive definite, LU otherwise) and two triangular solves each way. When
//!   `σ(B₁B₂ᵀ + B₂B₁ᵀ)` is positive semidefinite, `eig(Ŝ⁻¹S) ⊂ [1/2, 1]` (Pearson & Wathen
//!   2012, quoted from memory). σ = ±1 is the sign of `tr(B₁B₂ᵀ)` (a necessary condition
//!   for that semidefiniteness; it is not checked further). On Poisson control (`A₁` the
//!   5-point Laplacian, `A₂ = −h²I`, `D₁`, `D₂` multiples of `I`) `M` is a symmetric
//!   positive definite 5-point matrix instead of the 13-point `A D⁻¹ Aᵀ`, and the bound
//!   holds. Not applicable: [`Error::InvalidOption`] when `n ≠ 2m`,
//!   [`Error::NotApplicable`] when `M` is singular.
//!
//! Every block must be symmetric positive definite (MINRES needs an SPD preconditioner).
//! Users plug their own blocks in through [`BlockSolve`].

use std::collections::HashMap;

use crate::problem::Matrix;

use faer::linalg::solvers::Solve;
use faer::sparse::{SparseColMat, Triplet};
use faer::Side;

use crate::error::{Error, Result};
use crate::problem::Problem;

/// An SPD block of a preconditioner: `out = P⁻¹·r`.
pub trait BlockSolve {
    /// Order of the block.
    fn dim(&self) -> usize;
    /// `out = P⁻¹·r` (overwrites `out`; `P` symmetric positive definite).
    fn solve(&self, r: &[f64], out: &mut [f64]);
}

/// An SPD preconditioner for the whole KKT system: `out = P⁻¹·r` (length n + m). `Sync`
/// because MINRES runs on faer's `Precond` trait, which requires it.
pub trait Preconditioner: Sync {
    /// `out = P⁻¹·r` (overwrites `out`).
    fn apply(&self, r: &[f64], out: &mut [f64]);
}

/// No preconditioning (`P = I`).
#[derive(Copy, Clone, Debug, Default)]
pub struct Identity;

impl Preconditioner for Identity {
    fn apply(&self, r: &[f64], out: &mut [f64]) {
        out.copy_from_slice(r);
    }
}

/// `P = diag(d)` with positive entries.
#[derive(Clone, Debug)]
pub struct DiagonalBlock {
    inv: Vec<f64>,
}

impl DiagonalBlock {
    /// From the diagonal `d` (every entry must be positive and finite).
    pub fn new(d: &[f64]) -> Result<Self> {
        if let Some((i, v)) = d.iter().enumerate().find(|(_, v)| !(v.is_finite() && **v > 0.0)) {
            return Err(Error::NotApplicable {
                method: "minres",
                detail: format!("preconditioner diagonal entry {i} is {v:e}: it must be positive and finite"),
            });
        }
        Ok(DiagonalBlock {
            inv: d.iter().map(|v| 1.0 / v).collect(),
        })
    }
}

impl BlockSolve for DiagonalBlock {
    fn dim(&self) -> usize {
        self.inv.len()
    }
    fn solve(&self, r: &[f64], out: &mut [f64]) {
        for ((o, r), d) in out.iter_mut().zip(r).zip(&self.inv) {
            *o = r * d;
        }
    }
}

/// A sparse Cholesky factor (faer's sparse `LLᵀ` with its fill-reducing ordering).
pub struct CholeskyBlock {
    dim: usize,
    llt: faer::sparse::linalg::solvers::Llt<usize, f64>,
}

impl std::fmt::Debug for CholeskyBlock {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("CholeskyBlock").field("dim", &self.dim).finish()
    }
}

impl CholeskyBlock {
    /// Factors the SPD matrix given by its lower-triangle entries `(row ≥ col, col, value)`
    /// (duplicates are summed). `what` names the block in the error when it is not SPD.
    pub fn from_lower_entries(dim: usize, entries: &HashMap<(usize, usize), f64>, what: &str) -> Result<Self> {
        let mut trip: Vec<Triplet<usize, usize, f64>> =
            entries.iter().map(|(&(i, j), &v)| Triplet::new(i, j, v)).collect();
        trip.sort_by_key(|t| (t.col, t.row));
        let mat = SparseColMat::try_new_from_triplets(dim, dim, &trip).map_err(|e| Error::Resources {
            detail: format!("building {what}: {e:?}"),
        })?;
        let llt = mat.sp_cholesky(Side::Lower).map_err(|e| {
            Error::NotApplicable {
                method: "minres",
                detail: format!(
                    "the preconditioner block {what} is not positive definite ({e:?}); use a Jacobi/diagonal block or a shift"
                ),
            }
        })?;
        Ok(CholeskyBlock { dim, llt })
    }
}

impl CholeskyBlock {
    /// Factors the SPD matrix `mat` (only its lower triangle is read). `what` names the
    /// block in the error when it is not SPD.
    pub fn from_matrix(mat: &SparseColMat<usize, f64>, what: &str) -> Result<Self> {
        let llt = mat.sp_cholesky(Side::Lower).map_err(|e| {
            Error::InvalidOption(format!(
                "the preconditioner block {what} is not positive definite ({e:?}); use a Jacobi/diagonal block or a shift"
            ))
        })?;
        Ok(CholeskyBlock { dim: mat.nrows(), llt })
    }
}

impl BlockSolve for CholeskyBlock {
    fn dim(&self) -> usize {
        self.dim
    }
    fn solve(&self, r: &[f64], out: &mut [f64]) {
        out.copy_from_slice(r);
        let mat = faer::MatMut::from_column_major_slice_mut(out, self.dim, 1);
        self.llt.solve_in_place(mat);
    }
}

/// How to approximate `H` in the first block.
#[derive(Copy, Clone, Debug, PartialEq)]
pub enum FirstBlock {
    /// `diag(H)`; entries below `1e-8·max|diag(H)|` (or non-positive) are raised to that floor
    /// (common practice for a Jacobi preconditioner that must stay positive).
    Jacobi,
    /// Sparse Cholesky of `H + shift·I` (needs `H + shift·I` positive definite).
    Cholesky {
        /// The shift σ ≥ 0.
        shift: f64,
    },
}

/// How to approximate the Schur complement `A H⁻¹ Aᵀ` in the second block.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum SecondBlock {
    /// `diag(A D⁻¹ Aᵀ)` with `D` the (floored) diagonal of `H`.
    Diagonal,
    /// Sparse Cholesky of `A D⁻¹ Aᵀ` (exact Schur complement when `H` is diagonal).
    Cholesky,
    /// Pearson–Wathen "matching" approximation `(B₁ + σB₂)(B₁ + σB₂)ᵀ` for `A = [A₁ A₂]`
    /// with square blocks (`n = 2m`), see the [module docs](self).
    Matching,
}

/// `P = diag(P₁, P₂)`.
pub struct BlockDiagonal {
    p1: Box<dyn BlockSolve + Send + Sync>,
    p2: Box<dyn BlockSolve + Send + Sync>,
}

impl std::fmt::Debug for BlockDiagonal {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("BlockDiagonal")
            .field("n", &self.p1.dim())
            .field("m", &self.p2.dim())
            .finish()
    }
}

impl BlockDiagonal {
    /// From user-supplied blocks (`P₁` of order n, `P₂` of order m).
    pub fn new(p1: Box<dyn BlockSolve + Send + Sync>, p2: Box<dyn BlockSolve + Send + Sync>) -> Self {
        BlockDiagonal { p1, p2 }
    }

    /// Builds the blocks from an assembled problem.
    pub fn from_problem(problem: &Problem, first: FirstBlock, second: SecondBlock) -> Result<Self> {
        let (n, m) = (problem.n(), problem.m());
        let mut diag = vec![0.0; n];
        problem.hessian().for_each(|i, j, v| {
            if i == j {
                diag[i] += v;
            }
        });
        let dmax = diag.iter().fold(0.0f64, |a, v| a.max(v.abs()));
        let floor = if dmax > 0.0 { 1e-8 * dmax } else { 1.0 };
        for d in diag.iter_mut() {
            if *d < floor {
                *d = floor;
            }
        }
        let p1: Box<dyn BlockSolve + Send + Sync> = match first {
            FirstBlock::Jacobi => Box::new(DiagonalBlock::new(&diag)?),
            FirstBlock::Cholesky { shift } => {
                let mut e = HashMap::new();
                problem.hessian().for_each(|i, j, v| {
                    if i >= j {
                        *e.entry((i, j)).or_insert(0.0) += v;
                    }
                });
                for i in 0..n {
                    *e.entry((i, i)).or_insert(0.0) += shift;
                }
                Box::new(CholeskyBlock::from_lower_entries(n, &e, "P1 = H + shift·I")?)
            }
        };
        let a = problem.constraints();
        let p2: Box<dyn BlockSolve + Send + Sync> = match second {
            SecondBlock::Diagonal => {
                let mut s = vec![0.0; m];
                a.for_each(|i, j, v| s[i] += v * v / diag[j]);
                let smax = s.iter().fold(0.0f64, |a, v| a.max(*v));
                let sfloor = if smax > 0.0 { 1e-14 * smax } else { 1.0 };
                for v in s.iter_mut() {
                    if *v < sfloor {
                        *v = sfloor;
                    }
                }
                Box::new(DiagonalBlock::new(&s)?)
            }
            SecondBlock::Cholesky => {
                // S = B Bᵀ with B = A D^{-1/2} (same pattern as A), by faer's sparse product.
                let scale: Vec<f64> = diag.iter().map(|d| 1.0 / d.sqrt()).collect();
                let b = scaled_columns(a, m, 0..n, |j| scale[j]);
                drop(scale);
                let bt = b.as_ref().transpose().to_col_major().map_err(|e| Error::Resources {
                    detail: format!("transposing B = A D^(-1/2): {e:?}"),
                })?;
                let s =
                    faer::sparse::linalg::matmul::sparse_sparse_matmul(b.as_ref(), bt.as_ref(), 1.0, faer::Par::Seq)
                        .map_err(|e| Error::Resources {
                            detail: format!("forming P2 = A D⁻¹ Aᵀ: {e:?}"),
                        })?;
                drop((b, bt));
                Box::new(CholeskyBlock::from_matrix(&s, "P2 = A D⁻¹ Aᵀ")?)
            }
            SecondBlock::Matching => Box::new(MatchingBlock::new(a, m, n, &diag)?),
        };
        Ok(BlockDiagonal { p1, p2 })
    }
}

impl Preconditioner for BlockDiagonal {
    fn apply(&self, r: &[f64], out: &mut [f64]) {
        let n = self.p1.dim();
        let (r1, r2) = r.split_at(n);
        let (o1, o2) = out.split_at_mut(n);
        self.p1.solve(r1, o1);
        self.p2.solve(r2, o2);
    }
}

/// Columns `cols` of the m-row `A`, column `j` scaled by `w(j)`, in compressed form (rows
/// sorted) without triplets.
fn scaled_columns(
    a: &Matrix,
    m: usize,
    cols: std::ops::Range<usize>,
    w: impl Fn(usize) -> f64,
) -> SparseColMat<usize, f64> {
    let ncols = cols.len();
    let mut col_ptr = Vec::with_capacity(ncols + 1);
    col_ptr.push(0usize);
    let mut row_idx = Vec::new();
    let mut val = Vec::new();
    let mut c = Vec::new();
    for j in cols {
        column(a, Some((j, w(j))), &mut c);
        for &(i, v) in &c {
            row_idx.push(i);
            val.push(v);
        }
        col_ptr.push(row_idx.len());
    }
    let symbolic = faer::sparse::SymbolicSparseColMat::new_checked(m, ncols, col_ptr, None, row_idx);
    SparseColMat::new(symbolic, val)
}

/// The nonzeros `(row, w·value)` of column `j` of `a`, rows increasing (empty for `None`).
fn column(a: &Matrix, feed: Option<(usize, f64)>, out: &mut Vec<(usize, f64)>) {
    out.clear();
    let Some((j, w)) = feed else { return };
    match a {
        Matrix::Sparse(s) => {
            let cp = s.symbolic().col_ptr();
            let ri = s.symbolic().row_idx();
            let v = s.val();
            out.extend((cp[j]..cp[j + 1]).filter(|&k| v[k] != 0.0).map(|k| (ri[k], w * v[k])));
        }
        Matrix::Dense(d) => {
            out.extend((0..d.nrows()).filter(|&i| d[(i, j)] != 0.0).map(|i| (i, w * d[(i, j)])));
        }
    }
}

/// The factor of `M = B₁ + σB₂` behind [`SecondBlock::Matching`].
enum MatchingFactor {
    Cholesky(CholeskyBlock),
    Lu(Box<faer::sparse::linalg::solvers::Lu<usize, f64>>),
}

/// `P₂ = M Mᵀ` with `M = A₁D₁^{-1/2} + σA₂D₂^{-1/2}` ([`SecondBlock::Matching`]):
/// `P₂⁻¹r = M⁻ᵀ(M⁻¹r)`.
pub struct MatchingBlock {
    dim: usize,
    sigma: f64,
    factor: MatchingFactor,
}

impl std::fmt::Debug for MatchingBlock {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("MatchingBlock")
            .field("dim", &self.dim)
            .field("sigma", &self.sigma)
            .field("cholesky", &matches!(self.factor, MatchingFactor::Cholesky(_)))
            .finish()
    }
}

impl MatchingBlock {
    /// From `A` (m×n, `n = 2m`) and the positive diagonal `d` (length n) of `D`.
    ///
    /// ```
    /// use tangency::generate::PoissonControl;
    /// use tangency::iterative::{self, IterativeOptions, SecondBlock};
    /// let p = PoissonControl::new(10).build()?;
    /// let opts = IterativeOptions { second: SecondBlock::Matching, ..Default::default() };
    /// assert!(iterative::solve(&p, &opts)?.iterations < 30);
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn new(a: &Matrix, m: usize, n: usize, d: &[f64]) -> Result<Self> {
        if n != 2 * m || m == 0 || d.len() != n {
            return Err(Error::InvalidOption(format!(
                "the matching Schur block needs A = [A1 A2] with two square blocks (n = 2m, m > 0), \
                 but A is {m}×{n}; use the cholesky or diagonal Schur block"
            )));
        }
        let b1 = scaled_columns(a, m, 0..m, |j| 1.0 / d[j].sqrt());
        let b2 = scaled_columns(a, m, m..n, |j| 1.0 / d[j].sqrt());
        // σ = sign of tr(B₁B₂ᵀ) = Σ_c Σ_i B₁[i,c]·B₂[i,c] (merge of sorted columns).
        let mut trace = 0.0;
        for c in 0..m {
            let (r1, v1) = (b1.as_ref().row_idx_of_col_raw(c), b1.as_ref().val_of_col(c));
            let (r2, v2) = (b2.as_ref().row_idx_of_col_raw(c), b2.as_ref().val_of_col(c));
            let (mut p, mut q) = (0, 0);
            while p < r1.len() && q < r2.len() {
                match r1[p].cmp(&r2[q]) {
                    std::cmp::Ordering::Equal => {
                        trace += v1[p] * v2[q];
                        p += 1;
                        q += 1;
                    }
                    std::cmp::Ordering::Less => p += 1,
                    std::cmp::Ordering::Greater => q += 1,
                }
            }
        }
        let sigma = if trace >= 0.0 { 1.0 } else { -1.0 };
        let sum = if sigma > 0.0 {
            faer::sparse::ops::add(b1.as_ref(), b2.as_ref())
        } else {
            faer::sparse::ops::sub(b1.as_ref(), b2.as_ref())
        };
        let mat = sum.map_err(|e| Error::Resources {
            detail: format!("forming A₁D₁^(-1/2) ± A₂D₂^(-1/2): {e:?}"),
        })?;
        // Only M is needed from here: free the blocks before the factorization's peak.
        drop((b1, b2));
        let factor = if is_symmetric(&mat) {
            match CholeskyBlock::from_matrix(&mat, "M") {
                Ok(c) => MatchingFactor::Cholesky(c),
                Err(_) => MatchingFactor::Lu(Box::new(lu(&mat)?)),
            }
        } else {
            MatchingFactor::Lu(Box::new(lu(&mat)?))
        };
        Ok(MatchingBlock { dim: m, sigma, factor })
    }

    /// The sign σ chosen.
    pub fn sigma(&self) -> f64 {
        self.sigma
    }
}

fn lu(mat: &SparseColMat<usize, f64>) -> Result<faer::sparse::linalg::solvers::Lu<usize, f64>> {
    mat.sp_lu().map_err(|e| Error::NotApplicable {
        method: "minres",
        detail: format!(
            "the matching Schur block M = B1 ± B2 is singular ({e:?}); use the cholesky or diagonal Schur block"
        ),
    })
}

/// Symmetry of the stored pattern and values (relative to the largest entry, 1e-14).
fn is_symmetric(mat: &SparseColMat<usize, f64>) -> bool {
    let Ok(t) = mat.as_ref().transpose().to_col_major() else {
        return false;
    };
    let scale = mat.val().iter().fold(0.0f64, |a, v| a.max(v.abs()));
    mat.symbolic().col_ptr() == t.symbolic().col_ptr()
        && mat.symbolic().row_idx() == t.symbolic().row_idx()
        && mat
            .val()
            .iter()
            .zip(t.val())
            .all(|(a, b)| (a - b).abs() <= 1e-14 * scale)
}

impl BlockSolve for MatchingBlock {
    fn dim(&self) -> usize {
        self.dim
    }
    fn solve(&self, r: &[f64], out: &mut [f64]) {
        match &self.factor {
            MatchingFactor::Cholesky(c) => {
                // M symmetric: P₂⁻¹ = M⁻¹M⁻¹.
                let mut w = vec![0.0; self.dim];
                c.solve(r, &mut w);
                c.solve(&w, out);
            }
            MatchingFactor::Lu(lu) => {
                out.copy_from_slice(r);
                let mut mat = faer::MatMut::from_column_major_slice_mut(out, self.dim, 1);
                lu.solve_in_place(mat.as_mut());
                lu.solve_transpose_in_place(mat);
            }
        }
    }
}
