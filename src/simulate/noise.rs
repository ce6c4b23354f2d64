//! Receiver noise: a smooth bandpass gain per channel, Gaussian noise, quantisation.

use std::f64::consts::PI;

use super::scenario::BandpassSpec;
use crate::error::{Error, Result};
use crate::obs::Header;

/// Smallest bandpass gain allowed anywhere; below it a channel would be all noise-free
/// quantisation steps.
const MIN_GAIN: f64 = 0.05;

/// The gain of each channel (data order): a linear tilt, a sinusoidal ripple and a
/// raised-cosine roll-off at both band edges, multiplied together.
///
/// # Errors
/// [`Error::Config`] if the gain drops below 0.05 in some channel.
pub fn bandpass_gains(header: &Header, spec: &BandpassSpec) -> Result<Vec<f64>> {
    let half = header.chan_bw_mhz / 2.0;
    let lo = header.freq_lo_mhz() - half;
    let width = header.bandwidth_mhz();
    let edge_gain = spec.edge_gain.unwrap_or(0.5);
    let gains: Vec<f64> = header
        .freqs_mhz
        .iter()
        .map(|&f| {
            let x = (f - lo) / width;
            let tilt = 1.0 + spec.tilt * (x - 0.5);
            let ripple = spec.ripple_period_mhz.map_or(1.0, |p| {
                1.0 + spec.ripple_fraction * (2.0 * PI * (f - lo) / p).sin()
            });
            let r = spec.edge_rolloff_fraction;
            let edge_dist = x.min(1.0 - x);
            let rolloff = if r > 0.0 && edge_dist < r {
                edge_gain + (1.0 - edge_gain) * (0.5 * PI * edge_dist / r).sin().powi(2)
            } else {
                1.0
            };
            tilt * ripple * rolloff
        })
        .collect();
    match gains
        .iter()
        .position(|g| !(g.is_finite() && *g >= MIN_GAIN))
    {
        Some(c) => Err(Error::Config(format!(
            "bandpass gain {:.3} in channel {c} is below {MIN_GAIN}: reduce tilt, ripple or roll-off",
            gains[c]
        ))),
        None => Ok(gains),
    }
}

/// Converts a value to what an `nbits` file stores: 8- and 16-bit values are rounded
/// and clipped to the digitiser range 0 to 2^nbits − 1; 32-bit values pass
/// unchanged. The rounding is done in f64, before the conversion to f32, which could
/// otherwise move a value just below a half onto it and round it up.
pub fn quantise(value: f64, nbits: u32) -> f32 {
    match max_code(nbits) {
        Some(max) => value.round().clamp(0.0, max) as f32,
        None => value as f32,
    }
}

/// The largest value an unsigned integer sample of `nbits` holds (255 for 8 bits,
/// 65535 for 16), or `None` for float samples.
pub fn max_code(nbits: u32) -> Option<f64> {
    (nbits < 32).then(|| ((1u64 << nbits) - 1) as f64)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::simulate::test_header;

    #[test]
    fn bandpass_shapes() {
        let h = test_header(100, 10);
        let flat = bandpass_gains(&h, &BandpassSpec::default()).unwrap();
        assert!(flat.iter().all(|&g| g == 1.0));
        let spec = BandpassSpec {
            tilt: -0.4,
            edge_rolloff_fraction: 0.1,
            edge_gain: Some(0.3),
            ..BandpassSpec::default()
        };
        let g = bandpass_gains(&h, &spec).unwrap();
        // Descending band: channel 0 is the top, where a negative tilt lowers the gain.
        assert!(
            g[0] < 0.4 && g[99] < 0.5 && (g[50] - 1.0).abs() < 0.01,
            "{g:?}"
        );
        let too_much = BandpassSpec {
            tilt: -3.0,
            ..BandpassSpec::default()
        };
        assert!(bandpass_gains(&h, &too_much).is_err());
    }

    #[test]
    fn quantisation_rounds_and_clips() {
        assert_eq!(quantise(96.4, 8), 96.0);
        assert_eq!(quantise(-3.0, 8), 0.0);
        assert_eq!(quantise(300.0, 8), 255.0);
        assert_eq!(quantise(96.4, 32), 96.4);
        // 16-bit samples: rounded and clipped to 0–65535 (common practice)
        assert_eq!(quantise(3000.6, 16), 3001.0);
        assert_eq!(quantise(70000.0, 16), 65535.0);
        assert_eq!(quantise(-2.0, 16), 0.0);
        assert_eq!(max_code(8), Some(255.0));
        assert_eq!(max_code(32), None);
        // 2.4999999999 becomes 2.5 in f32: rounding after the conversion would give 3.
        assert_eq!(2.499_999_999_9f64 as f32, 2.5);
        assert_eq!(quantise(2.499_999_999_9, 8), 2.0);
        assert_eq!(quantise(254.499_999, 8), 254.0);
        assert_eq!(quantise(f64::INFINITY, 8), 255.0);
        assert_eq!(quantise(f64::NEG_INFINITY, 8), 0.0);
        assert!(quantise(f64::NAN, 8).is_nan());
    }
}
