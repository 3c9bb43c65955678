//! A streaming Matrix Market reader with the checks a command line fed by scripts needs.
//!
//! Written by hand, on purpose: nalgebra-sparse's reader (a pest grammar over the whole
//! text) took 1.1–1.4 s for the four files of Poisson control k = 200, panicked on integers
//! beyond 64 bits and on `usize::MAX` sizes, allocated what the size line declared before
//! reading any entry, and reported errors as parser dumps without the line. No other
//! well-kept Rust reader of the format was available to this project. This one reads the
//! file once, line by line, and
//!
//! * reads only regular files: a FIFO, device, socket or directory is refused from its
//!   metadata before it is opened (so nothing blocks), and a symbolic link whose target
//!   is missing is an error naming it, not an absent file;
//! * checks every declared size against the file's length before allocating (an entry
//!   line needs at least 4 bytes for `pattern`, 6 otherwise; an `array` value at least 2);
//! * parses indices and sizes as unsigned integers with an overflow check;
//! * requires every entry line to hold exactly the tokens its field needs;
//! * accepts the fields `real`, `double`, `integer` and `pattern` (the latter as ones,
//!   coordinate only) and the symmetries `general`, `symmetric`, `skew-symmetric`; refuses
//!   `complex` and `hermitian` with a message;
//! * names positions as the file writes them: line numbers and entry indices are 1-based,
//!   and each message says so.
//!
//! Values that overflow double range when read (`1e999`), and NaN or infinite literals, are
//! refused at their line.

use std::io::Read as _;
use std::path::Path;

use crate::error::{Error, Result};

/// How the stored entries relate to the whole matrix.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub(crate) enum Symmetry {
    /// Every entry is stored.
    General,
    /// Only `row ≥ col` is stored; `M[j,i] = M[i,j]`.
    Symmetric,
    /// Only `row > col` is stored; `M[j,i] = −M[i,j]`, zero diagonal.
    SkewSymmetric,
}

/// One matrix read from a file.
#[derive(Debug)]
pub(crate) struct Loaded {
    /// Declared rows.
    pub(crate) nrows: usize,
    /// Declared columns.
    pub(crate) ncols: usize,
    /// Stored entries, 0-based, in file order (for `array` files every value, zeros
    /// included; duplicates of `coordinate` files are kept and summed by the caller).
    pub(crate) entries: Vec<(usize, usize, f64)>,
    /// True for `array` files.
    pub(crate) dense: bool,
    /// Which part is stored.
    pub(crate) symmetry: Symmetry,
}

impl Loaded {
    /// Every entry of the whole matrix (symmetric and skew-symmetric storage mirrored).
    pub(crate) fn full_triplets(&self) -> Vec<(usize, usize, f64)> {
        match self.symmetry {
            Symmetry::General => self.entries.clone(),
            Symmetry::Symmetric | Symmetry::SkewSymmetric => {
                let sign = if self.symmetry == Symmetry::Symmetric {
                    1.0
                } else {
                    -1.0
                };
                let mut all = Vec::with_capacity(2 * self.entries.len());
                for &(i, j, v) in &self.entries {
                    all.push((i, j, v));
                    if i != j {
                        all.push((j, i, sign * v));
                    }
                }
                all
            }
        }
    }

    /// A dense copy (duplicates summed; sizes were checked against the file's length).
    pub(crate) fn to_dense(&self) -> faer::Mat<f64> {
        let mut m = faer::Mat::zeros(self.nrows, self.ncols);
        for (i, j, v) in self.full_triplets() {
            m[(i, j)] += v;
        }
        m
    }
}

/// Shortest entry line of a `coordinate` file (`"1 1 1\n"`), and of a `pattern` one.
const MIN_COORDINATE_LINE: usize = 6;
const MIN_PATTERN_LINE: usize = 4;
/// Shortest value line of an `array` file (`"1\n"`).
const MIN_ARRAY_LINE: usize = 2;

fn parse_err(path: &Path, message: String) -> Error {
    Error::Parse {
        path: path.to_path_buf(),
        message,
    }
}

