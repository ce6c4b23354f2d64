//! Recording what `burstbook search` found for one file.

use std::path::Path;

use super::{Catalogue, ObservationRecord, RecordOutcome, RunRecord};
use crate::error::{Error, Result};
use crate::search::{FileResult, SearchConfig};

impl Catalogue {
    /// Records the search of the file at `path` (hashing its bytes) with
    /// `config`, which started at `started_utc` (see [`super::now_utc`]).
    ///
    /// # Errors
    /// The file cannot be read for hashing, or an SQLite failure (then nothing
    /// was written).
    pub fn record_file_result(
        &mut self,
        path: &Path,
        result: &FileResult,
        config: &SearchConfig,
        started_utc: String,
    ) -> Result<RecordOutcome> {
        let json = |what: &str, e: serde_json::Error| {
            Error::Config(format!("{what} not serialisable: {e}"))
        };
        let obs = ObservationRecord::from_file(path, &result.header)?;
        let mut run = RunRecord::finished_now(
            config.to_json(),
            serde_json::to_string(&result.plan).map_err(|e| json("DM plan", e))?,
            Some(config.snr_threshold),
            started_utc,
        );
        run.fraction_masked = Some(result.fraction_masked);
        run.samples_searched = Some(result.samples_searched);
        self.record_search(&obs, &run, &result.candidates)
    }
}
