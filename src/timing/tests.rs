//! Unit tests of the conversion as a whole; the comparison with astropy + DE421 is
//! in `tests/timing_astropy.rs`.

use super::*;

fn site() -> Site {
    Site {
        name: "test".into(),
        lon_deg: 10.0,
        lat_deg: 45.0,
        height_m: 500.0,
    }
}

fn convert(mjd: i64, sec: f64) -> BaryResult {
    utc_to_barycentric_tdb(UtcEpoch::new(mjd, sec), &site(), 83.6, 22.0).unwrap()
}

#[test]
fn parts_add_up_and_tdb_is_utc_plus_correction() {
    let r = convert(60_000, 12_345.678);
    let parts = r.tdb_minus_utc_s + r.roemer_s - r.shapiro_s;
    assert!((parts - r.correction_s).abs() < 1e-12);
    let utc_as_tdb = TdbEpoch::new(60_000, 12_345.678);
    assert!((r.tdb.seconds_since(utc_as_tdb) - r.correction_s).abs() < 1e-9);
    // TT − UTC = 69.184 s in 2023; TDB − TT within ±1.7 ms (annual term, Fairhead &
    // Bretagnon 1990); Roemer ≤ 1 au/c = 499.005 s plus the site term.
    assert!((r.tdb_minus_utc_s - 69.184).abs() < 1.7e-3);
    assert!(r.roemer_s.abs() < 499.03);
    assert!(r.warnings.is_empty());
}

#[test]
fn leap_second_is_continuous_in_tdb() {
    // 2016-12-31 had 86401 UTC seconds; the instant after 23:59:60 is 2017-01-01 00:00:00.
    // `inside` is 23:59:60.5, one SI second before `after`.
    let inside = UtcEpoch::new(57_753, 86_400.5);
    assert_eq!(inside.mjd, 57_753);
    let before = utc_to_barycentric_tdb(inside, &site(), 83.6, 22.0).unwrap();
    let after = convert(57_754, 0.5);
    // Topocentric TDB (before the light-time terms) advances by exactly one second.
    let at_site =
        |utc: UtcEpoch, r: &BaryResult| TdbEpoch::new(utc.mjd, utc.sec + r.tdb_minus_utc_s);
    let dt = at_site(inside.plus_seconds(1.0), &after).seconds_since(at_site(inside, &before));
    assert!((dt - 1.0).abs() < 1e-9, "{dt}");
    assert_eq!(
        (after.tdb_minus_utc_s - before.tdb_minus_utc_s).round(),
        1.0
    );
}

#[test]
fn times_before_1972_or_after_2099_are_refused_and_late_ones_warn() {
    let early = utc_to_barycentric_tdb(UtcEpoch::new(41_000, 0.0), &site(), 0.0, 0.0);
    assert!(matches!(early, Err(Error::Config(_))));
    let late = convert(leap::LEAP_TABLE_VALID_UNTIL_MJD + 1, 0.0);
    assert!(
        late.warnings
            .iter()
            .any(|w| matches!(w, TimingWarning::LeapTableExpired { .. }))
    );
    let beyond = convert(75_000, 0.0);
    assert_eq!(beyond.warnings.len(), 3);
    assert!(beyond.warnings[2].to_string().contains("epv00"));
    // 2099-12-31 is the last day of epv00's span; MJD 999999 used to convert with
    // its warning's "errors up to ~45 µs".
    let last = convert(88_068, 86_399.0);
    assert!(last.warnings[2].to_string().contains("epv00"));
    for mjd in [88_069, 999_999] {
        let after = utc_to_barycentric_tdb(UtcEpoch::new(mjd, 0.0), &site(), 0.0, 0.0);
        assert!(
            matches!(&after, Err(Error::Config(m)) if m.contains("after 2099-12-31")),
            "{after:?}"
        );
    }
}

#[test]
fn bad_positions_are_refused() {
    assert!(Barycentrer::new(&site(), 10.0, 95.0, Ephemeris::Embedded).is_err());
    assert!(Barycentrer::new(&site(), f64::NAN, 0.0, Ephemeris::Embedded).is_err());
}

#[test]
fn infinite_frequency_removes_the_cold_plasma_delay() {
    // k·DM/f² = 4148.808 × 500 / 1400² s = 1.058369 s (Lorimer & Kramer 2005 eq. 4.7).
    let t = to_infinite_frequency(UtcEpoch::new(60_000, 10.0), 500.0, 1400.0);
    assert_eq!(t.mjd, 60_000);
    assert!((t.sec - (10.0 - 4148.808 * 500.0 / 1400f64.powi(2))).abs() < 1e-12);
    assert!((10.0 - t.sec - 1.058_369).abs() < 1e-6);
}
