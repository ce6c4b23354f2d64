//! Exposure: the time each source was searched, from our own runs and imported
//! from CSV (`source,start_mjd,end_mjd[,snr_threshold[,fluence_limit_jy_ms]]`) for
//! searches done elsewhere. Overlaps are merged before anything is summed, so the
//! same hour searched twice counts once.

use std::io::{Read, Write};
use std::path::Path;

use rusqlite::params;
use serde::Serialize;

use super::Catalogue;
use crate::error::{Error, Result};
use crate::units::{PLAUSIBLE_MJD, SECONDS_PER_DAY, delay_to_infinity_s};

/// One stored exposure interval.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ExposureInterval {
    /// Source name.
    pub source: String,
    /// Start, UTC MJD.
    pub start_mjd: f64,
    /// End, UTC MJD.
    pub end_mjd: f64,
    /// S/N above which the search was complete, if known.
    pub snr_threshold: Option<f64>,
    /// Fluence in Jy ms above which the search was complete, if measured.
    pub fluence_limit_jy_ms: Option<f64>,
    /// The run that searched it; `None` for imported intervals.
    pub run_id: Option<i64>,
}

/// Union of `[start, end)` intervals, sorted and non-overlapping.
pub fn merge_intervals(mut spans: Vec<(f64, f64)>) -> Vec<(f64, f64)> {
    spans.retain(|(a, b)| b > a);
    spans.sort_by(|a, b| a.0.total_cmp(&b.0));
    let mut out: Vec<(f64, f64)> = Vec::with_capacity(spans.len());
    for (a, b) in spans {
        match out.last_mut() {
            Some(last) if a <= last.1 => last.1 = last.1.max(b),
            _ => out.push((a, b)),
        }
    }
    out
}

/// The arrival times at infinite frequency (UTC MJD) of the bursts at `dm`
/// (pc cm⁻³) whose whole sweep over channels `freq_lo_mhz..=freq_hi_mhz` a search
/// of a recording spanning `[start_mjd, end_mjd)` covered, when it read on
/// `run_on_s` seconds into the recording that continues it: the span moved earlier
/// by the delay to the top channel, and shortened by the sweep across the band less
/// what the reading on covered. A search owns the bursts reaching its top channel
/// before its end, so one that read on through the whole sweep ends where the next
/// recording's window starts. Empty (end ≤ start, dropped when merged) for a
/// recording searched alone that is shorter than the sweep.
pub fn sweep_window(
    (start_mjd, end_mjd): (f64, f64),
    dm: f64,
    (freq_lo_mhz, freq_hi_mhz): (f64, f64),
    run_on_s: f64,
) -> (f64, f64) {
    let days = |f| delay_to_infinity_s(dm, f) / SECONDS_PER_DAY;
    let sweep_end = end_mjd + run_on_s / SECONDS_PER_DAY - days(freq_lo_mhz);
    (
        start_mjd - days(freq_hi_mhz),
        sweep_end.min(end_mjd - days(freq_hi_mhz)),
    )
}

/// Total hours covered by merged MJD intervals (0 for none: a float `sum` of nothing
/// is −0, which `book summary` printed as `-0.000`).
pub fn exposure_hours(merged: &[(f64, f64)]) -> f64 {
    merged
        .iter()
        .fold(0.0, |hours, (a, b)| hours + (b - a) * 24.0)
}

impl Catalogue {
    /// Exposure intervals, optionally of one source, in start order.
    ///
    /// # Errors
    /// A source the catalogue does not hold, or an SQLite failure.
    pub fn exposure(&self, source: Option<&str>) -> Result<Vec<ExposureInterval>> {
        self.check_source_filter(source)?;
        let mut stmt = self
            .conn()
            .prepare(
                "SELECT s.name, e.start_mjd, e.end_mjd, e.snr_threshold, e.fluence_limit_jy_ms, e.run_id
                 FROM exposure e JOIN source s ON s.id = e.source_id
                 WHERE ?1 IS NULL OR s.name = ?1 ORDER BY s.name, e.start_mjd, e.id",
            )
            .map_err(|e| self.err(e))?;
        let rows = stmt
            .query_map([source], |r| {
                Ok(ExposureInterval {
                    source: r.get(0)?,
                    start_mjd: r.get(1)?,
                    end_mjd: r.get(2)?,
                    snr_threshold: r.get(3)?,
                    fluence_limit_jy_ms: r.get(4)?,
                    run_id: r.get(5)?,
                })
            })
            .map_err(|e| self.err(e))?;
        rows.collect::<rusqlite::Result<_>>()
            .map_err(|e| self.err(e))
    }

