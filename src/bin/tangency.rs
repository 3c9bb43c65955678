//! The `tangency` command line: a thin layer over the library.
//!
//! Exit codes: 0 a stationary point was computed (the verdict says which kind);
//! 2 invalid input or usage; 3 no solution (singular, infeasible, unbounded);
//! 4 an iterative method did not converge.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use tangency::report::{error_json, human, solution_json, Json};
use tangency::{diagnostics, io, Error, Method, Options, Plan};

#[derive(Parser, Debug)]
#[command(
    name = "tangency",
    version,
    about = "Equality-constrained quadratic programs and their KKT systems"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Solve the problem stored in a directory of Matrix Market files
    /// (H.mtx required; c.mtx, A.mtx, b.mtx optional).
    Solve {
        /// The problem directory.
        dir: PathBuf,
        /// Factorization method: auto, dense (LBLᵀ), sparse (regularized sparse LDLᵀ), schur
        /// (Cholesky of H and A H⁻¹ Aᵀ, convex problems), nullspace (QR of Aᵀ, reduced
        /// Hessian) or riccati (stage-wise recursion; needs --stages); or the iterative
        /// minres (preconditioned MINRES; see --tol, --max-iter, --schur-block) or pcg
        /// (projected conjugate gradients with the constraint preconditioner [|diag H| Aᵀ; A 0]
        /// factored once; convex problems, A of full row rank; see --tol, --max-iter).
        #[arg(long, default_value = "auto")]
        method: String,
        /// Stage dimensions NX,NU,N for --method riccati (required with it).
        #[arg(long)]
        stages: Option<String>,
        /// Write x.mtx and multipliers.mtx into this directory.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Print exactly one JSON object on stdout (whatever the outcome).
        #[arg(long)]
        json: bool,
        /// For --method minres: relative tolerance of the preconditioned KKT residual; for
        /// --method pcg: of the KKT residual in the 2-norm (both relative to ‖[−c; b]‖).
        #[arg(long, default_value_t = tangency::iterative::DEFAULT_TOLERANCE)]
        tol: f64,
        /// For --method minres or pcg: iteration limit (exit 4 when reached). --tol and
        /// --max-iter also bound each MINRES solve when auto falls back to MINRES.
        #[arg(long, default_value_t = tangency::iterative::DEFAULT_MAX_ITER)]
        max_iter: usize,
        /// For --method auto: memory (MiB) a sparse direct factorization may use; above the
        /// estimate from the symbolic analysis, auto uses preconditioned MINRES. Default: half
        /// of the available memory.
        #[arg(long)]
        memory_budget: Option<u64>,
        /// For --method minres: second preconditioner block, cholesky (sparse Cholesky of
        /// A diag(H)⁻¹ Aᵀ), diagonal (its diagonal) or matching (Pearson–Wathen: one sparse
        /// factorization of A₁D₁^(-1/2) ± A₂D₂^(-1/2); needs A = [A₁ A₂] with square blocks).
        #[arg(long, default_value = "cholesky")]
        schur_block: String,
        /// Also report how the optimal objective moves with b and c (df/db = −y, df/dc = x).
        #[arg(long)]
        sensitivity: bool,
    },
    /// Analyze a problem directory without solving for x: sizes, symmetry, constraint rank
    /// and dependent rows, inertia, condition estimate, predicted verdict.
    Inspect {
        /// The problem directory.
        dir: PathBuf,
        /// Print exactly one JSON object on stdout (whatever the outcome).
        #[arg(long)]
        json: bool,
    },
    /// Build, solve and explain a scenario of our own (a pinned spring lattice).
    Demo {
        /// Instead: a receding-horizon control loop on a two-mass chain (Riccati re-solves).
        #[arg(long)]
        control: bool,
    },
    /// Restricted least squares from a directory of Matrix Market files
    /// (F.mtx, g.mtx required; C.mtx, d.mtx, w.mtx optional).
    Fit {
        /// The fit directory.
        dir: PathBuf,
        /// Write coefficients.mtx and multipliers.mtx into this directory.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Print exactly one JSON object on stdout (whatever the outcome).
        #[arg(long)]
        json: bool,
    },
    /// Write a generated test problem as a problem directory.
    ///
    /// Families (invented scenarios for testing linear algebra, not design tools):
    /// poisson-control: control of a 2D Poisson equation on a K×K grid, n = 2K², m = K²;
    /// tied-lattice: a cross-braced spring lattice of K×K cells in two halves joined by tie
    /// constraints, with supports and multipoint constraints, n = 2(K+1)(K+2), m = 5K+3.
    Generate {
        /// poisson-control or tied-lattice.
        family: String,
        /// The size parameter K.
        #[arg(long)]
        size: usize,
        /// The directory to write (created if needed).
        #[arg(long)]
        out: PathBuf,
    },
}

