//! The dense null-space QR method (Golub & Van Loan, *Matrix Computations*, 4th ed.,
//! §6.2) with Björck's refinement of the augmented system.
//!
//! With `F̃ = [W^½F; √λ·I]`, `g̃ = [W^½g; 0]`, the system solved is
//!
//! ```text
//! r + F̃β = g̃,   F̃ᵀr − C₁ᵀy₁ = 0,   C₁β = d₁
//! ```
//!
//! where `C₁` are the linearly independent rows of `C` chosen by the column-pivoted QR
//! `CᵀP = Q·[R₁₁ R₁₂; 0 0]`. With `Q = [Q₁ Q₂]`, `Z = Q₂` spans the null space of `C`;
//! `F̃Q = [G₁ G₂]` is formed by applying the q Householder reflectors of `Q` to the rows of
//! `F̃` (`O(p·n·q)`, not a product with an n×n matrix), then `G₂ = Q_a·R₀` (blocked
//! Householder QR) and `R₀·Π = Q_b·R_b` (column-pivoted QR of the small triangle, which
//! reveals the rank of `G₂`, i.e. of `[F̃; C]`).

use faer::dyn_stack::{MemBuffer, MemStack};
use faer::linalg::householder;
use faer::linalg::qr::no_pivoting::factor as qr_np;
use faer::linalg::triangular_solve;
use faer::{get_global_parallelism, Conj, Mat, MatMut, MatRef};

use super::refine::{refine_loop, Acc};
use super::stats::{self, RestrictionTest};
use super::{default_tol, inf_norm, Fit, FitMethod, FitOptions, LsqProblem};
use crate::error::{Error, Result};

/// Householder reflectors stored LAPACK-style (basis below the diagonal + block factors).
pub(crate) struct Reflectors<'a> {
    basis: MatRef<'a, f64>,
    coeff: MatRef<'a, f64>,
}

impl Reflectors<'_> {
    fn is_empty(&self) -> bool {
        self.coeff.ncols() == 0 || self.coeff.nrows() == 0
    }

    /// `m ← Q·m`.
    fn apply(&self, m: MatMut<'_, f64>) {
        if self.is_empty() || m.ncols() == 0 {
            return;
        }
        let req = householder::apply_block_householder_sequence_on_the_left_in_place_scratch::<f64>(
            self.basis.nrows(),
            self.coeff.nrows(),
            m.ncols(),
        );
        let mut buf = MemBuffer::new(req);
        householder::apply_block_householder_sequence_on_the_left_in_place_with_conj(
            self.basis,
            self.coeff,
            Conj::No,
            m,
            get_global_parallelism(),
            MemStack::new(&mut buf),
        );
    }

    /// `m ← Qᵀ·m`.
    fn apply_t(&self, m: MatMut<'_, f64>) {
        if self.is_empty() || m.ncols() == 0 {
            return;
        }
        let req = householder::apply_block_householder_sequence_transpose_on_the_left_in_place_scratch::<f64>(
            self.basis.nrows(),
            self.coeff.nrows(),
            m.ncols(),
        );
        let mut buf = MemBuffer::new(req);
        householder::apply_block_householder_sequence_transpose_on_the_left_in_place_with_conj(
            self.basis,
            self.coeff,
            Conj::No,
            m,
            get_global_parallelism(),
            MemStack::new(&mut buf),
        );
    }

    /// `m ← m·Q`.
    fn apply_right(&self, m: MatMut<'_, f64>) {
        if self.is_empty() || m.nrows() == 0 {
            return;
        }
        let req = householder::apply_block_householder_sequence_on_the_right_in_place_scratch::<f64>(
            self.basis.nrows(),
            self.coeff.nrows(),
            m.nrows(),
        );
        let mut buf = MemBuffer::new(req);
        householder::apply_block_householder_sequence_on_the_right_in_place_with_conj(
            self.basis,
            self.coeff,
            Conj::No,
            m,
            get_global_parallelism(),
            MemStack::new(&mut buf),
        );
    }

    fn apply_vec(&self, v: &mut [f64]) {
        let mut m = Mat::from_fn(v.len(), 1, |i, _| v[i]);
        self.apply(m.as_mut());
        v.iter_mut().enumerate().for_each(|(i, x)| *x = m[(i, 0)]);
    }

    fn apply_t_vec(&self, v: &mut [f64]) {
        let mut m = Mat::from_fn(v.len(), 1, |i, _| v[i]);
        self.apply_t(m.as_mut());
        v.iter_mut().enumerate().for_each(|(i, x)| *x = m[(i, 0)]);
    }
}

