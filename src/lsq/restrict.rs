//! Restrictions written against coefficient names: a small equation syntax of our own.
//!
//! One restriction per line (or separated by `;`). Each is a linear equation or
//! inequality in the coefficient names with numeric constants:
//!
//! ```text
//! x1 + x2 = 1
//! 2*x3 - x4 = 0
//! gnp = 0.5 * deflator - 3     # a comment runs to the end of the line
//! x5 >= 0                      # an inequality restriction (also written ≥)
//! x1 - x2 <= 2.5               # (also written ≤)
//! ```
//!
//! * a term is `NUMBER`, `NAME`, `NUMBER*NAME` or `NUMBER NAME` (`2 x3`), joined by `+` or
//!   `-`; a leading sign is allowed on each side;
//! * names start with a letter or `_` and continue with letters, digits, `_` or `.`; numbers
//!   are decimal with an optional exponent (`1e-3`, `.5`);
//! * a name may appear more than once and on both sides (its coefficients are added);
//! * blank lines and text after `#` are ignored; every restriction needs exactly one
//!   relation (`=`, `<=`/`≤` or `>=`/`≥`; strict `<` and `>` are refused, the feasible set of
//!   a fit is closed) and at least one name with a nonzero total coefficient.
//!
//! Errors name the restriction by its 1-based line and the 1-based character where the
//! trouble starts.

use crate::error::{Error, Result};

use super::FitBlock;

/// The relation of a restriction between its terms and its right-hand side.
#[derive(Copy, Clone, Debug, PartialEq, Eq)]
pub enum Relation {
    /// `Σ coef·β = rhs`.
    Equal,
    /// `Σ coef·β ≤ rhs` (written `<=` or `≤`).
    AtMost,
    /// `Σ coef·β ≥ rhs` (written `>=` or `≥`).
    AtLeast,
}

/// One parsed restriction: `Σ coef·β[index] (=, ≤ or ≥) rhs`, with the 1-based line it came
/// from.
#[derive(Clone, Debug, PartialEq)]
pub struct Restriction {
    /// `(coefficient index, factor)`, indices increasing, no zero factors.
    pub terms: Vec<(usize, f64)>,
    /// The constant on the right after moving every constant there.
    pub rhs: f64,
    /// The 1-based line of the text (or `;`-separated item number on one line).
    pub line: usize,
    /// `=`, `≤` or `≥`.
    pub relation: Relation,
}

impl Restriction {
    /// `Σ coef·β[index]` at `beta`.
    pub fn value(&self, beta: &[f64]) -> f64 {
        self.terms.iter().map(|&(j, v)| v * beta[j]).sum()
    }

    /// The restriction as `Σ a·β ≤ u` (an `≥` one negated); `None` for an equation.
    pub fn as_upper(&self) -> Option<(Vec<(usize, f64)>, f64)> {
        match self.relation {
            Relation::Equal => None,
            Relation::AtMost => Some((self.terms.clone(), self.rhs)),
            Relation::AtLeast => Some((self.terms.iter().map(|&(j, v)| (j, -v)).collect(), -self.rhs)),
        }
    }
}

fn err(line: usize, column: usize, detail: impl Into<String>) -> Error {
    Error::FitInput {
        block: FitBlock::C,
        row: None,
        col: None,
        detail: format!(
            "restriction on line {line}, character {column} (both 1-based): {}",
            detail.into()
        ),
    }
}

#[derive(Clone, Debug, PartialEq)]
enum Tok {
    Num(f64),
    Name(String),
    Plus,
    Minus,
    Star,
    Eq,
    Le,
    Ge,
}

