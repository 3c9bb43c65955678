//! New values on a fixed pattern: the setters a simulation loop uses between
//! [`Factorization::refactor`](crate::Factorization::refactor) calls, so that it does not
//! rebuild (and revalidate the structure of) a whole problem at every step.
//!
//! The *pattern order* of a block is the order its values are stored in:
//!
//! * dense block: column-major, every entry (`(0,0), (1,0), …, (rows−1,0), (0,1), …`);
//! * sparse block: compressed-column order, rows increasing within each column; for `H` both
//!   triangles are stored, whatever triangle the builder was given.
//!
//! [`Problem::hessian_pattern`] and [`Problem::constraint_pattern`] list the `(row, col)`
//! of each position, so a caller can map its own entries once and then write value arrays.
//! Every setter validates what the builder validates for values (length, finiteness, and
//! for `H` symmetry within [`DEFAULT_SYMMETRY_TOLERANCE`](super::DEFAULT_SYMMETRY_TOLERANCE)
//! relative to `max|H|`, after which the two triangles are made exactly equal) and leaves
//! the problem unchanged when it refuses.

use std::sync::{Arc, OnceLock};

use super::{Matrix, Problem, DEFAULT_SYMMETRY_TOLERANCE};
use crate::error::{Block, Error, Result};

/// `(row, col)` of every stored value of `m`, in pattern order.
fn pattern(m: &Matrix) -> Vec<(usize, usize)> {
    let mut out = Vec::with_capacity(m.nnz());
    m.for_each(|i, j, _| out.push((i, j)));
    out
}

/// A copy of `m` with `values` written in pattern order (lengths already checked).
fn with_values(m: &Matrix, values: &[f64]) -> Matrix {
    let mut m = m.clone();
    match &mut m {
        Matrix::Dense(d) => {
            let rows = d.nrows();
            for j in 0..d.ncols() {
                for i in 0..rows {
                    d[(i, j)] = values[j * rows + i];
                }
            }
        }
        Matrix::Sparse(s) => s.val_mut().copy_from_slice(values),
    }
    m
}

fn check_values(block: Block, m: &Matrix, values: &[f64]) -> Result<()> {
    if values.len() != m.nnz() {
        return Err(Error::WrongLength {
            block,
            len: values.len(),
            rows: m.nrows(),
            cols: m.ncols(),
            expected: m.nnz(),
        });
    }
    if let Some(k) = values.iter().position(|v| !v.is_finite()) {
        let (row, col) = position(m, k);
        return Err(Error::NonFinite {
            block,
            row,
            col,
            value: values[k],
        });
    }
    Ok(())
}

/// `(row, col)` of the `k`-th value in pattern order.
fn position(m: &Matrix, k: usize) -> (usize, usize) {
    match m {
        Matrix::Dense(d) => (k % d.nrows().max(1), k / d.nrows().max(1)),
        Matrix::Sparse(s) => {
            let cp = s.symbolic().col_ptr();
            let col = cp.partition_point(|&p| p <= k).saturating_sub(1);
            (s.symbolic().row_idx()[k], col)
        }
    }
}

