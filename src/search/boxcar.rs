//! The boxcar matched filter: running sums over a ladder of widths, with S/N from a
//! noise level measured robustly for every width (not assumed to grow as √w).
//!
//! S/N(t, w) = (Σ_{i=t}^{t+w−1} xᵢ − m_w) / σ_w, where m_w and σ_w are the mean and
//! standard deviation of the boxcar sums of width w after discarding those beyond 4σ
//! of the mean (one pass started from the next narrower width's result, see
//! [`noise_chain`]), and corrected for the clipping (by the variance of a normal
//! distribution truncated at ±4σ, derived here; Keane & Petroff 2015, MNRAS 447, 2852, on why the normalisation must be
//! measured). They are measured on at most [`NOISE_SUMS`] sums at evenly spaced
//! starts, at most w/4 apart: σ_w to about 1/√(2·min(4096, n/w)), 1.1 % for the
//! narrow boxcars. For wide ones, sums w/4 apart overlap by 3/4, and the variance of
//! the variance they give is 2·Σ_k ρ(k/4)²/N with ρ(x) = max(0, 1 − |x|) over
//! N = 4n/w sums: 1.375·w/n, against 1.333·w/n from every sum (Bartlett 1946,
//! J. R. Stat. Soc. Suppl. 8, 27, on the variance of sample covariances of a
//! correlated series; from memory). So σ_w is 1.6 % less precise, relatively, at a
//! quarter of the work or less.
//!
//! Widths grow geometrically by `ratio` (default √2). For a Gaussian pulse the best
//! boxcar is 1.19 FWHM wide and reaches 0.943 of the ideal matched filter; with a √2
//! ladder the best rung still reaches at least 0.933 of it for any pulse width (0.917
//! relative to the best boxcar for a top-hat pulse); a ladder of 2 would fall to 0.904.
//! At one to four samples the ladder is integer-limited (1, 2, 3, 4 ...), where sample
//! phase dominates the loss anyway.
//!
//! The scan works in tiles of starts. It first marks runs of [`SCAN_CHUNK`] starts
//! holding any sum above the threshold level, in f32 on the tile's prefix sums taken
//! relative to its first (so they stay small and precise), eight starts per AVX2
//! instruction (a running maximum per run, then one comparison), with a margin that
//! keeps every sum the exact test would pass; only marked runs are then tested one
//! start at a time in f64. Tests compare it with direct window sums.
//!
//! [`search_trial`] is what the search runs on each dedispersed series: it measures
//! the baseline and σ of the normalisation, then subtracts, scales and takes the f64
//! prefix sums in one pass, block by block in L1 cache, so the row is read twice
//! (baseline, then this pass), never written, and the prefix sums are written once. Every kernel compiled for AVX2 keeps its plain version, and tests compare
//! the two.

use super::normalise::{SERIES_SIGMA_VALUES, series_level};
use crate::robust::{Clip, clipped_mean_sigma_with};

mod mark;
mod prefix;

use mark::{mark_chunks, relative_tile};
pub use prefix::prefix_sums;

/// Boxcar widths `1, round(r), round(r²), …` without repeats, up to `max_width`.
pub fn width_ladder(max_width: usize, ratio: f64) -> Vec<usize> {
    let mut widths = Vec::new();
    let mut x = 1.0f64;
    while x.round() as usize <= max_width.max(1) {
        let w = x.round() as usize;
        if widths.last() != Some(&w) {
            widths.push(w);
        }
        x *= ratio;
    }
    widths
}

/// Fewest independent boxcar sums (series length / width) from which a width's noise
/// is measured; with fewer, σ would be uncertain by more than about 1/√(2·16) = 18 %
/// and the width is skipped.
pub const MIN_INDEPENDENT_SUMS: usize = 16;

/// Most boxcar sums a width's noise is measured on.
pub const NOISE_SUMS: usize = 4096;

/// Starts per run of the vectorised threshold test.
pub const SCAN_CHUNK: usize = 64;

