//! Arrival times and observing sessions, kept as seconds after an integer reference MJD.
//!
//! An f64 MJD near 6×10⁴ resolves only ~0.6 µs, and phases over days of ms periods
//! need better, so times are held as (integer reference day, f64 seconds after it)
//! and CSV columns are parsed as text, splitting the integer day from the fraction.

use std::path::Path;

use crate::error::{Error, Result};

/// Seconds in one day of the time scale the MJDs are on, here TDB (no leap seconds).
pub use crate::units::SECONDS_PER_DAY;

/// Sorted barycentric (TDB) arrival times: seconds after midnight of `ref_mjd`.
#[derive(Clone, Debug, PartialEq)]
pub struct ArrivalTimes {
    /// Integer MJD the offsets are counted from.
    pub ref_mjd: i64,
    /// Seconds after `ref_mjd`, ascending.
    pub t_s: Vec<f64>,
}

impl ArrivalTimes {
    /// Builds from offsets in seconds after `ref_mjd`; sorts them.
    ///
    /// # Errors
    /// [`Error::Config`] if a time is not finite.
    pub fn from_seconds(ref_mjd: i64, mut t_s: Vec<f64>) -> Result<Self> {
        if let Some(bad) = t_s.iter().find(|t| !t.is_finite()) {
            return Err(Error::Config(format!("arrival time {bad} is not finite")));
        }
        t_s.sort_by(f64::total_cmp);
        Ok(ArrivalTimes { ref_mjd, t_s })
    }

    /// Builds from (integer MJD, fraction of day) pairs without losing precision.
    ///
    /// # Errors
    /// [`Error::Config`] if the list is empty or a fraction is not finite.
    pub fn from_day_fraction(parts: &[(i64, f64)]) -> Result<Self> {
        let ref_mjd = parts
            .iter()
            .map(|p| p.0)
            .min()
            .ok_or_else(|| Error::Config("no arrival times".into()))?;
        let t_s = parts
            .iter()
            .map(|&(day, frac)| day_fraction_to_seconds(ref_mjd, day, frac))
            .collect();
        Self::from_seconds(ref_mjd, t_s)
    }

    /// Builds from plain f64 MJDs (what a catalogue column holds; ~0.6 µs resolution).
    ///
    /// # Errors
    /// [`Error::Config`] if the list is empty or holds a non-finite value.
    pub fn from_mjd(mjd: &[f64]) -> Result<Self> {
        let parts: Vec<(i64, f64)> = mjd
            .iter()
            .map(|&m| (m.floor() as i64, m - m.floor()))
            .collect();
        Self::from_day_fraction(&parts)
    }

    /// Number of arrival times.
    pub fn len(&self) -> usize {
        self.t_s.len()
    }

    /// True when there are no arrival times.
    pub fn is_empty(&self) -> bool {
        self.t_s.is_empty()
    }

    /// Time from first to last arrival, s.
    pub fn span_s(&self) -> f64 {
        match (self.t_s.first(), self.t_s.last()) {
            (Some(a), Some(b)) => b - a,
            _ => 0.0,
        }
    }

    /// MJD of an offset `t_s` (f64; for display only).
    pub fn mjd_of(&self, t_s: f64) -> f64 {
        self.ref_mjd as f64 + t_s / SECONDS_PER_DAY
    }

    /// Arrival times in days after `ref_mjd`.
    pub fn days(&self) -> Vec<f64> {
        self.t_s.iter().map(|t| t / SECONDS_PER_DAY).collect()
    }

    /// Merges arrivals closer than `gap_s` to their predecessor into one (their mean):
    /// components of one burst must count once in a periodicity test.
    pub fn merge_closer_than(&self, gap_s: f64) -> ArrivalTimes {
        let mut groups: Vec<Vec<f64>> = Vec::new();
        for &t in &self.t_s {
            match groups.last_mut() {
                Some(g) if t - g[g.len() - 1] < gap_s => g.push(t),
                _ => groups.push(vec![t]),
            }
        }
        let t_s = groups
            .iter()
            .map(|g| g.iter().sum::<f64>() / g.len() as f64)
            .collect();
        ArrivalTimes {
            ref_mjd: self.ref_mjd,
            t_s,
        }
    }
}

/// Seconds after `ref_mjd` of the instant (`day` + `frac` days).
pub fn day_fraction_to_seconds(ref_mjd: i64, day: i64, frac: f64) -> f64 {
    (day - ref_mjd) as f64 * SECONDS_PER_DAY + frac * SECONDS_PER_DAY
}

/// Observing sessions (on-source intervals), days after `ref_mjd`, sorted and disjoint.
#[derive(Clone, Debug, PartialEq)]
pub struct Exposure {
    /// Integer MJD the offsets are counted from.
    pub ref_mjd: i64,
    /// (start, end) in days after `ref_mjd`; start < end, ascending, not overlapping.
    pub sessions_days: Vec<(f64, f64)>,
}

