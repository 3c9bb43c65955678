//! The typed builder. `build()` exists only once a Hessian has been given (type state), and
//! it validates everything before any arithmetic happens.

use std::marker::PhantomData;

use faer::sparse::SparseColMatRef;
use faer::{Mat, MatRef};
use nalgebra_sparse::{CooMatrix, CscMatrix};

use super::storage::{csc_from_triplets, Matrix};
use super::{check_vector, Problem};
use crate::error::{Block, Error, Result};

/// Default relative tolerance for the symmetry of a full `H`:
/// `|H[i,j] − H[j,i]| ≤ 1e-10 · max|H|`. Set another with
/// [`ProblemBuilder::symmetry_tolerance`]. Within the tolerance, `H` is replaced by
/// `(H + Hᵀ)/2`.
pub const DEFAULT_SYMMETRY_TOLERANCE: f64 = 1e-10;

/// Which part of `H` the caller provides.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum Triangle {
    /// Entries with `row ≥ col`. Dense input: the strict upper part is ignored.
    /// Sparse input: an entry with `row < col` is an error ([`Error::WrongTriangle`]).
    Lower,
    /// Entries with `row ≤ col`. Dense input: the strict lower part is ignored.
    /// Sparse input: an entry with `row > col` is an error.
    Upper,
    /// Both triangles; they must agree within the symmetry tolerance.
    Full,
}

/// Type state: no Hessian given yet (`build()` is not available).
#[derive(Debug, Default)]
pub struct NoHessian;

/// Type state: a Hessian has been given.
#[derive(Debug)]
pub struct HasHessian {
    input: Input,
    triangle: Triangle,
}

#[derive(Debug, Clone)]
enum Input {
    Dense(Mat<f64>),
    RowMajor {
        rows: usize,
        cols: usize,
        data: Vec<f64>,
    },
    Triplets {
        rows: usize,
        cols: usize,
        entries: Vec<(usize, usize, f64)>,
    },
}

/// Builds a [`Problem`] from blocks given in any supported storage.
///
/// * `H` (required): [`hessian_dense`](Self::hessian_dense),
///   [`hessian_row_major`](Self::hessian_row_major),
///   [`hessian_triplets`](Self::hessian_triplets), [`hessian_faer`](Self::hessian_faer),
///   [`hessian_csc`](Self::hessian_csc), [`hessian_coo`](Self::hessian_coo). Dense input is
///   stored dense, sparse input sparse.
/// * `A` (default: no constraints, m = 0): the `constraints_*` setters, same storages.
/// * `c` (default zeros): [`linear`](Self::linear); `b` (default zeros): [`rhs`](Self::rhs).
///
/// Duplicate sparse entries are **summed**. Explicit zeros are kept in the pattern.
///
/// `build()` does not compile before a Hessian is given:
///
/// ```compile_fail
/// let p = tangency::ProblemBuilder::new().linear(&[1.0]).build();
/// ```
///
/// and it refuses inconsistent data with an error naming the block and position:
///
/// ```
/// use tangency::{Error, ProblemBuilder, Triangle};
/// let err = ProblemBuilder::new()
///     .hessian_row_major(2, &[1.0, 0.0, 0.0, 1.0], Triangle::Full)
///     .constraints_row_major(1, 3, &[1.0, 1.0, 1.0])
///     .build()
///     .unwrap_err();
/// assert!(matches!(err, Error::DimensionMismatch { block: tangency::Block::A, .. }));
/// assert!(err.to_string().contains("block A"));
/// ```
#[derive(Debug)]
pub struct ProblemBuilder<S = NoHessian> {
    hessian: S,
    constraints: Option<Input>,
    c: Option<Vec<f64>>,
    b: Option<Vec<f64>>,
    symmetry_tol: f64,
    _state: PhantomData<S>,
}

impl Default for ProblemBuilder<NoHessian> {
    fn default() -> Self {
        Self::new()
    }
}

impl ProblemBuilder<NoHessian> {
    /// An empty builder: no data yet.
    pub fn new() -> Self {
        ProblemBuilder {
            hessian: NoHessian,
            constraints: None,
            c: None,
            b: None,
            symmetry_tol: DEFAULT_SYMMETRY_TOLERANCE,
            _state: PhantomData,
        }
    }
}