/// Reads a file's bytes if it is a regular file; `Ok(None)` when nothing exists at `path`.
/// The file type is checked from metadata before opening, so a FIFO cannot block.
pub(crate) fn read_regular_file(path: &Path) -> Result<Option<Vec<u8>>> {
    let io = |source: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let link = match std::fs::symlink_metadata(path) {
        Ok(m) => m,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(io(e)),
    };
    let meta = if link.file_type().is_symlink() {
        std::fs::metadata(path).map_err(|e| {
            parse_err(
                path,
                format!("is a symbolic link whose target cannot be read ({e}); remove it or point it at a file"),
            )
        })?
    } else {
        link
    };
    if !meta.is_file() {
        return Err(parse_err(
            path,
            format!(
                "is a {}, not a regular file; only regular files are read",
                file_kind(&meta)
            ),
        ));
    }
    let mut file = std::fs::File::open(path).map_err(io)?;
    // The type is checked again on the open file (it may have been replaced meanwhile).
    let meta = file.metadata().map_err(io)?;
    if !meta.is_file() {
        return Err(parse_err(
            path,
            "is not a regular file; only regular files are read".into(),
        ));
    }
    let mut bytes = Vec::new();
    bytes
        .try_reserve_exact(usize::try_from(meta.len()).unwrap_or(usize::MAX))
        .map_err(|_| Error::Resources {
            detail: format!(
                "{}: cannot hold the file's {} bytes in memory",
                path.display(),
                meta.len()
            ),
        })?;
    file.read_to_end(&mut bytes).map_err(io)?;
    Ok(Some(bytes))
}

fn file_kind(meta: &std::fs::Metadata) -> &'static str {
    let t = meta.file_type();
    if t.is_dir() {
        return "directory";
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt as _;
        if t.is_fifo() {
            return "FIFO (named pipe)";
        }
        if t.is_socket() {
            return "socket";
        }
        if t.is_block_device() || t.is_char_device() {
            return "device";
        }
    }
    "special file"
}

/// Reads one Matrix Market file; `Ok(None)` when the file does not exist. `block` names
/// the problem block in messages (e.g. `"H"`).
pub(crate) fn read_matrix(path: &Path, block: &str) -> Result<Option<Loaded>> {
    let Some(bytes) = read_regular_file(path)? else {
        return Ok(None);
    };
    parse(&bytes, path, block).map(Some)
}

/// Printable form of a token for messages (at most 40 characters, lossy UTF-8).
fn show(tok: &[u8]) -> String {
    let s = String::from_utf8_lossy(tok);
    if s.chars().count() > 40 {
        format!("{}…", s.chars().take(40).collect::<String>())
    } else {
        s.into_owned()
    }
}

/// Unsigned decimal integer, `None` on anything else or on overflow (distinguished by
/// the caller through `is_digits`).
fn parse_u64(tok: &[u8]) -> Option<u64> {
    if tok.is_empty() || tok.len() > 20 {
        return None;
    }
    let mut v: u64 = 0;
    for &c in tok {
        if !c.is_ascii_digit() {
            return None;
        }
        v = v.checked_mul(10)?.checked_add(u64::from(c - b'0'))?;
    }
    Some(v)
}

fn is_digits(tok: &[u8]) -> bool {
    !tok.is_empty() && tok.iter().all(u8::is_ascii_digit)
}

fn is_integer_literal(tok: &[u8]) -> bool {
    let digits = match tok.first() {
        Some(b'+' | b'-') => &tok[1..],
        _ => tok,
    };
    is_digits(digits)
}

#[derive(Copy, Clone, PartialEq, Eq)]
enum Field {
    Real,
    Integer,
    Pattern,
}

struct Lines<'a> {
    bytes: &'a [u8],
    pos: usize,
    line: usize,
}

