//! Where single-precision Schur factors start to pay: median of 7 cold analyze + factor +
//! certified solve runs with double and mixed precision on convex dense problems
//! (m = n/3, the generator of the dense benchmarks), for N = n + m from 400 to 2000.
//!
//! Run: `cargo run --release --example mixed_crossover`.

#[path = "../benches/common/dense_problems.rs"]
mod dense_problems;
use std::time::Instant;
use tangency::backend::schur::{SchurParams, SchurPrecision};
use tangency::{Method, Options, Plan};
fn main() {
    for total in [400usize, 800, 1200, 1600, 2000] {
        let p0 = dense_problems::problem(total, true, 42);
        let mut line = format!("N={total} n={} m={}", p0.n(), p0.m());
        for prec in [SchurPrecision::Double, SchurPrecision::Mixed] {
            let opts = Options {
                method: Method::Schur,
                schur: SchurParams {
                    precision: prec,
                    ..Default::default()
                },
                ..Default::default()
            };
            let mut times = vec![];
            for _ in 0..7 {
                let p = dense_problems::problem(total, true, 42);
                let t = Instant::now();
                let s = Plan::analyze(&p, &opts).unwrap().factor(&p).unwrap().solve().unwrap();
                times.push(t.elapsed().as_secs_f64());
                assert!(s.backward_error < 1e-15);
            }
            times.sort_by(f64::total_cmp);
            line += &format!("  {prec:?} median {:.4}", times[3]);
        }
        println!("{line}");
    }
}
