//! The data that changes at every step of a receding-horizon loop (initial state,
//! references, linear terms), written by stage instead of by index into `c` and `b`.

use super::{Horizon, StageBlock, StageDims};
use crate::error::{Error, Result};

/// The vectors `c` and `b` of a horizon's general problem ([`Horizon::to_problem`]), set
/// stage by stage: the initial state `x̂`, the linear terms `qₖ`, `rₖ`, `q_N`, tracking
/// references (which set the linear terms from the stage weights) and the dynamics offsets
/// `cₖ`. Pass [`linear`](Self::linear) and [`rhs`](Self::rhs) to
/// [`Factorization::solve_into`](crate::Factorization::solve_into); read the result with
/// [`StageDims::state`] and [`StageDims::input`].
///
/// ```
/// use tangency::faer::mat;
/// use tangency::stagewise::{HorizonBuilder, StageVectors};
/// use tangency::{Method, Options, Plan, Solution};
/// // A double integrator of our own: x = [position, velocity], u = force.
/// let horizon = HorizonBuilder::new(2, 1, 20)
///     .dynamics(mat![[1.0, 0.1], [0.0, 1.0]].as_ref(), mat![[0.005], [0.1]].as_ref())
///     .cost(mat![[1.0, 0.0], [0.0, 0.1]].as_ref(), mat![[0.01]].as_ref())
///     .terminal_cost(mat![[10.0, 0.0], [0.0, 1.0]].as_ref())
///     .build()?;
/// let dims = horizon.dims();
/// let problem = horizon.to_problem()?;
/// let options = Options { method: Method::Riccati, stages: Some(dims), ..Default::default() };
/// let f = Plan::analyze(&problem, &options)?.factor(&problem)?;  // once
/// let mut ws = f.workspace();
/// let mut sol = Solution::empty(problem.n(), problem.m(), f.plan().method());
/// let mut data = StageVectors::new(&horizon);
/// let mut x = [1.0, 0.0];
/// for step in 0..5 {
///     data.set_initial_state(&x)?;
///     for k in 0..=dims.horizon {
///         data.track(k, &[0.5, 0.0], None)?;   // drive the position to 0.5
///     }
///     f.solve_into(data.linear(), data.rhs(), &mut ws, &mut sol)?; // re-solve, no refactor
///     assert!((dims.state(&sol.x, 0)[0] - x[0]).abs() < 1e-12, "step {step}"); // x₀ = x̂
///     let u = dims.input(&sol.x, 0)[0];                 // apply the first input only
///     x = [x[0] + 0.1 * x[1] + 0.005 * u, x[1] + 0.1 * u];
/// }
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct StageVectors<'h> {
    horizon: &'h Horizon,
    c: Vec<f64>,
    b: Vec<f64>,
}

fn stage_err(stage: usize, block: StageBlock, row: Option<usize>, detail: String) -> Error {
    Error::Stage {
        stage,
        block,
        row,
        col: row.map(|_| 0),
        detail,
    }
}

fn check(stage: usize, block: StageBlock, v: &[f64], len: usize) -> Result<()> {
    if v.len() != len {
        return Err(stage_err(
            stage,
            block,
            None,
            format!("expected length {len}, found {}", v.len()),
        ));
    }
    if let Some((i, x)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
        return Err(stage_err(
            stage,
            block,
            Some(i),
            format!("non-finite value {x} at entry {i} (0-based)"),
        ));
    }
    Ok(())
}

impl<'h> StageVectors<'h> {
    /// The vectors of `horizon` as built (its `x̂`, linear terms and offsets).
    pub fn new(horizon: &'h Horizon) -> Self {
        let d = horizon.dims;
        let n = d.n_vars();
        let p_total: usize = (0..d.horizon).map(|k| horizon.constraint_rows(k)).sum();
        let mut c = vec![0.0; n];
        let mut b = vec![0.0; d.n_dynamics_rows() + p_total];
        b[..d.nx].copy_from_slice(&horizon.x_init);
        let mut crow = d.n_dynamics_rows();
        for (k, st) in horizon.stages.iter().enumerate() {
            c[d.x_offset(k)..d.x_offset(k) + d.nx].copy_from_slice(&st.q_lin);
            c[d.u_offset(k)..d.u_offset(k) + d.nu].copy_from_slice(&st.r_lin);
            let row0 = d.state_rows(k + 1);
            b[row0..row0 + d.nx].copy_from_slice(&st.c);
            if let Some((_, _, e)) = &st.constraint {
                b[crow..crow + e.len()].copy_from_slice(e);
                crow += e.len();
            }
        }
        let xo = d.x_offset(d.horizon);
        c[xo..xo + d.nx].copy_from_slice(&horizon.q_terminal_lin);
        StageVectors { horizon, c, b }
    }

