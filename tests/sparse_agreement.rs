//! The sparse backend against the dense one (and against nalgebra as an independent
//! reference) on worked examples, the generator families and nonconvex problems with
//! known inertia.

use tangency::generate::{Family, PoissonControl, TiedLattice};
use tangency::{Inertia, Method, MethodUsed, Options, Plan, Problem, ProblemBuilder, Triangle, Verdict};

fn opts(method: Method) -> Options {
    Options {
        method,
        ..Default::default()
    }
}

fn both(p: &Problem) -> (tangency::Solution, tangency::Solution) {
    let s = tangency::solve(p, &opts(Method::Sparse)).expect("sparse solve");
    let d = tangency::solve(p, &opts(Method::Dense)).expect("dense solve");
    assert_eq!(s.method, MethodUsed::SparseLdlt);
    (s, d)
}

fn max_diff(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).fold(0.0f64, |m, (x, y)| m.max((x - y).abs()))
}

fn scale(v: &[f64]) -> f64 {
    v.iter().fold(1.0f64, |m, x| m.max(x.abs()))
}

/// nalgebra's dense LU solve of the same K (independent reference).
fn nalgebra_solve(p: &Problem) -> Vec<f64> {
    let (n, m) = (p.n(), p.m());
    let k = tangency::kkt::assemble_dense(p);
    let kn = nalgebra::DMatrix::from_fn(n + m, n + m, |i, j| k[(i, j)]);
    let rhs = nalgebra::DVector::from_iterator(n + m, tangency::kkt::rhs(p.linear(), p.rhs()));
    kn.lu().solve(&rhs).expect("nonsingular").iter().copied().collect()
}

// Hock & Schittkowski (1981), HS28: x* = (1/2, −1/2, 1/2), y* = 0, inertia (3, 1, 0).
#[test]
fn hs28_worked_example() {
    let p = ProblemBuilder::new()
        .hessian_row_major(3, &[2., 2., 0., 2., 4., 2., 0., 2., 2.], Triangle::Full)
        .constraints_row_major(1, 3, &[1., 2., 3.])
        .rhs(&[1.])
        .build()
        .unwrap();
    let (s, _) = both(&p);
    assert!(max_diff(&s.x, &[0.5, -0.5, 0.5]) < 1e-14);
    assert!(s.y[0].abs() < 1e-14);
    assert_eq!(s.inertia, Some(Inertia::new(3, 1, 0)));
    assert_eq!(s.verdict, Some(Verdict::Minimizer));
}

// Hock & Schittkowski (1981), HS48: H singular (only the reduced Hessian is positive
// definite); x* = (1, 1, 1, 1, 1), y* = (0, 0), inertia (5, 2, 0).
#[test]
fn hs48_singular_hessian() {
    #[rustfmt::skip]
    let h = [2., 0., 0., 0., 0.,  0., 2., -2., 0., 0.,  0., -2., 2., 0., 0.,
             0., 0., 0., 2., -2.,  0., 0., 0., -2., 2.];
    let p = ProblemBuilder::new()
        .hessian_row_major(5, &h, Triangle::Full)
        .linear(&[-2., 0., 0., 0., 0.])
        .constraints_row_major(2, 5, &[1., 1., 1., 1., 1., 0., 0., 1., -2., -2.])
        .rhs(&[5., -3.])
        .build()
        .unwrap();
    let (s, d) = both(&p);
    assert!(max_diff(&s.x, &[1.0; 5]) < 1e-13, "{:?}", s.x);
    assert!(max_diff(&s.y, &[0.0; 2]) < 1e-13);
    assert_eq!(s.inertia, Some(Inertia::new(5, 2, 0)));
    assert_eq!(s.verdict, Some(Verdict::Minimizer));
    assert_eq!(d.verdict, Some(Verdict::Minimizer));
}

// Hock & Schittkowski (1981), HS51: x* = (1, 1, 1, 1, 1), y* = 0, inertia (5, 3, 0).
#[test]
fn hs51_worked_example() {
    #[rustfmt::skip]
    let h = [2., -2., 0., 0., 0.,  -2., 4., 2., 0., 0.,  0., 2., 2., 0., 0.,
             0., 0., 0., 2., 0.,  0., 0., 0., 0., 2.];
    let p = ProblemBuilder::new()
        .hessian_row_major(5, &h, Triangle::Full)
        .linear(&[0., -4., -4., -2., -2.])
        .constraints_row_major(3, 5, &[1., 3., 0., 0., 0., 0., 0., 1., 1., -2., 0., 1., 0., 0., -1.])
        .rhs(&[4., 0., 0.])
        .build()
        .unwrap();
    let (s, _) = both(&p);
    assert!(max_diff(&s.x, &[1.0; 5]) < 1e-13);
    assert!(max_diff(&s.y, &[0.0; 3]) < 1e-13);
    assert_eq!(s.inertia, Some(Inertia::new(5, 3, 0)));
}

