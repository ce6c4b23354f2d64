//! The f32 threshold marking of [`super::search_series`]: a tile of prefix sums
//! relative to its first value, and per width the runs of [`SCAN_CHUNK`] starts
//! holding any sum at or above a level. Each kernel is compiled for AVX2 when the
//! CPU has it and keeps its plain version; the tests compare the two.

use super::SCAN_CHUNK;

/// Lanes of the running maximum in [`relative_tile`].
const TILE_LANES: usize = 8;

/// Fills `tile` with `prefix` relative to its first value, in f32, and returns the
/// largest magnitude there, ignoring NaN as `f32::max` does; compiled for AVX2 when
/// the CPU has it.
pub(super) fn relative_tile(prefix: &[f64], tile: &mut Vec<f32>) -> f32 {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: `relative_tile_avx2` only requires the AVX2 instruction set, which
        // was detected at run time just above; it is otherwise safe code.
        return unsafe { relative_tile_avx2(prefix, tile) };
    }
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
/// any width-`w` sum there reaches `level`; compiled for AVX2 when the CPU has it.
pub(super) fn mark_chunks(
    tile: &[f32],
    w: usize,
    n_starts: usize,
    level: f32,
    marks: &mut Vec<bool>,
) {
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: `mark_chunks_avx2` only requires the AVX2 instruction set, which was
        // detected at run time just above; it is otherwise safe code.
        return unsafe { mark_chunks_avx2(tile, w, n_starts, level, marks) };
    }
    mark_chunks_portable(tile, w, n_starts, level, marks)
}

/// [`mark_chunks_portable`] in AVX2: per run, the running maximum of the sums in
/// eight lanes, then one comparison of the lanes with the level. A NaN sum never
/// wins the maximum (`max_ps` returns its second operand then), as it never passes
/// `>=` in the portable test.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn mark_chunks_avx2(tile: &[f32], w: usize, n_starts: usize, level: f32, marks: &mut Vec<bool>) {
    use std::arch::x86_64::{
        _CMP_GE_OQ, _mm256_cmp_ps, _mm256_loadu_ps, _mm256_max_ps, _mm256_movemask_ps,
        _mm256_set1_ps, _mm256_sub_ps,
    };
    const LANES: usize = 8;
    let n_sums = n_starts.min(tile.len().saturating_sub(w));
    let full = n_sums / SCAN_CHUNK;
    let level8 = _mm256_set1_ps(level);
    for c in 0..full {
        let t = c * SCAN_CHUNK;
        let lo: &[f32; SCAN_CHUNK] = tile[t..t + SCAN_CHUNK].try_into().expect("run length");
        let hi: &[f32; SCAN_CHUNK] = tile[t + w..t + w + SCAN_CHUNK]
            .try_into()
            .expect("run length");
        let mut top = _mm256_set1_ps(f32::NEG_INFINITY);
        for j in (0..SCAN_CHUNK).step_by(LANES) {
            // SAFETY: `lo` and `hi` hold SCAN_CHUNK values and j + LANES ≤ SCAN_CHUNK,
            // so each unaligned load reads eight values inside them.
            let (l, h) = unsafe {
                (
                    _mm256_loadu_ps(lo.as_ptr().add(j)),
                    _mm256_loadu_ps(hi.as_ptr().add(j)),
                )
            };
            top = _mm256_max_ps(_mm256_sub_ps(h, l), top);
        }
        marks.push(_mm256_movemask_ps(_mm256_cmp_ps::<_CMP_GE_OQ>(top, level8)) != 0);
    }
    if n_sums > full * SCAN_CHUNK {
        marks.push((full * SCAN_CHUNK..n_sums).any(|t| tile[t + w] - tile[t] >= level));
    }
}

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

    // The tile conversion picked at run time against the plain one and against the
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
            for slice in [&prefix[..], &prefix[..len.min(40)]] {
                let (mut fast, mut plain) = (Vec::new(), Vec::new());
                let largest = relative_tile(slice, &mut fast);
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

    // The marking kernel picked at run time (AVX2 here when the CPU has it) against
    // the plain one, on random walks with awkward lengths, widths and levels (NaN and
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
                    for n_starts in [len, len / 2 + 7] {
                        let (mut fast, mut plain) = (Vec::new(), Vec::new());
                        mark_chunks(&tile, w, n_starts, level, &mut fast);
                        mark_chunks_portable(&tile, w, n_starts, level, &mut plain);
                        assert_eq!(fast, plain, "len={len} w={w} level={level}");
                    }
                }
            }
        }
    }
}
