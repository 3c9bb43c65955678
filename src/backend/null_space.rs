//! Null-space method (dense): rank-revealing QR of `Aᵀ`, a particular solution of
//! `Ax = b`, an orthonormal basis `Z` of `null(A)` and the reduced Hessian `ZᵀHZ`.
//!
//! With `Aᵀ P = Q R` from [`RankAnalysis`] (rank `r`, `Q = [Y Z]`):
//!
//! 1. `x = Y x_Y + Z x_Z` with `R₁₁ᵀ x_Y = (Pᵀb)₁..r` (the dependent rows are dropped);
//! 2. `(ZᵀHZ) x_Z = −Zᵀ(H Y x_Y + c)`: Cholesky of `ZᵀHZ` when it is positive definite
//!    (this certifies a strict minimizer), otherwise its symmetric eigendecomposition,
//!    which gives its inertia and a pseudo-inverse (minimum-norm `x_Z` when it is singular);
//! 3. multipliers from the least-squares system `Aᵀy = −(Hx + c)` with the same QR:
//!    `[R₁₁ R₁₂] (Pᵀy) = −Yᵀ(Hx + c)`, minimum-norm when rows were dropped.
//!
//! Inertia of K: `In(K) = In(ZᵀHZ) + (r, r, m − r)` (Gould 1985, "On practical conditions
//! for the existence and uniqueness of solutions to the general equality quadratic
//! programming problem", Math. Programming 32; for `r = m` this is the classical
//! `In(K) = In(ZᵀHZ) + (m, m, 0)`).
//!
//! Cost: QR of `Aᵀ` about `2nm² − 2m³/3` flops, `Z` about `4nm(n − m)`, `ZᵀHZ` about
//! `2n²(n − m) + n(n − m)²`, the reduced factorization `(n − m)³/3`: cheap when `n − m` is
//! small. This backend also solves singular K (redundant constraints, singular `ZᵀHZ`), see
//! [`KktBackend::singular_findings`]; the pipeline switches to it whenever another backend
//! finds K singular.

use faer::dyn_stack::{MemStack, StackReq};
use faer::linalg::triangular_solve;
use faer::{Mat, MatMut, Par, Side};

use crate::backend::{KktBackend, SingularFindings};
use crate::diagnostics::rank::{RankAnalysis, DEFAULT_CONSISTENCY_TOLERANCE, DEFAULT_RANK_TOLERANCE_FACTOR};
use crate::error::{Error, Result};
use crate::problem::norm2;
use crate::problem::{Matrix, Problem};
use crate::solution::{Inertia, MethodUsed, Verdict};

/// Settings of the null-space backend.
#[derive(Copy, Clone, Debug)]
pub struct NullSpaceParams {
    /// Factor of the rank tolerance of [`RankAnalysis`]. Default:
    /// [`DEFAULT_RANK_TOLERANCE_FACTOR`].
    pub rank_tolerance_factor: f64,
    /// Relative tolerance of the consistency checks (of `b` on dependent rows, of the
    /// gradient on null directions of `ZᵀHZ`). Default: [`DEFAULT_CONSISTENCY_TOLERANCE`].
    pub consistency_tolerance: f64,
    /// An eigenvalue of `ZᵀHZ` with `|λ| ≤ factor · n · ε · ‖H‖∞` counts as zero (and a
    /// Cholesky pivot `L_ii² ≤` the same bound refuses the Cholesky certificate).
    /// Default: 10.
    pub zero_eigenvalue_factor: f64,
    /// Parallelism of the dense kernels. Default: all threads.
    pub par: Par,
}

impl Default for NullSpaceParams {
    fn default() -> Self {
        NullSpaceParams {
            rank_tolerance_factor: DEFAULT_RANK_TOLERANCE_FACTOR,
            consistency_tolerance: DEFAULT_CONSISTENCY_TOLERANCE,
            zero_eigenvalue_factor: 10.0,
            par: Par::rayon(0),
        }
    }
}

