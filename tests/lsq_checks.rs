//! Restricted least squares against independent computations: the textbook closed form
//! (nalgebra), agreement of the two methods, weights versus replicated rows, a Monte Carlo
//! check of the standard errors, rank diagnostics, validation and the command line.

use nalgebra::{DMatrix, DVector};
use proptest::prelude::*;
use tangency::lsq::{FitBlock, FitMethod, FitOptions, LsqBuilder};
use tangency::Error;

/// Small deterministic generator (xorshift64*; common practice), uniform in [−1, 1).
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> f64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        let v = self.0.wrapping_mul(0x2545_F491_4F6C_DD1D);
        (v >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
    }
    /// Standard normal by Box–Muller.
    fn normal(&mut self) -> f64 {
        let u1 = 0.5 * (self.next() + 1.0) + 1e-300;
        let u2 = 0.5 * (self.next() + 1.0);
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
    fn vec(&mut self, n: usize) -> Vec<f64> {
        (0..n).map(|_| self.next()).collect()
    }
}

/// Textbook restricted least squares (e.g. Greene, "Econometric Analysis", restricted
/// least squares): b_R = b − (FᵀF)⁻¹Cᵀ(C(FᵀF)⁻¹Cᵀ)⁻¹(Cb − d), multipliers
/// y = (C(FᵀF)⁻¹Cᵀ)⁻¹(Cb − d) in our convention (FᵀF b_R − Fᵀg + Cᵀy = 0).
fn textbook(p: usize, n: usize, q: usize, f: &[f64], g: &[f64], c: &[f64], d: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let fm = DMatrix::from_row_slice(p, n, f);
    let cm = DMatrix::from_row_slice(q, n, c);
    let ftf_inv = (fm.transpose() * &fm).try_inverse().unwrap();
    let b = &ftf_inv * fm.transpose() * DVector::from_column_slice(g);
    let s = &cm * &ftf_inv * cm.transpose();
    let y = s.try_inverse().unwrap() * (&cm * &b - DVector::from_column_slice(d));
    let br = &b - &ftf_inv * cm.transpose() * &y;
    (br.as_slice().to_vec(), y.as_slice().to_vec())
}

fn max_rel(a: &[f64], b: &[f64]) -> f64 {
    let scale = b.iter().fold(1e-300f64, |m, x| m.max(x.abs()));
    a.iter().zip(b).fold(0.0f64, |m, (x, y)| m.max((x - y).abs())) / scale
}

fn random_problem(seed: u64, p: usize, n: usize, q: usize) -> (Vec<f64>, Vec<f64>, Vec<f64>, Vec<f64>) {
    let mut rng = Rng(seed.max(1));
    (rng.vec(p * n), rng.vec(p), rng.vec(q * n), rng.vec(q))
}

#[test]
fn textbook_formula_agrees_on_random_problems() {
    for (seed, p, n, q) in [(1, 40, 6, 2), (7, 100, 12, 5), (11, 25, 5, 4), (3, 12, 3, 0)] {
        let (f, g, c, d) = random_problem(seed, p, n, q);
        let (b_ref, y_ref) = if q > 0 {
            textbook(p, n, q, &f, &g, &c, &d)
        } else {
            let fm = DMatrix::from_row_slice(p, n, &f);
            let b = (fm.transpose() * &fm).try_inverse().unwrap() * fm.transpose() * DVector::from_column_slice(&g);
            (b.as_slice().to_vec(), vec![])
        };
        for method in [FitMethod::Dense, FitMethod::Augmented] {
            let fit = LsqBuilder::new()
                .design_row_major(p, n, &f)
                .observations(&g)
                .restrictions_row_major(q, n, &c)
                .restriction_rhs(&d)
                .build()
                .unwrap()
                .fit(&FitOptions {
                    method,
                    ..Default::default()
                })
                .unwrap();
            assert!(max_rel(&fit.coefficients, &b_ref) < 1e-11, "{method:?} seed {seed}");
            if q > 0 {
                assert!(
                    max_rel(&fit.multipliers, &y_ref) < 1e-10,
                    "{method:?} multipliers seed {seed}"
                );
            }
            // Restrictions hold to rounding.
            for i in 0..q {
                let ci: f64 = (0..n).map(|j| c[i * n + j] * fit.coefficients[j]).sum();
                assert!((ci - d[i]).abs() < 1e-13, "restriction {i}");
            }
        }
    }
}

