//! The command line with `--method riccati --stages NX,NU,N`: same JSON report as every
//! method, exit 2 with a clear message for missing or malformed stage dimensions and for a
//! problem outside the stage structure.

use std::process::Command;

use faer::mat;
use tangency::stagewise::HorizonBuilder;

fn bin() -> Command {
    Command::new(env!("CARGO_BIN_EXE_tangency"))
}

fn write_problem(dir: &std::path::Path) {
    let h = HorizonBuilder::new(2, 1, 8)
        .dynamics(mat![[1.0, 0.1], [0.0, 1.0]].as_ref(), mat![[0.005], [0.1]].as_ref())
        .cost(mat![[1.0, 0.0], [0.0, 0.1]].as_ref(), mat![[0.01]].as_ref())
        .terminal_cost(mat![[10.0, 0.0], [0.0, 1.0]].as_ref())
        .initial_state(&[1.0, 0.0])
        .build()
        .unwrap();
    tangency::io::write_problem_dir(&h.to_problem().unwrap(), dir).unwrap();
}

fn field<'a>(json: &'a str, key: &str) -> &'a str {
    let start = json
        .find(&format!("\"{key}\":"))
        .unwrap_or_else(|| panic!("{key} in {json}"))
        + key.len()
        + 3;
    let rest = &json[start..];
    let end = rest.find([',', '}']).unwrap();
    &rest[..end]
}

#[test]
fn riccati_solves_and_agrees_with_dense() {
    let dir = tempfile::tempdir().unwrap();
    write_problem(dir.path());
    let out_r = dir.path().join("out_r");
    let r = bin()
        .args([
            "solve",
            dir.path().to_str().unwrap(),
            "--method",
            "riccati",
            "--stages",
            "2,1,8",
            "--json",
            "--out",
        ])
        .arg(&out_r)
        .output()
        .unwrap();
    assert_eq!(r.status.code(), Some(0), "{}", String::from_utf8_lossy(&r.stderr));
    let json = String::from_utf8(r.stdout).unwrap();
    assert_eq!(json.lines().count(), 1);
    assert_eq!(field(&json, "status"), "\"solved\"");
    assert_eq!(field(&json, "method"), "\"riccati\"");
    assert_eq!(field(&json, "verdict"), "\"minimizer\"");
    let d = bin()
        .args(["solve", dir.path().to_str().unwrap(), "--method", "dense", "--json"])
        .output()
        .unwrap();
    let dj = String::from_utf8(d.stdout).unwrap();
    let (or, od): (f64, f64) = (
        field(&json, "objective").parse().unwrap(),
        field(&dj, "objective").parse().unwrap(),
    );
    assert!((or - od).abs() < 1e-12 * (1.0 + od.abs()));
    assert!(out_r.join("x.mtx").exists() && out_r.join("multipliers.mtx").exists());
}

#[test]
fn missing_or_bad_stages_exit_2() {
    let dir = tempfile::tempdir().unwrap();
    write_problem(dir.path());
    let p = dir.path().to_str().unwrap();
    let missing = bin()
        .args(["solve", p, "--method", "riccati", "--json"])
        .output()
        .unwrap();
    assert_eq!(missing.status.code(), Some(2));
    let j = String::from_utf8(missing.stdout).unwrap();
    assert_eq!(field(&j, "status"), "\"invalid_input\"");
    assert!(j.contains("--stages NX,NU,N"), "{j}");
    let malformed = bin()
        .args(["solve", p, "--method", "riccati", "--stages", "2,1"])
        .output()
        .unwrap();
    assert_eq!(malformed.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&malformed.stderr).contains("NX,NU,N"));
    let wrong = bin()
        .args(["solve", p, "--method", "riccati", "--stages", "2,1,9", "--json"])
        .output()
        .unwrap();
    assert_eq!(wrong.status.code(), Some(2));
    assert!(String::from_utf8(wrong.stdout).unwrap().contains("implies n ="));
    let other = bin()
        .args(["solve", p, "--method", "dense", "--stages", "2,1,8"])
        .output()
        .unwrap();
    assert_eq!(other.status.code(), Some(2));
    let unknown = bin().args(["solve", p, "--method", "nope", "--json"]).output().unwrap();
    assert!(String::from_utf8(unknown.stdout).unwrap().contains("riccati"));
}

#[test]
fn entry_outside_the_structure_exit_2_names_it() {
    let dir = tempfile::tempdir().unwrap();
    write_problem(dir.path());
    // Wrong nu: with --stages 1,2,8 the variable blocks no longer line up.
    let p = dir.path().to_str().unwrap();
    let out = bin()
        .args(["solve", p, "--method", "riccati", "--stages", "2,1,8", "--json"])
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(0));
    // Add a coupling Hessian entry between x_0[0] (row 1) and x_1[0] (column 4), 1-based.
    let h = std::fs::read_to_string(dir.path().join("H.mtx")).unwrap();
    let mut lines: Vec<String> = h.lines().map(str::to_string).collect();
    let dims: Vec<usize> = lines[1].split_whitespace().map(|v| v.parse().unwrap()).collect();
    lines[1] = format!("{} {} {}", dims[0], dims[1], dims[2] + 1);
    lines.push("4 1 0.5".to_string());
    std::fs::write(dir.path().join("H.mtx"), lines.join("\n") + "\n").unwrap();
    let bad = bin()
        .args(["solve", p, "--method", "riccati", "--stages", "2,1,8", "--json"])
        .output()
        .unwrap();
    assert_eq!(bad.status.code(), Some(2));
    let j = String::from_utf8(bad.stdout).unwrap();
    assert!(
        j.contains("H[0,3]") && j.contains("x_0[0]") && j.contains("x_1[0]"),
        "{j}"
    );
}

#[test]
fn control_demo_runs() {
    let out = bin().args(["demo", "--control"]).output().unwrap();
    assert_eq!(out.status.code(), Some(0));
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("not a control design tool"));
    assert!(text.contains("Re-solve time per step"));
    assert_eq!(text.lines().filter(|l| l.trim_start().starts_with("200 ")).count(), 1);
}
