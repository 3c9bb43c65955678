//! Reports of a fit: one JSON object for tools, a readable text for people.

use std::fmt::Write as _;

use super::inference::Robust;
use super::{Fit, LsqProblem};
use crate::error::Error;
use crate::report::{num, Json};

/// The confidence level of the intervals in [`fit_json`] and [`fit_human`].
pub const DEFAULT_CONFIDENCE: f64 = 0.95;

fn opt_vec(v: Option<&Vec<f64>>) -> Json {
    v.map_or(Json::Null, |v| Json::from(v.as_slice()))
}

fn strings(v: &[String]) -> Json {
    Json::Arr(v.iter().map(|s| Json::from(s.as_str())).collect())
}

fn statistic(value: f64, p: f64) -> Json {
    let mut j = Json::object();
    j.set("statistic", value).set("p_value", p);
    j
}

/// The JSON object of a successful fit at the confidence level [`DEFAULT_CONFIDENCE`]
/// (see [`fit_json_at`]).
pub fn fit_json(problem: &LsqProblem, fit: &Fit) -> Json {
    fit_json_at(problem, fit, DEFAULT_CONFIDENCE)
}

/// The JSON object of a successful fit: `status` "solved", `p`, `n`, `q`, `method`,
/// `names`, `coefficients`, `standard_errors`, `t_statistics`, `p_values` (two-sided,
/// Student's t with `dof`), `confidence_level`, `confidence_intervals` (`[low, high]` per
/// coefficient), `fixed_by_restrictions`, `robust_standard_errors {hc0, hc1, hc2, hc3}`,
/// `multipliers`, `rss`, `sigma`, `dof`, `rank_c`, `dependent_restrictions`, `ridge`,
/// `restriction_test {statistic, df1, df2, p_value, wald, likelihood_ratio, score}` (the
/// last three `{statistic, p_value}`, χ²(df1)), `refinement {steps, corrections}`, `notes`.
/// Statistics that are not defined (ridge, zero dof, a coefficient fixed by the
/// restrictions, an active inequality restriction) are `null`. With inequality restrictions
/// (only then) two more keys: `inequality_restrictions`, one object per restriction in the
/// order written, `{line, relation ("<=" or ">="), value, rhs, multiplier, active}`, and
/// `active_inequalities`, the 0-based positions of the active ones in that list.
pub fn fit_json_at(problem: &LsqProblem, fit: &Fit, level: f64) -> Json {
    let mut o = Json::object();
    o.set("status", "solved");
    o.set("p", problem.p()).set("n", problem.n()).set("q", problem.q());
    o.set("method", fit.method.as_str());
    o.set("names", strings(problem.names()));
    o.set("coefficients", fit.coefficients.as_slice());
    o.set("standard_errors", opt_vec(fit.standard_errors.as_ref()));
    let table = fit.coefficient_inference(problem, level);
    match &table {
        Some(t) => {
            o.set("t_statistics", Json::Arr(t.iter().map(|c| Json::from(c.t)).collect()));
            o.set("p_values", Json::Arr(t.iter().map(|c| Json::from(c.p_value)).collect()));
            o.set("confidence_level", level);
            o.set(
                "confidence_intervals",
                Json::Arr(
                    t.iter()
                        .map(|c| Json::Arr(vec![Json::Num(c.interval.0), Json::Num(c.interval.1)]))
                        .collect(),
                ),
            );
            o.set(
                "fixed_by_restrictions",
                Json::Arr(t.iter().map(|c| Json::Bool(c.fixed)).collect()),
            );
        }
        None => {
            for key in [
                "t_statistics",
                "p_values",
                "confidence_level",
                "confidence_intervals",
                "fixed_by_restrictions",
            ] {
                o.set(key, Json::Null);
            }
        }
    }
    let mut robust = Json::object();
    let mut any = false;
    for kind in Robust::ALL {
        let se = fit.robust_standard_errors(problem, kind);
        any |= se.is_some();
        robust.set(kind.as_str(), opt_vec(se.as_ref()));
    }
    o.set("robust_standard_errors", if any { robust } else { Json::Null });
    o.set("multipliers", fit.multipliers.as_slice());
    o.set("rss", fit.rss);
    o.set("sigma", fit.sigma());
    o.set("dof", fit.dof);
    o.set("rank_c", fit.rank_c);
    o.set(
        "dependent_restrictions",
        Json::Arr(fit.dependent_restrictions.iter().map(|&i| Json::from(i)).collect()),
    );
    o.set("ridge", problem.ridge());
    let test = match &fit.restriction_test {
        Some(t) => {
            let mut j = Json::object();
            j.set("statistic", t.statistic)
                .set("df1", t.df1)
                .set("df2", t.df2)
                .set("p_value", t.p_value)
                .set("wald", statistic(t.wald, t.wald_p_value))
                .set(
                    "likelihood_ratio",
                    statistic(t.likelihood_ratio, t.likelihood_ratio_p_value),
                )
                .set("score", statistic(t.score, t.score_p_value));
            j
        }
        None => Json::Null,
    };
    o.set("restriction_test", test);
    if !fit.inequality_restrictions.is_empty() {
        let list = fit
            .inequality_restrictions
            .iter()
            .map(|r| {
                let mut j = Json::object();
                j.set("line", r.line)
                    .set("relation", relation_word(r.relation))
                    .set("value", r.value)
                    .set("rhs", r.rhs)
                    .set("multiplier", r.multiplier)
                    .set("active", r.active);
                j
            })
            .collect();
        o.set("inequality_restrictions", Json::Arr(list));
        o.set(
            "active_inequalities",
            Json::Arr(
                fit.inequality_restrictions
                    .iter()
                    .enumerate()
                    .filter(|(_, r)| r.active)
                    .map(|(k, _)| Json::from(k))
                    .collect(),
            ),
        );
    }
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

/// Columns (0-based) that take part in a null direction of `[F; C]`: entries above
/// `1e-8·max|δ|`.
pub fn columns_involved(direction: &[f64]) -> Vec<usize> {
    let big = direction.iter().fold(0.0f64, |a, v| a.max(v.abs()));
    (0..direction.len())
        .filter(|&j| direction[j].abs() > 1e-8 * big)
        .collect()
}

/// The JSON object of a failed fit: `status` from [`Error::status`], sizes when known,
/// `message`, for a rank-deficient fit the `direction` and `columns_involved` (0-based,
/// with their `names` when given), for contradictory restrictions `contradictory_rows`.
pub fn fit_error_json(err: &Error, sizes: Option<(usize, usize, usize)>, names: Option<&[String]>) -> Json {
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
            let cols = columns_involved(direction);
            o.set(
                "columns_involved",
                Json::Arr(cols.iter().map(|&j| Json::from(j)).collect()),
            );
            if let Some(names) = names {
                o.set(
                    "names_involved",
                    Json::Arr(
                        cols.iter()
                            .filter_map(|&j| names.get(j))
                            .map(|s| Json::from(s.as_str()))
                            .collect(),
                    ),
                );
            }
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

/// A readable report at the confidence level [`DEFAULT_CONFIDENCE`] (see [`fit_human_at`]).
pub fn fit_human(problem: &LsqProblem, fit: &Fit) -> String {
    fit_human_at(problem, fit, DEFAULT_CONFIDENCE)
}

/// A readable report (our own layout): one paragraph per coefficient, then the
/// restrictions' prices and the evidence against them.
pub fn fit_human_at(problem: &LsqProblem, fit: &Fit, level: f64) -> String {
    let mut s = String::new();
    let names = problem.names();
    let _ = writeln!(
        s,
        "tangency fit ▸ {} observation(s) explain {} coefficient(s) under {} restriction(s) of rank {}",
        problem.p(),
        problem.n(),
        problem.q(),
        fit.rank_c
    );
    let _ = writeln!(
        s,
        "  residuals     {}RSS {} with {} residual degree(s) of freedom (p − n + rank C){}",
        if problem.weights().is_some() { "weighted " } else { "" },
        num(fit.rss, 10),
        fit.dof,
        fit.sigma()
            .map_or(String::new(), |sig| format!("; σ̂ = {}", num(sig, 8)))
    );
    if problem.ridge() > 0.0 {
        let _ = writeln!(s, "  ridge         λ = {}", num(problem.ridge(), 6));
    }
    let _ = writeln!(
        s,
        "  computed by   {} with {} refinement correction(s)",
        fit.method.as_str(),
        fit.refinement_steps
    );
    let table = fit.coefficient_inference(problem, level);
    let hc3 = fit.robust_standard_errors(problem, Robust::Hc3);
    let width = names.iter().map(|n| n.chars().count()).max().unwrap_or(1).max(4);
    let pct = num(100.0 * level, 4);
    match &table {
        Some(_) => {
            let _ = writeln!(
                s,
                "  coefficients  estimate ± standard error [HC3 robust]; t and its two-sided p (Student, {} dof); {pct}% range",
                fit.dof
            );
        }
        None => {
            let _ = writeln!(s, "  coefficients  estimate (no sampling statistics: see the notes)");
        }
    }
    for (j, b) in fit.coefficients.iter().enumerate() {
        let name = &names[j];
        let pad = width.saturating_sub(name.chars().count());
        let mut line = format!("    {name}{:pad$}  {}", "", num(*b, 10));
        if let Some(t) = &table {
            let c = &t[j];
            if c.fixed {
                line.push_str("  — fixed by the restrictions");
            } else {
                let robust = hc3.as_ref().map_or(String::new(), |v| format!(" [{}]", num(v[j], 6)));
                let _ = write!(
                    line,
                    " ± {}{robust}; t {}, p {}; {pct}%: {} … {}",
                    num(c.std_error, 6),
                    num(c.t.unwrap_or(f64::NAN), 4),
                    num(c.p_value.unwrap_or(f64::NAN), 3),
                    num(c.interval.0, 8),
                    num(c.interval.1, 8)
                );
            }
        } else if let Some(se) = &fit.standard_errors {
            let _ = write!(line, " ± {}", num(se[j], 6));
        }
        let _ = writeln!(s, "{line}");
    }
    if !fit.multipliers.is_empty() {
        let _ = writeln!(
            s,
            "  prices        of the restrictions, y (raising dᵢ by 1 changes ½·RSS by −yᵢ):"
        );
        for (i, y) in fit.multipliers.iter().enumerate() {
            let dep = if fit.dependent_restrictions.contains(&i) {
                "  (depends on the others: no price of its own)"
            } else {
                ""
            };
            let _ = writeln!(s, "    restriction {i}: {}{dep}", num(*y, 10));
        }
    }
    if !fit.inequality_restrictions.is_empty() {
        let active = fit.inequality_restrictions.iter().filter(|r| r.active).count();
        let _ = writeln!(
            s,
            "  inequalities  {active} of {} active; z ≥ 0 is the price (raising the bound by 1 changes ½·RSS by −z for ≤, +z for ≥):",
            fit.inequality_restrictions.len()
        );
        for r in &fit.inequality_restrictions {
            let state = if r.active {
                format!("active, z = {}", num(r.multiplier, 8))
            } else {
                "inactive".to_string()
            };
            let _ = writeln!(
                s,
                "    line {}: {} {} {} ({state})",
                r.line,
                num(r.value, 10),
                relation_word(r.relation),
                num(r.rhs, 10)
            );
        }
    }
    if let Some(t) = &fit.restriction_test {
        let _ = writeln!(
            s,
            "  evidence against the restrictions ({} of them against {} free residual degree(s)):",
            t.df1, t.df2
        );
        let _ = writeln!(
            s,
            "    exact F (Gaussian errors)   {} → p {}",
            num(t.statistic, 6),
            num(t.p_value, 3)
        );
        let _ = writeln!(
            s,
            "    Wald, large sample (χ²)     {} → p {}",
            num(t.wald, 6),
            num(t.wald_p_value, 3)
        );
        let _ = writeln!(
            s,
            "    likelihood ratio (χ²)       {} → p {}",
            num(t.likelihood_ratio, 6),
            num(t.likelihood_ratio_p_value, 3)
        );
        let _ = writeln!(
            s,
            "    score / multiplier (χ²)     {} → p {}",
            num(t.score, 6),
            num(t.score_p_value, 3)
        );
    }
    for n in &fit.notes {
        let _ = writeln!(s, "  note          {n}");
    }
    s
}

fn relation_word(r: super::restrict::Relation) -> &'static str {
    match r {
        super::restrict::Relation::AtMost => "<=",
        super::restrict::Relation::AtLeast => ">=",
        super::restrict::Relation::Equal => "=",
    }
}
