//! Streams a [`Simulation`] chunk by chunk: signals in σ units, then
//! mean + σ_c·(noise + signal) per channel, then quantisation. Memory is one chunk.

use std::path::{Path, PathBuf};

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Exp1, StandardNormal};

use super::burst::add_burst;
use super::noise::quantise;
use super::plan::{Simulation, TruthRow};
use crate::atomic_file::{self, AtomicFile};
use crate::error::{Error, Result};
use crate::obs::{Block, SampleSink};

/// Rows generated per chunk.
pub const CHUNK_ROWS: usize = 4096;

/// RNG stream for carrier fluctuations (noise is stream 0, random bursts stream 1).
const CARRIER_STREAM: u64 = 2;

/// Yields a simulation's rows in order, one chunk at a time.
pub struct Generator<'a> {
    sim: &'a Simulation,
    noise_rng: ChaCha8Rng,
    carrier_rng: ChaCha8Rng,
    next_row: u64,
    unit_scale: Vec<f32>,
    block: Block,
}

impl<'a> Generator<'a> {
    /// Starts at row 0; the same simulation and seed always give the same rows.
    pub fn new(sim: &'a Simulation) -> Self {
        let noise_rng = ChaCha8Rng::seed_from_u64(sim.seed);
        let mut carrier_rng = ChaCha8Rng::seed_from_u64(sim.seed);
        carrier_rng.set_stream(CARRIER_STREAM);
        let n_chan = sim.header.n_chan();
        Generator {
            sim,
            noise_rng,
            carrier_rng,
            next_row: 0,
            unit_scale: vec![1.0; n_chan],
            block: Block {
                start_sample: 0,
                overlap: 0,
                n_chan,
                data: Vec::new(),
            },
        }
    }

    /// The next at most `max_rows` rows (`[time, channel]`), or `None` at the end.
    pub fn next_chunk(&mut self, max_rows: usize) -> Option<&[f32]> {
        let h = &self.sim.header;
        let rows = (h.n_samples - self.next_row).min(max_rows as u64) as usize;
        if rows == 0 {
            return None;
        }
        let n_chan = h.n_chan();
        self.block.start_sample = self.next_row;
        self.block.data.clear();
        self.block.data.resize(rows * n_chan, 0.0);
        for pulse in &self.sim.pulses {
            add_burst(&mut self.block, h, pulse, &self.unit_scale);
        }
        self.add_carriers();
        for row in self.block.data.chunks_exact_mut(n_chan) {
            for (c, v) in row.iter_mut().enumerate() {
                let noise: f64 = self.noise_rng.sample(StandardNormal);
                let value =
                    self.sim.chan_mean[c] + self.sim.chan_sigma[c] * (noise + f64::from(*v));
                *v = quantise(value, h.nbits);
            }
        }
        self.next_row += rows as u64;
        Some(&self.block.data)
    }

    /// Adds each carrier's fluctuating excess (σ units) to its channels.
    fn add_carriers(&mut self) {
        let h = &self.sim.header;
        let n_chan = h.n_chan();
        for (t, row) in self.block.data.chunks_exact_mut(n_chan).enumerate() {
            let time_s = (self.block.start_sample as f64 + t as f64 + 0.5) * h.tsamp_s;
            for carrier in &self.sim.carriers {
                let m = carrier.modulation_period_s.map_or(1.0, |p| {
                    0.5 * (1.0 + (2.0 * std::f64::consts::PI * time_s / p).sin())
                });
                for &c in &carrier.channels {
                    let e: f64 = self.carrier_rng.sample(Exp1);
                    row[c] += (carrier.strength * m * e) as f32;
                }
            }
        }
    }
}

/// Writes every row of `sim` to `sink` in chunks of [`CHUNK_ROWS`], showing progress.
/// The caller finishes the sink.
///
/// # Errors
/// Whatever the sink reports.
pub fn write_observation(sim: &Simulation, sink: &mut dyn SampleSink) -> Result<()> {
    let bar = crate::progress::bar(sim.header.n_samples, "simulating");
    let mut generator = Generator::new(sim);
    while let Some(rows) = generator.next_chunk(CHUNK_ROWS) {
        sink.write_rows(rows)?;
        bar.inc((rows.len() / sim.header.n_chan()) as u64);
    }
    bar.finish_and_clear();
    Ok(())
}

/// Where the truth table of observation `obs_path` goes: `NAME.truth.csv` beside it.
pub fn truth_path(obs_path: &Path) -> PathBuf {
    obs_path.with_extension("truth.csv")
}

/// Writes the truth table as CSV with a header line.
///
/// # Errors
/// [`Error::Io`] naming `path`.
pub fn write_truth(path: &Path, truth: &[TruthRow]) -> Result<()> {
    let to_err = |e: csv::Error| Error::bad_input(path, e.to_string());
    let mut w = csv::Writer::from_writer(AtomicFile::create(path)?);
    for row in truth {
        w.serialize(row).map_err(to_err)?;
    }
    atomic_file::commit_csv(w)
}
