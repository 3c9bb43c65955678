//! The refinement loop on the original K and the normwise backward error that measures it.

use faer::dyn_stack::MemStack;
use faer::Mat;

use super::factorization::Factorization;
use crate::kkt;
use crate::problem::inf_norm;

impl Factorization {
    /// Iterative refinement on the original K: correct `z` until the backward error is at
    /// most the target, stops improving (by at least a factor 2), or the step limit is
    /// reached. Returns the final backward error, the corrections applied, and whether `r`
    /// and `grad` (`Hx + c`) still belong to the returned `z`.
    #[allow(clippy::too_many_arguments)]
    pub(super) fn refine(
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
