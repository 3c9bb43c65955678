//! The Riccati backend against independent references: the dense LBLᵀ backend and
//! nalgebra (a separate library) on random stage problems (time-varying, with cross terms
//! and input constraints), and solutions known by construction (pick z*, y*; set
//! c = −Hz* − Aᵀy*, b = Az*).

use faer::Mat;
use proptest::prelude::*;
use tangency::stagewise::{Horizon, HorizonBuilder, StageDims};
use tangency::{Method, Options, Plan, Problem, Verdict};

/// A small deterministic generator (SplitMix64) so one proptest seed builds a whole problem.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        (z >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
    fn mat(&mut self, r: usize, c: usize) -> Mat<f64> {
        Mat::from_fn(r, c, |_, _| self.next())
    }
    fn vec(&mut self, n: usize) -> Vec<f64> {
        (0..n).map(|_| self.next()).collect()
    }
    /// L Lᵀ + shift·I (positive definite for shift > 0).
    fn spd(&mut self, n: usize, shift: f64) -> Mat<f64> {
        let l = self.mat(n, n);
        let mut m = &l * l.transpose();
        for i in 0..n {
            m[(i, i)] += shift;
        }
        m
    }
}

#[derive(Clone, Copy, Debug)]
struct Spec {
    nx: usize,
    nu: usize,
    horizon: usize,
    seed: u64,
    cross: bool,
    constraints: bool,
}

fn horizon(spec: Spec) -> Horizon {
    let Spec { nx, nu, horizon, .. } = spec;
    let mut rng = Rng(spec.seed);
    let mut dyns = Vec::new();
    let mut costs = Vec::new();
    for _ in 0..horizon {
        dyns.push((rng.mat(nx, nx), rng.mat(nx, nu)));
        // Whole stage block [[Q, Sᵀ], [S, R]] positive definite.
        let w = rng.spd(nx + nu, 0.5);
        let q = Mat::from_fn(nx, nx, |i, j| w[(i, j)]);
        let r = Mat::from_fn(nu, nu, |i, j| w[(nx + i, nx + j)]);
        let s = Mat::from_fn(nu, nx, |i, j| if spec.cross { w[(nx + i, j)] } else { 0.0 });
        costs.push((q, r, s));
    }
    let mut b = HorizonBuilder::new(nx, nu, horizon)
        .dynamics_with(|k| dyns[k].clone())
        .cost_with(|k| (costs[k].0.clone(), costs[k].1.clone()));
    for (k, cost) in costs.iter().enumerate() {
        b = b
            .stage_cross_weight(k, cost.2.as_ref())
            .stage_linear(k, &rng.vec(nx), &rng.vec(nu))
            .stage_offset(k, &rng.vec(nx));
        if spec.constraints && nu > 0 && k % 2 == 0 {
            let p = 1 + (k / 2) % nu;
            b = b.stage_input_constraint(k, rng.mat(p, nu).as_ref(), rng.mat(p, nx).as_ref(), &rng.vec(p));
        }
    }
    b.terminal_cost(rng.spd(nx, 0.5).as_ref())
        .terminal_linear(&rng.vec(nx))
        .initial_state(&rng.vec(nx))
        .build()
        .expect("valid random horizon")
}

fn riccati_opts(d: StageDims) -> Options {
    Options {
        method: Method::Riccati,
        stages: Some(d),
        ..Default::default()
    }
}

fn dense_opts() -> Options {
    Options {
        method: Method::Dense,
        ..Default::default()
    }
}

fn max_abs(v: &[f64]) -> f64 {
    v.iter().fold(0.0f64, |a, x| a.max(x.abs()))
}

fn max_diff(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).fold(0.0f64, |m, (p, q)| m.max((p - q).abs()))
}

/// Inertia of K from nalgebra's symmetric eigenvalues (independent reference).
fn nalgebra_inertia(p: &Problem) -> (usize, usize, usize) {
    let k = tangency::kkt::assemble_dense(p);
    let dim = k.nrows();
    let m = nalgebra::DMatrix::from_fn(dim, dim, |i, j| k[(i, j)]);
    let eig = nalgebra::SymmetricEigen::new(m);
    let scale = eig.eigenvalues.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let tol = dim as f64 * 1e3 * f64::EPSILON * scale;
    let mut out = (0, 0, 0);
    for &l in eig.eigenvalues.iter() {
        if l.abs() <= tol {
            out.2 += 1;
        } else if l > 0.0 {
            out.0 += 1;
        } else {
            out.1 += 1;
        }
    }
    out
}

