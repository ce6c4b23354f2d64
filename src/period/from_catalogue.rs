//! Arrival times and observing sessions of one catalogue source, both on barycentric
//! TDB, ready for the periodicity tests.
//!
//! Bursts carry a topocentric UTC arrival and, once `burstbook book barycentre` has
//! run, a barycentric TDB one. Bursts still without it are converted here with
//! [`crate::timing`] (the same conversion that command stores), so a search never
//! fails for want of a preparatory step; the count is reported so callers can say so.
//! Nothing is written to the catalogue.
//!
//! Exposure windows are stored as topocentric UTC MJDs. Comparing TDB arrivals with
//! UTC windows shifts every burst by the barycentric correction (69 s + up to ±500 s
//! Roemer delay) against its window, so bursts near a session edge fall outside it.
//! The window edges are therefore converted with the same barycentre conversion,
//! towards the source position. The conversion is monotonic in time (its rate is
//! |v⊕/c| ≈ 10⁻⁴), so a burst inside a UTC window stays inside its TDB window.
//! Windows carry no site, so the site of the source's first burst is used; another
//! site changes an edge by at most an Earth radius over c (≈ 21 ms, common practice).

use super::times::{ArrivalTimes, Exposure, SECONDS_PER_DAY};
use crate::catalogue::{Bounds, BurstFilter, BurstTiming, Catalogue};
use crate::error::{Error, Result};
use crate::obs::UtcEpoch;
use crate::timing::{Barycentrer, Ephemeris, TdbEpoch, WarningTally};

/// Barycentric arrival times of one source's bursts.
#[derive(Debug, Clone)]
pub struct SourceArrivals {
    /// Source name.
    pub source: String,
    /// Barycentric TDB arrival times, one per burst.
    pub toas: ArrivalTimes,
    /// Bursts whose TDB arrival was not stored and was computed here.
    pub computed: usize,
    /// Warnings of the timing conversions, one line per kind naming the bursts
    /// that raised it ([`WarningTally::lines`]).
    pub warnings: Vec<String>,
    /// The first burst, whose site and source position convert exposure windows.
    first: BurstTiming,
}

impl SourceArrivals {
    /// Reads the bursts of `source` with S/N ≥ `snr_min` (`None`: all) and their
    /// barycentric TDB arrival times, computing those not yet stored. Pass the
    /// threshold given to [`SourceArrivals::exposure`]: a burst weaker than it could
    /// only be found in the sessions searched deeper, so it does not belong with
    /// exposure counted at that depth (the rule of `book summary`).
    ///
    /// # Errors
    /// Unknown source, a source without bursts (at that S/N), a failed timing
    /// conversion, or an SQLite failure.
    pub fn load(cat: &Catalogue, source: &str, snr_min: Option<f64>) -> Result<SourceArrivals> {
        let bursts: Vec<BurstTiming> = cat
            .burst_timing(source)?
            .into_iter()
            .filter(|b| snr_min.is_none_or(|s| b.snr >= s))
            .collect();
        let Some(first) = bursts.first().cloned() else {
            return Err(Error::Catalogue {
                path: cat.path().to_path_buf(),
                msg: format!(
                    "source {source:?} has no bursts{} (promote candidates with \
                     `burstbook book promote`)",
                    snr_min.map_or(String::new(), |s| format!(" of S/N ≥ {s}"))
                ),
            });
        };
        let mut warnings = WarningTally::new("burst", "id");
        let mut computed = 0;
        let mut parts = Vec::with_capacity(bursts.len());
        for b in &bursts {
            let tdb = match b.toa_tdb_mjd {
                Some(mjd) => (mjd.floor() as i64, mjd - mjd.floor()),
                None => {
                    computed += 1;
                    let r = Barycentrer::new(&b.site, b.ra_deg, b.dec_deg, Ephemeris::Embedded)?
                        .convert(UtcEpoch::from_mjd_f64(b.mjd_utc))?;
                    warnings.add(b.burst_id, &r.warnings);
                    (r.tdb.mjd, r.tdb.sec / SECONDS_PER_DAY)
                }
            };
            parts.push(tdb);
        }
        Ok(SourceArrivals {
            source: source.to_string(),
            toas: ArrivalTimes::from_day_fraction(&parts)?,
            computed,
            warnings: warnings.lines(),
            first,
        })
    }

    /// The source's merged exposure by searches complete at `snr_min` (see
    /// [`Catalogue::merged_exposure`]), window edges converted to barycentric TDB and
    /// counted from `self.toas.ref_mjd`.
    ///
    /// # Errors
    /// No exposure at that depth, a failed timing conversion, or an SQLite failure.
    pub fn exposure(&self, cat: &Catalogue, snr_min: Option<f64>) -> Result<Exposure> {
        let windows = cat.merged_exposure(&self.source, snr_min)?;
        if windows.is_empty() {
            return Err(Error::Catalogue {
                path: cat.path().to_path_buf(),
                msg: format!(
                    "source {:?} has no exposure{} (import sessions with \
                     `burstbook book exposure import`)",
                    self.source,
                    snr_min.map_or(String::new(), |s| format!(" searched to S/N {s}"))
                ),
            });
        }
        let b = &self.first;
        let bary = Barycentrer::new(&b.site, b.ra_deg, b.dec_deg, Ephemeris::Embedded)?;
        let origin = TdbEpoch::new(self.toas.ref_mjd, 0.0);
        let to_days = |mjd_utc: f64| -> Result<f64> {
            let tdb = bary.convert(UtcEpoch::from_mjd_f64(mjd_utc))?.tdb;
            Ok(tdb.seconds_since(origin) / SECONDS_PER_DAY)
        };
        let sessions = windows
            .iter()
            .map(|&(a, b)| Ok((to_days(a)?, to_days(b)?)))
            .collect::<Result<Vec<_>>>()?;
        Exposure::new(self.toas.ref_mjd, sessions)
    }
}

