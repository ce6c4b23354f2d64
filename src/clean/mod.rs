//! Interference excision, one file per step. All steps share one channel mask
//! (`true` = masked) per block.
//!
//! Order within a block (see `search::driver`): user and header masks
//! ([`user_mask`]) → rows of dropped (zero-filled) data set aside ([`dropout`]) →
//! iterated channel statistics ([`channel_stats`]) and spectral
//! kurtosis ([`kurtosis`]) on the raw samples → per-channel normalisation → clipping
//! of strong broadband impulses ([`impulse`]) → optional zero-DM filter ([`zero_dm`]).

pub mod channel_stats;
pub mod dropout;
pub mod impulse;
pub mod kurtosis;
pub mod run_sums;
pub mod transients;
pub mod user_mask;
pub mod zero_dm;

use ndarray::ArrayView2;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::obs::Sample;

/// Settings of every excision step.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct CleanConfig {
    /// Frequency ranges `[lo, hi]` in MHz to mask always (a channel is masked if its
    /// centre lies inside a range).
    pub masks_mhz: Vec<[f64; 2]>,
    /// Threshold in robust σ for a channel's mean or standard deviation to differ from
    /// its neighbours' before the channel is masked.
    pub stat_threshold: f64,
    /// Whether to apply the spectral-kurtosis test.
    pub kurtosis: bool,
    /// Samples per spectral-kurtosis estimate (M), and per run of the channel
    /// statistics' trimming.
    pub kurtosis_m: usize,
    /// N·d of the generalised estimator (raw spectra summed per sample times the shape
    /// factor); estimated from the data when absent.
    pub kurtosis_nd: Option<f64>,
    /// Probability in each tail of the kurtosis distribution for pure noise at which
    /// an estimate is flagged (0.0013499 is the 3σ-equivalent per side).
    pub kurtosis_tail_probability: f64,
    /// Fraction of a channel's kurtosis estimates that must be flagged to mask it.
    pub kurtosis_flag_fraction: f64,
    /// Rounds of (statistics, kurtosis) flagging; stops early when nothing changes.
    pub max_iterations: usize,
    /// Robust S/N of a single time sample summed over the band above which the sample
    /// is zeroed in every channel (0 disables clipping).
    pub clip_threshold: f64,
    /// Subtract the band average of every time sample (Eatough, Keane & Lyne 2009).
    pub zero_dm: bool,
}

impl Default for CleanConfig {
    fn default() -> Self {
        CleanConfig {
            masks_mhz: Vec::new(),
            stat_threshold: 5.0,
            kurtosis: true,
            kurtosis_m: 512,
            kurtosis_nd: None,
            kurtosis_tail_probability: 0.0013499,
            kurtosis_flag_fraction: 0.25,
            max_iterations: 3,
            clip_threshold: 6.0,
            zero_dm: false,
        }
    }
}

impl CleanConfig {
    /// Checks ranges.
    ///
    /// # Errors
    /// [`Error::Config`] naming the offending value.
    pub fn validate(&self) -> Result<()> {
        for r in &self.masks_mhz {
            if !(r[0].is_finite() && r[1].is_finite() && r[0] <= r[1]) {
                return Err(Error::Config(format!(
                    "mask range {}..{} MHz must have lo <= hi",
                    r[0], r[1]
                )));
            }
        }
        if self.stat_threshold.is_nan() || self.stat_threshold <= 0.0 {
            return Err(Error::Config("stat_threshold must be positive".into()));
        }
        if self.kurtosis_m < 16 {
            return Err(Error::Config("kurtosis_m must be at least 16".into()));
        }
        if let Some(nd) = self.kurtosis_nd
            && (nd.is_nan() || nd <= 0.0)
        {
            return Err(Error::Config("kurtosis_nd must be positive".into()));
        }
        if !(self.kurtosis_tail_probability > 0.0 && self.kurtosis_tail_probability < 0.5) {
            return Err(Error::Config(
                "kurtosis_tail_probability must be in (0, 0.5)".into(),
            ));
        }
        if !(self.kurtosis_flag_fraction > 0.0 && self.kurtosis_flag_fraction <= 1.0) {
            return Err(Error::Config(format!(
                "kurtosis_flag_fraction must be in (0, 1], got {}",
                self.kurtosis_flag_fraction
            )));
        }
        if self.clip_threshold.is_nan() || self.clip_threshold < 0.0 {
            return Err(Error::Config("clip_threshold must be >= 0".into()));
        }
        Ok(())
    }
}

