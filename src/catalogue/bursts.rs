//! What later stages read and write: burst arrival times with their site and
//! source position (timing), barycentric TOAs (timing → period), and
//! injection-recovery completeness (injection).

use rusqlite::{OptionalExtension, params};
use serde::{Deserialize, Serialize};

use super::{Catalogue, ObservationRecord, catalogue_error, config_hash};
use crate::error::{Error, Result};
use crate::obs::{Header, Site};

/// A burst with everything needed to barycentre its arrival time.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BurstTiming {
    /// Burst id (pass to [`Catalogue::set_barycentric_toas`]).
    pub burst_id: i64,
    /// Topocentric UTC MJD of arrival at infinite frequency.
    pub mjd_utc: f64,
    /// Where it was observed.
    pub site: Site,
    /// Source ICRS right ascension in degrees (from the source table).
    pub ra_deg: f64,
    /// Source ICRS declination in degrees.
    pub dec_deg: f64,
    /// DM in pc cm⁻³.
    pub dm: f64,
    /// S/N.
    pub snr: f64,
    /// Boxcar width in ms.
    pub width_ms: f64,
    /// Barycentric TDB MJD if already computed.
    pub toa_tdb_mjd: Option<f64>,
}

/// Result of one injection-recovery run on one observation and configuration.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct CompletenessRecord {
    /// The search configuration as JSON (hashed like [`config_hash`]).
    pub config_json: String,
    /// S/N at which half the injected bursts were recovered.
    pub snr50: Option<f64>,
    /// S/N at which 90 % were recovered.
    pub snr90: Option<f64>,
    /// Fluence in Jy ms at 50 % recovery.
    pub fluence50_jy_ms: Option<f64>,
    /// Fluence in Jy ms at 90 % recovery.
    pub fluence90_jy_ms: Option<f64>,
    /// Everything else the injection stage wants to keep, as JSON.
    pub result_json: String,
}

impl Catalogue {
    /// Bursts of `source` in arrival order, with site and position for timing.
    ///
    /// # Errors
    /// Unknown source, an unreadable stored header, or an SQLite failure.
    pub fn burst_timing(&self, source: &str) -> Result<Vec<BurstTiming>> {
        let src = self.source(source)?;
        let mut stmt = self
            .conn()
            .prepare(
                "SELECT b.id, b.mjd_utc, o.header_json, b.dm, b.snr, b.width_ms, b.toa_tdb_mjd
                 FROM burst b JOIN candidate c ON c.id = b.candidate_id
                 JOIN search_run r ON r.id = c.run_id JOIN observation o ON o.id = r.observation_id
                 WHERE b.source_id = ?1 ORDER BY b.mjd_utc, b.id",
            )
            .map_err(|e| self.err(e))?;
        let rows = stmt
            .query_map([src.id], |r| {
                Ok((
                    r.get::<_, i64>(0)?,
                    r.get::<_, f64>(1)?,
                    r.get::<_, String>(2)?,
                    r.get::<_, f64>(3)?,
                    r.get::<_, f64>(4)?,
                    r.get::<_, f64>(5)?,
                    r.get::<_, Option<f64>>(6)?,
                ))
            })
            .map_err(|e| self.err(e))?;
        let mut out = Vec::new();
        for row in rows {
            let (burst_id, mjd_utc, header_json, dm, snr, width_ms, toa_tdb_mjd) =
                row.map_err(|e| self.err(e))?;
            let header: Header = serde_json::from_str(&header_json).map_err(|e| {
                catalogue_error(
                    self.path(),
                    format!("burst {burst_id}: stored header unreadable: {e}"),
                )
            })?;
            out.push(BurstTiming {
                burst_id,
                mjd_utc,
                site: header.site,
                ra_deg: src.ra_deg,
                dec_deg: src.dec_deg,
                dm,
                snr,
                width_ms,
                toa_tdb_mjd,
            });
        }
        Ok(out)
    }

