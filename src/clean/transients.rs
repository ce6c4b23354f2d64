//! Short transients in a few channels: a bright narrow-band burst, or a narrow-band
//! interference pulse (radar, aircraft transponders). Both make a channel's
//! statistics over a read stand out, and neither does once the runs a pulse can
//! touch are left out ([`super::run_sums`]). What tells them apart here is bandwidth:
//! narrow-band bursts of repeating sources span at least a few per cent of their
//! frequency (tens to hundreds of MHz at 1–8 GHz; from memory), such interference
//! a few MHz or less. A channel carrying a transient is masked unless the transient
//! spans at least 1 % of the channel's frequency at half its amplitude: unless at
//! least half the channels within ±1 % share it.
//!
//! Measured (docs/search.md, step 2): a narrow-band burst of S/N 40 at 7 GHz keeps
//! its channels; undispersed pulses of 1.5–6 MHz at 1.4 GHz are masked as before,
//! where sparing every transient had let each through as up to 30 candidates.

use super::channel_stats::{ChannelStats, outlier_flags};
use crate::robust::{MAD_TO_SIGMA, median_in_place};

/// Fraction of the frequency spanned by the neighbourhood whose channels must share
/// a transient for it to be spared.
const MIN_FRACTIONAL_BANDWIDTH: f64 = 0.02;

/// Robust σ above the channels' typical excess at which a channel carries a
/// transient (not the masking threshold: this only asks whether a channel, or a
/// neighbour sharing its transient, carries one at all).
const SHARED_SIGMA: f64 = 3.0;

/// For each channel, how many channels either side make up ±1 % of its frequency.
pub fn neighbourhoods(freqs_mhz: &[f64]) -> Vec<usize> {
    let step = match freqs_mhz {
        [a, b, ..] => (b - a).abs(),
        _ => return vec![0; freqs_mhz.len()],
    };
    freqs_mhz
        .iter()
        .map(|f| {
            (0.5 * MIN_FRACTIONAL_BANDWIDTH * f.abs() / step.max(f64::MIN_POSITIVE)).round()
                as usize
        })
        .collect()
}

/// Masks the unmasked channels that carry a transient and stand out on their
/// whole-read statistics (`plain`) by more than `threshold`, unless at least half
/// of the unmasked channels within `half_window[c]` of channel c share it: carry at
/// least a quarter of channel c's transient power, so that the test measures the
/// transient's bandwidth at half its amplitude (for a smooth spectrum), however
/// bright it is. Call it once the channels standing out on their `trimmed`
/// statistics are masked, so that what stands out here stands out only for a
/// short transient. Returns how many it masked.
pub fn mask_narrow_transients(
    plain: &ChannelStats,
    trimmed: &ChannelStats,
    mask: &mut [bool],
    threshold: f64,
    half_window: &[usize],
) -> usize {
    let transient = outlier_flags(plain, mask, threshold);
    if !transient.contains(&true) {
        return 0;
    }
    let (excess, noise) = transient_power(plain, trimmed, mask);
    let n = mask.len();
    let narrow: Vec<usize> = (0..n)
        .filter(|&c| {
            // A channel beside a broad transient can stand out too, below its
            // neighbours' prediction; only channels carrying one are judged here.
            let own = excess[c].unwrap_or(0.0);
            if !transient[c] || own <= SHARED_SIGMA * noise {
                return false;
            }
            let level = (0.25 * own).max(SHARED_SIGMA * noise);
            let (lo, hi) = (
                c.saturating_sub(half_window[c]),
                (c + half_window[c]).min(n - 1),
            );
            let live = (lo..=hi).filter(|&j| !mask[j]).count();
            let sharing = (lo..=hi)
                .filter(|&j| excess[j].is_some_and(|e| e >= level))
                .count();
            2 * sharing < live
        })
        .collect();
    for &c in &narrow {
        mask[c] = true;
    }
    narrow.len()
}

