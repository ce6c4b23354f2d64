//! Synthetic recordings: dispersed, scattered bursts on Gaussian noise with a bandpass,
//! plus interference, streamed to any [`crate::obs::SampleSink`].
//!
//! The signal model ([`Burst`], [`add_burst`]) and the S/N definition
//! ([`expected_snr`]) are public so the injection stage adds bursts to real data with
//! exactly the same physics and the same S/N bookkeeping.
//!
//! ```
//! use burstbook::simulate::{Scenario, Simulation, Generator};
//! let text = r#"
//! [observation]
//! source = "Invented-1"
//! telescope = "Toy Dish"
//! ra_deg = 10.0
//! dec_deg = 20.0
//! start_mjd = 61000.5
//! length_s = 0.5
//! tsamp_s = 1e-3
//! [site]
//! name = "Toy Dish"
//! lon_deg = 10.0
//! lat_deg = 45.0
//! height_m = 100.0
//! [band]
//! first_chan_mhz = 1500.0
//! chan_step_mhz = -25.0
//! n_chan = 8
//! [noise]
//! nbits = 32
//! mean = 0.0
//! sigma = 1.0
//! [[burst]]
//! t_inf_s = 0.1
//! dm = 100.0
//! width_ms = 2.0
//! snr = 20.0
//! "#;
//! let scenario = Scenario::parse(text).unwrap();
//! let sim = Simulation::new(&scenario, 7).unwrap();
//! assert!((sim.truth[0].expected_snr.unwrap() - 20.0).abs() < 1e-6);
//! let mut generator = Generator::new(&sim);
//! let first = generator.next_chunk(100).unwrap();
//! assert_eq!(first.len(), 100 * 8);
//! ```

mod burst;
mod generate;
mod noise;
mod plan;
mod profile;
mod scenario;
mod snr;

pub use burst::{Burst, Spectrum, add_burst};
pub use generate::{CHUNK_ROWS, Generator, truth_path, write_observation, write_truth};
pub use noise::{bandpass_gains, quantise};
pub use plan::{Carrier, Simulation, TruthKind, TruthRow};
pub use profile::{Emg, FWHM_PER_SIGMA};
pub use scenario::{
    BandSpec, BandpassSpec, BurstSpec, ImpulseSpec, NarrowbandSpec, NoiseSpec, ObservationSpec,
    RandomBurstsSpec, RfiSpec, Scenario, SiteSpec, TrainSpec,
};
pub use snr::{
    BoxcarPeak, N_POL, amplitude_from_fluence, boxcar_snr, dedispersed_signal, expected_snr,
    expected_snr_detail, fluence_from_amplitude, recorded_snr, with_expected_snr,
};

/// A small header for tests: `n_chan` channels descending from 1600 MHz over 400 MHz,
/// 64 µs samples, built through the scenario path.
#[cfg(test)]
pub(crate) fn test_header(n_chan: usize, n_samples: u64) -> crate::obs::Header {
    let bw = 400.0 / n_chan as f64;
    let text = format!(
        "[observation]\nsource = \"T\"\ntelescope = \"T\"\nra_deg = 1.0\ndec_deg = 2.0\n\
         start_mjd = 61000.0\nlength_s = {}\ntsamp_s = 64e-6\n\
         [site]\nname = \"T\"\nlon_deg = 0.0\nlat_deg = 0.0\nheight_m = 0.0\n\
         [band]\nfirst_chan_mhz = {}\nchan_step_mhz = {}\nn_chan = {n_chan}\n\
         [noise]\nnbits = 32\nmean = 0.0\nsigma = 1.0\n",
        n_samples as f64 * 64e-6,
        1600.0 - bw / 2.0,
        -bw
    );
    let h = Scenario::parse(&text).expect("test scenario").header();
    assert_eq!(h.n_samples, n_samples);
    h
}
