//! The capacitance matrix of the forced pivots of a sparse LDLᵀ (see [`super::sparse_ldlt`]).
//!
//! With `r` forced (regularized) pivots the computed factors are those of
//! `M = K̃ + E`, `E = U C Uᵀ`, where `K̃` is the equilibrated KKT matrix, `U` holds the `r`
//! unit vectors of the forced positions and `C = diag(E_ii)`. The `r×r` capacitance matrix
//!
//! ```text
//! S = C⁻¹ − Uᵀ M⁻¹ U
//! ```
//!
//! serves three purposes at once:
//!
//! * **exact inertia** by the inertia additivity of Schur complements (Haynsworth 1968):
//!   `In(K̃) = In(M) + In(S) − In(C)`;
//! * **an exact solve** by Sherman–Morrison–Woodbury,
//!   `K̃⁻¹ = M⁻¹ + M⁻¹U S⁻¹ UᵀM⁻¹`, so refinement on K no longer stalls at the
//!   regularization level (each solve costs a second sparse solve plus `2r²` flops);
//! * **the null space of a singular K̃**: `S v = 0 ⇒ K̃ (M⁻¹U v) = U C S v = 0`, and every
//!   null vector of `K̃` is of this form (`K̃w = 0 ⇒ w = M⁻¹U(CUᵀw)`). With `S⁺` (zero
//!   eigenvalues dropped) the same Woodbury formula solves every *consistent* singular
//!   system exactly: `K̃z = r − UC(I − SS⁺)UᵀM⁻¹r`, and `(I − SS⁺)UᵀM⁻¹r = 0` exactly when
//!   `r ⊥ null(K̃)`.
//!
//! Cost per forced pivot: one column of a blocked multi-column solve with the sparse factors
//! (chunks of [`CHUNK`] columns, about `4·nnz(L)` flops per column) plus one column of `S`;
//! then one symmetric eigendecomposition of `S` (about `9r³` flops; faer) and `2r²` doubles of
//! storage (`S`'s eigenvectors and a copy for the null space). Written by hand: faer offers
//! the pieces (sparse solves, dense eigendecomposition) but not the Woodbury assembly.

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::mat::AsMatMut;
use faer::prelude::ReborrowMut;
use faer::{Mat, MatMut, Side};

use crate::solution::Inertia;

/// Columns per blocked solve while forming `M⁻¹U`.
pub const CHUNK: usize = 64;

/// The capacitance matrix `S` of `r` forced pivots, factored by its eigendecomposition.
#[derive(Clone, Debug)]
pub struct Capacitance {
    /// Forced positions in the original (unpermuted) indexing of the equilibrated K̃.
    pub idx: Vec<usize>,
    /// `E_ii` of each forced position (the diagonal of `C`).
    pub e: Vec<f64>,
    /// Eigenvectors of `S` (columns), eigenvalues ascending in `lambda`.
    vectors: Mat<f64>,
    lambda: Vec<f64>,
    /// Eigenvalues with `|λ| ≤ tol` count as zero.
    tol: f64,
    /// Inertia of `S` (zeros by `tol`).
    pub s_inertia: Inertia,
    /// Inertia of `C`.
    pub c_inertia: Inertia,
}