impl<S> ProblemBuilder<S> {
    fn with_hessian(self, input: Input, triangle: Triangle) -> ProblemBuilder<HasHessian> {
        ProblemBuilder {
            hessian: HasHessian { input, triangle },
            constraints: self.constraints,
            c: self.c,
            b: self.b,
            symmetry_tol: self.symmetry_tol,
            _state: PhantomData,
        }
    }

    /// `H` from a dense faer matrix; `triangle` says which part is read.
    pub fn hessian_dense(self, h: MatRef<'_, f64>, triangle: Triangle) -> ProblemBuilder<HasHessian> {
        self.with_hessian(Input::Dense(h.to_owned()), triangle)
    }

    /// `H` (n×n) from a row-major slice of length n².
    ///
    /// ```
    /// use tangency::{ProblemBuilder, Triangle};
    /// // lower triangle given; the 99.0 above the diagonal is ignored
    /// let p = ProblemBuilder::new()
    ///     .hessian_row_major(2, &[4.0, 99.0, 1.0, 3.0], Triangle::Lower)
    ///     .build()?;
    /// assert_eq!(p.hessian().to_dense()[(0, 1)], 1.0);
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn hessian_row_major(self, n: usize, data: &[f64], triangle: Triangle) -> ProblemBuilder<HasHessian> {
        self.with_hessian(
            Input::RowMajor {
                rows: n,
                cols: n,
                data: data.to_vec(),
            },
            triangle,
        )
    }

    /// `H` (n×n) from `(row, col, value)` triplets, 0-based; duplicates are summed.
    ///
    /// ```
    /// use tangency::{Error, ProblemBuilder, Triangle};
    /// let err = ProblemBuilder::new()
    ///     .hessian_triplets(2, &[(0, 0, 1.0), (2, 1, 1.0)], Triangle::Lower)
    ///     .build()
    ///     .unwrap_err();
    /// assert!(matches!(err, Error::IndexOutOfRange { row: 2, col: 1, .. }));
    /// ```
    pub fn hessian_triplets(
        self,
        n: usize,
        entries: &[(usize, usize, f64)],
        triangle: Triangle,
    ) -> ProblemBuilder<HasHessian> {
        self.with_hessian(
            Input::Triplets {
                rows: n,
                cols: n,
                entries: entries.to_vec(),
            },
            triangle,
        )
    }

    /// `H` from a faer compressed-column matrix.
    pub fn hessian_faer(self, h: SparseColMatRef<'_, usize, f64>, triangle: Triangle) -> ProblemBuilder<HasHessian> {
        self.with_hessian(triplets_from_faer(h), triangle)
    }

    /// `H` from a nalgebra-sparse CSC matrix.
    pub fn hessian_csc(self, h: &CscMatrix<f64>, triangle: Triangle) -> ProblemBuilder<HasHessian> {
        let entries = h.triplet_iter().map(|(i, j, v)| (i, j, *v)).collect();
        self.with_hessian(
            Input::Triplets {
                rows: h.nrows(),
                cols: h.ncols(),
                entries,
            },
            triangle,
        )
    }

    /// `H` from a nalgebra-sparse COO matrix (duplicates summed).
    pub fn hessian_coo(self, h: &CooMatrix<f64>, triangle: Triangle) -> ProblemBuilder<HasHessian> {
        let entries = h.triplet_iter().map(|(i, j, v)| (i, j, *v)).collect();
        self.with_hessian(
            Input::Triplets {
                rows: h.nrows(),
                cols: h.ncols(),
                entries,
            },
            triangle,
        )
    }

    /// `A` from a dense faer matrix (m×n). Default: no constraints.
    pub fn constraints_dense(mut self, a: MatRef<'_, f64>) -> Self {
        self.constraints = Some(Input::Dense(a.to_owned()));
        self
    }

    /// `A` (m×n) from a row-major slice of length m·n. Default: no constraints.
    pub fn constraints_row_major(mut self, m: usize, n: usize, data: &[f64]) -> Self {
        self.constraints = Some(Input::RowMajor {
            rows: m,
            cols: n,
            data: data.to_vec(),
        });
        self
    }

    /// `A` (m×n) from 0-based triplets; duplicates are summed. Default: no constraints.
    pub fn constraints_triplets(mut self, m: usize, n: usize, entries: &[(usize, usize, f64)]) -> Self {
        self.constraints = Some(Input::Triplets {
            rows: m,
            cols: n,
            entries: entries.to_vec(),
        });
        self
    }

    /// `A` from a faer compressed-column matrix.
    pub fn constraints_faer(mut self, a: SparseColMatRef<'_, usize, f64>) -> Self {
        self.constraints = Some(triplets_from_faer(a));
        self
    }