    /// The dimensions.
    pub fn dims(&self) -> StageDims {
        self.horizon.dims
    }

    /// The linear term `c` of the general problem.
    pub fn linear(&self) -> &[f64] {
        &self.c
    }

    /// The right-hand side `b` of the general problem.
    pub fn rhs(&self) -> &[f64] {
        &self.b
    }

    fn stage_in_range(&self, k: usize, last: usize) -> Result<()> {
        if k > last {
            return Err(stage_err(
                k,
                StageBlock::Index,
                None,
                format!("stage {k} does not exist (stages 0 … {last})"),
            ));
        }
        Ok(())
    }

    /// Sets the initial state `x̂` (length nx).
    pub fn set_initial_state(&mut self, x0: &[f64]) -> Result<()> {
        let nx = self.dims().nx;
        check(0, StageBlock::InitialState, x0, nx)?;
        self.b[..nx].copy_from_slice(x0);
        Ok(())
    }

    /// Sets the linear state term of stage `k` (`qₖ` for `k < N`, `q_N` for `k = N`).
    pub fn set_state_linear(&mut self, k: usize, q: &[f64]) -> Result<()> {
        let d = self.dims();
        self.stage_in_range(k, d.horizon)?;
        let block = if k == d.horizon {
            StageBlock::TerminalLinear
        } else {
            StageBlock::StateLinear
        };
        check(k, block, q, d.nx)?;
        let xo = d.x_offset(k);
        self.c[xo..xo + d.nx].copy_from_slice(q);
        Ok(())
    }

    /// Sets the linear input term `rₖ` of stage `k < N`.
    pub fn set_input_linear(&mut self, k: usize, r: &[f64]) -> Result<()> {
        let d = self.dims();
        self.stage_in_range(k, d.horizon.saturating_sub(1))?;
        check(k, StageBlock::InputLinear, r, d.nu)?;
        let uo = d.u_offset(k);
        self.c[uo..uo + d.nu].copy_from_slice(r);
        Ok(())
    }

    /// Sets the dynamics offset `cₖ` of stage `k < N` (`x_{k+1} = Aₖxₖ + Bₖuₖ + cₖ`).
    pub fn set_offset(&mut self, k: usize, offset: &[f64]) -> Result<()> {
        let d = self.dims();
        self.stage_in_range(k, d.horizon.saturating_sub(1))?;
        check(k, StageBlock::Offset, offset, d.nx)?;
        let row0 = d.state_rows(k + 1);
        self.b[row0..row0 + d.nx].copy_from_slice(offset);
        Ok(())
    }

    /// Makes stage `k` track a reference: the stage cost becomes (up to a constant)
    /// `½(xₖ − x_ref)ᵀQₖ(xₖ − x_ref) + (uₖ − u_ref)ᵀSₖ(xₖ − x_ref) + ½(uₖ − u_ref)ᵀRₖ(uₖ − u_ref)`
    /// by setting `qₖ = −(Qₖx_ref + Sₖᵀu_ref)` and `rₖ = −(Sₖx_ref + Rₖu_ref)` from the
    /// horizon's own weights (`u_ref = 0` when `None`). At `k = N` it sets
    /// `q_N = −Q_N x_ref` (`u_ref` must be `None`). Replaces the linear terms of stage `k`.
    pub fn track(&mut self, k: usize, x_ref: &[f64], u_ref: Option<&[f64]>) -> Result<()> {
        let d = self.dims();
        self.stage_in_range(k, d.horizon)?;
        let (nx, nu) = (d.nx, d.nu);
        if k == d.horizon {
            check(k, StageBlock::TerminalLinear, x_ref, nx)?;
            if u_ref.is_some() {
                return Err(stage_err(
                    k,
                    StageBlock::InputLinear,
                    None,
                    "the terminal stage has no input: its reference is a state only".to_string(),
                ));
            }
            let q = &self.horizon.q_terminal;
            let xo = d.x_offset(k);
            for i in 0..nx {
                self.c[xo + i] = -(0..nx).map(|j| q[(i, j)] * x_ref[j]).sum::<f64>();
            }
            return Ok(());
        }
        check(k, StageBlock::StateLinear, x_ref, nx)?;
        let zeros = vec![0.0; nu];
        let u_ref = match u_ref {
            Some(u) => {
                check(k, StageBlock::InputLinear, u, nu)?;
                u
            }
            None => &zeros,
        };
        let st = &self.horizon.stages[k];
        let (xo, uo) = (d.x_offset(k), d.u_offset(k));
        for i in 0..nx {
            let qx: f64 = (0..nx).map(|j| st.q[(i, j)] * x_ref[j]).sum();
            let su: f64 = (0..nu).map(|j| st.s[(j, i)] * u_ref[j]).sum();
            self.c[xo + i] = -(qx + su);
        }
        for i in 0..nu {
            let sx: f64 = (0..nx).map(|j| st.s[(i, j)] * x_ref[j]).sum();
            let ru: f64 = (0..nu).map(|j| st.r[(i, j)] * u_ref[j]).sum();
            self.c[uo + i] = -(sx + ru);
        }
        Ok(())
    }
}

