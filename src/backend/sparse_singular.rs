//! Singular KKT matrices diagnosed with the sparse factors only, at any size.
//!
//! The null vectors of the equilibrated K̃ come from the capacitance matrix of the forced
//! pivots ([`super::sparse_capacitance`]): `S v = 0 ⇒ w̃ = M⁻¹U v` spans `null(K̃)`, and
//! `w = D w̃` spans `null(K)` (`D` the equilibration). Every decision below is made on the
//! equilibrated, orthonormalized basis, so that row and column scaling of the data does not
//! change it.
//!
//! * **Dependent constraint rows.** Null vectors with no `x` part, `[0; v]`: `vᵀA = 0`.
//!   They are found as the small singular values of the `x` block of the basis
//!   (`σ ≤` [`SPLIT_TOL`]). One row per such vector is *dropped*; the pivot rows are chosen
//!   from the last row upwards (threshold pivoting, [`PIVOT_THRESHOLD`]) so that the rows
//!   the user wrote first are kept. With each vector normalized to 1 at its dropped row
//!   `p`, `row p = −Σᵢ vᵢ·row i`. When `bᵀv ≠ 0` (beyond the consistency tolerance) the
//!   constraints are infeasible: [`Error::Infeasible`] names the rows and the size of the
//!   contradiction. Otherwise the solve with `S⁺` is exact for the consistent system and
//!   the multipliers of the dropped rows are set to zero (a solution of the reduced
//!   problem, the rows kept).
//! * **Flat directions.** The other null vectors `[u; v]` have `Au = 0`, `Hu = −Aᵀv`, so
//!   `uᵀHu = 0`: the objective is flat or linear along `u`. With `g_k = −cᵀu_k + bᵀv_k`
//!   (the right-hand side against the null vector) not zero the objective is unbounded
//!   below along `d = Σ g_k u_k` (slope `−Σ g_k² / ‖d‖₂`, the same at every feasible
//!   point); otherwise the minimizers are not unique (verdict `non_unique` when the reduced
//!   Hessian is positive semidefinite, `saddle` when it has negative eigenvalues).
//!
//! Written by hand: no dependency classifies KKT null spaces.

use faer::{Mat, MatMut, MatRef};

use crate::backend::SingularFindings;
use crate::diagnostics::rank::DEFAULT_CONSISTENCY_TOLERANCE;
use crate::error::{Error, Result};
use crate::problem::Problem;
use crate::solution::{Inertia, Verdict};

/// A null vector of the orthonormalized equilibrated basis whose `x` part has 2-norm at
/// most this is a dependence among constraint rows only.
pub const SPLIT_TOL: f64 = 1e-6;

/// The dropped row of a dependent combination is the last row whose coefficient is at
/// least this fraction of the largest one (threshold pivoting, preferring later rows).
pub const PIVOT_THRESHOLD: f64 = 0.1;

/// What the null space of one singular K says, independent of the right-hand side.
#[derive(Clone, Debug)]
pub struct SparseSingular {
    n: usize,
    m: usize,
    inertia: Inertia,
    /// Dropped rows, one per dependent combination.
    dropped: Vec<usize>,
    /// `m × d_y`: column k is the combination of rows with coefficient 1 at `dropped[k]`
    /// and 0 at the other dropped rows (original scale): `Σᵢ col[i]·row i = 0`.
    combos: Mat<f64>,
    /// `dim × d_f`: null vectors of K with an `x` part (original scale).
    flats: Mat<f64>,
}