    /// Merged exposure of `source` by searches complete at `snr_min`: intervals
    /// whose threshold is at most `snr_min`, or unknown. `None` takes every interval.
    ///
    /// The times are arrival times at infinite frequency (UTC MJD), as a burst's
    /// `mjd_inf` is. A search of a recording finds a burst whose whole sweep lies in
    /// it, so when the source has a reference DM, each interval of our own runs
    /// becomes `[start − d(f_hi), end − d(f_lo)]`, with d the delay at that DM to the
    /// recording's highest and lowest channel ([`sweep_window`]). Imported intervals,
    /// and those of a source with no reference DM, are taken as they are.
    ///
    /// # Errors
    /// An SQLite failure.
    pub fn merged_exposure(&self, source: &str, snr_min: Option<f64>) -> Result<Vec<(f64, f64)>> {
        let mut stmt = self
            .conn()
            .prepare(
                "SELECT e.start_mjd, e.end_mjd, e.snr_threshold, s.dm_ref, o.freq_lo_mhz, o.freq_hi_mhz,
                     coalesce(r.run_on_s, 0)
                 FROM exposure e JOIN source s ON s.id = e.source_id
                 LEFT JOIN search_run r ON r.id = e.run_id
                 LEFT JOIN observation o ON o.id = r.observation_id
                 WHERE s.name = ?1",
            )
            .map_err(|e| self.err(e))?;
        let rows = stmt
            .query_map([source], |r| {
                let span: (f64, f64) = (r.get(0)?, r.get(1)?);
                let threshold: Option<f64> = r.get(2)?;
                let dm: Option<f64> = r.get(3)?;
                let band = r.get::<_, Option<f64>>(4)?.zip(r.get::<_, Option<f64>>(5)?);
                let run_on_s: f64 = r.get(6)?;
                let window = dm
                    .zip(band)
                    .map_or(span, |(dm, b)| sweep_window(span, dm, b, run_on_s));
                Ok((window, threshold))
            })
            .map_err(|e| self.err(e))?;
        let mut spans = Vec::new();
        for row in rows {
            let (span, threshold) = row.map_err(|e| self.err(e))?;
            if snr_min.zip(threshold).is_none_or(|(s, t)| t <= s) {
                spans.push(span);
            }
        }
        Ok(merge_intervals(spans))
    }

    /// Imports exposure CSV (`source,start_mjd,end_mjd[,snr_threshold[,fluence_limit_jy_ms]]`,
    /// optional header row) in one transaction. Sources must exist. A row whose
    /// interval is already held with the same threshold is not added again; if the
    /// held row has no fluence limit and the file gives one, it takes the file's
    /// (nothing known is dropped), and a held limit the file gives differently is
    /// kept and counted.
    ///
    /// # Errors
    /// [`Error::BadInput`] naming the line of the first bad row (then nothing is
    /// imported), or an SQLite failure.
    pub fn import_exposure_csv(
        &mut self,
        csv_path: &Path,
        reader: impl Read,
    ) -> Result<ExposureImport> {
        let rows = parse_exposure_csv(csv_path, reader)?;
        let path = self.path().to_path_buf();
        self.write(|tx| {
            let e = |e| super::sql_error(&path, e);
            let mut counts = ExposureImport::default();
            for (line, row) in &rows {
                let id: Option<i64> = rusqlite::OptionalExtension::optional(tx.query_row(
                    "SELECT id FROM source WHERE name = ?1",
                    [&row.source],
                    |r| r.get(0),
                ))
                .map_err(e)?;
                let Some(id) = id else {
                    return Err(Error::bad_input(
                        csv_path,
                        format!(
                            "line {line}: unknown source {:?} (add it with `burstbook book source add`); nothing imported",
                            row.source
                        ),
                    ));
                };
                let key = params![id, row.start_mjd, row.end_mjd, row.snr_threshold];
                // An interval already held, from a run or imported, is not added again:
                // exporting a run's exposure and importing it back adds nothing.
                let held: Vec<Option<f64>> = tx
                    .prepare_cached(
                        "SELECT fluence_limit_jy_ms FROM exposure WHERE source_id = ?1
                         AND start_mjd = ?2 AND end_mjd = ?3 AND snr_threshold IS ?4",
                    )
                    .and_then(|mut q| {
                        q.query_map(key, |r| r.get(0))?
                            .collect::<rusqlite::Result<_>>()
                    })
                    .map_err(e)?;
                if held.is_empty() {
                    tx.execute(
                        "INSERT INTO exposure
                             (source_id, start_mjd, end_mjd, snr_threshold, fluence_limit_jy_ms)
                         VALUES (?1, ?2, ?3, ?4, ?5)",
                        params![
                            id,
                            row.start_mjd,
                            row.end_mjd,
                            row.snr_threshold,
                            row.fluence_limit_jy_ms
                        ],
                    )
                    .map_err(e)?;
                    counts.added += 1;
                    continue;
                }
                counts.present += 1;
                let Some(limit) = row.fluence_limit_jy_ms else {
                    continue;
                };
                if held.iter().all(Option::is_none) {
                    tx.execute(
                        "UPDATE exposure SET fluence_limit_jy_ms = ?5 WHERE source_id = ?1
                         AND start_mjd = ?2 AND end_mjd = ?3 AND snr_threshold IS ?4",
                        params![id, row.start_mjd, row.end_mjd, row.snr_threshold, limit],
                    )
                    .map_err(e)?;
                    counts.limits_filled += 1;
                } else if held.iter().flatten().any(|&h| h != limit) {
                    counts.limits_kept += 1;
                }
            }
            Ok(counts)
        })
    }

