//! Recording one search of one observation: observation, run, candidates and the
//! exposure it adds, all in one transaction.

use std::path::Path;

use rusqlite::{OptionalExtension, Transaction, params};
use sha2::{Digest, Sha256};

use super::Catalogue;
use super::complete_run::{Completion, complete_run};
use super::identity::{hex, observation_hashes, upsert_observation};
use crate::candidate::Candidate;
use crate::error::{Error, Result};
use crate::obs::Header;

/// An observation as the catalogue knows it.
#[derive(Debug, Clone, PartialEq)]
pub struct ObservationRecord {
    /// Path as given when it was searched.
    pub path: String,
    /// Hex SHA-256 of the content (see [`super::content_hash`]).
    pub content_sha256: String,
    /// Hex SHA-256 of the samples alone: the `.npy` file of a native observation,
    /// the `SUBINT` rows of a FITS file. One recording is one observation.
    pub data_sha256: String,
    /// The full header.
    pub header: Header,
}

impl ObservationRecord {
    /// Hashes the file at `path` (streaming, one pass) and keeps its header.
    ///
    /// # Errors
    /// The file (or, for native observations, its `.npy`) cannot be read, or a FITS
    /// file cannot be parsed.
    pub fn from_file(path: &Path, header: &Header) -> Result<ObservationRecord> {
        let (content_sha256, data_sha256) = observation_hashes(path)?;
        Ok(ObservationRecord {
            path: path.display().to_string(),
            content_sha256,
            data_sha256,
            header: header.clone(),
        })
    }

    /// Fraction of channels with weight 0.
    pub fn masked_fraction(&self) -> f64 {
        let w = &self.header.weights;
        if w.is_empty() {
            return 0.0;
        }
        w.iter().filter(|&&x| x == 0.0).count() as f64 / w.len() as f64
    }

    /// UTC MJD of the first sample and just after the last.
    pub fn span_mjd(&self) -> (f64, f64) {
        let start = self.header.start;
        (
            start.to_mjd_f64(),
            start.plus_seconds(self.header.duration_s()).to_mjd_f64(),
        )
    }
}

/// One search run: who searched, with what settings.
#[derive(Debug, Clone, PartialEq)]
pub struct RunRecord {
    /// Version of the burstbook that searched.
    pub burstbook_version: String,
    /// The complete search configuration as JSON.
    pub config_json: String,
    /// The DM plan used, as JSON.
    pub dm_plan_json: String,
    /// Detection S/N threshold, above which the search counts as complete.
    pub snr_threshold: Option<f64>,
    /// When the search started (ISO 8601 UTC).
    pub started_utc: String,
    /// When it finished (ISO 8601 UTC).
    pub finished_utc: String,
    /// Fraction of channel-samples the run masked or clipped, if known.
    pub fraction_masked: Option<f64>,
    /// Time samples whose boxcars were searched, if known.
    pub samples_searched: Option<u64>,
    /// Seconds the run read on into the recording that continues its observation
    /// (0 if none), if known.
    pub run_on_s: Option<f64>,
}

impl RunRecord {
    /// A run by this burstbook that started at `started_utc` and finished now.
    pub fn finished_now(
        config_json: String,
        dm_plan_json: String,
        snr_threshold: Option<f64>,
        started_utc: String,
    ) -> RunRecord {
        RunRecord {
            burstbook_version: env!("CARGO_PKG_VERSION").to_string(),
            config_json,
            dm_plan_json,
            snr_threshold,
            started_utc,
            finished_utc: super::now_utc(),
            fraction_masked: None,
            samples_searched: None,
            run_on_s: None,
        }
    }
}

/// What [`Catalogue::record_search`] did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RecordOutcome {
    /// The run and its candidates were written.
    Inserted { run_id: i64 },
    /// This content was already searched with this configuration; nothing written.
    AlreadyPresent { run_id: i64 },
    /// This content was searched with this configuration before, reading on less
    /// far into the recording that continues it: that run was completed with this
    /// one's finds (see [`Completion`]).
    Completed { run_id: i64, completion: Completion },
}

