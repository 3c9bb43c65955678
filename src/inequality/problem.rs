//! The extended problem: an equality-constrained [`Problem`] plus `Gx ≤ h` and
//! `lo ≤ x ≤ hi`, validated once.

use crate::error::{Error, Result};
use crate::problem::Problem;

/// A bound or right-hand side with `|v| ≥ NO_BOUND` means "no constraint" (common practice
/// in optimization software; `±inf` is accepted too).
pub const NO_BOUND: f64 = 1e20;

/// `Gx ≤ h` rows in compressed-row form (sorted columns, duplicates summed).
#[derive(Clone, Debug, Default)]
pub(crate) struct Rows {
    pub(crate) p: usize,
    pub(crate) row_ptr: Vec<usize>,
    pub(crate) col: Vec<usize>,
    pub(crate) val: Vec<f64>,
}

impl Rows {
    /// Entries `(col, val)` of row `i`.
    pub(crate) fn row(&self, i: usize) -> impl Iterator<Item = (usize, f64)> + '_ {
        let (a, b) = (self.row_ptr[i], self.row_ptr[i + 1]);
        self.col[a..b].iter().copied().zip(self.val[a..b].iter().copied())
    }

    /// `gᵢᵀx`.
    pub(crate) fn dot_row(&self, i: usize, x: &[f64]) -> f64 {
        self.row(i).map(|(j, v)| v * x[j]).sum()
    }

    /// `y += α gᵢ`.
    pub(crate) fn axpy_row(&self, i: usize, alpha: f64, y: &mut [f64]) {
        for (j, v) in self.row(i) {
            y[j] += alpha * v;
        }
    }
}

fn input(block: &'static str, row: Option<usize>, col: Option<usize>, detail: impl Into<String>) -> Error {
    Error::InequalityInput {
        block,
        row,
        col,
        detail: detail.into(),
    }
}

/// `minimize ½xᵀHx + cᵀx  subject to  Ax = b,  Gx ≤ h,  lo ≤ x ≤ hi`.
///
/// Built from a validated equality-constrained [`Problem`]; every setter validates its data
/// (sizes, NaN, `lo ≤ hi`) and names the block, row and column of the first bad entry.
/// Entries of `h`, `lo`, `hi` with `|v| ≥` [`NO_BOUND`] (or infinite) mean "no constraint".
///
/// ```
/// use tangency::inequality::InequalityProblem;
/// use tangency::{ProblemBuilder, Triangle};
/// let base = ProblemBuilder::new()
///     .hessian_row_major(2, &[1.0, 0.0, 0.0, 1.0], Triangle::Full)
///     .linear(&[-3.0, 1.0])
///     .build()?;
/// let q = InequalityProblem::new(base)
///     .with_inequalities(1, &[(0, 0, 1.0), (0, 1, 1.0)], &[2.0])?  // x0 + x1 ≤ 2
///     .with_bounds(&[0.0, 0.0], &[f64::INFINITY, 1e20])?;          // x ≥ 0
/// assert_eq!((q.n(), q.p()), (2, 1));
/// // a lower bound above the upper bound is refused, naming the entry
/// let base = q.equality_problem().clone();
/// let err = InequalityProblem::new(base).with_bounds(&[0.0, 2.0], &[1.0, 1.0]).unwrap_err();
/// assert!(err.to_string().contains("row 1"));
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct InequalityProblem {
    pub(crate) base: Problem,
    pub(crate) g: Rows,
    pub(crate) h: Vec<f64>,
    pub(crate) lo: Vec<f64>,
    pub(crate) hi: Vec<f64>,
}

/// True when `v` means "no upper limit" (`v ≥ NO_BOUND`).
pub(crate) fn no_upper(v: f64) -> bool {
    v >= NO_BOUND
}

/// True when `v` means "no lower limit" (`v ≤ −NO_BOUND`).
pub(crate) fn no_lower(v: f64) -> bool {
    v <= -NO_BOUND
}

impl InequalityProblem {
    /// The problem of `base` with no inequalities and no bounds (`lo = −∞`, `hi = +∞`).
    pub fn new(base: Problem) -> Self {
        let n = base.n();
        InequalityProblem {
            base,
            g: Rows {
                p: 0,
                row_ptr: vec![0],
                col: Vec::new(),
                val: Vec::new(),
            },
            h: Vec::new(),
            lo: vec![f64::NEG_INFINITY; n],
            hi: vec![f64::INFINITY; n],
        }
    }

