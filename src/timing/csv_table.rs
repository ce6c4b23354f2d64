//! Barycentring a CSV table of UTC MJDs: the library side of `burstbook barycentre`.

use std::path::Path;

use super::leap::utc_day_length_s;
use super::{Barycentrer, TdbEpoch, WarningTally};
use crate::atomic_file::{self, AtomicFile};
use crate::error::{Error, Result};
use crate::obs::UtcEpoch;
use crate::units::SECONDS_PER_DAY;

/// Name of the input column holding topocentric UTC MJDs.
pub const MJD_UTC_COLUMN: &str = "mjd_utc";

/// What [`barycentre_csv`] did.
#[derive(Debug, Clone)]
pub struct CsvSummary {
    /// Data rows converted.
    pub rows: usize,
    /// Warnings met, by kind, with the rows (file line numbers) that raised them.
    pub warnings: WarningTally,
}

/// Reads `input` (CSV with a header and a column `mjd_utc`), converts every row and
/// writes all input columns plus `mjd_tdb` (15 decimals, ~1 ns) and `correction_s` to
/// `output`. The MJD is parsed exactly as integer day + decimal fraction.
///
/// # Errors
/// [`Error::Io`] when a file cannot be read or written; [`Error::BadInput`] naming
/// `input` for a missing column, an unparsable or unsupported time, or ragged rows.
pub fn barycentre_csv(bary: &Barycentrer, input: &Path, output: &Path) -> Result<CsvSummary> {
    let bad = |msg: String| Error::bad_input(input, msg);
    let file = std::fs::File::open(input).map_err(|e| Error::io(input, e))?;
    let mut reader = csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_reader(file);
    let headers = reader
        .headers()
        .map_err(|e| bad(format!("cannot read the CSV header: {e}")))?
        .clone();
    let columns: Vec<usize> = (0..headers.len())
        .filter(|&i| headers[i].trim() == MJD_UTC_COLUMN)
        .collect();
    let column = match columns[..] {
        [only] => only,
        [] => {
            return Err(bad(format!(
                "no column named `{MJD_UTC_COLUMN}` in the header"
            )));
        }
        [..] => {
            // Which one holds the times is anyone's guess.
            let numbers: Vec<String> = columns.iter().map(|i| (i + 1).to_string()).collect();
            return Err(bad(format!(
                "{} columns are named `{MJD_UTC_COLUMN}` (columns {}); keep one",
                columns.len(),
                numbers.join(" and ")
            )));
        }
    };
    if let Some(clash) = headers
        .iter()
        .find(|h| matches!(h.trim(), "mjd_tdb" | "correction_s"))
    {
        return Err(bad(format!("already has a column `{clash}`")));
    }
    if same_file(input, output) {
        // The output would replace the input table, losing the user's original.
        return Err(bad(format!(
            "is also the output {}; write the output to another file",
            output.display()
        )));
    }
    let mut writer = csv::Writer::from_writer(AtomicFile::create(output)?);
    // Keep the I/O kind (a closed pipe must stay recognisable as one).
    let write_err = |e: csv::Error| {
        let io = match e.into_kind() {
            csv::ErrorKind::Io(io) => io,
            other => std::io::Error::other(format!("{other:?}")),
        };
        Error::io(output, io)
    };
    let mut out_headers = headers.clone();
    out_headers.push_field("mjd_tdb");
    out_headers.push_field("correction_s");
    writer.write_record(&out_headers).map_err(write_err)?;

    let mut summary = CsvSummary {
        rows: 0,
        warnings: WarningTally::new("row", "line"),
    };
    for record in reader.records() {
        let mut record = record.map_err(|e| bad(e.to_string()))?;
        let line = record.position().map_or(0, |p| p.line());
        let text = record.get(column).unwrap_or("").trim();
        let utc =
            parse_mjd(text).ok_or_else(|| bad(format!("line {line}: `{text}` is not an MJD")))?;
        let result = bary
            .convert(utc)
            .map_err(|e| bad(format!("line {line}: {e}")))?;
        summary.warnings.add(line as i64, &result.warnings);
        record.push_field(&format_mjd(result.tdb, 15));
        record.push_field(&format!("{:.9}", result.correction_s));
        writer.write_record(&record).map_err(write_err)?;
        summary.rows += 1;
    }
    atomic_file::commit_csv(writer)?;
    Ok(summary)
}

/// Whether `a` and `b` name one existing file (through links or other spellings).
fn same_file(a: &Path, b: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (std::fs::metadata(a), std::fs::metadata(b)) {
        (Ok(x), Ok(y)) => x.dev() == y.dev() && x.ino() == y.ino(),
        _ => false,
    }
}