/// Hex SHA-256 of a configuration's JSON text, exactly as given. Pass
/// [`crate::search::SearchConfig::to_json`]: the hash then equals
/// [`crate::search::SearchConfig::hash`], the `config_hash` written beside the
/// search's candidates, so outputs and catalogue runs can be matched.
///
/// # Errors
/// [`Error::Config`] if the text is not JSON.
pub fn config_hash(config_json: &str) -> Result<String> {
    serde_json::from_str::<serde_json::Value>(config_json)
        .map_err(|e| Error::Config(format!("search configuration is not JSON: {e}")))?;
    Ok(hex(&Sha256::digest(config_json.as_bytes())))
}

impl Catalogue {
    /// Records one search of one observation in a single transaction.
    ///
    /// If the same recording (the same content, or the same samples under a header
    /// that says the same) was already recorded with the same configuration hash,
    /// nothing is written and [`RecordOutcome::AlreadyPresent`] is returned — unless
    /// `run` read on further into the recording that continues it
    /// (`run.run_on_s`): then the held run is completed with these candidates
    /// ([`RecordOutcome::Completed`]; added finds, none lost). The
    /// observation's source is added to `source` (header position, no reference
    /// DM) if not yet known, and the searched span becomes exposure for it — unless
    /// the run masked everything (`fraction_masked` 1): a dead receiver or a mask
    /// over the whole band searched nothing, and counting its time would tighten the
    /// source's rate limits with no data behind them.
    ///
    /// # Errors
    /// Invalid configuration JSON; [`Error::BadInput`] naming the file when the
    /// catalogue holds its samples under a header that differs; an SQLite failure.
    /// Then nothing is written.
    pub fn record_search(
        &mut self,
        obs: &ObservationRecord,
        run: &RunRecord,
        candidates: &[Candidate],
    ) -> Result<RecordOutcome> {
        let config_sha = config_hash(&run.config_json)?;
        let header_json = serde_json::to_string(&obs.header)
            .map_err(|e| Error::Config(format!("header not serialisable: {e}")))?;
        let path = self.path().to_path_buf();
        let err = |e| super::sql_error(&path, e);
        self.write(|tx| {
            let obs_id = upsert_observation(tx, &path, obs, &header_json)?;
            let existing: Option<i64> = tx
                .query_row(
                    "SELECT id FROM search_run WHERE observation_id = ?1 AND config_sha256 = ?2",
                    params![obs_id, config_sha],
                    |r| r.get(0),
                )
                .optional()
                .map_err(&err)?;
            if let Some(run_id) = existing {
                let reach = run.run_on_s.unwrap_or(0.0);
                return Ok(
                    match complete_run(tx, run_id, reach, candidates).map_err(&err)? {
                        Some(completion) => RecordOutcome::Completed { run_id, completion },
                        None => RecordOutcome::AlreadyPresent { run_id },
                    },
                );
            }
            let run_id =
                insert_run(tx, obs_id, &config_sha, run, candidates.len()).map_err(&err)?;
            insert_candidates(tx, run_id, candidates).map_err(&err)?;
            let searched_nothing = run.fraction_masked.is_some_and(|f| f >= 1.0);
            insert_exposure(tx, obs, run_id, run.snr_threshold, searched_nothing).map_err(&err)?;
            Ok(RecordOutcome::Inserted { run_id })
        })
    }
}

