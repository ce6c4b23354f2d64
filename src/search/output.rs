//! Writing search results: `candidates.csv` (one flat row per candidate) and
//! `candidates.json` (configuration, its hash, per-file summaries and candidates).

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::{FileResult, SearchConfig};
use crate::atomic_file::{self, AtomicFile};
use crate::candidate::{Candidate, TriageFeatures, Verdict};
use crate::catalogue::EarlierRun;
use crate::error::{Error, Result};

/// The cells of one CSV row in [`CSV_COLUMNS`] order: a [`Candidate`] with its
/// features flattened, reasons joined by "; ", no fluence as an empty cell. Numbers are
/// written in Rust's shortest round-trip form. The catalogue's candidate CSV appends
/// these cells to its own columns.
pub fn csv_cells(c: &Candidate) -> Vec<String> {
    let f = &c.features;
    vec![
        c.file.clone(),
        c.t_inf_s.to_string(),
        c.mjd_inf.to_string(),
        c.dm.to_string(),
        c.dm_lo.to_string(),
        c.dm_hi.to_string(),
        c.width_ms.to_string(),
        c.snr.to_string(),
        c.cluster_size.to_string(),
        c.verdict.as_str().to_string(),
        c.reasons.join("; "),
        f.snr_dm0_ratio.to_string(),
        f.dm_curve_misfit.to_string(),
        f.band_fraction.to_string(),
        f.modulation_index.to_string(),
        c.fluence_jy_ms.map(|x| x.to_string()).unwrap_or_default(),
    ]
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
    /// Seconds of the file that continues this one read on into, so that sweeps
    /// crossing into it were searched (0: none).
    pub run_on_s: f64,
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
            run_on_s: r.run_on_s,
        }
    }
}

/// One file given to a search command: searched now, or not searched again because
/// the catalogue holds a finished search of the same content and configuration.
#[derive(Debug, Clone)]
pub enum FileOutcome {
    /// Searched by this command.
    Searched(Box<FileResult>),
    /// Skipped; made by [`FileOutcome::skipped`].
    Skipped { file: String, earlier: EarlierRun },
    /// Could not be read or searched to its end (`error` says why); it has no
    /// candidates, and the other files are searched all the same.
    Failed { file: String, error: String },
}

impl FileOutcome {
    /// The file named `file` now, not searched again because of `earlier`. Its
    /// candidates are renamed to `file`: the content may have been recorded under
    /// another path, and outputs should lead to where it is now.
    pub fn skipped(file: String, mut earlier: EarlierRun) -> FileOutcome {
        for c in &mut earlier.candidates {
            c.file.clone_from(&file);
        }
        FileOutcome::Skipped { file, earlier }
    }

    /// The file's candidates in time order, from this search or the earlier one.
    pub fn candidates(&self) -> &[Candidate] {
        match self {
            FileOutcome::Searched(r) => &r.candidates,
            FileOutcome::Skipped { earlier, .. } => &earlier.candidates,
            FileOutcome::Failed { .. } => &[],
        }
    }
}

/// A file that could not be searched, as listed in the JSON output.
#[derive(Debug, Serialize)]
struct FailedSummary<'a> {
    file: &'a str,
    error: &'a str,
}

/// A skipped file as listed in the JSON output.
#[derive(Debug, Serialize)]
struct SkippedSummary<'a> {
    file: &'a str,
    /// The catalogue's `search_run` id whose candidates are listed.
    run_id: i64,
    finished_utc: &'a str,
    n_candidates: usize,
}

#[derive(Serialize)]
struct JsonOut<'a> {
    config_hash: String,
    config: &'a SearchConfig,
    files: Vec<FileSummary<'a>>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    skipped: Vec<SkippedSummary<'a>>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    failed: Vec<FailedSummary<'a>>,
    candidates: Vec<&'a Candidate>,
}

