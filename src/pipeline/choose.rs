//! The one place that chooses: which method a plan uses ([`Method::Auto`]'s cost model
//! and memory rules), which backend is built for it, and the fallbacks (singular K to the
//! null-space rank analysis, an uncertified solve to dense LBLᵀ).
//!
//! The cost model behind [`Method::Auto`](crate::Method::Auto) for dense structure: it
//! estimates the factorization time of dense LBLᵀ, Schur complement and null-space from
//! their flop counts and a rate per kernel family, and picks the cheapest method that
//! applies. A wrong guess costs time, never correctness: the Schur path falls back by
//! itself, and every backend's singular case goes to the null-space rank analysis.
//!
//! | method | flops (N = n + m) | rate constant |
//! |---|---|---|
//! | dense LBLᵀ | `N³/3` | [`RATE_LBLT`] |
//! | Schur | `n³/3 + n²m + nm² + m³/3` | [`RATE_CHOLESKY`] |
//! | null-space | QR of Aᵀ `2nm² − 2m³/3`, `Z` `4nm(n − m)`, `ZᵀHZ` `2n²(n − m) + n(n − m)²`, reduced `(n − m)³/3` | [`RATE_PIVOTED_QR`], [`RATE_GEMM`] |
//!
//! Applicability: Schur needs `H ≻ 0`, which cannot be known before factoring; auto tries
//! it only when every `H_ii > 0` (necessary for `H ≻ 0`) and `m ≤ n`, and charges the
//! fallback risk nothing (the failed Cholesky usually stops early on an indefinite `H`,
//! but may not: that case costs up to `n³/3` extra flops). With `m > n` K is singular for
//! certain, so auto goes straight to the null-space method, which handles it.
//!
//! The rates were fitted to the `structure` benchmark (`cargo bench --bench structure`) on
//! the 2-core development machine while other jobs were running (absolute values are low;
//! only their ratios matter). Consequence of the measured rates: faer's column-pivoted QR
//! is slow enough that for a positive definite `H` the Schur path wins even at m/n = 0.9;
//! the null-space method is chosen when `H` is visibly not positive definite and `n − m`
//! is small (it beat dense LBLᵀ at m/n = 0.9: 1.41 s against 1.92 s), and for m > n.

use std::sync::Arc;

use crate::backend::dense_lblt::DenseLblt;
use crate::backend::null_space::NullSpace;
use crate::backend::schur::{self, Schur};
use crate::backend::sparse_ldlt::{self, SparseAnalysis, SparseLdlt};
use crate::backend::KktBackend;
use crate::error::{Error, Result};
use crate::method::{Method, MethodUsed};
use crate::pipeline::options::{default_memory_budget, Options, DENSE_FALLBACK_MAX_DIM};
use crate::problem::Problem;
use crate::stagewise::StageStructure;

/// Effective rate (flop/s) of faer's dense Bunch–Kaufman LBLᵀ (measured: 9·10⁹ flops in
/// 1.9–2.5 s at N = 3000).
pub const RATE_LBLT: f64 = 4.2e9;
/// Effective rate (flop/s) of the Cholesky / triangular-solve / SYRK kernels of the Schur
/// path (measured: 9·10⁹ flops in 0.98–1.46 s at n + m = 3000).
pub const RATE_CHOLESKY: f64 = 8.0e9;
/// Effective rate (flop/s) of faer's column-pivoted QR (partly matrix-vector bound), fitted
/// with [`RATE_GEMM`] to the null-space times at m/n = 0.5 and 0.9.
pub const RATE_PIVOTED_QR: f64 = 3.5e9;
/// Effective rate (flop/s) of matrix-matrix products (forming `Z` and `ZᵀHZ`).
pub const RATE_GEMM: f64 = 15.5e9;

/// Estimated factorization seconds of each dense method for an n×n H and m×n A.
#[derive(Copy, Clone, Debug, PartialEq)]
pub struct CostEstimate {
    /// Dense LBLᵀ.
    pub dense: f64,
    /// Schur complement (when `H ≻ 0`).
    pub schur: f64,
    /// Null-space.
    pub null_space: f64,
}

