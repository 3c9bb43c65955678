//! Least squares with linear restrictions:
//!
//! ```text
//! minimize ½‖W^½(Fβ − g)‖² + ½λ‖β‖²   subject to   Cβ = d
//! ```
//!
//! with `F` (p×n, dense or sparse), positive weights `w` (`W = diag(w)`, default all ones),
//! an optional ridge `λ ≥ 0` and restrictions `C` (q×n), `d` (q).
//!
//! ```
//! use tangency::lsq::{FitOptions, LsqBuilder};
//! // y ≈ β0 + β1·t through four points, with the restriction β0 + β1 = 3 (the line
//! // passes through (1, 3)).
//! let t = [0.0, 1.0, 2.0, 3.0];
//! let y = [1.1, 2.9, 5.2, 6.8];
//! let f: Vec<f64> = t.iter().flat_map(|&ti| [1.0, ti]).collect();
//! let fit = LsqBuilder::new()
//!     .design_row_major(4, 2, &f)
//!     .observations(&y)
//!     .restrictions_row_major(1, 2, &[1.0, 1.0])
//!     .restriction_rhs(&[3.0])
//!     .build()?
//!     .fit(&FitOptions::default())?;
//! let b = &fit.coefficients;
//! assert!((b[0] + b[1] - 3.0).abs() < 1e-14);
//! // The multiplier is the price of the restriction: d(½·RSS)/dd = −y.
//! assert!(fit.multipliers[0].is_finite());
//! assert!(fit.standard_errors.as_ref().unwrap()[1] > 0.0);
//! # Ok::<(), tangency::Error>(())
//! ```
//!
//! ## Methods
//!
//! * [`FitMethod::Dense`] (Golub & Van Loan, *Matrix Computations*, 4th ed., §6.2,
//!   least squares with equality constraints, null-space method): a column-pivoted
//!   Householder QR of `Cᵀ` gives the rank of `C`, a particular solution and an orthonormal
//!   basis `Z` of the null space of `C`; a Householder QR of `F·Z` (followed by a
//!   column-pivoted QR of its small triangular factor, to reveal rank) solves the reduced
//!   problem. `FᵀF` is never formed, so the condition number is not squared. The solution
//!   is then refined on the augmented system (Björck 1967) with residuals in doubled
//!   precision (see [`refine`]).
//! * [`FitMethod::Augmented`] (for large sparse `F`): the fit is posed as the
//!   equality-constrained QP in `(β, r)`
//!   `minimize ½rᵀWr + ½λ‖β‖² s.t. Fβ + r = g, Cβ = d` and solved through the crate's own
//!   pipeline ([`Plan::analyze`](crate::Plan::analyze) with [`Method::Auto`](crate::Method::Auto),
//!   so it uses whatever KKT backend the analysis picks), then refined with the same
//!   doubled-precision residuals.
//!
//! ## Multipliers
//!
//! The Lagrangian is `½‖W^½(Fβ − g)‖² + ½λ‖β‖² + yᵀ(Cβ − d)` (the crate's convention with
//! `A = C`, `b = d`), so at the solution `FᵀW(Fβ − g) + λβ + Cᵀy = 0` and
//! **d(½·RSS)/dd = −y** (with ridge: the derivative of the whole objective
//! `½·RSS + ½λ‖β‖²`): raising `dᵢ` by one unit changes half the weighted residual sum of
//! squares by `−yᵢ` to first order. Rows of `C` that depend on others get multiplier 0
//! (the price is carried by the rows they depend on).
//!
//! ## Statistics
//!
//! With `λ = 0`: `σ̂² = RSS/(p − n + rank C)`, the covariance of the restricted estimator
//! `σ̂²·Z(ZᵀFᵀWFZ)⁻¹Zᵀ` (from the triangular factor of `W^½FZ`, never by inverting `FᵀWF`),
//! standard errors, and the F-statistic of the restrictions against the unrestricted fit
//! `((RSS_R − RSS_U)/rank C)/(RSS_U/(p − n))` with `(rank C, p − n)` degrees of freedom.
//! `RSS_R − RSS_U` is computed as the squared norm of a projection, not as a difference.
//! With `λ > 0` these are not reported (the ridge estimator is biased; its sampling
//! covariance is not of that form).

mod augmented;
pub mod bounded;
mod dense;
pub mod inference;
pub mod input;
pub mod io;
pub mod refine;
pub mod report;
pub mod restrict;
pub mod stats;