/// A column-pivoted QR with its numerical rank. `AΠ = QR` with column `j` of `AΠ` equal to
/// column `perm[j]` of `A`.
pub(crate) struct PivQr {
    qr: faer::linalg::solvers::ColPivQr<f64>,
    pub perm: Vec<usize>,
    pub rank: usize,
}

impl PivQr {
    pub(crate) fn new(a: MatRef<'_, f64>, tol: f64) -> PivQr {
        let qr = faer::linalg::solvers::ColPivQr::new(a);
        let perm = qr.P().arrays().0.to_vec();
        let r = qr.R();
        let size = a.nrows().min(a.ncols());
        let r00 = if size > 0 { r[(0, 0)].abs() } else { 0.0 };
        let rank = (0..size)
            .take_while(|&i| r00 > 0.0 && r[(i, i)].abs() > tol * r00)
            .count();
        PivQr { qr, perm, rank }
    }

    fn reflectors(&self) -> Reflectors<'_> {
        Reflectors {
            basis: self.qr.Q_basis(),
            coeff: self.qr.Q_coeff(),
        }
    }

    /// The leading `rank × rank` triangle.
    fn r11(&self) -> MatRef<'_, f64> {
        self.qr.R().get(..self.rank, ..self.rank)
    }

    fn r(&self) -> MatRef<'_, f64> {
        self.qr.R()
    }
}

/// `x ← R⁻¹x` for upper triangular R.
fn solve_upper(r: MatRef<'_, f64>, x: &mut [f64]) {
    if x.is_empty() {
        return;
    }
    let mut m = Mat::from_fn(x.len(), 1, |i, _| x[i]);
    triangular_solve::solve_upper_triangular_in_place(r, m.as_mut(), get_global_parallelism());
    x.iter_mut().enumerate().for_each(|(i, v)| *v = m[(i, 0)]);
}

/// `x ← R⁻ᵀx` for upper triangular R.
fn solve_upper_t(r: MatRef<'_, f64>, x: &mut [f64]) {
    if x.is_empty() {
        return;
    }
    let mut m = Mat::from_fn(x.len(), 1, |i, _| x[i]);
    triangular_solve::solve_lower_triangular_in_place(r.transpose(), m.as_mut(), get_global_parallelism());
    x.iter_mut().enumerate().for_each(|(i, v)| *v = m[(i, 0)]);
}

/// All factors of one restricted fit.
struct Factors {
    /// `F̃` (pt × n).
    ft: Mat<f64>,
    /// `F̃·Q` with `G₂` overwritten by its Householder QR (pt × n).
    g: Mat<f64>,
    /// Block factors of the QR of `G₂`.
    a_coeff: Mat<f64>,
    cqr: Option<PivQr>,
    bqr: Option<PivQr>,
    /// Rank of C.
    r: usize,
    /// Columns of G₂.
    k: usize,
    /// Rows of `C` that enter (`C₁`), in pivot order.
    sel: Vec<usize>,
}

