//! The stage-wise benchmark problem shared by `benches/riccati.rs` and
//! `examples/riccati_profile.rs`: a chain of 6 coupled oscillators of our own (12 states),
//! 4 actuators, dt = 0.05, discretized by explicit Euler (only the structure matters here).
//! Invented data, for timing only.

use faer::Mat;
use tangency::stagewise::{HorizonBuilder, StageDims};
use tangency::Problem;

/// The problem at horizon N, with its stage dimensions.
pub fn problem(horizon: usize) -> (Problem, StageDims) {
    let (nx, nu) = (12, 4);
    let dt = 0.05;
    let mut a = Mat::<f64>::identity(nx, nx);
    for m in 0..6 {
        let (p, v) = (2 * m, 2 * m + 1);
        a[(p, v)] += dt;
        a[(v, p)] -= 2.0 * dt;
        a[(v, v)] -= 0.1 * dt;
        if m > 0 {
            a[(v, p - 2)] += dt;
        }
        if m < 5 {
            a[(v, p + 2)] += dt;
        }
    }
    let b = Mat::from_fn(nx, nu, |i, j| if i % 2 == 1 && (i / 2) % nu == j { dt } else { 0.0 });
    let q = Mat::from_fn(nx, nx, |i, j| if i == j { 1.0 + (i % 2) as f64 } else { 0.0 });
    let r = Mat::from_fn(nu, nu, |i, j| if i == j { 0.1 } else { 0.01 });
    let h = HorizonBuilder::new(nx, nu, horizon)
        .dynamics(a.as_ref(), b.as_ref())
        .cost(q.as_ref(), r.as_ref())
        .terminal_cost(q.as_ref())
        .initial_state(&[0.1; 12])
        .build()
        .expect("valid horizon");
    (h.to_problem().expect("conversion"), h.dims())
}
