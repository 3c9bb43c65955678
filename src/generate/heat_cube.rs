//! Distributed control of a 3D Poisson equation (our own scenario: steer the temperature of
//! a solid cube towards a target field with a distributed heat source), the 3D sibling of
//! [`super::PoissonControl`] and the family where nested dissection matters most.
//!
//! Grid: k×k×k interior nodes of the unit cube, spacing `h = 1/(k+1)`, zero temperature on
//! the boundary. Unknowns: state `s` (k³ temperatures) then control `u` (k³ sources),
//! n = 2k³. Constraints (m = k³, one per node, the 7-point Laplacian scaled by h²):
//! `6s_ijl − Σ_neighbours s − h² u_ijl = h² g_ijl` with a fixed background source g.
//! Objective: `(h³/2)‖s − s̄‖² + (α h³/2)‖u‖²` (cell volume h³), so
//! `H = diag(h³ I, α h³ I)` and `c = [−h³ s̄; 0]`. N = 3k³; k = 33 gives N = 107 811.
//!
//! Not a design tool for any real heating system.

use crate::error::Result;
use crate::problem::{Problem, ProblemBuilder, Triangle};

/// Settings of the 3D Poisson-control generator (`generate heat-cube`).
#[derive(Copy, Clone, Debug)]
pub struct HeatCube {
    /// Interior nodes per edge (k ≥ 1). N = 3k³.
    pub k: usize,
    /// Control cost α. Default: 1e-2.
    pub alpha: f64,
}

impl HeatCube {
    /// Defaults for grid size `k`.
    pub fn new(k: usize) -> Self {
        HeatCube { k, alpha: 1e-2 }
    }

    /// Target temperature at (x, y, z) in the unit cube.
    pub fn target(x: f64, y: f64, z: f64) -> f64 {
        let pi = std::f64::consts::PI;
        (pi * x).sin() * (pi * y).sin() * (2.0 * pi * z).sin().abs() + 0.25 * x * y * z
    }

    /// Background source at (x, y, z).
    pub fn background(x: f64, y: f64, z: f64) -> f64 {
        1.0 - (x - 0.3).abs() - (y - 0.6).abs() - 0.5 * (z - 0.5).abs()
    }

    /// Builds the problem.
    ///
    /// ```
    /// use tangency::generate::HeatCube;
    /// let p = HeatCube::new(3).build()?;
    /// assert_eq!((p.n(), p.m()), (54, 27));
    /// // diagonal, neighbour pairs (3 directions × 2 per line pair × 9 lines), control
    /// assert_eq!(p.nnz().1, 27 + 2 * 3 * 2 * 9 + 27);
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn build(&self) -> Result<Problem> {
        super::check_size(self.k, 1, 250)?;
        let k = self.k;
        let kkk = k * k * k;
        let n = 2 * kkk;
        let h = 1.0 / (k as f64 + 1.0);
        let (h2, h3) = (h * h, h * h * h);
        let node = |i: usize, j: usize, l: usize| (i * k + j) * k + l;
        let mut hess = Vec::with_capacity(n);
        let mut c = vec![0.0; n];
        let mut a = Vec::with_capacity(8 * kkk);
        let mut b = vec![0.0; kkk];
        for i in 0..k {
            for j in 0..k {
                for l in 0..k {
                    let (x, y, z) = ((i + 1) as f64 * h, (j + 1) as f64 * h, (l + 1) as f64 * h);
                    let r = node(i, j, l);
                    hess.push((r, r, h3));
                    hess.push((kkk + r, kkk + r, self.alpha * h3));
                    c[r] = -h3 * Self::target(x, y, z);
                    a.push((r, r, 6.0));
                    if i > 0 {
                        a.push((r, node(i - 1, j, l), -1.0));
                    }
                    if i + 1 < k {
                        a.push((r, node(i + 1, j, l), -1.0));
                    }
                    if j > 0 {
                        a.push((r, node(i, j - 1, l), -1.0));
                    }
                    if j + 1 < k {
                        a.push((r, node(i, j + 1, l), -1.0));
                    }
                    if l > 0 {
                        a.push((r, node(i, j, l - 1), -1.0));
                    }
                    if l + 1 < k {
                        a.push((r, node(i, j, l + 1), -1.0));
                    }
                    a.push((r, kkk + r, -h2));
                    b[r] = h2 * Self::background(x, y, z);
                }
            }
        }
        ProblemBuilder::new()
            .hessian_triplets(n, &hess, Triangle::Lower)
            .constraints_triplets(kkk, n, &a)
            .linear(&c)
            .rhs(&b)
            .build()
    }
}
