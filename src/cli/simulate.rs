//! `burstbook simulate SCENARIO.toml --out PATH`.

use std::path::{Path, PathBuf};

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
    let container = container(&args)?;
    check_free_space(&args, &sim)?;
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
    for line in &sim.notes {
        note!("  note: {}: {line}", args.scenario.display());
    }
    Ok(())
}

/// The container to write: --format, else the one the --out name implies (native
/// when it implies none). A name that implies the other container is refused: the
/// file could not be read back under it.
fn container(args: &Args) -> anyhow::Result<Container> {
    let named = match args
        .out
        .extension()
        .and_then(|e| e.to_str())
        .map(str::to_ascii_lowercase)
        .as_deref()
    {
        Some("fits" | "fit" | "sf") => Some(Container::Fits),
        Some("json" | "npy") => Some(Container::Native),
        _ => None,
    };
    let wanted = match args.format {
        Some(Format::Native) => Container::Native,
        Some(Format::Fits) => Container::Fits,
        None => return Ok(named.unwrap_or(Container::Native)),
    };
    match named {
        Some(n) if n != wanted => {
            let (needs, read_as) = match wanted {
                Container::Fits => (
                    "--format fits needs a NAME.fits, NAME.fit or NAME.sf name",
                    "a native header",
                ),
                Container::Native => ("--format native needs a NAME.json name", "FITS"),
            };
            anyhow::bail!(
                "{}: {needs} (this name would be read back as {read_as})",
                args.out.display()
            )
        }
        _ => Ok(wanted),
    }
}

/// Refuses, before anything is written, an observation larger than the free space
/// of the file system --out is on.
fn check_free_space(args: &Args, sim: &Simulation) -> anyhow::Result<()> {
    let dir = match args.out.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    // A folder that cannot be queried (missing, say) fails with its own message when
    // the output is created.
    let Ok(fs) = rustix::fs::statvfs(dir) else {
        return Ok(());
    };
    let free = u128::from(fs.f_bavail) * u128::from(fs.f_frsize);
    let need = sim.sample_bytes();
    if need > free {
        anyhow::bail!(
            "{}: the observation ({:.3e} s of {} channels at {} bits) needs {}, but {} has \
             only {} free",
            args.scenario.display(),
            sim.header.duration_s(),
            sim.header.n_chan(),
            sim.header.nbits,
            Bytes(need),
            dir.display(),
            Bytes(free)
        );
    }
    Ok(())
}

/// A byte count in decimal units (kB, MB, GB, TB, PB) with one decimal.
struct Bytes(u128);

impl std::fmt::Display for Bytes {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let mut value = self.0 as f64;
        for unit in ["B", "kB", "MB", "GB", "TB"] {
            if value < 1000.0 {
                return write!(f, "{value:.1} {unit}");
            }
            value /= 1000.0;
        }
        write!(f, "{value:.1} PB")
    }
}
