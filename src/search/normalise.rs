//! Normalisation before and after dedispersion: subtract a running-median baseline
//! (window much longer than the widest boxcar) and divide by a robust σ
//! (1.4826 × MAD), so every channel, and later every dedispersed series, has zero
//! mean and unit variance in its noise (common practice).

use std::sync::{Mutex, OnceLock};

use crate::dedisperse::Dedispersed;
use crate::dedisperse::bf16::{self, Bf16};
use crate::robust::{Baseline, median_sigma};

/// Values a channel's σ is measured on: σ to about 1.3 %.
pub const CHANNEL_SIGMA_VALUES: usize = 8192;

/// Values a dedispersed series' σ is measured on: it only sets the scale (to about
/// 6 %), since the matched filter measures the noise of every boxcar width itself;
/// 2048 values cost the filter 3–8 % more time for nothing (measured).
pub const SERIES_SIGMA_VALUES: usize = 512;

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

/// A block's dedispersed series, each normalised as the matched filter normalised it
/// ([`normalise_series`] with [`SERIES_SIGMA_VALUES`]) when first read, and stored
/// back in place as bfloat16: the filter leaves the series as they are, and triage
/// reads only those near a candidate. In place, so that however many series triage
/// reads, the block needs no memory beyond its output. Shared by threads; each
/// series is normalised once.
pub struct NormalisedSeries<'a> {
    steps: Vec<StepSeries<'a>>,
    /// Baseline window in input samples.
    baseline_len: usize,
}

/// One plan step's series for [`NormalisedSeries`].
struct StepSeries<'a> {
    dms: &'a [f64],
    downsample: usize,
    rows: Vec<LazyRow<'a>>,
}

/// A series not yet normalised (`raw`, taken by the first reader) or normalised.
struct LazyRow<'a> {
    raw: Mutex<Option<&'a mut [Bf16]>>,
    normalised: OnceLock<&'a [Bf16]>,
}

impl<'a> NormalisedSeries<'a> {
    /// The series of every step of `outs`, to be normalised over `baseline_len` input
    /// samples (divided by each step's downsampling) when first read.
    pub fn new(outs: &'a mut [Dedispersed], baseline_len: usize) -> Self {
        let steps = outs
            .iter_mut()
            .map(|out| StepSeries {
                dms: &out.dms,
                downsample: out.downsample,
                rows: out
                    .data
                    .chunks_mut(out.n_time.max(1))
                    .zip(&out.row_lens)
                    .map(|(row, &len)| LazyRow {
                        raw: Mutex::new(Some(&mut row[..len])),
                        normalised: OnceLock::new(),
                    })
                    .collect(),
            })
            .collect();
        NormalisedSeries {
            steps,
            baseline_len,
        }
    }

    /// Trial DMs of step `step`, pc cm⁻³.
    pub fn dms(&self, step: usize) -> &'a [f64] {
        self.steps[step].dms
    }

    /// Input samples per sample of step `step`.
    pub fn downsample(&self, step: usize) -> usize {
        self.steps[step].downsample
    }

    /// Trial `r` of step `step`, normalised, into `out`.
    pub fn row_into(&self, step: usize, r: usize, out: &mut Vec<f32>) {
        let s = &self.steps[step];
        let lazy = &s.rows[r];
        let stored = lazy.normalised.get_or_init(|| {
            let raw = lazy.raw.lock().map(|mut raw| raw.take());
            // Only the one initialiser takes the row, so it is always there.
            let row = raw.ok().flatten().unwrap_or_default();
            bf16::decode_into(row, out);
            let baseline = (self.baseline_len / s.downsample).max(1);
            normalise_series(out, baseline, SERIES_SIGMA_VALUES, &mut Vec::new());
            bf16::encode(out, row);
            row
        });
        bf16::decode_into(stored, out);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dedisperse::bf16::{from_bf16, to_bf16};

    // Each series read through the lazy view equals the series normalised directly,
    // at the step's own baseline, then stored as bfloat16, however often and in
    // whatever order it is read.
    #[test]
    fn lazily_normalised_rows_match_direct_normalisation() {
        let raw = |n: usize, k: usize| -> Vec<f32> {
            (0..n)
                .map(|t| 5.0 + ((t * (7 + k)) % 23) as f32 + 0.01 * t as f32)
                .collect()
        };
        let step = |downsample: usize, n: usize| Dedispersed {
            dms: vec![10.0, 20.0, 30.0],
            downsample,
            n_time: n,
            row_lens: vec![n; 3],
            data: (0..3).flat_map(|k| raw(n, k)).map(to_bf16).collect(),
        };
        let mut outs = vec![step(1, 4000), step(4, 1000)];
        let direct: Vec<Vec<Vec<f32>>> = outs
            .iter()
            .map(|out| {
                (0..3)
                    .map(|r| {
                        let mut row = out.row_f32(r);
                        let baseline = 1200 / out.downsample;
                        normalise_series(&mut row, baseline, SERIES_SIGMA_VALUES, &mut Vec::new());
                        row.iter()
                            .map(|&v| from_bf16(to_bf16(v)))
                            .collect::<Vec<f32>>()
                    })
                    .collect()
            })
            .collect();
        let series = NormalisedSeries::new(&mut outs, 1200);
        assert_eq!(
            (series.dms(1), series.downsample(1)),
            (&[10.0, 20.0, 30.0][..], 4)
        );
        let mut row = Vec::new();
        for (s, rows) in direct.iter().enumerate() {
            for r in [2, 0, 1, 2] {
                series.row_into(s, r, &mut row);
                assert_eq!(row, rows[r], "step {s} row {r}");
            }
        }
    }
}
