//! Range-space (Schur-complement) method for convex problems: Cholesky of `H`, the Schur
//! complement `S = A H⁻¹ Aᵀ` formed with blocked triangular solves, Cholesky of `S`.
//!
//! With `H = LLᵀ` and `W = L⁻¹Aᵀ` (n×m), `S = WᵀW = L_S L_Sᵀ`; a right-hand side
//! `[f; g]` is solved by `u = L⁻¹f`, `S y = Wᵀu − g`, `x = L⁻ᵀ(u − W y)`.
//! Both Cholesky factorizations succeeding proves `H ≻ 0` and `S ≻ 0`, hence inertia
//! `(n, m, 0)` by Sylvester's law (`K` is congruent to `diag(H, −S)`), so the verdict
//! `Minimizer` is certified for free.
//!
//! Cost: `n³/3` (Cholesky of H) + `n²m` (triangular solve) + `nm²` (lower half of `WᵀW`)
//! + `m³/3` (Cholesky of S) flops, all in level-3 kernels (see [`flops`]).
//!
//! **Fallback.** If a Cholesky factorization fails (a pivot `≤ 0`, or `L_ii² ≤ factor ·
//! n · ε · max_i H_ii`, i.e. `H` not numerically positive definite; likewise for `S`), or
//! if a probe solve on the original K (a fixed right-hand side `K·z₀`, refined up to three
//! times) leaves a backward error above [`SchurParams::probe_backward_error`] (an
//! ill-conditioned `H` makes `S` inaccurate), the backend hands over to the method the
//! cost model of [`crate::backend::auto`] picks among dense LBLᵀ and null-space, and says
//! so in its notes; [`method`](KktBackend::method) then reports the method actually used.

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::llt::factor::{self as llt, LltRegularization};
use faer::linalg::matmul::triangular::{self as tri, BlockStructure};
use faer::linalg::triangular_solve;
use faer::{Accum, Mat, MatMut, Par};

use crate::backend::{auto, KktBackend, SingularFindings};
use crate::error::Result;
use crate::kkt;
use crate::problem::{Matrix, Problem};
use crate::solution::{Inertia, MethodUsed};
use crate::solver::Options;

/// Settings of the Schur-complement backend.
#[derive(Copy, Clone, Debug)]
pub struct SchurParams {
    /// A Cholesky pivot with `L_ii² ≤ factor · n · ε · max_i M_ii` (M = H or S) counts as a
    /// failure. Default: 10.
    pub pivot_factor: f64,
    /// Fall back when the probe solve's backward error after refinement exceeds this.
    /// Default: `1e-12` (a healthy solve reaches about `1e-16`).
    pub probe_backward_error: f64,
    /// Parallelism of the dense kernels. Default: all threads.
    pub par: Par,
}

impl Default for SchurParams {
    fn default() -> Self {
        SchurParams {
            pivot_factor: 10.0,
            probe_backward_error: 1e-12,
            par: Par::rayon(0),
        }
    }
}

/// Flops of the Schur-complement factorization: `n³/3 + n²m + nm² + m³/3`.
///
/// ```
/// assert_eq!(tangency::backend::schur::flops(3, 0), 9.0);
/// ```
pub fn flops(n: usize, m: usize) -> f64 {
    let (n, m) = (n as f64, m as f64);
    n * n * n / 3.0 + n * n * m + n * m * m + m * m * m / 3.0
}

/// The Schur-complement factorization of one KKT matrix (or its fallback).
#[derive(Debug)]
pub struct Schur {
    params: SchurParams,
    options: Options,
    n: usize,
    m: usize,
    l: Mat<f64>,
    w: Mat<f64>,
    ls: Mat<f64>,
    fallback: Option<Box<dyn KktBackend>>,
    notes: Vec<String>,
}

impl Schur {
    /// Allocates for a problem of this size; `options` configures the fallback backends.
    pub fn new(problem: &Problem, options: &Options) -> Self {
        let (n, m) = (problem.n(), problem.m());
        Schur {
            params: options.schur,
            options: *options,
            n,
            m,
            l: Mat::zeros(n, n),
            w: Mat::zeros(n, m),
            ls: Mat::zeros(m, m),
            fallback: None,
            notes: Vec::new(),
        }
    }

    /// Whether the last factorization fell back to another method.
    pub fn fell_back(&self) -> bool {
        self.fallback.is_some()
    }

