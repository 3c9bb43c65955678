//! Times the sparse backend phase by phase on a problem directory with one and two threads
//! (medians of repeated in-process runs): analysis, numeric factorization, refactorization
//! (same pattern, new values through `Factorization::refactor`), refined solve (with the
//! certification work: forward-error bound, inertia confirmation), and the whole
//! `tangency::solve`. Used to choose the thread rule and ordering rule of
//! `src/backend/sparse_ldlt.rs` and by `scripts/compare_sparse.py`.
//!
//! Run: `cargo run --release --example sparse_threads -- DIR [REPEATS] [THREADS,...]`
//! (default 5 repeats, threads "1,2"). Environment: `ND=0|1` forces nested dissection off
//! or on (default: the analysis decides); `FORCE_PAR=1` sets
//! `parallel_min_front_flops = 0` so that the threads are used whatever the rule says.
//! Prints a human-readable block and one `JSON {...}` line per thread count.

use std::time::Instant;

use faer::Par;
use tangency::backend::sparse_ldlt::{NestedDissection, SparseAnalysis};
use tangency::{Method, Options, Plan};

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(|a, b| a.total_cmp(b));
    v[v.len() / 2]
}

fn timed<T>(reps: usize, mut f: impl FnMut() -> T) -> f64 {
    median(
        (0..reps)
            .map(|_| {
                let t = Instant::now();
                std::hint::black_box(f());
                t.elapsed().as_secs_f64()
            })
            .collect(),
    )
}

fn main() {
    let mut args = std::env::args().skip(1);
    let dir = args.next().expect("usage: sparse_threads DIR [REPEATS] [THREADS,...]");
    let reps: usize = args.next().and_then(|s| s.parse().ok()).unwrap_or(5).max(1);
    let threads: Vec<usize> = args
        .next()
        .unwrap_or_else(|| "1,2".into())
        .split(',')
        .filter_map(|s| s.trim().parse().ok())
        .collect();
    let p = tangency::io::read_problem_dir(&dir).expect("read problem directory");
    let nd = match std::env::var("ND").as_deref() {
        Ok("0") => NestedDissection::Never,
        Ok("1") => NestedDissection::Always,
        _ => NestedDissection::Auto,
    };
    let force = std::env::var("FORCE_PAR").is_ok_and(|v| v == "1");
    for t in threads {
        let mut o = Options {
            method: Method::Sparse,
            ..Default::default()
        };
        o.sparse.par = if t <= 1 { Par::Seq } else { Par::rayon(t) };
        o.sparse.nested_dissection = nd;
        if force {
            o.sparse.parallel_min_front_flops = 0.0;
        }
        let analyze = timed(reps, || Plan::analyze(&p, &o).expect("analyze"));
        let plan = Plan::analyze(&p, &o).expect("analyze");
        let factor = timed(reps, || plan.factor(&p).expect("factor"));
        let mut f = plan.factor(&p).expect("factor");
        let refactor = timed(reps, || f.refactor(&p).expect("refactor"));
        let solve = timed(reps, || f.solve().expect("solve"));
        let total = timed(reps, || tangency::solve(&p, &o).expect("solve"));
        let s = f.solve().expect("solve");
        let a = SparseAnalysis::new(&p, &o.sparse).expect("analysis");
        let tc = a.thread_choice();
        println!(
            "threads {t}: analyze {analyze:.4} s  factor {factor:.4} s  refactor {refactor:.4} s  solve {solve:.4} s  \
             total {total:.4} s  backward_error {:.1e}  inertia {:?}\n   ordering {:?} trials {:?}\n   {tc:?}",
            s.backward_error,
            s.inertia,
            a.ordering().map(|t| t.name),
            a.orderings()
                .iter()
                .map(|t| format!("{}: amd {:.3e} work {:.3e}", t.name, t.flops, t.factor_flops))
                .collect::<Vec<_>>(),
        );
        let inertia = s.inertia.map_or("null".to_string(), |i| {
            format!("[{}, {}, {}]", i.positive, i.negative, i.zero)
        });
        println!(
            "JSON {{\"threads\": {t}, \"threads_used\": {}, \"n\": {}, \"m\": {}, \"analyze_s\": {analyze}, \
             \"factor_s\": {factor}, \"refactor_s\": {refactor}, \"solve_s\": {solve}, \"total_s\": {total}, \
             \"backward_error\": {:e}, \"inertia\": {inertia}, \"forced_pivots\": {}, \"ordering\": \"{}\"}}",
            tc.used,
            p.n(),
            p.m(),
            s.backward_error,
            f.backend().regularized_pivots(),
            a.ordering().map_or("none", |t| t.name),
        );
    }
}