#[derive(Clone, Debug)]
enum Reduced {
    /// Lower Cholesky factor of `ZᵀHZ`.
    Cholesky(Mat<f64>),
    /// `ZᵀHZ = U diag(s) Uᵀ`, eigenvalues `|s| ≤ tol` treated as zero.
    Eigen { u: Mat<f64>, s: Vec<f64>, tol: f64 },
}

/// The null-space factorization of one KKT matrix.
#[derive(Clone, Debug)]
pub struct NullSpace {
    params: NullSpaceParams,
    n: usize,
    m: usize,
    h: Matrix,
    h_norm: f64,
    rank: RankAnalysis,
    z: Mat<f64>,
    reduced: Reduced,
    /// Lower Cholesky factor of `I + CᵀC` (minimum-norm multipliers), when rows are dropped.
    min_norm: Option<Mat<f64>>,
    inertia: Inertia,
    notes: Vec<String>,
}

impl NullSpace {
    /// Allocates for a problem of this size (no numeric work until [`factor`](KktBackend::factor)).
    pub fn new(problem: &Problem, params: NullSpaceParams) -> Self {
        let (n, m) = (problem.n(), problem.m());
        NullSpace {
            params,
            n,
            m,
            h: problem.hessian().clone(),
            h_norm: 0.0,
            rank: RankAnalysis::new(Mat::<f64>::zeros(0, n).as_ref(), 1.0),
            z: Mat::zeros(n, 0),
            reduced: Reduced::Cholesky(Mat::zeros(0, 0)),
            min_norm: None,
            inertia: Inertia::default(),
            notes: Vec::new(),
        }
    }

    /// Adds a remark reported with every solution (for example why this backend is used).
    pub fn with_note(mut self, note: String) -> Self {
        self.notes.push(note);
        self
    }

    /// The rank analysis of `A` from the last factorization.
    pub fn rank_analysis(&self) -> &RankAnalysis {
        &self.rank
    }

    /// Inertia `(p, q, z)` of the reduced Hessian `ZᵀHZ`.
    pub fn reduced_inertia(&self) -> Inertia {
        let r = self.rank.rank();
        Inertia::new(
            self.inertia.positive - r,
            self.inertia.negative - r,
            self.inertia.zero - (self.m - r),
        )
    }

    fn zero_tol(&self) -> f64 {
        self.params.zero_eigenvalue_factor * (self.n.max(1) as f64) * f64::EPSILON * self.h_norm
    }

    /// `x_Y` from `b` and the particular solution `x_p = Y x_Y` (length n).
    fn particular(&self, b: &[f64]) -> Vec<f64> {
        let r = self.rank.rank();
        let order = self.rank.order();
        let mut xy = Mat::zeros(self.n, 1);
        for i in 0..r {
            xy[(i, 0)] = b[order[i]];
        }
        if r > 0 {
            let r11 = self.rank.r().get(..r, ..r);
            triangular_solve::solve_lower_triangular_in_place(r11.transpose(), xy.as_mut().get_mut(..r, ..), Par::Seq);
        }
        self.rank.apply_q(xy.as_mut(), Par::Seq);
        (0..self.n).map(|i| xy[(i, 0)]).collect()
    }

    /// Applies the (pseudo-)inverse of `ZᵀHZ` to `t` in place.
    fn reduced_solve(&self, t: &mut Mat<f64>) {
        match &self.reduced {
            Reduced::Cholesky(l) => {
                if l.nrows() > 0 {
                    triangular_solve::solve_lower_triangular_in_place(l.as_ref(), t.as_mut(), Par::Seq);
                    triangular_solve::solve_upper_triangular_in_place(l.transpose(), t.as_mut(), Par::Seq);
                }
            }
            Reduced::Eigen { u, s, tol } => {
                let mut w = u.transpose() * &*t;
                for (i, si) in s.iter().enumerate() {
                    let f = if si.abs() > *tol { 1.0 / si } else { 0.0 };
                    for j in 0..w.ncols() {
                        w[(i, j)] *= f;
                    }
                }
                *t = u * &w;
            }
        }
    }

