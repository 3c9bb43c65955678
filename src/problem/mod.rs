//! Problem data: `minimize ½xᵀHx + cᵀx subject to Ax = b`.
//!
//! A [`Problem`] is always valid: it can only be made by [`ProblemBuilder::build`] (or the
//! Matrix Market loader in [`crate::io`]), which checks every block. `H` is stored with both
//! triangles (exactly symmetric); each block keeps the storage it was given in (dense stays
//! dense, sparse stays sparse), so backends can pick the cheap path for each.

mod builder;
mod storage;
mod values;

pub use builder::{HasHessian, NoHessian, ProblemBuilder, Triangle, DEFAULT_SYMMETRY_TOLERANCE};
pub use storage::Matrix;

use std::sync::Arc;

use crate::error::{Block, Error, Result};

/// A validated equality-constrained quadratic program.
///
/// ```
/// use tangency::{ProblemBuilder, Triangle};
/// // minimize x0² + x1² subject to x0 + x1 = 1
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .rhs(&[1.0])
///     .build()?;
/// assert_eq!((p.n(), p.m()), (2, 1));
/// assert_eq!(p.objective(&[0.5, 0.5]), 0.5);
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct Problem {
    // Shared: factorizations keep a copy of the problem they factored, and copying a large
    // dense block would cost as much as a residual evaluation.
    pub(crate) h: Arc<Matrix>,
    pub(crate) a: Arc<Matrix>,
    // ‖K‖∞ of these blocks, computed on first use (see `kkt::norm_inf_with`); shared with the
    // blocks, replaced with them.
    pub(crate) norm_k: Arc<std::sync::OnceLock<f64>>,
    pub(crate) c: Vec<f64>,
    pub(crate) b: Vec<f64>,
}

impl Problem {
    /// Number of variables `n`.
    pub fn n(&self) -> usize {
        self.h.nrows()
    }

    /// Number of equality constraints `m`.
    pub fn m(&self) -> usize {
        self.a.nrows()
    }

    /// The Hessian, with both triangles stored.
    pub fn hessian(&self) -> &Matrix {
        &self.h
    }

    /// The constraint matrix `A` (m×n).
    pub fn constraints(&self) -> &Matrix {
        &self.a
    }

    /// The linear term `c`.
    pub fn linear(&self) -> &[f64] {
        &self.c
    }

    /// The constraint right-hand side `b`.
    pub fn rhs(&self) -> &[f64] {
        &self.b
    }

    /// Replaces `c`, keeping everything else (checked for length and finiteness).
    pub fn set_linear(&mut self, c: &[f64]) -> Result<()> {
        check_vector(Block::C, c, self.n())?;
        self.c.copy_from_slice(c);
        Ok(())
    }

    /// Replaces `b`, keeping everything else (checked for length and finiteness).
    pub fn set_rhs(&mut self, b: &[f64]) -> Result<()> {
        check_vector(Block::B, b, self.m())?;
        self.b.copy_from_slice(b);
        Ok(())
    }

    /// Objective value `½xᵀHx + cᵀx`.
    ///
    /// # Panics
    /// If `x.len() != n` (a programming error, not a data error).
    pub fn objective(&self, x: &[f64]) -> f64 {
        assert_eq!(x.len(), self.n(), "objective: x has the wrong length");
        let mut hx = vec![0.0; self.n()];
        self.h.mul_add(x, &mut hx);
        0.5 * dot(x, &hx) + dot(&self.c, x)
    }

    /// Stored nonzeros of `H` (both triangles) and of `A`; dense blocks count every entry.
    pub fn nnz(&self) -> (usize, usize) {
        (self.h.nnz(), self.a.nnz())
    }

    /// Residuals of a candidate point: (‖Ax − b‖∞, ‖Hx + c + Aᵀy‖∞).
    ///
    /// # Panics
    /// If `x` or `y` has the wrong length.
    pub fn residuals(&self, x: &[f64], y: &[f64]) -> (f64, f64) {
        assert_eq!(x.len(), self.n(), "residuals: x has the wrong length");
        assert_eq!(y.len(), self.m(), "residuals: y has the wrong length");
        let mut ax = vec![0.0; self.m()];
        self.a.mul_add(x, &mut ax);
        let primal = ax
            .iter()
            .zip(&self.b)
            .fold(0.0f64, |acc, (p, q)| acc.max((p - q).abs()));
        let mut g = self.c.clone();
        self.h.mul_add(x, &mut g);
        self.a.tr_mul_add(y, &mut g);
        let dual = g.iter().fold(0.0f64, |acc, v| acc.max(v.abs()));
        (primal, dual)
    }

    /// Replaces the values of `H` and `A` by those of `other`, which must have the same
    /// dimensions and, for sparse blocks, the same pattern. `c` and `b` are copied too.
    ///
    /// The blocks are shared, not copied (a problem holds `H` and `A` behind reference
    /// counts, so clones are cheap and an update costs the structure check only).
    pub fn update_values(&mut self, other: &Problem) -> Result<()> {
        if !Arc::ptr_eq(&self.h, &other.h) {
            self.h.check_same_structure(&other.h, Block::H)?;
        }
        if !Arc::ptr_eq(&self.a, &other.a) {
            self.a.check_same_structure(&other.a, Block::A)?;
        }
        self.h = Arc::clone(&other.h);
        self.a = Arc::clone(&other.a);
        self.norm_k = Arc::clone(&other.norm_k);
        self.c.copy_from_slice(&other.c);
        self.b.copy_from_slice(&other.b);
        Ok(())
    }
}

pub(crate) fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(p, q)| p * q).sum()
}

/// Euclidean norm, without underflow or overflow of the squares: vectors whose largest
/// entry lies outside `[2⁻⁴⁵⁰, 2⁴⁵⁰]` are scaled by it first (common practice, as in
/// LAPACK's `dnrm2`).
pub(crate) fn norm2(v: &[f64]) -> f64 {
    let mx = inf_norm(v);
    if mx == 0.0 || !mx.is_finite() {
        return mx;
    }
    const SAFE: f64 = 2.9e135; // about 2⁴⁵⁰
    if (1.0 / SAFE..=SAFE).contains(&mx) {
        return dot(v, v).sqrt();
    }
    v.iter().map(|x| (x / mx) * (x / mx)).sum::<f64>().sqrt() * mx
}

/// `max |v_i|`, NaN when any entry is NaN (`f64::max` alone would skip it and hide a
/// broken vector behind a small norm).
pub(crate) fn inf_norm(v: &[f64]) -> f64 {
    v.iter().fold(0.0f64, |a, x| {
        if a.is_nan() || x.is_nan() {
            f64::NAN
        } else {
            a.max(x.abs())
        }
    })
}

pub(crate) fn check_vector(block: Block, v: &[f64], expected: usize) -> Result<()> {
    if v.len() != expected {
        return Err(Error::DimensionMismatch {
            block,
            rows: v.len(),
            cols: 1,
            expected_rows: expected,
            expected_cols: 1,
        });
    }
    if let Some((i, &value)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
        return Err(Error::NonFinite {
            block,
            row: i,
            col: 0,
            value,
        });
    }
    Ok(())
}
