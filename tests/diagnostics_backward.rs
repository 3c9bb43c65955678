//! Backward errors of KKT solves, checked against their defining theorems with nalgebra
//! doing the arithmetic independently.

mod diagnostics_support;

use diagnostics_support::*;
use nalgebra::{DMatrix, DVector};
use proptest::prelude::{any, prop_assert, proptest, ProptestConfig};
use tangency::diagnostics::backward::{backward_errors, of_solution};
use tangency::{solve, Options};

/// Oettli & Prager (1964) (Higham 2002, Thm 7.3): with ω the componentwise backward error of
/// z̃, the perturbations ΔK = D₁|K|D₂, Δr = −D₁|r| with D₁ = diag(resᵢ/(|K||z̃|+|r|)ᵢ),
/// D₂ = diag(sign z̃) satisfy (K + ΔK)z̃ = r + Δr, |ΔK| ≤ ω|K|, |Δr| ≤ ω|r|, and no smaller ω
/// can: the row attaining the maximum needs all of it. Checked with nalgebra arithmetic.
#[test]
fn componentwise_backward_error_is_attained_and_minimal() {
    let mut rng = Rng::new(21);
    for case in 0..100 {
        let n = 1 + rng.below(7);
        let m = rng.below(n + 1);
        let p = well_conditioned(&mut rng, n, m);
        let s = solve(&p, &Options::default()).unwrap();
        // A visibly wrong answer: relative noise 1e-6.
        let z: Vec<f64> =
            s.x.iter()
                .chain(&s.y)
                .map(|v| v * (1.0 + 1e-6 * rng.sym()) + 1e-9 * rng.sym())
                .collect();
        let (x, y) = z.split_at(n);
        let be = backward_errors(&p, x, y, p.linear(), p.rhs());
        let k = kkt(&p);
        let r = DVector::from_iterator(n + m, p.linear().iter().map(|v| -v).chain(p.rhs().iter().copied()));
        let zv = DVector::from_column_slice(&z);
        let res = &r - &k * &zv;
        let kabs = k.abs();
        let denom = &kabs * zv.abs() + r.abs();
        let d1: Vec<f64> = (0..n + m)
            .map(|i| if res[i] == 0.0 { 0.0 } else { res[i] / denom[i] })
            .collect();
        let omega = d1.iter().fold(0.0f64, |a, v| a.max(v.abs()));
        // Both sides form a residual of size ~1e-6 relative to the terms: ~1e-10 relative
        // rounding in each.
        assert!(
            (omega - be.componentwise).abs() <= 1e-8 * omega,
            "case {case}: {omega} vs {}",
            be.componentwise
        );
        let dk = DMatrix::from_fn(n + m, n + m, |i, j| d1[i] * kabs[(i, j)] * zv[j].signum());
        let dr = DVector::from_fn(n + m, |i, _| -d1[i] * r[i].abs());
        let left = (&k + &dk) * &zv;
        let right = &r + &dr;
        let scale = (&kabs * zv.abs() + r.abs()).amax();
        assert!(
            (left - right).amax() <= 1e-14 * scale,
            "case {case}: perturbed system not satisfied"
        );
        assert!(dk
            .iter()
            .zip(kabs.iter())
            .all(|(d, a)| d.abs() <= omega * a * (1.0 + 1e-12)));
        // Normwise (Rigal & Gaches): ‖res‖∞ / (‖K‖∞‖z‖∞ + ‖r‖∞), ‖K‖∞ from nalgebra.
        let knorm = (0..n + m)
            .map(|i| k.row(i).iter().map(|v| v.abs()).sum::<f64>())
            .fold(0.0, f64::max);
        let nw = res.amax() / (knorm * zv.amax() + r.amax());
        assert!(
            (nw - be.normwise).abs() <= 1e-8 * nw,
            "case {case}: normwise {nw} vs {}",
            be.normwise
        );
        assert!(be.normwise <= be.componentwise * (1.0 + 1e-12));
    }
}

/// The solver's own certificate and this module agree on a returned solution, and a refined
/// solve of a well-conditioned problem has backward errors of order ε.
#[test]
fn solutions_have_tiny_backward_errors() {
    let mut rng = Rng::new(22);
    for _ in 0..50 {
        let n = 1 + rng.below(9);
        let m = rng.below(n + 1);
        let p = well_conditioned(&mut rng, n, m);
        let s = solve(&p, &Options::default()).unwrap();
        let be = of_solution(&p, &s);
        assert!(
            (be.normwise - s.backward_error).abs() <= 1e-3 * s.backward_error.max(1e-300)
                || s.backward_error == be.normwise
        );
        assert!(be.normwise <= 1e-15);
        assert!(be.componentwise <= 1e-12, "{}", be.componentwise);
    }
}

/// Exactly representable data and an exact answer by construction (integers): both backward
/// errors are exactly 0. A row with zero data but a nonzero residual is infinitely wrong
/// componentwise.
#[test]
fn exact_answers_and_zero_denominators() {
    // H = [[2,1],[1,2]], A = [1, 1], x* = (1, 2), y* = (3): c = −Hx* − Aᵀy* = (−7, −8), b = 3.
    let h = DMatrix::from_row_slice(2, 2, &[2., 1., 1., 2.]);
    let a = DMatrix::from_row_slice(1, 2, &[1., 1.]);
    let p = problem(&h, &a, &[-7., -8.], &[3.]);
    let be = backward_errors(&p, &[1., 2.], &[3.], p.linear(), p.rhs());
    assert_eq!((be.normwise, be.componentwise), (0.0, 0.0));
    // x = 0, y = 0, c = 0, b = 1: the constraint row has |A||x| + |b| = 1, fine; now b = 0
    // and c = 0 with z = 0 is exact; z = 0 with b = 1 has residual 1 over denominator 1.
    let p0 = problem(&h, &a, &[0., 0.], &[1.]);
    let be0 = backward_errors(&p0, &[0., 0.], &[0.], p0.linear(), p0.rhs());
    assert_eq!(be0.componentwise, 1.0);
    // H = 0, A = 0 row: rows of K are zero, so any nonzero residual cannot be explained.
    let z2 = DMatrix::zeros(2, 2);
    let pz = problem(&z2, &DMatrix::zeros(1, 2), &[0., 0.], &[0.]);
    let bez = backward_errors(&pz, &[1., 1.], &[0.], &[1., 0.], &[0.]);
    assert_eq!(bez.componentwise, 1.0); // residual −1 in row 0, denominator |c₀| = 1
    let bez = backward_errors(&pz, &[1., 1.], &[0.], &[0., 0.], &[0.]);
    assert_eq!(bez.componentwise, 0.0); // K z = 0 = rhs exactly
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    /// 0 ≤ normwise ≤ componentwise for any candidate point, dimensions including m = 0.
    #[test]
    fn normwise_never_exceeds_componentwise(seed in any::<u64>(), n in 1usize..7, m_frac in 0.0f64..1.0) {
        let mut rng = Rng::new(seed);
        let m = ((n + 1) as f64 * m_frac) as usize;
        let p = well_conditioned(&mut rng, n, m.min(n));
        let x = rng.vec(n);
        let y = rng.vec(p.m());
        let be = backward_errors(&p, &x, &y, p.linear(), p.rhs());
        prop_assert!(be.normwise >= 0.0);
        prop_assert!(be.normwise <= be.componentwise * (1.0 + 1e-12));
    }
}