    fn solve_column(&self, f: &[f64], g: &[f64], x_out: &mut [f64], y_out: &mut [f64]) {
        let (n, r) = (self.n, self.rank.rank());
        let nz = self.z.ncols();
        // 1-2. x = Y x_Y, then t = Zᵀ(f − Hx), x_Z = M⁺ t, x += Z x_Z.
        let mut x = self.particular(g);
        let mut t = f.to_vec();
        neg_mul_add(&self.h, &x, &mut t);
        if nz > 0 {
            let tm = Mat::from_fn(n, 1, |i, _| t[i]);
            let mut xz = self.z.transpose() * &tm;
            self.reduced_solve(&mut xz);
            let zx = &self.z * &xz;
            for i in 0..n {
                x[i] += zx[(i, 0)];
            }
        }
        // 3. multipliers: [R11 R12] w = Yᵀ(f − Hx), minimum norm.
        let mut t = f.to_vec();
        neg_mul_add(&self.h, &x, &mut t);
        let mut w = Mat::from_fn(n, 1, |i, _| t[i]);
        self.rank.apply_qt(w.as_mut(), Par::Seq);
        let mut u = w.get(..r, ..).to_owned();
        if r > 0 {
            triangular_solve::solve_upper_triangular_in_place(self.rank.r().get(..r, ..r), u.as_mut(), Par::Seq);
        }
        let order = self.rank.order();
        y_out.iter_mut().for_each(|v| *v = 0.0);
        if let Some(l) = &self.min_norm {
            let c = self.rank.combination();
            let mut w2 = c.transpose() * &u;
            triangular_solve::solve_lower_triangular_in_place(l.as_ref(), w2.as_mut(), Par::Seq);
            triangular_solve::solve_upper_triangular_in_place(l.transpose(), w2.as_mut(), Par::Seq);
            let cw = c * &w2;
            for i in 0..r {
                u[(i, 0)] -= cw[(i, 0)];
            }
            for k in 0..w2.nrows() {
                y_out[order[r + k]] = w2[(k, 0)];
            }
        }
        for i in 0..r {
            y_out[order[i]] = u[(i, 0)];
        }
        x_out.copy_from_slice(&x);
    }
}

/// `y ← y − H x`.
fn neg_mul_add(h: &Matrix, x: &[f64], y: &mut [f64]) {
    let neg: Vec<f64> = x.iter().map(|v| -v).collect();
    h.mul_add(&neg, y);
}

impl KktBackend for NullSpace {
    fn method(&self) -> MethodUsed {
        MethodUsed::NullSpace
    }

    fn dim(&self) -> usize {
        self.n + self.m
    }

