//! Projected CG (Gould, Hribar & Nocedal 2001) checked against answers fixed by design
//! (x*, y* chosen first, c and b computed from them with nalgebra), the crate's direct
//! backends, and a saddle problem whose reduced Hessian is indefinite by construction.

mod common;

use common::{dense_problem, designed, Rng};
use proptest::prelude::*;
use tangency::generate::PoissonControl;
use tangency::iterative::pcg::{pcg, PcgOptions, PcgStatus};
use tangency::{Error, Method, MethodUsed, Options, ProblemBuilder, Triangle, Verdict};

fn rel_diff(a: &[f64], b: &[f64]) -> f64 {
    let num = a.iter().zip(b).map(|(x, y)| (x - y).powi(2)).sum::<f64>().sqrt();
    let den = b.iter().map(|y| y * y).sum::<f64>().sqrt();
    num / den.max(1.0)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(40))]

    // The answer is fixed by design; every iterate must stay feasible (GHN 2001 keep the
    // iterates on Ax = b through the projection), and the multipliers follow our sign
    // convention Hx + c + Aᵀy = 0.
    #[test]
    fn recovers_designed_solution_with_feasible_iterates(seed in any::<u64>(), n in 1usize..16, mf in 0.0f64..1.0) {
        let mut rng = Rng::new(seed);
        let m = ((n as f64) * mf) as usize;
        let (p, xs, ys) = designed(&mut rng, n, m);
        let out = pcg(&p, &PcgOptions { tol: 1e-12, ..Default::default() }).unwrap();
        prop_assert_eq!(&out.status, &PcgStatus::Converged);
        prop_assert!(rel_diff(&out.solution.x, &xs) < 1e-8, "x error {}", rel_diff(&out.solution.x, &xs));
        prop_assert!(rel_diff(&out.solution.y, &ys) < 1e-8, "y error {}", rel_diff(&out.solution.y, &ys));
        let bn = p.rhs().iter().fold(1.0f64, |a, v| a.max(v.abs()));
        prop_assert_eq!(out.feasibility_history.len(), out.iterations + 1);
        for (k, f) in out.feasibility_history.iter().enumerate() {
            prop_assert!(*f <= 1e-12 * bn, "iterate {} infeasible: ‖Ax−b‖∞ = {:e}", k, f);
        }
        // CG in exact arithmetic ends within n − m steps (Nocedal & Wright 2006, Thm 5.1 on
        // the reduced system); allow a few for rounding.
        prop_assert!(out.iterations <= n - m + 3, "{} iterations for n − m = {}", out.iterations, n - m);
        prop_assert_eq!(out.solution.method, MethodUsed::Pcg);
        prop_assert!(out.solution.inertia.is_none() && out.solution.verdict.is_none());
    }
}

#[test]
fn multiplier_sign_agrees_with_dense_backend() {
    // Nocedal & Wright (2006), Example 16.2: x* = (2, −1, 1), y* = (−3, 2) in our convention.
    let p = ProblemBuilder::new()
        .hessian_row_major(3, &[6., 2., 1., 2., 5., 2., 1., 2., 4.], Triangle::Full)
        .linear(&[-8., -3., -3.])
        .constraints_row_major(2, 3, &[1., 0., 1., 0., 1., 1.])
        .rhs(&[3., 0.])
        .build()
        .unwrap();
    let out = pcg(&p, &PcgOptions::default()).unwrap();
    let d = tangency::solve(
        &p,
        &Options {
            method: Method::Dense,
            ..Default::default()
        },
    )
    .unwrap();
    assert!(
        rel_diff(&out.solution.x, &d.x) < 1e-10,
        "{:?} vs {:?}",
        out.solution.x,
        d.x
    );
    assert!(
        rel_diff(&out.solution.y, &d.y) < 1e-10,
        "{:?} vs {:?}",
        out.solution.y,
        d.y
    );
    assert!((out.solution.y[0] + 3.0).abs() < 1e-10 && (out.solution.y[1] - 2.0).abs() < 1e-10);
}

#[test]
fn poisson_control_agrees_with_sparse_direct_and_stays_feasible() {
    let p = PoissonControl::new(20).build().unwrap();
    let out = pcg(&p, &PcgOptions::default()).unwrap();
    let d = tangency::solve(
        &p,
        &Options {
            method: Method::Sparse,
            ..Default::default()
        },
    )
    .unwrap();
    assert!(
        rel_diff(&out.solution.x, &d.x) < 1e-7,
        "x {}",
        rel_diff(&out.solution.x, &d.x)
    );
    assert!(
        rel_diff(&out.solution.y, &d.y) < 1e-7,
        "y {}",
        rel_diff(&out.solution.y, &d.y)
    );
    assert!(out.relative_residual < 1e-9, "{}", out.relative_residual);
    let bn = p.rhs().iter().fold(0.0f64, |a, v| a.max(v.abs()));
    assert!(out.feasibility_history.iter().all(|f| *f <= 1e-12 * bn.max(1.0)));
    eprintln!("Poisson control k = 20: PCG {} iterations", out.iterations);
}

