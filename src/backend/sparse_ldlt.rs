//! Sparse LDLᵀ backend: faer's sparse Cholesky machinery (simplicial or supernodal,
//! chosen from the flop count) on the symmetrically equilibrated KKT matrix, with a
//! fill-reducing ordering chosen once per pattern and dynamic regularization of the pivots.
//!
//! # Phases
//!
//! * **Analysis** ([`SparseAnalysis::new`], run by [`Plan::analyze`](crate::Plan::analyze)):
//!   the lower-triangle KKT pattern with its value map ([`KktPattern`]), a fill-reducing
//!   ordering, faer's symbolic factorization and every workspace size. The analysis is
//!   shared (`Arc`) by every numeric factorization made from the plan and by every
//!   refactorization.
//! * **Numeric factorization** ([`KktBackend::factor`]): scatter the new values through the
//!   map, Ruiz-equilibrate (`K̃ = S K S`), LDLᵀ of `P K̃ Pᵀ` into preallocated storage. No heap
//!   allocation in the steady state with `par = Par::Seq` (see `tests/alloc_free.rs`),
//!   except the small inertia confirmation below when pivots had to be regularized. With a
//!   rayon pool, rayon's scheduler allocates job-queue blocks of its own.
//! * **Solve**: `K⁻¹r = S (LDLᵀ)⁻¹ S r` (permutations inside), refined by the caller on the
//!   original K.
//!
//! # Ordering
//!
//! Candidates are faer's approximate minimum degree (Amestoy, Davis & Duff 1996) with three
//! settings (default; aggressive absorption off; dense-row detection off); the first
//! [`SparseParams::ordering_trials`] are tried and the one with the smallest predicted
//! LDLᵀ flop count is kept ([`SparseAnalysis::orderings`] lists all predictions). Measured
//! on Poisson control k = 100: all three predict 4.410e7 flops, so the default tries one.
//!
//! Beside AMD, METIS nested dissection ([`super::ordering`], with the same pairing of
//! constraint rows when it leaves structurally zero pivots) is tried when the AMD
//! factorization's work ([`OrderingTrial::factor_flops`], from the symbolic factorization,
//! comparable across orderings) is at least [`NESTED_DISSECTION_MIN_WORK`], and kept when
//! its work is at most [`NESTED_DISSECTION_GAIN`] of AMD's
//! ([`SparseParams::nested_dissection`]; the choice is reported in
//! [`SparseAnalysis::orderings`]). Measured (release build, one thread, medians of 3–5,
//! machine loaded by other builds, load average 3–4 on 2 cores):
//!
//! | case (N) | AMD work | ND work | AMD factor | ND factor | ND analysis cost |
//! |---|---|---|---|---|---|
//! | heat-cube 33 (107 811) | 9.6e10 | 4.2e10 | 6.3 s | 3.3–3.9 s | +1.8 s |
//! | poisson-control 300 (270 000) | 3.1e9 | 2.6e9 (paired) | 0.54 s | 0.62 s | +3.0 s |
//! | tied lattice 100 (21 107) | 3.0e8 (paired) | 1.7e8 (paired) | 0.054 s | 0.071 s | +0.3 s |
//! | poisson-control 100 (30 000) | 9.3e7 | 9.6e7 | 0.037 s | 0.043 s | +0.17 s |
//!
//! On the 2D families nested dissection has somewhat less work but more, smaller
//! supernodes and factors slower, and METIS costs more than the factorization: hence the
//! work floor and the required gain. On the 3D family it halves the factorization.
//! (AMD heat-cube: one run at load 2.6; its refactor 5.7 s against 2.9 s with nested
//! dissection. For a single solve the 1.8 s of METIS eat most of the gain.)
//!
//! # Threads
//!
//! faer's supernodal LDLᵀ walks the supernodes in order (left-looking) and gives the
//! parallelism only to the dense kernels inside each supernode (update products, the
//! diagonal block's LDLᵀ, the triangular solve). With two rayon threads every one of the
//! 10⁴–10⁵ supernodes' kernels pays the pool's dispatch, and most fronts are far too small
//! to gain from it; there is no tree-level parallelism to use instead. Measured
//! (`cargo run --release --example sparse_threads -- DIR`, `FORCE_PAR=1`, medians of 5,
//! load average 3–4 on 2 cores), factor / refactor in seconds, one thread → two:
//!
//! | case | large-front flops | one thread | two threads |
//! |---|---|---|---|
//! | poisson-control 100 | 1.2e7 | 0.037 / 0.029 | 0.052 / 0.048 |
//! | tied lattice 100 | 2.2e7 | 0.054 / 0.046 | 0.069 / 0.061 |
//! | poisson-control 300 | 6.1e8 | 0.54 / 0.50 | 0.78 / 0.58 |
//! | heat-cube 33 (ND, fronts up to 3165 columns) | 3.5e10 | 3.9 / 2.9 | 4.3 / 4.3 |
//!
//! Two threads were slower on every case, as the quiet-machine figures also show
//! for the 2D families. The rule ([`ThreadChoice`]): the factorization uses
//! [`SparseParams::par`] only when the predicted flops in supernodes of at least
//! [`PARALLEL_FRONT_COLUMNS`] columns reach [`SparseParams::parallel_min_front_flops`];
//! the default threshold is infinite (always one thread), because no measured case gained.
//! A finite threshold opts in where a quiet machine shows a gain. The choice depends on the
//! pattern and the settings only, so it is deterministic; solves are always sequential.
//!
//! # Regularization (scale-aware, on the equilibrated K̃ whose entries are at most ≈ 1)
//!
//! * Threshold `τ = pivot_threshold · N · ε` (N = n + m; the dense backend calls pivots of
//!   this size zero).
//! * **Dynamic** (Vanderbei 1995, "Symmetric quasidefinite matrices"; Saunders 1996):
//!   pivots are given their expected signs, `+` for the `x` block and `−` for the `y`
//!   block. A pivot of the wrong sign or with `|d| ≤ τ` is replaced by `±δ` with
//!   `δ = regularization_delta` (default `√ε ≈ 1.5e-8`). If a pivot was replaced although
//!   its computed value had the wrong sign *and* magnitude above `τ` (a nonconvex problem,
//!   where forcing would be a large perturbation), the factorization is redone with
//!   observed signs: only pivots with `|d| ≤ τ` are replaced, by `δ` with their own sign.
//! * **Static** (`static_regularization = γ`, default 0): `+γ` on the `x` diagonal and
//!   `−γ` on the `y` diagonal of K̃ before factoring. With `γ > 0` the inertia is that of the
//!   shifted matrix and is never reported as certified.
//!
//! # Inertia and the verdict rule
//!
//! Each pivot whose sign was imposed is counted ([`KktBackend::regularized_pivots`]). With
//! none, the inertia is read off `D` (Sylvester's law of inertia) as in the dense backend.
//! With `r > 0` forced pivots the computed factors are those of `M = P K̃ Pᵀ + E`, `E`
//! diagonal with `r` nonzeros. We recover each `E_ii` from the factors (the pre-forcing
//! pivot is `K̃_ii − Σ_{k<i} L_ik² D_k`) and compute the exact inertia of K̃ by the inertia
//! additivity of Schur complements (Haynsworth 1968): with `E = U C Uᵀ`,
//! `In(K̃) = In(M) + In(C⁻¹ − UᵀM⁻¹U) − In(C)`, an `r×r` symmetric eigenproblem and `r`
//! solves with the factors. When `r ≤ max_inertia_corrections` this *confirms* the inertia
//! (the verdict may then say `Minimizer`); otherwise the inertia is the regularized one,
//! reported as uncertified, and the verdict is withheld. An eigenvalue of the `r×r` matrix
//! below `τ/δ²` counts as zero (the 1×1 case reproduces the pivot threshold `τ`).
//! The solver additionally withholds the verdict when refinement does not reach
//! machine-precision level (see [`crate::solver`]).

