//! Writes the dense benchmark problems as problem directories and times our dense
//! factor + solve on them, for a side-by-side run with LAPACK's symmetric-indefinite solver
//! (`scripts/compare_dense.sh` drives both).
//!
//! Usage: `cargo run --release --example dense_compare -- OUTDIR [REPEATS]`
//! Prints one JSON line per problem: name, N, median and best seconds, backward error.

#[path = "../benches/dense_problems.rs"]
mod dense_problems;

use std::time::Instant;
use tangency::{io, Method, Options, Plan};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let out = args.next().unwrap_or_else(|| "target/dense-bench".into());
    let repeats: usize = args.next().map(|s| s.parse()).transpose()?.unwrap_or(5);
    for &total in &[650usize, 2000, 4000] {
        for convex in [true, false] {
            let name = format!("{}-{total}", if convex { "convex" } else { "indefinite" });
            let p = dense_problems::problem(total, convex, 42);
            let dir = std::path::Path::new(&out).join(&name);
            io::write_problem_dir(&p, &dir)?;
            let plan = Plan::analyze(
                &p,
                &Options {
                    method: Method::Dense,
                    ..Default::default()
                },
            )?;
            let mut times = Vec::new();
            let mut be = 0.0;
            for _ in 0..repeats {
                let t = Instant::now();
                let f = plan.factor(&p)?;
                let s = f.solve()?;
                times.push(t.elapsed().as_secs_f64());
                be = s.backward_error;
            }
            times.sort_by(f64::total_cmp);
            println!(
                "{{\"name\":\"{name}\",\"dir\":\"{}\",\"N\":{total},\"median_s\":{},\"best_s\":{},\"backward_error\":{be:e}}}",
                dir.display(),
                times[times.len() / 2],
                times[0]
            );
        }
    }
    Ok(())
}
