//! Writing search results: `candidates.csv` (one flat row per candidate) and
//! `candidates.json` (configuration, its hash, per-file summaries and candidates).

use std::path::Path;

use serde::Serialize;

use super::{FileResult, SearchConfig};
use crate::candidate::Candidate;
use crate::error::{Error, Result};

/// One CSV row: a [`Candidate`] with its features flattened and reasons joined by "; ".
#[derive(Debug, Serialize)]
struct CsvRow<'a> {
    file: &'a str,
    t_inf_s: f64,
    mjd_inf: f64,
    dm: f64,
    dm_lo: f64,
    dm_hi: f64,
    width_ms: f64,
    snr: f64,
    cluster_size: usize,
    verdict: &'static str,
    reasons: String,
    snr_dm0_ratio: f64,
    dm_curve_misfit: f64,
    band_fraction: f64,
    modulation_index: f64,
    fluence_jy_ms: Option<f64>,
}

impl<'a> From<&'a Candidate> for CsvRow<'a> {
    fn from(c: &'a Candidate) -> Self {
        CsvRow {
            file: &c.file,
            t_inf_s: c.t_inf_s,
            mjd_inf: c.mjd_inf,
            dm: c.dm,
            dm_lo: c.dm_lo,
            dm_hi: c.dm_hi,
            width_ms: c.width_ms,
            snr: c.snr,
            cluster_size: c.cluster_size,
            verdict: c.verdict.as_str(),
            reasons: c.reasons.join("; "),
            snr_dm0_ratio: c.features.snr_dm0_ratio,
            dm_curve_misfit: c.features.dm_curve_misfit,
            band_fraction: c.features.band_fraction,
            modulation_index: c.features.modulation_index,
            fluence_jy_ms: c.fluence_jy_ms,
        }
    }
}

/// Per-file summary stored in the JSON output.
#[derive(Debug, Serialize)]
pub struct FileSummary<'a> {
    /// The recording.
    pub file: &'a str,
    /// Its duration in seconds.
    pub duration_s: f64,
    /// Fraction of channel-samples masked or clipped.
    pub fraction_masked: f64,
    /// Trial DMs searched.
    pub dm_trials: usize,
    /// Effectively independent trials.
    pub effective_trials: f64,
    /// Noise events expected above threshold for Gaussian noise.
    pub expected_false_alarms: f64,
    /// Candidates found.
    pub n_candidates: usize,
}

impl<'a> From<&'a FileResult> for FileSummary<'a> {
    fn from(r: &'a FileResult) -> Self {
        FileSummary {
            file: &r.file,
            duration_s: r.header.duration_s(),
            fraction_masked: r.fraction_masked,
            dm_trials: r.trials.dm_trials,
            effective_trials: r.trials.effective_trials,
            expected_false_alarms: r.trials.expected_false_alarms,
            n_candidates: r.candidates.len(),
        }
    }
}

#[derive(Serialize)]
struct JsonOut<'a> {
    config_hash: String,
    config: &'a SearchConfig,
    files: Vec<FileSummary<'a>>,
    candidates: Vec<&'a Candidate>,
}

/// Writes every candidate of `results` (in the given file order, each file in time
/// order) to `path` as CSV.
///
/// # Errors
/// The file cannot be written.
pub fn write_csv(path: &Path, results: &[FileResult]) -> Result<()> {
    let io = |e: csv::Error| Error::io(path, std::io::Error::other(e));
    let mut w = csv::Writer::from_path(path).map_err(io)?;
    for c in results.iter().flat_map(|r| &r.candidates) {
        w.serialize(CsvRow::from(c)).map_err(io)?;
    }
    if results.iter().all(|r| r.candidates.is_empty()) {
        // Keep the header line even without candidates.
        w.write_record(CSV_COLUMNS).map_err(io)?;
    }
    w.flush().map_err(|e| Error::io(path, e))
}

/// Column names of `candidates.csv`, in order.
pub const CSV_COLUMNS: [&str; 16] = [
    "file",
    "t_inf_s",
    "mjd_inf",
    "dm",
    "dm_lo",
    "dm_hi",
    "width_ms",
    "snr",
    "cluster_size",
    "verdict",
    "reasons",
    "snr_dm0_ratio",
    "dm_curve_misfit",
    "band_fraction",
    "modulation_index",
    "fluence_jy_ms",
];

/// Writes the configuration, its hash, per-file summaries and all candidates to
/// `path` as pretty JSON.
///
/// # Errors
/// The file cannot be written.
pub fn write_json(path: &Path, results: &[FileResult], config: &SearchConfig) -> Result<()> {
    let out = JsonOut {
        config_hash: config.hash(),
        config,
        files: results.iter().map(FileSummary::from).collect(),
        candidates: results.iter().flat_map(|r| &r.candidates).collect(),
    };
    let text = serde_json::to_string_pretty(&out).expect("search results always serialise");
    std::fs::write(path, text).map_err(|e| Error::io(path, e))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::candidate::{TriageFeatures, Verdict};

    fn cand() -> Candidate {
        Candidate {
            file: "a.json".into(),
            t_inf_s: 1.5,
            mjd_inf: 60000.5,
            dm: 100.0,
            dm_lo: 99.0,
            dm_hi: 101.0,
            width_ms: 2.0,
            snr: 12.5,
            cluster_size: 7,
            verdict: Verdict::Astrophysical,
            reasons: vec!["one".into(), "two".into()],
            features: TriageFeatures::default(),
            fluence_jy_ms: None,
        }
    }

    #[test]
    fn csv_columns_match_the_row_struct() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("c.csv");
        let mut w = csv::Writer::from_path(&path).unwrap();
        w.serialize(CsvRow::from(&cand())).unwrap();
        w.flush().unwrap();
        let text = std::fs::read_to_string(&path).unwrap();
        let mut lines = text.lines();
        assert_eq!(lines.next().unwrap(), CSV_COLUMNS.join(","));
        assert!(lines.next().unwrap().contains("astrophysical,one; two,"));
    }
}
