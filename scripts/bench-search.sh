#!/usr/bin/env bash
# Measures `burstbook search` on longer versions of the demo scenario: wall time,
# real-time factor and peak memory. Peak memory should not grow with the length
# (blocks are streamed). Usage: scripts/bench-search.sh [LENGTH_S ...] (default 60 240).
# The search runs with --no-catalogue: only the search is timed, and no catalogue is
# left in the current folder.
set -euo pipefail
cd "$(dirname "$0")/.."
lengths=("${@:-60 240}")
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
cargo build --quiet --release
for length_s in ${lengths[@]}; do
  sed "s/^length_s = .*/length_s = ${length_s}.0/" demo-data/scenario.toml > "$work/obs.toml"
  target/release/burstbook simulate "$work/obs.toml" --out "$work/obs.json" > /dev/null
  /usr/bin/time -f "%e %M" -o "$work/time" \
    target/release/burstbook search "$work/obs.json" --out "$work/out" --no-catalogue > /dev/null
  read -r wall rss < "$work/time"
  echo "length ${length_s} s: wall ${wall} s (real-time factor $(echo "scale=2; ${length_s} / ${wall}" | bc)), peak RSS ${rss} KiB"
done
