//! [`Factorization`]: the numeric phase ([`Plan::factor`], [`Factorization::refactor`]) and
//! the certified solves (`solve`, `solve_with`, `solve_many`, `solve_into`).

use std::time::Instant;

use faer::dyn_stack::{MemBuffer, MemStack};

use super::choose;
use super::options::{Method, Options};
use super::plan::Plan;
use super::refine::normwise;
use super::workspace::Workspace;
use crate::backend::KktBackend;
use crate::error::{Block, Error, Result};
use crate::kkt;
use crate::method::MethodUsed;
use crate::problem::{check_vector, inf_norm, Problem};
use crate::solution::{Inertia, Solution, Timing, Verdict};

/// A numeric factorization of one KKT matrix, ready for any number of solves.
///
/// ```
/// use tangency::{Options, Plan, ProblemBuilder, Triangle, Verdict};
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .rhs(&[1.0])
///     .build()?;
/// let plan = Plan::analyze(&p, &Options::default())?;
/// let f = plan.factor(&p)?;
/// let s1 = f.solve()?;                          // the problem's own c and b
/// assert_eq!(s1.verdict, Some(Verdict::Minimizer));
/// let s2 = f.solve_with(&[1.0, 0.0], &[2.0])?;  // new data, same factorization
/// assert!((s2.x[0] + s2.x[1] - 2.0).abs() < 1e-14);
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Debug)]
pub struct Factorization {
    pub(super) plan: Plan,
    pub(super) problem: Problem,
    pub(super) norm_k: f64,
    pub(super) norm_rows: Vec<f64>,
    pub(super) backend: Box<dyn KktBackend>,
    pub(super) factor_s: f64,
    /// Ruiz scaling `D` of K and `‖DKD‖∞`: the norm of the accuracy certificate.
    pub(super) eq: Vec<f64>,
    pub(super) norm_eq: f64,
    /// `κ₁(DKD)` estimated once per factorization, at the first solve.
    pub(super) kappa: std::sync::Mutex<KappaCache>,
}

/// The condition estimate behind the forward-error bounds, computed at the first solve after
/// a factorization with preallocated work vectors (no allocation in the steady state).
pub(super) struct KappaCache {
    value: Option<f64>,
    scratch: crate::diagnostics::condition::Norm1Scratch,
    buf: MemBuffer,
    buf_bytes: usize,
}

impl std::fmt::Debug for KappaCache {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("KappaCache")
            .field("value", &self.value)
            .finish_non_exhaustive()
    }
}

impl KappaCache {
    pub(super) fn new(dim: usize, req: faer::dyn_stack::StackReq) -> Self {
        KappaCache {
            value: None,
            scratch: crate::diagnostics::condition::Norm1Scratch::new(dim),
            buf: MemBuffer::new(req),
            buf_bytes: req.size_bytes(),
        }
    }

    fn reset(&mut self, req: faer::dyn_stack::StackReq) {
        self.value = None;
        if req.size_bytes() > self.buf_bytes {
            self.buf = MemBuffer::new(req);
            self.buf_bytes = req.size_bytes();
        }
    }
}

impl Factorization {
    /// The plan this factorization was made from.
    pub fn plan(&self) -> &Plan {
        &self.plan
    }

    /// The problem (values as of the last factorization).
    pub fn problem(&self) -> &Problem {
        &self.problem
    }

    /// Inertia of K, when the method observes it.
    pub fn inertia(&self) -> Option<Inertia> {
        self.backend.inertia()
    }

    /// `‖K‖∞` of the original K.
    pub fn norm_inf(&self) -> f64 {
        self.norm_k
    }

    /// The backend, for diagnostics that need raw solves with K.
    pub fn backend(&self) -> &dyn KktBackend {
        &*self.backend
    }

    /// Seconds spent in the last numeric factorization.
    pub fn factor_seconds(&self) -> f64 {
        self.factor_s
    }

