//! The augmented method for large sparse designs: the fit as an equality-constrained QP in
//! `x = (β, r)`,
//!
//! ```text
//! minimize ½rᵀWr + ½λ‖β‖²   subject to   Fβ + r = g,   C₁β = d₁
//! ```
//!
//! solved by the crate's own pipeline ([`Plan::analyze`] with [`Method::Auto`], so the
//! analysis picks the KKT backend for the structure). The KKT matrix contains `F` itself,
//! not `FᵀWF`, so the condition number is not squared. `C₁` are the independent rows of `C`
//! found by the same rank analysis as the dense method. The KKT multipliers are
//! `y_F = −Wr` and `y_C = y` (the restriction multipliers, same convention).

use super::dense::{analyze_restrictions, cd_rows, RestrictionAnalysis};
use super::refine::{refine_loop, Acc};
use super::stats;
use super::{inf_norm, Fit, FitMethod, FitOptions, LsqProblem};
use crate::error::{Error, Result};
use crate::problem::Matrix;
use crate::{Factorization, Method, Options, Plan, Problem, ProblemBuilder, Triangle};

/// Builds the EQP; `with_c` false drops the restrictions (unrestricted fit).
fn eqp(pr: &LsqProblem, c_sel: &faer::Mat<f64>, d_sel: &[f64], with_c: bool) -> Result<Problem> {
    let (p, n) = (pr.p(), pr.n());
    let q1 = if with_c { c_sel.nrows() } else { 0 };
    let mut h = Vec::with_capacity(n + p);
    if pr.ridge > 0.0 {
        h.extend((0..n).map(|j| (j, j, pr.ridge)));
    }
    h.extend((0..p).map(|i| (n + i, n + i, pr.w.as_ref().map_or(1.0, |w| w[i]))));
    let mut a = Vec::with_capacity(pr.f.nnz() + p + q1 * n);
    pr.f.for_each(|i, j, v| {
        if v != 0.0 {
            a.push((i, j, v))
        }
    });
    a.extend((0..p).map(|i| (i, n + i, 1.0)));
    for i in 0..q1 {
        for j in 0..n {
            if c_sel[(i, j)] != 0.0 {
                a.push((p + i, j, c_sel[(i, j)]));
            }
        }
    }
    let mut b = pr.g.clone();
    if with_c {
        b.extend_from_slice(d_sel);
    }
    ProblemBuilder::new()
        .hessian_triplets(n + p, &h, Triangle::Lower)
        .constraints_triplets(p + q1, n + p, &a)
        .rhs(&b)
        .build()
}

fn factor(problem: &Problem) -> Result<Factorization> {
    let options = Options {
        method: Method::Auto,
        ..Default::default()
    };
    let plan = Plan::analyze(problem, &options)?;
    let f = plan.factor(problem)?;
    f.verdict().map_err(|e| match e {
        Error::Singular { detail, .. } => Error::FitNonUnique {
            direction: Vec::new(),
            detail: format!(
                "the augmented KKT matrix is singular, so [F; C] does not have full column rank ({detail}); \
                 the augmented method does not compute the direction: use the dense method for it"
            ),
        },
        e => e,
    })?;
    Ok(f)
}

struct State {
    beta: Vec<f64>,
    r: Vec<f64>,
    yf: Vec<f64>,
    yc: Vec<f64>,
}

