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
        /// Factorization method: auto, dense or riccati.
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
    },
    /// Build, solve and explain a scenario of our own (a pinned spring lattice).
    Demo {
        /// Instead: a receding-horizon control loop on a two-mass chain (Riccati re-solves).
        #[arg(long)]
        control: bool,
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
        } => solve(&dir, &method, stages.as_deref(), out.as_deref(), json),
    }
}

fn solve(
    dir: &std::path::Path,
    method: &str,
    stages: Option<&str>,
    out: Option<&std::path::Path>,
    json: bool,
) -> ExitCode {
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
    let stages: Option<tangency::stagewise::StageDims> = match (method, stages) {
        (Method::Riccati, None) => {
            return fail(
                Error::InvalidOption("--method riccati needs --stages NX,NU,N (state size, input size, horizon)".into()),
                None,
                None,
                None,
            )
        }
        (Method::Riccati, Some(s)) => match s.parse() {
            Ok(d) => Some(d),
            Err(e) => return fail(e, None, None, None),
        },
        (_, Some(_)) => {
            return fail(
                Error::InvalidOption("--stages applies only to --method riccati".into()),
                None,
                None,
                None,
            )
        }
        (_, None) => None,
    };
    let problem = match io::read_problem_dir(dir) {
        Ok(p) => p,
        Err(e) => return fail(e, None, None, None),
    };
    let sizes = Some((problem.n(), problem.m()));
    let options = Options {
        method,
        stages,
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
