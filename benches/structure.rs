//! Structure-aware backends against dense LBLᵀ and LAPACK.
//!
//! Run: `cargo bench --bench structure` (needs python3 with numpy/scipy for the LAPACK
//! reference, `scripts/reference_solve.py`; skipped with a message if missing).
//!
//! 1. `convex_3000x1000`: convex dense KKT, n = 3000, m = 1000, Schur complement vs our dense
//!    LBLᵀ; LAPACK dsysv (scipy `solve(assume_a="sym")`) on the same matrix in the same run,
//!    with the backward error of its answer computed on our side; flop count and the rate of a
//!    faer GEMM measured here for the fraction-of-peak figure.
//! 2. `shape_*`: n + m = 3000 with m/n ∈ {0.1, 0.5, 0.9}: dense LBLᵀ, Schur, null-space, auto.
//!
//! Every timing is analyze + factor + one certified solve (refinement included), on a
//! freshly built problem (no cached ‖K‖∞).

use std::hint::black_box;
use std::path::Path;
use std::process::Command;
use std::time::{Duration, Instant};

use criterion::{criterion_group, criterion_main, BatchSize, Criterion};
use faer::{Mat, Par};
use tangency::backend::schur;
use tangency::{Matrix, Method, Options, Plan, Problem, ProblemBuilder, Triangle};

/// Deterministic generator (xorshift), values in [−1, 1).
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        (self.0 >> 11) as f64 / (1u64 << 52) as f64 - 1.0
    }
}

/// Convex problem with a known solution: H symmetric, strictly diagonally dominant with
/// positive diagonal (so positive definite), A random dense.
fn convex(n: usize, m: usize, seed: u64) -> Problem {
    let mut rng = Rng(seed | 1);
    let mut h = Mat::zeros(n, n);
    for j in 0..n {
        for i in j + 1..n {
            let v = 0.5 * rng.next();
            h[(i, j)] = v;
            h[(j, i)] = v;
        }
    }
    for i in 0..n {
        h[(i, i)] = 0.5 * n as f64 + 1.0 + rng.next().abs();
    }
    let a = Mat::from_fn(m, n, |_, _| rng.next());
    let xs: Vec<f64> = (0..n).map(|_| rng.next()).collect();
    let ys: Vec<f64> = (0..m).map(|_| rng.next()).collect();
    let mut c = vec![0.0; n];
    for j in 0..n {
        for i in 0..n {
            c[i] -= h[(i, j)] * xs[j];
        }
    }
    for i in 0..m {
        for j in 0..n {
            c[j] -= a[(i, j)] * ys[i];
        }
    }
    let b: Vec<f64> = (0..m).map(|i| (0..n).map(|j| a[(i, j)] * xs[j]).sum()).collect();
    ProblemBuilder::new()
        .hessian_dense(h.as_ref(), Triangle::Full)
        .linear(&c)
        .constraints_dense(a.as_ref())
        .rhs(&b)
        .build()
        .expect("valid benchmark problem")
}

/// A new problem with the same data: nothing computed for `p` (such as ‖K‖∞, cached per
/// problem) carries over, so every timed run is a cold first solve.
fn fresh(p: &Problem) -> Problem {
    let (Matrix::Dense(h), Matrix::Dense(a)) = (p.hessian(), p.constraints()) else {
        panic!("the benchmark problems are dense")
    };
    ProblemBuilder::new()
        .hessian_dense(h.as_ref(), Triangle::Full)
        .linear(p.linear())
        .constraints_dense(a.as_ref())
        .rhs(p.rhs())
        .build()
        .expect("valid benchmark problem")
}

fn run(p: &Problem, method: Method) -> tangency::Solution {
    let opts = Options {
        method,
        ..Default::default()
    };
    let plan = Plan::analyze(p, &opts).expect("analyze");
    let f = plan.factor(p).expect("factor");
    f.solve().expect("solve")
}

/// Rate (flop/s) of a faer GEMM of order 2000 in `f64` and in `f32`.
fn gemm_rates() -> (f64, f64) {
    fn rate<T: faer::traits::RealField + Copy>(one: T, from: impl Fn(usize) -> T) -> f64 {
        let k = 2000;
        let a = Mat::from_fn(k, k, |i, j| from((i * 7 + j * 3) % 11));
        let b = a.clone();
        let mut c = Mat::<T>::zeros(k, k);
        let mut best = f64::INFINITY;
        for _ in 0..3 {
            let t = Instant::now();
            faer::linalg::matmul::matmul(
                c.as_mut(),
                faer::Accum::Replace,
                a.as_ref(),
                b.as_ref(),
                one,
                Par::rayon(0),
            );
            best = best.min(t.elapsed().as_secs_f64());
        }
        black_box(&c);
        2.0 * (k as f64).powi(3) / best
    }
    (rate(1.0f64, |v| v as f64), rate(1.0f32, |v| v as f32))
}

fn read_array(path: &Path) -> Option<Vec<f64>> {
    let text = std::fs::read_to_string(path).ok()?;
    let mut lines = text.lines().filter(|l| !l.starts_with('%'));
    lines.next()?;
    lines.map(|l| l.trim().parse().ok()).collect()
}

