//! The `tangency` command line: a thin layer over the library.
//!
//! Exit codes: 0 a stationary point was computed (the verdict says which kind);
//! 2 invalid input or usage; 3 no solution (singular, infeasible, unbounded);
//! 4 an iterative method did not converge.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use tangency::report::{error_json, human, set_vectors, solution_json, Json};
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
        /// Stage dimensions NX,NU,N for --method riccati (required with it; refused with
        /// other methods).
        #[arg(long)]
        stages: Option<String>,
        /// Write x.mtx and multipliers.mtx into this directory.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Print exactly one JSON object on stdout (whatever the outcome).
        #[arg(long)]
        json: bool,
        /// With --json: include `x` and `multipliers` when n + m is at most this many entries
        /// (default 100000); above it both are null and a note says so. 0 leaves them out.
        #[arg(long)]
        json_vectors: Option<usize>,
        /// For --method minres: relative tolerance of the preconditioned KKT residual; for
        /// --method pcg: of the KKT residual in the 2-norm (both relative to ‖[−c; b]‖); for
        /// --method auto: of each MINRES solve when auto falls back to MINRES. Default 1e-10.
        /// Refused with the direct methods.
        #[arg(long)]
        tol: Option<f64>,
        /// For --method minres, pcg or auto (its MINRES fallback): iteration limit (exit 4 when
        /// reached). Default 10000. Refused with the direct methods.
        #[arg(long)]
        max_iter: Option<usize>,
        /// For --method auto only: memory (MiB) a sparse direct factorization may use; above the
        /// estimate from the symbolic analysis, auto uses preconditioned MINRES. Default: half
        /// of the available memory.
        #[arg(long)]
        memory_budget: Option<u64>,
        /// For --method minres only: second preconditioner block, cholesky (sparse Cholesky of
        /// A diag(H)⁻¹ Aᵀ, the default), diagonal (its diagonal) or matching (Pearson–Wathen: one
        /// sparse factorization of A₁D₁^(-1/2) ± A₂D₂^(-1/2); needs A = [A₁ A₂] with square blocks).
        #[arg(long)]
        schur_block: Option<String>,
        /// Also report how the optimal objective moves with b and c (df/db = −y, df/dc = x).
        /// Direct methods only (refused with minres and pcg, whose verdict is not certified).
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
    /// Restricted least squares: minimize ½‖W^½(Fβ − g)‖² + ½λ‖β‖² subject to Cβ = d.
    ///
    /// F (p×n) is the design matrix (one row per observation, one column per coefficient),
    /// g (p) the observed responses, w (p, positive) the weights (W = diag(w), default all
    /// ones), C (q×n) and d (q) the linear restrictions on the coefficients β, λ the ridge.
    /// The directory holds either data.csv (a header row of names, then one observation per
    /// row: the response column, by default the first, gives g; the others give the columns
    /// of F and name the coefficients) or the Matrix Market files F.mtx, g.mtx and optionally
    /// C.mtx, d.mtx, w.mtx (coefficients named b0, b1, …). Restrictions may also be written
    /// as equations against the names, in restrictions.txt (one per line) or with --restrict:
    /// a term is NUMBER, NAME, NUMBER*NAME or NUMBER NAME, joined by + or -, one '=', '<='
    /// or '>=' per restriction; '#' starts a comment ("x1 + x2 = 1", "2*x3 - x4 = 0",
    /// "x5 >= 0": inequality restrictions are fitted exactly and their active set reported).
    /// Reports β with standard errors, t statistics, two-sided p-values, confidence
    /// intervals, HC0–HC3 robust standard errors, the multipliers y (d(½·RSS)/dd = −y) and
    /// the F, Wald, likelihood-ratio and score tests of the restrictions.
    Fit {
        /// The fit directory.
        dir: PathBuf,
        /// A restriction equation against the coefficient names (repeatable).
        #[arg(long = "restrict")]
        restrict: Vec<String>,
        /// data.csv only: the response column (default: the first column).
        #[arg(long)]
        response: Option<String>,
        /// data.csv only: the weights column (default: all weights 1).
        #[arg(long)]
        weights: Option<String>,
        /// data.csv only: add a column of ones named `intercept` in front of F.
        #[arg(long)]
        intercept: bool,
        /// Ridge parameter λ ≥ 0 (adds ½λ‖β‖²; sampling statistics are then not reported).
        #[arg(long, default_value_t = 0.0)]
        ridge: f64,
        /// Confidence level of the intervals, in (0, 1).
        #[arg(long, default_value_t = 0.95)]
        level: f64,
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

/// Adds the command-line spelling to library messages that name a setting by its meaning
/// (the library speaks of "the tolerance" and "the sparse method"; here they are `--tol`
/// and `--method sparse`).
fn cli_words(err: Error) -> Error {
    match err {
        Error::InvalidOption(msg) if msg.starts_with("the tolerance must lie") => {
            Error::InvalidOption(format!("--tol: {msg}"))
        }
        Error::Resources { detail }
            if detail.ends_with("the sparse method (or auto) handles a problem of this size") =>
        {
            Error::Resources {
                detail: format!("{detail} (--method sparse or auto)"),
            }
        }
        other => other,
    }
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

/// Which method-specific options of `solve` the user wrote on the command line.
struct GivenOptions {
    stages: bool,
    tol: bool,
    max_iter: bool,
    memory_budget: bool,
    schur_block: bool,
    sensitivity: bool,
}

/// Refuses options that would do nothing with `method` (one rule for every method: an
/// option is accepted only where it changes the result).
fn check_applicable(method: &str, given: &GivenOptions) -> Result<(), Error> {
    let iterative = matches!(method, "minres" | "pcg");
    let mut refused: Vec<&str> = Vec::new();
    if given.stages && method != "riccati" {
        refused.push("--stages (stage dimensions: only --method riccati uses them)");
    }
    if given.schur_block && method != "minres" {
        refused.push("--schur-block (only --method minres has a Schur block)");
    }
    if given.memory_budget && method != "auto" {
        refused.push("--memory-budget (only --method auto chooses by memory)");
    }
    if !iterative && method != "auto" {
        if given.tol {
            refused.push("--tol (only minres, pcg and auto's MINRES fallback iterate)");
        }
        if given.max_iter {
            refused.push("--max-iter (only minres, pcg and auto's MINRES fallback iterate)");
        }
    }
    if given.sensitivity && iterative {
        refused.push("--sensitivity (needs a direct method: the iterative methods do not certify the verdict)");
    }
    if refused.is_empty() {
        Ok(())
    } else {
        Err(Error::InvalidOption(format!(
            "option(s) that do nothing with --method {method}: {}",
            refused.join("; ")
        )))
    }
}

/// Where and how a solve is shown: `--out`, `--json` and the JSON vector limit.
#[derive(Copy, Clone)]
struct Shown<'a> {
    out: Option<&'a std::path::Path>,
    json: bool,
    vectors: usize,
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
            json_vectors,
            tol,
            max_iter,
            memory_budget,
            schur_block,
            sensitivity,
        } => {
            let given = GivenOptions {
                stages: stages.is_some(),
                tol: tol.is_some(),
                max_iter: max_iter.is_some(),
                memory_budget: memory_budget.is_some(),
                schur_block: schur_block.is_some(),
                sensitivity,
            };
            if let Err(err) = check_applicable(&method, &given) {
                if json {
                    println!("{}", error_json(&err, None, None, None));
                } else {
                    print_error(&err);
                }
                return ExitCode::from(exit_code(&err));
            }
            let tol = tol.unwrap_or(tangency::iterative::DEFAULT_TOLERANCE);
            let max_iter = max_iter.unwrap_or(tangency::iterative::DEFAULT_MAX_ITER);
            let vectors = json_vectors.unwrap_or(tangency::report::JSON_VECTOR_LIMIT);
            let schur_block = schur_block.unwrap_or_else(|| "cholesky".to_string());
            let shown = Shown {
                out: out.as_deref(),
                json,
                vectors,
            };
            if method == "distributed" {
                return solve_distributed(&dir, out.as_deref(), json);
            }
            if let Some(code) = refuse_iterative_with_inequalities(&dir, &method, json) {
                code
            } else if method == "pcg" {
                solve_pcg(&dir, tol, max_iter, shown)
            } else if method == "minres" {
                solve_iterative(&dir, tol, max_iter, &schur_block, shown)
            } else {
                let limits = (tol, max_iter, memory_budget.map(|mib| mib.saturating_mul(1 << 20)));
                solve(&dir, &method, stages.as_deref(), limits, shown, sensitivity)
            }
        }
        Command::Inspect { dir, json } => inspect(&dir, json),
        Command::Generate { family, size, out } => generate(&family, size, &out),
        Command::Fit {
            dir,
            restrict,
            response,
            weights,
            intercept,
            ridge,
            level,
            out,
            json,
        } => {
            let input = tangency::lsq::input::FitInput {
                response,
                weights,
                intercept,
                restrictions: restrict,
                ridge,
            };
            fit(&dir, &input, level, out.as_deref(), json)
        }
    }
}

