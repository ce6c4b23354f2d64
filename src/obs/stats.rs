//! Streaming statistics of an observation: whole-data and per-channel moments,
//! robust per-channel levels, and channels that look bad. Memory is one block plus
//! a bounded subsample per channel, whatever the file length.

use serde::Serialize;

use super::codec::all_finite;
use super::{BlockReader, Header, SampleSource};
use crate::error::Result;
use crate::robust::{MAD_TO_SIGMA, median_in_place};

/// Samples per channel kept (evenly spaced in time) for the robust statistics.
pub const ROBUST_SUBSAMPLE: usize = 2048;
/// A channel is flagged when its mean or standard deviation lies further than this
/// many robust standard deviations from the median over channels (common practice).
pub const OUTLIER_SIGMA: f64 = 5.0;
/// Fewer unmasked channels than this give no meaningful band median/MAD, so the
/// outlier test is skipped (common practice).
pub const MIN_CHANNELS_FOR_OUTLIERS: usize = 8;

/// Statistics of all samples together.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct DataStats {
    /// Finite samples counted.
    pub n_finite: u64,
    pub mean: f64,
    pub std: f64,
    pub min: f64,
    pub max: f64,
    pub nan_count: u64,
    pub inf_count: u64,
}

/// Statistics of one channel.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChannelStats {
    pub index: usize,
    pub freq_mhz: f64,
    pub weight: f32,
    pub mean: f64,
    pub std: f64,
    /// Median of the evenly spaced subsample.
    pub median: f64,
    /// 1.4826 × median absolute deviation of the subsample.
    pub robust_std: f64,
    /// NaN and infinite samples.
    pub non_finite: u64,
}

/// A channel that looks bad, with the reasons.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct BadChannel {
    pub index: usize,
    pub freq_mhz: f64,
    pub reasons: Vec<String>,
}

/// Everything `inspect` reports about the samples.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ObsStats {
    pub data: DataStats,
    pub channels: Vec<ChannelStats>,
    pub bad_channels: Vec<BadChannel>,
}

/// Accumulates statistics row by row.
pub struct StatsAccumulator {
    n_chan: usize,
    stride: u64,
    /// Per channel: first finite value (a shift that keeps the sums well conditioned);
    /// NaN until one is seen.
    shift: Vec<f64>,
    /// Whether every channel has its shift, so all-finite rows can take the fast path.
    all_shifted: bool,
    /// Rows added by the fast path (one finite value in every channel).
    fast_rows: u64,
    count: Vec<u64>,
    sum: Vec<f64>,
    sum_sq: Vec<f64>,
    non_finite: Vec<u64>,
    nan: u64,
    min: f64,
    max: f64,
    /// `[channel][kept sample]`.
    kept: Vec<Vec<f32>>,
}

impl StatsAccumulator {
    /// For `n_chan` channels and an expected `n_samples` rows (sets the subsample stride).
    pub fn new(n_chan: usize, n_samples: u64) -> Self {
        StatsAccumulator {
            n_chan,
            stride: n_samples.div_ceil(ROBUST_SUBSAMPLE as u64).max(1),
            shift: vec![f64::NAN; n_chan],
            all_shifted: false,
            fast_rows: 0,
            count: vec![0; n_chan],
            sum: vec![0.0; n_chan],
            sum_sq: vec![0.0; n_chan],
            non_finite: vec![0; n_chan],
            nan: 0,
            min: f64::INFINITY,
            max: f64::NEG_INFINITY,
            kept: vec![Vec::new(); n_chan],
        }
    }

    /// Adds `rows` (`[time, channel]`) whose first row is row `first_row` of the file.
    pub fn add_rows(&mut self, first_row: u64, rows: &[f32]) {
        self.add_rows_with(first_row, rows, true);
    }

    fn add_rows_with(&mut self, first_row: u64, rows: &[f32], allow_fast: bool) {
        for (t, row) in rows.chunks_exact(self.n_chan).enumerate() {
            if allow_fast && self.all_shifted && all_finite(row) {
                self.add_finite_row(row);
            } else {
                self.add_row_reference(row);
            }
            if (first_row + t as u64).is_multiple_of(self.stride) {
                for (kept, &v) in self.kept.iter_mut().zip(row) {
                    if v.is_finite() {
                        kept.push(v);
                    }
                }
            }
        }
    }

