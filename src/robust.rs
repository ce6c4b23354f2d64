//! Robust location and scale: medians, the median absolute deviation and a
//! piecewise-median running baseline. Used by excision and normalisation.

/// 1/Φ⁻¹(0.75): turns a median absolute deviation into a Gaussian σ
/// (common practice; e.g. Rousseeuw & Croux 1993, JASA 88, 1273).
pub const MAD_TO_SIGMA: f64 = 1.482_602_218_505_602;

/// Median of `values`, reordering them; NaN for an empty slice.
pub fn median_in_place(values: &mut [f32]) -> f32 {
    if values.is_empty() {
        return f32::NAN;
    }
    let (n, mid) = (values.len(), values.len() / 2);
    let (below, m, _) = values.select_nth_unstable_by(mid, f32::total_cmp);
    let upper = *m;
    if n % 2 == 1 {
        upper
    } else {
        let lower = below.iter().copied().fold(f32::NEG_INFINITY, f32::max);
        0.5 * (lower + upper)
    }
}

/// Median and robust σ (1.4826 × MAD) of every `stride`-th value of `values`.
///
/// `scratch` is reused between calls to avoid allocation. Returns `(NaN, NaN)` for
/// an empty input.
pub fn median_sigma(values: &[f32], stride: usize, scratch: &mut Vec<f32>) -> (f32, f32) {
    scratch.clear();
    scratch.extend(values.iter().step_by(stride.max(1)).copied());
    let med = median_in_place(scratch);
    for v in scratch.iter_mut() {
        *v = (*v - med).abs();
    }
    let mad = median_in_place(scratch);
    (med, (f64::from(mad) * MAD_TO_SIGMA) as f32)
}

/// Mean and σ of `values` after discarding those more than `clip` robust σ from the
/// median, with σ corrected for the truncation of a Gaussian at ±clip
/// (variance factor 1 − 2cφ(c)/(2Φ(c) − 1)). The median and MAD, which only set the
/// clipping limits, come from at most about `median_values` strided values; the
/// clipped moments use every value, so the σ is as precise as a plain standard
/// deviation (relative error ≈ 1/√(2n)) yet ignores pulses and spikes.
pub fn clipped_mean_sigma(
    values: &[f32],
    clip: f64,
    median_values: usize,
    scratch: &mut Vec<f32>,
) -> (f32, f32) {
    let stride = (values.len() / median_values.max(1)).max(1);
    let (med, sigma0) = median_sigma(values, stride, scratch);
    if sigma0.is_nan() || sigma0 <= 0.0 {
        return (med, sigma0);
    }
    let limit = clip * f64::from(sigma0);
    let (mut n, mut s1, mut s2) = (0usize, 0.0f64, 0.0f64);
    for &v in values {
        let d = f64::from(v - med);
        if d.abs() <= limit {
            n += 1;
            s1 += d;
            s2 += d * d;
        }
    }
    let mean = s1 / n as f64;
    let var = (s2 / n as f64 - mean * mean).max(0.0);
    let phi = (-0.5 * clip * clip).exp() / (2.0 * std::f64::consts::PI).sqrt();
    let inside = statrs::function::erf::erf(clip / std::f64::consts::SQRT_2);
    let factor = 1.0 - 2.0 * clip * phi / inside;
    (med + mean as f32, (var / factor).sqrt() as f32)
}

/// Bins per baseline run: the run's median is taken over this many bin means, as
/// precise as the median of every sample for white noise (the median of n means of
/// m samples has the error of the median of n·m samples) at a fraction of the cost,
/// and unmoved by a pulse that fills a few bins.
const BINS_PER_RUN: usize = 128;

/// Subtracts a slowly varying baseline from `series`: the median of the bin means
/// within each run of `window` samples, placed at the run's centre and joined by
/// straight lines (held flat beyond the first and last centres). A pulse much shorter
/// than `window` barely moves it. For skewed noise (e.g. coarsely quantised power)
/// the bin means tend to the mean, the level that sums of channels should remove.
pub fn subtract_piecewise_median_baseline(
    series: &mut [f32],
    window: usize,
    scratch: &mut Vec<f32>,
) {
    let n = series.len();
    let window = window.clamp(1, n.max(1));
    let n_runs = n.div_ceil(window).max(1);
    // Spread the runs evenly so the last one is not a stub.
    let run_len = n.div_ceil(n_runs).max(1);
    let bin_len = (run_len / BINS_PER_RUN).max(1);
    let mut knots: Vec<(f64, f32)> = Vec::with_capacity(n_runs);
    for start in (0..n).step_by(run_len) {
        let end = (start + run_len).min(n);
        scratch.clear();
        scratch.extend(
            series[start..end]
                .chunks(bin_len)
                .map(|bin| sum_f32(bin) / bin.len() as f32),
        );
        knots.push((0.5 * (start + end - 1) as f64, median_in_place(scratch)));
    }
    // Flat before the first centre and after the last, straight lines between.
    let first = (knots[0].0.floor() as usize + 1).min(n);
    series[..first].iter_mut().for_each(|v| *v -= knots[0].1);
    for pair in knots.windows(2) {
        let ((x0, y0), (x1, y1)) = (pair[0], pair[1]);
        let (lo, hi) = (x0.floor() as usize + 1, (x1.floor() as usize + 1).min(n));
        let slope = ((f64::from(y1) - f64::from(y0)) / (x1 - x0)) as f32;
        let offset = (lo as f64 - x0) as f32;
        for (i, v) in series[lo..hi].iter_mut().enumerate() {
            *v -= y0 + slope * (offset + i as f32);
        }
    }
    let last = knots[knots.len() - 1];
    let tail = (last.0.floor() as usize + 1).min(n);
    series[tail..].iter_mut().for_each(|v| *v -= last.1);
}

