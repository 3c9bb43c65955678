//! Fit input as analysts keep it: a CSV table with a header row, and restrictions written
//! against the column names (see [`restrict`](super::restrict)), besides the Matrix Market
//! directory of [`io`](super::io).
//!
//! A fit directory holds either
//!
//! * `data.csv`: a header row of names, then one observation per row. The response `g` is
//!   the column named by [`FitInput::response`] (default: the first column); the weights `w`
//!   the column named by [`FitInput::weights`] (default: none, all ones); every other column
//!   is a column of the design `F`, in file order, and its header is the coefficient's name.
//!   [`FitInput::intercept`] adds a column of ones named `intercept` in front; or
//! * the Matrix Market files `F.mtx`, `g.mtx` (and optionally `C.mtx`, `d.mtx`, `w.mtx`);
//!   coefficients are then named `b0`, `b1`, ….
//!
//! and optionally `restrictions.txt` (equations, one per line); [`FitInput::restrictions`]
//! adds more. Equations and `C.mtx` exclude each other.
//!
//! The CSV reader is written by hand (RFC 4180 quoting, numbers only below the header): the
//! crate has no serialization dependency, and a numeric table needs nothing more.

use std::path::Path;

use faer::Mat;

use super::{FitBlock, LsqBuilder, LsqProblem};
use crate::error::{Error, Result};

/// How to read a fit directory (see the [module docs](self)).
#[derive(Clone, Debug, Default)]
pub struct FitInput {
    /// CSV only: the response column (default: the first column).
    pub response: Option<String>,
    /// CSV only: the weights column (default: no weights).
    pub weights: Option<String>,
    /// CSV only: add a column of ones named `intercept` in front of the design.
    pub intercept: bool,
    /// More restriction equations (each may hold several lines or `;`-separated items).
    pub restrictions: Vec<String>,
    /// Ridge parameter `λ ≥ 0` (default 0).
    pub ridge: f64,
}

fn csv_err(path: &Path, line: usize, detail: impl Into<String>) -> Error {
    Error::Parse {
        path: path.to_path_buf(),
        message: format!("line {line} (1-based): {}", detail.into()),
    }
}

/// Splits one CSV record (RFC 4180: fields may be double-quoted, `""` inside quotes is a
/// quote). Records spanning lines are not supported (a numeric table has none).
fn fields(line: &str) -> std::result::Result<Vec<String>, String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut chars = line.chars().peekable();
    let mut quoted = false;
    let mut was_quoted = false;
    while let Some(c) = chars.next() {
        if quoted {
            if c == '"' {
                if chars.peek() == Some(&'"') {
                    cur.push('"');
                    chars.next();
                } else {
                    quoted = false;
                }
            } else {
                cur.push(c);
            }
        } else if c == '"' && cur.trim().is_empty() && !was_quoted {
            cur.clear();
            quoted = true;
            was_quoted = true;
        } else if c == ',' {
            out.push(std::mem::take(&mut cur).trim().to_string());
            was_quoted = false;
        } else {
            cur.push(c);
        }
    }
    if quoted {
        return Err("a quoted field is not closed on this line".into());
    }
    out.push(cur.trim().to_string());
    Ok(out)
}

/// A CSV table: the header and the rows of numbers.
struct Table {
    header: Vec<String>,
    rows: Vec<Vec<f64>>,
}

fn read_table(path: &Path) -> Result<Table> {
    let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim_end_matches('\r')))
        .filter(|(_, l)| !l.trim().is_empty());
    let Some((hline, head)) = lines.next() else {
        return Err(csv_err(path, 1, "the file is empty: a header row of names is needed"));
    };
    let header = fields(head.trim_start_matches('\u{feff}')).map_err(|e| csv_err(path, hline, e))?;
    if let Some(k) = header.iter().position(|h| h.is_empty()) {
        return Err(csv_err(
            path,
            hline,
            format!("column {} (1-based) of the header has no name", k + 1),
        ));
    }
    let mut rows = Vec::new();
    for (lineno, line) in lines {
        let f = fields(line).map_err(|e| csv_err(path, lineno, e))?;
        if f.len() != header.len() {
            return Err(csv_err(
                path,
                lineno,
                format!("{} field(s), but the header has {}", f.len(), header.len()),
            ));
        }
        let mut row = Vec::with_capacity(f.len());
        for (k, s) in f.iter().enumerate() {
            let v: f64 = s.parse().map_err(|_| {
                csv_err(
                    path,
                    lineno,
                    format!("column {} ('{}', 1-based) holds '{s}', not a number", k + 1, header[k]),
                )
            })?;
            if !v.is_finite() {
                return Err(csv_err(
                    path,
                    lineno,
                    format!(
                        "column {} ('{}', 1-based) holds the non-finite value {v}",
                        k + 1,
                        header[k]
                    ),
                ));
            }
            row.push(v);
        }
        rows.push(row);
    }
    Ok(Table { header, rows })
}

fn column(table: &Table, name: &str, path: &Path, what: &str) -> Result<usize> {
    table.header.iter().position(|h| h == name).ok_or_else(|| Error::Parse {
        path: path.to_path_buf(),
        message: format!(
            "no column named '{name}' for the {what} (header: {})",
            table.header.join(", ")
        ),
    })
}

