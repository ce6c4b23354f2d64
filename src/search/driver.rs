//! The streaming driver: cut a recording into overlapping blocks (see
//! [`super::blocks`] for their geometry and ownership), run excision, normalisation,
//! dedispersion, matched filter, clustering and triage on each, and keep each event
//! exactly once. Memory is set by the block length, not the file length.

use std::path::Path;
use std::time::Instant;

use indicatif::ProgressBar;
use ndarray::ArrayView2;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

use super::SearchConfig;
use super::blocks::{BlockLayout, BlockOutcome, StageSeconds, Totals, prefetch, read_sample_bytes};
use super::boxcar::{self, Scratch};
use super::channels::{Appended, ChannelBlock};
use super::features::{self, BlockData};
use super::fluence::fluence_jy_ms;
use super::memory;
use super::normalise::{NormalisedSeries, SERIES_SIGMA_VALUES, normalise_series};
use super::trials::{self, TrialCount};
use crate::candidate::Candidate;
use crate::clean::{self, Sparing, impulse::DispersionProbe, user_mask::static_mask};
use crate::cluster::{Cluster, Detection, Sweep, friends_of_friends, merge_dispersion_tails};
use crate::dedisperse::{self, DmPlan, Extent, FastDedisperser, Kernel, bf16};
use crate::error::{Error, Result};
use crate::obs::{Header, RunOn, SampleSource};
use crate::triage;
use crate::units::delay_to_infinity_s;

/// What the search of one recording produced.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FileResult {
    /// The recording, as named by the caller.
    pub file: String,
    /// Its header.
    pub header: Header,
    /// The trial DMs searched.
    pub plan: DmPlan,
    /// Clustered candidates in time order.
    pub candidates: Vec<Candidate>,
    /// Fraction of the channel-samples masked or clipped.
    pub fraction_masked: f64,
    /// Samples (of `header`'s sampling) whose boxcars were searched.
    pub samples_searched: u64,
    /// Blocks processed.
    pub n_blocks: usize,
    /// Threshold crossings before clustering (over all blocks, overlaps included).
    pub n_detections: usize,
    /// Trial accounting and expected false alarms.
    pub trials: TrialCount,
    /// How the recording was cut into blocks.
    pub layout: BlockLayout,
    /// Where the search's wall-clock time went.
    #[serde(default)]
    pub seconds: StageSeconds,
    /// Samples (of `header`'s sampling) past its own, read on into the recording that
    /// continues this one so that sweeps crossing the boundary were searched
    /// ([`search_run_on_in`]); 0 if none.
    #[serde(default)]
    pub run_on_samples: u64,
    /// Seconds of the recordings that continue this one read on into, from its own
    /// end (with averaging, the part of its last group that the next recording
    /// completes included).
    #[serde(default)]
    pub run_on_s: f64,
}

impl FileResult {
    /// The highest trial DM (pc cm⁻³) searched anywhere in the recording: below the
    /// plan's highest when the recording is shorter than that DM's sweep. `None` if
    /// the recording is too short for any trial.
    pub fn highest_dm_searched(&self) -> Option<f64> {
        let n = usize::try_from(self.header.n_samples + self.run_on_samples).unwrap_or(usize::MAX);
        let plan = &self.plan;
        plan.steps
            .iter()
            .flat_map(|s| s.dms.iter().map(move |&dm| (dm, s.downsample)))
            .filter(|&(dm, ds)| plan.valid_samples(dm, ds, n, Extent::PerTrial) > 0)
            .map(|(dm, _)| dm)
            .reduce(f64::max)
    }
}

/// Searches the recording at `path` (any format [`crate::obs::open`] reads).
///
/// # Errors
/// Unreadable or corrupt input, or an invalid configuration.
pub fn search_file(
    path: &Path,
    config: &SearchConfig,
    progress: Option<&ProgressBar>,
) -> Result<FileResult> {
    let label = path.display().to_string();
    let source = config.average.wrap(crate::obs::open(path)?, &label)?;
    search_source(source, &label, config, progress)
}

/// Searches any sample source as it is (the caller applies `config.average`, as
/// [`search_file`] does); `label` names it in the candidates and in errors.
/// `progress`, if given, is set to the number of samples and advanced per block.
///
/// # Errors
/// Read errors from the source, or an invalid configuration.
pub fn search_source(
    source: Box<dyn SampleSource>,
    label: &str,
    config: &SearchConfig,
    progress: Option<&ProgressBar>,
) -> Result<FileResult> {
    let mut workspace = Workspace::default();
    let result = search_source_in(&mut workspace, source, label, config, progress);
    // Unmapping the kernel's and the block's gigabytes takes a noticeable fraction of
    // a second; it need not delay the result.
    std::thread::spawn(move || drop(workspace));
    result
}