impl Factors {
    fn qc(&self) -> Option<Reflectors<'_>> {
        self.cqr.as_ref().map(|c| c.reflectors())
    }

    fn qa(&self) -> Reflectors<'_> {
        let (pt, k) = (self.g.nrows(), self.k);
        Reflectors {
            basis: self.g.as_ref().get(.., self.r..self.r + k),
            coeff: if pt.min(k) == 0 {
                self.a_coeff.as_ref().get(..0, ..0)
            } else {
                self.a_coeff.as_ref()
            },
        }
    }

    fn g1(&self) -> MatRef<'_, f64> {
        self.g.as_ref().get(.., ..self.r)
    }

    /// `Q̂ᵀv` with `Q̂ = Q_a·diag(Q_b, I)`.
    fn qhat_t(&self, v: &mut [f64]) {
        self.qa().apply_t_vec(v);
        if let Some(b) = &self.bqr {
            let m = b.qr.Q_basis().nrows();
            b.reflectors().apply_t_vec(&mut v[..m]);
        }
    }

    /// `Q̂v`.
    fn qhat(&self, v: &mut [f64]) {
        if let Some(b) = &self.bqr {
            let m = b.qr.Q_basis().nrows();
            b.reflectors().apply_vec(&mut v[..m]);
        }
        self.qa().apply_vec(v);
    }

    /// `v ← Q_c·v` (length n).
    fn qc_apply(&self, v: &mut [f64]) {
        if let Some(q) = self.qc() {
            q.apply_vec(v);
        }
    }

    fn qc_apply_t(&self, v: &mut [f64]) {
        if let Some(q) = self.qc() {
            q.apply_t_vec(v);
        }
    }

    /// Solves the augmented system `r + F̃β = f`, `F̃ᵀr − C₁ᵀy = h`, `C₁β = e`.
    fn solve(&self, f: &[f64], h: &[f64], e: &[f64]) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
        let (r, k) = (self.r, self.k);
        let n = r + k;
        // u from R₁₁ᵀu = e.
        let mut u = e.to_vec();
        if let Some(c) = &self.cqr {
            solve_upper_t(c.r11(), &mut u);
        }
        // Qᵀh = [h₁; h₂].
        let mut hq = h.to_vec();
        self.qc_apply_t(&mut hq);
        // f' = f − G₁u.
        let mut fp = f.to_vec();
        if r > 0 {
            for (j, uj) in u.iter().enumerate() {
                let col = self.g1().col(j);
                for (i, fi) in fp.iter_mut().enumerate() {
                    *fi -= col[i] * uj;
                }
            }
        }
        // s = R_b⁻ᵀ Πᵀ h₂.
        let b = self.bqr.as_ref();
        let mut s = vec![0.0; k];
        if let Some(b) = b {
            for (j, sj) in s.iter_mut().enumerate() {
                *sj = hq[r + b.perm[j]];
            }
            solve_upper_t(b.r().get(..k, ..k), &mut s);
        }
        // Q̂ᵀf' = [a₁; a₂].
        self.qhat_t(&mut fp);
        let mut vp: Vec<f64> = (0..k).map(|j| fp[j] - s[j]).collect();
        if let Some(b) = b {
            solve_upper(b.r().get(..k, ..k), &mut vp);
        }
        // r = Q̂[s; a₂].
        fp[..k].copy_from_slice(&s);
        self.qhat(&mut fp);
        let res = fp;
        // β = Q[u; Πv'].
        let mut beta = vec![0.0; n];
        beta[..r].copy_from_slice(&u);
        if let Some(b) = b {
            for j in 0..k {
                beta[r + b.perm[j]] = vp[j];
            }
        }
        self.qc_apply(&mut beta);
        // y = R₁₁⁻¹(G₁ᵀr − h₁).
        let mut y = vec![0.0; r];
        for (j, yj) in y.iter_mut().enumerate() {
            let col = self.g1().col(j);
            *yj = (0..res.len()).map(|i| col[i] * res[i]).sum::<f64>() - hq[j];
        }
        if let Some(c) = &self.cqr {
            solve_upper(c.r11(), &mut y);
        }
        (res, beta, y)
    }
}

