//! # tangency
//!
//! Equality-constrained quadratic programs and their KKT systems:
//!
//! ```text
//! minimize ½xᵀHx + cᵀx   subject to   Ax = b        (H: n×n symmetric, A: m×n)
//! ```
//!
//! ```
//! use tangency::{solve, Options, ProblemBuilder, Triangle, Verdict};
//!
//! // Hock & Schittkowski (1981), problem 28: x* = (1/2, −1/2, 1/2), f* = 0.
//! let problem = ProblemBuilder::new()
//!     .hessian_row_major(3, &[2., 2., 0., 2., 4., 2., 0., 2., 2.], Triangle::Full)
//!     .constraints_row_major(1, 3, &[1., 2., 3.])
//!     .rhs(&[1.])
//!     .build()?;
//! let s = solve(&problem, &Options::default())?;
//! assert_eq!(s.verdict, Some(Verdict::Minimizer));
//! assert!((s.x[0] - 0.5).abs() < 1e-14 && (s.x[1] + 0.5).abs() < 1e-14);
//! assert!(s.backward_error < 1e-15);
//! println!("{}", tangency::report::human(&problem, &s));
//! # Ok::<(), tangency::Error>(())
//! ```
//!
//! ## Overview
//!
//! The pipeline is *problem → plan → factorization → solution*:
//!
//! * [`ProblemBuilder`] takes `H` and `A` dense (faer `Mat`, row-major slices) or sparse
//!   (triplets, faer `SparseColMat`, nalgebra-sparse `CscMatrix`/`CooMatrix`), `H` as one
//!   triangle or full, and validates everything at `build()`.
//! * [`Plan::analyze`] picks a method from the structure (once per structure).
//! * [`Plan::factor`] does the numeric work; [`Factorization::refactor`] repeats it for new
//!   values of the same structure without a new analysis.
//! * [`Factorization::solve_with`] solves for any new `(c, b)` without refactoring; each
//!   solve is refined on the original K and certified before it is returned.
//!
//! ## Conventions
//!
//! * KKT layout: unknowns `[x; y]`, `K = [H Aᵀ; A 0]`, right-hand side `[−c; b]`.
//! * Multiplier sign: the Lagrangian is `L(x, y) = ½xᵀHx + cᵀx + yᵀ(Ax − b)`, so
//!   `Hx + c + Aᵀy = 0` at the solution and `∂f*/∂b = −y`: **raising `bᵢ` by one unit changes
//!   the optimal objective by `−yᵢ`** to first order.
//! * Verdict (Nocedal & Wright 2006, ch. 16; Gould 1985): inertia of K equal to `(n, m, 0)`
//!   ⇔ `A` has full row rank and the reduced Hessian is positive definite ⇔ the point is the
//!   unique global minimizer ([`Verdict::Minimizer`]). Nonsingular K with another inertia:
//!   [`Verdict::Saddle`]. Singular K goes to the rank analysis of
//!   [`diagnostics::rank`]: redundant rows are dropped (named in the notes, minimum-norm
//!   multipliers), contradictory ones give [`Error::Infeasible`], a singular reduced
//!   Hessian gives [`Verdict::NonUnique`] (with [`Solution::null_direction`]) or
//!   [`Error::Unbounded`] (with a descent direction).
//! * Triangles: a [`Triangle::Lower`] or [`Triangle::Upper`] dense `H` reads only that
//!   triangle; sparse input must not have entries in the other triangle. A
//!   [`Triangle::Full`] `H` must be symmetric within
//!   [`problem::DEFAULT_SYMMETRY_TOLERANCE`] (relative to `max|H|`).
//!
//! ## Certificates
//!
//! Every [`Solution`] carries the primal residual `‖Ax − b‖∞`, the dual residual
//! `‖Hx + c + Aᵀy‖∞`, the normwise backward error of the KKT solve on the original
//! (unscaled) K, the refinement steps taken, the inertia and the verdict. A solve whose
//! backward error stays above [`pipeline::DEFAULT_ACCEPT_BACKWARD_ERROR`] after refinement is
//! refused ([`Error::Inaccurate`]) instead of being returned.
//!
//! ## Performance
//!
//! The dense backend is faer's blocked Bunch–Kaufman LBLᵀ, about `N³/3` flops for `N = n + m`,
//! run on all cores. See `benches/` and the README for measured figures.
//!
//! ## Untrusted input
//!
//! Builders and the Matrix Market loader never panic on data: wrong sizes, NaN/Inf,
//! asymmetry, entries out of range or in the wrong triangle and malformed files are
//! [`Error`] values naming the block (and file), row and column. Functions that take
//! vectors of a length fixed by the problem (for example [`Problem::objective`]) document
//! that they panic on a wrong length: that is a programming error, not a data error.
//!
//! ## Features
//!
//! * `cli` (default): the `tangency` command line and its argument parser (clap). A program
//!   that embeds the library sets `default-features = false` and does not compile clap.
//! * `serde` (off by default): `serde::Serialize` on [`Solution`], [`Inertia`],
//!   [`Verdict`], [`MethodUsed`] (as its command-line word) and [`Timing`].
//! * `mpi` (off by default): distributed KKT solves on MPI ranks through MUMPS
//!   (the `distributed` module, `tangency solve --method distributed`).
//!   Needs OpenMPI, MUMPS built on it, libclang and pkg-config (Debian: `openmpi-bin
//!   libopenmpi-dev libmumps-dev libclang-dev clang pkg-config`). The default build has no MPI.
//!
//! ## Current state
//!
//! Implemented: dense LBLᵀ with equilibration, inertia, verdict, refinement; sparse LDLᵀ
//! with a fill-reducing ordering, regularized pivots with a confirmed inertia and
//! allocation-free sequential refactorization; problem generators ([`generate`]);
//! Schur-complement and null-space methods with an auto cost model; rank analysis that names
//! dependent constraints; condition estimates, backward errors and sensitivities
//! ([`diagnostics`]); stage-wise (optimal control) problems with a typed horizon builder and
//! the Riccati-recursion backend ([`stagewise`]); builders; Matrix Market I/O; the
//! `tangency` command line; preconditioned MINRES on assembled or matrix-free operators
//! ([`iterative`]). Not yet: projected CG. The Schur and
//! null-space methods and the rank analysis work on dense copies of `H` and `A`.
#![deny(missing_docs)]

