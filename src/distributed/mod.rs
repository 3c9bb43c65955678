//! Distributed KKT solves on MPI ranks through MUMPS (feature `mpi`).
//!
//! Each rank hands over **its own rows**: its share of the lower triangle of `H` and of the
//! constraint rows of `A`, as triplets in global 0-based indices ([`LocalRows`]). Nothing is
//! gathered: the rows go to MUMPS's distributed assembled input (`ICNTL(18) = 3`), so a
//! simulation code that already distributes its mesh passes its local pieces as they are.
//! [`DistributedKkt::new`] analyzes the pattern once and factors;
//! [`DistributedKkt::refactor`] factors new values of the same pattern;
//! [`DistributedKkt::solve`] solves for any `(c, b)` and returns the crate's [`Solution`]:
//!
//! * **inertia** from MUMPS: `INFOG(12)` negative pivots and `INFOG(28)` null pivots, with
//!   the settings that make the parallel count exact (sequential root front, `ICNTL(13) = 1`;
//!   null-pivot detection, `ICNTL(24) = 1`; the full list of settings, with their sources, is
//!   at the top of `src/distributed/mumps.rs`);
//! * **verdict** by the crate's rule (Nocedal & Wright 2006, ch. 16): inertia `(n, m, 0)` is
//!   the unique minimizer, another nonsingular inertia a saddle point; a singular K of order
//!   at most [`DistributedOptions::rescue_max_dim`] is gathered on rank 0 and given to the
//!   serial rank analysis (so redundant, contradictory and flat cases get the same answer and
//!   status as a serial solve), a larger one is [`Error::Singular`];
//! * **certificate**: residuals, `‖K‖∞` and the normwise backward error are computed with
//!   distributed products (each rank multiplies its own entries) and sums over ranks, and
//!   the solve is refined on the original K before it is accepted, with the same acceptance
//!   level as the serial pipeline ([`Error::Inaccurate`] otherwise).
//!
//! Every function here is **collective**: all ranks of the communicator call it in the same
//! order. An error on any rank becomes an error on every rank (the others get
//! [`Error::OnOtherRank`] with the same status and exit code). `c` and `b` are read on rank 0
//! only (the MUMPS host), like the root buffers of MPI collectives.
//!
//! ```no_run
//! use mpi::traits::*;
//! use tangency::distributed::{DistributedKkt, DistributedOptions, LocalRows};
//!
//! let universe = mpi::initialize().expect("MPI initializes once");
//! let world = universe.world();
//! let (rank, size) = (world.rank() as usize, world.size() as usize);
//! // minimize Σ xᵢ² subject to x₀ + … + x₉ = 1: rank r owns variables r, r + size, …
//! let n = 10;
//! let mut rows = LocalRows::new(n, 1);
//! for i in (rank..n).step_by(size) {
//!     rows.hessian_lower.push((i, i, 2.0));
//! }
//! if rank == 0 {
//!     // any rank may hold any entry; here rank 0 holds the whole constraint row
//!     rows.constraints.extend((0..n).map(|j| (0, j, 1.0)));
//! }
//! let mut kkt = DistributedKkt::new(&world, rows, DistributedOptions::default())?;
//! let s = kkt.solve(&vec![0.0; n], &[1.0])?; // c and b are read on rank 0
//! assert!((s.x[3] - 0.1).abs() < 1e-14);
//! # Ok::<(), tangency::Error>(())
//! ```
//!
//! Limits: MUMPS's analysis (ordering) runs on the host (`ICNTL(28) = 1`: Debian's MUMPS has
//! no parallel ordering library), so its time and memory do not shrink with the rank count;
//! indices are 32-bit (`MUMPS_INT`), so `n + m < 2³¹`; the vectors `x`, `y`, `c`, `b` are
//! replicated on every rank (O(n + m) memory each), only the matrix and its factors are
//! distributed.

pub mod cli;
mod comm;
mod mumps;

use std::time::Instant;

use mpi::topology::SimpleCommunicator;
use mpi::traits::*;

