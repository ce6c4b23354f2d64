//! Table, CSV and JSON output shared by the listing commands.

use std::io::Write;
use std::path::PathBuf;

use burstbook::atomic_file::AtomicFile;
use serde::Serialize;

/// How listings are written.
#[derive(clap::ValueEnum, Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    /// Aligned columns for reading.
    Table,
    /// Comma-separated values with a header row.
    Csv,
    /// A JSON array of objects.
    Json,
}

/// Runs `write` on where listings go: `--out FILE` (which appears only if `write`
/// succeeds) or standard output.
pub fn write_out(
    out: &Option<PathBuf>,
    write: impl FnOnce(&mut dyn Write) -> anyhow::Result<()>,
) -> anyhow::Result<()> {
    match out {
        Some(path) => {
            let mut file = AtomicFile::create(path)?;
            write(&mut file)?;
            file.commit()?;
        }
        None => {
            let mut stdout = std::io::stdout().lock();
            write(&mut stdout)?;
            stdout.flush()?;
        }
    }
    Ok(())
}

/// Writes `rows` in `format`: `cells` gives the table/CSV cells, serde the JSON.
pub fn write_rows<T: Serialize>(
    out: &mut dyn Write,
    format: Format,
    headers: &[&str],
    rows: &[T],
    cells: impl Fn(&T) -> Vec<String>,
) -> anyhow::Result<()> {
    match format {
        Format::Json => {
            serde_json::to_writer_pretty(&mut *out, rows)?;
            writeln!(out)?;
        }
        Format::Csv => {
            let mut w = csv::Writer::from_writer(&mut *out);
            w.write_record(headers)?;
            for r in rows {
                w.write_record(cells(r))?;
            }
            w.flush()?;
        }
        Format::Table => {
            let body: Vec<Vec<String>> = rows.iter().map(&cells).collect();
            let mut widths: Vec<usize> = headers.iter().map(|h| h.len()).collect();
            for row in &body {
                for (w, c) in widths.iter_mut().zip(row) {
                    *w = (*w).max(c.chars().count());
                }
            }
            let line = |cells: Vec<&str>| {
                let padded: Vec<String> = cells
                    .iter()
                    .zip(&widths)
                    .map(|(c, w)| format!("{c:>w$}"))
                    .collect();
                padded.join("  ")
            };
            writeln!(out, "{}", line(headers.to_vec()))?;
            for row in &body {
                writeln!(out, "{}", line(row.iter().map(String::as_str).collect()))?;
            }
        }
    }
    out.flush()?;
    Ok(())
}

/// Text for an optional number (empty when absent).
pub fn opt(v: Option<f64>, digits: usize) -> String {
    v.map(|x| format!("{x:.digits$}")).unwrap_or_default()
}