/// For each unmasked channel, how much its variance over the read exceeds its
/// trimmed variance (relative to the trimmed one) beyond the channels' median
/// excess (trimming lowers every channel's variance a little; a transient, a lot),
/// and the robust σ of that excess across channels.
fn transient_power(
    plain: &ChannelStats,
    trimmed: &ChannelStats,
    mask: &[bool],
) -> (Vec<Option<f64>>, f64) {
    let raw: Vec<Option<f64>> = (0..mask.len())
        .map(|c| {
            (!mask[c] && trimmed.std[c] > 0.0).then(|| (plain.std[c] / trimmed.std[c]).powi(2))
        })
        .collect();
    let mut values: Vec<f32> = raw.iter().flatten().map(|&v| v as f32).collect();
    let centre = f64::from(median_in_place(&mut values));
    let mut spread: Vec<f32> = values
        .iter()
        .map(|&v| (f64::from(v) - centre).abs() as f32)
        .collect();
    let sigma = f64::from(median_in_place(&mut spread)) * MAD_TO_SIGMA;
    (
        raw.into_iter().map(|v| v.map(|v| v - centre)).collect(),
        sigma,
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::clean::channel_stats::flag_outliers;
    use crate::clean::run_sums::RunSums;
    use ndarray::Array2;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    #[test]
    fn neighbourhoods_span_one_percent_of_the_frequency() {
        // 1.5625 MHz channels at 1400 MHz: ±14 MHz is ±8.96 channels.
        let freqs: Vec<f64> = (0..8).map(|c| 1400.0 - 1.5625 * c as f64).collect();
        assert_eq!(neighbourhoods(&freqs)[0], 9);
        // 15.625 MHz channels at 7000 MHz: ±70 MHz is ±4.48 channels.
        assert_eq!(neighbourhoods(&[7000.0, 6984.375])[0], 4);
        assert_eq!(neighbourhoods(&[1400.0]), vec![0]);
    }

    /// 128 channels of 1.5625 MHz below 1400 MHz (neighbourhoods of ±9 channels),
    /// Gaussian noise (σ 5 on 100), 16 384 samples; `pulse(c)` adds 60 to samples
    /// 5000–5011 of channel c if true.
    fn block_with(pulse: impl Fn(usize) -> bool) -> Array2<f32> {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(21);
        let noise = Normal::new(100.0f32, 5.0).unwrap();
        Array2::from_shape_fn((16_384, 128), |(t, c)| {
            let x = noise.sample(&mut rng);
            if pulse(c) && (5000..5012).contains(&t) {
                x + 60.0
            } else {
                x
            }
        })
    }

    fn masked_by_transients(raw: &Array2<f32>) -> Vec<usize> {
        let runs = RunSums::measure(raw.view(), 512);
        let freqs: Vec<f64> = (0..128).map(|c| 1400.0 - 1.5625 * c as f64).collect();
        let trimmed = runs.trimmed_stats(runs.runs_touched_by(12));
        let mut mask = vec![false; 128];
        flag_outliers(&trimmed, &mut mask, 5.0);
        mask_narrow_transients(
            &runs.trimmed_stats(0),
            &trimmed,
            &mut mask,
            5.0,
            &neighbourhoods(&freqs),
        );
        (0..128).filter(|&c| mask[c]).collect()
    }

    // A pulse in two channels (3 MHz) is masked; one across channels 40–59 (31 MHz,
    // 2.2 % of the frequency) is not, though each of its channels stands out as much
    // on the whole read.
    #[test]
    fn narrow_pulses_are_masked_and_broad_ones_spared() {
        assert_eq!(
            masked_by_transients(&block_with(|c| c == 30 || c == 31)),
            [30, 31]
        );
        let broad = masked_by_transients(&block_with(|c| (40..60).contains(&c)));
        assert!(broad.is_empty(), "{broad:?}");
    }
}
