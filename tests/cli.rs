//! The command line end to end: write problem directories, run the binary, check the JSON
//! contract, the exit codes and the files it writes.

use std::path::Path;

mod common;
use common::{one_json as json, run_cli as run};

fn write(dir: &Path, name: &str, text: &str) {
    std::fs::write(dir.join(name), text).unwrap();
}

fn dense_vec(v: &[f64]) -> String {
    let mut s = format!("%%MatrixMarket matrix array real general\n{} 1\n", v.len());
    for x in v {
        s.push_str(&format!("{x}\n"));
    }
    s
}

fn read_vec(path: &Path) -> Vec<f64> {
    let text = std::fs::read_to_string(path).unwrap();
    assert!(text.starts_with("%%MatrixMarket matrix array real general"));
    let mut lines = text.lines().filter(|l| !l.starts_with('%'));
    let dims: Vec<usize> = lines
        .next()
        .unwrap()
        .split_whitespace()
        .map(|t| t.parse().unwrap())
        .collect();
    assert_eq!(dims[1], 1);
    let v: Vec<f64> = lines.map(|l| l.trim().parse().unwrap()).collect();
    assert_eq!(v.len(), dims[0]);
    v
}

/// Nocedal & Wright (2006), Example 16.2, written with H as a `symmetric` coordinate file.
fn write_nw162(dir: &Path) {
    write(
        dir,
        "H.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n% N&W 16.2\n3 3 6\n1 1 6\n2 1 2\n3 1 1\n2 2 5\n3 2 2\n3 3 4\n",
    );
    write(dir, "c.mtx", &dense_vec(&[-8., -3., -3.]));
    write(
        dir,
        "A.mtx",
        "%%MatrixMarket matrix coordinate real general\n2 3 4\n1 1 1\n1 3 1\n2 2 1\n2 3 1\n",
    );
    write(dir, "b.mtx", &dense_vec(&[3., 0.]));
}