use std::fmt;

use faer::sparse::{SparseColMat, SparseColMatRef, Triplet};
use faer::{Mat, MatRef};
use nalgebra_sparse::CscMatrix;

use crate::error::{Error, Result};
use crate::problem::Matrix;

pub use stats::RestrictionTest;

/// Which block of a least-squares problem a message is about.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum FitBlock {
    /// The design matrix `F` (p×n).
    F,
    /// The observations `g` (length p).
    G,
    /// The restriction matrix `C` (q×n).
    C,
    /// The restriction right-hand side `d` (length q).
    D,
    /// The weights `w` (length p, positive).
    W,
    /// The ridge parameter `λ` (finite, ≥ 0).
    Ridge,
}

impl fmt::Display for FitBlock {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            FitBlock::F => "F",
            FitBlock::G => "g",
            FitBlock::C => "C",
            FitBlock::D => "d",
            FitBlock::W => "w",
            FitBlock::Ridge => "ridge",
        })
    }
}

fn input_err(block: FitBlock, row: Option<usize>, col: Option<usize>, detail: impl Into<String>) -> Error {
    Error::FitInput {
        block,
        row,
        col,
        detail: detail.into(),
    }
}

#[derive(Debug, Clone)]
enum Input {
    Dense(Mat<f64>),
    Triplets {
        rows: usize,
        cols: usize,
        entries: Vec<(usize, usize, f64)>,
    },
    Invalid(FitBlock, String),
}

impl Input {
    fn row_major(block: FitBlock, rows: usize, cols: usize, data: &[f64]) -> Input {
        match rows.checked_mul(cols) {
            Some(len) if len == data.len() => Input::Dense(Mat::from_fn(rows, cols, |i, j| data[i * cols + j])),
            _ => Input::Invalid(block, format!("{} values given for a {rows}×{cols} block", data.len())),
        }
    }

    fn shape(&self) -> (usize, usize) {
        match self {
            Input::Dense(m) => (m.nrows(), m.ncols()),
            Input::Triplets { rows, cols, .. } => (*rows, *cols),
            Input::Invalid(..) => (0, 0),
        }
    }

    fn into_matrix(self, block: FitBlock) -> Result<Matrix> {
        match self {
            Input::Invalid(b, detail) => Err(input_err(b, None, None, detail)),
            Input::Dense(m) => {
                for i in 0..m.nrows() {
                    for j in 0..m.ncols() {
                        if !m[(i, j)].is_finite() {
                            return Err(input_err(
                                block,
                                Some(i),
                                Some(j),
                                format!("non-finite value {}", m[(i, j)]),
                            ));
                        }
                    }
                }
                Ok(Matrix::Dense(m))
            }
            Input::Triplets {
                rows,
                cols,
                mut entries,
            } => {
                for &(i, j, v) in &entries {
                    if i >= rows || j >= cols {
                        return Err(input_err(
                            block,
                            Some(i),
                            Some(j),
                            format!("entry out of range for a {rows}×{cols} block"),
                        ));
                    }
                    if !v.is_finite() {
                        return Err(input_err(block, Some(i), Some(j), format!("non-finite value {v}")));
                    }
                }
                entries.sort_unstable_by_key(|&(i, j, _)| (j, i));
                let trip: Vec<_> = entries.iter().map(|&(i, j, v)| Triplet::new(i, j, v)).collect();
                let s = SparseColMat::<usize, f64>::try_new_from_triplets(rows, cols, &trip)
                    .map_err(|e| input_err(block, None, None, format!("cannot store the sparse block: {e:?}")))?;
                Ok(Matrix::Sparse(s))
            }
        }
    }
}

fn triplets_of_faer(s: SparseColMatRef<'_, usize, f64>) -> Input {
    let mut entries = Vec::with_capacity(s.val().len());
    for j in 0..s.ncols() {
        for (i, v) in s.row_idx_of_col(j).zip(s.val_of_col(j)) {
            entries.push((i, j, *v));
        }
    }
    Input::Triplets {
        rows: s.nrows(),
        cols: s.ncols(),
        entries,
    }
}

fn triplets_of_csc(s: &CscMatrix<f64>) -> Input {
    Input::Triplets {
        rows: s.nrows(),
        cols: s.ncols(),
        entries: s.triplet_iter().map(|(i, j, v)| (i, j, *v)).collect(),
    }
}

