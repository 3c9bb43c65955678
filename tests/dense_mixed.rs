//! Mixed-precision dense LBLᵀ (f32 factors, f64 refinement on the original K): accepted
//! only when refinement contracts and every pivot sign is certain, else refactored in f64.
//! Checked by construction (x*, y* chosen, c and b derived), against nalgebra's symmetric
//! eigenvalues for the inertia, and on cases built to be refused.

use nalgebra::DMatrix;
use tangency::backend::dense_lblt::{DenseParams, DensePrecision};
use tangency::{Inertia, Method, Options, Plan, Problem, ProblemBuilder, Triangle};

/// Deterministic generator (LCG), values in [−1, 1).
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        ((self.0 >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
    }
}

/// Problem with the known solution (x*, y*): c = −Hx* − Aᵀy*, b = Ax*.
fn with_solution(n: usize, h: &[f64], m: usize, a: &[f64], xs: &[f64], ys: &[f64]) -> Problem {
    let mut c = vec![0.0; n];
    for i in 0..n {
        for j in 0..n {
            c[i] -= h[i * n + j] * xs[j];
        }
        for k in 0..m {
            c[i] -= a[k * n + i] * ys[k];
        }
    }
    let b: Vec<f64> = (0..m).map(|k| (0..n).map(|j| a[k * n + j] * xs[j]).sum()).collect();
    ProblemBuilder::new()
        .hessian_row_major(n, h, Triangle::Full)
        .linear(&c)
        .constraints_row_major(m, n, a)
        .rhs(&b)
        .build()
        .expect("valid problem")
}

/// Random indefinite H (symmetric, a third of the diagonal shifted down) and random A.
fn random(n: usize, m: usize, seed: u64) -> (Vec<f64>, Vec<f64>) {
    let mut rng = Rng(seed);
    let mut h = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..=i {
            let v = rng.next();
            h[i * n + j] = v;
            h[j * n + i] = v;
        }
        h[i * n + i] += if i % 3 == 0 { -3.0 } else { 3.0 };
    }
    let a: Vec<f64> = (0..m * n).map(|_| rng.next()).collect();
    (h, a)
}

fn options(precision: DensePrecision, sweeps: usize) -> Options {
    Options {
        method: Method::Dense,
        dense: DenseParams {
            precision,
            equilibration_sweeps: sweeps,
            ..Default::default()
        },
        ..Default::default()
    }
}

/// Inertia of K by nalgebra's symmetric eigenvalues, with a gap check: no eigenvalue
/// within 1e-8·‖K‖ of zero (the cases here are built nonsingular).
fn nalgebra_inertia(p: &Problem) -> Inertia {
    let k = tangency::kkt::assemble_dense(p);
    let dim = k.nrows();
    let k = DMatrix::from_fn(dim, dim, |i, j| k[(i, j)]);
    let norm = k.amax();
    let eig = k.symmetric_eigen().eigenvalues;
    assert!(eig.iter().all(|l| l.abs() > 1e-8 * norm), "test matrix nearly singular");
    Inertia::new(
        eig.iter().filter(|l| **l > 0.0).count(),
        eig.iter().filter(|l| **l < 0.0).count(),
        0,
    )
}

fn used_single(f: &tangency::Factorization) -> bool {
    f.backend()
        .notes()
        .iter()
        .any(|n| n.starts_with("dense LBLᵀ factors in single precision"))
}

fn refusal(f: &tangency::Factorization) -> Option<String> {
    f.backend()
        .notes()
        .iter()
        .find(|n| n.starts_with("single-precision dense LBLᵀ factors refused"))
        .cloned()
}

