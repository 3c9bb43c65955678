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
//!   When `H` is diagonal, `A D⁻¹ Aᵀ` is the exact Schur complement.
//!
//! Every block must be symmetric positive definite (MINRES needs an SPD preconditioner).
//! Users plug their own blocks in through [`BlockSolve`].

use std::collections::HashMap;

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

/// An SPD preconditioner for the whole KKT system: `out = P⁻¹·r` (length n + m).
pub trait Preconditioner {
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
            return Err(Error::InvalidOption(format!(
                "preconditioner diagonal entry {i} is {v:e}: it must be positive and finite"
            )));
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
            Error::InvalidOption(format!(
                "the preconditioner block {what} is not positive definite ({e:?}); use a Jacobi/diagonal block or a shift"
            ))
        })?;
        Ok(CholeskyBlock { dim, llt })
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
        // Columns of A as lists, to form A D⁻¹ Aᵀ column by column of A.
        let mut cols: Vec<Vec<(usize, f64)>> = vec![Vec::new(); n];
        problem.constraints().for_each(|i, j, v| {
            if v != 0.0 {
                cols[j].push((i, v));
            }
        });
        let p2: Box<dyn BlockSolve + Send + Sync> = match second {
            SecondBlock::Diagonal => {
                let mut s = vec![0.0; m];
                for (j, col) in cols.iter().enumerate() {
                    for &(i, v) in col {
                        s[i] += v * v / diag[j];
                    }
                }
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
                let mut e: HashMap<(usize, usize), f64> = HashMap::new();
                for (j, col) in cols.iter().enumerate() {
                    for &(i, vi) in col {
                        for &(k, vk) in col {
                            if i >= k {
                                *e.entry((i, k)).or_insert(0.0) += vi * vk / diag[j];
                            }
                        }
                    }
                }
                Box::new(CholeskyBlock::from_lower_entries(m, &e, "P2 = A D⁻¹ Aᵀ")?)
            }
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
