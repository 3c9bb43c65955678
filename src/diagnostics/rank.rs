//! Rank and consistency of the equality constraints `Ax = b`.
//!
//! The analysis is a column-pivoted (Businger–Golub) Householder QR of `Aᵀ` (faer
//! `col_pivoting::qr`): `Aᵀ P = Q R`, `Q` orthogonal n×n, `R` upper trapezoidal with
//! non-increasing `|R_kk|`. Column `k` of `Aᵀ P` is row `order[k]` of `A`.
//!
//! **Rank tolerance.** The numerical rank is the number of diagonal entries with
//! `|R_kk| > τ`, `τ = factor · max(m, n) · ε · |R_00|` (default `factor = 1`), the same
//! relative threshold `numpy.linalg.matrix_rank` applies to singular values (common practice,
//! here applied to the diagonal of a rank-revealing QR; pivoted QR reveals the rank in
//! practice, although pathological matrices such as Kahan's exist: Golub & Van Loan,
//! *Matrix Computations*, 4th ed., §5.4.2).
//!
//! **Dependent rows.** With `R = [R₁₁ R₁₂; 0 R₂₂]` (`R₁₁` of order `r` = rank), the
//! columns of `C = R₁₁⁻¹R₁₂` give every dependent row as a combination of the independent
//! ones: row `order[r + k]` = `Σᵢ C[i, k] · row order[i]` (exact up to `‖R₂₂‖`).
//!
//! **Consistency.** The same combination must hold for `b`: the gap
//! `b_dep − Σᵢ C[i,k]·b_i` is accepted when `|gap| ≤ tol · (|b_dep| + Σᵢ |C[i,k]|·|b_i|)`
//! plus an absolute floor `tol · max_i |w_i b_i| / w_dep` (`w` the row weights below), default
//! `tol = 1e-9` ([`DEFAULT_CONSISTENCY_TOLERANCE`]).
//!
//! **Scaling.** Every decision is made on the row-equilibrated `A`: row `i` is weighted by
//! `w_i = 2^(−round(log₂‖row_i‖₂)) · (1 − ½·i/m)` (a power of two, exact, times a mild
//! preference for earlier rows), so the rank, the dependent rows and the consistency test do
//! not change when a row of `A` and its `b` entry are multiplied by any factor; the
//! tolerance `τ` above is applied to the `R` of the weighted `Aᵀ` (whose columns have norm
//! in `[0.35, 1.4]`). **Which rows are dropped.** With dependent rows, the rows
//! written first are kept and the later dependent ones dropped: a greedy pass in the order
//! written keeps each row that adds at least a fraction 1e-3 of its (equilibrated) norm to
//! the rows kept before it, and when it finds as many rows as the rank, `Aᵀ` is factored
//! again unpivoted with those rows first. When it does not (near-dependent rows), or for very
//! large `A`, the pivoted choice stands: the best-conditioned set, whatever the order. Column scaling of `A` is not
//! equilibrated here (it would make the null-space basis non-orthogonal).
//!
//! ```
//! use tangency::diagnostics::rank::RankAnalysis;
//! // row 2 = row 0 + row 1
//! let a = faer::mat![[1.0, 0.0, 0.0], [0.0, 1.0, 0.0], [1.0, 1.0, 0.0]];
//! let r = RankAnalysis::new(a.as_ref(), 1.0);
//! assert_eq!(r.rank(), 2);
//! let deps = r.dependencies();
//! assert_eq!(deps.len(), 1);
//! // whichever row the pivoting leaves out is written in terms of the other two
//! assert_eq!(deps[0].terms.len(), 2);
//! assert!(r.check_rhs(&[1.0, 2.0, 3.0], 1e-9).is_ok());
//! assert!(r.check_rhs(&[1.0, 2.0, 4.0], 1e-9).is_err());
//! ```

use std::fmt;

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::householder;
use faer::linalg::triangular_solve;
use faer::{Conj, Mat, MatMut, MatRef, Par};

use crate::error::Error;