    fn factor(&mut self, problem: &Problem) -> Result<()> {
        let (n, m) = (self.n, self.m);
        let par = self.params.par;
        self.h = problem.hessian().clone();
        let mut rows = vec![0.0f64; n];
        self.h.for_each(|i, _, v| rows[i] += v.abs());
        self.h_norm = rows.into_iter().fold(0.0, f64::max);
        let a = problem.constraints().to_dense();
        self.rank = RankAnalysis::new(a.as_ref(), self.params.rank_tolerance_factor);
        let r = self.rank.rank();
        self.z = self.rank.null_basis(par);
        let nz = n - r;
        // Reduced Hessian M = Zᵀ H Z.
        let hz = match &self.h {
            Matrix::Dense(h) => {
                let mut hz = Mat::zeros(n, nz);
                faer::linalg::matmul::matmul(hz.as_mut(), faer::Accum::Replace, h.as_ref(), self.z.as_ref(), 1.0, par);
                hz
            }
            Matrix::Sparse(h) => h * &self.z,
        };
        let mut mred = Mat::zeros(nz, nz);
        faer::linalg::matmul::matmul(
            mred.as_mut(),
            faer::Accum::Replace,
            self.z.transpose(),
            hz.as_ref(),
            1.0,
            par,
        );
        let msym = Mat::from_fn(nz, nz, |i, j| 0.5 * (mred[(i, j)] + mred[(j, i)]));
        let tol = self.zero_tol();
        let chol = msym
            .llt(Side::Lower)
            .ok()
            .map(|f| f.L().to_owned())
            .filter(|l| (0..nz).all(|i| l[(i, i)] * l[(i, i)] > tol));
        let red_inertia;
        self.reduced = match chol {
            Some(l) => {
                red_inertia = Inertia::new(nz, 0, 0);
                Reduced::Cholesky(l)
            }
            None => {
                let evd = msym.self_adjoint_eigen(Side::Lower).map_err(|e| Error::Singular {
                    inertia: Inertia::default(),
                    detail: format!("the eigendecomposition of the reduced Hessian failed: {e:?}"),
                })?;
                let s: Vec<f64> = (0..nz).map(|i| evd.S()[i]).collect();
                let mut ri = Inertia::default();
                for v in &s {
                    if v.abs() <= tol {
                        ri.zero += 1;
                    } else if *v > 0.0 {
                        ri.positive += 1;
                    } else {
                        ri.negative += 1;
                    }
                }
                red_inertia = ri;
                Reduced::Eigen {
                    u: evd.U().to_owned(),
                    s,
                    tol,
                }
            }
        };
        self.inertia = Inertia::new(
            red_inertia.positive + r,
            red_inertia.negative + r,
            red_inertia.zero + (m - r),
        );
        // Minimum-norm multipliers when rows are dropped: Cholesky of I + CᵀC.
        self.min_norm = if r < m {
            let c = self.rank.combination();
            let mut g = c.transpose() * c;
            for i in 0..g.nrows() {
                g[(i, i)] += 1.0;
            }
            Some(
                g.llt(Side::Lower)
                    .map_err(|e| Error::Singular {
                        inertia: self.inertia,
                        detail: format!("I + CᵀC is not positive definite ({e:?}); the rank analysis broke down"),
                    })?
                    .L()
                    .to_owned(),
            )
        } else {
            None
        };
        Ok(())
    }

    fn inertia(&self) -> Option<Inertia> {
        Some(self.inertia)
    }

    fn solve_scratch(&self, _nrhs: usize) -> StackReq {
        StackReq::EMPTY
    }

    fn solve_in_place(&self, mut rhs: MatMut<'_, f64>, _stack: &mut MemStack) {
        let (n, m) = (self.n, self.m);
        let (mut x, mut y) = (vec![0.0; n], vec![0.0; m]);
        for j in 0..rhs.ncols() {
            let f: Vec<f64> = (0..n).map(|i| rhs[(i, j)]).collect();
            let g: Vec<f64> = (0..m).map(|i| rhs[(n + i, j)]).collect();
            self.solve_column(&f, &g, &mut x, &mut y);
            for i in 0..n {
                rhs[(i, j)] = x[i];
            }
            for i in 0..m {
                rhs[(n + i, j)] = y[i];
            }
        }
    }

    fn notes(&self) -> &[String] {
        &self.notes
    }

    fn singular_findings(&self, problem: &Problem, c: &[f64], b: &[f64]) -> Option<Result<SingularFindings>> {
        Some(self.findings(problem, c, b))
    }
}

