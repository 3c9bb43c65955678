//! Problem directories in Matrix Market format (the NIST exchange format), read by the
//! streaming reader of this module (see its checks under `mtx`: regular files only, sizes
//! checked against the file's length and the memory available before allocating, exact
//! tokens per entry, positions in messages 1-based as the file writes them).
//!
//! A problem directory holds:
//!
//! | file    | required | shape | meaning |
//! |---------|----------|-------|---------|
//! | `H.mtx` | yes      | n×n   | Hessian; `symmetric` (one triangle stored) or `general` (must be symmetric within tolerance) |
//! | `c.mtx` | no       | n×1   | linear term (zeros if absent) |
//! | `A.mtx` | no       | m×n   | constraint matrix (no constraints if absent) |
//! | `b.mtx` | no       | m×1   | constraint right-hand side (zeros if absent) |
//!
//! `coordinate` files become sparse blocks, `array` files dense ones. Vectors may be given
//! as n×1 or 1×n. Every validation error names the file it came from.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};

use crate::error::{Block, Error, Result};
use crate::problem::{Problem, ProblemBuilder, Triangle};

pub(crate) mod mtx;

pub(crate) use mtx::{read_matrix, Loaded, Symmetry};

fn read(path: &Path, block: Block) -> Result<Option<Loaded>> {
    read_matrix(path, &block.to_string())
}

/// A vector file (k×1 or 1×k) as a vector of `expected` entries, duplicates summed. The
/// declared length is compared with `expected` before anything is allocated.
fn vector(path: &Path, loaded: Option<Loaded>, block: Block, expected: usize) -> Result<Option<Vec<f64>>> {
    let Some(l) = loaded else { return Ok(None) };
    let (r, c) = (l.nrows, l.ncols);
    if !((r == expected && c == 1) || (r == 1 && c == expected)) || (l.symmetry != Symmetry::General && r * c != 1) {
        return Err(Error::DimensionMismatch {
            block,
            rows: r,
            cols: c,
            expected_rows: expected,
            expected_cols: 1,
        }
        .in_file(path));
    }
    let mut v = vec![0.0; expected];
    for &(i, j, x) in &l.entries {
        v[i.max(j)] += x;
    }
    // Entries are finite; a sum of duplicates may not be.
    if let Some(k) = v.iter().position(|x| !x.is_finite()) {
        return Err(Error::Parse {
            path: path.to_path_buf(),
            message: format!(
                "block {block}: the duplicate entries of row {} (1-based, as in the file) sum to {}, \
                 beyond double range",
                k + 1,
                v[k]
            ),
        });
    }
    Ok(Some(v))
}

/// Bytes a problem of these sizes needs at the very least (its vectors, the column
/// pointers of sparse blocks, the stored entries, and the KKT work vectors of a solve):
/// `96·(n + m) + 32·entries`. A coarse floor, used only to refuse sizes that cannot fit.
fn floor_bytes(n: usize, m: usize, entries: usize) -> u64 {
    let dim = (n as u64).saturating_add(m as u64);
    dim.saturating_mul(96)
        .saturating_add((entries as u64).saturating_mul(32))
}

