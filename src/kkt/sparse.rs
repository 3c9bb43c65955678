//! Sparse KKT assembly: the lower triangle of `K = [H Aᵀ; A 0]` in compressed-column form,
//! built straight from the problem's blocks (never through a dense matrix).
//!
//! The pattern is computed once ([`KktPattern::new`]) together with a *value map*: for
//! every stored value of `H` and `A` (in the order [`Matrix::for_each`] visits them) the
//! position it occupies in the compressed K, so new values on the same pattern are a
//! scatter ([`KktPattern::scatter`]), not a rebuild. Every diagonal entry of K is stored
//! (explicit zeros for the `y` block), so regularization always has a place to go.

use faer::sparse::{SparseColMatRef, SymbolicSparseColMat, SymbolicSparseColMatRef};

use crate::error::{Block, Error, Result};
use crate::problem::{Matrix, Problem};

/// Marker for a value of `H` that lies in the strict upper triangle (not stored in K).
const NOT_STORED: usize = usize::MAX;

/// The lower-triangle pattern of K and the map from problem values to its positions.
///
/// ```
/// use tangency::kkt::sparse::KktPattern;
/// use tangency::{ProblemBuilder, Triangle};
/// let p = ProblemBuilder::new()
///     .hessian_triplets(2, &[(0, 0, 2.0), (1, 0, 1.0), (1, 1, 3.0)], Triangle::Lower)
///     .constraints_triplets(1, 2, &[(0, 0, 1.0), (0, 1, 1.0)])
///     .build()?;
/// let pattern = KktPattern::new(&p);
/// let mut values = vec![0.0; pattern.nnz()];
/// pattern.scatter(&p, &mut values);
/// // column 0 of the lower triangle: K[0,0] = 2, K[1,0] = 1, K[2,0] = A[0,0] = 1
/// assert_eq!(&values[..3], &[2.0, 1.0, 1.0]);
/// assert_eq!(pattern.nnz(), 6); // 3 (col 0) + 2 (col 1) + 1 (explicit zero K[2,2])
/// # Ok::<(), tangency::Error>(())
/// ```
#[derive(Clone, Debug)]
pub struct KktPattern {
    n: usize,
    m: usize,
    symbolic: SymbolicSparseColMat<usize>,
    h_map: Vec<usize>,
    a_map: Vec<usize>,
    diag: Vec<usize>,
}

#[derive(Copy, Clone)]
enum Source {
    H(usize),
    A(usize),
    Diagonal,
}

impl KktPattern {
    /// Computes the pattern of the lower triangle of K (rows sorted within each column,
    /// every diagonal entry present) and the value map. Cost `O(nnz log nnz)`.
    pub fn new(problem: &Problem) -> KktPattern {
        let (n, m) = (problem.n(), problem.m());
        let dim = n + m;
        let (h, a) = (problem.hessian(), problem.constraints());
        // (column, row, source) for every stored value of the lower triangle.
        let mut entries: Vec<(usize, usize, Source)> = Vec::with_capacity(h.nnz() / 2 + a.nnz() + dim);
        let mut k = 0;
        h.for_each(|i, j, _| {
            if i >= j {
                entries.push((j, i, Source::H(k)));
            }
            k += 1;
        });
        let mut k = 0;
        a.for_each(|r, j, _| {
            entries.push((j, n + r, Source::A(k)));
            k += 1;
        });
        for d in 0..dim {
            entries.push((d, d, Source::Diagonal));
        }
        entries.sort_unstable_by_key(|&(j, i, _)| (j, i));
        let mut h_map = vec![NOT_STORED; h.nnz()];
        let mut a_map = vec![NOT_STORED; a.nnz()];
        let mut diag = vec![0; dim];
        let mut col_ptr = vec![0usize; dim + 1];
        let mut row_idx = Vec::with_capacity(entries.len());
        let mut last = None;
        for &(j, i, src) in &entries {
            if last != Some((j, i)) {
                row_idx.push(i);
                col_ptr[j + 1] += 1;
                last = Some((j, i));
            }
            let pos = row_idx.len() - 1;
            match src {
                Source::H(k) => h_map[k] = pos,
                Source::A(k) => a_map[k] = pos,
                Source::Diagonal => diag[j] = pos,
            }
        }
        for j in 0..dim {
            col_ptr[j + 1] += col_ptr[j];
        }
        let symbolic = SymbolicSparseColMat::new_checked(dim, dim, col_ptr, None, row_idx);
        KktPattern {
            n,
            m,
            symbolic,
            h_map,
            a_map,
            diag,
        }
    }