impl Capacitance {
    /// Forms `S = C⁻¹ − UᵀM⁻¹U` with `solve_m` (overwrites each column of its argument with
    /// `M⁻¹` times it; equilibrated, unpermuted indexing) and factors it. `None` when the
    /// eigendecomposition fails or produces non-finite values (then the inertia stays
    /// unconfirmed).
    pub fn new(
        dim: usize,
        idx: Vec<usize>,
        e: Vec<f64>,
        tol: f64,
        mut solve_m: impl FnMut(MatMut<'_, f64>),
    ) -> Option<Capacitance> {
        let r = idx.len();
        let mut s = Mat::<f64>::zeros(r, r);
        let width = CHUNK.min(r.max(1));
        let mut block = Mat::<f64>::zeros(dim, width);
        let mut start = 0;
        while start < r {
            let w = (r - start).min(width);
            block.fill(0.0);
            for q in 0..w {
                block[(idx[start + q], q)] = 1.0;
            }
            solve_m(block.as_mut().subcols_mut(0, w));
            for q in 0..w {
                for (p, &o) in idx.iter().enumerate() {
                    s[(p, start + q)] = -block[(o, q)];
                }
                s[(start + q, start + q)] += 1.0 / e[start + q];
            }
            start += w;
        }
        // Symmetrize the computed S (the solves are not exactly symmetric in floating point).
        for q in 0..r {
            for p in 0..q {
                let v = 0.5 * (s[(p, q)] + s[(q, p)]);
                s[(p, q)] = v;
                s[(q, p)] = v;
            }
        }
        if s.col_iter().any(|c| c.iter().any(|v| !v.is_finite())) {
            return None;
        }
        let evd = s.self_adjoint_eigen(Side::Lower).ok()?;
        let lambda: Vec<f64> = (0..r).map(|i| evd.S()[i]).collect();
        if lambda.iter().any(|l| !l.is_finite()) {
            return None;
        }
        let vectors = evd.U().to_owned();
        let mut s_inertia = Inertia::default();
        for &l in &lambda {
            if l.abs() <= tol {
                s_inertia.zero += 1;
            } else if l > 0.0 {
                s_inertia.positive += 1;
            } else {
                s_inertia.negative += 1;
            }
        }
        let mut c_inertia = Inertia::default();
        for &v in &e {
            if v > 0.0 {
                c_inertia.positive += 1;
            } else {
                c_inertia.negative += 1;
            }
        }
        Some(Capacitance {
            idx,
            e,
            vectors,
            lambda,
            tol,
            s_inertia,
            c_inertia,
        })
    }

    /// Number of forced pivots `r`.
    pub fn rank(&self) -> usize {
        self.idx.len()
    }

    /// `In(K̃) = In(M) + In(S) − In(C)`, or `None` if the counts do not add up to `dim`.
    pub fn inertia_of_k(&self, m_inertia: Inertia, dim: usize) -> Option<Inertia> {
        let positive = (m_inertia.positive + self.s_inertia.positive).checked_sub(self.c_inertia.positive)?;
        let negative = (m_inertia.negative + self.s_inertia.negative).checked_sub(self.c_inertia.negative)?;
        let inertia = Inertia::new(positive, negative, self.s_inertia.zero);
        (positive + negative + inertia.zero == dim).then_some(inertia)
    }

    /// `v ← S⁺ v` for an `r×k` block (zero eigenvalues dropped), using `tmp` (`r×k`).
    fn apply_pinv(&self, mut v: MatMut<'_, f64>, mut tmp: MatMut<'_, f64>) {
        let r = self.rank();
        let u = &self.vectors;
        for j in 0..v.ncols() {
            for k in 0..r {
                let mut acc = 0.0;
                for i in 0..r {
                    acc += u[(i, k)] * v[(i, j)];
                }
                tmp[(k, j)] = if self.lambda[k].abs() <= self.tol {
                    0.0
                } else {
                    acc / self.lambda[k]
                };
            }
            for i in 0..r {
                let mut acc = 0.0;
                for k in 0..r {
                    acc += u[(i, k)] * tmp[(k, j)];
                }
                v[(i, j)] = acc;
            }
        }
    }

    /// Scratch for [`correct`](Self::correct): a `dim×nrhs` block and two `r×nrhs` blocks.
    pub fn scratch(&self, dim: usize, nrhs: usize) -> faer::dyn_stack::StackReq {
        let r = self.rank();
        faer::linalg::temp_mat_scratch::<f64>(dim, nrhs)
            .and(faer::linalg::temp_mat_scratch::<f64>(r, nrhs))
            .and(faer::linalg::temp_mat_scratch::<f64>(r, nrhs))
    }

    /// Given `z = M⁻¹ r` in `rhs`, adds `M⁻¹U S⁺ Uᵀ z` (the Woodbury correction), with
    /// `solve_m` applying `M⁻¹` in place to a block using the rest of the stack.
    pub fn correct(
        &self,
        mut rhs: MatMut<'_, f64>,
        stack: &mut MemStack,
        mut solve_m: impl FnMut(MatMut<'_, f64>, &mut MemStack),
    ) {
        let (dim, k, r) = (rhs.nrows(), rhs.ncols(), self.rank());
        if r == 0 {
            return;
        }
        let (mut big, stack) = faer::linalg::temp_mat_zeroed::<f64, _, _>(dim, k, stack);
        let mut big = big.as_mat_mut();
        let (mut v, stack) = faer::linalg::temp_mat_zeroed::<f64, _, _>(r, k, stack);
        let mut v = v.as_mat_mut();
        let (mut tmp, stack) = faer::linalg::temp_mat_zeroed::<f64, _, _>(r, k, stack);
        let tmp = tmp.as_mat_mut();
        for j in 0..k {
            for (q, &o) in self.idx.iter().enumerate() {
                v[(q, j)] = rhs[(o, j)];
            }
        }
        self.apply_pinv(v.rb_mut(), tmp);
        for j in 0..k {
            for (q, &o) in self.idx.iter().enumerate() {
                big[(o, j)] = v[(q, j)];
            }
        }
        solve_m(big.rb_mut(), stack);
        for j in 0..k {
            for i in 0..dim {
                rhs[(i, j)] += big[(i, j)];
            }
        }
    }

    /// The null vectors of K̃ (equilibrated, unpermuted indexing): `M⁻¹U v` for each
    /// eigenvector `v` of `S` with a zero eigenvalue, each column scaled to unit max-norm.
    pub fn null_vectors(&self, dim: usize, mut solve_m: impl FnMut(MatMut<'_, f64>)) -> Mat<f64> {
        let zero: Vec<usize> = (0..self.rank()).filter(|&k| self.lambda[k].abs() <= self.tol).collect();
        let mut w = Mat::<f64>::zeros(dim, zero.len());
        for (c, &k) in zero.iter().enumerate() {
            for (q, &o) in self.idx.iter().enumerate() {
                w[(o, c)] = self.vectors[(q, k)];
            }
        }
        if !zero.is_empty() {
            solve_m(w.as_mut());
        }
        for c in 0..w.ncols() {
            let mx = w.col(c).iter().fold(0.0f64, |a, v| a.max(v.abs()));
            if mx > 0.0 {
                w.col_mut(c).iter_mut().for_each(|v| *v /= mx);
            }
        }
        w
    }
}

/// Allocates a `MemBuffer` for `req`, or `None` when the allocation fails.
pub(crate) fn try_buffer(req: faer::dyn_stack::StackReq) -> Option<MemBuffer> {
    MemBuffer::try_new(req).ok()
}