impl SparseSingular {
    /// Classifies the null space spanned by the columns of `null_eq` (null vectors of the
    /// equilibrated K̃ = D K D, `scale` = D).
    pub fn new(null_eq: MatRef<'_, f64>, scale: &[f64], n: usize, m: usize, inertia: Inertia) -> SparseSingular {
        let dim = n + m;
        let d = null_eq.ncols();
        let mut out = SparseSingular {
            n,
            m,
            inertia,
            dropped: Vec::new(),
            combos: Mat::zeros(m, 0),
            flats: Mat::zeros(dim, 0),
        };
        if d == 0 {
            return out;
        }
        let q = null_eq.qr().compute_thin_Q();
        let x_part = q.as_ref().subrows(0, n);
        // Right singular vectors of the x block: small σ ⇒ combination with no x part.
        let (sigma, v) = if n == 0 {
            (vec![0.0; d], Mat::<f64>::identity(d, d))
        } else {
            match x_part.thin_svd() {
                Ok(svd) => {
                    let k = svd.S().dim();
                    let mut s: Vec<f64> = (0..k).map(|i| svd.S()[i]).collect();
                    s.resize(d, 0.0);
                    let mut vv = Mat::<f64>::zeros(d, d);
                    // thin_svd of an n×d block with n < d returns fewer columns: complete
                    // with the null space of the x block through the full SVD.
                    if k < d {
                        match x_part.svd() {
                            Ok(full) => vv.copy_from(full.V()),
                            Err(_) => vv = Mat::identity(d, d),
                        }
                    } else {
                        vv.copy_from(svd.V());
                    }
                    (s, vv)
                }
                Err(_) => (vec![1.0; d], Mat::identity(d, d)),
            }
        };
        let basis = &q * &v;
        let y_only: Vec<usize> = (0..d).filter(|&k| sigma[k] <= SPLIT_TOL).collect();
        let flat: Vec<usize> = (0..d).filter(|&k| sigma[k] > SPLIT_TOL).collect();
        // Dependent rows: Gauss–Jordan on the y parts (equilibrated), pivots from the end.
        let dy = y_only.len();
        let mut yv = Mat::<f64>::from_fn(m, dy, |i, k| basis[(n + i, y_only[k])]);
        let mut dropped = Vec::with_capacity(dy);
        let mut pairs = Vec::with_capacity(dy);
        for k in 0..dy {
            let mx = (0..m)
                .filter(|i| !dropped.contains(i))
                .fold(0.0f64, |a, i| a.max(yv[(i, k)].abs()));
            if mx == 0.0 {
                continue;
            }
            let Some(p) = (0..m)
                .rev()
                .find(|i| !dropped.contains(i) && yv[(*i, k)].abs() >= PIVOT_THRESHOLD * mx)
            else {
                continue;
            };
            let piv = yv[(p, k)];
            yv.col_mut(k).iter_mut().for_each(|x| *x /= piv);
            for j in 0..dy {
                if j != k {
                    let f = yv[(p, j)];
                    if f != 0.0 {
                        for i in 0..m {
                            let t = yv[(i, k)];
                            yv[(i, j)] -= f * t;
                        }
                    }
                }
            }
            dropped.push(p);
            pairs.push((k, p));
        }
        // Back to the original scale: v = D_y ṽ, renormalized to 1 at the dropped row.
        let mut combos = Mat::<f64>::zeros(m, dropped.len());
        for (c, &(k, p)) in pairs.iter().enumerate() {
            let dp = scale[n + p];
            let mx = (0..m).fold(0.0f64, |a, i| a.max(yv[(i, k)].abs()));
            for i in 0..m {
                // Entries at rounding level are not part of the dependence.
                let v = yv[(i, k)];
                combos[(i, c)] = if v.abs() <= 1e-12 * mx {
                    0.0
                } else {
                    v * scale[n + i] / dp
                };
            }
            combos[(p, c)] = 1.0;
            for &o in &dropped {
                if o != p {
                    combos[(o, c)] = 0.0;
                }
            }
        }
        let mut flats = Mat::<f64>::zeros(dim, flat.len());
        for (c, &k) in flat.iter().enumerate() {
            for i in 0..dim {
                flats[(i, c)] = basis[(i, k)] * scale[i];
            }
        }
        out.dropped = dropped;
        out.combos = combos;
        out.flats = flats;
        out
    }

    /// Rows dropped as dependent (0-based), one per combination.
    pub fn dropped_rows(&self) -> &[usize] {
        &self.dropped
    }

    /// Sets the multipliers of the dropped rows to zero in each column of `z` (order
    /// `n + m`, original scale) by adding null vectors `[0; v]`: the result still solves the
    /// consistent system.
    pub fn project(&self, mut z: MatMut<'_, f64>) {
        let n = self.n;
        for j in 0..z.ncols() {
            for (c, &p) in self.dropped.iter().enumerate() {
                let a = z[(n + p, j)];
                if a != 0.0 {
                    for i in 0..self.m {
                        let v = self.combos[(i, c)];
                        if v != 0.0 {
                            z[(n + i, j)] -= a * v;
                        }
                    }
                }
            }
        }
    }