/// Default factor in the rank tolerance `τ = factor · max(m, n) · ε · |R_00|`.
pub const DEFAULT_RANK_TOLERANCE_FACTOR: f64 = 1.0;
/// Default relative tolerance of the consistency check of `b` on dependent rows.
pub const DEFAULT_CONSISTENCY_TOLERANCE: f64 = 1e-9;

/// One dependent constraint row, written as a combination of independent ones.
#[derive(Clone, Debug, PartialEq)]
pub struct Dependency {
    /// The dependent row (0-based).
    pub row: usize,
    /// `(row, coefficient)` pairs with `row_dep = Σ coefficient · row` (0-based rows;
    /// coefficients below `1e-12` times the largest are left out; empty for a zero row).
    pub terms: Vec<(usize, f64)>,
}

fn fmt_coef(v: f64) -> String {
    let s = format!("{:.6}", v.abs());
    let s = s.trim_end_matches('0');
    let s = if s.ends_with('.') {
        format!("{s}0")
    } else {
        s.to_string()
    };
    s
}

impl fmt::Display for Dependency {
    /// `row 7 = 1.0·row 2 + 1.0·row 5` (0-based rows).
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "row {} = ", self.row)?;
        if self.terms.is_empty() {
            return f.write_str("0 (an all-zero row)");
        }
        for (k, (row, coef)) in self.terms.iter().enumerate() {
            let sign = if *coef < 0.0 { "−" } else { "+" };
            if k == 0 {
                if *coef < 0.0 {
                    f.write_str("−")?;
                }
            } else {
                write!(f, " {sign} ")?;
            }
            write!(f, "{}·row {row}", fmt_coef(*coef))?;
        }
        Ok(())
    }
}

/// The outcome of checking `b` against one dependency.
#[derive(Clone, Debug, PartialEq)]
pub struct RhsCheck {
    /// The dependency.
    pub dependency: Dependency,
    /// `b_dep − Σ coef · b_i`.
    pub gap: f64,
    /// The tolerance the gap was compared with.
    pub tolerance: f64,
}

impl RhsCheck {
    /// Whether the gap is within tolerance (the row is redundant, not contradictory).
    pub fn consistent(&self) -> bool {
        self.gap.abs() <= self.tolerance
    }
}

/// Column-pivoted QR of `Aᵀ` with the rank decision: see the [module docs](self).
#[derive(Clone, Debug)]
pub struct RankAnalysis {
    m: usize,
    n: usize,
    rank: usize,
    threshold: f64,
    order: Vec<usize>,
    q_basis: Mat<f64>,
    q_coeff: Mat<f64>,
    r: Mat<f64>,
    comb: Mat<f64>,
    weights: Vec<f64>,
}

