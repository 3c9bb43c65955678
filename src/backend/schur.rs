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
//! **Precision.** From `n ≥` [`MIXED_MIN_DIM`] the factors are computed in `f32` by default
//! ([`SchurPrecision`]): the kernels run at twice the `f64` rate, and the iterative
//! refinement on the original K (in `f64`, as for every backend) restores full accuracy in
//! two or three corrections when `κ(K)·ε_f32` is small. The probe below checks that it
//! does; if not, the factors are recomputed in `f64` (a note says so) before any other
//! fallback. The inertia certificate is the same: both `f32` Cholesky factorizations
//! succeeded with pivots above the `f32` threshold and the refined solves converge.
//!
//! **Fallback.** If a Cholesky factorization fails (a pivot `≤ 0`, or `L_ii² ≤ factor ·
//! n · ε · max_i H_ii`, i.e. `H` not numerically positive definite; likewise for `S`), or
//! if a probe solve on the original K (a fixed right-hand side `K·z₀`, refined up to three
//! times) leaves a backward error above [`SchurParams::probe_backward_error`] (an
//! ill-conditioned `H` makes `S` inaccurate), the backend refuses with
//! [`Error::NotApplicable`](crate::Error::NotApplicable) and the reason; the chooser
//! ([`crate::pipeline::choose`]) then takes the method its cost model picks among dense
//! LBLᵀ and null-space and says so in the notes, and the solution's `method` reports the
//! method actually used. The backend holds no other backend.

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::llt::factor::{self as llt, LltRegularization};
use faer::linalg::matmul::triangular::{self as tri, BlockStructure};
use faer::linalg::triangular_solve;
use faer::mat::AsMatMut;
use faer::{Accum, Mat, MatMut, Par};

use crate::backend::KktBackend;
use crate::error::Result;
use crate::problem::{Matrix, Problem};
use crate::solution::{Inertia, MethodUsed};

/// Precision of the Schur factors.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum SchurPrecision {
    /// Factors in `f64`.
    Double,
    /// Factors in `f32` (twice the kernel rate with half the memory traffic), with the
    /// caller's iterative refinement in `f64` on the original K restoring full accuracy:
    /// the mixed-precision scheme of LAPACK's `DSPOSV` (Buttari, Dongarra, Langou, Langou,
    /// Luszczek & Kurzak 2007, "Mixed precision iterative refinement techniques for the
    /// solution of dense linear systems", Int. J. High Perform. Comput. Appl. 21). If the
    /// `f32` factorization fails or the probe solve does not refine to
    /// [`SchurParams::probe_backward_error`] (K too ill-conditioned for `f32` factors, or
    /// entries outside the `f32` range), the backend refactors in `f64` before any other
    /// fallback, and says so in its notes.
    Mixed,
    /// [`Mixed`](SchurPrecision::Mixed) when `n ≥ MIXED_MIN_DIM`, else
    /// [`Double`](SchurPrecision::Double). The default.
    Auto,
}

pub use crate::backend::probe::PROBE_CONTRACTION;

/// Below this `n`, [`SchurPrecision::Auto`] factors in `f64`: the extra refinement steps
/// of mixed precision cost more than the faster kernels save. Measured with
/// `cargo run --release --example mixed_crossover` (convex dense problems, m = n/3, median
/// of 7 cold runs, 2 cores): n = 600 double 6.0 ms / mixed 6.7 ms, n = 900 19.0 / 13.7 ms,
/// n = 1500 56 / 42 ms.
pub const MIXED_MIN_DIM: usize = 1000;

/// Settings of the Schur-complement backend.
#[derive(Copy, Clone, Debug)]
pub struct SchurParams {
    /// A Cholesky pivot with `L_ii² ≤ factor · n · ε · max_i M_ii` (M = H or S, ε of the
    /// factor precision) counts as a failure. Default: 10.
    pub pivot_factor: f64,
    /// Fall back when the probe solve's backward error after refinement exceeds this.
    /// Default: `1e-12` (a healthy solve reaches about `1e-16`).
    pub probe_backward_error: f64,
    /// Parallelism of the dense kernels. Default: all threads.
    pub par: Par,
    /// Precision of the factors. Default: [`SchurPrecision::Auto`].
    pub precision: SchurPrecision,
}

