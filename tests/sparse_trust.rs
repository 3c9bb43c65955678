//! Issue 12 regressions: the Stokes MAC family gets a certified verdict through the sparse
//! backend (paired ordering, no forced pivot left), checked against the dense backend; a
//! problem with the same counts but another pattern is refused by `Plan::factor`.

use tangency::generate::StokesMac;
use tangency::{Error, Method, Options, Plan, ProblemBuilder, Triangle, Verdict};

fn opts(method: Method) -> Options {
    Options {
        method,
        ..Default::default()
    }
}

/// K is nonsingular with inertia (n, m, 0) by construction (H ≻ 0, A of full row rank:
/// see the generator's docs); the sparse verdict and solution agree with dense LBLᵀ.
#[test]
fn stokes_mac_sparse_verdict_agrees_with_dense() {
    let p = StokesMac::new(12).build().unwrap();
    let s = tangency::solve(&p, &opts(Method::Sparse)).unwrap();
    let d = tangency::solve(&p, &opts(Method::Dense)).unwrap();
    assert_eq!(s.verdict, Some(Verdict::Minimizer));
    assert_eq!(s.inertia, d.inertia);
    assert!(s.backward_error <= 1e-15, "backward error {}", s.backward_error);
    let bound = s.forward_error_bound.expect("a direct solve reports its bound");
    assert!(bound <= 1e-10, "bound {bound}");
    let diff = s.x.iter().zip(&d.x).fold(0.0f64, |a, (u, v)| a.max((u - v).abs()));
    let scale = d.x.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    assert!(diff <= 1e-10 * scale, "x differs by {diff}");
}

/// Same sizes and stored counts, another pattern: refused with a typed error naming the
/// entry, instead of scattering the values through the first problem's map.
#[test]
fn plan_factor_refuses_another_pattern_with_the_same_counts() {
    let build = |a: &[(usize, usize, f64)]| {
        ProblemBuilder::new()
            .hessian_triplets(3, &[(0, 0, 1.0), (1, 1, 1.0), (2, 2, 1.0)], Triangle::Lower)
            .constraints_triplets(1, 3, a)
            .build()
            .unwrap()
    };
    let p = build(&[(0, 0, 1.0), (0, 1, 1.0)]);
    let q = build(&[(0, 0, 1.0), (0, 2, 1.0)]);
    let plan = Plan::analyze(&p, &opts(Method::Sparse)).unwrap();
    assert!(plan.factor(&p).is_ok());
    match plan.factor(&q) {
        Err(Error::StructureChanged { detail }) => assert!(detail.contains("block A"), "{detail}"),
        other => panic!("expected StructureChanged, got {other:?}"),
    }
}
