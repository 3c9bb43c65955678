//! The typed horizon builder: time-varying stages with time-invariant shortcuts, validated
//! to the same standard as the EQP builders (dimensions per stage, finiteness, symmetry of
//! `Qₖ`, `Rₖ`, `Q_N`, full row rank of `Eₖ`).

use std::marker::PhantomData;

use faer::{Mat, MatRef};

use super::{StageBlock, StageDims};
use crate::error::{Error, Result};
use crate::problem::DEFAULT_SYMMETRY_TOLERANCE;

/// Type state: no dynamics given yet.
#[derive(Debug, Default)]
pub struct NoDynamics;
/// Type state: dynamics given for every stage.
#[derive(Debug, Default)]
pub struct HasDynamics;
/// Type state: no stage cost given yet.
#[derive(Debug, Default)]
pub struct NoCost;
/// Type state: stage cost given for every stage.
#[derive(Debug, Default)]
pub struct HasCost;

/// One input constraint `Eₖuₖ + Dₖxₖ = eₖ` as given.
#[derive(Clone, Debug)]
struct RawConstraint {
    e: Mat<f64>,
    d: Mat<f64>,
    rhs: Vec<f64>,
}

/// One validated stage.
#[derive(Clone, Debug)]
pub(crate) struct Stage {
    pub a: Mat<f64>,
    pub b: Mat<f64>,
    pub c: Vec<f64>,
    pub q: Mat<f64>,
    pub r: Mat<f64>,
    pub s: Mat<f64>,
    pub q_lin: Vec<f64>,
    pub r_lin: Vec<f64>,
    /// `(E, D, e)`, `E` p×nu with p ≥ 1.
    pub constraint: Option<(Mat<f64>, Mat<f64>, Vec<f64>)>,
}

/// A validated stage-wise problem (see the [module docs](crate::stagewise)).
///
/// Built by [`HorizonBuilder`]; converted to the general form by
/// [`to_problem`](Horizon::to_problem).
#[derive(Clone, Debug)]
pub struct Horizon {
    pub(crate) dims: StageDims,
    pub(crate) stages: Vec<Stage>,
    pub(crate) q_terminal: Mat<f64>,
    pub(crate) q_terminal_lin: Vec<f64>,
    pub(crate) x_init: Vec<f64>,
}

impl Horizon {
    /// The dimensions `(nx, nu, N)`.
    pub fn dims(&self) -> StageDims {
        self.dims
    }

    /// The initial state `x̂`.
    pub fn initial_state(&self) -> &[f64] {
        &self.x_init
    }

    /// Number of input-constraint rows of stage `k` (0 when it has none or `k ≥ N`).
    pub fn constraint_rows(&self, k: usize) -> usize {
        self.stages
            .get(k)
            .and_then(|s| s.constraint.as_ref())
            .map_or(0, |c| c.0.nrows())
    }
}

/// Per-stage override slots of the builder.
#[derive(Clone, Debug)]
struct Slots {
    dynamics: Vec<Option<(Mat<f64>, Mat<f64>)>>,
    offset: Vec<Option<Vec<f64>>>,
    cost: Vec<Option<(Mat<f64>, Mat<f64>)>>,
    cross: Vec<Option<Mat<f64>>>,
    linear: Vec<Option<(Vec<f64>, Vec<f64>)>>,
    constraint: Vec<Option<RawConstraint>>,
}

