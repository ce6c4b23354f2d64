//! Prefix sums of a series in f64, block by block: each block of values and its
//! sums stay in L1 cache, so a series can be normalised and summed in one pass
//! ([`normalised_prefix`]) and the sums are the same, bit for bit, as those of
//! [`prefix_sums`] over the normalised series.

use crate::robust::Baseline;

/// Values per block; the block's values and sums take 24 KiB.
const PREFIX_BLOCK: usize = 2048;

/// Independent running sums interleaved by [`prefix_block`].
const PREFIX_LANES: usize = 4;

/// Prefix sums in f64: `prefix[t]` is the sum of the first `t` values of `series`.
pub fn prefix_sums(series: &[f32], prefix: &mut Vec<f64>) {
    resize_prefix(prefix, series.len());
    let mut carry = 0.0;
    for (values, sums) in series
        .chunks(PREFIX_BLOCK)
        .zip(prefix[1..].chunks_mut(PREFIX_BLOCK))
    {
        #[cfg(target_arch = "x86_64")]
        if crate::isa::Isa::cpu_has(crate::isa::IsaLevel::Avx2) {
            // SAFETY: `prefix_block_avx2` only requires the AVX2 instruction set, which
            // `crate::isa` detected on this CPU.
            carry = unsafe { prefix_block_avx2(values, carry, sums) };
            continue;
        }
        carry = prefix_block(values, carry, sums);
    }
}

