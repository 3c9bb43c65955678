//! One fit of the sparse least-squares design of `benches/lsq.rs` (p = 10⁶, n = 10⁴,
//! q = 20, each observation touching 3 coefficients) through the augmented KKT route, with
//! wall time and peak resident memory. Invented data, for sizing only.
//!
//! Usage: `cargo run --release --example lsq_sparse_once [P] [N]`

use std::time::Instant;
use tangency::lsq::{FitMethod, FitOptions};

#[path = "../benches/common/lsq_sparse_design.rs"]
mod lsq_sparse_design;

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let p: usize = args.next().map(|s| s.parse()).transpose()?.unwrap_or(1_000_000);
    let n: usize = args.next().map(|s| s.parse()).transpose()?.unwrap_or(10_000);
    let q = 20;
    let pr = lsq_sparse_design::problem(p, n, q);
    let opts = FitOptions {
        method: FitMethod::Augmented,
        augmented_covariance_max_n: 0,
        ..Default::default()
    };
    let t = Instant::now();
    let fit = pr.fit(&opts)?;
    let secs = t.elapsed().as_secs_f64();
    let hwm = std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|st| st.lines().find(|l| l.starts_with("VmHWM")).map(str::to_string))
        .unwrap_or_default();
    println!(
        "p = {p}, n = {n}, q = {q}: fit in {secs:.2} s, rss = {:.6e}, {hwm}",
        fit.rss
    );
    Ok(())
}