fn lex(text: &str, line: usize) -> Result<Vec<(Tok, usize)>> {
    let chars: Vec<char> = text.chars().collect();
    let mut out = Vec::new();
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        let col = i + 1;
        if c.is_whitespace() {
            i += 1;
        } else if c == '+' {
            out.push((Tok::Plus, col));
            i += 1;
        } else if c == '-' || c == '−' {
            out.push((Tok::Minus, col));
            i += 1;
        } else if c == '*' || c == '·' {
            out.push((Tok::Star, col));
            i += 1;
        } else if c == '=' {
            out.push((Tok::Eq, col));
            i += 1;
        } else if c == '≤' || c == '≥' {
            out.push((if c == '≤' { Tok::Le } else { Tok::Ge }, col));
            i += 1;
        } else if c == '<' || c == '>' {
            if chars.get(i + 1) != Some(&'=') {
                return Err(err(
                    line,
                    col,
                    format!("strict '{c}' is not a restriction: write '{c}=' (the feasible set is closed)"),
                ));
            }
            out.push((if c == '<' { Tok::Le } else { Tok::Ge }, col));
            i += 2;
        } else if c.is_ascii_digit() || c == '.' {
            let start = i;
            while i < chars.len() && (chars[i].is_ascii_digit() || chars[i] == '.') {
                i += 1;
            }
            if i < chars.len() && (chars[i] == 'e' || chars[i] == 'E') {
                let mut j = i + 1;
                if j < chars.len() && (chars[j] == '+' || chars[j] == '-') {
                    j += 1;
                }
                if j < chars.len() && chars[j].is_ascii_digit() {
                    i = j;
                    while i < chars.len() && chars[i].is_ascii_digit() {
                        i += 1;
                    }
                }
            }
            let s: String = chars[start..i].iter().collect();
            let v: f64 = s
                .parse()
                .map_err(|_| err(line, col, format!("'{s}' is not a number")))?;
            if !v.is_finite() {
                return Err(err(line, col, format!("'{s}' is not a finite number")));
            }
            out.push((Tok::Num(v), col));
        } else if c.is_alphabetic() || c == '_' {
            let start = i;
            while i < chars.len() && (chars[i].is_alphanumeric() || chars[i] == '_' || chars[i] == '.') {
                i += 1;
            }
            out.push((Tok::Name(chars[start..i].iter().collect()), col));
        } else {
            return Err(err(line, col, format!("unexpected character '{c}'")));
        }
    }
    Ok(out)
}

/// Parses one side into `(name coefficients, constant)`, each term multiplied by `sign`.
fn side(
    toks: &[(Tok, usize)],
    names: &[String],
    line: usize,
    end_col: usize,
    sign: f64,
    coef: &mut [f64],
    constant: &mut f64,
) -> Result<()> {
    if toks.is_empty() {
        return Err(err(line, end_col, "an equation side is empty"));
    }
    let mut k = 0;
    let mut first = true;
    while k < toks.len() {
        let mut s = sign;
        // Signs (a leading one on the first term, one or more between terms).
        let mut saw_sign = false;
        while k < toks.len() && matches!(toks[k].0, Tok::Plus | Tok::Minus) {
            if toks[k].0 == Tok::Minus {
                s = -s;
            }
            saw_sign = true;
            k += 1;
        }
        if !first && !saw_sign {
            return Err(err(line, toks[k].1, "expected '+' or '-' between terms"));
        }
        first = false;
        let Some((tok, col)) = toks.get(k) else {
            return Err(err(line, end_col, "a term is missing after the sign"));
        };
        match tok {
            Tok::Num(v) => {
                k += 1;
                let mut factor = *v;
                // NUMBER [*] NAME, or a bare constant.
                let star = matches!(toks.get(k), Some((Tok::Star, _)));
                if star {
                    k += 1;
                }
                match toks.get(k) {
                    Some((Tok::Name(n), ncol)) => {
                        let j = lookup(names, n, line, *ncol)?;
                        k += 1;
                        // NUMBER*NAME*NUMBER is not allowed: keep the grammar small.
                        if matches!(toks.get(k), Some((Tok::Star, _))) {
                            return Err(err(line, toks[k].1, "write a term as NUMBER*NAME"));
                        }
                        factor *= s;
                        coef[j] += factor;
                    }
                    _ if star => {
                        return Err(err(line, *col, "'*' must be followed by a coefficient name"));
                    }
                    _ => *constant += s * factor,
                }
            }
            Tok::Name(n) => {
                let j = lookup(names, n, line, *col)?;
                k += 1;
                let mut factor = 1.0;
                if matches!(toks.get(k), Some((Tok::Star, _))) {
                    k += 1;
                    match toks.get(k) {
                        Some((Tok::Num(v), _)) => {
                            factor = *v;
                            k += 1;
                        }
                        _ => return Err(err(line, *col, "'NAME*' must be followed by a number")),
                    }
                }
                coef[j] += s * factor;
            }
            Tok::Star => return Err(err(line, *col, "'*' without a number before it")),
            Tok::Eq | Tok::Le | Tok::Ge => return Err(err(line, *col, "more than one '=' or inequality sign")),
            Tok::Plus | Tok::Minus => unreachable!("signs were consumed above"),
        }
    }
    Ok(())
}

