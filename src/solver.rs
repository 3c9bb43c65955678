//! The pipeline: [`Plan::analyze`] once per structure, [`Plan::factor`] whenever values
//! change ([`Factorization::refactor`] reuses everything), then
//! [`Factorization::solve`] for any number of right-hand sides. Every solve is refined on
//! the original K and certified (residuals, backward error) before it is returned.

use std::str::FromStr;
use std::time::Instant;

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::Mat;

use crate::backend::dense_lblt::DenseParams;
use crate::backend::null_space::{NullSpace, NullSpaceParams};
use crate::backend::schur::SchurParams;
use crate::backend::sparse_ldlt::{self, SparseAnalysis, SparseLdlt, SparseParams};
use crate::backend::{auto, KktBackend};
use crate::error::{Block, Error, Result};
use crate::kkt;
use crate::problem::{check_vector, inf_norm, Problem};
use crate::solution::{Inertia, MethodUsed, Solution, Timing, Verdict};

/// Which factorization to use.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Default)]
#[non_exhaustive]
pub enum Method {
    /// Let the analysis choose (the cost model of [`crate::backend::auto`]).
    #[default]
    Auto,
    /// Dense symmetric-indefinite LBLᵀ.
    Dense,
    /// Riccati recursion for stage-wise problems; needs [`Options::stages`].
    Riccati,
    /// Schur complement (range space): Cholesky of `H` and of `A H⁻¹ Aᵀ`; falls back to
    /// dense LBLᵀ or null-space when `H` is not positive definite.
    Schur,
    /// Null-space: rank-revealing QR of `Aᵀ`, reduced Hessian `ZᵀHZ`.
    NullSpace,
    /// Sparse LDLᵀ (fill-reducing ordering, regularized pivots, refinement).
    Sparse,
}

impl Method {
    /// Every method name the command line accepts.
    pub const NAMES: &'static [&'static str] = &["auto", "dense", "sparse", "schur", "nullspace", "riccati"];
}

impl FromStr for Method {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self> {
        match s {
            "auto" => Ok(Method::Auto),
            "dense" => Ok(Method::Dense),
            "riccati" => Ok(Method::Riccati),
            "schur" => Ok(Method::Schur),
            "nullspace" => Ok(Method::NullSpace),
            "sparse" => Ok(Method::Sparse),
            other => Err(Error::InvalidOption(format!(
                "unknown method '{other}'; known methods: {}",
                Method::NAMES.join(", ")
            ))),
        }
    }
}

/// Largest KKT order for which a singular factorization is handed to the (dense)
/// null-space rank analysis: 6000 (a dense copy of about 290 MB).
pub const NULL_SPACE_RESCUE_MAX_DIM: usize = 6000;

/// Default number of refinement corrections at most.
pub const DEFAULT_MAX_REFINEMENT_STEPS: usize = 10;
/// Default refinement target for the normwise backward error: `4ε ≈ 8.9e-16`.
pub const DEFAULT_REFINEMENT_TARGET: f64 = 4.0 * f64::EPSILON;
/// Default acceptance level of the backward error for the iterative (MINRES) backend: a
/// backward error above `√ε ≈ 1.5e-8` after refinement is refused with
/// [`Error::Inaccurate`] rather than returned. Direct methods are accepted by their
/// forward-error bound instead ([`DEFAULT_ACCEPT_FORWARD_ERROR`]).
pub const DEFAULT_ACCEPT_BACKWARD_ERROR: f64 = 1.490_116_119_384_765_6e-8;
/// Default acceptance level of the forward-error bound of a direct solve: `1e-2`, the
/// estimated relative error of the equilibrated solution (see [`Solution::forward_error_bound`]).
/// A solve whose bound is larger, or missing (`κω ≥ 1`), falls back to dense LBLᵀ while
/// the problem has order at most [`DENSE_FALLBACK_MAX_DIM`] and ends with
/// [`Error::Uncertified`] otherwise.
pub const DEFAULT_ACCEPT_FORWARD_ERROR: f64 = 1e-2;
/// Largest KKT order for which a solve that fails the forward-error rule is repeated with
/// dense LBLᵀ: 6000 (a dense copy of about 290 MB).
pub const DENSE_FALLBACK_MAX_DIM: usize = 6000;

