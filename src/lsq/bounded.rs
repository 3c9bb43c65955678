//! Least squares under inequality restrictions (bounds, nonnegativity, `aᵀβ ≤ u`):
//!
//! ```text
//! minimize ½‖W^½(Fβ − g)‖² + ½λ‖β‖²   subject to   Cβ = d,   aₖᵀβ ≤ uₖ  (or ≥)
//! ```
//!
//! The inequality restrictions come from the restriction syntax
//! ([`restrict`](super::restrict): `b2 >= 0`, `b1 - b3 <= 2`), so `tangency fit DIR
//! --restrict "b2 >= 0"` and [`LsqBuilder::restriction_equations`](super::LsqBuilder)
//! reach this module through [`LsqProblem::fit`](super::LsqProblem::fit).
//!
//! ## Method: find the active set, then fit on it exactly and verify
//!
//! 1. **Active set.** The problem is a convex QP in `β` with `H = FᵀWF + λI` and
//!    `c = −FᵀWg`; the columns are scaled to unit diagonal of `H` (Jacobi scaling, common
//!    practice) and the crate's interior-point method ([`crate::inequality`]) solves it. Its
//!    solution is only as accurate as the normal equations allow (their condition number is
//!    the square of `F`'s), so it is used only to name the restrictions that are active.
//! 2. **Exact fit on the active set.** The active restrictions are added to `C` as equations
//!    and the fit is computed by the equality-restricted method ([`FitMethod`]): QR of `F`,
//!    never `FᵀF`, refined in doubled precision.
//! 3. **Verification** (the certificate). That fit is the answer only if it satisfies the
//!    optimality conditions of the inequality-restricted problem: every inactive restriction
//!    holds (within `FEASIBILITY_TOLERANCE` relative to the size of its terms) and every
//!    active one has a multiplier of the right sign (`z ≥ −`[`SIGN_TOLERANCE`]·scale). For a
//!    convex problem these conditions are sufficient (Karush–Kuhn–Tucker; Nocedal & Wright,
//!    *Numerical Optimization*, 2nd ed., Thm. 16.4). When they fail, the active set is
//!    corrected one restriction at a time (drop the most negative multiplier, else add the
//!    most violated restriction; a primal–dual active-set step) and the fit repeated, at
//!    most [`MAX_CORRECTIONS`] times; a set that still fails is an error, never an answer.
//!
//! ## Multipliers
//!
//! The Lagrangian adds `zₖ(aₖᵀβ − uₖ)` for a restriction written `aₖᵀβ ≤ uₖ` and
//! `zₖ(uₖ − aₖᵀβ)` for one written `aₖᵀβ ≥ uₖ`, with `zₖ ≥ 0` (zero when inactive). So
//! raising the written right-hand side `uₖ` by one unit changes `½·RSS` by `−zₖ` for `≤`
//! and by `+zₖ` for `≥`, to first order.
//!
//! ## Which statistics remain valid
//!
//! * No inequality restriction active: the estimate is the equality-restricted one, and its
//!   σ̂², covariance, standard errors, intervals and tests are reported as usual. They are
//!   valid when the true coefficients lie strictly inside the inequality restrictions (then,
//!   with probability tending to one, none is active; near a boundary they are not).
//! * Some active: the estimator is the projection of the unrestricted one onto a polyhedron,
//!   and its distribution is not normal (it has mass on the boundary); standard errors,
//!   t-values, p-values, intervals and the restriction tests computed as if the active set
//!   had been known in advance would be wrong, so they are **not reported**. Valid are the
//!   estimate, the residuals, RSS, the multipliers (as sensitivities) and the active set.

use faer::Mat;

use super::restrict::{Relation, Restriction};
use super::{Fit, FitOptions, LsqProblem};
use crate::error::{Error, Result};
use crate::inequality::{InequalityProblem, InteriorPoint, InteriorPointOptions};
use crate::problem::{Matrix, ProblemBuilder, Triangle};

/// Largest number of coefficients accepted with inequality restrictions (the active-set
/// search forms the dense n×n matrix `FᵀWF`).
pub const MAX_COEFFICIENTS: usize = 4000;
/// Relative feasibility tolerance of an inactive restriction: `aᵀβ − u ≤ tol·(|u| + Σ|aⱼβⱼ|)`.
pub const FEASIBILITY_TOLERANCE: f64 = 1e-9;
/// Relative tolerance of the sign of an active multiplier: `z ≥ −tol·scale` with `scale`
/// the largest multiplier-sized quantity (`‖FᵀWg‖∞/‖a‖∞`, `max|z|`).
pub const SIGN_TOLERANCE: f64 = 1e-9;
/// Most corrections of the active set after the interior-point guess.
pub const MAX_CORRECTIONS: usize = 50;