use std::sync::Arc;

use faer::dyn_stack::{MemBuffer, MemStack, StackReq};
use faer::linalg::cholesky::ldlt::factor::{LdltParams, LdltRegularization};
use faer::prelude::ReborrowMut;
use faer::sparse::linalg::amd;
use faer::sparse::linalg::cholesky::{
    factorize_symbolic_cholesky, supernodal::SupernodalLdltRef, CholeskySymbolicParams, LdltRef, SymbolicCholesky,
    SymbolicCholeskyRaw, SymmetricOrdering,
};
use faer::sparse::linalg::SupernodalThreshold;
use faer::{Conj, Mat, MatMut, Par, Side, Spec};

use crate::backend::sparse_capacitance::{self, Capacitance};
use crate::backend::sparse_singular::SparseSingular;
use crate::backend::{KktBackend, SingularFindings};
use crate::error::{Error, Result};
use crate::kkt::sparse::{ruiz_lower, KktPattern};
use crate::problem::Problem;
use crate::solution::{Inertia, MethodUsed};

/// Simplicial or supernodal numeric factorization.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Default)]
#[non_exhaustive]
pub enum Supernodes {
    /// faer's rule: supernodal when the flop count per factor entry is high (default).
    #[default]
    Auto,
    /// Always simplicial (column by column; best for very sparse factors).
    Never,
    /// Always supernodal (dense blocks; best for large fill).
    Always,
}

/// When the analysis tries nested dissection (METIS) beside AMD.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Default)]
#[non_exhaustive]
pub enum NestedDissection {
    /// From [`NESTED_DISSECTION_MIN_ORDER`] unknowns and [`NESTED_DISSECTION_MIN_WORK`] AMD
    /// work; kept when its work is at most [`NESTED_DISSECTION_GAIN`] of AMD's (default).
    #[default]
    Auto,
    /// Never (AMD only).
    Never,
    /// Always, and kept unless it has more structurally zero pivots than AMD (for tests
    /// and comparisons).
    Always,
}

/// Settings of the sparse backend (see the module docs for the rules they enter).
#[derive(Copy, Clone, Debug)]
pub struct SparseParams {
    /// Ruiz sweeps for symmetric equilibration (0 = off). Default: 10.
    pub equilibration_sweeps: usize,
    /// `τ = pivot_threshold · N · ε` on the equilibrated K. Default: 1.0.
    pub pivot_threshold: f64,
    /// Replacement magnitude `δ` for a forced pivot. Default: `√ε ≈ 1.49e-8`.
    pub regularization_delta: f64,
    /// Static shift `γ` (`+γ` on x, `−γ` on y, equilibrated scale). Default: 0.
    pub static_regularization: f64,
    /// Give the pivots their expected quasidefinite signs (`+` x, `−` y). Default: true.
    pub expected_signs: bool,
    /// Form the `r×r` capacitance matrix of the forced pivots (exact inertia, exact
    /// Woodbury solves, null vectors; see [`super::sparse_capacitance`]) when `r` pivots
    /// were forced, up to this `r`. Default: [`DEFAULT_MAX_CORRECTIONS`].
    pub max_inertia_corrections: usize,
    /// How many AMD settings to try (1 to 3, see the module docs); the cheapest predicted
    /// factorization is kept. Default: 1 (the three gave identical predicted flops on both
    /// generator families, so the extra trials only cost analysis time).
    pub ordering_trials: usize,
    /// Simplicial or supernodal. Default: [`Supernodes::Auto`].
    pub supernodes: Supernodes,
    /// When the AMD ordering eliminates a constraint row before every variable it couples
    /// (a structurally zero pivot), order each constraint row right after a variable
    /// matched to it instead (see the module docs). Default: true.
    pub paired_ordering: bool,
    /// When to try METIS nested dissection beside AMD (module docs, "Ordering"). Default:
    /// [`NestedDissection::Auto`].
    pub nested_dissection: NestedDissection,
    /// Most parallelism the numeric factorization may use. Default: all threads
    /// (faer/rayon). The analysis uses it only when the factorization has enough work in
    /// large fronts (see [`SparseParams::parallel_min_front_flops`] and the module docs
    /// "Threads"); otherwise it runs sequentially. Solves always run sequentially.
    pub par: Par,
    /// Predicted flops in large fronts (supernodes of at least [`PARALLEL_FRONT_COLUMNS`]
    /// columns) from which the factorization runs on [`SparseParams::par`]; below it, on
    /// one thread. `0.0` always uses `par`, `f64::INFINITY` never. Default:
    /// [`DEFAULT_PARALLEL_MIN_FRONT_FLOPS`].
    pub parallel_min_front_flops: f64,
}

/// `√ε`, the default forced-pivot magnitude.
pub const DEFAULT_REGULARIZATION_DELTA: f64 = 1.490_116_119_384_765_6e-8;

