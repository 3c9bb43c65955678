//! MINRES with the block preconditioner (Jacobi `P₁`; Schur block `P₂` by sparse Cholesky
//! of `A D⁻¹ Aᵀ`, or the Pearson–Wathen matching block) against the sparse direct backend
//! (`Method::Sparse`, analysis + factor + solve) on Poisson control, all to a true relative
//! residual of about 1e-10 (the matching block needs the preconditioned tolerance 1e-14
//! for that), in the same run.
//!
//! Run: `cargo bench --bench iterative` (sizes from `TANGENCY_BENCH_K`, default "300").
//! Peak memory is per process, so it is measured outside criterion, e.g.
//! `/usr/bin/time -v tangency solve DIR --method minres` versus `--method sparse`.

use std::hint::black_box;

use criterion::{criterion_group, criterion_main, Criterion};
use tangency::generate::PoissonControl;
use tangency::iterative::{self, IterativeOptions};
use tangency::{Method, Options};

fn sizes() -> Vec<usize> {
    std::env::var("TANGENCY_BENCH_K")
        .unwrap_or_else(|_| "300".into())
        .split(',')
        .filter_map(|s| s.trim().parse().ok())
        .collect()
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("poisson_control_minres_vs_sparse");
    g.sample_size(10);
    for k in sizes() {
        let p = PoissonControl::new(k).build().expect("generator");
        let opts = IterativeOptions {
            tol: 1e-10,
            ..Default::default()
        };
        let it = iterative::solve(&p, &opts).expect("MINRES converges");
        eprintln!(
            "k = {k}: MINRES {} iterations, true relative residual {:.2e}",
            it.iterations, it.relative_residual
        );
        g.bench_function(format!("minres_k{k}"), |b| {
            b.iter(|| black_box(iterative::solve(&p, &opts).unwrap().iterations))
        });
        let matching = IterativeOptions {
            tol: 1e-14,
            second: iterative::SecondBlock::Matching,
            ..Default::default()
        };
        let it = iterative::solve(&p, &matching).expect("MINRES (matching) converges");
        eprintln!(
            "k = {k}: MINRES (matching block) {} iterations, true relative residual {:.2e}",
            it.iterations, it.relative_residual
        );
        g.bench_function(format!("minres_matching_k{k}"), |b| {
            b.iter(|| black_box(iterative::solve(&p, &matching).unwrap().iterations))
        });
        let direct = Options {
            method: Method::Sparse,
            ..Default::default()
        };
        g.bench_function(format!("sparse_direct_k{k}"), |b| {
            b.iter(|| black_box(tangency::solve(&p, &direct).unwrap().objective))
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
