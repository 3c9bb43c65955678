//! The pipeline: [`Plan::analyze`] once per structure, [`Plan::factor`] whenever values
//! change ([`Factorization::refactor`] reuses everything), then
//! [`Factorization::solve`] for any number of right-hand sides. Every solve is refined on
//! the original K and certified (residuals, backward error) before it is returned.
//!
//! | file | what |
//! |---|---|
//! | `options.rs` | [`Options`], [`Method`], defaults and acceptance levels |
//! | `choose.rs` | [`choose`]: the method choice (auto's cost model, memory rules), backend construction, every fallback |
//! | `plan.rs` | [`Plan`]: the symbolic phase |
//! | `factorization.rs` | [`Factorization`]: numeric phase, certified solves |
//! | `refine.rs` | the refinement loop on K, [`normwise`] backward error |
//! | `workspace.rs` | [`Workspace`] for allocation-free solves |

pub mod choose;
mod factorization;
mod options;
mod plan;
mod refine;
mod workspace;

pub use factorization::Factorization;
pub use options::{
    default_memory_budget, Method, Options, DEFAULT_ACCEPT_BACKWARD_ERROR, DEFAULT_ACCEPT_FORWARD_ERROR,
    DEFAULT_MAX_REFINEMENT_STEPS, DEFAULT_REFINEMENT_TARGET, DENSE_FALLBACK_MAX_DIM, FALLBACK_MEMORY_BUDGET,
    MEMORY_BUDGET_FRACTION, NULL_SPACE_RESCUE_MAX_DIM,
};
pub use plan::Plan;
pub use refine::normwise;
pub use workspace::Workspace;

use crate::error::Result;
use crate::problem::Problem;
use crate::solution::Solution;

/// One call from problem to certified solution: analyze, factor, solve.
///
/// ```
/// use tangency::{solve, Options, ProblemBuilder, Triangle};
/// // Nocedal & Wright (2006), Example 16.2: x* = (2, −1, 1), y* = (−3, 2) in our convention.
/// let p = ProblemBuilder::new()
///     .hessian_row_major(3, &[6., 2., 1., 2., 5., 2., 1., 2., 4.], Triangle::Full)
///     .linear(&[-8., -3., -3.])
///     .constraints_row_major(2, 3, &[1., 0., 1., 0., 1., 1.])
///     .rhs(&[3., 0.])
///     .build()?;
/// let s = solve(&p, &Options::default())?;
/// assert!((s.x[0] - 2.0).abs() < 1e-13 && (s.y[0] + 3.0).abs() < 1e-13);
/// assert!((s.objective + 3.5).abs() < 1e-13);
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn solve(problem: &Problem, options: &Options) -> Result<Solution> {
    let plan = Plan::analyze(problem, options)?;
    let f = plan.factor(problem)?;
    f.solve()
}