    /// Writes exposure as CSV in the import format, optionally of one source: every
    /// field of [`ExposureInterval`] but `run_id`, which names a run of this
    /// catalogue only (an imported interval is one searched elsewhere).
    ///
    /// # Errors
    /// A source the catalogue does not hold, a write failure or an SQLite failure.
    pub fn export_exposure_csv(&self, source: Option<&str>, out: impl Write) -> Result<()> {
        // Read first: an unknown source is refused before anything is written.
        let intervals = self.exposure(source)?;
        let mut w = csv::Writer::from_writer(out);
        w.write_record(EXPORT_COLUMNS).map_err(csv_write_error)?;
        // Shortest text that parses back to the same f64, so a re-import matches.
        let opt = |v: Option<f64>| v.map(|x| x.to_string()).unwrap_or_default();
        for e in intervals {
            w.write_record([
                e.source,
                e.start_mjd.to_string(),
                e.end_mjd.to_string(),
                opt(e.snr_threshold),
                opt(e.fluence_limit_jy_ms),
            ])
            .map_err(csv_write_error)?;
        }
        w.flush().map_err(|e| Error::io(EXPORT_OUTPUT, e))
    }
}

/// What export errors name: the writer may be a file or a pipe.
const EXPORT_OUTPUT: &str = "exposure CSV output";

/// An export write error; an I/O error keeps its kind, so a reader that stopped
/// early (a closed pipe) stays recognisable to the caller.
fn csv_write_error(e: csv::Error) -> Error {
    let message = e.to_string();
    match e.into_kind() {
        csv::ErrorKind::Io(io) => Error::io(EXPORT_OUTPUT, io),
        _ => Error::Config(format!("writing exposure CSV: {message}")),
    }
}

/// What [`Catalogue::import_exposure_csv`] did with a file's rows.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct ExposureImport {
    /// Intervals added.
    pub added: usize,
    /// Intervals already held (same source, start, end and threshold).
    pub present: usize,
    /// Of those, held without a fluence limit and given the file's.
    pub limits_filled: usize,
    /// Of those, holding a fluence limit the file gives differently (the held one is kept).
    pub limits_kept: usize,
}

/// Columns of the exported CSV; an import takes the first three, or four (files
/// exported before the fluence limit was), or all five.
const EXPORT_COLUMNS: [&str; 5] = [
    "source",
    "start_mjd",
    "end_mjd",
    "snr_threshold",
    "fluence_limit_jy_ms",
];

#[derive(Debug, Clone, PartialEq)]
struct ExposureRow {
    source: String,
    start_mjd: f64,
    end_mjd: f64,
    snr_threshold: Option<f64>,
    fluence_limit_jy_ms: Option<f64>,
}