#[test]
fn solve_json_and_out_files_for_nocedal_wright_16_2() {
    let dir = tempfile::tempdir().unwrap();
    write_nw162(dir.path());
    let out = dir.path().join("out");
    let (code, stdout, _) = run(&[
        "solve",
        dir.path().to_str().unwrap(),
        "--json",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 0);
    let j = json(&stdout);
    assert_eq!(j["status"], "solved");
    assert_eq!(j["verdict"], "minimizer");
    assert_eq!(j["n"], 3);
    assert_eq!(j["m"], 2);
    // auto may pick any dense-structure method; the report names the one used.
    assert!(
        ["dense", "schur", "nullspace"].contains(&j["method"].as_str().unwrap()),
        "{}",
        j["method"]
    );
    assert_eq!(j["inertia"]["positive"], 3);
    assert_eq!(j["inertia"]["negative"], 2);
    assert_eq!(j["inertia"]["zero"], 0);
    // Nocedal & Wright (2006), Example 16.2: objective −7/2.
    assert!((j["objective"].as_f64().unwrap() + 3.5).abs() < 1e-13);
    for key in ["primal_residual", "dual_residual", "backward_error"] {
        assert!(j[key].as_f64().unwrap() < 1e-13, "{key}");
    }
    for key in ["analyze_s", "factor_s", "solve_s"] {
        assert!(j["timing"][key].as_f64().unwrap() >= 0.0, "{key}");
    }
    let x = read_vec(&out.join("x.mtx"));
    let y = read_vec(&out.join("multipliers.mtx"));
    // x* = (2, −1, 1); multipliers (−3, 2) under our convention (the book's (3, −2)).
    for (g, w) in x.iter().zip([2.0, -1.0, 1.0]) {
        assert!((g - w).abs() < 1e-13);
    }
    for (g, w) in y.iter().zip([-3.0, 2.0]) {
        assert!((g - w).abs() < 1e-13);
    }
    // 17 significant digits on disk.
    let text = std::fs::read_to_string(out.join("x.mtx")).unwrap();
    let first = text.lines().nth(2).unwrap();
    assert_eq!(
        first.split('e').next().unwrap().replace(['-', '.'], "").len(),
        17,
        "{first}"
    );
}

/// Hock & Schittkowski (1981), HS48 with `general` array H (full, symmetric), and
/// a saddle built from HS28 with a negative curvature direction.
#[test]
fn array_files_and_saddle_verdict() {
    let dir = tempfile::tempdir().unwrap();
    let h = [
        2., 0., 0., 0., 0., 0., 2., -2., 0., 0., 0., -2., 2., 0., 0., 0., 0., 0., 2., -2., 0., 0., 0., -2., 2.,
    ];
    let mut s = String::from("%%MatrixMarket matrix array real general\n5 5\n");
    for j in 0..5 {
        for i in 0..5 {
            s.push_str(&format!("{}\n", h[i * 5 + j]));
        }
    }
    write(dir.path(), "H.mtx", &s);
    write(dir.path(), "c.mtx", &dense_vec(&[-2., 0., 0., 0., 0.]));
    write(
        dir.path(),
        "A.mtx",
        "%%MatrixMarket matrix array real general\n2 5\n1\n0\n1\n0\n1\n1\n1\n-2\n1\n-2\n",
    );
    write(dir.path(), "b.mtx", &dense_vec(&[5., -3.]));
    let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 0);
    let j = json(&stdout);
    assert_eq!(j["verdict"], "minimizer");
    // HS48: f* = 0 with the constant 1 dropped, so ½xᵀHx + cᵀx = −1.
    assert!((j["objective"].as_f64().unwrap() + 1.0).abs() < 1e-13);

    // Saddle by construction: H = diag(1, −1), one constraint x0 = 1 leaves x1 free with
    // negative curvature; K inertia (1, 2, 0).
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "H.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 1\n2 2 -1\n",
    );
    write(
        dir.path(),
        "A.mtx",
        "%%MatrixMarket matrix coordinate real general\n1 2 1\n1 1 1\n",
    );
    write(dir.path(), "b.mtx", &dense_vec(&[1.0]));
    let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 0);
    let j = json(&stdout);
    assert_eq!(j["verdict"], "saddle");
    assert_eq!(j["inertia"]["positive"], 1);
    assert_eq!(j["inertia"]["negative"], 2);
}

#[test]
fn unconstrained_problem_without_optional_files() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "H.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 4\n2 2 2\n",
    );
    let out = dir.path().join("o");
    let (code, stdout, _) = run(&[
        "solve",
        dir.path().to_str().unwrap(),
        "--json",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(code, 0, "{stdout}");
    let j = json(&stdout);
    assert_eq!(j["m"], 0);
    assert_eq!(j["verdict"], "minimizer");
    assert_eq!(read_vec(&out.join("x.mtx")), vec![0.0, 0.0]);
    assert!(read_vec(&out.join("multipliers.mtx")).is_empty());
}

#[test]
fn dependent_constraint_rows_redundant_or_contradictory() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "H.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 1\n2 2 1\n",
    );
    // Two identical constraint rows x0 + x1 = b.
    write(
        dir.path(),
        "A.mtx",
        "%%MatrixMarket matrix coordinate real general\n2 2 4\n1 1 1\n1 2 1\n2 1 1\n2 2 1\n",
    );
    // Consistent: the copy is dropped and the minimizer x = (½, ½) is returned.
    write(dir.path(), "b.mtx", &dense_vec(&[1.0, 1.0]));
    let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 0, "{stdout}");
    let j = json(&stdout);
    assert_eq!(j["status"], "solved");
    assert_eq!(j["verdict"], "minimizer");
    assert_eq!(j["inertia"]["zero"], 1);
    assert!((j["objective"].as_f64().unwrap() - 0.25).abs() < 1e-14);
    assert!(j["notes"].to_string().contains("row 1 = 1.0·row 0"), "{}", j["notes"]);
    // Contradictory: infeasible, exit 3, the rows and the size of the contradiction named.
    write(dir.path(), "b.mtx", &dense_vec(&[1.0, 2.0]));
    let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 3);
    let j = json(&stdout);
    assert_eq!(j["status"], "infeasible");
    assert!(j["verdict"].is_null());
    let msg = j["message"].as_str().unwrap();
    assert!(
        msg.contains("row 1 = 1.0·row 0") && msg.contains("they differ by 1)"),
        "{msg}"
    );
    // Human mode: nothing on stdout, the reason on stderr.
    let (code, stdout, stderr) = run(&["solve", dir.path().to_str().unwrap()]);
    assert_eq!(code, 3);
    assert!(stdout.is_empty());
    assert!(
        stderr.contains("no solution") && stderr.contains("infeasible"),
        "{stderr}"
    );
}