/// Default cap on the forced pivots handled through the capacitance matrix: 2048 (its
/// eigendecomposition, about `9r³` flops, then takes a few seconds on two cores and its
/// two `r×r` matrices 64 MB; beyond it the inertia is reported uncertified).
pub const DEFAULT_MAX_CORRECTIONS: usize = 2048;

impl Default for SparseParams {
    fn default() -> Self {
        SparseParams {
            equilibration_sweeps: 10,
            pivot_threshold: 1.0,
            regularization_delta: DEFAULT_REGULARIZATION_DELTA,
            static_regularization: 0.0,
            expected_signs: true,
            max_inertia_corrections: DEFAULT_MAX_CORRECTIONS,
            ordering_trials: 1,
            supernodes: Supernodes::Auto,
            paired_ordering: true,
            nested_dissection: NestedDissection::Auto,
            par: Par::rayon(0),
            parallel_min_front_flops: DEFAULT_PARALLEL_MIN_FRONT_FLOPS,
        }
    }
}

/// Supernodes with at least this many columns count as large fronts for the thread rule
/// (module docs, "Threads").
pub const PARALLEL_FRONT_COLUMNS: usize = 256;

/// Default [`SparseParams::parallel_min_front_flops`] (measured, module docs "Threads").
pub const DEFAULT_PARALLEL_MIN_FRONT_FLOPS: f64 = f64::INFINITY;

/// How the analysis chose the parallelism of the numeric factorization (module docs,
/// "Threads"). A function of the pattern and the settings only, so the same problem always
/// gets the same choice.
#[derive(Copy, Clone, Debug, PartialEq)]
pub struct ThreadChoice {
    /// Threads allowed by [`SparseParams::par`] (1 for `Par::Seq`; `Par::rayon(0)` is
    /// resolved to the pool size).
    pub allowed: usize,
    /// Threads the numeric factorization uses (1 or `allowed`).
    pub used: usize,
    /// Predicted dense flops of the supernodal factorization, all supernodes
    /// (`c³/3 + c²p + cp²` for a supernode of `c` columns and `p` rows below them); 0 for a
    /// simplicial factorization.
    pub front_flops: f64,
    /// The part of [`ThreadChoice::front_flops`] in supernodes of at least
    /// [`PARALLEL_FRONT_COLUMNS`] columns.
    pub large_front_flops: f64,
    /// Columns of the widest supernode (0 for a simplicial factorization).
    pub widest_front: usize,
    /// Number of supernodes (0 for a simplicial factorization).
    pub supernodes: usize,
}

/// The thread rule of the module docs: parallel only for a supernodal factorization whose
/// large fronts carry at least `min_flops` predicted flops.
fn choose_threads(symbolic: &SymbolicCholesky<usize>, par: Par, min_flops: f64) -> (Par, ThreadChoice) {
    let allowed = match par {
        Par::Seq => 1,
        Par::Rayon(n) => n.get(),
    };
    let mut choice = ThreadChoice {
        allowed,
        used: 1,
        front_flops: 0.0,
        large_front_flops: 0.0,
        widest_front: 0,
        supernodes: 0,
    };
    if let SymbolicCholeskyRaw::Supernodal(s) = symbolic.raw() {
        let (begin, end) = (s.supernode_begin(), s.supernode_end());
        choice.supernodes = s.n_supernodes();
        for k in 0..s.n_supernodes() {
            let cols = end[k] - begin[k];
            let (c, p) = (cols as f64, s.supernode(k).pattern().len() as f64);
            let w = c * c * c / 3.0 + c * c * p + c * p * p;
            choice.front_flops += w;
            choice.widest_front = choice.widest_front.max(cols);
            if cols >= PARALLEL_FRONT_COLUMNS {
                choice.large_front_flops += w;
            }
        }
    }
    let parallel = allowed > 1 && choice.supernodes > 0 && choice.large_front_flops >= min_flops;
    if parallel {
        choice.used = allowed;
        (par, choice)
    } else {
        (Par::Seq, choice)
    }
}

/// One fill-reducing ordering that was tried, with its predicted cost.
#[derive(Copy, Clone, Debug, PartialEq)]
pub struct OrderingTrial {
    /// Name of the ordering.
    pub name: &'static str,
    /// Predicted LDLᵀ flops (divisions + multiply-subtracts) as AMD predicts them on its
    /// compressed graph; NaN for orderings AMD did not make.
    pub flops: f64,
    /// Work of the symbolic factorization made with this ordering, `Σ_k (r_k + r_k²)` with
    /// `r_k` the stored entries below the diagonal of column k of L (supernodal storage
    /// counts its dense blocks): comparable across orderings. NaN when not computed (AMD
    /// settings that lost on [`OrderingTrial::flops`]).
    pub factor_flops: f64,
}

/// Nested dissection is tried beside AMD from this KKT order (below it AMD's orderings are
/// as good and the extra symbolic analysis would dominate the analysis time).
pub const NESTED_DISSECTION_MIN_ORDER: usize = 2000;

/// Nested dissection is tried only when the AMD ordering's factorization work
/// ([`OrderingTrial::factor_flops`]) is at least this (METIS costs 1–4 s of analysis on
/// 10⁵ unknowns; measured in the module docs, "Ordering").
pub const NESTED_DISSECTION_MIN_WORK: f64 = 1.0e10;

/// Nested dissection is kept when its work is at most this fraction of AMD's.
pub const NESTED_DISSECTION_GAIN: f64 = 0.75;

/// The work measure of [`OrderingTrial::factor_flops`] for a symbolic factorization.
fn factor_flops(symbolic: &SymbolicCholesky<usize>) -> f64 {
    let mut w = 0.0;
    match symbolic.raw() {
        SymbolicCholeskyRaw::Simplicial(s) => {
            for k in 0..s.nrows() {
                let r = (s.col_ptr()[k + 1] - s.col_ptr()[k]).saturating_sub(1) as f64;
                w += r + r * r;
            }
        }
        SymbolicCholeskyRaw::Supernodal(s) => {
            let (begin, end) = (s.supernode_begin(), s.supernode_end());
            for k in 0..s.n_supernodes() {
                let c = end[k] - begin[k];
                let p = s.supernode(k).pattern().len();
                for t in 0..c {
                    let r = (c - 1 - t + p) as f64;
                    w += r + r * r;
                }
            }
        }
    }
    w
}

