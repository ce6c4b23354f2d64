#!/usr/bin/env python3
"""Build burstbook's embedded ephemeris tables (run once; outputs are committed).

Writes, under src/timing/data/:
  earth_ssb_de421.bin  Chebyshev fits of the geocentre's position relative to the
                       solar-system barycentre (ICRS axes, km) from JPL DE421,
                       16-day granules x 12 coefficients, MJD(TDB) 51536 .. 69840
                       (late 1999 .. early 2050).
  sun_ssb_de421.bin    the Sun relative to the barycentre (km) from DE421, 64-day
                       granules x 8 coefficients (for the Shapiro delay).
  tdb_minus_tt.bin     Chebyshev fits of the geocentric TDB - TT (seconds) from
                       ERFA dtdb (Fairhead & Bretagnon 1990 series), 32-day
                       granules x 10 coefficients, same span.
and tests/fixtures/timing/ephemeris_check.csv with direct DE421 / dtdb values at
random epochs, against which a Rust test checks the table evaluation.

Sources: DE421 (Folkner, Williams & Boggs 2008, JPL IOM 343R-08-003) read with
jplephem from the de421.bsp shipped in the PyPI package skyfield-data;
ERFA dtdb via pyerfa.
Versions used: jplephem 2.24, skyfield-data 7.0.0, pyerfa 2.0.1.5, numpy 2.4.6.

  pip install jplephem==2.24 skyfield-data==7.0.0 pyerfa==2.0.1.5 numpy
  python3 scripts/timing/make_ephemeris_tables.py

Binary layout (little endian): 8-byte magic b"BBCHEB01", f64 start MJD(TDB),
f64 granule length in days, u32 coefficients per component, u32 components,
u32 granules, u32 zero padding, then f64 coefficients ordered
[granule][component][coefficient]. Chebyshev argument x = 2 (t - t0)/span - 1.
"""
import os
import struct

import erfa
import numpy as np
import skyfield_data
from jplephem.spk import SPK
from numpy.polynomial import chebyshev

ROOT = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..")
START_MJD = 51536.0
END_MJD = 69840.0
MJD_ZERO_JD = 2400000.5

BSP = os.path.join(os.path.dirname(skyfield_data.__file__), "data", "de421.bsp")
KERNEL = SPK.open(BSP)


def earth_km(mjd):
    """Geocentre relative to the SSB: (SSB->EMB) + (EMB->Earth), km."""
    # Two-part Julian dates: a single f64 JD near 2.46e6 resolves only ~40 us (~1 m).
    mjd = np.asarray(mjd, dtype=float)
    jd1, jd2 = MJD_ZERO_JD + np.floor(mjd), mjd - np.floor(mjd)
    return KERNEL[0, 3].compute(jd1, jd2) + KERNEL[3, 399].compute(jd1, jd2)


def sun_km(mjd):
    mjd = np.asarray(mjd, dtype=float)
    return KERNEL[0, 10].compute(MJD_ZERO_JD + np.floor(mjd), mjd - np.floor(mjd))


def tdb_minus_tt_s(mjd):
    """Geocentric TDB - TT in seconds (observer at the geocentre)."""
    mjd = np.asarray(mjd, dtype=float)
    return np.array([erfa.dtdb(MJD_ZERO_JD, m, m % 1.0, 0.0, 0.0, 0.0) for m in mjd])[None, :]


def fit(func, span, ncoef):
    ngran = int(round((END_MJD - START_MJD) / span))
    nodes = np.cos(np.pi * (np.arange(2 * ncoef) + 0.5) / (2 * ncoef))
    out, worst = [], 0.0
    for g in range(ngran):
        t0 = START_MJD + g * span
        y = func(t0 + (nodes + 1.0) / 2.0 * span)
        coefs = [chebyshev.chebfit(nodes, comp, ncoef - 1) for comp in y]
        xt = np.linspace(-1.0, 1.0, 41)
        yt = func(t0 + (xt + 1.0) / 2.0 * span)
        for c, comp in zip(coefs, yt):
            worst = max(worst, float(np.abs(chebyshev.chebval(xt, c) - comp).max()))
        out.append(coefs)
    return np.array(out), ngran, worst


def write(path, span, ncoef, coefs, ngran):
    with open(path, "wb") as f:
        f.write(b"BBCHEB01")
        f.write(struct.pack("<ddIIII", START_MJD, span, ncoef, coefs.shape[1], ngran, 0))
        f.write(coefs.astype("<f8").tobytes())


def main():
    data = os.path.join(ROOT, "src", "timing", "data")
    earth, ng, worst = fit(earth_km, 16.0, 12)
    write(os.path.join(data, "earth_ssb_de421.bin"), 16.0, 12, earth, ng)
    print(f"earth: {ng} granules, worst fit error {worst * 1e3:.1f} m")
    sun, ng, worst = fit(sun_km, 64.0, 8)
    write(os.path.join(data, "sun_ssb_de421.bin"), 64.0, 8, sun, ng)
    print(f"sun: {ng} granules, worst fit error {worst * 1e3:.1f} m")
    tdb, ng, worst = fit(tdb_minus_tt_s, 32.0, 10)
    write(os.path.join(data, "tdb_minus_tt.bin"), 32.0, 10, tdb, ng)
    print(f"tdb-tt: {ng} granules, worst fit error {worst * 1e9:.2f} ns")

    rng = np.random.default_rng(20261202)
    mjd = np.sort(rng.uniform(START_MJD, END_MJD, 200))
    pos = earth_km(mjd)
    dt = tdb_minus_tt_s(mjd)[0]
    sun = sun_km(mjd)
    check = os.path.join(ROOT, "tests", "fixtures", "timing", "ephemeris_check.csv")
    with open(check, "w") as f:
        f.write("# made by scripts/timing/make_ephemeris_tables.py from DE421 (jplephem 2.24)"
                " and ERFA dtdb (pyerfa 2.0.1.5)\n")
        f.write("mjd_tdb,earth_x_km,earth_y_km,earth_z_km,tdb_minus_tt_s,sun_x_km,sun_y_km,sun_z_km\n")
        for i, m in enumerate(mjd):
            f.write(f"{float(m)!r},{pos[0, i]:.6f},{pos[1, i]:.6f},{pos[2, i]:.6f},{dt[i]:.12e},"
                    f"{sun[0, i]:.6f},{sun[1, i]:.6f},{sun[2, i]:.6f}\n")


if __name__ == "__main__":
    main()
