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

/// Moment about the origin (node 0, bottom-left, at (0, 0)) of a force `(fx, fy)` acting at
/// node `nd` (at `(col, row)` in metres): `x·f_y − y·f_x`, counter-clockwise positive.
fn moment(lattice: &SpringLattice, nd: usize, fx: f64, fy: f64) -> f64 {
    let (x, y) = ((nd % lattice.columns) as f64, (nd / lattice.columns) as f64);
    x * fy - y * fx
}

/// Runs the demo and returns its explanation, or the error if the solve failed.
pub fn run() -> Result<String> {
    let lattice = spring_lattice(9, 3)?;
    let mut s = solve(&lattice.problem, &Options::default())?;
    let (cols, rows) = (lattice.columns, lattice.rows);
    let mut out = String::new();
    let _ = writeln!(
        out,
        "Demo: a {cols}×{rows} spring lattice (nodes 1 m apart; node k sits at column k mod {cols},\n\
         row k div {cols}) pinned at the bottom-left node 0, on a roller at the bottom-right node {},\n\
         with one horizontal tie between the middle nodes {} (top) and {} (bottom). Loads: 10 kN\n\
         downward on each top node and 2 kN to the right (+x) on the top-left node {}.\n\
         Signs: +x to the right, +y upward; a positive force pushes the lattice that way.\n\
         (An illustration of constrained minimization, not a structural design tool.)\n",
        cols - 1,
        (rows - 1) * cols + cols / 2,
        cols / 2,
        (rows - 1) * cols
    );
    // Remarks about which factorization ran are for the solver's users, not for this story.
    let internal = std::mem::take(&mut s.notes);
    out.push_str(&crate::report::human(&lattice.problem, &s));
    if !internal.is_empty() {
        let _ = writeln!(
            out,
            "  ({} solver note(s) omitted: `tangency solve` shows them)",
            internal.len()
        );
    }
    let _ = writeln!(
        out,
        "\nSupport reactions (the force each support exerts on the lattice, = −y on its row):"
    );
    let mut sum = [0.0f64; 2];
    let mut moments = 0.0f64;
    for (nd, dir, f) in reactions(&lattice, &s) {
        let _ = writeln!(
            out,
            "  node {nd:>2} {}: {f:+.6} kN ({})",
            if dir == 0 { "x" } else { "y" },
            match (dir, f >= 0.0) {
                (0, true) => "pushes right",
                (0, false) => "pushes left",
                (_, true) => "pushes up",
                (_, false) => "pulls down",
            }
        );
        sum[dir] += f;
        moments += if dir == 0 {
            moment(&lattice, nd, f, 0.0)
        } else {
            moment(&lattice, nd, 0.0, f)
        };
    }
    let applied = [
        lattice.load.iter().step_by(2).sum::<f64>(),
        lattice.load.iter().skip(1).step_by(2).sum::<f64>(),
    ];
    let applied_moment: f64 = lattice
        .load
        .chunks(2)
        .enumerate()
        .map(|(nd, f)| moment(&lattice, nd, f[0], f[1]))
        .sum();
    // The tie row is x_top − x_bottom = 0: it exerts −y_t on the top node and +y_t on the
    // bottom node, both horizontal. They cancel as forces but, acting rows − 1 metres apart,
    // form a couple.
    let tie = s.y[lattice.supports.len()];
    let (top, bottom) = ((rows - 1) * cols + cols / 2, cols / 2);
    let tie_moment = moment(&lattice, top, -tie, 0.0) + moment(&lattice, bottom, tie, 0.0);
    let _ = writeln!(
        out,
        "  tie: {:+.6} kN on node {top} and {:+.6} kN on node {bottom} (x): equal and opposite, so they cancel\n\
         \x20      as forces, but {} m apart they form a couple of {:+.6} kN·m",
        -tie,
        tie,
        rows - 1,
        tie_moment
    );
    let _ = writeln!(
        out,
        "\nEquilibrium check (everything acting on the lattice should add up to zero):"
    );
    for (d, name) in ["x", "y"].iter().enumerate() {
        let _ = writeln!(
            out,
            "  force {name}: reactions {:+.6} + applied {:+.6} = {} kN",
            sum[d],
            applied[d],
            crate::report::num(sum[d] + applied[d], 2)
        );
    }
    let total_moment = moments + applied_moment + tie_moment;
    let _ = writeln!(
        out,
        "  moment about node 0 (counter-clockwise +): reactions {moments:+.6} + applied {applied_moment:+.6} \
         + tie couple {tie_moment:+.6} = {} kN·m",
        crate::report::num(total_moment, 2)
    );
    // What statics by hand would give without the tie's couple: the roller balances the
    // moment of the loads alone.
    let span = (cols - 1) as f64;
    let hand_roller = -applied_moment / span;
    let roller = reactions(&lattice, &s)[2].2;
    let _ = writeln!(
        out,
        "  the roller carries {roller:+.6} kN, not the {hand_roller:+.6} kN of statics by hand from the loads alone:\n\
         \x20 the tie's couple ({tie_moment:+.6} kN·m) is balanced by the supports as well, shifting {:+.6} kN\n\
         \x20 between the pin and the roller",
        roller - hand_roller
    );
    let max_defl = s.x.chunks(2).map(|u| u[0].hypot(u[1])).fold(0.0f64, f64::max);
    let _ = writeln!(out, "  largest node displacement: {:.6} mm", 1000.0 * max_defl);
    let tol = 1e-9;
    let balanced =
        (sum[0] + applied[0]).abs() < tol && (sum[1] + applied[1]).abs() < tol && total_moment.abs() < tol * span;
    let _ = writeln!(
        out,
        "\n{}",
        if balanced {
            "The reactions balance the applied load in force and in moment: the multipliers are the support forces."
        } else {
            "WARNING: the reactions do not balance the load to 1e-9 kN (or kN·m)."
        }
    );
    Ok(out)
}

/// The three equilibrium residuals of a solved lattice (forces in x and y, moment about
/// node 0), counting the support reactions, the applied load and the tie's couple.
pub fn equilibrium(lattice: &SpringLattice, s: &Solution) -> [f64; 3] {
    let mut r = [0.0f64; 3];
    for (nd, dir, f) in reactions(lattice, s) {
        r[dir] += f;
        r[2] += if dir == 0 {
            moment(lattice, nd, f, 0.0)
        } else {
            moment(lattice, nd, 0.0, f)
        };
    }
    for (nd, f) in lattice.load.chunks(2).enumerate() {
        r[0] += f[0];
        r[1] += f[1];
        r[2] += moment(lattice, nd, f[0], f[1]);
    }
    let tie = s.y[lattice.supports.len()];
    let mid = lattice.columns / 2;
    let top = (lattice.rows - 1) * lattice.columns + mid;
    r[2] += moment(lattice, top, -tie, 0.0) + moment(lattice, mid, tie, 0.0);
    r
}
