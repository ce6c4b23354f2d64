//! Each channel's power sums over consecutive runs of a block's samples: one pass over
//! the block that serves both the channel statistics and spectral kurtosis.
//!
//! The channel statistics are taken over all runs but the few with the largest
//! variance in each channel ([`RunSums::trimmed_stats`]). A bright narrow-band burst
//! raises the variance of its few channels in the one or two runs it falls in; over a
//! whole block that was enough to make those channels stand out from their neighbours
//! by more than the threshold, and masking them cut the burst's S/N by up to three
//! quarters (docs/search.md, step 2). Interference that lasts longer than a pulse
//! raises more runs than are left out, and is still flagged.

use ndarray::{ArrayView2, s};
use rayon::prelude::*;

use super::channel_stats::{ChannelStats, add_power_sums};
use crate::obs::Sample;

/// `(Σx, Σx²)` of every channel over consecutive runs of `m` samples of one block; the
/// last run holds the samples after the last whole run, if any.
#[derive(Debug, Clone)]
pub struct RunSums {
    m: usize,
    n_chan: usize,
    /// Samples in each run: `m`, but for a shorter last run.
    lens: Vec<usize>,
    /// `[run][channel]`.
    sums: Vec<(f64, f64)>,
}

impl RunSums {
    /// Measures a raw block (`[time, channel]`) in parallel over runs of `m` samples; a
    /// block shorter than `m` is one run.
    pub fn measure<T: Sample>(raw: ArrayView2<'_, T>, m: usize) -> Self {
        let (n_time, n_chan) = raw.dim();
        let m = m.min(n_time).max(1);
        let lens: Vec<usize> = (0..n_time.div_ceil(m))
            .map(|r| m.min(n_time - r * m))
            .collect();
        let mut s1 = vec![0.0; lens.len() * n_chan];
        let mut s2 = vec![0.0; lens.len() * n_chan];
        s1.par_chunks_mut(n_chan.max(1))
            .zip(s2.par_chunks_mut(n_chan.max(1)))
            .enumerate()
            .for_each(|(r, (s1, s2))| {
                add_power_sums(raw.slice(s![r * m..(r * m + m).min(n_time), ..]), s1, s2);
            });
        let sums = s1.into_iter().zip(s2).collect();
        RunSums {
            m,
            n_chan,
            lens,
            sums,
        }
    }

    /// Samples per whole run.
    pub fn m(&self) -> usize {
        self.m
    }

    /// Channels.
    pub fn n_chan(&self) -> usize {
        self.n_chan
    }