fn insert_run(
    tx: &Transaction<'_>,
    obs_id: i64,
    config_sha: &str,
    run: &RunRecord,
    n_candidates: usize,
) -> rusqlite::Result<i64> {
    tx.execute(
        "INSERT INTO search_run (observation_id, config_sha256, burstbook_version, config_json,
             dm_plan_json, snr_threshold, started_utc, finished_utc, status, n_candidates,
             fraction_masked, samples_searched, run_on_s)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, 'complete', ?9, ?10, ?11, ?12)",
        params![
            obs_id,
            config_sha,
            run.burstbook_version,
            run.config_json,
            run.dm_plan_json,
            run.snr_threshold,
            run.started_utc,
            run.finished_utc,
            n_candidates as i64,
            run.fraction_masked,
            run.samples_searched.map(|n| n as i64),
            run.run_on_s,
        ],
    )?;
    Ok(tx.last_insert_rowid())
}

pub(super) fn insert_candidates<'a>(
    tx: &Transaction<'_>,
    run_id: i64,
    candidates: impl IntoIterator<Item = &'a Candidate>,
) -> rusqlite::Result<()> {
    let mut stmt = tx.prepare_cached(
        "INSERT INTO candidate (run_id, file, t_inf_s, mjd_inf, dm, dm_lo, dm_hi, width_ms, snr,
             cluster_size, verdict, reasons_json, snr_dm0_ratio, dm_curve_misfit, band_fraction,
             modulation_index, fluence_jy_ms)
         VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17)",
    )?;
    for c in candidates {
        let reasons = serde_json::to_string(&c.reasons).expect("strings serialise");
        stmt.execute(params![
            run_id,
            c.file,
            c.t_inf_s,
            c.mjd_inf,
            c.dm,
            c.dm_lo,
            c.dm_hi,
            c.width_ms,
            c.snr,
            c.cluster_size as i64,
            c.verdict.as_str(),
            reasons,
            c.features.snr_dm0_ratio,
            c.features.dm_curve_misfit,
            c.features.band_fraction,
            c.features.modulation_index,
            c.fluence_jy_ms,
        ])?;
    }
    Ok(())
}

