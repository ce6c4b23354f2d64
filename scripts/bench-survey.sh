#!/usr/bin/env bash
# Pipeline benchmark on a reference survey file: 1024 channels over 1200–1600 MHz,
# 64 µs samples, 8-bit, LENGTH_S seconds (default 30) with a few invented bursts.
#   1. `burstbook search` over DM 0–2000 pc cm⁻³, widths to 50 ms, default kernel
#      ("fast"): wall seconds, real-time factor (data seconds / wall seconds), peak RSS;
#      then three such files (other seeds) in one command, as a survey searches them.
#   2. The same plan restricted to DM 0–500 on the first SHORT_S seconds (default 10;
#      0 skips this part, whose reference run takes half an hour),
#      once with kernel = "fast" and once with kernel = "reference": the speed-up.
# Every search runs with --no-catalogue so only the search is timed. The generated
# files are deleted on exit. Run it once on a quiet machine; it prints the load.
# SMEARING_FRACTION sets [plan] smearing_fraction of part 1 (default 0.5, the
# search's default; 1 is the cheapest plan, at some S/N of narrow bursts).
# BLOCK_S sets block_s of part 1 (default 4, the search's default): longer blocks
# search less overlap again, for more memory.
# CONSECUTIVE=1 also times the three files as consecutive parts of one recording,
# joined (the default) and with --no-join.
# Usage: scripts/bench-survey.sh [LENGTH_S] [SHORT_S]
set -euo pipefail
cd "$(dirname "$0")/.."
length_s="${1:-30}"
short_s="${2:-10}"
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
cargo build --quiet --release
bin=target/release/burstbook

source scripts/survey-setup.sh
scenario() { # $1 = length in seconds
  local length="$1"
  survey_setup 7 "Bench Field 1" "$length" 30.0
  # (t_inf_s, dm, width_ms, snr); only bursts whose sweep ends inside the file.
  local b
  for b in "3.0 320.0 2.0 20.0" "12.5 850.0 5.0 15.0" "24.0 1650.0 10.0 18.0"; do
    set -- "$length" $b
    if (( $(echo "$2 + 3 < $1" | bc) )); then
      printf '[[burst]]\nt_inf_s = %s\ndm = %s\nwidth_ms = %s\nsnr = %s\n' "$2" "$3" "$4" "$5"
    fi
  done
}

scenario "${length_s}.0" > "$work/long.toml"
$bin simulate "$work/long.toml" --out "$work/long.json" > /dev/null
if (( short_s > 0 )); then
  scenario "${short_s}.0" > "$work/short.toml"
  $bin simulate "$work/short.toml" --out "$work/short.json" > /dev/null
fi
echo 'kernel = "fast"' > "$work/fast.toml"
printf 'block_s = %s\n[plan]\nsmearing_fraction = %s\n' "${BLOCK_S:-4.0}" \
  "${SMEARING_FRACTION:-0.5}" > "$work/survey.toml"
echo 'kernel = "reference"' > "$work/reference.toml"

# Files just written fill the page cache, and a search allocating gigabytes then
# waits for the kernel to reclaim it page by page. Before each timing, evict every
# generated file (no root needed) and read back only the input the search reads.
evict_then_read() { # $1 = the input's .npy
  sync
  python3 -c 'import os, sys
for p in sys.argv[1:]:
    fd = os.open(p, os.O_RDONLY)
    os.posix_fadvise(fd, 0, 0, os.POSIX_FADV_DONTNEED)
    os.close(fd)' "$work"/*.npy
  cat "$1" > /dev/null
}

# Prints wall seconds, peak RSS (KiB), and user and system CPU seconds: the wall time
# of a shared virtual machine drifts, and the CPU seconds say whether the work did
# too (system CPU is mostly first-touch page faults).
timed() { # $1 = label, rest = command
  local label="$1"
  shift
  /usr/bin/time -v -o "$work/time.txt" "$@" > "$work/$label.log"
  local wall rss user sys
  wall=$(awk -F': ' '/Elapsed \(wall clock\)/ {n = split($2, p, ":"); s = 0;
    for (i = 1; i <= n; i++) s = s * 60 + p[i]; print s}' "$work/time.txt")
  rss=$(awk -F': ' '/Maximum resident set size/ {print $2}' "$work/time.txt")
  user=$(awk -F': ' '/User time/ {print $2}' "$work/time.txt")
  sys=$(awk -F': ' '/System time/ {print $2}' "$work/time.txt")
  echo "$wall $rss $user $sys"
}