    /// Fast path for a row of finite values once every channel has its shift:
    /// branch-free zips that vectorise.
    fn add_finite_row(&mut self, row: &[f32]) {
        let n = row.len();
        let (sum, sum_sq, shift) = (&mut self.sum[..n], &mut self.sum_sq[..n], &self.shift[..n]);
        for c in 0..n {
            let d = row[c] as f64 - shift[c];
            sum[c] += d;
            sum_sq[c] += d * d;
        }
        let (lo, hi) = min_max(row);
        self.min = self.min.min(lo as f64);
        self.max = self.max.max(hi as f64);
        self.fast_rows += 1;
    }

    /// The plain per-value version: handles non-finite values and unset shifts.
    fn add_row_reference(&mut self, row: &[f32]) {
        for (c, &v) in row.iter().enumerate() {
            if !v.is_finite() {
                self.non_finite[c] += 1;
                self.nan += v.is_nan() as u64;
                continue;
            }
            let v64 = v as f64;
            if self.shift[c].is_nan() {
                self.shift[c] = v64;
            }
            let d = v64 - self.shift[c];
            self.count[c] += 1;
            self.sum[c] += d;
            self.sum_sq[c] += d * d;
            self.min = self.min.min(v64);
            self.max = self.max.max(v64);
        }
        self.all_shifted = self.shift.iter().all(|s| !s.is_nan());
    }

    /// The statistics, with bad channels judged against `header`'s weights.
    pub fn finish(mut self, header: &Header) -> ObsStats {
        let mut channels = Vec::with_capacity(self.n_chan);
        let (mut n, mut sum, mut sum_sq) = (0u64, 0.0, 0.0);
        for c in 0..self.n_chan {
            self.count[c] += self.fast_rows;
            let (mean, var) = moments(self.count[c], self.sum[c], self.sum_sq[c]);
            let mean = mean
                + if self.shift[c].is_nan() {
                    0.0
                } else {
                    self.shift[c]
                };
            // Pool the channels about zero for the whole-data moments.
            n += self.count[c];
            sum += mean * self.count[c] as f64;
            sum_sq += (var + mean * mean) * self.count[c] as f64;
            let (median, robust_std) = median_and_robust_std(&mut self.kept[c]);
            channels.push(ChannelStats {
                index: c,
                freq_mhz: header.freqs_mhz[c],
                weight: header.weights[c],
                mean,
                std: var.sqrt(),
                median,
                robust_std,
                non_finite: self.non_finite[c],
            });
        }
        let (mean, var) = moments(n, sum, sum_sq);
        let non_finite: u64 = self.non_finite.iter().sum();
        let data = DataStats {
            n_finite: n,
            mean,
            std: var.sqrt(),
            min: if n > 0 { self.min } else { f64::NAN },
            max: if n > 0 { self.max } else { f64::NAN },
            nan_count: self.nan,
            inf_count: non_finite - self.nan,
        };
        let bad_channels = find_bad_channels(&channels);
        ObsStats {
            data,
            channels,
            bad_channels,
        }
    }
}

/// Smallest and largest of finite, non-empty `values`. Eight independent lanes let
/// the compiler use SIMD min/max (a single running min is a serial chain).
fn min_max(values: &[f32]) -> (f32, f32) {
    let (mut lo, mut hi) = ([values[0]; 8], [values[0]; 8]);
    let chunks = values.chunks_exact(8);
    let tail = chunks.remainder();
    for chunk in chunks {
        for j in 0..8 {
            lo[j] = lo[j].min(chunk[j]);
            hi[j] = hi[j].max(chunk[j]);
        }
    }
    let fold = |init: f32, f: fn(f32, f32) -> f32| {
        lo.iter()
            .chain(hi.iter())
            .chain(tail)
            .fold(init, |a, &b| f(a, b))
    };
    (fold(values[0], f32::min), fold(values[0], f32::max))
}

