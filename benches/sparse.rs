//! Sparse KKT benchmark on the Poisson-control family, side by side with SuperLU
//! (scipy `splu` through `../shared/tools/reference_solve.py --method sparse`) on the same
//! problem directories, plus the dense-versus-sparse crossover behind `Method::Auto`.
//!
//! Run: `cargo bench --bench sparse` (sizes from `TANGENCY_BENCH_K`, default
//! "100,200,300"; set `TANGENCY_BENCH_CROSSOVER=0` to skip the crossover group).
//! Problem directories are written to `target/bench-problems/poisson-control-K`.

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

fn superlu_seconds(dir: &Path) -> Option<f64> {
    // shared/ beside the checkout (CI), or two levels up (a worktree under wt/).
    let script = [
        concat!(env!("CARGO_MANIFEST_DIR"), "/../shared/tools/reference_solve.py"),
        concat!(env!("CARGO_MANIFEST_DIR"), "/../../shared/tools/reference_solve.py"),
    ]
    .into_iter()
    .find(|p| Path::new(p).exists())?;
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

criterion_group!(benches, crossover, poisson);
criterion_main!(benches);