    /// Cholesky in place (lower), with the pivot check; `Err(reason)` on failure.
    fn cholesky(&self, mut a: MatMut<'_, f64>, what: &str) -> std::result::Result<(), String> {
        let dim = a.nrows();
        if dim == 0 {
            return Ok(());
        }
        let dmax = (0..dim).fold(0.0f64, |acc, i| acc.max(a[(i, i)]));
        if let Some(i) = (0..dim).find(|&i| a[(i, i)].partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)) {
            return Err(format!(
                "{what} has a non-positive diagonal entry at {i} (value {:e})",
                a[(i, i)]
            ));
        }
        let mut buf = MemBuffer::new(llt::cholesky_in_place_scratch::<f64>(
            dim,
            self.params.par,
            Default::default(),
        ));
        llt::cholesky_in_place(
            a.as_mut(),
            LltRegularization::default(),
            self.params.par,
            MemStack::new(&mut buf),
            Default::default(),
        )
        .map_err(|e| match e {
            llt::LltError::NonPositivePivot { index } => {
                format!("{what} is not positive definite (Cholesky pivot {index} is not positive)")
            }
        })?;
        let tol = self.params.pivot_factor * dim as f64 * f64::EPSILON * dmax;
        if let Some(i) =
            (0..dim).find(|&i| (a[(i, i)] * a[(i, i)]).partial_cmp(&tol) != Some(std::cmp::Ordering::Greater))
        {
            return Err(format!(
                "{what} is numerically singular (Cholesky pivot {i}: {:.2e} ≤ {tol:.1e})",
                a[(i, i)] * a[(i, i)]
            ));
        }
        Ok(())
    }

    fn try_factor(&mut self, problem: &Problem) -> std::result::Result<(), String> {
        let (n, m) = (self.n, self.m);
        let par = self.params.par;
        if m > n {
            return Err(format!("m = {m} > n = {n}: A H⁻¹ Aᵀ is singular"));
        }
        if self.l.nrows() != n || self.w.ncols() != m || self.ls.nrows() != m {
            self.l = Mat::zeros(n, n);
            self.w = Mat::zeros(n, m);
            self.ls = Mat::zeros(m, m);
        }
        match problem.hessian() {
            // Dense storage: copy the lower triangle column by column (the upper one is never read).
            Matrix::Dense(h) => {
                for j in 0..n {
                    self.l
                        .col_mut(j)
                        .subrows_mut(j, n - j)
                        .copy_from(h.col(j).subrows(j, n - j));
                }
            }
            Matrix::Sparse(_) => {
                self.l.fill(0.0);
                problem.hessian().for_each(|i, j, v| {
                    if i >= j {
                        self.l[(i, j)] = v
                    }
                });
            }
        }
        let mut l = std::mem::replace(&mut self.l, Mat::zeros(0, 0));
        let res = self.cholesky(l.as_mut(), "H");
        self.l = l;
        res?;
        match problem.constraints() {
            Matrix::Dense(a) => self.w.copy_from(a.transpose()),
            Matrix::Sparse(_) => {
                self.w.fill(0.0);
                problem.constraints().for_each(|i, j, v| self.w[(j, i)] = v);
            }
        }
        triangular_solve::solve_lower_triangular_in_place(self.l.as_ref(), self.w.as_mut(), par);
        tri::matmul(
            self.ls.as_mut(),
            BlockStructure::TriangularLower,
            Accum::Replace,
            self.w.transpose(),
            BlockStructure::Rectangular,
            self.w.as_ref(),
            BlockStructure::Rectangular,
            1.0,
            par,
        );
        let mut ls = std::mem::replace(&mut self.ls, Mat::zeros(0, 0));
        let res = self.cholesky(ls.as_mut(), "the Schur complement A H⁻¹ Aᵀ");
        self.ls = ls;
        res.map_err(|e| format!("{e}: A is (numerically) rank-deficient"))?;
        self.probe(problem)
    }

    /// Solves `K z = K z₀` for a fixed `z₀`, refining up to three times on the original K.
    fn probe(&self, problem: &Problem) -> std::result::Result<(), String> {
        let dim = self.n + self.m;
        if dim == 0 {
            return Ok(());
        }
        let z0: Vec<f64> = (0..dim).map(|i| 1.0 + ((i * 7919) % 13) as f64 / 13.0).collect();
        let zeros = vec![0.0; dim];
        let mut rhs = vec![0.0; dim];
        // rhs = K z0 = −(0 − K z0)
        kkt::residual(problem, &z0, &zeros, &mut rhs);
        rhs.iter_mut().for_each(|v| *v = -*v);
        let norm_k = kkt::norm_inf(problem);
        let mut z = vec![0.0; dim];
        let mut r = rhs.clone();
        let mut omega = f64::INFINITY;
        for _ in 0..4 {
            let mut col = Mat::from_fn(dim, 1, |i, _| r[i]);
            self.solve_own(col.as_mut());
            for i in 0..dim {
                z[i] += col[(i, 0)];
            }
            kkt::residual(problem, &z, &rhs, &mut r);
            omega = crate::solver::normwise(&r, norm_k, &z, &rhs);
            // Accept as soon as the probe meets the bar: the solves proper refine further.
            if omega <= self.params.probe_backward_error {
                break;
            }
        }
        if omega > self.params.probe_backward_error {
            return Err(format!(
                "a probe solve on K kept a backward error of {omega:.1e} after refinement \
                 (> {:.0e}): H or A H⁻¹ Aᵀ is too ill-conditioned for this method",
                self.params.probe_backward_error
            ));
        }
        Ok(())
    }

    fn solve_own(&self, mut rhs: MatMut<'_, f64>) {
        let (n, m) = (self.n, self.m);
        let (mut top, mut bot) = rhs.as_mut().split_at_row_mut(n);
        // u = L⁻¹ f
        triangular_solve::solve_lower_triangular_in_place(self.l.as_ref(), top.as_mut(), Par::Seq);
        if m > 0 {
            // y = S⁻¹ (Wᵀu − g)
            let mut t = self.w.transpose() * top.as_ref();
            for j in 0..t.ncols() {
                for i in 0..m {
                    t[(i, j)] -= bot[(i, j)];
                }
            }
            triangular_solve::solve_lower_triangular_in_place(self.ls.as_ref(), t.as_mut(), Par::Seq);
            triangular_solve::solve_upper_triangular_in_place(self.ls.transpose(), t.as_mut(), Par::Seq);
            // u − W y
            faer::linalg::matmul::matmul(top.as_mut(), Accum::Add, self.w.as_ref(), t.as_ref(), -1.0, Par::Seq);
            bot.copy_from(&t);
        }
        triangular_solve::solve_upper_triangular_in_place(self.l.transpose(), top.as_mut(), Par::Seq);
    }
}