    /// `A` from a nalgebra-sparse CSC matrix.
    pub fn constraints_csc(mut self, a: &CscMatrix<f64>) -> Self {
        self.constraints = Some(Input::Triplets {
            rows: a.nrows(),
            cols: a.ncols(),
            entries: a.triplet_iter().map(|(i, j, v)| (i, j, *v)).collect(),
        });
        self
    }

    /// `A` from a nalgebra-sparse COO matrix (duplicates summed).
    pub fn constraints_coo(mut self, a: &CooMatrix<f64>) -> Self {
        self.constraints = Some(Input::Triplets {
            rows: a.nrows(),
            cols: a.ncols(),
            entries: a.triplet_iter().map(|(i, j, v)| (i, j, *v)).collect(),
        });
        self
    }

    /// The linear term `c` (length n). Default: zeros.
    pub fn linear(mut self, c: &[f64]) -> Self {
        self.c = Some(c.to_vec());
        self
    }

    /// The constraint right-hand side `b` (length m). Default: zeros.
    pub fn rhs(mut self, b: &[f64]) -> Self {
        self.b = Some(b.to_vec());
        self
    }

    /// Relative symmetry tolerance for a full `H`. Default: [`DEFAULT_SYMMETRY_TOLERANCE`].
    ///
    /// ```
    /// use tangency::{Error, ProblemBuilder, Triangle};
    /// let h = [2.0, 1.0, 1.000001, 2.0];
    /// let strict = ProblemBuilder::new().hessian_row_major(2, &h, Triangle::Full).build();
    /// assert!(matches!(strict, Err(Error::NotSymmetric { row: 0, col: 1, .. })));
    /// let loose = ProblemBuilder::new()
    ///     .symmetry_tolerance(1e-5)
    ///     .hessian_row_major(2, &h, Triangle::Full)
    ///     .build();
    /// assert!(loose.is_ok());
    /// ```
    pub fn symmetry_tolerance(mut self, tol: f64) -> Self {
        self.symmetry_tol = tol;
        self
    }
}

impl ProblemBuilder<HasHessian> {
    /// Validates every block and returns the problem.
    ///
    /// Checks, in order: `H` square, indices in range, values finite, triangle respected,
    /// symmetry (full `H`); `A` has n columns, indices in range, values finite; `c` has
    /// length n and `b` length m, both finite.
    pub fn build(self) -> Result<Problem> {
        let HasHessian { input, triangle } = self.hessian;
        let h = build_hessian(input, triangle, self.symmetry_tol)?;
        let n = h.nrows();
        let a = match self.constraints {
            None => Matrix::Dense(Mat::zeros(0, n)),
            Some(input) => {
                let (rows, cols) = input.shape();
                if cols != n {
                    return Err(Error::DimensionMismatch {
                        block: Block::A,
                        rows,
                        cols,
                        expected_rows: rows,
                        expected_cols: n,
                    });
                }
                build_general(Block::A, input)?
            }
        };
        let m = a.nrows();
        let c = self.c.unwrap_or_else(|| vec![0.0; n]);
        check_vector(Block::C, &c, n)?;
        let b = self.b.unwrap_or_else(|| vec![0.0; m]);
        check_vector(Block::B, &b, m)?;
        Ok(Problem {
            h: std::sync::Arc::new(h),
            a: std::sync::Arc::new(a),
            norm_k: Default::default(),
            c,
            b,
        })
    }
}

fn triplets_from_faer(s: SparseColMatRef<'_, usize, f64>) -> Input {
    let mut entries = Vec::with_capacity(s.val().len());
    let (_, _, col_ptr, col_nnz, row_idx) = s.symbolic().parts();
    for j in 0..s.ncols() {
        let start = col_ptr[j];
        let end = match col_nnz {
            Some(nnz) => start + nnz[j],
            None => col_ptr[j + 1],
        };
        entries.extend((start..end).map(|k| (row_idx[k], j, s.val()[k])));
    }
    Input::Triplets {
        rows: s.nrows(),
        cols: s.ncols(),
        entries,
    }
}

impl Input {
    fn shape(&self) -> (usize, usize) {
        match self {
            Input::Dense(m) => (m.nrows(), m.ncols()),
            Input::RowMajor { rows, cols, .. } | Input::Triplets { rows, cols, .. } => (*rows, *cols),
        }
    }
}

