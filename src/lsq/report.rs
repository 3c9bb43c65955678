//! Reports of a fit: one JSON object for tools, a readable text for people.

use std::fmt::Write as _;

use super::{Fit, LsqProblem};
use crate::error::Error;
use crate::report::Json;

fn opt_vec(v: Option<&Vec<f64>>) -> Json {
    v.map_or(Json::Null, |v| Json::from(v.as_slice()))
}

/// The JSON object of a successful fit: `status` "solved", `p`, `n`, `q`, `method`,
/// `coefficients`, `standard_errors`, `multipliers`, `rss`, `sigma`, `dof`, `rank_c`,
/// `dependent_restrictions`, `restriction_test {statistic, df1, df2, p_value}`,
/// `refinement {steps, corrections}`, `notes`.
pub fn fit_json(problem: &LsqProblem, fit: &Fit) -> Json {
    let mut o = Json::object();
    o.set("status", "solved");
    o.set("p", problem.p()).set("n", problem.n()).set("q", problem.q());
    o.set("method", fit.method.as_str());
    o.set("coefficients", fit.coefficients.as_slice());
    o.set("standard_errors", opt_vec(fit.standard_errors.as_ref()));
    o.set("multipliers", fit.multipliers.as_slice());
    o.set("rss", fit.rss);
    o.set("sigma", fit.sigma());
    o.set("dof", fit.dof);
    o.set("rank_c", fit.rank_c);
    o.set(
        "dependent_restrictions",
        Json::Arr(fit.dependent_restrictions.iter().map(|&i| Json::from(i)).collect()),
    );
    let test = match &fit.restriction_test {
        Some(t) => {
            let mut j = Json::object();
            j.set("statistic", t.statistic)
                .set("df1", t.df1)
                .set("df2", t.df2)
                .set("p_value", t.p_value);
            j
        }
        None => Json::Null,
    };
    o.set("restriction_test", test);
    let mut r = Json::object();
    r.set("steps", fit.refinement_steps)
        .set("corrections", fit.refinement_history.as_slice());
    o.set("refinement", r);
    o.set(
        "notes",
        Json::Arr(fit.notes.iter().map(|s| Json::from(s.as_str())).collect()),
    );
    o
}

/// The JSON object of a failed fit: `status` from [`Error::status`], sizes when known,
/// `message`, and for a non-unique fit the `direction`.
pub fn fit_error_json(err: &Error, sizes: Option<(usize, usize, usize)>) -> Json {
    let mut o = Json::object();
    o.set("status", err.status());
    o.set("p", sizes.map(|s| s.0))
        .set("n", sizes.map(|s| s.1))
        .set("q", sizes.map(|s| s.2));
    for key in [
        "coefficients",
        "standard_errors",
        "multipliers",
        "rss",
        "sigma",
        "restriction_test",
    ] {
        o.set(key, Json::Null);
    }
    match err {
        Error::FitNonUnique { direction, .. } => {
            o.set("verdict", "non_unique");
            o.set("direction", direction.as_slice());
        }
        Error::FitContradictory { rows, .. } => {
            o.set(
                "contradictory_rows",
                Json::Arr(rows.iter().map(|&i| Json::from(i)).collect()),
            );
        }
        _ => {}
    }
    o.set("message", err.to_string());
    o
}

/// A readable report (our own layout).
pub fn fit_human(problem: &LsqProblem, fit: &Fit) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "── tangency: restricted least squares ──");
    let _ = writeln!(
        s,
        "  size        {} observation(s), {} coefficient(s), {} restriction(s) (rank {})",
        problem.p(),
        problem.n(),
        problem.q(),
        fit.rank_c
    );
    let _ = writeln!(
        s,
        "  method      {} ({} refinement correction(s))",
        fit.method.as_str(),
        fit.refinement_steps
    );
    let _ = writeln!(s, "  RSS         {:.10e}   (dof {})", fit.rss, fit.dof);
    if let Some(sig) = fit.sigma() {
        let _ = writeln!(s, "  sigma       {sig:.10e}");
    }
    let _ = writeln!(s, "  {:>6}  {:>24}  {:>14}", "coef", "estimate", "std. error");
    for (j, b) in fit.coefficients.iter().enumerate() {
        let se = fit
            .standard_errors
            .as_ref()
            .map_or("—".to_string(), |v| format!("{:.6e}", v[j]));
        let _ = writeln!(s, "  {j:>6}  {b:>24.15e}  {se:>14}");
    }
    if !fit.multipliers.is_empty() {
        let _ = writeln!(s, "  multipliers (d(½·RSS)/dd = −y):");
        for (i, y) in fit.multipliers.iter().enumerate() {
            let _ = writeln!(s, "  {i:>6}  {y:>24.15e}");
        }
    }
    if let Some(t) = &fit.restriction_test {
        let _ = writeln!(
            s,
            "  restrictions F = {:.6e} on ({}, {}) df, upper-tail probability {:.4e}",
            t.statistic, t.df1, t.df2, t.p_value
        );
    }
    for n in &fit.notes {
        let _ = writeln!(s, "  note: {n}");
    }
    s
}