/// The cost model's estimates for sizes `n`, `m` (see the [module docs](self)).
///
/// ```
/// let e = tangency::pipeline::choose::estimate(1000, 990);
/// assert!(e.null_space < e.dense);
/// ```
pub fn estimate(n: usize, m: usize) -> CostEstimate {
    let (nf, mf) = (n as f64, m as f64);
    let big_n = nf + mf;
    let dense = big_n.powi(3) / 3.0 / RATE_LBLT;
    let schur = schur::flops(n, m) / RATE_CHOLESKY;
    let k = (nf - mf).max(0.0);
    let mq = mf.min(nf);
    let qr = (2.0 * nf * mq * mq - 2.0 * mq.powi(3) / 3.0).max(0.0);
    let gemm = 4.0 * nf * mq * k + 2.0 * nf * nf * k + nf * k * k + k.powi(3) / 3.0;
    let null_space = qr / RATE_PIVOTED_QR + gemm / RATE_GEMM;
    CostEstimate {
        dense,
        schur,
        null_space,
    }
}

/// The method the cost model picks for sizes `n`, `m`, given whether every `H_ii > 0`
/// (the cheap necessary condition for `H ≻ 0` that admits the Schur path).
///
/// ```
/// use tangency::{backend::auto::choose_by_shape, MethodUsed};
/// assert_eq!(choose_by_shape(10, 20, true), MethodUsed::NullSpace); // m > n
/// ```
pub fn choose_by_shape(n: usize, m: usize, h_diagonal_positive: bool) -> MethodUsed {
    if m > n {
        return MethodUsed::NullSpace;
    }
    let e = estimate(n, m);
    if h_diagonal_positive && e.schur <= e.dense.min(e.null_space) {
        MethodUsed::Schur
    } else if e.null_space < e.dense {
        MethodUsed::NullSpace
    } else {
        MethodUsed::DenseLblt
    }
}

fn h_diagonal_positive(problem: &Problem) -> bool {
    let n = problem.n();
    let mut diag = vec![0.0f64; n];
    problem.hessian().for_each(|i, j, v| {
        if i == j {
            diag[i] += v;
        }
    });
    diag.iter().all(|d| *d > 0.0)
}

fn describe(e: &CostEstimate) -> String {
    format!(
        "estimated factor time: dense LBLᵀ {:.2e} s, Schur {:.2e} s, null-space {:.2e} s",
        e.dense, e.schur, e.null_space
    )
}

/// Picks the method for dense structure, with the reason in words.
///
/// ```
/// use tangency::{MethodUsed, ProblemBuilder, Triangle};
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .rhs(&[1.0])
///     .build()?;
/// let (method, why) = tangency::pipeline::choose::choose(&p, &Default::default());
/// assert!(matches!(method, MethodUsed::Schur | MethodUsed::NullSpace | MethodUsed::DenseLblt));
/// assert!(!why.is_empty());
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn choose(problem: &Problem, options: &Options) -> (MethodUsed, String) {
    let _ = options;
    let (n, m) = (problem.n(), problem.m());
    if m > n {
        return (
            MethodUsed::NullSpace,
            format!("m = {m} > n = {n}: the constraints are dependent for certain, the null-space rank analysis handles them directly"),
        );
    }
    let e = estimate(n, m);
    if choose_by_shape(n, m, h_diagonal_positive(problem)) == MethodUsed::Schur {
        return (
            MethodUsed::Schur,
            format!(
                "H has a positive diagonal (may be positive definite) and the Schur complement is cheapest; {}",
                describe(&e)
            ),
        );
    }
    let (method, why) = choose_without_schur(problem);
    let pre = if h_diagonal_positive(problem) {
        "cheapest by the cost model"
    } else {
        "H has a non-positive diagonal entry, so it is not positive definite (no Schur complement)"
    };
    (method, format!("{pre}; {why}"))
}

/// The cheaper of dense LBLᵀ and null-space (the fallbacks of the Schur path).
pub fn choose_without_schur(problem: &Problem) -> (MethodUsed, String) {
    let (n, m) = (problem.n(), problem.m());
    if m > n {
        return (MethodUsed::NullSpace, format!("m = {m} > n = {n}"));
    }
    let e = estimate(n, m);
    if choose_by_shape(n, m, false) == MethodUsed::NullSpace {
        (MethodUsed::NullSpace, describe(&e))
    } else {
        (MethodUsed::DenseLblt, describe(&e))
    }
}

/// Creates (without factoring) the backend for `method`, with a fresh symbolic analysis
/// where the method needs one.
///
/// # Errors
/// [`Error::InvalidOption`] for the methods that are drivers of their own rather than
/// factorizations ([`MethodUsed::Pcg`], the distributed method) and for
/// [`MethodUsed::Riccati`] (it needs the stage structure of a [`Plan`](crate::Plan)); the
/// errors of the sparse symbolic analysis.
pub fn make_backend(method: MethodUsed, problem: &Problem, options: &Options) -> Result<Box<dyn KktBackend>> {
    build(method, problem, options, None, None)
}