impl RankAnalysis {
    /// Analyzes a dense `A` (m×n). `factor` scales the rank tolerance (use
    /// [`DEFAULT_RANK_TOLERANCE_FACTOR`]).
    pub fn new(a: MatRef<'_, f64>, factor: f64) -> Self {
        let (m, n) = (a.nrows(), a.ncols());
        let at = a.transpose().to_owned();
        // An all-zero A (every row redundant or contradictory) has rank 0 and Q = I; a
        // Householder QR of zero columns is not needed (and must not produce NaN).
        let all_zero = (0..m).all(|i| a.row(i).iter().all(|v| *v == 0.0));
        if m == 0 || n == 0 || all_zero {
            return RankAnalysis {
                m,
                n,
                rank: 0,
                threshold: 0.0,
                order: (0..m).collect(),
                q_basis: Mat::zeros(n, 0),
                q_coeff: Mat::zeros(1, 0),
                r: Mat::zeros(m.min(n), m),
                comb: Mat::zeros(0, m),
                weights: vec![1.0; m],
            };
        }
        // Row equilibration (columns of Aᵀ): the rank decision is made on D·A with unit-size
        // rows, so it does not change when the user scales a row by any factor. Each weight
        // is a power of two (exact) times a mild preference 1 − ½·i/m that makes the pivoting
        // keep earlier rows when rows tie (duplicates, sums): later dependent rows are dropped.
        let weights = row_weights(a);
        let mut at = at;
        for (i, w) in weights.iter().enumerate() {
            at.col_mut(i).iter_mut().for_each(|v| *v *= w);
        }
        let qr = at.col_piv_qr();
        let (fwd, _) = qr.P().arrays();
        let mut order: Vec<usize> = fwd.to_vec();
        let size = m.min(n);
        let mut scaled_r = qr.R().get(..size, ..).to_owned();
        let r00 = scaled_r[(0, 0)].abs();
        let threshold = factor * (m.max(n) as f64) * f64::EPSILON * r00;
        let mut rank = 0;
        while rank < size && scaled_r[(rank, rank)].abs() > threshold {
            rank += 1;
        }
        let (mut q_basis, mut q_coeff) = (qr.Q_basis().to_owned(), qr.Q_coeff().to_owned());
        // With dependent rows, keep the rows written first when they form a well-conditioned
        // basis (the pivoting alone prefers the largest rows): then factor Aᵀ again, unpivoted,
        // with the kept rows first.
        if rank < m {
            if let Some(kept) = written_order_basis(at.as_ref(), rank) {
                let dropped = (0..m).filter(|i| !kept.contains(i));
                order = kept.iter().copied().chain(dropped).collect();
                let permuted = Mat::from_fn(n, m, |i, k| at[(i, order[k])]);
                let qr = permuted.qr();
                scaled_r = qr.R().get(..size, ..).to_owned();
                q_basis = qr.Q_basis().to_owned();
                q_coeff = qr.Q_coeff().to_owned();
            }
        }
        // R of the unscaled Aᵀ P: Aᵀ = (Aᵀ D) D⁻¹, so column k of R is divided by the
        // weight of row order[k].
        let r = Mat::from_fn(size, m, |i, k| scaled_r[(i, k)] / weights[order[k]]);
        // C = R11⁻¹ R12: dependent rows in terms of independent ones.
        let mut comb = r.get(..rank, rank..).to_owned();
        if rank > 0 && comb.ncols() > 0 {
            triangular_solve::solve_upper_triangular_in_place(r.get(..rank, ..rank), comb.as_mut(), Par::Seq);
        }
        RankAnalysis {
            m,
            n,
            rank,
            threshold,
            order,
            q_basis,
            q_coeff,
            r,
            comb,
            weights,
        }
    }

    /// Numerical rank of `A`.
    pub fn rank(&self) -> usize {
        self.rank
    }

    /// Rows of `A` (m) and columns (n).
    pub fn shape(&self) -> (usize, usize) {
        (self.m, self.n)
    }

    /// The rank threshold `τ` used on `|R_kk|` of the row-equilibrated `A` (every row
    /// scaled to 2-norm in `[½, 1]`, see the [module docs](self)).
    pub fn threshold(&self) -> f64 {
        self.threshold
    }

    /// Row order chosen by the pivoting: the first [`rank`](Self::rank) rows are the
    /// independent ones kept, the others are dependent.
    pub fn order(&self) -> &[usize] {
        &self.order
    }