fn check_against_dense(spec: Spec) {
    let h = horizon(spec);
    let p = h.to_problem().unwrap();
    let ric = Plan::analyze(&p, &riccati_opts(h.dims())).unwrap();
    assert_eq!(ric.method(), tangency::MethodUsed::Riccati, "{}", ric.reason());
    let sr = ric.factor(&p).unwrap().solve().unwrap();
    let sd = Plan::analyze(&p, &dense_opts())
        .unwrap()
        .factor(&p)
        .unwrap()
        .solve()
        .unwrap();
    let scale_x = 1.0 + max_abs(&sd.x);
    let scale_y = 1.0 + max_abs(&sd.y);
    assert!(max_diff(&sr.x, &sd.x) <= 1e-8 * scale_x, "x differs for {spec:?}");
    assert!(max_diff(&sr.y, &sd.y) <= 1e-8 * scale_y, "y differs for {spec:?}");
    assert_eq!(sr.inertia, sd.inertia, "{spec:?}");
    assert_eq!(sr.verdict, Some(Verdict::Minimizer));
    assert_eq!(sr.verdict, sd.verdict);
    assert!(
        sr.backward_error < 1e-14,
        "backward error {:e} for {spec:?}",
        sr.backward_error
    );
    assert!((sr.objective - sd.objective).abs() <= 1e-9 * (1.0 + sd.objective.abs()));
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]

    #[test]
    fn agrees_with_dense(nx in 0usize..4, nu in 0usize..3, n in 0usize..6, seed in any::<u64>(),
                         cross in any::<bool>(), constraints in any::<bool>()) {
        check_against_dense(Spec { nx, nu, horizon: n, seed, cross, constraints });
    }

    #[test]
    fn recovers_solution_by_construction(nx in 1usize..4, nu in 1usize..3, n in 1usize..6, seed in any::<u64>()) {
        let spec = Spec { nx, nu, horizon: n, seed, cross: true, constraints: true };
        let h = horizon(spec);
        let p = h.to_problem().unwrap();
        let mut rng = Rng(seed ^ 0xA5A5);
        let (nv, m) = (p.n(), p.m());
        let zs = rng.vec(nv);
        let ys = rng.vec(m);
        let mut c = vec![0.0; nv];
        p.hessian().mul_add(&zs, &mut c);
        p.constraints().tr_mul_add(&ys, &mut c);
        c.iter_mut().for_each(|v| *v = -*v);
        let mut b = vec![0.0; m];
        p.constraints().mul_add(&zs, &mut b);
        let f = Plan::analyze(&p, &riccati_opts(h.dims())).unwrap().factor(&p).unwrap();
        let s = f.solve_with(&c, &b).unwrap();
        prop_assert!(max_diff(&s.x, &zs) <= 1e-9 * (1.0 + max_abs(&zs)));
        prop_assert!(max_diff(&s.y, &ys) <= 1e-9 * (1.0 + max_abs(&ys)));
    }
}

#[test]
fn medium_time_varying_problem_agrees_with_dense_and_nalgebra() {
    let spec = Spec {
        nx: 5,
        nu: 3,
        horizon: 12,
        seed: 7,
        cross: true,
        constraints: true,
    };
    check_against_dense(spec);
    let h = horizon(spec);
    let p = h.to_problem().unwrap();
    let f = Plan::analyze(&p, &riccati_opts(h.dims())).unwrap().factor(&p).unwrap();
    let i = f.inertia().unwrap();
    assert_eq!((i.positive, i.negative, i.zero), nalgebra_inertia(&p));
}