/// The one place that constructs a backend: a `match` over every [`MethodUsed`], so a new
/// method does not compile until it is handled here.
pub(crate) fn build(
    method: MethodUsed,
    problem: &Problem,
    options: &Options,
    stages: Option<&Arc<StageStructure>>,
    sparse: Option<&Arc<SparseAnalysis>>,
) -> Result<Box<dyn KktBackend>> {
    Ok(match method {
        MethodUsed::DenseLblt => Box::new(DenseLblt::new(problem, options.dense)),
        MethodUsed::Schur => Box::new(Schur::new(problem, options.schur)),
        MethodUsed::NullSpace => Box::new(NullSpace::new(problem, options.null_space)),
        MethodUsed::SparseLdlt => {
            let analysis = match sparse {
                Some(a) => Arc::clone(a),
                None => Arc::new(SparseAnalysis::new(problem, &options.sparse)?),
            };
            Box::new(SparseLdlt::new(analysis)?)
        }
        MethodUsed::Riccati => match stages {
            Some(st) => Box::new(crate::stagewise::RiccatiBackend::new(problem, Arc::clone(st))),
            None => {
                return Err(Error::InvalidOption(
                    "the Riccati plan has no stage structure".to_string(),
                ))
            }
        },
        // Asked for, or auto's choice when a direct factorization would exceed the memory budget.
        MethodUsed::Minres => Box::new(
            crate::iterative::backend::MinresBackend::new(
                problem,
                format!(
                    "preconditioned MINRES (Jacobi and sparse-Cholesky Schur blocks, tolerance {:.0e} per solve): \
                     inertia and verdict NOT verified",
                    options.iterative_tol
                ),
            )
            .with_limits(options.iterative_tol, options.iterative_max_iter),
        ),
        MethodUsed::Pcg => return Err(driver_not_factorization(Method::Pcg)),
        #[cfg(feature = "mpi")]
        MethodUsed::Distributed => return Err(driver_not_factorization(Method::Distributed)),
    })
}

fn driver_not_factorization(method: Method) -> Error {
    let driver = match method {
        Method::Pcg => "crate::iterative::pcg",
        _ => "crate::distributed",
    };
    Error::InvalidOption(format!(
        "the {method} method is a solver of its own ({driver}), not a factorization a plan can hold"
    ))
}

/// What the chooser decided for one structure: the method, why, remarks, and the symbolic
/// objects the method needs (stage structure, sparse analysis).
pub(crate) struct Choice {
    pub(crate) method: MethodUsed,
    pub(crate) reason: String,
    pub(crate) notes: Vec<String>,
    pub(crate) stage_structure: Option<Arc<StageStructure>>,
    pub(crate) sparse: Option<Arc<SparseAnalysis>>,
}