    /// `κ₁(DKD)`, the 1-norm condition estimate of the equilibrated K (`D` the Ruiz scaling
    /// of [`crate::kkt::equilibrate`]) behind every [`Solution::forward_error_bound`]:
    /// estimated once per factorization from a few solves with the factors (Hager–Higham,
    /// [`crate::diagnostics::condition`]) and cached. `+∞` when a solve overflowed.
    pub fn scaled_condition(&self) -> f64 {
        let mut guard = match self.kappa.lock() {
            Ok(g) => g,
            Err(poisoned) => poisoned.into_inner(),
        };
        if let Some(v) = guard.value {
            return v;
        }
        let cache = &mut *guard;
        let req = self.backend.solve_scratch(2);
        if req.size_bytes() > cache.buf_bytes {
            cache.buf = MemBuffer::new(req);
            cache.buf_bytes = req.size_bytes();
        }
        let (eq, backend, buf) = (&self.eq, &self.backend, &mut cache.buf);
        let est = crate::diagnostics::condition::norm1_estimate_in(&mut cache.scratch, |mut block, _t| {
            // (DKD)⁻¹ = D⁻¹ K⁻¹ D⁻¹, symmetric.
            for j in 0..block.ncols() {
                for (i, d) in eq.iter().enumerate() {
                    block[(i, j)] /= d;
                }
            }
            backend.solve_in_place(block.as_mut(), MemStack::new(buf));
            for j in 0..block.ncols() {
                for (i, d) in eq.iter().enumerate() {
                    block[(i, j)] /= d;
                }
            }
        });
        let _ = self.backend.take_solve_failure();
        let kappa = if eq.is_empty() {
            0.0
        } else if est.estimate.is_finite() {
            self.norm_eq * est.estimate
        } else {
            f64::INFINITY
        };
        cache.value = Some(kappa);
        kappa
    }

    /// Normwise backward error of `z` for `rhs` measured on the equilibrated system:
    /// `‖D r‖∞ / (‖DKD‖∞ ‖D⁻¹z‖∞ + ‖D rhs‖∞)` with `r = rhs − Kz` given.
    pub(super) fn scaled_backward(&self, r: &[f64], z: &[f64], rhs: &[f64]) -> f64 {
        let (mut nr, mut nz, mut nb) = (0.0f64, 0.0f64, 0.0f64);
        for (i, d) in self.eq.iter().enumerate() {
            nr = nr.max((r[i] * d).abs());
            nz = nz.max((z[i] / d).abs());
            nb = nb.max((rhs[i] * d).abs());
        }
        if nr.is_nan() || nz.is_nan() {
            return f64::INFINITY;
        }
        if nr == 0.0 {
            return 0.0;
        }
        let denom = self.norm_eq * nz + nb;
        if denom == 0.0 || !nr.is_finite() || !denom.is_finite() {
            f64::INFINITY
        } else {
            nr / denom
        }
    }

    fn refresh_equilibration(&mut self) {
        // With the forward-error rule off (`accept_forward_error = +∞`, the inequality
        // solver's Newton steps) no solve uses the scaling; keep the first one (any positive
        // D gives a valid κ₁(DKD) bound, only its tightness depends on D) and save the Ruiz
        // sweeps, which were a third of an interior-point iteration on stage-wise problems.
        if self.plan.options.accept_forward_error == f64::INFINITY {
            return;
        }
        self.norm_eq = kkt::equilibrate::ruiz_into(&self.problem, &mut self.eq, &mut self.norm_rows);
    }

    /// Factors new values of `H` and `A` with the same dimensions (and sparsity pattern)
    /// without a new analysis, reusing all storage. `c` and `b` are taken from `problem`.
    pub fn refactor(&mut self, problem: &Problem) -> Result<()> {
        self.plan.check_structure(problem)?;
        self.problem.update_values(problem)?;
        let t = Instant::now();
        if self.backend.method() == self.plan.method && self.backend.notes().is_empty() {
            if let Err(e) = self.backend.factor(&self.problem) {
                // A refusal (the Schur path on an indefinite H) goes to the chooser's fallback.
                let fallback = choose::after_refusal(&*self.backend, e, &self.problem, &self.plan.options)?;
                self.backend = fallback;
            }
            if self.backend.inertia().is_some_and(|i| i.zero > 0) && self.backend.method() != MethodUsed::NullSpace {
                self.backend = self.plan.factor_backend(&self.problem)?;
            }
        } else {
            // The last factorization fell back or was rescued: start from the plan again.
            self.backend = self.plan.factor_backend(&self.problem)?;
        }
        self.norm_k = kkt::norm_inf_with(&self.problem, &mut self.norm_rows);
        self.refresh_equilibration();
        let req = self.backend.solve_scratch(2);
        match self.kappa.get_mut() {
            Ok(cache) => cache.reset(req),
            Err(poisoned) => poisoned.into_inner().reset(req),
        }
        self.factor_s = t.elapsed().as_secs_f64();
        Ok(())
    }

