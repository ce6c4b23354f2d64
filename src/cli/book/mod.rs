//! `burstbook book ...`: the burst catalogue from the command line.

mod barycentre;
mod demote;
mod exposure;
pub mod flags;
mod forget;
mod output;
mod query;
mod review;
mod sources;
mod summary;
mod synthetic;
mod voevent;

use std::path::PathBuf;

use burstbook::catalogue::Catalogue;
use clap::Subcommand;

/// Arguments of `book`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Examples:
  burstbook book source add FIELD-7 --ra 123.25 --dec -12.5 --dm 351
  burstbook book candidates --source FIELD-7 --dm-min 300 --dm-max 400 --snr-min 8
  burstbook book label 12 15 --label astrophysical --comment 'clear sweep'
  burstbook book promote --label-is astrophysical
  burstbook book demote 4 --comment 'satellite on second look'
  burstbook book summary FIELD-7 --snr-min 8
  burstbook book voevent 3 --out burst-3.xml
  burstbook book forget 3 --dry-run")]
pub struct Args {
    /// Catalogue file [default: $BURSTBOOK_CATALOGUE, else ./burstbook.sqlite].
    #[arg(long, global = true, value_name = "PATH")]
    catalogue: Option<PathBuf>,
    /// Seconds to wait for another process writing the catalogue before giving up.
    #[arg(long, global = true, default_value_t = 10.0, value_name = "SECONDS")]
    lock_wait: f64,
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// List candidates matching filters, as a table, CSV or JSON.
    Candidates(query::CandidatesArgs),
    /// List or export confirmed bursts, as a table, CSV or JSON.
    Bursts(query::BurstsArgs),
    /// Give one or many candidates a review label (kept as history).
    Label(review::LabelArgs),
    /// Show every label a candidate was given.
    History(review::HistoryArgs),
    /// Promote candidates to bursts of a source (by hand or by position and DM).
    Promote(review::PromoteArgs),
    /// Take bursts promoted by mistake back, keeping their candidates and a trace.
    Demote(demote::DemoteArgs),
    /// Add, update or list sources.
    #[command(subcommand)]
    Source(sources::SourceCommand),
    /// Import or export exposure intervals as CSV.
    #[command(subcommand)]
    Exposure(exposure::ExposureCommand),
    /// Store barycentric TDB arrival times of bursts (for period searches).
    Barycentre(barycentre::BarycentreArgs),
    /// Per-source bursts, exposure, burst rate with confidence limits, DM and fluence.
    Summary(summary::SummaryArgs),
    /// Check the file's integrity and that every run holds all its candidates.
    #[command(after_help = "Example:\n  burstbook book check")]
    Check,
    /// Write one burst as a VOEvent 2.0 XML packet.
    Voevent(voevent::VoeventArgs),
    /// Remove an observation recorded under a wrong header, with its runs,
    /// candidates, labels and exposure.
    Forget(forget::ForgetArgs),
    /// Fill the catalogue with invented searches (for crash, concurrency and speed tests).
    #[command(hide = true)]
    FillSynthetic(synthetic::FillArgs),
}

pub fn run(args: Args) -> anyhow::Result<()> {
    let path = Catalogue::resolve_path(args.catalogue.as_deref());
    // The library's errors already name the catalogue file.
    let wait = std::time::Duration::try_from_secs_f64(args.lock_wait)
        .map_err(|_| anyhow::anyhow!("--lock-wait must be a non-negative number of seconds"))?;
    // Only these make a catalogue where there is none; the rest read or annotate
    // one, and a mistyped path must not be answered from a new, empty file.
    let creates = matches!(
        args.command,
        Command::Source(sources::SourceCommand::Add { .. }) | Command::FillSynthetic(_)
    );
    let open = || match creates {
        true => Catalogue::open_with_lock_wait(&path, wait),
        false => Catalogue::open_existing(&path, wait),
    };
    match args.command {
        Command::Candidates(a) => query::candidates(&open()?, a),
        Command::Bursts(a) => query::bursts(&open()?, a),
        Command::Label(a) => review::label(&mut open()?, a),
        Command::History(a) => review::history(&open()?, a),
        Command::Promote(a) => review::promote(&mut open()?, a),
        Command::Demote(a) => demote::run(&mut open()?, a),
        Command::Source(c) => sources::run(&mut open()?, c),
        Command::Exposure(c) => exposure::run(&mut open()?, c),
        Command::Summary(a) => summary::run(&open()?, a),
        Command::Barycentre(a) => barycentre::run(&mut open()?, a),
        Command::Voevent(a) => voevent::run(&open()?, a),
        Command::Forget(a) => forget::run(&mut open()?, a),
        Command::Check => {
            let cat = open()?;
            let c = cat.verify()?;
            say!(
                "{}: ok ({} observations, {} runs, {} candidates)",
                path.display(),
                c.observations,
                c.runs,
                c.candidates
            )?;
            for t in cat.twin_bursts()? {
                say!(
                    "note: bursts {} and {} are one event found by two runs of one observation \
                     (candidates {} and {}); promoted twice by an older burstbook, they count twice \
                     in rates and periodicity tests (`book demote` takes one back)",
                    t.burst_ids.0,
                    t.burst_ids.1,
                    t.candidate_ids.0,
                    t.candidate_ids.1
                )?;
            }
            Ok(())
        }
        Command::FillSynthetic(a) => synthetic::run(&mut open()?, a),
    }
}

#[cfg(test)]
mod tests {
    #[test]
    fn command_line_definition_is_consistent() {
        use clap::CommandFactory;
        crate::cli::Cli::command().debug_assert();
    }
}
