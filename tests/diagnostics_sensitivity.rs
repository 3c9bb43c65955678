//! Derivatives of the solution map against central finite differences (re-solving with
//! perturbed data), against nalgebra's inverse, and adjoint/forward consistency. Every
//! direct method the crate offers except `auto` and `riccati` runs every case (counted);
//! Riccati refuses these problems, which have no stage structure, and runs none (also
//! counted, see `assert_ran`).

mod diagnostics_support;

use diagnostics_support::*;
use faer::Mat;
use tangency::diagnostics::sensitivity::{
    adjoint, jacobian_bytes, jacobians, jvp, objective_sensitivity, JacobianRequest, Perturbation,
};
use tangency::{Error, Factorization, Matrix, Options, Plan, Problem, ProblemBuilder, Solution, Triangle};

/// Relative tolerance for derivatives vs central differences on well-conditioned problems.
const FD_TOL: f64 = 1e-6;

fn factor(p: &Problem, opts: &Options) -> Option<Factorization> {
    match Plan::analyze(p, opts).and_then(|plan| plan.factor(p)) {
        Ok(f) => Some(f),
        // Only Riccati declines these problems (no stage dimensions, no stage structure);
        // `assert_ran` checks that every other method ran every case.
        Err(e) => {
            assert!(
                opts.method == tangency::Method::Riccati && matches!(e, Error::InvalidOption(_)),
                "{:?} refused: {e}",
                opts.method
            );
            None
        }
    }
}

/// Each loop below runs every case with every method except Riccati: the random problems
/// here are not stage-structured, so its plan refuses each one and it runs none (asserted,
/// so a change on either side shows). Its derivatives are not covered by this file.
fn assert_ran(name: &str, ran: usize, cases: usize) {
    let expected = if name == "riccati" { 0 } else { cases };
    assert_eq!(ran, expected, "{name}: ran {ran} of {cases} cases");
}

/// The problem with data H + tδH, c + tδc, A + tδA, b + tδb (dense blocks).
fn moved(p: &Problem, d: &Perturbation, t: f64) -> Problem {
    let (mut h, mut a) = (p.hessian().to_dense(), p.constraints().to_dense());
    if let Some(dh) = &d.h {
        dh.for_each(|i, j, v| h[(i, j)] += t * v);
    }
    if let Some(da) = &d.a {
        da.for_each(|i, j, v| a[(i, j)] += t * v);
    }
    let mut c = p.linear().to_vec();
    if let Some(dc) = &d.c {
        c.iter_mut().zip(dc).for_each(|(x, v)| *x += t * v);
    }
    let mut b = p.rhs().to_vec();
    if let Some(db) = &d.b {
        b.iter_mut().zip(db).for_each(|(x, v)| *x += t * v);
    }
    ProblemBuilder::new()
        .hessian_dense(h.as_ref(), Triangle::Full)
        .constraints_dense(a.as_ref())
        .linear(&c)
        .rhs(&b)
        .build()
        .unwrap()
}

fn solve_moved(p: &Problem, d: &Perturbation, t: f64, opts: &Options) -> Solution {
    let q = moved(p, d, t);
    Plan::analyze(&q, opts).unwrap().factor(&q).unwrap().solve().unwrap()
}

fn random_symmetric(rng: &mut Rng, n: usize) -> Mat<f64> {
    let mut d = Mat::zeros(n, n);
    for i in 0..n {
        for j in 0..=i {
            let v = rng.sym();
            d[(i, j)] = v;
            d[(j, i)] = v;
        }
    }
    d
}

fn random_direction(rng: &mut Rng, n: usize, m: usize, parts: [bool; 4]) -> Perturbation {
    Perturbation {
        h: parts[0].then(|| Matrix::Dense(random_symmetric(rng, n))),
        c: parts[1].then(|| rng.vec(n)),
        a: parts[2].then(|| Matrix::Dense(Mat::from_fn(m, n, |_, _| rng.sym()))),
        b: parts[3].then(|| rng.vec(m)),
    }
}

fn rel_close(fd: &[f64], an: &[f64], tol: f64) -> bool {
    max_abs_diff(fd, an) <= tol * inf_norm(an).max(1.0)
}

