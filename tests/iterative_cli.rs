//! `tangency solve --method minres` end to end: JSON keys, exit codes 0 / 4 / 2, and the
//! answer against the sparse direct backend run by the same binary.

mod common;
use common::{one_json as json, run_cli as run};

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

#[test]
fn pcg_solves_reports_iterations_and_agrees_with_sparse() {
    let dir = generate(15);
    let p = dir.path().join("p");
    let (code, out, err) = run(&["solve", p.to_str().unwrap(), "--method", "pcg", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v = json(&out);
    assert_eq!(v["status"], "solved");
    assert_eq!(v["method"], "pcg");
    assert!(v["verdict"].is_null() && v["inertia"].is_null());
    assert!(v["iterations"].as_u64().is_some());
    assert!(v["residual_history_tail"].as_array().is_some_and(|a| !a.is_empty()));
    assert!(v["max_iterate_infeasibility"].as_f64().unwrap() < 1e-12);
    let (code, out_d, err) = run(&["solve", p.to_str().unwrap(), "--method", "sparse", "--json"]);
    assert_eq!(code, 0, "{err}");
    let d = json(&out_d);
    let (a, b) = (v["objective"].as_f64().unwrap(), d["objective"].as_f64().unwrap());
    assert!((a - b).abs() <= 1e-9 * b.abs().max(1.0), "{a} vs {b}");
    let (code, text, _) = run(&["solve", p.to_str().unwrap(), "--method", "pcg"]);
    assert_eq!(code, 0);
    assert!(text.contains("projected CG") && text.contains("not verified"), "{text}");
}

#[test]
fn pcg_iteration_limit_exits_4_and_saddle_is_reported() {
    // H = [2 1 0; 1 2 0; 0 0 1] (not diagonal: the preconditioner is not exact), A = [0 0 1].
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path();
    std::fs::write(
        p.join("H.mtx"),
        "%%MatrixMarket matrix coordinate real symmetric\n3 3 4\n1 1 2\n2 1 1\n2 2 3\n3 3 1\n",
    )
    .unwrap();
    std::fs::write(
        p.join("A.mtx"),
        "%%MatrixMarket matrix coordinate real general\n1 3 1\n1 3 1\n",
    )
    .unwrap();
    std::fs::write(p.join("b.mtx"), "%%MatrixMarket matrix array real general\n1 1\n0.5\n").unwrap();
    std::fs::write(
        p.join("c.mtx"),
        "%%MatrixMarket matrix array real general\n3 1\n1\n-1\n0\n",
    )
    .unwrap();
    let (code, out, _) = run(&[
        "solve",
        p.to_str().unwrap(),
        "--method",
        "pcg",
        "--max-iter",
        "1",
        "--json",
    ]);
    assert_eq!(code, 4, "{out}");
    let v = json(&out);
    assert_eq!(v["status"], "not_converged");
    assert_eq!(v["iterations"], 1);
    // Indefinite reduced Hessian: H = diag(1, −1, 2) on null([0 0 1]) = span(e₁, e₂).
    std::fs::write(
        p.join("H.mtx"),
        "%%MatrixMarket matrix coordinate real symmetric\n3 3 3\n1 1 1\n2 2 -1\n3 3 2\n",
    )
    .unwrap();
    std::fs::write(
        p.join("c.mtx"),
        "%%MatrixMarket matrix array real general\n3 1\n0\n1\n0\n",
    )
    .unwrap();
    let (code, out, err) = run(&["solve", p.to_str().unwrap(), "--method", "pcg", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v = json(&out);
    assert_eq!(v["verdict"], "saddle");
    assert!((v["negative_curvature"].as_f64().unwrap() + 1.0).abs() < 1e-12);
}

#[test]
fn auto_falls_back_to_minres_under_a_memory_budget_and_exits_4_when_it_does_not_converge() {
    let dir = generate(12);
    let p = dir.path().join("p");
    let p = p.to_str().unwrap();
    // Budget 0 MiB: no direct factorization fits.
    let (code, out, err) = run(&["solve", p, "--memory-budget", "0", "--json"]);
    assert_eq!(code, 0, "{err}");
    let v = json(&out);
    assert_eq!(
        (v["status"].as_str(), v["method"].as_str()),
        (Some("solved"), Some("minres"))
    );
    assert!(v["verdict"].is_null() && v["inertia"].is_null());
    let (_, direct, _) = run(&["solve", p, "--json"]);
    let d = json(&direct);
    assert_eq!(d["method"], "sparse");
    let (fo, fd) = (v["objective"].as_f64().unwrap(), d["objective"].as_f64().unwrap());
    assert!((fo - fd).abs() <= 1e-9 * fd.abs().max(1.0), "{fo} vs {fd}");
    // One iteration is not enough: status not_converged, exit 4, with the figures.
    let (code, out, _) = run(&["solve", p, "--memory-budget", "0", "--max-iter", "1", "--json"]);
    assert_eq!(code, 4);
    let v = json(&out);
    assert_eq!(v["status"], "not_converged");
    assert_eq!(v["iterations"], 1);
    assert!(!v["residual_history_tail"].as_array().unwrap().is_empty());
    assert!(v["relative_residual"].as_f64().unwrap() > 1e-10);
}
