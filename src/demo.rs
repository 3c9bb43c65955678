//! A worked scenario of our own: a pinned spring lattice under load.
//!
//! **An illustration of the mathematics, not a structural design tool**: real structures
//! are designed to local codes by licensed engineers.
//!
//! A 2-D lattice of nodes joined by linear axial springs (horizontal, vertical and both
//! diagonals) carries gravity-like loads on its top row and a side load. The lowest-energy
//! displacement `u` minimizes `½uᵀKu − fᵀu` (K the assembled stiffness) subject to
//! supports (`u = 0` on pinned degrees of freedom) and one tie (two nodes forced to move
//! together horizontally, a multipoint constraint). With our sign convention
//! `Ku − f + Aᵀy = 0`, so the force the constraints exert on the lattice is `−Aᵀy`: the
//! support reactions are `−y` on the support rows, and the tie's multiplier is an internal
//! force pair that cancels. Global equilibrium demands that reactions balance the applied
//! load exactly; the demo checks it.

use std::fmt::Write as _;

use crate::error::Result;
use crate::problem::{Problem, ProblemBuilder, Triangle};
use crate::solution::Solution;
use crate::solver::{solve, Options};

/// The demo lattice: geometry, loads and the assembled problem.
#[derive(Debug)]
pub struct SpringLattice {
    /// Nodes per row.
    pub columns: usize,
    /// Rows of nodes.
    pub rows: usize,
    /// The QP: variables are (u_x, u_y) per node, node index `row * columns + col`.
    pub problem: Problem,
    /// Constraint rows that are supports: (constraint row, node, direction 0 = x / 1 = y).
    pub supports: Vec<(usize, usize, usize)>,
    /// Applied load vector f (length 2 · nodes).
    pub load: Vec<f64>,
}

/// Builds the lattice scenario: `columns × rows` nodes at unit spacing, axial springs of
/// stiffness `50 000 / length` (kN/m), 10 kN down on each top node, 2 kN sideways on the
/// top-left node; pinned bottom-left, roller bottom-right, one horizontal tie between the
/// middle top and middle bottom nodes.
pub fn spring_lattice(columns: usize, rows: usize) -> Result<SpringLattice> {
    let columns = columns.max(2);
    let rows = rows.max(2);
    let node = |r: usize, c: usize| r * columns + c;
    let nodes = columns * rows;
    let n = 2 * nodes;
    let mut h = Vec::new();
    let mut spring = |a: usize, b: usize, dx: f64, dy: f64| {
        let len = (dx * dx + dy * dy).sqrt();
        let k = 50_000.0 / len;
        let e = [dx / len, dy / len];
        for p in 0..2 {
            for q in 0..2 {
                let v = k * e[p] * e[q];
                h.push((2 * a + p, 2 * a + q, v));
                h.push((2 * b + p, 2 * b + q, v));
                h.push((2 * a + p, 2 * b + q, -v));
                h.push((2 * b + p, 2 * a + q, -v));
            }
        }
    };
    for r in 0..rows {
        for c in 0..columns {
            if c + 1 < columns {
                spring(node(r, c), node(r, c + 1), 1.0, 0.0);
            }
            if r + 1 < rows {
                spring(node(r, c), node(r + 1, c), 0.0, 1.0);
                if c + 1 < columns {
                    spring(node(r, c), node(r + 1, c + 1), 1.0, 1.0);
                    spring(node(r, c + 1), node(r + 1, c), -1.0, 1.0);
                }
            }
        }
    }
    let mut load = vec![0.0; n];
    for c in 0..columns {
        load[2 * node(rows - 1, c) + 1] = -10.0;
    }
    load[2 * node(rows - 1, 0)] += 2.0;
    let c_vec: Vec<f64> = load.iter().map(|f| -f).collect();
    // Supports: bottom-left pinned (x and y), bottom-right roller (y).
    let pins = [(node(0, 0), 0), (node(0, 0), 1), (node(0, columns - 1), 1)];
    let mut a = Vec::new();
    let mut supports = Vec::new();
    for (row, &(nd, dir)) in pins.iter().enumerate() {
        a.push((row, 2 * nd + dir, 1.0));
        supports.push((row, nd, dir));
    }
    // Tie: middle top node and middle bottom node share their horizontal displacement.
    let mid = columns / 2;
    let tie_row = pins.len();
    a.push((tie_row, 2 * node(rows - 1, mid), 1.0));
    a.push((tie_row, 2 * node(0, mid), -1.0));
    let m = tie_row + 1;
    let problem = ProblemBuilder::new()
        .hessian_triplets(n, &h, Triangle::Full)
        .linear(&c_vec)
        .constraints_triplets(m, n, &a)
        .build()?;
    Ok(SpringLattice {
        columns,
        rows,
        problem,
        supports,
        load,
    })
}

/// Support reactions `(node, direction, force)` of a solved lattice: `−yᵢ` on each
/// support row.
pub fn reactions(lattice: &SpringLattice, s: &Solution) -> Vec<(usize, usize, f64)> {
    lattice
        .supports
        .iter()
        .map(|&(row, nd, dir)| (nd, dir, -s.y[row]))
        .collect()
}

/// Runs the demo and returns its explanation, or the error if the solve failed.
pub fn run() -> Result<String> {
    let lattice = spring_lattice(9, 3)?;
    let s = solve(&lattice.problem, &Options::default())?;
    let mut out = String::new();
    let _ = writeln!(
        out,
        "Demo: a {}×{} spring lattice pinned at the bottom-left, on a roller at the bottom-right,\n\
         with one horizontal tie, loaded by 10 kN on each top node and 2 kN sideways.\n\
         (An illustration of constrained minimization, not a structural design tool.)\n",
        lattice.columns, lattice.rows
    );
    out.push_str(&crate::report::human(&lattice.problem, &s));
    let _ = writeln!(out, "\nSupport reactions (= −y on the support rows):");
    let mut sum = [0.0f64; 2];
    for (nd, dir, f) in reactions(&lattice, &s) {
        let _ = writeln!(out, "  node {nd:>2} {}: {f:+.6} kN", if dir == 0 { "x" } else { "y" });
        sum[dir] += f;
    }
    let applied = [
        lattice.load.iter().step_by(2).sum::<f64>(),
        lattice.load.iter().skip(1).step_by(2).sum::<f64>(),
    ];
    let tie = s.y[lattice.supports.len()];
    let _ = writeln!(out, "  tie force (internal pair, cancels globally): {tie:+.6} kN");
    let _ = writeln!(out, "\nEquilibrium check (reactions + applied loads should vanish):");
    for (d, name) in ["x", "y"].iter().enumerate() {
        let _ = writeln!(
            out,
            "  {name}: reactions {:+.6} + applied {:+.6} = {:+.3e} kN",
            sum[d],
            applied[d],
            sum[d] + applied[d]
        );
    }
    let max_defl = s.x.chunks(2).map(|u| u[0].hypot(u[1])).fold(0.0f64, f64::max);
    let _ = writeln!(out, "  largest node displacement: {:.6} mm", 1000.0 * max_defl);
    let balanced = (sum[0] + applied[0]).abs() < 1e-9 && (sum[1] + applied[1]).abs() < 1e-9;
    let _ = writeln!(
        out,
        "\n{}",
        if balanced {
            "The reactions balance the applied load: the multipliers are the support forces."
        } else {
            "WARNING: the reactions do not balance the load to 1e-9 kN."
        }
    );
    Ok(out)
}
