//! `book exposure import|export`.

use std::path::PathBuf;

use anyhow::Context;
use burstbook::catalogue::Catalogue;
use clap::Subcommand;

use super::output::write_out;

#[derive(Subcommand, Debug)]
pub enum ExposureCommand {
    /// Import intervals searched elsewhere: CSV rows
    /// `source,start_mjd,end_mjd[,snr_threshold[,fluence_limit_jy_ms]]`.
    #[command(after_help = "\
The sources must already exist. A header row and #-comments are allowed. An empty
threshold or fluence limit is unknown. Rows already present (same source, interval
and threshold) are skipped, so importing the same file twice adds nothing.
A bad row imports nothing and names its line.

Example:
  burstbook book exposure import other-telescope.csv")]
    Import {
        /// The CSV file.
        file: PathBuf,
    },
    /// Export intervals in the import format.
    #[command(
        after_help = "Example:\n  burstbook book exposure export --source FIELD-7 --out field7-exposure.csv"
    )]
    Export {
        /// Only this source.
        #[arg(long)]
        source: Option<String>,
        /// Write to this file instead of standard output.
        #[arg(long)]
        out: Option<PathBuf>,
    },
}

pub fn run(cat: &mut Catalogue, c: ExposureCommand) -> anyhow::Result<()> {
    match c {
        ExposureCommand::Import { file } => {
            let f = std::fs::File::open(&file)
                .with_context(|| format!("opening {}", file.display()))?;
            let done = cat.import_exposure_csv(&file, std::io::BufReader::new(f))?;
            let mut line = format!(
                "imported {} interval(s); {} already present",
                done.added, done.present
            );
            if done.limits_filled > 0 {
                line += &format!(
                    "; {} given the file's fluence limit, held without one",
                    done.limits_filled
                );
            }
            if done.limits_kept > 0 {
                line += &format!(
                    "; {} keep their own fluence limit, which the file gives differently",
                    done.limits_kept
                );
            }
            say!("{line}")?;
            Ok(())
        }
        ExposureCommand::Export { source, out } => {
            write_out(&out, |w| Ok(cat.export_exposure_csv(source.as_deref(), w)?))
        }
    }
}