/// The symbolic analysis of one KKT pattern, shared by every factorization made from it.
#[derive(Debug)]
pub struct SparseAnalysis {
    pattern: KktPattern,
    symbolic: SymbolicCholesky<usize>,
    orderings: Vec<OrderingTrial>,
    chosen: usize,
    factor_scratch: StackReq,
    params: SparseParams,
    zero_pivots: (usize, usize),
    par: Par,
    threads: ThreadChoice,
}

const AMD_CANDIDATES: [(&str, f64, bool); 3] = [
    ("amd", 10.0, true),
    ("amd (no aggressive absorption)", 10.0, false),
    ("amd (no dense-row detection)", f64::INFINITY, true),
];

impl SparseAnalysis {
    /// Pattern, ordering and symbolic factorization of `problem`'s KKT matrix.
    pub fn new(problem: &Problem, params: &SparseParams) -> Result<SparseAnalysis> {
        let pattern = KktPattern::new(problem);
        let dim = pattern.dim();
        let resources = |what: &str, e: faer::sparse::FaerError| Error::Resources {
            detail: format!(
                "{what} for a KKT matrix of order {dim} with {} stored entries: {e:?}",
                pattern.nnz()
            ),
        };
        let mut orderings = Vec::new();
        let mut best: Option<(Vec<usize>, Vec<usize>)> = None;
        let mut chosen = 0;
        if dim > 0 {
            let mut buf = MemBuffer::try_new(amd::order_scratch::<usize>(dim, pattern.nnz()))
                .map_err(|_| resources("AMD workspace", faer::sparse::FaerError::OutOfMemory))?;
            for (name, dense, aggressive) in AMD_CANDIDATES.into_iter().take(params.ordering_trials.clamp(1, 3)) {
                let (mut perm, mut perm_inv) = (vec![0usize; dim], vec![0usize; dim]);
                let flops = amd::order(
                    &mut perm,
                    &mut perm_inv,
                    pattern.symbolic(),
                    amd::Control { dense, aggressive },
                    MemStack::new(&mut buf),
                )
                .map_err(|e| resources("AMD ordering", e))?;
                let flops = flops.n_div + flops.n_mult_subs_ldl;
                orderings.push(OrderingTrial {
                    name,
                    flops,
                    factor_flops: f64::NAN,
                });
                if best.is_none() || flops < orderings[chosen].flops {
                    chosen = orderings.len() - 1;
                    best = Some((perm, perm_inv));
                }
            }
        }
        let (mut perm, mut perm_inv) = best.unwrap_or_default();
        // A constraint row eliminated before every variable it couples has a structurally
        // zero pivot (no eliminated neighbour can have changed it): forced. When AMD produces
        // any, order the (variable, constraint) pairs together instead (see `paired_order`).
        let amd_zero_pivots = if dim > 0 {
            structural_zero_pivots(&pattern, &perm_inv)
        } else {
            0
        };
        let mut zero_pivots = amd_zero_pivots;
        if amd_zero_pivots > 0 && params.paired_ordering {
            if let Some((pp, pi)) = paired_order(&pattern, problem, false)? {
                zero_pivots = structural_zero_pivots(&pattern, &pi);
                // AMD's flop prediction is for the compressed graph: not comparable, not kept.
                orderings.push(OrderingTrial {
                    name: "paired amd",
                    flops: f64::NAN,
                    factor_flops: f64::NAN,
                });
                chosen = orderings.len() - 1;
                perm = pp;
                perm_inv = pi;
            }
        }
        let threshold = match params.supernodes {
            Supernodes::Auto => SupernodalThreshold::AUTO,
            Supernodes::Never => SupernodalThreshold::FORCE_SIMPLICIAL,
            Supernodes::Always => SupernodalThreshold::FORCE_SUPERNODAL,
        };
        let symbolic_of = |perm: &[usize], perm_inv: &[usize]| {
            let ordering = if dim > 0 {
                SymmetricOrdering::Custom(faer::perm::PermRef::new_checked(perm, perm_inv, dim))
            } else {
                SymmetricOrdering::Identity
            };
            factorize_symbolic_cholesky(
                pattern.symbolic(),
                Side::Lower,
                ordering,
                CholeskySymbolicParams {
                    supernodal_flop_ratio_threshold: threshold,
                    ..Default::default()
                },
            )
            .map_err(|e| resources("symbolic factorization", e))
        };
        let mut symbolic = symbolic_of(&perm, &perm_inv)?;
        if let Some(t) = orderings.get_mut(chosen) {
            t.factor_flops = factor_flops(&symbolic);
        }
        // Nested dissection beside the AMD choice: same pairing rule, kept when its symbolic
        // factorization has less work (module docs, "Ordering").
        let amd_work = orderings.get(chosen).map_or(0.0, |t| t.factor_flops);
        let try_nd = match params.nested_dissection {
            NestedDissection::Never => false,
            NestedDissection::Always => dim > 0,
            NestedDissection::Auto => dim >= NESTED_DISSECTION_MIN_ORDER && amd_work >= NESTED_DISSECTION_MIN_WORK,
        };
        if try_nd {
            let sym = pattern.symbolic();
            let (mut np, mut ni) = crate::backend::ordering::nested_dissection(dim, sym.col_ptr(), sym.row_idx())?;
            let mut name = "nested dissection";
            let mut nd_zero = structural_zero_pivots(&pattern, &ni);
            if nd_zero > 0 && params.paired_ordering {
                if let Some((pp, pi)) = paired_order(&pattern, problem, true)? {
                    nd_zero = structural_zero_pivots(&pattern, &pi);
                    name = "paired nested dissection";
                    np = pp;
                    ni = pi;
                }
            }
            let nd_symbolic = symbolic_of(&np, &ni)?;
            let w = factor_flops(&nd_symbolic);
            orderings.push(OrderingTrial {
                name,
                flops: f64::NAN,
                factor_flops: w,
            });
            // Kept only with no more structurally zero pivots (each is a forced pivot to
            // correct) and clearly less work: at equal work its smaller supernodes factor
            // slower than AMD's (module docs, "Ordering").
            let gain = match params.nested_dissection {
                NestedDissection::Always => f64::INFINITY,
                _ => NESTED_DISSECTION_GAIN,
            };
            if nd_zero <= zero_pivots && w <= gain * amd_work {
                chosen = orderings.len() - 1;
                symbolic = nd_symbolic;
                zero_pivots = nd_zero;
            }
        }
        let (par, threads) = choose_threads(&symbolic, params.par, params.parallel_min_front_flops);
        let factor_scratch = symbolic.factorize_numeric_ldlt_scratch::<f64>(par, Spec::<LdltParams, f64>::default());
        Ok(SparseAnalysis {
            pattern,
            symbolic,
            orderings,
            chosen,
            factor_scratch,
            params: *params,
            zero_pivots: (amd_zero_pivots, zero_pivots),
            par,
            threads,
        })
    }

