//! Reading candidates and bursts back with filters. Every filter value is bound as
//! an SQL parameter, never pasted into the statement.

use rusqlite::types::Value;
use serde::Serialize;

use super::Catalogue;
use crate::candidate::{Candidate, TriageFeatures, Verdict};
use crate::error::Result;

/// Ranges shared by candidate and burst queries (inclusive; `None` = unbounded).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Bounds {
    /// Lowest DM in pc cm⁻³.
    pub dm_min: Option<f64>,
    /// Highest DM in pc cm⁻³.
    pub dm_max: Option<f64>,
    /// Lowest S/N.
    pub snr_min: Option<f64>,
    /// Earliest arrival, UTC MJD.
    pub mjd_min: Option<f64>,
    /// Latest arrival, UTC MJD.
    pub mjd_max: Option<f64>,
}

/// Which candidates to return; `None` / empty means "any".
#[derive(Debug, Clone, Default, PartialEq)]
pub struct CandidateFilter {
    /// Source name as written in the observation header.
    pub source: Option<String>,
    /// DM, S/N and time ranges.
    pub bounds: Bounds,
    /// Triage verdict.
    pub verdict: Option<Verdict>,
    /// Current (newest) review label; `"none"` selects unlabelled candidates.
    pub label: Option<String>,
    /// Only these candidate ids.
    pub ids: Vec<i64>,
    /// At most this many rows (by arrival time).
    pub limit: Option<usize>,
}

/// A stored candidate with its catalogue context.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CandidateRow {
    /// Candidate id in the catalogue.
    pub id: i64,
    /// The search run that found it.
    pub run_id: i64,
    /// The observation that run searched (the id `book forget` takes).
    pub observation_id: i64,
    /// Source name from the observation header.
    pub source: String,
    /// Newest review label, if any.
    pub label: Option<String>,
    /// Burst id if promoted.
    pub burst_id: Option<i64>,
    /// The candidate exactly as the search produced it.
    #[serde(flatten)]
    pub candidate: Candidate,
}

/// Which bursts to return; `None` means "any".
#[derive(Debug, Clone, Default, PartialEq)]
pub struct BurstFilter {
    /// Assigned source name.
    pub source: Option<String>,
    /// DM, S/N and time ranges.
    pub bounds: Bounds,
}

/// A confirmed burst.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BurstRow {
    /// Burst id.
    pub id: i64,
    /// The candidate it was promoted from.
    pub candidate_id: i64,
    /// Assigned source.
    pub source: String,
    /// Topocentric UTC MJD of arrival at infinite frequency.
    pub mjd_utc: f64,
    /// Barycentric TDB MJD, once the timing stage has filled it.
    pub toa_tdb_mjd: Option<f64>,
    /// Best S/N.
    pub snr: f64,
    /// Best boxcar width in ms.
    pub width_ms: f64,
    /// DM in pc cm⁻³.
    pub dm: f64,
    /// Fluence in Jy ms when the SEFD was known.
    pub fluence_jy_ms: Option<f64>,
    /// Observing site name.
    pub site: String,
    /// Observation file.
    pub file: String,
}

/// `WHERE` clauses with their bound values.
#[derive(Default)]
struct Where {
    clauses: Vec<String>,
    values: Vec<Value>,
}

impl Where {
    /// Adds `sql`, in which `?` stands for the next parameter.
    fn push(&mut self, sql: &str, value: Option<Value>) {
        if let Some(v) = value {
            self.values.push(v);
            let n = self.values.len();
            self.clauses.push(sql.replace('?', &format!("?{n}")));
        }
    }

    /// The range conditions of `b` on the named columns.
    fn push_bounds(&mut self, b: &Bounds, dm: &str, snr: &str, mjd: &str) {
        self.push(&format!("{dm} >= ?"), b.dm_min.map(Value::Real));
        self.push(&format!("{dm} <= ?"), b.dm_max.map(Value::Real));
        self.push(&format!("{snr} >= ?"), b.snr_min.map(Value::Real));
        self.push(&format!("{mjd} >= ?"), b.mjd_min.map(Value::Real));
        self.push(&format!("{mjd} <= ?"), b.mjd_max.map(Value::Real));
    }

    fn sql(&self) -> String {
        if self.clauses.is_empty() {
            String::new()
        } else {
            format!("WHERE {}", self.clauses.join(" AND "))
        }
    }
}

const LATEST_LABEL: &str =
    "(SELECT label FROM review_label l WHERE l.candidate_id = c.id ORDER BY l.id DESC LIMIT 1)";