use crate::error::{Block, Error, Result};
use crate::problem::{check_vector, inf_norm};
use crate::solution::{Inertia, MethodUsed, Solution, Timing, Verdict};
use crate::solver::{normwise, DEFAULT_ACCEPT_BACKWARD_ERROR, DEFAULT_MAX_REFINEMENT_STEPS, DEFAULT_REFINEMENT_TARGET};

use comm::{agree, broadcast_slice, broadcast_string, broadcast_vec, sum_count, sum_into, ROOT};
pub use mumps::{MumpsError, MumpsErrorKind, Phase};

/// One rank's share of the KKT system `K = [H Aᵀ; A 0]` of a problem with `n` variables and
/// `m` constraints: triplets in global 0-based indices. Entries of the same position given
/// on one or several ranks are summed (as MUMPS's distributed assembled input does).
#[derive(Clone, Debug, Default, PartialEq)]
pub struct LocalRows {
    /// Number of variables (the same on every rank).
    pub n: usize,
    /// Number of constraints (the same on every rank).
    pub m: usize,
    /// Entries `(i, j, v)` of the **lower triangle** of `H` (`j ≤ i`), usually those of the
    /// rows `i` this rank owns. The upper triangle is implied by symmetry.
    pub hessian_lower: Vec<(usize, usize, f64)>,
    /// Entries `(k, j, v)` of `A`: constraint row `k`, variable `j`.
    pub constraints: Vec<(usize, usize, f64)>,
}

impl LocalRows {
    /// An empty share of a problem with `n` variables and `m` constraints.
    pub fn new(n: usize, m: usize) -> LocalRows {
        LocalRows {
            n,
            m,
            ..Default::default()
        }
    }

    /// Checks this rank's entries: indices in range, finite values, `H` entries in the lower
    /// triangle. Positions in the errors are 0-based and global.
    pub fn validate(&self) -> Result<()> {
        let (n, m) = (self.n, self.m);
        for &(i, j, v) in &self.hessian_lower {
            if i >= n || j >= n {
                return Err(Error::IndexOutOfRange {
                    block: Block::H,
                    row: i,
                    col: j,
                    nrows: n,
                    ncols: n,
                });
            }
            if j > i {
                return Err(Error::WrongTriangle {
                    triangle: "lower",
                    row: i,
                    col: j,
                });
            }
            if !v.is_finite() {
                return Err(Error::NonFinite {
                    block: Block::H,
                    row: i,
                    col: j,
                    value: v,
                });
            }
        }
        for &(k, j, v) in &self.constraints {
            if k >= m || j >= n {
                return Err(Error::IndexOutOfRange {
                    block: Block::A,
                    row: k,
                    col: j,
                    nrows: m,
                    ncols: n,
                });
            }
            if !v.is_finite() {
                return Err(Error::NonFinite {
                    block: Block::A,
                    row: k,
                    col: j,
                    value: v,
                });
            }
        }
        Ok(())
    }
}

/// Settings of the distributed solve (public fields, `..Default::default()` friendly).
#[derive(Copy, Clone, Debug)]
pub struct DistributedOptions {
    /// Maximum refinement corrections. Default: [`DEFAULT_MAX_REFINEMENT_STEPS`].
    pub max_refinement_steps: usize,
    /// Stop refining once the backward error is at most this. Default:
    /// [`DEFAULT_REFINEMENT_TARGET`].
    pub refinement_target: f64,
    /// Refuse solutions whose backward error stays above this. Default:
    /// [`DEFAULT_ACCEPT_BACKWARD_ERROR`].
    pub accept_backward_error: f64,
    /// Null-pivot threshold: MUMPS calls a pivot null when it is at most
    /// `null_pivot_factor · N · ε` relative to the norm of its scaled matrix
    /// (`CNTL(3) = −null_pivot_factor · N · ε`), the threshold `τ = N·ε` of the serial sparse
    /// backend on its equilibrated K. Default: 1.0.
    pub null_pivot_factor: f64,
    /// `ICNTL(14)`: extra workspace, in percent of MUMPS's estimate. On a "work array too
    /// small" error (−8, −9) the factorization is retried with twice the percentage, at most
    /// three times (the guide's advice for these codes). Default: 100 (KKT matrices delay
    /// many pivots, and 30 was too little at every size tried).
    pub workspace_relaxation_percent: i32,
    /// Largest KKT order `n + m` for which a singular K is gathered on rank 0 for the serial
    /// rank analysis. Default: [`crate::solver::NULL_SPACE_RESCUE_MAX_DIM`].
    pub rescue_max_dim: usize,
}

