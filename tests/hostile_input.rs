//! Regression tests for the hostile-input classes of issue 13, through the command line
//! (exit code, JSON status, message) and the library. Answers known by construction.

use std::path::Path;
use std::process::Command;

fn run(dir: &Path, method: &str) -> (i32, serde_json::Value) {
    let out = Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args(["solve", dir.to_str().unwrap(), "--json", "--method", method])
        .output()
        .unwrap();
    let j = serde_json::from_slice(&out.stdout).expect("one JSON object");
    (out.status.code().expect("no signal"), j)
}

fn w(dir: &Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).unwrap();
}

const H2: &str = "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 2\n2 2 2\n";

fn invalid(dir: &Path, needles: &[&str]) {
    let (code, j) = run(dir, "auto");
    assert_eq!(code, 2, "{j}");
    assert_eq!(j["status"], "invalid_input");
    let msg = j["message"].as_str().unwrap();
    for n in needles {
        assert!(msg.contains(n), "{msg:?} lacks {n:?}");
    }
}

#[test]
fn fifo_and_dangling_symlink_are_named_errors() {
    let d = tempfile::tempdir().unwrap();
    w(d.path(), "H.mtx", H2);
    std::os::unix::fs::symlink(d.path().join("nowhere"), d.path().join("b.mtx")).unwrap();
    invalid(d.path(), &["b.mtx", "symbolic link"]);
    std::fs::remove_file(d.path().join("b.mtx")).unwrap();
    assert!(Command::new("mkfifo")
        .arg(d.path().join("c.mtx"))
        .status()
        .unwrap()
        .success());
    invalid(d.path(), &["c.mtx", "FIFO"]);
}

#[test]
fn duplicates_summing_to_infinity_are_refused() {
    let d = tempfile::tempdir().unwrap();
    w(
        d.path(),
        "H.mtx",
        "%%MatrixMarket matrix coordinate real general\n1 1 2\n1 1 1.5e308\n1 1 1.5e308\n",
    );
    invalid(d.path(), &["H.mtx", "duplicate", "row 0, column 0"]);
}

#[test]
fn hostile_sizes_and_tokens() {
    let d = tempfile::tempdir().unwrap();
    for (h, needles) in [
        (
            "%%MatrixMarket matrix coordinate real general\n99999999999999999999 2 1\n1 1 1\n",
            vec!["too large"],
        ),
        (
            "%%MatrixMarket matrix array real general\n4294967296 4294967296\n",
            vec!["more values"],
        ),
        (
            "%%MatrixMarket matrix coordinate real general\n2000000000 2000000000 3\n1 1 1\n2 2 1\n3 3 1\n",
            vec!["H.mtx"],
        ),
        (
            "%%MatrixMarket matrix coordinate real general\n2 2 2\n1 1 1\n2 2.5\n",
            vec!["line 4", "exactly 3"],
        ),
        (
            "%%MatrixMarket matrix coordinate complex general\n1 1 1\n1 1 1 0\n",
            vec!["complex"],
        ),
    ] {
        w(d.path(), "H.mtx", h);
        invalid(d.path(), &needles);
    }
    // c of 2·10⁹ rows for n = 2: a dimension mismatch, nothing allocated.
    w(d.path(), "H.mtx", H2);
    w(
        d.path(),
        "c.mtx",
        "%%MatrixMarket matrix coordinate real general\n2000000000 1 1\n1 1 1\n",
    );
    invalid(d.path(), &["c.mtx", "block c"]);
}

#[test]
fn integer_and_pattern_files_are_read() {
    let d = tempfile::tempdir().unwrap();
    w(
        d.path(),
        "H.mtx",
        "%%MatrixMarket matrix coordinate integer symmetric\n2 2 2\n1 1 2\n2 2 2\n",
    );
    w(
        d.path(),
        "A.mtx",
        "%%MatrixMarket matrix coordinate pattern general\n1 2 2\n1 1\n1 2\n",
    );
    w(
        d.path(),
        "b.mtx",
        "%%MatrixMarket matrix array integer general\n1 1\n2\n",
    );
    // min x₁² + x₂² s.t. x₁ + x₂ = 2: x = (1, 1), y = −2 (H x + Aᵀ y = 0).
    let (code, j) = run(d.path(), "auto");
    assert_eq!(code, 0, "{j}");
    assert!((j["objective"].as_f64().unwrap() - 2.0).abs() < 1e-12, "{j}");
}

#[test]
fn zero_constraint_row_is_redundant_on_every_method() {
    let d = tempfile::tempdir().unwrap();
    w(d.path(), "H.mtx", H2);
    w(
        d.path(),
        "A.mtx",
        "%%MatrixMarket matrix array real general\n1 2\n0\n0\n",
    );
    w(
        d.path(),
        "c.mtx",
        "%%MatrixMarket matrix array real general\n2 1\n1\n-1\n",
    );
    // x = −H⁻¹c = (−0.5, 0.5), objective −0.5.
    for m in ["auto", "dense", "schur", "nullspace"] {
        let (code, j) = run(d.path(), m);
        assert_eq!(code, 0, "{m}: {j}");
        assert!((j["objective"].as_f64().unwrap() + 0.5).abs() < 1e-14, "{m}: {j}");
    }
}

#[test]
fn dense_method_on_a_huge_sparse_problem_is_refused_before_allocating() {
    // N = 120 000: a dense K would need 2·N²·8 bytes ≈ 230 GB.
    let n = 120_000;
    let p = tangency::ProblemBuilder::new()
        .hessian_triplets(
            n,
            &(0..n).map(|i| (i, i, 1.0)).collect::<Vec<_>>(),
            tangency::Triangle::Lower,
        )
        .build()
        .unwrap();
    for method in [
        tangency::Method::Dense,
        tangency::Method::Schur,
        tangency::Method::NullSpace,
    ] {
        let o = tangency::Options {
            method,
            ..Default::default()
        };
        let e = tangency::Plan::analyze(&p, &o).unwrap_err();
        assert!(matches!(e, tangency::Error::Resources { .. }), "{e}");
        assert!(e.to_string().contains("GB"), "{e}");
    }
}

#[test]
fn huge_right_hand_side_is_scaled_and_overflow_is_a_status() {
    // H = I, c = −1e305·e₀: x = 1e305·e₀, representable, objective −5e609 is not.
    let p = tangency::ProblemBuilder::new()
        .hessian_row_major(2, &[1.0, 0.0, 0.0, 1.0], tangency::Triangle::Full)
        .linear(&[-1e305, 0.0])
        .build()
        .unwrap();
    let o = tangency::Options {
        method: tangency::Method::Dense,
        ..Default::default()
    };
    let e = tangency::solve(&p, &o).unwrap_err();
    assert!(matches!(e, tangency::Error::Overflow { .. }), "{e}");
    assert_eq!(e.status(), "overflow");
    // H₀₀ = 1e-200, c₀ = −1e-60: x₀ = 1e140 and the objective −5e79 are representable.
    let p = tangency::ProblemBuilder::new()
        .hessian_row_major(2, &[1e-200, 0.0, 0.0, 1.0], tangency::Triangle::Full)
        .linear(&[-1e-60, 0.0])
        .build()
        .unwrap();
    let s = tangency::solve(&p, &o).unwrap();
    assert!((s.x[0] / 1e140 - 1.0).abs() < 1e-12, "{:?}", s.x);
}
