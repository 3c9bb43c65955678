//! Agreement with nalgebra (an independent general-purpose library) and property tests on
//! problems whose answers are known by construction.

mod common;

use common::Rng;
use common::*;
use proptest::prelude::*;
use tangency::{solve, Error, Options, Plan, Verdict};

/// Random problems of assorted shapes: our x, y against nalgebra's LU solve of the same K,
/// our inertia against nalgebra's symmetric eigenvalues.
#[test]
fn random_problems_match_nalgebra_lu_and_eigenvalues() {
    let mut rng = Rng::new(7);
    for trial in 0..60 {
        let n = 1 + rng.below(30);
        let m = rng.below(n + 1);
        // Mix of convex and nonconvex Hessians.
        let eigs: Vec<f64> = (0..n)
            .map(|_| {
                let mag = 0.1 + rng.uniform().abs() * 10.0;
                if trial % 3 == 0 && rng.uniform() < -0.3 {
                    -mag
                } else {
                    mag
                }
            })
            .collect();
        let h = symmetric_with_eigs(&mut rng, &eigs);
        let a = rng.vec(m * n);
        let c = rng.vec(n);
        let b = rng.vec(m);
        let p = dense_problem(n, m, &h, &a, &c, &b);
        let k = kkt_nalgebra(&p);
        let rhs = nalgebra::DVector::from_iterator(n + m, c.iter().map(|v| -v).chain(b.iter().copied()));
        let z_ref = k.clone().lu().solve(&rhs).expect("random K is nonsingular");
        let s = solve(&p, &Options::default()).unwrap();
        let cond = cond2(&k);
        let scale = inf_norm(z_ref.as_slice()).max(1.0);
        let err = max_abs_diff(&[s.x.clone(), s.y.clone()].concat(), z_ref.as_slice());
        assert!(
            err <= 1e-14 * cond * scale + 1e-15,
            "trial {trial}: error {err:e}, cond {cond:e}"
        );
        let (pos, neg, zero) = eig_inertia(&k, 1e-12);
        let inertia = s.inertia.unwrap();
        assert_eq!(
            (inertia.positive, inertia.negative, inertia.zero),
            (pos, neg, zero),
            "trial {trial}"
        );
        let expect = if (pos, neg) == (n, m) {
            Verdict::Minimizer
        } else {
            Verdict::Saddle
        };
        assert_eq!(s.verdict, Some(expect), "trial {trial}");
        assert!(
            s.backward_error <= 4.0 * f64::EPSILON,
            "trial {trial}: {}",
            s.backward_error
        );
    }
}

/// Singular K from a duplicated constraint row: the zero count agrees with nalgebra's
/// eigenvalues, the consistent copy is dropped (and named), an inconsistent one is
/// infeasible; m > n with generic b is infeasible too.
#[test]
fn dependent_rows_are_dropped_or_refused() {
    let mut rng = Rng::new(11);
    let n = 6;
    let h = symmetric_with_eigs(&mut rng, &[1.0, 2.0, 3.0, 4.0, 5.0, 6.0]);
    let mut a = rng.vec(2 * n);
    a.extend_from_within(0..n); // row 2 = row 0
    let c = rng.vec(n);
    let p = dense_problem(n, 3, &h, &a, &c, &[1.0, 2.0, 1.0]);
    let s = solve(&p, &Options::default()).unwrap();
    let (pos, neg, zero) = eig_inertia(&kkt_nalgebra(&p), 1e-12);
    let inertia = s.inertia.unwrap();
    assert_eq!((inertia.positive, inertia.negative, inertia.zero), (pos, neg, zero));
    assert_eq!(zero, 1);
    assert!(s.notes.iter().any(|t| t.contains("row 2 = 1.0·row 0")), "{:?}", s.notes);
    // Same answer as the problem without the copy (nalgebra LU on the reduced K).
    let reduced = dense_problem(n, 2, &h, &a[..2 * n], &c, &[1.0, 2.0]);
    let k = kkt_nalgebra(&reduced);
    let rhs = nalgebra::DVector::from_iterator(n + 2, c.iter().map(|v| -v).chain([1.0, 2.0]));
    let z = k.lu().solve(&rhs).unwrap();
    assert!(max_abs_diff(&s.x, &z.as_slice()[..n]) < 1e-12);
    let p = dense_problem(n, 3, &h, &a, &c, &[1.0, 2.0, 1.5]);
    let err = solve(&p, &Options::default()).unwrap_err();
    assert!(matches!(err, Error::Infeasible { .. }), "{err}");
    assert!(err.is_no_solution());
    // More rows than columns with a generic right-hand side.
    let p = dense_problem(2, 3, &[1.0, 0.0, 0.0, 1.0], &rng.vec(6), &[0.0, 0.0], &[1.0, 2.0, 3.0]);
    let err = solve(&p, &Options::default()).unwrap_err();
    assert!(matches!(err, Error::Infeasible { .. }), "{err}");
}