impl Exposure {
    /// Builds from (start, end) offsets in days after `ref_mjd`; sorts and merges overlaps.
    ///
    /// # Errors
    /// [`Error::Config`] if a session is empty, reversed or not finite, or none is given.
    pub fn new(ref_mjd: i64, mut sessions_days: Vec<(f64, f64)>) -> Result<Self> {
        if sessions_days.is_empty() {
            return Err(Error::Config("no observing sessions".into()));
        }
        if let Some((a, b)) = sessions_days
            .iter()
            .find(|(a, b)| !(a.is_finite() && b.is_finite() && b > a))
        {
            let mjd = |d: f64| ref_mjd as f64 + d;
            return Err(Error::Config(format!(
                "observing session from MJD {} to MJD {} must have finite start < end",
                mjd(*a),
                mjd(*b)
            )));
        }
        sessions_days.sort_by(|x, y| x.0.total_cmp(&y.0));
        let mut merged: Vec<(f64, f64)> = Vec::with_capacity(sessions_days.len());
        for (a, b) in sessions_days {
            match merged.last_mut() {
                Some(last) if a <= last.1 => last.1 = last.1.max(b),
                _ => merged.push((a, b)),
            }
        }
        Ok(Exposure {
            ref_mjd,
            sessions_days: merged,
        })
    }

    /// The same sessions counted from another reference day.
    pub fn rebased(&self, ref_mjd: i64) -> Exposure {
        let shift = (self.ref_mjd - ref_mjd) as f64;
        Exposure {
            ref_mjd,
            sessions_days: self
                .sessions_days
                .iter()
                .map(|(a, b)| (a + shift, b + shift))
                .collect(),
        }
    }

    /// Total on-source time, days.
    pub fn total_days(&self) -> f64 {
        self.sessions_days.iter().map(|(a, b)| b - a).sum()
    }

    /// Index of the session holding `t_days`, if any.
    pub fn session_of(&self, t_days: f64) -> Option<usize> {
        let i = self.sessions_days.partition_point(|s| s.1 < t_days);
        (i < self.sessions_days.len() && self.sessions_days[i].0 <= t_days).then_some(i)
    }
}

/// MJDs at or beyond this day (the year 4596) are taken for a wrong unit or a typo.
pub const MAX_MJD: i64 = 1_000_000;

/// Parses an MJD written in decimal into (integer day, fraction) without rounding the
/// fraction through a large f64.
///
/// # Errors
/// A message if the text is not a number in [0, [`MAX_MJD`]).
pub fn parse_mjd_text(text: &str) -> std::result::Result<(i64, f64), String> {
    let s = text.trim();
    let bad = || format!("'{s}' is not an MJD (expected 0 ≤ MJD < {MAX_MJD})");
    let (day, frac) = parse_non_negative_mjd(s).ok_or_else(bad)?;
    if day >= MAX_MJD {
        return Err(bad());
    }
    Ok((day, frac))
}

/// `s` as (integer day, fraction), if it is a finite number ≥ 0.
fn parse_non_negative_mjd(s: &str) -> Option<(i64, f64)> {
    let plain = !s.is_empty() && s.chars().all(|c| c.is_ascii_digit() || c == '.');
    if plain {
        let (int, frac) = s.split_once('.').unwrap_or((s, ""));
        let day: i64 = if int.is_empty() { 0 } else { int.parse().ok()? };
        let frac: f64 = if frac.is_empty() {
            0.0
        } else {
            format!("0.{frac}").parse().ok()?
        };
        return Some((day, frac));
    }
    let value: f64 = s.parse().ok()?;
    if !value.is_finite() || value < 0.0 {
        return None;
    }
    Some((value.floor() as i64, value - value.floor()))
}

/// One data row of a CSV file: its line in the file and the requested cells as text.
struct Row {
    line: u64,
    cells: Vec<String>,
}

/// Reads the named columns of a CSV file with a header row as text.
fn read_columns(path: &Path, names: &[&str]) -> Result<Vec<Row>> {
    let mut reader = csv::ReaderBuilder::new()
        .trim(csv::Trim::All)
        .comment(Some(b'#'))
        .from_path(path)
        .map_err(|e| csv_error(path, e))?;
    let headers = reader.headers().map_err(|e| csv_error(path, e))?.clone();
    let idx: Vec<usize> = names
        .iter()
        .map(|n| {
            headers.iter().position(|h| h == *n).ok_or_else(|| {
                let have: Vec<&str> = headers.iter().collect();
                Error::bad_input(
                    path,
                    format!("no column '{n}' (columns: {})", have.join(",")),
                )
            })
        })
        .collect::<Result<_>>()?;
    let mut rows = Vec::new();
    for record in reader.records() {
        let record = record.map_err(|e| csv_error(path, e))?;
        rows.push(Row {
            line: record.position().map_or(0, |p| p.line()),
            cells: idx
                .iter()
                .map(|&i| record.get(i).unwrap_or("").to_string())
                .collect(),
        });
    }
    if rows.is_empty() {
        return Err(Error::bad_input(path, "no data rows"));
    }
    Ok(rows)
}