impl StageDims {
    /// `xₖ` (length nx) inside a stage-wise vector `z = [x₀; u₀; …; x_N]`.
    ///
    /// # Panics
    /// If `k > N` or `z` is shorter than [`n_vars`](Self::n_vars) (a programming error).
    pub fn state<'z>(&self, z: &'z [f64], k: usize) -> &'z [f64] {
        assert!(k <= self.horizon, "state: stage {k} > N = {}", self.horizon);
        &z[self.x_offset(k)..self.x_offset(k) + self.nx]
    }

    /// `uₖ` (length nu) inside a stage-wise vector `z`.
    ///
    /// # Panics
    /// If `k ≥ N` or `z` is too short (a programming error).
    pub fn input<'z>(&self, z: &'z [f64], k: usize) -> &'z [f64] {
        assert!(k < self.horizon, "input: stage {k} ≥ N = {}", self.horizon);
        &z[self.u_offset(k)..self.u_offset(k) + self.nu]
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stagewise::HorizonBuilder;
    use faer::mat;

    #[test]
    fn vectors_match_the_general_problem_and_tracking_matches_the_weights() {
        let h = HorizonBuilder::new(2, 1, 3)
            .dynamics(mat![[1.0, 0.1], [0.0, 1.0]].as_ref(), mat![[0.0], [0.1]].as_ref())
            .cost(mat![[2.0, 0.5], [0.5, 1.0]].as_ref(), mat![[3.0]].as_ref())
            .cross_weight(mat![[0.25, -0.5]].as_ref())
            .terminal_cost(mat![[4.0, 0.0], [0.0, 5.0]].as_ref())
            .offset(&[0.1, -0.2])
            .initial_state(&[1.0, 2.0])
            .build()
            .unwrap();
        let p = h.to_problem().unwrap();
        let mut v = StageVectors::new(&h);
        assert_eq!(v.linear(), p.linear());
        assert_eq!(v.rhs(), p.rhs());
        v.track(1, &[1.0, -1.0], Some(&[2.0])).unwrap();
        // q₁ = −(Q x_ref + Sᵀ u_ref), r₁ = −(S x_ref + R u_ref), worked by hand.
        let d = h.dims();
        assert_eq!(
            &v.linear()[d.x_offset(1)..d.x_offset(1) + 2],
            &[-(1.5 + 0.5), -(-0.5 - 1.0)]
        );
        assert_eq!(v.linear()[d.u_offset(1)], -(0.75 + 6.0));
        v.track(3, &[1.0, 1.0], None).unwrap();
        assert_eq!(&v.linear()[d.x_offset(3)..], &[-4.0, -5.0]);
        assert!(matches!(
            v.track(4, &[0.0, 0.0], None),
            Err(Error::Stage {
                block: StageBlock::Index,
                ..
            })
        ));
        assert!(matches!(
            v.set_initial_state(&[f64::NAN, 0.0]),
            Err(Error::Stage {
                block: StageBlock::InitialState,
                row: Some(0),
                ..
            })
        ));
        v.set_offset(2, &[0.0, 1.0]).unwrap();
        assert_eq!(&v.rhs()[d.state_rows(3)..d.state_rows(3) + 2], &[0.0, 1.0]);
    }
}
