//! Issue 12 through the command line (`tangency solve DIR --json`): status, exit code and
//! verdict of sparse problems whose answer is known by construction, and the `inaccurate`
//! status (exit 3) of a solve whose forward-error bound fails the acceptance rule with no
//! fallback left (N = 7000 > the dense fallback cap, more forced pivots than the
//! capacitance cap). Run with `cargo test --test sparse_trust_cli`.

use std::path::Path;
use std::process::Command;

use tangency::io::write_problem_dir;
use tangency::{Problem, ProblemBuilder, Triangle};

fn solve_json(dir: &Path, method: &str) -> (i32, serde_json::Value) {
    let out = Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args(["solve", dir.to_str().unwrap(), "--method", method, "--json"])
        .output()
        .unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    let json: serde_json::Value =
        serde_json::from_str(text.trim()).unwrap_or_else(|e| panic!("not one JSON object ({e}): {text}"));
    (out.status.code().unwrap_or(-1), json)
}

fn write(p: &Problem) -> tempfile::TempDir {
    let dir = tempfile::tempdir().unwrap();
    write_problem_dir(p, dir.path()).unwrap();
    dir
}

/// H with 3 stored diagonal entries, c = 1, no constraints: unbounded below.
fn few_entries(n: usize) -> Problem {
    ProblemBuilder::new()
        .hessian_triplets(n, &[(0, 0, 1.0), (1, 1, 2.0), (2, 2, 3.0)], Triangle::Lower)
        .linear(&vec![1.0; n])
        .build()
        .unwrap()
}

/// H = diag(−1, 2, 2, …), n = 50, c = 0.5. With the row x₀ + x₁ = 1 the null space of A is
/// spanned by (1, −1, 0, …) (curvature −1 + 2 = 1) and e₂, …, e₄₉ (curvature 2): a
/// minimizer; without it H itself is indefinite: a saddle. Both known by construction
/// (inertia theorem, Gould 1985).
fn tiny_nonconvex(with_row: bool) -> Problem {
    let n = 50;
    let h: Vec<(usize, usize, f64)> = (0..n).map(|j| (j, j, if j == 0 { -1.0 } else { 2.0 })).collect();
    let b = ProblemBuilder::new()
        .hessian_triplets(n, &h, Triangle::Lower)
        .linear(&vec![0.5; n]);
    if with_row {
        b.constraints_triplets(1, n, &[(0, 0, 1.0), (0, 1, 1.0)])
            .rhs(&[1.0])
            .build()
            .unwrap()
    } else {
        b.build().unwrap()
    }
}

#[test]
fn uncertified_solve_is_status_inaccurate_exit_3() {
    let dir = write(&few_entries(7000));
    for method in ["sparse", "auto"] {
        let (code, json) = solve_json(dir.path(), method);
        assert_eq!(code, 3, "{method}: {json}");
        assert_eq!(json["status"], "inaccurate", "{method}: {json}");
        assert!(json["verdict"].is_null(), "{method}: {json}");
        assert!(json["x"].is_null(), "{method}: no solution may be printed: {json}");
        // The figures behind the refusal: the bound is missing or above 1e-2.
        let bound = &json["forward_error_bound"];
        assert!(bound.is_null() || bound.as_f64().unwrap() > 1e-2, "{method}: {json}");
        assert!(
            json["message"].as_str().unwrap().contains("not certified"),
            "{method}: {json}"
        );
    }
}

#[test]
fn small_singular_is_unbounded_exit_3() {
    let dir = write(&few_entries(68));
    for method in ["sparse", "auto", "dense"] {
        let (code, json) = solve_json(dir.path(), method);
        assert_eq!(code, 3, "{method}: {json}");
        assert_eq!(json["status"], "unbounded", "{method}: {json}");
        assert!(json["slope"].as_f64().unwrap() < 0.0, "{method}: {json}");
    }
}

#[test]
fn verdicts_and_bound_reach_the_json() {
    let mut ran = 0;
    for (with_row, verdict) in [(true, "minimizer"), (false, "saddle")] {
        let dir = write(&tiny_nonconvex(with_row));
        for method in ["sparse", "auto", "dense"] {
            let (code, json) = solve_json(dir.path(), method);
            assert_eq!(code, 0, "{method}: {json}");
            assert_eq!(json["status"], "solved", "{method}: {json}");
            assert_eq!(json["verdict"], verdict, "{method}: {json}");
            let bound = json["forward_error_bound"]
                .as_f64()
                .expect("a solved direct solve reports its bound");
            assert!(bound <= 1e-2, "{method}: {json}");
            ran += 1;
        }
    }
    assert_eq!(ran, 6);
}
