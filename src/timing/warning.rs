//! Warnings of conversions that still succeeded: one conversion's
//! ([`TimingWarning`]), and those of many rows gathered by kind ([`WarningTally`]),
//! so a table of a thousand late arrivals says so once, with how many rows and
//! which, rather than naming only the first.

use std::fmt;

use super::leap;

/// Something the caller should know about a conversion that still succeeded.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum TimingWarning {
    /// The UTC day lies after the leap-second table's validity date.
    LeapTableExpired { mjd_utc: i64 },
    /// The Earth came from the analytic `epv00` model (≤ 45 µs), not the ephemeris.
    EarthOutsideEphemeris { mjd_tdb: f64 },
    /// TDB − TT came from the short series (≤ 15 µs), not the ERFA table.
    TdbOutsideTable { mjd_tdb: f64 },
}

impl TimingWarning {
    /// The MJD concerned (UTC day or TDB), for ordering.
    fn mjd(&self) -> f64 {
        match *self {
            TimingWarning::LeapTableExpired { mjd_utc } => mjd_utc as f64,
            TimingWarning::EarthOutsideEphemeris { mjd_tdb }
            | TimingWarning::TdbOutsideTable { mjd_tdb } => mjd_tdb,
        }
    }

    /// The MJD as the warning prints it: a whole UTC day, or TDB to 0.1 day.
    fn mjd_text(&self) -> String {
        match *self {
            TimingWarning::LeapTableExpired { mjd_utc } => mjd_utc.to_string(),
            _ => format!("{:.1}", self.mjd()),
        }
    }

    /// What is wrong, without the time it concerns.
    fn problem(&self) -> String {
        match self {
            TimingWarning::LeapTableExpired { .. } => format!(
                "after the leap-second table's validity (MJD {}, 2027-06-28): a leap second \
                 announced since then is missing",
                leap::LEAP_TABLE_VALID_UNTIL_MJD
            ),
            TimingWarning::EarthOutsideEphemeris { .. } => {
                "outside the ephemeris; used the analytic epv00 Earth (errors up to ~45 µs)".into()
            }
            TimingWarning::TdbOutsideTable { .. } => {
                "outside the TDB-TT table; used a short series (errors up to ~15 µs)".into()
            }
        }
    }
}

impl fmt::Display for TimingWarning {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "MJD {} is {}", self.mjd_text(), self.problem())
    }
}

/// Rows named in a warning line; more are counted, not listed.
const LISTED_ROWS: usize = 5;

/// One kind of warning over many rows.
#[derive(Debug, Clone)]
struct Kind {
    earliest: TimingWarning,
    latest: TimingWarning,
    rows: usize,
    listed: Vec<i64>,
    last_id: i64,
}

/// The warnings of many conversions, each kind once with the number of rows that
/// raised it, the first five of them and the MJD range they cover.
#[derive(Debug, Clone)]
pub struct WarningTally {
    noun: &'static str,
    label: &'static str,
    kinds: Vec<Kind>,
}

impl WarningTally {
    /// An empty tally whose rows are called `noun` ("row", "burst") and named by
    /// `label` and a number ("line 4", "id 12").
    pub fn new(noun: &'static str, label: &'static str) -> WarningTally {
        WarningTally {
            noun,
            label,
            kinds: Vec::new(),
        }
    }

    /// Counts the `warnings` of row `id`; a row counts once per kind (rows are added
    /// one after another, each once).
    pub fn add(&mut self, id: i64, warnings: &[TimingWarning]) {
        for &w in warnings {
            let same =
                |k: &&mut Kind| std::mem::discriminant(&k.earliest) == std::mem::discriminant(&w);
            match self.kinds.iter_mut().find(same) {
                Some(k) => {
                    if k.last_id != id {
                        k.rows += 1;
                        k.last_id = id;
                        if k.listed.len() < LISTED_ROWS {
                            k.listed.push(id);
                        }
                    }
                    if w.mjd() < k.earliest.mjd() {
                        k.earliest = w;
                    }
                    if w.mjd() > k.latest.mjd() {
                        k.latest = w;
                    }
                }
                None => self.kinds.push(Kind {
                    earliest: w,
                    latest: w,
                    rows: 1,
                    listed: vec![id],
                    last_id: id,
                }),
            }
        }
    }

