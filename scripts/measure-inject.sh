#!/usr/bin/env bash
# Injection-recovery measurement on a simulated noise-only observation with a
# realistic band: 256 channels over 1200–1600 MHz, 256 µs (N_CHAN, TSAMP_US below),
# 8-bit (mean 96, σ 12), SEFD 28 Jy. Bursts: DM 0–2000, widths 0.1–50 ms (log-uniform), S/N uniform in
# the given range. Prints completeness at expected S/N ≥ 10 and the median
# reported/expected S/N by DM and width from injections.csv.
#
# usage: scripts/measure-inject.sh [LENGTH_S] [COUNT] [SNR_RANGE] [OUTDIR] [DM_RANGE] [WIDTH_MS_RANGE]
#   e.g. scripts/measure-inject.sh 60 120 10:20 /tmp/inject-bright
#        scripts/measure-inject.sh 60 120 4:14 /tmp/inject-curve
#        scripts/measure-inject.sh 60 100 10:20 /tmp/inject-narrow 500:2000 0.1:2
set -euo pipefail
length_s=${1:-60}
count=${2:-120}
snr=${3:-10:20}
out=${4:-/tmp/burstbook-inject-measure}
dm_range=${5:-0:2000}
width_range=${6:-0.1:50}
root=$(cd "$(dirname "$0")/.." && pwd)
# SMEARING_FRACTION sets [plan] smearing_fraction (default 0.5, the search's default).
# N_CHAN (default 256) and TSAMP_US (default 256) set the channels across the same
# 400 MHz band and the sample time: N_CHAN=1024 TSAMP_US=64 is the reference survey.
# BURSTBOOK_BIN runs another build (e.g. an older commit's) instead of building this one.
if [[ -n "${BURSTBOOK_BIN:-}" ]]; then
    bin=$BURSTBOOK_BIN
else
    bin="$root/target/release/burstbook"
    (cd "$root" && cargo build --release --quiet)
fi
mkdir -p "$out"
n_chan=${N_CHAN:-256}
tsamp_us=${TSAMP_US:-256}
chan_mhz=$(python3 -c "print(400 / $n_chan)")
first_mhz=$(python3 -c "print(1600 - 200 / $n_chan)")

cat > "$out/scenario.toml" <<TOML
seed = 77
[observation]
source = "Quiet Meadow"
telescope = "Measuring Dish"
ra_deg = 200.0
dec_deg = -20.0
start_mjd = 61300.0
length_s = $length_s
tsamp_s = ${tsamp_us}e-6
[site]
name = "Measuring Dish"
lon_deg = 15.0
lat_deg = -30.0
height_m = 500.0
[band]
first_chan_mhz = $first_mhz
chan_step_mhz = -$chan_mhz
n_chan = $n_chan
[noise]
nbits = 8
mean = 96.0
sigma = 12.0
sefd_jy = 28.0
TOML

cat > "$out/search.toml" <<TOML
snr_threshold = 7.0
max_width_s = 0.1
baseline_s = 1.0
[plan]
dm_min = 0.0
dm_max = 2000.0
min_width_s = 0.0
tolerance = 1.25
max_downsample = 64
smearing_fraction = ${SMEARING_FRACTION:-0.5}
TOML

"$bin" simulate "$out/scenario.toml" --out "$out/quiet.json"
/usr/bin/time -v "$bin" inject "$out/quiet.json" --config "$out/search.toml" \
    --count "$count" --seed 11 --dm "$dm_range" --width-ms "$width_range" --snr "$snr" \
    --out "$out/result" --catalogue "$out/book.sqlite" 2> "$out/time.txt"
grep -E "Elapsed|Maximum resident|User time" "$out/time.txt"

python3 - "$out/result/injections.csv" <<'PY'
import csv, statistics, sys
rows = list(csv.DictReader(open(sys.argv[1])))
for r in rows:
    r["s"] = float(r["expected_snr"]); r["f"] = r["found"] == "true"
    r["d"] = r["detected"] == "true"
    r["ratio"] = float(r["reported_snr"]) / r["s"] if r["reported_snr"] else None
bright = [r for r in rows if r["s"] >= 10]
def line(label, sel):
    n = len(sel)
    if n == 0:
        return
    f = sum(r["f"] for r in sel); d = sum(r["d"] for r in sel)
    rat = [r["ratio"] for r in sel if r["ratio"] is not None]
    med = statistics.median(rat) if rat else float("nan")
    print(f"{label:>22}  n={n:4d}  found {100*f/n:6.1f} %  detected {100*d/n:6.1f} %  median S/N ratio {med:.3f}")
line("S/N >= 10", bright)
for lo, hi in [(0, 250), (250, 500), (500, 1000), (1000, 1500), (1500, 2000.1)]:
    line(f"DM {lo}-{hi:g}", [r for r in bright if lo <= float(r["dm"]) < hi])
for lo, hi in [(0.1, 0.5), (0.5, 2), (2, 10), (10, 50.1)]:
    line(f"width {lo}-{hi:g} ms", [r for r in bright if lo <= float(r["width_ms"]) < hi])
for lo, hi in [(0, 500), (500, 2000.1)]:
    for wlo, whi in [(0.1, 2), (2, 50.1)]:
        line(f"DM {lo}-{hi:g}, {wlo}-{whi:g} ms", [r for r in bright
             if lo <= float(r["dm"]) < hi and wlo <= float(r["width_ms"]) < whi])
missed = [r for r in bright if not r["f"]]
for r in missed[:20]:
    print(f"  missed: S/N {r['s']:.1f} DM {float(r['dm']):.0f} width {float(r['width_ms']):.2f} ms t {float(r['t_inf_s']):.2f} s verdict {r['verdict'] or '-'}")
PY
