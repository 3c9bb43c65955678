//! Condition estimate of K against the exact κ₁(K) from nalgebra's inverse, and the
//! forward-error bound against problems with exactly known solutions.

mod diagnostics_support;

use diagnostics_support::*;
use nalgebra::DMatrix;
use tangency::diagnostics::condition::{self, forward_error_bound, norm1_estimate, MAX_SOLVE_CALLS};
use tangency::{Options, Plan, ProblemBuilder, Triangle};

/// Random KKT matrices, dimensions 1..=8 (m from 0 to n), indefinite H, κ₁ from about 1 up
/// to about 1e12 (decade chosen per case), blocks scaled against each other by up to 1e±3.
/// The Hager–Higham estimate must be a lower bound (up to rounding of the reference at
/// large κ) and within a factor 3 of the exact value.
#[test]
fn estimate_within_factor_three_of_exact_kappa() {
    let mut rng = Rng::new(20261202);
    let mut accepted = 0;
    let mut worst_ratio = 1.0f64;
    let mut max_kappa = 0.0f64;
    let mut above_1e8 = 0;
    for case in 0..400 {
        if accepted >= 260 {
            break;
        }
        let n = 1 + rng.below(8);
        let m = rng.below(n + 1);
        let decades = (case % 13) as f64; // target log10 κ
        let spread = |rng: &mut Rng, k: usize| -> Vec<f64> {
            (0..k)
                .map(|i| {
                    let t = if k > 1 { i as f64 / (k - 1) as f64 } else { 1.0 };
                    10f64.powf(-0.5 * decades * t) * (1.0 + 0.5 * rng.uniform())
                })
                .collect()
        };
        let mut eigs = spread(&mut rng, n);
        for e in eigs.iter_mut() {
            if rng.uniform() < 0.3 {
                *e = -*e;
            }
        }
        let scale_h = 10f64.powf(3.0 * rng.sym());
        let h = symmetric_with_spectrum(&mut rng, &eigs) * scale_h;
        let sv = spread(&mut rng, m);
        let a = matrix_with_singular_values(&mut rng, m, n, &sv);
        let p = problem(&h, &a, &rng.vec(n), &rng.vec(m));
        let k = kkt(&p);
        let Some(inv) = k.clone().try_inverse() else { continue };
        let exact = norm1(&k) * norm1(&inv);
        if exact.is_nan() || exact > 1e13 {
            continue; // beyond the range the f64 reference inverse is trusted
        }
        let f = Plan::analyze(&p, &Options::default()).unwrap().factor(&p).unwrap();
        let est = condition::estimate(&f);
        assert!(est.solves <= MAX_SOLVE_CALLS, "case {case}: {} solves", est.solves);
        let ratio = exact / est.kappa;
        // Lower bound up to the rounding of both computations (relative κε ≤ 1e-3 here).
        assert!(
            ratio >= 1.0 - 1e-3,
            "case {case} (n={n}, m={m}): estimate {:.6e} > exact {exact:.6e}",
            est.kappa
        );
        assert!(
            ratio <= 3.0,
            "case {case} (n={n}, m={m}): estimate {:.3e} vs exact {exact:.3e}",
            est.kappa
        );
        worst_ratio = worst_ratio.max(ratio);
        max_kappa = max_kappa.max(exact);
        if exact > 1e8 {
            above_1e8 += 1;
        }
        accepted += 1;
    }
    eprintln!(
        "{accepted} cases, worst exact/estimate {worst_ratio:.3}, largest κ₁ {max_kappa:.2e}, {above_1e8} above 1e8"
    );
    assert!(accepted >= 200, "only {accepted} usable cases");
    assert!(
        max_kappa >= 1e11,
        "the ill-conditioned range was not reached: max κ₁ {max_kappa:.2e}"
    );
    assert!(above_1e8 >= 30);
}

/// The generic estimator on explicit matrices: exact for diagonal and for matrices whose
/// 1-norm column is found by the iteration; a lower bound always.
#[test]
fn norm1_estimator_on_explicit_matrices() {
    let mut rng = Rng::new(7);
    for dim in [0usize, 1, 2, 3, 10, 40] {
        for _ in 0..20 {
            let b = rng.matrix(dim, dim);
            let exact = norm1(&b);
            let est = norm1_estimate(dim, |mut v, transpose| {
                let op = if transpose { b.transpose() } else { b.clone() };
                let x = DMatrix::from_fn(dim, v.ncols(), |i, j| v[(i, j)]);
                let y = op * x;
                for j in 0..v.ncols() {
                    for i in 0..dim {
                        v[(i, j)] = y[(i, j)];
                    }
                }
            });
            assert!(est.estimate <= exact * (1.0 + 1e-12), "dim {dim}");
            assert!(est.estimate >= exact / 3.0, "dim {dim}: {} vs {exact}", est.estimate);
            assert!(est.calls <= MAX_SOLVE_CALLS);
        }
    }
}

/// A singular K (a repeated constraint row) gives an infinite or enormous estimate, not a
/// reassuring one; the estimate works although `solve` refuses.
#[test]
fn singular_k_is_reported_as_hopelessly_conditioned() {
    let p = ProblemBuilder::new()
        .hessian_row_major(3, &[2., 0., 0., 0., 2., 0., 0., 0., 2.], Triangle::Full)
        .constraints_row_major(2, 3, &[1., 1., 1., 1., 1., 1.])
        .rhs(&[1., 1.])
        .build()
        .unwrap();
    let f = Plan::analyze(&p, &Options::default()).unwrap().factor(&p).unwrap();
    assert!(f.solve().is_err());
    let est = condition::estimate(&f);
    assert!(est.kappa > 1e15, "κ estimate {:e}", est.kappa);
    assert_eq!(est.trusted_digits(), 0);
}

