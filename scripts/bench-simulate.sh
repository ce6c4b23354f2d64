#!/usr/bin/env bash
# Measures `burstbook simulate` on an hour-long version of the demo scenario:
# wall time, peak memory (should stay near one 4096-row chunk whatever the length)
# and output size. Usage: scripts/bench-simulate.sh [LENGTH_S] (default 3600).
set -euo pipefail
cd "$(dirname "$0")/.."
length_s="${1:-3600}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
sed "s/^length_s = .*/length_s = ${length_s}.0/" demo-data/scenario.toml > "$work/long.toml"
cargo build --quiet --release
/usr/bin/time -f "wall %e s, peak RSS %M KiB" \
  target/release/burstbook simulate "$work/long.toml" --out "$work/long.json"
du -h "$work"/long.*
