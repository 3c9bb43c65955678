//! Helpers shared by the integration tests: a small deterministic generator and
//! reference computations with nalgebra (an independent general-purpose library).
#![allow(dead_code)]

use nalgebra::{DMatrix, DVector};
use tangency::{Problem, ProblemBuilder, Triangle};

/// xorshift64* — deterministic test data without a dependency.
pub struct Rng(u64);

impl Rng {
    pub fn new(seed: u64) -> Self {
        Rng(seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1)
    }
    pub fn next_u64(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    /// Uniform in [-1, 1).
    pub fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
    pub fn vec(&mut self, n: usize) -> Vec<f64> {
        (0..n).map(|_| self.uniform()).collect()
    }
    pub fn below(&mut self, k: usize) -> usize {
        (self.next_u64() % k as u64) as usize
    }
}

/// Row-major symmetric matrix with prescribed eigenvalue signs: H = Q diag(λ) Qᵀ with Q
/// from Gram–Schmidt of a random matrix.
pub fn symmetric_with_eigs(rng: &mut Rng, eigs: &[f64]) -> Vec<f64> {
    let n = eigs.len();
    let g = DMatrix::from_fn(n, n, |_, _| rng.uniform());
    let q = g.qr().q();
    let h = &q * DMatrix::from_diagonal(&DVector::from_column_slice(eigs)) * q.transpose();
    let h = (&h + h.transpose()) * 0.5;
    let mut out = vec![0.0; n * n];
    for i in 0..n {
        for j in 0..n {
            out[i * n + j] = h[(i, j)];
        }
    }
    out
}

/// A dense problem from row-major H (n×n), A (m×n), c, b.
pub fn dense_problem(n: usize, m: usize, h: &[f64], a: &[f64], c: &[f64], b: &[f64]) -> Problem {
    ProblemBuilder::new()
        .hessian_row_major(n, h, Triangle::Full)
        .constraints_row_major(m, n, a)
        .linear(c)
        .rhs(b)
        .build()
        .expect("valid test problem")
}

/// nalgebra copy of the KKT matrix.
pub fn kkt_nalgebra(p: &Problem) -> DMatrix<f64> {
    let (n, m) = (p.n(), p.m());
    let mut k = DMatrix::zeros(n + m, n + m);
    p.hessian().for_each(|i, j, v| k[(i, j)] = v);
    p.constraints().for_each(|i, j, v| {
        k[(n + i, j)] = v;
        k[(j, n + i)] = v;
    });
    k
}

/// Inertia of a symmetric matrix from nalgebra's symmetric eigenvalues, counting
/// |λ| ≤ tol·max|λ| as zero.
pub fn eig_inertia(k: &DMatrix<f64>, tol: f64) -> (usize, usize, usize) {
    if k.nrows() == 0 {
        return (0, 0, 0);
    }
    let e = k.clone().symmetric_eigen().eigenvalues;
    let scale = e.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    let mut out = (0, 0, 0);
    for &l in e.iter() {
        if l.abs() <= tol * scale {
            out.2 += 1;
        } else if l > 0.0 {
            out.0 += 1;
        } else {
            out.1 += 1;
        }
    }
    out
}

/// 2-norm condition number from nalgebra's singular values.
pub fn cond2(k: &DMatrix<f64>) -> f64 {
    let s = k.clone().singular_values();
    let mx = s.iter().fold(0.0f64, |a, v| a.max(*v));
    let mn = s.iter().fold(f64::INFINITY, |a, v| a.min(*v));
    mx / mn
}

pub fn max_abs_diff(a: &[f64], b: &[f64]) -> f64 {
    assert_eq!(a.len(), b.len());
    a.iter().zip(b).fold(0.0f64, |acc, (x, y)| acc.max((x - y).abs()))
}

pub fn inf_norm(a: &[f64]) -> f64 {
    a.iter().fold(0.0f64, |acc, x| acc.max(x.abs()))
}

/// Runs the `tangency` binary: (exit code, stdout, stderr).
pub fn run_cli(args: &[&str]) -> (i32, String, String) {
    let out = std::process::Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args(args)
        .output()
        .expect("binary runs");
    (
        out.status.code().expect("exit code"),
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

/// The single JSON object a `--json` run prints (fails on anything else).
pub fn one_json(stdout: &str) -> serde_json::Value {
    let trimmed = stdout.trim();
    assert_eq!(
        trimmed.lines().count(),
        1,
        "exactly one JSON line expected, got: {stdout}"
    );
    serde_json::from_str(trimmed).unwrap_or_else(|e| panic!("invalid JSON ({e}): {stdout}"))
}

/// Random convex problem with x*, y* chosen by design: H SPD with eigenvalues in [1, 10],
/// A random m×n (full row rank with probability one), c = −Hx* − Aᵀy*, b = Ax*.
pub fn designed(rng: &mut Rng, n: usize, m: usize) -> (Problem, Vec<f64>, Vec<f64>) {
    let eigs: Vec<f64> = (0..n).map(|_| 1.0 + 4.5 * (rng.uniform() + 1.0)).collect();
    let h = symmetric_with_eigs(rng, &eigs);
    let a = rng.vec(m * n);
    let (xs, ys) = (rng.vec(n), rng.vec(m));
    let hm = DMatrix::from_row_slice(n, n, &h);
    let am = DMatrix::from_row_slice(m, n, &a);
    let c = -(&hm * DVector::from_column_slice(&xs)) - am.transpose() * DVector::from_column_slice(&ys);
    let b = &am * DVector::from_column_slice(&xs);
    (dense_problem(n, m, &h, &a, c.as_slice(), b.as_slice()), xs, ys)
}