    /// Sets `Gx ≤ h`: `p` rows given as 0-based triplets `(row, col, value)` (duplicates
    /// are summed) and `h` of length `p` (`hᵢ ≥` [`NO_BOUND`] drops row `i`). Default: no rows.
    pub fn with_inequalities(mut self, p: usize, triplets: &[(usize, usize, f64)], h: &[f64]) -> Result<Self> {
        let n = self.n();
        if h.len() != p {
            return Err(input(
                "h",
                None,
                None,
                format!("{} values given for {p} rows of G", h.len()),
            ));
        }
        for (i, &v) in h.iter().enumerate() {
            if v.is_nan() || v == f64::NEG_INFINITY || v <= -NO_BOUND {
                return Err(input(
                    "h",
                    Some(i),
                    Some(0),
                    format!("value {v} (NaN or −∞ would make the row meaningless or infeasible)"),
                ));
            }
        }
        let mut entries = Vec::new();
        entries
            .try_reserve_exact(triplets.len())
            .map_err(|_| Error::Resources {
                detail: format!("{} entries of G", triplets.len()),
            })?;
        for &(i, j, v) in triplets {
            if i >= p || j >= n {
                return Err(input("G", Some(i), Some(j), format!("entry outside the {p}×{n} block")));
            }
            if !v.is_finite() {
                return Err(input("G", Some(i), Some(j), format!("non-finite value {v}")));
            }
            entries.push((i, j, v));
        }
        entries.sort_unstable_by_key(|&(i, j, _)| (i, j));
        let mut rows = Rows {
            p,
            row_ptr: vec![0; p + 1],
            col: Vec::with_capacity(entries.len()),
            val: Vec::with_capacity(entries.len()),
        };
        let mut last = None;
        for (i, j, v) in entries {
            if last == Some((i, j)) {
                *rows.val.last_mut().expect("an entry was pushed") += v;
            } else {
                rows.col.push(j);
                rows.val.push(v);
                rows.row_ptr[i + 1] += 1;
                last = Some((i, j));
            }
        }
        for i in 0..p {
            rows.row_ptr[i + 1] += rows.row_ptr[i];
        }
        self.g = rows;
        self.h = h.to_vec();
        Ok(self)
    }

    /// Sets the bounds `lo ≤ x ≤ hi` (length n each; `loⱼ ≤ −`[`NO_BOUND`] or
    /// `hiⱼ ≥` [`NO_BOUND`] means none). `loⱼ = hiⱼ` is refused: fix a variable with an
    /// equality row instead (the interior of such a bound is empty). Default: none.
    pub fn with_bounds(mut self, lo: &[f64], hi: &[f64]) -> Result<Self> {
        self.set_bounds(lo, hi)?;
        Ok(self)
    }

    /// Replaces the bounds in place (same rules as [`with_bounds`](Self::with_bounds)); no
    /// allocation.
    pub fn set_bounds(&mut self, lo: &[f64], hi: &[f64]) -> Result<()> {
        let n = self.n();
        for (name, v) in [("lo", lo), ("hi", hi)] {
            if v.len() != n {
                return Err(input(
                    name,
                    None,
                    None,
                    format!("{} values given for n = {n} variables", v.len()),
                ));
            }
        }
        for j in 0..n {
            let (l, u) = (lo[j], hi[j]);
            if l.is_nan() || l >= NO_BOUND {
                return Err(input("lo", Some(j), Some(0), format!("lower bound {l} (NaN or +∞)")));
            }
            if u.is_nan() || u <= -NO_BOUND {
                return Err(input("hi", Some(j), Some(0), format!("upper bound {u} (NaN or −∞)")));
            }
            if !no_lower(l) && !no_upper(u) && l >= u {
                let detail = if l == u {
                    format!("lo = hi = {l}: fix this variable with an equality row of A instead of two bounds")
                } else {
                    format!("lower bound {l} above the upper bound {u}")
                };
                return Err(input("lo", Some(j), Some(0), detail));
            }
        }
        self.lo.copy_from_slice(lo);
        self.hi.copy_from_slice(hi);
        Ok(())
    }