fn lookup(names: &[String], name: &str, line: usize, col: usize) -> Result<usize> {
    names.iter().position(|n| n == name).ok_or_else(|| {
        let known: Vec<&str> = names.iter().take(12).map(String::as_str).collect();
        let more = if names.len() > 12 { ", …" } else { "" };
        err(
            line,
            col,
            format!("unknown coefficient '{name}' (known: {}{more})", known.join(", ")),
        )
    })
}

/// Parses restrictions (see the [module docs](self)) against the coefficient `names`.
///
/// ```
/// use tangency::lsq::restrict::parse;
/// let names: Vec<String> = ["x1", "x2", "x3", "x4"].iter().map(|s| s.to_string()).collect();
/// let r = parse("x1 + x2 = 1\n2*x3 - x4 = 0  # a comment", &names)?;
/// assert_eq!(r[0].terms, vec![(0, 1.0), (1, 1.0)]);
/// assert_eq!(r[0].rhs, 1.0);
/// assert_eq!(r[1].terms, vec![(2, 2.0), (3, -1.0)]);
/// let e = parse("x1 + y = 1", &names).unwrap_err().to_string();
/// assert!(e.contains("unknown coefficient 'y'") && e.contains("line 1, character 6"), "{e}");
/// # Ok::<(), tangency::Error>(())
/// ```
pub fn parse(text: &str, names: &[String]) -> Result<Vec<Restriction>> {
    let mut out = Vec::new();
    for (lineno, raw) in text.lines().enumerate() {
        let line = lineno + 1;
        let content = raw.split('#').next().unwrap_or("");
        let mut offset = 0;
        for item in content.split(';') {
            let item_offset = offset;
            offset += item.chars().count() + 1;
            if item.trim().is_empty() {
                continue;
            }
            let mut toks = lex(item, line)?;
            for t in &mut toks {
                t.1 += item_offset;
            }
            let end_col = item_offset + item.chars().count() + 1;
            let eqs: Vec<usize> = toks
                .iter()
                .enumerate()
                .filter(|(_, t)| matches!(t.0, Tok::Eq | Tok::Le | Tok::Ge))
                .map(|(k, _)| k)
                .collect();
            if eqs.is_empty() {
                return Err(err(line, item_offset + 1, "a restriction needs '=', '<=' or '>='"));
            }
            if eqs.len() > 1 {
                return Err(err(line, toks[eqs[1]].1, "more than one '=' or inequality sign"));
            }
            let relation = match toks[eqs[0]].0 {
                Tok::Le => Relation::AtMost,
                Tok::Ge => Relation::AtLeast,
                _ => Relation::Equal,
            };
            let (lhs, rhs) = (&toks[..eqs[0]], &toks[eqs[0] + 1..]);
            let mut coef = vec![0.0; names.len()];
            let mut constant = 0.0;
            side(lhs, names, line, toks[eqs[0]].1, 1.0, &mut coef, &mut constant)?;
            side(rhs, names, line, end_col, -1.0, &mut coef, &mut constant)?;
            if !constant.is_finite() || coef.iter().any(|c| !c.is_finite()) {
                return Err(err(
                    line,
                    item_offset + 1,
                    "the terms sum beyond double range (about 1.8e308)",
                ));
            }
            let terms: Vec<(usize, f64)> = coef
                .iter()
                .enumerate()
                .filter(|(_, c)| **c != 0.0)
                .map(|(j, c)| (j, *c))
                .collect();
            if terms.is_empty() {
                return Err(err(
                    line,
                    item_offset + 1,
                    "no coefficient is left in the equation (every name cancels)",
                ));
            }
            out.push(Restriction {
                terms,
                rhs: -constant,
                line,
                relation,
            });
        }
    }
    Ok(out)
}

