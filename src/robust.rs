//! Robust location and scale: medians, the median absolute deviation and a
//! piecewise-median running baseline. Used by excision and normalisation.

/// 1/Φ⁻¹(0.75): turns a median absolute deviation into a Gaussian σ
/// (common practice; e.g. Rousseeuw & Croux 1993, JASA 88, 1273).
pub const MAD_TO_SIGMA: f64 = 1.482_602_218_505_602;

/// Median of `values` (`f32` or `f64`), reordering them; NaN for an empty slice.
pub fn median_in_place<T: Real>(values: &mut [T]) -> T {
    if values.is_empty() {
        return T::NAN;
    }
    let (n, mid) = (values.len(), values.len() / 2);
    let (below, m, _) = values.select_nth_unstable_by(mid, T::total_cmp);
    let upper = *m;
    if n % 2 == 1 {
        upper
    } else {
        let lower = below.iter().copied().fold(T::NEG_INFINITY, T::max);
        T::HALF * (lower + upper)
    }
}

/// The floating-point types [`median_in_place`] works on: `f32` and `f64`.
pub trait Real: Copy + std::ops::Add<Output = Self> + std::ops::Mul<Output = Self> {
    /// Not a number.
    const NAN: Self;
    /// −∞.
    const NEG_INFINITY: Self;
    /// 0.5.
    const HALF: Self;
    /// The type's `total_cmp`.
    fn total_cmp(&self, other: &Self) -> std::cmp::Ordering;
    /// The type's `max` (the other value when one is NaN).
    fn max(self, other: Self) -> Self;
}

macro_rules! impl_real {
    ($($t:ty),*) => {$(
        impl Real for $t {
            const NAN: Self = <$t>::NAN;
            const NEG_INFINITY: Self = <$t>::NEG_INFINITY;
            const HALF: Self = 0.5;
            fn total_cmp(&self, other: &Self) -> std::cmp::Ordering {
                <$t>::total_cmp(self, other)
            }
            fn max(self, other: Self) -> Self {
                <$t>::max(self, other)
            }
        }
    )*};
}
impl_real!(f32, f64);

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

/// Mean and σ of `values` by iterated σ-clipping: starting from the guess
/// `(centre, sigma)`, the moments of the values within `clip` σ of the centre give
/// the next centre and σ, with σ corrected for the truncation of a Gaussian at ±clip
/// (variance factor 1 − 2cφ(c)/(2Φ(c) − 1)), until σ changes by less than 1 % or
/// after `max_rounds` rounds. Every value takes part, so σ is as precise as a plain
/// standard deviation (relative error ≈ 1/√(2n)) yet ignores pulses and spikes.
///
/// From a guess within a few per cent this is one or two rounds: it measures the
/// Gaussian core, as a single clipped pass from the median and MAD would. Iterating
/// to the fixed point instead would let heavy tails (many pulses, skewed noise)
/// widen σ round by round. A guess 2× too small needs three rounds, 3× four.
/// `(NaN, NaN)` when no value lies within the limits or the guess has no spread.
pub fn clipped_mean_sigma(
    values: &[f32],
    guess: (f32, f32),
    clip: f64,
    max_rounds: usize,
) -> (f32, f32) {
    clipped_mean_sigma_with(values, guess, &Clip::new(clip), max_rounds)
}

/// A clipping limit of ±`sigmas` σ with the variance factor of a Gaussian truncated
/// there, 1 − 2cφ(c)/(2Φ(c) − 1), for [`clipped_mean_sigma_with`]: callers that clip
/// many sets at one limit compute the factor (an exp and an erf) once.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Clip {
    sigmas: f64,
    variance_factor: f64,
}

impl Clip {
    /// The limit ±`sigmas` σ.
    pub fn new(sigmas: f64) -> Self {
        let phi = (-0.5 * sigmas * sigmas).exp() / (2.0 * std::f64::consts::PI).sqrt();
        let inside = statrs::function::erf::erf(sigmas / std::f64::consts::SQRT_2);
        Clip {
            sigmas,
            variance_factor: 1.0 - 2.0 * sigmas * phi / inside,
        }
    }
}

