//! Inequality constraints and bounds on top of the KKT engine:
//!
//! ```text
//! minimize ½xᵀHx + cᵀx   subject to   Ax = b,   Gx ≤ h,   lo ≤ x ≤ hi
//! ```
//!
//! for `H` positive semidefinite on the null space of `A` (convex problems; a nonconvex one
//! is refused with [`Error::Nonconvex`](crate::Error::Nonconvex)).
//!
//! ## Conventions
//!
//! * Lagrangian `L = ½xᵀHx + cᵀx + yᵀ(Ax − b) + zᵀ(Gx − h) + Σⱼ w⁺ⱼ(xⱼ − hiⱼ) − w⁻ⱼ(xⱼ − loⱼ)`,
//!   so at the solution **`Hx + c + Aᵀy + Gᵀz + w = 0`**, `z ≥ 0`, and the signed bound
//!   multiplier `wⱼ` is **positive at an active upper bound, negative at an active lower
//!   bound**, zero when neither is active (the convention of the equality solver,
//!   `∂f*/∂b = −y`, carries over; likewise `∂f*/∂h = −z`).
//! * `|v| ≥` [`NO_BOUND`] (`1e20`, or infinite) in `h`, `lo`, `hi` means "no constraint"
//!   (common practice). `loⱼ = hiⱼ` is refused: fix a variable with a row of `A`.
//! * Answer and certificate ([`InequalitySolution`]): `x, y, z, w`; the primal residual
//!   `‖Ax − b‖∞`, the largest violation of `Gx ≤ h` and the bounds, the dual residual
//!   `‖Hx + c + Aᵀy + Gᵀz + w‖∞`, the complementarity `maxₖ zₖ·|gapₖ|`, the value of the
//!   Lagrangian dual function at `(y, z, w)` and the duality gap `f(x) − dual`. For a convex
//!   problem and `Hx + c + Aᵀy + Gᵀz + w = 0` the dual value is a lower bound on the optimum
//!   (weak duality: it is the minimum of `L(·, y, z, w)` over `Ax = b`); with the reported
//!   dual residual `ε_d` it is exactly that bound for the problem whose `c` is changed by at
//!   most `ε_d` in each entry.
//! * Verdict: [`Verdict::Minimizer`](crate::Verdict::Minimizer) when the KKT matrix of `H`
//!   and the active constraints (rows of `A`, active rows of `G`, unit rows of active
//!   bounds) has inertia `(n, m_act, 0)`: the reduced Hessian on the active set is positive
//!   definite, so (convexity being checked) the point is the unique global minimizer. A
//!   constraint counts as active when its multiplier exceeds its slack (common practice for
//!   interior-point methods).
//!
//! ## Outcomes without a solution
//!
//! * infeasible ([`Error::InfeasibleInequalities`](crate::Error::InfeasibleInequalities)):
//!   a Farkas certificate (Boyd & Vandenberghe 2004, §5.8), see [`FarkasCertificate`];
//! * unbounded ([`Error::Unbounded`](crate::Error::Unbounded)): a direction `d` with
//!   `Ad = 0`, `Hd = 0`, `Gd ≤ 0`, `d` within the recession cone of the bounds, `cᵀd < 0`;
//! * not converged
//!   ([`Error::InteriorPointNotConverged`](crate::Error::InteriorPointNotConverged)) with the
//!   residuals reached;
//! * nonconvex ([`Error::Nonconvex`](crate::Error::Nonconvex)): negative curvature on
//!   `null(A)`, seen in the inertia of `[H + εI, Aᵀ; A, 0]` before the first iteration
//!   ([`ipm::CONVEXITY_SHIFT`]), of a Newton matrix, or of the active-set KKT matrix.
//!
//! ## Method
//!
//! A primal-dual interior-point method with Mehrotra's predictor–corrector (Mehrotra 1992;
//! Wright, "Primal-Dual Interior-Point Methods", 1997). Each Newton step eliminates the
//! slacks and inequality multipliers into `H + Gᵀ D_G G + D_lo + D_hi` (`D = z/s`), keeping
//! `A`: a KKT matrix of a **fixed pattern**, analyzed once by [`Plan::analyze`](crate::Plan)
//! and refactored by [`Factorization::refactor`](crate::Factorization::refactor) each
//! iteration, two solves per iteration (predictor and corrector), each refined and
//! certified by the pipeline. On stage-wise problems with stage-wise bounds and stage-local
//! rows of `G` the Newton matrix keeps the stage structure, so
//! [`Method::Riccati`](crate::Method::Riccati) with `Options::stages` runs each step in
//! `O(N)`.
//!
//! Why an interior-point method and no active-set method: the interior-point iteration
//! count hardly depends on the number of active constraints (about 10–25 on the tests and
//! benchmarks here), and each iteration is exactly the operation the crate is built for
//! (refactor on a fixed pattern). An active-set method changes the pattern of its KKT
//! matrix with every change of the active set and would need factorization updates that the
//! backends do not offer; it was not implemented, so no measurement compares the two
//! (see the README for the figures of this method).
//!
//! ## Limitations (current state)
//!
//! Warm starts ([`InteriorPoint::solve_into`] with a start, [`shift_stages`]) help less
//! than in active-set methods: the start is pushed back into the interior by
//! [`InteriorPointOptions::warm_floor`]. The equality rows must be linearly independent.