/// Settings of the whole pipeline (public fields, `..Default::default()` friendly).
///
/// ```
/// use tangency::{Method, Options};
/// let opts = Options { method: Method::Dense, max_refinement_steps: 3, ..Default::default() };
/// assert_eq!(opts.refinement_target, tangency::solver::DEFAULT_REFINEMENT_TARGET);
/// ```
#[derive(Copy, Clone, Debug)]
pub struct Options {
    /// Factorization method. Default: [`Method::Auto`].
    pub method: Method,
    /// Settings of the dense backend.
    pub dense: DenseParams,
    /// Settings of the Schur-complement backend.
    pub schur: SchurParams,
    /// Settings of the null-space backend (also used for the rank analysis of singular K).
    pub null_space: NullSpaceParams,
    /// Settings of the sparse backend.
    pub sparse: SparseParams,
    /// Maximum refinement corrections. Default: [`DEFAULT_MAX_REFINEMENT_STEPS`].
    pub max_refinement_steps: usize,
    /// Stop refining once the backward error is at most this. Default:
    /// [`DEFAULT_REFINEMENT_TARGET`].
    pub refinement_target: f64,
    /// Iterative (MINRES) backend, and direct methods with `accept_forward_error = +∞`:
    /// refuse solutions whose backward error stays above this. Default:
    /// [`DEFAULT_ACCEPT_BACKWARD_ERROR`].
    pub accept_backward_error: f64,
    /// Direct methods: refuse (after the dense fallback) solutions whose forward-error bound
    /// is above this or missing. Default: [`DEFAULT_ACCEPT_FORWARD_ERROR`]. `+∞` switches
    /// the rule off: solves are then accepted by `accept_backward_error`, no condition
    /// number is estimated (cheaper) and `Solution::forward_error_bound` is `None`. For
    /// callers that certify the answer otherwise (the inequality solver's Newton steps).
    pub accept_forward_error: f64,
    /// Largest KKT order for which a singular K found by another method is handed to the
    /// dense null-space rank analysis; larger sparse problems are analyzed with the sparse
    /// factors (see [`crate::backend::sparse_singular`]). Default: [`NULL_SPACE_RESCUE_MAX_DIM`].
    pub singular_rescue_max_dim: usize,
    /// Stage dimensions `(nx, nu, N)` for [`Method::Riccati`] (layout in
    /// [`crate::stagewise`]). Default: `None`.
    pub stages: Option<crate::stagewise::StageDims>,
    /// Memory [`Method::Auto`] may spend on a sparse direct factorization. When the
    /// estimate from the symbolic analysis ([`SparseAnalysis::numeric_bytes`]: the values of
    /// `L` at 8 bytes per stored entry, the factorization workspace, the scaled K values and
    /// scaling vectors) exceeds it, auto uses preconditioned MINRES instead
    /// ([`crate::iterative::backend`]), with a note. Default: `None`, meaning
    /// [`default_memory_budget`] (half of `MemAvailable`).
    pub memory_budget_bytes: Option<u64>,
    /// Tolerance of each MINRES solve when auto falls back to it (see
    /// [`crate::iterative::minres()`]). Default: [`crate::iterative::DEFAULT_TOLERANCE`].
    pub iterative_tol: f64,
    /// Iteration limit of each MINRES solve when auto falls back to it; reaching it gives
    /// [`Error::NotConverged`]. Default: [`crate::iterative::DEFAULT_MAX_ITER`].
    pub iterative_max_iter: usize,
}

/// Fraction of `MemAvailable` (from `/proc/meminfo`) that [`default_memory_budget`] allows a
/// direct factorization: 0.5 (common practice: leave room for the rest of the process and
/// for the system).
pub const MEMORY_BUDGET_FRACTION: f64 = 0.5;
/// Budget used when `/proc/meminfo` cannot be read (non-Linux systems): 4 GiB.
pub const FALLBACK_MEMORY_BUDGET: u64 = 4 << 30;

/// The default memory budget of [`Method::Auto`]: [`MEMORY_BUDGET_FRACTION`] of the
/// `MemAvailable` line of `/proc/meminfo`, or [`FALLBACK_MEMORY_BUDGET`] when it cannot be
/// read.
///
/// ```
/// assert!(tangency::solver::default_memory_budget() > 0);
/// ```
pub fn default_memory_budget() -> u64 {
    std::fs::read_to_string("/proc/meminfo")
        .ok()
        .and_then(|text| {
            text.lines()
                .find(|l| l.starts_with("MemAvailable:"))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|kb| kb.parse::<u64>().ok())
        })
        .map(|kb| (kb as f64 * 1024.0 * MEMORY_BUDGET_FRACTION) as u64)
        .filter(|b| *b > 0)
        .unwrap_or(FALLBACK_MEMORY_BUDGET)
}

impl Default for Options {
    fn default() -> Self {
        Options {
            method: Method::Auto,
            dense: DenseParams::default(),
            schur: SchurParams::default(),
            null_space: NullSpaceParams::default(),
            sparse: SparseParams::default(),
            max_refinement_steps: DEFAULT_MAX_REFINEMENT_STEPS,
            refinement_target: DEFAULT_REFINEMENT_TARGET,
            accept_backward_error: DEFAULT_ACCEPT_BACKWARD_ERROR,
            accept_forward_error: DEFAULT_ACCEPT_FORWARD_ERROR,
            singular_rescue_max_dim: NULL_SPACE_RESCUE_MAX_DIM,
            stages: None,
            memory_budget_bytes: None,
            iterative_tol: crate::iterative::DEFAULT_TOLERANCE,
            iterative_max_iter: crate::iterative::DEFAULT_MAX_ITER,
        }
    }
}

/// The result of the symbolic analysis: sizes, the method chosen and why.
#[derive(Clone, Debug)]
pub struct Plan {
    n: usize,
    m: usize,
    method: MethodUsed,
    reason: String,
    options: Options,
    analyze_s: f64,
    stage_structure: Option<std::sync::Arc<crate::stagewise::StageStructure>>,
    notes: Vec<String>,
    sparse: Option<std::sync::Arc<SparseAnalysis>>,
}

