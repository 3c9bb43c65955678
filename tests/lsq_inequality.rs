//! Least squares under inequality restrictions (`tangency::lsq::bounded`), checked against
//! answers known by construction (the Karush–Kuhn–Tucker conditions of a convex problem
//! are sufficient, Nocedal & Wright, *Numerical Optimization*, 2nd ed., Thm. 16.4) and
//! against an independent brute-force reference written here with nalgebra: every subset
//! of the restrictions held as equations, the feasible fit of least RSS.

#![allow(clippy::needless_range_loop)] // index loops over small dense test matrices read best

mod common;

use common::{one_json, run_cli, Rng};
use nalgebra::{DMatrix, DVector};
use tangency::lsq::{FitOptions, LsqBuilder};

/// Row-major p×n design with entries in [-1, 1) plus a column-dependent offset (so the
/// columns are not orthogonal).
fn design(rng: &mut Rng, p: usize, n: usize) -> Vec<f64> {
    (0..p * n)
        .map(|k| rng.uniform() + 0.3 * ((k % n) as f64 - 1.0))
        .collect()
}

fn names(n: usize) -> Vec<String> {
    (0..n).map(|j| format!("b{j}")).collect()
}

/// g = Fβ* + r with Fᵀr = v (so Fᵀ(Fβ* − g) + v = 0: the stationarity of the KKT
/// conditions with v = Σ zₖaₖ) plus a component orthogonal to the range of F.
fn observations(f: &DMatrix<f64>, beta: &[f64], v: &[f64], rng: &mut Rng) -> Vec<f64> {
    let ftf = f.transpose() * f;
    let lam = ftf.clone().lu().solve(&DVector::from_column_slice(v)).unwrap();
    let mut r = f * lam;
    let xi = DVector::from_fn(f.nrows(), |_, _| rng.uniform());
    let proj = f * ftf.lu().solve(&(f.transpose() * &xi)).unwrap();
    r += 0.5 * (xi - proj);
    (f * DVector::from_column_slice(beta) + r).iter().copied().collect()
}

#[test]
fn known_active_set_multipliers_and_estimate() {
    let (p, n) = (40, 6);
    let mut cases = 0;
    for seed in 0..10u64 {
        let mut rng = Rng::new(100 + seed);
        let fr = design(&mut rng, p, n);
        let f = DMatrix::from_row_slice(p, n, &fr);
        // β*: b0 = 0 and b1 = 0 at their lower bounds (active), b2 + b3 = 1.5 active at its
        // upper bound, b4 ≤ 10 inactive, b5 free.
        let beta = [0.0, 0.0, 0.9, 0.6, 1.0 + rng.uniform(), rng.uniform()];
        let z = [
            0.5 + 0.4 * rng.uniform(),
            0.2 + 0.1 * rng.uniform(),
            0.7 + 0.2 * rng.uniform(),
        ];
        // v = Σ zₖ aₖ with the restrictions as "≤": −b0 ≤ 0, −b1 ≤ 0, b2 + b3 ≤ 1.5.
        let mut v = vec![0.0; n];
        v[0] -= z[0];
        v[1] -= z[1];
        v[2] += z[2];
        v[3] += z[2];
        let g = observations(&f, &beta, &v, &mut rng);
        let text = "b0 >= 0\nb1 >= 0\nb2 + b3 <= 1.5\nb4 <= 10";
        let fit = LsqBuilder::new()
            .design_row_major(p, n, &fr)
            .observations(&g)
            .coefficient_names(&names(n))
            .restriction_equations(text)
            .build()
            .unwrap()
            .fit(&FitOptions::default())
            .unwrap();
        for j in 0..n {
            assert!(
                (fit.coefficients[j] - beta[j]).abs() < 1e-10,
                "seed {seed}: β[{j}] = {} vs {}",
                fit.coefficients[j],
                beta[j]
            );
        }
        let ineq = &fit.inequality_restrictions;
        assert_eq!(ineq.len(), 4);
        let active: Vec<bool> = ineq.iter().map(|r| r.active).collect();
        assert_eq!(active, [true, true, true, false], "seed {seed}");
        for k in 0..3 {
            assert!(
                (ineq[k].multiplier - z[k]).abs() < 1e-9 * (1.0 + z[k]),
                "seed {seed}: z[{k}] = {} vs {}",
                ineq[k].multiplier,
                z[k]
            );
            assert_eq!(ineq[k].line, k + 1);
        }
        assert_eq!(ineq[3].multiplier, 0.0);
        // Active restrictions: no sampling statistics, and the notes say why.
        assert!(fit.standard_errors.is_none() && fit.sigma2.is_none());
        assert!(
            fit.notes.iter().any(|s| s.contains("not normally distributed")),
            "{:?}",
            fit.notes
        );
        cases += 1;
    }
    assert_eq!(cases, 10);
}

