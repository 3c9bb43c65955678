#!/usr/bin/env python3
"""tangency's sparse backend against MKL PARDISO on the same problem directories, in one run.

For each case: writes the problem directory with `tangency generate` (once), then, for 1 and
2 threads, runs
  * tangency: `target/release/examples/sparse_threads DIR REPEATS THREADS` (medians of
    in-process runs: analysis, numeric factorization, refactorization, refined and
    certified solve, whole `tangency::solve`);
  * PARDISO: `scripts/reference_solve.py DIR --method pardiso --repeat REPEATS`
    with MKL_NUM_THREADS = OMP_NUM_THREADS = THREADS (its own phases, best of REPEATS);
and prints a Markdown table with the ratios tangency / PARDISO (< 1: tangency faster) and
the `uptime` load average taken just before each measurement. The machine may be shared:
read every figure with its load.

Needs: `cargo build --release --example sparse_threads --bin tangency`,
`pip install numpy scipy pypardiso`.
Usage: scripts/compare_sparse.py [--cases poisson-control:100,heat-cube:33] [--repeat 3]
       [--threads 1,2] [--out target/bench-problems]
"""
import argparse, json, os, subprocess, sys

ROOT = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
DEFAULT_CASES = ("poisson-control:100,poisson-control:200,poisson-control:300,stokes-mac:64,"
                 "stokes-mac:129,tied-lattice:100,tied-lattice:300,heat-cube:33")


def load():
    return open("/proc/loadavg").read().split()[0]


def reference_script():
    # Vendored from the project's shared tools.
    return os.path.join(ROOT, "scripts", "reference_solve.py")


def ours(directory, repeat, threads):
    exe = os.path.join(ROOT, "target", "release", "examples", "sparse_threads")
    out = subprocess.run([exe, directory, str(repeat), str(threads)], capture_output=True, text=True, check=True)
    line = next(l for l in out.stdout.splitlines() if l.startswith("JSON "))
    return json.loads(line[5:])


def pardiso(directory, repeat, threads):
    env = dict(os.environ, MKL_NUM_THREADS=str(threads), OMP_NUM_THREADS=str(threads))
    out = subprocess.run([sys.executable, reference_script(), directory, "--method", "pardiso",
                          "--repeat", str(repeat)], capture_output=True, text=True, check=True, env=env)
    return json.loads(out.stdout)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", default=DEFAULT_CASES)
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--threads", default="1,2")
    ap.add_argument("--out", default=os.path.join(ROOT, "target", "bench-problems"))
    a = ap.parse_args()
    tangency = os.path.join(ROOT, "target", "release", "tangency")
    print("| case (N) | threads | load | ours factor | PARDISO factor | ratio | ours refactor | PARDISO refactor "
          "| ratio | ours analyze+factor+solve | PARDISO analyze+factor+solve | ratio | ours backward error, inertia, "
          "forced, ordering | PARDISO inertia, perturbed |")
    print("|" + "---|" * 14)
    for case in a.cases.split(","):
        family, size = case.split(":")
        d = os.path.join(a.out, f"{family}-{size}")
        if not os.path.exists(os.path.join(d, "H.mtx")):
            subprocess.run([tangency, "generate", family, "--size", size, "--out", d], check=True,
                           stdout=subprocess.DEVNULL)
        for t in [int(x) for x in a.threads.split(",")]:
            la = load()
            o = ours(d, a.repeat, t)
            p = pardiso(d, a.repeat, t)
            p_total = p["analyze_s"] + p["factor_s"] + p["solve_s"]
            n = o["n"] + o["m"]
            print(f"| {family} {size} ({n}) | {t} (used {o['threads_used']}) | {la} | {o['factor_s']:.4f} | "
                  f"{p['factor_s']:.4f} | {o['factor_s'] / p['factor_s']:.2f} | {o['refactor_s']:.4f} | "
                  f"{p['refactor_s']:.4f} | {o['refactor_s'] / p['refactor_s']:.2f} | {o['total_s']:.4f} | "
                  f"{p_total:.4f} | {o['total_s'] / p_total:.2f} | {o['backward_error']:.1e}, {o['inertia']}, "
                  f"{o['forced_pivots']}, {o['ordering']} | [{p['inertia_positive']}, {p['inertia_negative']}], "
                  f"{p['perturbed_pivots']} |", flush=True)


if __name__ == "__main__":
    main()
