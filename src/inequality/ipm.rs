//! The primal-dual interior-point method (Mehrotra 1992 predictor–corrector; Wright 1997,
//! ch. 10 and 11 for the quadratic case) on top of the KKT pipeline.

use std::time::Instant;

use super::problem::InequalityProblem;
use super::step::{Layout, StepPattern};
use super::{FarkasCertificate, InequalitySolution, InteriorPointOptions};
use crate::error::{Error, Result};
use crate::problem::{dot, inf_norm, Problem, ProblemBuilder, Triangle};
use crate::solution::{MethodUsed, Solution, Verdict};
use crate::solver::{Factorization, Method, Options, Plan, Workspace};

/// Relative size of the shift `ε·max(1, max|H|)` added to `H` for the convexity check made
/// before the first iteration: negative curvature on `null(A)` stronger than this is refused
/// at once with [`Error::Nonconvex`]; weaker negative curvature is caught by the inertia of
/// the Newton steps and of the final active-set KKT matrix.
pub const CONVEXITY_SHIFT: f64 = 1e-7;

/// An infeasibility certificate is accepted when it proves that no feasible point has
/// `‖x‖₁` below this many times `1 + ‖x_k‖₁` of the current iterate (see
/// [`FarkasCertificate::radius`]).
pub const INFEASIBILITY_RADIUS_FACTOR: f64 = 1e8;

/// A Newton direction `d` (`‖d‖∞ = 1`) is accepted as a direction of unboundedness when
/// `‖Ad‖∞`, `‖Hd‖∞` and every `(Cd)ₖ⁺` are at most this times `|cᵀd|` (and the iterate is
/// primal feasible to the tolerance).
pub const UNBOUNDED_DIRECTION_TOL: f64 = 1e-9;

/// Interior-point solver for one structure (`H`, `A`, `G` and which bounds are finite):
/// analyzed once, then any number of solves for new `c`, `b`, `h`, `lo`, `hi` values.
///
/// ```
/// use tangency::inequality::{InequalityProblem, InteriorPoint, InteriorPointOptions};
/// use tangency::{ProblemBuilder, Triangle, Verdict};
/// // minimize ½‖x − (2, 2)‖² subject to x0 + x1 ≤ 2, x ≥ 0: x* = (1, 1), z* = 1.
/// let base = ProblemBuilder::new()
///     .hessian_row_major(2, &[1.0, 0.0, 0.0, 1.0], Triangle::Full)
///     .linear(&[-2.0, -2.0])
///     .build()?;
/// let q = InequalityProblem::new(base)
///     .with_inequalities(1, &[(0, 0, 1.0), (0, 1, 1.0)], &[2.0])?
///     .with_bounds(&[0.0, 0.0], &[1e20, 1e20])?;
/// let mut ipm = InteriorPoint::new(&q, &InteriorPointOptions::default())?;
/// let s = ipm.solve(&q)?;
/// assert!((s.x[0] - 1.0).abs() < 1e-8 && (s.z[0] - 1.0).abs() < 1e-8);
/// assert!(s.duality_gap.abs() < 1e-8);
/// assert_eq!(s.verdict, Some(Verdict::Minimizer));
/// assert_eq!(s.active_inequalities, vec![0]);
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Debug)]
pub struct InteriorPoint {
    options: InteriorPointOptions,
    layout: Layout,
    pattern: StepPattern,
    /// Two step problems used in turn, so that the one being filled is never held by the
    /// factorization (then the fill writes in place: no allocation).
    bufs: [Problem; 2],
    cur: usize,
    fact: Factorization,
    ws: Workspace,
    kkt_out: Solution,
    n: usize,
    m: usize,
    v: Vectors,
    analyze_s: f64,
    noted_steps: usize,
}