/// Creates `out` and writes two vectors into it as Matrix Market arrays.
fn write_pair(out: &std::path::Path, first: (&str, &[f64]), second: (&str, &[f64])) -> Result<(), Error> {
    std::fs::create_dir_all(out).map_err(|source| Error::Io {
        path: out.to_path_buf(),
        source,
    })?;
    io::write_vector(out.join(first.0), first.1)?;
    io::write_vector(out.join(second.0), second.1)
}

/// The one-line human message on stderr for an outcome without a result.
fn print_error(err: &Error) {
    let kind = if err.is_no_solution() {
        "no solution"
    } else if err.is_not_converged() {
        "not converged"
    } else {
        "invalid input"
    };
    eprintln!("tangency: {kind}: {err}");
}

fn exit_code(err: &Error) -> u8 {
    if err.is_no_solution() {
        3
    } else if err.is_not_converged() {
        4
    } else {
        2
    }
}

fn main() -> ExitCode {
    let args: Vec<String> = std::env::args().collect();
    let json_requested = args.iter().any(|a| a == "--json");
    let cli = match Cli::try_parse_from(&args) {
        Ok(cli) => cli,
        Err(e) => {
            use clap::error::ErrorKind;
            if matches!(e.kind(), ErrorKind::DisplayHelp | ErrorKind::DisplayVersion) {
                let _ = e.print();
                return ExitCode::SUCCESS;
            }
            if json_requested {
                let err = Error::InvalidOption(e.to_string().trim().to_string());
                println!("{}", error_json(&err, None, None, None));
            } else {
                let _ = e.print();
            }
            return ExitCode::from(2);
        }
    };
    match cli.command {
        Command::Demo { control } => match if control {
            tangency::stagewise::demo::run()
        } else {
            tangency::demo::run()
        } {
            Ok(text) => {
                print!("{text}");
                ExitCode::SUCCESS
            }
            Err(e) => {
                eprintln!("demo failed: {e}");
                ExitCode::from(exit_code(&e))
            }
        },
        Command::Solve {
            dir,
            method,
            stages,
            out,
            json,
            tol,
            max_iter,
            memory_budget,
            schur_block,
            sensitivity,
        } => {
            if method == "pcg" {
                solve_pcg(&dir, tol, max_iter, out.as_deref(), json)
            } else if method == "minres" {
                solve_iterative(&dir, tol, max_iter, &schur_block, out.as_deref(), json)
            } else {
                let limits = (tol, max_iter, memory_budget.map(|mib| mib.saturating_mul(1 << 20)));
                solve(
                    &dir,
                    &method,
                    stages.as_deref(),
                    limits,
                    out.as_deref(),
                    json,
                    sensitivity,
                )
            }
        }
        Command::Inspect { dir, json } => inspect(&dir, json),
        Command::Generate { family, size, out } => generate(&family, size, &out),
        Command::Fit { dir, out, json } => fit(&dir, out.as_deref(), json),
    }
}

