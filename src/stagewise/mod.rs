//! Stage-wise (optimal control) problems and the Riccati recursion.
//!
//! A linear-quadratic problem over a horizon of `N` stages,
//!
//! ```text
//! minimize  Σₖ₌₀ᴺ⁻¹ ( ½xₖᵀQₖxₖ + uₖᵀSₖxₖ + ½uₖᵀRₖuₖ + qₖᵀxₖ + rₖᵀuₖ ) + ½x_NᵀQ_N x_N + q_Nᵀx_N
//! subject to x₀ = x̂,   x_{k+1} = Aₖxₖ + Bₖuₖ + cₖ   (k = 0 … N−1),
//!            Eₖuₖ + Dₖxₖ = eₖ   (optional, Eₖ of full row rank),
//! ```
//!
//! is an equality-constrained QP whose KKT matrix is banded by stages. The Riccati
//! recursion (Rao, Wright & Rawlings 1998) factors it in `O(N·(nx + nu)³)` operations
//! instead of the `O((N·(nx + nu))³)` of a dense factorization.
//!
//! * [`HorizonBuilder`] builds a validated [`Horizon`] (time-varying stages, with
//!   time-invariant shortcuts); [`Horizon::to_problem`] converts it to the general
//!   [`Problem`](crate::Problem) in the layout described below, so every backend can solve it.
//! * [`Method::Riccati`](crate::Method::Riccati) with [`Options::stages`](crate::Options)
//!   solves a general problem in that layout with the [`RiccatiBackend`]; the shared
//!   pipeline adds refinement on the original K, residuals, backward error and verdict.
//! * [`Factorization::solve_into`](crate::Factorization::solve_into) is the control-loop
//!   re-solve: a new initial state `x̂` (the first `nx` entries of `b`) and new linear terms
//!   cost one backward-forward sweep of vector work and no heap allocation.
//!
//! ## Layout of the general problem
//!
//! Variables `z = [x₀; u₀; x₁; u₁; …; x_{N−1}; u_{N−1}; x_N]` (`n = (N+1)·nx + N·nu`).
//! Constraint rows, in order: `nx` rows `x₀ = x̂` (identity on `x₀`), then for each `k` the
//! `nx` rows `x_{k+1} − Aₖxₖ − Bₖuₖ = cₖ` (identity on `x_{k+1}`), then the input-constraint
//! rows `Eₖuₖ + Dₖxₖ = eₖ` stage by stage. `H` is block diagonal with the stage blocks
//! `[[Qₖ, Sₖᵀ], [Sₖ, Rₖ]]` and `Q_N`; `c = [q₀; r₀; …; q_N]`, `b = [x̂; c₀; …; c_{N−1}; e₀; …]`.
//! Entries whose value is exactly zero are ignored by the structure check.
//!
//! ## Multipliers
//!
//! With the crate's convention `Hz + c + Aᵀy = 0`, the multiplier of the dynamics rows of
//! `x_{k+1}` is `y_{k+1} = −λ_{k+1}` where `λₖ = Pₖxₖ + pₖ` is the costate (gradient of the
//! optimal cost-to-go); the multiplier of the rows `x₀ = x̂` is `−λ₀`, so
//! `∂f*/∂x̂ = λ₀`.
//!
//! Not a control design tool: the examples are illustrations of the mathematics.

mod convert;
pub mod demo;
mod horizon;
mod riccati;
mod structure;
mod vectors;

use std::fmt;
use std::str::FromStr;

pub use horizon::{HasCost, HasDynamics, Horizon, HorizonBuilder, NoCost, NoDynamics};
pub use riccati::RiccatiBackend;
pub use structure::StageStructure;
pub use vectors::StageVectors;

use crate::error::{Error, Result};

/// Dimensions of a stage-wise problem: state size `nx`, input size `nu`, horizon `N`.
///
/// ```
/// use tangency::stagewise::StageDims;
/// let d: StageDims = "4,2,10".parse()?;
/// assert_eq!((d.nx, d.nu, d.horizon), (4, 2, 10));
/// assert_eq!(d.n_vars(), 11 * 4 + 10 * 2);
/// assert_eq!(d.u_offset(1), 6 + 4);
/// assert!("4,2".parse::<StageDims>().is_err());
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Copy, Clone, Debug, PartialEq, Eq, Hash)]
pub struct StageDims {
    /// States per stage.
    pub nx: usize,
    /// Inputs per stage.
    pub nu: usize,
    /// Number of stages `N` (inputs `u₀ … u_{N−1}`, states `x₀ … x_N`).
    pub horizon: usize,
}

impl StageDims {
    /// The dimensions `(nx, nu, N)`.
    pub fn new(nx: usize, nu: usize, horizon: usize) -> Self {
        StageDims { nx, nu, horizon }
    }

    /// Width of one stage block `[xₖ; uₖ]`.
    pub fn width(&self) -> usize {
        self.nx + self.nu
    }

    /// Number of variables `(N+1)·nx + N·nu`.
    pub fn n_vars(&self) -> usize {
        (self.horizon + 1) * self.nx + self.horizon * self.nu
    }

