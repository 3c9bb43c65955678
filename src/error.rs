//! One error type for the whole crate.
//!
//! Two families share the enum:
//!
//! * **invalid input** ([`Error::is_invalid_input`]): raised while building or loading a
//!   problem, before any arithmetic. Each variant names the block (`H`, `A`, `c`, `b`) and
//!   the position, so the fix is obvious. Recover by correcting the data.
//! * **no solution** ([`Error::is_no_solution`]): the data are well formed but the KKT system
//!   has no trustworthy solution (singular, infeasible, unbounded). The variant carries the
//!   diagnosis. Recover by changing the model (drop or fix constraints, regularize H).
//!
//! [`Error::kind`] sorts every variant into an [`ErrorKind`] (input, usage, not applicable,
//! numerical, iterative, resources, I/O, distributed); the two families above are unions of
//! kinds.
//!
//! Library code never panics on user data: every failure is one of these variants.

use std::fmt;
use std::path::PathBuf;

use crate::solution::Inertia;

/// Which block of the problem a message is about.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Hash)]
pub enum Block {
    /// The Hessian `H` (n×n, symmetric).
    H,
    /// The constraint matrix `A` (m×n).
    A,
    /// The linear term `c` (length n).
    C,
    /// The constraint right-hand side `b` (length m).
    B,
}

impl fmt::Display for Block {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Block::H => "H",
            Block::A => "A",
            Block::C => "c",
            Block::B => "b",
        })
    }
}

/// The family of an [`Error`], from [`Error::kind`]: what went wrong, independently of
/// the variant's details.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum ErrorKind {
    /// Malformed data (sizes, NaN/Inf, asymmetry, positions, file content): fix the data.
    Input,
    /// An option that does not exist or does not apply, or a call with another structure
    /// than the one analyzed: fix the call.
    Usage,
    /// Well-formed data that the chosen method cannot handle ([`Error::NotApplicable`]):
    /// choose another method.
    NotApplicable,
    /// Well-formed data without a trustworthy solution (singular, infeasible, unbounded,
    /// not certified, overflow, not convex): change the model.
    Numerical,
    /// An iterative method stopped at its limit before its tolerance.
    Iterative,
    /// Not enough memory (or index range) for the computation.
    Resources,
    /// A file could not be read or written.
    Io,
    /// The distributed engine (MUMPS, MPI) failed for a reason other than the above.
    Distributed,
}

impl ErrorKind {
    /// One or two words for people (the command line's stderr label).
    pub fn describe(self) -> &'static str {
        match self {
            ErrorKind::Input | ErrorKind::Usage | ErrorKind::NotApplicable => "invalid input",
            ErrorKind::Numerical => "no solution",
            ErrorKind::Iterative => "not converged",
            ErrorKind::Resources => "not enough resources",
            ErrorKind::Io => "file error",
            ErrorKind::Distributed => "distributed engine error",
        }
    }
}

/// Convenient alias used throughout the crate.
pub type Result<T, E = Error> = std::result::Result<T, E>;

