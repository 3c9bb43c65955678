//! `tangency solve DIR --method distributed`: the command-line face of the distributed path.
//!
//! Run it under `mpirun -n P`. **Rank 0 reads the problem directory and scatters it** (for
//! now: a parallel reader is not written yet): the KKT rows `0..n+m` are cut into `P`
//! contiguous blocks, and each rank receives the lower-triangle entries of `H` and the
//! entries of `A` of its block. Rank 0 prints exactly one JSON object (with `--json`) or
//! the readable report, and writes `--out` files; the other ranks print nothing. Every rank
//! exits with the same code as a serial solve of the same directory would (0, 2, 3 or 4).

use std::path::Path;

use mpi::topology::SimpleCommunicator;
use mpi::traits::*;

use super::comm::{agree, exit_code, peak_rss_all, ROOT};
use super::{DistributedKkt, DistributedOptions, LocalRows};
use crate::error::{Error, Result};
use crate::problem::Problem;
use crate::report::{error_json, human, solution_json, Json};

/// Runs the distributed solve of the problem directory `dir` and returns the exit code
/// (the same on every rank). Initializes MPI (and finalizes it on return).
pub fn run_solve(dir: &Path, out: Option<&Path>, json: bool) -> u8 {
    let Some(universe) = mpi::initialize() else {
        let err = Error::InvalidOption("MPI was already initialized in this process".into());
        report_error(&err, None, None, json);
        return 2;
    };
    let world = universe.world();
    let code = solve_on(&world, dir, out, json);
    // Rank 0's code for everyone (they agree already; this makes it explicit).
    let mut code = code;
    world.process_at_rank(ROOT).broadcast_into(&mut code);
    code
}

fn report_error(err: &Error, sizes: Option<(usize, usize)>, inertia: Option<crate::Inertia>, json: bool) {
    if json {
        println!("{}", error_json(err, sizes, Some("distributed"), inertia));
    } else {
        let kind = if err.is_no_solution() {
            "no solution"
        } else if err.is_not_converged() {
            "not converged"
        } else {
            "invalid input"
        };
        eprintln!("tangency: {kind}: {err}");
    }
}

/// Rank of the owner of KKT row `row` among `ranks` contiguous blocks of `dim` rows.
fn owner(row: usize, dim: usize, ranks: usize) -> usize {
    ((row as u128 * ranks as u128) / dim.max(1) as u128) as usize
}

/// Rank 0: cuts the problem into per-rank triplet lists and sends them; returns its own.
fn scatter(world: &SimpleCommunicator, problem: Option<&Problem>) -> LocalRows {
    let ranks = world.size() as usize;
    let mut sizes = [0u64; 2];
    if let Some(p) = problem {
        sizes = [p.n() as u64, p.m() as u64];
    }
    world.process_at_rank(ROOT).broadcast_into(&mut sizes[..]);
    let (n, m) = (sizes[0] as usize, sizes[1] as usize);
    let dim = n + m;
    let mut mine = LocalRows::new(n, m);
    match problem {
        Some(p) => {
            let mut h: Vec<Vec<(usize, usize, f64)>> = vec![Vec::new(); ranks];
            let mut a: Vec<Vec<(usize, usize, f64)>> = vec![Vec::new(); ranks];
            p.hessian().for_each(|i, j, v| {
                if j <= i && v != 0.0 {
                    h[owner(i, dim, ranks)].push((i, j, v));
                }
            });
            p.constraints().for_each(|k, j, v| {
                if v != 0.0 {
                    a[owner(n + k, dim, ranks)].push((k, j, v));
                }
            });
            for r in 1..ranks {
                let dest = world.process_at_rank(r as i32);
                for t in [&h[r], &a[r]] {
                    let idx: Vec<u64> = t.iter().flat_map(|&(i, j, _)| [i as u64, j as u64]).collect();
                    let val: Vec<f64> = t.iter().map(|e| e.2).collect();
                    dest.send(&idx[..]);
                    dest.send(&val[..]);
                }
            }
            mine.hessian_lower = std::mem::take(&mut h[0]);
            mine.constraints = std::mem::take(&mut a[0]);
        }
        None => {
            let src = world.process_at_rank(ROOT);
            let mut lists = Vec::with_capacity(2);
            for _ in 0..2 {
                let (idx, _) = src.receive_vec::<u64>();
                let (val, _) = src.receive_vec::<f64>();
                let t: Vec<(usize, usize, f64)> = idx
                    .chunks_exact(2)
                    .zip(val)
                    .map(|(ij, v)| (ij[0] as usize, ij[1] as usize, v))
                    .collect();
                lists.push(t);
            }
            mine.constraints = lists.pop().unwrap_or_default();
            mine.hessian_lower = lists.pop().unwrap_or_default();
        }
    }
    mine
}