impl Default for DistributedOptions {
    fn default() -> Self {
        DistributedOptions {
            max_refinement_steps: DEFAULT_MAX_REFINEMENT_STEPS,
            refinement_target: DEFAULT_REFINEMENT_TARGET,
            accept_backward_error: DEFAULT_ACCEPT_BACKWARD_ERROR,
            null_pivot_factor: 1.0,
            workspace_relaxation_percent: 100,
            rescue_max_dim: crate::solver::NULL_SPACE_RESCUE_MAX_DIM,
        }
    }
}

/// Figures MUMPS reports about the last factorization (global, the same on every rank).
#[derive(Copy, Clone, Debug, PartialEq)]
pub struct MumpsFigures {
    /// `INFOG(12)`: negative pivots.
    pub negative_pivots: i64,
    /// `INFOG(28)`: null pivots detected.
    pub null_pivots: i64,
    /// `INFOG(21)`: memory (MB) effectively used by the factorization on the most loaded rank.
    pub factor_memory_mb_max: i64,
    /// `INFOG(22)`: the same summed over ranks.
    pub factor_memory_mb_total: i64,
    /// `INFOG(29)`: entries in the factors, summed over ranks.
    pub factor_entries: i64,
    /// `RINFOG(3)`: floating-point operations of the elimination.
    pub factor_flops: f64,
}

/// A distributed KKT matrix: analyzed once, factored, ready for any number of solves.
pub struct DistributedKkt {
    // Declared (so dropped) before `comm`: MUMPS's JOB = −2 communicates on it.
    mumps: mumps::Mumps,
    comm: SimpleCommunicator,
    rows: LocalRows,
    options: DistributedOptions,
    norm_k: f64,
    inertia: Inertia,
    analyze_s: f64,
    factor_s: f64,
    notes: Vec<String>,
}

impl std::fmt::Debug for DistributedKkt {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("DistributedKkt")
            .field("rank", &self.comm.rank())
            .field("ranks", &self.comm.size())
            .field("n", &self.rows.n)
            .field("m", &self.rows.m)
            .field("inertia", &self.inertia)
            .finish()
    }
}

/// Millions when negative, as MUMPS reports large counts.
fn mumps_count(v: i32) -> i64 {
    if v < 0 {
        -(v as i64) * 1_000_000
    } else {
        v as i64
    }
}