#[test]
fn multiplier_is_minus_derivative_of_half_rss() {
    // Central finite difference of ½·RSS(d) (our convention: d(½·RSS)/dd = −y).
    let (p, n, q) = (30, 5, 2);
    let (f, g, c, d) = random_problem(5, p, n, q);
    let half_rss = |d: &[f64]| {
        LsqBuilder::new()
            .design_row_major(p, n, &f)
            .observations(&g)
            .restrictions_row_major(q, n, &c)
            .restriction_rhs(d)
            .build()
            .unwrap()
            .fit(&FitOptions::default())
            .unwrap()
    };
    let fit = half_rss(&d);
    let h = 1e-5;
    for i in 0..q {
        let (mut dp, mut dm) = (d.clone(), d.clone());
        dp[i] += h;
        dm[i] -= h;
        let fd = (0.5 * half_rss(&dp).rss - 0.5 * half_rss(&dm).rss) / (2.0 * h);
        assert!(
            (fd + fit.multipliers[i]).abs() < 1e-6 * (1.0 + fd.abs()),
            "row {i}: fd {fd}, y {}",
            fit.multipliers[i]
        );
    }
}

#[test]
fn weights_equal_replicated_rows() {
    // Integer weights w_i are the same as repeating row i w_i times (definition of WLS).
    let (p, n, q) = (20, 4, 1);
    let (f, g, c, d) = random_problem(9, p, n, q);
    let w: Vec<f64> = (0..p).map(|i| (1 + i % 3) as f64).collect();
    let weighted = LsqBuilder::new()
        .design_row_major(p, n, &f)
        .observations(&g)
        .weights(&w)
        .restrictions_row_major(q, n, &c)
        .restriction_rhs(&d)
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    let (mut fr, mut gr) = (Vec::new(), Vec::new());
    for i in 0..p {
        for _ in 0..w[i] as usize {
            fr.extend_from_slice(&f[i * n..(i + 1) * n]);
            gr.push(g[i]);
        }
    }
    let replicated = LsqBuilder::new()
        .design_row_major(gr.len(), n, &fr)
        .observations(&gr)
        .restrictions_row_major(q, n, &c)
        .restriction_rhs(&d)
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    assert!(max_rel(&weighted.coefficients, &replicated.coefficients) < 1e-12);
    assert!(max_rel(&weighted.multipliers, &replicated.multipliers) < 1e-10);
    assert!((weighted.rss - replicated.rss).abs() < 1e-12 * replicated.rss);
}

#[test]
fn sparse_design_augmented_matches_dense() {
    // The same sparse design through both methods.
    let (p, n) = (60, 8);
    let mut rng = Rng(21);
    let mut trip = Vec::new();
    for i in 0..p {
        trip.push((i, i % n, 1.0 + rng.next()));
        trip.push((i, (i * 7 + 3) % n, rng.next()));
    }
    let g = rng.vec(p);
    let c = [1.0, 1.0, 1.0, 0.0, 0.0, 0.0, 0.0, 0.0];
    let build = || {
        LsqBuilder::new()
            .design_triplets(p, n, &trip)
            .observations(&g)
            .restrictions_row_major(1, n, &c)
            .restriction_rhs(&[0.5])
            .build()
            .unwrap()
    };
    let a = build()
        .fit(&FitOptions {
            method: FitMethod::Dense,
            ..Default::default()
        })
        .unwrap();
    let b = build()
        .fit(&FitOptions {
            method: FitMethod::Augmented,
            ..Default::default()
        })
        .unwrap();
    assert!(max_rel(&a.coefficients, &b.coefficients) < 1e-12);
    assert!(max_rel(&a.multipliers, &b.multipliers) < 1e-10);
    let (sa, sb) = (a.standard_errors.unwrap(), b.standard_errors.unwrap());
    assert!(max_rel(&sa, &sb) < 1e-10);
    let (ta, tb) = (a.restriction_test.unwrap(), b.restriction_test.unwrap());
    assert!((ta.statistic - tb.statistic).abs() < 1e-8 * ta.statistic.max(1.0));
}