/// Writes to `prefix` the prefix sums, as [`prefix_sums`] would, of `series` with
/// every value v replaced by (v − baseline)·`scale` as [`Baseline::subtract_scaled`]
/// replaces it, in one pass; the series itself is left as it is (writing a whole
/// block's series back to memory would cost more than normalising again the few a
/// candidate needs). Compiled for AVX2 when the CPU has it.
pub fn normalised_prefix(series: &[f32], baseline: &Baseline, scale: f32, prefix: &mut Vec<f64>) {
    resize_prefix(prefix, series.len());
    #[cfg(target_arch = "x86_64")]
    if crate::isa::Isa::cpu_has(crate::isa::IsaLevel::Avx2) {
        // SAFETY: `normalised_prefix_avx2` only requires the AVX2 instruction set,
        // which `crate::isa` detected on this CPU; it is otherwise safe code.
        return unsafe { normalised_prefix_avx2(series, baseline, scale, prefix) };
    }
    normalised_prefix_portable(series, baseline, scale, prefix);
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn normalised_prefix_avx2(series: &[f32], baseline: &Baseline, scale: f32, prefix: &mut [f64]) {
    normalised_prefix_body(series, baseline, scale, prefix, |v, c, s| {
        prefix_block_avx2(v, c, s)
    });
}

fn normalised_prefix_portable(series: &[f32], baseline: &Baseline, scale: f32, prefix: &mut [f64]) {
    normalised_prefix_body(series, baseline, scale, prefix, prefix_block);
}

/// The body of [`normalised_prefix`], on a `prefix` one longer than `series` whose
/// first value is 0, with `block` as [`prefix_block`]: each block of values is
/// normalised in an L1-resident copy.
#[inline(always)]
fn normalised_prefix_body(
    series: &[f32],
    baseline: &Baseline,
    scale: f32,
    prefix: &mut [f64],
    block: impl Fn(&[f32], f64, &mut [f64]) -> f64,
) {
    let mut carry = 0.0;
    let mut copy = [0.0f32; PREFIX_BLOCK];
    for (b, (values, sums)) in series
        .chunks(PREFIX_BLOCK)
        .zip(prefix[1..].chunks_mut(PREFIX_BLOCK))
        .enumerate()
    {
        let values = {
            let copy = &mut copy[..values.len()];
            copy.copy_from_slice(values);
            copy
        };
        baseline.subtract_scaled_at(values, b * PREFIX_BLOCK, scale);
        carry = block(values, carry, sums);
    }
}

/// Makes `prefix` `n + 1` long with `prefix[0] = 0`; the rest is overwritten by
/// the callers, so a buffer of the right length is not cleared again.
fn resize_prefix(prefix: &mut Vec<f64>, n: usize) {
    prefix.resize(n + 1, 0.0);
    prefix[0] = 0.0;
}

/// Writes `carry + values[0] + … + values[i]` to `sums[i]` in f64 and returns the
/// last (`carry` for no values). The block is cut into [`PREFIX_LANES`] parts summed
/// side by side (one chain of dependent additions would leave the adder idle), then
/// each part is offset by `carry` and the totals of the parts before it.
#[inline(always)]
fn prefix_block(values: &[f32], carry: f64, sums: &mut [f64]) -> f64 {
    let n = values.len();
    let sums = &mut sums[..n];
    let part = n / PREFIX_LANES;
    let mut acc = [0.0f64; PREFIX_LANES];
    for i in 0..part {
        for (k, a) in acc.iter_mut().enumerate() {
            *a += f64::from(values[k * part + i]);
            sums[k * part + i] = *a;
        }
    }
    // The remainder continues the last part.
    let last = &mut acc[PREFIX_LANES - 1];
    for (s, &v) in sums.iter_mut().zip(values).skip(PREFIX_LANES * part) {
        *last += f64::from(v);
        *s = *last;
    }
    let mut base = carry;
    for (k, total) in acc.iter().enumerate() {
        let end = if k + 1 == PREFIX_LANES {
            n
        } else {
            (k + 1) * part
        };
        sums[k * part..end].iter_mut().for_each(|s| *s += base);
        base += total;
    }
    base
}

/// [`prefix_block`] in AVX2, eight values at a time: each four in f64 get their
/// running sums within the register (two shifted additions), then the carry; the
/// carry chain takes one addition per eight values, of the eight's total. The sums
/// differ from [`prefix_block`]'s only by the order of f64 additions.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn prefix_block_avx2(values: &[f32], carry: f64, sums: &mut [f64]) -> f64 {
    use std::arch::x86_64::{
        __m256d, _mm_loadu_ps, _mm256_add_pd, _mm256_blend_pd, _mm256_cvtps_pd, _mm256_cvtsd_f64,
        _mm256_permute2f128_pd, _mm256_permute4x64_pd, _mm256_set1_pd, _mm256_setzero_pd,
        _mm256_storeu_pd,
    };
    // [x0, x1, x2, x3] → [x0, x0+x1, x0+x1+x2, x0+x1+x2+x3].
    #[target_feature(enable = "avx2")]
    fn running(x: __m256d) -> __m256d {
        let shifted = _mm256_blend_pd::<0b0001>(
            _mm256_permute4x64_pd::<0b10_01_00_00>(x),
            _mm256_setzero_pd(),
        );
        let x = _mm256_add_pd(x, shifted);
        _mm256_add_pd(x, _mm256_permute2f128_pd::<0x08>(x, x))
    }
    let n = values.len();
    let sums = &mut sums[..n];
    let mut carry = carry;
    let mut groups = values.chunks_exact(8).zip(sums.chunks_exact_mut(8));
    for (v, out) in &mut groups {
        let (v, out): (&[f32; 8], &mut [f64; 8]) = (
            v.try_into().expect("eight values"),
            out.try_into().expect("eight sums"),
        );
        // SAFETY: `v` holds eight values, so both loads of four read inside it.
        let (lo, hi) = unsafe { (_mm_loadu_ps(v.as_ptr()), _mm_loadu_ps(v.as_ptr().add(4))) };
        let (lo, hi) = (running(_mm256_cvtps_pd(lo)), running(_mm256_cvtps_pd(hi)));
        let last = |x| _mm256_cvtsd_f64(_mm256_permute4x64_pd::<0xFF>(x));
        let (lo_total, hi_total) = (last(lo), last(hi));
        let lo = _mm256_add_pd(lo, _mm256_set1_pd(carry));
        let hi = _mm256_add_pd(hi, _mm256_set1_pd(carry + lo_total));
        carry += lo_total + hi_total;
        // SAFETY: `out` holds eight sums, so both stores of four write inside it.
        unsafe {
            _mm256_storeu_pd(out.as_mut_ptr(), lo);
            _mm256_storeu_pd(out.as_mut_ptr().add(4), hi);
        }
    }
    let tail = n - n % 8;
    for (s, &v) in sums[tail..].iter_mut().zip(&values[tail..]) {
        carry += f64::from(v);
        *s = carry;
    }
    carry
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};

    // Against a plain running sum in f64, over awkward lengths around the block
    // and part sizes, into a buffer left longer by an earlier call.
    #[test]
    fn prefix_sums_agree_with_a_running_sum() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(19);
        let mut prefix = Vec::new();
        for &n in &[5000usize, 0, 1, 3, 4, 5, 2047, 2048, 2049, 6143, 10_001] {
            let series: Vec<f32> = (0..n)
                .map(|_| 3.0 + Distribution::<f32>::sample(&StandardNormal, &mut rng))
                .collect();
            prefix_sums(&series, &mut prefix);
            assert_eq!(prefix.len(), n + 1);
            let mut running = 0.0f64;
            assert_eq!(prefix[0], 0.0);
            for (t, &v) in series.iter().enumerate() {
                running += f64::from(v);
                let p = prefix[t + 1];
                assert!(
                    (p - running).abs() < 1e-9 * (1.0 + running.abs()),
                    "n={n} t={t}"
                );
            }
        }
    }

    // The AVX2 block kernel against the plain one, block by block with carries,
    // on awkward lengths; they differ only in the order of f64 additions.
    #[cfg(target_arch = "x86_64")]
    #[test]
    fn avx2_block_sums_agree_with_the_plain_ones() {
        if !crate::isa::Isa::cpu_has(crate::isa::IsaLevel::Avx2) {
            eprintln!("SKIPPED avx2_block_sums_agree_with_the_plain_ones: this CPU has no AVX2");
            return;
        }
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(23);
        for &n in &[0usize, 1, 7, 8, 9, 15, 16, 17, 2047, 2048] {
            let values: Vec<f32> = (0..n)
                .map(|_| 1.0 + 5.0 * Distribution::<f32>::sample(&StandardNormal, &mut rng))
                .collect();
            let (mut fast, mut plain) = (vec![0.0; n], vec![0.0; n]);
            // SAFETY: AVX2 was detected above.
            let fast_total = unsafe { prefix_block_avx2(&values, 1234.5, &mut fast) };
            let plain_total = prefix_block(&values, 1234.5, &mut plain);
            assert!((fast_total - plain_total).abs() < 1e-9, "n={n}");
            for (t, (a, b)) in fast.iter().zip(&plain).enumerate() {
                assert!((a - b).abs() < 1e-9, "n={n} t={t}: {a} vs {b}");
            }
        }
    }

    // The fused pass against subtracting the baseline, then summing.
    #[test]
    fn normalising_with_the_sums_matches_the_two_passes() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(21);
        for &(n, window) in &[(1usize, 1usize), (100, 7), (5000, 1000), (20_011, 3000)] {
            let series: Vec<f32> = (0..n)
                .map(|t| {
                    2.0 + 1e-3 * t as f32 + Distribution::<f32>::sample(&StandardNormal, &mut rng)
                })
                .collect();
            let baseline = Baseline::piecewise_median(&series, window, &mut Vec::new());
            let mut plain = series.clone();
            let (mut fused_prefix, mut plain_prefix) = (Vec::new(), Vec::new());
            normalised_prefix(&series, &baseline, 0.5, &mut fused_prefix);
            baseline.subtract_scaled(&mut plain, 0.5);
            prefix_sums(&plain, &mut plain_prefix);
            assert_eq!(fused_prefix, plain_prefix, "n={n}");
            // The portable pass (the one without AVX2) gives sums that differ only by
            // the order of the f64 additions.
            normalised_prefix_portable(&series, &baseline, 0.5, &mut fused_prefix);
            for (a, b) in fused_prefix.iter().zip(&plain_prefix) {
                assert!((a - b).abs() < 1e-9 * (1.0 + b.abs()), "n={n}: {a} vs {b}");
            }
        }
    }
}
