//! Issue 12: a proptest family with many forced pivots. H has many zero diagonal entries
//! (variables absent from the objective, some of negative curvature) and A couples them,
//! factored with plain AMD (no paired ordering) so that constraint rows are eliminated
//! before the variables they couple and their zero pivots are forced. The sparse verdict
//! and inertia (through the capacitance matrix) must equal dense LBLᵀ's (Bunch–Kaufman
//! pivoting), and so must the outcome class of singular systems. Run with
//! `cargo test --test sparse_trust_proptest`.

use std::sync::atomic::{AtomicUsize, Ordering};

use proptest::prelude::*;
use tangency::backend::sparse_ldlt::SparseParams;
use tangency::{Error, Method, Options, Plan, ProblemBuilder, Triangle};

type Entries = Vec<(usize, usize, f64)>;

static FORCED_CASES: AtomicUsize = AtomicUsize::new(0);
static REFUSED_ONE_SIDE: AtomicUsize = AtomicUsize::new(0);
static WITHHELD: AtomicUsize = AtomicUsize::new(0);

fn strategy() -> impl Strategy<Value = (usize, usize, Vec<u8>, Entries, Vec<f64>)> {
    (4usize..30, 1usize..12).prop_flat_map(|(n, m0)| {
        let m = m0.min(n - 1);
        let kinds = prop::collection::vec(0u8..4, n);
        let a = prop::collection::vec((0..m, 0..n, -2.0f64..2.0), m..3 * m + 1);
        let rhs = prop::collection::vec(-1.0f64..1.0, n + m);
        (Just(n), Just(m), kinds, a, rhs)
    })
}

fn outcome(r: &Result<tangency::Solution, Error>) -> String {
    match r {
        Ok(s) => format!("solved {:?} {:?}", s.verdict, s.inertia),
        Err(Error::Infeasible { .. }) => "infeasible".into(),
        Err(Error::Unbounded { .. }) => "unbounded".into(),
        Err(Error::Singular { .. }) => "singular".into(),
        Err(e) => format!("other: {e}"),
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(96))]
    #[test]
    fn forced_pivots_give_the_dense_verdict((n, m, kinds, a_rand, rhs) in strategy()) {
        // Diagonal of H: 0 (half of the variables), 2, or −1.
        let h: Entries = kinds
            .iter()
            .enumerate()
            .filter_map(|(j, k)| match k {
                0 | 1 => None,
                2 => Some((j, j, 2.0)),
                _ => Some((j, j, -1.0)),
            })
            .collect();
        let mut a: Entries = a_rand;
        // Every row couples one zero-curvature variable (when there is one), so its pivot
        // is forced when the row comes first.
        let zeros: Vec<usize> = (0..n).filter(|&j| kinds[j] < 2).collect();
        for r in 0..m {
            let j = if zeros.is_empty() { r } else { zeros[r % zeros.len()] };
            a.push((r, j, 1.0));
        }
        let p = ProblemBuilder::new()
            .hessian_triplets(n, &h, Triangle::Lower)
            .constraints_triplets(m, n, &a)
            .linear(&rhs[..n])
            .rhs(&rhs[n..])
            .build()
            .unwrap();
        let mut sparse = Options { method: Method::Sparse, ..Default::default() };
        sparse.sparse = SparseParams { paired_ordering: false, ..Default::default() };
        let dense = Options { method: Method::Dense, ..Default::default() };
        let f = Plan::analyze(&p, &sparse).unwrap().factor(&p);
        if let Ok(f) = &f {
            if f.backend().regularized_pivots() > 0 {
                FORCED_CASES.fetch_add(1, Ordering::Relaxed);
            }
        }
        let (s, d) = (tangency::solve(&p, &sparse), tangency::solve(&p, &dense));
        // One method may refuse (uncertified: near-singular K it could not name) where the
        // other names the singularity or solves; then the answer given must check out.
        let refused = |r: &Result<tangency::Solution, Error>| matches!(r, Err(Error::Uncertified { .. }));
        if refused(&s) != refused(&d) {
            REFUSED_ONE_SIDE.fetch_add(1, Ordering::Relaxed);
            if let Ok(sol) = s.as_ref().or(d.as_ref()) {
                let (dual, primal) = p.residuals(&sol.x, &sol.y);
                prop_assert!(dual.max(primal) <= 1e-8, "residuals {} {}", dual, primal);
            }
            return Ok(());
        }
        // Known weakness (reported, not hidden): the capacitance matrix of a few forced
        // pivots sometimes fails to confirm the inertia (its eigenvalues lose their sign to
        // cancellation between C⁻¹ and UᵀM⁻¹U, both of order 1/δ), and the sparse verdict
        // is then withheld. A withheld verdict is counted; a contradicting one fails.
        if let (Ok(sv), Ok(dv)) = (&s, &d) {
            if sv.verdict.is_none() && dv.verdict.is_some() {
                WITHHELD.fetch_add(1, Ordering::Relaxed);
                let (dual, primal) = p.residuals(&sv.x, &sv.y);
                prop_assert!(dual.max(primal) <= 1e-8, "residuals {} {}", dual, primal);
                return Ok(());
            }
        }
        prop_assert_eq!(outcome(&s), outcome(&d));
        if let (Ok(s), Ok(d)) = (&s, &d) {
            let diff = s.x.iter().zip(&d.x).fold(0.0f64, |acc, (u, v)| acc.max((u - v).abs()));
            let scale = d.x.iter().fold(1.0f64, |acc, v| acc.max(v.abs()));
            let tol = 1e3 * d.forward_error_bound.unwrap().max(s.forward_error_bound.unwrap()).max(1e-12);
            prop_assert!(diff <= tol * scale, "x differs by {} (tol {})", diff, tol);
        }
    }
}

/// The family does exercise forced pivots (the proptest above counts them).
#[test]
fn the_family_forces_pivots() {
    forced_pivots_give_the_dense_verdict();
    eprintln!(
        "refused by one method only: {}; sparse verdict withheld: {}; forced pivots in {} case(s)",
        REFUSED_ONE_SIDE.load(Ordering::Relaxed),
        WITHHELD.load(Ordering::Relaxed),
        FORCED_CASES.load(Ordering::Relaxed)
    );
    assert!(
        FORCED_CASES.load(Ordering::Relaxed) >= 20,
        "{} case(s) with forced pivots",
        FORCED_CASES.load(Ordering::Relaxed)
    );
}