/// The brute-force reference: min ½‖Fβ − g‖² over the restrictions `aₖᵀβ ≤ uₖ` by trying
/// every subset as equations (KKT solve with nalgebra) and keeping the feasible fit of
/// least RSS (for a strictly convex problem the minimizer is the fit on its active set).
fn brute_force(f: &DMatrix<f64>, g: &[f64], a: &[Vec<f64>], u: &[f64]) -> Option<Vec<f64>> {
    let n = f.ncols();
    let k = a.len();
    let ftf = f.transpose() * f;
    let ftg = f.transpose() * DVector::from_column_slice(g);
    let mut best: Option<(f64, Vec<f64>)> = None;
    for mask in 0..(1usize << k) {
        let rows: Vec<usize> = (0..k).filter(|i| mask >> i & 1 == 1).collect();
        let m = rows.len();
        if m > n {
            continue;
        }
        let mut kkt = DMatrix::<f64>::zeros(n + m, n + m);
        kkt.view_mut((0, 0), (n, n)).copy_from(&ftf);
        let mut rhs = DVector::<f64>::zeros(n + m);
        rhs.rows_mut(0, n).copy_from(&ftg);
        for (r, &i) in rows.iter().enumerate() {
            for j in 0..n {
                kkt[(n + r, j)] = a[i][j];
                kkt[(j, n + r)] = a[i][j];
            }
            rhs[n + r] = u[i];
        }
        let Some(sol) = kkt.lu().solve(&rhs) else { continue };
        let beta: Vec<f64> = sol.rows(0, n).iter().copied().collect();
        let feasible = (0..k).all(|i| {
            let v: f64 = (0..n).map(|j| a[i][j] * beta[j]).sum();
            v <= u[i] + 1e-9 * (1.0 + u[i].abs())
        });
        if !feasible {
            continue;
        }
        let res = f * DVector::from_column_slice(&beta) - DVector::from_column_slice(g);
        let rss = res.norm_squared();
        if best.as_ref().is_none_or(|(b, _)| rss < *b - 1e-12 * (1.0 + b)) {
            best = Some((rss, beta));
        }
    }
    best.map(|(_, b)| b)
}

#[test]
fn agrees_with_brute_force_on_random_fits() {
    let (p, n, k) = (25, 4, 5);
    let mut cases = 0;
    let mut with_active = 0;
    for seed in 0..40u64 {
        let mut rng = Rng::new(7000 + seed);
        let fr = design(&mut rng, p, n);
        let f = DMatrix::from_row_slice(p, n, &fr);
        let g: Vec<f64> = (0..p).map(|_| 2.0 * rng.uniform()).collect();
        // Random restrictions through a point near the origin, so they are feasible.
        let a: Vec<Vec<f64>> = (0..k).map(|_| rng.vec(n)).collect();
        let u: Vec<f64> = (0..k).map(|_| 0.3 * rng.uniform().abs()).collect();
        let mut text = String::new();
        for (ai, ui) in a.iter().zip(&u) {
            let terms: Vec<String> = ai.iter().enumerate().map(|(j, v)| format!("{v:e}*b{j}")).collect();
            text.push_str(&format!("{} <= {ui:e}\n", terms.join(" + ")));
        }
        let fit = LsqBuilder::new()
            .design_row_major(p, n, &fr)
            .observations(&g)
            .coefficient_names(&names(n))
            .restriction_equations(&text)
            .build()
            .unwrap()
            .fit(&FitOptions::default())
            .unwrap_or_else(|e| panic!("seed {seed}: {e}"));
        let reference = brute_force(&f, &g, &a, &u).expect("the origin region is feasible");
        for j in 0..n {
            assert!(
                (fit.coefficients[j] - reference[j]).abs() < 1e-8 * (1.0 + reference[j].abs()),
                "seed {seed}: β = {:?} vs reference {reference:?}",
                fit.coefficients
            );
        }
        // The certificate: stationarity Fᵀ(Fβ − g) + Σ zₖaₖ = 0 with z ≥ 0, complementarity.
        let beta = DVector::from_column_slice(&fit.coefficients);
        let mut grad = f.transpose() * (&f * &beta - DVector::from_column_slice(&g));
        for (r, ai) in fit.inequality_restrictions.iter().zip(&a) {
            assert!(r.multiplier >= 0.0);
            if !r.active {
                assert_eq!(r.multiplier, 0.0);
            }
            for j in 0..n {
                grad[j] += r.multiplier * ai[j];
            }
        }
        assert!(grad.amax() < 1e-9 * (1.0 + (f.transpose() * DVector::from_column_slice(&g)).amax()));
        with_active += usize::from(fit.inequality_restrictions.iter().any(|r| r.active));
        cases += 1;
    }
    assert_eq!(cases, 40);
    // The family must exercise active sets, not only interior solutions.
    assert!(
        with_active >= 20,
        "only {with_active} of 40 fits had an active restriction"
    );
}