/// Mean and population variance from a count, sum and sum of squares.
fn moments(n: u64, sum: f64, sum_sq: f64) -> (f64, f64) {
    if n == 0 {
        return (f64::NAN, f64::NAN);
    }
    let mean = sum / n as f64;
    (mean, (sum_sq / n as f64 - mean * mean).max(0.0))
}

/// Median and 1.4826 × MAD.
fn median_and_robust_std(values: &mut [f32]) -> (f64, f64) {
    let mut v: Vec<f64> = values.iter().map(|&x| x as f64).collect();
    let med = median_in_place(&mut v);
    let mut dev: Vec<f64> = v.iter().map(|x| (x - med).abs()).collect();
    (med, MAD_TO_SIGMA * median_in_place(&mut dev))
}

/// Channels masked in the file, with non-finite samples, constant, or whose mean or
/// std is an outlier (median/MAD over the unmasked channels, if there are at least
/// [`MIN_CHANNELS_FOR_OUTLIERS`]).
fn find_bad_channels(channels: &[ChannelStats]) -> Vec<BadChannel> {
    let live: Vec<&ChannelStats> = channels.iter().filter(|c| c.weight != 0.0).collect();
    let centre_scale = |get: fn(&ChannelStats) -> f64| {
        let mut v: Vec<f64> = live
            .iter()
            .map(|c| get(c))
            .filter(|x| x.is_finite())
            .collect();
        let (med, sigma) = {
            let med = median_in_place(&mut v);
            let mut dev: Vec<f64> = v.iter().map(|x| (x - med).abs()).collect();
            (med, MAD_TO_SIGMA * median_in_place(&mut dev))
        };
        // A floor so identical channels with one deviant still give a finite scale.
        (med, sigma.max(1e-6 * med.abs().max(1.0)))
    };
    let (mean_med, mean_sigma) = centre_scale(|c| c.mean);
    let (std_med, std_sigma) = centre_scale(|c| c.std);
    let mut bad = Vec::new();
    for c in channels {
        let mut reasons = Vec::new();
        if c.weight == 0.0 {
            reasons.push("weight 0 in the file".to_string());
        }
        if c.non_finite > 0 {
            reasons.push(format!("{} NaN/Inf samples", c.non_finite));
        }
        if c.std == 0.0 {
            reasons.push("constant".to_string());
        } else if c.weight != 0.0 && live.len() >= MIN_CHANNELS_FOR_OUTLIERS {
            let zm = (c.mean - mean_med) / mean_sigma;
            let zs = (c.std - std_med) / std_sigma;
            if zm.abs() > OUTLIER_SIGMA {
                reasons.push(format!("mean {:.4} is {zm:+.1} σ from the band", c.mean));
            }
            if zs.abs() > OUTLIER_SIGMA {
                reasons.push(format!("std {:.4} is {zs:+.1} σ from the band", c.std));
            }
        }
        if !reasons.is_empty() {
            bad.push(BadChannel {
                index: c.index,
                freq_mhz: c.freq_mhz,
                reasons,
            });
        }
    }
    bad
}

