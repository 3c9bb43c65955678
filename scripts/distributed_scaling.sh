#!/usr/bin/env bash
# Strong scaling of `tangency solve --method distributed` (MUMPS on MPI) from 1 to 2 ranks on
# Poisson control, with the serial sparse backend in the same run as the reference.
# Usage: scripts/distributed_scaling.sh [K ...]      (default: 300 450)
# Prints, per K and rank count: wall time of the whole command, the phases from the JSON
# (analysis, factorization, solve with refinement), peak resident memory per rank, MUMPS's
# factor memory on the most loaded rank, and the machine load before the run.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo build --release --features mpi --bin tangency
bin=target/release/tangency
work="${TMPDIR:-/tmp}/tangency-scaling"
mkdir -p "$work"
sizes=("$@")
[ "${#sizes[@]}" -gt 0 ] || sizes=(300 450)
export OMP_NUM_THREADS=1
for k in "${sizes[@]}"; do
  dir="$work/poisson-$k"
  [ -f "$dir/H.mtx" ] || "$bin" generate poisson-control --size "$k" --out "$dir" > /dev/null
  for run in sparse 1 2; do
    load=$(cut -d' ' -f1-3 /proc/loadavg)
    start=$(date +%s.%N)
    if [ "$run" = sparse ]; then
      "$bin" solve "$dir" --method sparse --json > "$work/out-$k-$run.json" || true
    else
      mpirun -n "$run" --allow-run-as-root --oversubscribe "$bin" solve "$dir" --method distributed --json \
        > "$work/out-$k-$run.json" || true
    fi
    end=$(date +%s.%N)
    python3 - "$work/out-$k-$run.json" "$k" "$run" "$start" "$end" "$load" <<'PY'
import json, sys
path, k, run, start, end, load = sys.argv[1:]
o = json.load(open(path))
t = o.get("timing") or {}
d = o.get("distributed") or {}
peaks = d.get("peak_rss_bytes_per_rank")
print(f"k={k} {('serial sparse' if run == 'sparse' else run + ' rank(s)'):>14}: status {o['status']}, "
      f"wall {float(end) - float(start):.2f} s, analyze {t.get('analyze_s', 0):.2f} s, "
      f"factor {t.get('factor_s', 0):.2f} s, solve {t.get('solve_s', 0):.2f} s, "
      f"backward error {o.get('backward_error')}, "
      + (f"peak RSS per rank {[round(p / 1e6) for p in peaks]} MB, "
         f"MUMPS factor memory (most loaded rank) {d.get('factor_memory_mb_max_rank')} MB, "
         f"factor entries {d.get('factor_entries'):.3g}, " if peaks else "")
      + f"load {load}")
PY
  done
done