/// The buffers of a search, kept from one recording to the next by
/// [`search_source_in`]: a search of many recordings of one shape (channels,
/// sampling, plan) faults its gigabytes of memory in once instead of once per file.
#[derive(Default)]
pub struct Workspace {
    fast: Option<FastDedisperser>,
    channels: Vec<f32>,
}

/// [`search_source`] with the buffers of `workspace`, left there for the next search.
/// The result does not depend on what the workspace held.
///
/// # Errors
/// As [`search_source`].
pub fn search_source_in(
    workspace: &mut Workspace,
    mut source: Box<dyn SampleSource>,
    label: &str,
    config: &SearchConfig,
    progress: Option<&ProgressBar>,
) -> Result<FileResult> {
    config.validate()?;
    let header = source.header().clone();
    header.validate().map_err(|m| Error::bad_input(label, m))?;
    let read_bytes = read_sample_bytes(&mut *source);
    let room_s = header.duration_s();
    let searcher = Searcher::new(header, read_bytes, room_s, config, label)?;
    search_stream(workspace, searcher, source, progress)
}

/// Searches the recording `source`, as read (`config.average` is applied here),
/// reading on into the first block overlap of `next`, the recording that continues
/// it ([`crate::obs::Header::is_continued_by`]), if given: every boxcar start of this
/// recording is then searched at every trial DM, including bursts whose sweep ends in
/// `next`. The two are averaged as one stream, so this recording's groups of samples
/// run on across the cut: its last partial group, which averaged alone it would drop,
/// is completed by `next`'s first samples, and is its own. The events are this
/// recording's alone (their boxcar starts in it), so a search of `next`, averaged from
/// its own first sample, reports none of them again (but for the pulses within a group
/// of the cut that [`drop_repeats_across_cut`] leaves out). The candidates, exposure
/// and `header` are this recording's (averaged: the groups that start in it);
/// `fraction_masked` includes the rows read on into.
///
/// # Errors
/// As [`search_source`], [`Error::BadInput`] if `config.average` does not fit the
/// recording, and [`Error::Config`] if `next` does not continue `source`. A read error
/// in `next` ends the rows read on into instead (its own search reports it).
pub fn search_run_on_in(
    workspace: &mut Workspace,
    mut source: Box<dyn SampleSource>,
    next: Option<Box<dyn SampleSource>>,
    label: &str,
    config: &SearchConfig,
    progress: Option<&ProgressBar>,
) -> Result<FileResult> {
    let average = config.average;
    let Some(mut next) = next else {
        let source = average.wrap(source, label)?;
        return search_source_in(workspace, source, label, config, progress);
    };
    config.validate()?;
    let first = source.header().clone();
    let own = average
        .run_on_header(&first)
        .map_err(|m| Error::bad_input(label, m))?;
    own.validate().map_err(|m| Error::bad_input(label, m))?;
    // Byte reads only if both recordings have them (see `RunOn`).
    let read_bytes =
        search_read_bytes(&mut *source, &average).max(search_read_bytes(&mut *next, &average));
    // The rows read on into hold the rest of the sweeps starting in this recording,
    // so trials whose sweep outlasts it alone are searched too.
    let sweep_room_s = first.duration_s() + next.header().duration_s();
    let searcher = Searcher::new(own, read_bytes, sweep_room_s, config, label)?;
    let extra = average.rows_to_read_on(first.n_samples, groups_to_read_on(&searcher));
    let stream = average.wrap(Box::new(RunOn::new(source, next, extra)?), label)?;
    let mut result = search_stream(workspace, searcher, stream, progress)?;
    let rows_read = (result.header.n_samples + result.run_on_samples) * average.samples as u64;
    result.run_on_s = rows_read.saturating_sub(first.n_samples) as f64 * first.tsamp_s;
    Ok(result)
}

/// Bytes per sample a search reads from `source`, averaged by `average` (an averaged
/// source hands out f32 only).
fn search_read_bytes(source: &mut dyn SampleSource, average: &crate::obs::Averaging) -> usize {
    match average.is_none() {
        true => read_sample_bytes(source),
        false => size_of::<f32>(),
    }
}

