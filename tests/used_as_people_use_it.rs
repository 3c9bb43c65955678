//! Issue 18 through the command line and the library: the solution in the JSON, options
#![allow(clippy::excessive_precision)] // reference values quoted as the script printed them
//! that do nothing refused, and the restricted fit's inference on the NIST Longley data.

mod common;

use common::{one_json, run_cli};

fn write(dir: &std::path::Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).unwrap();
}

/// minimize x0² + x1² s.t. x0 + x1 = 1: x = (1/2, 1/2), y = −1 (known by hand).
fn tiny(dir: &std::path::Path) {
    write(
        dir,
        "H.mtx",
        "%%MatrixMarket matrix array real general\n2 2\n2\n0\n0\n2\n",
    );
    write(dir, "A.mtx", "%%MatrixMarket matrix array real general\n1 2\n1\n1\n");
    write(dir, "b.mtx", "%%MatrixMarket matrix array real general\n1 1\n1\n");
}

#[test]
fn json_carries_x_and_multipliers_with_a_limit() {
    let dir = tempfile::tempdir().unwrap();
    tiny(dir.path());
    let d = dir.path().to_str().unwrap();
    let (code, out, _) = run_cli(&["solve", d, "--json"]);
    assert_eq!(code, 0);
    let j = one_json(&out);
    let x: Vec<f64> = j["x"].as_array().unwrap().iter().map(|v| v.as_f64().unwrap()).collect();
    assert!((x[0] - 0.5).abs() < 1e-15 && (x[1] - 0.5).abs() < 1e-15);
    assert!((j["multipliers"][0].as_f64().unwrap() + 1.0).abs() < 1e-15);
    let (code, out, _) = run_cli(&["solve", d, "--json", "--json-vectors", "2"]);
    assert_eq!(code, 0);
    let j = one_json(&out);
    assert!(j["x"].is_null() && j["multipliers"].is_null());
    assert!(j["notes"].to_string().contains("left out"), "{}", j["notes"]);
}

#[test]
fn options_that_do_nothing_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    tiny(dir.path());
    let d = dir.path().to_str().unwrap();
    let cases: [&[&str]; 5] = [
        &["--method", "minres", "--sensitivity"],
        &["--method", "pcg", "--stages", "1,1,1"],
        &["--method", "dense", "--tol", "1e-8"],
        &["--method", "sparse", "--schur-block", "diagonal"],
        &["--method", "minres", "--memory-budget", "10"],
    ];
    for extra in cases {
        let mut args = vec!["solve", d, "--json"];
        args.extend_from_slice(extra);
        let (code, out, _) = run_cli(&args);
        assert_eq!(code, 2, "{extra:?}");
        let j = one_json(&out);
        assert_eq!(j["status"], "invalid_input");
        assert!(
            j["message"].as_str().unwrap().contains("do nothing"),
            "{}",
            j["message"]
        );
    }
    // Still accepted where they apply.
    let (code, _, _) = run_cli(&["solve", d, "--method", "minres", "--tol", "1e-12"]);
    assert_eq!(code, 0);
}

#[test]
fn inspect_exits_3_on_infeasible() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "H.mtx",
        "%%MatrixMarket matrix array real general\n2 2\n1\n0\n0\n1\n",
    );
    // x0 + x1 = 1 and 2x0 + 2x1 = 3 contradict each other.
    write(
        dir.path(),
        "A.mtx",
        "%%MatrixMarket matrix array real general\n2 2\n1\n2\n1\n2\n",
    );
    write(
        dir.path(),
        "b.mtx",
        "%%MatrixMarket matrix array real general\n2 1\n1\n3\n",
    );
    let (code, out, _) = run_cli(&["inspect", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 3, "{out}");
    assert_eq!(one_json(&out)["status"], "infeasible");
}

