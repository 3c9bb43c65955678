//! Peak memory of one solve method on Poisson control, measured in-process (Linux only).
//!
//! The problem is generated in memory (a few MB at k = 300), then the peak resident set
//! size is reset (`echo 5 > /proc/self/clear_refs`, Linux ≥ 4.0) and the solve runs; the
//! `VmHWM` line of `/proc/self/status` afterwards is the peak of the solve alone. (Running
//! `/usr/bin/time -v tangency solve DIR` instead measures the Matrix Market reader, whose
//! peak of about 270 MB at k = 300 hides the solver's.) One method per process:
//!
//! ```text
//! cargo run --release --example iterative_memory -- 300 sparse
//! cargo run --release --example iterative_memory -- 300 minres-cholesky 1e-10
//! cargo run --release --example iterative_memory -- 300 minres-matching 1e-14
//! cargo run --release --example iterative_memory -- 300 pcg
//! ```
//!
//! The third argument is the MINRES (preconditioned) tolerance, default 1e-10; the values
//! above are the largest powers of ten that give a true relative residual
//! `‖rhs − Kz‖₂/‖rhs‖₂ ≤ 1e-10` at k = 300 (the matching block's norm is far from the
//! 2-norm). The direct method is refined to machine precision.

use std::time::Instant;

use tangency::generate::PoissonControl;
use tangency::iterative::{self, pcg, IterativeOptions, PcgOptions, SecondBlock};
use tangency::{Method, Options};

fn status_kb(key: &str) -> Option<u64> {
    let text = std::fs::read_to_string("/proc/self/status").ok()?;
    let line = text.lines().find(|l| l.starts_with(key))?;
    line.split_whitespace().nth(1)?.parse().ok()
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let args: Vec<String> = std::env::args().collect();
    let k: usize = args.get(1).map_or(Ok(300), |s| s.parse())?;
    let method = args.get(2).map_or("sparse", String::as_str);
    let p = PoissonControl::new(k).build()?;
    let before = status_kb("VmRSS:").unwrap_or(0);
    std::fs::write("/proc/self/clear_refs", "5")?;
    let t = Instant::now();
    let (iterations, true_residual) = match method {
        "sparse" => {
            let s = tangency::solve(
                &p,
                &Options {
                    method: Method::Sparse,
                    ..Default::default()
                },
            )?;
            (0, s.backward_error)
        }
        "minres-cholesky" | "minres-matching" | "minres-diagonal" => {
            let second = match method {
                "minres-cholesky" => SecondBlock::Cholesky,
                "minres-matching" => SecondBlock::Matching,
                _ => SecondBlock::Diagonal,
            };
            let tol: f64 = args.get(3).map_or(Ok(1e-10), |s| s.parse())?;
            let it = iterative::solve(
                &p,
                &IterativeOptions {
                    tol,
                    max_iter: 100_000,
                    second,
                    ..Default::default()
                },
            )?;
            (it.iterations, it.relative_residual)
        }
        "pcg" => {
            let out = pcg(&p, &PcgOptions::default())?;
            (out.iterations, out.relative_residual)
        }
        other => return Err(format!("unknown method {other}").into()),
    };
    let secs = t.elapsed().as_secs_f64();
    let peak = status_kb("VmHWM:").unwrap_or(0);
    println!(
        "k = {k} method = {method}: peak RSS during the solve {:.1} MB (RSS before {:.1} MB), {secs:.2} s, \
         {iterations} iteration(s), true relative residual (direct: backward error) {true_residual:.2e}",
        peak as f64 / 1024.0,
        before as f64 / 1024.0
    );
    Ok(())
}