fn fit(dir: &std::path::Path, out: Option<&std::path::Path>, json: bool) -> ExitCode {
    use tangency::lsq::report::{fit_error_json, fit_human, fit_json};
    let fail = |err: Error, sizes: Option<(usize, usize, usize)>| {
        if json {
            println!("{}", fit_error_json(&err, sizes));
        } else {
            print_error(&err);
        }
        ExitCode::from(exit_code(&err))
    };
    let problem = match tangency::lsq::io::read_fit_dir(dir) {
        Ok(p) => p,
        Err(e) => return fail(e, None),
    };
    let sizes = Some((problem.p(), problem.n(), problem.q()));
    let result = match problem.fit(&tangency::lsq::FitOptions::default()) {
        Ok(r) => r,
        Err(e) => return fail(e, sizes),
    };
    if let Some(out) = out {
        let written = write_pair(
            out,
            ("coefficients.mtx", &result.coefficients),
            ("multipliers.mtx", &result.multipliers),
        );
        if let Err(e) = written {
            return fail(e, sizes);
        }
    }
    if json {
        println!("{}", fit_json(&problem, &result));
    } else {
        print!("{}", fit_human(&problem, &result));
    }
    ExitCode::SUCCESS
}

fn generate(family: &str, size: usize, out: &std::path::Path) -> ExitCode {
    let written = family
        .parse::<tangency::generate::Family>()
        .and_then(|f| tangency::generate::write_family(f, size, out));
    match written {
        Ok(p) => {
            println!("wrote {} (n = {}, m = {})", out.display(), p.n(), p.m());
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("tangency: {e}");
            ExitCode::from(2)
        }
    }
}

fn inspect(dir: &std::path::Path, json: bool) -> ExitCode {
    match diagnostics::inspect::inspect_dir(dir, &Options::default()) {
        Ok(info) => {
            if json {
                println!("{}", info.to_json());
            } else {
                print!("{info}");
            }
            ExitCode::SUCCESS
        }
        Err(err) => {
            if json {
                let mut o = error_json(&err, None, None, None);
                for key in ["constraint_rank", "dependent_rows", "condition_estimate"] {
                    o.set(key, Json::Null);
                }
                println!("{o}");
            } else {
                eprintln!("tangency: invalid input: {err}");
            }
            ExitCode::from(exit_code(&err))
        }
    }
}

