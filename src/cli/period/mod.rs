//! `burstbook period rotation|activity|stats|synth`: periodicity tests on arrival times.
//! One file per subcommand; shared input and output helpers here.

mod activity;
mod rotation;
mod stats;
mod synth;

use std::path::{Path, PathBuf};

use anyhow::Context;
use burstbook::period::times::{ArrivalTimes, Exposure, read_arrival_csv, read_exposure_csv};

/// Arguments of `period`.
#[derive(clap::Args, Debug)]
pub struct Args {
    #[command(subcommand)]
    command: PeriodCommand,
}

#[derive(clap::Subcommand, Debug)]
enum PeriodCommand {
    /// Search arrival times for a rotation period (ms–s) with Z²ₙ and the H-test.
    #[command(after_help = "Examples:\n  burstbook period rotation\n  \
        burstbook period rotation --toas toas.csv --min-period-s 0.05 --max-period-s 10 --json\n  \
        burstbook period rotation --toas toas.csv --period-s 0.41370 --fit-pdot")]
    Rotation(rotation::Args),
    /// Search bursts and observing sessions for an activity cycle (days–months).
    #[command(after_help = "Examples:\n  burstbook period activity\n  \
        burstbook period activity --toas bursts.csv --exposure sessions.csv --max-period-days 60 --sims 2000 --json")]
    Activity(activity::Args),
    /// Waiting times (Poisson, Weibull) and the power-law index of fluences.
    #[command(after_help = "Examples:\n  burstbook period stats\n  \
        burstbook period stats --toas bursts.csv --exposure sessions.csv --values bursts.csv --value-column fluence_jy_ms")]
    Stats(stats::Args),
    /// Write invented demo sets (a sparse rotator; a repeater with an activity cycle).
    #[command(
        after_help = "Example:\n  burstbook period synth --out-dir demo-data/period --seed 1"
    )]
    Synth(synth::Args),
}

/// Burst arrival times and the observing sessions they were found in.
#[derive(clap::Args, Debug)]
struct BurstInputs {
    /// CSV of burst arrival times with an MJD column.
    #[arg(long, default_value = "demo-data/period/repeater_bursts.csv")]
    toas: PathBuf,
    /// Name of the MJD column.
    #[arg(long, default_value = "mjd")]
    column: String,
    /// CSV of observing sessions with columns start_mjd,end_mjd.
    #[arg(long, default_value = "demo-data/period/repeater_exposure.csv")]
    exposure: PathBuf,
}

impl BurstInputs {
    fn read(&self) -> anyhow::Result<(ArrivalTimes, Exposure)> {
        let t = read_arrival_csv(&self.toas, &self.column)?;
        let e = read_exposure_csv(&self.exposure, t.ref_mjd)?;
        Ok((t, e))
    }

    fn describe(&self) -> String {
        format!("{} with {}", self.toas.display(), self.exposure.display())
    }
}

pub fn run(args: Args) -> anyhow::Result<()> {
    match args.command {
        PeriodCommand::Rotation(a) => rotation::run(a),
        PeriodCommand::Activity(a) => activity::run(a),
        PeriodCommand::Stats(a) => stats::run(a),
        PeriodCommand::Synth(a) => synth::run(a),
    }
}

fn print_json<T: serde::Serialize>(value: &T) -> anyhow::Result<()> {
    println!("{}", serde_json::to_string_pretty(value)?);
    Ok(())
}

fn create(path: &Path) -> anyhow::Result<std::io::BufWriter<std::fs::File>> {
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).with_context(|| format!("creating {}", dir.display()))?;
    }
    let f = std::fs::File::create(path).with_context(|| format!("creating {}", path.display()))?;
    Ok(std::io::BufWriter::new(f))
}