    /// The verdict implied by the inertia, or the singularity error.
    pub fn verdict(&self) -> Result<Option<Verdict>> {
        let Some(inertia) = self.backend.inertia() else {
            return Ok(None);
        };
        let (n, m) = (self.problem.n(), self.problem.m());
        if inertia.zero > 0 {
            return match self
                .backend
                .singular_findings(&self.problem, &self.problem.c, &self.problem.b)
            {
                Some(findings) => findings.map(|f| f.verdict),
                None => Err(Error::Singular {
                    inertia,
                    detail: singular_detail(n, m, inertia),
                }),
            };
        }
        // Forced (regularized) pivots impose signs: the inertia is evidence only when the
        // backend confirmed it another way (sparse_ldlt: exact Schur-complement correction).
        // solve_into also withholds the verdict when refinement then stalls.
        if !self.backend.inertia_certified() {
            return Ok(None);
        }
        Ok(Some(if inertia == Inertia::new(n, m, 0) {
            Verdict::Minimizer
        } else {
            Verdict::Saddle
        }))
    }

    /// Solves with the problem's own `c` and `b`.
    pub fn solve(&self) -> Result<Solution> {
        self.solve_with(&self.problem.c, &self.problem.b)
    }

    /// Solves for new `c` (length n) and `b` (length m) with the same factorization.
    /// Allocates a [`Workspace`] and the [`Solution`]; use [`solve_into`](Self::solve_into)
    /// in loops.
    pub fn solve_with(&self, c: &[f64], b: &[f64]) -> Result<Solution> {
        let mut ws = self.workspace();
        let mut out = Solution::empty(self.problem.n(), self.problem.m(), self.backend.method());
        self.solve_into(c, b, &mut ws, &mut out)?;
        Ok(out)
    }

    /// Solves for each column pair of `c` (n×k) and `b` (m×k), reusing one workspace.
    pub fn solve_many(&self, c: faer::MatRef<'_, f64>, b: faer::MatRef<'_, f64>) -> Result<Vec<Solution>> {
        let (n, m) = (self.problem.n(), self.problem.m());
        if c.nrows() != n || b.nrows() != m || c.ncols() != b.ncols() {
            return Err(Error::DimensionMismatch {
                block: if c.nrows() != n { Block::C } else { Block::B },
                rows: if c.nrows() != n { c.nrows() } else { b.nrows() },
                cols: if c.nrows() != n { c.ncols() } else { b.ncols() },
                expected_rows: if c.nrows() != n { n } else { m },
                expected_cols: c.ncols(),
            });
        }
        let mut ws = self.workspace();
        let (mut cj, mut bj) = (vec![0.0; n], vec![0.0; m]);
        let mut all = Vec::with_capacity(c.ncols());
        for j in 0..c.ncols() {
            cj.iter_mut().enumerate().for_each(|(i, v)| *v = c[(i, j)]);
            bj.iter_mut().enumerate().for_each(|(i, v)| *v = b[(i, j)]);
            let mut out = Solution::empty(n, m, self.backend.method());
            self.solve_into(&cj, &bj, &mut ws, &mut out)?;
            all.push(out);
        }
        Ok(all)
    }

    /// Scratch memory for [`solve_into`](Self::solve_into), sized for this factorization.
    pub fn workspace(&self) -> Workspace {
        let (n, m) = (self.problem.n(), self.problem.m());
        Workspace::new(n, m, self.backend.solve_scratch(1))
    }

