//! Box-constrained stage-wise problems (nx = 12, nu = 4, N ∈ {50, 200}, |u| ≤ u_max active at
//! about a third of the stages): interior-point solves cold and warm through the Riccati
//! backend, cold through the general sparse LDLᵀ backend, and one equality-constrained
//! solve (refactor + solve of the same problem without bounds), side by side in one run.
//! Iterations and the fraction of stages with an active bound are printed before timing.
//!
//! Run: `cargo bench --bench inequality`. Targets (issue 17): the Riccati-based step at
//! least 5× faster than the general sparse step at N = 200; a warm-started solve within 3× of
//! one equality-constrained solve.

use criterion::{criterion_group, criterion_main, BenchmarkId, Criterion};
use tangency::inequality::stagewise::boxed_horizon;
use tangency::inequality::{shift_stages, InteriorPoint, InteriorPointOptions};
use tangency::{Method, Options, Plan, Solution};

fn ipm_options(method: Method, dims: Option<tangency::stagewise::StageDims>) -> InteriorPointOptions {
    InteriorPointOptions {
        kkt: Options {
            method,
            stages: dims,
            ..Default::default()
        },
        verdict: false,
        ..Default::default()
    }
}

fn bench(c: &mut Criterion) {
    let mut group = c.benchmark_group("boxed_stagewise_nx12_nu4");
    group.sample_size(10);
    group.measurement_time(std::time::Duration::from_secs(3));
    for &horizon in &[50usize, 200] {
        let mut bh = boxed_horizon(12, 4, horizon, 0.5, 3.0, 5).unwrap();
        let dims = bh.dims;
        let mut ric = InteriorPoint::new(&bh.problem, &ipm_options(Method::Riccati, Some(dims))).unwrap();
        let mut sparse = InteriorPoint::new(&bh.problem, &ipm_options(Method::Sparse, None)).unwrap();
        let first = ric.solve(&bh.problem).unwrap();
        let active_stages = (0..horizon)
            .filter(|&k| {
                let uo = dims.u_offset(k);
                first
                    .active_lower
                    .iter()
                    .chain(&first.active_upper)
                    .any(|&j| (uo..uo + 4).contains(&j))
            })
            .count();
        // The next receding-horizon problem and its shifted warm start.
        let x1 = bh.step(&bh.problem.equality_problem().rhs()[..12], &first.x[12..16]);
        bh.set_initial_state(&x1).unwrap();
        let mut warm = first.clone();
        shift_stages(&mut warm, dims);
        let cold = ric.solve(&bh.problem).unwrap();
        let mut out = ric.empty_solution(&bh.problem);
        ric.solve_into(&bh.problem, Some(&warm), &mut out).unwrap();
        let sp = sparse.solve(&bh.problem).unwrap();
        eprintln!(
            "N = {horizon}: bound active at {active_stages} of {horizon} stages; iterations cold {} (sparse {}), warm {}",
            cold.iterations, sp.iterations, out.iterations
        );
        group.bench_with_input(BenchmarkId::new("ipm_cold_riccati", horizon), &horizon, |b, _| {
            b.iter(|| ric.solve_into(&bh.problem, None, &mut out).unwrap())
        });
        group.bench_with_input(BenchmarkId::new("ipm_warm_riccati", horizon), &horizon, |b, _| {
            b.iter(|| ric.solve_into(&bh.problem, Some(&warm), &mut out).unwrap())
        });
        let mut out_sp = sparse.empty_solution(&bh.problem);
        group.bench_with_input(BenchmarkId::new("ipm_cold_sparse", horizon), &horizon, |b, _| {
            b.iter(|| sparse.solve_into(&bh.problem, None, &mut out_sp).unwrap())
        });
        // One equality-constrained solve of the same problem (bounds dropped).
        let p = bh.problem.equality_problem().clone();
        let opts = Options {
            method: Method::Riccati,
            stages: Some(dims),
            ..Default::default()
        };
        let mut f = Plan::analyze(&p, &opts).unwrap().factor(&p).unwrap();
        let mut ws = f.workspace();
        let mut s = Solution::empty(p.n(), p.m(), f.plan().method());
        group.bench_with_input(
            BenchmarkId::new("equality_riccati_factor_solve", horizon),
            &horizon,
            |b, _| {
                b.iter(|| {
                    f.refactor(&p).unwrap();
                    f.solve_into(p.linear(), p.rhs(), &mut ws, &mut s).unwrap();
                })
            },
        );
        // The same without the forward-error certification (κ estimate and equilibration),
        // accepted by the backward error as the interior-point steps are: the like-for-like
        // yardstick of the work one Newton step repeats.
        let opts_bw = Options {
            accept_forward_error: f64::INFINITY,
            ..opts
        };
        let mut f_bw = Plan::analyze(&p, &opts_bw).unwrap().factor(&p).unwrap();
        let mut ws_bw = f_bw.workspace();
        group.bench_with_input(
            BenchmarkId::new("equality_riccati_factor_solve_by_backward_error", horizon),
            &horizon,
            |b, _| {
                b.iter(|| {
                    f_bw.refactor(&p).unwrap();
                    f_bw.solve_into(p.linear(), p.rhs(), &mut ws_bw, &mut s).unwrap();
                })
            },
        );
    }
    group.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);
