//! [`Plan`]: the symbolic phase, once per structure (method choice, stage structure,
//! sparse ordering and symbolic factorization).

use std::sync::Arc;
use std::time::Instant;

use super::choose::{self, Choice};
use super::factorization::{Factorization, KappaCache};
use super::options::Options;
use crate::backend::sparse_ldlt::SparseAnalysis;
use crate::backend::KktBackend;
use crate::error::{Error, Result};
use crate::kkt;
use crate::method::MethodUsed;
use crate::problem::Problem;
use crate::stagewise::StageStructure;

/// The result of the symbolic analysis: sizes, the method chosen and why.
#[derive(Clone, Debug)]
pub struct Plan {
    n: usize,
    m: usize,
    pub(super) method: MethodUsed,
    reason: String,
    pub(super) options: Options,
    pub(super) analyze_s: f64,
    stage_structure: Option<Arc<StageStructure>>,
    pub(super) notes: Vec<String>,
    sparse: Option<Arc<SparseAnalysis>>,
}

impl Plan {
    /// Analyzes the structure of `problem` and picks a method.
    pub fn analyze(problem: &Problem, options: &Options) -> Result<Plan> {
        let t = Instant::now();
        let Choice {
            method,
            reason,
            notes,
            stage_structure,
            sparse,
        } = choose::choose_plan(problem, options)?;
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

    /// Creates and factors the planned backend (through [`choose`], which also hands a
    /// singular K to the null-space rank analysis).
    pub(super) fn factor_backend(&self, problem: &Problem) -> Result<Box<dyn KktBackend>> {
        choose::factor_with_rescue(
            self.method,
            problem,
            &self.options,
            self.stage_structure.as_ref(),
            self.sparse.as_ref(),
        )
    }

    pub(super) fn check_structure(&self, problem: &Problem) -> Result<()> {
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
