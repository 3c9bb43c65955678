//! Why faer's dense LBLᵀ does not gain from a second core: times the factorization of
//! the indefinite benchmark K alone (no equilibration, no solve) sequentially, in
//! parallel called from outside the rayon pool (the caller waits while the pool's threads
//! run; between parallel regions they spin), and in parallel called from inside a pool of
//! the same size (`ThreadPool::install`: the caller is one of the threads), for several
//! block sizes, in f64 and f32.
//!
//! Usage: `cargo run --release --example lblt_threads -- [N] [REPEATS]`

#[path = "../benches/common/dense_problems.rs"]
mod dense_problems;

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::cholesky::lblt::factor as bk;
use faer::{Mat, Par, Spec};
use std::time::Instant;

fn time<T: faer::traits::ComplexField>(k: &Mat<T>, par: Par, block: usize, repeats: usize) -> f64 {
    let dim = k.nrows();
    let mut params: bk::LbltParams = Spec::<bk::LbltParams, T>::default().config;
    params.block_size = block;
    let spec: Spec<bk::LbltParams, T> = params.into();
    let mut best = f64::INFINITY;
    for _ in 0..repeats {
        let mut a = k.clone();
        let mut sub = faer::diag::Diag::<T>::zeros(dim);
        let (mut p, mut pi) = (vec![0usize; dim], vec![0usize; dim]);
        let mut buf = MemBuffer::new(bk::cholesky_in_place_scratch::<usize, T>(dim, par, spec));
        let t = Instant::now();
        bk::cholesky_in_place(
            a.as_mut(),
            sub.as_mut(),
            &mut p,
            &mut pi,
            par,
            MemStack::new(&mut buf),
            spec,
        );
        best = best.min(t.elapsed().as_secs_f64());
    }
    best
}

fn main() {
    let mut args = std::env::args().skip(1);
    let total: usize = args.next().map(|s| s.parse().unwrap()).unwrap_or(4000);
    let repeats: usize = args.next().map(|s| s.parse().unwrap()).unwrap_or(3);
    let p = dense_problems::problem(total, false, 42);
    let k = tangency::kkt::assemble_dense(&p);
    let k32 = Mat::<f32>::from_fn(total, total, |i, j| k[(i, j)] as f32);
    let pool = rayon::ThreadPoolBuilder::new().num_threads(2).build().unwrap();
    let flops = (total as f64).powi(3) / 3.0;
    println!("N = {total}, best of {repeats}, GFLOP/s at N³/3 flops");
    for block in [32usize, 64, 128, 256] {
        let seq = time(&k, Par::Seq, block, repeats);
        let outside = time(&k, Par::rayon(2), block, repeats);
        let inside = pool.install(|| time(&k, Par::rayon(2), block, repeats));
        let seq32 = time(&k32, Par::Seq, block, repeats);
        let inside32 = pool.install(|| time(&k32, Par::rayon(2), block, repeats));
        println!(
            "block {block:4}: f64 seq {seq:.3} s ({:.1}), par outside {outside:.3} s ({:.1}), par inside {inside:.3} s ({:.1}); \
             f32 seq {seq32:.3} s, par inside {inside32:.3} s",
            flops / seq / 1e9,
            flops / outside / 1e9,
            flops / inside / 1e9
        );
    }
}
