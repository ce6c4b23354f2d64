//! The channel-major block a search works on, kept from one block to the next.
//!
//! Consecutive blocks share `overlap` rows. Rather than flag, transpose and normalise
//! those rows again, the block keeps them: each block starts with the last rows of the
//! one before, already normalised, and only the newly read rows are flagged (by their
//! own channel statistics), transposed, normalised and cleaned. Every sample is thus
//! processed once, by the statistics of the read it arrived in, and the block's
//! memory is allocated once for the whole recording.

use ndarray::{ArrayView2, ArrayViewMut2, Axis, ShapeBuilder, s};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};
use rayon::prelude::*;

use super::normalise::{CHANNEL_SIGMA_VALUES, normalise_series};
use super::transpose::{self, Columns, Widen};
use crate::clean::impulse::{self, DispersionProbe};
use crate::clean::{self, CleanConfig, zero_dm};

/// A block of normalised samples, `[channel, time]`, with room for `capacity` rows.
pub(super) struct ChannelBlock {
    n_chan: usize,
    capacity: usize,
    /// `[channel, capacity]`; the first `len` values of each channel are valid.
    data: Vec<f32>,
    len: usize,
    /// File index of the first valid row.
    start_sample: u64,
    /// Channels masked in the rows appended last.
    new_mask: Vec<bool>,
    /// Channels masked anywhere in the block: in the new rows or in the rows kept.
    mask: Vec<bool>,
    /// Tells low-DM pulses from impulses before clipping.
    probe: DispersionProbe,
    /// What the channel statistics spare ([`clean::Sparing`]).
    sparing: clean::Sparing,
}

/// New rows for [`ChannelBlock::append`], `[time, channel]`: decoded samples, or the
/// stored bytes of 8-bit data (widened to f32 only in the transpose).
#[derive(Clone, Copy)]
pub(super) enum NewRows<'a> {
    F32(ArrayView2<'a, f32>),
    U8(ArrayView2<'a, u8>),
}

impl<'a> From<ArrayView2<'a, f32>> for NewRows<'a> {
    fn from(rows: ArrayView2<'a, f32>) -> Self {
        NewRows::F32(rows)
    }
}

impl NewRows<'_> {
    /// `(rows, channels)`.
    pub(super) fn dim(&self) -> (usize, usize) {
        match self {
            NewRows::F32(rows) => rows.dim(),
            NewRows::U8(rows) => rows.dim(),
        }
    }
}

/// What appending new rows found.
pub(super) struct Appended {
    /// Rows appended.
    pub new_samples: u64,
    /// Fraction of the new channel-samples masked or clipped.
    pub masked_fraction: f64,
}

impl ChannelBlock {
    /// An empty block of `n_chan` channels and at most `capacity` rows, whose
    /// impulse clipping spares nothing (see [`ChannelBlock::with_probe`]). It lives in
    /// `buffer` (from [`ChannelBlock::into_buffer`]) when that has the block's size,
    /// so its memory is not faulted in again; rows past the block's length are never
    /// read, so the old values need no clearing.
    pub(super) fn new(buffer: Vec<f32>, n_chan: usize, capacity: usize) -> Self {
        let data = match buffer.len() == n_chan * capacity {
            true => buffer,
            false => vec![0.0; n_chan * capacity],
        };
        ChannelBlock {
            n_chan,
            capacity,
            data,
            len: 0,
            start_sample: 0,
            new_mask: vec![false; n_chan],
            mask: vec![false; n_chan],
            probe: DispersionProbe::none(n_chan),
            sparing: clean::Sparing {
                widest_pulse: 1,
                neighbourhoods: vec![0; n_chan],
            },
        }
    }

    /// The block with impulse clipping that spares the samples `probe` finds on
    /// dispersed pulses.
    pub(super) fn with_probe(self, probe: DispersionProbe) -> Self {
        ChannelBlock { probe, ..self }
    }

    /// The block whose channel statistics spare pulses as `sparing` says (without
    /// this: pulses of one sample, whatever their bandwidth).
    pub(super) fn with_sparing(self, sparing: clean::Sparing) -> Self {
        ChannelBlock { sparing, ..self }
    }

    /// The block's memory, for [`ChannelBlock::new`].
    pub(super) fn into_buffer(self) -> Vec<f32> {
        self.data
    }

