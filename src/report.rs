//! Reports: a readable text for people and one JSON object for tools.
//!
//! The JSON is written by a small hand-made writer ([`Json`]) so the library needs no
//! serialization dependency; non-finite numbers become `null`.

use std::fmt::{self, Write as _};

use crate::error::Error;
use crate::problem::Problem;
use crate::solution::{Inertia, Solution};

/// A JSON value with insertion-ordered objects.
#[derive(Clone, Debug, PartialEq)]
pub enum Json {
    /// `null`.
    Null,
    /// `true` / `false`.
    Bool(bool),
    /// A number (non-finite values print as `null`).
    Num(f64),
    /// An integer.
    Int(i64),
    /// A string (escaped on output).
    Str(String),
    /// An array.
    Arr(Vec<Json>),
    /// An object, keys in insertion order.
    Obj(Vec<(String, Json)>),
}

impl Json {
    /// An empty object.
    pub fn object() -> Json {
        Json::Obj(Vec::new())
    }

    /// Sets `key` (replacing an existing entry) on an object; no effect on other values.
    pub fn set(&mut self, key: &str, value: impl Into<Json>) -> &mut Json {
        if let Json::Obj(entries) = self {
            let value = value.into();
            match entries.iter_mut().find(|(k, _)| k == key) {
                Some(slot) => slot.1 = value,
                None => entries.push((key.to_string(), value)),
            }
        }
        self
    }

    /// Looks up `key` on an object.
    pub fn get(&self, key: &str) -> Option<&Json> {
        match self {
            Json::Obj(entries) => entries.iter().find(|(k, _)| k == key).map(|(_, v)| v),
            _ => None,
        }
    }
}

impl From<f64> for Json {
    fn from(v: f64) -> Self {
        Json::Num(v)
    }
}
impl From<usize> for Json {
    fn from(v: usize) -> Self {
        Json::Int(v as i64)
    }
}
impl From<bool> for Json {
    fn from(v: bool) -> Self {
        Json::Bool(v)
    }
}
impl From<&str> for Json {
    fn from(v: &str) -> Self {
        Json::Str(v.to_string())
    }
}
impl From<String> for Json {
    fn from(v: String) -> Self {
        Json::Str(v)
    }
}
impl From<&[f64]> for Json {
    fn from(v: &[f64]) -> Self {
        Json::Arr(v.iter().map(|x| Json::Num(*x)).collect())
    }
}
impl<T: Into<Json>> From<Option<T>> for Json {
    fn from(v: Option<T>) -> Self {
        v.map_or(Json::Null, Into::into)
    }
}
impl From<Inertia> for Json {
    fn from(i: Inertia) -> Self {
        let mut o = Json::object();
        o.set("positive", i.positive)
            .set("negative", i.negative)
            .set("zero", i.zero);
        o
    }
}

impl fmt::Display for Json {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Json::Null => f.write_str("null"),
            Json::Bool(b) => write!(f, "{b}"),
            Json::Num(x) if x.is_finite() => write!(f, "{x:?}"),
            Json::Num(_) => f.write_str("null"),
            Json::Int(i) => write!(f, "{i}"),
            Json::Str(s) => write_escaped(f, s),
            Json::Arr(items) => {
                f.write_char('[')?;
                for (k, v) in items.iter().enumerate() {
                    if k > 0 {
                        f.write_char(',')?;
                    }
                    write!(f, "{v}")?;
                }
                f.write_char(']')
            }
            Json::Obj(entries) => {
                f.write_char('{')?;
                for (k, (key, v)) in entries.iter().enumerate() {
                    if k > 0 {
                        f.write_char(',')?;
                    }
                    write_escaped(f, key)?;
                    write!(f, ":{v}")?;
                }
                f.write_char('}')
            }
        }
    }
}

fn write_escaped(f: &mut fmt::Formatter<'_>, s: &str) -> fmt::Result {
    f.write_char('"')?;
    for ch in s.chars() {
        match ch {
            '"' => f.write_str("\\\"")?,
            '\\' => f.write_str("\\\\")?,
            '\n' => f.write_str("\\n")?,
            '\r' => f.write_str("\\r")?,
            '\t' => f.write_str("\\t")?,
            c if (c as u32) < 0x20 => write!(f, "\\u{:04x}", c as u32)?,
            c => f.write_char(c)?,
        }
    }
    f.write_char('"')
}

