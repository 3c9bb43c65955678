//! `tangency inspect` and `tangency solve --sensitivity` through the command line, on the
//! published fixtures (tests/fixtures/worked-examples.md) and on rank-deficient problems;
//! plus the library's rank analysis against nalgebra's SVD.

mod diagnostics_support;

use std::path::Path;
use std::process::Command;

use diagnostics_support::*;
use nalgebra::DMatrix;
use tangency::diagnostics::inspect::inspect;
use tangency::io::write_problem_dir;
use tangency::{Options, Problem, ProblemBuilder, Triangle, Verdict};

fn run(args: &[&str]) -> (i32, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_tangency"))
        .args(args)
        .output()
        .unwrap();
    (out.status.code().unwrap_or(-1), String::from_utf8(out.stdout).unwrap())
}

/// The raw text of `"key":value` in a one-line JSON object (values here are numbers, null,
/// strings without commas in the keys we read, flat arrays or flat objects).
fn field<'a>(json: &'a str, key: &str) -> &'a str {
    let pat = format!("\"{key}\":");
    let start = json.find(&pat).unwrap_or_else(|| panic!("key {key} missing in {json}")) + pat.len();
    let rest = &json[start..];
    let end = match rest.as_bytes()[0] {
        b'[' => rest.find(']').unwrap() + 1,
        b'{' => rest.find('}').unwrap() + 1,
        b'"' => rest[1..].find('"').unwrap() + 2,
        _ => rest.find([',', '}']).unwrap(),
    };
    &rest[..end]
}

fn num(json: &str, key: &str) -> f64 {
    field(json, key)
        .parse()
        .unwrap_or_else(|_| panic!("{key} not a number in {json}"))
}

fn dir_with(p: &Problem) -> tempfile::TempDir {
    let d = tempfile::tempdir().unwrap();
    write_problem_dir(p, d.path()).unwrap();
    d
}

fn dense(n: usize, h: &[f64], m: usize, a: &[f64], c: &[f64], b: &[f64]) -> Problem {
    ProblemBuilder::new()
        .hessian_row_major(n, h, Triangle::Full)
        .constraints_row_major(m, n, a)
        .linear(c)
        .rhs(b)
        .build()
        .unwrap()
}

struct Fixture {
    name: &'static str,
    problem: Problem,
    inertia: (usize, usize, usize),
}

/// The worked examples of tests/fixtures/worked-examples.md (values quoted there).
fn fixtures() -> Vec<Fixture> {
    vec![
        // Hock & Schittkowski (1981), HS28.
        Fixture {
            name: "HS28",
            problem: dense(
                3,
                &[2., 2., 0., 2., 4., 2., 0., 2., 2.],
                1,
                &[1., 2., 3.],
                &[0., 0., 0.],
                &[1.],
            ),
            inertia: (3, 1, 0),
        },
        // Hock & Schittkowski (1981), HS48 (H singular, reduced Hessian positive definite).
        Fixture {
            name: "HS48",
            problem: dense(
                5,
                &[
                    2., 0., 0., 0., 0., 0., 2., -2., 0., 0., 0., -2., 2., 0., 0., 0., 0., 0., 2., -2., 0., 0., 0., -2.,
                    2.,
                ],
                2,
                &[1., 1., 1., 1., 1., 0., 0., 1., -2., -2.],
                &[-2., 0., 0., 0., 0.],
                &[5., -3.],
            ),
            inertia: (5, 2, 0),
        },
        // Hock & Schittkowski (1981), HS51.
        Fixture {
            name: "HS51",
            problem: dense(
                5,
                &[
                    2., -2., 0., 0., 0., -2., 4., 2., 0., 0., 0., 2., 2., 0., 0., 0., 0., 0., 2., 0., 0., 0., 0., 0.,
                    2.,
                ],
                3,
                &[1., 3., 0., 0., 0., 0., 0., 1., 1., -2., 0., 1., 0., 0., -1.],
                &[0., -4., -4., -2., -2.],
                &[4., 0., 0.],
            ),
            inertia: (5, 3, 0),
        },
        // Nocedal & Wright (2006), Example 16.2.
        Fixture {
            name: "NW16.2",
            problem: dense(
                3,
                &[6., 2., 1., 2., 5., 2., 1., 2., 4.],
                2,
                &[1., 0., 1., 0., 1., 1.],
                &[-8., -3., -3.],
                &[3., 0.],
            ),
            inertia: (3, 2, 0),
        },
    ]
}

