//! Random sparse problems with solutions known by construction (pick x*, y*; then
//! c = −Hx* − Aᵀy*, b = Ax*): the sparse backend recovers them, agrees with the dense
//! backend on the inertia, and reaches machine-level backward error.

use proptest::prelude::*;
use tangency::{Method, Options, ProblemBuilder, Triangle, Verdict};

type Triplets = Vec<(usize, usize, f64)>;

fn problem_strategy() -> impl Strategy<Value = (usize, usize, Triplets, Triplets, u64)> {
    (0usize..25, 0usize..8).prop_flat_map(|(n, m0)| {
        let m = if n == 0 { 0 } else { m0.min(n) };
        let offdiag = prop::collection::vec((0..n.max(1), 0..n.max(1), -1.0f64..1.0), 0..2 * n + 1);
        let a = prop::collection::vec((0..m.max(1), 0..n.max(1), -2.0f64..2.0), 0..3 * m + 1);
        (Just(n), Just(m), offdiag, a, any::<u64>())
    })
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    #[test]
    fn known_solution_recovered((n, m, off, a_rand, seed) in problem_strategy()) {
        // H = diagonally dominant (positive definite) lower triangle from random entries.
        let mut h = Vec::new();
        let mut rowsum = vec![0.0; n];
        for &(i, j, v) in &off {
            if i > j {
                h.push((i, j, v));
                rowsum[i] += v.abs();
                rowsum[j] += v.abs();
            }
        }
        for i in 0..n {
            h.push((i, i, 1.0 + rowsum[i]));
        }
        // A: random entries plus a unit "pivot" per row on distinct columns (full row rank).
        let mut a: Vec<(usize, usize, f64)> = a_rand.into_iter().filter(|&(r, j, _)| r < m && j < n && j != r).collect();
        for r in 0..m {
            a.push((r, r, 4.0));
        }
        let mut rng = seed;
        let mut next = || { rng = rng.wrapping_mul(6364136223846793005).wrapping_add(1442695040888963407); ((rng >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0 };
        let xs: Vec<f64> = (0..n).map(|_| next()).collect();
        let ys: Vec<f64> = (0..m).map(|_| next()).collect();
        let base = ProblemBuilder::new().hessian_triplets(n, &h, Triangle::Lower).constraints_triplets(m, n, &a).build().unwrap();
        let mut c = vec![0.0; n];
        base.hessian().mul_add(&xs, &mut c);
        base.constraints().tr_mul_add(&ys, &mut c);
        c.iter_mut().for_each(|v| *v = -*v);
        let mut b = vec![0.0; m];
        base.constraints().mul_add(&xs, &mut b);
        let mut p = base.clone();
        p.set_linear(&c).unwrap();
        p.set_rhs(&b).unwrap();
        let s = tangency::solve(&p, &Options { method: Method::Sparse, ..Default::default() }).unwrap();
        let d = tangency::solve(&p, &Options { method: Method::Dense, ..Default::default() }).unwrap();
        prop_assert!(s.backward_error <= 1e-15, "backward error {}", s.backward_error);
        for i in 0..n { prop_assert!((s.x[i] - xs[i]).abs() <= 1e-10, "x[{}]", i); }
        for i in 0..m { prop_assert!((s.y[i] - ys[i]).abs() <= 1e-10, "y[{}]", i); }
        prop_assert_eq!(s.inertia, d.inertia);
        prop_assert_eq!(s.verdict, Some(Verdict::Minimizer));
    }
}