/// Forward mode (dx, dy and the objective change) vs central differences, each data block
/// alone and all together, on random convex well-conditioned problems.
#[test]
fn jvp_matches_central_differences() {
    let mut rng = Rng::new(11);
    for (name, opts) in methods() {
        let mut checked = 0;
        let mut ran = 0;
        for case in 0..40 {
            let n = 2 + rng.below(6);
            let m = rng.below(n);
            let p = well_conditioned(&mut rng, n, m);
            let Some(f) = factor(&p, &opts) else { continue };
            ran += 1;
            let s = f.solve().unwrap();
            let parts = match case % 5 {
                0 => [true, false, false, false],
                1 => [false, true, false, false],
                2 => [false, false, true, false],
                3 => [false, false, false, true],
                _ => [true, true, true, true],
            };
            let d = random_direction(&mut rng, n, m, parts);
            let t = jvp(&f, &s, &d).unwrap();
            let step = 1e-5;
            let (sp, sm) = (solve_moved(&p, &d, step, &opts), solve_moved(&p, &d, -step, &opts));
            let fd =
                |a: &[f64], b: &[f64]| -> Vec<f64> { a.iter().zip(b).map(|(u, v)| (u - v) / (2.0 * step)).collect() };
            let (fdx, fdy) = (fd(&sp.x, &sm.x), fd(&sp.y, &sm.y));
            let fobj = (sp.objective - sm.objective) / (2.0 * step);
            assert!(
                rel_close(&fdx, &t.dx, FD_TOL),
                "{name} case {case}: dx {:?} vs fd {:?}",
                t.dx,
                fdx
            );
            assert!(
                rel_close(&fdy, &t.dy, FD_TOL),
                "{name} case {case}: dy {:?} vs fd {:?}",
                t.dy,
                fdy
            );
            assert!(
                (fobj - t.objective).abs() <= FD_TOL * t.objective.abs().max(1.0),
                "{name} case {case}: objective"
            );
            checked += 1;
        }
        assert_ran(&name, ran, 40);
        if name == "dense" {
            assert_eq!(checked, 40);
        }
    }
}

/// ∂f*/∂b = −y and ∂f*/∂c = x, checked by re-solving with one entry of b (or c) moved
/// both ways with the same factorization.
#[test]
fn objective_derivatives_by_resolving() {
    let mut rng = Rng::new(12);
    for (name, opts) in methods() {
        let mut ran = 0;
        for case in 0..25 {
            let n = 1 + rng.below(7);
            let m = rng.below(n + 1);
            let p = well_conditioned(&mut rng, n, m);
            let Some(f) = factor(&p, &opts) else { continue };
            ran += 1;
            let s = f.solve().unwrap();
            let d = objective_sensitivity(&s);
            let step = 1e-4;
            for i in 0..m {
                let (mut bp, mut bm) = (p.rhs().to_vec(), p.rhs().to_vec());
                bp[i] += step;
                bm[i] -= step;
                let fp = f.solve_with(p.linear(), &bp).unwrap().objective;
                let fm = f.solve_with(p.linear(), &bm).unwrap().objective;
                let fd = (fp - fm) / (2.0 * step);
                assert!(
                    (fd - d.wrt_b[i]).abs() <= FD_TOL * d.wrt_b[i].abs().max(1.0),
                    "{name} case {case} b{i}: fd {fd} vs −y {}",
                    d.wrt_b[i]
                );
                assert_eq!(d.wrt_b[i], -s.y[i]);
            }
            for j in 0..n {
                let (mut cp, mut cm) = (p.linear().to_vec(), p.linear().to_vec());
                cp[j] += step;
                cm[j] -= step;
                let fp = f.solve_with(&cp, p.rhs()).unwrap().objective;
                let fm = f.solve_with(&cm, p.rhs()).unwrap().objective;
                let fd = (fp - fm) / (2.0 * step);
                assert!(
                    (fd - d.wrt_c[j]).abs() <= FD_TOL * d.wrt_c[j].abs().max(1.0),
                    "{name} case {case} c{j}"
                );
            }
        }
        assert_ran(&name, ran, 25);
    }
}