// Nocedal & Wright (2006), Example 16.2: x* = (2, −1, 1), y* = (−3, 2) in our convention.
#[test]
fn nocedal_wright_16_2() {
    let p = ProblemBuilder::new()
        .hessian_row_major(3, &[6., 2., 1., 2., 5., 2., 1., 2., 4.], Triangle::Full)
        .linear(&[-8., -3., -3.])
        .constraints_row_major(2, 3, &[1., 0., 1., 0., 1., 1.])
        .rhs(&[3., 0.])
        .build()
        .unwrap();
    let (s, _) = both(&p);
    assert!(max_diff(&s.x, &[2., -1., 1.]) < 1e-14);
    assert!(max_diff(&s.y, &[-3., 2.]) < 1e-14);
    assert!((s.objective + 3.5).abs() < 1e-13);
}

fn agree_on(p: &Problem) -> tangency::Solution {
    let (s, d) = both(p);
    let reference = nalgebra_solve(p);
    let (n, m) = (p.n(), p.m());
    let tol = 1e-9;
    assert!(
        max_diff(&s.x, &d.x) <= tol * scale(&d.x),
        "x differs by {}",
        max_diff(&s.x, &d.x)
    );
    assert!(
        max_diff(&s.y, &d.y) <= tol * scale(&d.y),
        "y differs by {}",
        max_diff(&s.y, &d.y)
    );
    assert!(max_diff(&s.x, &reference[..n]) <= tol * scale(&reference[..n]));
    assert!(max_diff(&s.y, &reference[n..n + m]) <= tol * scale(&reference[n..]));
    assert_eq!(s.inertia, d.inertia, "inertia");
    assert_eq!(s.verdict, d.verdict, "verdict");
    assert!(s.backward_error <= 1e-14, "backward error {}", s.backward_error);
    s
}

#[test]
fn poisson_control_family_agrees() {
    for k in [1, 2, 5, 12, 20] {
        let p = PoissonControl::new(k).build().unwrap();
        let s = agree_on(&p);
        assert_eq!(s.verdict, Some(Verdict::Minimizer), "k = {k}");
    }
}

#[test]
fn tied_lattice_family_agrees() {
    for k in [2, 3, 6, 11] {
        let p = TiedLattice::new(k).build().unwrap();
        let s = agree_on(&p);
        assert_eq!(s.verdict, Some(Verdict::Minimizer), "k = {k}");
    }
}

/// Nonconvex by construction: H = diag(±1 …) on a random sparse A; inertia known from
/// the construction via nalgebra's symmetric eigenvalues of K.
#[test]
fn nonconvex_known_inertia() {
    let n = 40;
    let m = 12;
    let mut h = Vec::new();
    for i in 0..n {
        h.push((
            i,
            i,
            if i % 3 == 0 {
                -1.0 - i as f64 / n as f64
            } else {
                2.0 + (i % 5) as f64
            },
        ));
        if i + 1 < n {
            h.push((i + 1, i, 0.3));
        }
    }
    let mut a = Vec::new();
    for r in 0..m {
        a.push((r, (3 * r) % n, 1.0));
        a.push((r, (3 * r + 7) % n, -0.5 + r as f64 / 10.0));
        a.push((r, (5 * r + 2) % n, 0.25));
    }
    let c: Vec<f64> = (0..n).map(|i| (i as f64).sin()).collect();
    let b: Vec<f64> = (0..m).map(|i| (i as f64).cos()).collect();
    let p = ProblemBuilder::new()
        .hessian_triplets(n, &h, Triangle::Lower)
        .constraints_triplets(m, n, &a)
        .linear(&c)
        .rhs(&b)
        .build()
        .unwrap();
    let k = tangency::kkt::assemble_dense(&p);
    let kn = nalgebra::DMatrix::from_fn(n + m, n + m, |i, j| k[(i, j)]);
    let eig = kn.symmetric_eigenvalues();
    let expected = Inertia::new(
        eig.iter().filter(|&&l| l > 0.0).count(),
        eig.iter().filter(|&&l| l < 0.0).count(),
        0,
    );
    assert!(eig.iter().all(|l| l.abs() > 1e-8));
    let s = agree_on(&p);
    assert_eq!(s.inertia, Some(expected));
    assert_eq!(s.verdict, Some(Verdict::Saddle));
}

#[test]
fn auto_picks_sparse_for_large_sparse_problems() {
    let small = Family::PoissonControl.problem(2).unwrap();
    let large = Family::PoissonControl.problem(12).unwrap();
    let dense_data = ProblemBuilder::new()
        .hessian_row_major(2, &[1., 0., 0., 1.], Triangle::Full)
        .build()
        .unwrap();
    let o = Options::default();
    assert_eq!(Plan::analyze(&large, &o).unwrap().method(), MethodUsed::SparseLdlt);
    assert_eq!(Plan::analyze(&dense_data, &o).unwrap().method(), MethodUsed::DenseLblt);
    // 12 unknowns, K about 40% full: dense.
    assert_eq!(Plan::analyze(&small, &o).unwrap().method(), MethodUsed::DenseLblt);
}
