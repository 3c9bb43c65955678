//! `tangency inspect`: what can be said about a problem without solving for `x`.
//!
//! Sizes and nonzeros, a symmetry check of H, the rank of the constraints and which rows
//! depend on the others, the inertia of K, a condition estimate, and the verdict the
//! inertia predicts. It factors K once (no solve with `c`, `b`) and estimates the condition
//! from a few solves with unit-like vectors; it works on a singular K too, where a solve
//! would be refused.

use std::fmt;
use std::path::Path;

use super::condition::{self, ConditionEstimate};
use crate::diagnostics::rank::{RankAnalysis, DEFAULT_CONSISTENCY_TOLERANCE};
use crate::error::{Error, Result};
use crate::problem::{Matrix, Problem, DEFAULT_SYMMETRY_TOLERANCE};
use crate::report::Json;
use crate::solution::{Inertia, Verdict};
use crate::solver::{Factorization, Method, Options, Plan};

/// How symmetric H is.
#[derive(Clone, Debug, PartialEq)]
pub struct SymmetryCheck {
    /// What was checked: `"stored H"` (a validated [`Problem`] stores H exactly symmetric)
    /// or the file name with how it was declared.
    pub source: String,
    /// `max |H[i,j] − H[j,i]| / max|H|` (0 for an empty or zero H).
    pub max_relative_asymmetry: f64,
    /// The tolerance the loader applies ([`DEFAULT_SYMMETRY_TOLERANCE`]).
    pub tolerance: f64,
}

impl SymmetryCheck {
    /// True when the asymmetry is within the tolerance.
    pub fn passed(&self) -> bool {
        self.max_relative_asymmetry <= self.tolerance
    }
}

/// The rank of A and the rows found dependent on the others.
#[derive(Clone, Debug, PartialEq)]
pub struct ConstraintRank {
    /// Numerical rank of A.
    pub rank: usize,
    /// 0-based rows of A that depend (to the tolerance) on the other rows: removing them
    /// leaves `rank` independent rows spanning the same row space. Sorted.
    pub dependent_rows: Vec<usize>,
    /// Absolute tolerance on the diagonal of R used to decide the rank; 0 when a
    /// nonsingular K proved full row rank, NaN when the rank was not analysed (a singular K
    /// whose A is too large for the dense analysis; `rank` then only bounds it from above).
    pub tolerance: f64,
    /// Whether `b` agrees on the dependent rows (the constraints are redundant rather than
    /// contradictory); `true` when there are none.
    pub consistent: bool,
}

/// Everything `tangency inspect` reports.
#[derive(Clone, Debug)]
pub struct Inspection {
    /// Variables.
    pub n: usize,
    /// Constraints.
    pub m: usize,
    /// Stored entries of H (both triangles) and of A.
    pub nnz: (usize, usize),
    /// Whether H and A are stored sparse.
    pub sparse: (bool, bool),
    /// Symmetry of H.
    pub symmetry: SymmetryCheck,
    /// Rank of the constraints.
    pub constraints: ConstraintRank,
    /// Inertia of K (when the method observes it).
    pub inertia: Option<Inertia>,
    /// Pivots whose sign was imposed by regularization.
    pub regularized_pivots: usize,
    /// Condition estimate of K.
    pub condition: ConditionEstimate,
    /// The verdict the inertia predicts for a solve (None when K is singular or the
    /// inertia is not evidence).
    pub verdict: Option<Verdict>,
    /// The method that factored K.
    pub method: String,
    /// The prediction in words.
    pub diagnosis: String,
    /// `Some(status)` (`"infeasible"` or `"unbounded"`) when the analysis proved that the
    /// problem has no solution; the diagnosis then states the finding.
    pub no_solution: Option<&'static str>,
}