impl<'a> Lines<'a> {
    /// The next line (without its end) and its 1-based number.
    fn next_line(&mut self) -> Option<(&'a [u8], usize)> {
        if self.pos >= self.bytes.len() {
            return None;
        }
        let rest = &self.bytes[self.pos..];
        let end = rest.iter().position(|&c| c == b'\n').unwrap_or(rest.len());
        self.pos += end + 1;
        self.line += 1;
        let mut l = &rest[..end];
        if let [head @ .., b'\r'] = l {
            l = head;
        }
        Some((l, self.line))
    }

    fn remaining(&self) -> usize {
        self.bytes.len().saturating_sub(self.pos)
    }
}

/// Splits on ASCII whitespace into at most `N + 1` tokens; returns how many were found.
fn tokens<'a, const N: usize>(line: &'a [u8], out: &mut [&'a [u8]; N]) -> usize {
    let mut count = 0;
    for tok in line.split(|c| c.is_ascii_whitespace()).filter(|t| !t.is_empty()) {
        if count < N {
            out[count] = tok;
        }
        count += 1;
        if count > N {
            break;
        }
    }
    count
}

fn is_blank(line: &[u8]) -> bool {
    line.iter().all(u8::is_ascii_whitespace)
}

/// Parses the text of a Matrix Market file (see the [module docs](self)).
pub(crate) fn parse(bytes: &[u8], path: &Path, block: &str) -> Result<Loaded> {
    let err = |line: usize, what: String| {
        parse_err(
            path,
            format!("block {block}, line {line} (lines and entries counted from 1, as in the file): {what}"),
        )
    };
    let mut lines = Lines { bytes, pos: 0, line: 0 };
    let (banner, _) = lines.next_line().unwrap_or((&[], 1));
    let lower = String::from_utf8_lossy(banner).to_ascii_lowercase();
    let words: Vec<&str> = lower.split_whitespace().collect();
    if words.first() != Some(&"%%matrixmarket") {
        return Err(parse_err(
            path,
            "not a Matrix Market file: the first line must start with %%MatrixMarket".into(),
        ));
    }
    if words.len() != 5 {
        return Err(err(
            1,
            format!(
                "the header needs 5 words (%%MatrixMarket matrix coordinate|array real|integer|pattern \
                 general|symmetric|skew-symmetric), found {}",
                words.len()
            ),
        ));
    }
    if words[1] != "matrix" {
        return Err(err(
            1,
            format!("object `{}` is not supported; only `matrix` is", words[1]),
        ));
    }
    let dense = match words[2] {
        "coordinate" => false,
        "array" => true,
        other => return Err(err(1, format!("format `{other}` is neither `coordinate` nor `array`"))),
    };
    let field = match words[3] {
        "real" | "double" => Field::Real,
        "integer" => Field::Integer,
        "pattern" if !dense => Field::Pattern,
        "pattern" => return Err(err(1, "the field `pattern` exists only for `coordinate` files".into())),
        "complex" => {
            return Err(err(
                1,
                "field `complex` is not supported: problem data are real (write the real part as `real`)".into(),
            ))
        }
        other => return Err(err(1, format!("field `{other}` is not one of real, integer, pattern"))),
    };
    let symmetry = match words[4] {
        "general" => Symmetry::General,
        "symmetric" => Symmetry::Symmetric,
        "skew-symmetric" => Symmetry::SkewSymmetric,
        "hermitian" => {
            return Err(err(
                1,
                "symmetry `hermitian` needs complex data, which is not supported".into(),
            ))
        }
        other => {
            return Err(err(
                1,
                format!("symmetry `{other}` is not one of general, symmetric, skew-symmetric"),
            ))
        }
    };
    if symmetry == Symmetry::SkewSymmetric && field == Field::Pattern {
        return Err(err(
            1,
            "a skew-symmetric matrix cannot be a `pattern` (its entries have signs)".into(),
        ));
    }
    // Size line: the first line after the comments.
    let (size_line, size_no) = loop {
        match lines.next_line() {
            None => return Err(err(lines.line + 1, "the file ends before the size line".into())),
            Some((l, _)) if l.first() == Some(&b'%') || is_blank(l) => continue,
            Some(x) => break x,
        }
    };
    let mut t = [&[][..]; 3];
    let want = if dense { 2 } else { 3 };
    let count = tokens(size_line, &mut t);
    if count != want {
        return Err(err(
            size_no,
            format!(
                "the size line needs {want} numbers ({}), found {count} token(s)",
                if dense { "rows columns" } else { "rows columns entries" }
            ),
        ));
    }
    let mut sizes = [0usize; 3];
    for (k, tok) in t.iter().take(want).enumerate() {
        let name = ["rows", "columns", "entries"][k];
        sizes[k] = match parse_u64(tok).and_then(|v| usize::try_from(v).ok()) {
            Some(v) => v,
            None if is_digits(tok) => {
                return Err(err(
                    size_no,
                    format!("the number of {name} `{}` is too large for this machine", show(tok)),
                ))
            }
            None => {
                return Err(err(
                    size_no,
                    format!(
                        "the number of {name} must be a non-negative integer, found `{}`",
                        show(tok)
                    ),
                ))
            }
        };
    }
    let (nrows, ncols) = (sizes[0], sizes[1]);
    if symmetry != Symmetry::General && nrows != ncols {
        return Err(err(
            size_no,
            format!(
                "a {} matrix must be square, the size line declares {nrows}×{ncols}",
                words[4]
            ),
        ));
    }
    let remaining = lines.remaining();
    let declared = if dense {
        let n = nrows;
        let count = match symmetry {
            Symmetry::General => nrows.checked_mul(ncols),
            Symmetry::Symmetric => n.checked_mul(n.saturating_add(1)).map(|x| x / 2),
            Symmetry::SkewSymmetric => n.checked_mul(n.saturating_sub(1)).map(|x| x / 2),
        };
        match count {
            Some(c) if c <= remaining / MIN_ARRAY_LINE => c,
            _ => {
                return Err(err(
                    size_no,
                    format!(
                        "declares a {nrows}×{ncols} array, more values than the {remaining} bytes after \
                         the size line can hold (each value needs a line of at least {MIN_ARRAY_LINE} bytes)"
                    ),
                ))
            }
        }
    } else {
        let nnz = sizes[2];
        let min_line = if field == Field::Pattern {
            MIN_PATTERN_LINE
        } else {
            MIN_COORDINATE_LINE
        };
        if nnz > remaining / min_line + 1 {
            return Err(err(
                size_no,
                format!(
                    "declares {nnz} entries, more than the {remaining} bytes after the size line can hold \
                     (each entry needs a line of at least {min_line} bytes)"
                ),
            ));
        }
        nnz
    };
    let mut entries = Vec::new();
    entries.try_reserve_exact(declared).map_err(|_| Error::Resources {
        detail: format!("{}: cannot allocate {declared} entries", path.display()),
    })?;
    // Array position (column-major; the stored triangle only for symmetric storage).
    let (mut ai, mut aj) = (0usize, 0usize);
    if dense && symmetry == Symmetry::SkewSymmetric {
        ai = 1;
    }
    let mut read = 0usize;
    while let Some((line, no)) = lines.next_line() {
        if is_blank(line) || line.first() == Some(&b'%') {
            continue;
        }
        if read == declared {
            return Err(err(
                no,
                format!(
                    "more {} than the {declared} the size line (line {size_no}) declares",
                    if dense { "values" } else { "entries" }
                ),
            ));
        }
        read += 1;
        let mut t = [&[][..]; 3];
        let need = if dense {
            1
        } else if field == Field::Pattern {
            2
        } else {
            3
        };
        let count = tokens(line, &mut t);
        if count != need {
            let shape = match (dense, field) {
                (true, _) => "one value",
                (false, Field::Pattern) => "row column",
                (false, _) => "row column value",
            };
            return Err(err(
                no,
                format!(
                    "{} {read} needs exactly {need} token(s) ({shape}), found {count}{}",
                    if dense { "value" } else { "entry" },
                    if count > need { " or more" } else { "" }
                ),
            ));
        }
        let value_tok = if dense {
            Some(t[0])
        } else {
            (field != Field::Pattern).then_some(t[2])
        };
        let value = match value_tok {
            None => 1.0,
            Some(tok) => {
                if field == Field::Integer && !is_integer_literal(tok) {
                    return Err(err(
                        no,
                        format!("`{}` is not an integer (the field is `integer`)", show(tok)),
                    ));
                }
                let v = std::str::from_utf8(tok).ok().and_then(|s| s.parse::<f64>().ok());
                match v {
                    Some(v) if v.is_finite() => v,
                    Some(v) if v.is_nan() || !tok.iter().any(u8::is_ascii_digit) => {
                        return Err(err(no, format!("value `{}` is not finite", show(tok))))
                    }
                    Some(_) => {
                        return Err(err(
                            no,
                            format!(
                                "value `{}` overflows double precision (largest about 1.8e308)",
                                show(tok)
                            ),
                        ))
                    }
                    None => return Err(err(no, format!("`{}` is not a number", show(tok)))),
                }
            }
        };
        let (i, j) = if dense {
            let pos = (ai, aj);
            ai += 1;
            if ai == nrows {
                aj += 1;
                ai = match symmetry {
                    Symmetry::General => 0,
                    Symmetry::Symmetric => aj,
                    Symmetry::SkewSymmetric => aj + 1,
                };
            }
            pos
        } else {
            let mut idx = [0usize; 2];
            for k in 0..2 {
                let tok = t[k];
                let name = ["row", "column"][k];
                let limit = [nrows, ncols][k];
                idx[k] = match parse_u64(tok).and_then(|v| usize::try_from(v).ok()) {
                    Some(0) => {
                        return Err(err(
                            no,
                            format!("entry {read} has {name} index 0; Matrix Market indices start at 1"),
                        ))
                    }
                    Some(v) if v <= limit => v - 1,
                    Some(_) => {
                        return Err(err(
                            no,
                            format!(
                                "entry {read} at ({}, {}) lies outside the declared {nrows}×{ncols} matrix",
                                show(t[0]),
                                show(t[1])
                            ),
                        ))
                    }
                    None if is_digits(tok) => {
                        return Err(err(
                            no,
                            format!(
                                "entry {read} at ({}, {}) lies outside the declared {nrows}×{ncols} matrix",
                                show(t[0]),
                                show(t[1])
                            ),
                        ))
                    }
                    None => {
                        return Err(err(
                            no,
                            format!(
                                "entry {read}: the {name} index `{}` is not a positive integer",
                                show(tok)
                            ),
                        ))
                    }
                };
            }
            let (i, j) = (idx[0], idx[1]);
            match symmetry {
                Symmetry::Symmetric if i < j => {
                    return Err(err(
                        no,
                        format!(
                            "entry {read} at ({}, {}) lies above the diagonal; a symmetric file stores the lower \
                             triangle (row ≥ column)",
                            i + 1,
                            j + 1
                        ),
                    ))
                }
                Symmetry::SkewSymmetric if i <= j => {
                    return Err(err(
                        no,
                        format!(
                            "entry {read} at ({}, {}) is not below the diagonal; a skew-symmetric file stores the \
                             strict lower triangle (row > column)",
                            i + 1,
                            j + 1
                        ),
                    ))
                }
                _ => (i, j),
            }
        };
        entries.push((i, j, value));
    }
    if read != declared {
        return Err(err(
            lines.line.max(size_no),
            format!(
                "the file ends after {read} of the {declared} {} the size line (line {size_no}) declares",
                if dense { "values" } else { "entries" }
            ),
        ));
    }
    Ok(Loaded {
        nrows,
        ncols,
        entries,
        dense,
        symmetry,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn p(text: &str) -> Result<Loaded> {
        parse(text.as_bytes(), Path::new("X.mtx"), "X")
    }

    fn msg(text: &str) -> String {
        p(text).unwrap_err().to_string()
    }

    #[test]
    fn fields_and_symmetries() {
        let l = p("%%MatrixMarket matrix coordinate integer general\n2 2 2\n1 1 3\n2 1 -4\n").unwrap();
        assert_eq!(l.entries, vec![(0, 0, 3.0), (1, 0, -4.0)]);
        let l = p("%%MatrixMarket matrix coordinate pattern symmetric\n2 2 2\n1 1\n2 1\n").unwrap();
        assert_eq!(l.full_triplets(), vec![(0, 0, 1.0), (1, 0, 1.0), (0, 1, 1.0)]);
        let l = p("%%MatrixMarket matrix array real symmetric\n2 2\n1\n2\n3\n").unwrap();
        assert_eq!(l.entries, vec![(0, 0, 1.0), (1, 0, 2.0), (1, 1, 3.0)]);
        let l = p("%%MatrixMarket matrix array real skew-symmetric\n3 3\n1\n2\n3\n").unwrap();
        assert_eq!(l.entries, vec![(1, 0, 1.0), (2, 0, 2.0), (2, 1, 3.0)]);
        let d = l.to_dense();
        assert_eq!((d[(0, 1)], d[(1, 2)]), (-1.0, -3.0));
        let l = p("%%MatrixMarket matrix array real general\n2 1\n% comment\n\n5\n6\n").unwrap();
        assert_eq!(l.entries, vec![(0, 0, 5.0), (1, 0, 6.0)]);
        assert!(msg("%%MatrixMarket matrix coordinate complex general\n1 1 1\n1 1 1 0\n").contains("complex"));
        assert!(msg("%%MatrixMarket matrix coordinate integer general\n1 1 1\n1 1 1.5\n").contains("not an integer"));
    }

    #[test]
    fn positions_are_one_based_and_tokens_exact() {
        let m = msg("%%MatrixMarket matrix coordinate real general\n2 2 2\n1 1 1\n2 2.5\n");
        assert!(
            m.contains("line 4") && m.contains("entry 2") && m.contains("exactly 3"),
            "{m}"
        );
        let m = msg("%%MatrixMarket matrix coordinate real general\n2 2 1\n3 1 1\n");
        assert!(m.contains("line 3") && m.contains("(3, 1)") && m.contains("2×2"), "{m}");
        let m = msg("%%MatrixMarket matrix coordinate real general\n2 2 2\n1 1 1\n");
        assert!(m.contains("1 of the 2"), "{m}");
        let m = msg("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 1\n2 2 2\n");
        assert!(m.contains("line 4") && m.contains("more entries"), "{m}");
        let m = msg("%%MatrixMarket matrix coordinate real symmetric\n2 2 1\n1 2 1\n");
        assert!(m.contains("above the diagonal"), "{m}");
    }

    #[test]
    fn hostile_sizes_and_values() {
        let m = msg("%%MatrixMarket matrix coordinate real general\n99999999999999999999999 1 1\n1 1 1\n");
        assert!(m.contains("too large"), "{m}");
        let m = msg("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 99999999999999999999999 1\n");
        assert!(m.contains("outside"), "{m}");
        let m = msg("%%MatrixMarket matrix array real general\n4294967296 4294967296\n");
        assert!(m.contains("more values than"), "{m}");
        let m = msg("%%MatrixMarket matrix coordinate real general\n2000000000 2000000000 3000000000\n1 1 1\n");
        assert!(m.contains("more than the"), "{m}");
        let m = msg("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 1e999\n");
        assert!(m.contains("overflows") && m.contains("1e999"), "{m}");
        let m = msg("%%MatrixMarket matrix coordinate real general\n2 2 1\n1 1 nan\n");
        assert!(m.contains("not finite"), "{m}");
        // A usize::MAX size with no entries is read (the problem reader checks it against memory).
        let l = p("%%MatrixMarket matrix coordinate real general\n18446744073709551615 1 0\n").unwrap();
        assert_eq!(l.nrows, usize::MAX);
        // Huge but finite values are read as they are.
        let l = p("%%MatrixMarket matrix coordinate real general\n1 1 1\n1 1 1.5e308\n").unwrap();
        assert_eq!(l.entries[0].2, 1.5e308);
    }
}