    /// The factor `R` (min(m,n) × m, columns in [`order`](Self::order)).
    pub fn r(&self) -> MatRef<'_, f64> {
        self.r.as_ref()
    }

    /// `C = R₁₁⁻¹R₁₂` (rank × (m − rank)): column k gives dependent row `order[rank + k]`.
    pub fn combination(&self) -> MatRef<'_, f64> {
        self.comb.as_ref()
    }

    /// The rows found dependent (0-based, in pivot order), dropped by the solvers.
    pub fn dependent_rows(&self) -> Vec<usize> {
        self.order[self.rank..].to_vec()
    }

    /// Every dependent row with its combination.
    pub fn dependencies(&self) -> Vec<Dependency> {
        (0..self.m - self.rank)
            .map(|k| {
                let col = self.comb.col(k);
                // Negligible terms are judged on the equilibrated rows (coefficient / weight).
                let w = |i: usize| col[i].abs() / self.weights[self.order[i]];
                let big = (0..self.rank).fold(0.0f64, |a, i| a.max(w(i)));
                let mut terms: Vec<(usize, f64)> = (0..self.rank)
                    .filter(|&i| w(i) > 1e-12 * big)
                    .map(|i| (self.order[i], col[i]))
                    .collect();
                terms.sort_by_key(|t| t.0);
                Dependency {
                    row: self.order[self.rank + k],
                    terms,
                }
            })
            .collect()
    }

    /// Checks `b` against every dependency (see the [module docs](self) for the test);
    /// `Err(Error::Infeasible)` naming every contradiction, largest gap first.
    pub fn check_rhs(&self, b: &[f64], tol: f64) -> Result<Vec<RhsCheck>, Error> {
        // The absolute floor is taken on the row-equilibrated b (w_i·b_i) and brought to the
        // dependent row's units, so that it too is invariant under row scaling.
        let wbmax = b
            .iter()
            .zip(&self.weights)
            .fold(0.0f64, |a, (v, w)| a.max((v * w).abs()));
        let mut checks = Vec::new();
        for (k, dep) in self.dependencies().into_iter().enumerate() {
            let bmax = wbmax / self.weights[dep.row];
            let col = self.comb.col(k);
            let mut combo = 0.0;
            let mut scale = b[dep.row].abs();
            for i in 0..self.rank {
                let bi = b[self.order[i]];
                combo += col[i] * bi;
                scale += (col[i] * bi).abs();
            }
            checks.push(RhsCheck {
                gap: b[dep.row] - combo,
                tolerance: tol * (scale + bmax),
                dependency: dep,
            });
        }
        let mut bad: Vec<&RhsCheck> = checks.iter().filter(|c| !c.consistent()).collect();
        if bad.is_empty() {
            return Ok(checks);
        }
        bad.sort_by(|x, y| y.gap.abs().total_cmp(&x.gap.abs()));
        let worst = bad[0];
        let detail = bad
            .iter()
            .map(|c| {
                let d = &c.dependency;
                let combo: f64 = d.terms.iter().map(|(i, a)| a * b[*i]).sum();
                format!(
                    "{d}, but b[{}] = {} while the same combination of b gives {} (they differ by {})",
                    d.row,
                    crate::report::num(b[d.row], 10),
                    crate::report::num(combo, 10),
                    crate::report::num(c.gap.abs(), 4)
                )
            })
            .collect::<Vec<_>>()
            .join("; ");
        let mut rows = vec![worst.dependency.row];
        rows.extend(worst.dependency.terms.iter().map(|t| t.0));
        Err(Error::Infeasible {
            rows,
            gap: worst.gap.abs(),
            detail: format!("rows are 0-based: {detail}"),
        })
    }

    /// Applies `Q` (n×n) on the left of `mat` (n×k) in place.
    pub fn apply_q(&self, mat: MatMut<'_, f64>, par: Par) {
        self.apply(mat, par, false)
    }

    /// Applies `Qᵀ` on the left of `mat` (n×k) in place.
    pub fn apply_qt(&self, mat: MatMut<'_, f64>, par: Par) {
        self.apply(mat, par, true)
    }

    fn apply(&self, mat: MatMut<'_, f64>, par: Par, transpose: bool) {
        if self.q_basis.ncols() == 0 {
            return;
        }
        let bs = self.q_coeff.nrows();
        let k = mat.ncols();
        if transpose {
            let req = householder::apply_block_householder_sequence_transpose_on_the_left_in_place_scratch::<f64>(
                self.n, bs, k,
            );
            let mut buf = MemBuffer::new(req);
            householder::apply_block_householder_sequence_transpose_on_the_left_in_place_with_conj(
                self.q_basis.as_ref(),
                self.q_coeff.as_ref(),
                Conj::No,
                mat,
                par,
                MemStack::new(&mut buf),
            );
        } else {
            let req = householder::apply_block_householder_sequence_on_the_left_in_place_scratch::<f64>(self.n, bs, k);
            let mut buf = MemBuffer::new(req);
            householder::apply_block_householder_sequence_on_the_left_in_place_with_conj(
                self.q_basis.as_ref(),
                self.q_coeff.as_ref(),
                Conj::No,
                mat,
                par,
                MemStack::new(&mut buf),
            );
        }
    }

    /// An orthonormal basis `Z` (n × (n − rank)) of the null space of `A`: the last
    /// columns of `Q`.
    pub fn null_basis(&self, par: Par) -> Mat<f64> {
        let (n, r) = (self.n, self.rank);
        let mut z = Mat::zeros(n, n - r);
        for j in 0..n - r {
            z[(r + j, j)] = 1.0;
        }
        self.apply_q(z.as_mut(), par);
        z
    }
}