    /// Number of variables `n`.
    pub fn n(&self) -> usize {
        self.n
    }

    /// Number of constraints `m`.
    pub fn m(&self) -> usize {
        self.m
    }

    /// Order of K, `n + m`.
    pub fn dim(&self) -> usize {
        self.n + self.m
    }

    /// Stored entries of the lower triangle (diagonal included).
    pub fn nnz(&self) -> usize {
        self.symbolic.row_idx().len()
    }

    /// The compressed-column pattern of the lower triangle.
    pub fn symbolic(&self) -> SymbolicSparseColMatRef<'_, usize> {
        self.symbolic.as_ref()
    }

    /// Position of the diagonal entry `K[d, d]` in the value array.
    pub fn diagonal_position(&self, d: usize) -> usize {
        self.diag[d]
    }

    /// The lower triangle of K as a faer matrix over `values` (length [`nnz`](Self::nnz)).
    ///
    /// # Panics
    /// If `values` has the wrong length (a programming error).
    pub fn matrix<'a>(&'a self, values: &'a [f64]) -> SparseColMatRef<'a, usize, f64> {
        SparseColMatRef::new(self.symbolic.as_ref(), values)
    }

    /// True when `problem` has the blocks this pattern was computed for (same sizes, same
    /// number of stored values per block; the sparse patterns themselves are compared by
    /// [`Problem::update_values`]).
    pub fn fits(&self, problem: &Problem) -> bool {
        problem.n() == self.n
            && problem.m() == self.m
            && problem.hessian().nnz() == self.h_map.len()
            && problem.constraints().nnz() == self.a_map.len()
    }

    /// Checks that `problem` has exactly the pattern this map was built for: the same
    /// sizes, and every stored value of `H` and `A` (in [`Matrix::for_each`] order) lands on
    /// the position of K with its own row and column (index arrays compared, not counts).
    /// `O(nnz)`, no allocation.
    ///
    /// # Errors
    /// [`Error::StructureChanged`] naming the block and the first entry that differs
    /// (0-based).
    pub fn verify(&self, problem: &Problem) -> Result<()> {
        let changed = |detail: String| Err(Error::StructureChanged { detail });
        if !self.fits(problem) {
            return changed(format!(
                "the analysis is for n = {}, m = {} with {} stored values in H and {} in A; the problem has \
                 n = {}, m = {} with {} and {}",
                self.n,
                self.m,
                self.h_map.len(),
                self.a_map.len(),
                problem.n(),
                problem.m(),
                problem.hessian().nnz(),
                problem.constraints().nnz()
            ));
        }
        let cp = self.symbolic.col_ptr();
        let ri = self.symbolic.row_idx();
        let at = |pos: usize, row: usize, col: usize| {
            pos != NOT_STORED && (cp[col]..cp[col + 1]).contains(&pos) && ri[pos] == row
        };
        let mut bad: Option<(Block, usize, usize)> = None;
        let mut k = 0;
        problem.hessian().for_each(|i, j, _| {
            let ok = if i >= j {
                at(self.h_map[k], i, j)
            } else {
                self.h_map[k] == NOT_STORED
            };
            if !ok && bad.is_none() {
                bad = Some((Block::H, i, j));
            }
            k += 1;
        });
        let n = self.n;
        let mut k = 0;
        problem.constraints().for_each(|r, j, _| {
            if !at(self.a_map[k], n + r, j) && bad.is_none() {
                bad = Some((Block::A, r, j));
            }
            k += 1;
        });
        match bad {
            None => Ok(()),
            Some((block, row, col)) => changed(format!(
                "block {block} has a stored entry at row {row}, column {col} (0-based) that the analyzed pattern \
                 does not have there (same counts, another pattern): analyze the new pattern with Plan::analyze"
            )),
        }
    }

    /// Writes the values of K (lower triangle) for `problem` into `values`: a scatter
    /// through the cached map, `O(nnz)`, no allocation. `problem` must have the pattern
    /// this map was built for ([`fits`](Self::fits)).
    ///
    /// # Panics
    /// If `values.len() != self.nnz()` or the problem does not fit (programming errors).
    pub fn scatter(&self, problem: &Problem, values: &mut [f64]) {
        assert_eq!(values.len(), self.nnz(), "scatter: wrong value array length");
        assert!(self.fits(problem), "scatter: the problem does not have this pattern");
        values.iter_mut().for_each(|v| *v = 0.0);
        scatter_block(problem.hessian(), &self.h_map, values);
        scatter_block(problem.constraints(), &self.a_map, values);
    }
}