/// The candidate query for `filter`, with its bound values.
fn candidate_sql(filter: &CandidateFilter) -> (String, Vec<Value>) {
    let mut w = Where::default();
    w.push("o.source_name = ?", filter.source.clone().map(Value::Text));
    w.push_bounds(&filter.bounds, "c.dm", "c.snr", "c.mjd_inf");
    w.push(
        "c.verdict = ?",
        filter.verdict.map(|v| Value::Text(v.as_str().into())),
    );
    match filter.label.as_deref() {
        Some("none") => w.clauses.push(format!("{LATEST_LABEL} IS NULL")),
        Some(l) => w.push(&format!("{LATEST_LABEL} = ?"), Some(Value::Text(l.into()))),
        None => {}
    }
    if !filter.ids.is_empty() {
        let ids = serde_json::to_string(&filter.ids).expect("integers serialise");
        w.push(
            "c.id IN (SELECT value FROM json_each(?))",
            Some(Value::Text(ids)),
        );
    }
    let limit = filter.limit.map_or(-1, |n| n as i64);
    let sql = format!(
        "SELECT c.id, c.run_id, r.observation_id, o.source_name, {LATEST_LABEL}, b.id,
                c.file, c.t_inf_s, c.mjd_inf, c.dm, c.dm_lo, c.dm_hi, c.width_ms, c.snr,
                c.cluster_size, c.verdict, c.reasons_json, c.snr_dm0_ratio,
                c.dm_curve_misfit, c.band_fraction, c.modulation_index, c.fluence_jy_ms
         FROM candidate c
         JOIN search_run r ON r.id = c.run_id
         JOIN observation o ON o.id = r.observation_id
         LEFT JOIN burst b ON b.candidate_id = c.id
         {} ORDER BY c.mjd_inf, c.id LIMIT {limit}",
        w.sql()
    );
    (sql, w.values)
}

impl Catalogue {
    /// Candidates matching `filter`, ordered by arrival time.
    ///
    /// # Errors
    /// A source the catalogue does not hold, or an SQLite failure.
    pub fn candidates(&self, filter: &CandidateFilter) -> Result<Vec<CandidateRow>> {
        self.check_source_filter(filter.source.as_deref())?;
        let (sql, values) = candidate_sql(filter);
        let mut stmt = self.conn().prepare(&sql).map_err(|e| self.err(e))?;
        let rows = stmt
            .query_map(rusqlite::params_from_iter(values.iter()), |r| {
                let verdict: String = r.get(15)?;
                let reasons: String = r.get(16)?;
                Ok(CandidateRow {
                    id: r.get(0)?,
                    run_id: r.get(1)?,
                    observation_id: r.get(2)?,
                    source: r.get(3)?,
                    label: r.get(4)?,
                    burst_id: r.get(5)?,
                    candidate: Candidate {
                        file: r.get(6)?,
                        t_inf_s: r.get(7)?,
                        mjd_inf: r.get(8)?,
                        dm: r.get(9)?,
                        dm_lo: r.get(10)?,
                        dm_hi: r.get(11)?,
                        width_ms: r.get(12)?,
                        snr: r.get(13)?,
                        cluster_size: r.get::<_, i64>(14)? as usize,
                        verdict: Verdict::parse(&verdict).unwrap_or(Verdict::Unsure),
                        reasons: serde_json::from_str(&reasons).unwrap_or_default(),
                        features: TriageFeatures {
                            snr_dm0_ratio: r.get(17)?,
                            dm_curve_misfit: r.get(18)?,
                            band_fraction: r.get(19)?,
                            modulation_index: r.get(20)?,
                        },
                        fluence_jy_ms: r.get(21)?,
                    },
                })
            })
            .map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<_>>()
            .map_err(|e| self.err(e))
    }