impl SourceArrivals {
    /// The arrival times inside `exposure` (from [`SourceArrivals::exposure`]) and how
    /// many lie outside it. A burst promoted from another pointing's search, or found
    /// by a search not counted at this depth, arrived while the source was not being
    /// searched so: like `book summary`, the periodicity tests leave it out (an
    /// exposure-aware fold has no place for it) and say how many.
    ///
    /// # Errors
    /// A time that is not finite ([`ArrivalTimes::from_seconds`]).
    pub fn inside(&self, exposure: &Exposure) -> Result<(ArrivalTimes, usize)> {
        let (inside, outside): (Vec<f64>, Vec<f64>) = self
            .toas
            .t_s
            .iter()
            .partition(|&&t| exposure.session_of(t / SECONDS_PER_DAY).is_some());
        let toas = ArrivalTimes::from_seconds(self.toas.ref_mjd, inside)?;
        Ok((toas, outside.len()))
    }
}

/// Fluences in Jy ms of the bursts of `source` with S/N ≥ `snr_min` (`None`: all)
/// that have one (the SEFD was known).
///
/// # Errors
/// Unknown source or an SQLite failure.
pub fn source_fluences_jy_ms(
    cat: &Catalogue,
    source: &str,
    snr_min: Option<f64>,
) -> Result<Vec<f64>> {
    let filter = BurstFilter {
        source: Some(source.to_string()),
        bounds: Bounds {
            snr_min,
            ..Default::default()
        },
    };
    Ok(cat
        .bursts(&filter)?
        .into_iter()
        .filter_map(|b| b.fluence_jy_ms)
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::synthetic::{candidates, observation, run};
    use crate::catalogue::{AssignTolerance, CandidateFilter};

    const TOL: AssignTolerance = AssignTolerance {
        radius_deg: 1.0,
        dm: 1.0,
    };

    /// Two one-hour observations of SRC whose candidates include one 10 ms after the
    /// start and one 10 ms before the end of each; all are promoted.
    fn catalogue_with_edge_bursts(dir: &std::path::Path) -> (Catalogue, usize) {
        let mut cat = Catalogue::open(&dir.join("c.sqlite")).unwrap();
        for seed in [3, 5] {
            let obs = observation("SRC", seed);
            let mut cands = candidates(&obs, 3, seed);
            let (start, _) = obs.span_mjd();
            let duration_s = obs.header.duration_s();
            for (c, t) in cands.iter_mut().zip([0.01, duration_s - 0.01]) {
                c.t_inf_s = t;
                c.mjd_inf = start + t / SECONDS_PER_DAY;
            }
            cat.record_search(&obs, &run(7.0), &cands).unwrap();
        }
        let rows = cat.candidates(&CandidateFilter::default()).unwrap();
        for r in &rows {
            cat.promote(r.id, Some("SRC"), TOL).unwrap();
        }
        (cat, rows.len())
    }

    #[test]
    fn computes_missing_toas_like_the_stored_ones() {
        let dir = tempfile::tempdir().unwrap();
        let (mut cat, n) = catalogue_with_edge_bursts(dir.path());
        let fresh = SourceArrivals::load(&cat, "SRC", None).unwrap();
        assert_eq!((fresh.toas.len(), fresh.computed), (n, n));
        // Store one value by hand; it must be used as given.
        let first_id = cat.burst_timing("SRC").unwrap()[0].burst_id;
        let stored_mjd = fresh.toas.mjd_of(fresh.toas.t_s[0]) + 1e-6;
        cat.set_barycentric_toas(&[(first_id, stored_mjd)]).unwrap();
        let mixed = SourceArrivals::load(&cat, "SRC", None).unwrap();
        assert_eq!(mixed.computed, n - 1);
        let shift_s = mixed.toas.t_s[0] - fresh.toas.t_s[0];
        assert!((shift_s - 0.0864).abs() < 1e-3, "{shift_s}");
        assert_eq!(mixed.toas.t_s[1..], fresh.toas.t_s[1..]);
    }

    #[test]
    fn bursts_at_session_edges_stay_inside_their_tdb_sessions() {
        let dir = tempfile::tempdir().unwrap();
        let (cat, n) = catalogue_with_edge_bursts(dir.path());
        let arrivals = SourceArrivals::load(&cat, "SRC", None).unwrap();
        let exposure = arrivals.exposure(&cat, None).unwrap();
        assert_eq!(exposure.sessions_days.len(), 2);
        let days = arrivals.toas.days();
        let inside = days
            .iter()
            .filter(|&&t| exposure.session_of(t).is_some())
            .count();
        assert_eq!(inside, n);
        // The same TDB arrivals against the UTC windows lose an edge burst: the
        // barycentric correction (tens to hundreds of seconds) exceeds 10 ms.
        let utc = Exposure::new(0, cat.merged_exposure("SRC", None).unwrap())
            .unwrap()
            .rebased(arrivals.toas.ref_mjd);
        let naive = days
            .iter()
            .filter(|&&t| utc.session_of(t).is_some())
            .count();
        assert!(naive < n, "{naive} of {n}");
        // Sessions keep their length to ~10⁻⁴ (the rate of the Roemer delay).
        for (tdb, (a, b)) in exposure.sessions_days.iter().zip(&utc.sessions_days) {
            let ratio = (tdb.1 - tdb.0) / (b - a);
            assert!((ratio - 1.0).abs() < 2e-4, "{ratio}");
        }
    }

    #[test]
    fn no_bursts_or_no_exposure_name_the_source() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("EMPTY", 1);
        cat.record_search(&obs, &run(7.0), &candidates(&obs, 2, 1))
            .unwrap();
        let e = SourceArrivals::load(&cat, "EMPTY", None)
            .unwrap_err()
            .to_string();
        // A state of the catalogue, named as such: not an "invalid configuration".
        assert!(
            e.starts_with("catalogue ") && e.contains("\"EMPTY\" has no bursts"),
            "{e}"
        );
        let id = cat.candidates(&CandidateFilter::default()).unwrap()[0].id;
        cat.promote(id, Some("EMPTY"), TOL).unwrap();
        let arrivals = SourceArrivals::load(&cat, "EMPTY", None).unwrap();
        let e = arrivals.exposure(&cat, Some(5.0)).unwrap_err().to_string();
        assert!(e.contains("no exposure searched to S/N 5"), "{e}");
    }

    /// A threshold S counts the bursts of S/N ≥ S against the exposure searched to S,
    /// as `book summary --snr-min` does. Weaker bursts could be found only in the
    /// sessions searched deeper, so keeping them (as before: all 6 bursts against
    /// exposure at S) weighted those sessions in the fold and the rates.
    #[test]
    fn a_threshold_keeps_the_bursts_at_or_above_it() {
        let dir = tempfile::tempdir().unwrap();
        let (cat, n) = catalogue_with_edge_bursts(dir.path());
        let mut snrs: Vec<f64> = cat
            .burst_timing("SRC")
            .unwrap()
            .iter()
            .map(|b| b.snr)
            .collect();
        snrs.sort_by(f64::total_cmp);
        let s = snrs[n / 2];
        let strong = n - n / 2;
        let arrivals = SourceArrivals::load(&cat, "SRC", Some(s)).unwrap();
        assert_eq!(arrivals.toas.len(), strong);
        assert_eq!(
            cat.summary("SRC", Some(s), 0.95).unwrap().n_bursts as usize,
            strong
        );
        // Every synthetic burst has a fluence.
        assert_eq!(
            source_fluences_jy_ms(&cat, "SRC", Some(s)).unwrap().len(),
            strong
        );
        assert_eq!(source_fluences_jy_ms(&cat, "SRC", None).unwrap().len(), n);
        let e = SourceArrivals::load(&cat, "SRC", Some(1e3))
            .unwrap_err()
            .to_string();
        assert!(e.contains("\"SRC\" has no bursts of S/N ≥ 1000"), "{e}");
    }

    /// A burst promoted from another pointing's observation arrived while the source
    /// was not being searched: `book summary` leaves it out of the rate, and the
    /// periodicity tests leave it out of the fold and count it (activity refused the
    /// whole source: "1 burst(s) fall outside every observing session").
    #[test]
    fn bursts_outside_the_exposure_are_left_out_and_counted() {
        let dir = tempfile::tempdir().unwrap();
        let (mut cat, n) = catalogue_with_edge_bursts(dir.path());
        let elsewhere = observation("OTHER", 9);
        cat.record_search(&elsewhere, &run(7.0), &candidates(&elsewhere, 1, 9))
            .unwrap();
        let stray = cat.candidates(&CandidateFilter::default()).unwrap();
        let stray = stray.iter().find(|r| r.source == "OTHER").unwrap().id;
        cat.promote(stray, Some("SRC"), TOL).unwrap();
        let arrivals = SourceArrivals::load(&cat, "SRC", None).unwrap();
        assert_eq!(arrivals.toas.len(), n + 1);
        let exposure = arrivals.exposure(&cat, None).unwrap();
        let (inside, outside) = arrivals.inside(&exposure).unwrap();
        assert_eq!((inside.len(), outside), (n, 1));
        assert_eq!(
            cat.summary("SRC", None, 0.95).unwrap().n_outside_exposure,
            1
        );
        let days = inside.days();
        assert!(days.iter().all(|&t| exposure.session_of(t).is_some()));
    }
}
