//! Shared by the report and review end-to-end tests: a synthetic observation on disk.

#![allow(dead_code)] // each test crate uses a different subset

use std::path::Path;

use burstbook::dedisperse::channel_delays;
use burstbook::obs::{Container, Header, Site, UtcEpoch};
use burstbook::units::delay_to_infinity_s;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

pub const N_CHAN: usize = 64;
pub const N_TIME: usize = 8000;
pub const TSAMP_S: f64 = 1e-3;
pub const DM: f64 = 250.0;
pub const T_TOP: usize = 4000;

pub fn header() -> Header {
    let bw = 400.0 / N_CHAN as f64;
    let site = Site {
        name: "Test Dish".into(),
        lon_deg: 5.0,
        lat_deg: 50.0,
        height_m: 10.0,
    };
    Header {
        source: "TESTSRC-A".into(),
        telescope: site.name.clone(),
        ra_deg: 12.0,
        dec_deg: -30.0,
        site,
        start: UtcEpoch::new(60100, 3600.0),
        tsamp_s: TSAMP_S,
        freqs_mhz: (0..N_CHAN)
            .map(|i| 1600.0 - bw * (i as f64 + 0.5))
            .collect(),
        chan_bw_mhz: bw,
        weights: (0..N_CHAN)
            .map(|c| if c == 20 { 0.0 } else { 1.0 })
            .collect(),
        n_samples: N_TIME as u64,
        nbits: 32,
        sefd_jy: None,
        beam: None,
    }
}

/// Writes a native observation with one bright dispersed burst; returns the
/// candidate's t_inf_s.
/// MJD of `t_s` seconds after the start of [`header`]'s recording (a candidate's
/// `mjd_inf` for its `t_inf_s`).
pub fn mjd_at(t_s: f64) -> f64 {
    header().start.plus_seconds(t_s).to_mjd_f64()
}

pub fn write_observation(path: &Path) -> f64 {
    let h = header();
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let noise = Normal::new(0.0f32, 1.0).unwrap();
    let mut data: Vec<f32> = (0..N_TIME * N_CHAN)
        .map(|_| 20.0 + noise.sample(&mut rng))
        .collect();
    for (c, d) in channel_delays(&h.freqs_mhz, DM, TSAMP_S)
        .into_iter()
        .enumerate()
    {
        for t in T_TOP + d..T_TOP + d + 3 {
            data[t * N_CHAN + c] += 3.0;
        }
    }
    let mut sink = burstbook::obs::create(path, &h, Container::Native).unwrap();
    sink.write_rows(&data).unwrap();
    sink.finish().unwrap();
    T_TOP as f64 * TSAMP_S - delay_to_infinity_s(DM, h.freq_hi_mhz())
}