/// Scratch vectors of one solve (sizes fixed at construction).
#[derive(Debug)]
struct Vectors {
    x: Vec<f64>,
    y: Vec<f64>,
    s: Vec<f64>,
    z: Vec<f64>,
    r: Vec<f64>,
    cx: Vec<f64>,
    rd: Vec<f64>,
    rp: Vec<f64>,
    ri: Vec<f64>,
    d: Vec<f64>,
    rc: Vec<f64>,
    tmp_k: Vec<f64>,
    cstep: Vec<f64>,
    bstep: Vec<f64>,
    dx: Vec<f64>,
    dy: Vec<f64>,
    ds: Vec<f64>,
    dz: Vec<f64>,
    ds_aff: Vec<f64>,
    dz_aff: Vec<f64>,
    hx: Vec<f64>,
    tn: Vec<f64>,
    tm: Vec<f64>,
}

impl Vectors {
    fn new(n: usize, m: usize, k: usize) -> Self {
        let v = |len: usize| vec![0.0; len];
        Vectors {
            x: v(n),
            y: v(m),
            s: v(k),
            z: v(k),
            r: v(k),
            cx: v(k),
            rd: v(n),
            rp: v(m),
            ri: v(k),
            d: v(k),
            rc: v(k),
            tmp_k: v(k),
            cstep: v(n),
            bstep: v(m),
            dx: v(n),
            dy: v(m),
            ds: v(k),
            dz: v(k),
            ds_aff: v(k),
            dz_aff: v(k),
            hx: v(n),
            tn: v(n),
            tm: v(m),
        }
    }
}

/// Largest `α ∈ (0, 1]` with `v + α dv ≥ 0`.
fn max_step(v: &[f64], dv: &[f64]) -> f64 {
    v.iter()
        .zip(dv)
        .filter(|(_, d)| **d < 0.0)
        .fold(1.0f64, |a, (vi, di)| a.min(-vi / di))
}

impl InteriorPoint {
    /// Analyzes the structure of `q` (the pattern of `H + GᵀDG + diag` with `A`), factors
    /// the convexity check `[H + εI, Aᵀ; A, 0]` ([`CONVEXITY_SHIFT`]) and allocates every
    /// buffer a solve needs. Errors: [`Error::Nonconvex`] when that check shows negative
    /// curvature on `null(A)`, [`Error::Singular`] when the equality rows are dependent,
    /// [`Error::InvalidOption`] when the chosen method observes no inertia.
    pub fn new(q: &InequalityProblem, options: &InteriorPointOptions) -> Result<Self> {
        let t = Instant::now();
        let layout = Layout::of(q);
        let (pattern, step) = StepPattern::new(q, &layout)?;
        let (n, m, k) = (q.n(), q.m(), layout.count());
        let mut bufs = [step.clone(), step];
        // A deep copy for the second buffer (the clone shares the blocks).
        bufs[1].h = std::sync::Arc::new((*bufs[0].h).clone());
        bufs[1].norm_k = std::sync::Arc::new(std::sync::OnceLock::new());
        let shift = CONVEXITY_SHIFT * q.base.hessian().max_abs().max(1.0);
        let zeros = vec![0.0; k];
        pattern.fill(q, &layout, &zeros, shift, &mut bufs[0]);
        // The Newton systems of an interior-point method grow ill-conditioned near the
        // solution by design (the barrier terms z/s spread over many orders); an inexact
        // step costs iterations, not trust, because the answer is accepted by its own
        // residuals, complementarity and duality gap. So the inner solves are accepted by
        // the backward error alone, never refused for their forward-error bound.
        let inner = Options {
            accept_forward_error: f64::INFINITY,
            ..options.kkt
        };
        let plan = Plan::analyze(&bufs[0], &inner)?;
        let fact = plan.factor(&bufs[0])?;
        let Some(inertia) = fact.inertia() else {
            return Err(Error::InvalidOption(format!(
                "the inequality solver needs the inertia of its KKT matrices (convexity check), \
                 which the method {} does not observe; choose a direct method",
                fact.backend().method()
            )));
        };
        if inertia.negative > m {
            return Err(Error::Nonconvex {
                inertia: Some(inertia),
                detail: format!(
                    "the KKT matrix [H + εI, Aᵀ; A, 0] (ε = {shift:.1e}) has inertia {inertia}, more than m = {m} \
                     negative eigenvalues: H has negative curvature on the null space of A"
                ),
            });
        }
        if inertia.zero > 0 {
            return Err(Error::Singular {
                inertia,
                detail: format!(
                    "with H shifted by ε = {shift:.1e} the KKT matrix stays singular: the equality rows of A are \
                     linearly dependent; remove the redundant rows before adding inequalities"
                ),
            });
        }
        let ws = fact.workspace();
        let kkt_out = Solution::empty(n, m, fact.backend().method());
        Ok(InteriorPoint {
            options: *options,
            layout,
            pattern,
            bufs,
            cur: 0,
            fact,
            ws,
            kkt_out,
            n,
            m,
            v: Vectors::new(n, m, k),
            analyze_s: t.elapsed().as_secs_f64(),
            noted_steps: 0,
        })
    }

