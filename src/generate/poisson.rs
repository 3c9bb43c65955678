//! Distributed control of a 2D Poisson equation (our own scenario: steer the temperature
//! of a thin square plate towards a target profile with a distributed heat source).
//!
//! Grid: k×k interior nodes of the unit square, spacing `h = 1/(k+1)`, zero temperature on
//! the boundary. Unknowns: state `s` (k² temperatures) then control `u` (k² sources),
//! `x = [s; u]`, n = 2k². Constraints (m = k², one per node, the 5-point Laplacian scaled
//! by h²): `4s_ij − s_(i±1)j − s_i(j±1) − h² u_ij = h² g_ij` with a fixed background
//! source g. Objective: `(h²/2)‖s − s̄‖² + (α h²/2)‖u‖²`, so `H = diag(h² I, α h² I)`
//! (positive definite) and `c = [−h² s̄; 0]`. The blocks span several orders of magnitude
//! (`h²` against 4), which exercises equilibration.
//!
//! Not a design tool for any real heating system.

use crate::error::Result;
use crate::problem::{Problem, ProblemBuilder, Triangle};

/// Settings of the Poisson-control generator.
#[derive(Copy, Clone, Debug)]
pub struct PoissonControl {
    /// Interior nodes per side (k ≥ 1). N = 3k².
    pub k: usize,
    /// Control cost α. Default: 1e-2.
    pub alpha: f64,
}

impl PoissonControl {
    /// Defaults for grid size `k`.
    pub fn new(k: usize) -> Self {
        PoissonControl { k, alpha: 1e-2 }
    }

    /// Target temperature at (x, y) in the unit square.
    pub fn target(x: f64, y: f64) -> f64 {
        (std::f64::consts::PI * x).sin() * (2.0 * std::f64::consts::PI * y).sin().abs() + 0.5 * x * y
    }

    /// Background source at (x, y).
    pub fn background(x: f64, y: f64) -> f64 {
        1.0 - 2.0 * (x - 0.3).abs() - (y - 0.6).abs()
    }

    /// Builds the problem.
    ///
    /// ```
    /// use tangency::generate::PoissonControl;
    /// let p = PoissonControl::new(3).build()?;
    /// assert_eq!((p.n(), p.m()), (18, 9));
    /// assert_eq!(p.nnz().1, 9 + 4 * 3 * 2 + 9); // diagonal, neighbour pairs, control
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn build(&self) -> Result<Problem> {
        super::check_size(self.k, 1, 4000)?;
        let k = self.k;
        let kk = k * k;
        let n = 2 * kk;
        let h = 1.0 / (k as f64 + 1.0);
        let h2 = h * h;
        let node = |i: usize, j: usize| i * k + j;
        let mut hess = Vec::with_capacity(n);
        let mut c = vec![0.0; n];
        let mut a = Vec::with_capacity(6 * kk);
        let mut b = vec![0.0; kk];
        for i in 0..k {
            for j in 0..k {
                let (x, y) = ((i + 1) as f64 * h, (j + 1) as f64 * h);
                let r = node(i, j);
                hess.push((r, r, h2));
                hess.push((kk + r, kk + r, self.alpha * h2));
                c[r] = -h2 * Self::target(x, y);
                a.push((r, r, 4.0));
                if i > 0 {
                    a.push((r, node(i - 1, j), -1.0));
                }
                if i + 1 < k {
                    a.push((r, node(i + 1, j), -1.0));
                }
                if j > 0 {
                    a.push((r, node(i, j - 1), -1.0));
                }
                if j + 1 < k {
                    a.push((r, node(i, j + 1), -1.0));
                }
                a.push((r, kk + r, -h2));
                b[r] = h2 * Self::background(x, y);
            }
        }
        ProblemBuilder::new()
            .hessian_triplets(n, &hess, Triangle::Lower)
            .constraints_triplets(kk, n, &a)
            .linear(&c)
            .rhs(&b)
            .build()
    }
}