/// `limits`: `(--tol, --max-iter, --memory-budget in bytes)`, for auto's fallback to MINRES.
fn solve(
    dir: &std::path::Path,
    method: &str,
    stages: Option<&str>,
    limits: (f64, usize, Option<u64>),
    out: Option<&std::path::Path>,
    json: bool,
    sensitivity: bool,
) -> ExitCode {
    let fail = |err: Error, sizes: Option<(usize, usize)>, used: Option<&str>, inertia, kappa: Option<f64>| {
        if json {
            let mut o = error_json(&err, sizes, used, inertia);
            o.set("condition_estimate", kappa.filter(|k| k.is_finite()));
            println!("{o}");
        } else {
            print_error(&err);
        }
        ExitCode::from(exit_code(&err))
    };
    let method: Method = match method.parse() {
        Ok(m) => m,
        Err(Error::InvalidOption(msg)) => {
            let msg = format!("{msg}; iterative: minres, pcg");
            return fail(Error::InvalidOption(msg), None, None, None, None);
        }
        Err(e) => return fail(e, None, None, None, None),
    };
    let stages: Option<tangency::stagewise::StageDims> = match (method, stages) {
        (Method::Riccati, None) => {
            return fail(
                Error::InvalidOption(
                    "--method riccati needs --stages NX,NU,N (state size, input size, horizon)".into(),
                ),
                None,
                None,
                None,
                None,
            )
        }
        (Method::Riccati, Some(s)) => match s.parse() {
            Ok(d) => Some(d),
            Err(e) => return fail(e, None, None, None, None),
        },
        (_, Some(_)) => {
            return fail(
                Error::InvalidOption("--stages applies only to --method riccati".into()),
                None,
                None,
                None,
                None,
            )
        }
        (_, None) => None,
    };
    let problem = match io::read_problem_dir(dir) {
        Ok(p) => p,
        Err(e) => return fail(e, None, None, None, None),
    };
    let sizes = Some((problem.n(), problem.m()));
    let options = Options {
        method,
        stages,
        iterative_tol: limits.0,
        iterative_max_iter: limits.1,
        memory_budget_bytes: limits.2,
        ..Default::default()
    };
    let plan = match Plan::analyze(&problem, &options) {
        Ok(p) => p,
        Err(e) => return fail(e, sizes, None, None, None),
    };
    let used = plan.method().as_str();
    let factorization = match plan.factor(&problem) {
        Ok(f) => f,
        Err(e) => return fail(e, sizes, Some(used), None, None),
    };
    // κ₁ of the equilibrated K behind the forward-error bound: estimated once per
    // factorization by the solve (at most diagnostics::condition::MAX_SOLVE_CALLS solves).
    // `condition_estimate` stays κ₁(K) of the original K (the JSON contract).
    let condition = diagnostics::condition::estimate(&factorization);
    let kappa = Some(condition.kappa);
    let solution = match factorization.solve() {
        Ok(s) => s,
        Err(e) => return fail(e, sizes, Some(used), factorization.inertia(), kappa),
    };
    let scaled_kappa = factorization.scaled_condition();
    if let Some(out) = out {
        let written = write_pair(out, ("x.mtx", &solution.x), ("multipliers.mtx", &solution.y));
        if let Err(e) = written {
            return fail(e, sizes, Some(used), solution.inertia, kappa);
        }
    }
    // The bound the solve was accepted by (equilibrated K).
    let bound = solution.forward_error_bound.unwrap_or(f64::INFINITY);
    let finite = |v: f64| v.is_finite().then_some(v);
    if json {
        let mut o = solution_json(&problem, &solution);
        o.set("condition_estimate", finite(condition.kappa));
        o.set("forward_error_bound", finite(bound));
        if sensitivity {
            let d = diagnostics::sensitivity::objective_sensitivity(&solution);
            let mut sens = Json::object();
            sens.set("objective_wrt_b", &d.wrt_b[..])
                .set("objective_wrt_c", &d.wrt_c[..]);
            o.set("sensitivity", sens);
        }
        println!("{o}");
    } else {
        print!("{}", human(&problem, &solution));
        println!(
            "  condition   κ₁(K) ≈ {:.2e}, κ₁(DKD) ≈ {:.2e} (D: equilibration); relative forward error ≤ {:.1e}",
            condition.kappa, scaled_kappa, bound
        );
        if sensitivity {
            println!("  sensitivity of the optimal objective (first order):");
            print!(
                "{}",
                diagnostics::sensitivity::objective_sensitivity(&solution).describe(20)
            );
        }
        if let Some(out) = out {
            println!(
                "  written     {} and {}",
                out.join("x.mtx").display(),
                out.join("multipliers.mtx").display()
            );
        }
    }
    ExitCode::SUCCESS
}

/// Reports a failed iterative solve (error JSON with the iterations and residual tail of a
/// non-convergence, or the message) and returns its exit code.
fn fail_iterative(err: Error, sizes: Option<(usize, usize)>, method: &str, json: bool) -> ExitCode {
    if json {
        println!("{}", error_json(&err, sizes, Some(method), None));
    } else {
        print_error(&err);
    }
    ExitCode::from(exit_code(&err))
}

/// The solution JSON of an iterative method with its Krylov figures: `iterations`,
/// `residual_history_tail` (the last few entries of `history`) and `relative_residual`.
fn iterative_json(
    problem: &tangency::Problem,
    solution: &tangency::Solution,
    iterations: usize,
    history: &[f64],
    relative_residual: f64,
) -> Json {
    use tangency::iterative::{history_tail, HISTORY_TAIL};
    let mut o = solution_json(problem, solution);
    o.set("iterations", iterations);
    o.set("residual_history_tail", history_tail(history, HISTORY_TAIL));
    o.set("relative_residual", relative_residual);
    o
}