fn fit(
    dir: &std::path::Path,
    input: &tangency::lsq::input::FitInput,
    level: f64,
    out: Option<&std::path::Path>,
    json: bool,
) -> ExitCode {
    use tangency::lsq::report::{fit_error_json, fit_human_at, fit_json_at};
    let fail = |err: Error, sizes: Option<(usize, usize, usize)>, names: Option<&[String]>| {
        if json {
            println!("{}", fit_error_json(&err, sizes, names));
        } else {
            print_error(&err);
        }
        ExitCode::from(exit_code(&err))
    };
    if !(level > 0.0 && level < 1.0) {
        let err = Error::InvalidOption(format!("--level {level} must lie strictly between 0 and 1"));
        return fail(err, None, None);
    }
    let problem = match tangency::lsq::input::read_fit(dir, input) {
        Ok(p) => p,
        Err(e) => return fail(e, None, None),
    };
    let sizes = Some((problem.p(), problem.n(), problem.q()));
    let result = match problem.fit(&tangency::lsq::FitOptions::default()) {
        Ok(r) => r,
        Err(e) => return fail(e, sizes, Some(problem.names())),
    };
    if let Some(out) = out {
        let written = write_pair(
            out,
            ("coefficients.mtx", &result.coefficients),
            ("multipliers.mtx", &result.multipliers),
        );
        if let Err(e) = written {
            return fail(e, sizes, Some(problem.names()));
        }
    }
    if json {
        println!("{}", fit_json_at(&problem, &result, level));
    } else {
        print!("{}", fit_human_at(&problem, &result, level));
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
            // An infeasible or unbounded problem has no solution: exit 3 with the diagnosis,
            // as `solve` would, instead of reporting a successful inspection.
            let no_solution = info.no_solution;
            if json {
                let mut o = info.to_json();
                if let Some(status) = no_solution {
                    o.set("status", status);
                }
                println!("{o}");
            } else {
                print!("{info}");
                if let Some(status) = no_solution {
                    eprintln!("tangency: no solution ({status}): {}", info.diagnosis);
                }
            }
            if no_solution.is_some() {
                ExitCode::from(3)
            } else {
                ExitCode::SUCCESS
            }
        }
        Err(err) => {
            if json {
                let mut o = error_json(&err, None, None, None);
                for key in ["constraint_rank", "dependent_rows", "condition_estimate"] {
                    o.set(key, Json::Null);
                }
                println!("{o}");
            } else {
                print_error(&err);
            }
            ExitCode::from(exit_code(&err))
        }
    }
}