    /// Stores (or replaces) barycentric TDB MJDs, `(burst_id, toa_tdb_mjd)`, all in
    /// one transaction.
    ///
    /// # Errors
    /// An unknown burst or a non-finite value (then nothing is stored), or an
    /// SQLite failure.
    pub fn set_barycentric_toas(&mut self, toas: &[(i64, f64)]) -> Result<()> {
        if let Some((id, _)) = toas.iter().find(|(_, t)| !t.is_finite()) {
            return Err(Error::Numerical(format!(
                "barycentric TOA of burst {id} is not finite"
            )));
        }
        let path = self.path().to_path_buf();
        self.write(|tx| {
            let mut update = tx
                .prepare_cached("UPDATE burst SET toa_tdb_mjd = ?2 WHERE id = ?1")
                .map_err(|e| super::sql_error(&path, e))?;
            for &(burst_id, toa) in toas {
                let n = update
                    .execute(params![burst_id, toa])
                    .map_err(|e| super::sql_error(&path, e))?;
                if n == 0 {
                    return Err(catalogue_error(
                        &path,
                        format!("has no burst {burst_id}; no TOA stored"),
                    ));
                }
            }
            Ok(())
        })
    }

    /// Appends an injection-recovery result for `obs` (recorded first if new).
    /// When `fluence90_jy_ms` is given it also becomes the fluence limit of the
    /// exposure searched with that configuration. Returns the row id.
    ///
    /// # Errors
    /// Bad configuration JSON or an SQLite failure.
    pub fn record_completeness(
        &mut self,
        obs: &ObservationRecord,
        rec: &CompletenessRecord,
    ) -> Result<i64> {
        let config_sha = config_hash(&rec.config_json)?;
        let header_json = serde_json::to_string(&obs.header)
            .map_err(|e| Error::Config(format!("header not serialisable: {e}")))?;
        let path = self.path().to_path_buf();
        self.write(|tx| {
            let e = |e| super::sql_error(&path, e);
            let obs_id = super::identity::upsert_observation(tx, &path, obs, &header_json)?;
            tx.execute(
                "INSERT INTO injection_completeness (observation_id, config_sha256, snr50, snr90,
                     fluence50_jy_ms, fluence90_jy_ms, result_json, recorded_utc)
                 VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)",
                params![
                    obs_id,
                    config_sha,
                    rec.snr50,
                    rec.snr90,
                    rec.fluence50_jy_ms,
                    rec.fluence90_jy_ms,
                    rec.result_json,
                    super::now_utc()
                ],
            )
            .map_err(e)?;
            let id = tx.last_insert_rowid();
            if let Some(limit) = rec.fluence90_jy_ms {
                tx.execute(
                    "UPDATE exposure SET fluence_limit_jy_ms = ?3 WHERE run_id IN
                         (SELECT id FROM search_run WHERE observation_id = ?1 AND config_sha256 = ?2)",
                    params![obs_id, config_sha, limit],
                )
                .map_err(e)?;
            }
            Ok(id)
        })
    }

    /// The newest completeness result for this content hash and configuration.
    ///
    /// # Errors
    /// Bad configuration JSON or an SQLite failure.
    pub fn completeness(
        &self,
        content_sha256: &str,
        config_json: &str,
    ) -> Result<Option<CompletenessRecord>> {
        let config_sha = config_hash(config_json)?;
        self.conn()
            .query_row(
                "SELECT i.snr50, i.snr90, i.fluence50_jy_ms, i.fluence90_jy_ms, i.result_json
                 FROM injection_completeness i JOIN observation o ON o.id = i.observation_id
                 WHERE o.content_sha256 = ?1 AND i.config_sha256 = ?2 ORDER BY i.id DESC LIMIT 1",
                params![content_sha256, config_sha],
                |r| {
                    Ok(CompletenessRecord {
                        config_json: config_json.to_string(),
                        snr50: r.get(0)?,
                        snr90: r.get(1)?,
                        fluence50_jy_ms: r.get(2)?,
                        fluence90_jy_ms: r.get(3)?,
                        result_json: r.get(4)?,
                    })
                },
            )
            .optional()
            .map_err(|e| self.err(e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::synthetic::{candidates, fluence_completeness, observation, run};
    use crate::catalogue::{AssignTolerance, CandidateFilter};

    #[test]
    fn timing_reads_site_and_stores_toas() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("ECHO", 9);
        cat.record_search(&obs, &run(7.0), &candidates(&obs, 4, 9))
            .unwrap();
        let rows = cat.candidates(&CandidateFilter::default()).unwrap();
        let tol = AssignTolerance {
            radius_deg: 1.0,
            dm: 1.0,
        };
        for r in &rows[..2] {
            cat.promote(r.id, Some("ECHO"), tol).unwrap();
        }
        let t = cat.burst_timing("ECHO").unwrap();
        assert_eq!(t.len(), 2);
        assert_eq!(t[0].site, obs.header.site);
        assert_eq!(t[0].mjd_utc, rows[0].candidate.mjd_inf);
        cat.set_barycentric_toas(&[(t[1].burst_id, 60_009.123_456_789)])
            .unwrap();
        assert_eq!(
            cat.burst_timing("ECHO").unwrap()[1].toa_tdb_mjd,
            Some(60_009.123_456_789)
        );
        // One bad id stores nothing.
        assert!(
            cat.set_barycentric_toas(&[(t[0].burst_id, 1.0), (999, 1.0)])
                .is_err()
        );
        assert_eq!(cat.burst_timing("ECHO").unwrap()[0].toa_tdb_mjd, None);
    }

    #[test]
    fn completeness_newest_result_wins_and_history_stays() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("ECHO", 1);
        let mut rec = CompletenessRecord {
            config_json: r#"{"snr_threshold": 7}"#.into(),
            snr50: Some(8.0),
            snr90: Some(10.0),
            fluence50_jy_ms: None,
            fluence90_jy_ms: None,
            result_json: "{}".into(),
        };
        cat.record_completeness(&obs, &rec).unwrap();
        rec.snr50 = Some(8.5);
        cat.record_completeness(&obs, &rec).unwrap();
        let got = cat
            .completeness(&obs.content_sha256, r#"{"snr_threshold": 7}"#)
            .unwrap();
        assert_eq!(got.unwrap().snr50, Some(8.5));
        assert!(
            cat.completeness(&obs.content_sha256, "{}")
                .unwrap()
                .is_none()
        );
        let n: i64 = cat
            .conn()
            .query_row("SELECT count(*) FROM injection_completeness", [], |r| {
                r.get(0)
            })
            .unwrap();
        assert_eq!(n, 2);
        // The hash is of the exact text, as the search writes it.
        let respaced = cat.completeness(&obs.content_sha256, r#"{"snr_threshold":7}"#);
        assert!(respaced.unwrap().is_none());
    }

    #[test]
    fn fluence_completeness_marks_the_exposure_of_that_configuration() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("ECHO", 2);
        let (searched, other) = (run(7.0), run(9.0));
        cat.record_search(&obs, &searched, &[]).unwrap();
        cat.record_search(&obs, &other, &[]).unwrap();
        let rec = fluence_completeness(&searched);
        cat.record_completeness(&obs, &rec).unwrap();
        let mut limits: Vec<_> = cat
            .exposure(Some("ECHO"))
            .unwrap()
            .into_iter()
            .map(|e| (e.snr_threshold, e.fluence_limit_jy_ms))
            .collect();
        limits.sort_by(|a, b| a.0.partial_cmp(&b.0).unwrap());
        assert_eq!(limits, vec![(Some(7.0), Some(0.9)), (Some(9.0), None)]);
    }
}