    /// Rows in the block.
    pub(super) fn n_time(&self) -> usize {
        self.len
    }

    /// File index of the block's first row.
    pub(super) fn start_sample(&self) -> u64 {
        self.start_sample
    }

    /// Channels masked anywhere in the block.
    pub(super) fn mask(&self) -> &[bool] {
        &self.mask
    }

    /// The normalised samples in place: channel c's are `rows[c·stride..][..n_time()]`
    /// for the returned `(rows, stride)`.
    pub(super) fn rows(&self) -> (&[f32], usize) {
        (&self.data, self.capacity)
    }

    /// The normalised samples, `[channel, time]`.
    pub(super) fn view(&self) -> ArrayView2<'_, f32> {
        let shape = (self.n_chan, self.len).strides((self.capacity, 1));
        ArrayView2::from_shape(shape, &self.data).expect("rows fit the capacity")
    }

    /// Keeps the last `keep` rows of the block, drops the rest, and appends `raw`
    /// (`[time, channel]`, f32 or bytes, read from file row `start_sample`): its
    /// channels are flagged starting from `static_mask`, then normalised
    /// (`baseline_len` running baseline) and cleaned as `config` asks. Rows of dropped data
    /// ([`clean::dropout`]) are left out of the flagging and normalisation, filled
    /// with noise and counted as masked.
    ///
    /// # Panics
    /// If the rows kept and appended exceed the capacity, or `raw` has another
    /// channel count (caller bugs).
    pub(super) fn append<'a>(
        &mut self,
        raw: impl Into<NewRows<'a>>,
        start_sample: u64,
        keep: usize,
        static_mask: &[bool],
        config: &CleanConfig,
        baseline_len: usize,
    ) -> Appended {
        let raw = raw.into();
        let (m, n_chan) = raw.dim();
        assert_eq!(
            n_chan, self.n_chan,
            "rows disagree with the block's channels"
        );
        let keep = keep.min(self.len);
        assert!(keep + m <= self.capacity, "block capacity exceeded");
        self.shift_to_front(keep);
        self.len = keep;
        self.start_sample = start_sample - keep as u64;
        let previous_mask = std::mem::replace(&mut self.new_mask, static_mask.to_vec());
        let dropouts = match raw {
            NewRows::F32(rows) => self.flag_and_transpose_in(rows, static_mask, config),
            NewRows::U8(rows) => self.flag_and_transpose_in(rows, static_mask, config),
        };
        self.normalise_new(keep, m, baseline_len, &dropouts);
        // A channel flagged in the new rows leaves the whole block, the rows kept from
        // the previous block included: otherwise the search would still sum its kept
        // rows (interference that got it flagged, seen before the flag) while triage,
        // which leaves out every channel masked anywhere in the block, would not.
        for c in (0..n_chan).filter(|&c| self.new_mask[c] && !previous_mask[c]) {
            self.data[c * self.capacity..][..keep].fill(0.0);
        }
        let mut block = ArrayViewMut2::from_shape((n_chan, self.capacity), &mut self.data[..])
            .expect("buffer holds n_chan × capacity values")
            .slice_move(s![.., ..keep + m]);
        let n_clipped = impulse::clip(
            block.view_mut(),
            keep,
            &self.new_mask,
            config.clip_threshold,
            &self.probe,
        );
        if config.zero_dm {
            zero_dm::apply(block.slice_move(s![.., keep..]), &self.new_mask);
        }
        self.len = keep + m;
        self.mask = if keep > 0 {
            zip_or(&self.new_mask, &previous_mask)
        } else {
            self.new_mask.clone()
        };
        let n_masked = self.new_mask.iter().filter(|&&v| v).count();
        let n_dropped: usize = dropouts
            .iter()
            .map(|d| d.rows.len() * d.chans.clone().filter(|&c| !self.new_mask[c]).count())
            .sum();
        let masked_fraction = if m == 0 || n_chan == 0 {
            0.0
        } else {
            (n_masked * m + n_clipped * (n_chan - n_masked) + n_dropped) as f64
                / (n_chan * m) as f64
        };
        Appended {
            new_samples: m as u64,
            masked_fraction,
        }
    }

    /// Moves rows `len − keep..len` of every channel to the front.
    fn shift_to_front(&mut self, keep: usize) {
        let (len, capacity) = (self.len, self.capacity);
        if keep == len || capacity == 0 {
            return;
        }
        self.data.par_chunks_mut(capacity).for_each(|row| {
            row.copy_within(len - keep..len, 0);
        });
    }

    /// Finds the dropped data of `raw` (`[time, channel]`), flags its channels in
    /// `new_mask` on the rows without any, and writes it after the first `len` rows
    /// of every channel. Returns the dropped data.
    fn flag_and_transpose_in<T: Widen>(
        &mut self,
        raw: ArrayView2<'_, T>,
        static_mask: &[bool],
        config: &CleanConfig,
    ) -> Vec<clean::dropout::Dropout> {
        let dropouts = clean::dropout::dropouts(raw, static_mask);
        if dropouts.is_empty() {
            clean::flag_channels(raw, &mut self.new_mask, config, &self.sparing);
        } else {
            let untouched = clean::dropout::untouched_rows(&dropouts, raw.nrows());
            clean::flag_channels(
                raw.select(Axis(0), &untouched).view(),
                &mut self.new_mask,
                config,
                &self.sparing,
            );
        }
        self.transpose_in(raw);
        dropouts
    }

    /// Writes `raw` (`[time, channel]`) after the first `len` rows of every channel.
    fn transpose_in<T: Widen>(&mut self, raw: ArrayView2<'_, T>) {
        let raw = raw.as_standard_layout();
        let raw = raw.as_slice().expect("standard layout is contiguous");
        let into = Columns {
            capacity: self.capacity,
            offset: self.len,
        };
        transpose::transpose_in(raw, self.n_chan, &mut self.data, into);
    }

    /// Normalises rows `keep..keep + m` of every channel not in `new_mask` and zeroes
    /// those of masked channels; a channel found constant joins `new_mask`. A
    /// channel with rows in `dropouts` (counted from `keep`) has only its other rows
    /// normalised, as one series, and the dropped ones filled with unit Gaussian
    /// noise, seeded by their file row and channel. Zeros there would be stretches
    /// without noise in every dedispersed series, and where they fill more than half
    /// a series its robust σ collapses and every boxcar's S/N blows up; noise keeps
    /// each series' statistics those of live data, and the samples are counted as
    /// masked. (Replacing flagged samples by noise of the channel's statistics:
    /// common practice.)
    fn normalise_new(
        &mut self,
        keep: usize,
        m: usize,
        baseline_len: usize,
        dropouts: &[clean::dropout::Dropout],
    ) {
        if m == 0 {
            return;
        }
        let capacity = self.capacity;
        let first_row = self.start_sample + keep as u64;
        self.data
            .par_chunks_mut(capacity)
            .zip(self.new_mask.par_iter_mut())
            .enumerate()
            .for_each_init(
                || (Vec::new(), Vec::new()),
                |(scratch, values), (c, (row, masked))| {
                    let series = &mut row[keep..keep + m];
                    if *masked {
                        series.fill(0.0);
                        return;
                    }
                    let sigma = match clean::dropout::live_rows(dropouts, c, m) {
                        None => {
                            normalise_series(series, baseline_len, CHANNEL_SIGMA_VALUES, scratch)
                        }
                        Some(live) => {
                            values.clear();
                            values.extend(live.iter().map(|&t| series[t]));
                            let sigma = normalise_series(
                                values,
                                baseline_len,
                                CHANNEL_SIGMA_VALUES,
                                scratch,
                            );
                            let mut rng = ChaCha8Rng::seed_from_u64(first_row);
                            rng.set_stream(c as u64);
                            series
                                .iter_mut()
                                .for_each(|v| *v = StandardNormal.sample(&mut rng));
                            live.iter()
                                .zip(values.iter())
                                .for_each(|(&t, &v)| series[t] = v);
                            sigma
                        }
                    };
                    *masked |= sigma == 0.0;
                },
            );
    }
}