/// What the channel statistics take from the search beyond its configuration.
#[derive(Debug, Clone, PartialEq)]
pub struct Sparing {
    /// Widest pulse searched, samples: each channel's statistics leave out the runs
    /// one such pulse can touch ([`run_sums`]).
    pub widest_pulse: usize,
    /// For each channel, the channels either side whose transients it must share to
    /// be spared ([`transients::neighbourhoods`]); 0 spares every short transient.
    pub neighbourhoods: Vec<usize>,
}

impl Sparing {
    /// Pulses up to `widest_pulse` samples, in a band of `freqs_mhz`.
    pub fn new(freqs_mhz: &[f64], widest_pulse: usize) -> Self {
        Sparing {
            widest_pulse,
            neighbourhoods: transients::neighbourhoods(freqs_mhz),
        }
    }
}

/// Flags channels of a raw block (`[time, channel]`) by their statistics and spectral
/// kurtosis, repeating until nothing new is flagged or `max_iterations` is reached.
/// The statistics leave out, in each channel, the runs of `kurtosis_m` samples that
/// one pulse of `sparing.widest_pulse` samples could touch ([`run_sums`]); a channel
/// that stands out only for such a pulse is masked when the pulse is narrow-band
/// ([`transients`]). Returns the number of channels newly masked.
pub fn flag_channels<T: Sample>(
    raw: ArrayView2<'_, T>,
    mask: &mut [bool],
    config: &CleanConfig,
    sparing: &Sparing,
) -> usize {
    let before = mask.iter().filter(|&&m| m).count();
    // One pass over the block serves both tests.
    let runs = run_sums::RunSums::measure(raw, config.kurtosis_m);
    let plain = runs.trimmed_stats(0);
    let stats = runs.trimmed_stats(runs.runs_touched_by(sparing.widest_pulse));
    let sk = config
        .kurtosis
        .then(|| kurtosis::ChannelKurtosis::new(&runs));
    for _ in 0..config.max_iterations {
        let threshold = config.stat_threshold;
        let mut changed = channel_stats::flag_outliers(&stats, mask, threshold);
        changed += transients::mask_narrow_transients(
            &plain,
            &stats,
            mask,
            threshold,
            &sparing.neighbourhoods,
        );
        if let Some(sk) = &sk {
            changed += sk.flag(
                mask,
                config.kurtosis_nd,
                config.kurtosis_tail_probability,
                config.kurtosis_flag_fraction,
            );
        }
        if changed == 0 {
            break;
        }
    }
    mask.iter().filter(|&&m| m).count() - before
}

/// Time samples per parallel task of [`band_sum`].
const BAND_SUM_SPAN: usize = 4096;

/// The sum over unmasked channels of `data` (`[channel, time]`) at every time sample,
/// in parallel over spans of time.
pub fn band_sum(data: ArrayView2<'_, f32>, mask: &[bool]) -> Vec<f32> {
    let mut sums = vec![0.0f32; data.ncols()];
    sums.par_chunks_mut(BAND_SUM_SPAN)
        .enumerate()
        .for_each(|(i, out)| {
            let t0 = i * BAND_SUM_SPAN;
            for (row, _) in data.rows().into_iter().zip(mask).filter(|(_, m)| !**m) {
                let row = row.slice_move(ndarray::s![t0..t0 + out.len()]);
                // A contiguous row is summed as a slice, which vectorises.
                match row.as_slice() {
                    Some(row) => out.iter_mut().zip(row).for_each(|(s, &v)| *s += v),
                    None => out.iter_mut().zip(row).for_each(|(s, &v)| *s += v),
                }
            }
        });
    sums
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use rand::{Rng, SeedableRng};

    #[test]
    fn band_sum_equals_a_plain_sum_over_unmasked_channels() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let n_time = 2 * BAND_SUM_SPAN + 123;
        let data = Array2::from_shape_fn((7, n_time), |_| rng.random::<f32>() - 0.5);
        let mask = [false, true, false, false, true, false, false];
        let sums = band_sum(data.view(), &mask);
        assert_eq!(sums.len(), n_time);
        for (t, &s) in sums.iter().enumerate() {
            let plain: f32 = (0..7).filter(|&c| !mask[c]).map(|c| data[[c, t]]).sum();
            assert_eq!(s, plain, "t = {t}");
        }
        assert!(band_sum(data.view(), &[true; 7]).iter().all(|&s| s == 0.0));
    }
}
