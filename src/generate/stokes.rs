//! Slow viscous flow in a closed square box on a staggered (MAC) grid (our own scenario:
//! stir a thick fluid with a body force and find the divergence-free velocity of least
//! dissipation).
//!
//! Grid: k×k cells. Unknowns `x`: the horizontal velocities on the (k−1)·k interior
//! vertical faces, then the vertical velocities on the k·(k−1) interior horizontal faces
//! (no-slip walls: the wall faces carry no unknown), n = 2k(k−1). Objective:
//! `½ xᵀLx − fᵀx`, `L` the 5-point Laplacian of each velocity component with the walls
//! as zero neighbours (symmetric positive definite), `f` a body force. Constraints: the
//! discrete divergence of each cell is zero, except the last cell's row, which is left out
//! because with closed walls the k² divergence rows sum to zero (the pressure is fixed up to
//! a constant): m = k² − 1, `A` of full row rank, so K is nonsingular with inertia
//! (n, m, 0). The multipliers are the cell pressures (last one fixed at zero).
//!
//! Not a design or analysis tool for any real flow, pump or vessel.

use crate::error::Result;
use crate::problem::{Problem, ProblemBuilder, Triangle};

/// Settings of the MAC-grid Stokes generator.
#[derive(Copy, Clone, Debug)]
pub struct StokesMac {
    /// Cells per side (k ≥ 2). N = 2k(k−1) + k² − 1.
    pub k: usize,
    /// Viscosity ν (scales L). Default: 1.
    pub viscosity: f64,
}

impl StokesMac {
    /// Defaults for `k` cells per side.
    pub fn new(k: usize) -> Self {
        StokesMac { k, viscosity: 1.0 }
    }

    /// Body force at (x, y) in the unit square: a swirl.
    pub fn force(x: f64, y: f64) -> (f64, f64) {
        let pi = std::f64::consts::PI;
        ((pi * y).sin() * (pi * x).cos() + 0.3, -(pi * x).sin() * (pi * y).cos())
    }

    /// Builds the problem.
    ///
    /// ```
    /// use tangency::generate::StokesMac;
    /// let p = StokesMac::new(3).build()?;
    /// assert_eq!((p.n(), p.m()), (12, 8));
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn build(&self) -> Result<Problem> {
        super::check_size(self.k, 2, 2000)?;
        let k = self.k;
        let h = 1.0 / k as f64;
        let nu = (k - 1) * k; // horizontal velocities u(i, j): face x = i·h, i = 1..k−1; cell row j
        let n = 2 * nu;
        let uid = |i: usize, j: usize| (i - 1) * k + j; // i in 1..k, j in 0..k
        let vid = |i: usize, j: usize| nu + i * (k - 1) + (j - 1); // i in 0..k, j in 1..k
        let mut hess = Vec::with_capacity(3 * n);
        let mut c = vec![0.0; n];
        // u block: neighbours in i (faces) and j (rows); walls are zero neighbours.
        for i in 1..k {
            for j in 0..k {
                let r = uid(i, j);
                hess.push((r, r, 4.0 * self.viscosity));
                if i > 1 {
                    hess.push((r, uid(i - 1, j), -self.viscosity));
                }
                if j > 0 {
                    hess.push((r, uid(i, j - 1), -self.viscosity));
                }
                let (fx, _) = Self::force(i as f64 * h, (j as f64 + 0.5) * h);
                c[r] = -h * h * fx;
            }
        }
        for i in 0..k {
            for j in 1..k {
                let r = vid(i, j);
                hess.push((r, r, 4.0 * self.viscosity));
                if i > 0 {
                    hess.push((r, vid(i - 1, j), -self.viscosity));
                }
                if j > 1 {
                    hess.push((r, vid(i, j - 1), -self.viscosity));
                }
                let (_, fy) = Self::force((i as f64 + 0.5) * h, j as f64 * h);
                c[r] = -h * h * fy;
            }
        }
        // Divergence of cell (i, j): u(i+1, j) − u(i, j) + v(i, j+1) − v(i, j), walls zero.
        let m = k * k - 1;
        let mut a = Vec::with_capacity(4 * m);
        for i in 0..k {
            for j in 0..k {
                let row = i * k + j;
                if row == m {
                    continue;
                }
                if i + 1 < k {
                    a.push((row, uid(i + 1, j), 1.0));
                }
                if i > 0 {
                    a.push((row, uid(i, j), -1.0));
                }
                if j + 1 < k {
                    a.push((row, vid(i, j + 1), 1.0));
                }
                if j > 0 {
                    a.push((row, vid(i, j), -1.0));
                }
            }
        }
        ProblemBuilder::new()
            .hessian_triplets(n, &hess, Triangle::Lower)
            .constraints_triplets(m, n, &a)
            .linear(&c)
            .rhs(&vec![0.0; m])
            .build()
    }
}
