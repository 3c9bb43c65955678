//! Box-constrained stage-wise problems: a generator of our own for tests, benchmarks and the
//! control demo (an invented scenario, not a control design tool).

use faer::Mat;

use super::{InequalityProblem, NO_BOUND};
use crate::error::Result;
use crate::stagewise::{HorizonBuilder, StageDims};

/// A stage-wise problem with input bounds `|uₖ| ≤ u_max` and its model.
#[derive(Clone, Debug)]
pub struct BoxedHorizon {
    /// The problem (layout of [`crate::stagewise`]; bounds on the inputs only).
    pub problem: InequalityProblem,
    /// `(nx, nu, N)`.
    pub dims: StageDims,
    /// State matrix.
    pub a: Mat<f64>,
    /// Input matrix.
    pub b: Mat<f64>,
    /// The input limit.
    pub u_max: f64,
}

/// Deterministic numbers in `[−1, 1)` (xorshift64*), so the scenario needs no dependency.
fn numbers(seed: u64) -> impl FnMut() -> f64 {
    let mut s = seed | 1;
    move || {
        s ^= s >> 12;
        s ^= s << 25;
        s ^= s >> 27;
        let v = s.wrapping_mul(0x2545_F491_4F6C_DD1D);
        (v >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
}

/// Lightly damped oscillators (2×2 rotation blocks of radius 0.99–1.01, a weak coupling)
/// driven by `nu` inputs; `Q = I`, `R = 0.1 I`, `Q_N = 10 I`, initial state of size
/// `x0_scale`; inputs bounded by `u_max` (`nx` even).
pub fn boxed_horizon(
    nx: usize,
    nu: usize,
    horizon: usize,
    u_max: f64,
    x0_scale: f64,
    seed: u64,
) -> Result<BoxedHorizon> {
    let mut rnd = numbers(seed);
    let mut a = Mat::<f64>::zeros(nx, nx);
    for blk in 0..nx / 2 {
        let theta = 0.1 + 0.2 * (blk as f64) / (nx as f64);
        let rho = 1.0 + 0.01 * rnd();
        let (i, j) = (2 * blk, 2 * blk + 1);
        a[(i, i)] = rho * theta.cos();
        a[(i, j)] = -rho * theta.sin();
        a[(j, i)] = rho * theta.sin();
        a[(j, j)] = rho * theta.cos();
    }
    for i in 0..nx {
        for j in 0..nx {
            if a[(i, j)] == 0.0 {
                a[(i, j)] = 0.01 * rnd();
            }
        }
    }
    let b = Mat::from_fn(nx, nu, |_, _| 0.3 * rnd());
    let q = Mat::<f64>::identity(nx, nx);
    let r = Mat::from_fn(nu, nu, |i, j| if i == j { 0.1 } else { 0.0 });
    let qn = Mat::from_fn(nx, nx, |i, j| if i == j { 10.0 } else { 0.0 });
    let x0: Vec<f64> = (0..nx).map(|_| x0_scale * rnd()).collect();
    let h = HorizonBuilder::new(nx, nu, horizon)
        .dynamics(a.as_ref(), b.as_ref())
        .cost(q.as_ref(), r.as_ref())
        .terminal_cost(qn.as_ref())
        .initial_state(&x0)
        .build()?;
    let dims = h.dims();
    let base = h.to_problem()?;
    let n = dims.n_vars();
    let (mut lo, mut hi) = (vec![-NO_BOUND; n], vec![NO_BOUND; n]);
    for k in 0..horizon {
        let uo = dims.u_offset(k);
        for i in 0..nu {
            lo[uo + i] = -u_max;
            hi[uo + i] = u_max;
        }
    }
    let problem = InequalityProblem::new(base).with_bounds(&lo, &hi)?;
    Ok(BoxedHorizon {
        problem,
        dims,
        a,
        b,
        u_max,
    })
}

impl BoxedHorizon {
    /// The next state `A x + B u` of the model.
    pub fn step(&self, x: &[f64], u: &[f64]) -> Vec<f64> {
        let (nx, nu) = (self.dims.nx, self.dims.nu);
        (0..nx)
            .map(|i| {
                (0..nx).map(|j| self.a[(i, j)] * x[j]).sum::<f64>()
                    + (0..nu).map(|j| self.b[(i, j)] * u[j]).sum::<f64>()
            })
            .collect()
    }

    /// Sets the initial state `x̂` (the first `nx` entries of `b`), in place (no allocation).
    pub fn set_initial_state(&mut self, x0: &[f64]) -> Result<()> {
        self.problem.set_rhs_range(0, x0)
    }
}