#[test]
fn inactive_restrictions_keep_the_statistics() {
    // y = 1 + 2t exactly plus small alternating noise; b1 ≥ 0 and b0 ≤ 100 are not active.
    let t: Vec<f64> = (0..12).map(f64::from).collect();
    let y: Vec<f64> = t
        .iter()
        .enumerate()
        .map(|(i, ti)| 1.0 + 2.0 * ti + if i % 2 == 0 { 0.01 } else { -0.01 })
        .collect();
    let f: Vec<f64> = t.iter().flat_map(|&ti| [1.0, ti]).collect();
    let problem = LsqBuilder::new()
        .design_row_major(12, 2, &f)
        .observations(&y)
        .coefficient_names(&["level", "slope"])
        .restriction_equations("slope >= 0; level <= 100");
    let fit = problem.build().unwrap().fit(&FitOptions::default()).unwrap();
    let free = LsqBuilder::new()
        .design_row_major(12, 2, &f)
        .observations(&y)
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    assert_eq!(fit.coefficients, free.coefficients);
    assert_eq!(fit.standard_errors, free.standard_errors);
    assert!(fit
        .inequality_restrictions
        .iter()
        .all(|r| !r.active && r.multiplier == 0.0));
}

#[test]
fn command_line_nonnegative_fit() {
    let dir = std::env::temp_dir().join(format!("tangency-lsq-ineq-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    // y falls with x, so "slope >= 0" is active: the restricted fit is the mean of y.
    let mut csv = String::from("x,y\n");
    for i in 0..8 {
        csv.push_str(&format!(
            "{},{}\n",
            i,
            10.0 - 0.5 * f64::from(i) + if i % 2 == 0 { 0.1 } else { -0.1 }
        ));
    }
    std::fs::write(dir.join("data.csv"), csv).unwrap();
    let d = dir.to_str().unwrap();
    let (code, out, err) = run_cli(&[
        "fit",
        d,
        "--intercept",
        "--response",
        "y",
        "--restrict",
        "x >= 0",
        "--json",
    ]);
    assert_eq!(code, 0, "{out}{err}");
    let j = one_json(&out);
    assert_eq!(j["status"], "solved");
    let names: Vec<&str> = j["names"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_str().unwrap())
        .collect();
    let slope = names.iter().position(|n| *n == "x").unwrap();
    let level = 1 - slope;
    let mean = (0..8).map(|i| 10.0 - 0.5 * f64::from(i)).sum::<f64>() / 8.0;
    assert!(j["coefficients"][slope].as_f64().unwrap().abs() < 1e-12, "{j}");
    assert!((j["coefficients"][level].as_f64().unwrap() - mean).abs() < 1e-12, "{j}");
    assert_eq!(j["active_inequalities"], serde_json::json!([0]));
    let r = &j["inequality_restrictions"][0];
    assert_eq!(r["relation"], ">=");
    assert!(r["multiplier"].as_f64().unwrap() > 0.0);
    assert!(j["standard_errors"].is_null() && j["p_values"].is_null());
    // Readable report names the active restriction.
    let (code, out, _) = run_cli(&["fit", d, "--intercept", "--response", "y", "--restrict", "x >= 0"]);
    assert_eq!(code, 0);
    assert!(out.contains("1 of 1 active"), "{out}");
    // A strict inequality is refused as invalid input, naming the position.
    let (code, out, _) = run_cli(&[
        "fit",
        d,
        "--intercept",
        "--response",
        "y",
        "--restrict",
        "x > 0",
        "--json",
    ]);
    assert_eq!(code, 2, "{out}");
    let j = one_json(&out);
    assert!(j["message"].as_str().unwrap().contains("strict '>'"), "{j}");
    std::fs::remove_dir_all(&dir).ok();
}