impl Plan {
    /// Analyzes the structure of `problem` and picks a method.
    pub fn analyze(problem: &Problem, options: &Options) -> Result<Plan> {
        let t = Instant::now();
        let (mut stage_structure, mut notes) = (None, Vec::new());
        let (method, reason) = match options.method {
            Method::Dense => (MethodUsed::DenseLblt, "requested".to_string()),
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
            Method::Schur => (MethodUsed::Schur, "requested".to_string()),
            Method::NullSpace => (MethodUsed::NullSpace, "requested".to_string()),
            Method::Sparse => (MethodUsed::SparseLdlt, "requested".to_string()),
            Method::Auto if sparse_ldlt::prefer_sparse(problem) => (
                MethodUsed::SparseLdlt,
                "sparse blocks and a large or sparse KKT matrix".to_string(),
            ),
            Method::Auto => auto::choose(problem, options),
        };
        // ---- issue 13: dense methods are sized before anything is allocated; auto takes
        // the sparse factorization instead, a requested method is refused with the figures.
        let (method, reason) = match auto::check_memory(method, problem.n(), problem.m()) {
            Ok(()) => (method, reason),
            Err(e) if options.method == Method::Auto => {
                notes.push(format!("auto did not use the {method} method: {e}"));
                (MethodUsed::SparseLdlt, format!("{method} would not fit in memory"))
            }
            Err(e) => return Err(e),
        };
        // ---- end issue 13
        let mut sparse = match method {
            MethodUsed::SparseLdlt => Some(std::sync::Arc::new(SparseAnalysis::new(problem, &options.sparse)?)),
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
        Ok(Plan {
            n: problem.n(),
            m: problem.m(),
            method,
            reason,
            options: *options,
            analyze_s: t.elapsed().as_secs_f64(),
            stage_structure,
            notes,
            sparse,
        })
    }

    /// The method the analysis chose.
    pub fn method(&self) -> MethodUsed {
        self.method
    }

    /// Why the method was chosen, in words.
    pub fn reason(&self) -> &str {
        &self.reason
    }

    /// The options this plan was made with (refinement settings are reused by
    /// [`crate::diagnostics`]).
    pub fn options(&self) -> &Options {
        &self.options
    }

    /// Numeric factorization of `problem` (which must have the analyzed structure).
    ///
    /// # Errors
    /// [`Error::StructureChanged`] when `problem` has other sizes than the plan or, for a
    /// sparse plan, another sparsity pattern (index arrays compared, see
    /// [`KktPattern::verify`](crate::kkt::sparse::KktPattern::verify)).
    pub fn factor(&self, problem: &Problem) -> Result<Factorization> {
        self.check_structure(problem)?;
        if let Some(analysis) = &self.sparse {
            analysis.pattern().verify(problem)?;
        }
        let t = Instant::now();
        let backend = self.factor_backend(problem)?;
        let factor_s = t.elapsed().as_secs_f64();
        let dim = kkt::dim(problem);
        let mut norm_rows = vec![0.0; dim];
        let (eq, norm_eq) = kkt::equilibrate::ruiz(problem);
        let kappa = std::sync::Mutex::new(KappaCache::new(dim, backend.solve_scratch(2)));
        Ok(Factorization {
            plan: self.clone(),
            problem: problem.clone(),
            norm_k: kkt::norm_inf_with(problem, &mut norm_rows),
            norm_rows,
            backend,
            factor_s,
            eq,
            norm_eq,
            kappa,
        })
    }

    /// Creates and factors the planned backend; a singular K goes to the null-space rank
    /// analysis (which names dependent rows and solves what can be solved).
    fn factor_backend(&self, problem: &Problem) -> Result<Box<dyn KktBackend>> {
        let mut backend: Box<dyn KktBackend> = match self.method {
            MethodUsed::SparseLdlt => {
                let analysis = match &self.sparse {
                    Some(a) => std::sync::Arc::clone(a),
                    None => std::sync::Arc::new(SparseAnalysis::new(problem, &self.options.sparse)?),
                };
                Box::new(SparseLdlt::new(analysis)?)
            }
            MethodUsed::Riccati => match &self.stage_structure {
                Some(st) => Box::new(crate::stagewise::RiccatiBackend::new(problem, st.clone())),
                None => {
                    return Err(Error::InvalidOption(
                        "the Riccati plan has no stage structure".to_string(),
                    ))
                }
            },
            _ => auto::make_backend(self.method, problem, &self.options),
        };
        backend.factor(problem)?;
        // The rank analysis is dense (column-pivoted QR of Aᵀ): only rescue problems whose
        // dense copy is affordable; larger singular sparse systems keep the plain
        // `Singular` diagnosis.
        let affordable = kkt::dim(problem) <= self.options.singular_rescue_max_dim;
        match backend.inertia() {
            Some(i) if i.zero > 0 && backend.method() != MethodUsed::NullSpace && affordable => {
                let mut notes: Vec<String> = backend.notes().to_vec();
                notes.push(format!(
                    "{} found K singular (inertia {i}); switched to the null-space method with rank analysis",
                    backend.method()
                ));
                let mut ns = NullSpace::new(problem, self.options.null_space);
                for note in notes {
                    ns = ns.with_note(note);
                }
                ns.factor(problem)?;
                Ok(Box::new(ns))
            }
            _ => Ok(backend),
        }
    }

    fn check_structure(&self, problem: &Problem) -> Result<()> {
        if problem.n() != self.n || problem.m() != self.m {
            return Err(Error::StructureChanged {
                detail: format!(
                    "the plan is for n = {}, m = {} but the problem has n = {}, m = {}",
                    self.n,
                    self.m,
                    problem.n(),
                    problem.m()
                ),
            });
        }
        Ok(())
    }
}

/// A numeric factorization of one KKT matrix, ready for any number of solves.
///
/// ```
/// use tangency::{Options, Plan, ProblemBuilder, Triangle, Verdict};
/// let p = ProblemBuilder::new()
///     .hessian_row_major(2, &[2.0, 0.0, 0.0, 2.0], Triangle::Full)
///     .constraints_row_major(1, 2, &[1.0, 1.0])
///     .rhs(&[1.0])
///     .build()?;
/// let plan = Plan::analyze(&p, &Options::default())?;
/// let f = plan.factor(&p)?;
/// let s1 = f.solve()?;                          // the problem's own c and b
/// assert_eq!(s1.verdict, Some(Verdict::Minimizer));
/// let s2 = f.solve_with(&[1.0, 0.0], &[2.0])?;  // new data, same factorization
/// assert!((s2.x[0] + s2.x[1] - 2.0).abs() < 1e-14);
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Debug)]
pub struct Factorization {
    plan: Plan,
    problem: Problem,
    norm_k: f64,
    norm_rows: Vec<f64>,
    backend: Box<dyn KktBackend>,
    factor_s: f64,
    /// Ruiz scaling `D` of K and `‖DKD‖∞`: the norm of the accuracy certificate.
    eq: Vec<f64>,
    norm_eq: f64,
    /// `κ₁(DKD)` estimated once per factorization, at the first solve.
    kappa: std::sync::Mutex<KappaCache>,
}

