//! `burstbook period rotation|activity|stats|synth`: periodicity tests on arrival times.
//! One file per subcommand; shared input and output helpers here.

mod activity;
mod rotation;
mod stats;
mod synth;

use std::path::{Path, PathBuf};

use anyhow::Context;
use burstbook::atomic_file::AtomicFile;
use burstbook::catalogue::{Catalogue, DEFAULT_LOCK_WAIT};
use burstbook::period::from_catalogue::SourceArrivals;
use burstbook::period::times::{ArrivalTimes, Exposure, read_arrival_csv, read_exposure_csv};

/// A probability (`.0`) with `.1 + 1` significant digits: from 0.001 up as a decimal
/// (`0.0698`, `1.00`), below in e-notation (`4.13e-203`); below 1e-300, where the
/// tail functions underflow to 0, as "<1e-300" rather than a false exact zero.
pub(crate) struct Probability(pub f64, pub usize);

impl std::fmt::Display for Probability {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self.0 {
            p if p < 1e-300 => f.pad("<1e-300"),
            p if p < 1e-3 || !p.is_finite() => f.pad(&format!("{p:.*e}", self.1)),
            p => {
                // Digits after the point: `.1` past the first significant one.
                let leading_zeros = (-p.log10().floor()).max(0.0) as usize;
                f.pad(&format!("{p:.*}", self.1 + leading_zeros))
            }
        }
    }
}

/// Time on source given in days, shown in the unit that keeps its digits: days from
/// one day up, else hours, else seconds (sessions of seconds printed `0.00 d`).
pub(crate) struct OnSource(pub f64);

impl std::fmt::Display for OnSource {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        const HOURS_PER_DAY: f64 = 24.0;
        match self.0 {
            d if d >= 1.0 => write!(f, "{d:.2} d"),
            d if d * HOURS_PER_DAY >= 1.0 => write!(f, "{:.2} h", d * HOURS_PER_DAY),
            d => write!(f, "{:.1} s", d * burstbook::units::SECONDS_PER_DAY),
        }
    }
}

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
        burstbook period rotation --toas toas.csv --period-s 0.41370 --fit-pdot\n  \
        burstbook period rotation --source FIELD-7 --catalogue survey.sqlite --max-period-s 2\n  \
        burstbook period rotation --toas toas.csv --min-period-s 0.5 --max-period-s 2 --sims 200 --seed 7")]
    Rotation(rotation::Args),
    /// Search bursts and observing sessions for an activity cycle (days–months).
    #[command(after_help = "Examples:\n  burstbook period activity\n  \
        burstbook period activity --toas bursts.csv --exposure sessions.csv --max-period-days 60 --sims 2000 --json\n  \
        burstbook period activity --source FIELD-7 --snr-min 8 --json")]
    Activity(activity::Args),
    /// Waiting times (Poisson, Weibull) and the power-law index of fluences.
    #[command(after_help = "Examples:\n  burstbook period stats\n  \
        burstbook period stats --toas bursts.csv --exposure sessions.csv --values bursts.csv --value-column fluence_jy_ms\n  \
        burstbook period stats --source FIELD-7 --catalogue survey.sqlite")]
    Stats(stats::Args),
    /// Write invented demo sets (a sparse rotator; a repeater with an activity cycle).
    #[command(
        after_help = "Example:\n  burstbook period synth --out-dir demo-data/period --seed 1"
    )]
    Synth(synth::Args),
}

/// A catalogue source to read instead of CSV files.
#[derive(clap::Args, Debug)]
struct SourceInput {
    /// Read the bursts of this catalogue source (barycentric TDB; those not yet
    /// barycentred are converted on the fly) instead of --toas.
    #[arg(long, conflicts_with_all = ["toas", "column"])]
    source: Option<String>,
    /// Catalogue file [default: $BURSTBOOK_CATALOGUE, else ./burstbook.sqlite].
    #[arg(long, value_name = "PATH", requires = "source")]
    catalogue: Option<PathBuf>,
}