/// Plan once, factor, solve for many right-hand sides, refactor with new values.
#[test]
fn plan_factor_solve_refactor() {
    let mut rng = Rng::new(3);
    let (n, m) = (12, 5);
    let h = symmetric_with_eigs(&mut rng, &(0..n).map(|i| 1.0 + i as f64).collect::<Vec<_>>());
    let a = rng.vec(m * n);
    let p = dense_problem(n, m, &h, &a, &rng.vec(n), &rng.vec(m));
    let plan = Plan::analyze(&p, &Options::default()).unwrap();
    let mut f = plan.factor(&p).unwrap();
    let mut ws = f.workspace();
    let mut out = tangency::Solution::empty(n, m, f.plan().method());
    for _ in 0..5 {
        let (c, b) = (rng.vec(n), rng.vec(m));
        f.solve_into(&c, &b, &mut ws, &mut out).unwrap();
        let fresh = solve(&dense_problem(n, m, &h, &a, &c, &b), &Options::default()).unwrap();
        assert!(max_abs_diff(&out.x, &fresh.x) < 1e-12);
        assert!(max_abs_diff(&out.y, &fresh.y) < 1e-12);
    }
    // New values, same shape.
    let h2 = symmetric_with_eigs(&mut rng, &(0..n).map(|i| 2.0 + i as f64).collect::<Vec<_>>());
    let a2 = rng.vec(m * n);
    let (c2, b2) = (rng.vec(n), rng.vec(m));
    let p2 = dense_problem(n, m, &h2, &a2, &c2, &b2);
    f.refactor(&p2).unwrap();
    let s = f.solve().unwrap();
    let fresh = solve(&p2, &Options::default()).unwrap();
    assert!(max_abs_diff(&s.x, &fresh.x) < 1e-12);
    // A different shape is refused.
    let p3 = dense_problem(n, m - 1, &h2, &a2[..(m - 1) * n], &c2, &b2[..m - 1]);
    assert!(matches!(f.refactor(&p3), Err(Error::StructureChanged { .. })));
    // Several right-hand sides at once.
    let cs = faer::Mat::from_fn(n, 3, |i, j| (i + j) as f64);
    let bs = faer::Mat::from_fn(m, 3, |i, j| (i * j) as f64);
    let many = f.solve_many(cs.as_ref(), bs.as_ref()).unwrap();
    for (j, s) in many.iter().enumerate() {
        let c: Vec<f64> = (0..n).map(|i| cs[(i, j)]).collect();
        let b: Vec<f64> = (0..m).map(|i| bs[(i, j)]).collect();
        let one = f.solve_with(&c, &b).unwrap();
        assert!(max_abs_diff(&s.x, &one.x) == 0.0);
    }
}

/// Badly scaled blocks: equilibration plus refinement still reaches machine-level
/// backward error.
#[test]
fn badly_scaled_blocks_are_refined_to_machine_precision() {
    let mut rng = Rng::new(5);
    let (n, m) = (10, 4);
    let mut h = symmetric_with_eigs(&mut rng, &(0..n).map(|i| 1.0 + i as f64).collect::<Vec<_>>());
    h.iter_mut().for_each(|v| *v *= 1e6);
    let mut a = rng.vec(m * n);
    a.iter_mut().for_each(|v| *v *= 1e-4);
    let p = dense_problem(n, m, &h, &a, &rng.vec(n), &rng.vec(m));
    let s = solve(&p, &Options::default()).unwrap();
    assert!(s.backward_error <= 4.0 * f64::EPSILON, "{}", s.backward_error);
    assert_eq!(s.verdict, Some(Verdict::Minimizer));
}

fn eig_strategy(max: usize) -> impl Strategy<Value = Vec<f64>> {
    prop::collection::vec(prop_oneof![0.5f64..20.0, -20.0f64..-0.5], 1..max)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    /// Solutions known by construction: pick x*, y*; c = −Hx* − Aᵀy*, b = Ax*. The error
    /// is bounded by a condition-aware bound, the residuals are at rounding level, and the
    /// inertia matches nalgebra's eigenvalue count.
    #[test]
    fn known_solution_recovered(eigs in eig_strategy(16), mfrac in 0.0f64..1.0, seed in any::<u64>()) {
        let mut rng = Rng::new(seed);
        let n = eigs.len();
        let m = ((n as f64) * mfrac) as usize; // includes m = 0
        let h = symmetric_with_eigs(&mut rng, &eigs);
        let a = rng.vec(m * n);
        let xs = rng.vec(n);
        let ys = rng.vec(m);
        let hn = nalgebra::DMatrix::from_row_slice(n, n, &h);
        let an = nalgebra::DMatrix::from_row_slice(m, n, &a);
        let xv = nalgebra::DVector::from_column_slice(&xs);
        let yv = nalgebra::DVector::from_column_slice(&ys);
        let c = -(&hn * &xv + an.transpose() * &yv);
        let b = &an * &xv;
        let p = dense_problem(n, m, &h, &a, c.as_slice(), b.as_slice());
        let k = kkt_nalgebra(&p);
        let (pos, neg, zero) = eig_inertia(&k, 1e-10);
        prop_assume!(zero == 0);
        let cond = cond2(&k);
        prop_assume!(cond < 1e10);
        let s = solve(&p, &Options::default()).unwrap();
        let err = max_abs_diff(&[s.x.clone(), s.y.clone()].concat(), &[xs, ys].concat());
        prop_assert!(err <= 1e-13 * cond.max(1.0), "error {err:e}, cond {cond:e}");
        prop_assert!(s.backward_error <= 4.0 * f64::EPSILON);
        let inertia = s.inertia.unwrap();
        prop_assert_eq!((inertia.positive, inertia.negative, inertia.zero), (pos, neg, 0));
        let minimizer = (pos, neg) == (n, m);
        prop_assert_eq!(s.verdict, Some(if minimizer { Verdict::Minimizer } else { Verdict::Saddle }));
    }
}
