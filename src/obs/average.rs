//! Averaging a recording as it is read: groups of adjacent time samples and of
//! adjacent channels become one. At low frequencies a sweep lasts minutes and every
//! search block must hold one, at the input's own resolution; where the channel
//! smearing is tens of milliseconds anyway, averaging first cuts that memory (and the
//! work) by the product of the factors.

use serde::{Deserialize, Serialize};

use super::{Header, SampleSource, fill_rows};
use crate::error::{Error, Result};

/// Averaging factors; 1 and 1 leave the recording as it is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(default, deny_unknown_fields)]
pub struct Averaging {
    /// Adjacent time samples averaged into one (the sample time grows by this factor).
    pub samples: usize,
    /// Adjacent channels averaged into one; must divide the number of channels.
    pub channels: usize,
}

impl Default for Averaging {
    fn default() -> Self {
        Averaging {
            samples: 1,
            channels: 1,
        }
    }
}

impl Averaging {
    /// Whether nothing is averaged.
    pub fn is_none(&self) -> bool {
        *self == Averaging::default()
    }

    /// Checks the factors on their own.
    ///
    /// # Errors
    /// A factor of 0.
    pub fn validate(&self) -> std::result::Result<(), String> {
        if self.samples == 0 || self.channels == 0 {
            return Err(format!(
                "averaging factors must be at least 1, got {} samples and {} channels",
                self.samples, self.channels
            ));
        }
        Ok(())
    }

    /// The header of the averaged recording: sample time × `samples`, the whole
    /// groups of samples only (a last partial group is dropped), each channel group at
    /// its mean centre frequency and `channels` times as wide, masked only when every
    /// channel of the group is.
    ///
    /// # Errors
    /// A factor of 0, a channel factor that does not divide the channels, or more
    /// samples to a group than the recording has.
    pub fn header(&self, h: &Header) -> std::result::Result<Header, String> {
        self.check_channels(h)?;
        if h.n_samples < self.samples as u64 {
            return Err(format!(
                "cannot average {} samples: the recording has only {}",
                self.samples, h.n_samples
            ));
        }
        Ok(self.averaged(h, h.n_samples / self.samples as u64))
    }

    /// The header of the groups that start in a recording with header `h` when it
    /// is read on into one that continues it ([`Header::is_continued_by`]) and the two
    /// are averaged as one stream: every group that starts in it, a last partial one
    /// completed by the next recording's first samples (so even a recording shorter
    /// than one group has one).
    ///
    /// # Errors
    /// A factor of 0 or a channel factor that does not divide the channels.
    pub fn run_on_header(&self, h: &Header) -> std::result::Result<Header, String> {
        self.check_channels(h)?;
        Ok(self.averaged(h, h.n_samples.div_ceil(self.samples as u64)))
    }

    /// Rows of the recordings that continue one of `n_samples` rows to read on into,
    /// so that the averaged stream holds `groups_after` groups after those that start
    /// in it ([`Self::run_on_header`]): the first rows complete its last partial group.
    pub fn rows_to_read_on(&self, n_samples: u64, groups_after: u64) -> u64 {
        let per_group = self.samples as u64;
        (n_samples.div_ceil(per_group) + groups_after) * per_group - n_samples
    }

    /// Checks the factors against the recording's channels.
    fn check_channels(&self, h: &Header) -> std::result::Result<(), String> {
        self.validate()?;
        if !h.n_chan().is_multiple_of(self.channels) {
            return Err(format!(
                "cannot average {} channels in groups of {}: the factor must divide them",
                h.n_chan(),
                self.channels
            ));
        }
        Ok(())
    }