/// The method for `problem` under `options`: the requested one, or auto's choice (sparse
/// when the structure is sparse, else the dense cost model), then the memory rules (a dense
/// method that would not fit goes to sparse under auto and is refused otherwise; a sparse
/// factorization over the memory budget goes to MINRES under auto).
pub(crate) fn choose_plan(problem: &Problem, options: &Options) -> Result<Choice> {
    let (mut stage_structure, mut notes) = (None, Vec::new());
    let requested = |m: MethodUsed| (m, "requested".to_string());
    let (method, reason) = match options.method {
        Method::Dense => requested(MethodUsed::DenseLblt),
        Method::Riccati => {
            let choice = crate::stagewise::analyze(problem, options.stages)?;
            notes = choice.notes;
            match choice.structure {
                Some(st) => {
                    stage_structure = Some(st);
                    (MethodUsed::Riccati, choice.reason)
                }
                None => (MethodUsed::DenseLblt, choice.reason),
            }
        }
        Method::Schur => requested(MethodUsed::Schur),
        Method::NullSpace => requested(MethodUsed::NullSpace),
        Method::Sparse => requested(MethodUsed::SparseLdlt),
        Method::Minres => requested(MethodUsed::Minres),
        Method::Pcg => return Err(driver_not_factorization(Method::Pcg)),
        #[cfg(feature = "mpi")]
        Method::Distributed => return Err(driver_not_factorization(Method::Distributed)),
        Method::Auto if sparse_ldlt::prefer_sparse(problem) => (
            MethodUsed::SparseLdlt,
            "sparse blocks and a large or sparse KKT matrix".to_string(),
        ),
        Method::Auto => choose(problem, options),
    };
    // ---- issue 13: dense methods are sized before anything is allocated; auto takes
    // the sparse factorization instead, a requested method is refused with the figures.
    let (method, reason) = match check_memory(method, problem.n(), problem.m()) {
        Ok(()) => (method, reason),
        Err(e) if options.method == Method::Auto => {
            notes.push(format!("auto did not use the {method} method: {e}"));
            (MethodUsed::SparseLdlt, format!("{method} would not fit in memory"))
        }
        Err(e) => return Err(e),
    };
    // ---- end issue 13
    let mut sparse = match method {
        MethodUsed::SparseLdlt => Some(Arc::new(SparseAnalysis::new(problem, &options.sparse)?)),
        _ => None,
    };
    let (mut method, mut reason) = (method, reason);
    if let (Method::Auto, Some(analysis)) = (options.method, &sparse) {
        // Auto only: a direct factorization that would not fit goes to MINRES.
        let need = analysis.numeric_bytes() as u64;
        let budget = options.memory_budget_bytes.unwrap_or_else(default_memory_budget);
        if need > budget {
            notes.push(format!(
                "auto chose MINRES: the sparse LDLᵀ factorization would need about {need} bytes \
                 ({} stored entries of L), over the memory budget of {budget} bytes",
                analysis.factor_entries()
            ));
            method = MethodUsed::Minres;
            reason = format!("sparse direct factor estimated at {need} bytes > memory budget {budget} bytes");
            sparse = None;
        }
    }
    Ok(Choice {
        method,
        reason,
        notes,
        stage_structure,
        sparse,
    })
}

/// Creates and factors the planned backend; a singular K goes to the null-space rank
/// analysis (which names dependent rows and solves what can be solved) when its dense copy
/// is affordable (order at most `Options::singular_rescue_max_dim`); larger singular sparse
/// systems keep the plain `Singular` diagnosis.
pub(crate) fn factor_with_rescue(
    method: MethodUsed,
    problem: &Problem,
    options: &Options,
    stages: Option<&Arc<StageStructure>>,
    sparse: Option<&Arc<SparseAnalysis>>,
) -> Result<Box<dyn KktBackend>> {
    let mut backend = build(method, problem, options, stages, sparse)?;
    if let Err(e) = backend.factor(problem) {
        let fallback = after_refusal(&*backend, e, problem, options)?;
        backend = fallback;
    }
    let affordable = crate::kkt::dim(problem) <= options.singular_rescue_max_dim;
    match backend.inertia() {
        Some(i) if i.zero > 0 && backend.method() != MethodUsed::NullSpace && affordable => {
            let mut notes: Vec<String> = backend.notes().to_vec();
            notes.push(format!(
                "{} found K singular (inertia {i}); switched to the null-space method with rank analysis",
                backend.method()
            ));
            let mut ns = NullSpace::new(problem, options.null_space);
            for note in notes {
                ns = ns.with_note(note);
            }
            ns.factor(problem)?;
            Ok(Box::new(ns))
        }
        _ => Ok(backend),
    }
}

/// A backend's factorization failed with `err`. The Schur path refuses with
/// [`Error::NotApplicable`] (for example `H` not positive definite): then the cheaper of dense
/// LBLᵀ and null-space takes over, and the refusal is kept in the notes. Every other error
/// is returned as it is.
pub(crate) fn after_refusal(
    refused: &dyn KktBackend,
    err: Error,
    problem: &Problem,
    options: &Options,
) -> Result<Box<dyn KktBackend>> {
    let reason = match err {
        Error::NotApplicable { detail, .. } if refused.method() == MethodUsed::Schur => detail,
        other => return Err(other),
    };
    let (method, _) = choose_without_schur(problem);
    let mut fallback = build(method, problem, options, None, None)?;
    fallback.factor(problem)?;
    let mut notes = refused.notes().to_vec();
    notes.push(format!(
        "Schur-complement method refused: {reason}; fell back to {method}"
    ));
    notes.extend(fallback.notes().iter().cloned());
    Ok(Box::new(Noted { inner: fallback, notes }))
}

/// A backend taken as a fallback, with the notes that say why (the refusal first, then the
/// fallback's own notes). Everything else is the inner backend's.
#[derive(Debug)]
struct Noted {
    inner: Box<dyn KktBackend>,
    notes: Vec<String>,
}