/// Weight of each row of `A` in the rank decision: `2^(−round(log₂‖row‖₂))` (exact, brings
/// the row to norm in `[0.7, 1.4]`) times `1 − ½·i/m` (the preference for earlier rows);
/// 1 for a zero row.
/// A floor on the part of a kept row that is new (relative to its equilibrated norm) when
/// rows are kept in the order written: a row that adds less than this is treated as
/// dependent by the greedy pass, so the basis it keeps has a bounded condition (common
/// practice for threshold pivoting).
const WRITTEN_ORDER_FLOOR: f64 = 1e-3;
/// Work limit (m·rank·n multiply-adds) of the greedy written-order pass.
const WRITTEN_ORDER_MAX_WORK: f64 = 4e9;

/// The first `rank` rows (columns of the equilibrated `Aᵀ`), in the order written, each
/// adding a component of at least [`WRITTEN_ORDER_FLOOR`] of its norm to those before it
/// (modified Gram–Schmidt, twice). `None` when the greedy pass does not find `rank` such
/// rows (then the pivoted choice stands) or the work would be too large.
fn written_order_basis(at: MatRef<'_, f64>, rank: usize) -> Option<Vec<usize>> {
    let (n, m) = (at.nrows(), at.ncols());
    if rank == 0 || (m as f64) * (rank as f64) * (n as f64) > WRITTEN_ORDER_MAX_WORK {
        return None;
    }
    let mut basis: Vec<Vec<f64>> = Vec::with_capacity(rank);
    let mut kept = Vec::with_capacity(rank);
    for i in 0..m {
        if kept.len() == rank {
            break;
        }
        let mut v: Vec<f64> = at.col(i).iter().copied().collect();
        let norm0 = crate::problem::norm2(&v);
        if norm0 == 0.0 || !norm0.is_finite() {
            continue;
        }
        for _ in 0..2 {
            for q in &basis {
                let d = crate::problem::dot(q, &v);
                v.iter_mut().zip(q).for_each(|(vi, qi)| *vi -= d * qi);
            }
        }
        let norm = crate::problem::norm2(&v);
        if norm > WRITTEN_ORDER_FLOOR * norm0 {
            v.iter_mut().for_each(|x| *x /= norm);
            basis.push(v);
            kept.push(i);
        }
    }
    (kept.len() == rank).then_some(kept)
}

