//! How a recording is cut into blocks, which block owns which event, and how the
//! blocks' candidates are gathered so that each event is kept once.
//!
//! Block geometry (input samples): D = largest dispersion delay, W = widest boxcar,
//! M = W + 2·(largest downsampling), a margin for an event's extent around its peak.
//! Blocks overlap by D + W + 2M. A block owns the boxcar starts
//! `[start + M, start + n − D − W − M)` (from the file start for the first block, to
//! the file end for the last); these ranges tile the file without gaps or overlaps.
//! Every dedispersed series is normalised and its noise measured over the whole
//! block, but boxcars are only tested where they start within M of the owned range:
//! a cluster owned by a block then lies entirely inside the tested starts as long as
//! it extends less than M around its peak, and no work is spent on starts another
//! block owns. Memory is set by the block length, not the file length.
//!
//! A bright pulse also shows at neighbouring trial DMs, earlier at higher DMs and
//! later at lower ones (its "bow-tie"); within a block such echoes merge into the
//! pulse's cluster. An echo owned by one block whose pulse is owned by the next (or
//! the previous) is recognised when the blocks' candidates are gathered: of two
//! candidates on one bow-tie, only the brighter is kept.

use ndarray::ArrayView2;
use serde::{Deserialize, Serialize};

use super::channels::NewRows;
use crate::candidate::Candidate;
use crate::cluster::{Event, Sweep};
use crate::error::Result;
use crate::obs::{Sample, SampleSource, fill_with};

/// How a recording is cut into blocks (all in input samples; see the module docs).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BlockLayout {
    /// Largest dispersion delay across the band over all trials (D).
    pub max_delay: usize,
    /// Widest boxcar (W).
    pub max_width: usize,
    /// Margin for an event's extent around its peak (M).
    pub margin: usize,
    /// Rows shared by consecutive blocks, D + W + 2M.
    pub overlap: usize,
    /// Rows per block, overlap included.
    pub block_len: usize,
    /// Running-baseline window.
    pub baseline_len: usize,
}

impl BlockLayout {
    /// The boxcar starts owned by a block of `n_time` rows starting at `start`, as a
    /// half-open range; `first` and `last` extend it to the file's ends.
    pub fn owned_range(&self, start: u64, n_time: usize, first: bool, last: bool) -> (u64, u64) {
        let lo = if first { 0 } else { start + self.margin as u64 };
        let hi = if last {
            u64::MAX
        } else {
            (start + n_time as u64)
                .saturating_sub((self.max_delay + self.max_width + self.margin) as u64)
        };
        (lo, hi)
    }
}

/// Wall-clock seconds a search spent in each stage, summed over its blocks: where the
/// time of a slow search goes. Stages run one after another, each on every core.
#[derive(Debug, Clone, Copy, Default, PartialEq, Serialize, Deserialize)]
pub struct StageSeconds {
    /// Waiting for the reader thread (reading and decoding run alongside the search).
    pub reading: f64,
    /// Excision, transposition and normalisation of the new rows.
    pub cleaning: f64,
    /// The dedispersion kernel.
    pub dedispersion: f64,
    /// Normalising the dedispersed series and the boxcar search.
    pub matched_filter: f64,
    /// Clustering, features and verdicts.
    pub triage: f64,
}

impl StageSeconds {
    fn add(&mut self, o: &StageSeconds) {
        self.reading += o.reading;
        self.cleaning += o.cleaning;
        self.dedispersion += o.dedispersion;
        self.matched_filter += o.matched_filter;
        self.triage += o.triage;
    }
}

/// What one block contributed.
pub(super) struct BlockOutcome {
    pub(super) candidates: Vec<Candidate>,
    pub(super) masked_fraction: f64,
    pub(super) n_detections: usize,
    /// Owned input samples searched at every trial DM.
    pub(super) samples_searched: u64,
    /// Per plan step, owned input samples searched, averaged over the step's trials.
    pub(super) step_samples: Vec<f64>,
    /// Rows not shared with the previous block.
    pub(super) new_samples: u64,
    pub(super) seconds: StageSeconds,
}

