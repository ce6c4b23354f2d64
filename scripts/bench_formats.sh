#!/usr/bin/env bash
# Read throughput (MB/s, samples/s) and peak memory (max RSS) of the observation
# readers on a long 8-bit file in each container; figures go into docs/formats.md.
#
#   scripts/bench_formats.sh            # one hour: 256 channels, 256 µs, 8 bit (~3.6 GB per file)
#   BENCH_SECONDS=60 scripts/bench_formats.sh   # quick look
#
# Needs ~7.5 GB free under $BENCH_DIR (default target/bench-formats); the files are
# deleted at the end. Reads run on a warm page cache (the file was just written).
set -euo pipefail
cd "$(dirname "$0")/.."
SECS=${BENCH_SECONDS:-3600}
DIR=${BENCH_DIR:-target/bench-formats}
mkdir -p "$DIR"
trap 'rm -rf "$DIR"' EXIT

cargo build --release --quiet --example formats_bench --bin burstbook
EX=target/release/examples/formats_bench
BIN=target/release/burstbook

peak() { grep -E "Maximum resident set size" "$1" | awk '{printf "%.1f MB", $6/1024}'; }
wall() { grep -E "Elapsed \(wall clock\)" "$1" | awk '{print $8}'; }

echo "burstbook formats benchmark: ${SECS} s, 256 channels, 256 µs, 8 bit; $(date -u +%FT%TZ)"
echo "machine: $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2 | xargs)"
for f in "$DIR/bench.fits" "$DIR/bench.json"; do
  /usr/bin/time -v "$EX" write "$f" "$SECS" 256 256 8 2> "$DIR/write.log" || { cat "$DIR/write.log"; exit 1; }
  echo "== $(basename "$f"): written in $(wall "$DIR/write.log"), writer peak RSS $(peak "$DIR/write.log")"
  ls -l "$DIR" | grep -E "bench\.(fits|npy)" | awk '{printf "   %s %.2f GB\n", $9, $5/1e9}'
  /usr/bin/time -v "$EX" read "$f" > "$DIR/read.out" 2> "$DIR/read.log"
  echo "   read:    $(cat "$DIR/read.out" | sed 's/.*: //'); peak RSS $(peak "$DIR/read.log")"
  /usr/bin/time -v "$BIN" inspect "$f" > /dev/null 2> "$DIR/inspect.log"
  echo "   inspect: $(wall "$DIR/inspect.log") wall; peak RSS $(peak "$DIR/inspect.log")"
  rm -f "$DIR"/bench.*
done

# Optional: the written FITS must open cleanly in astropy (strict verify, warnings as errors).
if python3 -c "import astropy" 2>/dev/null; then
  "$EX" write "$DIR/check.fits" 1 64 256 8 2>/dev/null
  "$EX" write "$DIR/check4.fits" 1.001 64 256 4 2>/dev/null
  python3 - "$DIR/check.fits" "$DIR/check4.fits" <<'PY'
import sys, warnings
warnings.simplefilter("error")
from astropy.io import fits
import astropy
for fn in sys.argv[1:]:
    with fits.open(fn) as f:
        f.verify("exception")
        t = f[1]
        assert t.header["NBITS"] in (4, 8) and f[0].header["OBS_MODE"] == "SEARCH"
print(f"astropy {astropy.__version__}: writer output opens and verifies cleanly")
PY
fi