struct State {
    r: Vec<f64>,
    beta: Vec<f64>,
    y: Vec<f64>,
}

pub(super) fn fit(pr: &LsqProblem, opt: &FitOptions) -> Result<Fit> {
    let (p, n) = (pr.p(), pr.n());
    let lam = pr.ridge;
    let pt = p + if lam > 0.0 { n } else { 0 };
    // F̃ and g̃.
    let mut ft = Mat::<f64>::zeros(pt, n);
    pr.f.for_each(|i, j, v| ft[(i, j)] += pr.sqrt_w(i) * v);
    if lam > 0.0 {
        for j in 0..n {
            ft[(p + j, j)] = lam.sqrt();
        }
    }
    let mut gt = vec![0.0; pt];
    for (i, gi) in gt.iter_mut().take(p).enumerate() {
        *gi = pr.sqrt_w(i) * pr.g[i];
    }
    let ra = analyze_restrictions(pr, opt)?;
    let RestrictionAnalysis {
        cqr,
        r,
        sel,
        dependent,
        notes,
        cd,
    } = ra;
    let k = n - r;
    // G = F̃Q.
    let mut g = ft.clone();
    if let Some(c) = &cqr {
        c.reflectors().apply_right(g.as_mut());
    }
    // Householder QR of G₂ in place.
    let bs = qr_np::recommended_block_size::<f64>(pt, k).max(1);
    let mut a_coeff = Mat::<f64>::zeros(bs, pt.min(k));
    if pt.min(k) > 0 {
        let par = get_global_parallelism();
        let req = qr_np::qr_in_place_scratch::<f64>(pt, k, bs, par, Default::default());
        let mut buf = MemBuffer::new(req);
        qr_np::qr_in_place(
            g.as_mut().get_mut(.., r..),
            a_coeff.as_mut(),
            par,
            MemStack::new(&mut buf),
            Default::default(),
        );
    }
    // Rank-revealing QR of the triangle R₀ (min(pt,k) × k).
    let bqr = if k > 0 {
        let m0 = pt.min(k);
        let r0 = Mat::from_fn(m0, k, |i, j| if i <= j { g[(i, r + j)] } else { 0.0 });
        Some(PivQr::new(r0.as_ref(), default_tol(pt, k, opt.rank_tolerance)))
    } else {
        None
    };
    let fac = Factors {
        ft,
        g,
        a_coeff,
        cqr,
        bqr,
        r,
        k,
        sel,
    };
    let d_sel: Vec<f64> = fac.sel.iter().map(|&i| pr.d[i]).collect();
    // [F̃; C] rank.
    if let Some(b) = &fac.bqr {
        if b.rank < k {
            let kk = b.rank;
            let rb = b.r();
            let mut z = vec![0.0; kk];
            for (i, zi) in z.iter_mut().enumerate() {
                *zi = -rb[(i, kk)];
            }
            solve_upper(rb.get(..kk, ..kk), &mut z);
            let mut v = vec![0.0; n];
            for (j, zj) in z.iter().enumerate() {
                v[r + b.perm[j]] = *zj;
            }
            v[r + b.perm[kk]] = 1.0;
            fac.qc_apply(&mut v);
            let norm = crate::problem::norm2(&v);
            v.iter_mut().for_each(|x| *x /= norm);
            let involved = super::report::columns_involved(&v);
            let shown: Vec<String> = largest_entries(&v, 8)
                .into_iter()
                .filter(|(j, _)| involved.contains(j))
                .map(|(j, x)| format!("{} (column {j}): {x:+.3}", pr.names[j]))
                .collect();
            let more = if involved.len() > shown.len() {
                format!(" and {} more", involved.len() - shown.len())
            } else {
                String::new()
            };
            return Err(Error::FitNonUnique {
                direction: v,
                detail: format!(
                    "[F; C] has rank {} < n = {n}: the columns {}{more} (0-based) are linearly dependent \
                     (F·δ ≈ 0 and C·δ ≈ 0 along the unit direction δ with these components); add restrictions, \
                     drop one of these columns, or use a ridge",
                    r + kk,
                    shown.join(", ")
                ),
            });
        }
    }
    // Solve and refine.
    let zero_h = vec![0.0; n];
    let (r0, b0, y0) = fac.solve(&gt, &zero_h, &d_sel);
    let mut st = State { r: r0, beta: b0, y: y0 };
    let c_sel = cd_rows(&cd, &fac.sel);
    let log = refine_loop(
        &mut st,
        opt.max_refinement_steps,
        |s: &State| {
            let mut a1 = Acc::new(pt);
            a1.add_vec(&gt, 1.0);
            a1.add_vec(&s.r, -1.0);
            a1.add_dense_mul(fac.ft.as_ref(), &s.beta, -1.0);
            let mut a2 = Acc::new(n);
            a2.add_dense_tr_mul(fac.ft.as_ref(), &s.r, -1.0);
            a2.add_dense_tr_mul(c_sel.as_ref(), &s.y, 1.0);
            let mut a3 = Acc::new(r);
            a3.add_vec(&d_sel, 1.0);
            a3.add_dense_mul(c_sel.as_ref(), &s.beta, -1.0);
            (a1.finish(), a2.finish(), a3.finish())
        },
        |(f, h, e)| Ok(fac.solve(f, h, e)),
        |s, (dr, db, dy)| {
            s.r.iter_mut().zip(dr).for_each(|(a, b)| *a += b);
            s.beta.iter_mut().zip(db).for_each(|(a, b)| *a += b);
            s.y.iter_mut().zip(dy).for_each(|(a, b)| *a += b);
            let bn = inf_norm(&s.beta);
            if bn == 0.0 {
                0.0
            } else {
                inf_norm(db) / bn
            }
        },
    )?;
    let mut out = Fit::point(
        pr,
        &st.beta,
        &fac.sel,
        &st.y,
        r,
        dependent,
        log,
        FitMethod::Dense,
        notes,
    );
    if opt.inference {
        if let Some(sigma2) = out.start_inference(lam) {
            let rss = out.rss;
            let cov = covariance(&fac, sigma2);
            out.standard_errors = Some((0..n).map(|i| cov[(i, i)].max(0.0).sqrt()).collect());
            out.covariance = Some(cov);
            out.restriction_test = restriction_test(&fac, &st.r, rss, p, n, &mut out.notes);
            // The projection gives RSS_R − RSS_U without cancellation, but its relative accuracy
            // degrades with the conditioning of the restricted directions (about 3e-9 on
            // Longley). When the increase is not small against RSS_R, a refined unrestricted fit
            // and a difference are more accurate (relative error ≤ ε·RSS_R/increase).
            if let Some(t) = out.restriction_test {
                if t.rss_increase > 1e-6 * rss {
                    let unrestricted = LsqProblem {
                        c: crate::problem::Matrix::Dense(Mat::zeros(0, n)),
                        d: Vec::new(),
                        ..pr.clone()
                    };
                    let free = fit(
                        &unrestricted,
                        &FitOptions {
                            inference: false,
                            ..*opt
                        },
                    );
                    match free {
                        Ok(free) => {
                            out.restriction_test = Some(stats::f_test(rss, (rss - free.rss).max(0.0), t.df1, t.df2, p));
                        }
                        Err(_) => {
                            out.restriction_test = None;
                            out.notes.push(
                                "F alone does not have full column rank: the unrestricted fit is not unique, no test"
                                    .into(),
                            );
                        }
                    }
                }
            }
        }
    }
    Ok(out)
}

