"""Independent check of the demo data with numpy (written against numpy 2.4.6).

Normalises each channel by its median and 1.4826*MAD, zeroes the masked channels,
shifts channels by whole-sample dispersion delays at each truth DM (k = 4.148808e3
s MHz^2 pc^-1 cm^3, Lorimer & Kramer 2005), tries boxcars of 1-127 samples around
the truth time and prints the S/N found beside the truth's expected S/N.
Usage: python3 scripts/check-demo-snr.py
"""
import csv
import json
import os

import numpy as np

DEMO = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "demo-data")
K_DM = 4.148808e3

data = np.load(os.path.join(DEMO, "demo.npy")).astype(np.float64)
header = json.load(open(os.path.join(DEMO, "demo.json")))
chans = header["channels"]
freqs = chans["first_mhz"] + chans["step_mhz"] * np.arange(chans["count"])
tsamp = header["sample_time_s"]
median = np.median(data, axis=0)
sigma = 1.4826 * np.median(np.abs(data - median), axis=0)
x = (data - median) / sigma
x[:, header["bad_channels"]] = 0.0
n_used = chans["count"] - len(header["bad_channels"])

with open(os.path.join(DEMO, "demo.truth.csv")) as f:
    for row in csv.DictReader(f):
        if row["kind"] == "rfi_narrowband":
            continue
        dm, t0 = float(row["dm"]), float(row["t_inf_s"])
        delays = np.round(K_DM * dm * (freqs**-2 - freqs.max() ** -2) / tsamp).astype(int)
        start = max(int((t0 + K_DM * dm / freqs.max() ** 2) / tsamp) - 100, 0)
        length = min(250, len(x) - start - delays.max())
        series = sum(x[start + d : start + d + length, c] for c, d in enumerate(delays))
        cums = np.concatenate([[0.0], np.cumsum(series)])
        best = max(((cums[w:] - cums[:-w]) / np.sqrt(n_used * w)).max() for w in range(1, 128))
        print(f"{row['kind']:16s} t={t0:7.3f} s DM={dm:7.1f} expected {float(row['expected_snr']):6.2f} found {best:6.2f}")
