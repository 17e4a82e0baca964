#!/usr/bin/env bash
# Steps and wall time to the stopping rule on the invented hard orbit "Tallow
# Reach" (a century of positions on a 51-year, e = 0.61 orbit, both stars'
# velocities from two instruments) and on the demo, with default sampler
# settings. Prints one table row per fit and the per-parameter
# autocorrelation times of each run (the diagnosis of which coordinates mix
# slowest). Run from anywhere:
#   benchmarks/hard-orbit/run.sh [SEED...]
set -euo pipefail
root="$(cd "$(dirname "$0")/../.." && pwd)"
cd "$root"
cargo build --release --quiet
dyad="$root/target/release/dyad"
out="$(mktemp -d)"
trap 'rm -rf "$out"' EXIT
seeds=("$@")
[ ${#seeds[@]} -eq 0 ] && seeds=(3)

"$dyad" simulate benchmarks/hard-orbit/tallow-reach.scenario.toml --overwrite >/dev/null

fit() { # name config seed
    local name="$1" config="$2" seed="$3" cfg
    # The same configuration with the seed replaced (data paths stay
    # relative to the original's folder, so write the copy beside it).
    cfg="$(dirname "$config")/.bench-$name-$seed.toml"
    sed -E "s/^seed = .*/seed = $seed/" "$config" >"$cfg"
    local start end
    start=$(date +%s.%N)
    "$dyad" fit "$cfg" --quiet --overwrite --output "$out/$name-$seed" >/dev/null 2>&1 || true
    end=$(date +%s.%N)
    rm -f "$cfg"
    python3 - "$out/$name-$seed" "$name" "$seed" "$(echo "$end - $start" | bc)" <<'PY'
import json, sys
folder, name, seed, wall = sys.argv[1:]
d = json.load(open(f"{folder}/diagnostics.json"))
s = json.load(open(f"{folder}/summary.json"))
params = d["parameters"]
tau = max(p["autocorrelation_time_steps"] for p in params)
rhat = max(p["split_rhat"] for p in params)
def key(p, new, old):
    return p.get(new, p.get(old))
bulk = min(key(p, "effective_draws_bulk", "ess_bulk") for p in params)
tail = min(key(p, "effective_draws_tail", "ess_tail") for p in params)
def q95(n):
    for p in s["parameters"]:
        if p["name"] == n:
            return p["q95"]
m1, m2 = q95("mass_primary_msun"), q95("mass_secondary_msun")
print(f"| {name} | {seed} | {d['status']} | {d['steps']} | {float(wall):.1f} | {tau:.0f} | "
      f"{bulk:.0f} / {tail:.0f} | {rhat:.3f} | [{m1[0]:.3f}, {m1[1]:.3f}] | [{m2[0]:.3f}, {m2[1]:.3f}] |")
slow = sorted(params, key=lambda p: -p["autocorrelation_time_steps"])[:4]
print("|   slowest: " + ", ".join(f"{p['name']} {p['autocorrelation_time_steps']:.0f}" for p in slow) + " | | | | | | | | | |")
PY
}

echo "| system | seed | status | steps | wall s | largest tau | fewest eff. draws bulk / tail | largest R-hat | M1 95 % | M2 95 % |"
echo "|---|---:|---|---:|---:|---:|---:|---:|---|---|"
for seed in "${seeds[@]}"; do
    fit tallow-reach benchmarks/hard-orbit/tallow-reach.toml "$seed"
done
fit demo configs/demo.toml 11   # the demo's own seed
echo "(truth: Tallow Reach M1 = 1.08, M2 = 0.86; demo M1 = 1.35, M2 = 0.92 M_sun)"
