//! The `tangency` command line: a thin layer over the library.
//!
//! Exit codes: 0 a stationary point was computed (the verdict says which kind);
//! 2 invalid input or usage; 3 no solution (singular, infeasible, unbounded);
//! 4 an iterative method did not converge.

use std::path::PathBuf;
use std::process::ExitCode;

use clap::{Parser, Subcommand};
use tangency::report::{error_json, human, solution_json};
use tangency::{io, Error, Method, Options, Plan};

#[derive(Parser, Debug)]
#[command(name = "tangency", version, about = "Equality-constrained quadratic programs and their KKT systems")]
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
        /// Factorization method: auto or dense.
        #[arg(long, default_value = "auto")]
        method: String,
        /// Write x.mtx and multipliers.mtx into this directory.
        #[arg(long)]
        out: Option<PathBuf>,
        /// Print exactly one JSON object on stdout (whatever the outcome).
        #[arg(long)]
        json: bool,
    },
    /// Build, solve and explain a scenario of our own (a pinned spring lattice).
    Demo,
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
}

fn exit_code(err: &Error) -> u8 {
    if err.is_no_solution() {
        3
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
        Command::Demo => match tangency::demo::run() {
            Ok(text) => {
                print!("{text}");
                ExitCode::SUCCESS
            }
            Err(e) => {
                eprintln!("demo failed: {e}");
                ExitCode::from(exit_code(&e))
            }
        },
        Command::Solve { dir, method, out, json } => solve(&dir, &method, out.as_deref(), json),
        Command::Fit { dir, out, json } => fit(&dir, out.as_deref(), json),
    }
}

fn fit(dir: &std::path::Path, out: Option<&std::path::Path>, json: bool) -> ExitCode {
    use tangency::lsq::report::{fit_error_json, fit_human, fit_json};
    let fail = |err: Error, sizes: Option<(usize, usize, usize)>| {
        if json {
            println!("{}", fit_error_json(&err, sizes));
        } else {
            eprintln!("tangency: {}: {err}", if err.is_no_solution() { "no solution" } else { "invalid input" });
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
        let written = std::fs::create_dir_all(out)
            .map_err(|source| Error::Io {
                path: out.to_path_buf(),
                source,
            })
            .and_then(|_| io::write_vector(out.join("coefficients.mtx"), &result.coefficients))
            .and_then(|_| io::write_vector(out.join("multipliers.mtx"), &result.multipliers));
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

fn solve(dir: &std::path::Path, method: &str, out: Option<&std::path::Path>, json: bool) -> ExitCode {
    let fail = |err: Error, sizes: Option<(usize, usize)>, used: Option<&str>, inertia| {
        if json {
            println!("{}", error_json(&err, sizes, used, inertia));
        } else {
            eprintln!("tangency: {}: {err}", if err.is_no_solution() { "no solution" } else { "invalid input" });
        }
        ExitCode::from(exit_code(&err))
    };
    let method: Method = match method.parse() {
        Ok(m) => m,
        Err(e) => return fail(e, None, None, None),
    };
    let problem = match io::read_problem_dir(dir) {
        Ok(p) => p,
        Err(e) => return fail(e, None, None, None),
    };
    let sizes = Some((problem.n(), problem.m()));
    let options = Options {
        method,
        ..Default::default()
    };
    let plan = match Plan::analyze(&problem, &options) {
        Ok(p) => p,
        Err(e) => return fail(e, sizes, None, None),
    };
    let used = plan.method().as_str();
    let factorization = match plan.factor(&problem) {
        Ok(f) => f,
        Err(e) => return fail(e, sizes, Some(used), None),
    };
    let solution = match factorization.solve() {
        Ok(s) => s,
        Err(e) => return fail(e, sizes, Some(used), factorization.inertia()),
    };
    if let Some(out) = out {
        let written = std::fs::create_dir_all(out)
            .map_err(|source| Error::Io {
                path: out.to_path_buf(),
                source,
            })
            .and_then(|_| io::write_vector(out.join("x.mtx"), &solution.x))
            .and_then(|_| io::write_vector(out.join("multipliers.mtx"), &solution.y));
        if let Err(e) = written {
            return fail(e, sizes, Some(used), solution.inertia);
        }
    }
    if json {
        println!("{}", solution_json(&problem, &solution));
    } else {
        print!("{}", human(&problem, &solution));
        if let Some(out) = out {
            println!("  written     {} and {}", out.join("x.mtx").display(), out.join("multipliers.mtx").display());
        }
    }
    ExitCode::SUCCESS
}