/// Full Jacobians equal the blocks of nalgebra's K⁻¹ (up to sign) and a central difference
/// of one column.
#[test]
fn jacobians_match_inverse_blocks_and_differences() {
    let mut rng = Rng::new(13);
    for (name, opts) in methods() {
        let mut ran = 0;
        for case in 0..20 {
            let n = 1 + rng.below(7);
            let m = rng.below(n + 1);
            let p = well_conditioned(&mut rng, n, m);
            let Some(f) = factor(&p, &opts) else { continue };
            ran += 1;
            let j = jacobians(
                &f,
                JacobianRequest {
                    wrt_b: true,
                    wrt_c: true,
                },
            )
            .unwrap();
            assert_eq!(j.solves, n + m);
            assert!(j.notes.is_empty());
            let inv = kkt(&p).try_inverse().unwrap();
            let (xb, yb, xc, yc) = (
                j.x_wrt_b.as_ref().unwrap(),
                j.y_wrt_b.as_ref().unwrap(),
                j.x_wrt_c.as_ref().unwrap(),
                j.y_wrt_c.as_ref().unwrap(),
            );
            let tol = 1e-12 * norm1(&inv).max(1.0);
            for r in 0..n + m {
                for col in 0..m {
                    let got = if r < n { xb[(r, col)] } else { yb[(r - n, col)] };
                    assert!(
                        (got - inv[(r, n + col)]).abs() <= tol,
                        "{name} case {case}: ∂z{r}/∂b{col}"
                    );
                }
                for col in 0..n {
                    let got = if r < n { xc[(r, col)] } else { yc[(r - n, col)] };
                    assert!((got + inv[(r, col)]).abs() <= tol, "{name} case {case}: ∂z{r}/∂c{col}");
                }
            }
            if m > 0 {
                let s = f.solve().unwrap();
                let col = rng.below(m);
                let mut e = vec![0.0; m];
                e[col] = 1.0;
                let d = Perturbation {
                    b: Some(e),
                    ..Default::default()
                };
                let (sp, sm) = (solve_moved(&p, &d, 1e-4, &opts), solve_moved(&p, &d, -1e-4, &opts));
                let fdx: Vec<f64> = sp.x.iter().zip(&sm.x).map(|(u, v)| (u - v) / 2e-4).collect();
                let an: Vec<f64> = (0..n).map(|r| xb[(r, col)]).collect();
                assert!(rel_close(&fdx, &an, FD_TOL), "{name} case {case}");
                let _ = s;
            }
        }
        assert_ran(&name, ran, 20);
    }
}

/// Adjoint entries vs central differences of the scalar loss ℓ = ḡxᵀx + ḡyᵀy: every entry of
/// c, b, A and every symmetric pair of H.
#[test]
fn adjoint_matches_central_differences_entrywise() {
    let mut rng = Rng::new(14);
    for (name, opts) in methods() {
        let mut ran = 0;
        for case in 0..12 {
            let n = 1 + rng.below(5);
            let m = rng.below(n + 1);
            let p = well_conditioned(&mut rng, n, m);
            let Some(f) = factor(&p, &opts) else { continue };
            ran += 1;
            let s = f.solve().unwrap();
            let (gx, gy) = (rng.vec(n), rng.vec(m));
            let g = adjoint(&f, &s, &gx, &gy).unwrap();
            let loss = |sol: &Solution| dot(&gx, &sol.x) + dot(&gy, &sol.y);
            let step = 1e-5;
            let fd = |d: &Perturbation| {
                (loss(&solve_moved(&p, d, step, &opts)) - loss(&solve_moved(&p, d, -step, &opts))) / (2.0 * step)
            };
            let check = |what: String, fdv: f64, an: f64| {
                assert!(
                    (fdv - an).abs() <= FD_TOL * an.abs().max(1.0),
                    "{name} case {case} {what}: fd {fdv} vs adjoint {an}"
                );
            };
            let (gh, ga) = (g.h.to_dense(), g.a.to_dense());
            for i in 0..n {
                let mut e = vec![0.0; n];
                e[i] = 1.0;
                check(
                    format!("c{i}"),
                    fd(&Perturbation {
                        c: Some(e),
                        ..Default::default()
                    }),
                    g.c[i],
                );
                for j in 0..=i {
                    let mut dh = Mat::zeros(n, n);
                    dh[(i, j)] = 1.0;
                    dh[(j, i)] = 1.0;
                    let an = if i == j { gh[(i, i)] } else { gh[(i, j)] + gh[(j, i)] };
                    check(
                        format!("H{i}{j}"),
                        fd(&Perturbation {
                            h: Some(Matrix::Dense(dh)),
                            ..Default::default()
                        }),
                        an,
                    );
                    assert_eq!(gh[(i, j)], gh[(j, i)], "∂ℓ/∂H is symmetrized");
                }
            }
            for i in 0..m {
                let mut e = vec![0.0; m];
                e[i] = 1.0;
                check(
                    format!("b{i}"),
                    fd(&Perturbation {
                        b: Some(e),
                        ..Default::default()
                    }),
                    g.b[i],
                );
                for j in 0..n {
                    let mut da = Mat::zeros(m, n);
                    da[(i, j)] = 1.0;
                    check(
                        format!("A{i}{j}"),
                        fd(&Perturbation {
                            a: Some(Matrix::Dense(da)),
                            ..Default::default()
                        }),
                        ga[(i, j)],
                    );
                }
            }
        }
        assert_ran(&name, ran, 12);
    }
}

