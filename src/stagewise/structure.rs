//! Detection and validation of the stage structure of a general problem (layout in the
//! [module docs](crate::stagewise)). Entries whose value is exactly zero are ignored.

use faer::Mat;

use super::horizon::rank_tolerance;
use super::StageDims;
use crate::error::{Block, Error, Result};
use crate::problem::Problem;

/// Where one entry of `H` or `A` goes in the stage data.
#[derive(Copy, Clone, Debug, PartialEq)]
pub(crate) enum Slot {
    /// `Qₖ[i, j]` (k = N: `Q_N`).
    Q(usize, usize, usize),
    /// `Sₖ[i, j]` (input row i, state column j).
    S(usize, usize, usize),
    /// The mirror `Sₖᵀ` entry (read from the other triangle).
    Mirror,
    /// `Rₖ[i, j]`.
    R(usize, usize, usize),
    /// `−Aₖ[i, j]` in the dynamics rows.
    A(usize, usize, usize),
    /// `−Bₖ[i, j]` in the dynamics rows.
    B(usize, usize, usize),
    /// A unit entry of an identity block.
    Identity,
    /// `Dₖ[l, j]` of the l-th constraint row of stage k.
    D(usize, usize, usize),
    /// `Eₖ[l, j]`.
    E(usize, usize, usize),
}

/// The stage structure of a general problem: dimensions and the grouping of the
/// input-constraint rows by stage.
#[derive(Clone, Debug)]
pub struct StageStructure {
    dims: StageDims,
    /// For each stage k < N: the constraint rows (global row indices, increasing).
    stage_rows: Vec<Vec<usize>>,
    /// Constraint rows that touch only `x_N`.
    terminal_rows: Vec<usize>,
    /// Constraint rows without a nonzero entry.
    empty_rows: Vec<usize>,
    /// For each constraint row (index − (N+1)·nx): (stage, local index); stage `usize::MAX`
    /// for empty rows.
    row_stage: Vec<(usize, usize)>,
}

impl StageStructure {
    /// The declared dimensions.
    pub fn dims(&self) -> StageDims {
        self.dims
    }

    /// Global row indices of the input-constraint rows of stage `k`.
    pub fn constraint_rows(&self, k: usize) -> &[usize] {
        self.stage_rows.get(k).map_or(&[], |v| v.as_slice())
    }

    /// Classifies an entry of `H` (assumed symmetric; both triangles are visited).
    pub(crate) fn slot_h(&self, i: usize, j: usize) -> std::result::Result<Slot, String> {
        let d = self.dims;
        let w = d.width();
        let (si, sj) = (i / w, j / w);
        if si != sj {
            return Err(format!(
                "couples {} with {}: H must be block diagonal by stages",
                var_name(d, i),
                var_name(d, j)
            ));
        }
        let k = si;
        let (li, lj) = (i - k * w, j - k * w);
        Ok(match (li < d.nx, lj < d.nx) {
            (true, true) => Slot::Q(k, li, lj),
            (false, true) => Slot::S(k, li - d.nx, lj),
            (true, false) => Slot::Mirror,
            (false, false) => Slot::R(k, li - d.nx, lj - d.nx),
        })
    }

    /// Classifies a nonzero entry of `A`.
    pub(crate) fn slot_a(&self, i: usize, j: usize, v: f64) -> std::result::Result<Slot, String> {
        let d = self.dims;
        let w = d.width();
        let nx = d.nx;
        if i < nx {
            return if j == i && v == 1.0 {
                Ok(Slot::Identity)
            } else if j == i {
                Err(format!(
                    "rows 0…{} must be the identity on x₀ (x₀ = x̂); expected 1",
                    nx - 1
                ))
            } else {
                Err(format!(
                    "rows 0…{} must be the identity on x₀ (x₀ = x̂); this entry touches {}",
                    nx - 1,
                    var_name(d, j)
                ))
            };
        }
        if i < d.n_dynamics_rows() {
            let r = i / nx;
            let (k, li) = (r - 1, i % nx);
            let next = d.x_offset(r);
            if j >= k * w && j < next {
                let lj = j - k * w;
                return Ok(if lj < nx {
                    Slot::A(k, li, lj)
                } else {
                    Slot::B(k, li, lj - nx)
                });
            }
            if j == next + li {
                return if v == 1.0 {
                    Ok(Slot::Identity)
                } else {
                    Err(format!(
                        "the dynamics rows of x_{r} must have the identity on x_{r}; expected 1"
                    ))
                };
            }
            return Err(format!(
                "the dynamics rows of x_{r} (x_{r} − A_{k}x_{k} − B_{k}u_{k} = c_{k}) may only touch x_{k}, u_{k} \
                 and the identity on x_{r}; this entry touches {}",
                var_name(d, j)
            ));
        }
        let (k, l) = self.row_stage[i - d.n_dynamics_rows()];
        let sj = j / w.max(1);
        if sj != k {
            return Err(format!(
                "constraint row {i} belongs to stage {k} (its first entry) but this entry touches {}: \
                 input constraints must be local to one stage",
                var_name(d, j)
            ));
        }
        let lj = j - k * w;
        Ok(if lj < nx {
            Slot::D(k, l, lj)
        } else {
            Slot::E(k, l, lj - nx)
        })
    }

