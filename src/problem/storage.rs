//! Storage of one validated block: dense (column-major faer `Mat`) or sparse (faer
//! compressed-column, sorted rows, no duplicates).

use faer::sparse::{SparseColMat, SymbolicSparseColMat};
use faer::Mat;

use crate::error::{Block, Error, Result};

/// One block of a problem, in the storage it was given in.
#[derive(Clone, Debug)]
#[non_exhaustive]
pub enum Matrix {
    /// Dense, column-major.
    Dense(Mat<f64>),
    /// Compressed sparse column, row indices sorted within each column, no duplicates.
    Sparse(SparseColMat<usize, f64>),
}

impl Matrix {
    /// Rows.
    pub fn nrows(&self) -> usize {
        match self {
            Matrix::Dense(m) => m.nrows(),
            Matrix::Sparse(s) => s.nrows(),
        }
    }

    /// Columns.
    pub fn ncols(&self) -> usize {
        match self {
            Matrix::Dense(m) => m.ncols(),
            Matrix::Sparse(s) => s.ncols(),
        }
    }

    /// Stored entries (every entry for a dense block).
    pub fn nnz(&self) -> usize {
        match self {
            Matrix::Dense(m) => m.nrows() * m.ncols(),
            Matrix::Sparse(s) => s.val().len(),
        }
    }

    /// True for sparse storage.
    pub fn is_sparse(&self) -> bool {
        matches!(self, Matrix::Sparse(_))
    }

    /// A dense copy.
    pub fn to_dense(&self) -> Mat<f64> {
        match self {
            Matrix::Dense(m) => m.clone(),
            Matrix::Sparse(s) => s.to_dense(),
        }
    }

    /// Calls `f(row, col, value)` for every stored entry.
    pub fn for_each(&self, mut f: impl FnMut(usize, usize, f64)) {
        match self {
            Matrix::Dense(m) => {
                for j in 0..m.ncols() {
                    for (i, &v) in m.col(j).iter().enumerate() {
                        f(i, j, v);
                    }
                }
            }
            Matrix::Sparse(s) => {
                let cp = s.symbolic().col_ptr();
                let ri = s.symbolic().row_idx();
                let v = s.val();
                for (j, w) in cp.windows(2).enumerate() {
                    for (&i, &vk) in ri[w[0]..w[1]].iter().zip(&v[w[0]..w[1]]) {
                        f(i, j, vk);
                    }
                }
            }
        }
    }

    /// Largest absolute entry (0 for an empty block).
    pub fn max_abs(&self) -> f64 {
        let mut mx = 0.0f64;
        self.for_each(|_, _, v| mx = mx.max(v.abs()));
        mx
    }

    /// `y += M·x`.
    ///
    /// # Panics
    /// If the lengths do not match the block's shape.
    pub fn mul_add(&self, x: &[f64], y: &mut [f64]) {
        assert!(x.len() == self.ncols() && y.len() == self.nrows());
        match self {
            Matrix::Dense(m) => {
                for (j, &xj) in x.iter().enumerate() {
                    if xj != 0.0 {
                        let col = m.col(j);
                        for (yi, mij) in y.iter_mut().zip(col.iter()) {
                            *yi += mij * xj;
                        }
                    }
                }
            }
            Matrix::Sparse(s) => {
                let cp = s.symbolic().col_ptr();
                let ri = s.symbolic().row_idx();
                let v = s.val();
                for (w, &xj) in cp.windows(2).zip(x) {
                    for (&i, &vk) in ri[w[0]..w[1]].iter().zip(&v[w[0]..w[1]]) {
                        y[i] += vk * xj;
                    }
                }
            }
        }
    }

    /// `y += Mᵀ·x`.
    ///
    /// # Panics
    /// If the lengths do not match the block's shape.
    pub fn tr_mul_add(&self, x: &[f64], y: &mut [f64]) {
        assert!(x.len() == self.nrows() && y.len() == self.ncols());
        match self {
            Matrix::Dense(m) => {
                for (j, yj) in y.iter_mut().enumerate() {
                    let col = m.col(j);
                    *yj += col.iter().zip(x).map(|(a, b)| a * b).sum::<f64>();
                }
            }
            Matrix::Sparse(s) => {
                let cp = s.symbolic().col_ptr();
                let ri = s.symbolic().row_idx();
                let v = s.val();
                for (w, yj) in cp.windows(2).zip(y.iter_mut()) {
                    let mut acc = 0.0;
                    for (&i, &vk) in ri[w[0]..w[1]].iter().zip(&v[w[0]..w[1]]) {
                        acc += vk * x[i];
                    }
                    *yj += acc;
                }
            }
        }
    }