fn insert_exposure(
    tx: &Transaction<'_>,
    obs: &ObservationRecord,
    run_id: i64,
    snr_threshold: Option<f64>,
    searched_nothing: bool,
) -> rusqlite::Result<()> {
    let h = &obs.header;
    tx.execute(
        "INSERT OR IGNORE INTO source (name, ra_deg, dec_deg) VALUES (?1, ?2, ?3)",
        params![h.source, h.ra_deg, h.dec_deg],
    )?;
    let (start, end) = obs.span_mjd();
    if end <= start || searched_nothing {
        return Ok(()); // an empty or wholly masked recording adds no exposure
    }
    tx.execute(
        "INSERT OR IGNORE INTO exposure (source_id, start_mjd, end_mjd, snr_threshold, run_id)
         SELECT id, ?2, ?3, ?4, ?5 FROM source WHERE name = ?1",
        params![h.source, start, end, snr_threshold, run_id],
    )?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::synthetic::{candidates, observation, run};

    #[test]
    fn config_hash_is_the_search_configuration_hash() {
        let config = crate::search::SearchConfig::default();
        assert_eq!(config_hash(&config.to_json()).unwrap(), config.hash());
        assert_ne!(
            config_hash(r#"{"a": 1}"#).unwrap(),
            config_hash(r#"{"a": 2}"#).unwrap()
        );
        assert!(config_hash("not json").is_err());
    }

    #[test]
    fn same_content_and_config_is_recorded_once() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("A", 1);
        let cands = candidates(&obs, 5, 7);
        let first = cat.record_search(&obs, &run(8.0), &cands).unwrap();
        assert!(matches!(first, RecordOutcome::Inserted { .. }));
        // Same content and configuration again (another path, later time): same run.
        let mut moved = obs.clone();
        moved.path = "elsewhere/copy.fits".into();
        let second = cat.record_search(&moved, &run(8.0), &cands).unwrap();
        assert!(matches!(second, RecordOutcome::AlreadyPresent { .. }));
        let n: i64 = cat
            .conn()
            .query_row("SELECT count(*) FROM candidate", [], |r| r.get(0))
            .unwrap();
        assert_eq!(n, 5);
        // A different configuration is a new run of the same observation.
        let mut other = run(6.0);
        other.fraction_masked = Some(0.125);
        other.samples_searched = Some(3_686_400);
        let third = cat.record_search(&obs, &other, &cands).unwrap();
        assert!(matches!(third, RecordOutcome::Inserted { .. }));
        let (n_obs, n_runs): (i64, i64) = cat
            .conn()
            .query_row(
                "SELECT (SELECT count(*) FROM observation), (SELECT count(*) FROM search_run)",
                [],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .unwrap();
        assert_eq!((n_obs, n_runs), (1, 2));
        let stats: (Option<f64>, Option<i64>) = cat
            .conn()
            .query_row(
                "SELECT fraction_masked, samples_searched FROM search_run WHERE snr_threshold = 6",
                [],
                |r| Ok((r.get(0)?, r.get(1)?)),
            )
            .unwrap();
        assert_eq!(stats, (Some(0.125), Some(3_686_400)));
    }

    // A run that masked every channel-sample searched nothing: recorded (so it is
    // not searched again with that configuration), but its span is no exposure. One
    // that masked nearly everything still counts.
    #[test]
    fn a_wholly_masked_run_adds_no_exposure() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("A", 1);
        let mut dead = run(8.0);
        dead.fraction_masked = Some(1.0);
        let outcome = cat.record_search(&obs, &dead, &[]).unwrap();
        assert!(matches!(outcome, RecordOutcome::Inserted { .. }));
        assert!(cat.exposure(None).unwrap().is_empty());
        let mut nearly = run(7.0);
        nearly.fraction_masked = Some(0.99);
        cat.record_search(&obs, &nearly, &[]).unwrap();
        assert_eq!(cat.exposure(None).unwrap().len(), 1);
    }

    // A full disk is simulated with SQLite's page limit, which fails a write with the
    // same SQLITE_FULL a full file system gives: the run is refused whole, the
    // catalogue keeps what it had, and the same run goes in once space is back.
    #[test]
    fn a_full_disk_refuses_the_whole_run_and_keeps_the_catalogue() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let first = observation("A", 1);
        cat.record_search(&first, &run(8.0), &candidates(&first, 5, 7))
            .unwrap();
        let before = cat.verify().unwrap();
        let pages: i64 = cat
            .conn()
            .query_row("PRAGMA page_count", [], |r| r.get(0))
            .unwrap();
        cat.conn()
            .query_row(
                &format!("PRAGMA max_page_count = {}", pages + 2),
                [],
                |_| Ok(()),
            )
            .unwrap();
        let second = observation("A", 2);
        let many = candidates(&second, 20_000, 8);
        let err = cat.record_search(&second, &run(8.0), &many).unwrap_err();
        assert!(err.to_string().contains("disk full"), "{err}");
        assert_eq!(
            cat.verify().unwrap(),
            before,
            "nothing of the failed run remains"
        );
        cat.conn()
            .query_row("PRAGMA max_page_count = 1073741823", [], |_| Ok(()))
            .unwrap();
        cat.record_search(&second, &run(8.0), &many).unwrap();
        assert_eq!(cat.verify().unwrap().candidates, before.candidates + 20_000);
    }

    #[test]
    fn candidates_round_trip_every_column() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("A", 2);
        let cands = candidates(&obs, 3, 11);
        cat.record_search(&obs, &run(8.0), &cands).unwrap();
        let back = cat
            .candidates(&crate::catalogue::CandidateFilter::default())
            .unwrap();
        let back: Vec<Candidate> = back.into_iter().map(|r| r.candidate).collect();
        let mut expected = cands;
        expected.sort_by(|a, b| a.mjd_inf.total_cmp(&b.mjd_inf));
        assert_eq!(back, expected);
    }
}