/// Monte Carlo on a synthetic model of our own: y = Fβ* + σε with Cβ* = d true. The 95%
/// intervals β̂ ± 1.96·SE must cover β* at a rate consistent with 0.95 (binomial sampling
/// error), and the mean reported SE must match the empirical spread.
fn monte_carlo(reps: usize, seed: u64) {
    let (p, n) = (80, 4);
    let mut rng = Rng(seed);
    let f = rng.vec(p * n);
    let beta = [1.0, -2.0, 0.5, 0.5];
    let c = [0.0, 0.0, 1.0, -1.0]; // β2 = β3 (true)
    let sigma = 0.3;
    let mut covered = vec![0usize; n];
    let mut sum_se = vec![0.0; n];
    let mut est = vec![Vec::new(); n];
    for _ in 0..reps {
        let g: Vec<f64> = (0..p)
            .map(|i| (0..n).map(|j| f[i * n + j] * beta[j]).sum::<f64>() + sigma * rng.normal())
            .collect();
        let fit = LsqBuilder::new()
            .design_row_major(p, n, &f)
            .observations(&g)
            .restrictions_row_major(1, n, &c)
            .build()
            .unwrap()
            .fit(&FitOptions::default())
            .unwrap();
        let se = fit.standard_errors.unwrap();
        for j in 0..n {
            if (fit.coefficients[j] - beta[j]).abs() <= 1.96 * se[j] {
                covered[j] += 1;
            }
            sum_se[j] += se[j];
            est[j].push(fit.coefficients[j]);
        }
    }
    let tol = 4.0 * (0.95f64 * 0.05 / reps as f64).sqrt() + 0.01; // 4 binomial SDs (+ t vs normal)
    for j in 0..n {
        let rate = covered[j] as f64 / reps as f64;
        assert!((rate - 0.95).abs() < tol, "β{j}: coverage {rate}");
        let mean: f64 = est[j].iter().sum::<f64>() / reps as f64;
        let sd = (est[j].iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (reps - 1) as f64).sqrt();
        let mean_se = sum_se[j] / reps as f64;
        // Relative sampling error of an SD from `reps` draws ≈ 1/√(2·reps); allow 5 of those.
        assert!(
            (mean_se / sd - 1.0).abs() < 5.0 / (2.0 * reps as f64).sqrt(),
            "β{j}: SE {mean_se} vs spread {sd}"
        );
    }
}

#[test]
fn standard_errors_monte_carlo_quick() {
    monte_carlo(400, 17);
}

#[test]
#[ignore = "long: cargo test --test lsq_checks -- --ignored standard_errors_monte_carlo_long"]
fn standard_errors_monte_carlo_long() {
    monte_carlo(20_000, 99);
}

#[test]
fn dependent_consistent_restrictions_are_named_and_dropped() {
    let (p, n) = (20, 3);
    let (f, g, _, _) = random_problem(4, p, n, 0);
    // row 2 = row 0 + row 1, and d agrees.
    let c = [1.0, 0.0, 0.0, 0.0, 1.0, 0.0, 1.0, 1.0, 0.0];
    let fit = LsqBuilder::new()
        .design_row_major(p, n, &f)
        .observations(&g)
        .restrictions_row_major(3, n, &c)
        .restriction_rhs(&[0.25, 0.5, 0.75])
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    assert_eq!(fit.rank_c, 2);
    assert_eq!(fit.dependent_restrictions.len(), 1);
    assert!((fit.coefficients[0] - 0.25).abs() < 1e-14 && (fit.coefficients[1] - 0.5).abs() < 1e-14);
    assert!(fit.notes.iter().any(|s| s.contains("consistent")));
    assert_eq!(fit.dof, p - n + 2);
}