/// One inequality restriction at the fitted coefficients.
#[derive(Clone, Debug, PartialEq)]
pub struct InequalityOutcome {
    /// The 1-based line (or item) of the restriction text.
    pub line: usize,
    /// `≤` or `≥` as written.
    pub relation: Relation,
    /// `aᵀβ` at the fit.
    pub value: f64,
    /// The written right-hand side `u`.
    pub rhs: f64,
    /// `z ≥ 0` (see the [module docs](self) for the sign convention); 0 when inactive.
    pub multiplier: f64,
    /// Whether the restriction holds with equality at the fit (it is in the verified active
    /// set).
    pub active: bool,
}

/// The restriction as `Σ a·β ≤ u`.
fn upper(r: &Restriction) -> (Vec<(usize, f64)>, f64) {
    r.as_upper().unwrap_or_else(|| (r.terms.clone(), r.rhs))
}

/// `FᵀWF + λI` (dense, n×n) and `FᵀWg`.
fn normal_equations(pr: &LsqProblem) -> (Mat<f64>, Vec<f64>) {
    let (p, n) = (pr.p(), pr.n());
    let mut rows: Vec<Vec<(usize, f64)>> = vec![Vec::new(); p];
    pr.f.for_each(|i, j, v| rows[i].push((j, v)));
    let mut h = Mat::<f64>::zeros(n, n);
    let mut fg = vec![0.0; n];
    for (i, row) in rows.iter().enumerate() {
        let w = pr.w.as_ref().map_or(1.0, |w| w[i]);
        for &(j, a) in row {
            fg[j] += w * a * pr.g[i];
            for &(k, b) in row {
                h[(j, k)] += w * a * b;
            }
        }
    }
    for j in 0..n {
        h[(j, j)] += pr.ridge;
    }
    (h, fg)
}

/// Step 1: the interior-point guess of the active restrictions (indices into
/// `pr.inequalities`).
fn guess_active(pr: &LsqProblem, h: &Mat<f64>, fg: &[f64]) -> Result<Vec<usize>> {
    let n = pr.n();
    // Jacobi scaling β = Dβ̃: H̃ = DHD, c̃ = Dc, C̃ = CD, ã = Da.
    let dscale: Vec<f64> = (0..n)
        .map(|j| if h[(j, j)] > 0.0 { 1.0 / h[(j, j)].sqrt() } else { 1.0 })
        .collect();
    let mut hs = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..n {
            hs[i * n + j] = dscale[i] * h[(i, j)] * dscale[j];
        }
    }
    let c: Vec<f64> = (0..n).map(|j| -dscale[j] * fg[j]).collect();
    let mut eq = Vec::new();
    pr.c.for_each(|i, j, v| eq.push((i, j, v * dscale[j])));
    let mut builder = ProblemBuilder::new()
        .hessian_row_major(n, &hs, Triangle::Full)
        .linear(&c);
    if pr.q() > 0 {
        builder = builder.constraints_triplets(pr.q(), n, &eq).rhs(&pr.d);
    }
    let base = builder.build()?;
    let mut g = Vec::new();
    let mut h_rhs = Vec::with_capacity(pr.inequalities.len());
    for (k, r) in pr.inequalities.iter().enumerate() {
        let (terms, u) = upper(r);
        g.extend(terms.iter().map(|&(j, v)| (k, j, v * dscale[j])));
        h_rhs.push(u);
    }
    let q = InequalityProblem::new(base).with_inequalities(pr.inequalities.len(), &g, &h_rhs)?;
    let opts = InteriorPointOptions {
        verdict: false,
        ..Default::default()
    };
    let sol = InteriorPoint::new(&q, &opts)?.solve(&q)?;
    Ok(sol.active_inequalities)
}

/// Step 2: the equality-restricted fit with the `active` inequality restrictions added as
/// equations (after the rows of `C`).
fn fit_on(pr: &LsqProblem, active: &[usize], options: &FitOptions) -> Result<Fit> {
    let (q, n) = (pr.q(), pr.n());
    let rows = q + active.len();
    let mut c = Mat::<f64>::zeros(rows, n);
    pr.c.for_each(|i, j, v| c[(i, j)] += v);
    let mut d = pr.d.clone();
    for (r, &k) in active.iter().enumerate() {
        let (terms, u) = upper(&pr.inequalities[k]);
        for (j, v) in terms {
            c[(q + r, j)] += v;
        }
        d.push(u);
    }
    let augmented = LsqProblem {
        c: Matrix::Dense(c),
        d,
        inequalities: Vec::new(),
        ..pr.clone()
    };
    augmented.fit_equalities(options)
}

/// What the verification found wrong with an active set, if anything.
enum Check {
    Optimal,
    /// The active restriction (position in `active`) with the most negative multiplier.
    Drop(usize),
    /// The inactive restriction (index into `pr.inequalities`) most violated.
    Add(usize),
}

