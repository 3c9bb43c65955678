//! `tangency solve` on directories with G.mtx, h.mtx, lo.mtx, hi.mtx: the JSON keys, the
//! files written by --out, the infeasible status and certificate, and the refusal of
//! iterative methods. The answer is known by construction: minimize ½‖x − (2, 2, −1)‖²
//! subject to x0 + x1 ≤ 2, x ≥ 0, x1 ≤ 0.8 gives x* = (1.2, 0.8, 0), z* = 0.8,
//! w* = (0, 0.4, −1) (stationarity: x − p + z·g + w = 0).

mod common;

use common::{one_json, run_cli};

fn write(dir: &std::path::Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).unwrap();
}

fn designed_dir() -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    write(
        d,
        "H.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n3 3 3\n1 1 1\n2 2 1\n3 3 1\n",
    );
    write(d, "c.mtx", "%%MatrixMarket matrix array real general\n3 1\n-2\n-2\n1\n");
    write(
        d,
        "G.mtx",
        "%%MatrixMarket matrix coordinate real general\n1 3 2\n1 1 1\n1 2 1\n",
    );
    write(d, "h.mtx", "%%MatrixMarket matrix array real general\n1 1\n2\n");
    write(d, "lo.mtx", "%%MatrixMarket matrix array real general\n3 1\n0\n0\n0\n");
    write(
        d,
        "hi.mtx",
        "%%MatrixMarket matrix array real general\n3 1\n1e20\n0.8\n1e20\n",
    );
    dir
}

fn num(v: &serde_json::Value, key: &str) -> f64 {
    v[key].as_f64().unwrap_or_else(|| panic!("{key} missing in {v}"))
}

#[test]
fn json_reports_the_certificate_and_the_active_set() {
    let dir = designed_dir();
    let out = tempfile::tempdir().unwrap();
    let (code, stdout, stderr) = run_cli(&[
        "solve",
        dir.path().to_str().unwrap(),
        "--json",
        "--out",
        out.path().to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{stderr}");
    let j = one_json(&stdout);
    assert_eq!(j["status"], "solved");
    assert_eq!(j["verdict"], "minimizer");
    assert_eq!(j["p"], 1);
    let f = 0.5 * (1.2f64 * 1.2 + 0.8 * 0.8) - 2.0 * 1.2 - 2.0 * 0.8;
    assert!((num(&j, "objective") - f).abs() < 1e-8);
    assert!(num(&j, "duality_gap").abs() < 1e-8);
    assert!(num(&j, "complementarity") < 1e-8);
    assert!(num(&j, "iterations") >= 1.0);
    assert_eq!(j["active_inequalities"], serde_json::json!([0]));
    assert_eq!(j["active_bounds"]["lower"], serde_json::json!([2]));
    assert_eq!(j["active_bounds"]["upper"], serde_json::json!([1]));
    let read = |name: &str| -> Vec<f64> {
        let text = std::fs::read_to_string(out.path().join(name)).unwrap();
        text.lines().skip(2).map(|l| l.trim().parse().unwrap()).collect()
    };
    let (x, z, w) = (
        read("x.mtx"),
        read("inequality_multipliers.mtx"),
        read("bound_multipliers.mtx"),
    );
    for (got, want) in x.iter().zip([1.2, 0.8, 0.0]) {
        assert!((got - want).abs() < 1e-8, "x {x:?}");
    }
    assert!((z[0] - 0.8).abs() < 1e-8, "z {z:?}");
    for (got, want) in w.iter().zip([0.0, 0.4, -1.0]) {
        assert!((got - want).abs() < 1e-7, "w {w:?}");
    }
}

#[test]
fn infeasible_directory_exits_3_with_a_certificate() {
    let dir = designed_dir();
    // x0 + x1 ≤ −1 with x ≥ 0.
    write(
        dir.path(),
        "h.mtx",
        "%%MatrixMarket matrix array real general\n1 1\n-1\n",
    );
    let (code, stdout, _) = run_cli(&["solve", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 3);
    let j = one_json(&stdout);
    assert_eq!(j["status"], "infeasible");
    let cert = &j["certificate"];
    assert!(num(cert, "value") < 0.0);
    assert!(cert["z"][0].as_f64().unwrap() > 0.0);
}

#[test]
fn bad_inequality_files_and_iterative_methods_are_refused() {
    let dir = designed_dir();
    let (code, _, stderr) = run_cli(&["solve", dir.path().to_str().unwrap(), "--method", "minres"]);
    assert_eq!(code, 2, "{stderr}");
    assert!(stderr.contains("inequality files"), "{stderr}");
    write(
        dir.path(),
        "lo.mtx",
        "%%MatrixMarket matrix array real general\n3 1\n0\n2\n0\n",
    );
    let (code, _, stderr) = run_cli(&["solve", dir.path().to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(stderr.contains("lo.mtx") && stderr.contains("row 1"), "{stderr}");
    std::fs::remove_file(dir.path().join("h.mtx")).unwrap();
    let (code, _, stderr) = run_cli(&["solve", dir.path().to_str().unwrap()]);
    assert_eq!(code, 2);
    assert!(stderr.contains("h.mtx"), "{stderr}");
}