/// Rank analysis of `C`: which rows enter, which depend on others (consistent ones are
/// dropped with a note, contradictory ones are an error).
pub(crate) struct RestrictionAnalysis {
    pub cqr: Option<PivQr>,
    pub r: usize,
    pub sel: Vec<usize>,
    pub dependent: Vec<usize>,
    pub notes: Vec<String>,
    pub cd: Mat<f64>,
}

pub(crate) fn analyze_restrictions(pr: &LsqProblem, opt: &FitOptions) -> Result<RestrictionAnalysis> {
    let (n, q) = (pr.n(), pr.q());
    let cd = pr.c.to_dense();
    let (cqr, r) = if n > 0 && q > 0 {
        let c = PivQr::new(cd.transpose(), default_tol(n, q, opt.rank_tolerance));
        let r = c.rank;
        (Some(c), r)
    } else {
        (None, 0)
    };
    let perm_c: Vec<usize> = cqr.as_ref().map_or_else(|| (0..q).collect(), |c| c.perm.clone());
    let sel: Vec<usize> = perm_c[..r].to_vec();
    let dependent: Vec<usize> = perm_c[r..].to_vec();
    let mut notes = Vec::new();
    if !dependent.is_empty() {
        // Evaluate the dependent rows at the particular solution of the independent ones.
        let mut u: Vec<f64> = sel.iter().map(|&i| pr.d[i]).collect();
        if let Some(c) = &cqr {
            solve_upper_t(c.r11(), &mut u);
        }
        let mut beta_p = vec![0.0; n];
        beta_p[..r].copy_from_slice(&u);
        if let Some(c) = &cqr {
            c.reflectors().apply_vec(&mut beta_p);
        }
        let mut acc = Acc::new(q);
        acc.add_vec(&pr.d, -1.0);
        acc.add_mul(&pr.c, &beta_p, 1.0);
        let resid = acc.finish();
        let bn = inf_norm(&beta_p);
        let tol = 1e3 * (n.max(q) as f64) * f64::EPSILON;
        let mut bad = Vec::new();
        let mut words = Vec::new();
        for (t, &i) in dependent.iter().enumerate() {
            let row_norm: f64 = (0..n).map(|j| cd[(i, j)].abs()).sum();
            let scale = row_norm * bn + pr.d[i].abs();
            let combo = describe_combination(cqr.as_ref(), &sel, r, t);
            if resid[i].abs() > tol * scale.max(f64::MIN_POSITIVE) {
                bad.push(i);
                words.push(format!(
                    "row {i} of C is {combo} but d[{i}] differs from the same combination of d by {:.3e}",
                    -resid[i]
                ));
            } else {
                notes.push(format!(
                    "restriction row {i} is {combo} (consistent): it adds nothing and gets multiplier 0"
                ));
            }
        }
        if !bad.is_empty() {
            return Err(Error::FitContradictory {
                rows: bad,
                detail: words.join("; "),
            });
        }
    }
    Ok(RestrictionAnalysis {
        cqr,
        r,
        sel,
        dependent,
        notes,
        cd,
    })
}