/// Converts row-major data into a dense matrix after checking its length.
fn dense_from_row_major(block: Block, rows: usize, cols: usize, data: &[f64]) -> Result<Mat<f64>> {
    let expected = rows.saturating_mul(cols);
    if data.len() != expected {
        return Err(Error::WrongLength {
            block,
            len: data.len(),
            rows,
            cols,
            expected,
        });
    }
    Ok(Mat::from_fn(rows, cols, |i, j| data[i * cols + j]))
}

fn check_triplets(block: Block, rows: usize, cols: usize, entries: &[(usize, usize, f64)]) -> Result<()> {
    for &(i, j, v) in entries {
        if i >= rows || j >= cols {
            return Err(Error::IndexOutOfRange {
                block,
                row: i,
                col: j,
                nrows: rows,
                ncols: cols,
            });
        }
        if !v.is_finite() {
            return Err(Error::NonFinite {
                block,
                row: i,
                col: j,
                value: v,
            });
        }
    }
    Ok(())
}

fn check_dense_finite(block: Block, m: MatRef<'_, f64>, read: impl Fn(usize, usize) -> bool) -> Result<()> {
    // Report the first offender in row-major order, as a person reads a matrix.
    for i in 0..m.nrows() {
        for j in 0..m.ncols() {
            let v = m[(i, j)];
            if read(i, j) && !v.is_finite() {
                return Err(Error::NonFinite {
                    block,
                    row: i,
                    col: j,
                    value: v,
                });
            }
        }
    }
    Ok(())
}

fn build_general(block: Block, input: Input) -> Result<Matrix> {
    match input {
        Input::Dense(m) => {
            check_dense_finite(block, m.as_ref(), |_, _| true)?;
            Ok(Matrix::Dense(m))
        }
        Input::RowMajor { rows, cols, data } => {
            let m = dense_from_row_major(block, rows, cols, &data)?;
            check_dense_finite(block, m.as_ref(), |_, _| true)?;
            Ok(Matrix::Dense(m))
        }
        Input::Triplets {
            rows,
            cols,
            mut entries,
        } => {
            check_triplets(block, rows, cols, &entries)?;
            Ok(Matrix::Sparse(summed(
                block,
                csc_from_triplets(rows, cols, &mut entries),
            )?))
        }
    }
}

/// Validates a sparse block after its duplicates were summed: each entry was finite, but a
/// sum (1.5e308 + 1.5e308) may not be.
fn summed(block: Block, s: faer::sparse::SparseColMat<usize, f64>) -> Result<faer::sparse::SparseColMat<usize, f64>> {
    if let Some(k) = s.val().iter().position(|v| !v.is_finite()) {
        let cp = s.symbolic().col_ptr();
        let col = cp.partition_point(|&p| p <= k) - 1;
        return Err(Error::DuplicateSumOverflow {
            block,
            row: s.symbolic().row_idx()[k],
            col,
            value: s.val()[k],
        });
    }
    Ok(s)
}

fn square_check(rows: usize, cols: usize) -> Result<()> {
    if rows != cols {
        return Err(Error::DimensionMismatch {
            block: Block::H,
            rows,
            cols,
            expected_rows: rows.max(cols),
            expected_cols: rows.max(cols),
        });
    }
    Ok(())
}

