//! The observation header: everything about a recording except its samples.

use serde::{Deserialize, Serialize};

use crate::timing::leap::{tai_minus_utc_s, utc_day_length_s};
use crate::units::{PLAUSIBLE_MJD, SECONDS_PER_DAY, readable, whole_days};

/// Channel centres a header may hold, MHz: from below the ionosphere's cutoff (about
/// 10 MHz) to the top of the submillimetre band (1 THz), `common practice`. Anything
/// outside is a unit or encoding mistake (Hz or GHz for MHz, a garbled value), and
/// would make dispersion delays absurd (1e-300 MHz sized the plan at terabytes).
pub(crate) const RADIO_WINDOW_MHZ: std::ops::RangeInclusive<f64> = 1.0..=1.0e6;

/// Sample times a header may hold, seconds: from 1 ns (Nyquist sampling of 500 MHz of
/// band, the fastest any recorder writes) to 100 s (slow dynamic spectra at imaging
/// cadence), `common practice`. Anything outside is a unit mistake or a garbled value
/// (1e-300 s made `search` build a boxcar width ladder of `usize::MAX` samples).
const SAMPLE_TIME_S: std::ops::RangeInclusive<f64> = 1e-9..=100.0;

/// Seconds into a UTC day a start time may give: 86401 on a day that ends with a leap
/// second, so anything at or past 86401 (or negative) belongs to another day and is a
/// garbled value (1e9 s moved a start by 31 years).
const SECONDS_OF_DAY: std::ops::Range<f64> = 0.0..86_401.0;

/// An observing site on the WGS84 ellipsoid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Site {
    /// Free-form site or telescope name.
    pub name: String,
    /// Geodetic longitude in degrees, east positive.
    pub lon_deg: f64,
    /// Geodetic latitude in degrees.
    pub lat_deg: f64,
    /// Height above the ellipsoid in metres.
    pub height_m: f64,
}

/// Farthest apart, in metres, two positions of one site may be given: a FITS file
/// keeps the site as Earth-fixed metres, whose round trip moves a geodetic position
/// by about 1e-9° (0.1 mm). A centimetre is far below what matters for arrival
/// times (3 cm is 0.1 ns).
const SAME_PLACE_M: f64 = 0.01;

impl Site {
    /// Whether `other` is this site: a position within 1 cm, whatever
    /// the names (free text; a FITS file names its site after the telescope).
    pub fn is_same_place(&self, other: &Site) -> bool {
        let xyz = |s: &Site| super::geodesy::geodetic_to_itrf_m(s.lon_deg, s.lat_deg, s.height_m);
        let (a, b) = (xyz(self), xyz(other));
        let distance_m = a
            .iter()
            .zip(&b)
            .map(|(p, q)| (p - q).powi(2))
            .sum::<f64>()
            .sqrt();
        distance_m <= SAME_PLACE_M
    }
}

/// Seconds from `a` to `b`, when they lie on the same or on adjacent UTC days (a leap
/// second ending the earlier day counted); `None` further apart.
fn seconds_between(a: UtcEpoch, b: UtcEpoch) -> Option<f64> {
    match b.mjd - a.mjd {
        0 => Some(b.sec - a.sec),
        1 => Some(utc_day_length_s(a.mjd) - a.sec + b.sec),
        -1 => Some(-(utc_day_length_s(b.mjd) - b.sec + a.sec)),
        _ => None,
    }
}

/// A UTC instant kept as an integer MJD plus seconds into that UTC day, so no
/// precision is lost to a floating-point MJD (1 µs is 1.2e-11 of a day).
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
pub struct UtcEpoch {
    /// Integer modified Julian date of the UTC day.
    pub mjd: i64,
    /// Seconds since the start of that UTC day, in `[0, 86400)`, or `[0, 86401)` on a
    /// day that ends with a leap second ([`utc_day_length_s`]).
    pub sec: f64,
}