/// [`clipped_mean_sigma`] with the limit and its factor computed beforehand.
pub fn clipped_mean_sigma_with(
    values: &[f32],
    guess: (f32, f32),
    clip: &Clip,
    max_rounds: usize,
) -> (f32, f32) {
    let Clip {
        sigmas: clip,
        variance_factor: factor,
    } = *clip;
    let (mut centre, mut sigma) = (f64::from(guess.0), f64::from(guess.1));
    for _ in 0..max_rounds {
        if !(sigma > 0.0 && sigma.is_finite()) {
            return (f32::NAN, f32::NAN);
        }
        let (n, s1, s2) = clipped_sums(values, centre as f32, (clip * sigma) as f32);
        if n == 0 {
            return (f32::NAN, f32::NAN);
        }
        let mean = s1 / n as f64;
        let next = ((s2 / n as f64 - mean * mean).max(0.0) / factor).sqrt();
        centre += mean;
        let converged = (next - sigma).abs() <= 1e-2 * sigma;
        sigma = next;
        if converged {
            break;
        }
    }
    (centre as f32, sigma as f32)
}

/// Count, sum and sum of squares of `v − centre` over the values with
/// |v − centre| ≤ `limit`, in eight branch-free lanes so the loop vectorises;
/// compiled for AVX2 when the CPU has it.
fn clipped_sums(values: &[f32], centre: f32, limit: f32) -> (u32, f64, f64) {
    #[cfg(target_arch = "x86_64")]
    if crate::isa::Isa::cpu_has(crate::isa::IsaLevel::Avx2) {
        // SAFETY: `clipped_sums_avx2` only requires the AVX2 instruction set, which
        // `crate::isa` detected on this CPU; it is otherwise safe code.
        return unsafe { clipped_sums_avx2(values, centre, limit) };
    }
    clipped_sums_portable(values, centre, limit)
}

/// [`clipped_sums_portable`] in AVX2 intrinsics, lane for lane the same operations
/// (so the same sums, bit for bit): the compiler left the portable loop scalar.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn clipped_sums_avx2(values: &[f32], centre: f32, limit: f32) -> (u32, f64, f64) {
    use std::arch::x86_64::{
        _CMP_LE_OQ, _mm256_add_ps, _mm256_and_ps, _mm256_andnot_ps, _mm256_castps_si256,
        _mm256_cmp_ps, _mm256_loadu_ps, _mm256_mul_ps, _mm256_set1_ps, _mm256_setzero_ps,
        _mm256_setzero_si256, _mm256_storeu_ps, _mm256_storeu_si256, _mm256_sub_epi32,
        _mm256_sub_ps,
    };
    let (centre8, limit8, sign) = (
        _mm256_set1_ps(centre),
        _mm256_set1_ps(limit),
        _mm256_set1_ps(-0.0),
    );
    let (mut n8, mut s1_8, mut s2_8) = (
        _mm256_setzero_si256(),
        _mm256_setzero_ps(),
        _mm256_setzero_ps(),
    );
    let chunks = values.chunks_exact(8);
    let rest = chunks.remainder();
    for chunk in chunks {
        // SAFETY: `chunk` holds eight values, so the load reads inside it.
        let d = _mm256_sub_ps(unsafe { _mm256_loadu_ps(chunk.as_ptr()) }, centre8);
        // |d| ≤ limit, false for NaN as in the portable test; kept d or +0.0.
        let keep = _mm256_cmp_ps::<_CMP_LE_OQ>(_mm256_andnot_ps(sign, d), limit8);
        let d = _mm256_and_ps(keep, d);
        n8 = _mm256_sub_epi32(n8, _mm256_castps_si256(keep)); // a kept lane is −1
        s1_8 = _mm256_add_ps(s1_8, d);
        s2_8 = _mm256_add_ps(s2_8, _mm256_mul_ps(d, d));
    }
    let (mut n, mut s1, mut s2) = ([0u32; 8], [0.0f32; 8], [0.0f32; 8]);
    // SAFETY: each array holds eight lanes of four bytes: the stores write inside them.
    unsafe {
        _mm256_storeu_si256(n.as_mut_ptr().cast(), n8);
        _mm256_storeu_ps(s1.as_mut_ptr(), s1_8);
        _mm256_storeu_ps(s2.as_mut_ptr(), s2_8);
    }
    clipped_sums_finish((n, s1, s2), rest, centre, limit)
}

