//! Normalisation before and after dedispersion: subtract a running-median baseline
//! (window much longer than the widest boxcar) and divide by a robust σ
//! (1.4826 × MAD), so every channel, and later every dedispersed series, has zero
//! mean and unit variance in its noise (common practice).

use ndarray::{Array2, ArrayView2};
use rayon::prelude::*;

use crate::robust::{Baseline, median_sigma};

/// Values a channel's σ is measured on: σ to about 1.3 %.
pub const CHANNEL_SIGMA_VALUES: usize = 8192;

/// Values a dedispersed series' σ is measured on: it only sets the scale, since the
/// matched filter measures the noise of every boxcar width itself.
pub const SERIES_SIGMA_VALUES: usize = 2048;

/// Side of the square tiles in which a block is transposed (16 KiB, in L1 cache).
const TILE: usize = 64;

/// Subtracts the running baseline of `series` and divides by its robust σ from at
/// most about `sigma_values` evenly strided values, falling back to the standard
/// deviation when the MAD is zero (coarsely quantised data), in one pass over the
/// series. Returns the σ used; 0 means the series is constant and was set to zero.
pub fn normalise_series(
    series: &mut [f32],
    baseline_len: usize,
    sigma_values: usize,
    scratch: &mut Vec<f32>,
) -> f32 {
    match series_level(series, baseline_len, sigma_values, scratch) {
        Some((baseline, sigma)) => {
            baseline.subtract_scaled(series, 1.0 / sigma);
            sigma
        }
        None => {
            series.fill(0.0);
            0.0
        }
    }
}

/// The running baseline and robust σ that [`normalise_series`] removes, without
/// changing the series; `None` for an empty or constant series.
pub fn series_level(
    series: &[f32],
    baseline_len: usize,
    sigma_values: usize,
    scratch: &mut Vec<f32>,
) -> Option<(Baseline, f32)> {
    if series.is_empty() {
        return None;
    }
    let baseline = Baseline::piecewise_median(series, baseline_len, scratch);
    let stride = (series.len() / sigma_values.max(1)).max(1);
    let mut strided = Vec::with_capacity(series.len().div_ceil(stride));
    baseline.strided_residuals(series, stride, &mut strided);
    let (_, mut sigma) = median_sigma(&strided, 1, scratch);
    if sigma.is_nan() || sigma <= 0.0 {
        let n = series.len() as f64;
        let all = (0..series.len()).map(|t| f64::from(series[t] - baseline.at(t)));
        let mean = all.clone().sum::<f64>() / n;
        sigma = (all.map(|v| (v - mean).powi(2)).sum::<f64>() / n).sqrt() as f32;
    }
    (sigma > 0.0 && sigma.is_finite()).then_some((baseline, sigma))
}

/// Transposes a raw block (`[time, channel]`) to `[channel, time]` and normalises
/// each unmasked channel with [`normalise_series`], in parallel over channels.
/// Masked channels are zero; a channel found constant is added to `mask`.
pub fn normalise_channels(
    raw: ArrayView2<'_, f32>,
    mask: &mut [bool],
    baseline_len: usize,
) -> Array2<f32> {
    let (n_time, n_chan) = raw.dim();
    let mut out = Array2::<f32>::zeros((n_chan, n_time));
    if n_time == 0 {
        return out;
    }
    let raw = raw.as_standard_layout();
    let raw = raw.as_slice().expect("standard layout is contiguous");
    let rows = out.as_slice_mut().expect("a new array is contiguous");
    // Tiles of TILE channels × TILE samples: reads and writes both stay in cache.
    rows.par_chunks_mut(TILE * n_time)
        .enumerate()
        .for_each(|(g, group)| {
            let c0 = g * TILE;
            let n_c = group.len() / n_time;
            for t0 in (0..n_time).step_by(TILE) {
                for t in t0..(t0 + TILE).min(n_time) {
                    let line = &raw[t * n_chan + c0..t * n_chan + c0 + n_c];
                    for (k, &v) in line.iter().enumerate() {
                        group[k * n_time + t] = v;
                    }
                }
            }
        });
    rows.par_chunks_mut(n_time)
        .zip(mask.par_iter_mut())
        .for_each_init(Vec::new, |scratch, (series, masked)| {
            if *masked {
                series.fill(0.0);
            } else if normalise_series(series, baseline_len, CHANNEL_SIGMA_VALUES, scratch) == 0.0 {
                *masked = true;
            }
        });
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    #[test]
    fn channels_come_out_zero_mean_unit_variance() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2);
        let n_time = 20_000;
        let raw = Array2::from_shape_fn((n_time, 5), |(t, c)| {
            let drift = 0.001 * t as f32; // slow baseline drift
            let sd = 1.0 + c as f32;
            100.0 * c as f32 + drift + Normal::new(0.0, sd).unwrap().sample(&mut rng)
        });
        let mut raw = raw;
        raw.column_mut(3).fill(7.0); // constant: masked
        let mut mask = vec![false, false, false, false, true];
        let out = normalise_channels(raw.view(), &mut mask, 2000);
        assert_eq!(mask, vec![false, false, false, true, true]);
        for c in 0..3 {
            let row = out.row(c);
            let mean = row.sum() / n_time as f32;
            let var = row.iter().map(|v| (v - mean).powi(2)).sum::<f32>() / n_time as f32;
            // The mean is the average of the run medians' errors, 1.25/√n_time each
            // over all runs together (Gaussian median efficiency, common practice).
            assert!(
                mean.abs() < 4.0 * 1.25 / (n_time as f32).sqrt(),
                "c={c} mean {mean}"
            );
            assert!((var - 1.0).abs() < 0.04, "c={c} var {var}");
        }
        assert!(out.row(3).iter().all(|&v| v == 0.0));
    }
}