/// Streams `source` block by block and returns its statistics. `on_rows` is told
/// how many rows were just read (for a progress bar).
///
/// # Errors
/// Whatever the source reports.
pub fn compute<S: SampleSource>(source: S, mut on_rows: impl FnMut(u64)) -> Result<ObsStats> {
    let header = source.header().clone();
    let block_len = ((1 << 20) / header.n_chan()).max(1);
    let mut acc = StatsAccumulator::new(header.n_chan(), header.n_samples);
    for block in BlockReader::new(source, block_len, 0)? {
        let block = block?;
        acc.add_rows(block.start_sample, &block.data);
        on_rows(block.n_time() as u64);
    }
    Ok(acc.finish(&header))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::MemorySource;
    use crate::obs::header::tests::test_header;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, Normal};

    #[test]
    fn moments_match_a_direct_computation() {
        let (n_chan, n_time) = (5, 1001);
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let noise = Normal::new(100.0f32, 4.0).unwrap();
        let mut h = test_header(n_chan, n_time);
        let mut data: Vec<f32> = (0..n_chan * n_time as usize)
            .map(|_| noise.sample(&mut rng))
            .collect();
        data[7] = f32::NAN;
        data[13] = f32::INFINITY;
        h.weights[4] = 0.0;
        let src = MemorySource::new(h, data.clone());
        let mut rows_seen = 0;
        let s = compute(src, |n| rows_seen += n).unwrap();
        assert_eq!(rows_seen, n_time);
        assert_eq!((s.data.nan_count, s.data.inf_count), (1, 1));
        let finite: Vec<f64> = data
            .iter()
            .filter(|v| v.is_finite())
            .map(|&v| v as f64)
            .collect();
        let mean = finite.iter().sum::<f64>() / finite.len() as f64;
        let var = finite.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / finite.len() as f64;
        assert!((s.data.mean - mean).abs() < 1e-9);
        assert!((s.data.std - var.sqrt()).abs() < 1e-9);
        let ch0: Vec<f64> = data.iter().step_by(n_chan).map(|&v| v as f64).collect();
        let m0 = ch0.iter().sum::<f64>() / ch0.len() as f64;
        assert!((s.channels[0].mean - m0).abs() < 1e-9);
        assert!(
            (s.channels[0].robust_std - 4.0).abs() < 0.5,
            "{}",
            s.channels[0].robust_std
        );
        let bad: Vec<usize> = s.bad_channels.iter().map(|b| b.index).collect();
        // Five channels are too few for the outlier test: only the definite problems.
        assert_eq!(bad, [2, 3, 4], "NaN in 2, Inf in 3, weight 0 in 4");
    }

    #[test]
    fn flags_outlying_and_constant_channels() {
        let (n_chan, n_time) = (16, 400);
        let mut rng = ChaCha8Rng::seed_from_u64(4);
        let noise = Normal::new(0.0f32, 1.0).unwrap();
        let mut data: Vec<f32> = (0..n_chan * n_time)
            .map(|_| 50.0 + noise.sample(&mut rng))
            .collect();
        for t in 0..n_time {
            data[t * n_chan + 5] *= 3.0; // mean 150
            data[t * n_chan + 9] = 50.0 + 10.0 * (data[t * n_chan + 9] - 50.0); // std 10
            data[t * n_chan + 12] = 50.0;
        }
        let h = test_header(n_chan, n_time as u64);
        let s = compute(MemorySource::new(h, data), |_| {}).unwrap();
        let bad: Vec<usize> = s.bad_channels.iter().map(|b| b.index).collect();
        assert_eq!(bad, [5, 9, 12]);
        assert!(s.bad_channels[2].reasons[0].contains("constant"));
    }

    #[test]
    fn fast_path_matches_reference() {
        let mut rng = ChaCha8Rng::seed_from_u64(5);
        let noise = Normal::new(20.0f32, 3.0).unwrap();
        for (n_chan, n_time) in [(1usize, 1u64), (7, 50), (13, 333), (64, 9)] {
            let h = test_header(n_chan, n_time);
            let mut data: Vec<f32> = (0..n_chan * n_time as usize)
                .map(|_| noise.sample(&mut rng))
                .collect();
            if data.len() > 20 {
                data[17] = f32::NAN; // forces some rows through the reference path
            }
            let (mut fast, mut slow) = (
                StatsAccumulator::new(n_chan, n_time),
                StatsAccumulator::new(n_chan, n_time),
            );
            for (i, chunk) in data.chunks(n_chan * 4).enumerate() {
                fast.add_rows_with(4 * i as u64, chunk, true);
                slow.add_rows_with(4 * i as u64, chunk, false);
            }
            let (f, s) = (fast.finish(&h), slow.finish(&h));
            assert_eq!(f.data.n_finite, s.data.n_finite);
            assert_eq!((f.data.min, f.data.max), (s.data.min, s.data.max));
            assert!((f.data.mean - s.data.mean).abs() < 1e-9);
            for (a, b) in f.channels.iter().zip(&s.channels) {
                assert!((a.mean - b.mean).abs() < 1e-9 && (a.std - b.std).abs() < 1e-9);
                assert_eq!((a.median, a.robust_std), (b.median, b.robust_std));
            }
        }
    }
}