/// The portable body of [`clipped_sums`].
#[inline(always)]
fn clipped_sums_portable(values: &[f32], centre: f32, limit: f32) -> (u32, f64, f64) {
    let (mut n, mut s1, mut s2) = ([0u32; 8], [0.0f32; 8], [0.0f32; 8]);
    let chunks = values.chunks_exact(8);
    let rest = chunks.remainder();
    for chunk in chunks {
        for k in 0..8 {
            let d = chunk[k] - centre;
            let keep = d.abs() <= limit;
            let d = if keep { d } else { 0.0 };
            n[k] += u32::from(keep);
            s1[k] += d;
            s2[k] += d * d;
        }
    }
    clipped_sums_finish((n, s1, s2), rest, centre, limit)
}

/// Adds up the eight lanes of [`clipped_sums`] in f64 and the values left over.
#[inline(always)]
fn clipped_sums_finish(
    (n, s1, s2): ([u32; 8], [f32; 8], [f32; 8]),
    rest: &[f32],
    centre: f32,
    limit: f32,
) -> (u32, f64, f64) {
    let (mut count, mut sum, mut squares) = (n.iter().sum::<u32>(), 0.0f64, 0.0f64);
    for k in 0..8 {
        sum += f64::from(s1[k]);
        squares += f64::from(s2[k]);
    }
    for &v in rest {
        let d = v - centre;
        if d.abs() <= limit {
            count += 1;
            sum += f64::from(d);
            squares += f64::from(d * d);
        }
    }
    (count, sum, squares)
}

/// Bins per baseline run: the run's median is taken over this many bin means, as
/// precise as the median of every sample for white noise (the median of n means of
/// m samples has the error of the median of n·m samples) at a fraction of the cost,
/// and unmoved by a pulse that fills a few bins.
const BINS_PER_RUN: usize = 128;

/// A slowly varying baseline: the median of the bin means within each run of
/// `window` samples, placed at the run's centre and joined by straight lines (held
/// flat beyond the first and last centres). A pulse much shorter than `window`
/// barely moves it. For skewed noise (e.g. coarsely quantised power) the bin means
/// tend to the mean, the level that sums of channels should remove.
#[derive(Debug, Clone, PartialEq)]
pub struct Baseline {
    /// (sample index of the run centre, run median), in time order.
    knots: Vec<(f64, f32)>,
}

impl Baseline {
    /// Measures the baseline of `series` (which must not be empty).
    pub fn piecewise_median(series: &[f32], window: usize, scratch: &mut Vec<f32>) -> Self {
        let n = series.len();
        let window = window.clamp(1, n.max(1));
        let n_runs = n.div_ceil(window).max(1);
        // Spread the runs evenly so the last one is not a stub.
        let run_len = n.div_ceil(n_runs).max(1);
        let bin_len = (run_len / BINS_PER_RUN).max(1);
        let mut knots = Vec::with_capacity(n_runs);
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
        Baseline { knots }
    }

    /// The baseline at sample `t`.
    pub fn at(&self, t: usize) -> f32 {
        let x = t as f64;
        self.between(self.knots.partition_point(|knot| knot.0 < x), x)
    }