    /// Number of rows of the initial-state and dynamics constraints, `(N+1)·nx`.
    pub fn n_dynamics_rows(&self) -> usize {
        (self.horizon + 1) * self.nx
    }

    /// Index of `xₖ` (k = 0 … N) in `z`.
    pub fn x_offset(&self, k: usize) -> usize {
        k * self.width()
    }

    /// Index of `uₖ` (k = 0 … N−1) in `z`.
    pub fn u_offset(&self, k: usize) -> usize {
        k * self.width() + self.nx
    }

    /// First row of the dynamics rows that define `x_{k}` (`k = 0`: the rows `x₀ = x̂`).
    pub fn state_rows(&self, k: usize) -> usize {
        k * self.nx
    }
}

impl fmt::Display for StageDims {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{},{},{}", self.nx, self.nu, self.horizon)
    }
}

impl FromStr for StageDims {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self> {
        let parts: Vec<&str> = s.split(',').map(str::trim).collect();
        let bad = || {
            Error::InvalidOption(format!(
                "stage dimensions must be three non-negative integers NX,NU,N (e.g. 4,2,30), got '{s}'"
            ))
        };
        if parts.len() != 3 {
            return Err(bad());
        }
        let mut v = [0usize; 3];
        for (slot, p) in v.iter_mut().zip(&parts) {
            *slot = p.parse().map_err(|_| bad())?;
        }
        Ok(StageDims::new(v[0], v[1], v[2]))
    }
}

/// Which block of a horizon a stage error is about.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum StageBlock {
    /// State matrix `Aₖ` (nx×nx).
    A,
    /// Input matrix `Bₖ` (nx×nu).
    B,
    /// Dynamics offset `cₖ` (nx).
    Offset,
    /// State weight `Qₖ` (nx×nx, symmetric).
    Q,
    /// Input weight `Rₖ` (nu×nu, symmetric).
    R,
    /// Cross weight `Sₖ` (nu×nx).
    S,
    /// Linear state term `qₖ` (nx).
    StateLinear,
    /// Linear input term `rₖ` (nu).
    InputLinear,
    /// Input-constraint matrix `Eₖ` (p×nu, full row rank).
    E,
    /// Input-constraint state matrix `Dₖ` (p×nx).
    D,
    /// Input-constraint right-hand side `eₖ` (p).
    ConstraintRhs,
    /// Terminal weight `Q_N` (nx×nx, symmetric).
    TerminalQ,
    /// Terminal linear term `q_N` (nx).
    TerminalLinear,
    /// Initial state `x̂` (nx).
    InitialState,
    /// The stage index itself.
    Index,
}

impl fmt::Display for StageBlock {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            StageBlock::A => "A (state matrix)",
            StageBlock::B => "B (input matrix)",
            StageBlock::Offset => "c (dynamics offset)",
            StageBlock::Q => "Q (state weight)",
            StageBlock::R => "R (input weight)",
            StageBlock::S => "S (cross weight)",
            StageBlock::StateLinear => "q (linear state term)",
            StageBlock::InputLinear => "r (linear input term)",
            StageBlock::E => "E (input-constraint matrix)",
            StageBlock::D => "D (input-constraint state matrix)",
            StageBlock::ConstraintRhs => "e (input-constraint right-hand side)",
            StageBlock::TerminalQ => "Q_N (terminal weight)",
            StageBlock::TerminalLinear => "q_N (terminal linear term)",
            StageBlock::InitialState => "x̂ (initial state)",
            StageBlock::Index => "stage index",
        })
    }
}

/// What the analysis decided for `--method riccati`: the structure (when the Riccati
/// backend applies) or a fallback with the reason.
#[derive(Debug)]
pub(crate) struct RiccatiChoice {
    pub structure: Option<std::sync::Arc<StageStructure>>,
    pub reason: String,
    pub notes: Vec<String>,
}

/// Analysis for [`Method::Riccati`](crate::Method::Riccati): checks the stage structure of
/// `problem` for `dims` (refusing with [`Error::NotStageStructured`] naming the first entry
/// outside it), then decides whether the Riccati backend applies or a general backend must
/// take over (terminal-state constraints, rank-deficient `Eₖ`, more constraint rows than
/// inputs in a stage).
pub(crate) fn analyze(problem: &crate::Problem, dims: Option<StageDims>) -> Result<RiccatiChoice> {
    let dims = dims.ok_or_else(|| {
        Error::InvalidOption("method 'riccati' needs the stage dimensions: set Options::stages".to_string())
    })?;
    let st = structure::detect(problem, dims)?;
    match st.unsupported_reason(problem) {
        None => Ok(RiccatiChoice {
            reason: format!(
                "requested: Riccati recursion over {} stage(s) (nx = {}, nu = {})",
                dims.horizon, dims.nx, dims.nu
            ),
            structure: Some(std::sync::Arc::new(st)),
            notes: Vec::new(),
        }),
        Some(why) => {
            let text =
                format!("the Riccati recursion does not apply ({why}); solved with the dense LBLᵀ backend instead");
            Ok(RiccatiChoice {
                structure: None,
                reason: text.clone(),
                notes: vec![text],
            })
        }
    }
}