/// Builds a [`Horizon`]. `build()` exists only once dynamics and stage costs are given
/// (type state); every setter that names a stage `k` may be called any number of times
/// (the last call wins) and overrides what a time-invariant shortcut set.
///
/// Defaults: `cₖ = 0`, `Sₖ = 0`, `qₖ = 0`, `rₖ = 0`, no input constraints, `Q_N = 0`,
/// `q_N = 0`, `x̂ = 0`.
///
/// ```
/// use faer::mat;
/// use tangency::stagewise::HorizonBuilder;
/// // A double integrator (our own toy): x = [position, velocity], u = force.
/// let a = mat![[1.0, 0.1], [0.0, 1.0]];
/// let b = mat![[0.005], [0.1]];
/// let horizon = HorizonBuilder::new(2, 1, 20)
///     .dynamics(a.as_ref(), b.as_ref())
///     .cost(mat![[1.0, 0.0], [0.0, 0.1]].as_ref(), mat![[0.01]].as_ref())
///     .terminal_cost(mat![[10.0, 0.0], [0.0, 1.0]].as_ref())
///     .initial_state(&[1.0, 0.0])
///     .build()?;
/// assert_eq!(horizon.dims().n_vars(), 21 * 2 + 20);
/// # Ok::<(), tangency::Error>(())
/// ```
///
/// Invalid data is refused with the stage, block, row and column:
///
/// ```
/// use faer::mat;
/// use tangency::{stagewise::{HorizonBuilder, StageBlock}, Error};
/// let err = HorizonBuilder::new(2, 1, 5)
///     .dynamics(mat![[1.0, 0.1], [0.0, 1.0]].as_ref(), mat![[0.0], [0.1]].as_ref())
///     .cost(mat![[1.0, 0.5], [0.0, 1.0]].as_ref(), mat![[1.0]].as_ref()) // Q not symmetric
///     .build()
///     .unwrap_err();
/// assert!(matches!(err, Error::Stage { stage: 0, block: StageBlock::Q, row: Some(0), col: Some(1), .. }));
/// ```
#[derive(Debug)]
pub struct HorizonBuilder<D = NoDynamics, C = NoCost> {
    dims: StageDims,
    slots: Slots,
    terminal: Option<Mat<f64>>,
    terminal_lin: Option<Vec<f64>>,
    x_init: Option<Vec<f64>>,
    bad_index: Option<usize>,
    symmetry_tol: f64,
    _state: PhantomData<(D, C)>,
}

impl HorizonBuilder<NoDynamics, NoCost> {
    /// A builder for `nx` states, `nu` inputs and `horizon` stages; no data yet.
    pub fn new(nx: usize, nu: usize, horizon: usize) -> Self {
        let n = horizon;
        HorizonBuilder {
            dims: StageDims::new(nx, nu, horizon),
            slots: Slots {
                dynamics: vec![None; n],
                offset: vec![None; n],
                cost: vec![None; n],
                cross: vec![None; n],
                linear: vec![None; n],
                constraint: vec![None; n],
            },
            terminal: None,
            terminal_lin: None,
            x_init: None,
            bad_index: None,
            symmetry_tol: DEFAULT_SYMMETRY_TOLERANCE,
            _state: PhantomData,
        }
    }
}

impl<D, C> HorizonBuilder<D, C> {
    fn retype<D2, C2>(self) -> HorizonBuilder<D2, C2> {
        HorizonBuilder {
            dims: self.dims,
            slots: self.slots,
            terminal: self.terminal,
            terminal_lin: self.terminal_lin,
            x_init: self.x_init,
            bad_index: self.bad_index,
            symmetry_tol: self.symmetry_tol,
            _state: PhantomData,
        }
    }

    /// Records `k`; returns false (and remembers the first bad index) when `k ≥ N`.
    fn stage_ok(&mut self, k: usize) -> bool {
        if k >= self.dims.horizon {
            self.bad_index.get_or_insert(k);
            false
        } else {
            true
        }
    }

    /// Time-invariant dynamics `x_{k+1} = A xₖ + B uₖ` for every stage.
    pub fn dynamics(mut self, a: MatRef<'_, f64>, b: MatRef<'_, f64>) -> HorizonBuilder<HasDynamics, C> {
        for slot in &mut self.slots.dynamics {
            *slot = Some((a.to_owned(), b.to_owned()));
        }
        self.retype()
    }

    /// Time-varying dynamics: `f(k)` returns `(Aₖ, Bₖ)` for `k = 0 … N−1`.
    pub fn dynamics_with(mut self, mut f: impl FnMut(usize) -> (Mat<f64>, Mat<f64>)) -> HorizonBuilder<HasDynamics, C> {
        for (k, slot) in self.slots.dynamics.iter_mut().enumerate() {
            *slot = Some(f(k));
        }
        self.retype()
    }

    /// Time-invariant stage cost `½xᵀQx + ½uᵀRu` for every stage (`Q`, `R` symmetric).
    pub fn cost(mut self, q: MatRef<'_, f64>, r: MatRef<'_, f64>) -> HorizonBuilder<D, HasCost> {
        for slot in &mut self.slots.cost {
            *slot = Some((q.to_owned(), r.to_owned()));
        }
        self.retype()
    }