/// Runs `searcher` over the rows of `source`, which may run on past the recording the
/// searcher was made for (its header's samples are the ones it owns).
fn search_stream(
    workspace: &mut Workspace,
    mut searcher: Searcher<'_>,
    source: Box<dyn SampleSource>,
    progress: Option<&ProgressBar>,
) -> Result<FileResult> {
    let config = searcher.config;
    if config.kernel == Kernel::Fast {
        let kept = workspace.fast.take().filter(|k| k.plan() == &searcher.plan);
        searcher.fast = Some(kept.unwrap_or_else(|| FastDedisperser::new(&searcher.plan)));
    }
    let g = searcher.layout.clone();
    let n_samples = source.header().n_samples;
    if let Some(pb) = progress {
        pb.set_length(n_samples);
    }
    let mut totals = Totals::default();
    let mut rows_read = 0;
    // Candidates of one block can only repeat those within one overlap before them.
    let recent_s = g.overlap as f64 * searcher.header.tsamp_s
        + searcher.plan.max_dm() * searcher.sweep.top_s_per_dm;
    let h = &searcher.header;
    let probe = DispersionProbe::new(&h.freqs_mhz, h.tsamp_s);
    let buffer = std::mem::take(&mut workspace.channels);
    let mut channels = ChannelBlock::new(buffer, h.n_chan(), g.block_len)
        .with_probe(probe)
        .with_sparing(Sparing::new(&h.freqs_mhz, g.max_width));
    std::thread::scope(|scope| -> Result<()> {
        let advance = g.block_len - g.overlap;
        let (reads, recycle) = prefetch(scope, source, g.block_len, advance);
        let mut first = true;
        let mut clock = Instant::now();
        // Of the block searched last, unless it was the last one: whether it was the
        // first, and the end of the boxcar starts it owned.
        let mut open_end: Option<(bool, u64)> = None;
        for read in reads {
            let Some(read) = read? else {
                // The rows ended exactly where a block did, before the header's length:
                // a recording read on into one that gave no rows. That block is
                // searched again as the last one, for the boxcar starts it left to a
                // block that never came.
                if let Some((was_first, from)) = open_end {
                    let none = Appended {
                        new_samples: 0,
                        masked_fraction: 0.0,
                    };
                    let outcome = searcher.block(&channels, was_first, true, none, from);
                    totals.add(outcome, &searcher.sweep, recent_s);
                }
                break;
            };
            let reading = lap(&mut clock);
            let asked = if first { g.block_len } else { advance };
            let end = read.start_sample + read.n_time() as u64;
            // A short read, or one reaching the header's length, ends the file.
            let last = read.n_time() < asked || end >= n_samples;
            let keep = if first { 0 } else { g.overlap };
            let appended = channels.append(
                read.view(),
                read.start_sample,
                keep,
                &searcher.static_mask,
                &config.clean,
                g.baseline_len,
            );
            // The reader may have ended already; then the buffer is simply dropped.
            let _ = recycle.send(read.rows);
            let cleaning = lap(&mut clock);
            let mut outcome = searcher.block(&channels, first, last, appended, 0);
            outcome.seconds.reading = reading;
            outcome.seconds.cleaning = cleaning;
            totals.add(outcome, &searcher.sweep, recent_s);
            rows_read = end;
            let (start, n_time) = (channels.start_sample(), channels.n_time());
            open_end = (!last).then(|| (first, g.owned_range(start, n_time, first, false).1));
            first = false;
            if let Some(pb) = progress {
                pb.set_position(end);
            }
            if last {
                break;
            }
            clock = Instant::now();
        }
        Ok(())
    })?;
    // Only the rows of the next recording that could be read were read on into, and
    // a last group that they did not complete was not searched.
    searcher.run_on_samples = rows_read.saturating_sub(searcher.header.n_samples);
    searcher.header.n_samples = searcher.header.n_samples.min(rows_read);
    workspace.fast = searcher.fast.take().or(workspace.fast.take());
    workspace.channels = channels.into_buffer();
    Ok(searcher.finish(totals))
}