/// Robust mean and σ of the boxcar sums of each width in `chain` (ascending) over a
/// series of unit robust σ and zero baseline whose prefix sums are `prefix`. Each is
/// one σ-clipped (4σ) pass over up to [`NOISE_SUMS`] evenly spaced sums (at most
/// w/4 apart, see the module docs), started
/// from the previous width's result scaled as white noise would scale, (m·w/w′,
/// σ·√(w/w′)) — for the first width from (0, √w). Each start is thus a robust
/// estimate of the noise core within a few per cent, and one pass measures the core
/// as a clipped pass from the median and MAD would, without the sorting (iterating to
/// a fixed point instead would let many pulses widen σ round by round). `None` from
/// the first width the series is too short for or has no spread.
pub fn noise_chain(
    prefix: &[f64],
    chain: &[usize],
    scratch: &mut Scratch,
) -> Vec<Option<(f64, f64)>> {
    let mut out = Vec::with_capacity(chain.len());
    let mut previous: Option<(usize, f64, f64)> = None;
    for &w in chain {
        let guess = match previous {
            Some((pw, m, s)) => (m * w as f64 / pw as f64, s * (w as f64 / pw as f64).sqrt()),
            None if out.is_empty() => (0.0, (w as f64).sqrt()),
            None => break,
        };
        let noise = sums_noise(prefix, w, guess, scratch);
        previous = noise.map(|(m, s)| (w, m, s));
        out.push(noise);
    }
    out.resize(chain.len(), None);
    out
}

/// One width's noise for [`noise_chain`].
fn sums_noise(
    prefix: &[f64],
    w: usize,
    guess: (f64, f64),
    scratch: &mut Scratch,
) -> Option<(f64, f64)> {
    let n_sums = (prefix.len() - 1).checked_sub(w)? + 1;
    if n_sums < MIN_INDEPENDENT_SUMS * w {
        return None;
    }
    let stride = n_sums.div_ceil(NOISE_SUMS).max(w / 4).max(1);
    scratch.sums.clear();
    // Two strided walks, without the index arithmetic and bounds checks of
    // `prefix[t + w] − prefix[t]`: 3–4 % of the matched filter (measured). Gathering
    // every width's sums in one walk was slower still (the loop over widths costs
    // more than the cache lines it spares).
    let (starts, ends) = (prefix[..n_sums].iter(), prefix[w..].iter());
    scratch.sums.extend(
        ends.step_by(stride)
            .zip(starts.step_by(stride))
            .map(|(&end, &start)| (end - start) as f32),
    );
    let guess = (guess.0 as f32, guess.1 as f32);
    static NOISE_CLIP: std::sync::OnceLock<Clip> = std::sync::OnceLock::new();
    let clip = NOISE_CLIP.get_or_init(|| Clip::new(4.0));
    let (mean, sigma) = clipped_mean_sigma_with(&scratch.sums, guess, clip, 1);
    (sigma > 0.0).then_some((f64::from(mean), f64::from(sigma)))
}

/// The chain of widths whose noise [`best_snr_in`] measures on the way to `w`: the
/// √2 ladder below `w`, then `w` — the default search ladder, so that the S/N it
/// reports at a searched width is the search's own.
fn chain_to(w: usize) -> Vec<usize> {
    let mut chain = width_ladder(w, std::f64::consts::SQRT_2);
    if chain.last() != Some(&w) {
        chain.push(w);
    }
    chain
}

/// One above-threshold peak of one series: the best start in a run of consecutive
/// starts whose S/N exceeds the threshold.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Peak {
    /// First sample of the boxcar.
    pub start: usize,
    /// Boxcar width in samples.
    pub width: usize,
    /// Signal-to-noise ratio.
    pub snr: f32,
}