#[test]
fn contradictory_restrictions_are_reported() {
    let (p, n) = (20, 3);
    let (f, g, _, _) = random_problem(4, p, n, 0);
    let c = [1.0, 1.0, 0.0, 2.0, 2.0, 0.0];
    let err = LsqBuilder::new()
        .design_row_major(p, n, &f)
        .observations(&g)
        .restrictions_row_major(2, n, &c)
        .restriction_rhs(&[1.0, 3.0])
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap_err();
    match &err {
        Error::FitContradictory { rows, detail } => {
            assert_eq!(rows.len(), 1);
            assert!(detail.contains("row"), "{detail}");
        }
        e => panic!("unexpected {e}"),
    }
    assert!(err.is_no_solution());
    assert_eq!(err.status(), "infeasible");
}

#[test]
fn non_unique_fit_reports_the_direction() {
    // Column 2 = column 0 + column 1 and no restriction pins that direction.
    let p = 15;
    let mut rng = Rng(8);
    let mut f = Vec::new();
    for _ in 0..p {
        let (a, b) = (rng.next(), rng.next());
        f.extend_from_slice(&[a, b, a + b]);
    }
    let g = rng.vec(p);
    let pr = LsqBuilder::new()
        .design_row_major(p, 3, &f)
        .observations(&g)
        .build()
        .unwrap();
    match pr.fit(&FitOptions::default()).unwrap_err() {
        Error::FitNonUnique { direction, .. } => {
            // δ ∝ (1, 1, −1).
            let s = direction[0];
            assert!(
                (direction[1] - s).abs() < 1e-10 && (direction[2] + s).abs() < 1e-10,
                "{direction:?}"
            );
        }
        e => panic!("unexpected {e}"),
    }
    // A restriction along that direction makes it unique.
    let fit = LsqBuilder::new()
        .design_row_major(p, 3, &f)
        .observations(&g)
        .restrictions_row_major(1, 3, &[0.0, 0.0, 1.0])
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    assert_eq!(fit.coefficients[2], 0.0);
    // F alone is rank deficient: no test of the restriction, said in a note.
    assert!(fit.restriction_test.is_none());
    assert!(fit.notes.iter().any(|s| s.contains("unrestricted fit is not unique")));
}

#[test]
fn ridge_matches_normal_equations() {
    // (FᵀF + λI)β = Fᵀg without restrictions (nalgebra Cholesky as the reference).
    let (p, n) = (30, 5);
    let (f, g, _, _) = random_problem(12, p, n, 0);
    let lam = 0.7;
    let fm = DMatrix::from_row_slice(p, n, &f);
    let a = fm.transpose() * &fm + DMatrix::identity(n, n) * lam;
    let b = a
        .cholesky()
        .unwrap()
        .solve(&(fm.transpose() * DVector::from_column_slice(&g)));
    for method in [FitMethod::Dense, FitMethod::Augmented] {
        let fit = LsqBuilder::new()
            .design_row_major(p, n, &f)
            .observations(&g)
            .ridge(lam)
            .build()
            .unwrap()
            .fit(&FitOptions {
                method,
                ..Default::default()
            })
            .unwrap();
        assert!(max_rel(&fit.coefficients, b.as_slice()) < 1e-12, "{method:?}");
        assert!(fit.standard_errors.is_none());
    }
}