    /// The parallelism the numeric factorization uses (module docs, "Threads").
    pub fn parallelism(&self) -> Par {
        self.par
    }

    /// Why the analysis chose [`SparseAnalysis::parallelism`].
    pub fn thread_choice(&self) -> ThreadChoice {
        self.threads
    }

    /// The KKT pattern and value map.
    pub fn pattern(&self) -> &KktPattern {
        &self.pattern
    }

    /// The orderings tried, with predicted flops.
    pub fn orderings(&self) -> &[OrderingTrial] {
        &self.orderings
    }

    /// The ordering kept (smallest predicted flops).
    pub fn ordering(&self) -> Option<OrderingTrial> {
        self.orderings.get(self.chosen).copied()
    }

    /// Stored entries of the factor L (supernodal storage counts the dense blocks).
    pub fn factor_entries(&self) -> usize {
        self.symbolic.len_val()
    }

    /// True when faer chose (or was told to use) the supernodal factorization.
    pub fn is_supernodal(&self) -> bool {
        matches!(self.symbolic.raw(), SymbolicCholeskyRaw::Supernodal(_))
    }

    /// Bytes of the numeric factorization storage: factor values, factorization
    /// workspace, scaled K values and scaling vectors.
    pub fn numeric_bytes(&self) -> usize {
        8 * (self.factor_entries() + self.pattern.nnz() + 3 * self.pattern.dim()) + self.factor_scratch.size_bytes()
    }

    /// Structurally zero pivots (constraint rows eliminated before every variable they
    /// couple, so forced) of the plain AMD ordering and of the ordering kept.
    pub fn structural_zero_pivots(&self) -> (usize, usize) {
        self.zero_pivots
    }

    /// The settings the analysis was made with.
    pub fn params(&self) -> &SparseParams {
        &self.params
    }
}

/// Constraint rows (index ≥ n) that `perm_inv` eliminates before all of their neighbours:
/// their pivot is exactly the zero diagonal of K, so it is forced.
fn structural_zero_pivots(pattern: &KktPattern, perm_inv: &[usize]) -> usize {
    let (n, dim) = (pattern.n(), pattern.dim());
    let sym = pattern.symbolic();
    let (cp, ri) = (sym.col_ptr(), sym.row_idx());
    // first[y] = earliest elimination position among y's neighbours.
    let mut first = vec![usize::MAX; dim - n];
    for j in 0..n {
        for &i in &ri[cp[j]..cp[j + 1]] {
            if i >= n {
                first[i - n] = first[i - n].min(perm_inv[j]);
            }
        }
    }
    // Constraint–constraint entries do not exist in K (zero (2,2) block).
    (0..dim - n).filter(|&r| perm_inv[n + r] < first[r]).count()
}

/// Matches each constraint row with a variable it couples (greedy, largest |a_ij| among the
/// unmatched ones, rows in order), orders the graph in which each pair is one node with
/// faer's AMD, and expands each pair as (variable, constraint): every matched constraint is
/// eliminated right after a variable it couples, so with `H ≻ 0` no pivot is zero (Bridson
/// 2007, "An ordering method for the direct solution of saddle-point matrices", uses the same
/// idea). Written by hand: faer orders graphs, not constrained pairs. Returns
/// `(perm, perm_inv)`.
fn paired_order(pattern: &KktPattern, problem: &Problem, nested: bool) -> Result<Option<(Vec<usize>, Vec<usize>)>> {
    let (n, dim) = (pattern.n(), pattern.dim());
    let m = dim - n;
    if m == 0 {
        return Ok(None);
    }
    let mut values = vec![0.0; pattern.nnz()];
    pattern.scatter(problem, &mut values);
    let sym = pattern.symbolic();
    let (cp, ri) = (sym.col_ptr(), sym.row_idx());
    // Rows of A as lists of (column, |value|).
    let mut row_ptr = vec![0usize; m + 1];
    for j in 0..n {
        for &i in &ri[cp[j]..cp[j + 1]] {
            if i >= n {
                row_ptr[i - n + 1] += 1;
            }
        }
    }
    for r in 0..m {
        row_ptr[r + 1] += row_ptr[r];
    }
    let mut fill = row_ptr.clone();
    let mut cols = vec![(0usize, 0.0f64); row_ptr[m]];
    for j in 0..n {
        for p in cp[j]..cp[j + 1] {
            let i = ri[p];
            if i >= n {
                cols[fill[i - n]] = (j, values[p].abs());
                fill[i - n] += 1;
            }
        }
    }
    let mut mate_of_var = vec![usize::MAX; n];
    let mut group = vec![usize::MAX; dim];
    let mut groups = 0usize;
    for r in 0..m {
        let best = cols[row_ptr[r]..row_ptr[r + 1]]
            .iter()
            .filter(|(j, v)| mate_of_var[*j] == usize::MAX && *v > 0.0)
            .fold(None::<(usize, f64)>, |b, &(j, v)| match b {
                Some((_, bv)) if bv >= v => b,
                _ => Some((j, v)),
            });
        if let Some((j, _)) = best {
            mate_of_var[j] = r;
            group[j] = groups;
            group[n + r] = groups;
            groups += 1;
        }
    }
    for g in group.iter_mut() {
        if *g == usize::MAX {
            *g = groups;
            groups += 1;
        }
    }
    // Lower-triangle pattern of the compressed graph.
    let mut edges: Vec<(usize, usize)> = Vec::with_capacity(pattern.nnz());
    for j in 0..dim {
        edges.push((group[j], group[j]));
        for &i in &ri[cp[j]..cp[j + 1]] {
            let (a, b) = (group[i], group[j]);
            if a != b {
                edges.push((a.min(b), a.max(b)));
            }
        }
    }
    edges.sort_unstable();
    edges.dedup();
    let mut gcp = vec![0usize; groups + 1];
    let mut gri = Vec::with_capacity(edges.len());
    for &(c, r) in &edges {
        gcp[c + 1] += 1;
        gri.push(r);
    }
    for c in 0..groups {
        gcp[c + 1] += gcp[c];
    }
    let (gp, _) = if nested {
        crate::backend::ordering::nested_dissection(groups, &gcp, &gri)?
    } else {
        pair_amd(groups, gcp, gri, edges.len())?
    };
    // Expand: members of each group, the variable before the constraint.
    let mut members_ptr = vec![0usize; groups + 1];
    for &g in &group {
        members_ptr[g + 1] += 1;
    }
    for g in 0..groups {
        members_ptr[g + 1] += members_ptr[g];
    }
    let mut members = vec![0usize; dim];
    let mut at = members_ptr.clone();
    for (node, &g) in group.iter().enumerate() {
        members[at[g]] = node; // nodes visited in increasing order: variable (< n) first
        at[g] += 1;
    }
    let mut perm = Vec::with_capacity(dim);
    for &g in &gp {
        perm.extend_from_slice(&members[members_ptr[g]..members_ptr[g + 1]]);
    }
    let mut perm_inv = vec![0usize; dim];
    for (pos, &node) in perm.iter().enumerate() {
        perm_inv[node] = pos;
    }
    Ok(Some((perm, perm_inv)))
}