/// The method that produced an error of `Plan::factor`: the rank analysis (null-space
/// method) is the only source of `infeasible` and `unbounded`, whichever method was planned.
fn method_of_factor_error(err: &Error, planned: &'static str) -> &'static str {
    match err {
        Error::Infeasible { .. } | Error::Unbounded { .. } => "nullspace",
        _ => planned,
    }
}

/// Writes `x.mtx` and `multipliers.mtx` when `--out` was given.
fn write_solution(shown: Shown<'_>, solution: &tangency::Solution) -> Result<(), Error> {
    match shown.out {
        Some(out) => write_pair(out, ("x.mtx", &solution.x), ("multipliers.mtx", &solution.y)),
        None => Ok(()),
    }
}

/// The line of the readable report naming the files written by `--out`.
fn print_written(shown: Shown<'_>) {
    if let Some(out) = shown.out {
        println!(
            "  written     {} and {}",
            out.join("x.mtx").display(),
            out.join("multipliers.mtx").display()
        );
    }
}

/// `limits`: `(--tol, --max-iter, --memory-budget in bytes)`, for auto's fallback to MINRES.
fn solve(
    dir: &std::path::Path,
    method: &str,
    stages: Option<&str>,
    limits: (f64, usize, Option<u64>),
    shown: Shown<'_>,
    sensitivity: bool,
) -> ExitCode {
    let json = shown.json;
    let fail = |err: Error, sizes: Option<(usize, usize)>, used: Option<&str>, inertia, kappa: Option<f64>| {
        let err = cli_words(err);
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
    // G.mtx, h.mtx, lo.mtx, hi.mtx present: the interior-point solver (issue 17).
    match tangency::inequality::read_inequalities(dir, &problem) {
        Ok(Some(q)) => return solve_inequalities(&q, &options, shown),
        Ok(None) => {}
        Err(e) => return fail(e, sizes, None, None, None),
    }
    let plan = match Plan::analyze(&problem, &options) {
        Ok(p) => p,
        Err(e) => return fail(e, sizes, None, None, None),
    };
    let planned = plan.method().as_str();
    let factorization = match plan.factor(&problem) {
        Ok(f) => f,
        Err(e) => {
            let used = method_of_factor_error(&e, planned);
            return fail(e, sizes, Some(used), None, None);
        }
    };
    // The backend that holds the factors (after any fallback or rank analysis).
    let used = factorization.backend().method().as_str();
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
    if let Err(e) = write_solution(shown, &solution) {
        return fail(e, sizes, Some(used), solution.inertia, kappa);
    }
    // The bound the solve was accepted by (equilibrated K).
    let bound = solution.forward_error_bound.unwrap_or(f64::INFINITY);
    let finite = |v: f64| v.is_finite().then_some(v);
    if json {
        let mut o = solution_json(&problem, &solution);
        set_vectors(&mut o, &solution.x, &solution.y, shown.vectors);
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
            "  condition   {}",
            condition_line(condition.kappa, condition.solves, scaled_kappa, bound)
        );
        if sensitivity {
            println!("  sensitivity of the optimal objective (first order):");
            print!(
                "{}",
                diagnostics::sensitivity::objective_sensitivity(&solution).describe(20)
            );
        }
        print_written(shown);
    }
    ExitCode::SUCCESS
}

/// `solve --method distributed`: MUMPS on MPI ranks (`mpirun -n P tangency solve DIR --method
/// distributed`), see `tangency::distributed::cli`; without the `mpi` feature, invalid usage.
fn solve_distributed(dir: &std::path::Path, out: Option<&std::path::Path>, json: bool) -> ExitCode {
    #[cfg(feature = "mpi")]
    {
        ExitCode::from(tangency::distributed::cli::run_solve(dir, out, json))
    }
    #[cfg(not(feature = "mpi"))]
    {
        let _ = (dir, out);
        let err = Error::InvalidOption(
            "--method distributed needs a tangency built with the `mpi` feature \
             (cargo build --release --features mpi), run under mpirun -n P"
                .into(),
        );
        if json {
            println!("{}", error_json(&err, None, Some("distributed"), None));
        } else {
            print_error(&err);
        }
        ExitCode::from(2)
    }
}

/// The condition line of the readable report: κ estimate and the forward-error bound it
/// implies, in words when the bound says nothing (K singular to working precision, or a
/// bound of 1 or more).
fn condition_line(kappa: f64, solves: usize, scaled_kappa: f64, bound: f64) -> String {
    use tangency::report::num;
    if !kappa.is_finite() {
        if bound.is_finite() && bound < 1.0 {
            // The rank analysis solved a reduced (nonsingular) system: its bound holds.
            return format!(
                "κ₁(K) = ∞ (K is singular: dependent rows were dropped); relative forward error of the \
                 reduced system's solution ≤ {}",
                num(bound, 2)
            );
        }
        return "κ₁(K) = ∞ (K is singular to working precision): no forward-error bound; the residuals \
                and backward error above certify the computed point"
            .to_string();
    }
    let bound_words = if bound.is_finite() && bound < 1.0 {
        format!("relative forward error ≤ {}", num(bound, 2))
    } else {
        "the estimate bounds no digit of x (the residuals and backward error still hold)".to_string()
    };
    let scaled = if scaled_kappa.is_finite() {
        format!(", κ₁(DKD) ≈ {} (D: equilibration)", num(scaled_kappa, 3))
    } else {
        String::new()
    };
    format!("κ₁(K) ≈ {} ({solves} solve(s)){scaled}; {bound_words}", num(kappa, 3))
}

/// Reports a failed iterative solve (error JSON with the iterations and residual tail of a
/// non-convergence, or the message) and returns its exit code.
fn fail_iterative(err: Error, sizes: Option<(usize, usize)>, method: &str, json: bool) -> ExitCode {
    let err = cli_words(err);
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
    vectors: usize,
) -> Json {
    use tangency::iterative::{history_tail, HISTORY_TAIL};
    let mut o = solution_json(problem, solution);
    set_vectors(&mut o, &solution.x, &solution.y, vectors);
    o.set("iterations", iterations);
    o.set("residual_history_tail", history_tail(history, HISTORY_TAIL));
    o.set("relative_residual", relative_residual);
    o
}

/// `solve --method minres`: the iterative path (inertia and verdict are not observed).
fn solve_iterative(dir: &std::path::Path, tol: f64, max_iter: usize, schur_block: &str, shown: Shown<'_>) -> ExitCode {
    use tangency::iterative::{self, IterativeOptions, SecondBlock};
    let json = shown.json;
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
    if let Err(e) = write_solution(shown, solution) {
        return fail(e, sizes);
    }
    if json {
        let o = iterative_json(
            &problem,
            solution,
            result.iterations,
            &result.residual_history,
            result.relative_residual,
            shown.vectors,
        );
        println!("{o}");
    } else {
        print!("{}", human(&problem, solution));
        println!(
            "  iterations  {} (MINRES); true relative residual ‖rhs−Kz‖₂/‖rhs‖₂ {}",
            result.iterations,
            tangency::report::num(result.relative_residual, 3)
        );
        println!("  not verified: inertia of K and the kind of stationary point (minimizer or saddle)");
        print_written(shown);
    }
    ExitCode::SUCCESS
}

/// `solve --method pcg`: projected CG (inertia not observed; the verdict is `saddle` only
/// when a direction of negative curvature proved it).
fn solve_pcg(dir: &std::path::Path, tol: f64, max_iter: usize, shown: Shown<'_>) -> ExitCode {
    use tangency::iterative::{pcg, PcgOptions, PcgStatus};
    use tangency::report::num;
    let json = shown.json;
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
    if let Err(e) = write_solution(shown, solution) {
        return fail(e, sizes);
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
            shown.vectors,
        );
        o.set("max_iterate_infeasibility", max_feas);
        o.set("minres_iterations", result.minres_iterations);
        o.set("negative_curvature", curvature);
        println!("{o}");
    } else {
        print!("{}", human(&problem, solution));
        println!(
            "  iterations  {} (projected CG){}; true relative residual ‖rhs−Kz‖₂/‖rhs‖₂ {}",
            result.iterations,
            if result.minres_iterations > 0 {
                format!(" + {} (MINRES)", result.minres_iterations)
            } else {
                String::new()
            },
            num(result.relative_residual, 3)
        );
        println!(
            "  verified    every CG iterate feasible: max ‖Ax_k−b‖∞ = {}",
            num(max_feas, 2)
        );
        match curvature {
            None => {
                println!("  not verified: inertia of K and convexity (positive curvature along the CG directions only)")
            }
            Some(k) => {
                println!(
                    "  curvature   a feasible direction with pᵀHp/‖p‖² = {} was found: no unique minimizer",
                    num(k, 3)
                )
            }
        }
        print_written(shown);
    }
    ExitCode::SUCCESS
}

