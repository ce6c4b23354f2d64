//! `burstbook report`: a self-contained HTML report (index.html + PNGs).

use std::path::PathBuf;

use anyhow::Context;
use burstbook::report::html::{ObsSection, ReportOptions, write_report};
use burstbook::report::load::{group_by_observation, load_candidates};

/// Arguments of `report`.
#[derive(clap::Args, Debug)]
#[command(after_help = "Examples:
  burstbook report out/search --out out/report
  burstbook report out/search/candidates.csv --obs demo-data/session1.json --out out/report
  burstbook report out/search --max-plots 10 --title \"Night 3\" --out out/night3

The folder written holds index.html and its PNGs only (no scripts, nothing fetched),
so it can be copied anywhere and opened offline.")]
pub struct Args {
    /// Search output folder (with candidates.json or candidates.csv) or one of those files.
    pub candidates: PathBuf,
    /// Observation files, when the paths recorded in the candidates do not resolve
    /// (matched by file name; a single file is used for all candidates).
    #[arg(long = "obs", num_args = 1..)]
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
    let cands = load_candidates(&args.candidates)
        .with_context(|| format!("reading candidates from {}", args.candidates.display()))?;
    let search_dir = if args.candidates.is_dir() {
        Some(args.candidates.as_path())
    } else {
        args.candidates.parent()
    };
    let mut groups = group_by_observation(cands, search_dir, &args.obs)?;
    // Observations given but without candidates still get an overview.
    for p in &args.obs {
        if !groups.iter().any(|(g, _)| g == p) {
            groups.push((p.clone(), Vec::new()));
        }
    }
    let sections = groups
        .into_iter()
        .map(|(path, cs)| {
            ObsSection::new(&path, cs).with_context(|| format!("opening {}", path.display()))
        })
        .collect::<anyhow::Result<Vec<_>>>()?;
    let opts = ReportOptions {
        title: args.title,
        max_plots: args.max_plots,
        neighbourhood_s: args.neighbourhood_s,
    };
    let index = write_report(&args.out, &sections, &opts).context("writing the report")?;
    println!("{}", index.display());
    Ok(())
}