/// Element-wise `a || b`.
fn zip_or(a: &[bool], b: &[bool]) -> Vec<bool> {
    a.iter().zip(b).map(|(&x, &y)| x || y).collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Normal};

    /// No flagging or clipping: the tests look at normalisation and bookkeeping.
    fn quiet_config() -> CleanConfig {
        CleanConfig {
            max_iterations: 0,
            clip_threshold: 0.0,
            ..CleanConfig::default()
        }
    }

    #[test]
    fn channels_come_out_zero_mean_unit_variance() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(2);
        let n_time = 20_000;
        let mut raw = Array2::from_shape_fn((n_time, 5), |(t, c)| {
            let drift = 0.001 * t as f32; // slow baseline drift
            let sd = 1.0 + c as f32;
            100.0 * c as f32 + drift + Normal::new(0.0, sd).unwrap().sample(&mut rng)
        });
        raw.column_mut(3).fill(7.0); // constant: masked
        let mut block = ChannelBlock::new(Vec::new(), 5, n_time);
        let mask = [false, false, false, false, true];
        block.append(raw.view(), 0, 0, &mask, &quiet_config(), 2000);
        assert_eq!(block.mask(), &[false, false, false, true, true]);
        let out = block.view();
        for c in 0..3 {
            let row = out.row(c);
            let mean = row.sum() / n_time as f32;
            let var = row.iter().map(|v| (v - mean).powi(2)).sum::<f32>() / n_time as f32;
            // The mean is the average of the run medians' errors, 1.25/√n_time each
            // over all runs together (Gaussian median efficiency, common practice).
            assert!(
                mean.abs() < 4.0 * 1.25 / (n_time as f32).sqrt(),
                "c={c} mean {mean}"
            );
            assert!((var - 1.0).abs() < 0.04, "c={c} var {var}");
        }
        assert!(out.row(3).iter().all(|&v| v == 0.0));
    }

    /// Appending in pieces keeps the last rows unchanged and normalises each piece
    /// on its own: the block equals the concatenation of the pieces normalised alone.
    #[test]
    fn kept_rows_are_carried_and_new_rows_normalised_alone() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let n_chan = 70; // more than one transpose tile, not a multiple of it
        let noise = Normal::new(10.0, 2.0).unwrap();
        let mut piece = |n: usize| Array2::from_shape_fn((n, n_chan), |_| noise.sample(&mut rng));
        let (first, second) = (piece(3000), piece(2000));
        let config = quiet_config();
        let mask = vec![false; n_chan];
        let alone = |raw: &Array2<f32>| {
            let mut b = ChannelBlock::new(Vec::new(), n_chan, raw.nrows());
            b.append(raw.view(), 0, 0, &mask, &config, 500);
            b.view().to_owned()
        };
        let (first_alone, second_alone) = (alone(&first), alone(&second));
        let mut block = ChannelBlock::new(Vec::new(), n_chan, 3100);
        block.append(first.view(), 0, 0, &mask, &config, 500);
        block.append(second.view(), 3000, 1000, &mask, &config, 500);
        assert_eq!(block.start_sample(), 2000);
        assert_eq!(block.n_time(), 3000);
        let out = block.view();
        assert_eq!(out.slice(s![.., ..1000]), first_alone.slice(s![.., 2000..]));
        assert_eq!(out.slice(s![.., 1000..]), second_alone);
    }

    #[test]
    fn a_channel_masked_in_the_kept_rows_stays_masked_for_the_block() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        let noise = Normal::new(0.0, 1.0).unwrap();
        let mut piece = |n: usize| Array2::from_shape_fn((n, 4), |_| noise.sample(&mut rng));
        let config = quiet_config();
        let mut block = ChannelBlock::new(Vec::new(), 4, 2000);
        block.append(
            piece(1000).view(),
            0,
            0,
            &[false, true, false, false],
            &config,
            200,
        );
        block.append(piece(1000).view(), 1000, 500, &[false; 4], &config, 200);
        assert_eq!(block.mask(), &[false, true, false, false]);
        // With nothing kept, the old mask is forgotten.
        block.append(piece(1000).view(), 2000, 0, &[false; 4], &config, 200);
        assert_eq!(block.mask(), &[false; 4]);
    }

    /// Zero-filled lost data, here more than half the new rows of the whole band or
    /// of a sub-band, is set aside and counted as masked; the other samples come out
    /// zero mean, unit variance, and no channel is masked for them (with the dropped
    /// rows in, the MAD was zero and the spectral-kurtosis test masked every
    /// channel). The dropped samples hold unit noise, the same each time.
    #[test]
    fn dropped_data_is_set_aside() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(17);
        let (n_time, n_chan) = (6000, 32);
        let noise = Normal::new(96.0f32, 12.0).unwrap();
        let clean = Array2::from_shape_fn((n_time, n_chan), |_| noise.sample(&mut rng).round());
        let dropped = 1000..4500;
        for band in [0..n_chan, 8..24] {
            let mut raw = clean.clone();
            raw.slice_mut(s![dropped.clone(), band.clone()]).fill(0.0);
            let mask = vec![false; n_chan];
            let append = || {
                let mut block = ChannelBlock::new(Vec::new(), n_chan, n_time);
                let appended = block.append(raw.view(), 0, 0, &mask, &CleanConfig::default(), 500);
                (block, appended)
            };
            let (block, appended) = append();
            assert_eq!(block.mask(), &mask[..], "{band:?}");
            let fraction = (dropped.len() * band.len()) as f64 / (n_time * n_chan) as f64;
            assert!(
                (appended.masked_fraction - fraction).abs() < 0.01,
                "{band:?}: {}",
                appended.masked_fraction
            );
            let out = block.view();
            let (live, lost): (Vec<usize>, Vec<usize>) =
                (0..n_time).partition(|t| !dropped.contains(t));
            for c in 0..n_chan {
                for rows in [&live, &lost] {
                    let n = rows.len() as f32;
                    let mean = rows.iter().map(|&t| out[[c, t]]).sum::<f32>() / n;
                    let var = rows
                        .iter()
                        .map(|&t| (out[[c, t]] - mean).powi(2))
                        .sum::<f32>()
                        / n;
                    assert!(
                        mean.abs() < 0.1 && (var - 1.0).abs() < 0.1,
                        "{band:?} c={c}: {mean} {var}"
                    );
                }
            }
            // Channels' fills are independent: the band sum over lost rows has N× the
            // variance.
            let sums: Vec<f32> = lost.iter().map(|&t| out.column(t).sum()).collect();
            let var = sums.iter().map(|v| v * v).sum::<f32>() / sums.len() as f32;
            assert!((var / n_chan as f32 - 1.0).abs() < 0.1, "{band:?}: {var}");
            assert_eq!(append().0.view(), out);
            // Channels outside the lost sub-band keep their own samples.
            if band.start > 0 {
                let mut whole = ChannelBlock::new(Vec::new(), n_chan, n_time);
                whole.append(clean.view(), 0, 0, &mask, &CleanConfig::default(), 500);
                assert_eq!(whole.view().row(0), out.row(0));
            }
        }
    }

    /// The new rows are flagged by their own statistics: a channel gone wild in them
    /// is masked and zeroed there and in the rows kept from the previous block (the
    /// search and its triage then leave it out alike), the other channels' kept rows
    /// stay as they were, and the block's mask and masked fraction say so.
    #[test]
    fn new_rows_are_flagged_on_their_own_statistics() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(13);
        let noise = Normal::new(0.0, 1.0).unwrap();
        let n_chan = 32;
        let calm = Array2::from_shape_fn((4000, n_chan), |_| noise.sample(&mut rng));
        let mut wild = Array2::from_shape_fn((4000, n_chan), |_| noise.sample(&mut rng));
        wild.column_mut(9).mapv_inplace(|v| 30.0 * v + 50.0);
        let config = CleanConfig {
            clip_threshold: 0.0,
            ..CleanConfig::default()
        };
        let mask = vec![false; n_chan];
        let mut block = ChannelBlock::new(Vec::new(), n_chan, 6000);
        let first = block.append(calm.view(), 0, 0, &mask, &config, 500);
        assert_eq!(first.masked_fraction, 0.0);
        let kept_before = block.view().slice(s![.., 2000..]).to_owned();
        assert!(kept_before.row(9).iter().any(|&v| v != 0.0));
        let second = block.append(wild.view(), 4000, 2000, &mask, &config, 500);
        let expected: Vec<bool> = (0..n_chan).map(|c| c == 9).collect();
        assert_eq!(block.mask(), &expected[..]);
        assert!((second.masked_fraction - 1.0 / n_chan as f64).abs() < 1e-12);
        let out = block.view();
        assert!(out.row(9).iter().all(|&v| v == 0.0));
        for c in (0..n_chan).filter(|&c| c != 9) {
            assert_eq!(out.slice(s![c, ..2000]), kept_before.row(c));
        }
    }
}
