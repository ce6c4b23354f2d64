//! Channel masking from robust statistics: a channel whose mean or standard deviation
//! stands out from its neighbours in frequency by more than a threshold in robust σ
//! (1.4826 × MAD across channels) is masked. Comparing with a running median over
//! neighbouring channels keeps a smooth bandpass from being mistaken for interference
//! (common practice).

use ndarray::{ArrayView2, Axis};

use crate::obs::Sample;

use crate::robust::{MAD_TO_SIGMA, median_in_place};

/// Per-channel mean and standard deviation of one block.
#[derive(Debug, Clone)]
pub struct ChannelStats {
    /// Mean of each channel.
    pub mean: Vec<f64>,
    /// Standard deviation of each channel.
    pub std: Vec<f64>,
}

impl ChannelStats {
    /// Measures a raw block laid out `[time, channel]`: the plain statistics that
    /// [`super::run_sums::RunSums::trimmed_stats`] reduces to without trimming.
    pub fn measure<T: Sample>(raw: ArrayView2<'_, T>) -> Self {
        let (n_time, n_chan) = raw.dim();
        let mut s1 = vec![0.0f64; n_chan];
        let mut s2 = vec![0.0f64; n_chan];
        add_power_sums(raw, &mut s1, &mut s2);
        Self::from_sums(&s1, &s2, &vec![n_time; n_chan])
    }

    /// The statistics of `n[c]` samples of each channel c whose sums are `s1` = Σx
    /// and `s2` = Σx².
    pub fn from_sums(s1: &[f64], s2: &[f64], n: &[usize]) -> Self {
        let mean: Vec<f64> = s1
            .iter()
            .zip(n)
            .map(|(s, &n)| s / n.max(1) as f64)
            .collect();
        let std = s2
            .iter()
            .zip(&mean)
            .zip(n)
            .map(|((s, m), &n)| (s / n.max(1) as f64 - m * m).max(0.0).sqrt())
            .collect();
        ChannelStats { mean, std }
    }
}

/// Adds each channel's Σx to `s1` and Σx² to `s2` over the rows of `raw`
/// (`[time, channel]`): in integers for bytes, in f64 otherwise
/// ([`Sample::add_power_sums`]); compiled for AVX2 when the CPU has it.
pub fn add_power_sums<T: Sample>(raw: ArrayView2<'_, T>, s1: &mut [f64], s2: &mut [f64]) {
    #[cfg(target_arch = "x86_64")]
    if crate::isa::Isa::cpu_has(crate::isa::IsaLevel::Avx2) {
        // SAFETY: `add_power_sums_avx2` only requires the AVX2 instruction set, which
        // `crate::isa` detected on this CPU; it is otherwise safe code.
        return unsafe { add_power_sums_avx2(raw, s1, s2) };
    }
    T::add_power_sums(raw, s1, s2);
}

/// [`add_power_sums`] built for AVX2: the sample type's sums are inlined into it.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn add_power_sums_avx2<T: Sample>(raw: ArrayView2<'_, T>, s1: &mut [f64], s2: &mut [f64]) {
    T::add_power_sums(raw, s1, s2);
}

/// The plain sums in f64 for any sample type: what f32 reads use, and what the byte
/// sums are tested against.
#[inline(always)]
pub(crate) fn float_power_sums<T: Sample>(raw: ArrayView2<'_, T>, s1: &mut [f64], s2: &mut [f64]) {
    let raw = raw.as_standard_layout();
    for row in standard_rows(&raw.view()) {
        for ((a, b), &v) in s1.iter_mut().zip(s2.iter_mut()).zip(row) {
            let v = f64::from(v.into());
            *a += v;
            *b += v * v;
        }
    }
}

/// The rows of a standard-layout `[time, channel]` view as slices, so the loops
/// over them vectorise.
fn standard_rows<'a, T>(raw: &'a ArrayView2<'_, T>) -> std::slice::ChunksExact<'a, T> {
    let values = raw
        .as_slice()
        .expect("a standard-layout view is contiguous");
    values.chunks_exact(raw.ncols().max(1))
}

/// Rows of bytes whose sums fit a u32 per channel: 255² × 65 536 < 2³².
const BYTE_ROWS_PER_U32_SUM: usize = 65_536;

