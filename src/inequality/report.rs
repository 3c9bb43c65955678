//! Reports of the inequality solver: one JSON object for tools, a readable text for people.

use std::fmt::Write as _;

use super::{InequalityProblem, InequalitySolution};
use crate::error::Error;
use crate::report::Json;

fn indices(v: &[usize]) -> Json {
    Json::Arr(v.iter().map(|i| Json::from(*i)).collect())
}

/// The JSON of a solved problem: the keys of the equality solver's JSON that apply
/// (`status`, `verdict`, `n`, `m`, `method`, `objective`, `primal_residual`, `dual_residual`),
/// plus `p`, `inequality_violation`, `dual_value`, `duality_gap`, `complementarity`,
/// `iterations`, `active_inequalities` (rows of G, 0-based) and `active_bounds`
/// (`{"lower": [...], "upper": [...]}`, 0-based variables), `timing` and `notes`.
pub fn solution_json(q: &InequalityProblem, s: &InequalitySolution) -> Json {
    let mut o = Json::object();
    o.set("status", "solved")
        .set("verdict", s.verdict.map(|v| v.as_str()))
        .set("n", q.n())
        .set("m", q.m())
        .set("p", q.p())
        .set("method", s.method.as_str())
        .set("objective", s.objective)
        .set("primal_residual", s.primal_residual)
        .set("dual_residual", s.dual_residual)
        .set("inequality_violation", s.inequality_violation)
        .set("dual_value", s.dual_value)
        .set("duality_gap", s.duality_gap)
        .set("complementarity", s.complementarity)
        .set("iterations", s.iterations)
        .set("active_inequalities", indices(&s.active_inequalities));
    let mut b = Json::object();
    b.set("lower", indices(&s.active_lower))
        .set("upper", indices(&s.active_upper));
    o.set("active_bounds", b);
    let mut t = Json::object();
    t.set("solve_s", s.seconds).set("factor_s", s.factor_seconds);
    o.set("timing", t);
    o.set(
        "notes",
        Json::Arr(s.notes.iter().map(|n| Json::from(n.as_str())).collect()),
    );
    o
}

/// Adds the evidence of an inequality-specific failure to an error JSON: `certificate`
/// (`y`, `z`, `w`, `value`, `residual`, `radius`) for an infeasible problem, `iterations`
/// and the residuals for a non-convergence.
pub fn add_error_evidence(o: &mut Json, err: &Error) {
    match err {
        Error::InfeasibleInequalities { certificate: c, .. } => {
            let mut j = Json::object();
            j.set("y", &c.y[..])
                .set("z", &c.z[..])
                .set("w", &c.w[..])
                .set("value", c.value)
                .set("residual", c.residual)
                .set("radius", c.radius);
            o.set("certificate", j);
        }
        Error::InteriorPointNotConverged {
            iterations,
            primal_residual,
            dual_residual,
            complementarity,
            ..
        } => {
            o.set("iterations", *iterations)
                .set("relative_primal_residual", *primal_residual)
                .set("relative_dual_residual", *dual_residual)
                .set("complementarity", *complementarity);
        }
        _ => {}
    }
}

/// A readable summary (the first entries of `x`, the active constraints, the certificate).
pub fn human(q: &InequalityProblem, s: &InequalitySolution) -> String {
    let mut t = String::new();
    let _ = writeln!(
        t,
        "tangency: solved (n = {}, m = {}, p = {}, interior point over {}, {} iteration(s))",
        q.n(),
        q.m(),
        q.p(),
        s.method.as_str(),
        s.iterations
    );
    let verdict = s.verdict.map_or("not certified", |v| v.as_str());
    let _ = writeln!(t, "  verdict     {verdict}");
    let _ = writeln!(t, "  objective   {:.12e}", s.objective);
    let _ = writeln!(
        t,
        "  dual value  {:.12e} (lower bound; duality gap {:.1e})",
        s.dual_value, s.duality_gap
    );
    let _ = writeln!(
        t,
        "  residuals   primal {:.1e}, inequality violation {:.1e}, dual {:.1e}, complementarity {:.1e}",
        s.primal_residual, s.inequality_violation, s.dual_residual, s.complementarity
    );
    let _ = writeln!(
        t,
        "  active      {} row(s) of G, {} lower and {} upper bound(s)",
        s.active_inequalities.len(),
        s.active_lower.len(),
        s.active_upper.len()
    );
    let shown = s.x.len().min(10);
    let _ = writeln!(
        t,
        "  x[..{shown}]     {}",
        s.x[..shown]
            .iter()
            .map(|v| format!("{v:+.6e}"))
            .collect::<Vec<_>>()
            .join(" ")
    );
    for n in &s.notes {
        let _ = writeln!(t, "  note        {n}");
    }
    t
}