pub(crate) fn cd_rows(cd: &Mat<f64>, rows: &[usize]) -> Mat<f64> {
    Mat::from_fn(rows.len(), cd.ncols(), |i, j| cd[(rows[i], j)])
}

fn largest_entries(v: &[f64], count: usize) -> Vec<(usize, f64)> {
    let mut idx: Vec<usize> = (0..v.len()).collect();
    idx.sort_by(|&a, &b| v[b].abs().total_cmp(&v[a].abs()));
    idx.into_iter()
        .take(count)
        .filter(|&j| v[j] != 0.0)
        .map(|j| (j, v[j]))
        .collect()
}

/// "α₀·row i₀ + α₁·row i₁ …" for the `t`-th dependent row: `α = R₁₁⁻¹R₁₂[:, t]`.
fn describe_combination(cqr: Option<&PivQr>, sel: &[usize], r: usize, t: usize) -> String {
    let Some(c) = cqr else {
        return "zero".into();
    };
    if r == 0 {
        return "zero (numerically)".into();
    }
    let rr = c.r();
    let mut alpha: Vec<f64> = (0..r).map(|i| rr[(i, r + t)]).collect();
    solve_upper(c.r11(), &mut alpha);
    let amax = inf_norm(&alpha);
    let terms: Vec<String> = alpha
        .iter()
        .enumerate()
        .filter(|(_, a)| a.abs() > 1e-10 * amax)
        .map(|(j, a)| format!("{a:.6}·row {}", sel[j]))
        .collect();
    if terms.is_empty() {
        "zero (numerically)".into()
    } else {
        terms.join(" + ")
    }
}

