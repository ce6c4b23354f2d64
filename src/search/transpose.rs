//! The transpose from a read's time-major rows (`[time, channel]`) into the search
//! block's channel-major rows (`[channel, time]`).
//!
//! Parallel over groups of [`GROUP_CHANNELS`] channels, [`TILE_TIMES`] samples at a
//! time: each channel's samples of a tile are written as one cache line while the
//! tile's source rows stay in cache, and few pages are touched per tile, so the TLB is
//! not thrashed. With AVX2 the tile moves as 8 × 8 blocks through registers (eight
//! row loads, 24 shuffles, eight column stores): 0.6–0.7 ns per sample on two cores
//! against 1.3–2.3 ns for the plain per-sample copy, measured with a standalone copy
//! of both loops on a survey-sized block (1024 channels × 65 536 samples); in the
//! search, a survey block's append fell from about 0.22 to 0.19 s
//! (docs/benchmarks.md).
//!
//! A read holds either decoded f32 samples or the stored bytes of 8-bit data
//! ([`crate::obs::ByteRows`]); bytes are widened to f32 here, in the registers of
//! the 8 × 8 blocks (or one at a time in the plain copy), so 8-bit data is never
//! held as f32 in time-major order.

#[cfg(target_arch = "x86_64")]
use std::arch::x86_64::__m256;

use rayon::prelude::*;

use crate::obs::Sample;

/// Channels per parallel task.
const GROUP_CHANNELS: usize = 128;
/// Samples per tile: 16 f32 fill one cache line of a channel.
const TILE_TIMES: usize = 16;

/// Where a transpose writes: channel c's sample t goes to
/// `data[c·capacity + offset + t]`.
#[derive(Clone, Copy)]
pub(super) struct Columns {
    pub capacity: usize,
    pub offset: usize,
}

/// A sample type the transpose reads: widened to f32 one value at a time (`Into`)
/// or eight at a time into an AVX2 register.
pub(super) trait Widen: Sample {
    /// The eight values from `src` on, as the f32 lanes of a register.
    ///
    /// # Safety
    /// The CPU has AVX2, and `src..src + 8` lie inside one slice of `Self`.
    #[cfg(target_arch = "x86_64")]
    unsafe fn load8(src: *const Self) -> __m256;
}

impl Widen for f32 {
    #[cfg(target_arch = "x86_64")]
    #[inline]
    #[target_feature(enable = "avx2")]
    unsafe fn load8(src: *const f32) -> __m256 {
        // SAFETY: the caller promises eight f32 from `src` inside one slice;
        // `loadu` has no alignment requirement.
        unsafe { std::arch::x86_64::_mm256_loadu_ps(src) }
    }
}

impl Widen for u8 {
    #[cfg(target_arch = "x86_64")]
    #[inline]
    #[target_feature(enable = "avx2")]
    unsafe fn load8(src: *const u8) -> __m256 {
        use std::arch::x86_64::{
            __m128i, _mm_loadl_epi64, _mm256_cvtepi32_ps, _mm256_cvtepu8_epi32,
        };
        // SAFETY: `_mm_loadl_epi64` reads the 8 bytes from `src` (the rest of the
        // register is zeroed), which the caller promises lie inside one slice; it has
        // no alignment requirement.
        let bytes = unsafe { _mm_loadl_epi64(src.cast::<__m128i>()) };
        // Zero-extended to i32, then converted exactly (every byte is an f32).
        _mm256_cvtepi32_ps(_mm256_cvtepu8_epi32(bytes))
    }
}

/// Writes `raw` (`m` rows of `n_chan` samples) into `data` as `into` lays it out.
pub(super) fn transpose_in<T: Widen>(raw: &[T], n_chan: usize, data: &mut [f32], into: Columns) {
    #[cfg(target_arch = "x86_64")]
    let avx2 = crate::isa::Isa::cpu_has(crate::isa::IsaLevel::Avx2);
    #[cfg(not(target_arch = "x86_64"))]
    let avx2 = false;
    transpose_with(raw, n_chan, data, into, avx2);
}