fn dot(a: &[f64], b: &[f64]) -> f64 {
    a.iter().zip(b).map(|(x, y)| x * y).sum()
}

fn frob(a: &Matrix, b: &Matrix) -> f64 {
    let (a, b) = (a.to_dense(), b.to_dense());
    let mut s = 0.0;
    for j in 0..a.ncols() {
        for i in 0..a.nrows() {
            s += a[(i, j)] * b[(i, j)];
        }
    }
    s
}

/// ⟨ḡ, J v⟩ = ⟨Jᵀ ḡ, v⟩ for random seeds and directions, to rounding.
#[test]
fn adjoint_and_forward_are_consistent() {
    let mut rng = Rng::new(15);
    for (name, opts) in methods() {
        let mut ran = 0;
        for case in 0..60 {
            let n = 1 + rng.below(9);
            let m = rng.below(n + 1);
            let p = well_conditioned(&mut rng, n, m);
            let Some(f) = factor(&p, &opts) else { continue };
            ran += 1;
            let s = f.solve().unwrap();
            let d = random_direction(&mut rng, n, m, [true, true, m > 0, m > 0]);
            let (gx, gy) = (rng.vec(n), rng.vec(m));
            let t = jvp(&f, &s, &d).unwrap();
            let g = adjoint(&f, &s, &gx, &gy).unwrap();
            let lhs = dot(&gx, &t.dx) + dot(&gy, &t.dy);
            let mut rhs = dot(&g.c, d.c.as_ref().unwrap()) + frob(&g.h, d.h.as_ref().unwrap());
            if m > 0 {
                rhs += dot(&g.b, d.b.as_ref().unwrap()) + frob(&g.a, d.a.as_ref().unwrap());
            }
            let scale = (inf_norm(&t.dx).max(inf_norm(&t.dy)) + 1.0) * (n + m) as f64;
            assert!((lhs - rhs).abs() <= 1e-13 * scale, "{name} case {case}: {lhs} vs {rhs}");
        }
        assert_ran(&name, ran, 60);
    }
}

/// Sparse H and A: the adjoint returns gradients on their patterns, and those entries match
/// central differences along sparse directions on the same patterns; the forward mode
/// accepts sparse directions.
#[test]
fn sparse_gradients_live_on_the_pattern() {
    let mut rng = Rng::new(16);
    for (name, opts) in methods() {
        let mut ran = 0;
        for case in 0..10 {
            let n = 4 + rng.below(5);
            // Tridiagonal SPD H (lower triangle given) and A with two entries per row.
            let mut ht = Vec::new();
            for i in 0..n {
                ht.push((i, i, 4.0 + rng.uniform()));
                if i + 1 < n {
                    ht.push((i + 1, i, 0.5 * rng.sym()));
                }
            }
            let m = 1 + rng.below(n / 2);
            let mut at = Vec::new();
            for i in 0..m {
                at.push((i, 2 * i, 1.0 + rng.uniform()));
                at.push((i, 2 * i + 1, rng.sym()));
            }
            let p = ProblemBuilder::new()
                .hessian_triplets(n, &ht, Triangle::Lower)
                .constraints_triplets(m, n, &at)
                .linear(&rng.vec(n))
                .rhs(&rng.vec(m))
                .build()
                .unwrap();
            let Some(f) = factor(&p, &opts) else { continue };
            ran += 1;
            let s = f.solve().unwrap();
            let (gx, gy) = (rng.vec(n), rng.vec(m));
            let g = adjoint(&f, &s, &gx, &gy).unwrap();
            let (Matrix::Sparse(gh), Matrix::Sparse(ga)) = (&g.h, &g.a) else {
                panic!("{name}: gradients of sparse blocks must be sparse");
            };
            assert_eq!(gh.val().len(), p.hessian().nnz());
            assert_eq!(ga.val().len(), p.constraints().nnz());
            // One random direction on the patterns: ⟨∇, δ⟩ vs central difference.
            let dh_t: Vec<(usize, usize, f64)> = ht.iter().map(|&(i, j, _)| (i, j, rng.sym())).collect();
            let da_t: Vec<(usize, usize, f64)> = at.iter().map(|&(i, j, _)| (i, j, rng.sym())).collect();
            let dh = ProblemBuilder::new()
                .hessian_triplets(n, &dh_t, Triangle::Lower)
                .build()
                .unwrap();
            let da = ProblemBuilder::new()
                .hessian_row_major(n, &vec![0.0; n * n], Triangle::Full)
                .constraints_triplets(m, n, &da_t)
                .build()
                .unwrap();
            let d = Perturbation {
                h: Some(dh.hessian().clone()),
                a: Some(da.constraints().clone()),
                ..Default::default()
            };
            let step = 1e-5;
            let loss = |sol: &Solution| dot(&gx, &sol.x) + dot(&gy, &sol.y);
            let fdv =
                (loss(&solve_moved(&p, &d, step, &opts)) - loss(&solve_moved(&p, &d, -step, &opts))) / (2.0 * step);
            let an = frob(&g.h, d.h.as_ref().unwrap()) + frob(&g.a, d.a.as_ref().unwrap());
            assert!(
                (fdv - an).abs() <= FD_TOL * an.abs().max(1.0),
                "{name} case {case}: fd {fdv} vs {an}"
            );
            let t = jvp(&f, &s, &d).unwrap();
            assert!((dot(&gx, &t.dx) + dot(&gy, &t.dy) - an).abs() <= 1e-12 * an.abs().max(1.0));
        }
        assert_ran(&name, ran, 10);
    }
}