pub mod demo;
mod io;
pub mod ipm;
mod problem;
pub mod report;
pub mod stagewise;
mod step;

pub use io::{read_inequalities, write_multipliers, INEQUALITY_FILES};
pub use ipm::InteriorPoint;
pub use problem::{InequalityProblem, NO_BOUND};
pub use step::MAX_STEP_PRODUCTS;

use crate::solution::{MethodUsed, Verdict};
use crate::solver::Options;

/// Default tolerance of the relative primal and dual residuals and of the relative
/// complementarity `sᵀz / (1 + |f|)`: `1e-9`.
pub const DEFAULT_TOLERANCE: f64 = 1e-9;
/// Default iteration limit: 100.
pub const DEFAULT_MAX_ITERATIONS: usize = 100;

/// Settings of the interior-point method (public fields, `..Default::default()` friendly).
#[derive(Copy, Clone, Debug)]
pub struct InteriorPointOptions {
    /// Options of the KKT pipeline that factors each Newton step (method, stages for
    /// [`Method::Riccati`](crate::Method::Riccati), refinement). Default: `Options::default()`.
    pub kkt: Options,
    /// Tolerance on the relative residuals and complementarity. Default: [`DEFAULT_TOLERANCE`].
    pub tolerance: f64,
    /// Iteration limit. Default: [`DEFAULT_MAX_ITERATIONS`].
    pub max_iterations: usize,
    /// Fraction of the step to the boundary of `s, z ≥ 0` taken (at least; it grows towards
    /// 1 as the complementarity falls). Default: 0.995 (common practice).
    pub step_to_boundary: f64,
    /// Slacks and multipliers of a warm start are raised to at least this. Default: 1e-3.
    pub warm_floor: f64,
    /// Compute the verdict (one factorization of the active-set KKT matrix; allocates).
    /// Default: `true`.
    pub verdict: bool,
}

impl Default for InteriorPointOptions {
    fn default() -> Self {
        InteriorPointOptions {
            kkt: Options::default(),
            tolerance: DEFAULT_TOLERANCE,
            max_iterations: DEFAULT_MAX_ITERATIONS,
            step_to_boundary: 0.995,
            warm_floor: 1e-3,
            verdict: true,
        }
    }
}

/// The answer of the inequality solver and its certificate (see the module docs for the
/// conventions).
#[derive(Clone, Debug)]
pub struct InequalitySolution {
    /// The point.
    pub x: Vec<f64>,
    /// Multipliers of `Ax = b`.
    pub y: Vec<f64>,
    /// Multipliers of `Gx ≤ h` (≥ 0; zero for rows without a finite `h`).
    pub z: Vec<f64>,
    /// Signed bound multipliers: `> 0` at an active upper bound, `< 0` at an active lower one.
    pub w: Vec<f64>,
    /// `½xᵀHx + cᵀx`.
    pub objective: f64,
    /// The Lagrangian dual function at `(y, z, w)` (a lower bound on the optimum, see the
    /// module docs).
    pub dual_value: f64,
    /// `objective − dual_value`.
    pub duality_gap: f64,
    /// `maxₖ zₖ·|gapₖ|` over the inequalities and bounds (`gap = h − Gx`, `x − lo`, `hi − x`).
    pub complementarity: f64,
    /// `‖Ax − b‖∞`.
    pub primal_residual: f64,
    /// Largest violation of `Gx ≤ h` and of the bounds (0 when satisfied).
    pub inequality_violation: f64,
    /// `‖Hx + c + Aᵀy + Gᵀz + w‖∞`.
    pub dual_residual: f64,
    /// Interior-point iterations (each: one refactorization and two solves).
    pub iterations: usize,
    /// Verdict of the active-set inertia (`None` when not computed or not certified).
    pub verdict: Option<Verdict>,
    /// Rows of `G` found active (0-based).
    pub active_inequalities: Vec<usize>,
    /// Variables at their lower bound.
    pub active_lower: Vec<usize>,
    /// Variables at their upper bound.
    pub active_upper: Vec<usize>,
    /// The method that factored the Newton steps.
    pub method: MethodUsed,
    /// Seconds of the whole solve.
    pub seconds: f64,
    /// Seconds spent refactoring the Newton matrices.
    pub factor_seconds: f64,
    /// Remarks (verdict withheld, …).
    pub notes: Vec<String>,
}

