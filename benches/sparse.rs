//! Sparse KKT benchmark on the Poisson-control family, side by side with SuperLU
//! (scipy `splu` through `scripts/reference_solve.py --method sparse`) on the same
//! problem directories, plus the dense-versus-sparse crossover behind `Method::Auto`.
//!
//! Run: `cargo bench --bench sparse` (sizes from `TANGENCY_BENCH_K`, default
//! "100,200,300"; set `TANGENCY_BENCH_CROSSOVER=0` to skip the crossover group).
//! Problem directories are written to `target/bench-problems/poisson-control-K`.
//! The `threads` group compares one thread, the analysis's thread rule and two threads
//! forced, with MKL PARDISO (`reference_solve.py --method pardiso`) at 1 and 2 threads
//! printed beside it; `scripts/compare_sparse.py` makes the full side-by-side table.

use std::hint::black_box;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

use criterion::{criterion_group, criterion_main, Criterion};
use tangency::backend::sparse_ldlt::SparseAnalysis;
use tangency::generate::{write_family, Family};
use tangency::{Method, Options, Plan, Problem, Solution};

fn sizes() -> Vec<usize> {
    std::env::var("TANGENCY_BENCH_K")
        .unwrap_or_else(|_| "100,200,300".into())
        .split(',')
        .filter_map(|s| s.trim().parse().ok())
        .collect()
}

fn peak_rss_mib() -> f64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status
        .lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|v| v.parse::<f64>().ok())
        .map_or(f64::NAN, |kib| kib / 1024.0)
}

/// The reference solver (LAPACK, SuperLU, MKL PARDISO through scipy/pypardiso), vendored in
/// `scripts/` from the project's shared tools.
const REFERENCE_SOLVE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/scripts/reference_solve.py");

fn superlu_seconds(dir: &Path) -> Option<f64> {
    let script = REFERENCE_SOLVE;
    let out = Command::new("python3")
        .args([script, dir.to_str()?, "--method", "sparse", "--repeat", "3"])
        .output()
        .ok()?;
    let text = String::from_utf8_lossy(&out.stdout);
    let key = "\"factor_plus_solve_s\": ";
    let start = text.find(key)? + key.len();
    let end = text[start..].find([',', '}'])? + start;
    text[start..end].trim().parse().ok()
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(|a, b| a.partial_cmp(b).unwrap());
    v[v.len() / 2]
}

fn sparse_options() -> Options {
    Options {
        method: Method::Sparse,
        ..Default::default()
    }
}

fn poisson(c: &mut Criterion) {
    for k in sizes() {
        let dir = PathBuf::from(concat!(env!("CARGO_MANIFEST_DIR"), "/target/bench-problems"))
            .join(format!("poisson-control-{k}"));
        if !dir.join("A.mtx").exists() {
            write_family(Family::PoissonControl, k, &dir).expect("write problem directory");
        }
        let p: Problem = tangency::io::read_problem_dir(&dir).expect("read problem directory");
        let o = sparse_options();
        let mut group = c.benchmark_group(format!("poisson-control k={k} (N={})", p.n() + p.m()));
        group.sample_size(10);
        group.bench_function("analyze", |b| b.iter(|| black_box(Plan::analyze(&p, &o).unwrap())));
        let plan = Plan::analyze(&p, &o).unwrap();
        group.bench_function("factor", |b| b.iter(|| black_box(plan.factor(&p).unwrap())));
        let mut f = plan.factor(&p).unwrap();
        let mut ws = f.workspace();
        let mut out = Solution::empty(p.n(), p.m(), f.backend().method());
        group.bench_function("solve (refined)", |b| {
            b.iter(|| f.solve_into(p.linear(), p.rhs(), &mut ws, &mut out).unwrap())
        });
        group.bench_function("refactor", |b| b.iter(|| f.refactor(&p).unwrap()));
        group.bench_function("analyze+factor+solve", |b| {
            b.iter(|| black_box(tangency::solve(&p, &o).unwrap()))
        });
        group.finish();

        // Side-by-side table (medians of 5 wall-clock runs, same process, same files).
        let total: Vec<f64> = (0..5)
            .map(|_| {
                let t = Instant::now();
                black_box(tangency::solve(&p, &o).unwrap());
                t.elapsed().as_secs_f64()
            })
            .collect();
        let first: Vec<f64> = (0..5)
            .map(|_| {
                let t = Instant::now();
                let plan = Plan::analyze(&p, &o).unwrap();
                black_box(plan.factor(&p).unwrap());
                t.elapsed().as_secs_f64()
            })
            .collect();
        let refac: Vec<f64> = (0..5)
            .map(|_| {
                let t = Instant::now();
                f.refactor(&p).unwrap();
                t.elapsed().as_secs_f64()
            })
            .collect();
        let s = f.solve().unwrap();
        let mut trials = o.sparse;
        trials.ordering_trials = 3;
        let a = SparseAnalysis::new(&p, &trials).unwrap();
        let ours = median(total);
        let (first, refac) = (median(first), median(refac));
        let superlu = superlu_seconds(&dir);
        println!(
            "TABLE k={k} N={} nnz(K lower)={} ordering={:?} trials={:?} supernodal={} nnz(L)={} numeric_MiB={:.1} \
             peak_rss_MiB={:.0} backward_error={:.2e} refinement_steps={} regularized={} inertia={:?} verdict={:?} \
             ours_total_s={ours:.4} analyze+factor_s={first:.4} refactor_s={refac:.4} refactor/first={:.2} \
             superlu_factor+solve_s={} ratio_superlu/ours={}",
            p.n() + p.m(),
            a.pattern().nnz(),
            a.ordering().map(|o| o.name),
            a.orderings()
                .iter()
                .map(|t| format!("{}:{:.3e}", t.name, t.flops))
                .collect::<Vec<_>>(),
            a.is_supernodal(),
            a.factor_entries(),
            a.numeric_bytes() as f64 / (1024.0 * 1024.0),
            peak_rss_mib(),
            s.backward_error,
            s.refinement_steps,
            f.backend().regularized_pivots(),
            s.inertia,
            s.verdict,
            refac / first,
            superlu.map_or("n/a".into(), |v| format!("{v:.4}")),
            superlu.map_or("n/a".into(), |v| format!("{:.2}", v / ours)),
        );
    }
}