    /// Bursts matching `filter`, ordered by arrival time.
    ///
    /// # Errors
    /// A source the catalogue does not hold, or an SQLite failure.
    pub fn bursts(&self, filter: &BurstFilter) -> Result<Vec<BurstRow>> {
        self.check_source_filter(filter.source.as_deref())?;
        let mut w = Where::default();
        w.push("s.name = ?", filter.source.clone().map(Value::Text));
        w.push_bounds(&filter.bounds, "b.dm", "b.snr", "b.mjd_utc");
        let sql = format!(
            "SELECT b.id, b.candidate_id, s.name, b.mjd_utc, b.toa_tdb_mjd, b.snr, b.width_ms,
                    b.dm, b.fluence_jy_ms, o.site, c.file
             FROM burst b
             JOIN source s ON s.id = b.source_id
             JOIN candidate c ON c.id = b.candidate_id
             JOIN search_run r ON r.id = c.run_id
             JOIN observation o ON o.id = r.observation_id
             {} ORDER BY b.mjd_utc, b.id",
            w.sql()
        );
        let mut stmt = self.conn().prepare(&sql).map_err(|e| self.err(e))?;
        let rows = stmt
            .query_map(rusqlite::params_from_iter(w.values.iter()), |r| {
                Ok(BurstRow {
                    id: r.get(0)?,
                    candidate_id: r.get(1)?,
                    source: r.get(2)?,
                    mjd_utc: r.get(3)?,
                    toa_tdb_mjd: r.get(4)?,
                    snr: r.get(5)?,
                    width_ms: r.get(6)?,
                    dm: r.get(7)?,
                    fluence_jy_ms: r.get(8)?,
                    site: r.get(9)?,
                    file: r.get(10)?,
                })
            })
            .map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<_>>()
            .map_err(|e| self.err(e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::synthetic::{candidates, observation, run};

    fn filled() -> (tempfile::TempDir, Catalogue, Vec<Candidate>) {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let mut all = Vec::new();
        for (i, src) in ["ALPHA", "BETA"].iter().enumerate() {
            let obs = observation(src, i as u64);
            let c = candidates(&obs, 200, i as u64);
            cat.record_search(&obs, &run(7.0), &c).unwrap();
            all.extend(c);
        }
        (dir, cat, all)
    }

    #[test]
    fn filters_select_exactly_the_matching_candidates() {
        let (_dir, cat, all) = filled();
        let f = CandidateFilter {
            source: Some("BETA".into()),
            bounds: Bounds {
                dm_min: Some(100.0),
                dm_max: Some(400.0),
                snr_min: Some(20.0),
                ..Default::default()
            },
            verdict: Some(Verdict::Rfi),
            ..Default::default()
        };
        let got: Vec<_> = cat.candidates(&f).unwrap();
        let expected = all
            .iter()
            .filter(|c| c.file.contains("BETA"))
            .filter(|c| (100.0..=400.0).contains(&c.dm) && c.snr >= 20.0)
            .filter(|c| c.verdict == Verdict::Rfi)
            .count();
        assert!(expected > 0);
        assert_eq!(got.len(), expected);
        assert!(got.iter().all(|r| r.source == "BETA"));
        assert!(
            got.windows(2)
                .all(|w| w[0].candidate.mjd_inf <= w[1].candidate.mjd_inf)
        );
    }

    /// A source + DM query must walk the (run_id, dm) index, not scan by DM
    /// (the benchmark's query; see docs/catalogue.md).
    #[test]
    fn source_and_dm_query_uses_the_run_dm_index() {
        let (_dir, cat, _) = filled();
        let f = CandidateFilter {
            source: Some("BETA".into()),
            bounds: Bounds {
                dm_min: Some(300.0),
                dm_max: Some(350.0),
                ..Default::default()
            },
            ..Default::default()
        };
        let (sql, values) = candidate_sql(&f);
        let mut stmt = cat
            .conn()
            .prepare(&format!("EXPLAIN QUERY PLAN {sql}"))
            .unwrap();
        let plan: Vec<String> = stmt
            .query_map(rusqlite::params_from_iter(values.iter()), |r| r.get(3))
            .unwrap()
            .collect::<rusqlite::Result<_>>()
            .unwrap();
        assert!(
            plan.iter().any(|p| p.contains("candidate_by_run_dm")),
            "{plan:?}"
        );
    }

    #[test]
    fn a_hostile_filter_value_is_data_not_sql() {
        let (_dir, mut cat, _) = filled();
        let hostile = "ALPHA' OR '1'='1";
        let f = CandidateFilter {
            source: Some(hostile.into()),
            ..Default::default()
        };
        // Taken as a name, it names no source; held as one, it selects nothing.
        let err = cat.candidates(&f).unwrap_err().to_string();
        assert!(err.contains("has no source named"), "{err}");
        let mut s = cat.source("ALPHA").unwrap();
        s.name = hostile.into();
        cat.upsert_source(&s).unwrap();
        assert!(cat.candidates(&f).unwrap().is_empty());
    }

    /// A mistyped source used to select nothing, which reads as "no candidates".
    #[test]
    fn an_unknown_source_is_refused_and_a_known_one_without_rows_is_empty() {
        let (_dir, mut cat, _) = filled();
        let err = cat
            .candidates(&CandidateFilter {
                source: Some("ALHPA".into()),
                ..Default::default()
            })
            .unwrap_err()
            .to_string();
        assert!(err.contains("has no source named \"ALHPA\""), "{err}");
        let err = cat
            .bursts(&BurstFilter {
                source: Some("ALHPA".into()),
                ..Default::default()
            })
            .unwrap_err()
            .to_string();
        assert!(err.contains("has no source named \"ALHPA\""), "{err}");
        let err = cat.exposure(Some("ALHPA")).unwrap_err().to_string();
        assert!(err.contains("has no source named \"ALHPA\""), "{err}");
        let mut quiet = cat.source("ALPHA").unwrap();
        quiet.name = "QUIET".into();
        cat.upsert_source(&quiet).unwrap();
        let f = CandidateFilter {
            source: Some("QUIET".into()),
            ..Default::default()
        };
        assert!(cat.candidates(&f).unwrap().is_empty());
        let b = BurstFilter {
            source: Some("QUIET".into()),
            ..Default::default()
        };
        assert!(cat.bursts(&b).unwrap().is_empty());
        assert!(cat.exposure(Some("QUIET")).unwrap().is_empty());
    }
}