/// Longley (NIST StRD, tests/fixtures/longley.csv) with the restrictions x1 = 0 and
/// x3 = x4. Reference values printed by tests/fixtures/longley_inference.py (mpmath at 60
/// digits with the closed-form restricted estimator, scipy.stats for the distributions).
#[test]
fn longley_inference_against_mpmath_and_scipy() {
    let dir = tempfile::tempdir().unwrap();
    let csv = include_str!("fixtures/longley.csv");
    write(dir.path(), "data.csv", csv);
    write(
        dir.path(),
        "restrictions.txt",
        "x1_gnp_deflator = 0\nx3_unemployed - x4_armed_forces = 0   # equal effects\n",
    );
    let (code, out, err) = run_cli(&["fit", dir.path().to_str().unwrap(), "--intercept", "--json"]);
    assert_eq!(code, 0, "{out}{err}");
    let j = one_json(&out);
    let v = |key: &str| -> Vec<f64> {
        j[key]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap_or(f64::NAN))
            .collect()
    };
    let close = |got: f64, want: f64, rel: f64, what: &str| {
        assert!((got - want).abs() <= rel * want.abs(), "{what}: {got} vs {want}");
    };
    assert_eq!(j["names"][1], "x1_gnp_deflator");
    let beta = v("coefficients");
    let want_beta = [
        -1627551.4828807771,
        0.0,
        0.03210615459185127,
        -0.98605698752793329,
        -0.98605698752793329,
        -0.44809995572387558,
        889.61770101814543,
    ];
    for k in [0, 2, 3, 4, 5, 6] {
        close(beta[k], want_beta[k], 1e-8, "β");
    }
    assert!(beta[1].abs() < 1e-12);
    let se = v("standard_errors");
    let want_se = [
        713585.91477825245,
        0.0,
        0.013626620393132168,
        0.24785153262236323,
        0.24785153262236323,
        0.13124316824083143,
        371.97167259280339,
    ];
    let want_p = [
        0.04347449938721656,
        f64::NAN,
        0.038072797177774176,
        0.002164664761889363,
        0.002164664761889363,
        0.005781431969681612,
        0.03575830999608106,
    ];
    let want_lo = [
        -3198143.4917581276,
        0.0,
        0.0021141653243652736,
        -1.5315745327357235,
        -1.5315745327357235,
        -0.73696422138535582,
        70.913569666919407,
    ];
    let pv = v("p_values");
    assert_eq!(j["fixed_by_restrictions"][1], true);
    assert!(j["t_statistics"][1].is_null());
    let want_hc = [
        [
            610616.91283195171,
            0.0098099162566267863,
            0.20959704934853691,
            0.11224519564908067,
            319.29303834486812,
        ],
        [
            736431.70563953939,
            0.011831204162923216,
            0.25278355267443695,
            0.13537279945019382,
            385.0818932227225,
        ],
        [
            720562.10714191561,
            0.011603302857234542,
            0.24991637971641609,
            0.13554162043875936,
            376.84497730164557,
        ],
        [
            863075.22965078936,
            0.013855670271530154,
            0.29979063716575642,
            0.16695497180084968,
            451.53043831199147,
        ],
    ];
    let mut checked = 0;
    for k in [0, 2, 3, 4, 5, 6] {
        close(se[k], want_se[k], 1e-7, "se");
        close(pv[k], want_p[k], 1e-6, "p");
        close(
            j["confidence_intervals"][k][0].as_f64().unwrap(),
            want_lo[k],
            1e-7,
            "ci",
        );
        checked += 1;
    }
    assert_eq!(checked, 6);
    for (h, want) in ["hc0", "hc1", "hc2", "hc3"].iter().zip(want_hc) {
        let got: Vec<f64> = j["robust_standard_errors"][h]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        for (g, w) in [0, 2, 3, 5, 6].iter().map(|&k| got[k]).zip(want) {
            close(g, w, 1e-6, h);
        }
    }
    let t = &j["restriction_test"];
    close(t["statistic"].as_f64().unwrap(), 3.908973189057581, 1e-7, "F");
    close(t["p_value"].as_f64().unwrap(), 0.0599947097980397, 1e-6, "F p");
    close(
        t["wald"]["statistic"].as_f64().unwrap(),
        13.898571338871399,
        1e-7,
        "Wald",
    );
    close(
        t["wald"]["p_value"].as_f64().unwrap(),
        0.0009593201807230591,
        1e-6,
        "Wald p",
    );
    close(
        t["likelihood_ratio"]["statistic"].as_f64().unwrap(),
        10.003551611306361,
        1e-7,
        "LR",
    );
    close(
        t["likelihood_ratio"]["p_value"].as_f64().unwrap(),
        0.006725992332437545,
        1e-6,
        "LR p",
    );
    close(
        t["score"]["statistic"].as_f64().unwrap(),
        7.4377179732607451,
        1e-7,
        "LM",
    );
    close(
        t["score"]["p_value"].as_f64().unwrap(),
        0.024261634908244633,
        1e-6,
        "LM p",
    );
    // The readable report names the coefficients and says which one the restrictions fix.
    let (code, text, _) = run_cli(&["fit", dir.path().to_str().unwrap(), "--intercept"]);
    assert_eq!(code, 0);
    assert!(
        text.contains("x1_gnp_deflator") && text.contains("fixed by the restrictions"),
        "{text}"
    );
    assert!(text.contains("likelihood ratio"), "{text}");
}
