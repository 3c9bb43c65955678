//! The input-limited part of `tangency demo --control`: the two-mass chain of
//! [`crate::stagewise::demo`] brought back to rest from a displaced state with forces limited
//! to `|u| ≤ 0.8 N`, re-solved every step by the interior-point method (Riccati steps, warm
//! start shifted by one stage). A scenario of our own; an illustration of the mathematics,
//! not a control design tool.

use std::fmt::Write as _;

use faer::Mat;

use super::{shift_stages, InequalityProblem, InteriorPoint, InteriorPointOptions, NO_BOUND};
use crate::error::Result;
use crate::solver::{Method, Options};
use crate::stagewise::demo::two_mass_plant;
use crate::stagewise::HorizonBuilder;

/// The input limit of the demo (N).
pub const U_MAX: f64 = 0.8;

/// Runs the input-limited loop (`steps` steps, horizon `horizon`) and returns its log.
pub fn run_limited(steps: usize, horizon: usize) -> Result<String> {
    let (a, b) = two_mass_plant(0.1);
    let q = Mat::from_fn(4, 4, |i, j| {
        if i != j {
            0.0
        } else if i % 2 == 0 {
            10.0
        } else {
            1.0
        }
    });
    let r = Mat::from_fn(2, 2, |i, j| if i == j { 0.1 } else { 0.0 });
    let qn = Mat::from_fn(4, 4, |i, j| 10.0 * q[(i, j)]);
    let mut x = vec![1.0, 0.0, 1.5, 0.0];
    let h = HorizonBuilder::new(4, 2, horizon)
        .dynamics(a.as_ref(), b.as_ref())
        .cost(q.as_ref(), r.as_ref())
        .terminal_cost(qn.as_ref())
        .initial_state(&x)
        .build()?;
    let dims = h.dims();
    let n = dims.n_vars();
    let (mut lo, mut hi) = (vec![-NO_BOUND; n], vec![NO_BOUND; n]);
    for k in 0..horizon {
        for i in 0..2 {
            lo[dims.u_offset(k) + i] = -U_MAX;
            hi[dims.u_offset(k) + i] = U_MAX;
        }
    }
    let mut problem = InequalityProblem::new(h.to_problem()?).with_bounds(&lo, &hi)?;
    let opts = InteriorPointOptions {
        kkt: Options {
            method: Method::Riccati,
            stages: Some(dims),
            ..Default::default()
        },
        verdict: false,
        ..Default::default()
    };
    let mut ipm = InteriorPoint::new(&problem, &opts)?;
    let mut sol = ipm.empty_solution(&problem);
    let mut warm = ipm.empty_solution(&problem);
    let mut log = String::new();
    let _ = writeln!(
        log,
        "\nWith input limits |u| ≤ {U_MAX} N (interior-point method, Riccati steps, warm start shifted by one\n\
         stage): the chain starts displaced (p1 = 1, p2 = 1.5) and is brought to rest; * marks a saturated force.\n\
         (An illustration of the mathematics, not a control design tool.)\n\
         \n  step   p1       p2       u1        u2       iterations  solve µs"
    );
    let (mut total_iters, mut saturated_steps) = (0, 0);
    for t in 0..steps {
        problem.set_rhs_range(0, &x)?;
        ipm.solve_into(&problem, (t > 0).then_some(&warm), &mut sol)?;
        let u = [sol.x[4], sol.x[5]];
        let mark = |v: f64| if (v.abs() - U_MAX).abs() < 1e-6 { '*' } else { ' ' };
        if u.iter().any(|v| mark(*v) == '*') {
            saturated_steps += 1;
        }
        total_iters += sol.iterations;
        let next: Vec<f64> = (0..4)
            .map(|i| (0..4).map(|j| a[(i, j)] * x[j]).sum::<f64>() + b[(i, 0)] * u[0] + b[(i, 1)] * u[1])
            .collect();
        if t < 12 || t % 5 == 4 {
            let _ = writeln!(
                log,
                "  {:>4}  {:>+7.4}  {:>+7.4}  {:>+7.4}{}  {:>+7.4}{}  {:>6}      {:>7.1}",
                t + 1,
                x[0],
                x[2],
                u[0],
                mark(u[0]),
                u[1],
                mark(u[1]),
                sol.iterations,
                sol.seconds * 1e6
            );
        }
        x = next;
        warm.clone_from(&sol);
        shift_stages(&mut warm, dims);
    }
    let _ = writeln!(
        log,
        "\n{saturated_steps} of {steps} steps had a saturated force; {:.1} interior-point iterations per step on average.",
        total_iters as f64 / steps as f64
    );
    Ok(log)
}
