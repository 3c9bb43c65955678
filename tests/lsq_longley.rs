//! NIST StRD "Longley" (Longley 1967; NIST Statistical Reference Datasets, linear
//! regression, higher difficulty): certified values in tests/fixtures (sources named in
//! tests/fixtures/README.md).

use tangency::lsq::{Fit, FitMethod, FitOptions, LsqBuilder};

/// Reads a vendored fixture from `tests/fixtures`.
fn fixture(name: &str) -> String {
    let path = format!("{}/tests/fixtures/{name}", env!("CARGO_MANIFEST_DIR"));
    std::fs::read_to_string(&path).unwrap_or_else(|e| panic!("fixture {path}: {e}"))
}

thread_local! {
    static CSV_T: &'static str = Box::leak(fixture("longley.csv").into_boxed_str());
    static JSON_T: &'static str = Box::leak(fixture("longley-reference.json").into_boxed_str());
}

#[allow(non_snake_case)]
fn CSV() -> &'static str {
    CSV_T.with(|s| *s)
}
#[allow(non_snake_case)]
fn JSON() -> &'static str {
    JSON_T.with(|s| *s)
}

/// (F with intercept first, y).
fn data() -> (Vec<f64>, Vec<f64>, usize) {
    let mut f = Vec::new();
    let mut y = Vec::new();
    let mut p = 0;
    for line in CSV().lines().skip(1).filter(|l| !l.trim().is_empty()) {
        let v: Vec<f64> = line.split(',').map(|s| s.trim().parse().unwrap()).collect();
        y.push(v[0]);
        f.push(1.0);
        f.extend_from_slice(&v[1..]);
        p += 1;
    }
    (f, y, p)
}

/// The text of the JSON array that follows `"key":` (after `from`).
fn array_after<'a>(text: &'a str, from: &str, key: &str) -> &'a str {
    let start = text.find(from).unwrap();
    let rest = &text[start..];
    let k = rest.find(&format!("\"{key}\"")).unwrap();
    let rest = &rest[k..];
    let open = rest.find('[').unwrap();
    let mut depth = 0;
    for (i, ch) in rest[open..].char_indices() {
        match ch {
            '[' => depth += 1,
            ']' => {
                depth -= 1;
                if depth == 0 {
                    return &rest[open..open + i + 1];
                }
            }
            _ => {}
        }
    }
    panic!("unterminated array")
}

fn numbers(arr: &str) -> Vec<f64> {
    arr.split(|c: char| !(c.is_ascii_digit() || c == '.' || c == '-' || c == 'E' || c == 'e' || c == '+'))
        .filter(|s| !s.is_empty())
        .map(|s| s.parse().unwrap())
        .collect()
}

fn certified() -> Vec<f64> {
    numbers(array_after(JSON(), "certified_coefficients", "values"))
}

fn certified_sd() -> f64 {
    let start = JSON().find("certified_residual_standard_deviation").unwrap();
    let json = JSON();
    let rest = &json[start..];
    let v = rest.find("\"value\"").unwrap();
    let rest = &rest[v + 7..];
    let a = rest.find('"').unwrap();
    let b = rest[a + 1..].find('"').unwrap();
    rest[a + 1..a + 1 + b].parse().unwrap()
}

/// Log relative error, the StRD accuracy measure (LRE of an exact zero: −log10|estimate|).
fn lre(est: f64, cert: f64) -> f64 {
    if est == cert {
        return 16.0;
    }
    if cert == 0.0 {
        return -est.abs().log10();
    }
    -((est - cert).abs() / cert.abs()).log10()
}

fn fit_unrestricted(method: FitMethod) -> Fit {
    let (f, y, p) = data();
    LsqBuilder::new()
        .design_row_major(p, 7, &f)
        .observations(&y)
        .build()
        .unwrap()
        .fit(&FitOptions {
            method,
            ..Default::default()
        })
        .unwrap()
}

#[test]
fn unrestricted_reaches_twelve_digits() {
    // NIST StRD Longley: LRE ≥ 12 on every certified coefficient and on the residual SD.
    let fit = fit_unrestricted(FitMethod::Dense);
    let cert = certified();
    assert_eq!(cert.len(), 7);
    let lres: Vec<f64> = fit.coefficients.iter().zip(&cert).map(|(e, c)| lre(*e, *c)).collect();
    eprintln!(
        "Longley LRE per coefficient {lres:.2?}, refinement {:?}",
        fit.refinement_history
    );
    for (j, l) in lres.iter().enumerate() {
        assert!(*l >= 12.0, "coefficient {j}: LRE {l:.2}");
    }
    let sd = fit.sigma().unwrap();
    let l = lre(sd, certified_sd());
    eprintln!("Longley residual SD LRE {l:.2}");
    assert!(l >= 12.0, "residual SD LRE {l:.2}");
    assert_eq!(fit.dof, 9);
}

#[test]
fn unrestricted_without_refinement_is_weaker_or_equal() {
    // Shows what the doubled-precision refinement buys (printed, and refinement never hurts).
    let (f, y, p) = data();
    let pr = LsqBuilder::new()
        .design_row_major(p, 7, &f)
        .observations(&y)
        .build()
        .unwrap();
    let cert = certified();
    let min_lre = |fit: &Fit| {
        fit.coefficients
            .iter()
            .zip(&cert)
            .map(|(e, c)| lre(*e, *c))
            .fold(99.0f64, f64::min)
    };
    let raw = pr
        .fit(&FitOptions {
            method: FitMethod::Dense,
            max_refinement_steps: 0,
            ..Default::default()
        })
        .unwrap();
    let refined = pr.fit(&FitOptions::default()).unwrap();
    eprintln!(
        "Longley min LRE: plain QR {:.2}, refined {:.2}",
        min_lre(&raw),
        min_lre(&refined)
    );
    assert!(min_lre(&refined) >= min_lre(&raw) - 0.3);
}