    /// The method that factors the Newton steps.
    pub fn method(&self) -> MethodUsed {
        self.fact.backend().method()
    }

    /// Newton solves (since construction) that came back from the pipeline with notes, for
    /// example a backward error that stayed above `1e3·ε` after refinement (each such note
    /// is a heap allocation of the pipeline).
    pub fn noted_steps(&self) -> usize {
        self.noted_steps
    }

    /// Seconds spent in [`new`](Self::new) (analysis and convexity check).
    pub fn analyze_seconds(&self) -> f64 {
        self.analyze_s
    }

    /// An empty solution of the right sizes for [`solve_into`](Self::solve_into).
    pub fn empty_solution(&self, q: &InequalityProblem) -> InequalitySolution {
        InequalitySolution::empty(self.n, self.m, q.p(), self.method())
    }

    /// Cold solve (allocates the solution).
    pub fn solve(&mut self, q: &InequalityProblem) -> Result<InequalitySolution> {
        let mut out = self.empty_solution(q);
        self.solve_into(q, None, &mut out)?;
        Ok(out)
    }

    /// Solve from a starting point (`start`: a previous solution of a problem of the same
    /// sizes, for example shifted by one stage with [`super::shift_stages`]; `None`: cold
    /// start) into `out`. With [`InteriorPointOptions::verdict`] off, no notes and `out` of
    /// the right sizes, this allocates nothing (the steady state of a control loop).
    pub fn solve_into(
        &mut self,
        q: &InequalityProblem,
        start: Option<&InequalitySolution>,
        out: &mut InequalitySolution,
    ) -> Result<()> {
        let t0 = Instant::now();
        if Layout::differs(q, &self.layout) || q.n() != self.n || q.m() != self.m {
            return Err(Error::StructureChanged {
                detail: "the inequality solver was built for other sizes or another set of finite bounds and rows of h"
                    .to_string(),
            });
        }
        let (n, m, k) = (self.n, self.m, self.layout.count());
        let opts = self.options;
        let v = &mut self.v;
        self.layout.rhs(q, &mut v.r);
        // Starting point.
        match start {
            Some(st) if st.x.len() == n && st.y.len() == m && st.z.len() == q.p() && st.w.len() == n => {
                v.x.copy_from_slice(&st.x);
                v.y.copy_from_slice(&st.y);
                stack_multipliers(&self.layout, &st.z, &st.w, &mut v.z);
                let floor = opts.warm_floor;
                v.z.iter_mut().for_each(|zi| *zi = zi.max(floor));
                self.layout.c_mul(q, &v.x, &mut v.cx);
                for ((s, r), cx) in v.s.iter_mut().zip(&v.r).zip(&v.cx) {
                    *s = (r - cx).max(floor);
                }
            }
            _ => {
                v.x.iter_mut().for_each(|x| *x = 0.0);
                v.y.iter_mut().for_each(|y| *y = 0.0);
                // Inside the box where both bounds exist, else on the finite bound's side.
                for j in 0..n {
                    let (lo, hi) = (q.lo[j], q.hi[j]);
                    let (fl, fh) = (!super::problem::no_lower(lo), !super::problem::no_upper(hi));
                    v.x[j] = match (fl, fh) {
                        (true, true) => 0.5 * (lo + hi),
                        (true, false) => lo.max(0.0) + if lo >= 0.0 { 1.0 } else { 0.0 },
                        (false, true) => hi.min(0.0) - if hi <= 0.0 { 1.0 } else { 0.0 },
                        (false, false) => 0.0,
                    };
                }
                self.layout.c_mul(q, &v.x, &mut v.cx);
                for ((s, r), cx) in v.s.iter_mut().zip(&v.r).zip(&v.cx) {
                    *s = (r - cx).max(1.0);
                }
                v.z.iter_mut().for_each(|z| *z = 1.0);
            }
        }
        let base = &q.base;
        let c = base.linear();
        let b = base.rhs();
        let norm_b = inf_norm(b);
        let norm_r = v.r.iter().fold(0.0f64, |a, x| a.max(x.abs()));
        let norm_c = inf_norm(c);
        let mut iterations = 0;
        let mut factor_s = 0.0;
        let mut last_dir_ok = false;
        loop {
            let v = &mut self.v;
            // Residuals at the current point.
            self.layout.c_mul(q, &v.x, &mut v.cx);
            v.hx.iter_mut().for_each(|x| *x = 0.0);
            base.hessian().mul_add(&v.x, &mut v.hx);
            v.rd.copy_from_slice(&v.hx);
            v.rd.iter_mut().zip(c).for_each(|(r, ci)| *r += ci);
            base.constraints().tr_mul_add(&v.y, &mut v.rd);
            self.layout.c_tr_add(q, &v.z, &mut v.rd);
            v.rp.iter_mut().zip(b).for_each(|(r, bi)| *r = -bi);
            base.constraints().mul_add(&v.x, &mut v.rp);
            for (((ri, cx), s), r) in v.ri.iter_mut().zip(&v.cx).zip(&v.s).zip(&v.r) {
                *ri = cx + s - r;
            }
            let sz = dot(&v.s, &v.z);
            let mu = if k > 0 { sz / k as f64 } else { 0.0 };
            let objective = 0.5 * dot(&v.x, &v.hx) + dot(c, &v.x);
            let pres = (inf_norm(&v.rp) / (1.0 + norm_b)).max(inf_norm(&v.ri) / (1.0 + norm_r));
            let dual_scale = 1.0 + norm_c.max(inf_norm(&v.hx));
            let dres = inf_norm(&v.rd) / dual_scale;
            let gap_rel = sz / (1.0 + objective.abs());
            if pres <= opts.tolerance && dres <= opts.tolerance && gap_rel <= opts.tolerance {
                break;
            }
            // Infeasibility: (y, z) with Aᵀy + Cᵀz ≈ 0, z ≥ 0, bᵀy + rᵀz < 0.
            if iterations > 0 {
                if let Some(cert) = self.farkas(q) {
                    return Err(cert);
                }
            }
            // Unboundedness: the last Newton direction is a recession direction of descent.
            if last_dir_ok && pres <= opts.tolerance.sqrt() {
                if let Some(err) = self.unbounded_direction(q) {
                    return Err(err);
                }
            }
            if iterations >= opts.max_iterations {
                return Err(Error::InteriorPointNotConverged {
                    iterations,
                    primal_residual: pres,
                    dual_residual: dres,
                    complementarity: mu,
                    detail: format!("iteration limit {} reached", opts.max_iterations),
                });
            }
            let v = &mut self.v;
            iterations += 1;
            // Newton matrix H + Cᵀ D C, D = z/s.
            for ((d, z), s) in v.d.iter_mut().zip(&v.z).zip(&v.s) {
                *d = z / s;
            }
            self.cur = 1 - self.cur;
            self.pattern.fill(q, &self.layout, &v.d, 0.0, &mut self.bufs[self.cur]);
            let tf = Instant::now();
            self.fact.refactor(&self.bufs[self.cur])?;
            factor_s += tf.elapsed().as_secs_f64();
            if let Some(inertia) = self.fact.inertia() {
                // Only an inertia observed without forced pivots is evidence here: on the
                // ill-conditioned late Newton matrices the sparse backend's confirmation of a
                // regularized inertia was seen to be wrong (a convex problem reported with
                // one negative eigenvalue too many).
                if inertia.negative > m && self.fact.backend().regularized_pivots() == 0 {
                    return Err(Error::Nonconvex {
                        inertia: Some(inertia),
                        detail: format!(
                            "the Newton matrix [H + GᵀDG + D, Aᵀ; A, 0] of iteration {iterations} has inertia {inertia}: \
                             H has negative curvature on the null space of A"
                        ),
                    });
                }
            }
            // Predictor (affine scaling): r_c = s∘z.
            for ((rc, s), z) in v.rc.iter_mut().zip(&v.s).zip(&v.z) {
                *rc = s * z;
            }
            if let Err(e) = self.newton(q) {
                return Err(self.diverged(q, e));
            }
            let v = &mut self.v;
            let alpha_aff = max_step(&v.s, &v.ds).min(max_step(&v.z, &v.dz));
            let mu_aff = if k > 0 {
                v.s.iter()
                    .zip(&v.ds)
                    .zip(v.z.iter().zip(&v.dz))
                    .map(|((s, ds), (z, dz))| (s + alpha_aff * ds) * (z + alpha_aff * dz))
                    .sum::<f64>()
                    / k as f64
            } else {
                0.0
            };
            let sigma = if mu > 0.0 {
                (mu_aff / mu).clamp(0.0, 1.0).powi(3)
            } else {
                0.0
            };
            v.ds_aff.copy_from_slice(&v.ds);
            v.dz_aff.copy_from_slice(&v.dz);
            // Corrector: r_c = s∘z + ds_aff∘dz_aff − σμ.
            for i in 0..k {
                v.rc[i] = v.s[i] * v.z[i] + v.ds_aff[i] * v.dz_aff[i] - sigma * mu;
            }
            if let Err(e) = self.newton(q) {
                return Err(self.diverged(q, e));
            }
            let v = &mut self.v;
            let alpha_max = max_step(&v.s, &v.ds).min(max_step(&v.z, &v.dz));
            let tau = opts.step_to_boundary.max(1.0 - mu).min(1.0 - f64::EPSILON);
            let alpha = if alpha_max >= 1.0 && k == 0 {
                1.0
            } else {
                (tau * alpha_max).min(1.0)
            };
            for (x, dx) in v.x.iter_mut().zip(&v.dx) {
                *x += alpha * dx;
            }
            for (y, dy) in v.y.iter_mut().zip(&v.dy) {
                *y += alpha * dy;
            }
            for (s, ds) in v.s.iter_mut().zip(&v.ds) {
                *s += alpha * ds;
            }
            for (z, dz) in v.z.iter_mut().zip(&v.dz) {
                *z += alpha * dz;
            }
            last_dir_ok = v.dx.iter().all(|d| d.is_finite());
            if v.x.iter().chain(&v.z).any(|t| !t.is_finite()) {
                return Err(Error::InteriorPointNotConverged {
                    iterations,
                    primal_residual: pres,
                    dual_residual: dres,
                    complementarity: mu,
                    detail: "the iterates overflowed".to_string(),
                });
            }
        }
        self.finish(q, out, iterations, factor_s, t0)?;
        Ok(())
    }