/// `σ̂²·MMᵀ` with `M = Q·[0; ΠR_b⁻¹]`: the covariance `σ̂²Z(ZᵀF̃ᵀF̃Z)⁻¹Zᵀ` from the
/// triangular factor, never inverting `F̃ᵀF̃`.
fn covariance(fac: &Factors, sigma2: f64) -> Mat<f64> {
    let (r, k) = (fac.r, fac.k);
    let n = r + k;
    let mut m = Mat::<f64>::zeros(n, k);
    if let Some(b) = &fac.bqr {
        let mut rinv = Mat::<f64>::identity(k, k);
        triangular_solve::solve_upper_triangular_in_place(b.r().get(..k, ..k), rinv.as_mut(), get_global_parallelism());
        for j in 0..k {
            for jj in 0..k {
                m[(r + b.perm[j], jj)] = rinv[(j, jj)];
            }
        }
    }
    if let Some(q) = fac.qc() {
        q.apply(m.as_mut());
    }
    let mut cov = &m * m.transpose();
    for j in 0..n {
        for i in 0..n {
            cov[(i, j)] *= sigma2;
        }
    }
    cov
}

/// F-test of the restrictions. The unrestricted fit spans `[G₂ G₁]`; with
/// `B = (Q̂ᵀG₁)[k..]` and `a₂ = (Q̂ᵀr_R)[k..]`, `RSS_R − RSS_U = ‖P_B a₂‖²`.
fn restriction_test(
    fac: &Factors,
    r_restricted: &[f64],
    rss: f64,
    p: usize,
    n: usize,
    notes: &mut Vec<String>,
) -> Option<RestrictionTest> {
    let (r, k) = (fac.r, fac.k);
    if r == 0 {
        return None;
    }
    if p <= n {
        notes.push("the restriction test needs p > n (unrestricted residual degrees of freedom)".into());
        return None;
    }
    let pt = fac.g.nrows();
    let mut b = fac.g1().to_owned();
    for j in 0..r {
        let mut col: Vec<f64> = (0..pt).map(|i| b[(i, j)]).collect();
        fac.qhat_t(&mut col);
        for i in 0..pt {
            b[(i, j)] = col[i];
        }
    }
    let b_low = b.as_ref().get(k.., ..);
    let bq = PivQr::new(b_low, default_tol(pt - k, r, None));
    // Rank relative to the size of F̃'s columns, not to B's own largest pivot (B may be
    // rounding noise only).
    let g1_norm = (0..r)
        .map(|j| fac.g1().col(j).iter().map(|x| x * x).sum::<f64>().sqrt())
        .fold(0.0f64, f64::max);
    let tol_abs = default_tol(pt, n, None) * g1_norm;
    let rank_b = (0..bq.rank).take_while(|&i| bq.r()[(i, i)].abs() > tol_abs).count();
    if rank_b < r {
        notes.push("F alone does not have full column rank: the unrestricted fit is not unique, no test".into());
        return None;
    }
    let mut a = r_restricted.to_vec();
    fac.qhat_t(&mut a);
    let mut a2 = a[k..].to_vec();
    bq.reflectors().apply_t_vec(&mut a2);
    let drss: f64 = a2[..r].iter().map(|x| x * x).sum();
    Some(stats::f_test(rss, drss, r, p - n, p))
}