pub(super) fn fit(pr: &LsqProblem, opt: &FitOptions) -> Result<Fit> {
    let (p, n) = (pr.p(), pr.n());
    let RestrictionAnalysis {
        r: rank_c,
        sel,
        dependent,
        mut notes,
        cd,
        ..
    } = analyze_restrictions(pr, opt)?;
    let c_sel = cd_rows(&cd, &sel);
    let c_sel_m = Matrix::Dense(c_sel.clone());
    let d_sel: Vec<f64> = sel.iter().map(|&i| pr.d[i]).collect();
    let problem = eqp(pr, &c_sel, &d_sel, true)?;
    let f = factor(&problem)?;
    let s = f.solve()?;
    let mut st = State {
        beta: s.x[..n].to_vec(),
        r: s.x[n..].to_vec(),
        yf: s.y[..p].to_vec(),
        yc: s.y[p..].to_vec(),
    };
    let wv: Vec<f64> = pr.w.clone().unwrap_or_else(|| vec![1.0; p]);
    let lam = vec![pr.ridge; n];
    let log = refine_loop(
        &mut st,
        opt.max_refinement_steps,
        |s: &State| {
            // K z = [0; g; d₁] residuals in doubled precision.
            let mut rb = Acc::new(n);
            rb.add_diag_vec(&lam, &s.beta, -1.0);
            rb.add_tr_mul(&pr.f, &s.yf, -1.0);
            rb.add_tr_mul(&c_sel_m, &s.yc, -1.0);
            let mut rr = Acc::new(p);
            rr.add_diag_vec(&wv, &s.r, -1.0);
            rr.add_vec(&s.yf, -1.0);
            let mut rf = Acc::new(p);
            rf.add_vec(&pr.g, 1.0);
            rf.add_mul(&pr.f, &s.beta, -1.0);
            rf.add_vec(&s.r, -1.0);
            let mut rc = Acc::new(rank_c);
            rc.add_vec(&d_sel, 1.0);
            rc.add_mul(&c_sel_m, &s.beta, -1.0);
            let mut cx: Vec<f64> = rb.finish();
            cx.extend(rr.finish());
            cx.iter_mut().for_each(|v| *v = -*v);
            let mut bx = rf.finish();
            bx.extend(rc.finish());
            (cx, bx)
        },
        |(cx, bx)| f.solve_with(cx, bx),
        |s, d| {
            s.beta.iter_mut().zip(&d.x[..n]).for_each(|(a, b)| *a += b);
            s.r.iter_mut().zip(&d.x[n..]).for_each(|(a, b)| *a += b);
            s.yf.iter_mut().zip(&d.y[..p]).for_each(|(a, b)| *a += b);
            s.yc.iter_mut().zip(&d.y[p..]).for_each(|(a, b)| *a += b);
            let bn = inf_norm(&s.beta);
            if bn == 0.0 {
                0.0
            } else {
                inf_norm(&d.x[..n]) / bn
            }
        },
    )?;
    let mut out = Fit::point(
        pr,
        &st.beta,
        &sel,
        &st.yc,
        rank_c,
        dependent,
        log,
        FitMethod::Augmented,
        std::mem::take(&mut notes),
    );
    if !opt.inference {
        return Ok(out);
    }
    let Some(sigma2) = out.start_inference(pr.ridge) else {
        return Ok(out);
    };
    let rss = out.rss;
    if n <= opt.augmented_covariance_max_n {
        // Column j of Z(ZᵀFᵀWFZ)⁻¹Zᵀ is the β of: min ½βᵀFᵀWFβ − βⱼ s.t. C₁β = 0.
        let mut cov = faer::Mat::<f64>::zeros(n, n);
        let zero_b = vec![0.0; p + rank_c];
        let mut c = vec![0.0; n + p];
        for j in 0..n {
            c[j] = -1.0;
            let s = f.solve_with(&c, &zero_b)?;
            c[j] = 0.0;
            for i in 0..n {
                cov[(i, j)] = sigma2 * s.x[i];
            }
        }
        // Symmetrize the rounding.
        for j in 0..n {
            for i in 0..j {
                let v = 0.5 * (cov[(i, j)] + cov[(j, i)]);
                cov[(i, j)] = v;
                cov[(j, i)] = v;
            }
        }
        out.standard_errors = Some((0..n).map(|i| cov[(i, i)].max(0.0).sqrt()).collect());
        out.covariance = Some(cov);
    } else {
        out.notes.push(format!(
            "n = {n} > {}: the augmented method skipped the covariance (one solve per coefficient)",
            opt.augmented_covariance_max_n
        ));
    }
    if rank_c > 0 && p > n {
        let unrestricted = eqp(pr, &c_sel, &d_sel, false)?;
        match factor(&unrestricted).and_then(|fu| fu.solve()) {
            Ok(su) => {
                let bu = &su.x[..n];
                let (_, rss_u) = pr.residuals(bu);
                let increase = (rss - rss_u).max(0.0);
                out.restriction_test = Some(stats::f_test(rss, increase, rank_c, p - n, p));
            }
            Err(_) => out
                .notes
                .push("F alone does not have full column rank: the unrestricted fit is not unique, no test".into()),
        }
    }
    Ok(out)
}
