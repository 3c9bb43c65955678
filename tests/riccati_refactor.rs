//! Refactorization with the Riccati backend: new values in the same pattern are factored
//! through the precomputed scatter map, and the result agrees with nalgebra (a separate
//! library) on the new problem; a value that breaks the stage structure in a refactor is
//! still refused with the entry named, and the factorization recovers afterwards.

use faer::Mat;
use tangency::stagewise::{Horizon, HorizonBuilder};
use tangency::{Block, Error, Method, Options, Plan, Problem, ProblemBuilder, Triangle, Verdict};

/// A time-varying horizon (nx = 3, nu = 2, N = 6) with cross terms, offsets and one
/// input-constraint row on stages 1 and 4; `t` moves every value, not the pattern.
fn horizon(t: f64) -> Horizon {
    let (nx, nu, n) = (3, 2, 6);
    let f = |k: usize, i: usize, j: usize| ((k * 7 + i * 3 + j) as f64 * 0.37 + t).sin();
    let mut b = HorizonBuilder::new(nx, nu, n)
        .dynamics_with(|k| {
            (
                Mat::from_fn(nx, nx, |i, j| if i == j { 1.0 } else { 0.2 * f(k, i, j) }),
                Mat::from_fn(nx, nu, |i, j| 0.5 * f(k + 9, i, j)),
            )
        })
        .cost_with(|k| {
            (
                Mat::from_fn(nx, nx, |i, j| if i == j { 2.0 + f(k, i, i) } else { 0.0 }),
                Mat::from_fn(nu, nu, |i, j| if i == j { 1.0 + 0.5 * f(k + 3, i, i) } else { 0.1 }),
            )
        });
    for k in 0..n {
        b = b
            .stage_cross_weight(k, Mat::from_fn(nu, nx, |i, j| 0.1 * f(k + 5, i, j)).as_ref())
            .stage_linear(k, &[f(k, 0, 1), f(k, 1, 2), f(k, 2, 0)], &[f(k, 3, 3), f(k, 4, 1)])
            .stage_offset(k, &[0.1 * f(k, 5, 5), 0.0, -0.1 * f(k, 6, 2)]);
        if k == 1 || k == 4 {
            b = b.stage_input_constraint(
                k,
                Mat::from_fn(1, nu, |_, j| 1.0 + 0.3 * f(k, 7, j)).as_ref(),
                Mat::from_fn(1, nx, |_, j| 0.2 * f(k, 8, j)).as_ref(),
                &[0.3 * f(k, 9, 9)],
            );
        }
    }
    b.terminal_cost(Mat::from_fn(nx, nx, |i, j| if i == j { 3.0 } else { 0.2 }).as_ref())
        .initial_state(&[0.5 + t, -0.2, 0.1])
        .build()
        .expect("valid horizon")
}

fn opts(h: &Horizon) -> Options {
    Options {
        method: Method::Riccati,
        stages: Some(h.dims()),
        ..Default::default()
    }
}

/// Solution of K[x; y] = [−c; b] by nalgebra's LU of the assembled K.
fn nalgebra_solution(p: &Problem) -> Vec<f64> {
    let k = tangency::kkt::assemble_dense(p);
    let dim = k.nrows();
    let km = nalgebra::DMatrix::from_fn(dim, dim, |i, j| k[(i, j)]);
    let rhs = nalgebra::DVector::from_vec(tangency::kkt::rhs(p.linear(), p.rhs()));
    km.lu().solve(&rhs).expect("K nonsingular").iter().copied().collect()
}

/// The problem's triplets (lower triangle of H) with `extra_h` added to H.
fn rebuilt(p: &Problem, extra_h: Option<(usize, usize, f64)>, a_override: Option<(usize, usize, f64)>) -> Problem {
    let mut h = Vec::new();
    p.hessian().for_each(|i, j, v| {
        if i >= j {
            h.push((i, j, v));
        }
    });
    h.extend(extra_h);
    let mut a = Vec::new();
    p.constraints().for_each(|i, j, v| {
        let v = match a_override {
            Some((r, c, w)) if (r, c) == (i, j) => w,
            _ => v,
        };
        a.push((i, j, v));
    });
    ProblemBuilder::new()
        .hessian_triplets(p.n(), &h, Triangle::Lower)
        .linear(p.linear())
        .constraints_triplets(p.m(), p.n(), &a)
        .rhs(p.rhs())
        .build()
        .expect("valid problem")
}

#[test]
fn refactor_with_new_values_agrees_with_nalgebra() {
    let h0 = horizon(0.0);
    let p0 = h0.to_problem().unwrap();
    let mut f = Plan::analyze(&p0, &opts(&h0)).unwrap().factor(&p0).unwrap();
    for step in 1..4 {
        let p = horizon(0.3 * step as f64).to_problem().unwrap();
        f.refactor(&p).unwrap();
        let s = f.solve().unwrap();
        let z = nalgebra_solution(&p);
        let scale = 1.0 + z.iter().fold(0.0f64, |a, v| a.max(v.abs()));
        let got: Vec<f64> = s.x.iter().chain(&s.y).copied().collect();
        let err = got.iter().zip(&z).fold(0.0f64, |a, (p, q)| a.max((p - q).abs()));
        assert!(err <= 1e-10 * scale, "step {step}: max difference {err:e}");
        assert_eq!(s.verdict, Some(Verdict::Minimizer));
        assert_eq!(s.method, tangency::MethodUsed::Riccati);
    }
}

#[test]
fn refactor_refuses_values_that_break_the_structure() {
    let h0 = horizon(0.0);
    let base = h0.to_problem().unwrap();
    let w = h0.dims().width();
    // An explicit zero coupling x₁[0] with x₀[0]: in the pattern, ignored while zero.
    let p_zero = rebuilt(&base, Some((w, 0, 0.0)), None);
    let mut f = Plan::analyze(&p_zero, &opts(&h0)).unwrap().factor(&p_zero).unwrap();
    let good = f.solve().unwrap();
    // The same entry made nonzero: H is no longer block diagonal by stages.
    let p_coupled = rebuilt(&base, Some((w, 0, 0.25)), None);
    match f.refactor(&p_coupled) {
        Err(Error::NotStageStructured { block, row, col, .. }) => {
            assert_eq!((block, row, col), (Block::H, w, 0));
        }
        other => panic!("expected NotStageStructured, got {other:?}"),
    }
    // A unit entry of the identity on x₀ changed to 2.
    let p_identity = rebuilt(&base, Some((w, 0, 0.0)), Some((0, 0, 2.0)));
    match f.refactor(&p_identity) {
        Err(Error::NotStageStructured { block, row, col, .. }) => {
            assert_eq!((block, row, col), (Block::A, 0, 0));
        }
        other => panic!("expected NotStageStructured, got {other:?}"),
    }
    // Valid values again: the same answer as before.
    f.refactor(&p_zero).unwrap();
    let again = f.solve().unwrap();
    let diff = good
        .x
        .iter()
        .zip(&again.x)
        .fold(0.0f64, |a, (p, q)| a.max((p - q).abs()));
    assert!(diff <= 1e-12, "{diff:e}");
}
