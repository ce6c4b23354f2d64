//! `burstbook review`: label catalogue candidates in a local web page, one key each.

use std::path::PathBuf;
use std::sync::atomic::AtomicBool;

use anyhow::Context;
use burstbook::catalogue::{Bounds, CandidateFilter, Catalogue, DEFAULT_LOCK_WAIT};
use burstbook::report::review::{CatalogueStore, LabelStore, ReviewServer};

use super::book::flags;

/// Arguments of `review`.
#[derive(clap::Args, Debug)]
#[command(after_help = "Examples:
  burstbook review
  burstbook review --source FIELD-7 --snr-min 8 --port 8765
  burstbook review --catalogue night3.sqlite --all --reviewer ana --obs-dir /data/night3

Open the printed URL (served on 127.0.0.1 only). Keys: a astrophysical, r or i
interference, u unsure, s skip, c comment (Enter keeps it for the next label),
j/k or arrows move, n next unlabelled, q finish. Every label is written to the
catalogue's label history at once.")]
pub struct Args {
    /// Catalogue file [default: $BURSTBOOK_CATALOGUE, else ./burstbook.sqlite].
    #[arg(long, value_name = "PATH")]
    pub catalogue: Option<PathBuf>,
    /// Only candidates of this source (name in the observation header).
    #[arg(long)]
    pub source: Option<String>,
    /// Only candidates with at least this S/N.
    #[arg(long)]
    pub snr_min: Option<f64>,
    /// Include candidates that already have a label (default: unlabelled only).
    #[arg(long)]
    pub all: bool,
    /// Port on 127.0.0.1 [default: a free one].
    #[arg(long)]
    pub port: Option<u16>,
    /// Name stored with each label [default: $USER].
    #[arg(long)]
    pub reviewer: Option<String>,
    /// Folder holding the observation files, when the paths recorded at search time
    /// no longer resolve (files are matched by name).
    #[arg(long, value_name = "DIR")]
    pub obs_dir: Option<PathBuf>,
}

pub fn run(args: Args) -> anyhow::Result<()> {
    flags::finite_if_given("--snr-min", args.snr_min)?;
    let path = Catalogue::resolve_path(args.catalogue.as_deref());
    let catalogue = Catalogue::open_existing(&path, DEFAULT_LOCK_WAIT)?;
    let filter = CandidateFilter {
        source: args.source,
        bounds: Bounds {
            snr_min: args.snr_min,
            ..Bounds::default()
        },
        label: (!args.all).then(|| "none".to_string()),
        ..CandidateFilter::default()
    };
    let reviewer = args
        .reviewer
        .or_else(|| std::env::var("USER").ok())
        .unwrap_or_else(|| "reviewer".into());
    let mut store = CatalogueStore {
        catalogue,
        filter,
        reviewer,
        obs_dir: args.obs_dir,
    };
    let n = store.items()?.len();
    // Everything already labelled is a finished review, not an error.
    if n == 0 {
        say!(
            "catalogue {}: nothing to review (0 candidates match{})",
            path.display(),
            if args.all {
                ""
            } else {
                " without a label; --all includes labelled ones"
            }
        )?;
        return Ok(());
    }
    let server = ReviewServer::bind(args.port)?;
    say!(
        "{n} candidates to review from {}\nopen {}  (press q on the page to finish)",
        path.display(),
        server.url()
    )?;
    server
        .run(&mut store, &AtomicBool::new(false))
        .context("review server")?;
    say!("review finished")?;
    Ok(())
}
