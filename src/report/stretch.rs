//! Re-reading the stretch of an observation around an event and putting it on a
//! common noise scale, so plots can be made from a candidate row and the file alone.

use ndarray::Array2;

use crate::error::Result;
use crate::obs::{Block, SampleSource, fill_rows};

/// Reads samples `start..start + len` (`[time, channel]`) of `source` into a [`Block`],
/// skipping to `start` with [`SampleSource::skip_rows`] (a seek for the file readers).
/// Rows past the end of the file are NaN, which [`normalise`] treats as missing.
///
/// # Errors
/// Whatever the source reports (truncated or corrupt data, I/O).
pub fn read_stretch<S: SampleSource>(mut source: S, start: u64, len: usize) -> Result<Block> {
    let n_chan = source.header().n_chan();
    let mut data = vec![f32::NAN; len * n_chan];
    if source.skip_rows(start)? == start {
        // Rows after the last one read keep their NaN.
        fill_rows(&mut source, &mut data)?;
    }
    Ok(Block {
        start_sample: start,
        overlap: 0,
        n_chan,
        data,
    })
}

/// A stretch on a common noise scale, `[channel, time]` as the dedispersers expect.
#[derive(Debug, Clone)]
pub struct Normalised {
    /// Zero median and unit robust σ per live channel; dead channels are all zero.
    pub data: Array2<f32>,
    /// Whether each channel carries data (unmasked and not constant).
    pub live: Vec<bool>,
}

/// Scales each channel of `block` to zero median and unit robust σ
/// (σ = 1.4826 × MAD, the normal-consistent scale; Rousseeuw & Croux 1993, JASA 88, 1273).
/// Channels with weight 0, no finite samples or zero MAD are dead and set to zero, as are
/// NaN samples.
pub fn normalise(block: &Block, weights: &[f32]) -> Normalised {
    let (n_time, n_chan) = (block.n_time(), block.n_chan);
    let mut data = Array2::<f32>::zeros((n_chan, n_time));
    let mut live = vec![false; n_chan];
    let mut column = Vec::with_capacity(n_time);
    for (c, is_live) in live.iter_mut().enumerate() {
        if weights.get(c).is_some_and(|&w| w == 0.0) {
            continue;
        }
        column.clear();
        column.extend((0..n_time).map(|t| block.data[t * n_chan + c]));
        let Some((median, sigma)) = robust_location_scale(&column) else {
            continue;
        };
        *is_live = true;
        for (out, &x) in data.row_mut(c).iter_mut().zip(&column) {
            *out = if x.is_finite() {
                ((x as f64 - median) / sigma) as f32
            } else {
                0.0
            };
        }
    }
    Normalised { data, live }
}

/// Median and 1.4826 × MAD of the finite values (`robust::median_sigma`), or `None`
/// if there are none or the MAD is zero.
pub(crate) fn robust_location_scale(values: &[f32]) -> Option<(f64, f64)> {
    let finite: Vec<f32> = values.iter().copied().filter(|x| x.is_finite()).collect();
    let (median, sigma) = crate::robust::median_sigma(&finite, 1, &mut Vec::new());
    (sigma.is_finite() && sigma > 0.0).then_some((median as f64, sigma as f64))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::MemorySource;
    use crate::report::waterfall::tests::test_header;

    #[test]
    fn stretch_matches_the_file_and_pads_past_the_end() {
        let (n_chan, n_time) = (3, 10_000u64);
        let data: Vec<f32> = (0..n_time as usize * n_chan).map(|i| i as f32).collect();
        let src = MemorySource::new(test_header(n_chan, n_time), data.clone());
        let b = read_stretch(src, 4090, 20).unwrap();
        assert_eq!((b.start_sample, b.n_time()), (4090, 20));
        assert_eq!(
            b.data[..],
            data[4090 * 3..4110 * 3],
            "crosses a block boundary"
        );
        let src = MemorySource::new(test_header(n_chan, n_time), data.clone());
        let b = read_stretch(src, 9995, 10).unwrap();
        assert_eq!(b.row(4)[2], data[9999 * 3 + 2]);
        assert!(b.row(5).iter().all(|x| x.is_nan()), "past the end is NaN");
        let src = MemorySource::new(test_header(n_chan, n_time), data);
        let b = read_stretch(src, 20_000, 4).unwrap();
        assert_eq!((b.start_sample, b.n_time()), (20_000, 4));
        assert!(b.data.iter().all(|x| x.is_nan()), "wholly past the end");
    }

    #[test]
    fn normalise_gives_unit_robust_scale_and_kills_masked_channels() {
        let n_time = 1001;
        // Channel 0: uniform ramp 0..1000 (median 500, MAD 250); channel 1 masked;
        // channel 2 constant (dead).
        let mut data = Vec::new();
        for t in 0..n_time {
            data.extend([t as f32, 7.0, 3.0]);
        }
        let block = Block {
            start_sample: 0,
            overlap: 0,
            n_chan: 3,
            data,
        };
        let n = normalise(&block, &[1.0, 0.0, 1.0]);
        assert_eq!(n.live, vec![true, false, false]);
        assert!((n.data[[0, 750]] as f64 - 250.0 / (1.482602 * 250.0)).abs() < 1e-5);
        assert!(n.data.row(1).iter().chain(n.data.row(2)).all(|&x| x == 0.0));
    }
}