#[test]
fn validation_names_block_row_and_column() {
    let e = LsqBuilder::new()
        .design_row_major(2, 2, &[1.0, f64::NAN, 0.0, 1.0])
        .observations(&[1.0, 2.0])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::FitInput {
                block: FitBlock::F,
                row: Some(0),
                col: Some(1),
                ..
            }
        ),
        "{e}"
    );
    let e = LsqBuilder::new()
        .design_row_major(2, 2, &[1.0, 0.0, 0.0, 1.0])
        .observations(&[1.0])
        .build()
        .unwrap_err();
    assert!(matches!(e, Error::FitInput { block: FitBlock::G, .. }), "{e}");
    let e = LsqBuilder::new()
        .design_row_major(2, 2, &[1.0, 0.0, 0.0, 1.0])
        .observations(&[1.0, 2.0])
        .restrictions_row_major(1, 3, &[1.0, 1.0, 1.0])
        .build()
        .unwrap_err();
    assert!(matches!(e, Error::FitInput { block: FitBlock::C, .. }), "{e}");
    let e = LsqBuilder::new()
        .design_triplets(2, 2, &[(0, 0, 1.0), (5, 1, 1.0)])
        .observations(&[1.0, 2.0])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::FitInput {
                block: FitBlock::F,
                row: Some(5),
                col: Some(1),
                ..
            }
        ),
        "{e}"
    );
    let e = LsqBuilder::new()
        .design_row_major(2, 1, &[1.0, 1.0])
        .observations(&[1.0, 2.0])
        .restrictions_row_major(1, 1, &[1.0])
        .restriction_rhs(&[f64::INFINITY])
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::FitInput {
                block: FitBlock::D,
                row: Some(0),
                ..
            }
        ),
        "{e}"
    );
    let e = LsqBuilder::new()
        .design_row_major(2, 1, &[1.0, 1.0])
        .observations(&[1.0, 2.0])
        .ridge(-1.0)
        .build()
        .unwrap_err();
    assert!(
        matches!(
            e,
            Error::FitInput {
                block: FitBlock::Ridge,
                ..
            }
        ),
        "{e}"
    );
    assert!(e.is_invalid_input());
    let e = LsqBuilder::new().observations(&[1.0]).build().unwrap_err();
    assert!(e.to_string().contains("block F"), "{e}");
}

#[test]
fn zero_dimensions() {
    // p = 0, n = 0: nothing to fit, no panic.
    let fit = LsqBuilder::new()
        .design_row_major(0, 0, &[])
        .observations(&[])
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    assert!(fit.coefficients.is_empty() && fit.rss == 0.0);
    // n = 0 with observations: residuals are g.
    let fit = LsqBuilder::new()
        .design_row_major(3, 0, &[])
        .observations(&[1.0, 2.0, 2.0])
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    assert_eq!(fit.rss, 9.0);
    // All coefficients fixed by C (k = 0).
    let fit = LsqBuilder::new()
        .design_row_major(3, 2, &[1.0, 0.0, 0.0, 1.0, 1.0, 1.0])
        .observations(&[1.0, 2.0, 3.0])
        .restrictions_row_major(2, 2, &[1.0, 0.0, 0.0, 1.0])
        .restriction_rhs(&[1.0, 2.0])
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    assert_eq!(fit.coefficients, vec![1.0, 2.0]);
    assert!(fit.rss.abs() < 1e-28);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(32))]
    /// Invariants: stationarity FᵀW(Fβ − g) + Cᵀy = 0 and Cβ = d to rounding, and the two
    /// methods agree, for random shapes (including q = 0).
    #[test]
    fn stationarity_and_method_agreement(seed in 1u64..10_000, n in 1usize..6, extra in 1usize..20, q0 in 0usize..4) {
        let q = q0.min(n - 1);
        let p = n + extra;
        let (f, g, c, d) = random_problem(seed, p, n, q);
        let pr = LsqBuilder::new()
            .design_row_major(p, n, &f)
            .observations(&g)
            .restrictions_row_major(q, n, &c)
            .restriction_rhs(&d)
            .build()
            .unwrap();
        let a = pr.fit(&FitOptions { method: FitMethod::Dense, ..Default::default() }).unwrap();
        let b = pr.fit(&FitOptions { method: FitMethod::Augmented, ..Default::default() }).unwrap();
        let scale = 1.0 + a.coefficients.iter().fold(0.0f64, |m, x| m.max(x.abs()));
        for j in 0..n {
            let mut s = 0.0;
            for i in 0..p {
                s -= f[i * n + j] * a.residuals[i];
            }
            for i in 0..q {
                s += c[i * n + j] * a.multipliers[i];
            }
            prop_assert!(s.abs() < 1e-11 * scale * p as f64, "stationarity {j}: {s}");
        }
        for i in 0..q {
            let ci: f64 = (0..n).map(|j| c[i * n + j] * a.coefficients[j]).sum();
            prop_assert!((ci - d[i]).abs() < 1e-12 * scale);
        }
        prop_assert!(max_rel(&a.coefficients, &b.coefficients) < 1e-9);
    }
}