impl UtcEpoch {
    /// The instant `sec` SI seconds after the start of UTC day `mjd` (negative:
    /// before), with whole UTC days moved out of `sec`. A day that ends with a leap
    /// second is 86401 s long, so `new(57753, 86400.5)` is 2016-12-31 23:59:60.5 and
    /// `new(57753, 86401.5)` is 2017-01-01 00:00:00.5 (IERS Bulletin C; before 1972 all
    /// days count 86400 s). A non-finite `sec` is kept as it is.
    pub fn new(mjd: i64, sec: f64) -> Self {
        if !sec.is_finite() {
            return UtcEpoch { mjd, sec };
        }
        let (mut day, mut sec) = whole_days(mjd, sec);
        if !(0.0..SECONDS_PER_DAY).contains(&sec) {
            return UtcEpoch { mjd: day, sec }; // the day count saturated
        }
        // The leap seconds that ended the days passed over: TAI − UTC grew by them.
        let tai_minus_utc = |d: i64| tai_minus_utc_s(d).map_or(0.0, f64::from);
        sec -= tai_minus_utc(day) - tai_minus_utc(mjd);
        while sec < 0.0 {
            day -= 1;
            sec += utc_day_length_s(day);
        }
        while sec >= utc_day_length_s(day) {
            sec -= utc_day_length_s(day);
            day += 1;
        }
        UtcEpoch { mjd: day, sec }
    }

    /// The start of a recording as headers store it, `sec` seconds into UTC day `mjd`,
    /// checked: `40000 <= mjd <= 100000` and `0 <= sec < 86401`. `names` are the
    /// header's words for the two values, used in the message.
    ///
    /// # Errors
    /// A message naming the value that is out of range.
    pub fn checked_start(mjd: i64, sec: f64, names: [&str; 2]) -> Result<Self, String> {
        if !PLAUSIBLE_MJD.contains(&(mjd as f64)) {
            return Err(format!(
                "{} = {mjd} is not a plausible MJD (need {} to {})",
                names[0],
                PLAUSIBLE_MJD.start(),
                PLAUSIBLE_MJD.end()
            ));
        }
        if !SECONDS_OF_DAY.contains(&sec) {
            return Err(format!(
                "{} = {} is not a time of day (need 0 <= seconds < {})",
                names[1],
                readable(sec),
                SECONDS_OF_DAY.end
            ));
        }
        Ok(UtcEpoch::new(mjd, sec))
    }

    /// The epoch `offset_s` SI seconds later (leap seconds included).
    pub fn plus_seconds(self, offset_s: f64) -> Self {
        UtcEpoch::new(self.mjd, self.sec + offset_s)
    }

    /// The epoch as a floating-point MJD (about 1 µs resolution near MJD 60000). On a
    /// leap-second day the fraction is seconds / 86401, so the day's MJDs stay below
    /// the next day's, as in the quasi-MJD of ERFA and astropy.
    pub fn to_mjd_f64(self) -> f64 {
        self.mjd as f64 + self.sec / utc_day_length_s(self.mjd)
    }

    /// Splits a floating-point (quasi-)MJD into integer day and seconds, the inverse
    /// of [`UtcEpoch::to_mjd_f64`].
    pub fn from_mjd_f64(mjd: f64) -> Self {
        let day = mjd.floor();
        UtcEpoch::new(day as i64, (mjd - day) * utc_day_length_s(day as i64))
    }

    /// ISO 8601 to the microsecond, without a zone suffix (`2016-12-31T23:59:60.500000`
    /// inside a leap second); `MJD d + s s` for a day outside the calendar's range.
    pub fn to_iso(self) -> String {
        let day_us = (utc_day_length_s(self.mjd) * 1e6) as i64;
        let us = (self.sec * 1e6).round() as i64;
        // Rounding may carry into the next day.
        let (mjd, us) = if us >= day_us {
            (self.mjd.saturating_add(1), us - day_us)
        } else {
            (self.mjd, us)
        };
        let mjd_zero = chrono::NaiveDate::from_ymd_opt(1858, 11, 17).expect("valid date");
        let date = chrono::TimeDelta::try_days(mjd).and_then(|d| mjd_zero.checked_add_signed(d));
        let Some(date) = date else {
            return format!("MJD {} + {} s", self.mjd, self.sec);
        };
        // A leap second is the 61st second of the day's last minute.
        let minute = (us / 60_000_000).min(24 * 60 - 1);
        let us = us - minute * 60_000_000;
        format!(
            "{date}T{:02}:{:02}:{:02}.{:06}",
            minute / 60,
            minute % 60,
            us / 1_000_000,
            us % 1_000_000
        )
    }
}