/// Inspects a validated problem: one factorization with `options` (falling back to the
/// dense method if that one fails), no solve for `x`.
///
/// ```
/// use tangency::{Options, ProblemBuilder, Triangle, Verdict};
/// use tangency::diagnostics::inspect::inspect;
/// // Row 2 of A is the sum of rows 0 and 1: rank 2, one dependent row, K singular.
/// let p = ProblemBuilder::new()
///     .hessian_row_major(3, &[1., 0., 0., 0., 1., 0., 0., 0., 1.], Triangle::Full)
///     .constraints_row_major(3, 3, &[1., 0., 0., 0., 1., 0., 1., 1., 0.])
///     .rhs(&[1., 2., 3.])
///     .build()?;
/// let info = inspect(&p, &Options::default())?;
/// assert_eq!(info.constraints.rank, 2);
/// assert_eq!(info.constraints.dependent_rows.len(), 1);
/// assert!(info.constraints.consistent);
/// assert_eq!(info.inertia.unwrap().zero, 1);
/// // The rank analysis drops the redundant row; the reduced problem has a unique minimizer.
/// assert_eq!(info.verdict, Some(Verdict::Minimizer));
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn inspect(problem: &Problem, options: &Options) -> Result<Inspection> {
    let (n, m) = (problem.n(), problem.m());
    let f = factor_for_inspection(problem, options)?;
    let constraints = constraint_rank(problem, &f, options);
    let cond = condition::estimate(&f);
    let inertia = f.inertia();
    let regularized_pivots = f.backend().regularized_pivots();
    let mut no_solution = None;
    let (verdict, diagnosis) = match f.verdict() {
        Ok(Some(v)) => (Some(v), v.explain().to_string()),
        Ok(None) if regularized_pivots > 0 => (
            None,
            format!(
                "{regularized_pivots} pivot(s) were regularized, so the inertia is not evidence of the kind of point"
            ),
        ),
        Ok(None) => (None, "this method does not observe the inertia of K".to_string()),
        Err(Error::Singular { .. }) => (None, singular_diagnosis(n, m, &constraints)),
        // Infeasible / unbounded: the diagnosis is the finding itself.
        Err(e) if e.is_no_solution() => {
            if matches!(e, Error::Infeasible { .. } | Error::Unbounded { .. }) {
                no_solution = Some(e.status());
            }
            (None, e.to_string())
        }
        Err(e) => return Err(e),
    };
    // A singular K that the rank analysis resolved (dropped redundant rows, a non-unique
    // minimizer): say why K is singular before what was concluded.
    let diagnosis = match inertia {
        Some(i) if i.zero > 0 && verdict.is_some() => {
            format!("{}; {}", singular_diagnosis(n, m, &constraints), diagnosis)
        }
        _ => diagnosis,
    };
    let no_solution = no_solution.or((!constraints.consistent).then_some("infeasible"));
    Ok(Inspection {
        n,
        m,
        nnz: problem.nnz(),
        sparse: (problem.hessian().is_sparse(), problem.constraints().is_sparse()),
        symmetry: stored_symmetry(problem.hessian()),
        constraints,
        inertia,
        regularized_pivots,
        condition: cond,
        verdict,
        method: f.backend().method().as_str().to_string(),
        diagnosis,
        no_solution,
    })
}

/// [`inspect`] for a problem directory, with the symmetry check done on `H.mtx` as written
/// (before the loader symmetrizes it). An H asymmetric beyond the tolerance is refused by the
/// loader with [`Error::NotSymmetric`] (naming the worst pair).
pub fn inspect_dir(dir: impl AsRef<Path>, options: &Options) -> Result<Inspection> {
    let dir = dir.as_ref();
    let problem = crate::io::read_problem_dir(dir)?;
    let mut info = inspect(&problem, options)?;
    info.symmetry = file_symmetry(&dir.join("H.mtx"))?;
    Ok(info)
}

/// Symmetry of the matrix in a Matrix Market file, as written. A file declared
/// `symmetric` stores one triangle and is symmetric by declaration (asymmetry 0).
pub fn file_symmetry(path: &Path) -> Result<SymmetryCheck> {
    let loaded = crate::io::read_matrix(path, "H")?.ok_or_else(|| Error::Io {
        path: path.to_path_buf(),
        source: std::io::Error::new(std::io::ErrorKind::NotFound, "H.mtx is required in a problem directory"),
    })?;
    let declared = match loaded.symmetry {
        crate::io::Symmetry::General => "general",
        crate::io::Symmetry::Symmetric => "symmetric",
        crate::io::Symmetry::SkewSymmetric => "skew-symmetric",
    };
    let mut entries = std::collections::HashMap::new();
    for (i, j, v) in loaded.full_triplets() {
        *entries.entry((i, j)).or_insert(0.0) += v;
    }
    let scale = entries.values().fold(0.0f64, |a: f64, v: &f64| a.max(v.abs()));
    let mut worst = 0.0f64;
    for (&(i, j), &v) in &entries {
        if i != j {
            let w: f64 = entries.get(&(j, i)).copied().unwrap_or(0.0);
            worst = worst.max((v - w).abs());
        }
    }
    let name = path
        .file_name()
        .map_or_else(|| path.display().to_string(), |s| s.to_string_lossy().into_owned());
    Ok(SymmetryCheck {
        source: format!("{name} as written (declared {declared})"),
        max_relative_asymmetry: if scale > 0.0 { worst / scale } else { 0.0 },
        tolerance: DEFAULT_SYMMETRY_TOLERANCE,
    })
}