/// Checks that `h` is symmetric within the default tolerance (relative to `max|H|`) and
/// makes the two triangles exactly equal (their average).
fn symmetrize(h: &mut Matrix) -> Result<()> {
    let scale = h.max_abs();
    let tol = DEFAULT_SYMMETRY_TOLERANCE * scale;
    let mut worst: Option<(usize, usize, f64, f64, f64)> = None;
    let mut note = |i: usize, j: usize, upper: f64, lower: f64| {
        let gap = (upper - lower).abs();
        if gap > tol && worst.is_none_or(|w| gap > w.4) {
            worst = Some((i, j, upper, lower, gap));
        }
    };
    match h {
        Matrix::Dense(d) => {
            for j in 0..d.ncols() {
                for i in 0..j {
                    note(i, j, d[(i, j)], d[(j, i)]);
                }
            }
        }
        Matrix::Sparse(s) => {
            let (cp, ri) = (s.symbolic().col_ptr(), s.symbolic().row_idx());
            for j in 0..s.ncols() {
                for k in cp[j]..cp[j + 1] {
                    let i = ri[k];
                    if i < j {
                        let lower = find(cp, ri, s.val(), j, i);
                        note(i, j, s.val()[k], lower);
                    } else if i > j && find_index(cp, ri, i, j).is_none() {
                        // (i, j) below the diagonal whose partner (j, i) is not stored.
                        note(j, i, 0.0, s.val()[k]);
                    }
                }
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
            tolerance: DEFAULT_SYMMETRY_TOLERANCE,
        });
    }
    match h {
        Matrix::Dense(d) => {
            for j in 0..d.ncols() {
                for i in 0..j {
                    let avg = 0.5 * (d[(i, j)] + d[(j, i)]);
                    d[(i, j)] = avg;
                    d[(j, i)] = avg;
                }
            }
        }
        Matrix::Sparse(s) => {
            let cp = s.symbolic().col_ptr().to_vec();
            let ri = s.symbolic().row_idx().to_vec();
            let vals = s.val_mut();
            for j in 0..cp.len() - 1 {
                for k in cp[j]..cp[j + 1] {
                    let i = ri[k];
                    if i < j {
                        if let Some(kk) = find_index(&cp, &ri, j, i) {
                            let avg = 0.5 * (vals[k] + vals[kk]);
                            vals[k] = avg;
                            vals[kk] = avg;
                        }
                    }
                }
            }
        }
    }
    Ok(())
}

/// Index of the stored entry `(row, col)` of a compressed-column pattern.
fn find_index(cp: &[usize], ri: &[usize], row: usize, col: usize) -> Option<usize> {
    let (a, b) = (cp[col], cp[col + 1]);
    ri[a..b].binary_search(&row).ok().map(|k| a + k)
}

fn find(cp: &[usize], ri: &[usize], val: &[f64], row: usize, col: usize) -> f64 {
    find_index(cp, ri, row, col).map_or(0.0, |k| val[k])
}

impl Problem {
    /// `(row, col)` (0-based) of every stored value of `H`, in pattern order (see the
    /// [module docs](crate::problem) and [`set_hessian_values`](Self::set_hessian_values)).
    pub fn hessian_pattern(&self) -> Vec<(usize, usize)> {
        pattern(&self.h)
    }

    /// `(row, col)` (0-based) of every stored value of `A`, in pattern order.
    pub fn constraint_pattern(&self) -> Vec<(usize, usize)> {
        pattern(&self.a)
    }

    /// The stored values of `H`, in pattern order.
    pub fn hessian_values(&self) -> Vec<f64> {
        let mut out = Vec::with_capacity(self.h.nnz());
        self.h.for_each(|_, _, v| out.push(v));
        out
    }

    /// The stored values of `A`, in pattern order.
    pub fn constraint_values(&self) -> Vec<f64> {
        let mut out = Vec::with_capacity(self.a.nnz());
        self.a.for_each(|_, _, v| out.push(v));
        out
    }

    /// Replaces the values of `H` on its fixed pattern (length [`Problem::nnz`]`.0`, both
    /// triangles, pattern order as listed by [`hessian_pattern`](Self::hessian_pattern)).
    ///
    /// Validated like the builder: finite values, symmetric within
    /// [`DEFAULT_SYMMETRY_TOLERANCE`](super::DEFAULT_SYMMETRY_TOLERANCE) relative to
    /// `max|H|` (then made exactly symmetric). On error the problem is unchanged.
    /// A [`Factorization`](crate::Factorization) of the old values takes the new ones with
    /// [`refactor`](crate::Factorization::refactor), without a new analysis:
    ///
    /// ```
    /// use tangency::{Options, Plan, ProblemBuilder, Triangle};
    /// // minimize ½k(x0² + x1²) subject to x0 + x1 = 1, for a stiffness k that changes.
    /// let mut p = ProblemBuilder::new()
    ///     .hessian_triplets(2, &[(0, 0, 1.0), (1, 1, 1.0)], Triangle::Lower)
    ///     .constraints_row_major(1, 2, &[1.0, 1.0])
    ///     .rhs(&[1.0])
    ///     .build()?;
    /// assert_eq!(p.hessian_pattern(), vec![(0, 0), (1, 1)]);
    /// let plan = Plan::analyze(&p, &Options::default())?;
    /// let mut f = plan.factor(&p)?;
    /// for k in [2.0, 4.0, 8.0] {
    ///     p.set_hessian_values(&[k, k])?;  // same pattern: no rebuild
    ///     f.refactor(&p)?;                 // same plan: no new analysis
    ///     let s = f.solve()?;
    ///     assert!((s.x[0] - 0.5).abs() < 1e-15 && (s.y[0] + 0.5 * k).abs() < 1e-13);
    /// }
    /// // Refused values leave the problem as it was.
    /// assert!(p.set_hessian_values(&[f64::NAN, 1.0]).is_err());
    /// assert_eq!(p.hessian_values(), vec![8.0, 8.0]);
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn set_hessian_values(&mut self, values: &[f64]) -> Result<()> {
        check_values(Block::H, &self.h, values)?;
        let mut h = with_values(&self.h, values);
        symmetrize(&mut h)?;
        self.h = Arc::new(h);
        self.norm_k = Arc::new(OnceLock::new());
        Ok(())
    }