    /// `series[t] − self.at(t)` for `t = 0, stride, 2·stride, …`, appended to `out`:
    /// the values of [`Self::at`], segment by segment between the knots instead of
    /// searching them for every `t`, in loops whose divisions vectorise.
    pub fn strided_residuals(&self, series: &[f32], stride: usize, out: &mut Vec<f32>) {
        let (n, stride, first) = (series.len(), stride.max(1), out.len());
        out.extend(series.iter().step_by(stride));
        let values = &mut out[first..];
        // Knot k's segment: the samples t after k knots (x_{k−1} < t ≤ x_k), here the
        // strided ones from the i-th on.
        let mut i = 0;
        for k in 0..=self.knots.len() {
            let end_t = self
                .knots
                .get(k)
                .map_or(n, |&(x, _)| (x.floor() as usize + 1).min(n));
            let end = end_t.div_ceil(stride).max(i);
            let part = &mut values[i..end];
            match (k.checked_sub(1).map(|j| self.knots[j]), self.knots.get(k)) {
                (Some(a), Some(&b)) => (i..end)
                    .zip(part)
                    .for_each(|(j, v)| *v -= interpolate(a, b, (j * stride) as f64)),
                (Some((_, y)), None) | (None, Some(&(_, y))) => {
                    part.iter_mut().for_each(|v| *v -= y);
                }
                (None, None) => {}
            }
            i = end;
        }
    }

    /// The baseline at `x`, given the first knot `k` at or after it.
    fn between(&self, k: usize, x: f64) -> f32 {
        match (k.checked_sub(1).map(|i| self.knots[i]), self.knots.get(k)) {
            (Some(a), Some(&b)) => interpolate(a, b, x),
            (Some((_, y)), None) | (None, Some(&(_, y))) => y,
            (None, None) => 0.0,
        }
    }

    /// Replaces every value v of `series` by (v − baseline)·`scale` in one pass.
    pub fn subtract_scaled(&self, series: &mut [f32], scale: f32) {
        self.subtract_scaled_at(series, 0, scale);
    }

    /// [`Self::subtract_scaled`] on the samples `first..first + part.len()` of a
    /// series, held in `part`: applying it to consecutive parts gives the same
    /// values, bit for bit, as one call on the whole series (inlined, so that callers
    /// compiled for AVX2 get its loops in AVX2).
    #[inline(always)]
    pub fn subtract_scaled_at(&self, part: &mut [f32], first: usize, scale: f32) {
        let Some(&(first_x, first_y)) = self.knots.first() else {
            return part.iter_mut().for_each(|v| *v *= scale);
        };
        let end = first + part.len();
        // Samples lo..hi of the series, as indices into `part`.
        let within =
            |lo: usize, hi: usize| lo.clamp(first, end) - first..hi.clamp(first, end) - first;
        let flat = |part: &mut [f32], y: f32| part.iter_mut().for_each(|v| *v = (*v - y) * scale);
        flat(&mut part[within(0, first_x.floor() as usize + 1)], first_y);
        for pair in self.knots.windows(2) {
            let ((x0, y0), (x1, y1)) = (pair[0], pair[1]);
            let (lo, hi) = (x0.floor() as usize + 1, x1.floor() as usize + 1);
            let range = within(lo, hi);
            if range.is_empty() {
                continue;
            }
            let slope = ((f64::from(y1) - f64::from(y0)) / (x1 - x0)) as f32;
            let offset = (lo as f64 - x0) as f32;
            // Steps from `lo` of the first sample here.
            let skip = first + range.start - lo;
            let line = |k: f32, v: &mut f32| *v = (*v - (y0 + slope * (offset + k))) * scale;
            let segment = &mut part[range];
            // Steps counted in i32 convert to f32 eight at a time (the same values as
            // from usize, which has no packed conversion); a longer segment counts in
            // usize.
            match i32::try_from(skip + segment.len()) {
                Ok(_) => (skip as i32..)
                    .zip(segment)
                    .for_each(|(k, v)| line(k as f32, v)),
                Err(_) => (skip..).zip(segment).for_each(|(k, v)| line(k as f32, v)),
            }
        }
        let (last_x, last_y) = self.knots[self.knots.len() - 1];
        flat(&mut part[within(last_x.floor() as usize + 1, end)], last_y);
    }
}

