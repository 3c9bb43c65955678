//! Library-level checks of `tangency::distributed`, run under MPI:
//!
//! ```text
//! cargo build --release --features mpi --example distributed_check
//! mpirun -n 2 --allow-run-as-root --oversubscribe target/release/examples/distributed_check
//! ```
//!
//! Each rank builds **its own rows** (round-robin over KKT rows, unlike the command line's
//! contiguous blocks) of every family, then: a distributed solve agrees with the serial sparse
//! backend (x, y to 1e-10, inertia, verdict); a refactorization with new values of the same
//! pattern and a solve for new (c, b) agree with a serial solve of the changed problem; a
//! singular K above the rescue limit is `Error::Singular` on every rank; invalid rows on one
//! rank are an input error there and `Error::OnOtherRank` (exit code 2) on the others.
//! Rank 0 prints `N passed, M failed`; the exit code is 1 when a check failed.

#[path = "../tests/distributed_support/mod.rs"]
mod distributed_support;

use mpi::traits::*;
use tangency::distributed::{DistributedKkt, DistributedOptions, LocalRows};
use tangency::{Error, Method, Options, Plan, Problem, ProblemBuilder, Triangle};

fn serial(p: &Problem) -> tangency::Solution {
    let options = Options {
        method: Method::Sparse,
        ..Default::default()
    };
    Plan::analyze(p, &options)
        .and_then(|plan| plan.factor(p))
        .and_then(|f| f.solve())
        .expect("serial solve")
}

/// This rank's rows: KKT row r belongs to rank r mod size.
fn my_rows(p: &Problem, rank: usize, size: usize) -> LocalRows {
    let n = p.n();
    let mut rows = LocalRows::new(n, p.m());
    p.hessian().for_each(|i, j, v| {
        if j <= i && i % size == rank {
            rows.hessian_lower.push((i, j, v));
        }
    });
    p.constraints().for_each(|k, j, v| {
        if (n + k) % size == rank {
            rows.constraints.push((k, j, v));
        }
    });
    rows
}

fn diff(a: &[f64], b: &[f64]) -> f64 {
    let scale = b.iter().fold(1.0f64, |m, x| m.max(x.abs()));
    a.iter().zip(b).fold(0.0f64, |m, (x, y)| m.max((x - y).abs())) / scale
}

struct Tally {
    passed: usize,
    failed: usize,
    rank: i32,
}

impl Tally {
    fn check(&mut self, ok: bool, what: &str) {
        if ok {
            self.passed += 1;
        } else {
            self.failed += 1;
            eprintln!("rank {}: FAILED: {what}", self.rank);
        }
    }
}