fn csv_error(path: &Path, e: csv::Error) -> Error {
    let msg = e.to_string();
    match e.into_kind() {
        csv::ErrorKind::Io(io) => Error::io(path, io),
        csv::ErrorKind::Utf8 { pos, .. } => Error::bad_input(
            path,
            format!(
                "line {}: not text (invalid UTF-8); expected a CSV table",
                pos.map_or(1, |p| p.line())
            ),
        ),
        _ => Error::bad_input(path, msg),
    }
}

fn parse_mjd_cell(path: &Path, row: &Row, column: usize) -> Result<(i64, f64)> {
    parse_mjd_text(&row.cells[column])
        .map_err(|m| Error::bad_input(path, format!("line {}: {m}", row.line)))
}

/// Reads arrival times from the MJD column `column` of a CSV file (barycentric TDB).
///
/// # Errors
/// [`Error::Io`] / [`Error::BadInput`] naming the file: missing file or column, bad value.
pub fn read_arrival_csv(path: &Path, column: &str) -> Result<ArrivalTimes> {
    let rows = read_columns(path, &[column])?;
    let parts = rows
        .iter()
        .map(|r| parse_mjd_cell(path, r, 0))
        .collect::<Result<Vec<_>>>()?;
    ArrivalTimes::from_day_fraction(&parts).map_err(|e| Error::bad_input(path, e.to_string()))
}

/// Reads observing sessions from columns `start_mjd,end_mjd` of a CSV file, counted
/// from `ref_mjd`.
///
/// # Errors
/// [`Error::Io`] / [`Error::BadInput`] naming the file and line: a bad MJD, or a
/// session that does not end after it starts.
pub fn read_exposure_csv(path: &Path, ref_mjd: i64) -> Result<Exposure> {
    let rows = read_columns(path, &["start_mjd", "end_mjd"])?;
    let mut sessions = Vec::with_capacity(rows.len());
    for r in &rows {
        let (d0, f0) = parse_mjd_cell(path, r, 0)?;
        let (d1, f1) = parse_mjd_cell(path, r, 1)?;
        if (d1, f1) <= (d0, f0) {
            return Err(Error::bad_input(
                path,
                format!(
                    "line {}: end_mjd {} is not after start_mjd {}",
                    r.line, r.cells[1], r.cells[0]
                ),
            ));
        }
        sessions.push(((d0 - ref_mjd) as f64 + f0, (d1 - ref_mjd) as f64 + f1));
    }
    Exposure::new(ref_mjd, sessions).map_err(|e| Error::bad_input(path, e.to_string()))
}

/// Reads a column of finite numbers > 0 (fluences, energies) from a CSV file.
///
/// # Errors
/// [`Error::Io`] / [`Error::BadInput`] naming the file, and the line of a value that
/// is not a number > 0 (a power law has no zero or negative values; none is dropped).
pub fn read_positive_csv(path: &Path, column: &str) -> Result<Vec<f64>> {
    let rows = read_columns(path, &[column])?;
    rows.iter()
        .map(|r| {
            let text = &r.cells[0];
            match text.parse::<f64>() {
                Ok(v) if v.is_finite() && v > 0.0 => Ok(v),
                Ok(v) if v.is_finite() => Err(Error::bad_input(
                    path,
                    format!("line {}: {column} {text} must be > 0", r.line),
                )),
                _ => Err(Error::bad_input(
                    path,
                    format!("line {}: '{text}' is not a number", r.line),
                )),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mjd_text_keeps_sub_microsecond_fraction() {
        let (day, frac) = parse_mjd_text("60123.123456789012345").unwrap();
        assert_eq!(day, 60123);
        // 1e-15 d = 86 ps: the split keeps digits an f64 MJD would lose (~0.6 µs).
        assert!((frac - 0.123456789012345).abs() < 1e-16);
        assert_eq!(parse_mjd_text("6.01e4").unwrap(), (60100, 0.0));
        assert!(parse_mjd_text("abc").is_err());
        assert!(parse_mjd_text("-5").is_err());
    }

    #[test]
    fn exposure_merges_overlaps_and_finds_sessions() {
        let e = Exposure::new(0, vec![(2.0, 3.0), (0.0, 1.0), (0.5, 1.5)]).unwrap();
        assert_eq!(e.sessions_days, vec![(0.0, 1.5), (2.0, 3.0)]);
        assert_eq!(e.session_of(2.5), Some(1));
        assert_eq!(e.session_of(1.7), None);
        assert!((e.total_days() - 2.5).abs() < 1e-12);
        assert!(Exposure::new(0, vec![(1.0, 1.0)]).is_err());
    }

    #[test]
    fn merging_joins_close_components() {
        let a = ArrivalTimes::from_seconds(0, vec![10.0, 0.0, 10.002, 20.0]).unwrap();
        let m = a.merge_closer_than(0.01);
        assert_eq!(m.len(), 3);
        assert!((m.t_s[1] - 10.001).abs() < 1e-12);
    }
}
