//! Shared helpers of the diagnostics tests: a small deterministic generator, random
//! problems with controlled spectra, and nalgebra references.
#![allow(dead_code)]

use nalgebra::{DMatrix, DVector};
use tangency::{Method, Options, Problem, ProblemBuilder, Triangle};

/// SplitMix64 (Steele, Lea & Flood 2014): deterministic, dependency-free (common practice
/// for reproducible test data).
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Self {
        Rng(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ 0xD1B5_4A32_D192_ED03)
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in [0, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }
    /// Uniform in [-1, 1).
    pub fn sym(&mut self) -> f64 {
        2.0 * self.uniform() - 1.0
    }
    pub fn below(&mut self, k: usize) -> usize {
        (self.next_u64() % k as u64) as usize
    }
    pub fn vec(&mut self, len: usize) -> Vec<f64> {
        (0..len).map(|_| self.sym()).collect()
    }
    pub fn matrix(&mut self, r: usize, c: usize) -> DMatrix<f64> {
        DMatrix::from_fn(r, c, |_, _| self.sym())
    }
    /// A random orthogonal matrix (Q of the QR of a random matrix).
    pub fn orthogonal(&mut self, k: usize) -> DMatrix<f64> {
        if k == 0 {
            return DMatrix::zeros(0, 0);
        }
        self.matrix(k, k).qr().q()
    }
}

/// `Q diag(eigs) Qᵀ`, symmetrized exactly.
pub fn symmetric_with_spectrum(rng: &mut Rng, eigs: &[f64]) -> DMatrix<f64> {
    let k = eigs.len();
    let q = rng.orthogonal(k);
    let h = &q * DMatrix::from_diagonal(&DVector::from_column_slice(eigs)) * q.transpose();
    (&h + h.transpose()) * 0.5
}

/// `U diag(sv) Vᵀ` (m×n, m ≤ n) with singular values `sv`.
pub fn matrix_with_singular_values(rng: &mut Rng, m: usize, n: usize, sv: &[f64]) -> DMatrix<f64> {
    let u = rng.orthogonal(m);
    let v = rng.orthogonal(n);
    let mut s = DMatrix::zeros(m, n);
    for (i, x) in sv.iter().enumerate() {
        s[(i, i)] = *x;
    }
    u * s * v.transpose()
}

/// Row-major copy of a nalgebra matrix.
pub fn row_major(a: &DMatrix<f64>) -> Vec<f64> {
    let mut out = Vec::with_capacity(a.len());
    for i in 0..a.nrows() {
        for j in 0..a.ncols() {
            out.push(a[(i, j)]);
        }
    }
    out
}

/// A dense problem from nalgebra blocks.
pub fn problem(h: &DMatrix<f64>, a: &DMatrix<f64>, c: &[f64], b: &[f64]) -> Problem {
    ProblemBuilder::new()
        .hessian_row_major(h.nrows(), &row_major(h), Triangle::Full)
        .constraints_row_major(a.nrows(), a.ncols(), &row_major(a))
        .linear(c)
        .rhs(b)
        .build()
        .expect("valid test problem")
}

/// The problem's blocks as nalgebra matrices (H as stored, i.e. symmetrized).
pub fn blocks(p: &Problem) -> (DMatrix<f64>, DMatrix<f64>) {
    let to_na = |m: faer::Mat<f64>| DMatrix::from_fn(m.nrows(), m.ncols(), |i, j| m[(i, j)]);
    (to_na(p.hessian().to_dense()), to_na(p.constraints().to_dense()))
}

/// K = [H Aᵀ; A 0] as a nalgebra matrix.
pub fn kkt(p: &Problem) -> DMatrix<f64> {
    let (h, a) = blocks(p);
    let (n, m) = (p.n(), p.m());
    let mut k = DMatrix::zeros(n + m, n + m);
    k.view_mut((0, 0), (n, n)).copy_from(&h);
    k.view_mut((n, 0), (m, n)).copy_from(&a);
    k.view_mut((0, n), (n, m)).copy_from(&a.transpose());
    k
}

/// Largest absolute column sum.
pub fn norm1(k: &DMatrix<f64>) -> f64 {
    (0..k.ncols())
        .map(|j| k.column(j).iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max)
}

/// Exact (to rounding) κ₁(K) from nalgebra's LU inverse.
pub fn kappa1(k: &DMatrix<f64>) -> f64 {
    let inv = k.clone().try_inverse().expect("nonsingular K");
    norm1(k) * norm1(&inv)
}

/// Every method the crate offers except `auto` (so backends merged later are covered).
pub fn methods() -> Vec<(String, Options)> {
    Method::NAMES
        .iter()
        .filter(|name| **name != "auto")
        .map(|name| {
            let method: Method = name.parse().expect("listed method parses");
            (
                name.to_string(),
                Options {
                    method,
                    ..Default::default()
                },
            )
        })
        .collect()
}

/// A random convex, well-conditioned problem: H SPD with eigenvalues in [1, 4], A with
/// singular values in [1, 2] (full row rank), random c and b.
pub fn well_conditioned(rng: &mut Rng, n: usize, m: usize) -> Problem {
    let eigs: Vec<f64> = (0..n).map(|_| 1.0 + 3.0 * rng.uniform()).collect();
    let h = symmetric_with_spectrum(rng, &eigs);
    let sv: Vec<f64> = (0..m).map(|_| 1.0 + rng.uniform()).collect();
    let a = matrix_with_singular_values(rng, m, n, &sv);
    let c = rng.vec(n);
    let b = rng.vec(m);
    problem(&h, &a, &c, &b)
}

pub fn max_abs_diff(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    a.iter().zip(b).fold(0.0f64, |acc, (x, y)| acc.max((x - y).abs()))
}

pub fn inf_norm(a: &[f64]) -> f64 {
    a.iter().fold(0.0f64, |acc, x| acc.max(x.abs()))
}