    /// Time-varying stage cost: `f(k)` returns `(Qₖ, Rₖ)`.
    pub fn cost_with(mut self, mut f: impl FnMut(usize) -> (Mat<f64>, Mat<f64>)) -> HorizonBuilder<D, HasCost> {
        for (k, slot) in self.slots.cost.iter_mut().enumerate() {
            *slot = Some(f(k));
        }
        self.retype()
    }

    /// Time-invariant cross term `uᵀSx` (S is nu×nx). Default: zero.
    pub fn cross_weight(mut self, s: MatRef<'_, f64>) -> Self {
        for slot in &mut self.slots.cross {
            *slot = Some(s.to_owned());
        }
        self
    }

    /// Cross term `uₖᵀSₖxₖ` of stage `k`.
    pub fn stage_cross_weight(mut self, k: usize, s: MatRef<'_, f64>) -> Self {
        if self.stage_ok(k) {
            self.slots.cross[k] = Some(s.to_owned());
        }
        self
    }

    /// Time-invariant dynamics offset `c` (length nx). Default: zero.
    pub fn offset(mut self, c: &[f64]) -> Self {
        for slot in &mut self.slots.offset {
            *slot = Some(c.to_vec());
        }
        self
    }

    /// Dynamics offset `cₖ` of stage `k`.
    pub fn stage_offset(mut self, k: usize, c: &[f64]) -> Self {
        if self.stage_ok(k) {
            self.slots.offset[k] = Some(c.to_vec());
        }
        self
    }

    /// Linear terms `qₖ` (nx) and `rₖ` (nu) of stage `k`. Default: zero.
    pub fn stage_linear(mut self, k: usize, q: &[f64], r: &[f64]) -> Self {
        if self.stage_ok(k) {
            self.slots.linear[k] = Some((q.to_vec(), r.to_vec()));
        }
        self
    }

    /// Time-invariant input constraint `E uₖ + D xₖ = e` on every stage (`E` p×nu of full
    /// row rank, `D` p×nx, `e` length p). Default: none.
    pub fn input_constraint(mut self, e: MatRef<'_, f64>, d: MatRef<'_, f64>, rhs: &[f64]) -> Self {
        for slot in &mut self.slots.constraint {
            *slot = Some(RawConstraint {
                e: e.to_owned(),
                d: d.to_owned(),
                rhs: rhs.to_vec(),
            });
        }
        self
    }

    /// Input constraint `Eₖuₖ + Dₖxₖ = eₖ` of stage `k` (a `0×nu` `Eₖ` removes it).
    pub fn stage_input_constraint(mut self, k: usize, e: MatRef<'_, f64>, d: MatRef<'_, f64>, rhs: &[f64]) -> Self {
        if self.stage_ok(k) {
            self.slots.constraint[k] = Some(RawConstraint {
                e: e.to_owned(),
                d: d.to_owned(),
                rhs: rhs.to_vec(),
            });
        }
        self
    }

    /// Terminal weight `Q_N` (symmetric). Default: zero.
    pub fn terminal_cost(mut self, q_n: MatRef<'_, f64>) -> Self {
        self.terminal = Some(q_n.to_owned());
        self
    }

    /// Terminal linear term `q_N`. Default: zero.
    pub fn terminal_linear(mut self, q_n: &[f64]) -> Self {
        self.terminal_lin = Some(q_n.to_vec());
        self
    }

    /// Initial state `x̂`. Default: zero.
    pub fn initial_state(mut self, x0: &[f64]) -> Self {
        self.x_init = Some(x0.to_vec());
        self
    }

    /// Relative symmetry tolerance for `Qₖ`, `Rₖ`, `Q_N`. Default:
    /// [`DEFAULT_SYMMETRY_TOLERANCE`]; within it the block is replaced by `(M + Mᵀ)/2`.
    pub fn symmetry_tolerance(mut self, tol: f64) -> Self {
        self.symmetry_tol = tol;
        self
    }
}

impl<C> HorizonBuilder<HasDynamics, C> {
    /// Dynamics `(Aₖ, Bₖ)` of stage `k` (after a shortcut for all stages).
    pub fn stage_dynamics(mut self, k: usize, a: MatRef<'_, f64>, b: MatRef<'_, f64>) -> Self {
        if self.stage_ok(k) {
            self.slots.dynamics[k] = Some((a.to_owned(), b.to_owned()));
        }
        self
    }
}

