//! The sparse least-squares design of our own shared by `benches/lsq.rs` and
//! `examples/lsq_sparse_once.rs`: p observations, each touching 3 of n coefficients (a band
//! plus a scattered entry), q restrictions on sums of coefficient blocks. Invented data, for
//! timing and sizing only.

use tangency::lsq::{LsqBuilder, LsqProblem};

/// xorshift64*: a uniform integer in [−m, m].
fn int(state: &mut u64, m: i64) -> f64 {
    *state ^= *state >> 12;
    *state ^= *state << 25;
    *state ^= *state >> 27;
    let v = state.wrapping_mul(0x2545_F491_4F6C_DD1D) >> 11;
    ((v % (2 * m as u64 + 1)) as i64 - m) as f64
}

/// The design with `p` observations, `n` coefficients and `q` restrictions (q ≤ n).
pub fn problem(p: usize, n: usize, q: usize) -> LsqProblem {
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
    LsqBuilder::new()
        .design_triplets(p, n, &trip)
        .observations(&g)
        .restrictions_triplets(q, n, &ct)
        .build()
        .expect("the sparse design is valid")
}
