//! KKT assembly, products with the original K, and symmetric equilibration.
//!
//! Layout (fixed across the crate): unknowns ordered `z = [x; y]`, right-hand side
//! `[−c; b]`, `K = [H Aᵀ; A 0]`.

use faer::prelude::{Reborrow, ReborrowMut};
use faer::{Mat, MatMut};

use crate::problem::Problem;

pub mod equilibrate;
pub mod sparse;

/// Order of the KKT matrix, `n + m`.
pub fn dim(problem: &Problem) -> usize {
    problem.n() + problem.m()
}

/// Dense `K = [H Aᵀ; A 0]` with both triangles filled, column-major.
pub fn assemble_dense(problem: &Problem) -> Mat<f64> {
    let mut k = Mat::zeros(dim(problem), dim(problem));
    fill_dense(problem, k.as_mut());
    k
}

/// Writes `K` into an existing `N×N` matrix (every entry is overwritten).
pub fn fill_dense(problem: &Problem, mut k: MatMut<'_, f64>) {
    let n = problem.n();
    k.fill(0.0);
    problem.hessian().for_each(|i, j, v| k[(i, j)] = v);
    problem.constraints().for_each(|i, j, v| {
        k[(n + i, j)] = v;
        k[(j, n + i)] = v;
    });
}

/// The right-hand side `[−c; b]`.
pub fn rhs(c: &[f64], b: &[f64]) -> Vec<f64> {
    c.iter().map(|v| -v).chain(b.iter().copied()).collect()
}

/// `out = rhs − K·z`, on the original (unscaled) blocks.
pub fn residual(problem: &Problem, z: &[f64], rhs: &[f64], out: &mut [f64]) {
    residual_into(problem, z, rhs, out, None);
}

/// [`residual`] that also copies `H·x − rhs_x` (= `Hx + c` for `rhs = [−c; b]`, the
/// gradient of the objective) into `grad` (length n) on the way: the same operations in
/// the same order, so `out` is bitwise the result of [`residual`] and `grad` bitwise that
/// of `grad = c; H.mul_add(x, grad)`.
pub fn residual_and_gradient(problem: &Problem, z: &[f64], rhs: &[f64], out: &mut [f64], grad: &mut [f64]) {
    residual_into(problem, z, rhs, out, Some(grad));
}

fn residual_into(problem: &Problem, z: &[f64], rhs: &[f64], out: &mut [f64], grad: Option<&mut [f64]>) {
    let n = problem.n();
    // out = −(−rhs + K z), computed without a temporary.
    for (o, r) in out.iter_mut().zip(rhs) {
        *o = -r;
    }
    let (x, y) = z.split_at(n);
    {
        let (ox, oy) = out.split_at_mut(n);
        problem.hessian().mul_add(x, ox);
        if let Some(grad) = grad {
            grad.copy_from_slice(ox);
        }
        problem.constraints().mul_add_both(x, oy, y, ox);
    }
    for o in out.iter_mut() {
        *o = -*o;
    }
}

/// `‖K‖∞` (largest absolute row sum) of the original K.
pub fn norm_inf(problem: &Problem) -> f64 {
    norm_inf_with(problem, &mut vec![0.0f64; dim(problem)])
}

/// `‖K‖∞` using `rows` (length `n + m`) as scratch: no allocation. Computed once per pair of
/// blocks `H`, `A` (clones of a problem and [`Problem::update_values`] with the same blocks
/// share the value).
pub fn norm_inf_with(problem: &Problem, rows: &mut [f64]) -> f64 {
    *problem.norm_k.get_or_init(|| norm_inf_uncached(problem, rows))
}

fn norm_inf_uncached(problem: &Problem, rows: &mut [f64]) -> f64 {
    let n = problem.n();
    rows.iter_mut().for_each(|r| *r = 0.0);
    problem.hessian().for_each(|i, _, v| rows[i] += v.abs());
    problem.constraints().for_each(|i, j, v| {
        rows[n + i] += v.abs();
        rows[j] += v.abs();
    });
    rows.iter().fold(0.0, |a, &r| a.max(r))
}

/// Symmetric Ruiz equilibration of a dense symmetric matrix, in place:
/// `K ← D K D` with `D` diagonal chosen so every row of the result has largest absolute
/// entry close to 1 (Ruiz 2001, "A scaling algorithm to equilibrate both rows and columns
/// norms in matrices"). Stops after `max_iter` sweeps or when every row maximum lies in
/// `[1 − tol, 1 + tol]` with `tol = 0.1`. Rows that are entirely zero keep scale 1.
/// Returns `D`.
pub fn ruiz_dense(mut k: MatMut<'_, f64>, max_iter: usize) -> Vec<f64> {
    let dim = k.nrows();
    let mut d = vec![1.0; dim];
    let mut s = vec![1.0; dim];
    for _ in 0..max_iter {
        // Column maxima equal row maxima for a symmetric matrix; columns are contiguous.
        let mut converged = true;
        for (j, sj) in s.iter_mut().enumerate() {
            let mx = k.rb().col(j).iter().fold(0.0f64, |a, v| a.max(v.abs()));
            *sj = if mx > 0.0 { 1.0 / mx.sqrt() } else { 1.0 };
            if mx > 0.0 && (mx - 1.0).abs() > 0.1 {
                converged = false;
            }
        }
        if converged {
            break;
        }
        for j in 0..dim {
            let sj = s[j];
            for (i, v) in k.rb_mut().col_mut(j).iter_mut().enumerate() {
                *v *= s[i] * sj;
            }
            d[j] *= sj;
        }
    }
    d
}