fn write_outputs(out: &Path, x: &[f64], y: &[f64]) -> Result<()> {
    std::fs::create_dir_all(out).map_err(|source| Error::Io {
        path: out.to_path_buf(),
        source,
    })?;
    crate::io::write_vector(out.join("x.mtx"), x)?;
    crate::io::write_vector(out.join("multipliers.mtx"), y)
}

fn solve_on(world: &SimpleCommunicator, dir: &Path, out: Option<&Path>, json: bool) -> u8 {
    let root = world.rank() == ROOT;
    let read = if root {
        crate::io::read_problem_dir(dir).map(Some)
    } else {
        Ok(None)
    };
    let problem = match agree(world, read) {
        Ok(p) => p,
        Err(e) => {
            if root {
                report_error(&e, None, None, json);
            }
            return exit_code(&e);
        }
    };
    let rows = scatter(world, problem.as_ref());
    let sizes = Some((rows.n, rows.m));
    let mut kkt = match DistributedKkt::new(world, rows, DistributedOptions::default()) {
        Ok(k) => k,
        Err(e) => {
            if root {
                report_error(&e, sizes, None, json);
            }
            return exit_code(&e);
        }
    };
    let (c, b) = match &problem {
        Some(p) => (p.linear().to_vec(), p.rhs().to_vec()),
        None => (Vec::new(), Vec::new()),
    };
    let solved = kkt.solve(&c, &b);
    let written = match (&solved, out) {
        (Ok(s), Some(dir)) if root => write_outputs(dir, &s.x, &s.y),
        _ => Ok(()),
    };
    let written = agree(world, written);
    let figures = kkt.figures();
    let ranks = kkt.ranks();
    let inertia = kkt.inertia();
    let peaks = peak_rss_all(world);
    let solution = match solved.and_then(|s| written.map(|_| s)) {
        Ok(s) => s,
        Err(e) => {
            if root {
                report_error(&e, sizes, Some(inertia), json);
            }
            return exit_code(&e);
        }
    };
    if !root {
        return 0;
    }
    let Some(problem) = problem else { return 0 };
    if json {
        let mut o = solution_json(&problem, &solution);
        o.set("condition_estimate", Json::Null);
        o.set("forward_error_bound", Json::Null);
        let mut d = Json::object();
        d.set("ranks", ranks)
            .set(
                "reader",
                "rank 0 read the directory and scattered contiguous blocks of KKT rows",
            )
            .set(
                "peak_rss_bytes_per_rank",
                Json::Arr(peaks.iter().map(|&b| Json::from(b as f64)).collect()),
            )
            .set("negative_pivots", figures.negative_pivots as f64)
            .set("null_pivots", figures.null_pivots as f64)
            .set("factor_memory_mb_max_rank", figures.factor_memory_mb_max as f64)
            .set("factor_memory_mb_total", figures.factor_memory_mb_total as f64)
            .set("factor_entries", figures.factor_entries as f64)
            .set("factor_flops", figures.factor_flops);
        o.set("distributed", d);
        println!("{o}");
    } else {
        print!("{}", human(&problem, &solution));
        let mb: Vec<String> = peaks.iter().map(|b| format!("{:.0}", *b as f64 / 1e6)).collect();
        println!(
            "  ranks       {ranks} MPI rank(s), MUMPS factors {} entries; peak memory per rank (MB) {}",
            figures.factor_entries,
            mb.join(" · ")
        );
        if let Some(out) = out {
            println!(
                "  written     {} and {}",
                out.join("x.mtx").display(),
                out.join("multipliers.mtx").display()
            );
        }
    }
    0
}
