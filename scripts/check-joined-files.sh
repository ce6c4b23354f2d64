#!/usr/bin/env bash
# Bursts whose sweep crosses from one file into the next, at the reference survey's
# resolution (1024 channels over 1200–1600 MHz, 64 µs, 8-bit, DM 0–2000, widths to
# 50 ms): one invented 40 s recording with three bursts, each arriving at the top
# channel 0.25 s before a 10 s mark, is cut into four 10 s files (each header starting
# where the one before ends). Searched:
#   1. whole, as one file;
#   2. as the four files, joined (the default: each file read on into the next);
#   3. as the four files with --no-join.
# Prints, per burst, the candidate found near it (file, t_inf_s in that file, DM, S/N)
# in each search, and the expected S/N from the truth table. The generated files are
# deleted on exit.
# Usage: scripts/check-joined-files.sh
set -euo pipefail
cd "$(dirname "$0")/.."
work="$(mktemp -d)"
trap 'rm -rf "$work"' EXIT
cargo build --quiet --release
bin=target/release/burstbook

# t_inf_s for a top-channel arrival 0.25 s before each cut: 10 s − 0.25 s − k·DM/ν_top²
# (k = 4.148808e3 s MHz², Lorimer & Kramer 2005; ν_top = 1599.8046875 MHz).
burst() { # $1 = cut (s), $2 = DM, $3 = width (ms), $4 = S/N
  local t
  t=$(echo "scale=9; $1 - 0.25 - 4148.808 * $2 / 1599.8046875^2" | bc)
  printf '[[burst]]\nt_inf_s = %s\ndm = %s\nwidth_ms = %s\nsnr = %s\n' "$t" "$2" "$3" "$4"
}
source scripts/survey-setup.sh
{
  survey_setup 11 "Bench Field 2" 40.0
  burst 10 800 2.0 15
  burst 20 1500 5.0 15
  burst 30 1900 1.0 15
} > "$work/whole.toml"
$bin simulate "$work/whole.toml" --out "$work/whole.json" > /dev/null

# Four 10 s files: the .npy cut into row ranges (its header rewritten for the new
# shape), each .json header starting 10 s after the one before.
python3 - "$work" <<'EOF'
import json, sys
work = sys.argv[1]
with open(f"{work}/whole.npy", "rb") as f:
    raw = f.read()
header_len = 10 + int.from_bytes(raw[8:10], "little")
data = raw[header_len:]
n_chan, rows_per_file = 1024, 156250  # 10 s of 64 µs samples
meta = json.load(open(f"{work}/whole.json"))
for k in range(4):
    text = "{'descr': '|u1', 'fortran_order': False, 'shape': (%d, %d), }" % (rows_per_file, n_chan)
    text += " " * (63 - (10 + len(text)) % 64) + "\n"
    with open(f"{work}/part{k}.npy", "wb") as f:
        f.write(b"\x93NUMPY\x01\x00" + len(text).to_bytes(2, "little") + text.encode())
        f.write(data[k * rows_per_file * n_chan:(k + 1) * rows_per_file * n_chan])
    part = dict(meta, data=f"part{k}.npy", start_sec=meta["start_sec"] + 10.0 * k)
    json.dump(part, open(f"{work}/part{k}.json", "w"), indent=2)
EOF

search() { # $1 = output folder, rest = files and flags
  local out="$1"
  shift
  $bin search "$@" --out "$work/$out" --dm-min 0 --dm-max 2000 --max-width-ms 50 \
    --no-catalogue > "$work/$out.log"
}
search out-whole "$work/whole.json"
search out-joined "$work"/part{0,1,2,3}.json
search out-apart "$work"/part{0,1,2,3}.json --no-join
grep "read on" "$work/out-joined.log" || true

# Per burst: the brightest candidate within 0.1 s and 10 % in DM, in each search.
python3 - "$work" <<'EOF'
import csv, sys
work = sys.argv[1]
truth = [r for r in csv.DictReader(open(f"{work}/whole.truth.csv")) if r["kind"] == "burst"]
def rows(out):
    return list(csv.DictReader(open(f"{work}/{out}/candidates.csv")))
def offset(row):  # the file's start in the recording
    name = row["file"].rsplit("/", 1)[-1]
    return 0.0 if name == "whole.json" else 10.0 * int(name[4])
for t in truth:
    t_inf, dm = float(t["t_inf_s"]), float(t["dm"])
    line = f"burst t_inf {t_inf:7.3f} s, DM {dm:6.1f}, expected S/N {float(t['expected_snr']):5.2f}:"
    for out in ["out-whole", "out-joined", "out-apart"]:
        near = [r for r in rows(out)
                if abs(float(r["t_inf_s"]) + offset(r) - t_inf) < 0.1
                and abs(float(r["dm"]) - dm) < 0.1 * dm]
        if near:
            best = max(near, key=lambda r: float(r["snr"]))
            name = best["file"].rsplit("/", 1)[-1]
            line += f"  {out[4:]}: {name} DM {float(best['dm']):.1f} S/N {float(best['snr']):.2f}"
        else:
            line += f"  {out[4:]}: not found"
    print(line)
EOF