/// The condition estimate behind the forward-error bounds, computed at the first solve after
/// a factorization with preallocated work vectors (no allocation in the steady state).
struct KappaCache {
    value: Option<f64>,
    scratch: crate::diagnostics::condition::Norm1Scratch,
    buf: MemBuffer,
    buf_bytes: usize,
}

impl std::fmt::Debug for KappaCache {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("KappaCache")
            .field("value", &self.value)
            .finish_non_exhaustive()
    }
}

impl KappaCache {
    fn new(dim: usize, req: faer::dyn_stack::StackReq) -> Self {
        KappaCache {
            value: None,
            scratch: crate::diagnostics::condition::Norm1Scratch::new(dim),
            buf: MemBuffer::new(req),
            buf_bytes: req.size_bytes(),
        }
    }

    fn reset(&mut self, req: faer::dyn_stack::StackReq) {
        self.value = None;
        if req.size_bytes() > self.buf_bytes {
            self.buf = MemBuffer::new(req);
            self.buf_bytes = req.size_bytes();
        }
    }
}

impl Factorization {
    /// The plan this factorization was made from.
    pub fn plan(&self) -> &Plan {
        &self.plan
    }

    /// The problem (values as of the last factorization).
    pub fn problem(&self) -> &Problem {
        &self.problem
    }

    /// Inertia of K, when the method observes it.
    pub fn inertia(&self) -> Option<Inertia> {
        self.backend.inertia()
    }

    /// `‖K‖∞` of the original K.
    pub fn norm_inf(&self) -> f64 {
        self.norm_k
    }

    /// The backend, for diagnostics that need raw solves with K.
    pub fn backend(&self) -> &dyn KktBackend {
        &*self.backend
    }

    /// Seconds spent in the last numeric factorization.
    pub fn factor_seconds(&self) -> f64 {
        self.factor_s
    }

    /// `κ₁(DKD)`, the 1-norm condition estimate of the equilibrated K (`D` the Ruiz scaling
    /// of [`crate::kkt::equilibrate`]) behind every [`Solution::forward_error_bound`]:
    /// estimated once per factorization from a few solves with the factors (Hager–Higham,
    /// [`crate::diagnostics::condition`]) and cached. `+∞` when a solve overflowed.
    pub fn scaled_condition(&self) -> f64 {
        let mut guard = match self.kappa.lock() {
            Ok(g) => g,
            Err(poisoned) => poisoned.into_inner(),
        };
        if let Some(v) = guard.value {
            return v;
        }
        let cache = &mut *guard;
        let req = self.backend.solve_scratch(2);
        if req.size_bytes() > cache.buf_bytes {
            cache.buf = MemBuffer::new(req);
            cache.buf_bytes = req.size_bytes();
        }
        let (eq, backend, buf) = (&self.eq, &self.backend, &mut cache.buf);
        let est = crate::diagnostics::condition::norm1_estimate_in(&mut cache.scratch, |mut block, _t| {
            // (DKD)⁻¹ = D⁻¹ K⁻¹ D⁻¹, symmetric.
            for j in 0..block.ncols() {
                for (i, d) in eq.iter().enumerate() {
                    block[(i, j)] /= d;
                }
            }
            backend.solve_in_place(block.as_mut(), MemStack::new(buf));
            for j in 0..block.ncols() {
                for (i, d) in eq.iter().enumerate() {
                    block[(i, j)] /= d;
                }
            }
        });
        let _ = self.backend.take_solve_failure();
        let kappa = if eq.is_empty() {
            0.0
        } else if est.estimate.is_finite() {
            self.norm_eq * est.estimate
        } else {
            f64::INFINITY
        };
        cache.value = Some(kappa);
        kappa
    }

    /// Normwise backward error of `z` for `rhs` measured on the equilibrated system:
    /// `‖D r‖∞ / (‖DKD‖∞ ‖D⁻¹z‖∞ + ‖D rhs‖∞)` with `r = rhs − Kz` given.
    fn scaled_backward(&self, r: &[f64], z: &[f64], rhs: &[f64]) -> f64 {
        let (mut nr, mut nz, mut nb) = (0.0f64, 0.0f64, 0.0f64);
        for (i, d) in self.eq.iter().enumerate() {
            nr = nr.max((r[i] * d).abs());
            nz = nz.max((z[i] / d).abs());
            nb = nb.max((rhs[i] * d).abs());
        }
        if nr.is_nan() || nz.is_nan() {
            return f64::INFINITY;
        }
        if nr == 0.0 {
            return 0.0;
        }
        let denom = self.norm_eq * nz + nb;
        if denom == 0.0 || !nr.is_finite() || !denom.is_finite() {
            f64::INFINITY
        } else {
            nr / denom
        }
    }

    fn refresh_equilibration(&mut self) {
        // With the forward-error rule off (`accept_forward_error = +∞`, the inequality
        // solver's Newton steps) no solve uses the scaling; keep the first one (any positive
        // D gives a valid κ₁(DKD) bound, only its tightness depends on D) and save the Ruiz
        // sweeps, which were a third of an interior-point iteration on stage-wise problems.
        if self.plan.options.accept_forward_error == f64::INFINITY {
            return;
        }
        self.norm_eq = kkt::equilibrate::ruiz_into(&self.problem, &mut self.eq, &mut self.norm_rows);
    }