    /// `h` averaged by these factors, `n_groups` groups of samples long.
    fn averaged(&self, h: &Header, n_groups: u64) -> Header {
        let mut out = h.clone();
        out.tsamp_s = h.tsamp_s * self.samples as f64;
        out.n_samples = n_groups;
        out.chan_bw_mhz = h.chan_bw_mhz * self.channels as f64;
        out.freqs_mhz = h
            .freqs_mhz
            .chunks(self.channels)
            .map(|g| g.iter().sum::<f64>() / g.len() as f64)
            .collect();
        out.weights = h
            .weights
            .chunks(self.channels)
            .map(|g| g.iter().sum::<f32>() / g.len() as f32)
            .collect();
        // Means of integers are not integers any more (but nothing averaged is as read).
        if !self.is_none() {
            out.nbits = 32;
        }
        out
    }

    /// `source` averaged by these factors (`source` itself when nothing is averaged);
    /// `label` names the recording in an error.
    ///
    /// # Errors
    /// As [`Self::header`], naming the recording.
    pub fn wrap(
        &self,
        source: Box<dyn SampleSource>,
        label: &str,
    ) -> Result<Box<dyn SampleSource>> {
        if self.is_none() {
            return Ok(source);
        }
        let header = self
            .header(source.header())
            .map_err(|m| Error::bad_input(label, m))?;
        // A channel of weight 0 holds no data (whatever its samples say): the group's
        // mean is over its other channels.
        let live: Vec<bool> = source.header().weights.iter().map(|&w| w != 0.0).collect();
        let live_per_group = live
            .chunks(self.channels)
            .map(|g| g.iter().filter(|&&l| l).count())
            .collect();
        Ok(Box::new(AveragedSource {
            live,
            live_per_group,
            inner: source,
            header,
            factors: *self,
            raw: Vec::new(),
            row_sums: Vec::new(),
        }))
    }
}

/// Input values (rows × channels) an [`AveragedSource`] reads per call, which bounds
/// its buffer to 4 MiB (or one group of rows, if larger).
const READ_CHUNK_VALUES: usize = 1 << 20;

/// A [`SampleSource`] that averages another one's rows and channels.
struct AveragedSource {
    inner: Box<dyn SampleSource>,
    header: Header,
    factors: Averaging,
    /// Whether each input channel carries data, and how many do in each group.
    live: Vec<bool>,
    live_per_group: Vec<usize>,
    /// Input rows of one call.
    raw: Vec<f32>,
    /// Sums over one group of input rows, per input channel.
    row_sums: Vec<f32>,
}

impl SampleSource for AveragedSource {
    fn header(&self) -> &Header {
        &self.header
    }

    fn read_rows(&mut self, out: &mut [f32]) -> Result<usize> {
        let (n_in, n_out) = (self.inner.header().n_chan(), self.header.n_chan());
        let (per_row, per_chan) = (self.factors.samples, self.factors.channels);
        // At most one chunk of input at a time: a call may ask for a whole block, and
        // that block at the input's resolution is what averaging must not hold.
        let want = (out.len() / n_out).min((READ_CHUNK_VALUES / (per_row * n_in)).max(1));
        self.raw.resize(want * per_row * n_in, 0.0);
        let got = fill_rows(&mut *self.inner, &mut self.raw)? / per_row;
        for (row_out, rows_in) in out
            .chunks_exact_mut(n_out)
            .zip(self.raw.chunks_exact(per_row * n_in))
            .take(got)
        {
            // Time first, over whole rows (contiguous, so it vectorises), then each
            // channel group's live channels.
            let sums = &mut self.row_sums;
            sums.clear();
            sums.resize(n_in, 0.0);
            for row in rows_in.chunks_exact(n_in) {
                for (sum, &x) in sums.iter_mut().zip(row) {
                    *sum += x;
                }
            }
            for (((value, group), live), &n) in row_out
                .iter_mut()
                .zip(sums.chunks_exact(per_chan))
                .zip(self.live.chunks_exact(per_chan))
                .zip(&self.live_per_group)
            {
                let total: f32 = group
                    .iter()
                    .zip(live)
                    .map(|(&x, &l)| if l { x } else { 0.0 })
                    .sum();
                *value = if n == 0 {
                    0.0
                } else {
                    total / (n * per_row) as f32
                };
            }
        }
        Ok(got)
    }