/// Exact data (small integers and powers of two, so c = −Hx* − Aᵀy* and b = Ax* are exact):
/// the computed solution's relative forward error in the ∞-norm must respect
/// 2κω/(1 − κω) (Higham 2002, Thm 7.2) with the estimated κ (a lower bound of κ, so the test
/// also checks the estimate is not too low to be useful). Includes nearly dependent
/// constraints (A rows differing by 2⁻²⁶) and a tiny Hessian block (2⁻²⁰).
#[test]
fn forward_error_bound_covers_the_true_error() {
    let mut rng = Rng::new(99);
    let mut checked = 0;
    for case in 0..160 {
        let n = 2 + rng.below(6);
        let m = 1 + rng.below(n - 1);
        let int = |rng: &mut Rng| (rng.below(9) as f64) - 4.0;
        let mut h = DMatrix::from_fn(n, n, |_, _| 0.0);
        for i in 0..n {
            for j in 0..=i {
                let v = int(&mut rng);
                h[(i, j)] = v;
                h[(j, i)] = v;
            }
            h[(i, i)] += 8.0;
        }
        let mut a = DMatrix::from_fn(m, n, |_, _| int(&mut rng));
        if case % 3 == 1 && m >= 2 {
            // Nearly dependent rows: row 1 = row 0 + 2⁻²⁶ e_0.
            for j in 0..n {
                a[(1, j)] = a[(0, j)];
            }
            a[(1, 0)] += 2f64.powi(-26);
        }
        if case % 3 == 2 {
            h *= 2f64.powi(-20);
        }
        let xs: Vec<f64> = (0..n).map(|_| int(&mut rng)).collect();
        let ys: Vec<f64> = (0..m).map(|_| int(&mut rng)).collect();
        let xv = nalgebra::DVector::from_column_slice(&xs);
        let yv = nalgebra::DVector::from_column_slice(&ys);
        let c: Vec<f64> = (-(&h * &xv) - a.transpose() * &yv).iter().copied().collect();
        let b: Vec<f64> = (&a * &xv).iter().copied().collect();
        let p = problem(&h, &a, &c, &b);
        let Some(_) = kkt(&p).try_inverse() else { continue };
        let f = Plan::analyze(&p, &Options::default()).unwrap().factor(&p).unwrap();
        let Ok(s) = f.solve() else { continue };
        let est = condition::estimate(&f);
        let bound = forward_error_bound(est.kappa, s.backward_error);
        let z: Vec<f64> = s.x.iter().chain(&s.y).copied().collect();
        let zs: Vec<f64> = xs.iter().chain(&ys).copied().collect();
        let err = max_abs_diff(&z, &zs) / inf_norm(&zs).max(f64::MIN_POSITIVE);
        assert!(
            err <= bound,
            "case {case}: error {err:.3e} > bound {bound:.3e} (κ ≈ {:.2e}, ω = {:.2e})",
            est.kappa,
            s.backward_error
        );
        checked += 1;
    }
    assert!(checked >= 100, "{checked}");
}

#[test]
fn forward_error_bound_formula() {
    assert_eq!(
        forward_error_bound(10.0, 0.0),
        20.0 * f64::EPSILON / (1.0 - 10.0 * f64::EPSILON)
    );
    assert!((forward_error_bound(10.0, 0.01) - 2.0 * 0.1 / 0.9).abs() < 1e-15);
    assert_eq!(forward_error_bound(1e3, 1e-3), f64::INFINITY);
    assert_eq!(forward_error_bound(f64::INFINITY, 1e-16), f64::INFINITY);
}

/// Empty constraints and the smallest sizes.
#[test]
fn small_and_empty_dimensions() {
    // m = 0: K = H = diag(2, 8): κ₁ = 4.
    let p = ProblemBuilder::new()
        .hessian_row_major(2, &[2., 0., 0., 8.], Triangle::Full)
        .build()
        .unwrap();
    let f = Plan::analyze(&p, &Options::default()).unwrap().factor(&p).unwrap();
    assert!((condition::estimate(&f).kappa - 4.0).abs() < 1e-14);
    // n = 1, m = 1: K = [1 3; 3 0], K⁻¹ = [0 1/3; 1/3 −1/9]: κ₁ = 4 · 4/9. The iteration
    // stops on a repeated sign vector after e₀ (‖K⁻¹e₀‖₁ = 1/3); the alternating vector
    // (1, −2) gives 2‖K⁻¹(1, −2)‖₁/6 = 11/27, so the estimate is 4 · 11/27 (ratio 12/11).
    let p = ProblemBuilder::new()
        .hessian_row_major(1, &[1.], Triangle::Full)
        .constraints_row_major(1, 1, &[3.])
        .build()
        .unwrap();
    let f = Plan::analyze(&p, &Options::default()).unwrap().factor(&p).unwrap();
    assert!((condition::estimate(&f).kappa - 44.0 / 27.0).abs() < 1e-14);
    // n = 0 when the builder accepts it: κ of the empty matrix is reported as 0.
    if let Ok(p) = ProblemBuilder::new().hessian_row_major(0, &[], Triangle::Full).build() {
        let f = Plan::analyze(&p, &Options::default()).unwrap().factor(&p).unwrap();
        let est = condition::estimate(&f);
        assert_eq!((est.kappa, est.solves), (0.0, 0));
    }
}