/// Removes from `later`, the candidates of a recording that continues one whose
/// candidates are `earlier` and which starts `offset_s` after that one, those that
/// repeat a candidate of `earlier` across the cut, and returns how many. A pulse near
/// the cut is found whole by the earlier recording, which reads on into the later one,
/// and again, cut short, by the later one, which starts at its own first sample and so
/// cannot see that the pulse's best boxcar starts before it: a later candidate on the
/// bow-tie of an earlier one at least as bright ([`Sweep::on_bow_tie`], as repeats
/// between the blocks of one recording are found) is the same pulse, and the earlier
/// recording's candidate stands for it. A later candidate brighter than the earlier
/// one is kept (the earlier may be its echo, and a burst is not to be lost for it),
/// unless its boxcar starts before `earlier_end_s`, the end of the samples the earlier
/// recording owns (seconds from its start; with averaging, the end of its last group,
/// which the later recording's first samples complete): both searches saw that
/// stretch, each on its own grid of averaged samples, and the later grid may simply
/// catch the pulse better, so an earlier candidate on its bow-tie is the same pulse.
/// `header` is the later recording's.
pub fn drop_repeats_across_cut(
    header: &Header,
    earlier: &[Candidate],
    offset_s: f64,
    earlier_end_s: f64,
    later: &mut Vec<Candidate>,
) -> usize {
    let sweep = sweep_of(header);
    let event = |c: &Candidate, shift_s: f64| crate::cluster::Event {
        t_inf_s: c.t_inf_s + shift_s,
        dm: c.dm,
        width_s: c.width_ms * 1e-3,
        snr: c.snr,
    };
    // The start of a later candidate's boxcar at the top of the band, from the
    // earlier recording's start.
    let start_s = |l: &crate::cluster::Event| {
        l.t_inf_s + delay_to_infinity_s(l.dm, header.freq_hi_mhz()) - 0.5 * l.width_s
    };
    // The stretch both searched, if the earlier recording's last group runs past the
    // cut (beyond rounding); from half a sample before the later one's start, where a
    // boxcar at its first sample starts, to rounding.
    let shared = earlier_end_s - offset_s > 1e-6 * header.tsamp_s;
    let both_searched = offset_s - 0.5 * header.tsamp_s..earlier_end_s;
    let before = later.len();
    later.retain(|l| {
        let l = event(l, offset_s);
        let seen_by_both = shared && both_searched.contains(&start_s(&l));
        !earlier.iter().any(|e| {
            let e = event(e, 0.0);
            (e.snr >= l.snr && sweep.on_bow_tie(&e, &l, 0.0))
                || (seen_by_both && sweep.on_bow_tie(&l, &e, 0.0))
        })
    });
    before - later.len()
}

/// The block layout a search of a recording with `header` would use.
///
/// # Errors
/// An invalid configuration.
pub fn block_layout(header: &Header, config: &SearchConfig) -> Result<BlockLayout> {
    config.validate()?;
    // Reads of f32, the larger kind: a layout allowed for them is allowed for any.
    let room_s = header.duration_s();
    Ok(Searcher::new(header.clone(), size_of::<f32>(), room_s, config, "")?.layout)
}

/// Rows of the recordings that continue one with `header` (as read, before
/// `config.average`) that its search reads on into, when they hold the rest of every
/// sweep: those completing its last group of averaged samples, then one block
/// overlap or, for a recording shorter than a block, until its block is full.
///
/// # Errors
/// An invalid configuration, or averaging that does not fit the recording.
pub fn run_on_rows(header: &Header, config: &SearchConfig) -> Result<u64> {
    let own = config
        .average
        .run_on_header(header)
        .map_err(Error::Config)?;
    let searcher = Searcher::new(own, size_of::<f32>(), f64::INFINITY, config, "")?;
    Ok(config
        .average
        .rows_to_read_on(header.n_samples, groups_to_read_on(&searcher)))
}

/// Samples (averaged) past its own that `searcher`'s recording reads on into: one
/// block overlap, or, for a recording shorter than a block, until its block is full,
/// so that its series are normalised, and the noise of wide boxcars measured, on as
/// many samples as in a longer recording.
fn groups_to_read_on(searcher: &Searcher<'_>) -> u64 {
    let g = &searcher.layout;
    (g.block_len as u64)
        .saturating_sub(searcher.header.n_samples)
        .max(g.overlap as u64)
}

/// Opens each recording and checks it could be searched with `config` (its header,
/// the plan for it, the memory that needs) without reading a sample, and returns
/// their headers as read (before `config.average`). With `join`, a recording that
/// another one listed continues ([`super::join::continuations`]) is checked as its
/// search reads on into that one ([`search_run_on_in`]): averaged, it owns the group
/// its end falls in, so one shorter than a group can be searched. A search of many
/// files runs this first: a bad file late in the list then stops it before any is
/// searched, not after hours spent on the files before it.
///
/// # Errors
/// The first file that cannot be opened, then the first that cannot be searched,
/// named; or an invalid configuration.
pub fn check_files<P: AsRef<Path>>(
    paths: &[P],
    config: &SearchConfig,
    join: bool,
) -> Result<Vec<Header>> {
    config.validate()?;
    let mut headers = Vec::with_capacity(paths.len());
    let mut read_bytes = Vec::with_capacity(paths.len());
    for path in paths {
        // Opening validates the header; the file is closed again at once, so a long
        // list holds no handles.
        let mut source = crate::obs::open(path.as_ref())?;
        read_bytes.push(search_read_bytes(&mut *source, &config.average));
        headers.push(source.header().clone());
    }
    let continued = match join {
        true => super::join::continuations(&headers),
        false => vec![None; headers.len()],
    };
    for (k, path) in paths.iter().enumerate() {
        let label = path.as_ref().display().to_string();
        let own = match continued[k] {
            Some(_) => config.average.run_on_header(&headers[k]),
            None => config.average.header(&headers[k]),
        }
        .map_err(|m| Error::bad_input(&label, m))?;
        let room_s = own.duration_s();
        Searcher::new(own, read_bytes[k], room_s, config, &label)?;
    }
    Ok(headers)
}