/// Everything that can go wrong, with the context needed to act on it.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum Error {
    /// A block does not have the size its neighbours imply.
    #[error("dimension mismatch in block {block}: expected {expected_rows}×{expected_cols}, found {rows}×{cols}")]
    DimensionMismatch {
        /// The offending block.
        block: Block,
        /// Rows found.
        rows: usize,
        /// Columns found.
        cols: usize,
        /// Rows implied by the other blocks.
        expected_rows: usize,
        /// Columns implied by the other blocks.
        expected_cols: usize,
    },
    /// A NaN or infinite entry (positions are 0-based; vectors use column 0).
    #[error("non-finite value {value} in block {block} at row {row}, column {col} (0-based)")]
    NonFinite {
        /// The offending block.
        block: Block,
        /// Row (0-based).
        row: usize,
        /// Column (0-based).
        col: usize,
        /// The value found (NaN or ±inf).
        value: f64,
    },
    /// Duplicate sparse entries at one position are each finite but their sum is not
    /// (e.g. two entries of 1.5e308). Positions are 0-based.
    #[error(
        "block {block}: the duplicate entries at row {row}, column {col} (0-based) sum to {value}, beyond double range"
    )]
    DuplicateSumOverflow {
        /// The offending block.
        block: Block,
        /// Row (0-based).
        row: usize,
        /// Column (0-based).
        col: usize,
        /// The sum (±inf).
        value: f64,
    },
    /// A full `H` differs from its transpose by more than the documented tolerance.
    #[error(
        "H is not symmetric: H[{row},{col}] = {upper:e} but H[{col},{row}] = {lower:e} \
         (relative gap {relative_gap:.3e} > tolerance {tolerance:.1e}; 0-based, worst pair)"
    )]
    NotSymmetric {
        /// Row of the worst pair (0-based, row < col).
        row: usize,
        /// Column of the worst pair (0-based).
        col: usize,
        /// `H[row, col]`.
        upper: f64,
        /// `H[col, row]`.
        lower: f64,
        /// `|upper - lower| / max|H|`.
        relative_gap: f64,
        /// The tolerance that was exceeded.
        tolerance: f64,
    },
    /// An entry given for one triangle of `H` lies in the other triangle.
    #[error("H was declared as its {triangle} triangle but has an entry at row {row}, column {col} (0-based)")]
    WrongTriangle {
        /// The declared triangle (`"lower"` or `"upper"`).
        triangle: &'static str,
        /// Row (0-based).
        row: usize,
        /// Column (0-based).
        col: usize,
    },
    /// A sparse entry lies outside the declared shape.
    #[error(
        "index out of range in block {block}: entry at row {row}, column {col} (0-based) for a {nrows}×{ncols} block"
    )]
    IndexOutOfRange {
        /// The offending block.
        block: Block,
        /// Row (0-based).
        row: usize,
        /// Column (0-based).
        col: usize,
        /// Declared rows.
        nrows: usize,
        /// Declared columns.
        ncols: usize,
    },
    /// A row-major slice has the wrong length for the declared shape.
    #[error("block {block}: {len} values given for a {rows}×{cols} block (expected {expected})")]
    WrongLength {
        /// The offending block.
        block: Block,
        /// Values given.
        len: usize,
        /// Declared rows.
        rows: usize,
        /// Declared columns.
        cols: usize,
        /// Values expected.
        expected: usize,
    },
    /// A refactorization was given a problem of another shape or sparsity pattern.
    #[error("refactorization needs the same structure: {detail}")]
    StructureChanged {
        /// What differs.
        detail: String,
    },
    /// A method option that does not exist or does not apply.
    #[error("{0}")]
    InvalidOption(String),
    /// The data are well formed but lack a property the chosen method needs (for example a
    /// preconditioner block that is not positive definite): another method may still solve
    /// the problem. Not an option error and not a diagnosis of the problem itself. CLI:
    /// status `invalid_input`, exit code 2 (unchanged from when these were
    /// [`Error::InvalidOption`]).
    #[error("{detail}")]
    NotApplicable {
        /// The method (or component) whose requirement failed.
        method: &'static str,
        /// Which property is missing, with the figures.
        detail: String,
    },
    /// A file could not be read or written.
    #[error("{path}: {source}")]
    Io {
        /// The file.
        path: PathBuf,
        /// The underlying error.
        source: std::io::Error,
    },
    /// A file was read but its content is malformed.
    #[error("{path}: {message}")]
    Parse {
        /// The file.
        path: PathBuf,
        /// What is wrong, as precisely as the parser could say.
        message: String,
    },
    /// A file's content was parsed but is invalid as a problem block.
    #[error("{path}: {source}")]
    InFile {
        /// The file.
        path: PathBuf,
        /// The validation error for the block stored in it.
        source: Box<Error>,
    },
    /// The KKT matrix is singular (to the documented pivot tolerance): no unique
    /// stationary point. Recover by removing redundant constraints or regularizing `H`.
    #[error(
        "the KKT matrix is singular: {zero} zero pivot(s), inertia (+{positive}, -{negative}, 0:{zero}); {detail}",
        positive = inertia.positive, negative = inertia.negative, zero = inertia.zero
    )]
    Singular {
        /// Inertia of the KKT matrix as computed (zero count > 0).
        inertia: Inertia,
        /// What the singularity most likely means for the problem.
        detail: String,
    },
    /// The factorization needs more memory or larger indices than available.
    #[error("not enough resources: {detail}")]
    Resources {
        /// What could not be allocated.
        detail: String,
    },
    /// The solve finished but its backward error stayed above the acceptance level even
    /// after refinement: the answer is not trustworthy (K is numerically singular).
    #[error(
        "the computed solution is not accurate: backward error {backward_error:.2e} after {steps} refinement step(s) \
         exceeds the acceptance level {limit:.1e}; the KKT matrix is numerically singular or extremely ill-conditioned"
    )]
    Inaccurate {
        /// Normwise backward error reached.
        backward_error: f64,
        /// Refinement steps taken.
        steps: usize,
        /// Acceptance level (`Options::accept_backward_error`).
        limit: f64,
    },
    /// The solution (or the objective) lies beyond double range: a power-of-two scaling of
    /// the right-hand side was tried and still overflows (CLI exit 3, status `overflow`).
    /// Recover by rescaling the problem's units.
    #[error("the solution is not representable in double precision: {detail}")]
    Overflow {
        /// What overflowed, with the figures.
        detail: String,
    },
    /// A direct solve whose accuracy cannot be certified: its forward-error bound
    /// ([`Solution::forward_error_bound`](crate::Solution::forward_error_bound)) is missing
    /// (`κω ≥ 1`) or above the acceptance level, and no fallback could do better (CLI exit
    /// code 3, status `inaccurate`). Recover by rescaling or regularizing the problem, or
    /// raise `Options::accept_forward_error` knowingly.
    #[error(
        "the computed solution is not certified: {method} gives a forward-error bound {} above the acceptance \
         level {limit:.1e} (condition estimate κ₁(DKD) ≈ {condition_estimate:.2e}, backward error \
         {backward_error:.2e}); the KKT matrix is too ill-conditioned for the accuracy asked",
        bound_words(*forward_error_bound)
    )]
    Uncertified {
        /// The method whose solve was refused (`MethodUsed::as_str`).
        method: &'static str,
        /// The bound reached (`+∞` when missing).
        forward_error_bound: f64,
        /// `κ₁(DKD)` (`+∞` when a solve overflowed).
        condition_estimate: f64,
        /// Normwise backward error on the original K.
        backward_error: f64,
        /// Acceptance level (`Options::accept_forward_error`).
        limit: f64,
    },
    /// Invalid data for one stage of a horizon (stage-wise) problem; `stage` is `N` for the
    /// terminal blocks and the initial state. Recover by correcting that block.
    #[error("horizon stage {stage}, block {block}: {detail}")]
    Stage {
        /// Stage index (0-based; `N` for terminal data).
        stage: usize,
        /// The offending block.
        block: crate::stagewise::StageBlock,
        /// Row of the offending entry (0-based), when there is one.
        row: Option<usize>,
        /// Column of the offending entry (0-based), when there is one.
        col: Option<usize>,
        /// What is wrong.
        detail: String,
    },
    /// A general problem does not have the stage structure that [`Options::stages`](crate::Options::stages)
    /// declares. Recover by reordering the variables and rows (see [`crate::stagewise`]) or by
    /// choosing another method.
    #[error("not stage-structured for the stage dimensions {dims}: entry {block}[{row},{col}] = {value:e} (0-based) {detail}")]
    NotStageStructured {
        /// The declared dimensions.
        dims: crate::stagewise::StageDims,
        /// `H` or `A`.
        block: Block,
        /// Row of the first offending entry (0-based).
        row: usize,
        /// Column of the first offending entry (0-based).
        col: usize,
        /// Its value.
        value: f64,
        /// Why it lies outside the structure.
        detail: String,
    },
    /// The constraints contradict each other: some row of `A` is a linear combination of
    /// others but its `b` entry is not the same combination of theirs. Recover by fixing
    /// `b` (or removing one of the named rows).
    #[error("the constraints are infeasible: {detail}")]
    Infeasible {
        /// Rows (0-based) involved in the contradiction with the largest gap: the dependent
        /// row first, then the rows it is a combination of.
        rows: Vec<usize>,
        /// Size of that contradiction, `|b_dep − Σ coef·b_i|`.
        gap: f64,
        /// Every contradiction found, in words.
        detail: String,
    },
    /// The objective is unbounded below on the feasible set along a direction of zero
    /// curvature (singular reduced Hessian, gradient not orthogonal to its null space).
    /// Recover by adding curvature (regularize `H`) or constraints fixing that direction.
    #[error("the objective is unbounded below: {detail}")]
    Unbounded {
        /// A feasible direction `d` (`Ad = 0`, `dᵀHd = 0`, `‖d‖₂ = 1`) along which the
        /// objective decreases linearly without bound.
        direction: Vec<f64>,
        /// Rate of decrease `(Hx + c)ᵀd < 0` along `direction` (the same at every feasible x).
        slope: f64,
        /// Explanation in words.
        detail: String,
    },
    /// A direction, seed or request given to a sensitivity routine
    /// ([`crate::diagnostics::sensitivity`]) is malformed (wrong length or shape, NaN/Inf, a
    /// non-symmetric `δH`). Recover by correcting the argument named in the message.
    #[error("invalid sensitivity input: {detail}")]
    InvalidSensitivityInput {
        /// What is wrong, naming the argument, row and column.
        detail: String,
    },
    /// Invalid least-squares data ([`crate::lsq`]): names the block and, when it applies,
    /// the row and column (0-based).
    #[error("least-squares input, block {block}{}: {detail}", fit_position(*row, *col))]
    FitInput {
        /// The offending block of the fit.
        block: crate::lsq::FitBlock,
        /// Row (0-based), when the problem is one entry or row.
        row: Option<usize>,
        /// Column (0-based), when the problem is one entry.
        col: Option<usize>,
        /// What is wrong.
        detail: String,
    },
    /// The restrictions `Cβ = d` of a fit contradict each other: some rows of `C` are
    /// linear combinations of others but their `d` values are not.
    #[error("the restrictions Cβ = d are contradictory: {detail}")]
    FitContradictory {
        /// Rows of `C` (0-based) that depend on others and disagree with them.
        rows: Vec<usize>,
        /// The dependence found, in words.
        detail: String,
    },
    /// `[F; C]` (with weights and ridge) does not have full column rank: the restricted
    /// fit is not unique. `direction` is a unit vector `δ` with `Fδ ≈ 0` and `Cδ ≈ 0`.
    #[error("the fit is not unique: {detail}")]
    FitNonUnique {
        /// A unit direction along which the coefficients are not determined.
        direction: Vec<f64>,
        /// The diagnosis in words.
        detail: String,
    },
    /// An iterative method stopped at its iteration limit before meeting its tolerance
    /// (CLI exit code 4, status `not_converged`). Recover by raising the limit, loosening the
    /// tolerance or using a stronger preconditioner (or a direct method).
    #[error(
        "{method} did not converge: {iterations} iteration(s), relative residual in the method's norm {residual:.3e} \
         (tolerance {tolerance:.1e}), true relative residual {true_residual:.3e}"
    )]
    NotConverged {
        /// The iterative method (`"minres"` or `"pcg"`).
        method: &'static str,
        /// Iterations taken.
        iterations: usize,
        /// Relative residual reached in the method's own norm (MINRES: preconditioned;
        /// PCG: the KKT residual in the 2-norm).
        residual: f64,
        /// Relative residual `‖rhs − Kz‖₂ / ‖rhs‖₂` of the last iterate on the original K.
        true_residual: f64,
        /// The tolerance asked for.
        tolerance: f64,
        /// The last (at most 10) relative residuals in the method's norm, oldest first.
        history_tail: Vec<f64>,
    },
    /// Invalid inequality or bound data ([`crate::inequality`]): names the block (`G`, `h`,
    /// `lo`, `hi`) and, when it applies, the row and column (0-based). Recover by correcting
    /// that entry.
    #[error("inequality input, block {block}{}: {detail}", fit_position(*row, *col))]
    InequalityInput {
        /// `"G"`, `"h"`, `"lo"` or `"hi"`.
        block: &'static str,
        /// Row (0-based), when the problem is one entry or row.
        row: Option<usize>,
        /// Column (0-based), when the problem is one entry.
        col: Option<usize>,
        /// What is wrong.
        detail: String,
    },
    /// No point satisfies `Ax = b`, `Gx ≤ h`, `lo ≤ x ≤ hi`: the certificate is a Farkas
    /// vector (see [`crate::inequality::FarkasCertificate`] for the convention). Recover by
    /// relaxing the constraints the certificate weighs most.
    #[error("the constraints are infeasible: {detail}")]
    InfeasibleInequalities {
        /// The certificate of infeasibility.
        certificate: Box<crate::inequality::FarkasCertificate>,
        /// Explanation in words.
        detail: String,
    },
    /// The objective has negative curvature on the directions allowed by `Ax = b` (detected
    /// by the inertia of a KKT matrix): the inequality solver computes global minimizers of
    /// convex problems only and refuses rather than return a local point.
    #[error("the problem is not convex: {detail}")]
    Nonconvex {
        /// The inertia that showed it, when a factorization observed it.
        inertia: Option<Inertia>,
        /// Explanation in words.
        detail: String,
    },
    /// The interior-point method stopped at its iteration limit (or stalled) before meeting
    /// its tolerances (CLI exit code 4, status `not_converged`). Recover by raising the limit,
    /// rescaling the data or loosening the tolerance.
    #[error(
        "the interior-point method did not converge: {iterations} iteration(s), relative primal residual \
         {primal_residual:.2e}, relative dual residual {dual_residual:.2e}, complementarity {complementarity:.2e}; {detail}"
    )]
    InteriorPointNotConverged {
        /// Iterations taken.
        iterations: usize,
        /// Relative primal residual reached.
        primal_residual: f64,
        /// Relative dual residual reached.
        dual_residual: f64,
        /// Average complementarity `sᵀz / count` reached.
        complementarity: f64,
        /// Why it stopped.
        detail: String,
    },
    /// A call of the distributed engine failed ([`crate::distributed::MumpsError`]: phase,
    /// `INFOG(1)`, `INFOG(2)` and their meaning). Singular codes have status `singular`;
    /// the others (memory, ordering, environment) `invalid_input`.
    #[cfg(feature = "mpi")]
    #[error("{0}")]
    Mumps(crate::distributed::MumpsError),
    /// A collective distributed operation failed on another MPI rank: every rank of the
    /// communicator returns an error, with the status and exit code of the original one.
    #[cfg(feature = "mpi")]
    #[error("on MPI rank {rank}: {message}")]
    OnOtherRank {
        /// The rank where the error was raised.
        rank: i32,
        /// Its status word (as [`Error::status`]).
        status: &'static str,
        /// Its command-line exit code (2, 3 or 4).
        exit_code: u8,
        /// Its message.
        message: String,
    },
}