/// Everything known about an observation apart from its samples.
///
/// Samples are laid out `[time, channel]`, channels in the order of `freqs_mhz`
/// (ascending or descending, as recorded).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Header {
    /// Name of the source observed.
    pub source: String,
    /// Telescope name as recorded (may equal `site.name`).
    pub telescope: String,
    /// ICRS right ascension in degrees.
    pub ra_deg: f64,
    /// ICRS declination in degrees.
    pub dec_deg: f64,
    /// Where the telescope is.
    pub site: Site,
    /// UTC time of the first sample.
    pub start: UtcEpoch,
    /// Sample time in seconds.
    pub tsamp_s: f64,
    /// Centre frequency of each channel in MHz, in data order.
    pub freqs_mhz: Vec<f64>,
    /// Width of one channel in MHz (positive).
    pub chan_bw_mhz: f64,
    /// Per-channel weight; 0 masks a channel.
    pub weights: Vec<f32>,
    /// Total number of time samples in the file.
    pub n_samples: u64,
    /// Bits per stored sample (1, 2, 4, 8, 16 or 32).
    pub nbits: u32,
    /// System-equivalent flux density in Jy, if known; turns S/N into fluence.
    pub sefd_jy: Option<f64>,
    /// Optional beam identifier.
    pub beam: Option<String>,
}