/// [`add_power_sums`] for bytes: exact sums in u32 (squares in u16, 255² < 2¹⁶), over
/// at most [`BYTE_ROWS_PER_U32_SUM`] rows at a time, then added in f64 — equal to the
/// f64 sums, which are exact for integers this small, at about a third of their
/// cost (docs/benchmarks.md).
#[inline(always)]
pub(crate) fn byte_power_sums(raw: ArrayView2<'_, u8>, s1: &mut [f64], s2: &mut [f64]) {
    let n_chan = s1.len();
    let (mut sum, mut sum_sq) = (vec![0u32; n_chan], vec![0u32; n_chan]);
    let raw = raw.as_standard_layout();
    for rows in raw.axis_chunks_iter(Axis(0), BYTE_ROWS_PER_U32_SUM) {
        sum.fill(0);
        sum_sq.fill(0);
        for row in standard_rows(&rows) {
            for ((a, b), &v) in sum.iter_mut().zip(sum_sq.iter_mut()).zip(row) {
                let v = u16::from(v);
                *a += u32::from(v);
                *b += u32::from(v * v);
            }
        }
        for (((a, b), &x), &x2) in s1.iter_mut().zip(s2.iter_mut()).zip(&sum).zip(&sum_sq) {
            *a += f64::from(x);
            *b += f64::from(x2);
        }
    }
}

/// Masks channels whose mean or standard deviation is an outlier; also masks channels
/// with zero variance (dead). Returns the number newly masked.
pub fn flag_outliers(stats: &ChannelStats, mask: &mut [bool], threshold: f64) -> usize {
    let flags = outlier_flags(stats, mask, threshold);
    let mut newly = 0;
    for (m, f) in mask.iter_mut().zip(flags) {
        if f {
            *m = true;
            newly += 1;
        }
    }
    newly
}

/// The unmasked channels [`flag_outliers`] would mask, `true` at each.
pub fn outlier_flags(stats: &ChannelStats, mask: &[bool], threshold: f64) -> Vec<bool> {
    let mut flags = outliers(&stats.mean, mask, threshold);
    for (f, o) in flags.iter_mut().zip(outliers(&stats.std, mask, threshold)) {
        *f |= o;
    }
    for ((f, &m), &sd) in flags.iter_mut().zip(mask).zip(&stats.std) {
        *f = !m && (*f || sd == 0.0);
    }
    flags
}

/// Half-width in channels of the neighbourhood used to predict a channel.
fn half_window(n_chan: usize) -> usize {
    (n_chan / 16).clamp(4, 16)
}

/// A channel's value predicted from its unmasked neighbours, and the noise of the
/// prediction error relative to one channel's noise. Each symmetric pair (c − d, c + d)
/// predicts by linear interpolation, exact for a linear bandpass; near the band edges
/// one-sided pairs (c ± d, c ± 2d) extrapolate. The median over pairs resists a hot
/// neighbour.
fn predict(
    values: &[f64],
    mask: &[bool],
    c: usize,
    h: usize,
    scratch: &mut Vec<f32>,
) -> Option<(f32, f64)> {
    let ok = |j: isize| j >= 0 && (j as usize) < values.len() && !mask[j as usize];
    let v = |j: isize| values[j as usize];
    let ci = c as isize;
    scratch.clear();
    for d in 1..=h as isize {
        if ok(ci - d) && ok(ci + d) {
            scratch.push((0.5 * (v(ci - d) + v(ci + d))) as f32);
        }
    }
    if !scratch.is_empty() {
        // Prediction noise √½; the median of several pairs is a little noisier.
        return Some((median_in_place(scratch), 1.5f64.sqrt()));
    }
    for d in 1..=h as isize {
        for s in [-1, 1] {
            if ok(ci + s * d) && ok(ci + 2 * s * d) {
                scratch.push((2.0 * v(ci + s * d) - v(ci + 2 * s * d)) as f32);
            }
        }
    }
    (!scratch.is_empty()).then(|| (median_in_place(scratch), 6f64.sqrt()))
}