#[test]
fn well_conditioned_indefinite_is_accepted_with_exact_inertia_and_full_accuracy() {
    let mut ran = 0;
    for (n, m, seed) in [(60, 20, 1u64), (90, 30, 2), (150, 40, 3), (200, 120, 4), (40, 39, 5)] {
        let (h, a) = random(n, m, seed);
        let mut rng = Rng(seed + 100);
        let xs: Vec<f64> = (0..n).map(|_| rng.next()).collect();
        let ys: Vec<f64> = (0..m).map(|_| rng.next()).collect();
        let p = with_solution(n, &h, m, &a, &xs, &ys);
        let f = Plan::analyze(&p, &options(DensePrecision::Mixed, 10))
            .unwrap()
            .factor(&p)
            .unwrap();
        assert!(used_single(&f), "n = {n}: {:?}", f.backend().notes());
        assert_eq!(f.inertia(), Some(nalgebra_inertia(&p)), "n = {n}, m = {m}");
        let s = f.solve().unwrap();
        assert!(
            s.backward_error <= 1e-15,
            "n = {n}: backward error {:e}",
            s.backward_error
        );
        for (g, w) in s.x.iter().zip(&xs).chain(s.y.iter().zip(&ys)) {
            assert!((g - w).abs() <= 1e-9 * (1.0 + w.abs()), "n = {n}: {g} vs {w}");
        }
        ran += 1;
    }
    assert_eq!(ran, 5);
}

#[test]
fn auto_precision_switches_at_the_documented_order() {
    use tangency::backend::dense_lblt::MIXED_MIN_DIM;
    for (dim, single) in [(MIXED_MIN_DIM - 1, false), (MIXED_MIN_DIM, true)] {
        let m = dim / 4;
        let n = dim - m;
        let (h, a) = random(n, m, 7);
        let p = with_solution(n, &h, m, &a, &vec![1.0; n], &vec![-1.0; m]);
        let f = Plan::analyze(&p, &options(DensePrecision::Auto, 10))
            .unwrap()
            .factor(&p)
            .unwrap();
        assert_eq!(used_single(&f), single, "N = {dim}: {:?}", f.backend().notes());
        assert!(f.solve().unwrap().backward_error <= 1e-15);
    }
}

/// H = Q diag(λ) Qᵀ with λ spread over [1e-9, 1] (Q from a Householder reflector), A
/// selecting a few coordinates: κ(K) ≈ 1e9, beyond what f32 factors refine.
#[test]
fn ill_conditioned_goes_to_double_and_stays_accurate() {
    let (n, m) = (80, 10);
    let mut rng = Rng(11);
    let v: Vec<f64> = (0..n).map(|_| rng.next()).collect();
    let vv: f64 = v.iter().map(|x| x * x).sum();
    let lambda: Vec<f64> = (0..n).map(|i| 10f64.powf(-9.0 * i as f64 / (n - 1) as f64)).collect();
    let mut h = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..n {
            // (I − 2vvᵀ/vᵀv) diag(λ) (I − 2vvᵀ/vᵀv)
            let mut s = 0.0;
            for k in 0..n {
                let qik = if i == k { 1.0 } else { 0.0 } - 2.0 * v[i] * v[k] / vv;
                let qjk = if j == k { 1.0 } else { 0.0 } - 2.0 * v[j] * v[k] / vv;
                s += qik * lambda[k] * qjk;
            }
            h[i * n + j] = s;
        }
    }
    let mut a = vec![0.0; m * n];
    for k in 0..m {
        a[k * n + 7 * k] = 1.0;
    }
    let xs: Vec<f64> = (0..n).map(|_| rng.next()).collect();
    let ys: Vec<f64> = (0..m).map(|_| rng.next()).collect();
    let p = with_solution(n, &h, m, &a, &xs, &ys);
    let f = Plan::analyze(&p, &options(DensePrecision::Mixed, 10))
        .unwrap()
        .factor(&p)
        .unwrap();
    assert!(!used_single(&f));
    let why = refusal(&f).expect("a refusal note");
    assert!(why.contains("probe") || why.contains("pivot"), "{why}");
    assert_eq!(f.inertia(), Some(Inertia::new(n, m, 0)));
    let s = f.solve().unwrap();
    assert!(s.backward_error <= 1e-15, "backward error {:e}", s.backward_error);
}