struct Searcher<'a> {
    label: &'a str,
    header: Header,
    config: &'a SearchConfig,
    plan: DmPlan,
    /// Boxcar widths of each plan step, in that step's samples.
    widths: Vec<Vec<usize>>,
    /// Per step and width, the trials between tests of that width
    /// ([`dedisperse::boxcar_strides`]).
    strides: Vec<Vec<usize>>,
    dm_offsets: Vec<usize>,
    static_mask: Vec<bool>,
    layout: BlockLayout,
    sweep: Sweep,
    /// The fast kernel, kept across blocks (it reuses its trees); `None` runs the
    /// reference kernel.
    fast: Option<FastDedisperser>,
    /// Rows of the next recording read on into after `header.n_samples`.
    run_on_samples: u64,
}

impl<'a> Searcher<'a> {
    /// The search of a recording with `header` read `read_bytes` bytes per sample
    /// (see [`read_sample_bytes`]), once its memory need is checked. `sweep_room_s`
    /// is the data a sweep starting in it can reach: its duration, and that of any
    /// recording read on into.
    fn new(
        header: Header,
        read_bytes: usize,
        sweep_room_s: f64,
        config: &'a SearchConfig,
        label: &'a str,
    ) -> Result<Self> {
        // Trials whose sweep outlasts the data could search nothing.
        let request = config.plan.within_sweep(&header.freqs_mhz, sweep_room_s);
        let plan = DmPlan::build(
            &header.freqs_mhz,
            header.chan_bw_mhz,
            header.tsamp_s,
            &request,
        )?;
        let max_width = ((config.max_width_s / header.tsamp_s).floor() as usize).max(1);
        let widths: Vec<Vec<usize>> = plan
            .steps
            .iter()
            .map(|s| boxcar::width_ladder((max_width / s.downsample).max(1), config.width_ratio))
            .collect();
        let widths_s: Vec<Vec<f64>> = widths
            .iter()
            .zip(&plan.steps)
            .map(|(w, s)| {
                w.iter()
                    .map(|&w| (w * s.downsample) as f64 * header.tsamp_s)
                    .collect()
            })
            .collect();
        let strides = dedisperse::boxcar_strides(&plan, &request, &widths_s)?;
        let max_ds = plan.steps.iter().map(|s| s.downsample).max().unwrap_or(1);
        let max_width = widths
            .iter()
            .zip(&plan.steps)
            .map(|(w, s)| w.last().copied().unwrap_or(1) * s.downsample)
            .max()
            .unwrap_or(1);
        let max_delay = plan.max_delay_samples();
        let margin = max_width + 2 * max_ds;
        let overlap = max_delay + max_width + 2 * margin;
        // New rows per block, never more than the recording holds with the rows it
        // may read on into: a longer block would only allocate memory no read can
        // fill (`--block-s 1e6` aborted).
        let wanted = (config.block_s / header.tsamp_s).ceil();
        let room = (sweep_room_s / header.tsamp_s).round().max(1.0);
        let advance = (wanted.min(room) as usize).max(overlap);
        let layout = BlockLayout {
            max_delay,
            max_width,
            margin,
            overlap,
            block_len: overlap + advance,
            baseline_len: ((config.baseline_s / header.tsamp_s).round() as usize).max(1),
        };
        let limit = memory::limit_bytes(config.memory_limit_gib);
        memory::check(
            &layout,
            &plan,
            header.n_chan(),
            read_bytes,
            header.tsamp_s,
            limit,
        )
        .map_err(|m| Error::bad_input(label, m))?;
        let dm_offsets = plan
            .steps
            .iter()
            .scan(0, |acc, s| {
                let o = *acc;
                *acc += s.dms.len();
                Some(o)
            })
            .collect();
        let sweep = sweep_of(&header);
        let static_mask = static_mask(&header.freqs_mhz, &header.weights, &config.clean.masks_mhz);
        Ok(Searcher {
            label,
            header,
            config,
            plan,
            widths,
            strides,
            dm_offsets,
            static_mask,
            layout,
            sweep,
            fast: None,
            run_on_samples: 0,
        })
    }