/// Builds an [`LsqProblem`]; every block is validated by [`build`](Self::build).
///
/// Required: the design `F` (one of the `design_*` setters) and the observations `g`.
/// Optional: restrictions `C` and `d` (default none; `d` defaults to zeros), weights
/// (default ones), ridge (default 0). Duplicate sparse entries are summed.
///
/// ```
/// use tangency::lsq::{FitBlock, LsqBuilder};
/// use tangency::Error;
/// let err = LsqBuilder::new()
///     .design_row_major(3, 1, &[1.0, 2.0, 3.0])
///     .observations(&[1.0, 2.0, 3.0])
///     .weights(&[1.0, -1.0, 1.0])
///     .build()
///     .unwrap_err();
/// assert!(matches!(err, Error::FitInput { block: FitBlock::W, row: Some(1), .. }));
/// ```
#[derive(Debug, Clone, Default)]
pub struct LsqBuilder {
    design: Option<Input>,
    g: Option<Vec<f64>>,
    restrictions: Option<Input>,
    d: Option<Vec<f64>>,
    w: Option<Vec<f64>>,
    ridge: f64,
    names: Option<Vec<String>>,
    equations: Option<String>,
    inequalities: Vec<restrict::Restriction>,
}

impl LsqBuilder {
    /// An empty builder.
    pub fn new() -> Self {
        Self::default()
    }

    /// `F` from a dense faer matrix (p×n).
    pub fn design_dense(mut self, f: MatRef<'_, f64>) -> Self {
        self.design = Some(Input::Dense(f.to_owned()));
        self
    }

    /// `F` (p×n) from a row-major slice of length p·n.
    pub fn design_row_major(mut self, p: usize, n: usize, data: &[f64]) -> Self {
        self.design = Some(Input::row_major(FitBlock::F, p, n, data));
        self
    }

    /// `F` (p×n) from 0-based `(row, col, value)` triplets (stored sparse).
    pub fn design_triplets(mut self, p: usize, n: usize, entries: &[(usize, usize, f64)]) -> Self {
        self.design = Some(Input::Triplets {
            rows: p,
            cols: n,
            entries: entries.to_vec(),
        });
        self
    }

    /// `F` from a faer compressed-column matrix (stored sparse).
    pub fn design_faer(mut self, f: SparseColMatRef<'_, usize, f64>) -> Self {
        self.design = Some(triplets_of_faer(f));
        self
    }

    /// `F` from a nalgebra-sparse CSC matrix (stored sparse).
    pub fn design_csc(mut self, f: &CscMatrix<f64>) -> Self {
        self.design = Some(triplets_of_csc(f));
        self
    }

    /// The observations `g` (length p).
    pub fn observations(mut self, g: &[f64]) -> Self {
        self.g = Some(g.to_vec());
        self
    }

    /// `C` from a dense faer matrix (q×n).
    pub fn restrictions_dense(mut self, c: MatRef<'_, f64>) -> Self {
        self.restrictions = Some(Input::Dense(c.to_owned()));
        self
    }

    /// `C` (q×n) from a row-major slice of length q·n.
    pub fn restrictions_row_major(mut self, q: usize, n: usize, data: &[f64]) -> Self {
        self.restrictions = Some(Input::row_major(FitBlock::C, q, n, data));
        self
    }

    /// `C` (q×n) from 0-based triplets (stored sparse).
    pub fn restrictions_triplets(mut self, q: usize, n: usize, entries: &[(usize, usize, f64)]) -> Self {
        self.restrictions = Some(Input::Triplets {
            rows: q,
            cols: n,
            entries: entries.to_vec(),
        });
        self
    }

    /// `C` from a nalgebra-sparse CSC matrix (stored sparse).
    pub fn restrictions_csc(mut self, c: &CscMatrix<f64>) -> Self {
        self.restrictions = Some(triplets_of_csc(c));
        self
    }

    /// The restriction right-hand side `d` (length q). Default: zeros.
    pub fn restriction_rhs(mut self, d: &[f64]) -> Self {
        self.d = Some(d.to_vec());
        self
    }

    /// Positive, finite weights (length p). Default: all ones.
    pub fn weights(mut self, w: &[f64]) -> Self {
        self.w = Some(w.to_vec());
        self
    }

