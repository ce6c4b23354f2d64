//! `book candidates` and `book bursts`.

use std::path::PathBuf;

use burstbook::Verdict;
use burstbook::catalogue::{Bounds, BurstFilter, CandidateFilter, Catalogue};
use burstbook::search::output::{CSV_COLUMNS, csv_cells};

use super::flags;
use super::output::{Format, opt, write_out, write_rows};

/// DM, S/N and time ranges shared by the candidate and burst listings.
#[derive(clap::Args, Debug, Clone, Default)]
pub struct BoundsArgs {
    /// Lowest DM in pc cm^-3.
    #[arg(long)]
    pub dm_min: Option<f64>,
    /// Highest DM in pc cm^-3.
    #[arg(long)]
    pub dm_max: Option<f64>,
    /// Lowest S/N.
    #[arg(long)]
    pub snr_min: Option<f64>,
    /// Earliest arrival, UTC MJD.
    #[arg(long)]
    pub mjd_min: Option<f64>,
    /// Latest arrival, UTC MJD.
    #[arg(long)]
    pub mjd_max: Option<f64>,
}

impl BoundsArgs {
    /// The library bounds, refusing a NaN or infinite value and a minimum above
    /// its maximum.
    fn to_bounds(&self) -> anyhow::Result<Bounds> {
        flags::range(("--dm-min", self.dm_min), ("--dm-max", self.dm_max))?;
        flags::finite_if_given("--snr-min", self.snr_min)?;
        flags::range(("--mjd-min", self.mjd_min), ("--mjd-max", self.mjd_max))?;
        Ok(Bounds {
            dm_min: self.dm_min,
            dm_max: self.dm_max,
            snr_min: self.snr_min,
            mjd_min: self.mjd_min,
            mjd_max: self.mjd_max,
        })
    }
}

/// Candidate filters shared by `candidates`, `label` and `promote`.
#[derive(clap::Args, Debug, Clone, Default)]
pub struct FilterArgs {
    /// Source name from the observation header.
    #[arg(long)]
    pub source: Option<String>,
    #[command(flatten)]
    pub bounds: BoundsArgs,
    /// Triage verdict: astrophysical, rfi or unsure.
    #[arg(long, value_parser = parse_verdict)]
    pub verdict: Option<Verdict>,
    /// Newest review label ("none" for unlabelled candidates).
    #[arg(long, value_name = "LABEL")]
    pub label_is: Option<String>,
}

fn parse_verdict(s: &str) -> Result<Verdict, String> {
    Verdict::parse(s).ok_or_else(|| format!("{s:?} is not one of astrophysical, rfi, unsure"))
}

impl FilterArgs {
    /// The library filter for these flags plus explicit ids.
    ///
    /// # Errors
    /// A bound refused by [`BoundsArgs::to_bounds`].
    pub fn to_filter(&self, ids: &[i64]) -> anyhow::Result<CandidateFilter> {
        Ok(CandidateFilter {
            source: self.source.clone(),
            bounds: self.bounds.to_bounds()?,
            verdict: self.verdict,
            label: self.label_is.clone(),
            ids: ids.to_vec(),
            limit: None,
        })
    }

    /// Whether no flag narrows the selection (a refused bound does narrow it).
    pub fn is_empty(&self) -> bool {
        self.to_filter(&[])
            .is_ok_and(|f| f == CandidateFilter::default())
    }
}

/// Arguments of `book candidates`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Examples:
  burstbook book candidates --source FIELD-7 --dm-min 300 --dm-max 400 --snr-min 8
  burstbook book candidates --verdict astrophysical --label-is none --format csv --out todo.csv")]
pub struct CandidatesArgs {
    #[command(flatten)]
    filter: FilterArgs,
    /// At most this many rows (earliest first).
    #[arg(long)]
    limit: Option<usize>,
    /// Output format (CSV and JSON carry every column).
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
    /// Write to this file instead of standard output.
    #[arg(long)]
    out: Option<PathBuf>,
}