    /// Replaces the values of `A` on its fixed pattern (length [`Problem::nnz`]`.1`, pattern
    /// order as listed by [`constraint_pattern`](Self::constraint_pattern)); finite values
    /// only. On error the problem is unchanged.
    ///
    /// ```
    /// use tangency::{solve, Options, ProblemBuilder, Triangle};
    /// let mut p = ProblemBuilder::new()
    ///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
    ///     .constraints_row_major(1, 2, &[1.0, 1.0])
    ///     .rhs(&[1.0])
    ///     .build()?;
    /// p.set_constraint_values(&[1.0, 3.0])?; // dense A (1×2), column-major
    /// let s = solve(&p, &Options::default())?;
    /// assert!((s.x[0] + 3.0 * s.x[1] - 1.0).abs() < 1e-15);
    /// assert!(p.set_constraint_values(&[1.0]).is_err()); // wrong length
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn set_constraint_values(&mut self, values: &[f64]) -> Result<()> {
        check_values(Block::A, &self.a, values)?;
        self.a = Arc::new(with_values(&self.a, values));
        self.norm_k = Arc::new(OnceLock::new());
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use crate::{Error, ProblemBuilder, Triangle};

    #[test]
    fn sparse_full_pattern_is_checked_for_symmetry() {
        let mut p = ProblemBuilder::new()
            .hessian_triplets(2, &[(0, 0, 2.0), (1, 0, 1.0), (1, 1, 2.0)], Triangle::Lower)
            .build()
            .unwrap();
        assert_eq!(p.hessian_pattern(), vec![(0, 0), (1, 0), (0, 1), (1, 1)]);
        let err = p.set_hessian_values(&[2.0, 1.0, 0.5, 2.0]).unwrap_err();
        assert!(matches!(err, Error::NotSymmetric { row: 0, col: 1, .. }), "{err}");
        assert_eq!(p.hessian_values(), vec![2.0, 1.0, 1.0, 2.0]);
        let err = p.set_hessian_values(&[2.0, f64::INFINITY, 1.0, 2.0]).unwrap_err();
        assert!(matches!(err, Error::NonFinite { row: 1, col: 0, .. }), "{err}");
        // Within the tolerance: accepted and made exactly symmetric.
        p.set_hessian_values(&[3.0, 1.0, 1.0 + 1e-13, 3.0]).unwrap();
        let v = p.hessian_values();
        assert_eq!(v[1], v[2]);
    }

    #[test]
    fn dense_positions_in_errors_are_row_and_column() {
        let mut p = ProblemBuilder::new()
            .hessian_row_major(2, &[1.0, 0.0, 0.0, 1.0], Triangle::Full)
            .constraints_row_major(1, 2, &[1.0, 1.0])
            .build()
            .unwrap();
        let err = p.set_constraint_values(&[1.0, f64::NAN]).unwrap_err();
        assert!(matches!(err, Error::NonFinite { row: 0, col: 1, .. }), "{err}");
        let err = p.set_hessian_values(&[1.0, 0.0, 0.0]).unwrap_err();
        assert!(
            matches!(
                err,
                Error::WrongLength {
                    len: 3,
                    expected: 4,
                    ..
                }
            ),
            "{err}"
        );
    }
}
