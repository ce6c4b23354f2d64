//! Recording what `burstbook search` found for one file, and finding an earlier
//! finished search of the same content with the same configuration.

use rusqlite::{OptionalExtension, params};

use super::identity::find_observation;
use super::{CandidateFilter, Catalogue, ObservationRecord, RecordOutcome, RunRecord};
use crate::candidate::Candidate;
use crate::error::{Error, Result};
use crate::search::{FileResult, SearchConfig};

/// A finished search run already in the catalogue.
#[derive(Debug, Clone, PartialEq)]
pub struct EarlierRun {
    /// Its `search_run` id.
    pub run_id: i64,
    /// Path of the observation when it was first recorded.
    pub recorded_path: String,
    /// When the run finished (ISO 8601 UTC).
    pub finished_utc: String,
    /// Version of the burstbook that searched.
    pub burstbook_version: String,
    /// Its candidates, in time order.
    pub candidates: Vec<Candidate>,
    /// Seconds it read on into the recording that continues its observation (0 if
    /// none); `None` for a run recorded before that was kept.
    pub run_on_s: Option<f64>,
}

impl Catalogue {
    /// Records the search of `obs` (see [`ObservationRecord::from_file`]) with
    /// `config`, which started at `started_utc` (see [`super::now_utc`]).
    ///
    /// # Errors
    /// An SQLite failure (then nothing was written).
    pub fn record_file_result(
        &mut self,
        obs: &ObservationRecord,
        result: &FileResult,
        config: &SearchConfig,
        started_utc: String,
    ) -> Result<RecordOutcome> {
        let json = |what: &str, e: serde_json::Error| {
            Error::Config(format!("{what} not serialisable: {e}"))
        };
        let mut run = RunRecord::finished_now(
            config.to_json(),
            serde_json::to_string(&result.plan).map_err(|e| json("DM plan", e))?,
            Some(config.snr_threshold),
            started_utc,
        );
        run.fraction_masked = Some(result.fraction_masked);
        run.samples_searched = Some(own_samples_searched(
            result.samples_searched,
            config.average.samples,
            obs.header.n_samples,
        ));
        run.run_on_s = Some(result.run_on_s);
        self.record_search(obs, &run, &result.candidates)
    }

    /// The complete run, if any, of the recording `obs` (the same content, or the
    /// same samples under a header that says the same) with the configuration
    /// hashed `config_sha256` (as [`SearchConfig::hash`] gives), with its
    /// candidates. The catalogue holds at most one per pair.
    ///
    /// # Errors
    /// [`Error::BadInput`] naming the file when the catalogue holds its samples
    /// under a header that differs; an SQLite failure.
    pub fn finished_run(
        &self,
        obs: &ObservationRecord,
        config_sha256: &str,
    ) -> Result<Option<EarlierRun>> {
        let Some(obs_id) = find_observation(self.conn(), self.path(), obs)? else {
            return Ok(None);
        };
        let found = self
            .conn()
            .query_row(
                "SELECT r.id, o.path, r.finished_utc, r.burstbook_version, r.run_on_s
                 FROM search_run r JOIN observation o ON o.id = r.observation_id
                 WHERE o.id = ?1 AND r.config_sha256 = ?2 AND r.status = 'complete'",
                params![obs_id, config_sha256],
                |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?, r.get(3)?, r.get(4)?)),
            )
            .optional()
            .map_err(|e| self.err(e))?;
        let Some((run_id, recorded_path, finished_utc, burstbook_version, run_on_s)) = found else {
            return Ok(None);
        };
        let ids = self
            .conn()
            .prepare("SELECT id FROM candidate WHERE run_id = ?1")
            .and_then(|mut s| {
                s.query_map([run_id], |r| r.get(0))?
                    .collect::<rusqlite::Result<Vec<i64>>>()
            })
            .map_err(|e| self.err(e))?;
        let mut candidates: Vec<Candidate> = if ids.is_empty() {
            Vec::new()
        } else {
            let filter = CandidateFilter {
                ids,
                ..Default::default()
            };
            self.candidates(&filter)?
                .into_iter()
                .map(|row| row.candidate)
                .collect()
        };
        candidates.sort_by(|a, b| a.t_inf_s.total_cmp(&b.t_inf_s));
        Ok(Some(EarlierRun {
            run_id,
            recorded_path,
            finished_utc,
            burstbook_version,
            candidates,
            run_on_s,
        }))
    }
}

/// Samples of a recording of `n_samples` whose boxcars its search searched, given the
/// `searched` samples that search counted averaging `per_group` of them into one. A
/// last group completed by the recording read on into counts only for the samples of
/// its own (that recording's exposure holds the rest), so exposures do not overlap.
fn own_samples_searched(searched: u64, per_group: usize, n_samples: u64) -> u64 {
    (searched * per_group as u64).min(n_samples)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::config_hash;
    use crate::catalogue::synthetic::{candidates, observation, run};

    #[test]
    fn finds_only_the_same_content_and_configuration() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("A", 1);
        let mut cands = candidates(&obs, 4, 3);
        let searched = run(8.0);
        let outcome = cat.record_search(&obs, &searched, &cands).unwrap();
        let RecordOutcome::Inserted { run_id } = outcome else {
            panic!("{outcome:?}")
        };
        let config = config_hash(&searched.config_json).unwrap();
        let found = cat.finished_run(&obs, &config).unwrap().unwrap();
        assert_eq!(found.run_id, run_id);
        assert_eq!(found.recorded_path, obs.path);
        assert_eq!(found.finished_utc, searched.finished_utc);
        cands.sort_by(|a, b| a.t_inf_s.total_cmp(&b.t_inf_s));
        assert_eq!(found.candidates, cands, "every candidate, every field");

        let other_config = config_hash(&run(6.0).config_json).unwrap();
        assert_ne!(other_config, config);
        assert!(cat.finished_run(&obs, &other_config).unwrap().is_none());
        let other_content = observation("A", 2);
        assert!(cat.finished_run(&other_content, &config).unwrap().is_none());
    }

    // An averaged search read on into the next recording owns the group its last
    // samples start (376 groups of 16 for 6012 samples, or one for 10): its exposure
    // is its own samples, not the whole groups.
    #[test]
    fn exposure_counts_the_recordings_own_samples() {
        assert_eq!(own_samples_searched(376, 16, 6012), 6012);
        assert_eq!(own_samples_searched(1, 16, 10), 10);
        assert_eq!(own_samples_searched(370, 16, 6012), 5920);
        assert_eq!(own_samples_searched(6012, 1, 6012), 6012);
    }

    #[test]
    fn a_run_without_candidates_is_found_with_none() {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("B", 1);
        let searched = run(8.0);
        cat.record_search(&obs, &searched, &[]).unwrap();
        let config = config_hash(&searched.config_json).unwrap();
        let found = cat.finished_run(&obs, &config).unwrap();
        assert!(found.unwrap().candidates.is_empty());
    }
}