const CANDIDATE_TABLE: &[&str] = &[
    "id", "obs", "source", "mjd_inf", "dm", "snr", "width_ms", "verdict", "label", "burst",
];
/// Catalogue columns in front of the search's own `candidates.csv` columns.
const CANDIDATE_KEYS: [&str; 6] = [
    "id",
    "run_id",
    "observation_id",
    "source",
    "label",
    "burst_id",
];

pub fn candidates(cat: &Catalogue, a: CandidatesArgs) -> anyhow::Result<()> {
    let mut filter = a.filter.to_filter(&[])?;
    filter.limit = a.limit;
    let rows = cat.candidates(&filter)?;
    write_out(&a.out, |out| {
        if a.format == Format::Table {
            return write_rows(out, a.format, CANDIDATE_TABLE, &rows, |r| {
                vec![
                    r.id.to_string(),
                    r.observation_id.to_string(),
                    r.source.clone(),
                    format!("{:.8}", r.candidate.mjd_inf),
                    format!("{:.2}", r.candidate.dm),
                    format!("{:.1}", r.candidate.snr),
                    format!("{:.2}", r.candidate.width_ms),
                    r.candidate.verdict.to_string(),
                    r.label.clone().unwrap_or_default(),
                    r.burst_id.map(|b| b.to_string()).unwrap_or_default(),
                ]
            });
        }
        let headers: Vec<&str> = CANDIDATE_KEYS.into_iter().chain(CSV_COLUMNS).collect();
        write_rows(out, a.format, &headers, &rows, |r| {
            let mut cells = vec![
                r.id.to_string(),
                r.run_id.to_string(),
                r.observation_id.to_string(),
                r.source.clone(),
                r.label.clone().unwrap_or_default(),
                r.burst_id.map(|b| b.to_string()).unwrap_or_default(),
            ];
            cells.extend(csv_cells(&r.candidate));
            cells
        })
    })
}

/// Arguments of `book bursts`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Examples:
  burstbook book bursts --source FIELD-7
  burstbook book bursts --format csv --out bursts.csv
  burstbook book bursts --source FIELD-7 --snr-min 10 --format json --out bursts.json")]
pub struct BurstsArgs {
    /// Assigned source.
    #[arg(long)]
    source: Option<String>,
    #[command(flatten)]
    bounds: BoundsArgs,
    /// Output format.
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
    /// Write to this file instead of standard output.
    #[arg(long)]
    out: Option<PathBuf>,
}

const BURST_COLUMNS: &[&str] = &[
    "id",
    "candidate_id",
    "source",
    "mjd_utc",
    "toa_tdb_mjd",
    "dm",
    "snr",
    "width_ms",
    "fluence_jy_ms",
    "site",
    "file",
];

pub fn bursts(cat: &Catalogue, a: BurstsArgs) -> anyhow::Result<()> {
    let rows = cat.bursts(&BurstFilter {
        source: a.source,
        bounds: a.bounds.to_bounds()?,
    })?;
    let table = a.format == Format::Table;
    let num = |v: f64, digits: usize| {
        if table {
            format!("{v:.digits$}")
        } else {
            v.to_string()
        }
    };
    let onum = |v: Option<f64>, digits: usize| {
        if table {
            opt(v, digits)
        } else {
            v.map(|x| x.to_string()).unwrap_or_default()
        }
    };
    write_out(&a.out, |out| {
        write_rows(out, a.format, BURST_COLUMNS, &rows, |b| {
            vec![
                b.id.to_string(),
                b.candidate_id.to_string(),
                b.source.clone(),
                num(b.mjd_utc, 8),
                onum(b.toa_tdb_mjd, 10),
                num(b.dm, 2),
                num(b.snr, 1),
                num(b.width_ms, 2),
                onum(b.fluence_jy_ms, 3),
                b.site.clone(),
                b.file.clone(),
            ]
        })
    })
}
