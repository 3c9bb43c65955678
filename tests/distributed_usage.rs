//! Without the `mpi` feature, `--method distributed` is invalid usage (exit 2) with a
//! message that says how to get it, and `--json` still prints one error object.
#![cfg(not(feature = "mpi"))]

use std::process::Command;

#[test]
fn distributed_without_the_feature_is_invalid_usage() {
    let tmp = tempfile::tempdir().unwrap();
    let p = tangency::generate::Family::PoissonControl.problem(3).unwrap();
    tangency::io::write_problem_dir(&p, tmp.path()).unwrap();
    let bin = env!("CARGO_BIN_EXE_tangency");
    let o = Command::new(bin)
        .args([
            "solve",
            tmp.path().to_str().unwrap(),
            "--method",
            "distributed",
            "--json",
        ])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    let json: serde_json::Value = serde_json::from_str(String::from_utf8_lossy(&o.stdout).trim()).unwrap();
    assert_eq!(json["status"], "invalid_input");
    assert_eq!(json["method"], "distributed");
    assert!(json["message"].as_str().unwrap().contains("--features mpi"), "{json}");
    let o = Command::new(bin)
        .args(["solve", tmp.path().to_str().unwrap(), "--method", "distributed"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(2));
    assert!(o.stdout.is_empty());
    assert!(String::from_utf8_lossy(&o.stderr).contains("`mpi` feature"));
}
