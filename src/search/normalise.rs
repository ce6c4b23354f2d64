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
    if series.is_empty() {
        return 0.0;
    }
    let baseline = Baseline::piecewise_median(series, baseline_len, scratch);
    let stride = (series.len() / sigma_values.max(1)).max(1);
    let residuals = |t: usize| series[t] - baseline.at(t);
    let strided: Vec<f32> = (0..series.len()).step_by(stride).map(residuals).collect();
    let (_, mut sigma) = median_sigma(&strided, 1, scratch);
    if sigma.is_nan() || sigma <= 0.0 {
        let n = series.len() as f64;
        let all = (0..series.len()).map(|t| f64::from(residuals(t)));
        let mean = all.clone().sum::<f64>() / n;
        sigma = (all.map(|v| (v - mean).powi(2)).sum::<f64>() / n).sqrt() as f32;
    }
    if !(sigma > 0.0 && sigma.is_finite()) {
        series.fill(0.0);
        return 0.0;
    }
    baseline.subtract_scaled(series, 1.0 / sigma);
    sigma
}