/// An indefinite stage: R₂ = −5 makes R₂ + B₂ᵀP₃B₂ negative (B is small), so K has one
/// more negative eigenvalue than a minimizer allows. The Riccati backend names stage 2,
/// still returns the stationary point, and reports the inertia the dense backend and
/// nalgebra's eigenvalues find.
#[test]
fn indefinite_stage_is_named_and_the_verdict_matches() {
    let a = faer::mat![[1.0, 0.1], [0.0, 1.0]];
    let b = faer::mat![[0.005], [0.1]];
    let q = faer::mat![[1.0, 0.0], [0.0, 0.5]];
    let h = HorizonBuilder::new(2, 1, 6)
        .dynamics(a.as_ref(), b.as_ref())
        .cost(q.as_ref(), faer::mat![[1.0]].as_ref())
        .stage_cost(2, q.as_ref(), faer::mat![[-5.0]].as_ref())
        .terminal_cost(q.as_ref())
        .stage_linear(3, &[0.3, -0.2], &[0.7])
        .initial_state(&[1.0, -1.0])
        .build()
        .unwrap();
    let p = h.to_problem().unwrap();
    let f = Plan::analyze(&p, &riccati_opts(h.dims())).unwrap().factor(&p).unwrap();
    let ric = f.backend().riccati().unwrap();
    assert_eq!(ric.indefinite_stages().len(), 1);
    assert_eq!(ric.indefinite_stages()[0].0, 2);
    let s = f.solve().unwrap();
    assert_eq!(s.verdict, Some(Verdict::Saddle));
    assert!(s.notes.iter().any(|n| n.starts_with("stage 2:")), "{:?}", s.notes);
    let d = Plan::analyze(&p, &dense_opts())
        .unwrap()
        .factor(&p)
        .unwrap()
        .solve()
        .unwrap();
    assert_eq!(s.inertia, d.inertia);
    assert_eq!(d.verdict, Some(Verdict::Saddle));
    let i = s.inertia.unwrap();
    assert_eq!((i.positive, i.negative, i.zero), nalgebra_inertia(&p));
    assert_eq!((i.positive, i.negative), (p.n() - 1, p.m() + 1));
    assert!(max_diff(&s.x, &d.x) < 1e-9 * (1.0 + max_abs(&d.x)));
    assert!(max_diff(&s.y, &d.y) < 1e-9 * (1.0 + max_abs(&d.y)));
    assert!(s.backward_error < 1e-14);
}

/// A singular stage (R₁ + B₁ᵀP₂B₁ = 0 by construction: B₁ = 0, R₁ = 0) makes K singular.
/// The Riccati backend names the stage and reports the dense inertia; the shared pipeline
/// then treats the singular K as for every other method (null-space rescue with rank
/// analysis), so the outcome equals the dense method's.
#[test]
fn singular_stage_is_named_and_handled_like_the_general_backends() {
    let a = faer::mat![[1.0, 0.1], [0.0, 1.0]];
    let b = faer::mat![[0.005], [0.1]];
    let q = faer::mat![[1.0, 0.0], [0.0, 0.5]];
    let h = HorizonBuilder::new(2, 1, 4)
        .dynamics(a.as_ref(), b.as_ref())
        .stage_dynamics(1, a.as_ref(), faer::mat![[0.0], [0.0]].as_ref())
        .cost(q.as_ref(), faer::mat![[1.0]].as_ref())
        .stage_cost(1, q.as_ref(), faer::mat![[0.0]].as_ref())
        .initial_state(&[1.0, 0.5])
        .build()
        .unwrap();
    let p = h.to_problem().unwrap();
    let f = Plan::analyze(&p, &riccati_opts(h.dims())).unwrap().factor(&p).unwrap();
    let fd = Plan::analyze(&p, &dense_opts()).unwrap().factor(&p).unwrap();
    match (f.solve(), fd.solve()) {
        (Ok(r), Ok(d)) => {
            assert_eq!(r.verdict, d.verdict);
            assert!(
                r.notes
                    .iter()
                    .any(|n| n.starts_with("stage 1:") && n.contains("singular")),
                "{:?}",
                r.notes
            );
            assert!(max_diff(&r.x, &d.x) < 1e-9 * (1.0 + max_abs(&d.x)));
        }
        (Err(r), Err(d)) => assert_eq!(r.status(), d.status()),
        (r, d) => panic!("outcomes differ: {r:?} vs {d:?}"),
    }
}