#[derive(Default)]
pub(super) struct Totals {
    pub(super) candidates: Vec<Candidate>,
    pub(super) masked_weighted: f64,
    pub(super) new_samples: u64,
    pub(super) n_blocks: usize,
    pub(super) n_detections: usize,
    pub(super) samples_searched: u64,
    pub(super) step_samples: Vec<f64>,
    pub(super) seconds: StageSeconds,
}

impl Totals {
    /// Adds a block's outcome. Of a candidate and one the previous block reported on
    /// the same bow-tie (a pulse and its echo at another trial DM, or one pulse found
    /// by both blocks because their S/N estimates differ slightly at the boundary),
    /// only the one with the higher S/N is kept.
    pub(super) fn add(&mut self, o: BlockOutcome, sweep: &Sweep, recent_s: f64) {
        let event = |c: &Candidate| Event {
            t_inf_s: c.t_inf_s,
            dm: c.dm,
            width_s: c.width_ms * 1e-3,
            snr: c.snr,
        };
        for c in o.candidates {
            let horizon = c.t_inf_s - recent_s;
            let twin = self
                .candidates
                .iter_mut()
                .rev()
                .take_while(|p| p.t_inf_s >= horizon)
                .find(|p| {
                    let (a, b) = if p.snr >= c.snr {
                        (&**p, &c)
                    } else {
                        (&c, &**p)
                    };
                    sweep.on_bow_tie(&event(a), &event(b), 0.0)
                });
            match twin {
                Some(p) if p.snr >= c.snr => {}
                Some(p) => *p = c,
                None => self.candidates.push(c),
            }
        }
        self.masked_weighted += o.masked_fraction * o.new_samples as f64;
        self.new_samples += o.new_samples;
        self.n_blocks += 1;
        self.n_detections += o.n_detections;
        self.samples_searched += o.samples_searched;
        if self.step_samples.len() < o.step_samples.len() {
            self.step_samples.resize(o.step_samples.len(), 0.0);
        }
        for (total, n) in self.step_samples.iter_mut().zip(o.step_samples) {
            *total += n;
        }
        self.seconds.add(&o.seconds);
    }
}

/// A read's samples: decoded values, or the stored bytes of 8-bit data
/// ([`SampleSource::byte_rows`]), a quarter of the memory.
pub(super) enum ReadRows {
    F32(Vec<f32>),
    U8(Vec<u8>),
}

impl ReadRows {
    /// The buffer, if it holds f32.
    fn floats(self) -> Option<Vec<f32>> {
        match self {
            ReadRows::F32(v) => Some(v),
            ReadRows::U8(_) => None,
        }
    }

    /// The buffer, if it holds bytes.
    fn bytes(self) -> Option<Vec<u8>> {
        match self {
            ReadRows::U8(v) => Some(v),
            ReadRows::F32(_) => None,
        }
    }
}

/// New rows from [`prefetch`], `[time, channel]`, the first being file row
/// `start_sample`.
pub(super) struct Read {
    pub(super) start_sample: u64,
    n_chan: usize,
    pub(super) rows: ReadRows,
}

impl Read {
    /// The rows, for [`super::channels::ChannelBlock::append`].
    pub(super) fn view(&self) -> NewRows<'_> {
        match &self.rows {
            ReadRows::F32(v) => NewRows::F32(rows_view(v, self.n_chan)),
            ReadRows::U8(v) => NewRows::U8(rows_view(v, self.n_chan)),
        }
    }

    /// Number of rows.
    pub(super) fn n_time(&self) -> usize {
        self.view().dim().0
    }
}

