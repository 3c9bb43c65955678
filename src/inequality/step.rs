//! The Newton-step matrix of the interior-point method on a fixed pattern.
//!
//! Every inequality is one row `aₖᵀx ≤ rₖ` of a stacked matrix `C = [G; −E_lo; E_hi]`
//! (only the rows with a finite right-hand side). With slacks `s` and multipliers `z`, the
//! Newton step eliminates `ds` and `dz`, leaving the KKT system of
//! `H + Cᵀ D C` (`D = diag(z/s)`) and `A`, i.e. `H + Gᵀ D_G G + D_lo + D_hi`: the pattern of
//! `H ∪ GᵀG ∪ diag` never changes, so it is analyzed once and refactored each iteration.
//! The assembly is written by hand (a scatter through precomputed positions): no library
//! offers "add `GᵀDG` into a fixed CSC pattern without allocating".

use std::sync::{Arc, OnceLock};

use faer::sparse::{SparseColMat, SymbolicSparseColMat};

use super::problem::{no_lower, no_upper, InequalityProblem, Rows};
use crate::error::{Error, Result};
use crate::problem::{Matrix, Problem};

/// Largest number of `(row of G) × (pair of its entries)` products the step pattern may
/// hold: 2²⁸ (the positions alone take 2 GiB): beyond it the problem is refused before
/// allocating.
pub const MAX_STEP_PRODUCTS: usize = 1 << 28;

/// Which inequalities are present (rows of `C`, in order: `G` rows, lower bounds, upper
/// bounds).
#[derive(Clone, Debug, PartialEq, Eq)]
pub(crate) struct Layout {
    pub(crate) g_rows: Vec<usize>,
    pub(crate) lower: Vec<usize>,
    pub(crate) upper: Vec<usize>,
}

impl Layout {
    pub(crate) fn of(q: &InequalityProblem) -> Layout {
        Layout {
            g_rows: (0..q.p()).filter(|&i| !no_upper(q.h[i])).collect(),
            lower: (0..q.n()).filter(|&j| !no_lower(q.lo[j])).collect(),
            upper: (0..q.n()).filter(|&j| !no_upper(q.hi[j])).collect(),
        }
    }

    pub(crate) fn count(&self) -> usize {
        self.g_rows.len() + self.lower.len() + self.upper.len()
    }

    /// `out = C x`.
    pub(crate) fn c_mul(&self, q: &InequalityProblem, x: &[f64], out: &mut [f64]) {
        let (ng, nl) = (self.g_rows.len(), self.lower.len());
        for (o, &i) in out[..ng].iter_mut().zip(&self.g_rows) {
            *o = q.g.dot_row(i, x);
        }
        for (o, &j) in out[ng..ng + nl].iter_mut().zip(&self.lower) {
            *o = -x[j];
        }
        for (o, &j) in out[ng + nl..].iter_mut().zip(&self.upper) {
            *o = x[j];
        }
    }

    /// `out = r` (the right-hand sides of `Cx ≤ r`).
    pub(crate) fn rhs(&self, q: &InequalityProblem, out: &mut [f64]) {
        let (ng, nl) = (self.g_rows.len(), self.lower.len());
        for (o, &i) in out[..ng].iter_mut().zip(&self.g_rows) {
            *o = q.h[i];
        }
        for (o, &j) in out[ng..ng + nl].iter_mut().zip(&self.lower) {
            *o = -q.lo[j];
        }
        for (o, &j) in out[ng + nl..].iter_mut().zip(&self.upper) {
            *o = q.hi[j];
        }
    }

    /// `out += Cᵀ v`.
    pub(crate) fn c_tr_add(&self, q: &InequalityProblem, v: &[f64], out: &mut [f64]) {
        let (ng, nl) = (self.g_rows.len(), self.lower.len());
        for (&vi, &i) in v[..ng].iter().zip(&self.g_rows) {
            q.g.axpy_row(i, vi, out);
        }
        for (&vi, &j) in v[ng..ng + nl].iter().zip(&self.lower) {
            out[j] -= vi;
        }
        for (&vi, &j) in v[ng + nl..].iter().zip(&self.upper) {
            out[j] += vi;
        }
    }

    /// Splits stacked multipliers into `z` (length p, zero on dropped rows) and signed bound
    /// multipliers `w = z_hi − z_lo` (length n).
    pub(crate) fn split(&self, stacked: &[f64], z: &mut [f64], w: &mut [f64]) {
        let (ng, nl) = (self.g_rows.len(), self.lower.len());
        z.iter_mut().for_each(|v| *v = 0.0);
        w.iter_mut().for_each(|v| *v = 0.0);
        for (&v, &i) in stacked[..ng].iter().zip(&self.g_rows) {
            z[i] = v;
        }
        for (&v, &j) in stacked[ng..ng + nl].iter().zip(&self.lower) {
            w[j] -= v;
        }
        for (&v, &j) in stacked[ng + nl..].iter().zip(&self.upper) {
            w[j] += v;
        }
    }
}

