//! Conversion of a [`Horizon`] to the general EQP form, in the layout fixed by the command
//! line (see the [module docs](crate::stagewise)).

use super::Horizon;
use crate::error::Result;
use crate::problem::{Problem, ProblemBuilder, Triangle};

impl Horizon {
    /// The general problem `minimize ½zᵀHz + cᵀz s.t. Az = b` with `z = [x₀; u₀; …; x_N]`,
    /// sparse `H` (lower triangle of each stage block given) and sparse `A`. Every entry
    /// of the dense stage blocks is kept in the pattern (zeros included), so problems
    /// with the same dimensions and constraint rows share one pattern and can be
    /// refactored without a new analysis.
    ///
    /// ```
    /// use faer::mat;
    /// use tangency::stagewise::HorizonBuilder;
    /// let h = HorizonBuilder::new(1, 1, 3)
    ///     .dynamics(mat![[1.0]].as_ref(), mat![[1.0]].as_ref())
    ///     .cost(mat![[1.0]].as_ref(), mat![[1.0]].as_ref())
    ///     .initial_state(&[2.0])
    ///     .build()?;
    /// let p = h.to_problem()?;
    /// assert_eq!((p.n(), p.m()), (7, 4));
    /// assert_eq!(p.rhs()[0], 2.0);
    /// # Ok::<(), tangency::Error>(())
    /// ```
    pub fn to_problem(&self) -> Result<Problem> {
        let d = self.dims;
        let (nx, nu, big_n) = (d.nx, d.nu, d.horizon);
        let n = d.n_vars();
        let p_total: usize = (0..big_n).map(|k| self.constraint_rows(k)).sum();
        let m = d.n_dynamics_rows() + p_total;
        let mut h = Vec::with_capacity(big_n * (d.width() * (d.width() + 1) / 2) + nx * (nx + 1) / 2);
        let mut c = vec![0.0; n];
        let mut a = Vec::with_capacity(nx + big_n * nx * (d.width() + 1) + p_total * d.width());
        let mut b = vec![0.0; m];
        for (i, (bi, xi)) in b.iter_mut().zip(&self.x_init).enumerate() {
            a.push((i, i, 1.0));
            *bi = *xi;
        }
        let mut crow = d.n_dynamics_rows();
        for (k, st) in self.stages.iter().enumerate() {
            let (xo, uo) = (d.x_offset(k), d.u_offset(k));
            for j in 0..nx {
                for i in j..nx {
                    h.push((xo + i, xo + j, st.q[(i, j)]));
                }
                for i in 0..nu {
                    h.push((uo + i, xo + j, st.s[(i, j)]));
                }
            }
            for j in 0..nu {
                for i in j..nu {
                    h.push((uo + i, uo + j, st.r[(i, j)]));
                }
            }
            c[xo..xo + nx].copy_from_slice(&st.q_lin);
            c[uo..uo + nu].copy_from_slice(&st.r_lin);
            let row0 = d.state_rows(k + 1);
            let next = d.x_offset(k + 1);
            for i in 0..nx {
                for j in 0..nx {
                    a.push((row0 + i, xo + j, -st.a[(i, j)]));
                }
                for j in 0..nu {
                    a.push((row0 + i, uo + j, -st.b[(i, j)]));
                }
                a.push((row0 + i, next + i, 1.0));
                b[row0 + i] = st.c[i];
            }
            if let Some((e, dm, rhs)) = &st.constraint {
                for i in 0..e.nrows() {
                    for j in 0..nx {
                        a.push((crow, xo + j, dm[(i, j)]));
                    }
                    for j in 0..nu {
                        a.push((crow, uo + j, e[(i, j)]));
                    }
                    b[crow] = rhs[i];
                    crow += 1;
                }
            }
        }
        let xn = d.x_offset(big_n);
        for j in 0..nx {
            for i in j..nx {
                h.push((xn + i, xn + j, self.q_terminal[(i, j)]));
            }
        }
        c[xn..xn + nx].copy_from_slice(&self.q_terminal_lin);
        ProblemBuilder::new()
            .hessian_triplets(n, &h, Triangle::Lower)
            .linear(&c)
            .constraints_triplets(m, n, &a)
            .rhs(&b)
            .build()
    }
}
