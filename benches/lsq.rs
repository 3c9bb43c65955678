//! Restricted least squares, dense p = 20 000, n = 500, q = 50, side by side with a
//! by-hand numpy route (scripts/lsq_numpy_route.py: QR of Cᵀ, then lstsq of F·Z) run on
//! the same data in the same run. Accuracy against a solution exact by design.
//!
//! Run: `cargo bench --bench lsq` (numpy and scipy must be importable by `python3`).
//! The sparse case (p = 10⁶, n = 10⁴) runs with `TANGENCY_SPARSE_LSQ_BENCH=1` and only
//! when the analysis picks a sparse KKT backend (otherwise it says so and skips: the dense
//! KKT of that size does not fit in memory).

use std::process::Command;

#[path = "common/lsq_sparse_design.rs"]
mod lsq_sparse_design;

use criterion::{criterion_group, criterion_main, Criterion};
use tangency::lsq::{FitMethod, FitOptions, LsqBuilder, LsqProblem};

struct Rng(u64);
impl Rng {
    fn int(&mut self, m: i64) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11;
        ((v % (2 * m as u64 + 1)) as i64 - m) as f64
    }
}

/// Exact by design, in integers (every product and sum below is exact in f64):
/// F = [F₁; F₁] (p/2 distinct rows twice), β* integer, Cβ* = d, g = Fβ* + [s; −s].
/// Then Fᵀ(g − Fβ*) = F₁ᵀs − F₁ᵀs = 0, so β* is the restricted solution (multipliers 0)
/// with a residual of norm √2‖s‖.
/// (F row-major, g, C row-major, d, β*).
type Data = (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>);

fn problem(p: usize, n: usize, q: usize) -> Data {
    let mut rng = Rng(0x1234_5678);
    let h = p / 2;
    let f1: Vec<f64> = (0..h * n).map(|_| rng.int(50)).collect();
    let beta: Vec<f64> = (0..n).map(|_| rng.int(20)).collect();
    let s: Vec<f64> = (0..h).map(|_| rng.int(1000)).collect();
    let c: Vec<f64> = (0..q * n).map(|_| rng.int(5)).collect();
    let d: Vec<f64> = (0..q).map(|i| (0..n).map(|j| c[i * n + j] * beta[j]).sum()).collect();
    let mut f = f1.clone();
    f.extend_from_slice(&f1);
    let mut g = Vec::with_capacity(p);
    for sign in [1.0, -1.0] {
        for i in 0..h {
            let fb: f64 = (0..n).map(|j| f1[i * n + j] * beta[j]).sum();
            g.push(fb + sign * s[i]);
        }
    }
    (f, g, c, d, beta)
}

fn write_bin(path: &std::path::Path, v: &[f64]) {
    let bytes: Vec<u8> = v.iter().flat_map(|x| x.to_le_bytes()).collect();
    std::fs::write(path, bytes).unwrap();
}

fn max_rel(a: &[f64], b: &[f64]) -> f64 {
    let s = b.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    a.iter().zip(b).fold(0.0f64, |m, (x, y)| m.max((x - y).abs())) / s
}

fn dense(c: &mut Criterion) {
    let (p, n, q) = (20_000, 500, 50);
    let (f, g, cm, d, beta) = problem(p, n, q);
    let dir = tempfile::tempdir().unwrap();
    std::fs::write(dir.path().join("shape.txt"), format!("{p} {n} {q}")).unwrap();
    for (name, v) in [("F", &f), ("g", &g), ("C", &cm), ("d", &d), ("beta", &beta)] {
        write_bin(&dir.path().join(format!("{name}.bin")), v);
    }
    let pr: LsqProblem = LsqBuilder::new()
        .design_row_major(p, n, &f)
        .observations(&g)
        .restrictions_row_major(q, n, &cm)
        .restriction_rhs(&d)
        .build()
        .unwrap();
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/scripts/lsq_numpy_route.py");
    match Command::new("python3")
        .arg(script)
        .arg(dir.path())
        .arg("7")
        // These two slow a current numpy on this machine (see the environment notes); unset
        // for the reference side only, so it runs its best kernel.
        .env_remove("OPENBLAS_CORETYPE")
        .env_remove("OPENBLAS_L2_SIZE")
        .output()
    {
        Ok(o) if o.status.success() => println!(
            "numpy route (p={p}, n={n}, q={q}): {}",
            String::from_utf8_lossy(&o.stdout).trim()
        ),
        Ok(o) => println!("numpy route failed: {}", String::from_utf8_lossy(&o.stderr)),
        Err(e) => println!("numpy route not run: {e}"),
    }
    let est = FitOptions {
        method: FitMethod::Dense,
        inference: false,
        ..Default::default()
    };
    let fit = pr.fit(&est).unwrap();
    println!(
        "tangency dense (estimation only): max rel err {:.3e}, refinement {:?}",
        max_rel(&fit.coefficients, &beta),
        fit.refinement_history
    );
    let raw = pr
        .fit(&FitOptions {
            max_refinement_steps: 0,
            ..est
        })
        .unwrap();
    println!(
        "tangency dense without refinement: max rel err {:.3e}",
        max_rel(&raw.coefficients, &beta)
    );
    let mut group = c.benchmark_group("lsq_dense_20000x500_q50");
    group.sample_size(10);
    group.bench_function("tangency_estimation", |b| b.iter(|| pr.fit(&est).unwrap()));
    group.bench_function("tangency_no_refinement", |b| {
        b.iter(|| {
            pr.fit(&FitOptions {
                max_refinement_steps: 0,
                ..est
            })
            .unwrap()
        })
    });
    group.bench_function("tangency_with_inference", |b| {
        b.iter(|| {
            pr.fit(&FitOptions {
                method: FitMethod::Dense,
                ..Default::default()
            })
            .unwrap()
        })
    });
    group.finish();
}

/// Our own sparse design: each observation touches 3 coefficients (a band plus a scattered
/// entry), q = 20 restrictions on sums of coefficient blocks.
fn sparse(c: &mut Criterion) {
    if std::env::var("TANGENCY_SPARSE_LSQ_BENCH").is_err() {
        println!("sparse lsq bench skipped: set TANGENCY_SPARSE_LSQ_BENCH=1");
        return;
    }
    let probe = tangency::ProblemBuilder::new()
        .hessian_triplets(
            2000,
            &(0..2000).map(|i| (i, i, 1.0)).collect::<Vec<_>>(),
            tangency::Triangle::Lower,
        )
        .build()
        .unwrap();
    let plan = tangency::Plan::analyze(&probe, &tangency::Options::default()).unwrap();
    if plan.method().as_str() == "dense" {
        println!("sparse lsq bench skipped: the analysis still picks the dense KKT backend for sparse input");
        return;
    }
    let pr = lsq_sparse_design::problem(1_000_000, 10_000, 20);
    let opts = FitOptions {
        method: FitMethod::Augmented,
        augmented_covariance_max_n: 0,
        ..Default::default()
    };
    let mut group = c.benchmark_group("lsq_sparse_1e6x1e4");
    group.sample_size(10);
    group.bench_function("tangency_augmented", |b| b.iter(|| pr.fit(&opts).unwrap()));
    group.finish();
}

criterion_group!(benches, dense, sparse);
criterion_main!(benches);