/// Reads a CSV table with a header row into a builder (design, observations, weights and
/// coefficient names; see the [module docs](self)).
///
/// ```
/// use tangency::lsq::{input::{read_csv, FitInput}, FitOptions};
/// # let dir = tempfile::tempdir()?;
/// let path = dir.path().join("data.csv");
/// std::fs::write(&path, "yield,dose\n1.1,0\n2.9,1\n5.2,2\n6.8,3\n")?;
/// let input = FitInput { intercept: true, ..Default::default() };
/// let problem = read_csv(&path, &input)?.restriction_equations("intercept + dose = 3").build()?;
/// assert_eq!(problem.names(), ["intercept", "dose"]);
/// let fit = problem.fit(&FitOptions::default())?;
/// assert!((fit.coefficients[0] + fit.coefficients[1] - 3.0).abs() < 1e-14);
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn read_csv(path: impl AsRef<Path>, input: &FitInput) -> Result<LsqBuilder> {
    let path = path.as_ref();
    let table = read_table(path)?;
    let resp = match &input.response {
        Some(name) => column(&table, name, path, "response")?,
        None => 0,
    };
    let wcol = match &input.weights {
        Some(name) => {
            let k = column(&table, name, path, "weights")?;
            if k == resp {
                return Err(Error::Parse {
                    path: path.to_path_buf(),
                    message: format!("column '{name}' cannot be both the response and the weights"),
                });
            }
            Some(k)
        }
        None => None,
    };
    let cols: Vec<usize> = (0..table.header.len())
        .filter(|&k| k != resp && Some(k) != wcol)
        .collect();
    let mut names: Vec<String> = Vec::new();
    if input.intercept {
        if table.header.iter().any(|h| h == "intercept") {
            return Err(Error::Parse {
                path: path.to_path_buf(),
                message: "a column is already named 'intercept': leave out the added intercept or rename it".into(),
            });
        }
        names.push("intercept".into());
    }
    names.extend(cols.iter().map(|&k| table.header[k].clone()));
    let p = table.rows.len();
    let n = names.len();
    let offset = usize::from(input.intercept);
    let f = Mat::from_fn(p, n, |i, j| {
        if j < offset {
            1.0
        } else {
            table.rows[i][cols[j - offset]]
        }
    });
    let g: Vec<f64> = table.rows.iter().map(|r| r[resp]).collect();
    let mut b = LsqBuilder::new()
        .design_dense(f.as_ref())
        .observations(&g)
        .coefficient_names(&names);
    if let Some(k) = wcol {
        let w: Vec<f64> = table.rows.iter().map(|r| r[k]).collect();
        b = b.weights(&w);
    }
    Ok(b.ridge(input.ridge))
}

/// Reads a fit directory in either layout (see the [module docs](self)), with the
/// restrictions of `restrictions.txt` and [`FitInput::restrictions`].
pub fn read_fit(dir: impl AsRef<Path>, input: &FitInput) -> Result<LsqProblem> {
    let dir = dir.as_ref();
    let csv = dir.join("data.csv");
    let mut equations: Vec<String> = Vec::new();
    let rpath = dir.join("restrictions.txt");
    if rpath.is_file() {
        equations.push(std::fs::read_to_string(&rpath).map_err(|source| Error::Io {
            path: rpath.clone(),
            source,
        })?);
    }
    equations.extend(input.restrictions.iter().cloned());
    let text = equations.join("\n");
    let in_restrictions = |e: Error| -> Error {
        match &e {
            Error::FitInput { block: FitBlock::C, .. } if rpath.is_file() && input.restrictions.is_empty() => {
                e.in_file(rpath.clone())
            }
            _ => e,
        }
    };
    if csv.is_file() {
        if dir.join("F.mtx").exists() || dir.join("g.mtx").exists() {
            return Err(Error::Parse {
                path: dir.to_path_buf(),
                message: "holds both data.csv and F.mtx/g.mtx: keep one layout".into(),
            });
        }
        let mut b = read_csv(&csv, input)?;
        if !text.trim().is_empty() {
            b = b.restriction_equations(&text);
        }
        return b.build().map_err(in_restrictions);
    }
    if input.response.is_some() || input.weights.is_some() || input.intercept {
        return Err(Error::InvalidOption(
            "the response, weights and intercept settings apply to data.csv only; this directory has none".into(),
        ));
    }
    let problem = super::io::read_fit_dir(dir)?;
    let problem = if text.trim().is_empty() {
        problem
    } else {
        problem.with_restriction_equations(&text).map_err(in_restrictions)?
    };
    if input.ridge != 0.0 {
        problem.with_ridge(input.ridge)
    } else {
        Ok(problem)
    }
}

impl LsqProblem {
    /// The same problem with restrictions parsed from equations against its coefficient
    /// names (see [`restrict`](super::restrict)); refused when it already has restrictions.
    pub fn with_restriction_equations(&self, text: &str) -> Result<LsqProblem> {
        if self.q() > 0 {
            return Err(Error::FitInput {
                block: FitBlock::C,
                row: None,
                col: None,
                detail: "the problem already has restrictions C (C.mtx): give them either as C or as equations".into(),
            });
        }
        let (parsed, inequalities) = super::restrict::split(super::restrict::parse(text, &self.names)?);
        let n = self.n();
        let mut c = Mat::<f64>::zeros(parsed.len(), n);
        for (i, r) in parsed.iter().enumerate() {
            for &(j, v) in &r.terms {
                c[(i, j)] = v;
            }
        }
        Ok(LsqProblem {
            c: crate::problem::Matrix::Dense(c),
            d: parsed.iter().map(|r| r.rhs).collect(),
            inequalities,
            ..self.clone()
        })
    }
}

#[cfg(test)]
mod tests {
    use super::fields;

    #[test]
    fn csv_fields_with_quotes() {
        assert_eq!(fields("a, b ,c").unwrap(), ["a", "b", "c"]);
        assert_eq!(
            fields("\"x, y\",\"say \"\"hi\"\"\",3").unwrap(),
            ["x, y", "say \"hi\"", "3"]
        );
        assert!(fields("\"open,1").is_err());
    }
}