/// Reusable buffers for [`search_trial`] and [`search_series`].
#[derive(Default)]
pub struct Scratch {
    /// Workspace of the normalisation's medians.
    work: Vec<f32>,
    prefix: Vec<f64>,
    sums: Vec<f32>,
    /// One tile of prefix sums relative to the tile's first, in f32.
    tile: Vec<f32>,
    /// Per width, the marks of [`mark_chunks`].
    marks: Vec<Vec<bool>>,
}

/// Starts per tile of the threshold test (a multiple of [`SCAN_CHUNK`]): with the
/// widest boxcar its prefix sums stay in L1 cache.
const TILE: usize = 64 * SCAN_CHUNK;

/// One trial of the search: appends the peaks of the dedispersed series `row` as
/// [`search_series`] would find them in the row normalised by
/// [`super::normalise::normalise_series`] with [`SERIES_SIGMA_VALUES`] (a constant
/// row has none). The row is left as it is; the subtraction and the prefix sums
/// share one pass over it.
pub fn search_trial(
    row: &[f32],
    baseline_len: usize,
    widths: &[usize],
    threshold: f32,
    starts: std::ops::Range<usize>,
    scratch: &mut Scratch,
    peaks: &mut Vec<Peak>,
) {
    let Some((baseline, sigma)) =
        series_level(row, baseline_len, SERIES_SIGMA_VALUES, &mut scratch.work)
    else {
        // Constant: no width has any noise to measure, so no peaks.
        return;
    };
    let mut prefix = std::mem::take(&mut scratch.prefix);
    prefix::normalised_prefix(row, &baseline, 1.0 / sigma, &mut prefix);
    search_prefix(&prefix, widths, threshold, starts, scratch, peaks);
    scratch.prefix = prefix;
}

/// Appends to `peaks` every run of S/N ≥ `threshold` among the boxcars starting in
/// `starts`, for every width in `widths`; the noise of each width is measured over
/// the whole series.
pub fn search_series(
    series: &[f32],
    widths: &[usize],
    threshold: f32,
    starts: std::ops::Range<usize>,
    scratch: &mut Scratch,
    peaks: &mut Vec<Peak>,
) {
    let mut prefix = std::mem::take(&mut scratch.prefix);
    prefix_sums(series, &mut prefix);
    search_prefix(&prefix, widths, threshold, starts, scratch, peaks);
    scratch.prefix = prefix;
}

/// [`search_series`] on the series' prefix sums.
fn search_prefix(
    prefix: &[f64],
    widths: &[usize],
    threshold: f32,
    starts: std::ops::Range<usize>,
    scratch: &mut Scratch,
    peaks: &mut Vec<Peak>,
) {
    // Per width: (width, mean, σ, level), for the widths the series can measure.
    let tests: Vec<(usize, f64, f64, f64)> = widths
        .iter()
        .zip(noise_chain(prefix, widths, scratch))
        .filter_map(|(&w, noise)| {
            let (mean, sigma) = noise?;
            Some((w, mean, sigma, mean + f64::from(threshold) * sigma))
        })
        .collect();
    let lo = starts.start;
    let hi = starts.end.min(prefix.len() - 1);
    scratch.marks.resize_with(tests.len(), Vec::new);
    scratch.marks.iter_mut().for_each(Vec::clear);
    for tile_lo in (lo..hi).step_by(TILE) {
        let end = (tile_lo + TILE + widths.iter().max().unwrap_or(&0)).min(prefix.len());
        let largest = relative_tile(&prefix[tile_lo..end], &mut scratch.tile);
        let tile_starts = TILE.min(hi - tile_lo);
        for (&(w, _, _, level), marks) in tests.iter().zip(&mut scratch.marks) {
            // Eight roundings of the largest value below the level: the f32 test
            // never misses a sum that the exact f64 test below passes.
            let margin = 8.0 * f32::EPSILON * (largest + level.abs() as f32);
            mark_chunks(&scratch.tile, w, tile_starts, level as f32 - margin, marks);
        }
    }
    for (&(w, mean, sigma, level), marks) in tests.iter().zip(&scratch.marks) {
        let n_sums = (prefix.len() - w).min(hi);
        let mut best: Option<Peak> = None;
        let mut next_chunk = 0;
        for (chunk, _) in marks.iter().enumerate().filter(|(_, m)| **m) {
            // A run open at the end of the previous chunk ended unless this chunk
            // follows it directly (an unmarked chunk starts below the level).
            if chunk != next_chunk {
                peaks.extend(best.take());
            }
            next_chunk = chunk + 1;
            let first = lo + chunk * SCAN_CHUNK;
            for t in first..(first + SCAN_CHUNK).min(n_sums) {
                let sum = prefix[t + w] - prefix[t];
                if sum >= level {
                    let snr = ((sum - mean) / sigma) as f32;
                    if best.is_none_or(|b| snr > b.snr) {
                        best = Some(Peak {
                            start: t,
                            width: w,
                            snr,
                        });
                    }
                } else if let Some(b) = best.take() {
                    peaks.push(b);
                }
            }
        }
        peaks.extend(best);
    }
}