impl Header {
    /// Names of the fields in which `self` and `other` differ, in declaration order
    /// (empty when they are equal).
    pub fn differing_fields(&self, other: &Header) -> Vec<&'static str> {
        // Destructured so that a new field cannot be left out of the comparison.
        let Header {
            source,
            telescope,
            ra_deg,
            dec_deg,
            site,
            start,
            tsamp_s,
            freqs_mhz,
            chan_bw_mhz,
            weights,
            n_samples,
            nbits,
            sefd_jy,
            beam,
        } = self;
        [
            ("source", *source == other.source),
            ("telescope", *telescope == other.telescope),
            ("ra_deg", *ra_deg == other.ra_deg),
            ("dec_deg", *dec_deg == other.dec_deg),
            ("site", *site == other.site),
            ("start", *start == other.start),
            ("tsamp_s", *tsamp_s == other.tsamp_s),
            ("channel frequencies", *freqs_mhz == other.freqs_mhz),
            ("chan_bw_mhz", *chan_bw_mhz == other.chan_bw_mhz),
            ("channel weights", *weights == other.weights),
            ("n_samples", *n_samples == other.n_samples),
            ("nbits", *nbits == other.nbits),
            ("sefd_jy", *sefd_jy == other.sefd_jy),
            ("beam", *beam == other.beam),
        ]
        .into_iter()
        .filter_map(|(name, same)| (!same).then_some(name))
        .collect()
    }

    /// Number of channels.
    pub fn n_chan(&self) -> usize {
        self.freqs_mhz.len()
    }

    /// Duration of the recording in seconds.
    pub fn duration_s(&self) -> f64 {
        self.n_samples as f64 * self.tsamp_s
    }

    /// Lowest channel centre frequency in MHz.
    pub fn freq_lo_mhz(&self) -> f64 {
        self.freqs_mhz.iter().copied().fold(f64::INFINITY, f64::min)
    }

    /// Highest channel centre frequency in MHz.
    pub fn freq_hi_mhz(&self) -> f64 {
        self.freqs_mhz
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max)
    }

    /// Total bandwidth in MHz, edge to edge.
    pub fn bandwidth_mhz(&self) -> f64 {
        self.freq_hi_mhz() - self.freq_lo_mhz() + self.chan_bw_mhz
    }

    /// Whether the first channel has the highest frequency.
    pub fn is_descending(&self) -> bool {
        self.freqs_mhz.len() > 1 && self.freqs_mhz[0] > self.freqs_mhz[1]
    }

    /// UTC epoch of sample `index` (its leading edge).
    pub fn epoch_of_sample(&self, index: f64) -> UtcEpoch {
        self.start.plus_seconds(index * self.tsamp_s)
    }

    /// Seconds from the end of this recording to the start of `next` (negative if
    /// `next` starts before this one ends), leap seconds counted; `None` if they are
    /// more than a day apart.
    pub fn seconds_to(&self, next: &Header) -> Option<f64> {
        seconds_between(self.epoch_of_sample(self.n_samples as f64), next.start)
    }

    /// Whether `next` continues this recording, as consecutive files of one long
    /// recording do: no [`Self::fields_breaking_continuity`], and `next` starting
    /// where this one ends, to within half a sample.
    pub fn is_continued_by(&self, next: &Header) -> bool {
        // The start first: it rules out nearly every pair of a long list at once, and
        // comparing every field (channel by channel) costs a microsecond.
        self.seconds_to(next)
            .is_some_and(|gap| gap.abs() <= 0.5 * self.tsamp_s)
            && self.fields_breaking_continuity(next).is_empty()
    }

    /// The fields in which `next` differs from this recording so that it cannot
    /// continue it: every field but the start and the length, except the site when
    /// it is the same place ([`Site::is_same_place`]: the formats keep a position to
    /// different precision) and an SEFD only one of them knows (a FITS file has no
    /// keyword for it).
    pub fn fields_breaking_continuity(&self, next: &Header) -> Vec<&'static str> {
        let (sefd, other_sefd) = (self.sefd_jy, next.sefd_jy);
        self.differing_fields(next)
            .into_iter()
            .filter(|&field| match field {
                "start" | "n_samples" => false,
                "site" => !self.site.is_same_place(&next.site),
                "sefd_jy" => sefd.is_some() && other_sefd.is_some(),
                _ => true,
            })
            .collect()
    }

    /// Checks the invariants every reader and writer relies on.
    ///
    /// # Errors
    /// A message describing the first violated invariant.
    pub fn validate(&self) -> Result<(), String> {
        if self.freqs_mhz.is_empty() {
            return Err("zero channels".into());
        }
        if !(self.tsamp_s.is_finite() && self.tsamp_s > 0.0) {
            return Err(format!(
                "sample time must be positive, got {}",
                self.tsamp_s
            ));
        }
        if !SAMPLE_TIME_S.contains(&self.tsamp_s) {
            return Err(format!(
                "sample time {} s is outside {:e} s to {} s (a unit mistake?)",
                readable(self.tsamp_s),
                SAMPLE_TIME_S.start(),
                SAMPLE_TIME_S.end()
            ));
        }
        if let Some(f) = self
            .freqs_mhz
            .iter()
            .find(|f| !RADIO_WINDOW_MHZ.contains(*f))
        {
            return Err(format!(
                "channel frequency {f} MHz is outside the radio window of {} MHz to {} MHz",
                RADIO_WINDOW_MHZ.start(),
                RADIO_WINDOW_MHZ.end()
            ));
        }
        if !(self.chan_bw_mhz.is_finite() && self.chan_bw_mhz > 0.0) {
            return Err(format!(
                "channel width must be positive, got {}",
                self.chan_bw_mhz
            ));
        }
        if self.freq_lo_mhz() - self.chan_bw_mhz / 2.0 <= 0.0 {
            return Err(format!(
                "channel width {} MHz puts the lowest channel ({} MHz) below 0 MHz",
                self.chan_bw_mhz,
                self.freq_lo_mhz()
            ));
        }
        if self.weights.len() != self.freqs_mhz.len() {
            return Err(format!(
                "{} channel weights for {} channels",
                self.weights.len(),
                self.freqs_mhz.len()
            ));
        }
        check_sky_position(self.ra_deg, self.dec_deg)?;
        let site = &self.site;
        if !(site.lat_deg.abs() <= 90.0 && site.lon_deg.is_finite() && site.height_m.is_finite()) {
            return Err(format!(
                "bad site lon={} lat={} height={} m (need |lat| <= 90 degrees)",
                site.lon_deg, site.lat_deg, site.height_m
            ));
        }
        UtcEpoch::checked_start(
            self.start.mjd,
            self.start.sec,
            ["start MJD", "start second"],
        )?;
        if let Some(s) = self.sefd_jy
            && !(s.is_finite() && s > 0.0)
        {
            return Err(format!("SEFD must be positive, got {s}"));
        }
        Ok(())
    }
}