    // Groups start at multiples of `samples` input rows from the start, so skipping
    // whole groups is the inner source's own (seeking) skip.
    fn skip_rows(&mut self, n: u64) -> Result<u64> {
        let per_row = self.factors.samples as u64;
        Ok(self.inner.skip_rows(n.saturating_mul(per_row))? / per_row)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::{MemorySource, test_header};

    fn source(n_chan: usize, n_samples: usize, seed: u64) -> (Header, Vec<f32>) {
        let h = test_header(n_chan, n_samples as u64);
        let mut state = seed;
        let data = (0..n_chan * n_samples)
            .map(|_| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                (state >> 40) as f32 / 1e4
            })
            .collect();
        (h, data)
    }

    // The plain definition: every output value is the mean of its block of live input
    // values, read in one go, against the streaming source read in awkward pieces.
    #[test]
    fn streaming_means_match_the_plain_block_means() {
        let (n_chan, n_samples) = (12, 1003);
        let (mut h, data) = source(n_chan, n_samples, 5);
        h.weights[4] = 0.0;
        h.weights[9] = 0.0;
        h.weights[10] = 0.0;
        h.weights[11] = 0.0;
        let avg = Averaging {
            samples: 7,
            channels: 4,
        };
        let inner = Box::new(MemorySource::new(h.clone(), data.clone()));
        let mut s = avg.wrap(inner, "test").unwrap();
        let out_h = s.header().clone();
        assert_eq!(out_h.n_samples, 1003 / 7);
        assert_eq!(out_h.n_chan(), 3);
        assert_eq!(out_h.tsamp_s, h.tsamp_s * 7.0);
        assert_eq!(out_h.chan_bw_mhz, h.chan_bw_mhz * 4.0);
        assert_eq!(out_h.weights, vec![1.0, 0.75, 0.25]);
        let centre = (h.freqs_mhz[4] + h.freqs_mhz[7]) / 2.0;
        assert!((out_h.freqs_mhz[1] - centre).abs() < 1e-9);

        let mut got = Vec::new();
        let mut buf = vec![0.0; 3 * 5];
        loop {
            let n = s.read_rows(&mut buf).unwrap();
            if n == 0 {
                break;
            }
            got.extend_from_slice(&buf[..n * 3]);
        }
        assert_eq!(got.len(), (1003 / 7) * 3);
        for t in 0..1003 / 7 {
            for c in 0..3 {
                let mut sum = 0.0f64;
                let mut n = 0;
                for dt in 0..7 {
                    for k in c * 4..(c + 1) * 4 {
                        if h.weights[k] != 0.0 {
                            sum += f64::from(data[(t * 7 + dt) * n_chan + k]);
                            n += 1;
                        }
                    }
                }
                let expected = sum / n as f64;
                let value = f64::from(got[t * 3 + c]);
                assert!(
                    (value - expected).abs() < 1e-4 * expected.abs().max(1.0),
                    "{t} {c}"
                );
            }
        }
    }

    // A request for a whole block is served a chunk at a time, so the input is
    // never held at its own resolution for more than 4 MiB; `fill_rows` still gets
    // every row.
    #[test]
    fn a_large_read_holds_one_chunk_of_input() {
        let (h, data) = source(1024, 2000, 3);
        let avg = Averaging {
            samples: 4,
            channels: 8,
        };
        let open = || avg.wrap(Box::new(MemorySource::new(h.clone(), data.clone())), "t");
        let mut whole = vec![0.0; 500 * 128];
        let got = open().unwrap().read_rows(&mut whole).unwrap();
        assert_eq!(got, READ_CHUNK_VALUES / (4 * 1024));
        let mut filled = vec![0.0; 500 * 128];
        assert_eq!(fill_rows(&mut *open().unwrap(), &mut filled).unwrap(), 500);
        assert_eq!(whole[..got * 128], filled[..got * 128]);
    }

