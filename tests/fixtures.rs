//! Published worked examples with known answers (tests/fixtures/worked-examples.md),
//! through the library. The command-line versions are in tests/cli.rs.

use tangency::{solve, Inertia, Options, Pivoting, ProblemBuilder, Triangle, Verdict};

struct Case {
    name: &'static str,
    n: usize,
    m: usize,
    h: Vec<f64>,
    c: Vec<f64>,
    a: Vec<f64>,
    b: Vec<f64>,
    constant: f64,
    x: Vec<f64>,
    y: Vec<f64>,
    f: f64,
    inertia: Inertia,
}

fn cases() -> Vec<Case> {
    vec![
        // Hock & Schittkowski (1981), HS28 (values via tests/fixtures/worked-examples.md,
        // quoted from memory there and re-derived exactly).
        Case {
            name: "HS28",
            n: 3,
            m: 1,
            h: vec![2., 2., 0., 2., 4., 2., 0., 2., 2.],
            c: vec![0., 0., 0.],
            a: vec![1., 2., 3.],
            b: vec![1.],
            constant: 0.0,
            x: vec![0.5, -0.5, 0.5],
            y: vec![0.0],
            f: 0.0,
            inertia: Inertia::new(3, 1, 0),
        },
        // Hock & Schittkowski (1981), HS48: H singular, reduced Hessian positive definite.
        Case {
            name: "HS48",
            n: 5,
            m: 2,
            h: vec![
                2., 0., 0., 0., 0., //
                0., 2., -2., 0., 0., //
                0., -2., 2., 0., 0., //
                0., 0., 0., 2., -2., //
                0., 0., 0., -2., 2.,
            ],
            c: vec![-2., 0., 0., 0., 0.],
            a: vec![1., 1., 1., 1., 1., 0., 0., 1., -2., -2.],
            b: vec![5., -3.],
            constant: 1.0,
            x: vec![1.; 5],
            y: vec![0.0, 0.0],
            f: 0.0,
            inertia: Inertia::new(5, 2, 0),
        },
        // Hock & Schittkowski (1981), HS51.
        Case {
            name: "HS51",
            n: 5,
            m: 3,
            h: vec![
                2., -2., 0., 0., 0., //
                -2., 4., 2., 0., 0., //
                0., 2., 2., 0., 0., //
                0., 0., 0., 2., 0., //
                0., 0., 0., 0., 2.,
            ],
            c: vec![0., -4., -4., -2., -2.],
            a: vec![1., 3., 0., 0., 0., 0., 0., 1., 1., -2., 0., 1., 0., 0., -1.],
            b: vec![4., 0., 0.],
            constant: 6.0,
            x: vec![1.; 5],
            y: vec![0.0; 3],
            f: 0.0,
            inertia: Inertia::new(5, 3, 0),
        },
        // Nocedal & Wright (2006), Numerical Optimization, 2nd ed., Example 16.2. The book
        // reports multipliers (3, −2) under L = f − yᵀ(Ax − b); ours are (−3, 2).
        Case {
            name: "NW16.2",
            n: 3,
            m: 2,
            h: vec![6., 2., 1., 2., 5., 2., 1., 2., 4.],
            c: vec![-8., -3., -3.],
            a: vec![1., 0., 1., 0., 1., 1.],
            b: vec![3., 0.],
            constant: 0.0,
            x: vec![2., -1., 1.],
            y: vec![-3., 2.],
            f: -3.5,
            inertia: Inertia::new(3, 2, 0),
        },
    ]
}

fn check(case: &Case, options: &Options) {
    let p = ProblemBuilder::new()
        .hessian_row_major(case.n, &case.h, Triangle::Full)
        .linear(&case.c)
        .constraints_row_major(case.m, case.n, &case.a)
        .rhs(&case.b)
        .build()
        .unwrap();
    let s = solve(&p, options).unwrap_or_else(|e| panic!("{}: {e}", case.name));
    for (got, want) in s.x.iter().zip(&case.x) {
        assert!((got - want).abs() < 1e-13, "{}: x = {:?}", case.name, s.x);
    }
    for (got, want) in s.y.iter().zip(&case.y) {
        assert!((got - want).abs() < 1e-13, "{}: y = {:?}", case.name, s.y);
    }
    assert!(
        (s.objective + case.constant - case.f).abs() < 1e-13,
        "{}: f = {}",
        case.name,
        s.objective
    );
    assert_eq!(s.inertia, Some(case.inertia), "{}", case.name);
    assert_eq!(s.verdict, Some(Verdict::Minimizer), "{}", case.name);
    assert!(
        s.backward_error <= 4.0 * f64::EPSILON,
        "{}: backward error {}",
        case.name,
        s.backward_error
    );
    assert!(s.primal_residual < 1e-13 && s.dual_residual < 1e-13, "{}", case.name);
}

#[test]
fn worked_examples_default_options() {
    for case in cases() {
        check(&case, &Options::default());
    }
}

#[test]
fn worked_examples_rook_pivoting_without_equilibration() {
    let mut options = Options::default();
    options.dense.pivoting = Pivoting::Rook;
    options.dense.equilibration_sweeps = 0;
    for case in cases() {
        check(&case, &options);
    }
}

#[test]
fn worked_examples_one_triangle_and_sparse_storage() {
    for case in cases() {
        let n = case.n;
        let lower: Vec<(usize, usize, f64)> = (0..n)
            .flat_map(|i| (0..=i).map(move |j| (i, j)))
            .map(|(i, j)| (i, j, case.h[i * n + j]))
            .filter(|t| t.2 != 0.0)
            .collect();
        let a: Vec<(usize, usize, f64)> = (0..case.m)
            .flat_map(|i| (0..n).map(move |j| (i, j)))
            .map(|(i, j)| (i, j, case.a[i * n + j]))
            .filter(|t| t.2 != 0.0)
            .collect();
        let p = ProblemBuilder::new()
            .hessian_triplets(n, &lower, Triangle::Lower)
            .linear(&case.c)
            .constraints_triplets(case.m, n, &a)
            .rhs(&case.b)
            .build()
            .unwrap();
        let s = solve(&p, &Options::default()).unwrap();
        assert!(
            s.x.iter().zip(&case.x).all(|(g, w)| (g - w).abs() < 1e-13),
            "{}",
            case.name
        );
        assert_eq!(s.verdict, Some(Verdict::Minimizer));
    }
}
