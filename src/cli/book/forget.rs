//! `book forget`: remove an observation recorded under a wrong header, so that the
//! corrected file can be recorded.

use burstbook::catalogue::{Catalogue, ForgetOptions};

/// Arguments of `book forget`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Removes, in one transaction, the observation and everything that exists only
because of it: its search runs, their candidates and review labels, its exposure
intervals and injection-completeness results, and its source when recording it
added that source and nothing else refers to it. An observation with bursts is
refused unless --with-bursts is given. Searching the same samples again then
records them as a new observation.

The id is named by `burstbook search` when it refuses the same samples under a
header that differs, and listed by `book candidates` (column obs).

Examples:
  burstbook book forget 3 --dry-run
  burstbook book forget 3
  burstbook book forget 3 --with-bursts")]
pub struct ForgetArgs {
    /// The observation's id.
    #[arg(value_name = "OBSERVATION_ID")]
    id: i64,
    /// Also remove the bursts promoted from its candidates, with their barycentric TOAs.
    #[arg(long)]
    with_bursts: bool,
    /// Print what would be removed and change nothing.
    #[arg(long)]
    dry_run: bool,
}

pub fn run(cat: &mut Catalogue, a: ForgetArgs) -> anyhow::Result<()> {
    let how = ForgetOptions {
        with_bursts: a.with_bursts,
        dry_run: a.dry_run,
    };
    let gone = cat.forget_observation(a.id, how)?;
    let verb = if a.dry_run { "would remove" } else { "removed" };
    say!(
        "{verb} observation {}: {}, start MJD {:.8}, source {:?}",
        gone.observation_id,
        gone.path,
        gone.start_mjd,
        gone.source
    )?;
    for (n, what) in [
        (gone.runs, "search run(s)"),
        (gone.candidates, "candidate(s)"),
        (gone.labels, "review label(s)"),
        (gone.exposure_intervals, "exposure interval(s)"),
        (
            gone.completeness_results,
            "injection-completeness result(s)",
        ),
        (gone.bursts, "burst(s)"),
        (gone.toas, "barycentric TOA(s) of those bursts"),
    ] {
        say!("  {n} {what}")?;
    }
    if gone.source_removed {
        say!(
            "  source {:?} (added when the observation was recorded; nothing else refers to it)",
            gone.source
        )?;
    }
    if a.dry_run {
        say!("dry run: nothing was changed")?;
    }
    Ok(())
}
