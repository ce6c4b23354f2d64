//! Command-line front end: one file per subcommand, each parsing its flags into
//! library calls. No science happens here.

mod inspect;
mod report;

use clap::{Parser, Subcommand};

/// Find dispersed radio bursts, catalogue them, and time them.
#[derive(Parser, Debug)]
#[command(name = "burstbook", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Summarise an observation: header, duration, statistics, suspicious channels.
    Inspect(inspect::Args),
    /// Write an HTML report (overview and per-candidate figures) from search output.
    Report(report::Args),
}

/// Runs the chosen subcommand.
pub fn run(cli: Cli) -> anyhow::Result<()> {
    match cli.command {
        Command::Inspect(a) => inspect::run(a),
        Command::Report(a) => report::run(a),
    }
}
