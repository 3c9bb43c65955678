//! `tangency solve --method schur|nullspace` and the singular outcomes through the command line.

use std::process::Command;

use tangency::{ProblemBuilder, Triangle};

fn write(dir: &std::path::Path, b3: f64) {
    // Row 2 = row 0 + row 1 (by design); b consistent when b3 = 3.
    let p = ProblemBuilder::new()
        .hessian_row_major(3, &[2., 0., 0., 0., 2., 0., 0., 0., 2.], Triangle::Full)
        .linear(&[1., 0., -1.])
        .constraints_row_major(3, 3, &[1., 0., 1., 0., 1., 0., 1., 1., 1.])
        .rhs(&[1., 2., b3])
        .build()
        .unwrap();
    tangency::io::write_problem_dir(&p, dir).unwrap();
}

fn run(dir: &std::path::Path, method: &str) -> (i32, String) {
    let o = Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args(["solve", dir.to_str().unwrap(), "--method", method, "--json"])
        .output()
        .unwrap();
    (o.status.code().unwrap(), String::from_utf8(o.stdout).unwrap())
}

#[test]
fn new_methods_and_singular_statuses() {
    let tmp = tempfile::tempdir().unwrap();
    let ok = tmp.path().join("ok");
    write(&ok, 3.0);
    for method in ["schur", "nullspace", "dense", "auto"] {
        let (code, out) = run(&ok, method);
        assert_eq!(code, 0, "{method}: {out}");
        assert_eq!(out.trim().lines().count(), 1);
        assert!(out.contains("\"status\":\"solved\""), "{out}");
        assert!(out.contains("\"verdict\":\"minimizer\""), "{out}");
        // Redundant row: the rank analysis solves it with the null-space method.
        assert!(out.contains("\"method\":\"nullspace\""), "{method}: {out}");
        assert!(out.contains("redundant"), "{out}");
    }
    let bad = tmp.path().join("bad");
    write(&bad, 3.5);
    for method in ["schur", "nullspace", "dense", "auto"] {
        let (code, out) = run(&bad, method);
        assert_eq!(code, 3, "{method}: {out}");
        assert!(out.contains("\"status\":\"infeasible\""), "{out}");
        assert!(out.contains("they differ by 0.5)"), "{out}");
    }
    let (code, out) = run(&ok, "cholesky");
    assert_eq!(code, 2);
    for name in ["auto", "dense", "sparse", "schur", "nullspace", "riccati"] {
        assert!(out.contains(name), "{out}");
    }
}