/// `solve --method minres`: the iterative path (inertia and verdict are not observed).
fn solve_iterative(
    dir: &std::path::Path,
    tol: f64,
    max_iter: usize,
    schur_block: &str,
    out: Option<&std::path::Path>,
    json: bool,
) -> ExitCode {
    use tangency::iterative::{self, IterativeOptions, SecondBlock};
    let fail = |err: Error, sizes: Option<(usize, usize)>| fail_iterative(err, sizes, "minres", json);
    let second = match schur_block {
        "cholesky" => SecondBlock::Cholesky,
        "diagonal" => SecondBlock::Diagonal,
        "matching" => SecondBlock::Matching,
        other => {
            return fail(
                Error::InvalidOption(format!(
                    "unknown --schur-block '{other}'; known: cholesky, diagonal, matching"
                )),
                None,
            )
        }
    };
    let problem = match io::read_problem_dir(dir) {
        Ok(p) => p,
        Err(e) => return fail(e, None),
    };
    let sizes = Some((problem.n(), problem.m()));
    let options = IterativeOptions {
        tol,
        max_iter,
        second,
        ..Default::default()
    };
    let result = match iterative::solve(&problem, &options) {
        Ok(r) => r,
        Err(e) => return fail(e, sizes),
    };
    let solution = &result.solution;
    if let Some(out) = out {
        let written = write_pair(out, ("x.mtx", &solution.x), ("multipliers.mtx", &solution.y));
        if let Err(e) = written {
            return fail(e, sizes);
        }
    }
    if json {
        let o = iterative_json(
            &problem,
            solution,
            result.iterations,
            &result.residual_history,
            result.relative_residual,
        );
        println!("{o}");
    } else {
        print!("{}", human(&problem, solution));
        println!(
            "  iterations  {} (MINRES); true relative residual ‖rhs−Kz‖₂/‖rhs‖₂ {:.2e}",
            result.iterations, result.relative_residual
        );
        println!("  not verified: inertia of K and the kind of stationary point (minimizer or saddle)");
    }
    ExitCode::SUCCESS
}

/// `solve --method pcg`: projected CG (inertia not observed; the verdict is `saddle` only
/// when a direction of negative curvature proved it).
fn solve_pcg(dir: &std::path::Path, tol: f64, max_iter: usize, out: Option<&std::path::Path>, json: bool) -> ExitCode {
    use tangency::iterative::{pcg, PcgOptions, PcgStatus};
    let fail = |err: Error, sizes: Option<(usize, usize)>| fail_iterative(err, sizes, "pcg", json);
    let problem = match io::read_problem_dir(dir) {
        Ok(p) => p,
        Err(e) => return fail(e, None),
    };
    let sizes = Some((problem.n(), problem.m()));
    let options = PcgOptions {
        tol,
        max_iter,
        ..Default::default()
    };
    let result = match pcg(&problem, &options) {
        Ok(r) => r,
        Err(e) => return fail(e, sizes),
    };
    let solution = &result.solution;
    if let Some(out) = out {
        let written = write_pair(out, ("x.mtx", &solution.x), ("multipliers.mtx", &solution.y));
        if let Err(e) = written {
            return fail(e, sizes);
        }
    }
    let max_feas = result.feasibility_history.iter().fold(0.0f64, |a, v| a.max(*v));
    let curvature = match &result.status {
        PcgStatus::Converged => None,
        PcgStatus::NonPositiveCurvature { curvature, .. } => Some(*curvature),
    };
    if json {
        let mut o = iterative_json(
            &problem,
            solution,
            result.iterations,
            &result.residual_history,
            result.relative_residual,
        );
        o.set("max_iterate_infeasibility", max_feas);
        o.set("minres_iterations", result.minres_iterations);
        o.set("negative_curvature", curvature);
        println!("{o}");
    } else {
        print!("{}", human(&problem, solution));
        println!(
            "  iterations  {} (projected CG){}; true relative residual ‖rhs−Kz‖₂/‖rhs‖₂ {:.2e}",
            result.iterations,
            if result.minres_iterations > 0 {
                format!(" + {} (MINRES)", result.minres_iterations)
            } else {
                String::new()
            },
            result.relative_residual
        );
        println!("  verified    every CG iterate feasible: max ‖Ax_k−b‖∞ = {max_feas:.1e}");
        match curvature {
            None => {
                println!("  not verified: inertia of K and convexity (positive curvature along the CG directions only)")
            }
            Some(k) => {
                println!("  curvature   a feasible direction with pᵀHp/‖p‖² = {k:.2e} was found: no unique minimizer")
            }
        }
    }
    ExitCode::SUCCESS
}