    /// Factors new values of `H` and `A` with the same dimensions (and sparsity pattern)
    /// without a new analysis, reusing all storage. `c` and `b` are taken from `problem`.
    pub fn refactor(&mut self, problem: &Problem) -> Result<()> {
        self.plan.check_structure(problem)?;
        self.problem.update_values(problem)?;
        let t = Instant::now();
        if self.backend.method() == self.plan.method && self.backend.notes().is_empty() {
            self.backend.factor(&self.problem)?;
            if self.backend.inertia().is_some_and(|i| i.zero > 0) && self.backend.method() != MethodUsed::NullSpace {
                self.backend = self.plan.factor_backend(&self.problem)?;
            }
        } else {
            // The last factorization fell back or was rescued: start from the plan again.
            self.backend = self.plan.factor_backend(&self.problem)?;
        }
        self.norm_k = kkt::norm_inf_with(&self.problem, &mut self.norm_rows);
        self.refresh_equilibration();
        let req = self.backend.solve_scratch(2);
        match self.kappa.get_mut() {
            Ok(cache) => cache.reset(req),
            Err(poisoned) => poisoned.into_inner().reset(req),
        }
        self.factor_s = t.elapsed().as_secs_f64();
        Ok(())
    }

    /// The verdict implied by the inertia, or the singularity error.
    pub fn verdict(&self) -> Result<Option<Verdict>> {
        let Some(inertia) = self.backend.inertia() else {
            return Ok(None);
        };
        let (n, m) = (self.problem.n(), self.problem.m());
        if inertia.zero > 0 {
            return match self
                .backend
                .singular_findings(&self.problem, &self.problem.c, &self.problem.b)
            {
                Some(findings) => findings.map(|f| f.verdict),
                None => Err(Error::Singular {
                    inertia,
                    detail: singular_detail(n, m, inertia),
                }),
            };
        }
        // Forced (regularized) pivots impose signs: the inertia is evidence only when the
        // backend confirmed it another way (sparse_ldlt: exact Schur-complement correction).
        // solve_into also withholds the verdict when refinement then stalls.
        if !self.backend.inertia_certified() {
            return Ok(None);
        }
        Ok(Some(if inertia == Inertia::new(n, m, 0) {
            Verdict::Minimizer
        } else {
            Verdict::Saddle
        }))
    }

    /// Solves with the problem's own `c` and `b`.
    pub fn solve(&self) -> Result<Solution> {
        self.solve_with(&self.problem.c, &self.problem.b)
    }

    /// Solves for new `c` (length n) and `b` (length m) with the same factorization.
    /// Allocates a [`Workspace`] and the [`Solution`]; use [`solve_into`](Self::solve_into)
    /// in loops.
    pub fn solve_with(&self, c: &[f64], b: &[f64]) -> Result<Solution> {
        let mut ws = self.workspace();
        let mut out = Solution::empty(self.problem.n(), self.problem.m(), self.backend.method());
        self.solve_into(c, b, &mut ws, &mut out)?;
        Ok(out)
    }

    /// Solves for each column pair of `c` (n×k) and `b` (m×k), reusing one workspace.
    pub fn solve_many(&self, c: faer::MatRef<'_, f64>, b: faer::MatRef<'_, f64>) -> Result<Vec<Solution>> {
        let (n, m) = (self.problem.n(), self.problem.m());
        if c.nrows() != n || b.nrows() != m || c.ncols() != b.ncols() {
            return Err(Error::DimensionMismatch {
                block: if c.nrows() != n { Block::C } else { Block::B },
                rows: if c.nrows() != n { c.nrows() } else { b.nrows() },
                cols: if c.nrows() != n { c.ncols() } else { b.ncols() },
                expected_rows: if c.nrows() != n { n } else { m },
                expected_cols: c.ncols(),
            });
        }
        let mut ws = self.workspace();
        let (mut cj, mut bj) = (vec![0.0; n], vec![0.0; m]);
        let mut all = Vec::with_capacity(c.ncols());
        for j in 0..c.ncols() {
            cj.iter_mut().enumerate().for_each(|(i, v)| *v = c[(i, j)]);
            bj.iter_mut().enumerate().for_each(|(i, v)| *v = b[(i, j)]);
            let mut out = Solution::empty(n, m, self.backend.method());
            self.solve_into(&cj, &bj, &mut ws, &mut out)?;
            all.push(out);
        }
        Ok(all)
    }

    /// Scratch memory for [`solve_into`](Self::solve_into), sized for this factorization.
    pub fn workspace(&self) -> Workspace {
        let (n, m) = (self.problem.n(), self.problem.m());
        Workspace::new(n, m, self.backend.solve_scratch(1))
    }