/// The fixed pattern of `H + Gᵀ D G + diag` and where each contribution lands.
#[derive(Debug)]
pub(crate) struct StepPattern {
    /// Positions (in the CSC values) of the stored entries of `H`, and their values.
    h_pos: Vec<usize>,
    h_val: Vec<f64>,
    /// Position of `(j, j)`.
    diag_pos: Vec<usize>,
    /// For each present `G` row (layout order), for each ordered pair of its entries, the
    /// position of their product.
    gg_pos: Vec<usize>,
}

fn find(col_ptr: &[usize], row_idx: &[usize], i: usize, j: usize) -> usize {
    let (a, b) = (col_ptr[j], col_ptr[j + 1]);
    a + row_idx[a..b]
        .binary_search(&i)
        .expect("the entry is in the pattern by construction")
}

impl StepPattern {
    /// Builds the pattern and a step problem holding it (values zero). The step problem
    /// shares `A` with `q`.
    pub(crate) fn new(q: &InequalityProblem, layout: &Layout) -> Result<(StepPattern, Problem)> {
        let n = q.n();
        let g: &Rows = &q.g;
        let products: usize = layout
            .g_rows
            .iter()
            .map(|&i| {
                let len = g.row_ptr[i + 1] - g.row_ptr[i];
                len.saturating_mul(len)
            })
            .fold(0usize, |a, b| a.saturating_add(b));
        if products > MAX_STEP_PRODUCTS {
            return Err(Error::Resources {
                detail: format!(
                    "the Newton-step matrix H + GᵀDG would need {products} products of G entries \
                     (limit {MAX_STEP_PRODUCTS}): G has rows that are too dense"
                ),
            });
        }
        let mut cols: Vec<Vec<usize>> = (0..n).map(|j| vec![j]).collect();
        q.base.hessian().for_each(|i, j, v| {
            if v != 0.0 || q.base.hessian().is_sparse() {
                cols[j].push(i);
            }
        });
        for &i in &layout.g_rows {
            for (ja, _) in g.row(i) {
                for (jb, _) in g.row(i) {
                    cols[jb].push(ja);
                }
            }
        }
        let mut col_ptr = Vec::with_capacity(n + 1);
        col_ptr.push(0);
        let mut row_idx = Vec::new();
        for c in &mut cols {
            c.sort_unstable();
            c.dedup();
            row_idx.extend_from_slice(c);
            col_ptr.push(row_idx.len());
        }
        drop(cols);
        let mut h_pos = Vec::new();
        let mut h_val = Vec::new();
        q.base.hessian().for_each(|i, j, v| {
            if v != 0.0 || q.base.hessian().is_sparse() {
                h_pos.push(find(&col_ptr, &row_idx, i, j));
                h_val.push(v);
            }
        });
        let diag_pos = (0..n).map(|j| find(&col_ptr, &row_idx, j, j)).collect();
        let mut gg_pos = Vec::with_capacity(products);
        for &i in &layout.g_rows {
            for (ja, _) in g.row(i) {
                for (jb, _) in g.row(i) {
                    gg_pos.push(find(&col_ptr, &row_idx, ja, jb));
                }
            }
        }
        let nnz = row_idx.len();
        let symbolic = SymbolicSparseColMat::new_checked(n, n, col_ptr, None, row_idx);
        let step = Problem {
            h: Arc::new(Matrix::Sparse(SparseColMat::new(symbolic, vec![0.0; nnz]))),
            a: Arc::clone(&q.base.a),
            norm_k: Arc::new(OnceLock::new()),
            c: vec![0.0; n],
            b: q.base.b.clone(),
        };
        Ok((
            StepPattern {
                h_pos,
                h_val,
                diag_pos,
                gg_pos,
            },
            step,
        ))
    }

    /// Writes `H + Cᵀ diag(d) C + shift·I` into the values of `step`'s H (in place when no
    /// one else holds them, which is the steady state: see [`super::ipm`]) and forgets the
    /// cached `‖K‖∞`.
    pub(crate) fn fill(&self, q: &InequalityProblem, layout: &Layout, d: &[f64], shift: f64, step: &mut Problem) {
        let Matrix::Sparse(h) = Arc::make_mut(&mut step.h) else {
            unreachable!("the step Hessian is built sparse")
        };
        let val = h.val_mut();
        val.iter_mut().for_each(|v| *v = 0.0);
        for (&p, &v) in self.h_pos.iter().zip(&self.h_val) {
            val[p] += v;
        }
        for &p in &self.diag_pos {
            val[p] += shift;
        }
        let (ng, nl) = (layout.g_rows.len(), layout.lower.len());
        let mut at = 0;
        for (&i, &di) in layout.g_rows.iter().zip(&d[..ng]) {
            for (_, va) in q.g.row(i) {
                for (_, vb) in q.g.row(i) {
                    val[self.gg_pos[at]] += di * va * vb;
                    at += 1;
                }
            }
        }
        for (&j, &dj) in layout.lower.iter().zip(&d[ng..ng + nl]) {
            val[self.diag_pos[j]] += dj;
        }
        for (&j, &dj) in layout.upper.iter().zip(&d[ng + nl..]) {
            val[self.diag_pos[j]] += dj;
        }
        Arc::make_mut(&mut step.norm_k).take();
    }
}
