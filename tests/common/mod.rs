//! Test data for the search tests: Gamma-distributed power noise (mean 1, N·d = 50,
//! as detected channelised data; detection notes §6) and Gaussian dispersed pulses.
//! Stand-in until the simulator module lands.
#![allow(dead_code)]

use burstbook::obs::{Header, MemorySource, SampleSource, Site, UtcEpoch};
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

/// A dispersed pulse to add to data.
#[derive(Debug, Clone, Copy)]
pub struct Pulse {
    /// Arrival of the pulse peak at infinite frequency, seconds after the first
    /// sample's start.
    pub t_inf_s: f64,
    /// DM in pc cm⁻³.
    pub dm: f64,
    /// FWHM in seconds.
    pub fwhm_s: f64,
    /// Peak amplitude per channel in units of the noise σ.
    pub amplitude: f64,
}

/// Adds `p` to channels `chans` of `data` (`[time, channel]`): in each channel a
/// Gaussian centred at t_inf + k·DM/ν², with ν the channel centre; sample i covers
/// [i·t_s, (i+1)·t_s) and is given the profile at its centre.
pub fn add_pulse(h: &Header, data: &mut [f32], p: Pulse, chans: std::ops::Range<usize>) {
    let n_chan = h.n_chan();
    let sigma_t = p.fwhm_s / (8.0 * 2f64.ln()).sqrt();
    let amp = p.amplitude * f64::from(noise_sigma());
    for c in chans {
        let centre = p.t_inf_s + K_HANDBOOK_S_MHZ2 * p.dm / h.freqs_mhz[c].powi(2);
        let lo = ((centre - 6.0 * sigma_t) / h.tsamp_s).floor().max(0.0) as usize;
        let hi = (((centre + 6.0 * sigma_t) / h.tsamp_s).ceil() as usize).min(h.n_samples as usize);
        for i in lo..hi {
            let t = (i as f64 + 0.5) * h.tsamp_s;
            let g = (-0.5 * ((t - centre) / sigma_t).powi(2)).exp();
            data[i * n_chan + c] += (amp * g) as f32;
        }
    }
}

/// S/N of `p` (all `n_chan` channels) through an ideal matched filter at its true DM:
/// a·√(N·Σg²) in noise units, Σg² ≈ σ_t√π/t_s samples.
pub fn matched_filter_snr(h: &Header, p: Pulse, n_chan: usize) -> f64 {
    let sigma_samples = p.fwhm_s / (8.0 * 2f64.ln()).sqrt() / h.tsamp_s;
    p.amplitude * (n_chan as f64 * sigma_samples * std::f64::consts::PI.sqrt()).sqrt()
}

/// The data as a boxed source.
pub fn source(h: Header, data: Vec<f32>) -> Box<dyn SampleSource> {
    Box::new(MemorySource::new(h, data))
}