impl Default for SchurParams {
    fn default() -> Self {
        SchurParams {
            pivot_factor: 10.0,
            probe_backward_error: 1e-12,
            par: Par::rayon(0),
            precision: SchurPrecision::Auto,
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

/// A floating-point type the factors can be stored in.
trait Real: faer::traits::RealField + Copy + Into<f64> {
    const EPS: f64;
    fn of(x: f64) -> Self;
}
impl Real for f64 {
    const EPS: f64 = f64::EPSILON;
    fn of(x: f64) -> Self {
        x
    }
}
impl Real for f32 {
    const EPS: f64 = f32::EPSILON as f64;
    fn of(x: f64) -> Self {
        x as f32
    }
}

/// `L` (Cholesky of H), `W = L⁻¹Aᵀ` and `L_S` (Cholesky of `S = WᵀW`) in one precision.
#[derive(Debug)]
struct Factors<T> {
    l: Mat<T>,
    w: Mat<T>,
    ls: Mat<T>,
    // Set by `factor` when the Cholesky of H met a pivot that was not positive.
    h_failed_at: Option<usize>,
}

impl<T: Real> Factors<T> {
    fn empty() -> Self {
        Factors {
            l: Mat::zeros(0, 0),
            w: Mat::zeros(0, 0),
            ls: Mat::zeros(0, 0),
            h_failed_at: None,
        }
    }

    fn factor(&mut self, problem: &Problem, params: &SchurParams) -> std::result::Result<(), String> {
        let (n, m) = (problem.n(), problem.m());
        let par = params.par;
        self.h_failed_at = None;
        if self.l.nrows() != n || self.w.ncols() != m || self.ls.nrows() != m {
            self.l = Mat::zeros(n, n);
            self.w = Mat::zeros(n, m);
            self.ls = Mat::zeros(m, m);
        }
        match problem.hessian() {
            // Dense storage: copy the lower triangle column by column (the upper one is never read).
            Matrix::Dense(h) => {
                for j in 0..n {
                    let (dst, src) = (&mut self.l.col_as_slice_mut(j)[j..], &h.col_as_slice(j)[j..]);
                    dst.iter_mut().zip(src).for_each(|(d, v)| *d = T::of(*v));
                }
            }
            Matrix::Sparse(_) => {
                self.l.fill(T::of(0.0));
                problem.hessian().for_each(|i, j, v| {
                    if i >= j {
                        self.l[(i, j)] = T::of(v)
                    }
                });
            }
        }
        cholesky(self.l.as_mut(), params, "H").map_err(|(reason, at)| {
            self.h_failed_at = at;
            reason
        })?;
        match problem.constraints() {
            Matrix::Dense(a) => {
                // W = Aᵀ by tiles, so that both sides are read and written in cache-sized runs.
                const TILE: usize = 64;
                for c0 in (0..n).step_by(TILE) {
                    for r0 in (0..m).step_by(TILE) {
                        for c in c0..(c0 + TILE).min(n) {
                            let src = &a.col_as_slice(c)[r0..(r0 + TILE).min(m)];
                            for (k, v) in src.iter().enumerate() {
                                self.w[(c, r0 + k)] = T::of(*v);
                            }
                        }
                    }
                }
            }
            Matrix::Sparse(_) => {
                self.w.fill(T::of(0.0));
                problem.constraints().for_each(|i, j, v| self.w[(j, i)] = T::of(v));
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
            T::of(1.0),
            par,
        );
        cholesky(self.ls.as_mut(), params, "the Schur complement A H⁻¹ Aᵀ")
            .map_err(|(e, _)| format!("{e}: A is (numerically) rank-deficient"))
    }

    /// `[f; g] ← K⁻¹[f; g]` with these factors (in their precision), the working copies in
    /// `stack` (see [`solve_scratch`](Factors::solve_scratch)).
    fn solve(&self, mut rhs: MatMut<'_, f64>, stack: &mut MemStack) {
        let (n, m) = (self.l.nrows(), self.ls.nrows());
        let k = rhs.ncols();
        let (mut top, stack) = faer::linalg::temp_mat_zeroed::<T, _, _>(n, k, stack);
        let mut top = top.as_mat_mut();
        let (mut t, _) = faer::linalg::temp_mat_zeroed::<T, _, _>(m, k, stack);
        let mut t = t.as_mat_mut();
        for j in 0..k {
            for i in 0..n {
                top[(i, j)] = T::of(rhs[(i, j)]);
            }
            for i in 0..m {
                t[(i, j)] = T::of(-rhs[(n + i, j)]);
            }
        }
        // u = L⁻¹ f
        triangular_solve::solve_lower_triangular_in_place(self.l.as_ref(), top.as_mut(), Par::Seq);
        if m > 0 {
            // y = S⁻¹ (Wᵀu − g)
            faer::linalg::matmul::matmul(
                t.as_mut(),
                Accum::Add,
                self.w.transpose(),
                top.as_ref(),
                T::of(1.0),
                Par::Seq,
            );
            triangular_solve::solve_lower_triangular_in_place(self.ls.as_ref(), t.as_mut(), Par::Seq);
            triangular_solve::solve_upper_triangular_in_place(self.ls.transpose(), t.as_mut(), Par::Seq);
            // u − W y
            faer::linalg::matmul::matmul(
                top.as_mut(),
                Accum::Add,
                self.w.as_ref(),
                t.as_ref(),
                T::of(-1.0),
                Par::Seq,
            );
        }
        triangular_solve::solve_upper_triangular_in_place(self.l.transpose(), top.as_mut(), Par::Seq);
        for j in 0..k {
            for i in 0..n {
                rhs[(i, j)] = top[(i, j)].into();
            }
            for i in 0..m {
                rhs[(n + i, j)] = t[(i, j)].into();
            }
        }
    }
}

/// Scratch of a solve with `nrhs` right-hand sides: the working copies of `[f; g]`, sized
/// for `f64` so that it also covers `f32` factors (a refactorization may switch precision).
fn solve_scratch(n: usize, m: usize, nrhs: usize) -> StackReq {
    faer::linalg::temp_mat_scratch::<f64>(n, nrhs).and(faer::linalg::temp_mat_scratch::<f64>(m, nrhs))
}

/// Cholesky in `f64` of the leading `k×k` block of H: `Err(reason)` when it is not
/// (numerically) positive definite.
fn leading_block_cholesky(problem: &Problem, k: usize, params: &SchurParams) -> std::result::Result<(), String> {
    let k = k.min(problem.n());
    let mut l = Mat::<f64>::zeros(k, k);
    problem.hessian().for_each(|i, j, v| {
        if i >= j && i < k {
            l[(i, j)] = v
        }
    });
    cholesky(l.as_mut(), params, "the leading block of H").map_err(|(why, _)| why)
}

/// Why a Cholesky factorization failed, and at which pivot when a pivot was not positive
/// (the leading block up to it is then not positive definite in this precision).
type CholeskyFailure = (String, Option<usize>);

/// Cholesky in place (lower), with the pivot check; `Err(reason)` on failure.
fn cholesky<T: Real>(
    mut a: MatMut<'_, T>,
    params: &SchurParams,
    what: &str,
) -> std::result::Result<(), CholeskyFailure> {
    let dim = a.nrows();
    if dim == 0 {
        return Ok(());
    }
    let diag = |a: &MatMut<'_, T>, i: usize| -> f64 { a[(i, i)].into() };
    let dmax = (0..dim).fold(0.0f64, |acc, i| acc.max(diag(&a, i)));
    if let Some(i) = (0..dim).find(|&i| diag(&a, i).partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater)) {
        return Err((
            format!(
                "{what} has a non-positive diagonal entry at {i} (value {:e})",
                diag(&a, i)
            ),
            Some(i),
        ));
    }
    let mut buf = MemBuffer::new(llt::cholesky_in_place_scratch::<T>(dim, params.par, Default::default()));
    llt::cholesky_in_place(
        a.as_mut(),
        LltRegularization::default(),
        params.par,
        MemStack::new(&mut buf),
        Default::default(),
    )
    .map_err(|e| match e {
        llt::LltError::NonPositivePivot { index } => (
            format!("{what} is not positive definite (Cholesky pivot {index} is not positive)"),
            Some(index),
        ),
    })?;
    let tol = params.pivot_factor * dim as f64 * T::EPS * dmax;
    if let Some(i) = (0..dim).find(|&i| {
        let d = diag(&a, i);
        (d * d).partial_cmp(&tol) != Some(std::cmp::Ordering::Greater)
    }) {
        let d = diag(&a, i);
        return Err((
            format!(
                "{what} is numerically singular (Cholesky pivot {i}: {:.2e} ≤ {tol:.1e})",
                d * d
            ),
            None,
        ));
    }
    Ok(())
}

/// The Schur-complement factorization of one KKT matrix (or its fallback).
#[derive(Debug)]
pub struct Schur {
    params: SchurParams,
    n: usize,
    m: usize,
    double: Factors<f64>,
    single: Factors<f32>,
    // Whether the factors in use are the `f32` ones.
    mixed: bool,
    notes: Vec<String>,
}

impl Schur {
    /// Allocates for a problem of this size.
    pub fn new(problem: &Problem, params: SchurParams) -> Self {
        let (n, m) = (problem.n(), problem.m());
        Schur {
            params,
            n,
            m,
            double: Factors::empty(),
            single: Factors::empty(),
            mixed: false,
            notes: Vec::new(),
        }
    }

    /// Whether the factors in use are single precision (see [`SchurPrecision::Mixed`]).
    pub fn mixed_precision(&self) -> bool {
        self.mixed
    }

    fn try_factor(&mut self, problem: &Problem) -> std::result::Result<(), String> {
        let (n, m) = (self.n, self.m);
        if m > n {
            return Err(format!("m = {m} > n = {n}: A H⁻¹ Aᵀ is singular"));
        }
        let want_mixed = match self.params.precision {
            SchurPrecision::Double => false,
            SchurPrecision::Mixed => true,
            SchurPrecision::Auto => n >= MIXED_MIN_DIM,
        };
        if want_mixed {
            self.mixed = true;
            let res = self
                .single
                .factor(problem, &self.params)
                .and_then(|()| self.probe(problem));
            match res {
                Ok(()) => {
                    self.notes.push(
                        "Schur factors in single precision; refinement in double precision on the original K"
                            .to_string(),
                    );
                    return Ok(());
                }
                Err(reason) => {
                    // A pivot of H that was not positive in f32: if the leading block up to
                    // it is not positive definite in f64 either, H is not, and the f64
                    // factorization would fail the same way: refuse now, at the cost of
                    // that block only (the early decision of the module docs).
                    let failed_at = self.single.h_failed_at;
                    self.single = Factors::empty();
                    if let Some(k) = failed_at {
                        if let Err(why) = leading_block_cholesky(problem, k + 1, &self.params) {
                            return Err(format!("{reason}; confirmed in double precision: {why}"));
                        }
                    }
                    self.notes.push(format!(
                        "single-precision Schur factors refused ({reason}); refactored in double precision"
                    ));
                }
            }
        }
        self.mixed = false;
        self.double.factor(problem, &self.params)?;
        self.probe(problem)
    }

    /// Solves `K z = K z₀` for a fixed `z₀`, refining up to three times on the original K
    /// (the shared probe of [`crate::backend::probe`]).
    fn probe(&self, problem: &Problem) -> std::result::Result<(), String> {
        let mut buf = MemBuffer::new(solve_scratch(self.n, self.m, 1));
        crate::backend::probe::run(problem, self.mixed, self.params.probe_backward_error, |col| {
            self.solve_own(col, MemStack::new(&mut buf))
        })
        .map(|_| ())
        .map_err(|omega| {
            format!(
                "a probe solve on K kept a backward error of {omega:.1e} after refinement \
                 (> {:.0e}): H or A H⁻¹ Aᵀ is too ill-conditioned for this method{}",
                self.params.probe_backward_error,
                if self.mixed { " in single precision" } else { "" }
            )
        })
    }

    fn solve_own(&self, rhs: MatMut<'_, f64>, stack: &mut MemStack) {
        if self.mixed {
            self.single.solve(rhs, stack)
        } else {
            self.double.solve(rhs, stack)
        }
    }
}

impl KktBackend for Schur {
    fn method(&self) -> MethodUsed {
        MethodUsed::Schur
    }

    fn dim(&self) -> usize {
        self.n + self.m
    }

    /// Factors, or refuses with [`Error::NotApplicable`](crate::Error::NotApplicable) and the
    /// reason (`H` not positive definite, `m > n`, a failed probe): the chooser
    /// ([`crate::pipeline::choose`]) then takes the cheaper of dense LBLᵀ and null-space.
    fn factor(&mut self, problem: &Problem) -> Result<()> {
        self.notes.clear();
        if let Err(reason) = self.try_factor(problem) {
            // Release the Schur storage while the fallback is in use.
            self.double = Factors::empty();
            self.single = Factors::empty();
            return Err(crate::error::Error::NotApplicable {
                method: "schur",
                detail: reason,
            });
        }
        Ok(())
    }

    fn inertia(&self) -> Option<Inertia> {
        Some(Inertia::new(self.n, self.m, 0))
    }

    fn solve_scratch(&self, nrhs: usize) -> StackReq {
        solve_scratch(self.n, self.m, nrhs)
    }

    fn solve_in_place(&self, rhs: MatMut<'_, f64>, stack: &mut MemStack) {
        self.solve_own(rhs, stack)
    }

    fn notes(&self) -> &[String] {
        &self.notes
    }
}
