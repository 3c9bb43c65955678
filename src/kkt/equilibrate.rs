//! Symmetric Ruiz equilibration of K computed straight from the problem's blocks (no
//! assembly): the scaling `D` in which the solver measures the backward error and the
//! condition number behind every forward-error bound, so that row and column scaling of
//! the data does not change the verdict on accuracy.

use crate::problem::Problem;

/// Ruiz sweeps used for the accuracy scaling (the sparse backend uses the same number).
pub const SWEEPS: usize = 10;

/// `D` (length n + m) with every row of `D K D` of largest absolute entry within 10 % of 1
/// after at most [`SWEEPS`] sweeps (Ruiz 2001); rows that are entirely zero keep scale 1.
/// Returns `(D, ‖DKD‖∞)`. Cost `O(SWEEPS · nnz)`.
pub fn ruiz(problem: &Problem) -> (Vec<f64>, f64) {
    let dim = problem.n() + problem.m();
    let mut d = vec![1.0; dim];
    let mut work = vec![0.0; dim];
    let norm = ruiz_into(problem, &mut d, &mut work);
    (d, norm)
}

/// [`ruiz`] into `d` with `work` as scratch (both of length n + m; no allocation); returns
/// `‖DKD‖∞`.
pub fn ruiz_into(problem: &Problem, d: &mut [f64], work: &mut [f64]) -> f64 {
    let n = problem.n();
    d.iter_mut().for_each(|v| *v = 1.0);
    for _ in 0..SWEEPS {
        row_max(problem, d, work);
        let mut converged = true;
        for (w, di) in work.iter().zip(d.iter_mut()) {
            if *w > 0.0 {
                if (*w - 1.0).abs() > 0.1 {
                    converged = false;
                }
                *di /= w.sqrt();
            }
        }
        if converged {
            break;
        }
    }
    // ‖DKD‖∞ (H holds both triangles; A counts for its row and its column).
    work.iter_mut().for_each(|w| *w = 0.0);
    problem.hessian().for_each(|i, j, v| work[i] += (v * d[i] * d[j]).abs());
    problem.constraints().for_each(|r, j, v| {
        let s = (v * d[n + r] * d[j]).abs();
        work[n + r] += s;
        work[j] += s;
    });
    work.iter().fold(0.0f64, |a, &w| a.max(w))
}

fn row_max(problem: &Problem, d: &[f64], work: &mut [f64]) {
    let n = problem.n();
    work.iter_mut().for_each(|w| *w = 0.0);
    problem.hessian().for_each(|i, j, v| {
        let s = (v * d[i] * d[j]).abs();
        work[i] = work[i].max(s);
        work[j] = work[j].max(s);
    });
    problem.constraints().for_each(|r, j, v| {
        let s = (v * d[n + r] * d[j]).abs();
        work[n + r] = work[n + r].max(s);
        work[j] = work[j].max(s);
    });
}