pub mod backend;
pub mod demo;
pub mod diagnostics;
#[cfg(feature = "mpi")]
pub mod distributed;
pub mod error;
pub mod generate;
pub mod inequality;
pub mod io;
pub mod iterative;
pub mod kkt;
pub mod lsq;
pub mod memory;
pub mod method;
pub mod pipeline;
pub mod problem;
pub mod report;
pub mod solution;
pub mod solver;
pub mod stagewise;

/// The faer version the builders and results use (`Mat`, `MatRef`, `SparseColMat`, …):
/// `tangency::faer::Mat` needs no version matching in the caller's `Cargo.toml`.
pub use faer;
/// The nalgebra-sparse version the builders take (`CscMatrix`, `CooMatrix`), re-exported
/// for the same reason.
pub use nalgebra_sparse;

/// The README's code blocks, compiled and run as documentation tests so that the library
/// example works as pasted.
#[cfg(doctest)]
#[doc = include_str!("../README.md")]
pub struct ReadmeExamples;

pub use backend::dense_lblt::{DenseParams, Pivoting};
pub use error::{Block, Error, ErrorKind, Result};
pub use pipeline::{solve, Factorization, Method, Options, Plan, Workspace};
pub use problem::{Matrix, Problem, ProblemBuilder, Triangle};
pub use solution::{Inertia, MethodUsed, Solution, Timing, Verdict};