/// [`transpose_in`], through the AVX2 tiles when `avx2` (the caller has detected the
/// instruction set) and the plain ones otherwise.
fn transpose_with<T: Widen>(raw: &[T], n_chan: usize, data: &mut [f32], into: Columns, avx2: bool) {
    if n_chan == 0 || raw.is_empty() || into.capacity == 0 {
        return;
    }
    let m = raw.len() / n_chan;
    data[..n_chan * into.capacity]
        .par_chunks_mut(GROUP_CHANNELS * into.capacity)
        .enumerate()
        .for_each(|(g, group)| {
            let tile = Tile {
                raw,
                n_chan,
                c0: g * GROUP_CHANNELS,
                n_group: group.len() / into.capacity,
                into,
            };
            for t0 in (0..m).step_by(TILE_TIMES) {
                let times = t0..(t0 + TILE_TIMES).min(m);
                match avx2 {
                    // SAFETY: `copy_avx2` only requires the AVX2 instruction set, which
                    // the caller detected at run time; it is otherwise safe code.
                    #[cfg(target_arch = "x86_64")]
                    true => unsafe { tile.copy_avx2(times, group) },
                    _ => tile.copy_plain(0..tile.n_group, times, group),
                }
            }
        });
}

/// One channel group's share of the transpose.
struct Tile<'a, T> {
    raw: &'a [T],
    n_chan: usize,
    /// The group's first channel, and its channel count.
    c0: usize,
    n_group: usize,
    into: Columns,
}

impl<T: Widen> Tile<'_, T> {
    /// Copies samples `times` of the group's channels `channels`, one at a time.
    fn copy_plain(
        &self,
        channels: std::ops::Range<usize>,
        times: std::ops::Range<usize>,
        group: &mut [f32],
    ) {
        let Columns { capacity, offset } = self.into;
        for k in channels {
            let row = &mut group[k * capacity + offset..][times.clone()];
            for (out, t) in row.iter_mut().zip(times.clone()) {
                *out = self.raw[t * self.n_chan + self.c0 + k].into();
            }
        }
    }

    /// Copies samples `times` of every channel of the group: full 8 × 8 blocks through
    /// AVX2 registers, the edges one sample at a time.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    fn copy_avx2(&self, times: std::ops::Range<usize>, group: &mut [f32]) {
        let Columns { capacity, offset } = self.into;
        let full_k = self.n_group / 8 * 8;
        let full_t = times.start + times.len() / 8 * 8;
        for k0 in (0..full_k).step_by(8) {
            for t0 in (times.start..full_t).step_by(8) {
                let src = &self.raw[t0 * self.n_chan + self.c0 + k0..];
                let dst = &mut group[k0 * capacity + offset + t0..];
                block8(src, self.n_chan, dst, capacity);
            }
        }
        self.copy_plain(0..full_k, full_t..times.end, group);
        self.copy_plain(full_k..self.n_group, times, group);
    }
}