/// Checks an ICRS position, in degrees: RA in [0, 360), Dec in [−90, 90]. One check
/// for headers, sources and barycentring, so a position one accepts the others do not
/// refuse. Out of range is refused, never wrapped: RA 400° is a typo or a unit slip,
/// not 40°, and 360° is written 0°.
///
/// # Errors
/// A message giving the position and the ranges.
pub fn check_sky_position(ra_deg: f64, dec_deg: f64) -> Result<(), String> {
    if (0.0..360.0).contains(&ra_deg) && (-90.0..=90.0).contains(&dec_deg) {
        return Ok(());
    }
    Err(format!(
        "sky position RA {ra_deg}°, Dec {dec_deg}° is out of range \
         (RA must be in [0, 360), Dec in [-90, 90] degrees)"
    ))
}

/// The steady step between channel centres `freqs_mhz` (MHz, data order), from the
/// first channel to the last; `None` for a single channel.
///
/// # Errors
/// The first channel further than `tol_mhz` from where that step puts it (a band out
/// of order, or with a gap), as a message naming it.
pub(crate) fn even_step_mhz(freqs_mhz: &[f64], tol_mhz: f64) -> Result<Option<f64>, String> {
    let [first, .., last] = freqs_mhz[..] else {
        return Ok(None);
    };
    let step = (last - first) / (freqs_mhz.len() - 1) as f64;
    for (i, pair) in freqs_mhz.windows(2).enumerate() {
        let expected = first + step * (i + 1) as f64;
        let off = (pair[1] - expected).abs();
        if off.is_nan() || off > tol_mhz {
            return Err(format!(
                "channel {} is {} MHz after {} MHz, expected {expected} MHz",
                i + 1,
                pair[1],
                pair[0]
            ));
        }
    }
    Ok(Some(step))
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;

    /// A small valid header for tests: `n_chan` channels descending over 1600–1200 MHz
    /// ([`band`]), 64 µs samples.
    pub(crate) fn test_header(n_chan: usize, n_samples: u64) -> Header {
        Header {
            source: "TEST".into(),
            telescope: "Test Dish".into(),
            ra_deg: 10.0,
            dec_deg: 20.0,
            site: Site {
                name: "Test Dish".into(),
                lon_deg: 10.0,
                lat_deg: 45.0,
                height_m: 100.0,
            },
            start: UtcEpoch::new(60000, 0.0),
            tsamp_s: 64e-6,
            freqs_mhz: band(n_chan),
            chan_bw_mhz: 400.0 / n_chan as f64,
            weights: vec![1.0; n_chan],
            n_samples,
            nbits: 32,
            sefd_jy: None,
            beam: None,
        }
    }

    /// Centres of `n_chan` equal channels descending over 1600–1200 MHz.
    pub(crate) fn band(n_chan: usize) -> Vec<f64> {
        let bw = 400.0 / n_chan as f64;
        (0..n_chan)
            .map(|i| 1600.0 - bw * (i as f64 + 0.5))
            .collect()
    }

    #[test]
    fn epoch_normalises_days() {
        let e = UtcEpoch::new(60000, 86_400.5);
        assert_eq!(e.mjd, 60001);
        assert!((e.sec - 0.5).abs() < 1e-12);
        let e = UtcEpoch::new(60000, -1.0);
        assert_eq!(e.mjd, 59999);
        assert!((e.sec - 86_399.0).abs() < 1e-12);
        let back = UtcEpoch::from_mjd_f64(e.to_mjd_f64());
        assert_eq!(back.mjd, 59999);
        assert!((back.sec - 86_399.0).abs() < 1e-5);
        // Kept as they are, not a panic or a wrapped day count.
        assert!(UtcEpoch::new(60000, f64::NAN).sec.is_nan());
        assert_eq!(UtcEpoch::new(60000, f64::INFINITY).mjd, 60000);
        assert!(UtcEpoch::new(60000, 1e300).sec.is_finite());
    }

    /// Leap seconds from IERS Bulletin C: one ended 2016-12-31 (MJD 57753).
    #[test]
    fn iso_strings_show_the_leap_second() {
        let iso = |mjd, sec| UtcEpoch::new(mjd, sec).to_iso();
        assert_eq!(iso(51544, 43200.0), "2000-01-01T12:00:00.000000");
        assert_eq!(iso(40587, 0.0), "1970-01-01T00:00:00.000000");
        assert_eq!(iso(57753, 86399.25), "2016-12-31T23:59:59.250000");
        assert_eq!(iso(57753, 86400.5), "2016-12-31T23:59:60.500000");
        assert_eq!(iso(57753, 86401.5), "2017-01-01T00:00:00.500000");
        // Rounding to the microsecond carries into the next day.
        // MJD 60000 is 2023-02-25 (from memory; the two epochs above fix the count).
        assert_eq!(iso(60000, 86399.9999996), "2023-02-26T00:00:00.000000");
        assert_eq!(iso(0, 0.0), "1858-11-17T00:00:00.000000");
        // Beyond the calendar: said plainly, not a panic.
        assert!(iso(i64::MAX, 86399.9999999).starts_with("MJD "));
        assert!(iso(-(1 << 40), 0.0).starts_with("MJD "));
    }

    #[test]
    fn validate_rejects_bad_headers() {
        let h = test_header(8, 100);
        assert!(h.validate().is_ok());
        assert!(h.is_descending());
        let mut bad = h.clone();
        bad.tsamp_s = -1.0;
        assert!(bad.validate().unwrap_err().contains("sample time"));
        let mut bad = h.clone();
        bad.freqs_mhz.clear();
        bad.weights.clear();
        assert!(bad.validate().unwrap_err().contains("zero channels"));
        let mut bad = h.clone();
        bad.weights.pop();
        assert!(bad.validate().unwrap_err().contains("weights"));
        for f in [1e-300, 0.5, 0.0, -1400.0, 2e6, 1e308, f64::NAN] {
            let mut bad = h.clone();
            bad.freqs_mhz[3] = f;
            assert!(bad.validate().unwrap_err().contains("radio window"), "{f}");
        }
        let mut bad = h.clone();
        bad.chan_bw_mhz = 4000.0;
        assert!(bad.validate().unwrap_err().contains("below 0 MHz"));
        // RA 360° passed here but barycentring refused it: one range for both.
        for (ra, dec) in [
            (400.0, 0.0),
            (360.0, 0.0),
            (-1.0, 0.0),
            (f64::NAN, 0.0),
            (10.0, 91.0),
            (10.0, f64::NAN),
        ] {
            let mut bad = h.clone();
            (bad.ra_deg, bad.dec_deg) = (ra, dec);
            assert!(
                bad.validate().unwrap_err().contains("sky position"),
                "{ra} {dec}"
            );
        }
        for (lon, lat) in [(0.0, 100.0), (0.0, f64::NAN), (f64::INFINITY, 0.0)] {
            let mut bad = h.clone();
            (bad.site.lon_deg, bad.site.lat_deg) = (lon, lat);
            assert!(
                bad.validate().unwrap_err().contains("bad site"),
                "{lon} {lat}"
            );
        }
    }
}