/// inspect --json on each published fixture: sizes, full rank, the published inertia, verdict
/// minimizer, and a condition estimate within a factor 3 below nalgebra's exact κ₁(K).
#[test]
fn inspect_fixtures() {
    for fx in fixtures() {
        let d = dir_with(&fx.problem);
        let (code, out) = run(&["inspect", d.path().to_str().unwrap(), "--json"]);
        assert_eq!(code, 0, "{}: {out}", fx.name);
        let (n, m) = (fx.problem.n(), fx.problem.m());
        assert_eq!(num(&out, "n") as usize, n, "{}", fx.name);
        assert_eq!(num(&out, "m") as usize, m);
        assert_eq!(num(&out, "constraint_rank") as usize, m, "{}: {out}", fx.name);
        assert_eq!(field(&out, "dependent_rows"), "[]");
        let (p, q, z) = fx.inertia;
        assert_eq!(
            field(&out, "inertia"),
            format!("{{\"positive\":{p},\"negative\":{q},\"zero\":{z}}}"),
            "{}",
            fx.name
        );
        assert_eq!(field(&out, "verdict"), "\"minimizer\"", "{}", fx.name);
        let exact = kappa1(&kkt(&fx.problem));
        let est = num(&out, "condition_estimate");
        assert!(
            est <= exact * (1.0 + 1e-10) && est >= exact / 3.0,
            "{}: {est} vs exact {exact}",
            fx.name
        );
        // Human-readable layout names the same facts.
        let (code, text) = run(&["inspect", d.path().to_str().unwrap()]);
        assert_eq!(code, 0);
        assert!(text.contains(&format!("rank {m} of {m}: independent")), "{text}");
        assert!(text.contains("prediction    minimizer"), "{text}");
    }
}

