//! Writes the dense benchmark problems as problem directories and times our dense paths
//! on them, for a side-by-side run with LAPACK called directly
//! (`scripts/compare_dense.sh` drives both; `scripts/lapack_dense_ref.py` is the LAPACK side).
//!
//! Usage: `cargo run --release --example dense_compare -- OUTDIR [REPEATS] [THREADS] [SIZES]`
//! (THREADS 1 = sequential, 2 = a rayon pool of two; SIZES comma-separated, default
//! 650,2000,4000). Prints one JSON line per problem and path: name, N, threads, path
//! (`dense-f64`, `dense-mixed`, `schur`), every repeat's seconds (analyze + factor + one
//! certified solve), backward error, refinement steps, inertia, whether f32 factors were
//! used, and the flops of the method (N³/3 for LBLᵀ, `schur::flops` for Schur).

#[path = "../benches/common/dense_problems.rs"]
mod dense_problems;

use std::time::Instant;
use tangency::backend::dense_lblt::{DenseParams, DensePrecision};
use tangency::backend::schur::{self, SchurParams, SchurPrecision};
use tangency::{io, Method, Options, Plan};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let out = args.next().unwrap_or_else(|| "target/dense-bench".into());
    let repeats: usize = args.next().map(|s| s.parse()).transpose()?.unwrap_or(5);
    let threads: usize = args.next().map(|s| s.parse()).transpose()?.unwrap_or(2);
    let sizes: Vec<usize> = args
        .next()
        .unwrap_or_else(|| "650,2000,4000".into())
        .split(',')
        .map(|s| s.parse())
        .collect::<Result<_, _>>()?;
    rayon::ThreadPoolBuilder::new().num_threads(threads).build_global()?;
    let par = if threads <= 1 {
        faer::Par::Seq
    } else {
        faer::Par::rayon(threads)
    };
    for &total in &sizes {
        for convex in [true, false] {
            let name = format!("{}-{total}", if convex { "convex" } else { "indefinite" });
            let p = dense_problems::problem(total, convex, 42);
            let dir = std::path::Path::new(&out).join(&name);
            if !dir.join("H.mtx").exists() {
                io::write_problem_dir(&p, &dir)?;
            }
            let (n, m) = dense_problems::split(total);
            let mut paths = vec![
                ("dense-f64", Method::Dense, DensePrecision::Double),
                ("dense-mixed", Method::Dense, DensePrecision::Mixed),
            ];
            if convex {
                paths.push(("schur", Method::Schur, DensePrecision::Double));
            }
            for (label, method, precision) in paths {
                let opts = Options {
                    method,
                    dense: DenseParams {
                        precision,
                        par,
                        ..Default::default()
                    },
                    schur: SchurParams {
                        par,
                        precision: SchurPrecision::Auto,
                        ..Default::default()
                    },
                    ..Default::default()
                };
                let mut times = Vec::new();
                let mut last = None;
                for _ in 0..repeats {
                    // A fresh problem each time: nothing cached (‖K‖∞) carries over.
                    let q = dense_problems::problem(total, convex, 42);
                    let t = Instant::now();
                    let plan = Plan::analyze(&q, &opts)?;
                    let f = plan.factor(&q)?;
                    let s = f.solve()?;
                    times.push(t.elapsed().as_secs_f64());
                    let single = f
                        .backend()
                        .notes()
                        .iter()
                        .any(|n| n.contains("factors in single precision"));
                    last = Some((s, single));
                }
                let (s, single) = last.expect("at least one repeat");
                let flops = if method == Method::Schur && s.method == tangency::MethodUsed::Schur {
                    schur::flops(n, m)
                } else {
                    (total as f64).powi(3) / 3.0
                };
                let inertia = s.inertia.map(|i| format!("[{},{},{}]", i.positive, i.negative, i.zero));
                println!(
                    "{{\"name\":\"{name}\",\"dir\":\"{}\",\"N\":{total},\"threads\":{threads},\"path\":\"{label}\",\
                     \"method_used\":\"{}\",\"single\":{single},\"times_s\":{times:?},\"backward_error\":{:e},\
                     \"refinement_steps\":{},\"inertia\":{},\"flops\":{flops:e}}}",
                    dir.display(),
                    s.method,
                    s.backward_error,
                    s.refinement_steps,
                    inertia.unwrap_or_else(|| "null".into()),
                );
            }
        }
    }
    Ok(())
}