impl<D> HorizonBuilder<D, HasCost> {
    /// Stage cost `(Qₖ, Rₖ)` of stage `k` (after a shortcut for all stages).
    pub fn stage_cost(mut self, k: usize, q: MatRef<'_, f64>, r: MatRef<'_, f64>) -> Self {
        if self.stage_ok(k) {
            self.slots.cost[k] = Some((q.to_owned(), r.to_owned()));
        }
        self
    }
}

fn stage_err(stage: usize, block: StageBlock, row: Option<usize>, col: Option<usize>, detail: String) -> Error {
    Error::Stage {
        stage,
        block,
        row,
        col,
        detail,
    }
}

fn check_shape(stage: usize, block: StageBlock, m: &Mat<f64>, rows: usize, cols: usize) -> Result<()> {
    if m.nrows() != rows || m.ncols() != cols {
        return Err(stage_err(
            stage,
            block,
            None,
            None,
            format!("expected {rows}×{cols}, found {}×{}", m.nrows(), m.ncols()),
        ));
    }
    // First offender in row-major order, as a person reads a matrix.
    for i in 0..rows {
        for j in 0..cols {
            let v = m[(i, j)];
            if !v.is_finite() {
                return Err(stage_err(
                    stage,
                    block,
                    Some(i),
                    Some(j),
                    format!("non-finite value {v} at row {i}, column {j} (0-based)"),
                ));
            }
        }
    }
    Ok(())
}

fn check_vec(stage: usize, block: StageBlock, v: &[f64], len: usize) -> Result<()> {
    if v.len() != len {
        return Err(stage_err(
            stage,
            block,
            None,
            None,
            format!("expected length {len}, found {}", v.len()),
        ));
    }
    if let Some((i, x)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
        return Err(stage_err(
            stage,
            block,
            Some(i),
            Some(0),
            format!("non-finite value {x} at entry {i} (0-based)"),
        ));
    }
    Ok(())
}

/// Checks symmetry within `tol·max|M|` (worst pair reported) and symmetrizes.
fn symmetric(stage: usize, block: StageBlock, m: &Mat<f64>, n: usize, tol: f64) -> Result<Mat<f64>> {
    check_shape(stage, block, m, n, n)?;
    let scale = (0..n)
        .flat_map(|j| (0..n).map(move |i| (i, j)))
        .fold(0.0f64, |a, (i, j)| a.max(m[(i, j)].abs()));
    let mut worst: Option<(usize, usize, f64)> = None;
    for i in 0..n {
        for j in i + 1..n {
            let gap = (m[(i, j)] - m[(j, i)]).abs();
            if gap > tol * scale && worst.is_none_or(|w| gap > w.2) {
                worst = Some((i, j, gap));
            }
        }
    }
    if let Some((i, j, gap)) = worst {
        return Err(stage_err(
            stage,
            block,
            Some(i),
            Some(j),
            format!(
                "not symmetric: [{i},{j}] = {:e} but [{j},{i}] = {:e} (relative gap {:.3e} > tolerance {tol:.1e}; 0-based, worst pair)",
                m[(i, j)],
                m[(j, i)],
                gap / scale
            ),
        ));
    }
    Ok(Mat::from_fn(n, n, |i, j| 0.5 * (m[(i, j)] + m[(j, i)])))
}