#[cfg(test)]
mod bound_tests {
    use super::tests::test_header;
    use super::*;

    #[test]
    fn validate_bounds_sample_time_and_start() {
        let h = test_header(8, 100);
        for t in [1e-9, 1e-3, 100.0] {
            let mut ok = h.clone();
            ok.tsamp_s = t;
            assert!(ok.validate().is_ok(), "{t}");
        }
        for t in [1e-300, 9e-10, 100.5, 1e300] {
            let mut bad = h.clone();
            bad.tsamp_s = t;
            let msg = bad.validate().unwrap_err();
            assert!(msg.contains("is outside 1e-9 s to 100 s"), "{t}: {msg}");
        }
        for (mjd, sec) in [(-100, 0.0), (39_999, 0.0), (100_001, 0.0), (i64::MIN, 0.0)] {
            let mut bad = h.clone();
            bad.start = UtcEpoch { mjd, sec };
            let msg = bad.validate().unwrap_err();
            assert!(msg.contains("not a plausible MJD"), "{mjd}: {msg}");
        }
        for sec in [-0.5, 86_401.0, 1e9, f64::NAN, f64::INFINITY] {
            let mut bad = h.clone();
            bad.start = UtcEpoch { mjd: 60_000, sec };
            let msg = bad.validate().unwrap_err();
            assert!(msg.contains("not a time of day"), "{sec}: {msg}");
        }
        // The second of a leap second, and the last day in range, are fine.
        let e = UtcEpoch::checked_start(57_753, 86_400.5, ["d", "s"]).unwrap();
        assert_eq!((e.mjd, e.sec), (57_753, 86_400.5));
        assert!(UtcEpoch::checked_start(100_000, 0.0, ["d", "s"]).is_ok());
        let msg = UtcEpoch::checked_start(60_000, 1e9, ["day", "start_sec"]).unwrap_err();
        assert!(msg.starts_with("start_sec = 1e9 is not"), "{msg}");
    }

