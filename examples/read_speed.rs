//! Times reading a problem directory (`io::read_problem_dir`: the four Matrix Market files,
//! validation and the problem's assembly) for a side-by-side comparison with scipy's
//! `mmread` on the same files:
//!
//! ```text
//! cargo run --release --example read_speed -- DIR [REPEATS]
//! python3 -c "import time,scipy.io as s; t=time.perf_counter(); [s.mmread('DIR/%s.mtx'%f) for f in 'AHbc']; print(time.perf_counter()-t)"
//! ```
//!
//! Prints the median and the best of the repeats (default 7).

use std::time::Instant;

fn main() -> Result<(), tangency::Error> {
    let mut args = std::env::args().skip(1);
    let dir = args.next().expect("usage: read_speed DIR [REPEATS]");
    let repeats: usize = args.next().map_or(7, |s| s.parse().expect("REPEATS is a count"));
    let mut times = Vec::with_capacity(repeats);
    for _ in 0..repeats.max(1) {
        let t = Instant::now();
        let p = tangency::io::read_problem_dir(&dir)?;
        times.push(t.elapsed().as_secs_f64());
        std::hint::black_box(p.n());
    }
    times.sort_by(f64::total_cmp);
    println!(
        "read_problem_dir {dir}: median {:.4} s, best {:.4} s over {} run(s)",
        times[times.len() / 2],
        times[0],
        times.len()
    );
    Ok(())
}
