//! Residuals in doubled precision and the refinement loop.
//!
//! Björck's iterative refinement of the augmented system (Björck 1967, "Iterative
//! refinement of linear least squares solutions I", BIT 7) corrects the residual, the
//! coefficients and the multipliers together. Refinement only gains digits when the
//! residual of the augmented system is computed more accurately than the solve; here each
//! residual entry is a compensated dot product: `TwoProduct` by a fused multiply-add and
//! `TwoSum` (Knuth), accumulated as in algorithm `Dot2` of Ogita, Rump & Oishi (2005),
//! "Accurate sum and dot product", SIAM J. Sci. Comput. 26(6). The result is as accurate
//! as if computed in twice the working precision and then rounded.
//!
//! Written by hand: faer offers no compensated products.

use faer::MatRef;

use crate::problem::Matrix;

/// Knuth's `TwoSum`: `s + e = a + b` exactly, `s = fl(a + b)`.
#[inline(always)]
pub fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let z = s - a;
    (s, (a - (s - z)) + (b - z))
}

/// `TwoProduct` by fused multiply-add: `p + e = a·b` exactly, `p = fl(a·b)`.
#[inline(always)]
pub fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    (p, a.mul_add(b, -p))
}

/// `Dot2` (Ogita, Rump & Oishi 2005, Algorithm 5.3): `xᵀy` as if computed in doubled
/// precision.
///
/// ```
/// use tangency::lsq::refine::dot2;
/// // 1e16 + 1 − 1e16 is lost in plain double precision, not here.
/// assert_eq!(dot2(&[1e16, 1.0, -1e16], &[1.0, 1.0, 1.0]), 1.0);
/// ```
pub fn dot2(x: &[f64], y: &[f64]) -> f64 {
    let (mut s, mut c) = (0.0, 0.0);
    for (a, b) in x.iter().zip(y) {
        let (p, e) = two_prod(*a, *b);
        let (t, q) = two_sum(s, p);
        s = t;
        c += q + e;
    }
    s + c
}

/// A vector of compensated accumulators: each entry keeps a sum and a running error.
#[derive(Clone, Debug)]
pub(crate) struct Acc {
    s: Vec<f64>,
    c: Vec<f64>,
}

impl Acc {
    pub(crate) fn new(len: usize) -> Self {
        Acc {
            s: vec![0.0; len],
            c: vec![0.0; len],
        }
    }

    #[inline(always)]
    fn add_prod_at(&mut self, i: usize, a: f64, b: f64) {
        let (p, e) = two_prod(a, b);
        let (t, q) = two_sum(self.s[i], p);
        self.s[i] = t;
        self.c[i] += q + e;
    }

    /// `acc += sign·v` (sign = ±1, exact).
    pub(crate) fn add_vec(&mut self, v: &[f64], sign: f64) {
        for (i, x) in v.iter().enumerate() {
            let (t, q) = two_sum(self.s[i], sign * x);
            self.s[i] = t;
            self.c[i] += q;
        }
    }

    /// `acc += diag(d)·v` with each product exact.
    pub(crate) fn add_diag_vec(&mut self, d: &[f64], v: &[f64], sign: f64) {
        for i in 0..v.len() {
            self.add_prod_at(i, sign * d[i], v[i]);
        }
    }

    /// `acc += sign·M·x` (dense, column by column: contiguous access).
    pub(crate) fn add_dense_mul(&mut self, m: MatRef<'_, f64>, x: &[f64], sign: f64) {
        for (j, &xj) in x.iter().enumerate() {
            if xj == 0.0 {
                continue;
            }
            let xj = sign * xj;
            let col = m.col(j);
            if let Some(col) = col.try_as_col_major() {
                for (i, a) in col.as_slice().iter().enumerate() {
                    self.add_prod_at(i, *a, xj);
                }
            } else {
                for i in 0..m.nrows() {
                    self.add_prod_at(i, m[(i, j)], xj);
                }
            }
        }
    }