/// The best S/N at width `w` over starts `lo..=hi` (clamped to the series), with the
/// noise measured over the whole series as in [`search_series`] with the default
/// ladder. 0 when the series is too short, has no spread, or the range is empty.
pub fn best_snr_in(series: &[f32], w: usize, lo: usize, hi: usize, scratch: &mut Scratch) -> f32 {
    best_snrs_in(series, w, &[(lo, hi)], scratch)[0]
}

/// [`best_snr_in`] for each range `(lo, hi)` of `ranges`, the noise measured once.
pub fn best_snrs_in(
    series: &[f32],
    w: usize,
    ranges: &[(usize, usize)],
    scratch: &mut Scratch,
) -> Vec<f32> {
    let mut prefix = std::mem::take(&mut scratch.prefix);
    prefix_sums(series, &mut prefix);
    let noise = noise_chain(&prefix, &chain_to(w), scratch).pop().flatten();
    let best = |&(lo, hi): &(usize, usize)| {
        let snr = match noise {
            Some((mean, sigma)) => {
                let hi = hi.min(prefix.len() - 1 - w);
                (lo..=hi)
                    .map(|t| ((prefix[t + w] - prefix[t] - mean) / sigma) as f32)
                    .fold(f32::NEG_INFINITY, f32::max)
            }
            None => f32::NEG_INFINITY,
        };
        if snr.is_finite() { snr } else { 0.0 }
    };
    let out = ranges.iter().map(best).collect();
    scratch.prefix = prefix;
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};

    #[test]
    fn ladder_is_geometric_and_deduplicated() {
        assert_eq!(
            width_ladder(64, std::f64::consts::SQRT_2),
            vec![1, 2, 3, 4, 6, 8, 11, 16, 23, 32, 45, 64]
        );
        assert_eq!(width_ladder(10, 2.0), vec![1, 2, 4, 8]);
        assert_eq!(width_ladder(0, 2.0), vec![1]);
    }

    // The noise sums are the width-w window sums at starts 0, stride, … (indexed
    // plainly here), for short and long series and narrow and wide widths.
    #[test]
    fn noise_sums_are_the_strided_window_sums() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(53);
        let mut scratch = Scratch::default();
        for n in [40, 1000, 70_001] {
            let mut prefix = vec![0.0f64];
            for _ in 0..n {
                let v: f64 = StandardNormal.sample(&mut rng);
                prefix.push(prefix.last().unwrap() + v);
            }
            for w in [1, 2, 11, 64, 500, 4000] {
                let noise = sums_noise(&prefix, w, (0.0, (w as f64).sqrt()), &mut scratch);
                let n_sums = n + 1 - w.min(n);
                if n_sums < MIN_INDEPENDENT_SUMS * w {
                    assert!(noise.is_none(), "n {n} w {w}");
                    continue;
                }
                let stride = n_sums.div_ceil(NOISE_SUMS).max(w / 4).max(1);
                let want: Vec<f32> = (0..n_sums)
                    .step_by(stride)
                    .map(|t| (prefix[t + w] - prefix[t]) as f32)
                    .collect();
                assert_eq!(scratch.sums, want, "n {n} w {w}");
                assert!(noise.is_some());
            }
        }
    }

    /// The plain reference: sum each window directly.
    fn boxcar_reference(series: &[f32], w: usize) -> Vec<f64> {
        if w > series.len() {
            return Vec::new();
        }
        series
            .windows(w)
            .map(|win| win.iter().map(|&v| f64::from(v)).sum())
            .collect()
    }

    /// The plain reference search: direct window sums, every start tested in turn,
    /// with the noise of [`noise_chain`].
    fn search_reference(
        series: &[f32],
        widths: &[usize],
        threshold: f32,
        starts: std::ops::Range<usize>,
    ) -> Vec<Peak> {
        let mut prefix = Vec::new();
        prefix_sums(series, &mut prefix);
        let mut peaks = Vec::new();
        for &w in widths {
            let noise = noise_chain(&prefix, widths, &mut Scratch::default());
            let Some((mean, sigma)) = noise[widths.iter().position(|&x| x == w).unwrap()] else {
                continue;
            };
            let mut best: Option<Peak> = None;
            let sums = boxcar_reference(series, w).into_iter().enumerate();
            for (t, sum) in sums.filter(|(t, _)| starts.contains(t)) {
                let snr = ((sum - mean) / sigma) as f32;
                if snr >= threshold {
                    if best.is_none_or(|b| snr > b.snr) {
                        best = Some(Peak {
                            start: t,
                            width: w,
                            snr,
                        });
                    }
                } else {
                    peaks.extend(best.take());
                }
            }
            peaks.extend(best);
        }
        peaks
    }

    #[test]
    fn prefix_sums_agree_with_direct_sums_on_awkward_sizes() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        let mut prefix = Vec::new();
        for &n in &[0usize, 1, 2, 7, 97, 1031] {
            let series: Vec<f32> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
            prefix_sums(&series, &mut prefix);
            for &w in &[1usize, 2, 3, 13, 97, 2000] {
                let reference = boxcar_reference(&series, w);
                assert_eq!(
                    prefix.len().saturating_sub(w),
                    reference.len(),
                    "n={n} w={w}"
                );
                for (t, b) in reference.iter().enumerate() {
                    let a = prefix[t + w] - prefix[t];
                    assert!((a - b).abs() < 1e-9, "n={n} w={w}: {a} vs {b}");
                }
            }
        }
    }

    // The chunked, vectorised scan against the plain one on random series with
    // pulses, at low thresholds so that many runs start and end on chunk edges, over
    // whole series and over ranges of starts.
    #[test]
    fn scan_agrees_with_the_reference_on_random_series() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(31);
        let widths = width_ladder(40, std::f64::consts::SQRT_2);
        for &n in &[641usize, 1000, 4099, 20_011] {
            let mut series: Vec<f32> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
            for k in 0..5 {
                let at = (k * 997 + 13) % n;
                let len = (3 * k + 1).min(n - at);
                for v in &mut series[at..at + len] {
                    *v += 2.5;
                }
            }
            let ranges = [0..n, 0..n + 50, 17..n / 2 + 3, n / 3..n - 1, n..n + 9];
            for (&threshold, starts) in [2.0f32, 3.5, 6.0, 3.0, 2.0].iter().zip(ranges) {
                let mut fast = Vec::new();
                let mut scratch = Scratch::default();
                search_series(
                    &series,
                    &widths,
                    threshold,
                    starts.clone(),
                    &mut scratch,
                    &mut fast,
                );
                let reference = search_reference(&series, &widths, threshold, starts.clone());
                assert_eq!(fast.len(), reference.len(), "n={n} {starts:?}");
                for (a, b) in fast.iter().zip(&reference) {
                    assert_eq!((a.start, a.width), (b.start, b.width), "n={n}");
                    assert!((a.snr - b.snr).abs() < 1e-4, "n={n}: {a:?} vs {b:?}");
                }
            }
        }
    }

    // One trial in one pass against its two steps, normalisation then search, on
    // drifting series with pulses and on a constant one: the same peaks, and the row
    // left as it was.
    #[test]
    fn trial_matches_normalising_then_searching() {
        use super::super::normalise::normalise_series;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(47);
        let widths = width_ladder(100, std::f64::consts::SQRT_2);
        for &(n, baseline_len) in &[(3001usize, 700usize), (20_011, 5000), (66_000, 15_625)] {
            let mut row: Vec<f32> = (0..n)
                .map(|t| {
                    let noise: f32 = StandardNormal.sample(&mut rng);
                    4.0 + (t as f32 * 3e-4).sin() + 2.0 * noise
                })
                .collect();
            for k in 1..6 {
                let at = k * n / 7;
                row[at..at + 4 * k].iter_mut().for_each(|v| *v += 4.0);
            }
            let (fast, mut plain) = (row.clone(), row.clone());
            let (mut fast_peaks, mut plain_peaks) = (Vec::new(), Vec::new());
            let mut scratch = Scratch::default();
            search_trial(
                &fast,
                baseline_len,
                &widths,
                5.0,
                0..n,
                &mut scratch,
                &mut fast_peaks,
            );
            normalise_series(
                &mut plain,
                baseline_len,
                SERIES_SIGMA_VALUES,
                &mut Vec::new(),
            );
            search_series(&plain, &widths, 5.0, 0..n, &mut scratch, &mut plain_peaks);
            assert_eq!(fast, row, "n={n}");
            assert!(!plain_peaks.is_empty());
            assert_eq!(fast_peaks, plain_peaks, "n={n}");
        }
        let flat = vec![3.0f32; 5000];
        let mut peaks = Vec::new();
        search_trial(
            &flat,
            1000,
            &widths,
            5.0,
            0..5000,
            &mut Scratch::default(),
            &mut peaks,
        );
        assert!(peaks.is_empty());
    }

    /// Efficiency of a centred boxcar of width `b` (in FWHM units) on a Gaussian pulse
    /// relative to the ideal matched filter (continuous time): the boxcar collects
    /// ∫g = σ√(2π)·erf(b√ln2) over noise √b, the matched filter √∫g² = √(σ√π).
    fn gaussian_boxcar_efficiency(b: f64) -> f64 {
        let sigma = 1.0 / (2.0 * (2.0 * 2f64.ln()).sqrt());
        let collected = sigma
            * (2.0 * std::f64::consts::PI).sqrt()
            * statrs::function::erf::erf(b * 2f64.ln().sqrt());
        collected / b.sqrt() / (sigma * std::f64::consts::PI.sqrt()).sqrt()
    }

    // The best boxcar is 1.189 FWHM with efficiency 0.94345; over all pulse widths the
    // best rung of a √2 ladder keeps at least 0.9333 and a ladder of 2 keeps 0.9043
    // (derived here from the formula above).
    #[test]
    fn sqrt2_ladder_worst_case_loss_for_gaussians() {
        let (best_b, optimum) = (1..=20000)
            .map(|i| (i as f64 * 1e-4, gaussian_boxcar_efficiency(i as f64 * 1e-4)))
            .fold((0.0, 0.0), |a, x| if x.1 > a.1 { x } else { a });
        assert!((best_b - 1.189).abs() < 1e-3 && (optimum - 0.94345).abs() < 1e-4);
        let worst = |ratio: f64| {
            (0..=400)
                .map(|i| {
                    let fwhm = ratio.powf(i as f64 / 400.0); // one ladder period
                    (0..4)
                        .map(|k| gaussian_boxcar_efficiency(ratio.powi(k) / fwhm / ratio))
                        .fold(0.0, f64::max)
                })
                .fold(1.0, f64::min)
        };
        assert!((worst(std::f64::consts::SQRT_2) - 0.9333).abs() < 3e-4);
        assert!((worst(2.0) - 0.9043).abs() < 3e-4);
    }

    // For white Gaussian noise and w = 1 every start is an independent trial, so the
    // number of samples above s is Binomial(N, Q(s)) with Q the Gaussian upper tail.
    #[test]
    fn single_sample_false_alarms_follow_the_gaussian_tail() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(23);
        let n = 1 << 20;
        let series: Vec<f32> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
        let mut prefix = Vec::new();
        prefix_sums(&series, &mut prefix);
        let (mean, sigma) = noise_chain(&prefix, &[1], &mut Scratch::default())[0].unwrap();
        let s = 3.5;
        let count = prefix
            .windows(2)
            .filter(|p| (p[1] - p[0] - mean) / sigma >= s)
            .count() as f64;
        let q = 0.5 * statrs::function::erf::erfc(3.5 / 2f64.sqrt());
        let expected = n as f64 * q;
        let sd = (expected * (1.0 - q)).sqrt();
        assert!(
            (count - expected).abs() < 4.0 * sd,
            "{count} vs {expected} ± {sd}"
        );
    }

    // A wide boxcar's noise, measured on sums w/4 apart, scatters over noise
    // realisations as the overlap model of the module docs predicts (Bartlett 1946):
    // relative σ of σ_w = ½·√(1.375·w/n), here 7.3 %. Sums 2w apart would give 12.5 %.
    #[test]
    fn wide_boxcar_noise_is_as_precise_as_overlapping_sums_allow() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(29);
        let (n, w, seeds) = (16384, 256, 300);
        let chain = width_ladder(w, std::f64::consts::SQRT_2);
        assert_eq!(chain.last(), Some(&w));
        let mut scratch = Scratch::default();
        let ratios: Vec<f64> = (0..seeds)
            .map(|_| {
                let series: Vec<f32> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
                let mut prefix = Vec::new();
                prefix_sums(&series, &mut prefix);
                let (_, sigma) = noise_chain(&prefix, &chain, &mut scratch)
                    .pop()
                    .unwrap()
                    .unwrap();
                sigma / (w as f64).sqrt()
            })
            .collect();
        let mean = ratios.iter().sum::<f64>() / seeds as f64;
        let sd =
            (ratios.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (seeds - 1) as f64).sqrt();
        let predicted = 0.5 * (1.375 * w as f64 / n as f64).sqrt();
        assert!((mean - 1.0).abs() < 0.03, "mean σ_w/√w {mean}");
        assert!(
            (0.85..1.2).contains(&(sd / predicted)),
            "scatter {sd} against {predicted} predicted"
        );
    }

    #[test]
    fn finds_a_boxcar_pulse_at_its_width() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(29);
        let mut series: Vec<f32> = (0..8192).map(|_| StandardNormal.sample(&mut rng)).collect();
        for v in &mut series[4000..4016] {
            *v += 3.0; // S/N 3·16/4 = 12 at width 16
        }
        let mut peaks = Vec::new();
        let widths = width_ladder(64, std::f64::consts::SQRT_2);
        search_series(
            &series,
            &widths,
            7.0,
            0..8192,
            &mut Scratch::default(),
            &mut peaks,
        );
        let best = peaks.iter().max_by(|a, b| a.snr.total_cmp(&b.snr)).unwrap();
        assert_eq!(best.width, 16);
        assert!((best.start as i64 - 4000).abs() <= 1);
        assert!((best.snr - 12.0).abs() < 1.5, "{}", best.snr);
        let mut sc = Scratch::default();
        let s = best_snr_in(&series, 16, 3990, 4010, &mut sc);
        assert_eq!(s, best.snr);
    }
}