    /// Solves one Newton system for the current `v.rc`; leaves `dx, dy, ds, dz`.
    fn newton(&mut self, q: &InequalityProblem) -> Result<()> {
        let v = &mut self.v;
        // cstep = r_d + Cᵀ(D r_i − S⁻¹ r_c); bstep = −r_p.
        for i in 0..v.tmp_k.len() {
            v.tmp_k[i] = v.d[i] * v.ri[i] - v.rc[i] / v.s[i];
        }
        v.cstep.copy_from_slice(&v.rd);
        self.layout.c_tr_add(q, &v.tmp_k, &mut v.cstep);
        for (bs, rp) in v.bstep.iter_mut().zip(&v.rp) {
            *bs = -rp;
        }
        self.fact
            .solve_into(&v.cstep, &v.bstep, &mut self.ws, &mut self.kkt_out)?;
        if !self.kkt_out.notes.is_empty() {
            self.noted_steps += 1;
        }
        v.dx.copy_from_slice(&self.kkt_out.x);
        v.dy.copy_from_slice(&self.kkt_out.y);
        // ds = −r_i − C dx;  dz = D(C dx + r_i) − S⁻¹ r_c.
        self.layout.c_mul(q, &v.dx, &mut v.tmp_k);
        for i in 0..v.ds.len() {
            let cdx = v.tmp_k[i];
            v.ds[i] = -v.ri[i] - cdx;
            v.dz[i] = v.d[i] * (cdx + v.ri[i]) - v.rc[i] / v.s[i];
        }
        Ok(())
    }