    /// `acc += sign·Mᵀ·x` (dense: one compensated dot product per column).
    pub(crate) fn add_dense_tr_mul(&mut self, m: MatRef<'_, f64>, x: &[f64], sign: f64) {
        for j in 0..m.ncols() {
            let col = m.col(j);
            let (mut s, mut c) = (self.s[j], self.c[j]);
            let mut step = |a: f64, b: f64| {
                let (p, e) = two_prod(a, sign * b);
                let (t, q) = two_sum(s, p);
                s = t;
                c += q + e;
            };
            if let Some(col) = col.try_as_col_major() {
                for (a, b) in col.as_slice().iter().zip(x) {
                    step(*a, *b);
                }
            } else {
                for (i, b) in x.iter().enumerate() {
                    step(m[(i, j)], *b);
                }
            }
            self.s[j] = s;
            self.c[j] = c;
        }
    }

    /// `acc += sign·M·x` for a crate block.
    pub(crate) fn add_mul(&mut self, m: &Matrix, x: &[f64], sign: f64) {
        match m {
            Matrix::Dense(d) => self.add_dense_mul(d.as_ref(), x, sign),
            Matrix::Sparse(s) => {
                for (j, &xj) in x.iter().enumerate() {
                    for (i, v) in s.row_idx_of_col(j).zip(s.val_of_col(j)) {
                        self.add_prod_at(i, *v, sign * xj);
                    }
                }
            }
        }
    }

    /// `acc += sign·Mᵀ·x` for a crate block.
    pub(crate) fn add_tr_mul(&mut self, m: &Matrix, x: &[f64], sign: f64) {
        match m {
            Matrix::Dense(d) => self.add_dense_tr_mul(d.as_ref(), x, sign),
            Matrix::Sparse(s) => {
                for j in 0..s.ncols() {
                    for (i, v) in s.row_idx_of_col(j).zip(s.val_of_col(j)) {
                        self.add_prod_at(j, *v, sign * x[i]);
                    }
                }
            }
        }
    }

    /// The accumulated values, rounded once.
    pub(crate) fn finish(self) -> Vec<f64> {
        self.s.iter().zip(&self.c).map(|(s, c)| s + c).collect()
    }
}

/// `g − F·x` in doubled precision.
pub(crate) fn residual_g_minus_fx(f: &Matrix, g: &[f64], x: &[f64]) -> Vec<f64> {
    let mut acc = Acc::new(g.len());
    acc.add_vec(g, 1.0);
    acc.add_mul(f, x, -1.0);
    acc.finish()
}

/// What the refinement loop did.
#[derive(Clone, Debug, Default)]
pub(crate) struct RefineLog {
    pub steps: usize,
    pub history: Vec<f64>,
}

/// Generic refinement loop. `residual(state)` returns the residual of the augmented
/// system in doubled precision; `correct(residual)` solves the augmented system with it
/// and returns the correction; `apply(state, correction)` adds it and returns
/// `‖δβ‖∞/‖β‖∞`. Stops when the relative correction is below `4ε`, when it stops
/// shrinking by at least a factor 2 (the limiting accuracy is reached), or after
/// `max_steps` corrections.
pub(crate) fn refine_loop<S, R, D>(
    state: &mut S,
    max_steps: usize,
    mut residual: impl FnMut(&S) -> R,
    mut correct: impl FnMut(&R) -> crate::Result<D>,
    mut apply: impl FnMut(&mut S, &D) -> f64,
) -> crate::Result<RefineLog> {
    let mut log = RefineLog::default();
    let mut last = f64::INFINITY;
    while log.steps < max_steps {
        let r = residual(state);
        let d = correct(&r)?;
        let size = apply(state, &d);
        log.steps += 1;
        log.history.push(size);
        let converged = size.is_nan() || size <= 4.0 * f64::EPSILON;
        if converged || size > 0.5 * last {
            break;
        }
        last = size;
    }
    Ok(log)
}