impl SourceInput {
    /// The catalogue and the arrival times of the source's bursts of S/N ≥ `snr_min`
    /// (`None`: all), if a source was named. Notes on stderr how many arrival times
    /// had to be converted.
    fn load(&self, snr_min: Option<f64>) -> anyhow::Result<Option<(Catalogue, SourceArrivals)>> {
        let Some(source) = &self.source else {
            return Ok(None);
        };
        let cat = Catalogue::open_existing(
            &Catalogue::resolve_path(self.catalogue.as_deref()),
            DEFAULT_LOCK_WAIT,
        )?;
        let arrivals = SourceArrivals::load(&cat, source, snr_min)?;
        for w in &arrivals.warnings {
            note!("burstbook: warning: {source}: {w}");
        }
        if arrivals.computed > 0 {
            note!(
                "burstbook: note: {} of {} barycentric arrival times of {source} computed now \
                 (store them with `burstbook book barycentre {source}`)",
                arrivals.computed,
                arrivals.toas.len()
            );
        }
        Ok(Some((cat, arrivals)))
    }

    fn describe(&self) -> String {
        let path = Catalogue::resolve_path(self.catalogue.as_deref());
        let name = self.source.as_deref().unwrap_or_default();
        format!("source {name} in {}", path.display())
    }
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
    #[command(flatten)]
    catalogue: SourceInput,
    /// With --source: count only bursts of at least this S/N and exposure searched at
    /// least this deep (S/N threshold at most this), as `book summary --snr-min` does
    /// [default: all bursts and exposure].
    #[arg(long, requires = "source", conflicts_with = "exposure")]
    snr_min: Option<f64>,
}

impl BurstInputs {
    /// Arrival times and sessions: from the catalogue (both on barycentric TDB) with
    /// --source, else from the CSV files.
    fn read(&self) -> anyhow::Result<(ArrivalTimes, Exposure)> {
        if let Some((cat, arrivals)) = self.catalogue.load(self.snr_min)? {
            let e = arrivals.exposure(&cat, self.snr_min)?;
            let (toas, outside) = arrivals.inside(&e)?;
            if outside > 0 {
                note!(
                    "burstbook: note: {outside} of {} bursts of {} arrived outside the exposure \
                     counted (promoted from another pointing's search, or found by a search \
                     above --snr-min); left out, as `book summary` leaves them out of the rate",
                    arrivals.toas.len(),
                    arrivals.source
                );
            }
            return Ok((toas, e));
        }
        let t = read_arrival_csv(&self.toas, &self.column)?;
        let e = read_exposure_csv(&self.exposure, t.ref_mjd)?;
        Ok((t, e))
    }

    fn describe(&self) -> String {
        if self.catalogue.source.is_some() {
            return self.catalogue.describe();
        }
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
    say!("{}", serde_json::to_string_pretty(value)?)?;
    Ok(())
}

/// Starts writing `path`, creating its directory; the file appears at `commit`.
fn create(path: &Path) -> anyhow::Result<AtomicFile> {
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty())
        && let Err(e) = std::fs::create_dir_all(dir)
    {
        // Name the path given, and a file standing where a folder must be.
        if let Some(file) = dir.ancestors().find(|a| a.is_file()) {
            anyhow::bail!(
                "{}: {} is a file, not a directory",
                path.display(),
                file.display()
            );
        }
        return Err(e).with_context(|| {
            format!(
                "{}: creating its directory {}",
                path.display(),
                dir.display()
            )
        });
    }
    Ok(AtomicFile::create(path)?)
}

#[cfg(test)]
mod tests {
    use super::{OnSource, Probability};

    #[test]
    fn time_on_source_keeps_its_digits() {
        assert_eq!(OnSource(2.5).to_string(), "2.50 d");
        assert_eq!(OnSource(0.125).to_string(), "3.00 h");
        assert_eq!(OnSource(30.0 / 86_400.0).to_string(), "30.0 s");
    }

    #[test]
    fn probabilities_read_as_decimals_down_to_a_thousandth() {
        let shown = |p: f64| format!("{}", Probability(p, 2));
        assert_eq!(shown(1.0), "1.00");
        assert_eq!(shown(0.5), "0.500");
        assert_eq!(shown(0.0698), "0.0698");
        assert_eq!(shown(0.001), "0.00100");
        assert_eq!(shown(9.99e-4), "9.99e-4");
        assert_eq!(shown(4.132e-203), "4.13e-203");
        assert_eq!(shown(0.0), "<1e-300");
        assert_eq!(format!("{:>8}", Probability(0.25, 1)), "    0.25");
    }
}