/// Parses and checks every row before anything is written; rows keep their line number.
fn parse_exposure_csv(path: &Path, reader: impl Read) -> Result<Vec<(u64, ExposureRow)>> {
    let mut r = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_reader(reader);
    let mut rows = Vec::new();
    for rec in r.records() {
        let rec = rec.map_err(|e| Error::bad_input(path, format!("not readable as CSV: {e}")))?;
        let line = rec.position().map_or(0, |p| p.line());
        let bad =
            |msg: String| Error::bad_input(path, format!("line {line}: {msg}; nothing imported"));
        // A header names the columns; the rows are read by position, so a header in
        // another order would read start for end or a threshold for a limit.
        if rows.is_empty() && rec.iter().any(|f| EXPORT_COLUMNS.contains(&f)) {
            if rec
                .iter()
                .eq(EXPORT_COLUMNS.iter().take(rec.len()).copied())
            {
                continue;
            }
            return Err(bad(format!(
                "a header {:?} must name the columns in the order {}",
                rec.iter().collect::<Vec<_>>().join(","),
                EXPORT_COLUMNS.join(",")
            )));
        }
        if !(3..=EXPORT_COLUMNS.len()).contains(&rec.len()) {
            return Err(bad(format!(
                "expected source,start_mjd,end_mjd[,snr_threshold[,fluence_limit_jy_ms]], got {} fields",
                rec.len()
            )));
        }
        let num = |i: usize, what: &str| -> Result<f64> {
            let s = &rec[i];
            s.parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| bad(format!("{what} {s:?} is not a finite number")))
        };
        let mjd = |i: usize| -> Result<f64> {
            let v = num(i, EXPORT_COLUMNS[i])?;
            if PLAUSIBLE_MJD.contains(&v) {
                Ok(v)
            } else {
                Err(bad(format!(
                    "{} {v} is outside the plausible MJD range {}..={} (years 1968 to 2132)",
                    EXPORT_COLUMNS[i],
                    PLAUSIBLE_MJD.start(),
                    PLAUSIBLE_MJD.end()
                )))
            }
        };
        let start_mjd = mjd(1)?;
        let end_mjd = mjd(2)?;
        if end_mjd <= start_mjd {
            return Err(bad(format!(
                "end_mjd {end_mjd} is not after start_mjd {start_mjd}"
            )));
        }
        // An empty or absent optional column is an unknown value; a known one is a
        // threshold or limit, so above 0.
        let optional = |i: usize| match rec.get(i) {
            Some("") | None => Ok(None),
            Some(_) => match num(i, EXPORT_COLUMNS[i])? {
                v if v > 0.0 => Ok(Some(v)),
                v => Err(bad(format!("{} {v} must be above 0", EXPORT_COLUMNS[i]))),
            },
        };
        let snr_threshold = optional(3)?;
        let fluence_limit_jy_ms = optional(4)?;
        if rec[0].is_empty() {
            return Err(bad("empty source name".into()));
        }
        rows.push((
            line,
            ExposureRow {
                source: rec[0].to_string(),
                start_mjd,
                end_mjd,
                snr_threshold,
                fluence_limit_jy_ms,
            },
        ));
    }
    Ok(rows)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::SourceRecord;

    #[test]
    fn merging_counts_overlaps_once() {
        let m = merge_intervals(vec![
            (3.0, 4.0),
            (1.0, 2.0),
            (1.5, 2.5),
            (2.5, 2.75),
            (5.0, 5.0),
        ]);
        assert_eq!(m, vec![(1.0, 2.75), (3.0, 4.0)]);
        assert!((exposure_hours(&m) - 2.75 * 24.0).abs() < 1e-12);
    }

    fn add_source(cat: &mut Catalogue, name: &str) {
        let s = SourceRecord {
            id: 0,
            name: name.into(),
            ra_deg: 1.0,
            dec_deg: 2.0,
            dm_ref: None,
            notes: String::new(),
        };
        cat.upsert_source(&s).unwrap();
    }

    /// Rows added and already present, no fluence limit filled or kept.
    fn counts(added: usize, present: usize) -> ExposureImport {
        ExposureImport {
            added,
            present,
            ..Default::default()
        }
    }

    fn cat_with_source() -> (tempfile::TempDir, Catalogue) {
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        add_source(&mut cat, "SRC-A");
        (dir, cat)
    }

    #[test]
    fn a_source_without_exposure_has_zero_hours_not_minus_zero() {
        let (_d, cat) = cat_with_source();
        let s = cat.summary("SRC-A", None, 0.95).unwrap();
        assert_eq!(format!("{:.3}", s.exposure_hours), "0.000");
        assert_eq!(s.rate_per_hour, None);
    }

    /// A mistyped source writes nothing: `export --source NAME > file.csv` used to
    /// leave a header line on stdout before the error.
    #[test]
    fn exporting_an_unknown_source_writes_nothing() {
        let (_d, cat) = cat_with_source();
        let mut out = Vec::new();
        let err = cat
            .export_exposure_csv(Some("SRC-Z"), &mut out)
            .unwrap_err();
        assert!(
            err.to_string().contains("has no source named \"SRC-Z\""),
            "{err}"
        );
        assert!(out.is_empty(), "{:?}", String::from_utf8_lossy(&out));
    }

    /// Rows are read by position: a header in another order is refused, not read
    /// as data (its own fields are not numbers) or trusted to reorder the columns.
    #[test]
    fn a_header_in_another_order_is_refused() {
        let (_d, mut cat) = cat_with_source();
        let p = Path::new("in.csv");
        for header in ["start_mjd,end_mjd,source", "source,end_mjd,start_mjd"] {
            let csv = format!("{header}\nSRC-A,60000.0,60000.5\n");
            let err = cat
                .import_exposure_csv(p, csv.as_bytes())
                .unwrap_err()
                .to_string();
            assert!(
                err.contains("line 1") && err.contains("in the order source,start_mjd,end_mjd"),
                "{err}"
            );
        }
        let shorter = "source,start_mjd,end_mjd\nSRC-A,60000.0,60000.5\n";
        assert_eq!(
            cat.import_exposure_csv(p, shorter.as_bytes()).unwrap(),
            counts(1, 0)
        );
    }

    #[test]
    fn import_is_idempotent_and_round_trips_through_export() {
        let (_d, mut cat) = cat_with_source();
        let csv = "source,start_mjd,end_mjd,snr_threshold\nSRC-A,60000.0,60000.5,7\n# a comment\nSRC-A, 60001.0 ,60001.25\n";
        let p = Path::new("in.csv");
        assert_eq!(
            cat.import_exposure_csv(p, csv.as_bytes()).unwrap(),
            counts(2, 0)
        );
        assert_eq!(
            cat.import_exposure_csv(p, csv.as_bytes()).unwrap(),
            counts(0, 2)
        );
        let mut out = Vec::new();
        cat.export_exposure_csv(Some("SRC-A"), &mut out).unwrap();
        let text = String::from_utf8(out).unwrap();
        assert_eq!(
            cat.import_exposure_csv(p, text.as_bytes()).unwrap(),
            counts(0, 2)
        );
        let merged = cat.merged_exposure("SRC-A", Some(7.0)).unwrap();
        assert!((exposure_hours(&merged) - 18.0).abs() < 1e-9);
        // A search complete only above S/N 7 does not count at S/N 6.5... unless its
        // threshold is unknown, as for the second row.
        let strict = cat.merged_exposure("SRC-A", Some(6.5)).unwrap();
        assert!((exposure_hours(&strict) - 6.0).abs() < 1e-9);
    }

    // A source with a reference DM: our run's interval moves to arrival times at
    // infinite frequency and shrinks by the sweep (delays from the dispersion constant
    // of Lorimer & Kramer 2005, 4.148808e3 s MHz² pc⁻¹ cm³: 0.81349 s to the top
    // channel at 1596.875 MHz and 1.43308 s to the bottom one at 1203.125 MHz, for
    // DM 500); an imported interval is taken as it is, and so is every interval
    // once the source has no reference DM.
    #[test]
    fn a_runs_exposure_is_the_window_its_search_could_find_bursts_in() {
        use crate::catalogue::synthetic::{candidates, observation, run};
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let mut source = SourceRecord {
            id: 0,
            name: "FIELD-7".into(),
            ra_deg: 1.0,
            dec_deg: 2.0,
            dm_ref: Some(500.0),
            notes: String::new(),
        };
        cat.upsert_source(&source).unwrap();
        let obs = observation("FIELD-7", 3);
        let (start, end) = obs.span_mjd();
        cat.record_search(&obs, &run(7.0), &candidates(&obs, 5, 3))
            .unwrap();
        let imported = "FIELD-7,60010.0,60010.5\n";
        cat.import_exposure_csv(Path::new("x.csv"), imported.as_bytes())
            .unwrap();
        let day = 86_400.0;
        let merged = cat.merged_exposure("FIELD-7", None).unwrap();
        assert_eq!(merged.len(), 2);
        assert!(((start - merged[0].0) * day - 0.813_489).abs() < 1e-5);
        assert!(((end - merged[0].1) * day - 1.433_085).abs() < 1e-5);
        assert_eq!(merged[1], (60010.0, 60010.5));
        // The stored rows, and so exports, keep the recording's span.
        assert_eq!(cat.exposure(None).unwrap()[0].start_mjd, start);
        source.dm_ref = None;
        cat.upsert_source(&source).unwrap();
        let merged = cat.merged_exposure("FIELD-7", None).unwrap();
        assert_eq!(merged, vec![(start, end), (60010.0, 60010.5)]);
    }

    // Consecutive recordings of a source at DM 500 (the delays above: a sweep of
    // 1.433085 − 0.813489 = 0.619596 s across the band). Searched alone, the first
    // leaves a gap of one sweep before the next one's window: the bursts crossing
    // from one into the other, which neither search found whole. Read on through the
    // sweep, its window ends where the next one's starts; read on 0.25 s, the gap
    // shrinks by as much.
    #[test]
    fn a_run_that_read_on_covers_the_sweeps_crossing_into_the_next_recording() {
        use crate::catalogue::synthetic::{observation, run};
        for (run_on_s, gap_s) in [(0.0, 0.619_596), (0.25, 0.369_596), (2.0, 0.0)] {
            let (_d, mut cat) = cat_with_source();
            let mut source = cat.source("SRC-A").unwrap();
            source.dm_ref = Some(500.0);
            cat.upsert_source(&source).unwrap();
            let first = observation("SRC-A", 3);
            let mut next = observation("SRC-A", 4);
            next.header.start = first.header.start.plus_seconds(first.header.duration_s());
            let mut searched = run(7.0);
            searched.run_on_s = Some(run_on_s);
            cat.record_search(&first, &searched, &[]).unwrap();
            cat.record_search(&next, &run(7.0), &[]).unwrap();
            let merged = cat.merged_exposure("SRC-A", None).unwrap();
            match gap_s {
                0.0 => assert_eq!(merged.len(), 1, "{merged:?}"),
                _ => {
                    assert_eq!(merged.len(), 2, "{merged:?}");
                    let gap = (merged[1].0 - merged[0].1) * 86_400.0;
                    assert!((gap - gap_s).abs() < 1e-5, "{run_on_s}: {gap}");
                }
            }
        }
    }

    #[test]
    fn a_recording_shorter_than_the_sweep_has_no_window() {
        // 0.5 s against a sweep of 0.630 s over 1200–1600 MHz at DM 500.
        let w = sweep_window(
            (60000.0, 60000.0 + 0.5 / 86_400.0),
            500.0,
            (1200.0, 1600.0),
            0.0,
        );
        assert!(w.1 <= w.0, "{w:?}");
        assert!(merge_intervals(vec![w]).is_empty());
    }

    #[test]
    fn a_runs_exposure_exported_and_imported_back_adds_nothing() {
        use crate::catalogue::synthetic::{candidates, observation, run};
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let obs = observation("FIELD-7", 3);
        cat.record_search(&obs, &run(7.0), &candidates(&obs, 5, 3))
            .unwrap();
        let before = cat.exposure(None).unwrap();
        assert_eq!(before.len(), 1);
        assert!(before[0].run_id.is_some());
        let mut out = Vec::new();
        cat.export_exposure_csv(None, &mut out).unwrap();
        // The imported copy (run_id NULL) used to be a second row of the same interval.
        let p = Path::new("round-trip.csv");
        assert_eq!(
            cat.import_exposure_csv(p, out.as_slice()).unwrap(),
            counts(0, 1)
        );
        assert_eq!(cat.exposure(None).unwrap(), before);
    }

    #[test]
    fn export_then_import_elsewhere_keeps_every_field() {
        use crate::catalogue::synthetic::{fluence_completeness, observation, run};
        let dir = tempfile::tempdir().unwrap();
        let mut here = Catalogue::open(&dir.path().join("here.sqlite")).unwrap();
        let obs = observation("FIELD-7", 3);
        let searched = run(7.0);
        here.record_search(&obs, &searched, &[]).unwrap();
        let completeness = fluence_completeness(&searched);
        here.record_completeness(&obs, &completeness).unwrap();
        let csv = "FIELD-7,60010.5,60010.75,8,2.5\nFIELD-7,60011,60011.125\n";
        let p = Path::new("in.csv");
        assert_eq!(
            here.import_exposure_csv(p, csv.as_bytes()).unwrap(),
            counts(2, 0)
        );
        let held = here.exposure(None).unwrap();
        assert_eq!(held.len(), 3);
        assert_eq!(held[0].fluence_limit_jy_ms, Some(0.9), "{held:?}");
        let mut exported = Vec::new();
        here.export_exposure_csv(None, &mut exported).unwrap();

        let mut there = Catalogue::open(&dir.path().join("there.sqlite")).unwrap();
        add_source(&mut there, "FIELD-7");
        let p = Path::new("exported.csv");
        assert_eq!(
            there.import_exposure_csv(p, exported.as_slice()).unwrap(),
            counts(3, 0)
        );
        // Everything but the run, which belongs to the other catalogue.
        let expected: Vec<ExposureInterval> = held
            .into_iter()
            .map(|e| ExposureInterval { run_id: None, ..e })
            .collect();
        assert_eq!(there.exposure(None).unwrap(), expected);

        // A file exported before the fluence limit was (four columns) still imports,
        // and its rows are the intervals already held, limits kept.
        let older: String = String::from_utf8(exported)
            .unwrap()
            .lines()
            .map(|l| format!("{}\n", &l[..l.rfind(',').unwrap()]))
            .collect();
        assert!(older.starts_with("source,start_mjd,end_mjd,snr_threshold\n"));
        assert_eq!(
            there.import_exposure_csv(p, older.as_bytes()).unwrap(),
            counts(0, 3)
        );
        assert_eq!(there.exposure(None).unwrap(), expected);

        // A held interval without a limit takes the file's; a held limit the file
        // gives differently is kept, and both are counted.
        let again = "FIELD-7,60011,60011.125,,1.5\nFIELD-7,60010.5,60010.75,8,9.9\n";
        let done = there.import_exposure_csv(p, again.as_bytes()).unwrap();
        let want = ExposureImport {
            limits_filled: 1,
            limits_kept: 1,
            ..counts(0, 2)
        };
        assert_eq!(done, want);
        let limits: Vec<Option<f64>> = there
            .exposure(None)
            .unwrap()
            .iter()
            .map(|e| e.fluence_limit_jy_ms)
            .collect();
        assert!(
            limits.contains(&Some(1.5)) && limits.contains(&Some(2.5)),
            "{limits:?}"
        );
        assert!(!limits.contains(&Some(9.9)), "{limits:?}");
    }

    #[test]
    fn a_bad_row_imports_nothing_and_names_its_line() {
        let (_d, mut cat) = cat_with_source();
        let p = Path::new("bad.csv");
        for (csv, needle) in [
            ("SRC-A,60000,60001\nSRC-A,60002,60001\n", "line 2: end_mjd"),
            (
                "SRC-A,60000,60001\nSRC-B,60002,60003\n",
                "line 2: unknown source",
            ),
            ("SRC-A,600x0,60001\n", "line 1: start_mjd"),
            ("SRC-A,60000\n", "line 1: expected"),
            ("SRC-A,60000,60001,7,1,2\n", "line 1: expected"),
            (
                "SRC-A,60000,60001,,0.5x\n",
                "line 1: fluence_limit_jy_ms \"0.5x\"",
            ),
            (
                "SRC-A,60000,60001\nSRC-A,61000,61000.1,-3\n",
                "line 2: snr_threshold -3 must be above 0",
            ),
            (
                "SRC-A,60000,60001,0\n",
                "line 1: snr_threshold 0 must be above 0",
            ),
            (
                "SRC-A,61000,61000.1,7,-1\n",
                "line 1: fluence_limit_jy_ms -1 must be above 0",
            ),
            (
                "SRC-A,61000,99999999\n",
                "line 1: end_mjd 99999999 is outside the plausible MJD range",
            ),
            (
                "SRC-A,2451545,2451546\n",
                "line 1: start_mjd 2451545 is outside",
            ),
            ("SRC-A,-5,1\n", "line 1: start_mjd -5 is outside"),
        ] {
            let err = cat
                .import_exposure_csv(p, csv.as_bytes())
                .unwrap_err()
                .to_string();
            assert!(err.contains(needle), "{err}");
            assert!(err.starts_with("bad.csv: "), "{err}");
        }
        assert!(cat.exposure(None).unwrap().is_empty());
    }
}