    /// Channel `c`'s sums over each whole run of `m` samples.
    pub fn whole_runs(&self, c: usize) -> impl Iterator<Item = (f64, f64)> + '_ {
        self.lens
            .iter()
            .zip(self.sums.iter().skip(c).step_by(self.n_chan.max(1)))
            .filter(|&(&len, _)| len == self.m)
            .map(|(_, &sums)| sums)
    }

    /// How many runs [`RunSums::trimmed_stats`] should leave out so that one pulse of
    /// `pulse_len` samples, wherever it falls, is left out whole: the runs it can
    /// touch. Never more than a quarter of the runs, so the rest still measure the
    /// channel.
    pub fn runs_touched_by(&self, pulse_len: usize) -> usize {
        (pulse_len.div_ceil(self.m) + 1).min(self.lens.len() / 4)
    }

    /// Each channel's mean and standard deviation over its runs but the `drop` of
    /// largest variance: what a short pulse cannot move. With `drop` = 0 it is the
    /// plain statistics of the whole block. The variances of pure-noise channels are
    /// trimmed alike, so comparing a channel with its neighbours stays fair.
    pub fn trimmed_stats(&self, drop: usize) -> ChannelStats {
        let n_runs = self.lens.len();
        let drop = drop.min(n_runs.saturating_sub(1));
        let mut s1 = vec![0.0; self.n_chan];
        let mut s2 = vec![0.0; self.n_chan];
        let mut n = vec![0usize; self.n_chan];
        let mut order: Vec<(f64, usize)> = Vec::with_capacity(n_runs);
        for c in 0..self.n_chan {
            order.clear();
            order.extend((0..n_runs).map(|r| {
                let (a, b) = self.sums[r * self.n_chan + c];
                let len = self.lens[r] as f64;
                (b / len - (a / len).powi(2), r)
            }));
            if drop > 0 {
                order.select_nth_unstable_by(n_runs - drop, |x, y| x.0.total_cmp(&y.0));
            }
            for &(_, r) in &order[..n_runs - drop] {
                let (a, b) = self.sums[r * self.n_chan + c];
                s1[c] += a;
                s2[c] += b;
                n[c] += self.lens[r];
            }
        }
        ChannelStats::from_sums(&s1, &s2, &n)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::clean::channel_stats::flag_outliers;
    use ndarray::Array2;
    use rand::{Rng, SeedableRng};
    use rand_distr::{Distribution, Normal};

    // Without trimming, the statistics equal those measured directly, whatever the
    // block's length against the run (tail after the last whole run, one short run).
    #[test]
    fn untrimmed_stats_equal_a_direct_measurement() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        for n_time in [100usize, 1024, 1500, 3000] {
            let raw = Array2::from_shape_fn((n_time, 7), |(_, c)| {
                c as f32 + rng.random::<f32>() * (1.0 + c as f32)
            });
            let direct = ChannelStats::measure(raw.view());
            let runs = RunSums::measure(raw.view(), 512);
            let derived = runs.trimmed_stats(0);
            for (a, b) in direct.mean.iter().zip(&derived.mean) {
                assert!(
                    (a - b).abs() < 1e-9 * (1.0 + a.abs()),
                    "n={n_time}: {a} vs {b}"
                );
            }
            for (a, b) in direct.std.iter().zip(&derived.std) {
                assert!(
                    (a - b).abs() < 1e-9 * (1.0 + a.abs()),
                    "n={n_time}: {a} vs {b}"
                );
            }
            assert_eq!(runs.whole_runs(3).count(), n_time / 512.min(n_time));
        }
    }

    // Trimming against a plain loop: per channel, sort the runs by variance, drop the
    // largest, pool the rest.
    #[test]
    fn trimmed_stats_equal_sorting_the_runs() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let n_chan = 5;
        let raw = Array2::from_shape_fn((16 * 64 + 30, n_chan), |_| rng.random::<f32>() * 10.0);
        let runs = RunSums::measure(raw.view(), 64);
        for drop in [1usize, 3, 6] {
            let trimmed = runs.trimmed_stats(drop);
            for c in 0..n_chan {
                let mut chunks: Vec<Vec<f64>> = raw
                    .column(c)
                    .to_vec()
                    .chunks(64)
                    .map(|r| r.iter().map(|&v| f64::from(v)).collect())
                    .collect();
                let var = |r: &Vec<f64>| {
                    let mean = r.iter().sum::<f64>() / r.len() as f64;
                    r.iter().map(|v| v * v).sum::<f64>() / r.len() as f64 - mean * mean
                };
                chunks.sort_by(|a, b| var(a).total_cmp(&var(b)));
                let kept: Vec<f64> = chunks[..chunks.len() - drop].concat();
                let mean = kept.iter().sum::<f64>() / kept.len() as f64;
                let sd = (kept.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / kept.len() as f64)
                    .sqrt();
                assert!(
                    (trimmed.mean[c] - mean).abs() < 1e-9,
                    "drop {drop} chan {c}"
                );
                assert!((trimmed.std[c] - sd).abs() < 1e-9, "drop {drop} chan {c}");
            }
        }
    }

    #[test]
    fn runs_touched_by_a_pulse() {
        let raw = Array2::<f32>::zeros((64 * 40, 2));
        let runs = RunSums::measure(raw.view(), 64);
        assert_eq!(runs.runs_touched_by(1), 2);
        assert_eq!(runs.runs_touched_by(64), 2);
        assert_eq!(runs.runs_touched_by(65), 3);
        assert_eq!(runs.runs_touched_by(10_000), 10);
    }

    /// A block of 64 channels of Gaussian noise (σ 5 on a level of 100) with a bright
    /// burst of 12 samples in channels 30 and 31 and, in channel 50, interference
    /// switched on for a fifth of the block.
    fn burst_and_interference(seed: u64) -> Array2<f32> {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
        let noise = Normal::new(100.0f32, 5.0).unwrap();
        Array2::from_shape_fn((16_384, 64), |(t, c)| {
            let x = noise.sample(&mut rng);
            match c {
                30 | 31 if (5000..5012).contains(&t) => x + 60.0,
                50 if t < 16_384 / 5 => x + noise.sample(&mut rng) - 100.0,
                _ => x,
            }
        })
    }

    // The burst's channels stand out over the whole block (so the plain statistics
    // mask them) but not once the runs a 12-sample pulse touches are left out; the
    // interference lasting a fifth of the block is masked either way.
    #[test]
    fn trimming_spares_a_bright_burst_but_not_lasting_interference() {
        let raw = burst_and_interference(4);
        let runs = RunSums::measure(raw.view(), 512);
        let masked = |stats: &ChannelStats| {
            let mut mask = vec![false; 64];
            flag_outliers(stats, &mut mask, 5.0);
            (0..64).filter(|&c| mask[c]).collect::<Vec<_>>()
        };
        let plain = masked(&runs.trimmed_stats(0));
        assert!(plain.contains(&31) && plain.contains(&50), "{plain:?}");
        let trimmed = masked(&runs.trimmed_stats(runs.runs_touched_by(12)));
        assert_eq!(trimmed, vec![50]);
    }
}