    // A skip lands where reading and discarding would: on the same group boundary.
    #[test]
    fn skipping_whole_groups_matches_reading_past_them() {
        let (h, data) = source(6, 100, 9);
        let avg = Averaging {
            samples: 3,
            channels: 2,
        };
        let open = || avg.wrap(Box::new(MemorySource::new(h.clone(), data.clone())), "t");
        let (mut read, mut skipped) = (open().unwrap(), open().unwrap());
        let mut past = vec![0.0; 3 * 5];
        assert_eq!(read.read_rows(&mut past).unwrap(), 5);
        assert_eq!(skipped.skip_rows(5).unwrap(), 5);
        let (mut a, mut b) = (vec![0.0; 3 * 4], vec![0.0; 3 * 4]);
        assert_eq!(read.read_rows(&mut a).unwrap(), 4);
        assert_eq!(skipped.read_rows(&mut b).unwrap(), 4);
        assert_eq!(a, b);
        // 100 rows make 33 groups: 9 are read, 24 remain.
        assert_eq!(skipped.skip_rows(1000).unwrap(), 24);
        assert_eq!(skipped.read_rows(&mut b).unwrap(), 0);
    }

    // A recording read on into the next and averaged as one stream keeps the grid of
    // the recording averaged whole: its last partial group (here 12 samples over a
    // multiple of 16, or a recording of 10, shorter than one group) is completed by
    // the next one's first samples, and the groups after it are the whole's.
    #[test]
    fn averaging_a_run_on_continues_the_groups_across_the_cut() {
        use crate::obs::RunOn;
        let (whole, data) = source(4, 200, 11);
        let avg = Averaging {
            samples: 16,
            channels: 2,
        };
        let averaged_whole = {
            let inner = Box::new(MemorySource::new(whole.clone(), data.clone()));
            crate::obs::read_all(&mut avg.wrap(inner, "whole").unwrap(), 7).unwrap()
        };
        for (cut, own_groups) in [(44, 3), (10, 1), (48, 3)] {
            let part = |from: u64, to: u64| {
                let mut h = whole.clone();
                h.start = whole.epoch_of_sample(from as f64);
                h.n_samples = to - from;
                let rows = data[from as usize * 4..to as usize * 4].to_vec();
                Box::new(MemorySource::new(h, rows))
            };
            let (first, next) = (part(0, cut), part(cut, 200));
            let own = avg.run_on_header(first.header()).unwrap();
            assert_eq!(own.n_samples, own_groups, "cut {cut}");
            assert_eq!(own.tsamp_s, 16.0 * whole.tsamp_s);
            let extra = avg.rows_to_read_on(cut, 2);
            assert_eq!(cut + extra, (own_groups + 2) * 16, "cut {cut}");
            let run_on = Box::new(RunOn::new(first, next, extra).unwrap());
            let mut stream = avg.wrap(run_on, "first").unwrap();
            assert_eq!(stream.header().n_samples, own_groups + 2);
            let got = crate::obs::read_all(&mut stream, 3).unwrap();
            assert_eq!(got, averaged_whole[..got.len()], "cut {cut}");
            assert_eq!(got.len(), (own_groups as usize + 2) * 2);
        }
        // Averaged alone, the short recording has no whole group.
        let mut short = whole.clone();
        short.n_samples = 10;
        assert!(avg.header(&short).unwrap_err().contains("has only 10"));
    }

    #[test]
    fn factors_must_fit_the_recording() {
        let (h, data) = source(12, 10, 1);
        let bad = Averaging {
            samples: 2,
            channels: 5,
        };
        let e = bad.header(&h).unwrap_err();
        assert!(e.contains("12 channels in groups of 5"), "{e}");
        let zero = Averaging {
            samples: 0,
            channels: 1,
        };
        assert!(zero.header(&h).unwrap_err().contains("at least 1"));
        let long = Averaging {
            samples: 11,
            channels: 1,
        };
        assert!(long.header(&h).unwrap_err().contains("has only 10"));
        let none = Averaging::default();
        assert!(none.is_none());
        let s = none
            .wrap(Box::new(MemorySource::new(h.clone(), data)), "test")
            .unwrap();
        assert_eq!(s.header(), &h);
    }
}
