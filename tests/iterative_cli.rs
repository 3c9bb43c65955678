//! `tangency solve --method minres` end to end: JSON keys, exit codes 0 / 4 / 2, and the
//! answer against the sparse direct backend run by the same binary.

use std::process::Command;

use serde_json::Value;

fn run(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args(args)
        .output()
        .expect("binary runs");
    (
        out.status.code().expect("exit code"),
        String::from_utf8(out.stdout).unwrap(),
        String::from_utf8(out.stderr).unwrap(),
    )
}

fn json(stdout: &str) -> Value {
    let t = stdout.trim();
    assert_eq!(t.lines().count(), 1, "exactly one JSON line expected: {stdout}");
    serde_json::from_str(t).unwrap()
}

fn generate(k: usize) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("p");
    let (code, _, err) = run(&[
        "generate",
        "poisson-control",
        "--size",
        &k.to_string(),
        "--out",
        p.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{err}");
    dir
}

#[test]
fn minres_solves_and_reports_iterations() {
    let dir = generate(15);
    let p = dir.path().join("p");
    let (code, out, err) = run(&["solve", p.to_str().unwrap(), "--method", "minres", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v = json(&out);
    assert_eq!(v["status"], "solved");
    assert_eq!(v["method"], "minres");
    assert!(v["verdict"].is_null() && v["inertia"].is_null());
    for key in [
        "n",
        "m",
        "objective",
        "primal_residual",
        "dual_residual",
        "backward_error",
        "timing",
    ] {
        assert!(!v[key].is_null(), "missing {key}");
    }
    let it = v["iterations"].as_u64().unwrap();
    assert!((1..=5).contains(&it), "{it}");
    let tail = v["residual_history_tail"].as_array().unwrap();
    assert!(!tail.is_empty() && tail.len() <= 10);
    assert!(tail.last().unwrap().as_f64().unwrap() <= 1e-10);
    // Same objective as the sparse direct backend.
    let (code, out, _) = run(&["solve", p.to_str().unwrap(), "--method", "sparse", "--json"]);
    assert_eq!(code, 0);
    let d = json(&out);
    let (fi, fd) = (v["objective"].as_f64().unwrap(), d["objective"].as_f64().unwrap());
    assert!((fi - fd).abs() <= 1e-9 * fd.abs().max(1.0), "{fi} vs {fd}");
    // The human report says what was not verified.
    let (code, out, _) = run(&["solve", p.to_str().unwrap(), "--method", "minres"]);
    assert_eq!(code, 0);
    assert!(out.contains("not verified") && out.contains("iterations"), "{out}");
}

#[test]
fn minres_iteration_limit_exits_4_with_figures() {
    let dir = generate(10);
    let p = dir.path().join("p");
    let args = [
        "solve",
        p.to_str().unwrap(),
        "--method",
        "minres",
        "--schur-block",
        "diagonal",
        "--max-iter",
        "3",
        "--json",
    ];
    let (code, out, _) = run(&args);
    assert_eq!(code, 4);
    let v = json(&out);
    assert_eq!(v["status"], "not_converged");
    assert_eq!(v["iterations"], 3);
    assert_eq!(v["residual_history_tail"].as_array().unwrap().len(), 4);
    assert!(v["verdict"].is_null() && v["inertia"].is_null());
    assert!(v["message"].as_str().unwrap().contains("did not converge"));
    let (code, _, err) = run(&args[..args.len() - 1]);
    assert_eq!(code, 4);
    assert!(err.contains("not converged") && err.contains("3 iteration(s)"), "{err}");
}

#[test]
fn bad_iterative_options_exit_2_and_unknown_method_lists_minres() {
    let dir = generate(3);
    let p = dir.path().join("p");
    let (code, out, _) = run(&[
        "solve",
        p.to_str().unwrap(),
        "--method",
        "minres",
        "--tol",
        "2",
        "--json",
    ]);
    assert_eq!(code, 2);
    assert_eq!(json(&out)["status"], "invalid_input");
    let (code, out, _) = run(&[
        "solve",
        p.to_str().unwrap(),
        "--method",
        "minres",
        "--schur-block",
        "x",
        "--json",
    ]);
    assert_eq!(code, 2);
    assert_eq!(json(&out)["status"], "invalid_input");
    let (code, out, _) = run(&["solve", p.to_str().unwrap(), "--method", "nope", "--json"]);
    assert_eq!(code, 2);
    let msg = json(&out)["message"].as_str().unwrap().to_string();
    assert!(msg.contains("minres") && msg.contains("dense"), "{msg}");
}