    /// A Farkas certificate from the current multipliers, when they prove infeasibility.
    fn farkas(&mut self, q: &InequalityProblem) -> Option<Error> {
        let v = &mut self.v;
        let scale = inf_norm(&v.y).max(inf_norm(&v.z));
        if scale.is_nan() || scale <= 0.0 || !scale.is_finite() {
            return None;
        }
        let value = (dot(q.base.rhs(), &v.y) + dot(&v.r, &v.z)) / scale;
        if value >= 0.0 {
            return None;
        }
        // t = (Aᵀy + Cᵀz) / scale.
        v.tn.iter_mut().for_each(|t| *t = 0.0);
        q.base.constraints().tr_mul_add(&v.y, &mut v.tn);
        self.layout.c_tr_add(q, &v.z, &mut v.tn);
        let residual = inf_norm(&v.tn) / scale;
        let radius = if residual == 0.0 {
            f64::INFINITY
        } else {
            -value / residual
        };
        let x1: f64 = v.x.iter().map(|x| x.abs()).sum();
        if radius < INFEASIBILITY_RADIUS_FACTOR * (1.0 + x1) {
            return None;
        }
        let (mut z, mut w) = (vec![0.0; q.p()], vec![0.0; q.n()]);
        let zs: Vec<f64> = v.z.iter().map(|t| t / scale).collect();
        self.layout.split(&zs, &mut z, &mut w);
        let y: Vec<f64> = v.y.iter().map(|t| t / scale).collect();
        let cert = FarkasCertificate::new(q, y, z, w);
        let detail = format!(
            "Farkas certificate (y, z, w): z ≥ 0, ‖Aᵀy + Gᵀz + w‖∞ = {:.2e}, bᵀy + hᵀz + Σ bound terms = {:.3e} < 0, \
             so no point with ‖x‖₁ < {:.2e} satisfies the constraints",
            cert.residual, cert.value, cert.radius
        );
        Some(Error::InfeasibleInequalities {
            certificate: Box::new(cert),
            detail,
        })
    }