fn main() {
    let universe = mpi::initialize().expect("MPI initializes once");
    let world = universe.world();
    let (rank, size) = (world.rank() as usize, world.size() as usize);
    let mut t = Tally {
        passed: 0,
        failed: 0,
        rank: world.rank(),
    };
    let mut families = 0;
    for (name, p, verdict) in distributed_support::families() {
        families += 1;
        let s = serial(&p);
        let rows = my_rows(&p, rank, size);
        let mut kkt = match DistributedKkt::new(&world, rows.clone(), DistributedOptions::default()) {
            Ok(k) => k,
            Err(e) => {
                t.check(false, &format!("{name}: factor: {e}"));
                continue;
            }
        };
        match kkt.solve(p.linear(), p.rhs()) {
            Ok(d) => {
                t.check(
                    d.verdict.map(|v| v.as_str()) == Some(verdict),
                    &format!("{name}: verdict"),
                );
                t.check(
                    d.inertia == s.inertia,
                    &format!("{name}: inertia {:?} vs {:?}", d.inertia, s.inertia),
                );
                let (dx, dy) = (diff(&d.x, &s.x), diff(&d.y, &s.y));
                t.check(dx <= 1e-10 && dy <= 1e-10, &format!("{name}: dx {dx:.1e} dy {dy:.1e}"));
            }
            Err(e) => t.check(false, &format!("{name}: solve: {e}")),
        }
        // New values on the same pattern (H scaled by 2, A by 1.5) and new (c, b).
        let hv: Vec<f64> = rows.hessian_lower.iter().map(|e| 2.0 * e.2).collect();
        let av: Vec<f64> = rows.constraints.iter().map(|e| 1.5 * e.2).collect();
        let c2: Vec<f64> = (0..p.n()).map(|j| ((j % 5) as f64 - 2.0) * 0.1).collect();
        let b2: Vec<f64> = (0..p.m()).map(|i| ((i % 3) as f64 - 1.0) * 0.2).collect();
        let mut hl = Vec::new();
        p.hessian().for_each(|i, j, v| {
            if j <= i {
                hl.push((i, j, 2.0 * v))
            }
        });
        let mut al = Vec::new();
        p.constraints().for_each(|k, j, v| al.push((k, j, 1.5 * v)));
        let p2 = ProblemBuilder::new()
            .hessian_triplets(p.n(), &hl, Triangle::Lower)
            .constraints_triplets(p.m(), p.n(), &al)
            .linear(&c2)
            .rhs(&b2)
            .build()
            .expect("changed problem");
        let s2 = serial(&p2);
        let refactored = kkt.refactor(&hv, &av).and_then(|_| kkt.solve(&c2, &b2));
        match refactored {
            Ok(d) => {
                // K' = D K D with D = diag(√2·I, (1.5/√2)·I): the same inertia, so the same
                // verdict by construction (Sylvester); the serial one when it certifies one.
                let same = d.verdict.map(|v| v.as_str()) == Some(verdict);
                let serial_agrees = s2.verdict.is_none() || s2.verdict == d.verdict;
                t.check(
                    same && serial_agrees,
                    &format!(
                        "{name}: verdict after refactor {:?} (serial {:?})",
                        d.verdict, s2.verdict
                    ),
                );
                let (dx, dy) = (diff(&d.x, &s2.x), diff(&d.y, &s2.y));
                t.check(
                    dx <= 1e-10 && dy <= 1e-10,
                    &format!("{name} refactor: dx {dx:.1e} dy {dy:.1e}"),
                );
            }
            Err(e) => t.check(false, &format!("{name}: refactor: {e}")),
        }
    }
    t.check(families == 4, "four families ran");

    // Singular K above the rescue limit: Error::Singular on every rank.
    let redundant = distributed_support::with_repeated_row(&distributed_support::poisson(6), 2, 0.0);
    let options = DistributedOptions {
        rescue_max_dim: 0,
        ..Default::default()
    };
    let out = DistributedKkt::new(&world, my_rows(&redundant, rank, size), options)
        .and_then(|mut k| k.solve(redundant.linear(), redundant.rhs()));
    match out {
        Err(Error::Singular { inertia, .. }) => t.check(inertia.zero >= 1, "singular: a null pivot"),
        Err(e) => t.check(false, &format!("singular: got {e}")),
        Ok(_) => t.check(false, "singular: got a solution"),
    }

    // Invalid rows on the last rank only.
    let p = distributed_support::poisson(4);
    let mut rows = my_rows(&p, rank, size);
    if rank == size - 1 {
        rows.constraints.push((p.m(), 0, 1.0));
    }
    match DistributedKkt::new(&world, rows, DistributedOptions::default()) {
        Err(Error::IndexOutOfRange { .. }) if rank == size - 1 => t.check(true, ""),
        Err(Error::OnOtherRank {
            exit_code: 2, status, ..
        }) if rank != size - 1 => t.check(status == "invalid_input", "other rank: status"),
        Err(e) => t.check(false, &format!("invalid rows: got {e}")),
        Ok(_) => t.check(false, "invalid rows: accepted"),
    }

    let mut failed = t.failed as u64;
    let mut total = 0u64;
    world.all_reduce_into(&failed, &mut total, mpi::collective::SystemOperation::sum());
    failed = total;
    if rank == 0 {
        println!("distributed_check on {size} rank(s)");
        println!("distributed_check: {} passed, {failed} failed", t.passed);
    }
    drop(universe);
    std::process::exit(if failed == 0 { 0 } else { 1 });
}