/// LAPACK dsysv through the reference script: (best seconds, backward error of its
/// answer on our side), or None when python/scipy is unavailable.
fn lapack_reference(p: &Problem) -> Option<(f64, f64)> {
    let dir = tempfile::tempdir().ok()?;
    let pdir = dir.path().join("problem");
    let out = dir.path().join("out");
    tangency::io::write_problem_dir(p, &pdir).ok()?;
    // Vendored in scripts/ from the project's shared tools.
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/scripts/reference_solve.py");
    let o = Command::new("python3")
        .arg(script)
        .arg(&pdir)
        .args(["--method", "dense", "--repeat", "3", "--out"])
        .arg(&out)
        .output()
        .ok()?;
    if !o.status.success() {
        eprintln!("reference failed: {}", String::from_utf8_lossy(&o.stderr));
        return None;
    }
    let json = String::from_utf8_lossy(&o.stdout).to_string();
    let key = "\"factor_plus_solve_s\": ";
    let at = json.find(key)? + key.len();
    let secs: f64 = json[at..].split([',', '}']).next()?.trim().parse().ok()?;
    let x = read_array(&out.join("x.mtx"))?;
    let y = read_array(&out.join("multipliers.mtx"))?;
    let z: Vec<f64> = x.into_iter().chain(y).collect();
    let rhs = tangency::kkt::rhs(p.linear(), p.rhs());
    let mut r = vec![0.0; rhs.len()];
    tangency::kkt::residual(p, &z, &rhs, &mut r);
    let be = tangency::solver::normwise(&r, tangency::kkt::norm_inf(p), &z, &rhs);
    Some((secs, be))
}

fn median_of(c: &mut Criterion, group: &str, name: &str, p: &Problem, method: Method) {
    let mut g = c.benchmark_group(group);
    g.sample_size(10)
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(8));
    g.bench_function(name, |bch| {
        bch.iter_batched_ref(|| fresh(p), |q| black_box(run(q, method)), BatchSize::PerIteration)
    });
    g.finish();
}

fn convex_3000x1000(c: &mut Criterion) {
    let (n, m) = (3000, 1000);
    let p = convex(n, m, 42);
    let s = run(&p, Method::Schur);
    assert_eq!(s.method, tangency::MethodUsed::Schur);
    let d = run(&p, Method::Dense);
    let (rate64, rate32) = gemm_rates();
    let mixed = s.notes.iter().any(|n| n.contains("single precision"));
    let rate = if mixed { rate32 } else { rate64 };
    let fl = schur::flops(n, m);
    // Factor-only time of the Schur path, for the fraction of the GEMM rate.
    let mut best_factor = f64::INFINITY;
    for _ in 0..3 {
        let p = fresh(&p);
        let plan = Plan::analyze(
            &p,
            &Options {
                method: Method::Schur,
                ..Default::default()
            },
        )
        .unwrap();
        let t = Instant::now();
        let f = plan.factor(&p).unwrap();
        best_factor = best_factor.min(t.elapsed().as_secs_f64());
        black_box(f);
    }
    eprintln!(
        "[convex_3000x1000] Schur: backward error {:.2e} ({} refinement steps); dense LBLᵀ: {:.2e}",
        s.backward_error, s.refinement_steps, d.backward_error
    );
    eprintln!(
        "[convex_3000x1000] Schur flops {:.3e} ({} factors); factor (incl. probe) best {:.3} s = {:.1} GFLOP/s; faer GEMM 2000³ {:.1} GFLOP/s (f64) / {:.1} (f32); fraction of the GEMM rate of that precision {:.2}",
        fl,
        if mixed { "f32" } else { "f64" },
        best_factor,
        fl / best_factor / 1e9,
        rate64 / 1e9,
        rate32 / 1e9,
        fl / best_factor / rate
    );
    match lapack_reference(&p) {
        Some((secs, be)) => eprintln!(
            "[convex_3000x1000] LAPACK dsysv (scipy, best of 3): {secs:.3} s, backward error of its answer {be:.2e}"
        ),
        None => eprintln!("[convex_3000x1000] LAPACK reference unavailable (python3 + numpy/scipy needed)"),
    }
    median_of(c, "convex_3000x1000", "schur", &p, Method::Schur);
    median_of(c, "convex_3000x1000", "dense_lblt", &p, Method::Dense);
}

fn shapes(c: &mut Criterion) {
    for (label, ratio) in [("0.1", 0.1f64), ("0.5", 0.5), ("0.9", 0.9)] {
        let n = (3000.0 / (1.0 + ratio)).round() as usize;
        let m = 3000 - n;
        let p = convex(n, m, 7);
        let group = format!("shape_m_over_n_{label}_n{n}_m{m}");
        let plan = Plan::analyze(&p, &Options::default()).unwrap();
        eprintln!("[{group}] auto picks {}: {}", plan.method(), plan.reason());
        for (name, method) in [
            ("dense_lblt", Method::Dense),
            ("schur", Method::Schur),
            ("nullspace", Method::NullSpace),
            ("auto", Method::Auto),
        ] {
            median_of(c, &group, name, &p, method);
        }
    }
}

criterion_group!(benches, convex_3000x1000, shapes);
criterion_main!(benches);