    /// Ridge parameter `λ ≥ 0` (adds `½λ‖β‖²`). Default: 0.
    pub fn ridge(mut self, lambda: f64) -> Self {
        self.ridge = lambda;
        self
    }

    /// Names of the coefficients (length n; non-empty, distinct, each a name of the
    /// [restriction syntax](restrict)). Default: `b0`, `b1`, … (the 0-based column index).
    pub fn coefficient_names<S: AsRef<str>>(mut self, names: &[S]) -> Self {
        self.names = Some(names.iter().map(|s| s.as_ref().to_string()).collect());
        self
    }

    /// Restrictions written against the coefficient names, one per line (see
    /// [`restrict`] for the syntax), instead of `C` and `d`.
    ///
    /// ```
    /// use tangency::lsq::{FitOptions, LsqBuilder};
    /// let fit = LsqBuilder::new()
    ///     .design_row_major(3, 2, &[1.0, 0.0, 0.0, 1.0, 1.0, 1.0])
    ///     .observations(&[1.0, 2.0, 2.5])
    ///     .coefficient_names(&["level", "slope"])
    ///     .restriction_equations("level + slope = 3")
    ///     .build()?
    ///     .fit(&FitOptions::default())?;
    /// assert!((fit.coefficients[0] + fit.coefficients[1] - 3.0).abs() < 1e-14);
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn restriction_equations(mut self, text: &str) -> Self {
        self.equations = Some(text.to_string());
        self
    }

    /// Validates every block and returns the problem. Checks, in order: `F` given, in
    /// range and finite; `g` given with length p, finite; `C` with n columns, in range,
    /// finite; `d` of length q, finite; `w` of length p, finite and positive; `λ` finite
    /// and non-negative.
    pub fn build(mut self) -> Result<LsqProblem> {
        let design = self
            .design
            .ok_or_else(|| input_err(FitBlock::F, None, None, "no design matrix given"))?;
        let f = design.into_matrix(FitBlock::F)?;
        let (p, n) = (f.nrows(), f.ncols());
        let names = match self.names {
            None => (0..n).map(|j| format!("b{j}")).collect(),
            Some(names) => {
                check_names(&names, n)?;
                names
            }
        };
        let restrictions = match (self.restrictions, self.equations) {
            (Some(_), Some(_)) => {
                return Err(input_err(
                    FitBlock::C,
                    None,
                    None,
                    "give the restrictions either as C (and d) or as equations, not both",
                ))
            }
            (r, None) => r,
            (None, Some(text)) => {
                if self.d.is_some() {
                    return Err(input_err(
                        FitBlock::D,
                        None,
                        None,
                        "restriction equations carry their own right-hand sides: do not give d as well",
                    ));
                }
                let (parsed, inequalities) = restrict::split(restrict::parse(&text, &names)?);
                self.inequalities = inequalities;
                let q = parsed.len();
                let mut entries = Vec::new();
                let mut d = Vec::with_capacity(q);
                for (i, r) in parsed.iter().enumerate() {
                    entries.extend(r.terms.iter().map(|&(j, v)| (i, j, v)));
                    d.push(r.rhs);
                }
                self.d = Some(d);
                let mut dense = Mat::<f64>::zeros(q, n);
                for (i, j, v) in entries {
                    dense[(i, j)] = v;
                }
                Some(Input::Dense(dense))
            }
        };
        let g = self
            .g
            .ok_or_else(|| input_err(FitBlock::G, None, None, "no observations given"))?;
        check_vec(FitBlock::G, &g, p, "p (rows of F)")?;
        let c = match restrictions {
            None => Matrix::Dense(Mat::zeros(0, n)),
            Some(input) => {
                let (rows, cols) = input.shape();
                if !matches!(input, Input::Invalid(..)) && cols != n {
                    return Err(input_err(
                        FitBlock::C,
                        None,
                        None,
                        format!("C is {rows}×{cols} but F has {n} columns"),
                    ));
                }
                input.into_matrix(FitBlock::C)?
            }
        };
        let q = c.nrows();
        let d = self.d.unwrap_or_else(|| vec![0.0; q]);
        check_vec(FitBlock::D, &d, q, "q (rows of C)")?;
        if let Some(w) = &self.w {
            check_vec(FitBlock::W, w, p, "p (rows of F)")?;
            if let Some((i, v)) = w.iter().enumerate().find(|(_, v)| **v <= 0.0) {
                return Err(input_err(
                    FitBlock::W,
                    Some(i),
                    None,
                    format!("weight {v} is not positive"),
                ));
            }
        }
        if !(self.ridge.is_finite() && self.ridge >= 0.0) {
            return Err(input_err(
                FitBlock::Ridge,
                None,
                None,
                format!("λ = {} must be finite and non-negative", self.ridge),
            ));
        }
        Ok(LsqProblem {
            f,
            g,
            c,
            d,
            w: self.w,
            ridge: self.ridge,
            names,
            inequalities: self.inequalities,
        })
    }
}