    /// A Newton solve that failed because the iterate left double range (the objective or
    /// the point overflowed) is read as divergence: when the last accepted direction is a
    /// verified recession direction of descent the answer is `Unbounded`, else the error
    /// itself.
    fn diverged(&mut self, q: &InequalityProblem, e: Error) -> Error {
        match e {
            Error::Overflow { .. } => self.unbounded_direction(q).unwrap_or(e),
            e => e,
        }
    }

    /// The last Newton direction as a certificate of unboundedness, when it is one (checked
    /// in the scratch vectors: no allocation unless it is accepted).
    fn unbounded_direction(&mut self, q: &InequalityProblem) -> Option<Error> {
        let v = &mut self.v;
        let norm = inf_norm(&v.dx);
        if norm.is_nan() || norm <= 0.0 {
            return None;
        }
        // Everything below is for dx; divided by ‖dx‖∞ it is for d = dx / ‖dx‖∞.
        let slope = dot(q.base.linear(), &v.dx);
        if slope >= 0.0 {
            return None;
        }
        let tol = UNBOUNDED_DIRECTION_TOL * slope.abs();
        v.tn.iter_mut().for_each(|t| *t = 0.0);
        q.base.hessian().mul_add(&v.dx, &mut v.tn);
        v.tm.iter_mut().for_each(|t| *t = 0.0);
        q.base.constraints().mul_add(&v.dx, &mut v.tm);
        self.layout.c_mul(q, &v.dx, &mut v.tmp_k);
        if inf_norm(&v.tn) > tol || inf_norm(&v.tm) > tol || v.tmp_k.iter().any(|t| *t > tol) {
            return None;
        }
        let d: Vec<f64> = v.dx.iter().map(|t| t / norm).collect();
        let slope = slope / norm;
        let n2 = crate::problem::norm2(&d);
        let direction: Vec<f64> = d.iter().map(|t| t / n2).collect();
        let slope = slope / n2;
        Some(Error::Unbounded {
            detail: format!(
                "along the returned direction d (‖d‖₂ = 1) Ad = 0, Hd = 0, Gd ≤ 0 and d stays within the bounds, while \
                 cᵀd = {slope:.3e} < 0: the objective decreases without bound from any feasible point"
            ),
            direction,
            slope,
        })
    }

