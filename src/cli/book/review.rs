//! `book label`, `book history`, `book promote`.

use anyhow::bail;
use burstbook::catalogue::{AssignTolerance, Catalogue};

use super::flags;
use super::output::{Format, write_rows};
use super::query::FilterArgs;

/// Candidate ids given explicitly, or all candidates matching the filter flags.
fn select(cat: &Catalogue, ids: &[i64], filter: &FilterArgs) -> anyhow::Result<Vec<i64>> {
    if ids.is_empty() && filter.is_empty() {
        bail!("give candidate ids or at least one filter flag (e.g. --source, --snr-min)");
    }
    if !ids.is_empty() && filter.is_empty() {
        return Ok(ids.to_vec());
    }
    Ok(cat
        .candidates(&filter.to_filter(ids)?)?
        .iter()
        .map(|r| r.id)
        .collect())
}

/// The reviewer given, else `$USER`, else `unknown`.
pub(super) fn reviewer(given: Option<String>) -> String {
    given
        .or_else(|| std::env::var("USER").ok())
        .unwrap_or_else(|| "unknown".into())
}

/// Arguments of `book label`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Examples:
  burstbook book label 12 15 --label astrophysical --comment 'clear sweep'
  burstbook book label --source FIELD-7 --dm-max 5 --label rfi --reviewer ana")]
pub struct LabelArgs {
    /// Candidate ids (combined with the filter flags when both are given).
    ids: Vec<i64>,
    #[command(flatten)]
    filter: FilterArgs,
    /// The label, e.g. burst, rfi, noise, unsure.
    #[arg(long)]
    label: String,
    /// Who is judging [default: $USER].
    #[arg(long)]
    reviewer: Option<String>,
    /// Free-text comment.
    #[arg(long, default_value = "")]
    comment: String,
}

pub fn label(cat: &mut Catalogue, a: LabelArgs) -> anyhow::Result<()> {
    let ids = select(cat, &a.ids, &a.filter)?;
    let n = cat.label(&ids, &a.label, &reviewer(a.reviewer), &a.comment)?;
    say!("labelled {n} candidate(s) {:?}", a.label)?;
    Ok(())
}

/// Arguments of `book history`.
#[derive(clap::Args, Debug)]
#[command(after_help = "Example:\n  burstbook book history 12")]
pub struct HistoryArgs {
    /// Candidate id.
    id: i64,
    /// Output format.
    #[arg(long, value_enum, default_value = "table")]
    format: Format,
}

pub fn history(cat: &Catalogue, a: HistoryArgs) -> anyhow::Result<()> {
    let rows = cat.label_history(a.id)?;
    let headers = [
        "candidate_id",
        "label",
        "reviewer",
        "labelled_utc",
        "comment",
    ];
    write_rows(
        &mut std::io::stdout().lock(),
        a.format,
        &headers,
        &rows,
        |l| {
            vec![
                l.candidate_id.to_string(),
                l.label.clone(),
                l.reviewer.clone(),
                l.labelled_utc.clone(),
                l.comment.clone(),
            ]
        },
    )
}

/// Arguments of `book promote`.
#[derive(clap::Args, Debug)]
#[command(after_help = "\
Without --to, each candidate goes to the one source whose position lies within
--radius-deg of the observation's pointing and whose reference DM lies within
--dm-tol of the candidate's DM; none or several matches is an error.

Examples:
  burstbook book promote 12 --to FIELD-7
  burstbook book promote --label-is astrophysical --radius-deg 0.3 --dm-tol 3")]
pub struct PromoteArgs {
    /// Candidate ids (combined with the filter flags when both are given).
    ids: Vec<i64>,
    #[command(flatten)]
    filter: FilterArgs,
    /// Assign to this source instead of matching by position and DM.
    #[arg(long, value_name = "SOURCE")]
    to: Option<String>,
    /// Largest pointing-to-source distance for automatic assignment, degrees.
    #[arg(long, default_value_t = 0.5)]
    radius_deg: f64,
    /// Largest |DM - reference DM| for automatic assignment, pc cm^-3.
    #[arg(long, default_value_t = 5.0)]
    dm_tol: f64,
}

pub fn promote(cat: &mut Catalogue, a: PromoteArgs) -> anyhow::Result<()> {
    flags::non_negative("--radius-deg", a.radius_deg)?;
    flags::non_negative("--dm-tol", a.dm_tol)?;
    let ids = select(cat, &a.ids, &a.filter)?;
    let tol = AssignTolerance {
        radius_deg: a.radius_deg,
        dm: a.dm_tol,
    };
    for (id, p) in ids.iter().zip(cat.promote_all(&ids, a.to.as_deref(), tol)?) {
        match (p.new, p.same_event_as) {
            (_, Some(found)) => say!(
                "candidate {id} is the event of candidate {found}, already burst {} of {} \
                 (found by another run of its observation); not promoted again",
                p.burst_id,
                p.source
            )?,
            (true, None) => say!("candidate {id} is now burst {} of {}", p.burst_id, p.source)?,
            (false, None) => say!(
                "candidate {id} already was burst {} of {}",
                p.burst_id,
                p.source
            )?,
        }
    }
    if ids.is_empty() {
        say!("no candidate matches; nothing promoted")?;
    }
    Ok(())
}