fn verify(pr: &LsqProblem, active: &[usize], fit: &Fit, fg_scale: f64) -> Check {
    let q = pr.q();
    let beta = &fit.coefficients;
    let z = &fit.multipliers[q..];
    let zmax = z.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let mut worst_z = (0.0, None);
    for (pos, &k) in active.iter().enumerate() {
        let (terms, _) = upper(&pr.inequalities[k]);
        let anorm = terms
            .iter()
            .fold(0.0f64, |a, &(_, v)| a.max(v.abs()))
            .max(f64::MIN_POSITIVE);
        let tol = SIGN_TOLERANCE * (fg_scale / anorm).max(zmax).max(f64::MIN_POSITIVE);
        if z[pos] < -tol && z[pos] < worst_z.0 {
            worst_z = (z[pos], Some(pos));
        }
    }
    if let Some(pos) = worst_z.1 {
        return Check::Drop(pos);
    }
    let mut worst_v = (0.0, None);
    for k in 0..pr.inequalities.len() {
        if active.contains(&k) {
            continue;
        }
        let (terms, u) = upper(&pr.inequalities[k]);
        let value: f64 = terms.iter().map(|&(j, v)| v * beta[j]).sum();
        let size = u.abs() + terms.iter().map(|&(j, v)| (v * beta[j]).abs()).sum::<f64>();
        let excess = value - u;
        if excess > FEASIBILITY_TOLERANCE * size && excess / size.max(f64::MIN_POSITIVE) > worst_v.0 {
            worst_v = (excess / size.max(f64::MIN_POSITIVE), Some(k));
        }
    }
    match worst_v.1 {
        Some(k) => Check::Add(k),
        None => Check::Optimal,
    }
}

/// Fits under the equality and inequality restrictions of `pr` (see the [module
/// docs](self)).
pub(crate) fn fit(pr: &LsqProblem, options: &FitOptions) -> Result<Fit> {
    let n = pr.n();
    if n > MAX_COEFFICIENTS {
        return Err(Error::InvalidOption(format!(
            "inequality restrictions are supported up to {MAX_COEFFICIENTS} coefficients (the active-set \
             search forms the dense n×n matrix FᵀWF); this fit has {n}"
        )));
    }
    let (h, fg) = normal_equations(pr);
    let fg_scale = fg.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let mut active = guess_active(pr, &h, &fg)?;
    active.sort_unstable();
    let point = FitOptions {
        inference: false,
        ..*options
    };
    let mut corrections = 0;
    let (fit, active) = loop {
        let fit = fit_on(pr, &active, &point)?;
        match verify(pr, &active, &fit, fg_scale) {
            Check::Optimal => break (fit, active),
            _ if corrections == MAX_CORRECTIONS => {
                return Err(Error::InteriorPointNotConverged {
                    iterations: corrections,
                    primal_residual: f64::NAN,
                    dual_residual: f64::NAN,
                    complementarity: f64::NAN,
                    detail: format!(
                        "the active set of the inequality restrictions could not be verified after \
                         {MAX_CORRECTIONS} corrections (an inactive restriction stays violated or an \
                         active one keeps a multiplier of the wrong sign)"
                    ),
                });
            }
            Check::Drop(pos) => {
                active.remove(pos);
            }
            Check::Add(k) => {
                active.push(k);
                active.sort_unstable();
            }
        }
        corrections += 1;
    };
    let q = pr.q();
    let mut out = if active.is_empty() {
        // The equality-restricted fit with the statistics the caller asked for.
        let mut f = pr.fit_equalities(options)?;
        f.notes.push(
            "no inequality restriction is active: the statistics are those of the equality-restricted \
             fit (valid when the true coefficients lie strictly inside the inequality restrictions)"
                .into(),
        );
        f
    } else {
        let mut f = fit.clone();
        f.multipliers.truncate(q);
        f.dependent_restrictions.retain(|&i| i < q);
        f.notes.push(format!(
            "{} inequality restriction(s) active: standard errors, intervals, t- and p-values and the \
             restriction tests are not reported (the estimator is not normally distributed at a \
             boundary); the estimate, RSS and multipliers are (residual dof counts the active ones)",
            active.len()
        ));
        f
    };
    let z = &fit.multipliers[q..];
    out.inequality_restrictions = pr
        .inequalities
        .iter()
        .enumerate()
        .map(|(k, r)| {
            let pos = active.iter().position(|&a| a == k);
            InequalityOutcome {
                line: r.line,
                relation: r.relation,
                value: r.value(&out.coefficients),
                rhs: r.rhs,
                multiplier: pos.map_or(0.0, |p| z[p].max(0.0)),
                active: pos.is_some(),
            }
        })
        .collect();
    if corrections > 0 {
        out.notes.push(format!(
            "the interior-point active set was corrected {corrections} time(s) before it verified"
        ));
    }
    Ok(out)
}
