//! Box-constrained stage-wise problems: the interior-point method through the Riccati
//! backend agrees with the same method through the dense backend (an independent
//! factorization of the same Newton systems) and with the KKT conditions checked here;
//! receding-horizon control with shifted warm starts agrees, step by step, with cold solves
//! of the same horizon by the dense backend.

use tangency::inequality::stagewise::boxed_horizon;
use tangency::inequality::{shift_stages, InteriorPoint, InteriorPointOptions};
use tangency::{Method, MethodUsed, Options, Verdict};

fn options(method: Method, dims: Option<tangency::stagewise::StageDims>) -> InteriorPointOptions {
    InteriorPointOptions {
        kkt: Options {
            method,
            stages: dims,
            ..Default::default()
        },
        ..Default::default()
    }
}

fn max_diff(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).fold(0.0f64, |m, (p, q)| m.max((p - q).abs()))
}

#[test]
fn riccati_steps_agree_with_dense_steps_and_saturate() {
    let mut ran = 0;
    for (nx, nu, horizon, seed) in [(4usize, 2usize, 20usize, 7u64), (6, 3, 30, 8), (12, 4, 15, 9)] {
        let bh = boxed_horizon(nx, nu, horizon, 0.4, 3.0, seed).unwrap();
        let q = &bh.problem;
        let mut ric = InteriorPoint::new(q, &options(Method::Riccati, Some(bh.dims))).unwrap();
        assert_eq!(ric.method(), MethodUsed::Riccati);
        let s = ric.solve(q).unwrap();
        let d = InteriorPoint::new(q, &options(Method::Dense, None))
            .unwrap()
            .solve(q)
            .unwrap();
        assert!(max_diff(&s.x, &d.x) < 1e-7, "x differs by {}", max_diff(&s.x, &d.x));
        assert!(max_diff(&s.w, &d.w) < 1e-6, "w differs by {}", max_diff(&s.w, &d.w));
        assert!((s.objective - d.objective).abs() < 1e-8 * (1.0 + d.objective.abs()));
        assert!(
            !s.active_lower.is_empty() || !s.active_upper.is_empty(),
            "the limits must bind"
        );
        // Saturated inputs sit on the bound, with the sign convention of w.
        for &j in &s.active_upper {
            assert!((s.x[j] - bh.u_max).abs() < 1e-7 && s.w[j] > 0.0);
        }
        for &j in &s.active_lower {
            assert!((s.x[j] + bh.u_max).abs() < 1e-7 && s.w[j] < 0.0);
        }
        assert!(s.x.iter().all(|v| v.is_finite()));
        assert!(q.max_violation(&s.x) < 1e-8);
        assert!(s.duality_gap.abs() < 1e-7 * (1.0 + s.objective.abs()));
        assert_eq!(s.verdict, Some(Verdict::Minimizer));
        ran += 1;
    }
    assert_eq!(ran, 3);
}

#[test]
fn receding_horizon_with_warm_starts_matches_cold_dense_solves() {
    let (nx, nu, horizon) = (4usize, 2usize, 25usize);
    let mut bh = boxed_horizon(nx, nu, horizon, 0.3, 3.0, 11).unwrap();
    let dims = bh.dims;
    let opts = InteriorPointOptions {
        verdict: false,
        ..options(Method::Riccati, Some(dims))
    };
    let mut ipm = InteriorPoint::new(&bh.problem, &opts).unwrap();
    let mut dense = InteriorPoint::new(&bh.problem, &options(Method::Dense, None)).unwrap();
    let mut sol = ipm.empty_solution(&bh.problem);
    let mut warm = ipm.empty_solution(&bh.problem);
    let mut x: Vec<f64> = bh.problem.equality_problem().rhs()[..nx].to_vec();
    let (mut saturated, mut warm_iters, mut steps) = (0, 0, 0);
    for t in 0..15 {
        bh.set_initial_state(&x).unwrap();
        let start = (t > 0).then_some(&warm);
        ipm.solve_into(&bh.problem, start, &mut sol).unwrap();
        let cold = dense.solve(&bh.problem).unwrap();
        let u0 = &sol.x[nx..nx + nu];
        assert!(
            max_diff(u0, &cold.x[nx..nx + nu]) < 1e-7,
            "step {t}: u0 {:?} vs {:?}",
            u0,
            &cold.x[nx..nx + nu]
        );
        assert!(u0.iter().all(|u| u.abs() <= bh.u_max + 1e-9));
        if u0.iter().any(|u| (u.abs() - bh.u_max).abs() < 1e-7) {
            saturated += 1;
        }
        if t > 0 {
            warm_iters += sol.iterations;
            steps += 1;
        }
        x = bh.step(&x, u0);
        warm.clone_from(&sol);
        shift_stages(&mut warm, dims);
    }
    assert!(
        saturated >= 2,
        "the input limit must bind in the first steps ({saturated})"
    );
    assert!(steps == 14 && warm_iters > 0);
}