/// Stage-local constraints that the elimination cannot take (a pure state constraint in
/// stage 1) fall back to the dense backend with a note saying why.
#[test]
fn state_only_constraint_falls_back_with_a_note() {
    let a = faer::mat![[1.0, 0.1], [0.0, 1.0]];
    let b = faer::mat![[0.005], [0.1]];
    let q = faer::mat![[1.0, 0.0], [0.0, 0.5]];
    let h = HorizonBuilder::new(2, 1, 4)
        .dynamics(a.as_ref(), b.as_ref())
        .cost(q.as_ref(), faer::mat![[1.0]].as_ref())
        .initial_state(&[1.0, 0.0])
        .build()
        .unwrap();
    let p = h.to_problem().unwrap();
    // Append the row x_1[0] = 0.5 (touches only the state of stage 1).
    let dims = h.dims();
    let mut a_trip = Vec::new();
    p.constraints().for_each(|i, j, v| a_trip.push((i, j, v)));
    a_trip.push((p.m(), dims.x_offset(1), 1.0));
    let mut bv = p.rhs().to_vec();
    bv.push(0.5);
    let mut h_trip = Vec::new();
    p.hessian().for_each(|i, j, v| h_trip.push((i, j, v)));
    let p2 = tangency::ProblemBuilder::new()
        .hessian_triplets(p.n(), &h_trip, tangency::Triangle::Full)
        .linear(p.linear())
        .constraints_triplets(p.m() + 1, p.n(), &a_trip)
        .rhs(&bv)
        .build()
        .unwrap();
    let plan = Plan::analyze(&p2, &riccati_opts(dims)).unwrap();
    assert_eq!(plan.method(), tangency::MethodUsed::DenseLblt);
    let s = plan.factor(&p2).unwrap().solve().unwrap();
    assert!(
        s.notes
            .iter()
            .any(|n| n.contains("does not apply") && n.contains("stage 1")),
        "{:?}",
        s.notes
    );
    assert!((s.x[dims.x_offset(1)] - 0.5).abs() < 1e-9, "{:?} {:?}", s.x, s.notes);
}

/// A coupling entry in H is refused with the first offending entry named.
#[test]
fn entry_outside_the_structure_is_named() {
    let a = faer::mat![[1.0]];
    let h = HorizonBuilder::new(1, 1, 3)
        .dynamics(a.as_ref(), a.as_ref())
        .cost(a.as_ref(), a.as_ref())
        .build()
        .unwrap();
    let p = h.to_problem().unwrap();
    let mut h_trip = Vec::new();
    p.hessian().for_each(|i, j, v| h_trip.push((i, j, v)));
    // Couple u_0 (column 1) with x_2 (column 4).
    h_trip.push((1, 4, 0.25));
    h_trip.push((4, 1, 0.25));
    let mut a_trip = Vec::new();
    p.constraints().for_each(|i, j, v| a_trip.push((i, j, v)));
    let bad = tangency::ProblemBuilder::new()
        .hessian_triplets(p.n(), &h_trip, tangency::Triangle::Full)
        .constraints_triplets(p.m(), p.n(), &a_trip)
        .build()
        .unwrap();
    let err = Plan::analyze(&bad, &riccati_opts(h.dims())).unwrap_err();
    match &err {
        tangency::Error::NotStageStructured { block, row, col, .. } => {
            assert_eq!((*block, *row, *col), (tangency::Block::H, 1, 4));
        }
        other => panic!("unexpected {other:?}"),
    }
    assert!(err.is_invalid_input());
    assert!(
        err.to_string().contains("u_0[0]") && err.to_string().contains("x_2[0]"),
        "{err}"
    );
    // Missing stage dimensions and wrong sizes are invalid options.
    let opts = Options {
        method: Method::Riccati,
        ..Default::default()
    };
    assert!(matches!(
        Plan::analyze(&p, &opts),
        Err(tangency::Error::InvalidOption(_))
    ));
    assert!(matches!(
        Plan::analyze(&p, &riccati_opts(StageDims::new(1, 1, 4))),
        Err(tangency::Error::InvalidOption(_))
    ));
}