    /// Searches the block in `channels`, whose last rows were just `appended`, for
    /// the boxcar starts it owns from sample `from` on.
    fn block(
        &mut self,
        channels: &ChannelBlock,
        first: bool,
        last: bool,
        appended: Appended,
        from: u64,
    ) -> BlockOutcome {
        let g = &self.layout;
        let (start, n_time) = (channels.start_sample(), channels.n_time());
        let (norm, mask) = (channels.view(), channels.mask());
        let n_chan = mask.len();
        let n_masked = mask.iter().filter(|&&m| m).count();
        let mut clock = Instant::now();
        let mut seconds = StageSeconds::default();
        // No block follows the last one: each trial runs to the last sample its own
        // delays reach, so low DMs are searched to the end of the file.
        let extent = if last {
            Extent::PerTrial
        } else {
            Extent::Common
        };
        let mut outs = match &mut self.fast {
            Some(kernel) => {
                let (rows, stride) = channels.rows();
                kernel.dedisperse_rows(rows, n_time, stride, extent)
            }
            None => dedisperse::reference::dedisperse_over(norm, &self.plan, extent),
        };
        let (own_lo, own_hi) = g.owned_range(start, n_time, first, last);
        let own_lo = own_lo.max(from);
        // Boxcars starting in the rows read on into belong to the next recording.
        let own_hi = own_hi.min(self.header.n_samples);
        // Boxcar starts tested, relative to the block start (see the module docs).
        let tested = own_lo.saturating_sub(start + g.margin as u64) as usize
            ..own_hi.saturating_add(g.margin as u64).saturating_sub(start) as usize;
        seconds.dedispersion = lap(&mut clock);
        let detections = self.detect(&outs, start, tested);
        seconds.matched_filter = lap(&mut clock);
        let time_link = (self.config.cluster.time_link_s / self.header.tsamp_s).round() as u64;
        let clusters =
            friends_of_friends(&detections, self.config.cluster.dm_link_trials, time_link);
        let owned: Vec<_> = merge_dispersion_tails(clusters, &self.sweep, time_link as f64)
            .into_iter()
            .filter(|c| (own_lo..own_hi).contains(&c.best.start_sample))
            .collect();
        // The DM-0 series serves only the triage of candidates, and most blocks of a
        // long recording have none: a full pass over the block saved.
        let dm0 = if owned.is_empty() {
            Vec::new()
        } else {
            self.dm0_series(norm)
        };
        let series = NormalisedSeries::new(&mut outs, g.baseline_len);
        let data = BlockData {
            header: &self.header,
            dm_offsets: &self.dm_offsets,
            norm,
            mask,
            dm0: &dm0,
            series: &series,
            block_start: start,
        };
        let used_bw = (n_chan - n_masked) as f64 * self.header.chan_bw_mhz;
        let candidates = owned
            .into_par_iter()
            .map(|c| self.judge(&data, &c, used_bw))
            .collect();
        drop(series);
        // Owned input samples searched up to sample `end` of the block.
        let searched = |end: usize| {
            (start + end as u64)
                .min(own_hi)
                .saturating_sub(own_lo.max(start))
        };
        // Per step, the mean over its trials: in the last block low DMs reach further.
        let step_samples = outs
            .iter()
            .map(|o| {
                let total: u64 = o
                    .row_lens
                    .iter()
                    .map(|&len| searched(len * o.downsample))
                    .sum();
                total as f64 / o.row_lens.len().max(1) as f64
            })
            .collect();
        if let Some(kernel) = &mut self.fast {
            kernel.recycle(outs);
        }
        seconds.triage = lap(&mut clock);
        BlockOutcome {
            candidates,
            masked_fraction: appended.masked_fraction,
            n_detections: detections.len(),
            samples_searched: searched(n_time.saturating_sub(g.max_delay)),
            step_samples,
            new_samples: appended.new_samples,
            seconds,
        }
    }

