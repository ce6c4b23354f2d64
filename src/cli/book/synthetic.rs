//! Hidden `book fill-synthetic`: records invented searches, one line per
//! observation on standard output, so tests can kill or race real processes.

use std::io::Write;

use burstbook::catalogue::{Catalogue, RecordOutcome, synthetic};

/// Arguments of `book fill-synthetic`.
#[derive(clap::Args, Debug)]
pub struct FillArgs {
    /// Source name of the invented observations.
    #[arg(long, default_value = "SYNTH-1")]
    source: String,
    /// Number of observations (seeds first-seed, first-seed+1, ...).
    #[arg(long, default_value_t = 1)]
    observations: u64,
    /// Candidates per observation.
    #[arg(long, default_value_t = 100)]
    candidates: usize,
    /// Seed of the first observation.
    #[arg(long, default_value_t = 0)]
    first_seed: u64,
}

pub fn run(cat: &mut Catalogue, a: FillArgs) -> anyhow::Result<()> {
    let mut out = std::io::stdout().lock();
    for seed in a.first_seed..a.first_seed + a.observations {
        let obs = synthetic::observation(&a.source, seed);
        let cands = synthetic::candidates(&obs, a.candidates, seed);
        let what = match cat.record_search(&obs, &synthetic::run(7.0), &cands)? {
            RecordOutcome::Inserted { .. } => "inserted",
            RecordOutcome::AlreadyPresent { .. } => "present",
            RecordOutcome::Completed { .. } => "completed",
        };
        writeln!(out, "{seed} {what}")?;
        out.flush()?;
    }
    Ok(())
}
