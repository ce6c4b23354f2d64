//! `burstbook simulate SCENARIO.toml --out PATH`.

use std::path::PathBuf;

use anyhow::Context;
use burstbook::obs::{self, Container};
use burstbook::simulate::{self, Scenario, Simulation};

/// Arguments of `simulate`.
#[derive(clap::Args, Debug)]
#[command(after_help = "Examples:
  burstbook simulate demo-data/scenario.toml --out demo-data/demo.json
  burstbook simulate my-survey.toml --out /tmp/trial.json --seed 42
  burstbook simulate my-survey.toml --out /tmp/trial.fits --format fits

Writes the observation and, beside it, NAME.truth.csv listing every burst
(arrival time, DM, width, scattering, spectrum, expected S/N, fluence) and every
interference event. The scenario file format is described in docs/simulate.md.")]
pub struct Args {
    /// Scenario file (TOML) describing the band, noise, bursts and interference.
    pub scenario: PathBuf,
    /// Output observation: NAME.json for the native format, NAME.fits for FITS.
    #[arg(long)]
    pub out: PathBuf,
    /// Seed for the noise and random bursts (default: the scenario's `seed`, else 0).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Container format (default: from the --out extension, native otherwise).
    #[arg(long, value_enum)]
    pub format: Option<Format>,
}

/// Output container.
#[derive(clap::ValueEnum, Clone, Copy, Debug)]
pub enum Format {
    Native,
    Fits,
}

pub fn run(args: Args) -> anyhow::Result<()> {
    let scenario = Scenario::load(&args.scenario)?;
    let seed = args.seed.unwrap_or(scenario.seed);
    let sim = Simulation::new(&scenario, seed)
        .with_context(|| format!("{}: resolving the scenario", args.scenario.display()))?;
    let container = match args.format {
        Some(Format::Native) => Container::Native,
        Some(Format::Fits) => Container::Fits,
        None => match args.out.extension().and_then(|e| e.to_str()) {
            Some("fits" | "fit" | "sf") => Container::Fits,
            _ => Container::Native,
        },
    };
    let mut sink = obs::create(&args.out, &sim.header, container)?;
    simulate::write_observation(&sim, sink.as_mut())?;
    sink.finish()?;
    let truth = simulate::truth_path(&args.out);
    simulate::write_truth(&truth, &sim.truth)?;
    let n_bursts = sim
        .truth
        .iter()
        .filter(|r| r.kind == simulate::TruthKind::Burst)
        .count();
    say!(
        "wrote {} ({} channels × {} samples, {:.1} s) with {} bursts and {} interference rows; truth in {}",
        args.out.display(),
        sim.header.n_chan(),
        sim.header.n_samples,
        sim.header.duration_s(),
        n_bursts,
        sim.truth.len() - n_bursts,
        truth.display()
    )?;
    Ok(())
}
