//! Barycentric corrections against astropy 8.0.2 with the JPL DE421 ephemeris
//! (jplephem 2.24, numpy 2.4.6, pyerfa 2.0.1.5): fixture and generating script in
//! `tests/fixtures/timing/`. Also checks the embedded Earth/TDB tables against direct
//! DE421 / ERFA dtdb values written by `scripts/timing/make_ephemeris_tables.py`, and
//! UTC arithmetic across leap seconds against astropy 8.0.2 (pyerfa 2.0.1.5).

use burstbook::obs::{Site, UtcEpoch};
use burstbook::timing::{Barycentrer, Ephemeris, TimingWarning, ephemeris};

const FIXTURE: &str = "tests/fixtures/timing/barycentre_astropy_de421.csv";
const EPHEMERIS_CHECK: &str = "tests/fixtures/timing/ephemeris_check.csv";
const LEAP_SECONDS: &str = "tests/fixtures/timing/leap_second_astropy.csv";

fn rows(path: &str) -> Vec<Vec<f64>> {
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_path(path)
        .unwrap();
    reader
        .records()
        .map(|r| r.unwrap().iter().map(|v| v.parse().unwrap()).collect())
        .collect()
}

fn rms(v: &[f64]) -> f64 {
    (v.iter().map(|x| x * x).sum::<f64>() / v.len() as f64).sqrt()
}

#[test]
fn barycentric_correction_within_30_us_of_astropy_de421() {
    let table = rows(FIXTURE);
    assert!(table.len() >= 600);
    let (mut total, mut tdb, mut roemer, mut shapiro) = (vec![], vec![], vec![], vec![]);
    let mut geometric = vec![];
    for r in &table {
        let site = Site {
            name: "fixture".into(),
            lon_deg: r[2],
            lat_deg: r[3],
            height_m: r[4],
        };
        let bary = Barycentrer::new(&site, r[5], r[6], Ephemeris::Embedded).unwrap();
        let got = bary
            .convert(UtcEpoch {
                mjd: r[0] as i64,
                sec: r[1],
            })
            .unwrap();
        // Only the expected leap-table warning after 2027-06-28 (astropy also keeps 37 s).
        let expired = |w: &TimingWarning| matches!(w, TimingWarning::LeapTableExpired { .. });
        assert!(got.warnings.iter().all(expired), "{:?}", got.warnings);
        tdb.push(got.tdb_minus_utc_s - r[7]);
        roemer.push(got.roemer_s - r[8]);
        shapiro.push(got.shapiro_s - r[9]);
        total.push(got.correction_s - r[10]);
        geometric.push(got.roemer_s - r[11]);
    }
    let max = |v: &[f64]| v.iter().fold(0f64, |m, x| m.max(x.abs()));
    println!(
        "vs astropy+DE421 over {} rows, µs: total max {:.3} rms {:.3}; TDB-UTC max {:.4}; \
         Roemer max {:.3} (geometric {:.3}); Shapiro max {:.4}",
        total.len(),
        max(&total) * 1e6,
        rms(&total) * 1e6,
        max(&tdb) * 1e6,
        max(&roemer) * 1e6,
        max(&geometric) * 1e6,
        max(&shapiro) * 1e6
    );
    assert!(max(&total) <= 30e-6);
    // The parts separately, at the accuracy the method should reach: astropy applies
    // aberration to the site vector (≤ 2 µs, see docs/timing.md); polar motion ≤ 0.05 µs.
    assert!(max(&tdb) < 0.1e-6);
    assert!(max(&roemer) < 3e-6);
    assert!(max(&geometric) < 0.1e-6);
    assert!(max(&shapiro) < 0.05e-6);
}

#[test]
fn embedded_tables_match_de421_and_dtdb() {
    let (mut pos, mut dt, mut sun) = (0f64, 0f64, 0f64);
    for r in rows(EPHEMERIS_CHECK) {
        let day = r[0].floor();
        let (state, warn) = Ephemeris::Embedded.earth_sun(day as i64, r[0] - day);
        assert!(warn.is_none());
        let d2: f64 = (0..3).map(|i| (state.earth_km[i] - r[1 + i]).powi(2)).sum();
        pos = pos.max(d2.sqrt());
        let s2: f64 = (0..3).map(|i| (state.sun_km[i] - r[5 + i]).powi(2)).sum();
        sun = sun.max(s2.sqrt());
        let (tdb_tt, _) = ephemeris::tdb_minus_tt_geocentric_s(day as i64, r[0] - day);
        dt = dt.max((tdb_tt - r[4]).abs());
    }
    println!(
        "embedded tables: Earth max {:.1} m, Sun max {:.1} m, TDB-TT max {:.2} ns",
        pos * 1e3,
        sun * 1e3,
        dt * 1e9
    );
    assert!(pos < 0.05); // km; the fit's own worst case is 28 m
    assert!(dt < 10e-9);
    assert!(sun < 0.1); // km; fit worst case 89 m
}

/// Adding SI seconds to a UTC epoch counts the leap seconds passed over, an instant
/// inside one is 23:59:60.x of its day, and the floating MJD of a leap-second day is
/// astropy's quasi-MJD (fraction = seconds / 86401). Before, a day was always 86400 s,
/// which put every time after a leap second inside an observation 1 s late.
#[test]
fn utc_arithmetic_across_leap_seconds_matches_astropy() {
    let table = rows(LEAP_SECONDS);
    assert_eq!(table.len(), 60);
    let mut inside_leap_second = 0;
    for r in &table {
        let (start, offset_s) = (UtcEpoch::new(r[0] as i64, r[1]), r[2]);
        let (end_mjd, end_sec, quasi_mjd) = (r[3] as i64, r[4], r[5]);
        let end = start.plus_seconds(offset_s);
        let case = format!("{start:?} + {offset_s} s = {end:?}, astropy {end_mjd} + {end_sec} s");
        assert_eq!(end.mjd, end_mjd, "{case}");
        assert!((end.sec - end_sec).abs() < 1e-6, "{case}");
        // 1e-11 day is 0.9 µs, the resolution of an f64 MJD near 57 000.
        assert!((end.to_mjd_f64() - quasi_mjd).abs() < 1e-11, "{case}");
        let back = UtcEpoch::from_mjd_f64(quasi_mjd);
        assert_eq!(back.mjd, end_mjd, "{case}");
        assert!((back.sec - end_sec).abs() < 2e-6, "{case}");
        inside_leap_second += usize::from(end_sec >= 86_400.0);
    }
    assert!(
        inside_leap_second >= 2,
        "the fixture must reach inside a leap second"
    );
}