/// A flat direction: H = diag(1, 0) with no constraints. With c = 0 every x = (0, t) is a
/// minimizer (non-unique, exit 0, the flat direction reported); with c = (0, −1) the
/// objective decreases without bound along it (unbounded, exit 3, the direction reported).
#[test]
fn flat_direction_non_unique_or_unbounded() {
    let dir = tempfile::tempdir().unwrap();
    write(
        dir.path(),
        "H.mtx",
        "%%MatrixMarket matrix coordinate real symmetric\n2 2 1\n1 1 1\n",
    );
    let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 0, "{stdout}");
    let j = json(&stdout);
    assert_eq!(j["status"], "solved");
    assert_eq!(j["verdict"], "non_unique");
    let d: Vec<f64> = j["null_direction"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    assert!(d[0].abs() < 1e-12 && (d[1].abs() - 1.0).abs() < 1e-12, "{d:?}");
    write(dir.path(), "c.mtx", &dense_vec(&[0.0, -1.0]));
    let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 3, "{stdout}");
    let j = json(&stdout);
    assert_eq!(j["status"], "unbounded");
    assert!(j["verdict"].is_null());
    let d: Vec<f64> = j["direction"]
        .as_array()
        .unwrap()
        .iter()
        .map(|v| v.as_f64().unwrap())
        .collect();
    // Along d the objective decreases: c·d < 0 and H d = 0.
    assert!(
        d[0].abs() < 1e-12 && -d[1] < 0.0 && j["slope"].as_f64().unwrap() < 0.0,
        "{d:?}"
    );
}

