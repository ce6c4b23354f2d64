//! Stage-1 tiles in 16-bit fixed point. The tree levels inside a sub-band are bound
//! by memory traffic, not arithmetic, so halving their bytes (f32 → i16) speeds them
//! up (measured in docs/benchmarks.md).
//!
//! Each tile gets its own scale: the largest finite |value| among its channels maps to
//! `i16::MAX / n_chan`, so no sum of the sub-band's `n_chan` channels can leave the
//! i16 range and the adds never saturate on finite input. A value is then off by at
//! most half a quantum, `peak / (2·limit)` — for unit-variance noise (peak ≈ 5σ over a
//! tile) about 0.005σ, i.e. ~10⁻⁵ of the noise variance; a 500σ spike makes its own
//! tile's quantum about 1σ (+8 % noise variance there). Infinite values saturate (the
//! adds saturate too) and NaN becomes 0.

/// The f32 per quantum of a tile: multiply a fixed-point sum by it to get back the
/// sum of the original values.
pub(crate) type Quantum = f32;

/// Quantises a tile: `out`'s rows (`width` values each, one per channel) become the
/// channels' samples `start..start + width`, zero past each channel's end, in units
/// of the returned quantum (0 for an all-zero tile).
#[inline(always)]
pub(crate) fn quantise_tile<'a>(
    channels: impl Iterator<Item = &'a [f32]> + Clone,
    start: usize,
    width: usize,
    out: &mut [i16],
) -> Quantum {
    let window = |chan: &'a [f32]| {
        let avail = chan.get(start..).unwrap_or(&[]);
        &avail[..avail.len().min(width)]
    };
    let (mut peak, mut n_chan) = (0.0f32, 0usize);
    for chan in channels.clone() {
        peak = peak.max(peak_abs(window(chan)));
        n_chan += 1;
    }
    let limit = (i16::MAX as usize / n_chan.max(1)) as f32;
    let scale = if peak > 0.0 { limit / peak } else { 0.0 };
    for (row, chan) in out.chunks_exact_mut(width).zip(channels) {
        let values = window(chan);
        let (head, tail) = row.split_at_mut(values.len());
        for (q, &x) in head.iter_mut().zip(values) {
            *q = to_fixed(x, scale);
        }
        tail.fill(0);
    }
    if scale > 0.0 { peak / limit } else { 0.0 }
}

/// `x·scale` rounded to the nearest integer (ties to even); out-of-range values
/// saturate, NaN is 0.
#[inline(always)]
fn to_fixed(x: f32, scale: f32) -> i16 {
    let v = x * scale;
    let v = if v.is_nan() {
        0.0
    } else {
        v.clamp(-32767.0, 32767.0)
    };
    // Adding 1.5·2²³ leaves the integer nearest v in the low mantissa bits (exact for
    // |v| < 2²²): unlike a float-to-int cast, this vectorises.
    ((v + 12_582_912.0).to_bits() as i32 - 0x4B40_0000) as i16
}

/// The largest finite |x| of `values` (0 if none). On the bits: clearing the sign
/// leaves |x|, whose bits order like its value, and the finite ones lie below
/// infinity's. Integer maxima in 16 lanes made the kernel 2–4 % faster than float
/// compares and blends in 8 (docs/benchmarks.md).
#[inline(always)]
fn peak_abs(values: &[f32]) -> f32 {
    const INFINITY_BITS: u32 = 0x7f80_0000;
    let finite_abs = |x: f32| {
        let a = x.to_bits() & 0x7fff_ffff;
        if a < INFINITY_BITS { a } else { 0 }
    };
    let mut lanes = [0u32; 16];
    let chunks = values.chunks_exact(16);
    let rest = chunks.remainder();
    for chunk in chunks {
        for k in 0..16 {
            lanes[k] = lanes[k].max(finite_abs(chunk[k]));
        }
    }
    let peak = rest.iter().map(|&x| finite_abs(x)).chain(lanes).max();
    f32::from_bits(peak.unwrap_or(0))
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    // A tile's values come back to within half a quantum, and the largest one sits at
    // the limit that keeps a sum of every channel inside i16.
    #[test]
    fn quantised_tiles_round_trip_within_half_a_quantum() {
        let mut rng = ChaCha8Rng::seed_from_u64(16);
        for n_chan in [1, 3, 64] {
            let chans: Vec<Vec<f32>> = (0..n_chan)
                .map(|_| (0..50).map(|_| rng.random_range(-3.0f32..3.0)).collect())
                .collect();
            let (start, width) = (7, 60);
            let mut out = vec![1i16; n_chan * width];
            let q = quantise_tile(chans.iter().map(Vec::as_slice), start, width, &mut out);
            let peak = chans
                .iter()
                .flat_map(|c| &c[start..])
                .fold(0.0f32, |m, x| m.max(x.abs()));
            assert!((q - peak / (32767 / n_chan) as f32).abs() <= 1e-6 * q);
            let top = out.iter().map(|v| v.unsigned_abs() as usize).max().unwrap();
            assert_eq!(top, 32767 / n_chan);
            for (row, chan) in out.chunks_exact(width).zip(&chans) {
                for (i, &v) in row.iter().enumerate() {
                    let want = chan.get(start + i).copied().unwrap_or(0.0);
                    assert!(
                        (f32::from(v) * q - want).abs() <= 0.5 * q * 1.0001,
                        "{v} {want}"
                    );
                }
            }
        }
    }

    // Zero tiles have no scale; infinities saturate and NaN is 0 without spoiling the
    // scale of the finite values.
    #[test]
    fn zero_and_non_finite_tiles_stay_defined() {
        let mut out = vec![5i16; 8];
        assert_eq!(
            quantise_tile([&[0.0f32; 8][..]].into_iter(), 0, 8, &mut out),
            0.0
        );
        assert!(out.iter().all(|&v| v == 0));
        let chan = [1.0, f32::INFINITY, f32::NAN, -2.0];
        let mut out = vec![0i16; 4];
        let q = quantise_tile([&chan[..]].into_iter(), 0, 4, &mut out);
        assert_eq!(q, 2.0 / 32767.0);
        assert_eq!(out, [16384, 32767, 0, -32767]);
    }

    // The bit-level peak against a plain float fold, on random lengths with
    // non-finite values, signed zeros and subnormals mixed in.
    #[test]
    fn peak_abs_equals_a_plain_fold_over_finite_values() {
        let mut rng = ChaCha8Rng::seed_from_u64(69);
        let specials = [
            f32::NAN,
            f32::INFINITY,
            f32::NEG_INFINITY,
            -0.0,
            1e-40,
            -1e-42,
            f32::MAX,
            f32::MIN,
        ];
        for case in 0..200 {
            let len = rng.random_range(0..70);
            let values: Vec<f32> = (0..len)
                .map(|_| match rng.random_range(0..8) {
                    0 => specials[rng.random_range(0..specials.len())],
                    _ => rng.random_range(-1e3f32..1e3) * (case as f32 + 1.0),
                })
                .collect();
            let plain = values
                .iter()
                .filter(|x| x.is_finite())
                .fold(0.0f32, |m, x| m.max(x.abs()));
            assert_eq!(peak_abs(&values).to_bits(), plain.to_bits(), "{values:?}");
        }
    }
}
