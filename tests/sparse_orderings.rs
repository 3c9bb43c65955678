//! Nested dissection (METIS) against AMD, the thread rule of the sparse backend and the
//! `heat-cube` generator. References: nalgebra's dense LU of the same K (independent
//! library), the inertia known by construction (H ≻ 0 and A of full row rank give
//! In(K) = (n, m, 0), Sylvester's law of inertia / Gould 1985), and the AMD ordering.

use faer::Par;
use tangency::backend::sparse_ldlt::{NestedDissection, SparseAnalysis, SparseParams};
use tangency::generate::{Family, HeatCube, PoissonControl, StokesMac, TiedLattice};
use tangency::{Inertia, Method, Options, Plan, Problem};

fn options(nd: NestedDissection) -> Options {
    let mut o = Options {
        method: Method::Sparse,
        ..Default::default()
    };
    o.sparse.nested_dissection = nd;
    o
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

/// On every family the forced nested-dissection ordering gives the AMD solution, the same
/// inertia, a backward error at machine-precision level, and (small cases) nalgebra's answer.
#[test]
fn nested_dissection_agrees_with_amd() {
    let cases: Vec<(&str, Problem)> = vec![
        ("poisson-control 12", PoissonControl::new(12).build().unwrap()),
        ("heat-cube 6", HeatCube::new(6).build().unwrap()),
        ("tied-lattice 6", TiedLattice::new(6).build().unwrap()),
        ("stokes-mac 10", StokesMac::new(10).build().unwrap()),
    ];
    let mut ran = 0;
    for (name, p) in &cases {
        let a = SparseAnalysis::new(p, &options(NestedDissection::Always).sparse).unwrap();
        let kept = a.ordering().unwrap().name;
        assert!(
            a.orderings().iter().any(|t| t.name.contains("nested dissection")),
            "{name}: trials {:?}",
            a.orderings()
        );
        let nd = tangency::solve(p, &options(NestedDissection::Always)).unwrap();
        let amd = tangency::solve(p, &options(NestedDissection::Never)).unwrap();
        assert_eq!(nd.inertia, amd.inertia, "{name} ({kept})");
        assert_eq!(nd.verdict, amd.verdict, "{name} ({kept})");
        assert!(nd.backward_error <= 1e-15, "{name} ({kept}): {:e}", nd.backward_error);
        let tol = 1e-9 * scale(&amd.x).max(scale(&amd.y));
        assert!(max_diff(&nd.x, &amd.x) <= tol, "{name} ({kept}): x differs");
        assert!(max_diff(&nd.y, &amd.y) <= tol, "{name} ({kept}): y differs");
        if p.n() + p.m() <= 800 && !name.starts_with("tied") {
            let r = nalgebra_solve(p);
            let tol = 1e-8 * scale(&r);
            assert!(max_diff(&nd.x, &r[..p.n()]) <= tol, "{name}: x against nalgebra");
        }
        ran += 1;
    }
    assert_eq!(ran, 4);
}

/// Known by construction: H ≻ 0 and A has full row rank (the 7-point Laplacian block is
/// nonsingular), so In(K) = (n, m, 0) and the solution is the unique minimizer; the
/// constraints hold to rounding and the answer matches nalgebra's dense LU.
#[test]
fn heat_cube_inertia_and_reference() {
    let p = Family::HeatCube.problem(5).unwrap();
    assert_eq!((p.n(), p.m()), (250, 125));
    let s = tangency::solve(&p, &options(NestedDissection::Auto)).unwrap();
    assert_eq!(s.inertia, Some(Inertia::new(250, 125, 0)));
    assert!(s.backward_error <= 1e-15);
    let r = nalgebra_solve(&p);
    assert!(max_diff(&s.x, &r[..250]) <= 1e-9 * scale(&r));
    assert!("heat-cube".parse::<Family>().unwrap() == Family::HeatCube);
}

/// The thread choice is a function of the pattern and the settings only: repeated analyses
/// agree, the default keeps the factorization on one thread, and a zero threshold uses the
/// threads allowed for a supernodal factorization. Results agree across the choices.
#[test]
fn thread_choice_is_deterministic() {
    let p = HeatCube::new(8).build().unwrap();
    let mut params = SparseParams {
        par: Par::rayon(2),
        ..Default::default()
    };
    let a = SparseAnalysis::new(&p, &params).unwrap();
    let b = SparseAnalysis::new(&p, &params).unwrap();
    assert_eq!(a.thread_choice(), b.thread_choice());
    assert_eq!(a.thread_choice().allowed, 2);
    assert_eq!(a.thread_choice().used, 1);
    assert_eq!(a.parallelism(), Par::Seq);
    assert!(a.is_supernodal());
    assert!(a.thread_choice().front_flops > 0.0);
    params.parallel_min_front_flops = 0.0;
    let c = SparseAnalysis::new(&p, &params).unwrap();
    assert_eq!(c.thread_choice().used, 2);
    assert_eq!(c.parallelism(), Par::rayon(2));
    let mut o = options(NestedDissection::Auto);
    o.sparse = params;
    let par = Plan::analyze(&p, &o).unwrap().factor(&p).unwrap().solve().unwrap();
    let seq = tangency::solve(&p, &options(NestedDissection::Auto)).unwrap();
    assert_eq!(par.inertia, seq.inertia);
    assert!(max_diff(&par.x, &seq.x) <= 1e-10 * scale(&seq.x));
}
