#!/usr/bin/env bash
# Side-by-side timing of tangency's dense backend and LAPACK's symmetric-indefinite
# solver (scipy dsysv via ../shared/tools/reference_solve.py) on the same matrices.
# Needs: pip install numpy scipy.  Usage: scripts/compare_dense.sh [OUTDIR] [REPEATS]
set -euo pipefail
cd "$(dirname "$0")/.."
out=${1:-target/dense-bench}
rep=${2:-5}
ref=../shared/tools/reference_solve.py
cargo run --release --quiet --example dense_compare -- "$out" "$rep" > "$out.ours.jsonl"
printf '%-16s %10s %10s %10s %8s %10s\n' problem ours_med ours_best lapack_best ratio ours_bwd
while read -r line; do
  name=$(python3 -c 'import json,sys; print(json.loads(sys.argv[1])["name"])' "$line")
  dir=$(python3 -c 'import json,sys; print(json.loads(sys.argv[1])["dir"])' "$line")
  lapack=$(env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE python3 "$ref" "$dir" --method dense --repeat "$rep")
  python3 - "$line" "$lapack" <<'PY'
import json, sys
o, r = json.loads(sys.argv[1]), json.loads(sys.argv[2])
print(f"{o['name']:<16} {o['median_s']:10.4f} {o['best_s']:10.4f} {r['factor_plus_solve_s']:10.4f} "
      f"{o['best_s']/r['factor_plus_solve_s']:8.2f} {o['backward_error']:10.1e}")
PY
done < "$out.ours.jsonl"
