//! `burstbook report`: a self-contained HTML report (index.html + PNGs).

use std::path::{Path, PathBuf};

use anyhow::{Context, bail};
use burstbook::catalogue::{Catalogue, DEFAULT_LOCK_WAIT};
use burstbook::report::html::{ObsSection, ReportOptions, write_report};
use burstbook::report::load::{ObsLookup, group_by_observation, load_candidates};
use burstbook::report::source::source_report;

/// Arguments of `report`.
#[derive(clap::Args, Debug)]
#[command(after_help = "Examples:
  burstbook search demo-data/demo.json --out results   # first, the search
  burstbook report results --out results/report
  burstbook report results/candidates.csv --obs demo-data/demo.json --out results/report
  burstbook report results --max-plots 10 --title \"Night 3\" --out out/night3
  burstbook report --source \"Lanternfish Repeater A\" --catalogue burstbook.sqlite --out out/source

The folder written holds index.html and its PNGs only (no scripts, nothing fetched),
so it can be copied anywhere and opened offline.")]
pub struct Args {
    /// Search output folder (with candidates.json or candidates.csv) or one of those files.
    #[arg(required_unless_present = "source", conflicts_with = "source")]
    pub candidates: Option<PathBuf>,
    /// Report on one source from the catalogue instead: all its candidates, by
    /// observation, and a timeline of sessions and confirmed bursts.
    #[arg(long)]
    pub source: Option<String>,
    /// Catalogue file for --source [default: $BURSTBOOK_CATALOGUE, else ./burstbook.sqlite].
    #[arg(long, value_name = "PATH", requires = "source")]
    pub catalogue: Option<PathBuf>,
    /// With --source: folder holding the observation files when the recorded paths
    /// no longer resolve (matched by name).
    #[arg(long, value_name = "DIR", requires = "source")]
    pub obs_dir: Option<PathBuf>,
    /// Observation files, matched to candidates by file name ahead of the recorded
    /// paths; a single file also serves candidates whose recorded path does not resolve.
    /// Not with --source, which takes --obs-dir.
    #[arg(long = "obs", num_args = 1.., conflicts_with = "source")]
    pub obs: Vec<PathBuf>,
    /// Output folder for index.html and the PNGs.
    #[arg(long, default_value = "out/report")]
    pub out: PathBuf,
    /// Draw diagnostic figures for at most this many candidates per observation (highest S/N first).
    #[arg(long, default_value_t = 50)]
    pub max_plots: usize,
    /// Show other detections within this many seconds in each candidate's figure.
    #[arg(long, default_value_t = 5.0)]
    pub neighbourhood_s: f64,
    /// Page title.
    #[arg(long, default_value = "burstbook report")]
    pub title: String,
}

pub fn run(args: Args) -> anyhow::Result<()> {
    // Checked before any observation is read: a bad value is a typing slip.
    if !(args.neighbourhood_s.is_finite() && args.neighbourhood_s >= 0.0) {
        bail!(
            "--neighbourhood-s must be a finite number of seconds >= 0, got {}",
            args.neighbourhood_s
        );
    }
    let (sections, lead) = match (&args.candidates, &args.source) {
        (Some(path), None) => (from_search(path, &args.obs)?, Vec::new()),
        (None, Some(source)) => {
            let path = Catalogue::resolve_path(args.catalogue.as_deref());
            let cat = Catalogue::open_existing(&path, DEFAULT_LOCK_WAIT)?;
            source_report(&cat, source, args.obs_dir.as_deref())?
        }
        _ => bail!("give either a search output or --source"),
    };
    let opts = ReportOptions {
        title: args.title,
        max_plots: args.max_plots,
        neighbourhood_s: args.neighbourhood_s,
    };
    let index = write_report(&args.out, &sections, &opts, &lead).context("writing the report")?;
    say!("{}", index.display())?;
    Ok(())
}

fn from_search(candidates: &Path, obs: &[PathBuf]) -> anyhow::Result<Vec<ObsSection>> {
    let cands = load_candidates(candidates)
        .with_context(|| format!("reading candidates from {}", candidates.display()))?;
    let search_dir = if candidates.is_dir() {
        Some(candidates)
    } else {
        candidates.parent()
    };
    let mut groups = group_by_observation(cands, search_dir, ObsLookup::Files(obs))?;
    // Observations given but without candidates still get an overview.
    for p in obs {
        if !groups.iter().any(|(g, _)| g == p) {
            groups.push((p.clone(), Vec::new()));
        }
    }
    groups
        .into_iter()
        // The library's errors name the file already.
        .map(|(path, cs)| Ok(ObsSection::new(&path, cs)?))
        .collect()
}