    fn finish(
        &mut self,
        q: &InequalityProblem,
        out: &mut InequalitySolution,
        iterations: usize,
        factor_s: f64,
        t0: Instant,
    ) -> Result<()> {
        let (n, m, p) = (self.n, self.m, q.p());
        let v = &mut self.v;
        out.x.resize(n, 0.0);
        out.y.resize(m, 0.0);
        out.z.resize(p, 0.0);
        out.w.resize(n, 0.0);
        out.x.copy_from_slice(&v.x);
        out.y.copy_from_slice(&v.y);
        self.layout.split(&v.z, &mut out.z, &mut out.w);
        let base = &q.base;
        // Residuals of the returned point with the user's blocks.
        v.hx.iter_mut().for_each(|t| *t = 0.0);
        base.hessian().mul_add(&v.x, &mut v.hx);
        out.objective = 0.5 * dot(&v.x, &v.hx) + dot(base.linear(), &v.x);
        v.tn.copy_from_slice(&v.hx);
        v.tn.iter_mut().zip(base.linear()).for_each(|(t, c)| *t += c);
        base.constraints().tr_mul_add(&v.y, &mut v.tn);
        self.layout.c_tr_add(q, &v.z, &mut v.tn);
        out.dual_residual = inf_norm(&v.tn);
        v.tm.iter_mut().zip(base.rhs()).for_each(|(t, b)| *t = -b);
        base.constraints().mul_add(&v.x, &mut v.tm);
        out.primal_residual = inf_norm(&v.tm);
        // Constraint gaps g = r − Cx (≥ 0 when feasible).
        self.layout.c_mul(q, &v.x, &mut v.cx);
        let mut viol = 0.0f64;
        let mut compl = 0.0f64;
        let mut zg = 0.0;
        for i in 0..v.cx.len() {
            let g = v.r[i] - v.cx[i];
            viol = viol.max(-g);
            compl = compl.max((v.z[i] * g).abs());
            zg += v.z[i] * g;
        }
        out.inequality_violation = viol;
        out.complementarity = compl;
        // Lagrangian at (x, y, z): f + yᵀ(Ax − b) + zᵀ(Cx − r).
        out.dual_value = out.objective + dot(&v.y, &v.tm) - zg;
        out.duality_gap = out.objective - out.dual_value;
        // Active set: the larger of gap and multiplier decides (common practice).
        out.active_inequalities.clear();
        out.active_lower.clear();
        out.active_upper.clear();
        let (ng, nl) = (self.layout.g_rows.len(), self.layout.lower.len());
        for (k, (&s, &z)) in v.s.iter().zip(&v.z).enumerate() {
            if z > s {
                if k < ng {
                    out.active_inequalities.push(self.layout.g_rows[k]);
                } else if k < ng + nl {
                    out.active_lower.push(self.layout.lower[k - ng]);
                } else {
                    out.active_upper.push(self.layout.upper[k - ng - nl]);
                }
            }
        }
        out.iterations = iterations;
        out.method = self.fact.backend().method();
        out.factor_seconds = factor_s;
        out.notes.clear();
        out.verdict = None;
        if self.options.verdict {
            out.verdict = active_set_verdict(q, out)?;
            if out.verdict.is_none() {
                out.notes.push(
                    "verdict withheld: the KKT matrix of the active constraints is singular (a degenerate active set \
                     or a flat direction); the point is a global minimizer of this convex problem but its uniqueness \
                     is not certified"
                        .to_string(),
                );
            }
        }
        out.seconds = t0.elapsed().as_secs_f64();
        Ok(())
    }
}