fn check_names(names: &[String], n: usize) -> Result<()> {
    if names.len() != n {
        return Err(input_err(
            FitBlock::F,
            None,
            None,
            format!("{} coefficient name(s) given for {n} column(s) of F", names.len()),
        ));
    }
    for (j, name) in names.iter().enumerate() {
        let mut chars = name.chars();
        let ok = chars.next().is_some_and(|c| c.is_alphabetic() || c == '_')
            && chars.all(|c| c.is_alphanumeric() || c == '_' || c == '.');
        if !ok {
            return Err(input_err(
                FitBlock::F,
                None,
                Some(j),
                format!(
                    "coefficient name '{name}' of column {j} (0-based) is not a name of the restriction syntax \
                     (a letter or '_', then letters, digits, '_' or '.')"
                ),
            ));
        }
        if let Some(k) = names[..j].iter().position(|o| o == name) {
            return Err(input_err(
                FitBlock::F,
                None,
                Some(j),
                format!("coefficient name '{name}' is used for columns {k} and {j} (0-based)"),
            ));
        }
    }
    Ok(())
}

fn check_vec(block: FitBlock, v: &[f64], expected: usize, what: &str) -> Result<()> {
    if v.len() != expected {
        return Err(input_err(
            block,
            None,
            None,
            format!("length {} but {what} is {expected}", v.len()),
        ));
    }
    if let Some((i, x)) = v.iter().enumerate().find(|(_, x)| !x.is_finite()) {
        return Err(input_err(block, Some(i), None, format!("non-finite value {x}")));
    }
    Ok(())
}

/// A validated restricted least-squares problem (see the [module docs](self)).
#[derive(Debug, Clone)]
pub struct LsqProblem {
    pub(crate) f: Matrix,
    pub(crate) g: Vec<f64>,
    pub(crate) c: Matrix,
    pub(crate) d: Vec<f64>,
    pub(crate) w: Option<Vec<f64>>,
    pub(crate) ridge: f64,
    pub(crate) names: Vec<String>,
    /// Inequality restrictions (`≤` or `≥`), from restriction equations; see [`bounded`].
    pub(crate) inequalities: Vec<restrict::Restriction>,
}

impl LsqProblem {
    /// Observations (rows of `F`).
    pub fn p(&self) -> usize {
        self.f.nrows()
    }
    /// Coefficients (columns of `F`).
    pub fn n(&self) -> usize {
        self.f.ncols()
    }
    /// Restrictions (rows of `C`).
    pub fn q(&self) -> usize {
        self.c.nrows()
    }
    /// The design matrix.
    pub fn design(&self) -> &Matrix {
        &self.f
    }
    /// The observations.
    pub fn observations(&self) -> &[f64] {
        &self.g
    }
    /// The restriction matrix.
    pub fn restrictions(&self) -> &Matrix {
        &self.c
    }
    /// The restriction right-hand side.
    pub fn restriction_rhs(&self) -> &[f64] {
        &self.d
    }
    /// The weights, if given.
    pub fn weights(&self) -> Option<&[f64]> {
        self.w.as_deref()
    }
    /// The ridge parameter.
    pub fn ridge(&self) -> f64 {
        self.ridge
    }
    /// The coefficient names (given, or `b0`, `b1`, …).
    pub fn names(&self) -> &[String] {
        &self.names
    }
    /// The inequality restrictions (`≤`, `≥`) given as equations, in the order written.
    pub fn inequality_restrictions(&self) -> &[restrict::Restriction] {
        &self.inequalities
    }
    /// The same problem with another ridge parameter `λ ≥ 0`.
    pub fn with_ridge(&self, lambda: f64) -> Result<LsqProblem> {
        if !(lambda.is_finite() && lambda >= 0.0) {
            return Err(input_err(
                FitBlock::Ridge,
                None,
                None,
                format!("λ = {lambda} must be finite and non-negative"),
            ));
        }
        Ok(LsqProblem {
            ridge: lambda,
            ..self.clone()
        })
    }

