//! Conversions between Earth-fixed Cartesian positions (ITRF, metres) and geodetic
//! longitude, latitude and height on the WGS84 ellipsoid, plus the sexagesimal
//! angle strings FITS headers use for RA and Dec, and the one way right ascension is
//! printed (wrapped into [0, 360°) after rounding).
//!
//! Ellipsoid: a = 6378137 m, 1/f = 298.257223563 (NIMA TR8350.2, 3rd ed., 2000,
//! "Department of Defense World Geodetic System 1984", table 3.1).

use super::Site;

/// WGS84 semi-major axis in metres.
const WGS84_A_M: f64 = 6_378_137.0;
/// WGS84 flattening.
const WGS84_F: f64 = 1.0 / 298.257_223_563;

fn e2() -> f64 {
    WGS84_F * (2.0 - WGS84_F)
}

/// Prime-vertical radius of curvature in metres at geodetic latitude `lat` (radians).
fn prime_vertical_radius_m(lat: f64) -> f64 {
    WGS84_A_M / (1.0 - e2() * lat.sin().powi(2)).sqrt()
}

/// Earth-fixed `[x, y, z]` in metres of a geodetic position on the WGS84 ellipsoid:
/// the standard closed form as ERFA's `gd2gc` computes it (checked against astropy in
/// `tests/formats_fixtures.rs`). Non-finite input gives non-finite output.
pub fn geodetic_to_itrf_m(lon_deg: f64, lat_deg: f64, height_m: f64) -> [f64; 3] {
    erfa::transform::geodetic_to_geocentric(
        erfa::Ellipsoid::WGS84,
        lon_deg.to_radians(),
        lat_deg.to_radians(),
        height_m,
    )
    // ERFA refuses only cos²φ + (1 − f)² sin²φ ≤ 0, which the WGS84 flattening never
    // gives (the sum is at least (1 − f)²; a NaN sum is passed through as NaN).
    .unwrap_or([f64::NAN; 3])
}

/// Geodetic `(lon_deg, lat_deg, height_m)` of an Earth-fixed position in metres.
///
/// Fixed-point iteration on tan φ = (z + e²N sin φ)/p, with the height from
/// h = p cos φ + z sin φ − a²/N, which stays well conditioned at the poles
/// (Torge & Müller 2012, *Geodesy*, 4th ed., §4.2.1, section from memory). Converges to < 1e-12 rad in a few steps for
/// points near the Earth's surface.
pub fn itrf_to_geodetic(xyz_m: [f64; 3]) -> (f64, f64, f64) {
    let [x, y, z] = xyz_m;
    let p = x.hypot(y);
    let mut lat = z.atan2(p * (1.0 - e2()));
    for _ in 0..20 {
        let n = prime_vertical_radius_m(lat);
        let next = (z + e2() * n * lat.sin()).atan2(p);
        let done = (next - lat).abs() < 1e-14;
        lat = next;
        if done {
            break;
        }
    }
    let n = prime_vertical_radius_m(lat);
    let height_m = p * lat.cos() + z * lat.sin() - WGS84_A_M * WGS84_A_M / n;
    (y.atan2(x).to_degrees(), lat.to_degrees(), height_m)
}

/// The site at an Earth-fixed position, named `name`.
pub fn site_from_itrf(name: &str, xyz_m: [f64; 3]) -> Site {
    let (lon_deg, lat_deg, height_m) = itrf_to_geodetic(xyz_m);
    Site {
        name: name.to_string(),
        lon_deg,
        lat_deg,
        height_m,
    }
}

/// Parses `"[+-]a:b:c.ccc"` (or `"a b c"`) into `a + b/60 + c/3600` with the sign
/// applied to the whole; fewer fields are allowed (`"12:30"`, `"-5.5"`).
pub fn parse_sexagesimal(s: &str) -> Option<f64> {
    let t = s.trim();
    let (sign, body) = match t.strip_prefix('-') {
        Some(rest) => (-1.0, rest),
        None => (1.0, t.strip_prefix('+').unwrap_or(t)),
    };
    let parts: Vec<f64> = body
        .split([':', ' '])
        .filter(|p| !p.is_empty())
        .map(|p| p.parse::<f64>().ok().filter(|v| v.is_finite() && *v >= 0.0))
        .collect::<Option<_>>()?;
    if parts.is_empty() || parts.len() > 3 || parts[1..].iter().any(|&v| v >= 60.0) {
        return None;
    }
    Some(
        sign * parts
            .iter()
            .zip([1.0, 60.0, 3600.0])
            .map(|(v, d)| v / d)
            .sum::<f64>(),
    )
}