    /// Whether no row raised a warning.
    pub fn is_empty(&self) -> bool {
        self.kinds.is_empty()
    }

    /// One line per kind, in the order first met, e.g. `3 rows (lines 2, 4, 7; MJD
    /// 62000 to 62010) are after the leap-second table's validity …`.
    pub fn lines(&self) -> Vec<String> {
        self.kinds.iter().map(|k| self.line(k)).collect()
    }

    fn line(&self, k: &Kind) -> String {
        let plural = |n: usize| if n == 1 { "" } else { "s" };
        let mut ids = k
            .listed
            .iter()
            .map(i64::to_string)
            .collect::<Vec<_>>()
            .join(", ");
        if k.rows > k.listed.len() {
            ids += &format!(" and {} more", k.rows - k.listed.len());
        }
        let (from, to) = (k.earliest.mjd_text(), k.latest.mjd_text());
        let mjd = if from == to {
            from
        } else {
            format!("{from} to {to}")
        };
        format!(
            "{} {}{} ({}{} {ids}; MJD {mjd}) {} {}",
            k.rows,
            self.noun,
            plural(k.rows),
            self.label,
            plural(k.rows),
            if k.rows == 1 { "is" } else { "are" },
            k.earliest.problem()
        )
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_warning_names_its_time_and_problem() {
        let w = TimingWarning::LeapTableExpired { mjd_utc: 62000 };
        assert_eq!(
            w.to_string(),
            "MJD 62000 is after the leap-second table's validity (MJD 61584, 2027-06-28): \
             a leap second announced since then is missing"
        );
        let w = TimingWarning::TdbOutsideTable { mjd_tdb: 80000.04 };
        assert!(
            w.to_string()
                .starts_with("MJD 80000.0 is outside the TDB-TT table")
        );
    }

    /// Only the first row of each kind used to be named.
    #[test]
    fn a_tally_counts_and_lists_the_rows_of_each_kind() {
        let mut tally = WarningTally::new("row", "line");
        assert!(tally.is_empty());
        tally.add(2, &[]);
        for (line, day) in [(3, 62003), (4, 62001), (6, 62010)] {
            tally.add(line, &[TimingWarning::LeapTableExpired { mjd_utc: day }]);
        }
        let earth = |mjd_tdb| TimingWarning::EarthOutsideEphemeris { mjd_tdb };
        for line in 7..=14 {
            tally.add(line, &[earth(70000.0 + line as f64)]);
        }
        // Two warnings of one kind for one row count that row once.
        tally.add(15, &[earth(70100.0), earth(70100.5)]);
        let lines = tally.lines();
        assert_eq!(lines.len(), 2, "{lines:?}");
        assert_eq!(
            lines[0],
            "3 rows (lines 3, 4, 6; MJD 62001 to 62010) are after the leap-second \
             table's validity (MJD 61584, 2027-06-28): a leap second announced since \
             then is missing"
        );
        assert_eq!(
            lines[1],
            "9 rows (lines 7, 8, 9, 10, 11 and 4 more; MJD 70007.0 to 70100.5) are \
             outside the ephemeris; used the analytic epv00 Earth (errors up to ~45 µs)"
        );
        let mut one = WarningTally::new("burst", "id");
        one.add(12, &[TimingWarning::TdbOutsideTable { mjd_tdb: 80000.0 }]);
        assert_eq!(
            one.lines(),
            [
                "1 burst (id 12; MJD 80000.0) is outside the TDB-TT table; used a short \
              series (errors up to ~15 µs)"
            ]
        );
    }
}
