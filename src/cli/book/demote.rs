//! `book demote`: take bursts promoted by mistake back out of their source's list.

use burstbook::catalogue::{Catalogue, DEMOTED, DemoteOptions};

use super::review::reviewer;

/// Arguments of `book demote`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Removes, in one transaction, each burst and its stored barycentric TOA; its
candidate stays, with its whole review history. That history gets a label
\"demoted\" whose comment names the burst, its source and the reason, and which is
then the candidate's current label: `book promote --label-is burst` will not
promote it again unasked, `book promote ID --to SOURCE` will. Finds of the same
event by other search runs of the observation get the label too. An id that is no
burst refuses the whole list, changing nothing.

The ids are those `book bursts` lists (column id).

Examples:
  burstbook book demote 3 --comment 'satellite, seen in the other beams' --dry-run
  burstbook book demote 3 7 --comment 'belongs to FIELD-9' --reviewer ana
  burstbook book history 12")]
pub struct DemoteArgs {
    /// The bursts' ids.
    #[arg(value_name = "BURST_ID", required = true)]
    ids: Vec<i64>,
    /// Why they are taken back (kept in each candidate's review history).
    #[arg(long)]
    comment: String,
    /// Who is taking them back [default: $USER].
    #[arg(long)]
    reviewer: Option<String>,
    /// Print what would be taken back and change nothing.
    #[arg(long)]
    dry_run: bool,
}

pub fn run(cat: &mut Catalogue, a: DemoteArgs) -> anyhow::Result<()> {
    let reviewer = reviewer(a.reviewer);
    let how = DemoteOptions {
        reviewer: &reviewer,
        comment: &a.comment,
        dry_run: a.dry_run,
    };
    let (demote, label) = match a.dry_run {
        true => ("would demote", "would label"),
        false => ("demoted", "labelled"),
    };
    for d in cat.demote(&a.ids, how)? {
        let toa = match d.toa_tdb_mjd {
            Some(_) => ", with its barycentric TOA",
            None => "",
        };
        say!(
            "{demote} burst {} of {}: candidate {}, MJD {:.8}, DM {:.2}{toa}",
            d.burst_id,
            d.source,
            d.candidate_id,
            d.mjd_utc,
            d.dm
        )?;
        let twins: Vec<String> = d.same_event.iter().map(i64::to_string).collect();
        let twins = match twins.is_empty() {
            true => String::new(),
            false => format!(
                " and {} (its event, found by another run)",
                twins.join(", ")
            ),
        };
        say!("  {label} {DEMOTED:?}: candidate {}{twins}", d.candidate_id)?;
    }
    if a.dry_run {
        say!("dry run: nothing was changed")?;
    }
    Ok(())
}