/// faer's AMD on the compressed pair graph (lower pattern `gcp`, `gri`).
fn pair_amd(groups: usize, gcp: Vec<usize>, gri: Vec<usize>, nnz: usize) -> Result<(Vec<usize>, Vec<usize>)> {
    let gsym = faer::sparse::SymbolicSparseColMat::new_checked(groups, groups, gcp, None, gri);
    let resources = |e: faer::sparse::FaerError| Error::Resources {
        detail: format!("paired AMD ordering of a graph with {groups} nodes: {e:?}"),
    };
    let mut buf = MemBuffer::try_new(amd::order_scratch::<usize>(groups, nnz))
        .map_err(|_| resources(faer::sparse::FaerError::OutOfMemory))?;
    let (mut gp, mut gpi) = (vec![0usize; groups], vec![0usize; groups]);
    amd::order(
        &mut gp,
        &mut gpi,
        gsym.as_ref(),
        amd::Control::default(),
        MemStack::new(&mut buf),
    )
    .map_err(resources)?;
    Ok((gp, gpi))
}

/// Which sign rule produced the current factorization.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum PivotSigns {
    /// `+` for x, `−` for y, imposed on wrong-sign or tiny pivots.
    Expected,
    /// Only tiny pivots replaced, keeping their own sign.
    Observed,
}

/// The numeric sparse LDLᵀ factorization of one KKT matrix.
pub struct SparseLdlt {
    analysis: Arc<SparseAnalysis>,
    values: Vec<f64>,
    scale: Vec<f64>,
    work: Vec<f64>,
    signs: Vec<i8>,
    l_values: Vec<f64>,
    buf: MemBuffer,
    inertia: Inertia,
    forced: usize,
    certified: bool,
    mode: PivotSigns,
    /// Marker per permuted index: position in `forced_idx`, or `usize::MAX`.
    slot: Vec<usize>,
    forced_idx: Vec<usize>,
    forced_positive: Vec<bool>,
    forced_sum: Vec<f64>,
    cap: Option<Capacitance>,
    singular: Option<SparseSingular>,
}

impl std::fmt::Debug for SparseLdlt {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SparseLdlt")
            .field("dim", &self.analysis.pattern.dim())
            .field("ordering", &self.analysis.ordering())
            .field("supernodal", &self.analysis.is_supernodal())
            .field("factor_entries", &self.analysis.factor_entries())
            .field("inertia", &self.inertia)
            .field("forced", &self.forced)
            .field("certified", &self.certified)
            .field("mode", &self.mode)
            .finish_non_exhaustive()
    }
}

impl SparseLdlt {
    /// Allocates every buffer of the numeric phase for `analysis` (no numeric work).
    pub fn new(analysis: Arc<SparseAnalysis>) -> Result<SparseLdlt> {
        let dim = analysis.pattern.dim();
        let n = analysis.pattern.n();
        let buf = MemBuffer::try_new(
            analysis
                .factor_scratch
                .or(analysis.symbolic.solve_in_place_scratch::<f64>(1, Par::Seq)),
        )
        .map_err(|_| Error::Resources {
            detail: format!(
                "the sparse factorization workspace ({} bytes)",
                analysis.factor_scratch.size_bytes()
            ),
        })?;
        Ok(SparseLdlt {
            values: vec![0.0; analysis.pattern.nnz()],
            scale: vec![1.0; dim],
            work: vec![0.0; dim],
            signs: (0..dim).map(|i| if i < n { 1 } else { -1 }).collect(),
            l_values: vec![0.0; analysis.symbolic.len_val()],
            buf,
            inertia: Inertia::default(),
            forced: 0,
            certified: false,
            mode: PivotSigns::Expected,
            slot: vec![usize::MAX; dim],
            forced_idx: Vec::new(),
            forced_positive: Vec::new(),
            forced_sum: Vec::new(),
            cap: None,
            singular: None,
            analysis,
        })
    }

    /// The shared analysis.
    pub fn analysis(&self) -> &Arc<SparseAnalysis> {
        &self.analysis
    }

    /// The sign rule of the current factorization.
    pub fn pivot_signs(&self) -> PivotSigns {
        self.mode
    }

    fn tau(&self) -> f64 {
        self.analysis.params.pivot_threshold * self.analysis.pattern.dim().max(1) as f64 * f64::EPSILON
    }

    fn delta(&self) -> f64 {
        self.analysis.params.regularization_delta.max(self.tau() * 2.0)
    }

    /// Runs faer's numeric LDLᵀ on the prepared values.
    fn numeric(&mut self, mode: PivotSigns) -> Result<()> {
        let a = &*self.analysis;
        let (tau, delta) = (self.tau(), self.delta());
        let reg = LdltRegularization {
            dynamic_regularization_signs: match mode {
                PivotSigns::Expected => Some(&self.signs[..]),
                PivotSigns::Observed => None,
            },
            dynamic_regularization_delta: delta,
            dynamic_regularization_epsilon: tau,
        };
        let k = a.pattern.matrix(&self.values);
        let r = a.symbolic.factorize_numeric_ldlt(
            &mut self.l_values,
            k,
            Side::Lower,
            reg,
            a.par,
            MemStack::new(&mut self.buf),
            Spec::<LdltParams, f64>::default(),
        );
        self.mode = mode;
        match r {
            Ok(_) => Ok(()),
            Err(e) => Err(Error::Singular {
                inertia: Inertia::new(0, 0, 1),
                detail: format!("an exactly zero pivot survived regularization ({e:?})"),
            }),
        }
    }