fn row_weights(a: MatRef<'_, f64>) -> Vec<f64> {
    let m = a.nrows();
    (0..m)
        .map(|i| {
            let row: Vec<f64> = a.row(i).iter().copied().collect();
            let norm = crate::problem::norm2(&row);
            let unit = if norm > 0.0 && norm.is_finite() {
                2f64.powi(-(norm.log2().round() as i32).clamp(-1020, 1020))
            } else {
                1.0
            };
            unit * (1.0 - 0.5 * i as f64 / m as f64)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_a_sum_of_two_rows() {
        // row 3 = row 0 + row 2, rows 0..2 independent
        let a = faer::mat![
            [1.0, 2.0, 0.0, 1.0],
            [0.0, 1.0, 3.0, 0.0],
            [2.0, 0.0, 1.0, 1.0],
            [3.0, 2.0, 1.0, 2.0],
        ];
        let r = RankAnalysis::new(a.as_ref(), 1.0);
        assert_eq!(r.rank(), 3);
        let d = &r.dependencies()[0];
        // Reconstruct the dependent row from the reported combination.
        for j in 0..4 {
            let s: f64 = d.terms.iter().map(|(i, c)| c * a[(*i, j)]).sum();
            assert!((s - a[(d.row, j)]).abs() < 1e-12, "{d}");
        }
        let z = r.null_basis(Par::Seq);
        assert_eq!(z.ncols(), 1);
        let az = &a * &z;
        assert!(az.norm_max() < 1e-12);
        assert!(r.check_rhs(&[1.0, 1.0, 1.0, 2.0], 1e-9).is_ok());
        match r.check_rhs(&[1.0, 1.0, 1.0, 2.5], 1e-9) {
            Err(Error::Infeasible { gap, rows, .. }) => {
                // every coefficient of the combination is ±1, so the gap is the change of b[3]
                assert!((gap - 0.5).abs() < 1e-12, "{gap}");
                assert_eq!(rows.len(), 3);
            }
            other => panic!("{other:?}"),
        }
    }

    /// Rows scaled from 1e-100 to 1e100 have the same rank and dependencies as unscaled
    /// (known by construction: row 3 = row 0 + row 2 before scaling).
    #[test]
    fn rank_is_invariant_under_row_scaling() {
        let a = faer::mat![
            [1.0, 2.0, 0.0, 1.0],
            [0.0, 1.0, 3.0, 0.0],
            [2.0, 0.0, 1.0, 1.0],
            [3.0, 2.0, 1.0, 2.0],
        ];
        let s = [1e-100, 1e100, 1e-50, 1e60];
        let scaled = Mat::from_fn(4, 4, |i, j| a[(i, j)] * s[i]);
        for (mat, name) in [(a.as_ref(), "plain"), (scaled.as_ref(), "scaled")] {
            let r = RankAnalysis::new(mat, 1.0);
            assert_eq!(r.rank(), 3, "{name}");
            assert_eq!(r.dependent_rows(), vec![3], "{name}: the last row is the one dropped");
            let d = &r.dependencies()[0];
            for j in 0..4 {
                let v: f64 = d.terms.iter().map(|(i, c)| c * mat[(*i, j)]).sum();
                assert!(
                    (v - mat[(3, j)]).abs() <= 1e-12 * mat[(3, j)].abs().max(1e-300),
                    "{name}: {d}"
                );
            }
            let b: Vec<f64> = (0..4).map(|i| [1.0, 1.0, 1.0, 2.0][i] * s[i]).collect();
            let b = if name == "plain" { vec![1.0, 1.0, 1.0, 2.0] } else { b };
            assert!(r.check_rhs(&b, 1e-9).is_ok(), "{name}");
        }
    }

    /// A later row that is a combination of earlier ones is the one dropped, even when it
    /// is the largest (the pivoting alone would keep it).
    #[test]
    fn drops_the_later_dependent_row() {
        let a = faer::mat![[1.0, 1.0, 2.0], [1.0, -1.0, 0.0], [2.0, 0.0, 2.0], [0.0, 0.0, 1.0]];
        let r = RankAnalysis::new(a.as_ref(), 1.0);
        assert_eq!(r.rank(), 3);
        assert_eq!(r.dependent_rows(), vec![2]);
        let d = &r.dependencies()[0];
        assert_eq!(d.row, 2);
        let mut rows: Vec<usize> = d.terms.iter().map(|t| t.0).collect();
        rows.sort_unstable();
        assert_eq!(rows, vec![0, 1]);
        for &(row, coef) in &d.terms {
            assert!((coef - 1.0).abs() < 1e-14, "row {row}: {coef}");
        }
    }

    /// Of two equal rows the first one written is kept; a zero row is dependent.
    #[test]
    fn keeps_the_first_of_equal_rows() {
        let a = faer::mat![[0.0, 0.0], [1.0, 1.0], [1.0, 1.0]];
        let r = RankAnalysis::new(a.as_ref(), 1.0);
        assert_eq!(r.rank(), 1);
        let mut dep = r.dependent_rows();
        dep.sort_unstable();
        assert_eq!(dep, vec![0, 2]);
    }

    #[test]
    fn display_reads_like_an_equation() {
        let d = Dependency {
            row: 7,
            terms: vec![(2, 1.0), (5, -0.5)],
        };
        assert_eq!(d.to_string(), "row 7 = 1.0·row 2 − 0.5·row 5");
    }
}