/// Largest `|H[i,j] − H[j,i]|` relative to `max|H|`, from the stored entries (no dense
/// copy: a sparse H is compared entry by entry with its mirror).
fn stored_symmetry(h: &Matrix) -> SymmetryCheck {
    let scale = h.max_abs();
    let mut worst = 0.0f64;
    match h {
        Matrix::Dense(d) => {
            for j in 0..d.ncols() {
                for i in 0..j {
                    worst = worst.max((d[(i, j)] - d[(j, i)]).abs());
                }
            }
        }
        _ => {
            let mut entries = std::collections::HashMap::new();
            h.for_each(|i, j, v| {
                *entries.entry((i, j)).or_insert(0.0) += v;
            });
            for (&(i, j), &v) in &entries {
                if i != j {
                    worst = worst.max((v - entries.get(&(j, i)).copied().unwrap_or(0.0)).abs());
                }
            }
        }
    }
    SymmetryCheck {
        source: "stored H".to_string(),
        max_relative_asymmetry: if scale > 0.0 { worst / scale } else { 0.0 },
        tolerance: DEFAULT_SYMMETRY_TOLERANCE,
    }
}

fn factor_for_inspection(problem: &Problem, options: &Options) -> Result<Factorization> {
    let first = Plan::analyze(problem, options).and_then(|plan| plan.factor(problem));
    match first {
        Ok(f) => Ok(f),
        Err(e) if e.is_no_solution() && options.method != Method::Dense => {
            let dense = Options {
                method: Method::Dense,
                ..*options
            };
            // The dense retry only when it fits in memory; otherwise the first finding stands.
            match Plan::analyze(problem, &dense) {
                Ok(plan) => plan.factor(problem),
                Err(Error::Resources { .. }) => Err(e),
                Err(other) => Err(other),
            }
        }
        Err(e) => Err(e),
    }
}

fn singular_diagnosis(n: usize, m: usize, c: &ConstraintRank) -> String {
    if !c.dependent_rows.is_empty() {
        let rows = list(&c.dependent_rows);
        let what = if c.consistent {
            "b agrees on them, so they are redundant: dropping them leaves the same feasible set"
        } else {
            "b contradicts them, so the constraints are infeasible"
        };
        format!(
            "K is singular: A has rank {} < {m}; row(s) {rows} depend on the others and {what}",
            c.rank
        )
    } else {
        let _ = n;
        "K is singular with independent constraints: the reduced Hessian is singular, so the objective is flat \
         along a feasible direction; minimizers are not unique or the objective is unbounded below, depending on c"
            .to_string()
    }
}

fn list(v: &[usize]) -> String {
    const SHOWN: usize = 20;
    let mut s: Vec<String> = v.iter().take(SHOWN).map(|i| i.to_string()).collect();
    if v.len() > SHOWN {
        s.push(format!("… ({} in all)", v.len()));
    }
    s.join(", ")
}

/// Rank of A, its dependent rows and the consistency of `b`.
///
/// A nonsingular K (inertia observed, no zero pivot) implies that A has full row rank, so
/// no further work is done. Otherwise the shared dense rank analysis
/// ([`crate::diagnostics::rank`]: column-pivoted QR of the equilibrated `Aᵀ`, tolerances
/// documented there) runs when its dense copy of A fits in memory (work
/// `O(n m min(n, m))`); a larger singular case reports the rank as unknown. This is the one
/// place to switch to a sparse singular diagnosis once the sparse backend offers one.
fn constraint_rank(problem: &Problem, f: &Factorization, options: &Options) -> ConstraintRank {
    let (n, m) = (problem.n(), problem.m());
    if f.inertia().is_some_and(|i| i.zero == 0) || m == 0 {
        return ConstraintRank {
            rank: m,
            dependent_rows: Vec::new(),
            tolerance: 0.0,
            consistent: true,
        };
    }
    let dense_bytes = 8 * 3 * (n as u64).saturating_mul(m as u64);
    let affordable = crate::memory::check(dense_bytes, "the dense rank analysis of A").is_ok()
        && n.saturating_mul(m) <= INSPECT_DENSE_RANK_MAX_ENTRIES;
    if !affordable {
        return ConstraintRank {
            rank: m,
            dependent_rows: Vec::new(),
            tolerance: f64::NAN,
            consistent: true,
        };
    }
    let a = problem.constraints();
    let analysis = RankAnalysis::new(a.to_dense().as_ref(), options.null_space.rank_tolerance_factor);
    let mut dependent_rows = analysis.dependent_rows();
    dependent_rows.sort_unstable();
    ConstraintRank {
        rank: analysis.rank(),
        dependent_rows,
        tolerance: analysis.threshold(),
        consistent: analysis.check_rhs(problem.rhs(), DEFAULT_CONSISTENCY_TOLERANCE).is_ok(),
    }
}