/// A rank-deficient problem (row 2 of A is zero, row 3 = 2 × row 1): inspect names the
/// dependent rows, reports the zero eigenvalues of K, and predicts no verdict; solve refuses.
#[test]
fn inspect_names_dependent_rows() {
    let p = dense(
        4,
        &[4., 1., 0., 0., 1., 4., 1., 0., 0., 1., 4., 1., 0., 0., 1., 4.],
        4,
        &[1., 0., 1., 0., 0., 1., 0., 1., 0., 0., 0., 0., 0., 2., 0., 2.],
        &[1., 1., 1., 1.],
        &[1., 2., 0., 4.],
    );
    let d = dir_with(&p);
    let (code, out) = run(&["inspect", d.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 0, "{out}");
    assert_eq!(num(&out, "constraint_rank"), 2.0);
    let rows = field(&out, "dependent_rows");
    assert!(rows == "[1,2]" || rows == "[2,3]", "dependent rows {rows}");
    assert_eq!(field(&out, "constraints_consistent"), "true");
    assert_eq!(field(&out, "inertia"), "{\"positive\":4,\"negative\":2,\"zero\":2}");
    // The redundant rows are dropped by the rank analysis: H ≻ 0, so the reduced problem
    // has a unique minimizer.
    assert_eq!(field(&out, "verdict"), "\"minimizer\"");
    assert!(field(&out, "diagnosis").contains("redundant"));
    let (_, text) = run(&["inspect", d.path().to_str().unwrap()]);
    assert!(
        text.contains("dependent row(s) 1, 2") || text.contains("dependent row(s) 2, 3"),
        "{text}"
    );
    // The same problem with b inconsistent on the repeated row: infeasible.
    let q = dense(
        4,
        &[4., 1., 0., 0., 1., 4., 1., 0., 0., 1., 4., 1., 0., 0., 1., 4.],
        4,
        &[1., 0., 1., 0., 0., 1., 0., 1., 0., 0., 0., 0., 0., 2., 0., 2.],
        &[1., 1., 1., 1.],
        &[1., 2., 0., 5.],
    );
    let d = dir_with(&q);
    let (_, out) = run(&["inspect", d.path().to_str().unwrap(), "--json"]);
    assert_eq!(field(&out, "constraints_consistent"), "false");
    assert!(field(&out, "diagnosis").contains("infeasible"));
    // solve refuses the contradictory constraints and still reports the condition key.
    let (code, out) = run(&["solve", d.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 3, "{out}");
    assert_eq!(field(&out, "status"), "\"infeasible\"");
    let k = field(&out, "condition_estimate");
    assert!(k == "null" || k.parse::<f64>().unwrap() > 1e15, "{k}");
}

/// A singular reduced Hessian with independent constraints (H = 0 on a 2-D feasible line):
/// rank full, a zero eigenvalue, verdict non-unique (c = 0 is orthogonal to the flat
/// direction), the diagnosis says why.
#[test]
fn inspect_flat_objective() {
    let p = dense(2, &[0., 0., 0., 0.], 1, &[1., 1.], &[1., 1.], &[1.]);
    let d = dir_with(&p);
    let (code, out) = run(&["inspect", d.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 0);
    assert_eq!(num(&out, "constraint_rank"), 1.0);
    assert_eq!(field(&out, "dependent_rows"), "[]");
    assert_eq!(field(&out, "zero"), "1");
    assert_eq!(field(&out, "verdict"), "\"non_unique\"");
    assert!(field(&out, "diagnosis").contains("reduced Hessian is singular"));
}

/// Bad input: exit 2 and one JSON object with the keys present.
#[test]
fn inspect_invalid_input() {
    let (code, out) = run(&["inspect", "/nonexistent/tangency-dir", "--json"]);
    assert_eq!(code, 2);
    assert_eq!(out.lines().count(), 1);
    assert_eq!(field(&out, "status"), "\"invalid_input\"");
    for key in [
        "n",
        "m",
        "constraint_rank",
        "dependent_rows",
        "inertia",
        "condition_estimate",
        "verdict",
    ] {
        assert_eq!(field(&out, key), "null", "{key}");
    }
    // An asymmetric H written as a general file is refused, naming the pair.
    let d = tempfile::tempdir().unwrap();
    std::fs::write(
        d.path().join("H.mtx"),
        "%%MatrixMarket matrix array real general\n2 2\n1\n0.5\n0\n1\n",
    )
    .unwrap();
    let (code, out) = run(&["inspect", d.path().to_str().unwrap(), "--json"]);
    assert_eq!(code, 2);
    assert!(field(&out, "message").contains("not symmetric"), "{out}");
}

/// solve --sensitivity on Nocedal & Wright (2006), Example 16.2: y* = (−3, 2) in this
/// crate's convention, so ∂f*/∂b = (3, −2); ∂f*/∂c = x* = (2, −1, 1).
#[test]
fn solve_reports_objective_sensitivity() {
    let fx = fixtures().into_iter().find(|f| f.name == "NW16.2").unwrap();
    let d = dir_with(&fx.problem);
    let (code, out) = run(&["solve", d.path().to_str().unwrap(), "--json", "--sensitivity"]);
    assert_eq!(code, 0, "{out}");
    let sens = &out[out.find("\"sensitivity\":").unwrap()..];
    let parse = |key: &str| -> Vec<f64> {
        let raw = field(sens, key);
        raw.trim_matches(['[', ']'])
            .split(',')
            .map(|v| v.parse().unwrap())
            .collect()
    };
    let (wb, wc) = (parse("objective_wrt_b"), parse("objective_wrt_c"));
    assert!(max_abs_diff(&wb, &[3., -2.]) < 1e-12, "{wb:?}");
    assert!(max_abs_diff(&wc, &[2., -1., 1.]) < 1e-12, "{wc:?}");
    let exact = kappa1(&kkt(&fx.problem));
    let est = num(&out, "condition_estimate");
    assert!(est <= exact * (1.0 + 1e-10) && est >= exact / 3.0);
    assert!(num(&out, "forward_error_bound") < 1e-12);
    // Without the flag: no sensitivity object, still the condition estimate.
    let (_, out) = run(&["solve", d.path().to_str().unwrap(), "--json"]);
    assert!(!out.contains("sensitivity"));
    assert!(out.contains("\"condition_estimate\":"));
    let (_, text) = run(&["solve", d.path().to_str().unwrap(), "--sensitivity"]);
    assert!(
        text.contains("raising b_0 by 1 changes the optimal objective by +3.000000e0 (= −y_0)"),
        "{text}"
    );
}

/// Library rank analysis on random rank-deficient A (dense and sparse storage), checked with
/// nalgebra's SVD: the reported rank is the numerical rank, and the rows left after removing
/// the dependent ones are independent and span the same row space.
#[test]
fn rank_and_dependent_rows_agree_with_svd() {
    let mut rng = Rng::new(31);
    for case in 0..60 {
        let n = 2 + rng.below(7);
        let m = 1 + rng.below(n + 2);
        let r = rng.below(m.min(n) + 1);
        // A = B C with B m×r, C r×n: rank r (generically).
        let a = rng.matrix(m, r) * rng.matrix(r, n);
        let h = DMatrix::<f64>::identity(n, n);
        let p = if case % 2 == 0 {
            problem(&h, &a, &rng.vec(n), &rng.vec(m))
        } else {
            let mut t = Vec::new();
            for i in 0..m {
                for j in 0..n {
                    t.push((i, j, a[(i, j)]));
                }
            }
            let ht: Vec<_> = (0..n).map(|i| (i, i, 1.0)).collect();
            ProblemBuilder::new()
                .hessian_triplets(n, &ht, Triangle::Lower)
                .constraints_triplets(m, n, &t)
                .rhs(&rng.vec(m))
                .build()
                .unwrap()
        };
        let info = inspect(&p, &Options::default()).unwrap();
        let svd_rank = |x: &DMatrix<f64>| {
            if x.nrows() == 0 {
                return 0;
            }
            let s = x.singular_values();
            let tol = s.max() * x.nrows().max(x.ncols()) as f64 * f64::EPSILON;
            s.iter().filter(|v| **v > tol.max(1e-9 * s.max())).count()
        };
        assert_eq!(info.constraints.rank, svd_rank(&a), "case {case}");
        assert_eq!(info.constraints.dependent_rows.len(), m - info.constraints.rank);
        let kept: Vec<usize> = (0..m)
            .filter(|i| !info.constraints.dependent_rows.contains(i))
            .collect();
        let ak = DMatrix::from_fn(kept.len(), n, |i, j| a[(kept[i], j)]);
        assert_eq!(svd_rank(&ak), kept.len(), "case {case}: kept rows independent");
        if info.constraints.rank == m && m <= n {
            assert_eq!(info.inertia.unwrap().zero, 0);
            assert_eq!(info.verdict, Some(Verdict::Minimizer));
        } else {
            assert!(info.inertia.unwrap().zero > 0);
            assert_eq!(info.verdict, None);
        }
        // Random b is inconsistent on dependent rows (generically).
        assert_eq!(
            info.constraints.consistent,
            info.constraints.dependent_rows.is_empty(),
            "case {case}"
        );
    }
    let _ = Path::new(".");
}