#[test]
fn negative_reduced_curvature_is_a_certified_saddle() {
    // H = diag(1, −1, 2), A = [0 0 1]: null(A) = span(e₁, e₂), reduced Hessian diag(1, −1)
    // indefinite by construction. c = (0, 1, 0): the first projected residual points along e₂,
    // whose curvature is −1, so PCG stops at iteration 1. K is nonsingular; the stationary
    // point solves x₁ = 0, −x₂ + 1 = 0, 2x₃ + y = 0, x₃ = b = 0.5: x = (0, 1, 0.5), y = −1.
    let p = ProblemBuilder::new()
        .hessian_row_major(3, &[1., 0., 0., 0., -1., 0., 0., 0., 2.], Triangle::Full)
        .linear(&[0., 1., 0.])
        .constraints_row_major(1, 3, &[0., 0., 1.])
        .rhs(&[0.5])
        .build()
        .unwrap();
    let out = pcg(&p, &PcgOptions::default()).unwrap();
    match &out.status {
        PcgStatus::NonPositiveCurvature {
            iteration,
            curvature,
            direction,
        } => {
            assert_eq!(*iteration, 1);
            assert!((curvature + 1.0).abs() < 1e-12, "{curvature}");
            assert!((direction[1].abs() - 1.0).abs() < 1e-12, "{direction:?}");
        }
        other => panic!("expected non-positive curvature, got {other:?}"),
    }
    assert_eq!(out.solution.verdict, Some(Verdict::Saddle));
    assert!(out.solution.inertia.is_none());
    assert!(
        rel_diff(&out.solution.x, &[0.0, 1.0, 0.5]) < 1e-9,
        "{:?}",
        out.solution.x
    );
    assert!((out.solution.y[0] + 1.0).abs() < 1e-9);
    // The dense backend reaches the same verdict from the inertia.
    let d = tangency::solve(&p, &Options::default()).unwrap();
    assert_eq!(d.verdict, Some(Verdict::Saddle));
}

#[test]
fn iteration_limit_is_not_converged_with_figures() {
    // A non-diagonal H (on Poisson control H is diagonal, G = K and one step is exact).
    let mut rng = Rng::new(11);
    let (p, _, _) = designed(&mut rng, 30, 5);
    let e = pcg(
        &p,
        &PcgOptions {
            max_iter: 1,
            ..Default::default()
        },
    )
    .unwrap_err();
    match e {
        Error::NotConverged {
            method,
            iterations,
            history_tail,
            tolerance,
            ..
        } => {
            assert_eq!(method, "pcg");
            assert_eq!(iterations, 1);
            assert_eq!(history_tail.len(), 2);
            assert_eq!(tolerance, 1e-10);
        }
        other => panic!("expected NotConverged, got {other:?}"),
    }
}

#[test]
fn diagonal_hessian_makes_the_preconditioner_exact() {
    // With H diagonal and positive, D = H and G = K: one projection solves the problem
    // (Keller, Gould & Wathen 2000: P⁻¹K has only the eigenvalue 1 on the null space).
    let p = PoissonControl::new(16).build().unwrap();
    let out = pcg(&p, &PcgOptions::default()).unwrap();
    assert!(out.iterations <= 1, "{}", out.iterations);
}

#[test]
fn rank_deficient_constraints_and_bad_tolerance_are_refused() {
    // Row 2 = row 1: G = [D Aᵀ; A 0] is singular.
    let p = dense_problem(
        3,
        2,
        &[2., 0., 0., 0., 2., 0., 0., 0., 2.],
        &[1., 1., 0., 1., 1., 0.],
        &[1., 0., 0.],
        &[1., 1.],
    );
    let e = pcg(&p, &PcgOptions::default()).unwrap_err();
    assert!(matches!(e, Error::InvalidOption(_) | Error::Singular { .. }), "{e:?}");
    let e = pcg(
        &p,
        &PcgOptions {
            tol: 0.0,
            ..Default::default()
        },
    )
    .unwrap_err();
    assert!(matches!(e, Error::InvalidOption(_)), "{e:?}");
}

#[test]
fn no_constraints_is_plain_preconditioned_cg() {
    let mut rng = Rng::new(3);
    let (p, xs, _) = designed(&mut rng, 9, 0);
    let out = pcg(&p, &PcgOptions::default()).unwrap();
    assert!(rel_diff(&out.solution.x, &xs) < 1e-8);
    assert!(out.solution.y.is_empty());
}