impl KktBackend for Noted {
    fn method(&self) -> MethodUsed {
        self.inner.method()
    }
    fn dim(&self) -> usize {
        self.inner.dim()
    }
    fn factor(&mut self, problem: &Problem) -> Result<()> {
        self.inner.factor(problem)
    }
    fn inertia(&self) -> Option<crate::solution::Inertia> {
        self.inner.inertia()
    }
    fn regularized_pivots(&self) -> usize {
        self.inner.regularized_pivots()
    }
    fn inertia_certified(&self) -> bool {
        self.inner.inertia_certified()
    }
    fn solve_scratch(&self, nrhs: usize) -> faer::dyn_stack::StackReq {
        self.inner.solve_scratch(nrhs)
    }
    fn solve_in_place(&self, rhs: faer::MatMut<'_, f64>, stack: &mut faer::dyn_stack::MemStack) {
        self.inner.solve_in_place(rhs, stack)
    }
    fn riccati(&self) -> Option<&crate::stagewise::RiccatiBackend> {
        self.inner.riccati()
    }
    fn take_solve_failure(&self) -> Option<Error> {
        self.inner.take_solve_failure()
    }
    fn notes(&self) -> &[String] {
        &self.notes
    }
    fn singular_findings(
        &self,
        problem: &Problem,
        c: &[f64],
        b: &[f64],
    ) -> Option<Result<crate::backend::SingularFindings>> {
        self.inner.singular_findings(problem, c, b)
    }
}

/// Whether a direct solve that failed the forward-error rule may be repeated with dense
/// LBLᵀ: another method was used and planned (a dense plan whose K was rescued by the rank
/// analysis must not fall back to dense again), K is nonsingular, and its order is at most
/// [`DENSE_FALLBACK_MAX_DIM`].
pub(crate) fn dense_fallback_allowed(used: MethodUsed, planned: MethodUsed, singular: bool, dim: usize) -> bool {
    used != MethodUsed::DenseLblt && planned != MethodUsed::DenseLblt && !singular && dim <= DENSE_FALLBACK_MAX_DIM
}

/// Bytes a dense method needs at least for sizes `n`, `m`, counted from its dense arrays
/// (8 bytes per entry): dense LBLᵀ holds K (N² with N = n + m) and its factors (N²); Schur
/// holds the Cholesky factor of H (n²), `H⁻¹Aᵀ` (nm), the Schur complement (m²) and a dense
/// copy of H (n²); null-space holds dense `A` (mn), the QR of `Aᵀ` (nm plus n² for the
/// basis), `Z` and `HZ` (2n(n − m)), the reduced Hessian (2(n − m)²) and dense H (n²).
/// `None` for the other methods (their memory is estimated by their own analysis).
///
/// ```
/// use tangency::{backend::auto::dense_bytes, MethodUsed};
/// assert_eq!(dense_bytes(MethodUsed::DenseLblt, 2, 1), Some(8 * 2 * 9));
/// assert!(dense_bytes(MethodUsed::SparseLdlt, 2, 1).is_none());
/// ```
pub fn dense_bytes(method: MethodUsed, n: usize, m: usize) -> Option<u64> {
    let (n, m) = (n as u128, m as u128);
    let k = n.saturating_sub(m);
    let entries = match method {
        MethodUsed::DenseLblt => 2 * (n + m) * (n + m),
        MethodUsed::Schur => 2 * n * n + n * m + m * m,
        MethodUsed::NullSpace => 2 * n * m + 2 * n * n + 2 * n * k + 2 * k * k,
        _ => return None,
    };
    Some(u64::try_from(entries.saturating_mul(8)).unwrap_or(u64::MAX))
}

/// Refuses a dense method whose arrays ([`dense_bytes`]) exceed the memory the process can
/// still allocate ([`crate::memory::available_bytes`]), with [`crate::Error::Resources`]
/// naming the method, the sizes and the figures. Called before anything is allocated.
pub fn check_memory(method: MethodUsed, n: usize, m: usize) -> Result<()> {
    match dense_bytes(method, n, m) {
        Some(need) => crate::memory::check(
            need,
            &format!("the {method} method on n = {n}, m = {m} (dense arrays of K or its blocks)"),
        )
        .map_err(|e| match e {
            crate::Error::Resources { detail } => crate::Error::Resources {
                detail: format!("{detail}; the sparse method (or auto) handles a problem of this size"),
            },
            other => other,
        }),
        None => Ok(()),
    }
}