    /// Checks `(c, b)` against the null space: the verdict and notes, or the
    /// infeasibility / unboundedness diagnosis.
    #[allow(clippy::needless_range_loop)] // c, b and the basis columns indexed together
    pub fn findings(&self, problem: &Problem, c: &[f64], b: &[f64]) -> Result<SingularFindings> {
        let _ = problem;
        let (n, m) = (self.n, self.m);
        let tol = DEFAULT_CONSISTENCY_TOLERANCE;
        let mut out = SingularFindings::default();
        // Dependent rows: b must agree with each combination.
        let mut worst: Option<(usize, f64)> = None;
        let mut described = Vec::new();
        for (k, &p) in self.dropped.iter().enumerate() {
            let (mut gap, mut size) = (0.0, 0.0);
            for i in 0..m {
                let v = self.combos[(i, k)];
                gap += v * b[i];
                size += (v * b[i]).abs();
            }
            let floor = tol * (size + f64::MIN_POSITIVE);
            if described.len() < 5 {
                described.push(format!(
                    "{} (b agrees to {:.1e})",
                    self.combination_words(k, p),
                    gap.abs()
                ));
            }
            if gap.abs() > floor && worst.is_none_or(|(_, g)| gap.abs() > g) {
                worst = Some((k, gap.abs()));
            }
        }
        if let Some((k, gap)) = worst {
            let p = self.dropped[k];
            let mut rows = vec![p];
            rows.extend((0..m).filter(|&i| i != p && self.combos[(i, k)] != 0.0));
            return Err(Error::Infeasible {
                rows,
                gap,
                detail: format!(
                    "{}, but b[{p}] differs from that combination of the other entries of b by {gap:.3e} \
                     (found with the sparse factors)",
                    self.combination_words(k, p)
                ),
            });
        }
        let dy = self.dropped.len();
        if dy > 0 {
            let more = if dy > described.len() {
                format!(" and {} more", dy - described.len())
            } else {
                String::new()
            };
            out.notes.push(format!(
                "A has rank {} < m = {m}: dropped {dy} redundant constraint row(s) (0-based, the later rows of \
                 each dependent set): {}{more}; their multipliers are set to 0",
                m - dy,
                described.join("; ")
            ));
        }
        // Flat directions: the right-hand side against each null vector with an x part.
        let df = self.flats.ncols();
        let kept = m - dy;
        if df == 0 {
            out.verdict = Some(if self.inertia.positive == n && self.inertia.negative == kept {
                Verdict::Minimizer
            } else {
                Verdict::Saddle
            });
            return Ok(out);
        }
        let mut g = vec![0.0; df];
        let mut scale = 0.0f64;
        for (k, gk) in g.iter_mut().enumerate() {
            let (mut s, mut size) = (0.0, 0.0);
            for i in 0..n {
                s -= c[i] * self.flats[(i, k)];
                size += (c[i] * self.flats[(i, k)]).abs();
            }
            for i in 0..m {
                s += b[i] * self.flats[(n + i, k)];
                size += (b[i] * self.flats[(n + i, k)]).abs();
            }
            *gk = s;
            scale = scale.max(size);
        }
        let gnorm = g.iter().map(|v| v * v).sum::<f64>().sqrt();
        if gnorm > tol * (scale + f64::MIN_POSITIVE) {
            let mut dir = vec![0.0; n];
            for (k, gk) in g.iter().enumerate() {
                for (i, di) in dir.iter_mut().enumerate() {
                    *di += gk * self.flats[(i, k)];
                }
            }
            let dn = dir.iter().map(|v| v * v).sum::<f64>().sqrt();
            dir.iter_mut().for_each(|v| *v /= dn);
            let slope = -g.iter().map(|v| v * v).sum::<f64>() / dn;
            return Err(Error::Unbounded {
                direction: dir,
                slope,
                detail: format!(
                    "K has {df} null vector(s) with a nonzero x part (Au = 0 and uᵀHu = 0: the objective has no \
                     curvature along u) and the gradient is not orthogonal to them: along the feasible direction d \
                     returned with this error the objective decreases by {:.3e} per unit step, without bound \
                     (found with the sparse factors)",
                    -slope
                ),
            });
        }
        let mut dir: Vec<f64> = (0..n).map(|i| self.flats[(i, 0)]).collect();
        let dn = dir.iter().map(|v| v * v).sum::<f64>().sqrt();
        if dn > 0.0 {
            dir.iter_mut().for_each(|v| *v /= dn);
        }
        out.null_direction = Some(dir);
        if self.inertia.negative == kept {
            out.verdict = Some(Verdict::NonUnique);
            out.notes.push(format!(
                "the reduced Hessian has {df} zero eigenvalue(s): x + t·d is a minimizer for every t \
                 (d = Solution::null_direction); the x returned is one of them (not the one of minimum norm)"
            ));
        } else {
            out.verdict = Some(Verdict::Saddle);
            out.notes.push(format!(
                "the reduced Hessian has {} negative and {df} zero eigenvalue(s): a stationary point, not a minimizer",
                self.inertia.negative.saturating_sub(kept)
            ));
        }
        Ok(out)
    }

    fn combination_words(&self, k: usize, p: usize) -> String {
        const SHOWN: usize = 6;
        let terms: Vec<(usize, f64)> = (0..self.m)
            .filter(|&i| i != p && self.combos[(i, k)] != 0.0)
            .map(|i| (i, -self.combos[(i, k)]))
            .collect();
        let mut s: Vec<String> = terms
            .iter()
            .take(SHOWN)
            .map(|(i, v)| format!("{v:+.6}·row {i}"))
            .collect();
        if terms.len() > SHOWN {
            s.push(format!("… ({} terms)", terms.len()));
        }
        if s.is_empty() {
            format!("row {p} of A is zero")
        } else {
            format!("row {p} = {}", s.join(" "))
        }
    }
}
