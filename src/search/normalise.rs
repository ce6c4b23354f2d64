//! Normalisation before and after dedispersion: subtract a running-median baseline
//! (window much longer than the widest boxcar) and divide by a robust σ
//! (1.4826 × MAD), so every channel, and later every dedispersed series, has zero
//! mean and unit variance in its noise (common practice).

use crate::robust::{Baseline, median_sigma};

/// Values a channel's σ is measured on: σ to about 1.3 %.
pub const CHANNEL_SIGMA_VALUES: usize = 8192;

/// Values a dedispersed series' σ is measured on: it only sets the scale, since the
/// matched filter measures the noise of every boxcar width itself.
pub const SERIES_SIGMA_VALUES: usize = 2048;

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