impl InequalitySolution {
    /// A solution of the given sizes, all zero, with room for every active constraint.
    pub fn empty(n: usize, m: usize, p: usize, method: MethodUsed) -> Self {
        InequalitySolution {
            x: vec![0.0; n],
            y: vec![0.0; m],
            z: vec![0.0; p],
            w: vec![0.0; n],
            objective: 0.0,
            dual_value: 0.0,
            duality_gap: 0.0,
            complementarity: 0.0,
            primal_residual: 0.0,
            inequality_violation: 0.0,
            dual_residual: 0.0,
            iterations: 0,
            verdict: None,
            active_inequalities: Vec::with_capacity(p),
            active_lower: Vec::with_capacity(n),
            active_upper: Vec::with_capacity(n),
            method,
            seconds: 0.0,
            factor_seconds: 0.0,
            notes: Vec::with_capacity(1),
        }
    }
}

/// A certificate that `Ax = b, Gx ≤ h, lo ≤ x ≤ hi` has no solution (Farkas' lemma).
///
/// Convention: `z ≥ 0`, `Aᵀy + Gᵀz + w ≈ 0` (up to [`residual`](Self::residual)), and
/// `value = bᵀy + hᵀz + Σⱼ (max(wⱼ, 0)·hiⱼ + min(wⱼ, 0)·loⱼ) < 0` (a positive `wⱼ` only
/// where `hiⱼ` is finite, a negative one only where `loⱼ` is). For a feasible `x`,
/// `0 = xᵀ(Aᵀy + Gᵀz + w) ≤ value` would follow, a contradiction. With a residual
/// `t = Aᵀy + Gᵀz + w ≠ 0` the argument gives `tᵀx ≤ value`, so no feasible point has
/// `‖x‖₁ < radius = −value / ‖t‖∞`. Scaled so that `max(‖y‖∞, ‖z‖∞, ‖w‖∞)` is about 1.
#[derive(Clone, Debug)]
pub struct FarkasCertificate {
    /// Multipliers of `Ax = b` (any sign).
    pub y: Vec<f64>,
    /// Multipliers of `Gx ≤ h` (≥ 0).
    pub z: Vec<f64>,
    /// Signed bound multipliers.
    pub w: Vec<f64>,
    /// `bᵀy + hᵀz + Σ bound terms` (negative).
    pub value: f64,
    /// `‖Aᵀy + Gᵀz + w‖∞`.
    pub residual: f64,
    /// No feasible point has `‖x‖₁` below this.
    pub radius: f64,
}

impl FarkasCertificate {
    /// Computes `value`, `residual` and `radius` of `(y, z, w)` for `q`.
    pub fn new(q: &InequalityProblem, y: Vec<f64>, z: Vec<f64>, w: Vec<f64>) -> Self {
        let mut value: f64 = crate::problem::dot(q.base.rhs(), &y);
        for (i, &zi) in z.iter().enumerate() {
            if zi != 0.0 {
                value += zi * q.h[i];
            }
        }
        for (j, &wj) in w.iter().enumerate() {
            if wj > 0.0 {
                value += wj * q.hi[j];
            } else if wj < 0.0 {
                value += wj * q.lo[j];
            }
        }
        let mut t = q.g_tr_mul(&z);
        q.base.constraints().tr_mul_add(&y, &mut t);
        for (tj, wj) in t.iter_mut().zip(&w) {
            *tj += wj;
        }
        let residual = crate::problem::inf_norm(&t);
        let radius = if residual == 0.0 {
            f64::INFINITY
        } else {
            -value / residual
        };
        FarkasCertificate {
            y,
            z,
            w,
            value,
            residual,
            radius,
        }
    }
}

/// Shifts a solution of a stage-wise problem (layout of [`crate::stagewise`]) by one stage
/// for a receding-horizon warm start: `x`, `w` and the multipliers of the dynamics rows move
/// one stage earlier and the last stage is repeated; the multipliers of `G` move by
/// `p / N` rows when `G` has that many rows per stage (stage order), else they are kept.
pub fn shift_stages(s: &mut InequalitySolution, dims: crate::stagewise::StageDims) {
    let w = dims.width();
    let n = dims.n_vars();
    if dims.horizon == 0 || s.x.len() != n {
        return;
    }
    // new[i] = old[i + width]: x_k ← x_{k+1}, u_k ← u_{k+1}; the last input u_{N−1} and the
    // terminal state x_N keep their old values (the last stage is repeated).
    for v in [&mut s.x, &mut s.w] {
        v.copy_within(w.., 0);
    }
    let rows = dims.n_dynamics_rows();
    if s.y.len() >= rows && dims.nx > 0 {
        s.y.copy_within(dims.nx..rows, 0);
    }
    let p = s.z.len();
    if p > 0 && p % dims.horizon == 0 {
        let per = p / dims.horizon;
        s.z.copy_within(per.., 0);
    }
}