impl DistributedKkt {
    /// Validates every rank's rows, analyzes the pattern (MUMPS `JOB = 1`) and factors
    /// (`JOB = 2`). Collective. `comm` is duplicated, so the solver's messages never mix with
    /// the caller's.
    pub fn new(comm: &SimpleCommunicator, rows: LocalRows, options: DistributedOptions) -> Result<DistributedKkt> {
        let t = Instant::now();
        let comm = comm.duplicate();
        // Every rank must describe the same problem.
        let mut sizes = [rows.n as u64, rows.m as u64];
        comm.process_at_rank(ROOT).broadcast_into(&mut sizes[..]);
        let local = if sizes != [rows.n as u64, rows.m as u64] {
            Err(Error::InvalidOption(format!(
                "rank {} describes n = {}, m = {} but rank 0 describes n = {}, m = {}",
                comm.rank(),
                rows.n,
                rows.m,
                sizes[0],
                sizes[1]
            )))
        } else {
            rows.validate()
        };
        agree(&comm, local)?;
        let dim = rows.n + rows.m;
        let order = i32::try_from(dim).ok().filter(|_| dim < i32::MAX as usize);
        let nnz_ok = rows.hessian_lower.len() + rows.constraints.len() < i32::MAX as usize;
        let Some(order) = order.filter(|_| nnz_ok) else {
            return Err(Error::Resources {
                detail: format!(
                    "MUMPS is built with 32-bit indices: the KKT order {dim} or this rank's {} entries do not fit",
                    rows.hessian_lower.len() + rows.constraints.len()
                ),
            });
        };
        let n = rows.n;
        let (irn, jcn): (Vec<i32>, Vec<i32>) = rows
            .hessian_lower
            .iter()
            .map(|&(i, j, _)| (i as i32 + 1, j as i32 + 1))
            .chain(
                rows.constraints
                    .iter()
                    .map(|&(k, j, _)| ((n + k) as i32 + 1, j as i32 + 1)),
            )
            .unzip();
        let mut mumps = mumps::Mumps::new(&comm, comm.rank() == ROOT).map_err(Error::Mumps)?;
        mumps.set_icntl(14, options.workspace_relaxation_percent);
        mumps.set_cntl(3, -(options.null_pivot_factor * dim.max(1) as f64 * f64::EPSILON));
        mumps.analyze(order, irn, jcn).map_err(Error::Mumps)?;
        let mut kkt = DistributedKkt {
            mumps,
            comm,
            rows,
            options,
            norm_k: 0.0,
            inertia: Inertia::default(),
            analyze_s: t.elapsed().as_secs_f64(),
            factor_s: 0.0,
            notes: Vec::new(),
        };
        kkt.factor()?;
        Ok(kkt)
    }

    /// Factors new values of the same pattern without a new analysis. `hessian_values` and
    /// `constraint_values` replace, in order, the values of this rank's `hessian_lower` and
    /// `constraints` triplets. Collective.
    pub fn refactor(&mut self, hessian_values: &[f64], constraint_values: &[f64]) -> Result<()> {
        let local = self.check_values(hessian_values, constraint_values);
        agree(&self.comm, local)?;
        for (e, v) in self.rows.hessian_lower.iter_mut().zip(hessian_values) {
            e.2 = *v;
        }
        for (e, v) in self.rows.constraints.iter_mut().zip(constraint_values) {
            e.2 = *v;
        }
        self.notes.clear();
        self.factor()
    }