/// Writes every candidate of `files` (in the given file order, each file in time
/// order) to `path` as CSV.
///
/// # Errors
/// The file cannot be written.
pub fn write_csv(path: &Path, files: &[FileOutcome]) -> Result<()> {
    let io = |e: csv::Error| Error::io(path, std::io::Error::other(e));
    let mut w = csv::Writer::from_writer(AtomicFile::create(path)?);
    w.write_record(CSV_COLUMNS).map_err(io)?;
    for c in files.iter().flat_map(FileOutcome::candidates) {
        w.write_record(csv_cells(c)).map_err(io)?;
    }
    atomic_file::commit_csv(w)
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

/// Writes the configuration, its hash, summaries of the files searched, the files
/// skipped (`skipped`) and those that could not be searched (`failed`; each only
/// when there are some) and all candidates to `path` as pretty JSON.
///
/// # Errors
/// The file cannot be written.
pub fn write_json(path: &Path, files: &[FileOutcome], config: &SearchConfig) -> Result<()> {
    let out = JsonOut {
        config_hash: config.hash(),
        config,
        files: files
            .iter()
            .filter_map(|f| match f {
                FileOutcome::Searched(r) => Some(FileSummary::from(&**r)),
                _ => None,
            })
            .collect(),
        skipped: files
            .iter()
            .filter_map(|f| match f {
                FileOutcome::Skipped { file, earlier } => Some(SkippedSummary {
                    file,
                    run_id: earlier.run_id,
                    finished_utc: &earlier.finished_utc,
                    n_candidates: earlier.candidates.len(),
                }),
                _ => None,
            })
            .collect(),
        failed: files
            .iter()
            .filter_map(|f| match f {
                FileOutcome::Failed { file, error } => Some(FailedSummary { file, error }),
                _ => None,
            })
            .collect(),
        candidates: files.iter().flat_map(FileOutcome::candidates).collect(),
    };
    let text = serde_json::to_string_pretty(&out).expect("search results always serialise");
    atomic_file::write(path, text)
}

/// A `candidates.csv` row as the search writes it (features flattened, reasons joined
/// by "; ").
#[derive(Debug, Deserialize)]
struct CsvRow {
    file: String,
    t_inf_s: f64,
    mjd_inf: f64,
    dm: f64,
    dm_lo: f64,
    dm_hi: f64,
    width_ms: f64,
    snr: f64,
    cluster_size: usize,
    verdict: String,
    reasons: String,
    snr_dm0_ratio: f64,
    dm_curve_misfit: f64,
    band_fraction: f64,
    modulation_index: f64,
    fluence_jy_ms: Option<f64>,
}

/// The leading columns of [`CSV_COLUMNS`] without which a CSV is not search output at
/// all (every column is then checked row by row).
const IDENTIFYING_COLUMNS: usize = 10;

/// Reads `candidates.csv` text back into candidates (the inverse of [`write_csv`]).
///
/// # Errors
/// [`Error::BadInput`] naming `path` and the row at fault, or a file without the
/// columns of search output (an empty one included).
pub fn parse_csv(path: &Path, text: &str) -> Result<Vec<Candidate>> {
    let mut reader = csv::Reader::from_reader(text.as_bytes());
    // A search with no candidates still writes the header row: a file without the
    // columns is not search output (an emptied or foreign file), not "no candidates".
    let headers = reader
        .headers()
        .map_err(|e| Error::bad_input(path, format!("not readable as CSV: {e}")))?;
    let required = &CSV_COLUMNS[..IDENTIFYING_COLUMNS];
    if let Some(missing) = required.iter().find(|c| !headers.iter().any(|h| h == **c)) {
        let what = match text.trim().is_empty() {
            true => "is empty".to_string(),
            false => format!("has no column {missing:?}"),
        };
        return Err(Error::bad_input(
            path,
            format!("{what}: not a candidates file written by `burstbook search`"),
        ));
    }
    reader
        .deserialize::<CsvRow>()
        .enumerate()
        .map(|(i, row)| {
            let r = row.map_err(|e| Error::bad_input(path, format!("row {}: {e}", i + 1)))?;
            let verdict = Verdict::parse(&r.verdict).ok_or_else(|| {
                Error::bad_input(
                    path,
                    format!("row {}: unknown verdict {:?}", i + 1, r.verdict),
                )
            })?;
            Ok(Candidate {
                file: r.file,
                t_inf_s: r.t_inf_s,
                mjd_inf: r.mjd_inf,
                dm: r.dm,
                dm_lo: r.dm_lo,
                dm_hi: r.dm_hi,
                width_ms: r.width_ms,
                snr: r.snr,
                cluster_size: r.cluster_size,
                verdict,
                reasons: r
                    .reasons
                    .split("; ")
                    .filter(|s| !s.is_empty())
                    .map(str::to_string)
                    .collect(),
                features: TriageFeatures {
                    snr_dm0_ratio: r.snr_dm0_ratio,
                    dm_curve_misfit: r.dm_curve_misfit,
                    band_fraction: r.band_fraction,
                    modulation_index: r.modulation_index,
                },
                fluence_jy_ms: r.fluence_jy_ms,
            })
        })
        .collect()
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
    fn csv_cells_follow_the_columns_and_round_trip() {
        let mut c = cand();
        c.mjd_inf = 60_000.123_456_789;
        c.features.band_fraction = 1e-7;
        let cells = csv_cells(&c);
        assert_eq!(cells.len(), CSV_COLUMNS.len());
        let cell = |name: &str| &cells[CSV_COLUMNS.iter().position(|n| *n == name).unwrap()];
        assert_eq!(cell("verdict"), "astrophysical");
        assert_eq!(cell("reasons"), "one; two");
        assert_eq!(cell("fluence_jy_ms"), "");
        assert_eq!(cell("cluster_size"), "7");
        assert_eq!(cell("mjd_inf").parse::<f64>().unwrap(), c.mjd_inf);
        assert_eq!(cell("band_fraction").parse::<f64>().unwrap(), 1e-7);
    }

    // A search with no candidates writes the header row and reads back as none; an
    // emptied file or another CSV is refused, naming the file, not taken for "none".
    #[test]
    fn only_search_output_reads_as_candidates() {
        let path = Path::new("out/candidates.csv");
        let header = CSV_COLUMNS.join(",") + "\n";
        assert!(parse_csv(path, &header).unwrap().is_empty());
        for (text, needle) in [
            ("", "is empty"),
            ("  \n", "is empty"),
            ("time,flux\n1,2\n", "has no column \"file\""),
        ] {
            let e = parse_csv(path, text).unwrap_err().to_string();
            assert!(
                e.starts_with("out/candidates.csv: ") && e.contains(needle),
                "{e}"
            );
        }
    }
}
