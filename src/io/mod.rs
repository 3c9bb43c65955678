//! Problem directories in Matrix Market format (the NIST exchange format), read through
//! nalgebra-sparse's parser.
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

use faer::Mat;
use nalgebra_sparse::io::load_coo_from_matrix_market_str;
use nalgebra_sparse::CooMatrix;

use crate::error::{Block, Error, Result};
use crate::problem::{Problem, ProblemBuilder, Triangle};

/// One matrix read from a file, with whether it was stored densely.
pub(crate) struct Loaded {
    pub(crate) coo: CooMatrix<f64>,
    pub(crate) dense: bool,
}

fn read(path: &Path, block: Block) -> Result<Option<Loaded>> {
    read_matrix(path, |text| locate_out_of_range(text, block, path))
}

/// Reads one Matrix Market file through nalgebra-sparse's parser; `Ok(None)` when the
/// file does not exist. When the parser fails, `locate` may turn the file's text into a
/// more precise error (the parser does not say where an index is out of range).
pub(crate) fn read_matrix(path: &Path, locate: impl Fn(&str) -> Option<Error>) -> Result<Option<Loaded>> {
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(source) => {
            return Err(Error::Io {
                path: path.to_path_buf(),
                source,
            })
        }
    };
    let header = text.lines().next().unwrap_or("").to_ascii_lowercase();
    if !header.starts_with("%%matrixmarket") {
        return Err(Error::Parse {
            path: path.to_path_buf(),
            message: "not a Matrix Market file: the first line must start with %%MatrixMarket".into(),
        });
    }
    let dense = header.split_whitespace().any(|w| w == "array");
    let coo = load_coo_from_matrix_market_str::<f64>(&text).map_err(|e| {
        locate(&text).unwrap_or_else(|| Error::Parse {
            path: path.to_path_buf(),
            message: format!("{:?}: {}", e.kind(), e.message()),
        })
    })?;
    Ok(Some(Loaded { coo, dense }))
}

/// The parser reports an out-of-range coordinate without its position; find the first
/// such entry (1-based in the file) so the error names it (0-based, like every error).
fn locate_out_of_range(text: &str, block: Block, path: &Path) -> Option<Error> {
    let mut lines = text
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty() && !l.starts_with('%'));
    let size: Vec<usize> = lines
        .next()?
        .split_whitespace()
        .filter_map(|t| t.parse().ok())
        .collect();
    let (nrows, ncols) = (*size.first()?, *size.get(1)?);
    lines.find_map(|l| {
        let mut it = l.split_whitespace().map(|t| t.parse::<usize>());
        let (Some(Ok(i)), Some(Ok(j))) = (it.next(), it.next()) else {
            return None;
        };
        if i == 0 || j == 0 {
            return Some(Error::Parse {
                path: path.to_path_buf(),
                message: format!("block {block}: entry ({i}, {j}) has a zero index; Matrix Market indices start at 1"),
            });
        }
        (i > nrows || j > ncols).then(|| {
            Error::IndexOutOfRange {
                block,
                row: i - 1,
                col: j - 1,
                nrows,
                ncols,
            }
            .in_file(path)
        })
    })
}

fn vector(path: &Path, loaded: Option<Loaded>, block: Block) -> Result<Option<Vec<f64>>> {
    let Some(l) = loaded else { return Ok(None) };
    let (r, c) = (l.coo.nrows(), l.coo.ncols());
    if c != 1 && r != 1 {
        return Err(Error::DimensionMismatch {
            block,
            rows: r,
            cols: c,
            expected_rows: r.max(c),
            expected_cols: 1,
        }
        .in_file(path));
    }
    let mut v = vec![0.0; r * c];
    for (i, j, x) in l.coo.triplet_iter() {
        v[i.max(j)] += *x;
    }
    Ok(Some(v))
}

pub(crate) fn triplets(coo: &CooMatrix<f64>) -> Vec<(usize, usize, f64)> {
    coo.triplet_iter().map(|(i, j, v)| (i, j, *v)).collect()
}

pub(crate) fn dense(coo: &CooMatrix<f64>) -> Mat<f64> {
    let mut m = Mat::zeros(coo.nrows(), coo.ncols());
    for (i, j, v) in coo.triplet_iter() {
        m[(i, j)] += *v;
    }
    m
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
    let builder = if h.dense {
        ProblemBuilder::new().hessian_dense(dense(&h.coo).as_ref(), Triangle::Full)
    } else {
        ProblemBuilder::new().hessian_triplets(h.coo.nrows().max(h.coo.ncols()), &triplets(&h.coo), Triangle::Full)
    };
    // A non-square H from a coordinate file is reported by the builder via the dense path.
    if h.coo.nrows() != h.coo.ncols() {
        return Err(Error::DimensionMismatch {
            block: Block::H,
            rows: h.coo.nrows(),
            cols: h.coo.ncols(),
            expected_rows: h.coo.nrows().max(h.coo.ncols()),
            expected_cols: h.coo.nrows().max(h.coo.ncols()),
        }
        .in_file(&h_path));
    }
    let a_path = file("A.mtx");
    let mut builder = match read(&a_path, Block::A)? {
        None => builder,
        Some(a) if a.dense => builder.constraints_dense(dense(&a.coo).as_ref()),
        Some(a) => builder.constraints_triplets(a.coo.nrows(), a.coo.ncols(), &triplets(&a.coo)),
    };
    let c_path = file("c.mtx");
    if let Some(c) = vector(&c_path, read(&c_path, Block::C)?, Block::C)? {
        builder = builder.linear(&c);
    }
    let b_path = file("b.mtx");
    if let Some(b) = vector(&b_path, read(&b_path, Block::B)?, Block::B)? {
        builder = builder.rhs(&b);
    }
    let has_a = a_path.exists();
    builder.build().map_err(|e| {
        let path: PathBuf = match e.block() {
            Some(Block::H) => h_path.clone(),
            Some(Block::A) => a_path.clone(),
            Some(Block::C) => c_path.clone(),
            Some(Block::B) if has_a || b_path.exists() => b_path.clone(),
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