    /// Replaces `c` in place (checked; no allocation).
    pub fn set_linear(&mut self, c: &[f64]) -> Result<()> {
        self.base.set_linear(c)
    }

    /// Replaces `b` in place (checked; no allocation).
    pub fn set_rhs(&mut self, b: &[f64]) -> Result<()> {
        self.base.set_rhs(b)
    }

    /// Overwrites `b[start..start + values.len()]` in place (for example the initial state
    /// `x̂` of a stage-wise problem, the first `nx` entries); no allocation.
    pub fn set_rhs_range(&mut self, start: usize, values: &[f64]) -> Result<()> {
        let m = self.m();
        if start.checked_add(values.len()).is_none_or(|end| end > m) {
            return Err(Error::InvalidOption(format!(
                "set_rhs_range: {} values from row {start} do not fit in b of length {m}",
                values.len()
            )));
        }
        if let Some((i, &v)) = values.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(Error::NonFinite {
                block: crate::error::Block::B,
                row: start + i,
                col: 0,
                value: v,
            });
        }
        self.base.b[start..start + values.len()].copy_from_slice(values);
        Ok(())
    }

    /// Replaces `h` in place (same rules as in [`with_inequalities`](Self::with_inequalities)).
    pub fn set_inequality_rhs(&mut self, h: &[f64]) -> Result<()> {
        if h.len() != self.p() {
            return Err(input(
                "h",
                None,
                None,
                format!("{} values given for {} rows of G", h.len(), self.p()),
            ));
        }
        if let Some((i, &v)) = h.iter().enumerate().find(|(_, v)| v.is_nan() || **v <= -NO_BOUND) {
            return Err(input("h", Some(i), Some(0), format!("value {v}")));
        }
        self.h.copy_from_slice(h);
        Ok(())
    }

    /// Number of variables.
    pub fn n(&self) -> usize {
        self.base.n()
    }

    /// Number of equality rows.
    pub fn m(&self) -> usize {
        self.base.m()
    }

    /// Number of rows of `G`.
    pub fn p(&self) -> usize {
        self.g.p
    }

    /// The equality-constrained part (`H`, `c`, `A`, `b`).
    pub fn equality_problem(&self) -> &Problem {
        &self.base
    }

    /// `h`.
    pub fn inequality_rhs(&self) -> &[f64] {
        &self.h
    }

    /// Lower bounds.
    pub fn lower(&self) -> &[f64] {
        &self.lo
    }

    /// Upper bounds.
    pub fn upper(&self) -> &[f64] {
        &self.hi
    }

    /// `Gx` (length p).
    pub fn g_mul(&self, x: &[f64]) -> Vec<f64> {
        (0..self.p()).map(|i| self.g.dot_row(i, x)).collect()
    }

    /// `Gᵀz` (length n).
    pub fn g_tr_mul(&self, z: &[f64]) -> Vec<f64> {
        let mut out = vec![0.0; self.n()];
        for (i, &zi) in z.iter().enumerate().take(self.p()) {
            self.g.axpy_row(i, zi, &mut out);
        }
        out
    }

    /// The stored entries of `G` as `(row, col, value)`.
    pub fn g_triplets(&self) -> Vec<(usize, usize, f64)> {
        (0..self.p())
            .flat_map(|i| self.g.row(i).map(move |(j, v)| (i, j, v)))
            .collect()
    }

    /// Largest violation of `Ax = b`, `Gx ≤ h` and the bounds at `x` (0 when feasible).
    pub fn max_violation(&self, x: &[f64]) -> f64 {
        let mut worst = 0.0f64;
        let mut ax = vec![0.0; self.m()];
        self.base.constraints().mul_add(x, &mut ax);
        for (v, b) in ax.iter().zip(self.base.rhs()) {
            worst = worst.max((v - b).abs());
        }
        for i in 0..self.p() {
            if !no_upper(self.h[i]) {
                worst = worst.max(self.g.dot_row(i, x) - self.h[i]);
            }
        }
        for ((&xj, &lo), &hi) in x.iter().zip(&self.lo).zip(&self.hi) {
            if !no_lower(lo) {
                worst = worst.max(lo - xj);
            }
            if !no_upper(hi) {
                worst = worst.max(xj - hi);
            }
        }
        worst
    }
}