/// Formats `value` (hours or degrees) as `"[-]DD:MM:SS.fff…"` with `decimals` digits
/// of seconds and a leading `+` when `signed`.
pub fn format_sexagesimal(value: f64, decimals: usize, signed: bool) -> String {
    let sign = if value < 0.0 {
        "-"
    } else if signed {
        "+"
    } else {
        ""
    };
    let scale = 10f64.powi(decimals as i32);
    // Round once in units of the last digit so 59.9999 s carries into the minutes.
    let total = (value.abs() * 3600.0 * scale).round() as u64;
    let unit = 3600 * scale as u64;
    let (whole, rest) = (total / unit, total % unit);
    let (minutes, sec_units) = (rest / (60 * scale as u64), rest % (60 * scale as u64));
    let secs = sec_units as f64 / scale;
    let width = if decimals > 0 { decimals + 3 } else { 2 };
    format!("{sign}{whole:02}:{minutes:02}:{secs:0width$.decimals$}")
}

/// Right ascension `ra_deg` in degrees with `decimals` fixed decimals. An RA that
/// rounds to 360 (359.9999999 at 6 decimals) is the direction 0 and prints as 0, as
/// does −0: the printed value stays in the [0, 360) every reader of it checks.
pub fn format_ra_deg(ra_deg: f64, decimals: usize) -> String {
    let text = format!("{ra_deg:.decimals$}");
    match text.parse::<f64>() {
        Ok(v) if v >= 360.0 || v == 0.0 => format!("{:.decimals$}", 0.0),
        _ => text,
    }
}

/// Right ascension `ra_deg` as sexagesimal hours `"HH:MM:SS.fff…"` with `decimals`
/// digits of seconds. One a hair under 360° rounds to 24:00:00, which reads back as
/// 360°, out of range: it prints as the same direction, 00:00:00.
pub fn format_ra_hms(ra_deg: f64, decimals: usize) -> String {
    let text = format_sexagesimal(ra_deg / 15.0, decimals, false);
    match text.strip_prefix("24:") {
        Some(rest) => format!("00:{rest}"),
        None => text,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_trips_geodetic_positions() {
        for &(lon, lat, h) in &[
            (0.0, 0.0, 0.0),
            (-70.25, -30.5, 2500.0),
            (116.45, 89.99, 10.0),
            (179.9, -89.5, -50.0),
            (21.4, 45.0, 8000.0),
        ] {
            let xyz = geodetic_to_itrf_m(lon, lat, h);
            let (lon2, lat2, h2) = itrf_to_geodetic(xyz);
            assert!((lon2 - lon).abs() < 1e-11, "{lon} {lon2}");
            assert!((lat2 - lat).abs() < 1e-11, "{lat} {lat2}");
            assert!((h2 - h).abs() < 1e-6, "{h} {h2}");
        }
        // On the equator x = a; at a pole z = b + h with b = a(1 − f) (derived here).
        assert_eq!(geodetic_to_itrf_m(0.0, 0.0, 0.0), [WGS84_A_M, 0.0, 0.0]);
        let pole = geodetic_to_itrf_m(30.0, -90.0, 12.0);
        assert!(
            (pole[2] + WGS84_A_M * (1.0 - WGS84_F) + 12.0).abs() < 1e-6,
            "{pole:?}"
        );
        assert!(pole[0].abs() < 1e-6 && pole[1].abs() < 1e-6, "{pole:?}");
        assert!(
            geodetic_to_itrf_m(0.0, f64::NAN, 0.0)
                .iter()
                .all(|v| v.is_nan())
        );
    }

    #[test]
    fn sexagesimal_round_trips_and_rejects_junk() {
        assert_eq!(format_sexagesimal(12.5, 3, false), "12:30:00.000");
        assert_eq!(format_sexagesimal(-0.5, 2, true), "-00:30:00.00");
        assert_eq!(format_sexagesimal(1.0 - 1e-9, 2, true), "+01:00:00.00");
        assert_eq!(parse_sexagesimal("-00:30:00"), Some(-0.5));
        assert_eq!(parse_sexagesimal("+12 30"), Some(12.5));
        for v in [0.0, 5.123_456_789, -45.999_999, 23.999] {
            let s = format_sexagesimal(v, 6, true);
            assert!((parse_sexagesimal(&s).unwrap() - v).abs() < 1e-9, "{s}");
        }
        for junk in ["", "ab:cd", "12:61:00", "1:2:3:4", "--1"] {
            assert_eq!(parse_sexagesimal(junk), None, "{junk}");
        }
    }

    /// 359.9999999° printed as `360.000000`, outside [0, 360).
    #[test]
    fn right_ascension_that_rounds_to_a_full_circle_prints_as_zero() {
        assert_eq!(format_ra_deg(359.999_999_9, 6), "0.000000");
        assert_eq!(format_ra_deg(359.999_999_5, 6), "0.000000");
        assert_eq!(format_ra_deg(359.999_999_4, 6), "359.999999");
        assert_eq!(format_ra_deg(360.0 - 1e-12, 3), "0.000");
        assert_eq!(format_ra_deg(-0.0, 6), "0.000000");
        assert_eq!(format_ra_deg(123.25, 6), "123.250000");
        assert_eq!(format_ra_deg(0.0, 0), "0");
        assert_eq!(format_ra_hms(360.0 - 1e-9, 3), "00:00:00.000");
        assert_eq!(format_ra_hms(359.999, 3), "23:59:59.760");
        assert_eq!(format_ra_hms(187.5, 2), "12:30:00.00");
    }
}
