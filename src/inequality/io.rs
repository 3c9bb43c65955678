//! The inequality files of a problem directory: `G.mtx` (p×n), `h.mtx` (p×1), `lo.mtx` and
//! `hi.mtx` (n×1), read through the Matrix Market reader of [`crate::io`].

use std::path::{Path, PathBuf};

use super::problem::InequalityProblem;
use crate::error::{Error, Result};
use crate::problem::Problem;

/// The names of the files this module reads, in the order they are read.
pub const INEQUALITY_FILES: [&str; 4] = ["G.mtx", "h.mtx", "lo.mtx", "hi.mtx"];

fn in_file(path: &Path, err: Error) -> Error {
    match err {
        e @ (Error::Io { .. } | Error::Parse { .. } | Error::InFile { .. }) => e,
        e => e.in_file(path),
    }
}

/// True when something is at `path`, a dangling symbolic link included (the reader then
/// names it as unreadable instead of taking the file as absent).
fn present(path: &Path) -> bool {
    path.symlink_metadata().is_ok()
}

/// A file that existed when the directory was listed but is gone now.
fn missing_file(path: &Path) -> Error {
    Error::Io {
        path: path.to_path_buf(),
        source: std::io::Error::new(std::io::ErrorKind::NotFound, "the file disappeared while it was read"),
    }
}

/// Reads one vector file (n×1 or 1×n); `Ok(None)` when absent. Only regular files are read.
fn vector(path: &Path, name: &'static str, expected: usize) -> Result<Option<Vec<f64>>> {
    // The reader refuses anything but a regular file (FIFOs, directories, dangling links).
    let Some(l) = crate::io::read_matrix(path, name)? else {
        return Ok(None);
    };
    let (r, c) = (l.nrows, l.ncols);
    if (c != 1 && r != 1) || r * c != expected {
        return Err(in_file(
            path,
            Error::InequalityInput {
                block: name,
                row: None,
                col: None,
                detail: format!("the file holds a {r}×{c} matrix; expected a vector of length {expected}"),
            },
        ));
    }
    let mut v = vec![0.0; expected];
    for (i, j, x) in l.full_triplets() {
        v[i.max(j)] += x;
    }
    Ok(Some(v))
}

/// Adds the inequality files of `dir` to `base`. Returns `Ok(None)` when the directory has
/// none of them (the problem is then exactly the equality-constrained one). `G.mtx` and
/// `h.mtx` go together; a missing `lo.mtx` or `hi.mtx` means no such bounds.
pub fn read_inequalities(dir: impl AsRef<Path>, base: &Problem) -> Result<Option<InequalityProblem>> {
    let dir = dir.as_ref();
    let path = |name: &str| -> PathBuf { dir.join(name) };
    if INEQUALITY_FILES.iter().all(|f| !present(&path(f))) {
        return Ok(None);
    }
    let n = base.n();
    let g_path = path("G.mtx");
    let h_path = path("h.mtx");
    let mut q = InequalityProblem::new(base.clone());
    match (present(&g_path), present(&h_path)) {
        (false, false) => {}
        (true, false) | (false, true) => {
            let (have, missing) = if present(&g_path) {
                (&g_path, &h_path)
            } else {
                (&h_path, &g_path)
            };
            return Err(Error::Io {
                path: missing.clone(),
                source: std::io::Error::new(
                    std::io::ErrorKind::NotFound,
                    format!("{} is given, so this file is required too", have.display()),
                ),
            });
        }
        (true, true) => {
            let Some(g) = crate::io::read_matrix(&g_path, "G")? else {
                return Err(missing_file(&g_path));
            };
            let (p, cols) = (g.nrows, g.ncols);
            if cols != n {
                return Err(in_file(
                    &g_path,
                    Error::InequalityInput {
                        block: "G",
                        row: None,
                        col: None,
                        detail: format!("G is {p}×{cols} but the problem has n = {n} variables"),
                    },
                ));
            }
            let Some(h) = vector(&h_path, "h", p)? else {
                return Err(missing_file(&h_path));
            };
            let triplets = g.full_triplets();
            q = q.with_inequalities(p, &triplets, &h).map_err(|e| {
                let file = match &e {
                    Error::InequalityInput { block: "h", .. } => &h_path,
                    _ => &g_path,
                };
                in_file(file, e)
            })?;
        }
    }
    let lo_path = path("lo.mtx");
    let hi_path = path("hi.mtx");
    let lo = vector(&lo_path, "lo", n)?.unwrap_or_else(|| vec![f64::NEG_INFINITY; n]);
    let hi = vector(&hi_path, "hi", n)?.unwrap_or_else(|| vec![f64::INFINITY; n]);
    q.set_bounds(&lo, &hi).map_err(|e| {
        let file = match &e {
            Error::InequalityInput { block: "hi", .. } => &hi_path,
            _ => &lo_path,
        };
        in_file(file, e)
    })?;
    Ok(Some(q))
}

/// Writes `inequality_multipliers.mtx` (z, p×1) and `bound_multipliers.mtx` (w, n×1) into
/// `out` (created if needed).
pub fn write_multipliers(out: impl AsRef<Path>, z: &[f64], w: &[f64]) -> Result<()> {
    let out = out.as_ref();
    std::fs::create_dir_all(out).map_err(|source| Error::Io {
        path: out.to_path_buf(),
        source,
    })?;
    crate::io::write_vector(out.join("inequality_multipliers.mtx"), z)?;
    crate::io::write_vector(out.join("bound_multipliers.mtx"), w)
}