fn bound_words(bound: f64) -> String {
    if bound.is_finite() {
        format!("{bound:.2e}")
    } else {
        "that is missing (κω ≥ 1)".to_string()
    }
}

fn fit_position(row: Option<usize>, col: Option<usize>) -> String {
    match (row, col) {
        (Some(r), Some(c)) => format!(" at row {r}, column {c} (0-based)"),
        (Some(r), None) => format!(" at row {r} (0-based)"),
        (None, Some(c)) => format!(" at column {c} (0-based)"),
        (None, None) => String::new(),
    }
}

impl Error {
    /// The family of this error (see [`ErrorKind`]). The `match` names every variant, so a
    /// new one must be classified here.
    pub fn kind(&self) -> ErrorKind {
        #[cfg(feature = "mpi")]
        if let Some(code) = self.distributed_exit_code() {
            return match code {
                3 => ErrorKind::Numerical,
                4 => ErrorKind::Iterative,
                _ => ErrorKind::Distributed,
            };
        }
        match self {
            Error::DimensionMismatch { .. }
            | Error::NonFinite { .. }
            | Error::DuplicateSumOverflow { .. }
            | Error::NotSymmetric { .. }
            | Error::WrongTriangle { .. }
            | Error::IndexOutOfRange { .. }
            | Error::WrongLength { .. }
            | Error::Parse { .. }
            | Error::Stage { .. }
            | Error::NotStageStructured { .. }
            | Error::InvalidSensitivityInput { .. }
            | Error::FitInput { .. }
            | Error::InequalityInput { .. } => ErrorKind::Input,
            Error::InFile { source, .. } => source.kind(),
            Error::StructureChanged { .. } | Error::InvalidOption(_) => ErrorKind::Usage,
            Error::NotApplicable { .. } => ErrorKind::NotApplicable,
            Error::Io { .. } => ErrorKind::Io,
            Error::Resources { .. } => ErrorKind::Resources,
            Error::Singular { .. }
            | Error::Inaccurate { .. }
            | Error::Uncertified { .. }
            | Error::Infeasible { .. }
            | Error::Unbounded { .. }
            | Error::Overflow { .. }
            | Error::FitContradictory { .. }
            | Error::FitNonUnique { .. }
            | Error::InfeasibleInequalities { .. }
            | Error::Nonconvex { .. } => ErrorKind::Numerical,
            Error::NotConverged { .. } | Error::InteriorPointNotConverged { .. } => ErrorKind::Iterative,
            #[cfg(feature = "mpi")]
            Error::Mumps(_) | Error::OnOtherRank { .. } => ErrorKind::Distributed,
        }
    }

