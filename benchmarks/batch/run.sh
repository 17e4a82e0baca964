#!/usr/bin/env bash
# Throughput of `dyad batch` on demo-sized problems: the 12 invented
# systems of examples/survey (16 positions and 20 velocities each, 32
# walkers, at most 8000 steps), run as 1, 2 and 4 shards side by side on
# this machine, each shard one process with one walker thread. Prints, per
# shard count, the wall time, the CPU time of all shards, systems per
# wall-clock hour, and systems per core-hour (systems / CPU hours used,
# which does not depend on how many cores the machine has or how busy it
# is with other work).
#
#   benchmarks/batch/run.sh            # from the repository root
#
# Not a test: nothing is asserted. Needs cargo and a POSIX shell.
set -euo pipefail
cd "$(dirname "$0")/../.."
cargo build --release --quiet
dyad=$PWD/target/release/dyad
work=$(mktemp -d /tmp/dyad-batch-bench.XXXXXX)
trap 'rm -rf "$work"' EXIT
mkdir -p "$work/data"
cp -r examples/survey/scenarios examples/survey/manifest.csv examples/survey/base.toml "$work/"
for scenario in "$work"/scenarios/*.scenario.toml; do
    "$dyad" simulate "$scenario" >/dev/null
done
systems=$(grep -vc '^#\|^system,' "$work/manifest.csv")

printf '%s, %s CPUs, load average before: %s\n' "$(uname -n)" "$(nproc)" "$(cut -d' ' -f1-3 /proc/loadavg)"
printf '| shards | wall s | CPU s | systems per wall hour | systems per core-hour |\n'
printf '|---:|---:|---:|---:|---:|\n'
for shards in 1 2 4; do
    output=$work/out-$shards
    TIMEFORMAT='%R %U %S'
    timing=$( { time (
        for i in $(seq 1 "$shards"); do
            "$dyad" --threads 1 batch "$work/manifest.csv" --base "$work/base.toml" \
                --output "$output" --shard "$i/$shards" --quiet >/dev/null 2>&1 &
        done
        wait
    ) ; } 2>&1 )
    read -r wall user sys <<<"$timing"
    "$dyad" merge "$output" >/dev/null
    awk -v n="$shards" -v s="$systems" -v w="$wall" -v u="$user" -v y="$sys" 'BEGIN {
        cpu = u + y
        printf "| %d | %.1f | %.1f | %.0f | %.0f |\n", n, w, cpu, s / (w / 3600), s / (cpu / 3600)
    }'
done
for shards in 2 4; do
    cmp -s "$work/out-1/results.csv" "$work/out-$shards/results.csv" \
        && echo "results.csv of $shards shards = that of 1 shard (byte for byte)" \
        || echo "results.csv of $shards shards DIFFERS from that of 1 shard"
done
printf 'load average after: %s\n' "$(cut -d' ' -f1-3 /proc/loadavg)"