/// `--method minres|pcg` cannot handle inequalities: refuse instead of ignoring the files.
fn refuse_iterative_with_inequalities(dir: &std::path::Path, method: &str, json: bool) -> Option<ExitCode> {
    let has = tangency::inequality::INEQUALITY_FILES
        .iter()
        .any(|f| dir.join(f).exists());
    if !(has && (method == "minres" || method == "pcg")) {
        return None;
    }
    let err = Error::InvalidOption(format!(
        "--method {method} solves equality-constrained problems only, but the directory holds inequality files \
         ({}); use a direct method (auto, dense, sparse, schur, nullspace, riccati)",
        tangency::inequality::INEQUALITY_FILES.join(", ")
    ));
    if json {
        println!("{}", error_json(&err, None, Some(method), None));
    } else {
        print_error(&err);
    }
    Some(ExitCode::from(exit_code(&err)))
}

/// `solve` of a directory with inequality files: the interior-point method, its JSON (the
/// keys of `tangency::inequality::report::solution_json`) and, with `--out`, `x.mtx`,
/// `multipliers.mtx`, `inequality_multipliers.mtx` and `bound_multipliers.mtx`.
fn solve_inequalities(q: &tangency::inequality::InequalityProblem, options: &Options, shown: Shown<'_>) -> ExitCode {
    use tangency::inequality::{report, InteriorPoint, InteriorPointOptions};
    let Shown { out, json, vectors } = shown;
    let fail = |err: Error| {
        if json {
            let mut o = error_json(&err, Some((q.n(), q.m())), Some("interior-point"), None);
            report::add_error_evidence(&mut o, &err);
            println!("{o}");
        } else {
            print_error(&err);
        }
        ExitCode::from(exit_code(&err))
    };
    let opts = InteriorPointOptions {
        kkt: *options,
        ..Default::default()
    };
    let solution = match InteriorPoint::new(q, &opts).and_then(|mut ipm| ipm.solve(q)) {
        Ok(s) => s,
        Err(e) => return fail(e),
    };
    if let Some(out) = out {
        let written = write_pair(out, ("x.mtx", &solution.x), ("multipliers.mtx", &solution.y))
            .and_then(|()| tangency::inequality::write_multipliers(out, &solution.z, &solution.w));
        if let Err(e) = written {
            return fail(e);
        }
    }
    if json {
        let mut o = report::solution_json(q, &solution);
        // The same size limit as the equality-constrained JSON, for all four vectors at once.
        let (z, w) = (&solution.z[..], &solution.w[..]);
        let total = [solution.x.len(), solution.y.len(), z.len(), w.len()]
            .iter()
            .sum::<usize>();
        tangency::report::set_vectors(
            &mut o,
            &solution.x,
            &solution.y,
            vectors.saturating_sub(total - solution.x.len() - solution.y.len()),
        );
        if total <= vectors {
            o.set("inequality_multipliers", z).set("bound_multipliers", w);
        } else {
            o.set("inequality_multipliers", Json::Null)
                .set("bound_multipliers", Json::Null);
        }
        println!("{o}");
    } else {
        print!("{}", report::human(q, &solution));
    }
    ExitCode::SUCCESS
}
