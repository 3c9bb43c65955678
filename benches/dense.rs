//! Dense LBLᵀ factor + solve (with refinement and certificate) at N = n + m ∈ {650, 2000,
//! 4000}, m = n/3, convex and indefinite H. The LAPACK reference on the same matrices is
//! run by `scripts/compare_dense.sh` (see the README's Performance section).

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use tangency::{Method, Options, Plan};

#[path = "common/dense_problems.rs"]
mod dense_problems;

fn dense(c: &mut Criterion) {
    let mut group = c.benchmark_group("dense_factor_solve");
    group.sample_size(10);
    for &total in &[650usize, 2000, 4000] {
        for convex in [true, false] {
            let p = dense_problems::problem(total, convex, 42);
            let plan = Plan::analyze(
                &p,
                &Options {
                    method: Method::Dense,
                    ..Default::default()
                },
            )
            .unwrap();
            let label = if convex { "convex" } else { "indefinite" };
            group.bench_with_input(BenchmarkId::new(label, total), &p, |bench, p| {
                bench.iter(|| {
                    let f = plan.factor(p).unwrap();
                    f.solve().unwrap()
                })
            });
        }
    }
    group.finish();
}

criterion_group!(benches, dense);
criterion_main!(benches);