/// The straight line through knots `(x0, y0)` and `(x1, y1)` at `x`.
#[inline(always)]
fn interpolate((x0, y0): (f64, f32), (x1, y1): (f64, f32), x: f64) -> f32 {
    y0 + ((x - x0) / (x1 - x0)) as f32 * (y1 - y0)
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
        assert_eq!(median_in_place(&mut [3.0f32, 1.0, 2.0]), 2.0);
        assert_eq!(median_in_place(&mut [4.0f32, 1.0, 3.0, 2.0]), 2.5);
        assert!(median_in_place::<f32>(&mut []).is_nan());
        assert_eq!(median_in_place(&mut [3.0f64, 1.0, 2.0]), 2.0);
        assert_eq!(median_in_place(&mut [4.0f64, 1.0, 3.0, 2.0]), 2.5);
        assert!(median_in_place::<f64>(&mut []).is_nan());
    }

    // Against sorting a copy, on seeded random sets of every length up to 40 with
    // repeated values, for both types.
    #[test]
    fn median_matches_the_sorted_middle() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(47);
        for n in 1..=40usize {
            for _ in 0..20 {
                let v: Vec<f64> = (0..n)
                    .map(|_| f64::from(rng.random_range(-9i32..10)))
                    .collect();
                let mut sorted = v.clone();
                sorted.sort_by(f64::total_cmp);
                let want = if n % 2 == 1 {
                    sorted[n / 2]
                } else {
                    0.5 * (sorted[n / 2 - 1] + sorted[n / 2])
                };
                assert_eq!(median_in_place(&mut v.clone()), want, "{v:?}");
                let mut v32: Vec<f32> = v.iter().map(|&x| x as f32).collect();
                assert_eq!(f64::from(median_in_place(&mut v32)), want, "{v:?}");
            }
        }
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

    // A standard normal sample with 1 % of huge outliers: from a guess 3× too small
    // or 2× too large and off-centre, the clipped σ is within its statistical error
    // 1/√(2n) of 1 (and the outliers are ignored).
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
        let se = 1.0 / (2.0 * n as f64).sqrt();
        for guess in [(0.0, 1.0), (0.2, 0.33), (-0.5, 2.0)] {
            let (m, s) = clipped_mean_sigma(&v, guess, 4.0, 6);
            assert!(
                f64::from(m).abs() < 4.0 / (n as f64).sqrt(),
                "{guess:?}: {m}"
            );
            assert!(
                (f64::from(s) - 1.0).abs() < 4.0 * se + 0.002,
                "{guess:?}: {s}"
            );
        }
        assert!(clipped_mean_sigma(&v, (1e6, 1.0), 4.0, 6).0.is_nan());
    }

    // The kernel picked at run time against the portable lanes, bit for bit, on
    // awkward lengths with NaN, infinities and values exactly at the limit.
    #[test]
    fn clipped_sums_kernels_agree_bit_for_bit() {
        use rand::SeedableRng;
        use rand_distr::{Distribution, StandardNormal};
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(59);
        let mut v: Vec<f32> = (0..4099)
            .map(|_| 2.0 * Distribution::<f32>::sample(&StandardNormal, &mut rng))
            .collect();
        v[17] = f32::NAN;
        v[100] = f32::INFINITY;
        v[101] = f32::NEG_INFINITY;
        v[200] = 0.5 + 3.0;
        for len in [0usize, 3, 8, 15, 16, 4099] {
            for (centre, limit) in [(0.5f32, 3.0f32), (-1.0, 0.1), (0.0, 100.0)] {
                let (n, s1, s2) = clipped_sums(&v[..len], centre, limit);
                let (pn, ps1, ps2) = clipped_sums_portable(&v[..len], centre, limit);
                assert_eq!(
                    (n, s1.to_bits(), s2.to_bits()),
                    (pn, ps1.to_bits(), ps2.to_bits())
                );
            }
        }
    }

    // The eight-lane sums against a plain loop, on awkward lengths.
    #[test]
    fn clipped_sums_agree_with_a_plain_loop() {
        let v: Vec<f32> = (0..1037)
            .map(|i| ((i * 7919) % 1000) as f32 / 100.0 - 5.0)
            .collect();
        for len in [0usize, 5, 8, 1037] {
            let (n, s1, s2) = clipped_sums(&v[..len], 0.5, 3.0);
            let kept: Vec<f64> = v[..len]
                .iter()
                .map(|&x| f64::from(x - 0.5))
                .filter(|d| d.abs() <= 3.0)
                .collect();
            assert_eq!(n as usize, kept.len());
            assert!((s1 - kept.iter().sum::<f64>()).abs() < 1e-3);
            assert!((s2 - kept.iter().map(|d| d * d).sum::<f64>()).abs() < 1e-2);
        }
    }

    #[test]
    fn baseline_follows_a_ramp_and_ignores_a_spike() {
        let mut s: Vec<f32> = (0..1000).map(|i| i as f32 * 0.01).collect();
        s[500] += 1000.0;
        let baseline = Baseline::piecewise_median(&s, 100, &mut Vec::new());
        let before = s.clone();
        baseline.subtract_scaled(&mut s, 2.0);
        for (t, (&v, &raw)) in s.iter().zip(&before).enumerate().skip(50).take(900) {
            assert!((v - 2.0 * (raw - baseline.at(t))).abs() < 1e-5, "t={t}");
            if t != 500 {
                assert!(v.abs() < 0.04, "t={t} {v}");
            }
        }
        assert!(s[500] > 1988.0);
    }

    // Subtracting part by part, at awkward part lengths, gives the values of one
    // call on the whole series bit for bit; both follow `Baseline::at` closely.
    #[test]
    fn baseline_subtracted_in_parts_matches_the_whole() {
        let s: Vec<f32> = (0..10_007)
            .map(|i| ((i * 7919) % 1013) as f32 * 0.01 + (i as f32 * 1e-3).sin())
            .collect();
        for window in [1usize, 100, 3000, 20_000] {
            let baseline = Baseline::piecewise_median(&s, window, &mut Vec::new());
            let mut whole = s.clone();
            baseline.subtract_scaled(&mut whole, 0.7);
            for (t, (&v, &raw)) in whole.iter().zip(&s).enumerate() {
                assert!((v - 0.7 * (raw - baseline.at(t))).abs() < 1e-4, "t={t}");
            }
            for part_len in [1usize, 7, 1000, 4096, 10_007] {
                let mut parts = s.clone();
                for (p, part) in parts.chunks_mut(part_len).enumerate() {
                    baseline.subtract_scaled_at(part, p * part_len, 0.7);
                }
                assert_eq!(parts, whole, "window {window}, parts of {part_len}");
            }
        }
    }

    // The knot walk against `at` at every stride, on awkward lengths and strides.
    #[test]
    fn strided_residuals_match_the_baseline_at_each_sample() {
        let s: Vec<f32> = (0..5003)
            .map(|i| ((i * 37) % 101) as f32 + i as f32 * 0.01)
            .collect();
        for window in [1usize, 333, 5003] {
            let baseline = Baseline::piecewise_median(&s, window, &mut Vec::new());
            for stride in [0usize, 1, 2, 7, 1000, 6000] {
                let mut walked = Vec::new();
                baseline.strided_residuals(&s, stride, &mut walked);
                let searched: Vec<f32> = (0..s.len())
                    .step_by(stride.max(1))
                    .map(|t| s[t] - baseline.at(t))
                    .collect();
                assert_eq!(walked, searched, "window {window} stride {stride}");
            }
        }
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
        let baseline = Baseline::piecewise_median(&series, window, &mut Vec::new());
        let n_runs = n.div_ceil(window);
        let run_len = n.div_ceil(n_runs);
        for start in (0..n).step_by(run_len) {
            let end = (start + run_len).min(n);
            let centre = (start + end - 1) / 2;
            let plain = median_in_place(&mut series[start..end].to_vec());
            let binned = baseline.at(centre);
            let tolerance = 4.0 * 2f32.sqrt() * 1.25 / ((end - start) as f32).sqrt();
            assert!(
                (plain - binned).abs() < tolerance,
                "run at {start}: {plain} vs {binned}"
            );
        }
    }
}