/// Transposes the 8 × 8 block whose row i is `src[i·src_stride..][..8]` into
/// `dst[j·dst_stride..][..8]` (row j of the result is column j of the block),
/// widening the samples to f32 as they are loaded.
///
/// # Panics
/// If either slice is too short for its eight rows.
#[cfg(target_arch = "x86_64")]
#[inline]
#[target_feature(enable = "avx2")]
fn block8<T: Widen>(src: &[T], src_stride: usize, dst: &mut [f32], dst_stride: usize) {
    use std::arch::x86_64::{
        _mm256_permute2f128_ps, _mm256_shuffle_ps, _mm256_storeu_ps, _mm256_unpackhi_ps,
        _mm256_unpacklo_ps,
    };
    assert!(src.len() >= 7 * src_stride + 8 && dst.len() >= 7 * dst_stride + 8);
    // SAFETY: by the assertion, row i's eight values `i·src_stride..i·src_stride + 8`
    // (i < 8) lie inside `src`, and this function runs only where AVX2 is enabled.
    let r: [__m256; 8] =
        std::array::from_fn(|i| unsafe { T::load8(src.as_ptr().add(i * src_stride)) });
    // Interleave pairs of rows, then pairs of pairs: lanes hold 4 × 4 sub-blocks.
    let lo = |a, b| _mm256_unpacklo_ps(a, b);
    let hi = |a, b| _mm256_unpackhi_ps(a, b);
    let t = [
        lo(r[0], r[1]),
        hi(r[0], r[1]),
        lo(r[2], r[3]),
        hi(r[2], r[3]),
        lo(r[4], r[5]),
        hi(r[4], r[5]),
        lo(r[6], r[7]),
        hi(r[6], r[7]),
    ];
    let s = [
        _mm256_shuffle_ps::<0x44>(t[0], t[2]),
        _mm256_shuffle_ps::<0xEE>(t[0], t[2]),
        _mm256_shuffle_ps::<0x44>(t[1], t[3]),
        _mm256_shuffle_ps::<0xEE>(t[1], t[3]),
        _mm256_shuffle_ps::<0x44>(t[4], t[6]),
        _mm256_shuffle_ps::<0xEE>(t[4], t[6]),
        _mm256_shuffle_ps::<0x44>(t[5], t[7]),
        _mm256_shuffle_ps::<0xEE>(t[5], t[7]),
    ];
    // Columns 0–3 are the low 128-bit halves, columns 4–7 the high ones.
    for j in 0..4 {
        let low = _mm256_permute2f128_ps::<0x20>(s[j], s[j + 4]);
        let high = _mm256_permute2f128_ps::<0x31>(s[j], s[j + 4]);
        // SAFETY: by the assertion, rows j and j + 4 (< 8) of `dst` hold eight values.
        unsafe {
            _mm256_storeu_ps(dst.as_mut_ptr().add(j * dst_stride), low);
            _mm256_storeu_ps(dst.as_mut_ptr().add((j + 4) * dst_stride), high);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    /// Both paths against plain indexing on random samples of type `T`, with channel
    /// and time counts that are not multiples of the tiles or blocks, behind kept
    /// samples that must stay untouched.
    fn both_paths_equal_plain_indexing<T: Widen>(seed: u64, draw: impl Fn(&mut ChaCha8Rng) -> T) {
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        for &(n_chan, m, offset) in &[(141, 53, 7), (8, 16, 0), (5, 3, 2), (256, 40, 1)] {
            let raw: Vec<T> = (0..m * n_chan).map(|_| draw(&mut rng)).collect();
            let capacity = offset + m + 2;
            let into = Columns { capacity, offset };
            #[cfg(target_arch = "x86_64")]
            let paths = [false, crate::isa::Isa::cpu_has(crate::isa::IsaLevel::Avx2)];
            #[cfg(not(target_arch = "x86_64"))]
            let paths = [false];
            for avx2 in paths {
                let mut data = vec![0.0; n_chan * capacity];
                transpose_with(&raw, n_chan, &mut data, into, avx2);
                for c in 0..n_chan {
                    let row = &data[c * capacity..][..capacity];
                    assert!(row[..offset].iter().all(|&v| v == 0.0), "kept untouched");
                    for t in 0..m {
                        let expected: f32 = raw[t * n_chan + c].into();
                        assert_eq!(row[offset + t], expected, "{avx2} {n_chan} {c} {t}");
                    }
                    assert!(row[offset + m..].iter().all(|&v| v == 0.0), "nothing past");
                }
            }
        }
    }

    #[test]
    fn f32_reads_land_in_place_on_both_paths() {
        both_paths_equal_plain_indexing(21, |rng| rng.random::<f32>());
    }

    /// Random bytes widen to themselves on both paths.
    #[test]
    fn byte_reads_are_widened_in_place_on_both_paths() {
        both_paths_equal_plain_indexing(22, |rng| rng.random::<u8>());
    }
}
