//! Writing an injection run: `injections.csv` (one row per burst), `summary.json`,
//! `completeness.csv` (the binned and fitted curve, ready to plot), and the
//! catalogue record.

use std::path::Path;

use serde::Serialize;

use super::run::{InjectionResult, InjectionRow};
use crate::atomic_file::{self, AtomicFile};
use crate::catalogue::{Catalogue, CompletenessRecord, ObservationRecord};
use crate::error::{Error, Result};
use crate::search::SearchConfig;

fn csv_err(path: &Path) -> impl Fn(csv::Error) -> Error + '_ {
    move |e| Error::io(path, std::io::Error::other(e))
}

/// Writes one row per injected burst to `path`.
///
/// # Errors
/// The file cannot be written.
pub fn write_rows_csv(path: &Path, rows: &[InjectionRow]) -> Result<()> {
    let mut w = csv::Writer::from_writer(AtomicFile::create(path)?);
    for r in rows {
        w.serialize(r).map_err(csv_err(path))?;
    }
    atomic_file::commit_csv(w)
}

#[derive(Serialize)]
struct CurveRow {
    snr_lo: f64,
    snr_hi: f64,
    n: usize,
    n_found: usize,
    fraction: Option<f64>,
    fraction_err: Option<f64>,
    fitted: Option<f64>,
    median_snr_ratio: Option<f64>,
}

/// Writes the completeness curve against expected S/N: binned fractions with
/// binomial errors, and the fitted curve at each bin centre.
///
/// # Errors
/// The file cannot be written.
pub fn write_curve_csv(path: &Path, result: &InjectionResult) -> Result<()> {
    let s = &result.summary;
    let mut w = csv::Writer::from_writer(AtomicFile::create(path)?);
    for b in &s.by_snr {
        w.serialize(CurveRow {
            snr_lo: b.lo,
            snr_hi: b.hi,
            n: b.n,
            n_found: b.n_found,
            fraction: b.fraction,
            fraction_err: b.fraction_err,
            fitted: s.snr_fit.map(|f| f.at(0.5 * (b.lo + b.hi))),
            median_snr_ratio: b.median_snr_ratio,
        })
        .map_err(csv_err(path))?;
    }
    atomic_file::commit_csv(w)
}

#[derive(Serialize)]
struct JsonOut<'a> {
    file: &'a str,
    config_hash: &'a str,
    config: &'a SearchConfig,
    options: &'a super::InjectOptions,
    original_candidates: usize,
    n_passes: usize,
    summary: &'a super::Summary,
}

/// The summary JSON (configuration, options and [`super::Summary`]), as stored in the
/// catalogue's `result_json` and written to `summary.json`.
pub fn summary_json(result: &InjectionResult, config: &SearchConfig) -> String {
    serde_json::to_string_pretty(&JsonOut {
        file: &result.file,
        config_hash: &result.config_hash,
        config,
        options: &result.options,
        original_candidates: result.original_candidates,
        n_passes: result.n_passes,
        summary: &result.summary,
    })
    .expect("injection summaries always serialise")
}

/// Draws the completeness curve to `path` as PNG.
///
/// # Errors
/// Nothing injected, or the file cannot be written.
pub fn write_curve_png(path: &Path, result: &InjectionResult, config: &SearchConfig) -> Result<()> {
    super::plot::completeness_figure(result, config.snr_threshold)?.save_png(path)
}

/// Records the completeness levels against the observation at `path` and the
/// configuration in `cat`; returns the row id.
///
/// # Errors
/// The observation cannot be hashed, or a catalogue failure.
pub fn record(
    cat: &mut Catalogue,
    path: &Path,
    result: &InjectionResult,
    config: &SearchConfig,
) -> Result<i64> {
    // The file's own header: `result.header` is that of the averaged recording when
    // the search averaged.
    let header = crate::obs::open(path)?.header().clone();
    let obs = ObservationRecord::from_file(path, &header)?;
    let s = &result.summary;
    cat.record_completeness(
        &obs,
        &CompletenessRecord {
            config_json: config.to_json(),
            snr50: s.snr50,
            snr90: s.snr90,
            fluence50_jy_ms: s.fluence50_jy_ms,
            fluence90_jy_ms: s.fluence90_jy_ms,
            result_json: summary_json(result, config),
        },
    )
}