/// The JSON object of `tangency solve --json` for a computed solution (status `solved`).
pub fn solution_json(problem: &Problem, s: &Solution) -> Json {
    let mut o = Json::object();
    o.set("status", "solved")
        .set("verdict", s.verdict.map(|v| v.as_str()))
        .set("n", problem.n())
        .set("m", problem.m())
        .set("method", s.method.as_str())
        .set("inertia", s.inertia)
        .set("objective", s.objective)
        .set("primal_residual", s.primal_residual)
        .set("dual_residual", s.dual_residual)
        .set("backward_error", s.backward_error)
        .set("refinement_steps", s.refinement_steps);
    let mut t = Json::object();
    t.set("analyze_s", s.timing.analyze_s)
        .set("factor_s", s.timing.factor_s)
        .set("solve_s", s.timing.solve_s);
    o.set("timing", t);
    o.set(
        "notes",
        Json::Arr(s.notes.iter().map(|n| Json::from(n.as_str())).collect()),
    );
    o.set(
        "null_direction",
        s.null_direction.as_deref().map_or(Json::Null, Json::from),
    );
    o
}

/// The JSON object for an outcome without a solution: `status` from
/// [`Error::status`], `verdict` null, the sizes and inertia when known, and `message`.
pub fn error_json(err: &Error, sizes: Option<(usize, usize)>, method: Option<&str>, inertia: Option<Inertia>) -> Json {
    let mut o = Json::object();
    o.set("status", err.status()).set("verdict", Json::Null);
    o.set("n", sizes.map(|s| s.0)).set("m", sizes.map(|s| s.1));
    o.set("method", method);
    let inertia = match err {
        Error::Singular { inertia, .. } => Some(*inertia),
        _ => inertia,
    };
    o.set("inertia", inertia);
    for key in ["objective", "primal_residual", "dual_residual", "backward_error"] {
        o.set(key, Json::Null);
    }
    o.set("message", err.to_string());
    // The evidence behind a no-solution status, for tools.
    match err {
        Error::Infeasible { rows, gap, .. } => {
            o.set(
                "contradicting_rows",
                Json::Arr(rows.iter().map(|r| Json::from(*r)).collect()),
            );
            o.set("contradiction", *gap);
        }
        Error::Unbounded { direction, slope, .. } => {
            o.set("direction", direction.as_slice());
            o.set("slope", *slope);
        }
        Error::NotConverged {
            iterations,
            history_tail,
            true_residual,
            ..
        } => {
            o.set("iterations", *iterations);
            o.set("residual_history_tail", &history_tail[..]);
            o.set("relative_residual", *true_residual);
        }
        Error::Uncertified {
            forward_error_bound,
            condition_estimate,
            backward_error,
            ..
        } => {
            o.set(
                "forward_error_bound",
                forward_error_bound.is_finite().then_some(*forward_error_bound),
            );
            o.set(
                "scaled_condition_estimate",
                condition_estimate.is_finite().then_some(*condition_estimate),
            );
            o.set("backward_error", backward_error.is_finite().then_some(*backward_error));
        }
        _ => {}
    }
    o
}

/// Largest `n + m` for which `tangency solve --json` includes `x` and `multipliers` by
/// default (`--json-vectors N` changes it; `--out` always writes both in full).
pub const JSON_VECTOR_LIMIT: usize = 100_000;

/// Appends `note` to the `notes` array of a JSON object (creating it when absent).
pub fn push_note(o: &mut Json, note: impl Into<String>) {
    if let Json::Obj(entries) = o {
        let note = Json::Str(note.into());
        match entries.iter_mut().find(|(k, _)| k == "notes") {
            Some((_, Json::Arr(items))) => items.push(note),
            Some(slot) => slot.1 = Json::Arr(vec![note]),
            None => entries.push(("notes".to_string(), Json::Arr(vec![note]))),
        }
    }
}