/// `values` as rows of `n_chan`.
fn rows_view<T>(values: &[T], n_chan: usize) -> ArrayView2<'_, T> {
    ArrayView2::from_shape((values.len() / n_chan, n_chan), values).expect("reads hold whole rows")
}

/// Bytes per sample of the reads [`prefetch`] makes of `source`: one where it hands
/// out 8-bit rows as stored, four (f32) otherwise.
pub(super) fn read_sample_bytes(source: &mut dyn SampleSource) -> usize {
    match source.byte_rows() {
        Some(_) => size_of::<u8>(),
        None => size_of::<f32>(),
    }
}

/// Where [`prefetch`] takes its buffers back for reuse.
pub(super) type Recycle = std::sync::mpsc::Sender<ReadRows>;

/// Reads `source` on a thread of `scope`, one read ahead of the caller, so that
/// reading and decoding overlap the search: first `first_len` rows, then `next_len`
/// rows at a time, each as a [`Read`] of new rows only. A source that hands out
/// 8-bit rows as stored ([`SampleSource::byte_rows`]) is read as bytes, any other
/// as f32. Buffers sent back on the returned [`Recycle`] are reused, so reads need
/// no fresh memory. A read shorter than asked is the last. The thread ends after
/// the last read or an error, or when the receiver is dropped.
pub(super) fn prefetch<'scope>(
    scope: &'scope std::thread::Scope<'scope, '_>,
    mut source: Box<dyn SampleSource>,
    first_len: usize,
    next_len: usize,
) -> (std::sync::mpsc::IntoIter<Result<Option<Read>>>, Recycle) {
    // A rendezvous channel: at most one read waits beside the one being searched.
    let (tx, rx) = std::sync::mpsc::sync_channel(0);
    let (recycle, spare) = std::sync::mpsc::channel();
    scope.spawn(move || {
        let reads = Reads {
            n_chan: source.header().n_chan(),
            first_len,
            next_len,
            tx,
            spare,
        };
        match source.byte_rows() {
            Some(bytes) => {
                reads.run(
                    |out| bytes.read_byte_rows(out),
                    ReadRows::U8,
                    ReadRows::bytes,
                );
            }
            None => reads.run(|out| source.read_rows(out), ReadRows::F32, ReadRows::floats),
        }
    });
    (rx.into_iter(), recycle)
}

/// The reader thread of [`prefetch`], but for its source.
struct Reads {
    n_chan: usize,
    first_len: usize,
    next_len: usize,
    tx: std::sync::mpsc::SyncSender<Result<Option<Read>>>,
    spare: std::sync::mpsc::Receiver<ReadRows>,
}

impl Reads {
    /// Sends reads made by `read` (whole rows into the start of its argument, 0 at
    /// the end) into buffers of `T` until the data ends, an error, or the receiver
    /// is gone; `wrap` makes a buffer a read, `unwrap` takes a spare one back.
    fn run<T: Sample>(
        self,
        mut read: impl FnMut(&mut [T]) -> Result<usize>,
        wrap: fn(Vec<T>) -> ReadRows,
        unwrap: fn(ReadRows) -> Option<Vec<T>>,
    ) {
        let n_chan = self.n_chan;
        let (mut start_sample, mut want) = (0u64, self.first_len);
        loop {
            let mut data = self
                .spare
                .try_recv()
                .ok()
                .and_then(unwrap)
                .unwrap_or_default();
            data.resize(want * n_chan, T::default());
            let filled = fill_with(&mut read, n_chan, &mut data);
            let got = *filled.as_ref().unwrap_or(&0);
            data.truncate(got * n_chan);
            let more = filled.is_ok() && got == want;
            let next = filled.map(|_| {
                (got > 0).then(|| Read {
                    start_sample,
                    n_chan,
                    rows: wrap(data),
                })
            });
            if self.tx.send(next).is_err() || !more {
                break;
            }
            start_sample += got as u64;
            want = self.next_len;
        }
    }
}