/// Largest `n·m` for which `inspect` runs the dense rank analysis of a singular K's A
/// (4·10⁷ entries, 320 MB dense; beyond it the rank is reported unknown).
pub const INSPECT_DENSE_RANK_MAX_ENTRIES: usize = 40_000_000;

impl Inspection {
    /// The JSON object of `tangency inspect --json`.
    pub fn to_json(&self) -> Json {
        let mut o = Json::object();
        o.set("status", "inspected")
            .set("n", self.n)
            .set("m", self.m)
            .set("method", self.method.as_str());
        let mut nnz = Json::object();
        nnz.set("H", self.nnz.0).set("A", self.nnz.1);
        o.set("nnz", nnz);
        let kind = |s: bool| if s { "sparse" } else { "dense" };
        let mut storage = Json::object();
        storage.set("H", kind(self.sparse.0)).set("A", kind(self.sparse.1));
        o.set("storage", storage);
        let mut sym = Json::object();
        sym.set("checked", self.symmetry.source.as_str())
            .set("max_relative_asymmetry", self.symmetry.max_relative_asymmetry)
            .set("tolerance", self.symmetry.tolerance)
            .set("passed", self.symmetry.passed());
        o.set("symmetry", sym);
        o.set("constraint_rank", self.constraints.rank)
            .set(
                "dependent_rows",
                Json::Arr(self.constraints.dependent_rows.iter().map(|&i| Json::from(i)).collect()),
            )
            .set("rank_tolerance", self.constraints.tolerance)
            .set("constraints_consistent", self.constraints.consistent)
            .set("inertia", self.inertia)
            .set("regularized_pivots", self.regularized_pivots)
            .set("condition_estimate", finite(self.condition.kappa))
            .set("condition_solves", self.condition.solves)
            .set("verdict", self.verdict.map(|v| v.as_str()))
            .set("diagnosis", self.diagnosis.as_str());
        o
    }
}

fn finite(v: f64) -> Option<f64> {
    v.is_finite().then_some(v)
}

impl fmt::Display for Inspection {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let (n, m) = (self.n, self.m);
        let kind = |s: bool| if s { "sparse" } else { "dense" };
        writeln!(f, "── tangency inspect: structure and conditioning, no solve ──")?;
        writeln!(
            f,
            "  size          {n} variable(s), {m} constraint(s); KKT order {}",
            n + m
        )?;
        writeln!(
            f,
            "  stored        H {} entries ({}), A {} entries ({})",
            self.nnz.0,
            kind(self.sparse.0),
            self.nnz.1,
            kind(self.sparse.1)
        )?;
        writeln!(
            f,
            "  symmetry      {}: max relative asymmetry {:.1e} (tolerance {:.0e}) {}",
            self.symmetry.source,
            self.symmetry.max_relative_asymmetry,
            self.symmetry.tolerance,
            if self.symmetry.passed() { "ok" } else { "FAILED" }
        )?;
        let c = &self.constraints;
        if c.tolerance.is_nan() {
            writeln!(
                f,
                "  constraints   rank not analysed: K is singular and A is too large for the dense rank analysis"
            )?;
        } else if c.dependent_rows.is_empty() {
            writeln!(f, "  constraints   rank {} of {m}: independent", c.rank)?;
        } else {
            writeln!(
                f,
                "  constraints   rank {} of {m}: dependent row(s) {} ({})",
                c.rank,
                list(&c.dependent_rows),
                if c.consistent {
                    "b consistent: redundant"
                } else {
                    "b inconsistent: infeasible"
                }
            )?;
        }
        match self.inertia {
            Some(i) => writeln!(
                f,
                "  inertia       {i}   (a minimizer needs (+{n}, -{m}, 0:0)), factored by {}",
                self.method
            )?,
            None => writeln!(f, "  inertia       not observed by {}", self.method)?,
        }
        if self.regularized_pivots > 0 {
            writeln!(
                f,
                "  regularized   {} pivot(s): their signs were imposed",
                self.regularized_pivots
            )?;
        }
        if self.condition.kappa.is_finite() {
            writeln!(
                f,
                "  condition     κ₁(K) ≈ {:.2e} (estimate from {} solve(s)); about {} digit(s) of a solution can be trusted",
                self.condition.kappa,
                self.condition.solves,
                self.condition.trusted_digits()
            )?;
        } else {
            writeln!(f, "  condition     κ₁(K) = ∞ (K is singular to working precision)")?;
        }
        match self.verdict {
            Some(v) => writeln!(f, "  prediction    {v}: {}", self.diagnosis),
            None => writeln!(f, "  prediction    no certified verdict: {}", self.diagnosis),
        }
    }
}
