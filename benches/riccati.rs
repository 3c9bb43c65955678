//! Riccati recursion on stage-wise problems, nx = 12, nu = 4, N ∈ {10, 50, 200, 1000}:
//! factor + solve, re-solve only (new x̂ and linear terms, same factorization), and the
//! sparse LDLᵀ backend for every N and the dense LBLᵀ backend for small N, side by side in one run.
//!
//! Run: `cargo bench --bench riccati`. Targets (issue 8): cost linear in N (N = 1000 within
//! 5.5× of N = 200), re-solve ≥ 3× faster than factor + solve, factor + solve ≥ 5× faster
//! than the sparse backend at N = 200.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use faer::Mat;
use tangency::stagewise::HorizonBuilder;
use tangency::{Method, Options, Plan, Problem, Solution};

/// A chain of 6 coupled oscillators of our own (12 states), 4 actuators, dt = 0.05,
/// discretized by explicit Euler (only the structure matters here).
fn problem(horizon: usize) -> (Problem, tangency::stagewise::StageDims) {
    let (nx, nu) = (12, 4);
    let dt = 0.05;
    let mut a = Mat::<f64>::identity(nx, nx);
    for m in 0..6 {
        let (p, v) = (2 * m, 2 * m + 1);
        a[(p, v)] += dt;
        a[(v, p)] -= 2.0 * dt;
        a[(v, v)] -= 0.1 * dt;
        if m > 0 {
            a[(v, p - 2)] += dt;
        }
        if m < 5 {
            a[(v, p + 2)] += dt;
        }
    }
    let b = Mat::from_fn(nx, nu, |i, j| if i % 2 == 1 && (i / 2) % nu == j { dt } else { 0.0 });
    let q = Mat::from_fn(nx, nx, |i, j| if i == j { 1.0 + (i % 2) as f64 } else { 0.0 });
    let r = Mat::from_fn(nu, nu, |i, j| if i == j { 0.1 } else { 0.01 });
    let h = HorizonBuilder::new(nx, nu, horizon)
        .dynamics(a.as_ref(), b.as_ref())
        .cost(q.as_ref(), r.as_ref())
        .terminal_cost(q.as_ref())
        .initial_state(&[0.1; 12])
        .build()
        .expect("valid horizon");
    (h.to_problem().expect("conversion"), h.dims())
}

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
