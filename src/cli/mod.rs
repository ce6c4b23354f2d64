//! Command-line front end: one file per subcommand, each parsing its flags into
//! library calls. No science happens here.

/// `println!` for the terminal lines of a command, through [`say_line`]: evaluates to
/// an `io::Result<()>` for `?`.
macro_rules! say {
    ($($arg:tt)*) => {
        $crate::cli::say_line(format_args!($($arg)*))
    };
}

/// `eprintln!` for warnings and notes: a closed standard error (`2>&1 | head`) drops
/// them instead of panicking, as there is nowhere left to report it.
macro_rules! note {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stderr().lock(), $($arg)*);
    }};
}

mod barycentre;
mod book;
mod inject;
mod inspect;
mod period;
mod plan;
mod report;
mod review;
mod search;
mod simulate;

use clap::{CommandFactory, FromArgMatches, Parser, Subcommand};

/// Find dispersed radio bursts, catalogue them, and time them.
#[derive(Parser, Debug)]
#[command(
    name = "burstbook",
    version,
    about,
    long_about = None,
    after_help = "Examples:
  burstbook search demo-data/demo.json --out demo-out
  burstbook --threads 1 inject demo-data/demo.json --count 50 --out inject-out

Every command has its own --help with examples."
)]
pub struct Cli {
    /// Worker threads (default: one per core, or RAYON_NUM_THREADS). Results do not
    /// depend on it.
    // A search also keeps one thread reading ahead, which mostly waits on the disk.
    #[arg(long, global = true, value_name = "N",
          value_parser = clap::value_parser!(u16).range(1..))]
    threads: Option<u16>,
    #[command(subcommand)]
    command: Command,
}

impl Cli {
    /// Parses the process arguments. A value such as `--dm-max -5` is taken as the
    /// number it is (so the command's own check explains what is wrong with it),
    /// not as an unknown flag, in every subcommand.
    ///
    /// Help and version are printed as clap prints them; a usage error exits with
    /// clap's code (2) after one line, as every other error is reported.
    pub fn parse_args() -> Cli {
        negative_numbers_everywhere(Cli::command())
            .try_get_matches()
            .and_then(|matches| Cli::from_arg_matches(&matches))
            .unwrap_or_else(|e| {
                use clap::error::ErrorKind::*;
                let help = [
                    DisplayHelp,
                    DisplayVersion,
                    DisplayHelpOnMissingArgumentOrSubcommand,
                ];
                if help.contains(&e.kind()) {
                    e.exit()
                }
                note!("burstbook: error: {} (try '--help')", usage_error_line(&e));
                std::process::exit(e.exit_code())
            })
    }
}

fn negative_numbers_everywhere(command: clap::Command) -> clap::Command {
    command
        .allow_negative_numbers(true)
        .mut_subcommands(negative_numbers_everywhere)
}

/// Clap's message for a usage error on one line, without its usage block and help
/// hint. A value that is not a whole number, for a flag that takes one, says so
/// instead of the parser's "invalid digit found in string".
fn usage_error_line(e: &clap::Error) -> String {
    use clap::error::{ContextKind, ContextValue};
    let context = |kind| match e.get(kind) {
        Some(ContextValue::String(s)) => Some(s.as_str()),
        _ => None,
    };
    let not_whole = std::error::Error::source(e)
        .and_then(|s| s.downcast_ref::<std::num::ParseIntError>())
        .is_some_and(|p| *p.kind() == std::num::IntErrorKind::InvalidDigit);
    if let (true, Some(value), Some(flag)) = (
        not_whole,
        context(ContextKind::InvalidValue),
        context(ContextKind::InvalidArg),
    ) {
        // A negative whole number failed, so the flag takes none.
        let at_least_0 = match value.parse::<i128>() {
            Ok(_) => " >= 0",
            Err(_) => "",
        };
        return format!("invalid value '{value}' for '{flag}': must be a whole number{at_least_0}");
    }
    let text = e.to_string();
    let mut line = String::new();
    let parts = text
        .lines()
        .map(str::trim)
        .take_while(|l| !(l.starts_with("Usage:") || l.starts_with("For more information")))
        .filter(|l| !l.is_empty());
    for part in parts {
        // "… not provided:" runs on into its list; other lines are separate remarks.
        let sep = match () {
            _ if line.is_empty() => "",
            _ if line.ends_with(':') => " ",
            _ => "; ",
        };
        line = format!("{line}{sep}{part}");
    }
    line.strip_prefix("error: ").unwrap_or(&line).to_string()
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Summarise an observation: header, duration, statistics, suspicious channels.
    Inspect(inspect::Args),
    /// Write an HTML report (overview and per-candidate figures) from search output.
    Report(report::Args),
    /// Label catalogue candidates one key at a time in a local web page.
    Review(review::Args),
    /// Search observations for dispersed pulses; write candidates.csv and candidates.json.
    Search(search::Args),
    /// Measure search completeness by adding synthetic bursts to an observation in memory.
    Inject(inject::Args),
    /// Write a synthetic observation with known bursts and interference from a scenario file.
    Simulate(simulate::Args),
    /// Convert topocentric UTC arrival times (CSV column mjd_utc) to barycentric TDB.
    Barycentre(barycentre::Args),
    /// The burst catalogue: query, label, promote, sources, exposure, summary, VOEvent.
    Book(Box<book::Args>),
    /// Choose trial DMs and time resolutions for a band, and estimate the cost.
    Plan(plan::Args),
    /// Periodicity tests on burst arrival times: rotation, activity cycles, statistics.
    Period(period::Args),
}

/// Writes one line to standard output. A reader that has gone (`burstbook search … |
/// head`) is not an error: the command carries on (a search still writes its files
/// and catalogue) and its later lines are dropped. Any other failure is returned.
pub fn say_line(line: std::fmt::Arguments<'_>) -> std::io::Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    match out.write_fmt(line).and_then(|()| out.write_all(b"\n")) {
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => Ok(()),
        other => other,
    }
}

/// Runs the chosen subcommand.
pub fn run(cli: Cli) -> anyhow::Result<()> {
    if let Some(n) = cli.threads {
        rayon::ThreadPoolBuilder::new()
            .num_threads(usize::from(n))
            .build_global()
            .map_err(|e| anyhow::anyhow!("cannot start {n} worker threads: {e}"))?;
    }
    match cli.command {
        Command::Inspect(a) => inspect::run(a),
        Command::Report(a) => report::run(a),
        Command::Review(a) => review::run(a),
        Command::Search(a) => search::run(a),
        Command::Simulate(a) => simulate::run(a),
        Command::Inject(a) => inject::run(a),
        Command::Barycentre(a) => barycentre::run(a),
        Command::Book(a) => book::run(*a),
        Command::Plan(a) => plan::run(a),
        Command::Period(a) => period::run(a),
    }
}