/// Dense LBLᵀ against sparse LDLᵀ (analyze+factor+solve) on small problems of both
/// families: where the sparse backend starts to win.
fn crossover(c: &mut Criterion) {
    if std::env::var("TANGENCY_BENCH_CROSSOVER").as_deref() == Ok("0") {
        return;
    }
    let mut group = c.benchmark_group("crossover");
    group.sample_size(20);
    for (family, ks) in [
        (Family::PoissonControl, &[3usize, 6, 10, 14, 20][..]),
        (Family::TiedLattice, &[4, 8, 12, 18][..]),
    ] {
        for &k in ks {
            let p = family.problem(k).unwrap();
            let dim = p.n() + p.m();
            for method in [Method::Dense, Method::Sparse] {
                let o = Options {
                    method,
                    ..Default::default()
                };
                group.bench_function(format!("{family:?} k={k} N={dim} {method:?}"), |b| {
                    b.iter(|| black_box(tangency::solve(&p, &o).unwrap()))
                });
            }
        }
    }
    group.finish();
}

/// PARDISO's phase times (MKL_NUM_THREADS = `threads`) from `reference_solve.py --method
/// pardiso`: (factor, refactor, analyze+factor+solve).
fn pardiso_seconds(dir: &Path, threads: usize) -> Option<(f64, f64, f64)> {
    let script = REFERENCE_SOLVE;
    let out = Command::new("python3")
        .args([script, dir.to_str()?, "--method", "pardiso", "--repeat", "3"])
        .env("MKL_NUM_THREADS", threads.to_string())
        .env("OMP_NUM_THREADS", threads.to_string())
        .output()
        .ok()?;
    let text = String::from_utf8_lossy(&out.stdout);
    let get = |key: &str| -> Option<f64> {
        let key = format!("\"{key}\": ");
        let start = text.find(&key)? + key.len();
        let end = text[start..].find([',', '}'])? + start;
        text[start..end].trim().parse().ok()
    };
    Some((
        get("factor_s")?,
        get("refactor_s")?,
        get("analyze_s")? + get("factor_s")? + get("solve_s")?,
    ))
}

/// One against two threads (the analysis's rule, and two threads forced) on Poisson control
/// and the heat cube, with PARDISO at the same thread count in the same run. Families and
/// sizes from `TANGENCY_BENCH_THREADS_CASES` (default "poisson-control:100,heat-cube:20").
fn threads(c: &mut Criterion) {
    let cases =
        std::env::var("TANGENCY_BENCH_THREADS_CASES").unwrap_or_else(|_| "poisson-control:100,heat-cube:20".into());
    for case in cases.split(',') {
        let Some((family, k)) = case.split_once(':') else {
            continue;
        };
        let (Ok(family), Ok(k)) = (family.parse::<Family>(), k.parse::<usize>()) else {
            continue;
        };
        let dir =
            PathBuf::from(concat!(env!("CARGO_MANIFEST_DIR"), "/target/bench-problems")).join(case.replace(':', "-"));
        if !dir.join("H.mtx").exists() {
            write_family(family, k, &dir).expect("write problem directory");
        }
        let p: Problem = tangency::io::read_problem_dir(&dir).expect("read problem directory");
        let mut group = c.benchmark_group(format!("threads {case} (N={})", p.n() + p.m()));
        group.sample_size(10);
        for (name, par, min_flops) in [
            ("1 thread", faer::Par::Seq, f64::INFINITY),
            (
                "2 threads, rule",
                faer::Par::rayon(2),
                tangency::backend::sparse_ldlt::DEFAULT_PARALLEL_MIN_FRONT_FLOPS,
            ),
            ("2 threads, forced", faer::Par::rayon(2), 0.0),
        ] {
            let mut o = sparse_options();
            o.sparse.par = par;
            o.sparse.parallel_min_front_flops = min_flops;
            let plan = Plan::analyze(&p, &o).unwrap();
            group.bench_function(format!("factor, {name}"), |b| {
                b.iter(|| black_box(plan.factor(&p).unwrap()))
            });
            let mut f = plan.factor(&p).unwrap();
            group.bench_function(format!("refactor, {name}"), |b| b.iter(|| f.refactor(&p).unwrap()));
        }
        group.finish();
        for t in [1, 2] {
            match pardiso_seconds(&dir, t) {
                Some((fa, re, tot)) => println!(
                    "PARDISO {case} threads={t}: factor_s={fa:.4} refactor_s={re:.4} analyze+factor+solve_s={tot:.4}"
                ),
                None => println!("PARDISO {case} threads={t}: n/a (pip install numpy scipy pypardiso)"),
            }
        }
    }
}

criterion_group!(benches, crossover, poisson, threads);
criterion_main!(benches);
