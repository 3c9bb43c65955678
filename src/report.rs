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

fn sci(x: f64) -> String {
    format!("{x:.2e}")
}

/// The readable report of a solve (our own layout).
pub fn human(problem: &Problem, s: &Solution) -> String {
    let (n, m) = (problem.n(), problem.m());
    let (hn, an) = problem.nnz();
    let kind = |sparse: bool| if sparse { "sparse" } else { "dense" };
    let mut out = String::new();
    let _ = writeln!(out, "── tangency: equality-constrained QP ──");
    let _ = writeln!(
        out,
        "  size        {n} variable(s), {m} constraint(s); KKT order {}",
        n + m
    );
    let _ = writeln!(
        out,
        "  stored      H {hn} entries ({}), A {an} entries ({})",
        kind(problem.hessian().is_sparse()),
        kind(problem.constraints().is_sparse())
    );
    let _ = writeln!(out, "  method      {}", s.method);
    if let Some(i) = s.inertia {
        let _ = writeln!(out, "  inertia     {i}   (a minimizer needs (+{n}, -{m}, 0:0))");
    } else {
        let _ = writeln!(out, "  inertia     not observed by this method");
    }
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
    let _ = writeln!(out, "  objective   {:.15e}", s.objective);
    let _ = writeln!(
        out,
        "  residuals   feasibility ‖Ax−b‖∞ {}   stationarity ‖Hx+c+Aᵀy‖∞ {}",
        sci(s.primal_residual),
        sci(s.dual_residual)
    );
    let _ = writeln!(
        out,
        "  accuracy    backward error {} after {} refinement step(s)",
        sci(s.backward_error),
        s.refinement_steps
    );
    let _ = writeln!(
        out,
        "  time        analyze {:.3e} s · factor {:.3e} s · solve {:.3e} s",
        s.timing.analyze_s, s.timing.factor_s, s.timing.solve_s
    );
    let _ = writeln!(
        out,
        "  multipliers sign convention Hx + c + Aᵀy = 0: raising b_i by 1 changes the optimum by −y_i"
    );
    for note in &s.notes {
        let _ = writeln!(out, "  note        {note}");
    }
    out
}
