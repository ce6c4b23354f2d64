//! Barycentric arrival times: topocentric UTC → TDB at the solar-system barycentre.
//!
//! t_SSB(TDB) = t(UTC) + (TAI − UTC) + 32.184 s + (TDB − TT) + Δ_Roemer − Δ_Shapiro,
//! with TDB − TT including the site term v⊕·r_site/c², Δ_Roemer = (r⊕ + r_site)·n̂/c
//! and the solar Shapiro delay. Times stay split as integer MJD + seconds
//! ([`UtcEpoch`], [`TdbEpoch`]). Accuracy against astropy + DE421 and the method are in
//! `docs/timing.md`. UT1 is taken equal to UTC (|UT1 − UTC| < 0.9 s moves the site
//! by < 0.4 km, ≤ 1.4 µs).
//!
//! ```
//! use burstbook::obs::{Site, UtcEpoch};
//! use burstbook::timing::utc_to_barycentric_tdb;
//! let site = Site { name: "demo".into(), lon_deg: 10.0, lat_deg: 45.0, height_m: 500.0 };
//! let bary = utc_to_barycentric_tdb(UtcEpoch::new(60_000, 3600.0), &site, 83.6, 22.0).unwrap();
//! assert!(bary.correction_s.abs() < 600.0 && bary.warnings.is_empty());
//! ```

mod chebyshev;
mod csv_table;
pub mod ephemeris;
pub mod geometry;
pub mod leap;
mod spk;
mod warning;

use std::sync::Mutex;

pub use csv_table::{CsvSummary, barycentre_csv};
pub use ephemeris::Ephemeris;
pub use spk::SpkEphemeris;
pub use warning::{TimingWarning, WarningTally};

use crate::error::{Error, Result};
use crate::obs::{Site, UtcEpoch, check_sky_position};
use crate::units::{SECONDS_PER_DAY, delay_to_infinity_s, whole_days};
use geometry::{
    C_KM_S, dot, itrs_to_gcrs, npb_matrix, roemer_delay_s, shapiro_delay_s, source_direction,
};

/// A TDB instant as an integer MJD plus seconds in `[0, 86400)` of that TDB day.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd)]
pub struct TdbEpoch {
    /// Integer modified Julian date (TDB).
    pub mjd: i64,
    /// Seconds since the start of that TDB day.
    pub sec: f64,
}

impl TdbEpoch {
    /// Builds an epoch, moving whole days out of `sec` (TDB days are all 86400 s).
    pub fn new(mjd: i64, sec: f64) -> Self {
        let (mjd, sec) = whole_days(mjd, sec);
        TdbEpoch { mjd, sec }
    }

    /// Floating-point MJD (about 1 µs resolution near MJD 60000).
    pub fn to_mjd_f64(self) -> f64 {
        self.mjd as f64 + self.sec / SECONDS_PER_DAY
    }

    /// Seconds from `other` to `self`.
    pub fn seconds_since(self, other: TdbEpoch) -> f64 {
        (self.mjd - other.mjd) as f64 * SECONDS_PER_DAY + (self.sec - other.sec)
    }
}

/// One converted arrival time.
#[derive(Debug, Clone, PartialEq)]
pub struct BaryResult {
    /// Arrival time at the solar-system barycentre, in TDB.
    pub tdb: TdbEpoch,
    /// Seconds to add to the UTC time to get `tdb` (the sum of the three parts below).
    pub correction_s: f64,
    /// TDB − UTC at the site in seconds (leap seconds, 32.184 s, TDB − TT).
    pub tdb_minus_utc_s: f64,
    /// Roemer delay in seconds (geometric light time, site → barycentre along the source).
    pub roemer_s: f64,
    /// Solar Shapiro delay in seconds (subtracted).
    pub shapiro_s: f64,
    /// Warnings about the tables used.
    pub warnings: Vec<TimingWarning>,
}

/// Precession–nutation is evaluated on a grid of 1/64 day: at most 11 min off, which
/// moves the site vector by < 0.1 m (precession 50″/yr; the fastest nutation terms
/// change by ~0.1″/day), and lets bursts of one observation share one matrix.
const NPB_STEPS_PER_DAY: i64 = 64;

/// Converts many times for one source and site: the site and source direction are
/// prepared once, and the last precession–nutation matrix is reused.
#[derive(Debug)]
pub struct Barycentrer {
    site_itrs_km: [f64; 3],
    direction: [f64; 3],
    ephemeris: Ephemeris,
    npb_cache: Mutex<Option<(i64, [[f64; 3]; 3])>>,
}

impl Clone for Barycentrer {
    fn clone(&self) -> Self {
        Barycentrer {
            site_itrs_km: self.site_itrs_km,
            direction: self.direction,
            ephemeris: self.ephemeris.clone(),
            npb_cache: Mutex::new(None),
        }
    }
}

impl Barycentrer {
    /// Prepares conversions towards ICRS (`ra_deg`, `dec_deg`) for `site`.
    ///
    /// # Errors
    /// [`Error::Config`] for a site off the Earth or a position out of range.
    pub fn new(site: &Site, ra_deg: f64, dec_deg: f64, ephemeris: Ephemeris) -> Result<Self> {
        check_sky_position(ra_deg, dec_deg).map_err(Error::Config)?;
        Ok(Barycentrer {
            site_itrs_km: geometry::site_itrs_km(site)?,
            direction: source_direction(ra_deg, dec_deg),
            ephemeris,
            npb_cache: Mutex::new(None),
        })
    }