/// Sum of `values` over eight interleaved accumulators, so the additions vectorise.
fn sum_f32(values: &[f32]) -> f32 {
    let mut lanes = [0.0f32; 8];
    let chunks = values.chunks_exact(8);
    let rest: f32 = chunks.remainder().iter().sum();
    for chunk in chunks {
        for (l, &v) in lanes.iter_mut().zip(chunk) {
            *l += v;
        }
    }
    lanes.iter().sum::<f32>() + rest
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn median_of_odd_and_even_lengths() {
        assert_eq!(median_in_place(&mut [3.0, 1.0, 2.0]), 2.0);
        assert_eq!(median_in_place(&mut [4.0, 1.0, 3.0, 2.0]), 2.5);
        assert!(median_in_place(&mut []).is_nan());
    }

    #[test]
    fn mad_sigma_of_a_known_set() {
        // MAD of {1,2,3,4,100} about median 3 is median{2,1,0,1,97} = 1.
        let (m, s) = median_sigma(&[1.0, 2.0, 3.0, 4.0, 100.0], 1, &mut Vec::new());
        assert_eq!(m, 3.0);
        assert!((f64::from(s) - MAD_TO_SIGMA).abs() < 1e-6);
    }

    #[test]
    fn mad_constant_matches_normal_quantile() {
        // Φ⁻¹(0.75) from the normal quantile function (statrs; checked against scipy).
        use statrs::distribution::{ContinuousCDF, Normal};
        let q = Normal::standard().inverse_cdf(0.75);
        assert!((1.0 / q - MAD_TO_SIGMA).abs() < 1e-12);
    }

    // A standard normal sample with 1 % of huge outliers: the clipped σ is within its
    // statistical error 1/√(2n) of 1 (and the outliers are ignored).
    #[test]
    fn clipped_sigma_is_precise_and_robust() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, StandardNormal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(41);
        let n = 200_000;
        let mut v: Vec<f32> = (0..n).map(|_| StandardNormal.sample(&mut rng)).collect();
        for x in v.iter_mut().step_by(100) {
            *x += 50.0;
        }
        let (m, s) = clipped_mean_sigma(&v, 4.0, 2048, &mut Vec::new());
        let se = 1.0 / (2.0 * n as f64).sqrt();
        assert!(f64::from(m).abs() < 4.0 / (n as f64).sqrt(), "{m}");
        assert!((f64::from(s) - 1.0).abs() < 4.0 * se + 0.002, "{s}");
    }

    #[test]
    fn baseline_follows_a_ramp_and_ignores_a_spike() {
        let ramp: Vec<f32> = (0..1000).map(|i| i as f32 * 0.01).collect();
        let mut s = ramp.clone();
        s[500] += 1000.0;
        subtract_piecewise_median_baseline(&mut s, 100, &mut Vec::new());
        for (t, &v) in s.iter().enumerate().skip(50).take(900) {
            if t != 500 {
                assert!(v.abs() < 0.02, "t={t} {v}");
            }
        }
        assert!(s[500] > 994.0);
    }

    // The median of bin means against the plain median of every sample of each run
    // (the reference), on Gaussian noise over a linear drift with a strong 50-sample
    // pulse: both estimate the run's central level, and agree within the statistical
    // error of a median, 1.25σ/√n, each.
    #[test]
    fn binned_baseline_agrees_with_the_plain_running_median() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, StandardNormal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(43);
        let (n, window) = (100_003usize, 15_625usize);
        let mut series: Vec<f32> = (0..n)
            .map(|t| {
                let noise: f32 = StandardNormal.sample(&mut rng);
                noise + t as f32 * 1e-5
            })
            .collect();
        for v in &mut series[40_000..40_050] {
            *v += 20.0;
        }
        let mut fast = series.clone();
        subtract_piecewise_median_baseline(&mut fast, window, &mut Vec::new());
        let n_runs = n.div_ceil(window);
        let run_len = n.div_ceil(n_runs);
        for start in (0..n).step_by(run_len) {
            let end = (start + run_len).min(n);
            let centre = (start + end - 1) / 2;
            let plain = median_in_place(&mut series[start..end].to_vec());
            let binned = series[centre] - fast[centre];
            let tolerance = 4.0 * 2f32.sqrt() * 1.25 / ((end - start) as f32).sqrt();
            assert!(
                (plain - binned).abs() < tolerance,
                "run at {start}: {plain} vs {binned}"
            );
        }
    }
}
