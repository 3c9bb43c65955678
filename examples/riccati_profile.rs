//! Profiling driver for the Riccati backend (issue 8): the problem of `benches/riccati.rs`
//! (nx = 12, nu = 4) at horizon N, then `iters` rounds of refactor + solve (`fs`) or
//! re-solve only (`rs`). Run under callgrind, collecting only the loop:
//!
//! ```text
//! cargo build --release --example riccati_profile
//! valgrind --tool=callgrind --toggle-collect='riccati_profile::run_*' \
//!     target/release/examples/riccati_profile fs 200 20
//! ```
//!
//! Without valgrind it prints the mean time per round (wall clock, noisy).

#[path = "../benches/common/riccati_problem.rs"]
mod riccati_problem;

use riccati_problem::problem;
use tangency::{Factorization, Method, Options, Plan, Problem, Solution, Workspace};

#[inline(never)]
fn run_factor_solve(
    f: &mut Factorization,
    p: &Problem,
    c: &[f64],
    b: &[f64],
    ws: &mut Workspace,
    out: &mut Solution,
    iters: usize,
) {
    for _ in 0..iters {
        f.refactor(p).unwrap();
        f.solve_into(c, b, ws, out).unwrap();
    }
}

#[inline(never)]
fn run_resolve(f: &Factorization, c: &[f64], b: &mut [f64], ws: &mut Workspace, out: &mut Solution, iters: usize) {
    for step in 0..iters {
        b[0] = 0.1 + 1e-3 * (step % 7) as f64;
        f.solve_into(c, b, ws, out).unwrap();
    }
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let mode = args.get(1).map_or("fs", |s| s.as_str()).to_string();
    let horizon: usize = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(200);
    let iters: usize = args.get(3).and_then(|s| s.parse().ok()).unwrap_or(20);
    let method = match args.get(4).map(|s| s.as_str()) {
        Some("sparse") => Method::Sparse,
        _ => Method::Riccati,
    };
    let (p, dims) = problem(horizon);
    let opts = Options {
        method,
        stages: Some(dims),
        ..Default::default()
    };
    let mut f = Plan::analyze(&p, &opts).unwrap().factor(&p).unwrap();
    let mut ws = f.workspace();
    let mut out = Solution::empty(p.n(), p.m(), f.plan().method());
    let c = p.linear().to_vec();
    let mut b = p.rhs().to_vec();
    let t = std::time::Instant::now();
    if mode == "rs" {
        run_resolve(&f, &c, &mut b, &mut ws, &mut out, iters);
    } else {
        run_factor_solve(&mut f, &p, &c, &b, &mut ws, &mut out, iters);
    }
    let per = t.elapsed().as_secs_f64() / iters.max(1) as f64;
    println!(
        "{mode} N = {horizon} ({:?}): {:.1} µs per round, refinement steps {}, backward error {:.1e}",
        f.plan().method(),
        per * 1e6,
        out.refinement_steps,
        out.backward_error
    );
}