    /// Fits with the given options (with inequality restrictions through [`bounded`]).
    pub fn fit(&self, options: &FitOptions) -> Result<Fit> {
        if !self.inequalities.is_empty() {
            return bounded::fit(self, options);
        }
        self.fit_equalities(options)
    }

    /// The fit under the equality restrictions only (inequality restrictions ignored).
    pub(crate) fn fit_equalities(&self, options: &FitOptions) -> Result<Fit> {
        let method = match options.method {
            FitMethod::Auto => {
                let dense_entries = self.p().saturating_mul(self.n());
                if !self.f.is_sparse() || dense_entries <= AUTO_DENSE_ENTRIES {
                    FitMethod::Dense
                } else {
                    FitMethod::Augmented
                }
            }
            m => m,
        };
        match method {
            FitMethod::Augmented => augmented::fit(self, options),
            _ => dense::fit(self, options),
        }
    }

    /// `W^½` applied to a length-p vector (identity without weights).
    pub(crate) fn sqrt_w(&self, i: usize) -> f64 {
        self.w.as_ref().map_or(1.0, |w| w[i].sqrt())
    }

    /// Weighted residual sum of squares `Σ wᵢ(gᵢ − (Fβ)ᵢ)²` and the residuals `g − Fβ`,
    /// with `Fβ` accumulated in doubled precision.
    pub(crate) fn residuals(&self, beta: &[f64]) -> (Vec<f64>, f64) {
        let mut r = refine::residual_g_minus_fx(&self.f, &self.g, beta);
        let rss = r
            .iter_mut()
            .enumerate()
            .map(|(i, ri)| {
                let s = self.sqrt_w(i) * *ri;
                s * s
            })
            .sum();
        (r, rss)
    }
}

/// Above this many entries of `F` (p·n), [`FitMethod::Auto`] sends a sparse `F` to the
/// augmented method instead of densifying it.
pub const AUTO_DENSE_ENTRIES: usize = 20_000_000;

/// Which algorithm fits.
#[derive(Copy, Clone, Debug, PartialEq, Eq, Default)]
#[non_exhaustive]
pub enum FitMethod {
    /// Dense for dense `F` or `p·n ≤` [`AUTO_DENSE_ENTRIES`], augmented otherwise.
    #[default]
    Auto,
    /// QR null-space method (Golub & Van Loan §6.2) with doubled-precision refinement.
    Dense,
    /// Augmented system as an equality-constrained QP, through the crate's KKT pipeline.
    Augmented,
}

impl FitMethod {
    /// The word used in reports.
    pub fn as_str(self) -> &'static str {
        match self {
            FitMethod::Auto => "auto",
            FitMethod::Dense => "dense_qr",
            FitMethod::Augmented => "augmented",
        }
    }
}

/// Settings of a fit.
#[derive(Copy, Clone, Debug)]
pub struct FitOptions {
    /// The algorithm.
    pub method: FitMethod,
    /// Most refinement corrections (0 disables refinement).
    pub max_refinement_steps: usize,
    /// Compute σ̂², the covariance, standard errors and the restriction test (λ = 0 only).
    pub inference: bool,
    /// Relative rank tolerance for `C` and `W^½FZ`: a pivot `|Rᵢᵢ| ≤ tol·|R₀₀|` counts as
    /// zero. `None`: `max(rows, cols)·ε` of the factored matrix (common practice).
    pub rank_tolerance: Option<f64>,
    /// The augmented method computes the covariance with one solve per coefficient; above
    /// this `n` it skips the covariance and standard errors (the test is still computed).
    pub augmented_covariance_max_n: usize,
}

impl Default for FitOptions {
    fn default() -> Self {
        FitOptions {
            method: FitMethod::Auto,
            max_refinement_steps: 10,
            inference: true,
            rank_tolerance: None,
            augmented_covariance_max_n: 2000,
        }
    }
}

