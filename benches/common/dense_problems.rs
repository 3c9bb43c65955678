//! Deterministic dense benchmark problems shared by `benches/dense.rs` and
//! `examples/dense_compare.rs`: invented data for timing only.

use faer::Mat;
use tangency::{Problem, ProblemBuilder, Triangle};

/// Size split used by the benchmarks: m = n/3, so n = 3N/4 for N = n + m.
pub fn split(total: usize) -> (usize, usize) {
    let n = (3 * total).div_ceil(4);
    (n, total - n)
}

fn lcg(state: &mut u64) -> f64 {
    *state = state
        .wrapping_mul(6364136223846793005)
        .wrapping_add(1442695040888963407);
    ((*state >> 11) as f64 / (1u64 << 53) as f64) * 2.0 - 1.0
}

/// H = GᵀG/n + shift·I (positive definite) or with a negative shift on part of the
/// spectrum (indefinite: `convex = false` flips the sign of a third of the diagonal
/// boost), A random dense, c and b random.
pub fn problem(total: usize, convex: bool, seed: u64) -> Problem {
    let (n, m) = split(total);
    let mut s = seed.wrapping_add(1);
    let g = Mat::from_fn(n, n, |_, _| lcg(&mut s));
    let mut h = (g.transpose() * &g) * faer::Scale(1.0 / n as f64);
    for i in 0..n {
        let boost = if !convex && i % 3 == 0 { -2.0 } else { 1.0 };
        h[(i, i)] += boost;
    }
    let a = Mat::from_fn(m, n, |_, _| lcg(&mut s));
    let c: Vec<f64> = (0..n).map(|_| lcg(&mut s)).collect();
    let b: Vec<f64> = (0..m).map(|_| lcg(&mut s)).collect();
    ProblemBuilder::new()
        .hessian_dense(h.as_ref(), Triangle::Lower)
        .constraints_dense(a.as_ref())
        .linear(&c)
        .rhs(&b)
        .build()
        .expect("benchmark problem is valid")
}