    /// `y += M·x` and `yt += Mᵀ·xt` in one pass over the stored entries (the residual of K
    /// needs both products with `A`). Every result is accumulated in the same order as by
    /// [`mul_add`](Self::mul_add) and [`tr_mul_add`](Self::tr_mul_add), so the values are
    /// bitwise the same; a sparse block is read once instead of twice.
    ///
    /// ```
    /// use tangency::{ProblemBuilder, Triangle};
    /// let p = ProblemBuilder::new()
    ///     .hessian_triplets(3, &[(0, 0, 1.0), (1, 1, 1.0), (2, 2, 1.0)], Triangle::Lower)
    ///     .constraints_triplets(2, 3, &[(0, 0, 0.3), (1, 0, -1.7), (0, 2, 2.9), (1, 1, 0.1)])
    ///     .build()?;
    /// let a = p.constraints();
    /// let (x, xt) = ([0.7, -1.3, 0.2], [1.1, 0.4]);
    /// let (mut y, mut yt) = (vec![0.5, 0.25], vec![1.0, 2.0, 3.0]);
    /// a.mul_add_both(&x, &mut y, &xt, &mut yt);
    /// let (mut y1, mut yt1) = (vec![0.5, 0.25], vec![1.0, 2.0, 3.0]);
    /// a.mul_add(&x, &mut y1);
    /// a.tr_mul_add(&xt, &mut yt1);
    /// assert_eq!((y, yt), (y1, yt1)); // bitwise
    /// # Ok::<(), tangency::Error>(())
    /// ```
    ///
    /// # Panics
    /// If the lengths do not match the block's shape.
    pub fn mul_add_both(&self, x: &[f64], y: &mut [f64], xt: &[f64], yt: &mut [f64]) {
        match self {
            Matrix::Dense(_) => {
                self.mul_add(x, y);
                self.tr_mul_add(xt, yt);
            }
            Matrix::Sparse(s) => {
                assert!(x.len() == self.ncols() && y.len() == self.nrows());
                assert!(xt.len() == self.nrows() && yt.len() == self.ncols());
                let cp = s.symbolic().col_ptr();
                let ri = s.symbolic().row_idx();
                let v = s.val();
                for (w, (&xj, ytj)) in cp.windows(2).zip(x.iter().zip(yt.iter_mut())) {
                    let mut acc = 0.0;
                    for (&i, &vk) in ri[w[0]..w[1]].iter().zip(&v[w[0]..w[1]]) {
                        acc += vk * xt[i];
                        y[i] += vk * xj;
                    }
                    *ytj += acc;
                }
            }
        }
    }

    /// `y += |M|·|x|` (for componentwise backward errors).
    pub fn abs_mul_add(&self, x: &[f64], y: &mut [f64]) {
        self.for_each(|i, j, v| y[i] += v.abs() * x[j].abs());
    }

    /// `y += |M|ᵀ·|x|`.
    pub fn abs_tr_mul_add(&self, x: &[f64], y: &mut [f64]) {
        self.for_each(|i, j, v| y[j] += v.abs() * x[i].abs());
    }

    /// Checks that `other` has the shape of `self`, and the same pattern when both are
    /// sparse (a change of storage kind is allowed).
    pub(crate) fn check_same_structure(&self, other: &Matrix, block: Block) -> Result<()> {
        if self.nrows() != other.nrows() || self.ncols() != other.ncols() {
            return Err(Error::StructureChanged {
                detail: format!(
                    "block {block} was {}×{} and is now {}×{}",
                    self.nrows(),
                    self.ncols(),
                    other.nrows(),
                    other.ncols()
                ),
            });
        }
        if let (Matrix::Sparse(a), Matrix::Sparse(b)) = (self, other) {
            let same =
                a.symbolic().col_ptr() == b.symbolic().col_ptr() && a.symbolic().row_idx() == b.symbolic().row_idx();
            if !same {
                return Err(Error::StructureChanged {
                    detail: format!("the sparsity pattern of block {block} changed"),
                });
            }
        }
        Ok(())
    }
}

/// Builds a compressed-column matrix from already validated triplets, summing duplicates
/// and dropping nothing (explicit zeros are kept: they belong to the pattern).
/// Written by hand because we need duplicate summation with a stable pattern and no
/// fallible allocation paths; faer's triplet constructor returns an argsort-based API.
pub(crate) fn csc_from_triplets(
    nrows: usize,
    ncols: usize,
    entries: &mut [(usize, usize, f64)],
) -> SparseColMat<usize, f64> {
    entries.sort_unstable_by_key(|&(i, j, _)| (j, i));
    let mut col_ptr = vec![0usize; ncols + 1];
    let mut row_idx = Vec::with_capacity(entries.len());
    let mut val: Vec<f64> = Vec::with_capacity(entries.len());
    let mut last: Option<(usize, usize)> = None;
    for &(i, j, v) in entries.iter() {
        if last == Some((i, j)) {
            *val.last_mut().expect("a previous entry exists") += v;
        } else {
            row_idx.push(i);
            val.push(v);
            col_ptr[j + 1] += 1;
            last = Some((i, j));
        }
    }
    for j in 0..ncols {
        col_ptr[j + 1] += col_ptr[j];
    }
    let symbolic = SymbolicSparseColMat::new_checked(nrows, ncols, col_ptr, None, row_idx);
    SparseColMat::new(symbolic, val)
}