impl NullSpace {
    fn findings(&self, _problem: &Problem, c: &[f64], b: &[f64]) -> Result<SingularFindings> {
        let tol = self.params.consistency_tolerance;
        let mut out = SingularFindings::default();
        let checks = self.rank.check_rhs(b, tol)?;
        if !checks.is_empty() {
            const SHOWN: usize = 5;
            let listed: Vec<String> = checks
                .iter()
                .take(SHOWN)
                .map(|ch| format!("{} (b agrees to {:.1e})", ch.dependency, ch.gap.abs()))
                .collect();
            let more = if checks.len() > SHOWN {
                format!(" and {} more", checks.len() - SHOWN)
            } else {
                String::new()
            };
            out.notes.push(format!(
                "A has rank {} < m = {}: dropped {} redundant constraint row(s) (0-based): {}{more}; \
                 the multipliers are the minimum-norm ones",
                self.rank.rank(),
                self.m,
                checks.len(),
                listed.join("; ")
            ));
        }
        let red = self.reduced_inertia();
        if red.zero == 0 {
            out.verdict = Some(if red.negative == 0 {
                Verdict::Minimizer
            } else {
                Verdict::Saddle
            });
            return Ok(out);
        }
        let Reduced::Eigen { u, s, tol: ztol } = &self.reduced else {
            unreachable!("a zero eigenvalue implies the eigendecomposition path");
        };
        // Reduced gradient at the particular point: g_Z = Zᵀ(H x_p + c).
        let xp = self.particular(b);
        let mut grad = c.to_vec();
        self.h.mul_add(&xp, &mut grad);
        let gm = Mat::from_fn(self.n, 1, |i, _| grad[i]);
        let gz = self.z.transpose() * &gm;
        let null_idx: Vec<usize> = (0..s.len()).filter(|&i| s[i].abs() <= *ztol).collect();
        let p: Vec<f64> = null_idx
            .iter()
            .map(|&k| (0..gz.nrows()).map(|i| u[(i, k)] * gz[(i, 0)]).sum())
            .collect();
        let pnorm = norm2(&p);
        let xp_max = xp.iter().fold(0.0f64, |a, v| a.max(v.abs()));
        let scale = c.iter().fold(0.0f64, |a, v| a.max(v.abs())) + self.h_norm * xp_max;
        if pnorm > tol * scale.max(f64::MIN_POSITIVE) {
            // d = −Z U₀ p / ‖p‖: Ad = 0, dᵀHd = 0, (Hx + c)ᵀd = −‖p‖.
            let v = Mat::from_fn(u.nrows(), 1, |i, _| {
                -null_idx.iter().zip(&p).map(|(&k, pk)| u[(i, k)] * pk).sum::<f64>() / pnorm
            });
            let d = &self.z * &v;
            return Err(Error::Unbounded {
                direction: (0..self.n).map(|i| d[(i, 0)]).collect(),
                slope: -pnorm,
                detail: format!(
                    "the reduced Hessian ZᵀHZ has {} zero eigenvalue(s) (|λ| ≤ {ztol:.1e}) and the gradient has a \
                     component of size {pnorm:.3e} along them: along the feasible direction d returned with this \
                     error (Ad = 0, dᵀHd = 0) the objective decreases by {pnorm:.3e} per unit step, without bound",
                    red.zero
                ),
            });
        }
        let v = Mat::from_fn(u.nrows(), 1, |i, _| u[(i, null_idx[0])]);
        let d = &self.z * &v;
        out.null_direction = Some((0..self.n).map(|i| d[(i, 0)]).collect());
        if red.negative == 0 {
            out.verdict = Some(Verdict::NonUnique);
            out.notes.push(format!(
                "the reduced Hessian ZᵀHZ has {} zero eigenvalue(s): x + t·d is a minimizer for every t \
                 (d = Solution::null_direction); the x returned is the minimizer of minimum norm",
                red.zero
            ));
        } else {
            out.verdict = Some(Verdict::Saddle);
            out.notes.push(format!(
                "the reduced Hessian ZᵀHZ has {} negative and {} zero eigenvalue(s): a stationary point, not a \
                 minimizer (the one of minimum norm is returned)",
                red.negative, red.zero
            ));
        }
        Ok(out)
    }
}