    /// Visits the factor column by column: `f(k, D_k, rows_and_L)` where the iterator
    /// yields `(i, L_ik)` for the strictly lower entries of column k (permuted indices).
    fn for_each_column(&self, mut f: impl FnMut(usize, f64, &mut dyn Iterator<Item = (usize, f64)>)) {
        match self.analysis.symbolic.raw() {
            SymbolicCholeskyRaw::Simplicial(s) => {
                let (cp, ri) = (s.col_ptr(), s.row_idx());
                for k in 0..s.nrows() {
                    let (start, end) = (cp[k], cp[k + 1]);
                    // The diagonal (D_k) is stored first in each column.
                    let d = self.l_values[start];
                    let mut it = (start + 1..end).map(|p| (ri[p], self.l_values[p]));
                    f(k, d, &mut it);
                }
            }
            SymbolicCholeskyRaw::Supernodal(s) => {
                let l = SupernodalLdltRef::new(s, &self.l_values);
                for sn in 0..s.n_supernodes() {
                    let node = l.supernode(sn);
                    let (start, pattern, val) = (node.start(), node.pattern(), node.val());
                    let ncols = val.ncols();
                    for c in 0..ncols {
                        let d = val[(c, c)];
                        let mut it = (c + 1..ncols)
                            .map(|r| (start + r, val[(r, c)]))
                            .chain(pattern.iter().enumerate().map(|(q, &i)| (i, val[(ncols + q, c)])));
                        f(start + c, d, &mut it);
                    }
                }
            }
        }
    }

    fn pivots(&self, mut f: impl FnMut(usize, f64)) {
        self.for_each_column(|k, d, _| f(k, d));
    }

    /// Counts forced pivots (`|D_k| = δ` exactly) and the inertia of D.
    fn read_pivots(&mut self) -> Inertia {
        let delta = self.delta();
        let mut inertia = Inertia::default();
        self.forced_idx.clear();
        self.forced_positive.clear();
        let mut forced = std::mem::take(&mut self.forced_idx);
        let mut positive = std::mem::take(&mut self.forced_positive);
        self.pivots(|k, d| {
            if d.abs() == delta {
                forced.push(k);
                positive.push(d > 0.0);
            }
            if d > 0.0 {
                inertia.positive += 1;
            } else if d < 0.0 {
                inertia.negative += 1;
            } else {
                inertia.zero += 1;
            }
        });
        self.forced_idx = forced;
        self.forced_positive = positive;
        self.forced = self.forced_idx.len();
        inertia
    }

    /// For each forced pivot (permuted index i), `E_ii = D_i − d_i` where `d_i` is the pivot
    /// before forcing: `d_i = K̃_ii − Σ_{k<i} L_ik² D_k`. Returns `(i, D_i, E_ii)` in
    /// `forced_sum` order (E stored in `forced_sum`).
    fn perturbations(&mut self) {
        let r = self.forced_idx.len();
        self.forced_sum.clear();
        self.forced_sum.resize(r, 0.0);
        for (q, &i) in self.forced_idx.iter().enumerate() {
            self.slot[i] = q;
        }
        let mut sums = std::mem::take(&mut self.forced_sum);
        let slot = std::mem::take(&mut self.slot);
        self.for_each_column(|_, d, it| {
            for (i, l) in it {
                let q = slot[i];
                if q != usize::MAX {
                    sums[q] += l * l * d;
                }
            }
        });
        self.slot = slot;
        let fwd = self.analysis.symbolic.perm().map(|p| p.arrays().0);
        let delta = self.delta();
        for (q, &i) in self.forced_idx.iter().enumerate() {
            let orig = fwd.map_or(i, |f| f[i]);
            let kii = self.values[self.analysis.pattern.diagonal_position(orig)];
            let d_before = kii - sums[q];
            // D_i = ±δ: its sign is the sign of the pivot actually used.
            let d_used = if self.forced_positive[q] { delta } else { -delta };
            sums[q] = d_used - d_before;
            self.slot[i] = usize::MAX;
        }
        self.forced_sum = sums;
    }

    /// Forms and factors the capacitance matrix of the forced pivots (see
    /// [`super::sparse_capacitance`]) and returns the exact inertia of K̃, or `None` when it
    /// could not be formed (memory, non-finite values).
    fn build_capacitance(&mut self, m_inertia: Inertia) -> Option<Inertia> {
        self.cap = None;
        let dim = self.analysis.pattern.dim();
        let idx: Vec<usize> = match self.analysis.symbolic.perm() {
            Some(p) => self.forced_idx.iter().map(|&i| p.arrays().0[i]).collect(),
            None => self.forced_idx.clone(),
        };
        let r = idx.len();
        let delta = self.delta();
        let tol = self.tau() / (delta * delta);
        let ldlt = LdltRef::new(&self.analysis.symbolic, &self.l_values);
        let width = sparse_capacitance::CHUNK.min(r.max(1));
        let mut buf =
            sparse_capacitance::try_buffer(self.analysis.symbolic.solve_in_place_scratch::<f64>(width, Par::Seq))?;
        let cap = Capacitance::new(dim, idx, self.forced_sum.clone(), tol, |block| {
            ldlt.solve_in_place_with_conj(Conj::No, block, Par::Seq, MemStack::new(&mut buf));
        })?;
        let inertia = cap.inertia_of_k(m_inertia, dim)?;
        self.cap = Some(cap);
        Some(inertia)
    }

    /// The capacitance matrix of the forced pivots, when the last factorization had any and
    /// it could be formed.
    pub fn capacitance(&self) -> Option<&Capacitance> {
        self.cap.as_ref()
    }

    fn null_vectors_equilibrated(&self) -> Mat<f64> {
        let dim = self.dim();
        let Some(cap) = &self.cap else {
            return Mat::zeros(dim, 0);
        };
        let ldlt = LdltRef::new(&self.analysis.symbolic, &self.l_values);
        cap.null_vectors(dim, |block| {
            let k = block.ncols();
            let mut buf = MemBuffer::new(self.analysis.symbolic.solve_in_place_scratch::<f64>(k, Par::Seq));
            ldlt.solve_in_place_with_conj(Conj::No, block, Par::Seq, MemStack::new(&mut buf));
        })
    }