    /// Solves for `c` and `b` into `out`, using only the memory in `ws` and `out`: no heap
    /// allocation when `out` already has the right sizes and the solve succeeds without
    /// notes (the steady state of a control loop).
    pub fn solve_into(&self, c: &[f64], b: &[f64], ws: &mut Workspace, out: &mut Solution) -> Result<()> {
        let (n, m) = (self.problem.n(), self.problem.m());
        check_vector(Block::C, c, n)?;
        check_vector(Block::B, b, m)?;
        ws.check(n, m)?;
        // ---- issue 13 (extreme scaling): a right-hand side far from unit size is solved
        // scaled by a power of two (exact), and the answer scaled back; a non-finite answer
        // is refused below. Allocates only in that extreme case.
        if let Some(s) = rhs_power_of_two_scale(c, b) {
            let cs: Vec<f64> = c.iter().map(|v| v * s).collect();
            let bs: Vec<f64> = b.iter().map(|v| v * s).collect();
            self.solve_into(&cs, &bs, ws, out)?;
            return unscale_solution(out, s);
        }
        // ---- end issue 13
        // A refactorization may have changed the backend (a fallback, the rank analysis) and
        // with it the scratch a solve needs: grow the buffer then (only then does this allocate).
        ws.reserve(self.backend.solve_scratch(1));
        let singular = self.backend.inertia().is_some_and(|i| i.zero > 0);
        let (verdict, findings) = if singular {
            match self.backend.singular_findings(&self.problem, c, b) {
                Some(f) => {
                    let f = f?;
                    (f.verdict, Some(f))
                }
                None => (self.verdict()?, None),
            }
        } else {
            (self.verdict()?, None)
        };
        let t = Instant::now();
        // Forget failures of solves made outside this call (condition estimates, probes).
        let _ = self.backend.take_solve_failure();
        let Workspace {
            buf,
            rhs,
            z,
            r,
            best,
            col,
            grad,
            ..
        } = ws;
        let stack = MemStack::new(buf);
        for (dst, v) in rhs.iter_mut().zip(c.iter().map(|v| -v).chain(b.iter().copied())) {
            *dst = v;
        }
        for (i, v) in rhs.iter().enumerate() {
            col[(i, 0)] = *v;
        }
        self.backend.solve_in_place(col.as_mut(), stack);
        for (i, zi) in z.iter_mut().enumerate() {
            *zi = col[(i, 0)];
        }
        let (_, steps, current) = self.refine(rhs, z, r, grad, best, col, stack);
        if let Some(failure) = self.backend.take_solve_failure() {
            return Err(failure);
        }
        // Residuals of the returned point, with the caller's c and b: r = rhs − K z holds
        // [−c − Hx − Aᵀy; b − Ax]. Refinement leaves the residual of the returned z in r
        // unless it had to step back to an earlier iterate.
        if !current {
            kkt::residual_and_gradient(&self.problem, z, rhs, r, grad);
        }
        let backward_error = normwise(r, self.norm_k, z, rhs);
        let by_backward_error =
            self.backend.method() == MethodUsed::Minres || self.plan.options.accept_forward_error == f64::INFINITY;
        let forward_error_bound = if by_backward_error {
            if backward_error.is_nan() || backward_error > self.plan.options.accept_backward_error {
                return Err(Error::Inaccurate {
                    backward_error,
                    steps,
                    limit: self.plan.options.accept_backward_error,
                });
            }
            None
        } else {
            let scaled = self.scaled_backward(r, z, rhs);
            let kappa = self.scaled_condition();
            let bound = crate::diagnostics::condition::forward_error_bound(kappa, scaled);
            let limit = self.plan.options.accept_forward_error;
            if bound.is_nan() || bound > limit || z.iter().any(|v| !v.is_finite()) {
                let refused = self.fallback_or_refuse(c, b, out, backward_error, scaled, kappa, bound, singular);
                // ---- issue 13: a point beyond double range is named as such.
                if let Err(Error::Uncertified { .. }) = &refused {
                    if let Some(k) = z.iter().position(|v| !v.is_finite()) {
                        return Err(non_finite_solution(k, n, z[k]));
                    }
                }
                return refused;
            }
            Some(bound)
        };
        // ---- issue 13: a non-finite point is never returned as solved.
        if let Some(k) = z.iter().position(|v| !v.is_finite()) {
            return Err(non_finite_solution(k, n, z[k]));
        }
        // ---- end issue 13
        out.x.resize(n, 0.0);
        out.y.resize(m, 0.0);
        out.x.copy_from_slice(&z[..n]);
        out.y.copy_from_slice(&z[n..]);
        out.forward_error_bound = forward_error_bound;
        out.dual_residual = inf_norm(&r[..n]);
        out.primal_residual = inf_norm(&r[n..]);
        // objective = ½xᵀHx + cᵀx = ½xᵀ(Hx + c) + ½cᵀx, with Hx + c left in grad by the
        // residual of the returned point.
        let x = &out.x;
        out.objective = 0.5 * crate::problem::dot(x, grad) + 0.5 * crate::problem::dot(c, x);
        out.backward_error = backward_error;
        out.refinement_steps = steps;
        out.inertia = self.backend.inertia();
        // With forced pivots the verdict also needs a solve refined to machine level.
        let regularized_but_inaccurate = self.backend.regularized_pivots() > 0 && backward_error > 1e3 * f64::EPSILON;
        out.verdict = if regularized_but_inaccurate { None } else { verdict };
        out.method = self.backend.method();
        out.timing = Timing {
            analyze_s: self.plan.analyze_s,
            factor_s: self.factor_s,
            solve_s: t.elapsed().as_secs_f64(),
        };
        out.notes.clear();
        out.notes.extend(self.plan.notes.iter().cloned());
        out.notes.extend(self.backend.notes().iter().cloned());
        out.null_direction = None;
        if let Some(f) = findings {
            out.notes.extend(f.notes);
            out.null_direction = f.null_direction;
        }
        if backward_error > 1e3 * f64::EPSILON {
            out.notes.push(format!(
                "backward error {backward_error:.1e} stayed above the refinement target after {steps} step(s): \
                 K is ill-conditioned, trust fewer digits"
            ));
        }
        if !self.backend.inertia_certified() && self.backend.regularized_pivots() > 0 {
            out.notes.push(format!(
                "verdict unverified: {} pivot(s) were regularized (sign imposed) and the inertia could not be \
                 confirmed; the inertia shown is that of the regularized factorization",
                self.backend.regularized_pivots()
            ));
        }
        if regularized_but_inaccurate && verdict.is_some() {
            out.notes.push(format!(
                "verdict withheld: {} pivot(s) were regularized and refinement did not reach machine precision",
                self.backend.regularized_pivots()
            ));
        }
        Ok(())
    }