/// Sets `x` and `multipliers` on a solution object when `x.len() + y.len() ≤ limit`;
/// otherwise sets both to `null` and says so in `notes`.
///
/// ```
/// use tangency::report::{set_vectors, Json};
/// let mut o = Json::object();
/// set_vectors(&mut o, &[0.5, -0.5], &[1.0], 10);
/// assert_eq!(o.get("x").unwrap().to_string(), "[0.5,-0.5]");
/// set_vectors(&mut o, &[0.5, -0.5], &[1.0], 2);
/// assert_eq!(o.get("x"), Some(&Json::Null));
/// assert!(o.get("notes").unwrap().to_string().contains("left out"));
/// ```
pub fn set_vectors(o: &mut Json, x: &[f64], y: &[f64], limit: usize) {
    let total = x.len().saturating_add(y.len());
    if total <= limit {
        o.set("x", x).set("multipliers", y);
    } else {
        o.set("x", Json::Null).set("multipliers", Json::Null);
        push_note(
            o,
            format!(
                "x and multipliers left out of the JSON: n + m = {total} exceeds the limit {limit} \
                 (raise it with --json-vectors, or write them with --out)"
            ),
        );
    }
}

/// A number for people: `0` for zero (never `-0`), plain decimals between 1e-3 and 1e6
/// (trailing zeros trimmed), otherwise `d.ddde±k` without a zero exponent; `∞` for
/// infinities. `digits` is the number of significant digits (at least 1).
///
/// ```
/// use tangency::report::num;
/// assert_eq!(num(-0.0, 4), "0");
/// assert_eq!(num(1.0, 4), "1");
/// assert_eq!(num(-2.5, 4), "-2.5");
/// assert_eq!(num(1.23456e-9, 3), "1.23e-9");
/// assert_eq!(num(6.02e23, 3), "6.02e23");
/// assert_eq!(num(f64::INFINITY, 3), "∞");
/// ```
pub fn num(x: f64, digits: usize) -> String {
    let digits = digits.max(1);
    if x.is_nan() {
        return "NaN".to_string();
    }
    if x.is_infinite() {
        return if x > 0.0 { "∞" } else { "-∞" }.to_string();
    }
    if x == 0.0 {
        return "0".to_string();
    }
    let a = x.abs();
    if (1e-3..1e6).contains(&a) {
        let magnitude = a.log10().floor() as i32;
        let decimals = (digits as i32 - 1 - magnitude).max(0) as usize;
        let mut s = format!("{x:.decimals$}");
        if s.contains('.') {
            while s.ends_with('0') {
                s.pop();
            }
            if s.ends_with('.') {
                s.pop();
            }
        }
        if s == "-0" {
            s = "0".to_string();
        }
        return s;
    }
    let s = format!("{x:.prec$e}", prec = digits - 1);
    // Trim zeros of the mantissa ("1.50e-7" → "1.5e-7").
    match s.split_once('e') {
        Some((mant, exp)) => {
            let mut mant = mant.to_string();
            if mant.contains('.') {
                while mant.ends_with('0') {
                    mant.pop();
                }
                if mant.ends_with('.') {
                    mant.pop();
                }
            }
            format!("{mant}e{exp}")
        }
        None => s,
    }
}

/// An inertia in words: `4 positive, 2 negative, 0 zero`.
pub fn inertia_words(i: Inertia) -> String {
    format!("{} positive, {} negative, {} zero", i.positive, i.negative, i.zero)
}

/// A readable excerpt of a vector: every entry when it has at most `show` of them,
/// otherwise the `show` largest in magnitude with their 0-based indices.
///
/// ```
/// use tangency::report::excerpt;
/// assert_eq!(excerpt("x", &[0.5, -0.25], 4), "x[0] = 0.5, x[1] = -0.25");
/// assert_eq!(
///     excerpt("y", &[0.0, 3.0, -7.0, 1.0], 2),
///     "largest 2 of 4 in magnitude: y[2] = -7, y[1] = 3"
/// );
/// ```
pub fn excerpt(name: &str, v: &[f64], show: usize) -> String {
    let entry = |i: usize| format!("{name}[{i}] = {}", num(v[i], 6));
    if v.is_empty() {
        return "(none)".to_string();
    }
    if v.len() <= show {
        return (0..v.len()).map(entry).collect::<Vec<_>>().join(", ");
    }
    let mut idx: Vec<usize> = (0..v.len()).collect();
    idx.sort_by(|&a, &b| v[b].abs().total_cmp(&v[a].abs()).then(a.cmp(&b)));
    let listed: Vec<String> = idx.into_iter().take(show).map(entry).collect();
    format!("largest {show} of {} in magnitude: {}", v.len(), listed.join(", "))
}