    /// Runs the matched filter on every dedispersed series, normalised on the way,
    /// over the boxcars starting in `tested` (input samples from the block start).
    fn detect(
        &self,
        outs: &[dedisperse::Dedispersed],
        block_start: u64,
        tested: std::ops::Range<usize>,
    ) -> Vec<Detection> {
        let threshold = self.config.snr_threshold as f32;
        let mut all = Vec::new();
        for (si, step) in outs.iter().enumerate() {
            let (n, ds) = (step.n_time, step.downsample);
            if n == 0 {
                continue;
            }
            let (widths, strides) = (&self.widths[si], &self.strides[si]);
            let baseline = (self.layout.baseline_len / ds).max(1);
            let dms = &step.dms;
            let offset = self.dm_offsets[si];
            let starts = tested.start / ds..tested.end.div_ceil(ds);
            let found: Vec<Detection> = step
                .data
                .par_chunks(n)
                .zip(&step.row_lens)
                .map(|(row, &len)| &row[..len])
                .enumerate()
                .map_init(
                    || (Scratch::default(), Vec::new(), Vec::new()),
                    |(scratch, peaks, decoded), (d, row)| {
                        peaks.clear();
                        bf16::decode_into(row, decoded);
                        // The widths due at this trial: a prefix of the ladder.
                        let due = strides.iter().take_while(|&&k| d % k == 0).count();
                        boxcar::search_trial(
                            decoded,
                            baseline,
                            &widths[..due],
                            threshold,
                            starts.clone(),
                            scratch,
                            peaks,
                        );
                        peaks
                            .iter()
                            .map(|p| Detection {
                                start_sample: block_start + (p.start * ds) as u64,
                                width_samples: p.width * ds,
                                dm_index: offset + d,
                                dm_stride: strides[widths.partition_point(|&w| w < p.width)],
                                dm: dms[d],
                                snr: f64::from(p.snr),
                            })
                            .collect::<Vec<_>>()
                    },
                )
                .flatten()
                .collect();
            all.extend(found);
        }
        all
    }

    /// The band sum at DM 0, normalised like a dedispersed series. It sums the block as
    /// the kernel does (a flagged channel's samples are zero), not only the channels
    /// unmasked throughout the block: leaving out a channel whose unflagged rows the
    /// kernel summed made undispersed interference in it look dispersed.
    fn dm0_series(&self, norm: ArrayView2<'_, f32>) -> Vec<f32> {
        let mut dm0 = clean::band_sum(norm, &self.static_mask);
        normalise_series(
            &mut dm0,
            self.layout.baseline_len,
            SERIES_SIGMA_VALUES,
            &mut Vec::new(),
        );
        dm0
    }

    /// Measures a cluster's features, triages it and turns it into a candidate.
    fn judge(&self, data: &BlockData<'_, '_>, c: &Cluster, used_bw_mhz: f64) -> Candidate {
        let measured = features::measure(data, &c.best);
        let expectation = triage::Expectation {
            snr: c.best.snr,
            dm: c.best.dm,
            dm0_ratio: measured.expected_dm0_ratio,
            dm0_noise_snr: measured.dm0_noise_snr,
        };
        let (verdict, reasons) =
            triage::verdict(&measured.features, &expectation, &self.config.triage);
        let features = measured.features;
        let h = &self.header;
        let best = &c.best;
        let width_s = best.width_samples as f64 * h.tsamp_s;
        // Boxcar centre at the top channel, then back to infinite frequency.
        let t_top = best.start_sample as f64 * h.tsamp_s + 0.5 * width_s;
        let t_inf_s = t_top - delay_to_infinity_s(best.dm, h.freq_hi_mhz());
        Candidate {
            file: self.label.to_string(),
            t_inf_s,
            mjd_inf: h.start.plus_seconds(t_inf_s).to_mjd_f64(),
            dm: best.dm,
            dm_lo: c.dm_lo,
            dm_hi: c.dm_hi,
            width_ms: width_s * 1e3,
            snr: best.snr,
            cluster_size: c.size,
            verdict,
            reasons,
            features,
            fluence_jy_ms: h
                .sefd_jy
                .map(|sefd| fluence_jy_ms(best.snr, sefd, width_s, used_bw_mhz)),
        }
    }

    fn finish(self, mut totals: Totals) -> FileResult {
        totals
            .candidates
            .sort_by(|a, b| a.t_inf_s.total_cmp(&b.t_inf_s));
        let h = &self.header;
        let trials = trials::count(
            &self.plan,
            &self.widths,
            &self.strides,
            &totals.step_samples,
            h.bandwidth_mhz(),
            0.5 * (h.freq_lo_mhz() + h.freq_hi_mhz()),
            self.config.snr_threshold,
        );
        FileResult {
            file: self.label.to_string(),
            header: self.header,
            plan: self.plan,
            candidates: totals.candidates,
            fraction_masked: if totals.new_samples == 0 {
                0.0
            } else {
                totals.masked_weighted / totals.new_samples as f64
            },
            samples_searched: totals.samples_searched,
            n_blocks: totals.n_blocks,
            n_detections: totals.n_detections,
            trials,
            layout: self.layout,
            seconds: totals.seconds,
            run_on_samples: self.run_on_samples,
            // Set by the caller, which knows the recording before averaging.
            run_on_s: 0.0,
        }
    }
}