    /// A direct solve failed the forward-error rule: repeat it with dense LBLᵀ when that can
    /// do better (another method was used, K nonsingular, order at most
    /// [`DENSE_FALLBACK_MAX_DIM`]), else refuse with [`Error::Uncertified`].
    #[allow(clippy::too_many_arguments)]
    fn fallback_or_refuse(
        &self,
        c: &[f64],
        b: &[f64],
        out: &mut Solution,
        backward_error: f64,
        scaled: f64,
        kappa: f64,
        bound: f64,
        singular: bool,
    ) -> Result<()> {
        let method = self.backend.method();
        let limit = self.plan.options.accept_forward_error;
        let dim = self.backend.dim();
        let bound_words = if bound.is_finite() {
            format!("{bound:.1e}")
        } else {
            "missing (κω ≥ 1)".to_string()
        };
        // The plan decides, not the backend: a dense plan whose K was rescued by the rank
        // analysis must not fall back to dense again.
        if method != MethodUsed::DenseLblt
            && self.plan.method != MethodUsed::DenseLblt
            && !singular
            && dim <= DENSE_FALLBACK_MAX_DIM
        {
            let opts = Options {
                method: Method::Dense,
                ..self.plan.options
            };
            let dense = Plan::analyze(&self.problem, &opts)?.factor(&self.problem)?;
            let mut sol = dense.solve_with(c, b)?;
            sol.notes.insert(
                0,
                format!(
                    "{method}: forward-error bound {bound_words} above the acceptance level {limit:.0e} \
                     (κ₁(DKD) ≈ {kappa:.1e}, scaled backward error {scaled:.1e}); solved again with dense LBLᵀ"
                ),
            );
            *out = sol;
            return Ok(());
        }
        Err(Error::Uncertified {
            method: method.as_str(),
            forward_error_bound: bound,
            condition_estimate: kappa,
            backward_error,
            limit,
        })
    }

    /// Normwise backward error `‖rhs − Kz‖∞ / (‖K‖∞‖z‖∞ + ‖rhs‖∞)` on the original K.
    pub fn backward_error(&self, rhs: &[f64], z: &[f64]) -> f64 {
        let mut r = vec![0.0; rhs.len()];
        kkt::residual(&self.problem, z, rhs, &mut r);
        normwise(&r, self.norm_k, z, rhs)
    }

    /// Iterative refinement on the original K: correct `z` until the backward error is at
    /// most the target, stops improving (by at least a factor 2), or the step limit is
    /// reached. Returns the final backward error, the corrections applied, and whether `r`
    /// and `grad` (`Hx + c`) still belong to the returned `z`.
    #[allow(clippy::too_many_arguments)]
    fn refine(
        &self,
        rhs: &[f64],
        z: &mut [f64],
        r: &mut [f64],
        grad: &mut [f64],
        best: &mut [f64],
        col: &mut Mat<f64>,
        stack: &mut MemStack,
    ) -> (f64, usize, bool) {
        let opts = &self.plan.options;
        let dim = rhs.len();
        best.copy_from_slice(z);
        kkt::residual_and_gradient(&self.problem, z, rhs, r, grad);
        // Progress is measured on the larger of the backward errors on K and on DKD.
        let both = |r: &[f64], z: &[f64]| normwise(r, self.norm_k, z, rhs).max(self.scaled_backward(r, z, rhs));
        let mut omega = both(r, z);
        let mut steps = 0;
        while steps < opts.max_refinement_steps && omega > opts.refinement_target && omega.is_finite() {
            for i in 0..dim {
                col[(i, 0)] = r[i];
            }
            self.backend.solve_in_place(col.as_mut(), stack);
            for i in 0..dim {
                z[i] += col[(i, 0)];
            }
            kkt::residual_and_gradient(&self.problem, z, rhs, r, grad);
            let next = both(r, z);
            steps += 1;
            if next.is_nan() || next >= omega {
                // No progress: keep the better iterate (r and grad belong to the rejected one).
                z.copy_from_slice(best);
                return (omega, steps, false);
            }
            best.copy_from_slice(z);
            let improved_enough = next <= 0.5 * omega;
            omega = next;
            if !improved_enough {
                break;
            }
        }
        (omega, steps, true)
    }
}

// ---- issue 13 (extreme scaling) helpers for `solve_into`.

/// Right-hand sides whose largest entry lies outside `[2⁻⁴⁰⁰, 2⁴⁰⁰]` are solved scaled to
/// unit size: beyond that, products with K and the refinement residuals may overflow or
/// lose digits to underflow (common practice: scale by a power of two, which is exact).
const RHS_SAFE_EXPONENT: i32 = 400;

/// The power of two `s` that brings `max(|c|, |b|)` near 1, when it lies outside the safe
/// range; `None` otherwise (and for a zero right-hand side).
fn rhs_power_of_two_scale(c: &[f64], b: &[f64]) -> Option<f64> {
    let mx = c.iter().chain(b).fold(0.0f64, |a, v| a.max(v.abs()));
    if mx == 0.0 || !mx.is_finite() {
        return None;
    }
    let e = mx.log2().round() as i32;
    if e.abs() <= RHS_SAFE_EXPONENT {
        return None;
    }
    // 2^(−e), kept within the normal range of f64 (|e| ≤ 1020).
    Some(2f64.powi(-e.clamp(-1020, 1020)))
}

