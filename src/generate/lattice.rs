//! A tied spring lattice (our own mechanics family): a square, cross-braced lattice of
//! springs cut into two halves along a vertical seam. The halves share no spring; the
//! duplicated seam nodes are joined by *tie* constraints, the left edge is *supported*
//! (both displacements fixed), and the top edge is kept straight by *multipoint*
//! constraints (each top node's vertical displacement interpolates the top-right
//! corner's). The right edge carries a downward load.
//!
//! Sizes for parameter k ≥ 2: (k+1)×(k+1) grid points, seam at column ⌊k/2⌋ duplicated,
//! so n = 2(k+1)(k+2) displacements; m = 2(k+1) supports + 2(k+1) ties + (k−1) multipoint
//! rows = 5k + 3. `H` (the stiffness matrix) is singular on its own: the right half floats
//! until the ties attach it, so only the reduced Hessian is positive definite and the KKT
//! inertia is (n, m, 0).
//!
//! Not a structural design or analysis tool: the springs are an abstraction for testing
//! linear algebra; defer to local codes and licensed practice for real structures.

use crate::error::Result;
use crate::problem::{Problem, ProblemBuilder, Triangle};

/// Settings of the tied-lattice generator.
#[derive(Copy, Clone, Debug)]
pub struct TiedLattice {
    /// Cells per side (k ≥ 2).
    pub k: usize,
    /// Stiffness of the horizontal and vertical springs. Default: 1.
    pub axial: f64,
    /// Stiffness of the diagonal braces. Default: 0.5.
    pub brace: f64,
}

impl TiedLattice {
    /// Defaults for `k` cells per side.
    pub fn new(k: usize) -> Self {
        TiedLattice {
            k,
            axial: 1.0,
            brace: 0.5,
        }
    }

    /// Builds the problem.
    ///
    /// ```
    /// use tangency::generate::TiedLattice;
    /// let p = TiedLattice::new(4).build()?;
    /// assert_eq!((p.n(), p.m()), (2 * 5 * 6, 5 * 4 + 3));
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn build(&self) -> Result<Problem> {
        super::check_size(self.k, 2, 3000)?;
        let k = self.k;
        let s = k / 2;
        let left_cols = s + 1;
        let right_cols = k - s + 1;
        let left_nodes = (k + 1) * left_cols;
        // Node id of grid point (row i, column j) in the given half.
        let id = |i: usize, j: usize, right: bool| {
            if right {
                left_nodes + i * right_cols + (j - s)
            } else {
                i * left_cols + j
            }
        };
        let nodes = left_nodes + (k + 1) * right_cols;
        let n = 2 * nodes;
        let mut h: Vec<(usize, usize, f64)> = Vec::new();
        let mut spring = |p: usize, q: usize, dx: f64, dy: f64, stiff: f64| {
            let len2 = dx * dx + dy * dy;
            let d = [dx, dy];
            for a in 0..2 {
                for b in 0..2 {
                    let v = stiff * d[a] * d[b] / len2;
                    if v == 0.0 {
                        continue;
                    }
                    let (pa, pb, qa, qb) = (2 * p + a, 2 * p + b, 2 * q + a, 2 * q + b);
                    for (r, c, w) in [(pa, pb, v), (qa, qb, v), (qa, pb, -v), (pa, qb, -v)] {
                        if r >= c {
                            h.push((r, c, w));
                        }
                    }
                }
            }
        };
        for right in [false, true] {
            let (j0, j1) = if right { (s, k) } else { (0, s) };
            for i in 0..=k {
                for j in j0..=j1 {
                    let p = id(i, j, right);
                    if j < j1 {
                        spring(p, id(i, j + 1, right), 1.0, 0.0, self.axial);
                    }
                    if i < k {
                        spring(p, id(i + 1, j, right), 0.0, 1.0, self.axial);
                    }
                    if i < k && j < j1 {
                        spring(p, id(i + 1, j + 1, right), 1.0, 1.0, self.brace);
                        spring(id(i + 1, j, right), id(i, j + 1, right), 1.0, -1.0, self.brace);
                    }
                }
            }
        }
        let mut a = Vec::new();
        let mut row = 0;
        // Supports: the left edge is fixed.
        for i in 0..=k {
            for dof in 0..2 {
                a.push((row, 2 * id(i, 0, false) + dof, 1.0));
                row += 1;
            }
        }
        // Ties: the two copies of each seam point move together.
        for i in 0..=k {
            for dof in 0..2 {
                a.push((row, 2 * id(i, s, false) + dof, 1.0));
                a.push((row, 2 * id(i, s, true) + dof, -1.0));
                row += 1;
            }
        }
        // Multipoint: the top edge stays straight (vertical displacement interpolates
        // between the supported corner and the free corner).
        let corner = 2 * id(k, k, true) + 1;
        for j in 1..k {
            let t = j as f64 / k as f64;
            a.push((row, 2 * id(k, j, j > s) + 1, 1.0));
            a.push((row, corner, -t));
            row += 1;
        }
        let mut c = vec![0.0; n];
        for i in 0..=k {
            // Downward load on the right edge: c = −f.
            c[2 * id(i, k, true) + 1] = 1.0 / (k as f64 + 1.0);
        }
        ProblemBuilder::new()
            .hessian_triplets(n, &h, Triangle::Lower)
            .constraints_triplets(row, n, &a)
            .linear(&c)
            .build()
    }
}