fn build_hessian(input: Input, triangle: Triangle, tol: f64) -> Result<Matrix> {
    let (rows, cols) = input.shape();
    square_check(rows, cols)?;
    let n = rows;
    match input {
        Input::Dense(_) | Input::RowMajor { .. } => {
            let m = match input {
                Input::Dense(m) => m,
                Input::RowMajor { data, .. } => dense_from_row_major(Block::H, n, n, &data)?,
                Input::Triplets { .. } => unreachable!("matched above"),
            };
            let read = |i: usize, j: usize| match triangle {
                Triangle::Lower => i >= j,
                Triangle::Upper => i <= j,
                Triangle::Full => true,
            };
            check_dense_finite(Block::H, m.as_ref(), read)?;
            let full = match triangle {
                Triangle::Lower => Mat::from_fn(n, n, |i, j| m[(i.max(j), i.min(j))]),
                Triangle::Upper => Mat::from_fn(n, n, |i, j| m[(i.min(j), i.max(j))]),
                Triangle::Full => {
                    let scale = max_abs_dense(m.as_ref());
                    let mut worst: Option<(usize, usize, f64)> = None;
                    for j in 0..n {
                        for i in 0..j {
                            let gap = (m[(i, j)] - m[(j, i)]).abs();
                            if gap > tol * scale && worst.is_none_or(|w| gap > w.2) {
                                worst = Some((i, j, gap));
                            }
                        }
                    }
                    if let Some((i, j, gap)) = worst {
                        return Err(Error::NotSymmetric {
                            row: i,
                            col: j,
                            upper: m[(i, j)],
                            lower: m[(j, i)],
                            relative_gap: gap / scale,
                            tolerance: tol,
                        });
                    }
                    Mat::from_fn(n, n, |i, j| 0.5 * (m[(i, j)] + m[(j, i)]))
                }
            };
            Ok(Matrix::Dense(full))
        }
        Input::Triplets { mut entries, .. } => {
            check_triplets(Block::H, n, n, &entries)?;
            match triangle {
                Triangle::Lower | Triangle::Upper => {
                    let lower = triangle == Triangle::Lower;
                    if let Some(&(i, j, _)) = entries.iter().find(|&&(i, j, _)| if lower { i < j } else { i > j }) {
                        return Err(Error::WrongTriangle {
                            triangle: if lower { "lower" } else { "upper" },
                            row: i,
                            col: j,
                        });
                    }
                    let mirrored: Vec<_> = entries
                        .iter()
                        .filter(|e| e.0 != e.1)
                        .map(|&(i, j, v)| (j, i, v))
                        .collect();
                    entries.extend(mirrored);
                    Ok(Matrix::Sparse(summed(Block::H, csc_from_triplets(n, n, &mut entries))?))
                }
                Triangle::Full => {
                    let mut s = summed(Block::H, csc_from_triplets(n, n, &mut entries))?;
                    symmetrize_sparse(&mut s, tol)?;
                    Ok(Matrix::Sparse(s))
                }
            }
        }
    }
}

fn max_abs_dense(m: MatRef<'_, f64>) -> f64 {
    let mut mx = 0.0f64;
    for j in 0..m.ncols() {
        for i in 0..m.nrows() {
            mx = mx.max(m[(i, j)].abs());
        }
    }
    mx
}

/// Checks a full sparse `H` for symmetry within `tol·max|H|` and replaces each pair by its
/// mean. A missing mirror entry counts as zero; if that is within tolerance the entry is
/// kept on one side only, which we repair by rebuilding with the mirror added.
fn symmetrize_sparse(s: &mut faer::sparse::SparseColMat<usize, f64>, tol: f64) -> Result<()> {
    let n = s.nrows();
    let scale = s.val().iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let cp = s.symbolic().col_ptr().to_vec();
    let ri = s.symbolic().row_idx().to_vec();
    let vals = s.val().to_vec();
    let lookup = |i: usize, j: usize| -> Option<usize> {
        // position of (i, j) in column j
        ri[cp[j]..cp[j + 1]].binary_search(&i).ok().map(|k| cp[j] + k)
    };
    let mut worst: Option<(usize, usize, f64, f64, f64)> = None;
    let mut missing = false;
    for j in 0..n {
        for k in cp[j]..cp[j + 1] {
            let i = ri[k];
            if i == j {
                continue;
            }
            let other = lookup(j, i).map(|p| vals[p]);
            missing |= other.is_none();
            let mirror = other.unwrap_or(0.0);
            let gap = (vals[k] - mirror).abs();
            if gap > tol * scale && worst.is_none_or(|w| gap > w.4) {
                let (r, c, up, lo) = if i < j {
                    (i, j, vals[k], mirror)
                } else {
                    (j, i, mirror, vals[k])
                };
                worst = Some((r, c, up, lo, gap));
            }
        }
    }
    if let Some((row, col, upper, lower, gap)) = worst {
        return Err(Error::NotSymmetric {
            row,
            col,
            upper,
            lower,
            relative_gap: gap / scale,
            tolerance: tol,
        });
    }
    // Average the pairs (and add missing mirrors) so H is exactly symmetric.
    let mut entries = Vec::with_capacity(vals.len() * if missing { 2 } else { 1 });
    for j in 0..n {
        for k in cp[j]..cp[j + 1] {
            let i = ri[k];
            let v = if i == j { vals[k] } else { 0.5 * vals[k] };
            entries.push((i, j, v));
            if i != j {
                entries.push((j, i, v));
            }
        }
    }
    *s = csc_from_triplets(n, n, &mut entries);
    Ok(())
}