    /// Why the Riccati backend cannot take this problem (a general backend must), or
    /// `None` when it can.
    pub(crate) fn unsupported_reason(&self, problem: &Problem) -> Option<String> {
        let d = self.dims;
        if let Some(&r) = self.empty_rows.first() {
            return Some(format!("constraint row {r} has no nonzero entry"));
        }
        if !self.terminal_rows.is_empty() {
            return Some(format!(
                "constraint row(s) {:?} constrain only the terminal state x_{}; per-stage elimination needs inputs",
                self.terminal_rows, d.horizon
            ));
        }
        for (k, rows) in self.stage_rows.iter().enumerate() {
            if rows.len() > d.nu {
                return Some(format!(
                    "stage {k} has {} constraint rows on {} input(s), so Eₖ cannot have full row rank",
                    rows.len(),
                    d.nu
                ));
            }
        }
        let mut es: Vec<Mat<f64>> = self.stage_rows.iter().map(|r| Mat::zeros(r.len(), d.nu)).collect();
        problem.constraints().for_each(|i, j, v| {
            if v != 0.0 {
                if let Ok(Slot::E(k, l, c)) = self.slot_a(i, j, v) {
                    es[k][(l, c)] = v;
                }
            }
        });
        for (k, e) in es.iter().enumerate() {
            if e.nrows() == 0 {
                continue;
            }
            let sv = e.singular_values().unwrap_or_default();
            let smax = sv.first().copied().unwrap_or(0.0);
            let smin = sv.last().copied().unwrap_or(0.0);
            if smin.is_nan() || smin <= rank_tolerance(e.nrows(), d.nu, smax) {
                return Some(format!(
                    "the input part E_{k} of the {} constraint row(s) of stage {k} is not of full row rank \
                     (smallest singular value {smin:.2e}): a row constrains the state only, or rows are dependent",
                    e.nrows()
                ));
            }
        }
        None
    }
}

fn var_name(d: StageDims, j: usize) -> String {
    let w = d.width();
    let k = j / w.max(1);
    let l = j - k * w;
    if l < d.nx {
        format!("x_{k}[{l}] (column {j})")
    } else {
        format!("u_{k}[{}] (column {j})", l - d.nx)
    }
}

/// Checks the stage structure of `problem` for `dims` and groups its input-constraint
/// rows. Refuses with [`Error::NotStageStructured`] naming the first entry (row-major
/// order, `H` before `A`) outside the structure, or [`Error::InvalidOption`] when the sizes
/// do not match `dims`.
pub fn detect(problem: &Problem, dims: StageDims) -> Result<StageStructure> {
    let (n, m) = (problem.n(), problem.m());
    if n != dims.n_vars() || m < dims.n_dynamics_rows() {
        return Err(Error::InvalidOption(format!(
            "the stage layout {dims} (nx, nu, N) implies n = (N+1)·nx + N·nu = {} variables and at least (N+1)·nx = {} constraint rows, \
             but the problem has n = {n}, m = {m}",
            dims.n_vars(),
            dims.n_dynamics_rows()
        )));
    }
    let n_dyn = dims.n_dynamics_rows();
    let w = dims.width().max(1);
    // Stage of each constraint row = stage of its leftmost nonzero entry.
    let mut first_col = vec![usize::MAX; m - n_dyn];
    problem.constraints().for_each(|i, j, v| {
        if i >= n_dyn && v != 0.0 {
            let f = &mut first_col[i - n_dyn];
            *f = (*f).min(j);
        }
    });
    let mut st = StageStructure {
        dims,
        stage_rows: vec![Vec::new(); dims.horizon],
        terminal_rows: Vec::new(),
        empty_rows: Vec::new(),
        row_stage: Vec::with_capacity(m - n_dyn),
    };
    for (r, &fc) in first_col.iter().enumerate() {
        let row = n_dyn + r;
        if fc == usize::MAX {
            st.empty_rows.push(row);
            st.row_stage.push((usize::MAX, 0));
            continue;
        }
        let k = fc / w;
        if k >= dims.horizon {
            st.row_stage.push((k, st.terminal_rows.len()));
            st.terminal_rows.push(row);
        } else {
            st.row_stage.push((k, st.stage_rows[k].len()));
            st.stage_rows[k].push(row);
        }
    }
    type Offender = Option<(Block, usize, usize, f64, String)>;
    let mut worst: Offender = None;
    // Keeps the first offender: H before A, then row-major order.
    fn keep(worst: &mut Offender, block: Block, i: usize, j: usize, v: f64, why: String) {
        if worst
            .as_ref()
            .is_none_or(|w| (block == Block::H && w.0 == Block::A) || (block == w.0 && (i, j) < (w.1, w.2)))
        {
            *worst = Some((block, i, j, v, why));
        }
    }
    problem.hessian().for_each(|i, j, v| {
        if v != 0.0 {
            if let Err(why) = st.slot_h(i, j) {
                keep(&mut worst, Block::H, i, j, v, why);
            }
        }
    });
    problem.constraints().for_each(|i, j, v| {
        if v != 0.0 {
            if let Err(why) = st.slot_a(i, j, v) {
                keep(&mut worst, Block::A, i, j, v, why);
            }
        }
    });
    // The identity blocks must be complete: a missing unit entry is a zero where 1 belongs.
    if worst.is_none() {
        let mut seen = vec![false; n_dyn];
        problem.constraints().for_each(|i, j, v| {
            if i < n_dyn && v == 1.0 && st.slot_a(i, j, v) == Ok(Slot::Identity) {
                seen[i] = true;
            }
        });
        if let Some(i) = seen.iter().position(|s| !s) {
            let j = if i < dims.nx {
                i
            } else {
                dims.x_offset(i / dims.nx) + i % dims.nx
            };
            keep(
                &mut worst,
                Block::A,
                i,
                j,
                0.0,
                "is missing: the initial-state and dynamics rows need a unit entry on the state they define"
                    .to_string(),
            );
        }
    }
    if let Some((block, row, col, value, detail)) = worst {
        return Err(Error::NotStageStructured {
            dims,
            block,
            row,
            col,
            value,
            detail,
        });
    }
    Ok(st)
}