/// The result of a fit.
#[derive(Clone, Debug)]
pub struct Fit {
    /// `β` (length n).
    pub coefficients: Vec<f64>,
    /// `g − Fβ` (length p, unweighted).
    pub residuals: Vec<f64>,
    /// Restriction multipliers `y` (length q): `FᵀW(Fβ − g) + λβ + Cᵀy = 0` and
    /// d(½·RSS)/dd = −y. Rows of `C` found dependent on others get 0.
    pub multipliers: Vec<f64>,
    /// Weighted residual sum of squares `Σ wᵢ rᵢ²`.
    pub rss: f64,
    /// Residual degrees of freedom `p − n + rank C`.
    pub dof: usize,
    /// `σ̂² = RSS/dof` (`None` when dof = 0, λ > 0 or inference is off).
    pub sigma2: Option<f64>,
    /// Numerical rank of `C`.
    pub rank_c: usize,
    /// Rows of `C` (0-based) that are linear combinations of others (consistent ones:
    /// contradictory ones are an error). They add no information and get multiplier 0.
    pub dependent_restrictions: Vec<usize>,
    /// `σ̂²·Z(ZᵀFᵀWFZ)⁻¹Zᵀ` (n×n), when computed.
    pub covariance: Option<Mat<f64>>,
    /// Square roots of the covariance diagonal, when computed.
    pub standard_errors: Option<Vec<f64>>,
    /// The F-test of the restrictions against the unrestricted fit, when defined.
    pub restriction_test: Option<RestrictionTest>,
    /// Refinement corrections applied.
    pub refinement_steps: usize,
    /// `‖δβ‖∞/‖β‖∞` of each refinement correction, in order.
    pub refinement_history: Vec<f64>,
    /// The method that ran.
    pub method: FitMethod,
    /// Remarks worth reading (dependent restrictions, skipped statistics, …).
    pub notes: Vec<String>,
    /// The inequality restrictions at the fit, in the order written (empty without any; see
    /// [`bounded`]). With one of them active the inferential statistics are not reported.
    pub inequality_restrictions: Vec<bounded::InequalityOutcome>,
}

impl Fit {
    /// The point estimate of a fit without inference: coefficients `beta`, the residuals and
    /// RSS recomputed from `pr`, the multipliers `y_sel` of the independent restrictions
    /// `sel` scattered to all `q` (dependent ones get 0), `dof = p − n + rank C`.
    #[allow(clippy::too_many_arguments)]
    pub(crate) fn point(
        pr: &LsqProblem,
        beta: &[f64],
        sel: &[usize],
        y_sel: &[f64],
        rank_c: usize,
        dependent_restrictions: Vec<usize>,
        log: refine::RefineLog,
        method: FitMethod,
        notes: Vec<String>,
    ) -> Fit {
        let mut multipliers = vec![0.0; pr.q()];
        for (&i, &y) in sel.iter().zip(y_sel) {
            multipliers[i] = y;
        }
        let (residuals, rss) = pr.residuals(beta);
        Fit {
            coefficients: beta.to_vec(),
            residuals,
            multipliers,
            rss,
            dof: (pr.p() + rank_c).saturating_sub(pr.n()),
            sigma2: None,
            rank_c,
            dependent_restrictions,
            covariance: None,
            standard_errors: None,
            restriction_test: None,
            refinement_steps: log.steps,
            refinement_history: log.history,
            method,
            notes,
            inequality_restrictions: Vec::new(),
        }
    }

    /// Sets and returns `σ̂² = RSS / dof` when inference is defined; otherwise says why in the
    /// notes (ridge penalty, no residual degrees of freedom) and returns `None`.
    pub(crate) fn start_inference(&mut self, ridge: f64) -> Option<f64> {
        if ridge > 0.0 {
            self.notes
                .push("λ > 0: σ̂², standard errors and the restriction test are not reported".into());
            return None;
        }
        if self.dof == 0 {
            self.notes
                .push("no residual degrees of freedom (p − n + rank C = 0): σ̂² is undefined".into());
            return None;
        }
        let sigma2 = self.rss / self.dof as f64;
        self.sigma2 = Some(sigma2);
        Some(sigma2)
    }

    /// `σ̂`, when defined.
    pub fn sigma(&self) -> Option<f64> {
        self.sigma2.map(f64::sqrt)
    }
}

pub(crate) fn default_tol(rows: usize, cols: usize, opt: Option<f64>) -> f64 {
    opt.unwrap_or_else(|| rows.max(cols).max(1) as f64 * f64::EPSILON)
}

pub(crate) use crate::problem::inf_norm;