/// Parses a decimal MJD such as `60123.456789012345` into day + seconds without
/// going through a single f64 (which would keep only ~1 µs).
pub fn parse_mjd(text: &str) -> Option<UtcEpoch> {
    let (day, frac) = text.split_once('.').unwrap_or((text, ""));
    if day.is_empty() || !day.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    if !frac.bytes().all(|b| b.is_ascii_digit()) {
        return None;
    }
    let day: i64 = day.parse().ok()?;
    let frac: f64 = if frac.is_empty() {
        0.0
    } else {
        format!("0.{frac}").parse().ok()?
    };
    // A quasi-MJD, as [`UtcEpoch::to_mjd_f64`] writes it.
    Some(UtcEpoch {
        mjd: day,
        sec: frac * utc_day_length_s(day),
    })
}

/// Formats a TDB epoch as a decimal MJD with `decimals` digits after the point,
/// carrying into the day when the fraction rounds up to one.
pub fn format_mjd(t: TdbEpoch, decimals: usize) -> String {
    let frac = format!("{:.*}", decimals, t.sec / SECONDS_PER_DAY);
    match frac.strip_prefix("0.") {
        Some(digits) => format!("{}.{digits}", t.mjd),
        None => format!("{}.{}", t.mjd + 1, "0".repeat(decimals)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mjd_text_round_trip() {
        let t = parse_mjd("60123.456789012345").unwrap();
        assert_eq!(t.mjd, 60123);
        assert!((t.sec - 0.456789012345 * 86400.0).abs() < 1e-9);
        assert_eq!(parse_mjd("60000").unwrap().sec, 0.0);
        // A quasi-MJD of a leap-second day: 23:59:60.5 on 2016-12-31 (astropy 8.0.2,
        // tests/fixtures/timing/leap_second_astropy.csv).
        let leap = parse_mjd("57753.999994213030732").unwrap();
        assert_eq!(leap.mjd, 57753);
        assert!((leap.sec - 86_400.5).abs() < 1e-6, "{}", leap.sec);
        for bad in ["", "abc", "60000.1e3", "-5.5", "1.2.3", ".5"] {
            assert!(parse_mjd(bad).is_none(), "{bad}");
        }
        let e = TdbEpoch {
            mjd: 60123,
            sec: 0.456789012345 * 86400.0,
        };
        assert_eq!(format_mjd(e, 12), "60123.456789012345");
        let late = TdbEpoch {
            mjd: 60123,
            sec: 86_399.999_999_999_99,
        };
        assert_eq!(format_mjd(late, 6), "60124.000000");
    }

    fn test_barycentrer() -> Barycentrer {
        let site = crate::obs::Site {
            name: "test".into(),
            lon_deg: 10.0,
            lat_deg: 45.0,
            height_m: 500.0,
        };
        Barycentrer::new(&site, 201.37, -43.02, crate::timing::Ephemeris::Embedded).unwrap()
    }

    #[test]
    fn a_bad_row_late_in_the_table_leaves_the_old_output_whole() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("toas.csv");
        // Far more rows than one write buffer before the bad one, so a file written
        // in place would already hold a partial table.
        let text: String = std::iter::once("mjd_utc\n".to_string())
            .chain((0..5000).map(|i| format!("{}\n", 60000.5 + i as f64 * 1e-3)))
            .chain(std::iter::once("not-an-mjd\n".to_string()))
            .collect();
        std::fs::write(&input, &text).unwrap();
        let output = dir.path().join("out.csv");
        std::fs::write(&output, "previous results\n").unwrap();
        let err = barycentre_csv(&test_barycentrer(), &input, &output).unwrap_err();
        assert!(err.to_string().contains("line 5002"), "{err}");
        assert_eq!(
            std::fs::read_to_string(&output).unwrap(),
            "previous results\n"
        );
        assert_eq!(
            crate::atomic_file::tests::listing(dir.path()),
            ["out.csv", "toas.csv"]
        );
    }

    #[test]
    fn the_input_is_never_its_own_output() {
        // Writing over the input truncated it after the reader's first buffer:
        // a 3000-row file came back with 827 rows and an error.
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("toas.csv");
        let text: String = std::iter::once("mjd_utc\n".to_string())
            .chain((0..3000).map(|i| format!("{}\n", 60000.5 + i as f64 * 1e-3)))
            .collect();
        std::fs::write(&input, &text).unwrap();
        let link = dir.path().join("link.csv");
        std::fs::hard_link(&input, &link).unwrap();
        let bary = test_barycentrer();
        for output in [&input, &link, &dir.path().join(".").join("toas.csv")] {
            let err = barycentre_csv(&bary, &input, output)
                .unwrap_err()
                .to_string();
            assert!(err.contains("toas.csv: is also the output"), "{err}");
        }
        assert_eq!(std::fs::read_to_string(&input).unwrap(), text);
    }
}