/// The dispersion sweep of recordings with `header`'s band and sampling.
fn sweep_of(header: &Header) -> Sweep {
    let k = crate::units::DISPERSION_CONSTANT_S_MHZ2;
    let inv_f2 = |f: f64| k / (f * f);
    Sweep {
        tsamp_s: header.tsamp_s,
        top_s_per_dm: inv_f2(header.freq_hi_mhz()),
        band_s_per_dm: inv_f2(header.freq_lo_mhz()) - inv_f2(header.freq_hi_mhz()),
    }
}

/// Seconds since `clock`, which is reset to now.
fn lap(clock: &mut Instant) -> f64 {
    let now = Instant::now();
    let seconds = now.duration_since(*clock).as_secs_f64();
    *clock = now;
    seconds
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::obs::{Container, MemorySource, test_header};

    /// A recording of `n` rows of 4 channels of uniform noise, and its samples.
    fn recording(n: u64) -> (Header, Vec<f32>) {
        let mut state = 7u64;
        let data = (0..n * 4)
            .map(|_| {
                state = state
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                (state >> 40) as f32 / (1u64 << 24) as f32
            })
            .collect();
        (test_header(4, n), data)
    }

    /// Rows `from..to` of the recording `whole` holding `data`, as one of their own.
    fn part(whole: &Header, data: &[f32], from: u64, to: u64) -> (Header, Vec<f32>) {
        let mut h = whole.clone();
        h.start = whole.epoch_of_sample(from as f64);
        h.n_samples = to - from;
        (h, data[from as usize * 4..to as usize * 4].to_vec())
    }

    fn averaging_16() -> SearchConfig {
        let mut c = SearchConfig::default();
        c.average.samples = 16;
        c.plan.dm_max = 50.0;
        c
    }

    // A first file shorter than one group of averaged samples (10 of 16), read on
    // into the next: its search owns the one group that starts in it, completed by
    // the next file's first 6 samples, searched at every trial DM, and reads on a
    // block overlap past it; `run_on_s` counts the next file's samples from the cut.
    // Alone, it holds no whole group and is refused, naming it.
    #[test]
    fn a_first_file_shorter_than_a_group_owns_the_group_it_starts() {
        let c = averaging_16();
        let (whole, data) = recording(20_000);
        let memory = |(h, d): (Header, Vec<f32>)| -> Box<dyn SampleSource> {
            Box::new(MemorySource::new(h, d))
        };
        let first = || memory(part(&whole, &data, 0, 10));
        let next = memory(part(&whole, &data, 10, 20_000));
        let r = search_run_on_in(
            &mut Workspace::default(),
            first(),
            Some(next),
            "a",
            &c,
            None,
        )
        .unwrap();
        assert_eq!(r.header.n_samples, 1);
        assert_eq!(r.header.tsamp_s, 16.0 * whole.tsamp_s);
        assert_eq!(r.samples_searched, 1);
        // It reads on until its block is full (one block overlap at least), or the
        // next file, 1249 groups after the 6 rows completing the first, ends.
        let fill = (r.layout.block_len as u64 - 1).max(r.layout.overlap as u64);
        assert_eq!(r.run_on_samples, fill.min((19_990 - 6) / 16));
        let next_rows = 6 + 16 * r.run_on_samples;
        assert!((r.run_on_s - next_rows as f64 * whole.tsamp_s).abs() < 1e-12);
        assert_eq!(r.highest_dm_searched(), Some(r.plan.max_dm()));
        let alone = search_run_on_in(&mut Workspace::default(), first(), None, "a", &c, None);
        match alone {
            Err(Error::BadInput { path, msg }) => {
                assert_eq!(path, Path::new("a"));
                assert!(msg.contains("has only 10"), "{msg}");
            }
            other => panic!("{other:?}"),
        }
    }

    // Checking files before a search: a file shorter than a group passes when the
    // next one listed continues it and joining is on, as its search can read on to
    // complete its group; with joining off it is refused, naming it.
    #[test]
    fn a_file_shorter_than_a_group_is_checked_as_joined() {
        let dir = tempfile::tempdir().unwrap();
        let (whole, data) = recording(5_000);
        let paths = [("a.json", 0, 10), ("b.json", 10, 5_000)].map(|(name, from, to)| {
            let path = dir.path().join(name);
            let (h, rows) = part(&whole, &data, from, to);
            let mut sink = crate::obs::create(&path, &h, Container::Native).unwrap();
            sink.write_rows(&rows).unwrap();
            sink.finish().unwrap();
            path
        });
        let c = averaging_16();
        let headers = check_files(&paths, &c, true).unwrap();
        assert_eq!(headers[0].n_samples, 10);
        assert!(headers[0].is_continued_by(&headers[1]));
        let e = check_files(&paths, &c, false).unwrap_err().to_string();
        assert!(e.contains("a.json") && e.contains("has only 10"), "{e}");
    }
}