#[test]
fn cli_fit_json_and_out() {
    use std::process::Command;
    let dir = tempfile::tempdir().unwrap();
    let mm = |rows: usize, cols: usize, vals: &[f64]| {
        let mut s = format!("%%MatrixMarket matrix array real general\n{rows} {cols}\n");
        // array format is column-major
        for j in 0..cols {
            for i in 0..rows {
                s.push_str(&format!("{:.17e}\n", vals[i * cols + j]));
            }
        }
        s
    };
    let (p, n) = (10, 3);
    let (f, g, _, _) = random_problem(31, p, n, 0);
    std::fs::write(dir.path().join("F.mtx"), mm(p, n, &f)).unwrap();
    std::fs::write(dir.path().join("g.mtx"), mm(p, 1, &g)).unwrap();
    std::fs::write(dir.path().join("C.mtx"), mm(1, n, &[1.0, 1.0, 1.0])).unwrap();
    std::fs::write(dir.path().join("d.mtx"), mm(1, 1, &[1.0])).unwrap();
    let out = dir.path().join("out");
    let o = Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args([
            "fit",
            dir.path().to_str().unwrap(),
            "--json",
            "--out",
            out.to_str().unwrap(),
        ])
        .output()
        .unwrap();
    let text = String::from_utf8(o.stdout).unwrap();
    assert_eq!(o.status.code(), Some(0), "{text}");
    assert_eq!(text.trim().lines().count(), 1);
    for key in [
        "\"status\":\"solved\"",
        "\"p\":10",
        "\"n\":3",
        "\"q\":1",
        "\"coefficients\"",
        "\"standard_errors\"",
        "\"multipliers\"",
        "\"rss\"",
        "\"sigma\"",
        "\"restriction_test\"",
        "\"df1\":1",
        "\"df2\":7",
    ] {
        assert!(text.replace(' ', "").contains(key), "{key} missing in {text}");
    }
    assert!(out.join("coefficients.mtx").exists() && out.join("multipliers.mtx").exists());
    // Contradictory restrictions: exit 3, status infeasible.
    std::fs::write(dir.path().join("C.mtx"), mm(2, n, &[1.0, 1.0, 1.0, 2.0, 2.0, 2.0])).unwrap();
    std::fs::write(dir.path().join("d.mtx"), mm(2, 1, &[1.0, 1.0])).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args(["fit", dir.path().to_str().unwrap(), "--json"])
        .output()
        .unwrap();
    let text = String::from_utf8(o.stdout).unwrap();
    assert_eq!(o.status.code(), Some(3), "{text}");
    assert!(text.replace(' ', "").contains("\"status\":\"infeasible\""), "{text}");
    // Invalid input: weight ≤ 0 → exit 2, message names w.mtx.
    std::fs::remove_file(dir.path().join("C.mtx")).unwrap();
    std::fs::remove_file(dir.path().join("d.mtx")).unwrap();
    let mut w = vec![1.0; p];
    w[4] = 0.0;
    std::fs::write(dir.path().join("w.mtx"), mm(p, 1, &w)).unwrap();
    let o = Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args(["fit", dir.path().to_str().unwrap(), "--json"])
        .output()
        .unwrap();
    let text = String::from_utf8(o.stdout).unwrap();
    assert_eq!(o.status.code(), Some(2), "{text}");
    assert!(text.contains("w.mtx") && text.contains("row 4"), "{text}");
}
