#!/usr/bin/env bash
# Injection-recovery measurement on a simulated noise-only observation with a
# realistic band: 256 channels over 1200–1600 MHz, 256 µs (N_CHAN, TSAMP_US below),
# 8-bit (mean 96, σ 12), SEFD 28 Jy. Bursts: DM 0–2000, widths 0.1–50 ms (log-uniform), S/N uniform in
# the given range. Prints completeness at expected S/N ≥ 10, the median
# reported/expected S/N by DM and width, and the DM and arrival-time errors (against
# the plan's trial spacing and the pulse width) from injections.csv.
#
# usage: scripts/measure-inject.sh [LENGTH_S] [COUNT] [SNR_RANGE] [OUTDIR] [DM_RANGE] [WIDTH_MS_RANGE]
#   e.g. scripts/measure-inject.sh 60 120 10:20 /tmp/inject-bright
#        scripts/measure-inject.sh 60 120 4:14 /tmp/inject-curve
#        scripts/measure-inject.sh 60 100 10:20 /tmp/inject-narrow 500:2000 0.1:2
#        BAND_MHZ=4000:8000 TSAMP_US=64 RFI=1 scripts/measure-inject.sh 20 60 10:20 /tmp/hi 0:3000 0.02:5
set -euo pipefail
length_s=${1:-60}
count=${2:-120}
snr=${3:-10:20}
out=${4:-/tmp/burstbook-inject-measure}
dm_range=${5:-0:2000}
width_range=${6:-0.1:50}
root=$(cd "$(dirname "$0")/.." && pwd)
# SMEARING_FRACTION sets [plan] smearing_fraction (default 0.5, the search's default).
# N_CHAN (default 256) and TSAMP_US (default 256) set the channels across the band
# and the sample time: N_CHAN=1024 TSAMP_US=64 is the reference survey.
# Other setups (the defaults give the 1200–1600 MHz measurement):
#   BAND_MHZ=LO:HI (1200:1600)   ASCENDING=1 (channel step > 0; default descending)
#   NBITS=8|16|32 (8; 16-bit noise has mean 3000 and σ 200)
#   FORMAT=native|fits (native)  DM_MAX (the search's dm_max; default the top of DM_RANGE)
#   AVERAGE_SAMPLES=N ([average] samples; 1)   MAX_WIDTH_S (0.1)
#   SCATTER_MS=LO:HI (inject --scatter-ms, at 1 GHz; none by default)
#   RFI=1 adds DM-0 impulses, a narrow-band carrier and an impulse train, and prints the
#         verdicts of a plain search of the file (none may be astrophysical)
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
band=${BAND_MHZ:-1200:1600}
lo_mhz=${band%%:*}
hi_mhz=${band##*:}
nbits=${NBITS:-8}
format=${FORMAT:-native}
dm_max=${DM_MAX:-${dm_range##*:}}
average=${AVERAGE_SAMPLES:-1}
chan_mhz=$(python3 -c "print(($hi_mhz - $lo_mhz) / $n_chan)")
if [[ "${ASCENDING:-0}" == 1 ]]; then
    first_mhz=$(python3 -c "print($lo_mhz + $chan_mhz / 2)")
    step_mhz=$chan_mhz
else
    first_mhz=$(python3 -c "print($hi_mhz - $chan_mhz / 2)")
    step_mhz=-$chan_mhz
fi
noise_mean=96.0
noise_sigma=12.0
[[ $nbits == 16 ]] && noise_mean=3000.0 && noise_sigma=200.0
if [[ $format == fits ]]; then name=quiet.fits; else name=quiet.json; fi

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
chan_step_mhz = $step_mhz
n_chan = $n_chan
[noise]
nbits = $nbits
mean = $noise_mean
sigma = $noise_sigma
sefd_jy = 28.0
TOML
if [[ "${RFI:-0}" == 1 ]]; then
    cat >> "$out/scenario.toml" <<TOML
[[rfi.narrowband]]
freq_mhz = $(python3 -c "print($lo_mhz + 0.37 * ($hi_mhz - $lo_mhz))")
strength = 3.0
[[rfi.impulse]]
t_s = $(python3 -c "print(0.31 * $length_s)")
width_ms = 0.5
snr = 40.0
[[rfi.impulse]]
t_s = $(python3 -c "print(0.62 * $length_s)")
width_ms = 5.0
snr = 25.0
[[rfi.train]]
first_s = 1.3
period_s = 2.7
width_ms = 1.0
snr = 15.0
TOML
fi

cat > "$out/search.toml" <<TOML
snr_threshold = 7.0
max_width_s = ${MAX_WIDTH_S:-0.1}
baseline_s = 1.0
[plan]
dm_min = 0.0
dm_max = $dm_max
min_width_s = 0.0
tolerance = 1.25
max_downsample = 64
smearing_fraction = ${SMEARING_FRACTION:-0.5}
[average]
samples = $average
TOML

"$bin" simulate "$out/scenario.toml" --out "$out/$name" --format "$format"
scatter=()
[[ -n "${SCATTER_MS:-}" ]] && scatter=(--scatter-ms "$SCATTER_MS")
if [[ "${RFI:-0}" == 1 ]]; then
    "$bin" search "$out/$name" --config "$out/search.toml" --out "$out/plain" \
        --catalogue "$out/plain.sqlite" > "$out/plain.txt"
    python3 - "$out/plain/candidates.csv" "$out/quiet.truth.csv" <<'PY'
import csv, collections, sys
cands = list(csv.DictReader(open(sys.argv[1])))
rfi = [r for r in csv.DictReader(open(sys.argv[2])) if r["kind"] != "burst"]
print(f"interference only: {len(rfi)} events simulated, {len(cands)} candidates:",
      dict(collections.Counter(c["verdict"] for c in cands)))
for c in cands:
    if c["verdict"] == "astrophysical":
        print(f"  astrophysical: t {float(c['t_inf_s']):.3f} s DM {float(c['dm']):.1f} "
              f"width {c['width_ms']} ms S/N {c['snr']} ({c['reasons']})")
PY
fi
/usr/bin/time -v "$bin" inject "$out/$name" --config "$out/search.toml" \
    --count "$count" --seed 11 --dm "$dm_range" --width-ms "$width_range" --snr "$snr" \
    "${scatter[@]}" --out "$out/result" --catalogue "$out/book.sqlite" 2> "$out/time.txt"
grep -E "Elapsed|Maximum resident|User time" "$out/time.txt"
"$bin" plan "$out/$name" --dm-max "$dm_max" --tolerance 1.25 --max-downsample 64 \
    --smearing-fraction "${SMEARING_FRACTION:-0.5}" --average-samples "$average" \
    --json > "$out/plan.json"

python3 - "$out/result/injections.csv" "$out/plan.json" "$tsamp_us" "$average" "$dm_range" <<'PY'
import bisect, csv, json, statistics, sys
rows = list(csv.DictReader(open(sys.argv[1])))
plan = json.load(open(sys.argv[2]))
tsamp_ms = float(sys.argv[3]) * float(sys.argv[4]) / 1000
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
dm_lo, dm_hi = (float(v) for v in sys.argv[5].split(":"))
edges = [dm_lo + (dm_hi - dm_lo) * k / 4 for k in range(5)]
edges[-1] *= 1.0001
for lo, hi in zip(edges, edges[1:]):
    line(f"DM {lo:g}-{hi:.4g}", [r for r in bright if lo <= float(r["dm"]) < hi])
for lo, hi in [(0.01, 0.1), (0.1, 0.5), (0.5, 2), (2, 10), (10, 50.1)]:
    line(f"width {lo}-{hi:g} ms", [r for r in bright if lo <= float(r["width_ms"]) < hi])
for lo, hi in zip(edges[::2], edges[2::2]):
    for wlo, whi in [(0.01, 2), (2, 50.1)]:
        line(f"DM {lo:g}-{hi:.4g}, {wlo}-{whi:g} ms", [r for r in bright
             if lo <= float(r["dm"]) < hi and wlo <= float(r["width_ms"]) < whi])
# DM error against the plan's trial spacing at the burst's DM; arrival-time error
# against the pulse's ideal boxcar (at least one sample as searched)
trials = sorted(d for step in plan["plan"]["steps"] for d in step["dms"])
def spacing(dm):
    i = min(max(bisect.bisect_left(trials, dm), 1), len(trials) - 1)
    return trials[i] - trials[i - 1]
found = [r for r in bright if r["reported_dm"]]
dm_err = [abs(float(r["reported_dm"]) - float(r["dm"])) / spacing(float(r["dm"])) for r in found]
t_err = [abs(float(r["reported_t_inf_s"]) - float(r["t_inf_s"])) * 1e3
         / max(float(r["ideal_width_ms"]), tsamp_ms) for r in found]
# the same DM error as the sweep it leaves across the band, against the pulse width
freqs = plan["plan"]["freqs_mhz"]
band_s_per_dm = 4.148808e3 * (min(freqs) ** -2 - max(freqs) ** -2)
dm_err_w = [abs(float(r["reported_dm"]) - float(r["dm"])) * band_s_per_dm * 1e3
            / max(float(r["ideal_width_ms"]), tsamp_ms) for r in found]
if found:
    q = lambda v, f: sorted(v)[min(len(v) - 1, int(f * len(v)))]
    print(f"DM error as residual sweep / pulse width: median {statistics.median(dm_err_w):.2f}"
          f"  90 % {q(dm_err_w, 0.9):.2f}  max {max(dm_err_w):.2f}  over 1: {sum(e > 1 for e in dm_err_w)}")
    print(f"|DM error| / trial spacing: median {statistics.median(dm_err):.2f}  90 % {q(dm_err, 0.9):.2f}"
          f"  max {max(dm_err):.2f}  over 1: {sum(e > 1 for e in dm_err)} of {len(found)}")
    print(f"|t_inf error| / pulse width: median {statistics.median(t_err):.2f}  90 % {q(t_err, 0.9):.2f}"
          f"  max {max(t_err):.2f}  over 1: {sum(e > 1 for e in t_err)} of {len(found)}")
missed = [r for r in bright if not r["f"]]
for r in missed[:20]:
    print(f"  missed: S/N {r['s']:.1f} DM {float(r['dm']):.0f} width {float(r['width_ms']):.2f} ms t {float(r['t_inf_s']):.2f} s verdict {r['verdict'] or '-'}")
PY