/// Every bad-input path through the command line: exit 2, one JSON object, a message that
/// names the file, block and position.
#[test]
fn bad_input_exits_2_and_names_the_place() {
    type Case<'a> = (&'a str, Vec<(&'a str, String)>, Vec<&'a str>);
    let cases: Vec<Case> = vec![
        ("missing H", vec![], vec!["H.mtx"]),
        (
            "malformed H",
            vec![(
                "H.mtx",
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n1 x 1\n".into(),
            )],
            vec!["H.mtx"],
        ),
        (
            "not matrix market",
            vec![("H.mtx", "hello\n".into())],
            vec!["H.mtx", "Matrix Market"],
        ),
        (
            "asymmetric H",
            vec![(
                "H.mtx",
                "%%MatrixMarket matrix coordinate real general\n2 2 3\n1 1 1\n1 2 1\n2 2 1\n".into(),
            )],
            vec!["H.mtx", "not symmetric", "H[0,1]"],
        ),
        (
            "non-square H",
            vec![(
                "H.mtx",
                "%%MatrixMarket matrix coordinate real general\n2 3 1\n1 1 1\n".into(),
            )],
            vec!["H.mtx", "block H"],
        ),
        (
            "out of range",
            vec![(
                "H.mtx",
                "%%MatrixMarket matrix coordinate real general\n2 2 1\n3 1 1\n".into(),
            )],
            // File positions are 1-based, as the file writes them, and the message says so.
            vec!["H.mtx", "block H", "line 3", "(3, 1)", "counted from 1"],
        ),
        (
            "A columns",
            vec![
                (
                    "H.mtx",
                    "%%MatrixMarket matrix coordinate real symmetric\n2 2 1\n1 1 1\n".into(),
                ),
                (
                    "A.mtx",
                    "%%MatrixMarket matrix coordinate real general\n1 3 1\n1 3 1\n".into(),
                ),
            ],
            vec!["A.mtx", "block A", "1×2"],
        ),
        (
            "c length",
            vec![
                (
                    "H.mtx",
                    "%%MatrixMarket matrix coordinate real symmetric\n2 2 1\n1 1 1\n".into(),
                ),
                ("c.mtx", dense_vec(&[1.0, 2.0, 3.0])),
            ],
            vec!["c.mtx", "block c"],
        ),
        (
            "b without A",
            vec![
                (
                    "H.mtx",
                    "%%MatrixMarket matrix coordinate real symmetric\n2 2 1\n1 1 1\n".into(),
                ),
                ("b.mtx", dense_vec(&[1.0])),
            ],
            vec!["b.mtx", "block b"],
        ),
        (
            "infinite value",
            vec![
                (
                    "H.mtx",
                    "%%MatrixMarket matrix coordinate real symmetric\n2 2 1\n1 1 1\n".into(),
                ),
                (
                    "A.mtx",
                    "%%MatrixMarket matrix coordinate real general\n1 2 1\n1 2 1e999\n".into(),
                ),
            ],
            vec!["A.mtx", "block A", "line 3", "1e999", "overflows"],
        ),
    ];
    for (name, files, needles) in cases {
        let dir = tempfile::tempdir().unwrap();
        for (f, text) in &files {
            write(dir.path(), f, text);
        }
        let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--json"]);
        assert_eq!(code, 2, "{name}: {stdout}");
        let j = json(&stdout);
        assert_eq!(j["status"], "invalid_input", "{name}");
        let msg = j["message"].as_str().unwrap();
        for needle in needles {
            assert!(msg.contains(needle), "{name}: message {msg:?} lacks {needle:?}");
        }
        // Without --json: message on stderr, exit 2.
        let (code, stdout, stderr) = run(&["solve", dir.path().to_str().unwrap()]);
        assert_eq!(code, 2, "{name}");
        assert!(
            stdout.is_empty() && stderr.contains("invalid input"),
            "{name}: {stderr}"
        );
    }
}

#[test]
fn unknown_method_lists_known_ones() {
    let dir = tempfile::tempdir().unwrap();
    write_nw162(dir.path());
    let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--method", "magic", "--json"]);
    assert_eq!(code, 2);
    let j = json(&stdout);
    assert_eq!(j["status"], "invalid_input");
    let msg = j["message"].as_str().unwrap();
    assert!(
        msg.contains("magic") && msg.contains("auto") && msg.contains("dense"),
        "{msg}"
    );
    // Usage errors with --json still print one JSON object.
    let (code, stdout, _) = run(&["solve", "--json", "--bogus-flag"]);
    assert_eq!(code, 2);
    assert_eq!(json(&stdout)["status"], "invalid_input");
}

#[test]
fn human_report_and_demo() {
    let dir = tempfile::tempdir().unwrap();
    write_nw162(dir.path());
    let (code, stdout, _) = run(&["solve", dir.path().to_str().unwrap(), "--method", "dense"]);
    assert_eq!(code, 0);
    assert!(stdout.contains("verdict     minimizer"), "{stdout}");
    assert!(stdout.contains("K: 3 positive, 2 negative, 0 zero"), "{stdout}");
    // The solution itself is in the report (NW 16.2 has n = 3: every entry shown).
    assert!(
        stdout.contains("x[0] = ") && stdout.contains("x[2] = ") && stdout.contains("y[1] = "),
        "{stdout}"
    );
    let (code, stdout, _) = run(&["demo"]);
    assert_eq!(code, 0);
    assert!(stdout.contains("The reactions balance the applied load"), "{stdout}");
    assert!(
        stdout.contains("in force and in moment") && stdout.contains("couple"),
        "{stdout}"
    );
    assert!(stdout.contains("not a structural design tool"));
}