    // A file continues another when it starts where the other ends (half a sample of
    // slack), across a day boundary and a leap second too, and nothing else changed.
    #[test]
    fn a_recording_is_continued_by_the_file_that_starts_where_it_ends() {
        let a = test_header(8, 1000);
        let next = |offset_samples: f64| {
            let mut b = a.clone();
            b.start = a.epoch_of_sample(1000.0 + offset_samples);
            b.n_samples = 77;
            b
        };
        assert!(a.is_continued_by(&next(0.0)));
        assert!(a.is_continued_by(&next(0.4)));
        assert!(a.is_continued_by(&next(-0.4)));
        assert!(
            !a.is_continued_by(&next(0.6)),
            "a gap of more than half a sample"
        );
        assert!(!a.is_continued_by(&next(-1.0)), "an overlap");
        assert!(!a.is_continued_by(&a), "the same start");
        let changed: [fn(&mut Header); 4] = [
            |h| h.tsamp_s *= 2.0,
            |h| h.source = "OTHER".into(),
            |h| h.weights[3] = 0.0,
            |h| h.nbits = 8,
        ];
        for change in changed {
            let mut b = next(0.0);
            change(&mut b);
            assert!(!a.is_continued_by(&b), "{b:?}");
        }
        // Across the leap second that closed 2016-12-31 (MJD 57753, 86401 s long): a
        // file ending at midnight is continued by one starting 0.2 ms before it, at
        // 23:59:60.9998, which a day of 86400 s would put a second later.
        let mut before_leap = test_header(8, 2000);
        before_leap.tsamp_s = 1e-3;
        before_leap.start = UtcEpoch::new(57_753, 86_399.0);
        let mut after = before_leap.clone();
        after.start = UtcEpoch::new(57_753, 86_400.999_8);
        assert!(before_leap.is_continued_by(&after));
        after.start = UtcEpoch::new(57_753, 86_399.999_8);
        assert!(!before_leap.is_continued_by(&after));
    }

    // One site given to different precision, or under another name, is one site; a
    // site moved by a few centimetres is another. An SEFD that only one file knows
    // does not break a recording (FITS has no keyword for it); two that differ do.
    #[test]
    fn the_site_to_a_centimetre_and_an_unknown_sefd_keep_a_recording_whole() {
        let mut a = test_header(8, 1000);
        a.sefd_jy = Some(20.0);
        let mut b = a.clone();
        b.start = a.epoch_of_sample(1000.0);
        // 1e-9° of latitude is 0.11 mm on the ground; 1e-6° is 11 cm.
        b.site.lat_deg += 1e-9;
        b.site.lon_deg -= 1e-9;
        b.sefd_jy = None;
        b.site.name = "the telescope's name".into();
        assert!(a.is_continued_by(&b));
        assert!(b.is_continued_by(&Header {
            start: b.epoch_of_sample(1000.0),
            ..a.clone()
        }));
        let moved = |h: &mut Header| h.site.lat_deg += 1e-6;
        let recalibrated = |h: &mut Header| h.sefd_jy = Some(25.0);
        for (change, field) in [
            (moved as fn(&mut Header), "site"),
            (recalibrated, "sefd_jy"),
        ] {
            let mut c = b.clone();
            c.sefd_jy = Some(20.0);
            change(&mut c);
            assert!(!a.is_continued_by(&c), "{c:?}");
            assert_eq!(a.fields_breaking_continuity(&c), [field]);
        }
    }
}