    /// Solves for `c` and `b` into `out`, using only the memory in `ws` and `out`: no heap
    /// allocation when `out` already has the right sizes and the solve succeeds without
    /// notes (the steady state of a control loop).
    pub fn solve_into(&self, c: &[f64], b: &[f64], ws: &mut Workspace, out: &mut Solution) -> Result<()> {
        let (n, m) = (self.problem.n(), self.problem.m());
        check_vector(Block::C, c, n)?;
        check_vector(Block::B, b, m)?;
        ws.check(n, m)?;
        // ---- issue 13 (extreme scaling): a right-hand side far from unit size is solved
        // scaled by a power of two (exact), and the answer scaled back; a non-finite answer
        // is refused below. Allocates only in that extreme case.
        if let Some(s) = rhs_power_of_two_scale(c, b) {
            let cs: Vec<f64> = c.iter().map(|v| v * s).collect();
            let bs: Vec<f64> = b.iter().map(|v| v * s).collect();
            self.solve_into(&cs, &bs, ws, out)?;
            return unscale_solution(out, s);
        }
        // ---- end issue 13
        // A refactorization may have changed the backend (a fallback, the rank analysis) and
        // with it the scratch a solve needs: grow the buffer then (only then does this allocate).
        ws.reserve(self.backend.solve_scratch(1));
        let singular = self.backend.inertia().is_some_and(|i| i.zero > 0);
        let (verdict, findings) = if singular {
            match self.backend.singular_findings(&self.problem, c, b) {
                Some(f) => {
                    let f = f?;
                    (f.verdict, Some(f))
                }
                None => (self.verdict()?, None),
            }
        } else {
            (self.verdict()?, None)
        };
        let t = Instant::now();
        // Forget failures of solves made outside this call (condition estimates, probes).
        let _ = self.backend.take_solve_failure();
        let Workspace {
            buf,
            rhs,
            z,
            r,
            best,
            col,
            grad,
            ..
        } = ws;
        let stack = MemStack::new(buf);
        for (dst, v) in rhs.iter_mut().zip(c.iter().map(|v| -v).chain(b.iter().copied())) {
            *dst = v;
        }
        for (i, v) in rhs.iter().enumerate() {
            col[(i, 0)] = *v;
        }
        self.backend.solve_in_place(col.as_mut(), stack);
        for (i, zi) in z.iter_mut().enumerate() {
            *zi = col[(i, 0)];
        }
        let (_, steps, current) = self.refine(rhs, z, r, grad, best, col, stack);
        if let Some(failure) = self.backend.take_solve_failure() {
            return Err(failure);
        }
        // Residuals of the returned point, with the caller's c and b: r = rhs − K z holds
        // [−c − Hx − Aᵀy; b − Ax]. Refinement leaves the residual of the returned z in r
        // unless it had to step back to an earlier iterate.
        if !current {
            kkt::residual_and_gradient(&self.problem, z, rhs, r, grad);
        }
        let backward_error = normwise(r, self.norm_k, z, rhs);
        let by_backward_error =
            self.backend.method() == MethodUsed::Minres || self.plan.options.accept_forward_error == f64::INFINITY;
        let forward_error_bound = if by_backward_error {
            if backward_error.is_nan() || backward_error > self.plan.options.accept_backward_error {
                return Err(Error::Inaccurate {
                    backward_error,
                    steps,
                    limit: self.plan.options.accept_backward_error,
                });
            }
            None
        } else {
            let scaled = self.scaled_backward(r, z, rhs);
            let kappa = self.scaled_condition();
            let bound = crate::diagnostics::condition::forward_error_bound(kappa, scaled);
            let limit = self.plan.options.accept_forward_error;
            if bound.is_nan() || bound > limit || z.iter().any(|v| !v.is_finite()) {
                let refused = self.fallback_or_refuse(c, b, out, backward_error, scaled, kappa, bound, singular);
                // ---- issue 13: a point beyond double range is named as such.
                if let Err(Error::Uncertified { .. }) = &refused {
                    if let Some(k) = z.iter().position(|v| !v.is_finite()) {
                        return Err(non_finite_solution(k, n, z[k]));
                    }
                }
                return refused;
            }
            Some(bound)
        };
        // ---- issue 13: a non-finite point is never returned as solved.
        if let Some(k) = z.iter().position(|v| !v.is_finite()) {
            return Err(non_finite_solution(k, n, z[k]));
        }
        // ---- end issue 13
        out.x.resize(n, 0.0);
        out.y.resize(m, 0.0);
        out.x.copy_from_slice(&z[..n]);
        out.y.copy_from_slice(&z[n..]);
        out.forward_error_bound = forward_error_bound;
        out.dual_residual = inf_norm(&r[..n]);
        out.primal_residual = inf_norm(&r[n..]);
        // objective = ½xᵀHx + cᵀx = ½xᵀ(Hx + c) + ½cᵀx, with Hx + c left in grad by the
        // residual of the returned point.
        let x = &out.x;
        out.objective = 0.5 * crate::problem::dot(x, grad) + 0.5 * crate::problem::dot(c, x);
        out.backward_error = backward_error;
        out.refinement_steps = steps;
        out.inertia = self.backend.inertia();
        // With forced pivots the verdict also needs a solve refined to machine level.
        let regularized_but_inaccurate = self.backend.regularized_pivots() > 0 && backward_error > 1e3 * f64::EPSILON;
        out.verdict = if regularized_but_inaccurate { None } else { verdict };
        out.method = self.backend.method();
        out.timing = Timing {
            analyze_s: self.plan.analyze_s,
            factor_s: self.factor_s,
            solve_s: t.elapsed().as_secs_f64(),
        };
        out.notes.clear();
        out.notes.extend(self.plan.notes.iter().cloned());
        out.notes.extend(self.backend.notes().iter().cloned());
        out.null_direction = None;
        if let Some(f) = findings {
            out.notes.extend(f.notes);
            out.null_direction = f.null_direction;
        }
        if backward_error > 1e3 * f64::EPSILON {
            out.notes.push(format!(
                "backward error {backward_error:.1e} stayed above the refinement target after {steps} step(s): \
                 K is ill-conditioned, trust fewer digits"
            ));
        }
        if !self.backend.inertia_certified() && self.backend.regularized_pivots() > 0 {
            out.notes.push(format!(
                "verdict unverified: {} pivot(s) were regularized (sign imposed) and the inertia could not be \
                 confirmed; the inertia shown is that of the regularized factorization",
                self.backend.regularized_pivots()
            ));
        }
        if regularized_but_inaccurate && verdict.is_some() {
            out.notes.push(format!(
                "verdict withheld: {} pivot(s) were regularized and refinement did not reach machine precision",
                self.backend.regularized_pivots()
            ));
        }
        Ok(())
    }

