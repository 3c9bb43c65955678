//! One fit of the sparse least-squares design of `benches/lsq.rs` (p = 10⁶, n = 10⁴,
//! q = 20, each observation touching 3 coefficients) through the augmented KKT route, with
//! wall time and peak resident memory. Invented data, for sizing only.
//!
//! Usage: `cargo run --release --example lsq_sparse_once [P] [N]`

use std::time::Instant;
use tangency::lsq::{FitMethod, FitOptions, LsqBuilder};

fn int(state: &mut u64, m: i64) -> f64 {
    *state ^= *state >> 12;
    *state ^= *state << 25;
    *state ^= *state >> 27;
    let v = state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11;
    ((v % (2 * m as u64 + 1)) as i64 - m) as f64
}

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let mut args = std::env::args().skip(1);
    let p: usize = args.next().map(|s| s.parse()).transpose()?.unwrap_or(1_000_000);
    let n: usize = args.next().map(|s| s.parse()).transpose()?.unwrap_or(10_000);
    let q = 20;
    let mut s = 77u64;
    let mut trip = Vec::with_capacity(3 * p);
    for i in 0..p {
        let j = i % n;
        trip.push((i, j, 1.0 + int(&mut s, 9) / 10.0));
        trip.push((i, (j + 1) % n, int(&mut s, 9) / 10.0));
        trip.push((i, (i * 7919) % n, int(&mut s, 9) / 10.0));
    }
    let g: Vec<f64> = (0..p).map(|_| int(&mut s, 100) / 10.0).collect();
    let mut ct = Vec::new();
    for i in 0..q {
        for j in (i * (n / q))..((i + 1) * (n / q)) {
            ct.push((i, j, 1.0));
        }
    }
    let pr = LsqBuilder::new()
        .design_triplets(p, n, &trip)
        .observations(&g)
        .restrictions_triplets(q, n, &ct)
        .build()?;
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