    /// Null vectors of the original K (columns, unit max-norm each), from the capacitance
    /// matrix: empty when K was found nonsingular or no capacitance matrix exists.
    pub fn null_vectors(&self) -> Mat<f64> {
        let dim = self.dim();
        let mut w = self.null_vectors_equilibrated();
        // K̃ = S K S, so K̃w̃ = 0 gives K (S w̃) = S⁻¹ K̃ w̃ = 0: unscale by S.
        for c in 0..w.ncols() {
            let mut mx = 0.0f64;
            for i in 0..dim {
                w[(i, c)] *= self.scale[i];
                mx = mx.max(w[(i, c)].abs());
            }
            if mx > 0.0 {
                w.col_mut(c).iter_mut().for_each(|v| *v /= mx);
            }
        }
        w
    }
}

impl KktBackend for SparseLdlt {
    fn method(&self) -> MethodUsed {
        MethodUsed::SparseLdlt
    }

    fn dim(&self) -> usize {
        self.analysis.pattern.dim()
    }

    fn factor(&mut self, problem: &Problem) -> Result<()> {
        let a = Arc::clone(&self.analysis);
        a.pattern.verify(problem)?;
        let dim = a.pattern.dim();
        if dim == 0 {
            self.inertia = Inertia::default();
            self.forced = 0;
            self.certified = true;
            return Ok(());
        }
        a.pattern.scatter(problem, &mut self.values);
        {
            let sym = a.pattern.symbolic();
            ruiz_lower(
                sym.col_ptr(),
                sym.row_idx(),
                &mut self.values,
                &mut self.scale,
                &mut self.work,
                a.params.equilibration_sweeps,
            );
        }
        let gamma = a.params.static_regularization;
        if gamma != 0.0 {
            let n = a.pattern.n();
            for d in 0..dim {
                self.values[a.pattern.diagonal_position(d)] += if d < n { gamma } else { -gamma };
            }
        }
        let first = if a.params.expected_signs {
            PivotSigns::Expected
        } else {
            PivotSigns::Observed
        };
        let mut retry = match self.numeric(first) {
            Ok(()) => false,
            // Forcing cascaded into a non-finite pivot: try observed signs.
            Err(e) if first == PivotSigns::Expected => {
                let _ = e;
                true
            }
            Err(e) => return Err(e),
        };
        let mut m_inertia = Inertia::default();
        if !retry {
            m_inertia = self.read_pivots();
            if self.forced > 0 {
                self.perturbations();
                // A forced pivot whose own value had the wrong sign and was not tiny:
                // forcing it is a large perturbation; factor again with observed signs.
                let (tau, delta) = (self.tau(), self.delta());
                retry = self.mode == PivotSigns::Expected && self.forced_sum.iter().any(|e| e.abs() > delta + tau);
            }
        }
        if retry {
            self.numeric(PivotSigns::Observed)?;
            m_inertia = self.read_pivots();
            if self.forced > 0 {
                self.perturbations();
            }
        }
        self.certified = gamma == 0.0;
        self.inertia = m_inertia;
        self.cap = None;
        if self.forced > 0 {
            let confirmed = if self.forced <= a.params.max_inertia_corrections {
                self.build_capacitance(m_inertia)
            } else {
                None
            };
            match confirmed {
                Some(i) => self.inertia = i,
                None => self.certified = false,
            }
        }
        self.singular = None;
        if self.inertia.zero > 0 && self.certified {
            let w = self.null_vectors_equilibrated();
            self.singular = Some(SparseSingular::new(
                w.as_ref(),
                &self.scale,
                a.pattern.n(),
                a.pattern.m(),
                self.inertia,
            ));
        }
        Ok(())
    }

    fn inertia(&self) -> Option<Inertia> {
        Some(self.inertia)
    }

    fn regularized_pivots(&self) -> usize {
        self.forced
    }

    fn inertia_certified(&self) -> bool {
        self.certified
    }

    fn solve_scratch(&self, nrhs: usize) -> StackReq {
        let plain = self.analysis.symbolic.solve_in_place_scratch::<f64>(nrhs, Par::Seq);
        match &self.cap {
            Some(cap) => plain.and(cap.scratch(self.dim(), nrhs)),
            None => plain,
        }
    }

    fn solve_in_place(&self, mut rhs: MatMut<'_, f64>, stack: &mut MemStack) {
        let dim = self.dim();
        if dim == 0 {
            return;
        }
        for j in 0..rhs.ncols() {
            for i in 0..dim {
                rhs[(i, j)] *= self.scale[i];
            }
        }
        let ldlt = LdltRef::new(&self.analysis.symbolic, &self.l_values);
        ldlt.solve_in_place_with_conj(Conj::No, rhs.rb_mut(), Par::Seq, stack);
        if let Some(cap) = &self.cap {
            // Exact K̃⁻¹ (or K̃⁺ on a consistent singular system) by Woodbury.
            cap.correct(rhs.rb_mut(), stack, |block, stack| {
                ldlt.solve_in_place_with_conj(Conj::No, block, Par::Seq, stack);
            });
        }
        for j in 0..rhs.ncols() {
            for i in 0..dim {
                rhs[(i, j)] *= self.scale[i];
            }
        }
        if let Some(sing) = &self.singular {
            sing.project(rhs);
        }
    }

    fn singular_findings(&self, problem: &Problem, c: &[f64], b: &[f64]) -> Option<Result<SingularFindings>> {
        self.singular.as_ref().map(|s| s.findings(problem, c, b))
    }
}

/// The measured rule [`Method::Auto`](crate::Method::Auto) uses to choose the sparse
/// backend over the dense one: both blocks stored sparse, and either the KKT order is at
/// least [`SPARSE_MIN_ORDER`] or K is at most 10% full. The crossover was measured on the
/// Poisson-control family (`benches/sparse.rs`, see the README): below about
/// [`SPARSE_MIN_ORDER`] unknowns the dense factorization is as fast, above it the sparse
/// one wins by a widening margin.
pub fn prefer_sparse(problem: &Problem) -> bool {
    let (h, a) = (problem.hessian(), problem.constraints());
    if !h.is_sparse() || !(a.is_sparse() || problem.m() == 0) {
        return false;
    }
    let dim = problem.n() + problem.m();
    let nnz = h.nnz() + 2 * a.nnz();
    dim >= SPARSE_MIN_ORDER || (nnz as f64) <= 0.1 * (dim as f64) * (dim as f64)
}

/// KKT order from which [`prefer_sparse`] always picks the sparse backend for sparse data.
pub const SPARSE_MIN_ORDER: usize = 300;
