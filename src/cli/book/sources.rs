//! `book source add|list`.

use burstbook::catalogue::{Catalogue, SourceEdit};
use burstbook::obs::geodesy::format_ra_deg;
use clap::Subcommand;

use super::output::{Format, opt, write_rows};

#[derive(Subcommand, Debug)]
pub enum SourceCommand {
    /// Add a source, or update the position, DM and notes of an existing one.
    #[command(
        after_help = "Example:\n  burstbook book source add FIELD-7 --ra 123.25 --dec -12.5 --dm 351 --notes 'repeater'"
    )]
    Add {
        /// Unique name.
        name: String,
        /// ICRS right ascension, degrees.
        #[arg(long, allow_hyphen_values = true)]
        ra: f64,
        /// ICRS declination, degrees.
        #[arg(long, allow_hyphen_values = true)]
        dec: f64,
        /// Reference DM, pc cm^-3 (used for automatic burst assignment) [default: an
        /// existing source keeps its own].
        #[arg(long)]
        dm: Option<f64>,
        /// Free text [default: an existing source keeps its own].
        #[arg(long)]
        notes: Option<String>,
    },
    /// List sources.
    #[command(after_help = "Example:\n  burstbook book source list --format csv")]
    List {
        /// Output format.
        #[arg(long, value_enum, default_value = "table")]
        format: Format,
    },
}

pub fn run(cat: &mut Catalogue, c: SourceCommand) -> anyhow::Result<()> {
    match c {
        SourceCommand::Add {
            name,
            ra,
            dec,
            dm,
            notes,
        } => {
            let edit = SourceEdit {
                name,
                ra_deg: ra,
                dec_deg: dec,
                dm_ref: dm,
                notes,
            };
            let done = cat.edit_source(&edit)?;
            say!(
                "{} source {} (id {})",
                if done.new { "added" } else { "updated" },
                edit.name,
                done.id
            )?;
            if done.toas_cleared > 0 {
                say!(
                    "its position changed: {} stored barycentric TOA(s) removed \
                     (store new ones with `burstbook book barycentre {}`)",
                    done.toas_cleared,
                    edit.name
                )?;
            }
            Ok(())
        }
        SourceCommand::List { format } => {
            let rows = cat.sources()?;
            let headers = ["id", "name", "ra_deg", "dec_deg", "dm_ref", "notes"];
            write_rows(
                &mut std::io::stdout().lock(),
                format,
                &headers,
                &rows,
                |s| {
                    vec![
                        s.id.to_string(),
                        s.name.clone(),
                        format_ra_deg(s.ra_deg, 6),
                        format!("{:.6}", s.dec_deg),
                        opt(s.dm_ref, 3),
                        s.notes.clone(),
                    ]
                },
            )
        }
    }
}
