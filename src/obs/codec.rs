//! Sample checks and quantisation shared by every reader and writer.

use std::path::Path;

use crate::error::{Error, Result};

/// Rounds `v` to the nearest integer and clamps it to `[0, 2^nbits − 1]`: the stored
/// value of an unsigned `nbits`-bit digitiser that saturates (common practice).
pub fn quantise(v: f32, nbits: u32) -> f32 {
    let max = ((1u64 << nbits) - 1) as f32;
    v.round().clamp(0.0, max)
}

/// Whether no value is NaN or infinite.
pub fn all_finite(values: &[f32]) -> bool {
    // An exponent of all ones marks NaN and ±Inf; OR-reducing the test over the slice
    // vectorises (no early exit), so the common all-finite case costs one cheap pass.
    const EXP: u32 = 0x7f80_0000;
    !values
        .iter()
        .fold(false, |acc, v| acc | (v.to_bits() & EXP == EXP))
}

/// Fails on the first NaN or infinite value in `rows` (`[time, channel]`), naming the
/// sample (counted from `first_row`) and the channel.
///
/// # Errors
/// [`Error::BadInput`] naming `path`.
pub fn check_finite(path: &Path, rows: &[f32], n_chan: usize, first_row: u64) -> Result<()> {
    if all_finite(rows) {
        return Ok(());
    }
    match rows.iter().position(|v| !v.is_finite()) {
        None => Ok(()),
        Some(i) => Err(Error::bad_input(
            path,
            format!(
                "sample {} of channel {} is {} (only finite values are allowed)",
                first_row + (i / n_chan) as u64,
                i % n_chan,
                rows[i]
            ),
        )),
    }
}

/// Fails unless `rows.len()` is a whole number of rows of `n_chan` channels: a
/// caller bug reported as a typed error so a writer never panics.
///
/// # Errors
/// [`Error::BadInput`] naming `path`.
pub fn check_whole_rows(path: &Path, rows: &[f32], n_chan: usize) -> Result<()> {
    if rows.len().is_multiple_of(n_chan) {
        Ok(())
    } else {
        Err(Error::bad_input(
            path,
            format!(
                "{} values are not whole rows of {n_chan} channels",
                rows.len()
            ),
        ))
    }
}

/// Fails if adding `adding` rows to `written` would pass the `announced` count.
///
/// # Errors
/// [`Error::BadInput`] naming `path`.
pub fn check_room(path: &Path, written: u64, adding: u64, announced: u64) -> Result<()> {
    if written + adding > announced {
        return Err(Error::bad_input(
            path,
            format!("more rows written than the {announced} announced"),
        ));
    }
    Ok(())
}

/// Fails unless a finished writer received exactly the `announced` rows.
///
/// # Errors
/// [`Error::BadInput`] naming `path`.
pub fn check_complete(path: &Path, written: u64, announced: u64) -> Result<()> {
    if written != announced {
        return Err(Error::bad_input(
            path,
            format!("{written} rows written but the header announced {announced}"),
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantise_rounds_and_saturates() {
        assert_eq!(quantise(3.49, 8), 3.0);
        assert_eq!(quantise(3.5, 8), 4.0);
        assert_eq!(quantise(-7.0, 8), 0.0);
        assert_eq!(quantise(300.0, 8), 255.0);
        assert_eq!(quantise(300.0, 4), 15.0);
        assert_eq!(quantise(1e9, 16), 65535.0);
        assert_eq!(quantise(0.6, 1), 1.0);
    }

    // The exponent test against a plain `is_finite` on seeded random slices of every
    // length up to 69: finite values of every kind (±0, subnormals, the smallest
    // normals, ±MAX, random bit patterns) with ±Inf or a NaN (several payloads, quiet
    // and signalling, either sign) at every position, alone or mixed.
    #[test]
    fn all_finite_matches_is_finite() {
        use rand::{Rng, SeedableRng};
        use rand_chacha::ChaCha8Rng;
        let finite_kinds = [
            0.0,
            -0.0,
            f32::from_bits(1),
            f32::from_bits(0x8000_0001),
            f32::from_bits(0x007f_ffff),
            f32::from_bits(0x807f_ffff),
            f32::MIN_POSITIVE,
            -f32::MIN_POSITIVE,
            f32::MAX,
            f32::MIN,
        ];
        let non_finite = [
            f32::INFINITY,
            f32::NEG_INFINITY,
            f32::NAN,
            -f32::NAN,
            f32::from_bits(0x7f80_0001),
            f32::from_bits(0x7fbf_ffff),
            f32::from_bits(0x7fc0_1234),
            f32::from_bits(0x7fff_ffff),
            f32::from_bits(0xff80_0001),
            f32::from_bits(0xffff_ffff),
        ];
        let finite = |rng: &mut ChaCha8Rng| loop {
            let v = if rng.random_bool(0.25) {
                finite_kinds[rng.random_range(0..finite_kinds.len())]
            } else {
                f32::from_bits(rng.random())
            };
            if v.is_finite() {
                return v;
            }
        };
        let reference = |v: &[f32]| v.iter().all(|x| x.is_finite());
        let mut rng = ChaCha8Rng::seed_from_u64(67);
        let mut outcomes = [0usize; 2];
        for len in 0..70usize {
            let clean: Vec<f32> = (0..len).map(|_| finite(&mut rng)).collect();
            assert!(all_finite(&clean), "{clean:?}");
            for pos in 0..len {
                for &bad in &non_finite {
                    let mut v: Vec<f32> = (0..len).map(|_| finite(&mut rng)).collect();
                    v[pos] = bad;
                    assert!(!all_finite(&v), "{bad} at {pos} of {len}");
                }
            }
            for _ in 0..50 {
                let v: Vec<f32> = (0..len)
                    .map(|_| {
                        if rng.random_range(0..len.max(1)) == 0 {
                            non_finite[rng.random_range(0..non_finite.len())]
                        } else {
                            finite(&mut rng)
                        }
                    })
                    .collect();
                let want = reference(&v);
                assert_eq!(all_finite(&v), want, "{v:?}");
                outcomes[usize::from(want)] += 1;
            }
        }
        assert!(outcomes.iter().all(|&n| n > 500), "{outcomes:?}");
    }

    #[test]
    fn finite_check_names_sample_and_channel() {
        let p = Path::new("x.npy");
        assert!(check_finite(p, &[1.0, 2.0, 3.0, 4.0], 2, 0).is_ok());
        let msg = check_finite(p, &[1.0, 2.0, 3.0, f32::NAN], 2, 10)
            .unwrap_err()
            .to_string();
        assert_eq!(
            msg,
            "x.npy: sample 11 of channel 1 is NaN (only finite values are allowed)"
        );
    }
}