    /// A direct solve failed the forward-error rule: repeat it with dense LBLᵀ when that can
    /// do better (another method was used, K nonsingular, order at most
    /// [`DENSE_FALLBACK_MAX_DIM`](super::DENSE_FALLBACK_MAX_DIM)), else refuse with [`Error::Uncertified`].
    #[allow(clippy::too_many_arguments)]
    fn fallback_or_refuse(
        &self,
        c: &[f64],
        b: &[f64],
        out: &mut Solution,
        backward_error: f64,
        scaled: f64,
        kappa: f64,
        bound: f64,
        singular: bool,
    ) -> Result<()> {
        let method = self.backend.method();
        let limit = self.plan.options.accept_forward_error;
        let dim = self.backend.dim();
        let bound_words = if bound.is_finite() {
            format!("{bound:.1e}")
        } else {
            "missing (κω ≥ 1)".to_string()
        };
        // The plan decides, not the backend: a dense plan whose K was rescued by the rank
        // analysis must not fall back to dense again.
        if choose::dense_fallback_allowed(method, self.plan.method, singular, dim) {
            let opts = Options {
                method: Method::Dense,
                ..self.plan.options
            };
            let dense = Plan::analyze(&self.problem, &opts)?.factor(&self.problem)?;
            let mut sol = dense.solve_with(c, b)?;
            sol.notes.insert(
                0,
                format!(
                    "{method}: forward-error bound {bound_words} above the acceptance level {limit:.0e} \
                     (κ₁(DKD) ≈ {kappa:.1e}, scaled backward error {scaled:.1e}); solved again with dense LBLᵀ"
                ),
            );
            *out = sol;
            return Ok(());
        }
        Err(Error::Uncertified {
            method: method.as_str(),
            forward_error_bound: bound,
            condition_estimate: kappa,
            backward_error,
            limit,
        })
    }

