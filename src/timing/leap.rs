//! UTC → TAI → TT: the leap-second table and the fixed TT − TAI offset.

/// TT − TAI in seconds, fixed by definition (IAU 1991 Resolution A4; TT = TAI + 32.184 s).
pub const TT_MINUS_TAI_S: f64 = 32.184;

/// First MJD on which each value of TAI − UTC (whole seconds) holds, from the IERS
/// Bulletin C series as collected in the IERS `Leap_Second.dat` file (updated through
/// Bulletin C 72, July 2026). UTC before 1972 used rubber seconds and is not supported.
const LEAP_TABLE: [(i64, i32); 28] = [
    (41317, 10), // 1972-01-01
    (41499, 11), // 1972-07-01
    (41683, 12), // 1973-01-01
    (42048, 13), // 1974-01-01
    (42413, 14), // 1975-01-01
    (42778, 15), // 1976-01-01
    (43144, 16), // 1977-01-01
    (43509, 17), // 1978-01-01
    (43874, 18), // 1979-01-01
    (44239, 19), // 1980-01-01
    (44786, 20), // 1981-07-01
    (45151, 21), // 1982-07-01
    (45516, 22), // 1983-07-01
    (46247, 23), // 1985-07-01
    (47161, 24), // 1988-01-01
    (47892, 25), // 1990-01-01
    (48257, 26), // 1991-01-01
    (48804, 27), // 1992-07-01
    (49169, 28), // 1993-07-01
    (49534, 29), // 1994-07-01
    (50083, 30), // 1996-01-01
    (50630, 31), // 1997-07-01
    (51179, 32), // 1999-01-01
    (53736, 33), // 2006-01-01
    (54832, 34), // 2009-01-01
    (56109, 35), // 2012-07-01
    (57204, 36), // 2015-07-01
    (57754, 37), // 2017-01-01
];

/// Last MJD for which the table is known to be complete: `Leap_Second.dat` "File
/// expires on 28 June 2027" (after Bulletin C 72). Later times get a warning, since a
/// leap second may have been announced since.
pub const LEAP_TABLE_VALID_UNTIL_MJD: i64 = 61584;

/// TAI − UTC in whole seconds for the UTC day `mjd`.
///
/// Returns `None` before 1972-01-01 (MJD 41317). Past
/// [`LEAP_TABLE_VALID_UNTIL_MJD`] the last value is returned; the caller warns.
pub fn tai_minus_utc_s(mjd: i64) -> Option<i32> {
    let idx = LEAP_TABLE.partition_point(|&(start, _)| start <= mjd);
    idx.checked_sub(1).map(|i| LEAP_TABLE[i].1)
}

/// Length of the UTC day `mjd` in seconds: 86401 on a day that ends with a leap second.
pub fn utc_day_length_s(mjd: i64) -> f64 {
    match (tai_minus_utc_s(mjd), tai_minus_utc_s(mjd.saturating_add(1))) {
        (Some(today), Some(tomorrow)) => 86_400.0 + f64::from(tomorrow - today),
        _ => 86_400.0,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Expected values: IERS Bulletin C (TAI − UTC history), as in Leap_Second.dat.
    #[test]
    fn known_values_from_bulletin_c() {
        assert_eq!(tai_minus_utc_s(41316), None); // 1971-12-31
        assert_eq!(tai_minus_utc_s(41317), Some(10)); // 1972-01-01
        assert_eq!(tai_minus_utc_s(51300), Some(32)); // 1999-05-02
        assert_eq!(tai_minus_utc_s(56108), Some(34)); // 2012-06-30
        assert_eq!(tai_minus_utc_s(56109), Some(35)); // 2012-07-01
        assert_eq!(tai_minus_utc_s(57753), Some(36)); // 2016-12-31
        assert_eq!(tai_minus_utc_s(57754), Some(37)); // 2017-01-01
        assert_eq!(tai_minus_utc_s(61000), Some(37)); // 2025-11-21
    }

    #[test]
    fn table_is_monotonic_with_one_second_steps() {
        for pair in LEAP_TABLE.windows(2) {
            assert!(pair[1].0 > pair[0].0);
            assert_eq!(pair[1].1 - pair[0].1, 1);
        }
        assert!(LEAP_TABLE_VALID_UNTIL_MJD > LEAP_TABLE[LEAP_TABLE.len() - 1].0);
    }

    #[test]
    fn leap_second_days_are_one_second_longer() {
        assert_eq!(utc_day_length_s(57753), 86_401.0); // 2016-12-31 23:59:60 existed
        assert_eq!(utc_day_length_s(57754), 86_400.0);
        assert_eq!(utc_day_length_s(56108), 86_401.0); // 2012-06-30
    }

    #[test]
    fn tt_minus_tai_is_the_iau_value() {
        // IAU 1991 Resolution A4 (Recommendation IV): TT − TAI = 32.184 s exactly.
        assert_eq!(TT_MINUS_TAI_S, 32.184);
        // so TT − UTC = 69.184 s since 2017 (common practice check).
        let tt_minus_utc = f64::from(tai_minus_utc_s(60000).unwrap()) + TT_MINUS_TAI_S;
        assert!((tt_minus_utc - 69.184).abs() < 1e-12);
    }
}