/// Entries of `x` and `y` shown in the readable report ([`excerpt`]).
pub const REPORT_EXCERPT: usize = 6;

/// The readable report of a solve (our own layout): the answer first (verdict, objective,
/// an excerpt of `x` and the multipliers), then the evidence (inertia, residuals, backward
/// error), then the problem and the time.
pub fn human(problem: &Problem, s: &Solution) -> String {
    let (n, m) = (problem.n(), problem.m());
    let (hn, an) = problem.nnz();
    let kind = |sparse: bool| if sparse { "sparse" } else { "dense" };
    let mut out = String::new();
    let headline = match s.verdict {
        Some(v) => format!("{v}"),
        None => "stationary point (kind not certified)".to_string(),
    };
    let _ = writeln!(out, "tangency solve ▸ {headline}");
    match s.verdict {
        Some(v) => {
            let _ = writeln!(out, "  verdict     {v}: {}", v.explain());
        }
        None => {
            let _ = writeln!(
                out,
                "  verdict     not certified (stationary point computed; its kind was not verified)"
            );
        }
    }
    let _ = writeln!(out, "  objective   {}", num(s.objective, 15));
    let _ = writeln!(out, "  x           {}", excerpt("x", &s.x, REPORT_EXCERPT));
    let _ = writeln!(out, "  multipliers {}", excerpt("y", &s.y, REPORT_EXCERPT));
    let _ = writeln!(
        out,
        "              sign: Hx + c + Aᵀy = 0, so raising b_i by 1 changes the optimum by −y_i"
    );
    match s.inertia {
        Some(i) if i.zero > 0 && s.verdict.is_some() => {
            // The rank analysis resolved a singular K: report the system that was solved.
            let _ = writeln!(
                out,
                "  inertia     K: {} (singular); the rank analysis dropped dependent rows (named in the notes) \
                 and solved the reduced system",
                inertia_words(i)
            );
            if s.verdict == Some(crate::Verdict::Minimizer) {
                let kept = m.saturating_sub(i.zero);
                let _ = writeln!(
                    out,
                    "              reduced K: {} with {kept} of {m} rows kept, as a minimizer needs",
                    inertia_words(Inertia::new(n, kept, 0))
                );
            }
        }
        Some(i) => {
            let _ = writeln!(
                out,
                "  inertia     K: {} (a minimizer needs {n} positive, {m} negative, 0 zero)",
                inertia_words(i)
            );
        }
        None => {
            let _ = writeln!(out, "  inertia     not observed by this method");
        }
    }
    let _ = writeln!(
        out,
        "  residuals   feasibility ‖Ax−b‖∞ {}   stationarity ‖Hx+c+Aᵀy‖∞ {}",
        num(s.primal_residual, 3),
        num(s.dual_residual, 3)
    );
    let _ = writeln!(
        out,
        "  accuracy    backward error {} after {} refinement step(s)",
        num(s.backward_error, 3),
        s.refinement_steps
    );
    let _ = writeln!(
        out,
        "  problem     {n} unknown(s), {m} equation(s), K of order {}; H {} ({hn} stored), A {} ({an} stored); \
         method {}",
        n + m,
        kind(problem.hessian().is_sparse()),
        kind(problem.constraints().is_sparse()),
        s.method
    );
    let _ = writeln!(
        out,
        "  time        analyze {} s · factor {} s · solve {} s",
        num(s.timing.analyze_s, 3),
        num(s.timing.factor_s, 3),
        num(s.timing.solve_s, 3)
    );
    for note in &s.notes {
        let _ = writeln!(out, "  note        {note}");
    }
    out
}