    /// The precession–nutation matrix at the grid point nearest TT `mjd + frac`.
    fn npb_near(&self, mjd: i64, frac: f64) -> [[f64; 3]; 3] {
        let key = mjd * NPB_STEPS_PER_DAY + (frac * NPB_STEPS_PER_DAY as f64).round() as i64;
        let mut cache = self.npb_cache.lock().unwrap_or_else(|e| e.into_inner());
        match *cache {
            Some((k, npb)) if k == key => npb,
            _ => {
                let grid_frac = key.rem_euclid(NPB_STEPS_PER_DAY) as f64 / NPB_STEPS_PER_DAY as f64;
                let npb = npb_matrix((key.div_euclid(NPB_STEPS_PER_DAY), grid_frac));
                *cache = Some((key, npb));
                npb
            }
        }
    }

    /// Converts one topocentric UTC arrival time.
    ///
    /// # Errors
    /// [`Error::Config`] for a time before 1972-01-01 (UTC with rubber seconds), from
    /// 2100-01-01 on ([`ephemeris::ANALYTIC_EARTH_END_MJD`]: the end of the analytic
    /// Earth model's span, where its warning's error bound would no longer hold) or a
    /// non-finite time.
    pub fn convert(&self, utc: UtcEpoch) -> Result<BaryResult> {
        let mut warnings = Vec::new();
        let tai_minus_utc = leap::tai_minus_utc_s(utc.mjd)
            .filter(|_| utc.sec.is_finite() && utc.mjd < ephemeris::ANALYTIC_EARTH_END_MJD)
            .ok_or_else(|| {
                Error::Config(format!(
                    "UTC MJD {} + {} s is not supported (before 1972-01-01, after 2099-12-31 \
                     where the analytic Earth model ends, or not finite)",
                    utc.mjd, utc.sec
                ))
            })?;
        if utc.mjd > leap::LEAP_TABLE_VALID_UNTIL_MJD {
            warnings.push(TimingWarning::LeapTableExpired { mjd_utc: utc.mjd });
        }
        let tt_minus_utc = f64::from(tai_minus_utc) + leap::TT_MINUS_TAI_S;
        let tt = TdbEpoch::new(utc.mjd, utc.sec + tt_minus_utc);
        let tt_frac = tt.sec / SECONDS_PER_DAY;
        let (tdb_tt_geo, warn) = ephemeris::tdb_minus_tt_geocentric_s(tt.mjd, tt_frac);
        warnings.extend(warn);
        // The ephemeris argument is TDB (TT would misplace the Earth by up to 50 m).
        let tdb_frac = tt_frac + tdb_tt_geo / SECONDS_PER_DAY;
        let (state, warn) = self.ephemeris.earth_sun(tt.mjd, tdb_frac);
        warnings.extend(warn);

        // UT1 ≈ UTC; a leap second's extra second is folded into the last day fraction.
        let ut1_frac = (utc.sec / SECONDS_PER_DAY).min(1.0);
        let npb = self.npb_near(tt.mjd, tt_frac);
        let site_km = itrs_to_gcrs(
            self.site_itrs_km,
            (utc.mjd, ut1_frac),
            (tt.mjd, tt_frac),
            npb,
        );
        // Site term of TDB − TT, v⊕·(x − x⊕)/c² (IERS Conventions 2010 ch. 10).
        let tdb_tt_site = dot(state.earth_vel_km_s, site_km) / (C_KM_S * C_KM_S);
        let tdb_minus_utc_s = tt_minus_utc + tdb_tt_geo + tdb_tt_site;

        let obs_km = [0, 1, 2].map(|i| state.earth_km[i] + site_km[i]);
        let sun_to_obs_km = [0, 1, 2].map(|i| obs_km[i] - state.sun_km[i]);
        let roemer_s = roemer_delay_s(obs_km, self.direction);
        let shapiro_s = shapiro_delay_s(sun_to_obs_km, self.direction);
        let correction_s = tdb_minus_utc_s + roemer_s - shapiro_s;
        Ok(BaryResult {
            tdb: TdbEpoch::new(
                tt.mjd,
                tt.sec + tdb_tt_geo + tdb_tt_site + roemer_s - shapiro_s,
            ),
            correction_s,
            tdb_minus_utc_s,
            roemer_s,
            shapiro_s,
            warnings,
        })
    }
}

/// Converts one topocentric UTC time at `site` for a source at ICRS (`ra_deg`,
/// `dec_deg`) to barycentric TDB with the embedded ephemeris. For many times, build a
/// [`Barycentrer`] once.
///
/// # Errors
/// As [`Barycentrer::new`] and [`Barycentrer::convert`].
pub fn utc_to_barycentric_tdb(
    epoch: UtcEpoch,
    site: &Site,
    ra_deg: f64,
    dec_deg: f64,
) -> Result<BaryResult> {
    Barycentrer::new(site, ra_deg, dec_deg, Ephemeris::Embedded)?.convert(epoch)
}

/// Moves an arrival time measured at `freq_mhz` to infinite frequency by removing the
/// cold-plasma delay of `dm` (pc cm⁻³), using [`crate::units::DISPERSION_CONSTANT_S_MHZ2`].
/// Keep the constant the DM was measured with.
pub fn to_infinite_frequency(arrival: UtcEpoch, dm: f64, freq_mhz: f64) -> UtcEpoch {
    arrival.plus_seconds(-delay_to_infinity_s(dm, freq_mhz))
}

#[cfg(test)]
mod tests;
