//! Operators: the products a Krylov method needs, from assembled blocks or from user code.
//!
//! The trait is deliberately narrow (sizes, `H·x`, `A·x`, `Aᵀ·y`, each writing into a
//! caller-owned slice) so that an operator whose data live elsewhere — a simulation code
//! that applies `H` and `A` without forming them, or a block distributed across processes
//! that gathers its result — can implement it.

use crate::problem::{Matrix, Problem};

/// The blocks of a KKT system `K = [H Aᵀ; A 0]` as products.
///
/// Every method **overwrites** its output (it does not accumulate). `Sync` because MINRES
/// runs on faer's matrix-free `LinOp` trait, which requires it (see [`super::minres()`]).
pub trait KktOperator: Sync {
    /// Number of variables `n` (order of `H`, columns of `A`).
    fn n(&self) -> usize;
    /// Number of constraints `m` (rows of `A`).
    fn m(&self) -> usize;
    /// `out = H·x` (`x`, `out` of length n). `H` must be symmetric.
    fn apply_h(&self, x: &[f64], out: &mut [f64]);
    /// `out = A·x` (`x` of length n, `out` of length m).
    fn apply_a(&self, x: &[f64], out: &mut [f64]);
    /// `out = Aᵀ·y` (`y` of length m, `out` of length n).
    fn apply_at(&self, y: &[f64], out: &mut [f64]);

    /// `out = K·z` for `z = [x; y]` (length n + m), built from the three products.
    /// `tmp` must have length n.
    fn apply_kkt(&self, z: &[f64], out: &mut [f64], tmp: &mut [f64]) {
        let n = self.n();
        let (x, y) = z.split_at(n);
        let (ox, oy) = out.split_at_mut(n);
        self.apply_h(x, ox);
        self.apply_at(y, tmp);
        for (o, t) in ox.iter_mut().zip(tmp.iter()) {
            *o += t;
        }
        self.apply_a(x, oy);
    }
}

/// The assembled blocks of a validated [`Problem`] (dense or sparse storage).
impl KktOperator for Problem {
    fn n(&self) -> usize {
        Problem::n(self)
    }
    fn m(&self) -> usize {
        Problem::m(self)
    }
    fn apply_h(&self, x: &[f64], out: &mut [f64]) {
        out.fill(0.0);
        self.hessian().mul_add(x, out);
    }
    fn apply_a(&self, x: &[f64], out: &mut [f64]) {
        out.fill(0.0);
        self.constraints().mul_add(x, out);
    }
    fn apply_at(&self, y: &[f64], out: &mut [f64]) {
        out.fill(0.0);
        self.constraints().tr_mul_add(y, out);
    }
}

/// Two assembled blocks `H` (n×n, symmetric, both triangles stored) and `A` (m×n) used as
/// an operator without building a [`Problem`].
#[derive(Copy, Clone, Debug)]
pub struct MatrixPair<'a> {
    /// The Hessian.
    pub h: &'a Matrix,
    /// The constraint matrix.
    pub a: &'a Matrix,
}

impl KktOperator for MatrixPair<'_> {
    fn n(&self) -> usize {
        self.h.nrows()
    }
    fn m(&self) -> usize {
        self.a.nrows()
    }
    fn apply_h(&self, x: &[f64], out: &mut [f64]) {
        out.fill(0.0);
        self.h.mul_add(x, out);
    }
    fn apply_a(&self, x: &[f64], out: &mut [f64]) {
        out.fill(0.0);
        self.a.mul_add(x, out);
    }
    fn apply_at(&self, y: &[f64], out: &mut [f64]) {
        out.fill(0.0);
        self.a.tr_mul_add(y, out);
    }
}

/// A matrix-free operator from three closures (each overwrites its output).
///
/// ```
/// use tangency::iterative::{FnOperator, KktOperator};
/// // H = 2I (n = 2), A = [1 1].
/// let op = FnOperator::new(
///     2,
///     1,
///     |x: &[f64], o: &mut [f64]| { o[0] = 2.0 * x[0]; o[1] = 2.0 * x[1]; },
///     |x: &[f64], o: &mut [f64]| o[0] = x[0] + x[1],
///     |y: &[f64], o: &mut [f64]| { o[0] = y[0]; o[1] = y[0]; },
/// );
/// let mut out = [0.0; 3];
/// op.apply_kkt(&[1.0, 2.0, 3.0], &mut out, &mut [0.0; 2]);
/// assert_eq!(out, [5.0, 7.0, 3.0]);
/// ```
pub struct FnOperator<FH, FA, FT> {
    n: usize,
    m: usize,
    h: FH,
    a: FA,
    at: FT,
}

impl<FH, FA, FT> FnOperator<FH, FA, FT>
where
    FH: Fn(&[f64], &mut [f64]),
    FA: Fn(&[f64], &mut [f64]),
    FT: Fn(&[f64], &mut [f64]),
{
    /// Wraps `H·x`, `A·x` and `Aᵀ·y` closures for `n` variables and `m` constraints.
    pub fn new(n: usize, m: usize, h: FH, a: FA, at: FT) -> Self {
        FnOperator { n, m, h, a, at }
    }
}

impl<FH, FA, FT> KktOperator for FnOperator<FH, FA, FT>
where
    FH: Fn(&[f64], &mut [f64]) + Sync,
    FA: Fn(&[f64], &mut [f64]) + Sync,
    FT: Fn(&[f64], &mut [f64]) + Sync,
{
    fn n(&self) -> usize {
        self.n
    }
    fn m(&self) -> usize {
        self.m
    }
    fn apply_h(&self, x: &[f64], out: &mut [f64]) {
        (self.h)(x, out)
    }
    fn apply_a(&self, x: &[f64], out: &mut [f64]) {
        (self.a)(x, out)
    }
    fn apply_at(&self, y: &[f64], out: &mut [f64]) {
        (self.at)(y, out)
    }
}
