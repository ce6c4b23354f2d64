//! Test data for the search tests: Gamma-distributed power noise (mean 1, N·d = 50,
//! as detected channelised data: σ/μ = 1/√(n_p·Δν·t_s) by the radiometer equation,
//! Lorimer & Kramer 2005) with bursts from the simulator.
#![allow(dead_code)]

use burstbook::obs::{Block, Header, MemorySource, SampleSink, SampleSource, Site, UtcEpoch};
use burstbook::simulate::{
    Burst, Simulation, Spectrum, add_burst, with_expected_snr, write_observation,
};
use rand::SeedableRng;
use rand_distr::{Distribution, Gamma, Normal};

/// Dispersion constant of Lorimer & Kramer 2005 (Handbook of Pulsar Astronomy),
/// written out here so the tests check the library's delays independently.
pub const K_HANDBOOK_S_MHZ2: f64 = 4.148808e3;

/// Degrees of freedom of the simulated power samples (σ/μ = 1/√50).
pub const ND: f64 = 50.0;

/// Noise σ of one sample in the units of the data.
pub fn noise_sigma() -> f32 {
    (1.0 / ND).sqrt() as f32
}

/// `n_chan` channels filling 1200–1600 MHz, descending, `tsamp_s` sampling.
pub fn header(n_chan: usize, n_samples: u64, tsamp_s: f64) -> Header {
    header_band(n_chan, n_samples, tsamp_s, 1200.0, 1600.0)
}

/// `n_chan` channels filling `f_lo_mhz`–`f_hi_mhz`, descending, `tsamp_s` sampling.
pub fn header_band(
    n_chan: usize,
    n_samples: u64,
    tsamp_s: f64,
    f_lo_mhz: f64,
    f_hi_mhz: f64,
) -> Header {
    let bw = (f_hi_mhz - f_lo_mhz) / n_chan as f64;
    Header {
        source: "Test field".into(),
        telescope: "Imaginary Dish".into(),
        ra_deg: 123.4,
        dec_deg: -12.3,
        site: Site {
            name: "Imaginary Dish".into(),
            lon_deg: 20.0,
            lat_deg: -30.0,
            height_m: 1000.0,
        },
        start: UtcEpoch::new(60500, 3600.0),
        tsamp_s,
        freqs_mhz: (0..n_chan)
            .map(|i| f_hi_mhz - bw * (i as f64 + 0.5))
            .collect(),
        chan_bw_mhz: bw,
        weights: vec![1.0; n_chan],
        n_samples,
        nbits: 32,
        sefd_jy: Some(30.0),
        beam: None,
    }
}

/// Power noise `[time, channel]`: Gamma(ND, 1/ND), mean 1.
pub fn noise(h: &Header, seed: u64) -> Vec<f32> {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let g = Gamma::new(ND as f32, 1.0 / ND as f32).unwrap();
    (0..h.n_samples as usize * h.n_chan())
        .map(|_| g.sample(&mut rng))
        .collect()
}

/// Gaussian noise `[time, channel]` with the same mean and σ as [`noise`], for tests
/// of Gaussian tail probabilities (power noise is skewed).
pub fn gaussian_noise(h: &Header, seed: u64) -> Vec<f32> {
    let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
    let g = Normal::new(1.0f32, noise_sigma()).unwrap();
    (0..h.n_samples as usize * h.n_chan())
        .map(|_| g.sample(&mut rng))
        .collect()
}

/// A Gaussian burst with a flat spectrum scaled to an ideal boxcar S/N of `snr`
/// (the simulator's definition, `simulate::expected_snr`).
pub fn burst(h: &Header, t_inf_s: f64, dm: f64, fwhm_s: f64, snr: f64) -> Burst {
    let shape = Burst {
        t_inf_s,
        dm,
        width_s: fwhm_s,
        scatter_1ghz_s: 0.0,
        spectrum: Spectrum::PowerLaw { index: 0.0 },
        amplitude: 1.0,
    };
    with_expected_snr(h, &shape, snr).unwrap()
}

/// Adds `b` to `data` (`[time, channel]`, noise σ = [`noise_sigma`]) with the
/// simulator's signal model.
pub fn add(h: &Header, data: &mut Vec<f32>, b: &Burst) {
    let mut block = Block {
        start_sample: 0,
        overlap: 0,
        n_chan: h.n_chan(),
        data: std::mem::take(data),
    };
    add_burst(&mut block, h, b, &vec![noise_sigma(); h.n_chan()]);
    *data = block.data;
}

/// The data as a boxed source.
pub fn source(h: Header, data: Vec<f32>) -> Box<dyn SampleSource> {
    Box::new(MemorySource::new(h, data))
}

/// Collects written rows in memory (stands in for a file writer).
#[derive(Default)]
struct VecSink {
    rows: Vec<f32>,
}

impl SampleSink for VecSink {
    fn write_rows(&mut self, rows: &[f32]) -> burstbook::Result<()> {
        self.rows.extend_from_slice(rows);
        Ok(())
    }
    fn finish(self: Box<Self>) -> burstbook::Result<()> {
        Ok(())
    }
}

/// Every sample of a simulation, `[time, channel]`, as its file would hold them.
pub fn simulated_rows(sim: &Simulation) -> Vec<f32> {
    let mut sink = VecSink::default();
    write_observation(sim, &mut sink).unwrap();
    let rows = std::mem::take(&mut sink.rows);
    Box::new(sink).finish().unwrap();
    rows
}
