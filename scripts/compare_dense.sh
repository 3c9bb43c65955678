#!/usr/bin/env bash
# Side-by-side timing of tangency's dense paths and LAPACK called directly (dsytrf + dsytrs,
# and a hand-written potrf/trsm/syrk/potrf Schur solve: scripts/lapack_dense_ref.py) on the
# same matrices, one and two threads, in one run; the f64 GEMM rate is measured in the same
# run as the peak. Prints a table of medians, ratios and fractions of that peak, and the
# machine load (uptime) before and after.
# Needs: pip install numpy scipy.
# Usage: scripts/compare_dense.sh [OUTDIR] [REPEATS] [SIZES]   (SIZES default 650,2000,4000)
set -euo pipefail
cd "$(dirname "$0")/.."
out=${1:-target/dense-bench}
rep=${2:-5}
sizes=${3:-650,2000,4000}
mkdir -p "$out"
cargo build --release --quiet --example dense_compare
: > "$out/ours.jsonl"
: > "$out/lapack.jsonl"
echo "load before: $(uptime)"
for t in 1 2; do
  RAYON_NUM_THREADS=$t target/release/examples/dense_compare "$out" "$rep" "$t" "$sizes" >> "$out/ours.jsonl"
  dirs=$(python3 -c 'import json,sys; print("\n".join(sorted({json.loads(l)["dir"] for l in open(sys.argv[1])})))' "$out/ours.jsonl")
  # shellcheck disable=SC2086
  python3 scripts/lapack_dense_ref.py $dirs --threads "$t" --repeat "$rep" >> "$out/lapack.jsonl"
done
echo "load after:  $(uptime)"
python3 - "$out/ours.jsonl" "$out/lapack.jsonl" <<'PY'
import json, statistics as st, sys
ours = [json.loads(l) for l in open(sys.argv[1])]
lap = [json.loads(l) for l in open(sys.argv[2])]
peak = {r["threads"]: r["gemm_gflops"] for r in lap if "gemm_gflops" in r}
ref = {(r["name"], r["threads"]): r for r in lap if "name" in r}
for t, g in sorted(peak.items()):
    print(f"f64 GEMM peak, {t} thread(s): {g:.1f} GFLOP/s")
print(f"{'problem':<16} {'thr':>3} {'path':<12} {'ours_med':>9} {'lapack':>9} {'ratio':>6} {'peak_frac':>9} {'lapack_frac':>11} {'bwd':>8} {'f32':>4} inertia")
for o in ours:
    r = ref.get((o["name"], o["threads"]))
    if r is None:
        continue
    med = st.median(o["times_s"])
    n = o["N"]
    if o["path"] == "schur":
        lt, lflops, what = st.median(r["schur_s"]), o["flops"], "schur"
    else:
        lt, lflops, what = st.median(r["sytrf_sytrs_s"]), n ** 3 / 3, "sytrf"
    pk = peak[o["threads"]] * 1e9
    print(f"{o['name']:<16} {o['threads']:>3} {o['path']:<12} {med:9.4f} {lt:9.4f} {med/lt:6.2f} "
          f"{o['flops']/med/pk:9.2f} {lflops/lt/pk:11.2f} {o['backward_error']:8.1e} {str(o['single'])[0]:>4} {o['inertia']}"
          f"  (vs {what})")
for r in lap:
    if "name" in r:
        print(f"LAPACK {r['name']:<16} thr {r['threads']}: sytrf+sytrs median {st.median(r['sytrf_sytrs_s']):.4f} s "
              f"(bwd {r['sytrf_backward_error']:.1e})"
              + (f", Schur median {st.median(r['schur_s']):.4f} s (bwd {r['schur_backward_error']:.1e})" if "schur_s" in r else ""))
PY