impl Layout {
    /// True when `q` does not have this layout (its finite bounds and rows changed).
    fn differs(q: &InequalityProblem, layout: &Layout) -> bool {
        let same_g = layout.g_rows.len() == (0..q.p()).filter(|&i| !super::problem::no_upper(q.h[i])).count()
            && layout.g_rows.iter().all(|&i| !super::problem::no_upper(q.h[i]));
        let same_lo = layout.lower.len() == (0..q.n()).filter(|&j| !super::problem::no_lower(q.lo[j])).count()
            && layout.lower.iter().all(|&j| !super::problem::no_lower(q.lo[j]));
        let same_hi = layout.upper.len() == (0..q.n()).filter(|&j| !super::problem::no_upper(q.hi[j])).count()
            && layout.upper.iter().all(|&j| !super::problem::no_upper(q.hi[j]));
        !(same_g && same_lo && same_hi)
    }
}

/// Stacks `z` (rows of G) and `w` (signed bounds) into the multipliers of `C`.
fn stack_multipliers(layout: &Layout, z: &[f64], w: &[f64], out: &mut [f64]) {
    let (ng, nl) = (layout.g_rows.len(), layout.lower.len());
    for (o, &i) in out[..ng].iter_mut().zip(&layout.g_rows) {
        *o = z[i];
    }
    for (o, &j) in out[ng..ng + nl].iter_mut().zip(&layout.lower) {
        *o = (-w[j]).max(0.0);
    }
    for (o, &j) in out[ng + nl..].iter_mut().zip(&layout.upper) {
        *o = w[j].max(0.0);
    }
}

/// `Minimizer` when the KKT matrix of `H` and the active constraints (the rows of `A`, the
/// active rows of `G`, a unit row per active bound) has inertia `(n, m_act, 0)`: the reduced
/// Hessian on the active set is positive definite (second-order sufficient condition), and
/// with the convexity checked the point is the unique global minimizer. `Nonconvex` when it
/// shows negative curvature; `None` when it is singular.
fn active_set_verdict(q: &InequalityProblem, s: &InequalitySolution) -> Result<Option<Verdict>> {
    let n = q.n();
    let mut h = Vec::new();
    q.base.hessian().for_each(|i, j, v| {
        if v != 0.0 {
            h.push((i, j, v));
        }
    });
    let mut rows = Vec::new();
    q.base.constraints().for_each(|i, j, v| {
        if v != 0.0 {
            rows.push((i, j, v));
        }
    });
    let mut m_act = q.m();
    for &i in &s.active_inequalities {
        for (j, v) in q.g.row(i) {
            rows.push((m_act, j, v));
        }
        m_act += 1;
    }
    for &j in s.active_lower.iter().chain(&s.active_upper) {
        rows.push((m_act, j, 1.0));
        m_act += 1;
    }
    if m_act > n {
        return Ok(None);
    }
    let p = ProblemBuilder::new()
        .hessian_triplets(n, &h, Triangle::Full)
        .constraints_triplets(m_act, n, &rows)
        .build()?;
    let opts = Options {
        method: Method::Auto,
        ..Default::default()
    };
    let plan = Plan::analyze(&p, &opts)?;
    let f = match plan.factor(&p) {
        Ok(f) => f,
        Err(_) => return Ok(None),
    };
    match f.verdict() {
        Ok(Some(Verdict::Minimizer)) => {
            // The rescue of a singular K may drop dependent active rows: still a minimizer.
            Ok(Some(Verdict::Minimizer))
        }
        Ok(Some(Verdict::Saddle)) => Err(Error::Nonconvex {
            inertia: f.inertia(),
            detail: format!(
                "the KKT matrix of the {m_act} active constraints has inertia {}: negative curvature along \
                 directions the active constraints allow, so the point is not a minimizer",
                f.inertia().map_or("unknown".to_string(), |i| i.to_string())
            ),
        }),
        _ => Ok(None),
    }
}