/// Reads a problem directory (see the module docs for the layout).
///
/// ```
/// # let dir = tempfile::tempdir()?;
/// std::fs::write(dir.path().join("H.mtx"), "%%MatrixMarket matrix coordinate real symmetric\n2 2 2\n1 1 2\n2 2 2\n")?;
/// std::fs::write(dir.path().join("A.mtx"), "%%MatrixMarket matrix array real general\n1 2\n1\n1\n")?;
/// std::fs::write(dir.path().join("b.mtx"), "%%MatrixMarket matrix array real general\n1 1\n1\n")?;
/// let p = tangency::io::read_problem_dir(dir.path())?;
/// assert_eq!((p.n(), p.m()), (2, 1));
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn read_problem_dir(dir: impl AsRef<Path>) -> Result<Problem> {
    let dir = dir.as_ref();
    let file = |name: &str| dir.join(name);
    let h_path = file("H.mtx");
    let h = read(&h_path, Block::H)?.ok_or_else(|| Error::Io {
        path: h_path.clone(),
        source: std::io::Error::new(std::io::ErrorKind::NotFound, "H.mtx is required in a problem directory"),
    })?;
    if h.nrows != h.ncols {
        return Err(Error::DimensionMismatch {
            block: Block::H,
            rows: h.nrows,
            cols: h.ncols,
            expected_rows: h.nrows.max(h.ncols),
            expected_cols: h.nrows.max(h.ncols),
        }
        .in_file(&h_path));
    }
    let n = h.nrows;
    crate::memory::check(
        floor_bytes(n, 0, h.entries.len()),
        &format!("{}: H declared {n}×{n}", h_path.display()),
    )?;
    let a_path = file("A.mtx");
    let a = read(&a_path, Block::A)?;
    let m = match &a {
        Some(a) if a.ncols != n => {
            return Err(Error::DimensionMismatch {
                block: Block::A,
                rows: a.nrows,
                cols: a.ncols,
                expected_rows: a.nrows,
                expected_cols: n,
            }
            .in_file(&a_path))
        }
        Some(a) => a.nrows,
        None => 0,
    };
    let a_entries = a.as_ref().map_or(0, |a| a.entries.len());
    crate::memory::check(
        floor_bytes(n, m, h.entries.len() + a_entries),
        &format!("{}: A declared {m}×{n}", a_path.display()),
    )?;
    let builder = match (h.dense, h.symmetry) {
        (true, _) => ProblemBuilder::new().hessian_dense(h.to_dense().as_ref(), Triangle::Full),
        (false, Symmetry::Symmetric) => ProblemBuilder::new().hessian_triplets(n, &h.entries, Triangle::Lower),
        (false, _) => ProblemBuilder::new().hessian_triplets(n, &h.full_triplets(), Triangle::Full),
    };
    drop(h);
    let mut builder = match a {
        None => builder,
        Some(a) if a.dense => builder.constraints_dense(a.to_dense().as_ref()),
        Some(a) => builder.constraints_triplets(a.nrows, a.ncols, &a.full_triplets()),
    };
    let c_path = file("c.mtx");
    if let Some(c) = vector(&c_path, read(&c_path, Block::C)?, Block::C, n)? {
        builder = builder.linear(&c);
    }
    let b_path = file("b.mtx");
    let b_file = read(&b_path, Block::B)?;
    let b_given = b_file.is_some();
    if let Some(b) = vector(&b_path, b_file, Block::B, m)? {
        builder = builder.rhs(&b);
    }
    let has_a = m > 0 || a_path.exists();
    builder.build().map_err(|e| {
        let path: PathBuf = match e.block() {
            Some(Block::H) => h_path.clone(),
            Some(Block::A) => a_path.clone(),
            Some(Block::C) => c_path.clone(),
            Some(Block::B) if has_a || b_given => b_path.clone(),
            _ => return e,
        };
        e.in_file(path)
    })
}

/// Formats a vector as an n×1 Matrix Market `array` with 17 significant digits.
pub fn vector_to_string(v: &[f64]) -> String {
    let mut s = String::with_capacity(32 + 26 * v.len());
    s.push_str("%%MatrixMarket matrix array real general\n");
    let _ = writeln!(s, "{} 1", v.len());
    for x in v {
        let _ = writeln!(s, "{x:.16e}");
    }
    s
}

/// Writes a vector as an n×1 Matrix Market `array` file with 17 significant digits.
pub fn write_vector(path: impl AsRef<Path>, v: &[f64]) -> Result<()> {
    let path = path.as_ref();
    std::fs::write(path, vector_to_string(v)).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })
}

/// Writes `problem` as a problem directory (`H.mtx` symmetric lower triangle, `A.mtx`,
/// `c.mtx`, `b.mtx`; coordinate format for sparse blocks, array for dense ones), 17
/// significant digits. The directory is created if needed.
pub fn write_problem_dir(problem: &Problem, dir: impl AsRef<Path>) -> Result<()> {
    let dir = dir.as_ref();
    std::fs::create_dir_all(dir).map_err(|source| Error::Io {
        path: dir.to_path_buf(),
        source,
    })?;
    let io = |path: PathBuf, text: String| std::fs::write(&path, text).map_err(|source| Error::Io { path, source });
    let h = problem.hessian();
    let mut lower = Vec::new();
    h.for_each(|i, j, v| {
        if i >= j && (h.is_sparse() || v != 0.0) {
            lower.push((i, j, v));
        }
    });
    io(dir.join("H.mtx"), coordinate(h.nrows(), h.ncols(), &lower, "symmetric"))?;
    if problem.m() > 0 {
        let a = problem.constraints();
        let mut entries = Vec::new();
        a.for_each(|i, j, v| {
            if a.is_sparse() || v != 0.0 {
                entries.push((i, j, v));
            }
        });
        io(dir.join("A.mtx"), coordinate(a.nrows(), a.ncols(), &entries, "general"))?;
        io(dir.join("b.mtx"), vector_to_string(problem.rhs()))?;
    }
    io(dir.join("c.mtx"), vector_to_string(problem.linear()))?;
    Ok(())
}

fn coordinate(rows: usize, cols: usize, entries: &[(usize, usize, f64)], kind: &str) -> String {
    let mut s = String::with_capacity(64 + 40 * entries.len());
    let _ = writeln!(s, "%%MatrixMarket matrix coordinate real {kind}");
    let _ = writeln!(s, "{rows} {cols} {}", entries.len());
    for (i, j, v) in entries {
        let _ = writeln!(s, "{} {} {v:.16e}", i + 1, j + 1);
    }
    s
}