impl KktBackend for Schur {
    fn method(&self) -> MethodUsed {
        match &self.fallback {
            Some(f) => f.method(),
            None => MethodUsed::Schur,
        }
    }

    fn dim(&self) -> usize {
        self.n + self.m
    }

    fn factor(&mut self, problem: &Problem) -> Result<()> {
        self.notes.clear();
        self.fallback = None;
        if let Err(reason) = self.try_factor(problem) {
            let (method, _) = auto::choose_without_schur(problem);
            let mut fb = auto::make_backend(method, problem, &self.options);
            fb.factor(problem)?;
            self.notes.push(format!(
                "Schur-complement method refused: {reason}; fell back to {method}"
            ));
            self.notes.extend(fb.notes().iter().cloned());
            // Release the Schur storage while the fallback is in use.
            self.l = Mat::zeros(0, 0);
            self.w = Mat::zeros(0, 0);
            self.ls = Mat::zeros(0, 0);
            self.fallback = Some(fb);
        }
        Ok(())
    }

    fn inertia(&self) -> Option<Inertia> {
        match &self.fallback {
            Some(f) => f.inertia(),
            None => Some(Inertia::new(self.n, self.m, 0)),
        }
    }

    fn regularized_pivots(&self) -> usize {
        self.fallback.as_ref().map_or(0, |f| f.regularized_pivots())
    }

    fn solve_scratch(&self, nrhs: usize) -> StackReq {
        match &self.fallback {
            Some(f) => f.solve_scratch(nrhs),
            None => StackReq::EMPTY,
        }
    }

    fn solve_in_place(&self, rhs: MatMut<'_, f64>, stack: &mut MemStack) {
        match &self.fallback {
            Some(f) => f.solve_in_place(rhs, stack),
            None => self.solve_own(rhs),
        }
    }

    fn notes(&self) -> &[String] {
        &self.notes
    }

    fn singular_findings(&self, problem: &Problem, c: &[f64], b: &[f64]) -> Option<Result<SingularFindings>> {
        self.fallback.as_ref().and_then(|f| f.singular_findings(problem, c, b))
    }
}
