//! The f32 threshold marking of [`super::search_series`]: a tile of prefix sums
//! relative to its first value, and per width the runs of [`SCAN_CHUNK`] starts
//! holding any sum at or above a level. Each kernel runs in the widest instruction
//! set the CPU has ([`Isa`]: AVX-512, AVX2) and keeps its plain version; the tests
//! compare them.

use super::SCAN_CHUNK;
use crate::isa::{Isa, IsaLevel};

/// Lanes of the running maximum in [`relative_tile`] (one AVX-512 register, two AVX2).
const TILE_LANES: usize = 16;

/// Fills `tile` with `prefix` relative to its first value, in f32, and returns the
/// largest magnitude there, ignoring NaN as `f32::max` does.
pub(super) fn relative_tile(prefix: &[f64], tile: &mut Vec<f32>) -> f32 {
    relative_tile_in(Isa::detect(), prefix, tile)
}

/// [`relative_tile`] compiled for `isa`.
fn relative_tile_in(isa: Isa, prefix: &[f64], tile: &mut Vec<f32>) -> f32 {
    match isa.level() {
        // SAFETY: each `_avx*` function only requires its instruction set, which the
        // CPU has because an `Isa` is only made by detecting it (`crate::isa`); the
        // functions are otherwise safe code.
        #[cfg(target_arch = "x86_64")]
        IsaLevel::Avx512 => unsafe { relative_tile_avx512(prefix, tile) },
        #[cfg(target_arch = "x86_64")]
        IsaLevel::Avx2 => unsafe { relative_tile_avx2(prefix, tile) },
        _ => relative_tile_portable(prefix, tile),
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,avx512f,avx512bw,avx512vl")]
fn relative_tile_avx512(prefix: &[f64], tile: &mut Vec<f32>) -> f32 {
    relative_tile_portable(prefix, tile)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn relative_tile_avx2(prefix: &[f64], tile: &mut Vec<f32>) -> f32 {
    relative_tile_portable(prefix, tile)
}

/// The portable body of [`relative_tile`]: `if a > m` is one max instruction in each
/// of [`TILE_LANES`] lanes, where a chain of `f32::max` would wait on every step.
#[inline(always)]
fn relative_tile_portable(prefix: &[f64], tile: &mut Vec<f32>) -> f32 {
    let origin = prefix.first().copied().unwrap_or(0.0);
    tile.clear();
    tile.extend(prefix.iter().map(|&p| (p - origin) as f32));
    let mut top = [0.0f32; TILE_LANES];
    let lanes = tile.chunks_exact(TILE_LANES);
    let rest = lanes.remainder().iter().fold(0.0f32, |m, v| m.max(v.abs()));
    for chunk in lanes {
        for (m, v) in top.iter_mut().zip(chunk) {
            let a = v.abs();
            *m = if a > *m { a } else { *m };
        }
    }
    top.iter().fold(rest, |m, &v| m.max(v))
}

/// Appends to `marks` one flag per run of [`SCAN_CHUNK`] starts among the first
/// `n_starts` of `tile` (prefix sums relative to the tile's first, in f32): set when
/// any width-`w` sum there reaches `level`.
pub(super) fn mark_chunks(
    tile: &[f32],
    w: usize,
    n_starts: usize,
    level: f32,
    marks: &mut Vec<bool>,
) {
    mark_chunks_in(Isa::detect(), tile, w, n_starts, level, marks)
}

/// [`mark_chunks`] in `isa`.
fn mark_chunks_in(
    isa: Isa,
    tile: &[f32],
    w: usize,
    n_starts: usize,
    level: f32,
    marks: &mut Vec<bool>,
) {
    match isa.level() {
        // SAFETY: as in `relative_tile_in`: the CPU has the instruction set of `isa`.
        #[cfg(target_arch = "x86_64")]
        IsaLevel::Avx512 => unsafe { mark_chunks_avx512(tile, w, n_starts, level, marks) },
        #[cfg(target_arch = "x86_64")]
        IsaLevel::Avx2 => unsafe { mark_chunks_avx2(tile, w, n_starts, level, marks) },
        _ => mark_chunks_portable(tile, w, n_starts, level, marks),
    }
}

/// Defines `$name`, [`mark_chunks_portable`] in the vector instructions of
/// `$feature`: per run, the running maximum of the sums in `$lanes` lanes, then one
/// comparison of the lanes with the level (`$reached`). A NaN sum never wins the
/// maximum (`max_ps` returns its second operand then), as it never passes `>=` in the
/// portable test. The AVX2 and AVX-512 versions differ only in the intrinsics.
macro_rules! simd_mark_chunks {
    ($name:ident, $feature:literal, $lanes:literal, $set1:ident, $load:ident, $sub:ident,
     $max:ident, |$top:ident, $level:ident| $reached:expr) => {
        #[cfg(target_arch = "x86_64")]
        #[target_feature(enable = $feature)]
        fn $name(tile: &[f32], w: usize, n_starts: usize, level: f32, marks: &mut Vec<bool>) {
            use std::arch::x86_64::*;
            let n_sums = n_starts.min(tile.len().saturating_sub(w));
            let full = n_sums / SCAN_CHUNK;
            let $level = $set1(level);
            for c in 0..full {
                let t = c * SCAN_CHUNK;
                let lo: &[f32; SCAN_CHUNK] =
                    tile[t..t + SCAN_CHUNK].try_into().expect("run length");
                let hi: &[f32; SCAN_CHUNK] = tile[t + w..t + w + SCAN_CHUNK]
                    .try_into()
                    .expect("run length");
                let mut $top = $set1(f32::NEG_INFINITY);
                for j in (0..SCAN_CHUNK).step_by($lanes) {
                    // SAFETY: `lo` and `hi` hold SCAN_CHUNK values and
                    // j + $lanes ≤ SCAN_CHUNK, so each unaligned load of $lanes values
                    // stays inside them.
                    let (l, h) = unsafe { ($load(lo.as_ptr().add(j)), $load(hi.as_ptr().add(j))) };
                    $top = $max($sub(h, l), $top);
                }
                marks.push($reached);
            }
            if n_sums > full * SCAN_CHUNK {
                marks.push((full * SCAN_CHUNK..n_sums).any(|t| tile[t + w] - tile[t] >= level));
            }
        }
    };
}

simd_mark_chunks!(
    mark_chunks_avx512,
    "avx512f",
    16,
    _mm512_set1_ps,
    _mm512_loadu_ps,
    _mm512_sub_ps,
    _mm512_max_ps,
    |top, level16| _mm512_cmp_ps_mask::<_CMP_GE_OQ>(top, level16) != 0
);
simd_mark_chunks!(
    mark_chunks_avx2,
    "avx2",
    8,
    _mm256_set1_ps,
    _mm256_loadu_ps,
    _mm256_sub_ps,
    _mm256_max_ps,
    |top, level8| _mm256_movemask_ps(_mm256_cmp_ps::<_CMP_GE_OQ>(top, level8)) != 0
);

/// The plain body of [`mark_chunks`], and its reference: one flag per run of
/// [`SCAN_CHUNK`] starts, set when any sum there reaches the level.
fn mark_chunks_portable(
    tile: &[f32],
    w: usize,
    n_starts: usize,
    level: f32,
    marks: &mut Vec<bool>,
) {
    let n_sums = n_starts.min(tile.len().saturating_sub(w));
    for first in (0..n_sums).step_by(SCAN_CHUNK) {
        let last = (first + SCAN_CHUNK).min(n_sums);
        marks.push((first..last).any(|t| tile[t + w] - tile[t] >= level));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};

    // The tile conversion in every instruction set the CPU has against the plain one and against the
    // plain largest magnitude, NaN and infinity included.
    #[test]
    fn tile_conversion_agrees_with_the_plain_one() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(53);
        for &len in &[0usize, 1, 7, 8, 9, 100, 4877] {
            let mut prefix: Vec<f64> = (0..len)
                .map(|_| 1e4 + 50.0 * Distribution::<f64>::sample(&StandardNormal, &mut rng))
                .collect();
            if len > 50 {
                prefix[len / 2] = f64::NAN;
                prefix[len / 3] = f64::INFINITY;
            }
            for (slice, isa) in [&prefix[..], &prefix[..len.min(40)]]
                .into_iter()
                .flat_map(|s| Isa::available().into_iter().map(move |isa| (s, isa)))
            {
                let (mut fast, mut plain) = (Vec::new(), Vec::new());
                let largest = relative_tile_in(isa, slice, &mut fast);
                assert_eq!(
                    largest.to_bits(),
                    relative_tile_portable(slice, &mut plain).to_bits()
                );
                let origin = slice.first().copied().unwrap_or(0.0);
                let expected: Vec<f32> = slice.iter().map(|&p| (p - origin) as f32).collect();
                assert_eq!(
                    fast.iter().map(|v| v.to_bits()).collect::<Vec<_>>(),
                    expected.iter().map(|v| v.to_bits()).collect::<Vec<_>>()
                );
                let top = expected.iter().fold(0.0f32, |m, v| m.max(v.abs()));
                assert_eq!(largest, top, "len={len}");
            }
        }
    }

    // The marking kernel in every instruction set the CPU has against the plain one, on random walks with awkward lengths, widths and levels (NaN and
    // infinite values included), so that runs sit on both sides of the level.
    #[test]
    fn marking_kernel_agrees_with_the_plain_one() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(37);
        for &len in &[0usize, 1, 31, 33, 63, 65, 100, 1000, 4877] {
            let mut walk = 0.0f32;
            let mut tile: Vec<f32> = (0..len)
                .map(|_| {
                    let step: f32 = StandardNormal.sample(&mut rng);
                    walk += step;
                    walk
                })
                .collect();
            if len > 50 {
                tile[len / 2] = f32::NAN;
                tile[len / 3] = f32::INFINITY;
            }
            for &w in &[1usize, 3, 32, 45, 724] {
                for &level in &[-5.0f32, 0.0, 2.0, 6.0] {
                    for (n_starts, isa) in [len, len / 2 + 7]
                        .into_iter()
                        .flat_map(|n| Isa::available().into_iter().map(move |isa| (n, isa)))
                    {
                        let (mut fast, mut plain) = (Vec::new(), Vec::new());
                        mark_chunks_in(isa, &tile, w, n_starts, level, &mut fast);
                        mark_chunks_portable(&tile, w, n_starts, level, &mut plain);
                        assert_eq!(fast, plain, "len={len} w={w} level={level} {isa:?}");
                    }
                }
            }
        }
    }
}
