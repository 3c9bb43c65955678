//! Cost of the diagnostics relative to one solve with the same factorization.
//!
//! Dense KKT, n = 1500, m = 500 (N = 2000), convex (H = BᵀB/n + I, A random), factored
//! once outside the timings, with the method `auto` picks (group `diagnostics_dense_2000`)
//! and with the dense LBLᵀ (`diagnostics_dense_2000_lblt`). Side by side in one run:
//!
//! * `solve_refined`: `Factorization::solve_into` (one solve + refinement + certificate): the
//!   reference a user pays per right-hand side;
//! * `backend_solve`: one raw `KktBackend::solve_in_place` on one column;
//! * `condition_estimate`: Hager–Higham κ₁ estimate (target ≤ 10 solves);
//! * `adjoint`: reverse-mode gradients (dense ∂ℓ/∂H and ∂ℓ/∂A included; target ≈ 1 solve);
//! * `jvp_b`: forward mode along a direction of b.
//!
//! Run: `cargo bench --bench diagnostics`; medians are in
//! `target/criterion/diagnostics_dense_2000/*/new/estimates.json`.
//!
//! Sparse family: the Poisson-control generator (`generate::poisson`, k = 100: n = 20 000,
//! m = 10 000, N = 30 000) with the sparse LDLᵀ backend, same five measurements
//! (group `diagnostics_sparse_poisson_k100`).

use criterion::{criterion_group, criterion_main, Criterion};
use faer::dyn_stack::{MemBuffer, MemStack};
use faer::Mat;
use std::hint::black_box;
use tangency::diagnostics::{condition, sensitivity};
use tangency::generate::poisson::PoissonControl;
use tangency::{Method, Options, Plan, Problem, ProblemBuilder, Solution, Triangle};

/// Deterministic values in [-1, 1) (SplitMix64; common practice).
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^= z >> 31;
        2.0 * ((z >> 11) as f64 / (1u64 << 53) as f64) - 1.0
    }
}

fn bench(c: &mut Criterion) {
    let (n, m) = (1500usize, 500usize);
    let mut rng = Rng(42);
    let b = Mat::from_fn(n, n, |_, _| rng.next());
    let mut h = b.transpose() * &b * (1.0 / n as f64);
    for i in 0..n {
        h[(i, i)] += 1.0;
    }
    let a = Mat::from_fn(m, n, |_, _| rng.next());
    let cv: Vec<f64> = (0..n).map(|_| rng.next()).collect();
    let bv: Vec<f64> = (0..m).map(|_| rng.next()).collect();
    let p = ProblemBuilder::new()
        .hessian_dense(h.as_ref(), Triangle::Lower)
        .constraints_dense(a.as_ref())
        .linear(&cv)
        .rhs(&bv)
        .build()
        .unwrap();
    // auto (on a convex dense problem: the Schur-complement method) and the dense LBLᵀ.
    measure(c, "diagnostics_dense_2000", &p, &Options::default());
    let lblt = Options {
        method: Method::Dense,
        ..Default::default()
    };
    measure(c, "diagnostics_dense_2000_lblt", &p, &lblt);
    let sparse = PoissonControl::new(100).build().unwrap();
    let opts = Options {
        method: Method::Sparse,
        ..Default::default()
    };
    measure(c, "diagnostics_sparse_poisson_k100", &sparse, &opts);
}

fn measure(c: &mut Criterion, group_name: &str, p: &Problem, opts: &Options) {
    let (n, m) = (p.n(), p.m());
    let (cv, bv) = (p.linear().to_vec(), p.rhs().to_vec());
    let mut rng = Rng(7);
    let f = Plan::analyze(p, opts).unwrap().factor(p).unwrap();
    let s = f.solve().unwrap();
    let est = condition::estimate(&f);
    eprintln!(
        "{group_name} ({}), N = {}: κ₁ ≈ {:.3e} from {} solve calls; solve backward error {:.1e} after {} refinement step(s)",
        f.backend().method(),
        n + m,
        est.kappa,
        est.solves,
        s.backward_error,
        s.refinement_steps
    );
    let gx: Vec<f64> = (0..n).map(|_| rng.next()).collect();
    let gy: Vec<f64> = (0..m).map(|_| rng.next()).collect();
    let g = sensitivity::adjoint(&f, &s, &gx, &gy).unwrap();
    eprintln!("adjoint solve backward error {:.1e}", g.backward_error);

    let mut group = c.benchmark_group(group_name);
    group.sample_size(20);
    let mut ws = f.workspace();
    let mut out = Solution::empty(n, m, s.method);
    group.bench_function("solve_refined", |bch| {
        bch.iter(|| f.solve_into(black_box(&cv), black_box(&bv), &mut ws, &mut out).unwrap())
    });
    let backend = f.backend();
    let mut buf = MemBuffer::new(backend.solve_scratch(1));
    let mut col = Mat::<f64>::zeros(n + m, 1);
    group.bench_function("backend_solve", |bch| {
        bch.iter(|| {
            for i in 0..n + m {
                col[(i, 0)] = if i < n { -cv[i] } else { bv[i - n] };
            }
            backend.solve_in_place(col.as_mut(), MemStack::new(&mut buf));
            black_box(&col);
        })
    });
    group.bench_function("condition_estimate", |bch| {
        bch.iter(|| black_box(condition::estimate(&f)))
    });
    group.bench_function("adjoint", |bch| {
        bch.iter(|| black_box(sensitivity::adjoint(&f, &s, black_box(&gx), black_box(&gy)).unwrap()))
    });
    let dir = sensitivity::Perturbation {
        b: Some(gy.clone()),
        ..Default::default()
    };
    group.bench_function("jvp_b", |bch| {
        bch.iter(|| black_box(sensitivity::jvp(&f, &s, black_box(&dir)).unwrap()))
    });
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