#[test]
fn augmented_method_matches_certified_values() {
    // NIST StRD Longley through the augmented KKT route (dense LBLᵀ backend today).
    let fit = fit_unrestricted(FitMethod::Augmented);
    let cert = certified();
    let lres: Vec<f64> = fit.coefficients.iter().zip(&cert).map(|(e, c)| lre(*e, *c)).collect();
    eprintln!(
        "Longley augmented LRE {lres:.2?}, refinement {:?}",
        fit.refinement_history
    );
    for (j, l) in lres.iter().enumerate() {
        assert!(*l >= 10.0, "coefficient {j}: LRE {l:.2}");
    }
}

#[test]
fn restricted_example_reaches_ten_digits() {
    // longley-reference.json "restricted_example": closed form evaluated at 60 digits.
    let (f, y, p) = data();
    let r = numbers(array_after(JSON(), "restricted_example", "R"));
    let q = numbers(array_after(JSON(), "restricted_example", "q"));
    let want = numbers(array_after(JSON(), "restricted_example", "coefficients"));
    assert_eq!((r.len(), q.len(), want.len()), (14, 2, 7));
    for method in [FitMethod::Dense, FitMethod::Augmented] {
        let fit = LsqBuilder::new()
            .design_row_major(p, 7, &f)
            .observations(&y)
            .restrictions_row_major(2, 7, &r)
            .restriction_rhs(&q)
            .build()
            .unwrap()
            .fit(&FitOptions {
                method,
                ..Default::default()
            })
            .unwrap();
        let lres: Vec<f64> = fit.coefficients.iter().zip(&want).map(|(e, c)| lre(*e, *c)).collect();
        eprintln!("restricted Longley ({method:?}) LRE {lres:.2?}");
        for (j, l) in lres.iter().enumerate() {
            // β1 is restricted to exactly 0: its error is absolute, against the scale of β.
            let l = if want[j] == 0.0 {
                -(fit.coefficients[j].abs() / 1e6).log10()
            } else {
                *l
            };
            assert!(l >= 10.0, "{method:?} coefficient {j}: LRE {l:.2}");
        }
        let t = fit.restriction_test.unwrap();
        assert_eq!((t.df1, t.df2), (2, 9));
        // RSS_U of the test is the certified unrestricted RSS: (certified residual SD)²·(p − n)
        // (NIST StRD Longley), and the F(2, ν) tail has the closed form (1 + 2x/ν)^(−ν/2).
        let rss_u = certified_sd().powi(2) * 9.0;
        assert!(
            (t.rss_unrestricted - rss_u).abs() < 1e-9 * rss_u,
            "{method:?} RSS_U {}",
            t.rss_unrestricted
        );
        let want_f = ((fit.rss - rss_u) / 2.0) / (rss_u / 9.0);
        assert!((t.statistic - want_f).abs() < 1e-8 * want_f);
        assert!((t.p_value - (1.0 + 2.0 * t.statistic / 9.0).powf(-4.5)).abs() < 1e-12);
    }
}

#[test]
fn restrictions_true_at_certified_values_return_them() {
    // Restrictions satisfied by the certified coefficients (NIST StRD Longley):
    // β1 = c1 and β3 − β4 = c3 − c4 — the fit must return the certified vector and
    // multipliers at rounding level.
    let (f, y, p) = data();
    let cert = certified();
    let mut c = vec![0.0; 14];
    c[1] = 1.0;
    c[7 + 3] = 1.0;
    c[7 + 4] = -1.0;
    let d = [cert[1], cert[3] - cert[4]];
    let fit = LsqBuilder::new()
        .design_row_major(p, 7, &f)
        .observations(&y)
        .restrictions_row_major(2, 7, &c)
        .restriction_rhs(&d)
        .build()
        .unwrap()
        .fit(&FitOptions::default())
        .unwrap();
    for (j, (e, w)) in fit.coefficients.iter().zip(&cert).enumerate() {
        assert!(lre(*e, *w) >= 11.0, "coefficient {j}: LRE {:.2}", lre(*e, *w));
    }
    // Multiplier scale: ‖FᵀF‖·|β| ~ the size of a gradient term; rounding level is ε times that.
    let scale: f64 = {
        let mut g = 0.0f64;
        for i in 0..p {
            let row = &f[i * 7..i * 7 + 7];
            let rn: f64 = row.iter().map(|x| x.abs()).sum();
            g = g.max(rn * fit.residuals[i].abs().max(1.0) * rn);
        }
        g
    };
    for (i, y) in fit.multipliers.iter().enumerate() {
        eprintln!("multiplier {i}: {y:.3e} (scale {scale:.3e})");
        assert!(y.abs() <= 1e-9 * scale, "multiplier {i} = {y:e}");
    }
    let t = fit.restriction_test.unwrap();
    assert!(t.statistic < 1e-12, "F statistic {}", t.statistic);
}