/// `true` for unmasked channels whose value departs from its prediction by more than
/// `threshold` robust σ of all such departures (each scaled by its prediction noise).
fn outliers(values: &[f64], mask: &[bool], threshold: f64) -> Vec<bool> {
    let n = values.len();
    let h = half_window(n);
    let mut scratch = Vec::new();
    let resid: Vec<Option<f32>> = (0..n)
        .map(|c| {
            if mask[c] {
                return None;
            }
            let (pred, noise) = predict(values, mask, c, h, &mut scratch)?;
            Some(((values[c] - f64::from(pred)) / noise) as f32)
        })
        .collect();
    let mut abs: Vec<f32> = resid.iter().flatten().map(|r| r.abs()).collect();
    let sigma = f64::from(median_in_place(&mut abs)) * MAD_TO_SIGMA;
    if sigma.is_nan() || sigma <= 0.0 {
        return vec![false; n];
    }
    resid
        .iter()
        .map(|r| r.is_some_and(|r| f64::from(r.abs()) > threshold * sigma))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// The byte sums (integers, AVX2 when the CPU has it) equal the plain f64 loop
    /// exactly, past one u32 chunk of rows and on a view that is not in standard
    /// layout; the f64 sums of f32 values are the plain loop's bit for bit.
    #[test]
    fn power_sums_equal_the_plain_loop() {
        use rand::Rng;
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(8);
        let n_chan = 37;
        let n_time = BYTE_ROWS_PER_U32_SUM + 1500;
        let bytes = Array2::from_shape_fn((n_time, n_chan), |_| rng.random::<u8>());
        let strided = bytes.slice(ndarray::s![..;3, ..]);
        for raw in [bytes.view(), strided, bytes.slice(ndarray::s![..700, ..])] {
            let (mut plain1, mut plain2) = (vec![0.5; n_chan], vec![0.25; n_chan]);
            float_power_sums(raw, &mut plain1, &mut plain2);
            let (mut int1, mut int2) = (vec![0.5; n_chan], vec![0.25; n_chan]);
            add_power_sums(raw, &mut int1, &mut int2);
            assert_eq!((&int1, &int2), (&plain1, &plain2));
        }
        let n_extreme = 140_000;
        let extreme = Array2::from_elem((n_extreme, 2), u8::MAX);
        let (mut s1, mut s2) = (vec![0.0; 2], vec![0.0; 2]);
        add_power_sums(extreme.view(), &mut s1, &mut s2);
        assert_eq!(
            (s1[1], s2[1]),
            (255.0 * n_extreme as f64, 65_025.0 * n_extreme as f64)
        );

        let normal = Normal::new(3.0f32, 2.0).unwrap();
        let floats = Array2::from_shape_fn((3000, n_chan), |_| normal.sample(&mut rng));
        let (mut plain1, mut plain2) = (vec![0.0; n_chan], vec![0.0; n_chan]);
        float_power_sums(floats.view(), &mut plain1, &mut plain2);
        let (mut fast1, mut fast2) = (vec![0.0; n_chan], vec![0.0; n_chan]);
        add_power_sums(floats.view(), &mut fast1, &mut fast2);
        assert_eq!((fast1, fast2), (plain1, plain2));
    }

    #[test]
    fn flags_hot_noisy_and_dead_channels_but_not_a_bandpass() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let n_chan = 64;
        // A bandpass rising from 50 to 150 across the band, σ = 5 % of the level.
        let raw = Array2::from_shape_fn((2000, n_chan), |(_, c)| {
            let level = 50.0 + 100.0 * c as f32 / n_chan as f32;
            let sd = match c {
                20 => 0.25 * level, // noisy channel
                40 => 0.0,          // dead channel
                _ => 0.05 * level,
            };
            let offset = if c == 30 { 20.0 } else { 0.0 }; // hot channel
            level + offset + Normal::new(0.0, sd.max(1e-12)).unwrap().sample(&mut rng)
        });
        let stats = ChannelStats::measure(raw.view());
        let mut mask = vec![false; n_chan];
        let n = flag_outliers(&stats, &mut mask, 5.0);
        let flagged: Vec<usize> = (0..n_chan).filter(|&c| mask[c]).collect();
        assert_eq!(flagged, vec![20, 30, 40]);
        assert_eq!(n, 3);
    }
}