    /// True for errors caused by malformed input, options or a method that does not apply
    /// ([`ErrorKind::Input`], [`ErrorKind::Usage`], [`ErrorKind::NotApplicable`]). I/O and
    /// resource errors are not invalid input (the command line still exits with code 2 and
    /// status `invalid_input` for them, as its contract has always said).
    pub fn is_invalid_input(&self) -> bool {
        matches!(
            self.kind(),
            ErrorKind::Input | ErrorKind::Usage | ErrorKind::NotApplicable
        )
    }

    /// True when an iterative method hit its iteration limit (CLI exit code 4).
    pub fn is_not_converged(&self) -> bool {
        self.kind() == ErrorKind::Iterative
    }

    /// True for well-formed problems without a trustworthy solution (CLI exit code 3).
    pub fn is_no_solution(&self) -> bool {
        self.kind() == ErrorKind::Numerical
    }

    /// Short machine-readable status word used by the command line's JSON.
    pub fn status(&self) -> &'static str {
        #[cfg(feature = "mpi")]
        if let Some(status) = self.distributed_status() {
            return status;
        }
        match self {
            Error::Singular { .. } => "singular",
            Error::Inaccurate { .. } | Error::Uncertified { .. } => "inaccurate",
            Error::Infeasible { .. } | Error::FitContradictory { .. } => "infeasible",
            Error::Unbounded { .. } => "unbounded",
            Error::FitNonUnique { .. } => "singular",
            Error::NotConverged { .. } => "not_converged",
            Error::InfeasibleInequalities { .. } => "infeasible",
            Error::Nonconvex { .. } => "nonconvex",
            Error::InteriorPointNotConverged { .. } => "not_converged",
            Error::Overflow { .. } => "overflow",
            _ => "invalid_input",
        }
    }

    /// The problem block an input error is about, when there is one.
    pub fn block(&self) -> Option<Block> {
        match self {
            Error::DimensionMismatch { block, .. }
            | Error::NonFinite { block, .. }
            | Error::IndexOutOfRange { block, .. }
            | Error::WrongLength { block, .. } => Some(*block),
            Error::DuplicateSumOverflow { block, .. } => Some(*block),
            Error::NotSymmetric { .. } | Error::WrongTriangle { .. } => Some(Block::H),
            Error::NotStageStructured { block, .. } => Some(*block),
            Error::InFile { source, .. } => source.block(),
            _ => None,
        }
    }

    pub(crate) fn in_file(self, path: impl Into<PathBuf>) -> Error {
        Error::InFile {
            path: path.into(),
            source: Box::new(self),
        }
    }
}
