#!/usr/bin/env bash
# Regenerates the demo observation and its truth table from demo-data/scenario.toml.
# The output is deterministic: the scenario fixes the seed.
set -euo pipefail
cd "$(dirname "$0")/.."
cargo run --quiet -- simulate demo-data/scenario.toml --out demo-data/demo.json --format native
du -ch demo-data/demo.* | tail -n 1
