//! Problem families of our own for the distributed tests (shared by tests/distributed_cli.rs
//! and examples/distributed_check.rs). Invented scenarios for testing linear algebra, not
//! design tools for real fluids or structures.
#![allow(dead_code)]

use tangency::generate::Family;
use tangency::{Problem, ProblemBuilder, Triangle};

/// Stokes-type saddle point on a k×k MAC (staggered) grid of the unit square, h = 1/k:
/// velocities on cell faces (u on the (k−1)·k interior vertical faces, v on the k·(k−1)
/// interior horizontal faces, walls at zero), `H` the 5-point viscous Laplacian of each
/// component (Dirichlet walls; SPD), `A` the discrete divergence of every cell but the last
/// (the full divergence has the constant pressure in the null space of `Aᵀ`; dropping one
/// row pins the pressure, so `A` has full row rank). A swirling body force `f` enters as
/// `c = −f·h²`; `b = 0`. Inertia (n, m, 0) by construction: verdict minimizer.
pub fn mac_stokes(k: usize) -> Problem {
    assert!(k >= 2);
    let h = 1.0 / k as f64;
    let nu = (k - 1) * k; // u faces, index u(i, j) = (i − 1)·k + j for i in 1..k, j in 0..k
    let nv = k * (k - 1); // v faces, index nu + i·(k−1) + (j − 1) for i in 0..k, j in 1..k
    let n = nu + nv;
    let u = |i: usize, j: usize| (i - 1) * k + j;
    let v = |i: usize, j: usize| nu + i * (k - 1) + (j - 1);
    let inv_h2 = 1.0 / (h * h);
    let mut hl = Vec::new();
    // u(i, j): neighbours u(i±1, j) for 1 ≤ i±1 ≤ k−1, u(i, j±1) for 0 ≤ j±1 < k.
    for i in 1..k {
        for j in 0..k {
            hl.push((u(i, j), u(i, j), 4.0 * inv_h2));
            if i + 1 < k {
                hl.push((u(i + 1, j), u(i, j), -inv_h2));
            }
            if j + 1 < k {
                hl.push((u(i, j + 1), u(i, j), -inv_h2));
            }
        }
    }
    for i in 0..k {
        for j in 1..k {
            hl.push((v(i, j), v(i, j), 4.0 * inv_h2));
            if i + 1 < k {
                hl.push((v(i + 1, j), v(i, j), -inv_h2));
            }
            if j + 1 < k {
                hl.push((v(i, j + 1), v(i, j), -inv_h2));
            }
        }
    }
    // Divergence of cell (i, j) (x from i·h to (i+1)·h): u(i+1, j) − u(i, j) + v(i, j+1) − v(i, j).
    let mut a = Vec::new();
    let m = k * k - 1;
    for row in 0..m {
        let (i, j) = (row / k, row % k);
        if i + 1 < k {
            a.push((row, u(i + 1, j), 1.0 / h));
        }
        if i >= 1 {
            a.push((row, u(i, j), -1.0 / h));
        }
        if j + 1 < k {
            a.push((row, v(i, j + 1), 1.0 / h));
        }
        if j >= 1 {
            a.push((row, v(i, j), -1.0 / h));
        }
    }
    let mut c = vec![0.0; n];
    let pi = std::f64::consts::PI;
    for i in 1..k {
        for j in 0..k {
            let (x, y) = (i as f64 * h, (j as f64 + 0.5) * h);
            c[u(i, j)] = -(pi * y).sin() * (pi * x).cos() * h * h;
        }
    }
    for i in 0..k {
        for j in 1..k {
            let (x, y) = ((i as f64 + 0.5) * h, j as f64 * h);
            c[v(i, j)] = (pi * x).sin() * (2.0 * pi * y).cos() * h * h;
        }
    }
    ProblemBuilder::new()
        .hessian_triplets(n, &hl, Triangle::Lower)
        .constraints_triplets(m, n, &a)
        .linear(&c)
        .rhs(&vec![0.0; m])
        .build()
        .expect("the MAC generator builds valid data")
}

/// A chain with `p` coupled pairs `(uᵢ, wᵢ)`, n = 2p, m = p: constraints
/// `uᵢ = (wᵢ + wᵢ₊₁)/2` (`w_p` taken as 0), `H = diag(−δ·I, T)` with `T = tridiag(−1, 4, −1)`.
/// On the null space `u = Bw` the reduced Hessian is `T − δ BᵀB` with `‖B‖₂ ≤ 1` and
/// `λ_min(T) ≥ 2`: for `δ < 2` (here 1) `H` is indefinite but the reduced Hessian positive
/// definite (verdict minimizer, inertia (n, m, 0)); for large `δ` (here 8) the reduced Hessian is
/// indefinite (verdict saddle). Variables are interleaved `u₀, w₀, u₁, w₁, …`.
pub fn chain(p: usize, delta: f64) -> Problem {
    let (n, m) = (2 * p, p);
    let (u, w) = (|i: usize| 2 * i, |i: usize| 2 * i + 1);
    let mut hl = Vec::new();
    let mut a = Vec::new();
    for i in 0..p {
        hl.push((u(i), u(i), -delta));
        hl.push((w(i), w(i), 4.0));
        if i + 1 < p {
            hl.push((w(i + 1), w(i), -1.0));
        }
        a.push((i, u(i), 1.0));
        a.push((i, w(i), -0.5));
        if i + 1 < p {
            a.push((i, w(i + 1), -0.5));
        }
    }
    let c: Vec<f64> = (0..n).map(|j| ((j * 7 % 11) as f64 - 5.0) / 5.0).collect();
    let b: Vec<f64> = (0..m).map(|i| ((i * 3 % 7) as f64 - 3.0) / 10.0).collect();
    ProblemBuilder::new()
        .hessian_triplets(n, &hl, Triangle::Lower)
        .constraints_triplets(m, n, &a)
        .linear(&c)
        .rhs(&b)
        .build()
        .expect("the chain generator builds valid data")
}

/// Poisson control (the crate's generator) of size k.
pub fn poisson(k: usize) -> Problem {
    Family::PoissonControl.problem(k).expect("poisson-control builds")
}

/// `base` with its constraint row `row` repeated at the end; `shift` is added to the copy's
/// right-hand side (0: consistent and redundant, K singular; ≠ 0: infeasible).
pub fn with_repeated_row(base: &Problem, row: usize, shift: f64) -> Problem {
    let (n, m) = (base.n(), base.m());
    let mut hl = Vec::new();
    base.hessian().for_each(|i, j, v| {
        if j <= i {
            hl.push((i, j, v))
        }
    });
    let mut a = Vec::new();
    base.constraints().for_each(|k, j, v| {
        a.push((k, j, v));
        if k == row {
            a.push((m, j, v));
        }
    });
    let mut b = base.rhs().to_vec();
    b.push(b[row] + shift);
    ProblemBuilder::new()
        .hessian_triplets(n, &hl, Triangle::Lower)
        .constraints_triplets(m + 1, n, &a)
        .linear(base.linear())
        .rhs(&b)
        .build()
        .expect("a repeated row keeps the data valid")
}

/// The four agreement families at test size: (name, problem, expected verdict word).
pub fn families() -> Vec<(&'static str, Problem, &'static str)> {
    vec![
        ("poisson-control", poisson(12), "minimizer"),
        ("mac-stokes", mac_stokes(10), "minimizer"),
        ("nonconvex-chain", chain(400, 1.0), "minimizer"),
        ("saddle-chain", chain(400, 8.0), "saddle"),
    ]
}
