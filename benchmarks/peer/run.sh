#!/usr/bin/env bash
# Side-by-side speed benchmark of dyad against emcee + NumPy (see README.md).
#
# One command from a clean clone: benchmarks/peer/run.sh
# Settings (environment): STEPS (dyad and peer steps, default 40000),
# PEER_STEPS ("N20 N100 N1000" steps of the emcee runs, default STEPS each),
# BURN_IN (default 5000), QUICK=1 for a short smoke run (numbers not meaningful).
set -euo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
root="$(cd "$here/../.." && pwd)"
out="$here/out"
venv="$here/.venv"

steps="${STEPS:-40000}"
burn_in="${BURN_IN:-5000}"
eval_seconds=0.3
if [ "${QUICK:-0}" = 1 ]; then
    steps=1500
    burn_in=500
    eval_seconds=0.05
fi
peer_steps="${PEER_STEPS:-$steps $steps $steps}"

# NumPy's element-wise functions are single-threaded anyway; keep any BLAS so.
export OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 MKL_NUM_THREADS=1

echo "== Python environment ($venv)"
if [ ! -x "$venv/bin/python" ]; then
    python3 -m venv "$venv"
fi
"$venv/bin/pip" install --quiet --disable-pip-version-check -r "$here/requirements.txt"
py="$venv/bin/python"

echo "== building dyad's example (release)"
cd "$root"
cargo build --release --quiet --example peer_speed
dyad=(cargo run --release --quiet --example peer_speed --)

rm -rf "$out"
mkdir -p "$out"

echo "== data sets, check points and starting ensembles (written by dyad)"
"${dyad[@]}" prepare --out "$out"

echo "== equivalence of the two log-posteriors (before any timing)"
"$py" "$here/peer_bench.py" check --out "$out"

echo "== dyad timings"
"${dyad[@]}" bench --out "$out" --steps "$steps" --burn-in "$burn_in" --eval-seconds "$eval_seconds"

echo "== the same autocorrelation estimate on both sides"
"$py" "$here/peer_bench.py" check-tau --out "$out"

echo "== peer timings (emcee + NumPy)"
# shellcheck disable=SC2086
"$py" "$here/peer_bench.py" time --out "$out" --steps $peer_steps --eval-seconds "$eval_seconds"

echo "== results"
"$py" "$here/peer_bench.py" report --out "$out"
echo "== whole benchmark: ${SECONDS} s"
