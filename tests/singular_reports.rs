//! The command line's reports on singular systems, read as a user reads them: which rows
//! were dropped (the later dependent ones), the inertia of the reduced system beside the
//! verdict, the accuracy line, and contradictions in plain numbers. Answers known by
//! construction: row 2 = row 0 + row 1 of A.

mod common;

use common::{one_json, run_cli};

fn write_problem(dir: &std::path::Path, b2: f64) {
    std::fs::create_dir_all(dir).unwrap();
    let w = |name: &str, text: String| std::fs::write(dir.join(name), text).unwrap();
    w(
        "H.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n3 3 3\n1 1 2\n2 2 2\n3 3 2\n".into(),
    );
    // Rows [1, 1, 0], [1, −1, 1], [2, 0, 1] = row 0 + row 1 (coordinate, 1-based).
    w(
        "A.mtx",
        "%%MatrixMarket matrix coordinate real general\n3 3 7\n1 1 1\n1 2 1\n2 1 1\n2 2 -1\n2 3 1\n3 1 2\n3 3 1\n"
            .into(),
    );
    w(
        "b.mtx",
        format!("%%MatrixMarket matrix array real general\n3 1\n1\n3\n{b2}\n"),
    );
}

#[test]
fn redundant_rows_named_dropped_and_reported_consistently() {
    let dir = std::env::temp_dir().join(format!("tangency-singular-{}", std::process::id()));
    write_problem(&dir, 4.0);
    let d = dir.to_str().unwrap();
    for method in ["auto", "dense", "nullspace"] {
        let (code, out, err) = run_cli(&["solve", d, "--method", method, "--json"]);
        assert_eq!(code, 0, "{method}: {out}{err}");
        let j = one_json(&out);
        assert_eq!(j["status"], "solved", "{method}");
        assert_eq!(j["verdict"], "minimizer", "{method}");
        let notes = j["notes"].to_string();
        // The later row is the dependent one; the rows written first are kept.
        assert!(notes.contains("row 2 = 1.0·row 0 + 1.0·row 1"), "{method}: {notes}");
        // x solves the reduced problem: Ax = b on the kept rows, Hx + c + Aᵀy = 0.
        let x: Vec<f64> = j["x"].as_array().unwrap().iter().map(|v| v.as_f64().unwrap()).collect();
        assert!((x[0] + x[1] - 1.0).abs() < 1e-14 && (x[0] - x[1] + x[2] - 3.0).abs() < 1e-14);
        assert!(j["forward_error_bound"].as_f64().unwrap() < 1e-10, "{method}");
    }
    let (code, out, _) = run_cli(&["solve", d]);
    assert_eq!(code, 0);
    // The reduced system's inertia is shown beside the verdict, and the accuracy line
    // gives the bound the JSON gives (no "no forward-error bound" beside a finite one).
    assert!(out.contains("reduced K: 3 positive, 2 negative, 0 zero"), "{out}");
    assert!(out.contains("reduced system's solution ≤"), "{out}");
    assert!(!out.contains("e0") && !out.contains("−0,"), "{out}");
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn contradictory_row_is_infeasible_in_plain_numbers() {
    let dir = std::env::temp_dir().join(format!("tangency-contradict-{}", std::process::id()));
    write_problem(&dir, 5.0);
    let d = dir.to_str().unwrap();
    let (code, out, _) = run_cli(&["solve", d, "--json"]);
    assert_eq!(code, 3, "{out}");
    let j = one_json(&out);
    assert_eq!(j["status"], "infeasible");
    let msg = j["message"].as_str().unwrap();
    assert!(
        msg.contains("row 2 = 1.0·row 0 + 1.0·row 1") && msg.contains("b[2] = 5") && msg.contains("they differ by 1)"),
        "{msg}"
    );
    assert!(!msg.contains("e0"), "{msg}");
    std::fs::remove_dir_all(&dir).ok();
}