/// Scales a solution of the system with right-hand side `s·rhs` back by `1/s`: `x`, `y`
/// and the residuals by `1/s`, the objective by `1/s²`. Refuses an unrepresentable result.
fn unscale_solution(out: &mut Solution, s: f64) -> Result<()> {
    let inv = 1.0 / s;
    for v in out.x.iter_mut().chain(out.y.iter_mut()) {
        *v *= inv;
    }
    out.primal_residual *= inv;
    out.dual_residual *= inv;
    out.objective = out.objective * inv * inv;
    let n = out.x.len();
    if let Some(k) = out.x.iter().chain(&out.y).position(|v| !v.is_finite()) {
        let z = out.x.iter().chain(&out.y).nth(k).copied().unwrap_or(f64::NAN);
        return Err(non_finite_solution(k, n, z));
    }
    if !out.objective.is_finite() {
        return Err(Error::Overflow {
            detail: format!(
                "the point is finite (largest |x| = {:.3e}) but the objective ½xᵀHx + cᵀx exceeds double range",
                out.x.iter().fold(0.0f64, |a, v| a.max(v.abs()))
            ),
        });
    }
    out.notes.push(format!(
        "the right-hand side was scaled by 2^{} (exact) for the solve and the answer scaled back",
        s.log2().round() as i64
    ));
    Ok(())
}

fn non_finite_solution(k: usize, n: usize, v: f64) -> Error {
    let (what, idx) = if k < n { ("x", k) } else { ("y (multiplier)", k - n) };
    Error::Overflow {
        detail: format!(
            "entry {idx} (0-based) of {what} came out as {v} after scaling the right-hand side to unit size: \
             the solution exceeds double range (about 1.8e308); rescale the problem's units"
        ),
    }
}
// ---- end issue 13

/// Reusable scratch memory for [`Factorization::solve_into`]: the backend's solve scratch
/// (faer `MemBuffer`) plus a few vectors of length `n + m` and one of length `n`.
pub struct Workspace {
    n: usize,
    m: usize,
    buf: MemBuffer,
    buf_bytes: usize,
    rhs: Vec<f64>,
    z: Vec<f64>,
    r: Vec<f64>,
    best: Vec<f64>,
    col: Mat<f64>,
    grad: Vec<f64>,
}

impl std::fmt::Debug for Workspace {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("Workspace")
            .field("n", &self.n)
            .field("m", &self.m)
            .field("bytes", &self.memory_usage())
            .finish()
    }
}

impl Workspace {
    fn new(n: usize, m: usize, req: faer::dyn_stack::StackReq) -> Self {
        let dim = n + m;
        Workspace {
            n,
            m,
            buf: MemBuffer::new(req),
            buf_bytes: req.size_bytes(),
            rhs: vec![0.0; dim],
            z: vec![0.0; dim],
            r: vec![0.0; dim],
            best: vec![0.0; dim],
            col: Mat::zeros(dim, 1),
            grad: vec![0.0; n],
        }
    }

    /// Bytes held by this workspace.
    pub fn memory_usage(&self) -> usize {
        self.buf_bytes + (5 * (self.n + self.m) + self.n) * std::mem::size_of::<f64>()
    }

    fn reserve(&mut self, req: faer::dyn_stack::StackReq) {
        if req.size_bytes() > self.buf_bytes {
            self.buf = MemBuffer::new(req);
            self.buf_bytes = req.size_bytes();
        }
    }

    fn check(&self, n: usize, m: usize) -> Result<()> {
        if (self.n, self.m) != (n, m) {
            return Err(Error::StructureChanged {
                detail: format!(
                    "the workspace is for n = {}, m = {}, not n = {n}, m = {m}",
                    self.n, self.m
                ),
            });
        }
        Ok(())
    }
}

/// Normwise backward error `‖r‖∞ / (‖K‖∞‖z‖∞ + ‖rhs‖∞)` (Rigal & Gaches 1967).
pub fn normwise(r: &[f64], norm_k: f64, z: &[f64], rhs: &[f64]) -> f64 {
    let denom = norm_k * inf_norm(z) + inf_norm(rhs);
    let num = inf_norm(r);
    // issue 13: the backward error of a non-finite point or residual is never 0.
    if !num.is_finite() || !denom.is_finite() {
        return f64::INFINITY;
    }
    if num == 0.0 {
        0.0
    } else if denom == 0.0 || !num.is_finite() {
        f64::INFINITY
    } else {
        num / denom
    }
}

fn singular_detail(n: usize, m: usize, inertia: Inertia) -> String {
    if m > n {
        format!("there are more constraints ({m}) than variables ({n}), so at least {} constraint row(s) depend on the others", m - n)
    } else if inertia.negative < m {
        "either some constraint rows are linearly dependent (redundant or contradictory), \
         or the objective is flat along a feasible direction (singular reduced Hessian)"
            .to_string()
    } else {
        "the objective is flat along a feasible direction (singular reduced Hessian): \
         minimizers are not unique, or the objective is unbounded below"
            .to_string()
    }
}

/// One call from problem to certified solution: analyze, factor, solve.
///
/// ```
/// use tangency::{solve, Options, ProblemBuilder, Triangle};
/// // Nocedal & Wright (2006), Example 16.2: x* = (2, −1, 1), y* = (−3, 2) in our convention.
/// let p = ProblemBuilder::new()
///     .hessian_row_major(3, &[6., 2., 1., 2., 5., 2., 1., 2., 4.], Triangle::Full)
///     .linear(&[-8., -3., -3.])
///     .constraints_row_major(2, 3, &[1., 0., 1., 0., 1., 1.])
///     .rhs(&[3., 0.])
///     .build()?;
/// let s = solve(&p, &Options::default())?;
/// assert!((s.x[0] - 2.0).abs() < 1e-13 && (s.y[0] + 3.0).abs() < 1e-13);
/// assert!((s.objective + 3.5).abs() < 1e-13);
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn solve(problem: &Problem, options: &Options) -> Result<Solution> {
    let plan = Plan::analyze(problem, options)?;
    let f = plan.factor(problem)?;
    f.solve()
}