    fn check_values(&self, hv: &[f64], av: &[f64]) -> Result<()> {
        let (h, a) = (&self.rows.hessian_lower, &self.rows.constraints);
        if hv.len() != h.len() || av.len() != a.len() {
            return Err(Error::StructureChanged {
                detail: format!(
                    "rank {} analyzed {} H and {} A entries but was given {} and {} values",
                    self.comm.rank(),
                    h.len(),
                    a.len(),
                    hv.len(),
                    av.len()
                ),
            });
        }
        if let Some((k, v)) = hv.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(Error::NonFinite {
                block: Block::H,
                row: h[k].0,
                col: h[k].1,
                value: *v,
            });
        }
        if let Some((k, v)) = av.iter().enumerate().find(|(_, v)| !v.is_finite()) {
            return Err(Error::NonFinite {
                block: Block::A,
                row: a[k].0,
                col: a[k].1,
                value: *v,
            });
        }
        Ok(())
    }

    fn factor(&mut self) -> Result<()> {
        let t = Instant::now();
        let values: Vec<f64> = self
            .rows
            .hessian_lower
            .iter()
            .map(|e| e.2)
            .chain(self.rows.constraints.iter().map(|e| e.2))
            .collect();
        let mut tries = 0;
        loop {
            match self.mumps.factor(&values) {
                Ok(()) => break,
                Err(e) if matches!(e.code, -8 | -9) && tries < 3 => {
                    tries += 1;
                    let more = self.mumps.icntl(14).max(10).saturating_mul(2);
                    self.mumps.set_icntl(14, more);
                    self.notes.push(format!(
                        "MUMPS work array too small (INFOG(1) = {}); factored again with ICNTL(14) = {more}%",
                        e.code
                    ));
                }
                Err(e) => return Err(Error::Mumps(e)),
            }
        }
        let dim = self.rows.n + self.rows.m;
        let negative = self.mumps.infog(12).max(0) as usize;
        let zero = self.mumps.infog(28).max(0) as usize;
        self.inertia = Inertia::new(dim.saturating_sub(negative + zero), negative, zero);
        self.norm_k = self.norm_inf();
        self.factor_s = t.elapsed().as_secs_f64();
        Ok(())
    }

    /// `‖K‖∞` of the original K, from row sums of every rank's entries added over ranks (an
    /// upper bound when one position is split over several triplets).
    fn norm_inf(&self) -> f64 {
        let n = self.rows.n;
        let mut local = vec![0.0; n + self.rows.m];
        for &(i, j, v) in &self.rows.hessian_lower {
            local[i] += v.abs();
            if i != j {
                local[j] += v.abs();
            }
        }
        for &(k, j, v) in &self.rows.constraints {
            local[n + k] += v.abs();
            local[j] += v.abs();
        }
        let mut rows = vec![0.0; local.len()];
        sum_into(&self.comm, &local, &mut rows);
        let mut norm = rows.iter().fold(0.0f64, |a, &r| a.max(r));
        self.comm.process_at_rank(ROOT).broadcast_into(&mut norm);
        norm
    }

    /// Inertia of K from the last factorization: `INFOG(12)` negative pivots, `INFOG(28)`
    /// null pivots, the rest positive.
    pub fn inertia(&self) -> Inertia {
        self.inertia
    }

    /// Ranks in the communicator.
    pub fn ranks(&self) -> usize {
        self.comm.size() as usize
    }

    /// MUMPS's figures of the last factorization.
    pub fn figures(&self) -> MumpsFigures {
        MumpsFigures {
            negative_pivots: self.mumps.infog(12) as i64,
            null_pivots: self.mumps.infog(28) as i64,
            factor_memory_mb_max: self.mumps.infog(21) as i64,
            factor_memory_mb_total: self.mumps.infog(22) as i64,
            factor_entries: mumps_count(self.mumps.infog(29)),
            factor_flops: self.mumps.rinfog(3),
        }
    }

    /// `out = [Hx; Aᵀy; Ax]` (lengths n, n, m) summed over ranks, on every rank.
    fn products(&self, x: &[f64], y: &[f64], out: &mut [f64]) {
        let n = self.rows.n;
        let mut local = vec![0.0; out.len()];
        {
            let (hx, rest) = local.split_at_mut(n);
            let (aty, ax) = rest.split_at_mut(n);
            for &(i, j, v) in &self.rows.hessian_lower {
                hx[i] += v * x[j];
                if i != j {
                    hx[j] += v * x[i];
                }
            }
            for &(k, j, v) in &self.rows.constraints {
                aty[j] += v * y[k];
                ax[k] += v * x[j];
            }
        }
        sum_into(&self.comm, &local, out);
    }

    /// `r = rhs − Kz` and `grad = Hx + c` (with `rhs = [−c; b]`), on every rank; rank 0's
    /// values are broadcast so every rank takes the same decisions.
    fn residual(&self, z: &[f64], rhs: &[f64], r: &mut [f64], grad: &mut [f64]) {
        let n = self.rows.n;
        let mut prod = vec![0.0; 2 * n + self.rows.m];
        self.products(&z[..n], &z[n..], &mut prod);
        let (hx, rest) = prod.split_at(n);
        let (aty, ax) = rest.split_at(n);
        for i in 0..n {
            r[i] = rhs[i] - hx[i] - aty[i];
            grad[i] = hx[i] - rhs[i];
        }
        for k in 0..self.rows.m {
            r[n + k] = rhs[n + k] - ax[k];
        }
        broadcast_slice(&self.comm, ROOT, r);
        broadcast_slice(&self.comm, ROOT, grad);
    }

    /// One MUMPS solve of `v` (the same on every rank on entry), in place on every rank.
    fn apply_inverse(&mut self, v: &mut [f64]) -> Result<()> {
        let host = self.comm.rank() == ROOT;
        let out = if host {
            self.mumps.solve(v)
        } else {
            self.mumps.solve(&mut [])
        };
        out.map_err(Error::Mumps)?;
        broadcast_slice(&self.comm, ROOT, v);
        Ok(())
    }

    /// Solves for `c` (length n) and `b` (length m), read on rank 0; every rank returns the
    /// same [`Solution`] (or an error of the same status). Collective.
    pub fn solve(&mut self, c: &[f64], b: &[f64]) -> Result<Solution> {
        let (n, m) = (self.rows.n, self.rows.m);
        let root = self.comm.rank() == ROOT;
        let check = if root {
            check_vector(Block::C, c, n).and_then(|_| check_vector(Block::B, b, m))
        } else {
            Ok(())
        };
        agree(&self.comm, check)?;
        let mut rhs = vec![0.0; n + m];
        if root {
            for (dst, v) in rhs.iter_mut().zip(c.iter().map(|v| -v).chain(b.iter().copied())) {
                *dst = v;
            }
        }
        broadcast_slice(&self.comm, ROOT, &mut rhs);
        if self.inertia.zero > 0 {
            return self.solve_singular(&rhs);
        }
        let t = Instant::now();
        let mut z = rhs.clone();
        self.apply_inverse(&mut z)?;
        let mut r = vec![0.0; n + m];
        let mut grad = vec![0.0; n];
        let (backward_error, steps, current) = self.refine(&rhs, &mut z, &mut r, &mut grad)?;
        let limit = self.options.accept_backward_error;
        if backward_error.is_nan() || backward_error > limit {
            return Err(Error::Inaccurate {
                backward_error,
                steps,
                limit,
            });
        }
        if !current {
            self.residual(&z, &rhs, &mut r, &mut grad);
        }
        let x = z[..n].to_vec();
        let y = z[n..].to_vec();
        let cx: f64 = rhs[..n].iter().zip(&x).map(|(ci, xi)| -ci * xi).sum();
        let objective = 0.5 * grad.iter().zip(&x).map(|(g, xi)| g * xi).sum::<f64>() + 0.5 * cx;
        let verdict = if self.inertia == Inertia::new(n, m, 0) {
            Verdict::Minimizer
        } else {
            Verdict::Saddle
        };
        let mut notes = self.notes.clone();
        if backward_error > 1e3 * f64::EPSILON {
            notes.push(format!(
                "backward error {backward_error:.1e} stayed above the refinement target after {steps} step(s): \
                 K is ill-conditioned, trust fewer digits"
            ));
        }
        Ok(Solution {
            x,
            y,
            objective,
            primal_residual: inf_norm(&r[n..]),
            dual_residual: inf_norm(&r[..n]),
            backward_error,
            // Accepted by the backward error above; κ is not estimated on this path yet.
            forward_error_bound: None,
            refinement_steps: steps,
            inertia: Some(self.inertia),
            verdict: Some(verdict),
            method: MethodUsed::Distributed,
            timing: Timing {
                analyze_s: self.analyze_s,
                factor_s: self.factor_s,
                solve_s: t.elapsed().as_secs_f64(),
            },
            notes,
            null_direction: None,
        })
    }

    /// Iterative refinement on the original K, the serial rule (`solver::Factorization`):
    /// correct until the backward error reaches the target, stops halving, or the step limit.
    fn refine(&mut self, rhs: &[f64], z: &mut [f64], r: &mut [f64], grad: &mut [f64]) -> Result<(f64, usize, bool)> {
        let mut best = z.to_vec();
        self.residual(z, rhs, r, grad);
        let mut omega = normwise(r, self.norm_k, z, rhs);
        let mut steps = 0;
        let mut corr = vec![0.0; z.len()];
        while steps < self.options.max_refinement_steps && omega > self.options.refinement_target && omega.is_finite() {
            corr.copy_from_slice(r);
            self.apply_inverse(&mut corr)?;
            for (zi, ci) in z.iter_mut().zip(&corr) {
                *zi += ci;
            }
            self.residual(z, rhs, r, grad);
            let next = normwise(r, self.norm_k, z, rhs);
            steps += 1;
            if next.is_nan() || next >= omega {
                z.copy_from_slice(&best);
                return Ok((omega, steps, false));
            }
            best.copy_from_slice(z);
            let improved_enough = next <= 0.5 * omega;
            omega = next;
            if !improved_enough {
                break;
            }
        }
        Ok((omega, steps, true))
    }

    /// A singular K: small enough, gather it on rank 0 and run the serial pipeline (sparse
    /// LDLᵀ, then the null-space rank analysis); otherwise [`Error::Singular`].
    fn solve_singular(&mut self, rhs: &[f64]) -> Result<Solution> {
        let (n, m) = (self.rows.n, self.rows.m);
        let inertia = self.inertia;
        if n + m > self.options.rescue_max_dim {
            return Err(Error::Singular {
                inertia,
                detail: format!(
                    "MUMPS found {} null pivot(s) (INFOG(28)); the KKT order {} is above the limit {} of the rank \
                     analysis, which runs on one rank",
                    inertia.zero,
                    n + m,
                    self.options.rescue_max_dim
                ),
            });
        }
        let t = Instant::now();
        let gathered = self.gather_on_root();
        let local = match gathered {
            Some((h, a)) => {
                let c: Vec<f64> = rhs[..n].iter().map(|v| -v).collect();
                crate::ProblemBuilder::new()
                    .hessian_triplets(n, &h, crate::Triangle::Lower)
                    .constraints_triplets(m, n, &a)
                    .linear(&c)
                    .rhs(&rhs[n..])
                    .build()
                    .and_then(|p| {
                        let options = crate::Options {
                            method: crate::Method::Sparse,
                            max_refinement_steps: self.options.max_refinement_steps,
                            refinement_target: self.options.refinement_target,
                            accept_backward_error: self.options.accept_backward_error,
                            ..Default::default()
                        };
                        crate::solve(&p, &options)
                    })
                    .map(Some)
            }
            None => Ok(None),
        };
        let shared = agree(&self.comm, local)?;
        let mut s = share_solution(&self.comm, shared, n, m);
        s.notes.insert(
            0,
            format!(
                "MUMPS found K singular (inertia {inertia}, {} null pivot(s)); the rank analysis ran on rank 0 on a \
                 gathered copy of K",
                inertia.zero
            ),
        );
        s.timing.analyze_s += self.analyze_s;
        s.timing.factor_s += self.factor_s;
        s.timing.solve_s = t.elapsed().as_secs_f64();
        Ok(s)
    }

    /// Every rank's triplets, concatenated on rank 0 (`None` elsewhere).
    #[allow(clippy::type_complexity)]
    fn gather_on_root(&self) -> Option<(Vec<(usize, usize, f64)>, Vec<(usize, usize, f64)>)> {
        let pack = |t: &[(usize, usize, f64)]| -> (Vec<u64>, Vec<f64>) {
            let idx = t.iter().flat_map(|&(i, j, _)| [i as u64, j as u64]).collect();
            (idx, t.iter().map(|e| e.2).collect())
        };
        let unpack = |idx: &[u64], val: &[f64]| -> Vec<(usize, usize, f64)> {
            idx.chunks_exact(2)
                .zip(val)
                .map(|(ij, &v)| (ij[0] as usize, ij[1] as usize, v))
                .collect()
        };
        let (hi, hv) = pack(&self.rows.hessian_lower);
        let (ai, av) = pack(&self.rows.constraints);
        if self.comm.rank() != ROOT {
            let root = self.comm.process_at_rank(ROOT);
            root.send(&hi[..]);
            root.send(&hv[..]);
            root.send(&ai[..]);
            root.send(&av[..]);
            return None;
        }
        let (mut h, mut a) = (unpack(&hi, &hv), unpack(&ai, &av));
        for r in 1..self.comm.size() {
            let p = self.comm.process_at_rank(r);
            let (hi, _) = p.receive_vec::<u64>();
            let (hv, _) = p.receive_vec::<f64>();
            let (ai, _) = p.receive_vec::<u64>();
            let (av, _) = p.receive_vec::<f64>();
            h.extend(unpack(&hi, &hv));
            a.extend(unpack(&ai, &av));
        }
        Some((h, a))
    }

    /// The communicator's size and this rank, for reports.
    pub fn rank(&self) -> usize {
        self.comm.rank() as usize
    }

    /// Total entries over all ranks (H lower triangle, A).
    pub fn global_entries(&self) -> (u64, u64) {
        (
            sum_count(&self.comm, self.rows.hessian_lower.len() as u64),
            sum_count(&self.comm, self.rows.constraints.len() as u64),
        )
    }
}