    /// Normwise backward error `‖rhs − Kz‖∞ / (‖K‖∞‖z‖∞ + ‖rhs‖∞)` on the original K.
    pub fn backward_error(&self, rhs: &[f64], z: &[f64]) -> f64 {
        let mut r = vec![0.0; rhs.len()];
        kkt::residual(&self.problem, z, rhs, &mut r);
        normwise(&r, self.norm_k, z, rhs)
    }
}

// ---- issue 13 (extreme scaling) helpers for `solve_into`.

/// Right-hand sides whose largest entry lies outside `[2⁻⁴⁰⁰, 2⁴⁰⁰]` are solved scaled to
/// unit size: beyond that, products with K and the refinement residuals may overflow or
/// lose digits to underflow (common practice: scale by a power of two, which is exact).
const RHS_SAFE_EXPONENT: i32 = 400;

/// The power of two `s` that brings `max(|c|, |b|)` near 1, when it lies outside the safe
/// range; `None` otherwise (and for a zero right-hand side).
fn rhs_power_of_two_scale(c: &[f64], b: &[f64]) -> Option<f64> {
    let mx = c.iter().chain(b).fold(0.0f64, |a, v| a.max(v.abs()));
    if mx == 0.0 || !mx.is_finite() {
        return None;
    }
    let e = mx.log2().round() as i32;
    if e.abs() <= RHS_SAFE_EXPONENT {
        return None;
    }
    // 2^(−e), kept within the normal range of f64 (|e| ≤ 1020).
    Some(2f64.powi(-e.clamp(-1020, 1020)))
}

/// Scales a solution of the system with right-hand side `s·rhs` back by `1/s`: `x`, `y`
/// and the residuals by `1/s`, the objective by `1/s²`. Refuses an unrepresentable result.
fn unscale_solution(out: &mut Solution, s: f64) -> Result<()> {
    let inv = 1.0 / s;
    for v in out.x.iter_mut().chain(out.y.iter_mut()) {
        *v *= inv;
    }
    out.primal_residual *= inv;
    out.dual_residual *= inv;
    out.objective = out.objective * inv * inv;
    let n = out.x.len();
    if let Some(k) = out.x.iter().chain(&out.y).position(|v| !v.is_finite()) {
        let z = out.x.iter().chain(&out.y).nth(k).copied().unwrap_or(f64::NAN);
        return Err(non_finite_solution(k, n, z));
    }
    if !out.objective.is_finite() {
        return Err(Error::Overflow {
            detail: format!(
                "the point is finite (largest |x| = {:.3e}) but the objective ½xᵀHx + cᵀx exceeds double range",
                out.x.iter().fold(0.0f64, |a, v| a.max(v.abs()))
            ),
        });
    }
    out.notes.push(format!(
        "the right-hand side was scaled by 2^{} (exact) for the solve and the answer scaled back",
        s.log2().round() as i64
    ));
    Ok(())
}

fn non_finite_solution(k: usize, n: usize, v: f64) -> Error {
    let (what, idx) = if k < n { ("x", k) } else { ("y (multiplier)", k - n) };
    Error::Overflow {
        detail: format!(
            "entry {idx} (0-based) of {what} came out as {v} after scaling the right-hand side to unit size: \
             the solution exceeds double range (about 1.8e308); rescale the problem's units"
        ),
    }
}
// ---- end issue 13

fn singular_detail(n: usize, m: usize, inertia: Inertia) -> String {
    if m > n {
        format!("there are more constraints ({m}) than variables ({n}), so at least {} constraint row(s) depend on the others", m - n)
    } else if inertia.negative < m {
        "either some constraint rows are linearly dependent (redundant or contradictory), \
         or the objective is flat along a feasible direction (singular reduced Hessian)"
            .to_string()
    } else {
        "the objective is flat along a feasible direction (singular reduced Hessian): \
         minimizers are not unique, or the objective is unbounded below"
            .to_string()
    }
}
