//! Fit directories in Matrix Market format (read by the checked streaming reader of
//! [`crate::io`]).
//!
//! | file    | required | shape | meaning |
//! |---------|----------|-------|---------|
//! | `F.mtx` | yes      | p×n   | design matrix (`coordinate` → sparse, `array` → dense) |
//! | `g.mtx` | yes      | p×1   | observations |
//! | `C.mtx` | no       | q×n   | restriction matrix |
//! | `d.mtx` | no       | q×1   | restriction right-hand side (zeros if absent) |
//! | `w.mtx` | no       | p×1   | positive weights (ones if absent) |
//!
//! Every validation error names the file it came from.

use std::path::Path;

use super::{FitBlock, LsqBuilder, LsqProblem};
use crate::error::{Error, Result};

use crate::io::{read_matrix, Loaded};

fn read(path: &Path) -> Result<Option<Loaded>> {
    let block = path.file_stem().and_then(|s| s.to_str()).unwrap_or("?");
    read_matrix(path, block)
}

fn vector(path: &Path, block: FitBlock) -> Result<Option<Vec<f64>>> {
    let Some(l) = read(path)? else { return Ok(None) };
    let (r, c) = (l.nrows, l.ncols);
    if (c != 1 && r != 1) || (r == 0 || c == 0) || (r.max(c) > 1 && l.symmetry != crate::io::Symmetry::General) {
        return Err(Error::FitInput {
            block,
            row: None,
            col: None,
            detail: format!("a vector must be k×1 or 1×k, found {r}×{c}"),
        }
        .in_file(path));
    }
    crate::memory::check(
        8 * r.max(c) as u64,
        &format!("{}: a vector of {} entries", path.display(), r.max(c)),
    )?;
    let mut v = vec![0.0; r.max(c)];
    for &(i, j, x) in &l.entries {
        v[i.max(j)] += x;
    }
    Ok(Some(v))
}

/// Reads a fit directory (see the module docs for the layout).
///
/// ```
/// # let dir = tempfile::tempdir()?;
/// std::fs::write(dir.path().join("F.mtx"), "%%MatrixMarket matrix array real general\n3 1\n1\n2\n3\n")?;
/// std::fs::write(dir.path().join("g.mtx"), "%%MatrixMarket matrix array real general\n3 1\n2\n4\n6\n")?;
/// let p = tangency::lsq::io::read_fit_dir(dir.path())?;
/// assert_eq!((p.p(), p.n(), p.q()), (3, 1, 0));
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn read_fit_dir(dir: impl AsRef<Path>) -> Result<LsqProblem> {
    let dir = dir.as_ref();
    let path = |name: &str| dir.join(name);
    let missing = |name: &str| Error::Io {
        path: path(name),
        source: std::io::Error::new(
            std::io::ErrorKind::NotFound,
            format!("{name} is required in a fit directory"),
        ),
    };
    let f = read(&path("F.mtx"))?.ok_or_else(|| missing("F.mtx"))?;
    let mut b = if f.dense {
        LsqBuilder::new().design_dense(f.to_dense().as_ref())
    } else {
        LsqBuilder::new().design_triplets(f.nrows, f.ncols, &f.full_triplets())
    };
    let g = vector(&path("g.mtx"), FitBlock::G)?.ok_or_else(|| missing("g.mtx"))?;
    b = b.observations(&g);
    if let Some(c) = read(&path("C.mtx"))? {
        b = if c.dense {
            b.restrictions_dense(c.to_dense().as_ref())
        } else {
            b.restrictions_triplets(c.nrows, c.ncols, &c.full_triplets())
        };
    }
    if let Some(d) = vector(&path("d.mtx"), FitBlock::D)? {
        b = b.restriction_rhs(&d);
    }
    if let Some(w) = vector(&path("w.mtx"), FitBlock::W)? {
        b = b.weights(&w);
    }
    b.build().map_err(|e| {
        let file = match &e {
            Error::FitInput { block, .. } => match block {
                FitBlock::F => "F.mtx",
                FitBlock::G => "g.mtx",
                FitBlock::C => "C.mtx",
                FitBlock::D => "d.mtx",
                FitBlock::W => "w.mtx",
                _ => return e,
            },
            _ => return e,
        };
        e.in_file(path(file))
    })
}