const METHODS: [MethodUsed; 8] = [
    MethodUsed::DenseLblt,
    MethodUsed::Riccati,
    MethodUsed::Schur,
    MethodUsed::NullSpace,
    MethodUsed::SparseLdlt,
    MethodUsed::Minres,
    MethodUsed::Pcg,
    MethodUsed::Distributed,
];

/// Broadcasts rank 0's solution to every rank (`Some` on rank 0, `None` elsewhere).
fn share_solution(comm: &SimpleCommunicator, s: Option<Solution>, n: usize, m: usize) -> Solution {
    let root = comm.rank() == ROOT;
    let mut out = s.unwrap_or_else(|| Solution::empty(n, m, MethodUsed::Distributed));
    broadcast_slice(comm, ROOT, &mut out.x);
    broadcast_slice(comm, ROOT, &mut out.y);
    let inertia = out.inertia.unwrap_or_default();
    let mut ints: [u64; 7] = [
        out.refinement_steps as u64,
        out.inertia.is_some() as u64,
        inertia.positive as u64,
        inertia.negative as u64,
        inertia.zero as u64,
        match out.verdict {
            None => 0,
            Some(Verdict::Minimizer) => 1,
            Some(Verdict::Saddle) => 2,
            Some(_) => 3,
        },
        METHODS.iter().position(|k| *k == out.method).unwrap_or(7) as u64,
    ];
    comm.process_at_rank(ROOT).broadcast_into(&mut ints[..]);
    let mut reals = [
        out.objective,
        out.primal_residual,
        out.dual_residual,
        out.backward_error,
        out.timing.analyze_s,
        out.timing.factor_s,
        out.timing.solve_s,
    ];
    comm.process_at_rank(ROOT).broadcast_into(&mut reals[..]);
    let notes = broadcast_string(comm, ROOT, &out.notes.join("\u{1f}"));
    let has_dir = out.null_direction.is_some();
    let dir = broadcast_vec(comm, ROOT, out.null_direction.as_deref().unwrap_or(&[]));
    let mut flag = has_dir as u8;
    comm.process_at_rank(ROOT).broadcast_into(&mut flag);
    if !root {
        out.refinement_steps = ints[0] as usize;
        out.inertia = (ints[1] == 1).then(|| Inertia::new(ints[2] as usize, ints[3] as usize, ints[4] as usize));
        out.verdict = match ints[5] {
            1 => Some(Verdict::Minimizer),
            2 => Some(Verdict::Saddle),
            3 => Some(Verdict::NonUnique),
            _ => None,
        };
        out.method = METHODS[(ints[6] as usize).min(7)];
        out.objective = reals[0];
        out.primal_residual = reals[1];
        out.dual_residual = reals[2];
        out.backward_error = reals[3];
        out.timing = Timing {
            analyze_s: reals[4],
            factor_s: reals[5],
            solve_s: reals[6],
        };
        out.notes = if notes.is_empty() {
            Vec::new()
        } else {
            notes.split('\u{1f}').map(str::to_string).collect()
        };
        out.null_direction = (flag == 1).then_some(dir);
    }
    out
}

impl Error {
    /// The exit code carried by the distributed variants (`None` for the others).
    pub(crate) fn distributed_exit_code(&self) -> Option<u8> {
        match self {
            Error::Mumps(e) => Some(if e.is_singular() { 3 } else { 2 }),
            Error::OnOtherRank { exit_code, .. } => Some(*exit_code),
            _ => None,
        }
    }

    /// The status word of the distributed variants (`None` for the others).
    pub(crate) fn distributed_status(&self) -> Option<&'static str> {
        match self {
            Error::Mumps(e) => Some(if e.is_singular() { "singular" } else { "invalid_input" }),
            Error::OnOtherRank { status, .. } => Some(status),
            _ => None,
        }
    }
}