fn scatter_block(block: &Matrix, map: &[usize], values: &mut [f64]) {
    match block {
        Matrix::Sparse(s) => {
            for (&pos, &v) in map.iter().zip(s.val()) {
                if pos != NOT_STORED {
                    values[pos] = v;
                }
            }
        }
        _ => {
            let mut k = 0;
            block.for_each(|_, _, v| {
                let pos = map[k];
                if pos != NOT_STORED {
                    values[pos] = v;
                }
                k += 1;
            });
        }
    }
}

/// `‖K‖∞` from the lower triangle (off-diagonal entries count for both their row and
/// column), using `rows` (length `dim`) as scratch: no allocation.
pub fn lower_norm_inf(k: SparseColMatRef<'_, usize, f64>, rows: &mut [f64]) -> f64 {
    rows.iter_mut().for_each(|r| *r = 0.0);
    let cp = k.symbolic().col_ptr();
    let ri = k.symbolic().row_idx();
    let v = k.val();
    for j in 0..k.ncols() {
        for p in cp[j]..cp[j + 1] {
            let i = ri[p];
            rows[i] += v[p].abs();
            if i != j {
                rows[j] += v[p].abs();
            }
        }
    }
    rows.iter().fold(0.0, |a, &r| a.max(r))
}

/// Symmetric Ruiz equilibration of a symmetric matrix given by its lower triangle, in
/// place (Ruiz 2001, "A scaling algorithm to equilibrate both rows and columns norms in
/// matrices"): `K ← S K S` until every row maximum lies within 10% of 1 or `max_sweeps`
/// sweeps are done. Rows that are entirely zero keep scale 1. `scale` receives `S`;
/// `work` (length `dim`) is scratch. No allocation.
pub fn ruiz_lower(
    col_ptr: &[usize],
    row_idx: &[usize],
    values: &mut [f64],
    scale: &mut [f64],
    work: &mut [f64],
    max_sweeps: usize,
) {
    let dim = scale.len();
    scale.iter_mut().for_each(|s| *s = 1.0);
    for _ in 0..max_sweeps {
        work.iter_mut().for_each(|w| *w = 0.0);
        for j in 0..dim {
            for p in col_ptr[j]..col_ptr[j + 1] {
                let (i, a) = (row_idx[p], values[p].abs());
                work[i] = work[i].max(a);
                work[j] = work[j].max(a);
            }
        }
        let mut converged = true;
        for w in work.iter_mut() {
            let mx = *w;
            if mx > 0.0 && (mx - 1.0).abs() > 0.1 {
                converged = false;
            }
            *w = if mx > 0.0 { 1.0 / mx.sqrt() } else { 1.0 };
        }
        if converged {
            break;
        }
        for j in 0..dim {
            let sj = work[j];
            for p in col_ptr[j]..col_ptr[j + 1] {
                values[p] *= work[row_idx[p]] * sj;
            }
            scale[j] *= sj;
        }
    }
}
