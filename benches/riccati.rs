//! Riccati recursion on stage-wise problems, nx = 12, nu = 4, N ∈ {10, 50, 200, 1000}:
//! factor + solve, re-solve only (new x̂ and linear terms, same factorization), and the
//! sparse LDLᵀ backend for every N and the dense LBLᵀ backend for small N, side by side in one run.
//!
//! Run: `cargo bench --bench riccati`. Targets (issue 8): cost linear in N (N = 1000 within
//! 5.5× of N = 200), re-solve ≥ 3× faster than factor + solve, factor + solve ≥ 5× faster
//! than the sparse backend at N = 200.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use tangency::{Method, Options, Plan, Solution};

#[path = "common/riccati_problem.rs"]
mod riccati_problem;
use riccati_problem::problem;

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("stagewise_nx12_nu4");
    group.sample_size(20);
    group.measurement_time(std::time::Duration::from_secs(3));
    for &n in &[10usize, 50, 200, 1000] {
        let (p, dims) = problem(n);
        let opts = Options {
            method: Method::Riccati,
            stages: Some(dims),
            ..Default::default()
        };
        let mut f = Plan::analyze(&p, &opts).unwrap().factor(&p).unwrap();
        let mut ws = f.workspace();
        let mut out = Solution::empty(p.n(), p.m(), f.plan().method());
        let cvec = p.linear().to_vec();
        let mut bvec = p.rhs().to_vec();
        group.bench_with_input(BenchmarkId::new("riccati_factor_solve", n), &n, |bch, _| {
            bch.iter(|| {
                f.refactor(&p).unwrap();
                f.solve_into(&cvec, &bvec, &mut ws, &mut out).unwrap();
            })
        });
        let mut step = 0usize;
        group.bench_with_input(BenchmarkId::new("riccati_resolve", n), &n, |bch, _| {
            bch.iter(|| {
                step += 1;
                bvec[0] = 0.1 + 1e-3 * (step % 7) as f64;
                f.solve_into(&cvec, &bvec, &mut ws, &mut out).unwrap();
            })
        });
        if n <= 50 {
            let dense = Options {
                method: Method::Dense,
                ..Default::default()
            };
            let mut fd = Plan::analyze(&p, &dense).unwrap().factor(&p).unwrap();
            let mut wsd = fd.workspace();
            let mut outd = Solution::empty(p.n(), p.m(), fd.plan().method());
            group.bench_with_input(BenchmarkId::new("dense_factor_solve", n), &n, |bch, _| {
                bch.iter(|| {
                    fd.refactor(&p).unwrap();
                    fd.solve_into(&cvec, &bvec, &mut wsd, &mut outd).unwrap();
                })
            });
        }
        // The sparse LDLᵀ backend (issue 3) on the same problem, same refactor + solve_into loop.
        let sparse = Options {
            method: Method::Sparse,
            ..Default::default()
        };
        let mut fs = Plan::analyze(&p, &sparse).unwrap().factor(&p).unwrap();
        let mut wss = fs.workspace();
        let mut outs = Solution::empty(p.n(), p.m(), fs.plan().method());
        group.bench_with_input(BenchmarkId::new("sparse_factor_solve", n), &n, |bch, _| {
            bch.iter(|| {
                fs.refactor(&p).unwrap();
                fs.solve_into(&cvec, &bvec, &mut wss, &mut outs).unwrap();
            })
        });
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