# Machines of one kind differ: print what this one is, so results can be compared.
echo "cpu: $(awk -F': ' '/model name/ {print $2; exit}' /proc/cpuinfo)," \
  "$(awk -F': ' '/cpu MHz/ {print $2; exit}' /proc/cpuinfo) MHz"
echo "load average before: $(cut -d' ' -f1-3 /proc/loadavg); cores: $(nproc)"
evict_then_read "$work/long.npy"
read -r wall rss user sys < <(timed full $bin search "$work/long.json" --out "$work/out-full" \
  --config "$work/survey.toml" --dm-min 0 --dm-max 2000 --max-width-ms 50 --no-catalogue)
echo "full search, ${length_s} s, DM 0-2000, widths to 50 ms, fast kernel," \
  "smearing fraction ${SMEARING_FRACTION:-0.5}, ${BLOCK_S:-4} s blocks: wall ${wall} s," \
  "real-time factor $(echo "scale=3; ${length_s} / ${wall}" | bc), peak RSS ${rss} KiB," \
  "CPU ${user} s user + ${sys} s system"
grep -i "candidates\|trials\|by stage" "$work/full.log" | head -5 || true
# A survey searches many files of one shape; the search reuses its buffers between
# them, so three files (other seeds) in one command show the steady per-file rate.
for seed in 8 9; do
  scenario "${length_s}.0" | sed "s/^seed = 7/seed = $seed/" > "$work/more$seed.toml"
  $bin simulate "$work/more$seed.toml" --out "$work/more$seed.json" > /dev/null
done
evict_then_read "$work/long.npy"
cat "$work/more8.npy" "$work/more9.npy" > /dev/null
read -r wall rss user sys < <(timed three $bin search "$work/long.json" "$work/more8.json" \
  "$work/more9.json" --out "$work/out-three" --config "$work/survey.toml" --dm-min 0 \
  --dm-max 2000 --max-width-ms 50 --no-catalogue)
echo "three ${length_s} s files in one search: wall ${wall} s, real-time factor" \
  "$(echo "scale=3; 3 * ${length_s} / ${wall}" | bc), peak RSS ${rss} KiB," \
  "CPU ${user} s user + ${sys} s system"
# CONSECUTIVE=1: the same three files as consecutive parts of one recording (headers
# starting where the one before ends), searched joined (the default: each file reads
# on into the next) and with --no-join: what reading on costs.
if [[ "${CONSECUTIVE:-0}" == 1 ]]; then
  for k in 1 2; do
    seed=$((7 + k))
    python3 -c 'import json, sys
h = json.load(open(sys.argv[1]))
h["start_sec"] += float(sys.argv[2])
h["data"] = sys.argv[3]
json.dump(h, open(sys.argv[4], "w"))' "$work/long.json" "$(echo "$k * $length_s" | bc)" \
      "more$seed.npy" "$work/next$k.json"
  done
  for join in "" --no-join; do
    evict_then_read "$work/long.npy"
    cat "$work/more8.npy" "$work/more9.npy" > /dev/null
    read -r wall rss user sys < <(timed consecutive $bin search "$work/long.json" \
      "$work/next1.json" "$work/next2.json" --out "$work/out-consecutive" \
      --config "$work/survey.toml" --dm-min 0 --dm-max 2000 --max-width-ms 50 \
      --no-catalogue $join)
    echo "three consecutive ${length_s} s files, ${join:-joined}: wall ${wall} s," \
      "real-time factor $(echo "scale=3; 3 * ${length_s} / ${wall}" | bc)," \
      "CPU ${user} s user + ${sys} s system"
  done
fi
rm -f "$work"/more*.npy
if (( short_s > 0 )); then
  for kernel in fast reference; do
    evict_then_read "$work/short.npy"
    read -r wall rss _ _ < <(timed "$kernel" $bin search "$work/short.json" --out "$work/out-$kernel" \
      --config "$work/$kernel.toml" --dm-min 0 --dm-max 500 --max-width-ms 50 --no-catalogue)
    echo "short search, ${short_s} s, DM 0-500, widths to 50 ms, $kernel kernel: wall ${wall} s," \
      "peak RSS ${rss} KiB"
    eval "wall_$kernel=$wall"
  done
  echo "speed-up fast over reference (whole search command, same plan): $(echo "scale=2; ${wall_reference} / ${wall_fast}" | bc)"
fi
echo "load average after: $(cut -d' ' -f1-3 /proc/loadavg)"