impl HorizonBuilder<HasDynamics, HasCost> {
    /// Validates every stage and returns the horizon.
    ///
    /// Checks, stage by stage (k = 0 … N−1): the stage index of every per-stage setter,
    /// `Aₖ` nx×nx, `Bₖ` nx×nu, `cₖ`, `Qₖ` symmetric nx×nx, `Rₖ` symmetric nu×nu, `Sₖ` nu×nx,
    /// `qₖ`, `rₖ`, then the input constraint (`Eₖ` p×nu with p ≤ nu and full row rank, `Dₖ`
    /// p×nx, `eₖ` length p); then `Q_N`, `q_N` and `x̂` (reported as stage N). All values
    /// must be finite.
    pub fn build(self) -> Result<Horizon> {
        let StageDims { nx, nu, horizon } = self.dims;
        let tol = self.symmetry_tol;
        if let Some(k) = self.bad_index {
            return Err(stage_err(
                k,
                StageBlock::Index,
                None,
                None,
                format!(
                    "stage {k} does not exist: the horizon has stages 0 … {}",
                    horizon as isize - 1
                ),
            ));
        }
        let mut stages = Vec::with_capacity(horizon);
        let slots = self.slots;
        for k in 0..horizon {
            let (a, b) = slots.dynamics[k].clone().expect("type state guarantees dynamics");
            check_shape(k, StageBlock::A, &a, nx, nx)?;
            check_shape(k, StageBlock::B, &b, nx, nu)?;
            let c = slots.offset[k].clone().unwrap_or_else(|| vec![0.0; nx]);
            check_vec(k, StageBlock::Offset, &c, nx)?;
            let (q, r) = slots.cost[k].clone().expect("type state guarantees costs");
            let q = symmetric(k, StageBlock::Q, &q, nx, tol)?;
            let r = symmetric(k, StageBlock::R, &r, nu, tol)?;
            let s = slots.cross[k].clone().unwrap_or_else(|| Mat::zeros(nu, nx));
            check_shape(k, StageBlock::S, &s, nu, nx)?;
            let (q_lin, r_lin) = slots.linear[k]
                .clone()
                .unwrap_or_else(|| (vec![0.0; nx], vec![0.0; nu]));
            check_vec(k, StageBlock::StateLinear, &q_lin, nx)?;
            check_vec(k, StageBlock::InputLinear, &r_lin, nu)?;
            let constraint = match &slots.constraint[k] {
                None => None,
                Some(raw) => {
                    let p = raw.e.nrows();
                    check_shape(k, StageBlock::E, &raw.e, p, nu)?;
                    check_shape(k, StageBlock::D, &raw.d, p, nx)?;
                    check_vec(k, StageBlock::ConstraintRhs, &raw.rhs, p)?;
                    if p == 0 {
                        None
                    } else {
                        check_full_row_rank(k, &raw.e)?;
                        Some((raw.e.clone(), raw.d.clone(), raw.rhs.clone()))
                    }
                }
            };
            stages.push(Stage {
                a,
                b,
                c,
                q,
                r,
                s,
                q_lin,
                r_lin,
                constraint,
            });
        }
        let q_terminal = match &self.terminal {
            Some(m) => symmetric(horizon, StageBlock::TerminalQ, m, nx, tol)?,
            None => Mat::zeros(nx, nx),
        };
        let q_terminal_lin = self.terminal_lin.unwrap_or_else(|| vec![0.0; nx]);
        check_vec(horizon, StageBlock::TerminalLinear, &q_terminal_lin, nx)?;
        let x_init = self.x_init.unwrap_or_else(|| vec![0.0; nx]);
        check_vec(horizon, StageBlock::InitialState, &x_init, nx)?;
        Ok(Horizon {
            dims: self.dims,
            stages,
            q_terminal,
            q_terminal_lin,
            x_init,
        })
    }
}

/// Relative tolerance on singular values below which `Eₖ` counts as rank deficient:
/// `σ_min ≤ max(p, nu)·ε·σ_max` (common practice for numerical rank).
pub(crate) fn rank_tolerance(p: usize, nu: usize, sigma_max: f64) -> f64 {
    p.max(nu) as f64 * f64::EPSILON * sigma_max
}

fn check_full_row_rank(k: usize, e: &Mat<f64>) -> Result<()> {
    let (p, nu) = (e.nrows(), e.ncols());
    if p > nu {
        return Err(stage_err(
            k,
            StageBlock::E,
            None,
            None,
            format!("{p} constraint rows on {nu} input(s): Eₖ cannot have full row rank"),
        ));
    }
    let sv = e.singular_values().map_err(|_| {
        stage_err(
            k,
            StageBlock::E,
            None,
            None,
            "singular values of Eₖ did not converge".to_string(),
        )
    })?;
    let smax = sv.first().copied().unwrap_or(0.0);
    let smin = sv.last().copied().unwrap_or(0.0);
    if smin <= rank_tolerance(p, nu, smax) {
        return Err(stage_err(
            k,
            StageBlock::E,
            None,
            None,
            format!(
                "Eₖ ({p}×{nu}) is not of full row rank (smallest singular value {smin:.3e}, largest {smax:.3e}); \
                 drop the dependent rows"
            ),
        ));
    }
    Ok(())
}