/// Bad arguments are typed errors naming the argument; a singular K has no derivatives.
#[test]
fn errors_are_typed() {
    let p = ProblemBuilder::new()
        .hessian_row_major(2, &[2., 0., 0., 2.], Triangle::Full)
        .constraints_row_major(1, 2, &[1., 1.])
        .rhs(&[1.])
        .build()
        .unwrap();
    let f = Plan::analyze(&p, &Options::default()).unwrap().factor(&p).unwrap();
    let s = f.solve().unwrap();
    let msg = |e: Error| {
        assert!(matches!(e, Error::InvalidSensitivityInput { .. }), "{e:?}");
        assert!(e.is_invalid_input());
        e.to_string()
    };
    assert!(msg(jvp(
        &f,
        &s,
        &Perturbation {
            c: Some(vec![1.0]),
            ..Default::default()
        }
    )
    .unwrap_err())
    .contains("δc has length 1, expected 2"));
    assert!(msg(jvp(
        &f,
        &s,
        &Perturbation {
            b: Some(vec![f64::NAN]),
            ..Default::default()
        }
    )
    .unwrap_err())
    .contains("δb"));
    let asym = Matrix::Dense(faer::mat![[0.0, 1.0], [0.0, 0.0]]);
    assert!(msg(jvp(
        &f,
        &s,
        &Perturbation {
            h: Some(asym),
            ..Default::default()
        }
    )
    .unwrap_err())
    .contains("δH must be symmetric"));
    let wrong = Matrix::Dense(Mat::zeros(2, 2));
    assert!(msg(jvp(
        &f,
        &s,
        &Perturbation {
            a: Some(wrong),
            ..Default::default()
        }
    )
    .unwrap_err())
    .contains("δA is 2×2, expected 1×2"));
    assert!(msg(adjoint(&f, &s, &[1.0], &[0.0]).unwrap_err()).contains("ḡx"));
    // Singular K: a repeated constraint.
    let q = ProblemBuilder::new()
        .hessian_row_major(2, &[2., 0., 0., 2.], Triangle::Full)
        .constraints_row_major(2, 2, &[1., 1., 1., 1.])
        .build()
        .unwrap();
    let fq = Plan::analyze(&q, &Options::default()).unwrap().factor(&q).unwrap();
    let fake = Solution::empty(2, 2, tangency::MethodUsed::DenseLblt);
    assert!(matches!(
        adjoint(&fq, &fake, &[1.0, 0.0], &[0.0, 0.0]),
        Err(Error::Singular { .. })
    ));
    assert!(matches!(
        jacobians(
            &fq,
            JacobianRequest {
                wrt_b: true,
                wrt_c: false
            }
        ),
        Err(Error::Singular { .. })
    ));
}

#[test]
fn jacobian_size_accounting() {
    let r = JacobianRequest {
        wrt_b: true,
        wrt_c: true,
    };
    assert_eq!(jacobian_bytes(3, 2, r), 8 * (5 * 2 + 5 * 3));
    assert_eq!(jacobian_bytes(3, 2, JacobianRequest::default()), 0);
    assert_eq!(jacobian_bytes(usize::MAX, 2, r), usize::MAX);
}