/// A pivot that f32 arithmetic represents exactly but that is too small to trust: H has
/// the block [1 1; 1 1 + 2⁻²⁰] (second pivot 2⁻²⁰ ≈ 9.5e-7, below the margin of about
/// 100·ε_f32 ≈ 1.2e-5), everything else the identity; no equilibration, so every entry
/// and the elimination are exact in f32.
#[test]
fn near_zero_pivot_goes_to_double() {
    let (n, m) = (30, 5);
    let mut h = vec![0.0; n * n];
    for i in 0..n {
        h[i * n + i] = 1.0;
    }
    h[1] = 1.0;
    h[n] = 1.0;
    h[n + 1] = 1.0 + 2f64.powi(-20);
    let mut a = vec![0.0; m * n];
    for k in 0..m {
        a[k * n + 10 + k] = 1.0;
    }
    let xs: Vec<f64> = (0..n).map(|i| i as f64 / 8.0).collect();
    let ys: Vec<f64> = (0..m).map(|k| 1.0 - k as f64 / 4.0).collect();
    let p = with_solution(n, &h, m, &a, &xs, &ys);
    let f = Plan::analyze(&p, &options(DensePrecision::Mixed, 0))
        .unwrap()
        .factor(&p)
        .unwrap();
    let why = refusal(&f).expect("a refusal note");
    assert!(why.contains("pivot eigenvalue"), "{why}");
    assert_eq!(f.inertia(), Some(nalgebra_inertia(&p)));
    let s = f.solve().unwrap();
    assert!(s.backward_error <= 1e-15);
    for (g, w) in s.x.iter().zip(&xs) {
        assert!((g - w).abs() <= 1e-8 * (1.0 + w.abs()), "{g} vs {w}");
    }
}

/// Entries of 1e45 (beyond f32::MAX ≈ 3.4e38): without equilibration the f32 factors are
/// refused; with it the scaled K is representable and they are used.
#[test]
fn values_outside_single_range_go_to_double_unless_equilibrated() {
    let (n, m) = (40, 10);
    let (mut h, a) = random(n, m, 21);
    let xs: Vec<f64> = (0..n).map(|i| (i % 5) as f64 - 2.0).collect();
    let ys: Vec<f64> = (0..m).map(|k| k as f64).collect();
    // [cH Aᵀ; A 0] = D [H Aᵀ; A 0] D with D = diag(√c I, I/√c): same inertia as unscaled.
    let want = nalgebra_inertia(&with_solution(n, &h, m, &a, &xs, &ys));
    h.iter_mut().for_each(|v| *v *= 1e45);
    let p = with_solution(n, &h, m, &a, &xs, &ys);
    let f = Plan::analyze(&p, &options(DensePrecision::Mixed, 0))
        .unwrap()
        .factor(&p)
        .unwrap();
    let why = refusal(&f).expect("a refusal note");
    assert!(why.contains("single-precision range"), "{why}");
    let f = Plan::analyze(&p, &options(DensePrecision::Mixed, 10))
        .unwrap()
        .factor(&p)
        .unwrap();
    assert!(used_single(&f), "{:?}", f.backend().notes());
    assert_eq!(f.inertia(), Some(want));
    let s = f.solve().unwrap();
    assert!(s.backward_error <= 1e-15, "backward error {:e}", s.backward_error);
}

#[test]
fn refactor_switches_precision_with_the_values() {
    // Same pattern twice: first well-conditioned (single accepted), then with the values
    // that need double (entries beyond f32 range, no equilibration).
    let (n, m) = (50, 10);
    let (h, a) = random(n, m, 31);
    let p1 = with_solution(n, &h, m, &a, &vec![0.5; n], &vec![1.0; m]);
    let big: Vec<f64> = h.iter().map(|v| v * 1e40).collect();
    let p2 = with_solution(n, &big, m, &a, &vec![0.5; n], &vec![1.0; m]);
    let plan = Plan::analyze(&p1, &options(DensePrecision::Mixed, 0)).unwrap();
    let mut f = plan.factor(&p1).unwrap();
    assert!(used_single(&f));
    f.refactor(&p2).unwrap();
    assert!(refusal(&f).is_some());
    assert!(f.solve().unwrap().backward_error <= 1e-15);
    f.refactor(&p1).unwrap();
    assert!(used_single(&f));
    assert!(f.solve().unwrap().backward_error <= 1e-15);
}