/// Splits parsed restrictions into the equations and the inequalities, each in the
/// order written.
pub fn split(all: Vec<Restriction>) -> (Vec<Restriction>, Vec<Restriction>) {
    all.into_iter().partition(|r| r.relation == Relation::Equal)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names() -> Vec<String> {
        ["a", "b", "c.d", "_e"].iter().map(|s| s.to_string()).collect()
    }

    #[test]
    fn forms_of_terms_and_sides() {
        let r = parse("-a + 2 b - 3*c.d = 0.5*_e - 4; a = b", &names()).unwrap();
        assert_eq!(r.len(), 2);
        assert_eq!(r[0].terms, vec![(0, -1.0), (1, 2.0), (2, -3.0), (3, -0.5)]);
        assert_eq!(r[0].rhs, -4.0);
        assert_eq!(r[1].terms, vec![(0, 1.0), (1, -1.0)]);
        assert_eq!(r[1].rhs, 0.0);
        let r = parse("a*2 + 1e-3 = b - -1", &names()).unwrap();
        assert_eq!(r[0].terms, vec![(0, 2.0), (1, -1.0)]);
        assert!((r[0].rhs - (1.0 - 1e-3)).abs() < 1e-15);
    }

    #[test]
    fn errors_say_where() {
        let cases = [
            ("a + b", "needs '='"),
            ("a = b = c.d", "more than one '='"),
            ("a b = 1", "expected '+' or '-'"),
            ("a - a = 1", "every name cancels"),
            ("= 1", "side is empty"),
            ("a + = 1", "term is missing"),
            ("2 * = a", "followed by a coefficient name"),
            ("a ? b = 1", "unexpected character '?'"),
        ];
        for (text, want) in cases {
            let e = parse(text, &names()).unwrap_err().to_string();
            assert!(e.contains(want), "{text}: {e}");
            assert!(e.contains("line 1"), "{text}: {e}");
        }
        let e = parse("a = 1\n\n b + q = 0", &names()).unwrap_err().to_string();
        assert!(e.contains("line 3, character 6"), "{e}");
        for (text, want) in [
            ("a < 1", "strict '<'"),
            ("a >= b <= 1", "more than one"),
            ("a = 1e308 + 1e308", "beyond double range"),
        ] {
            let e = parse(text, &names()).unwrap_err().to_string();
            assert!(e.contains(want), "{text}: {e}");
        }
    }

    /// Hostile text (random characters from the grammar's alphabet and beyond) gives a
    /// typed error or a parse, never a panic; every parse has its relation and terms.
    #[test]
    fn random_text_never_panics() {
        let alphabet: Vec<char> = "ab_c.d 0123456789eE+-−*·=<>≤≥;#\n\t?é∞.".chars().collect();
        let mut state = 0x9E37_79B9_7F4A_7C15u64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state
        };
        let (mut parsed, mut refused) = (0, 0);
        for _ in 0..20_000 {
            let len = (next() % 24) as usize;
            let text: String = (0..len)
                .map(|_| alphabet[(next() % alphabet.len() as u64) as usize])
                .collect();
            match parse(&text, &names()) {
                Ok(rs) => {
                    parsed += 1;
                    assert!(rs.iter().all(|r| !r.terms.is_empty() && r.rhs.is_finite()), "{text:?}");
                }
                Err(e) => {
                    refused += 1;
                    assert!(e.to_string().contains("1-based"), "{text:?}: {e}");
                }
            }
        }
        assert_eq!(parsed + refused, 20_000);
        assert!(parsed > 0 && refused > 0, "parsed {parsed}, refused {refused}");
    }

    #[test]
    fn inequalities() {
        let r = parse("a >= 0; 2 b - c.d <= 1.5; _e ≥ -1; a ≤ b", &names()).unwrap();
        let rel: Vec<Relation> = r.iter().map(|r| r.relation).collect();
        use Relation::*;
        assert_eq!(rel, [AtLeast, AtMost, AtLeast, AtMost]);
        assert_eq!(r[1].terms, vec![(1, 2.0), (2, -1.0)]);
        assert_eq!(r[1].rhs, 1.5);
        assert_eq!(r[0].as_upper(), Some((vec![(0, -1.0)], -0.0)));
        assert_eq!(r[3].terms, vec![(0, 1.0), (1, -1.0)]);
        assert_eq!(r[3].rhs, 0.0);
        assert_eq!(parse("a = 1", &names()).unwrap()[0].relation, Equal);
    }
}
