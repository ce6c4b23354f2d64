//! The fast kernel. Per plan step and time chunk:
//! 1. stage 1: inside each sub-band of 64 adjacent channels, the
//!    merge tree of [`super::tree`] over short time tiles, so a sub-band's levels stay
//!    in cache, in 16-bit fixed point ([`super::fixed`]: half the bytes of f32, and
//!    the levels are bound by memory traffic), its bottom levels summed straight
//!    from the channels ([`super::direct`]); in parallel over sub-bands;
//! 2. stage 2: for each trial DM, the sum of one stage-1 row per sub-band at that
//!    sub-band's own rounded delay; in parallel over blocks of trials.
//!
//! Stage-1 rows and the output series are stored as bfloat16 ([`super::bf16`]): half
//! the bytes of f32 for the kernel's two largest memory streams. Stage 2 sums in f32
//! over a tile held in L1 and rounds once, as it stores.
//!
//! Hot loops run over equal-length slices so they vectorise, and never allocate:
//! scratch buffers live in the [`FastDedisperser`] or per rayon worker.

use ndarray::ArrayView2;
use rayon::prelude::*;

use super::bf16::{self, Bf16, from_bf16, to_bf16};
use super::direct::{DirectLevel, sum_taps};
use super::fixed::{Quantum, quantise_tile};
use super::subband::{StepKernel, SubBand};
use super::tree::Merge;
use super::{Dedispersed, DmPlan, DmStep, Extent};
use crate::isa::{Isa, IsaLevel};

/// Output samples per chunk as a multiple of the step's longest path, so that the
/// chunk overlap costs stage 1 at most 25 % extra work.
const CHUNK_PER_PATH: usize = 4;
/// Smallest chunk, tree samples.
const MIN_CHUNK: usize = 2048;
/// Stage-1 time tile, tree samples (a multiple of every `per_out`): a sub-band's tree
/// levels stay in L2/L3. With 16-bit levels 1024 and 4096 were no faster (measured).
const STAGE1_TILE: usize = 2048;
/// Stage-2 work unit: trials per task, and time tile in output samples.
const STAGE2_DMS: usize = 16;
const STAGE2_TILE: usize = 1024;

/// A reusable fast dedisperser for one [`DmPlan`]: sub-bands, trees and delays are
/// planned once; the stage-1 buffer grows to the largest chunk and is then reused.
#[derive(Debug, Clone)]
pub struct FastDedisperser {
    plan: DmPlan,
    steps: Vec<StepKernel>,
    /// Stage-1 rows of the current chunk, `[row, time]`, as bfloat16 bits ([`Bf16`]).
    stage1: Vec<Bf16>,
    /// The block at reduced time resolution, `[channel, time]`, halved step by step
    /// in place: channels stay half a block apart whatever the resolution.
    coarse: Vec<f32>,
    /// Stage-1 tile scratch, one per sub-band of the widest step: kept, so that no
    /// block allocates (and faults in) fresh tree levels.
    tiles: Vec<TileScratch>,
    /// Output buffers handed back by [`FastDedisperser::recycle`], one per step:
    /// reusing them spares the page faults of fresh allocations in every block.
    spare: Vec<Vec<Bf16>>,
    /// The instruction set the kernel's loops run in.
    isa: Isa,
}

/// Stage-1 scratch of one sub-band: one tile of its channels and tree levels, in
/// 16-bit fixed point.
#[derive(Debug, Clone, Default)]
struct TileScratch {
    channels: Vec<i16>,
    levels: [Vec<i16>; 2],
    /// One top row of a tile, before it is stored per phase.
    row: Vec<i16>,
}

impl FastDedisperser {
    /// Plans sub-bands, trees and delays for every step of `plan`.
    pub fn new(plan: &DmPlan) -> Self {
        // Each step's paths are capped at its own largest delay, as the reference's
        // are by rounding: no step reaches further than its highest DM.
        let steps = plan
            .steps
            .iter()
            .enumerate()
            .map(|(i, s)| {
                StepKernel::new(
                    &plan.freqs_mhz,
                    &s.dms,
                    plan.tsamp_s,
                    s.downsample,
                    plan.step_delay_samples(i),
                )
            })
            .collect::<Vec<StepKernel>>();
        // The largest stage-1 buffer any step needs, reserved now as untouched zero
        // pages: growing it step by step would fault in each smaller size first.
        let stage1_len = steps.iter().map(stage1_len).max().unwrap_or(0);
        FastDedisperser {
            plan: plan.clone(),
            steps,
            stage1: vec![0; stage1_len],
            coarse: Vec::new(),
            tiles: Vec::new(),
            spare: Vec::new(),
            isa: Isa::detect(),
        }
    }

    /// The same dedisperser running its loops in `isa` (tests compare them).
    #[cfg(test)]
    pub(crate) fn with_isa(self, isa: Isa) -> Self {
        FastDedisperser { isa, ..self }
    }

    /// The plan this dedisperser executes.
    pub fn plan(&self) -> &DmPlan {
        &self.plan
    }

    /// Dedisperses `input` (`[channel, time]`, conventions of [`super`]) for every step,
    /// every step to the common end ([`Extent::Common`]).
    ///
    /// # Panics
    /// If `input` has a different channel count from the plan (a caller bug).
    pub fn dedisperse(&mut self, input: ArrayView2<'_, f32>) -> Vec<Dedispersed> {
        let n_time = input.ncols();
        let input = input.as_standard_layout();
        let rows = input.as_slice().expect("standard layout is contiguous");
        self.dedisperse_rows(rows, n_time, n_time, Extent::Common)
    }

    /// [`FastDedisperser::dedisperse`] for channels stored `row_stride` values apart:
    /// channel c's `n_time` samples are `rows[c·row_stride..][..n_time]` (a block held
    /// in a larger buffer is thus read in place), each step's output running as far
    /// as `extent` says.
    ///
    /// # Panics
    /// If `rows` does not hold the plan's channels so laid out (a caller bug).
    pub fn dedisperse_rows(
        &mut self,
        rows: &[f32],
        n_time: usize,
        row_stride: usize,
        extent: Extent,
    ) -> Vec<Dedispersed> {
        let n_chan = self.plan.freqs_mhz.len();
        assert!(
            n_time <= row_stride
                && (n_chan == 0 || rows.len() >= (n_chan - 1) * row_stride + n_time),
            "input rows disagree with the plan's channels"
        );
        let input = rows;
        let mut out = Vec::with_capacity(self.steps.len());
        let mut coarse_ds = 1;
        for (step, kernel) in self.plan.steps.iter().zip(&self.steps) {
            if kernel.tree_ds < coarse_ds {
                coarse_ds = 1;
            }
            let coarse_stride = n_time / 2;
            while coarse_ds < kernel.tree_ds {
                match coarse_ds {
                    1 => halve(input, n_time, row_stride, &mut self.coarse, n_chan),
                    ds => {
                        let rows = &mut self.coarse[..n_chan * coarse_stride];
                        halve_in_place(rows, n_time / ds, coarse_stride);
                    }
                }
                coarse_ds *= 2;
            }
            let (rows, row_len, row_stride): (&[f32], usize, usize) = match coarse_ds {
                1 => (input, n_time, row_stride),
                ds => (&self.coarse, n_time / ds, coarse_stride),
            };
            let row_lens = row_lens(&self.plan, step, kernel, n_time, extent);
            let n_out = row_lens.iter().copied().max().unwrap_or(0);
            let mut data = self
                .spare
                .get_mut(out.len())
                .map(std::mem::take)
                .unwrap_or_default();
            fit_output(&mut data, step.dms.len() * n_out);
            if n_chan == 0 {
                data.fill(0);
            } else if n_out > 0 {
                let chunk = chunk_len(kernel.max_path).div_ceil(kernel.per_out);
                for t0 in (0..n_out).step_by(chunk) {
                    let len = chunk.min(n_out - t0);
                    let source = Source {
                        rows,
                        row_len,
                        row_stride,
                        t0: t0 * kernel.per_out,
                    };
                    let (isa, buf) = (self.isa, &mut self.stage1);
                    let stride = stage1(kernel, &source, len, buf, &mut self.tiles, isa);
                    let chunk = t0..t0 + len;
                    stage2(kernel, &self.stage1, stride, chunk, &mut data, n_out, isa);
                }
            }
            out.push(Dedispersed {
                dms: step.dms.clone(),
                downsample: step.downsample,
                n_time: n_out,
                row_lens,
                data,
            });
        }
        out
    }
}

impl FastDedisperser {
    /// Hands back the output of [`FastDedisperser::dedisperse`] once it has been
    /// used, so that the next block reuses its memory.
    pub fn recycle(&mut self, outs: Vec<Dedispersed>) {
        self.spare = outs.into_iter().map(|o| o.data).collect();
    }
}

/// Valid output samples of each trial of `step` for a block of `n_time` input
/// samples. Per trial, the outputs whose path stays in the block: output `t` reads
/// tree samples up to `per_out·(t + 1) + path − 1`, and the block holds
/// `n_time / tree_ds` of them.
fn row_lens(
    plan: &DmPlan,
    step: &DmStep,
    kernel: &StepKernel,
    n_time: usize,
    extent: Extent,
) -> Vec<usize> {
    match extent {
        Extent::Common => {
            vec![plan.valid_samples(0.0, step.downsample, n_time, extent); step.dms.len()]
        }
        Extent::PerTrial => {
            let tree_len = n_time / kernel.tree_ds;
            kernel
                .trial_paths
                .iter()
                .map(|&path| tree_len.saturating_sub(path) / kernel.per_out)
                .collect()
        }
    }
}

/// Tree samples per chunk for a step whose longest path is `max_path` tree samples.
pub(crate) fn chunk_len(max_path: usize) -> usize {
    (CHUNK_PER_PATH * max_path).max(MIN_CHUNK)
}

/// Values of the stage-1 buffer for a whole chunk of the step `kernel`.
pub(crate) fn stage1_len(kernel: &StepKernel) -> usize {
    let chunk = chunk_len(kernel.max_path).div_ceil(kernel.per_out);
    kernel.n_rows() * kernel.per_out * stage1_stride(kernel, chunk)
}

/// The block at the step's tree resolution (`row_len` samples per channel, channels
/// `row_stride` apart) and the chunk's first tree sample.
struct Source<'a> {
    rows: &'a [f32],
    row_len: usize,
    row_stride: usize,
    t0: usize,
}

/// Halves the time resolution of `src` (`[channel, time]`, `row_len` samples per
/// channel, channels `row_stride` apart) into `dst` (channels contiguous), in
/// parallel over channels; an odd last sample is dropped.
fn halve(src: &[f32], row_len: usize, row_stride: usize, dst: &mut Vec<f32>, n_chan: usize) {
    let new_len = row_len / 2;
    grow(dst, n_chan * new_len);
    dst[..n_chan * new_len]
        .par_chunks_mut(new_len.max(1))
        .zip(src.par_chunks(row_stride.max(1)))
        .for_each(|(dst, src)| pair_sums(dst, &src[..row_len]));
}

/// Halves the time resolution of every channel of `rows` (channels `row_stride`
/// apart, `row_len` samples each) within the channel's own place, in parallel over
/// channels; an odd last sample is dropped.
fn halve_in_place(rows: &mut [f32], row_len: usize, row_stride: usize) {
    // Each chunk copies its inputs 2·j0.. out before writing its outputs j0..j0 + n,
    // and no output reaches a later chunk's inputs (j0 + n ≤ 2·(j0 + n)).
    const CHUNK: usize = 256;
    rows.par_chunks_mut(row_stride.max(1)).for_each(|row| {
        let mut pairs = [0.0f32; 2 * CHUNK];
        for j0 in (0..row_len / 2).step_by(CHUNK) {
            let n = CHUNK.min(row_len / 2 - j0);
            pairs[..2 * n].copy_from_slice(&row[2 * j0..2 * (j0 + n)]);
            pair_sums(&mut row[j0..j0 + n], &pairs[..2 * n]);
        }
    });
}

/// `dst[j] = src[2j] + src[2j + 1]` (inlined into each caller, so it vectorises for
/// the caller's instruction set).
#[inline(always)]
fn pair_sums(dst: &mut [f32], src: &[f32]) {
    for (o, pair) in dst.iter_mut().zip(src.chunks_exact(2)) {
        *o = pair[0] + pair[1];
    }
}

/// Stage 1 for a chunk of `len` output samples: every sub-band's top rows over the
/// samples stage 2 will read, into `buf`. Each top row is stored once per phase φ <
/// `per_out` as the sums of `per_out` tree samples starting at `per_out·j + φ`, so
/// stage 2 runs at the output rate while delays keep the tree's resolution. Layout
/// `[row · per_out + φ, stride]`; returns the stride (output samples).
fn stage1(
    kernel: &StepKernel,
    src: &Source<'_>,
    len: usize,
    buf: &mut Vec<Bf16>,
    tiles: &mut Vec<TileScratch>,
    isa: Isa,
) -> usize {
    let per_out = kernel.per_out;
    let need = |max_offset: usize| len + max_offset / per_out + 1;
    let stride = stage1_stride(kernel, len);
    grow(buf, kernel.n_rows() * per_out * stride);
    let mut slabs = Vec::with_capacity(kernel.subbands.len());
    let mut rest = &mut buf[..];
    for sub in &kernel.subbands {
        let n_rows = sub.tree.n_top_rows(sub.channels.len()) * per_out;
        let (slab, tail) = rest.split_at_mut(n_rows * stride);
        slabs.push(slab);
        rest = tail;
    }
    if tiles.len() < kernel.subbands.len() {
        tiles.resize_with(kernel.subbands.len(), TileScratch::default);
    }
    kernel
        .subbands
        .par_iter()
        .zip(slabs)
        .zip(tiles.par_iter_mut())
        .for_each(|((sub, slab), scratch)| {
            let rows = Phased {
                slab,
                stride,
                per_out,
                need: need(sub.max_offset),
            };
            subband_rows(sub, src, rows, scratch, isa)
        });
    stride
}

/// Output samples per stage-1 row for a chunk of `len` output samples: the chunk
/// plus the largest sub-band delay (at the output rate) and one sample for the phases.
fn stage1_stride(kernel: &StepKernel, len: usize) -> usize {
    let max_offset = kernel
        .subbands
        .iter()
        .map(|s| s.max_offset)
        .max()
        .unwrap_or(0);
    len + max_offset / kernel.per_out + 1
}

/// A sub-band's share of the stage-1 buffer.
struct Phased<'a> {
    slab: &'a mut [Bf16],
    stride: usize,
    per_out: usize,
    /// Output samples of each row that stage 2 reads.
    need: usize,
}

impl Phased<'_> {
    /// Phase `phase` of top row `r`.
    fn row_mut(&mut self, r: usize, phase: usize) -> &mut [Bf16] {
        let i = r * self.per_out + phase;
        &mut self.slab[i * self.stride..(i + 1) * self.stride]
    }
}

/// One sub-band's phased top rows for output samples `0..out.need`, tile by tile: each
/// tile's channels quantised to 16-bit fixed point ([`super::fixed`]), then its tree.
/// Compiled for `isa` (every loop below is inlined into it).
fn subband_rows(
    sub: &SubBand,
    src: &Source<'_>,
    out: Phased<'_>,
    scratch: &mut TileScratch,
    isa: Isa,
) {
    match isa.level() {
        // SAFETY: each `_avx*` function only requires its instruction set, which the
        // CPU has because an `Isa` is only made by detecting it (`crate::isa`); the
        // functions are otherwise safe code.
        #[cfg(target_arch = "x86_64")]
        IsaLevel::Avx512 => unsafe { subband_rows_avx512(sub, src, out, scratch) },
        #[cfg(target_arch = "x86_64")]
        IsaLevel::Avx2 => unsafe { subband_rows_avx2(sub, src, out, scratch) },
        _ => subband_tiles(sub, src, out, scratch),
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,avx512f,avx512bw,avx512vl")]
fn subband_rows_avx512(sub: &SubBand, src: &Source<'_>, out: Phased<'_>, s: &mut TileScratch) {
    subband_tiles(sub, src, out, s)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn subband_rows_avx2(sub: &SubBand, src: &Source<'_>, out: Phased<'_>, s: &mut TileScratch) {
    subband_tiles(sub, src, out, s)
}

/// The portable body of [`subband_rows`].
#[inline(always)]
fn subband_tiles(sub: &SubBand, src: &Source<'_>, mut out: Phased<'_>, scratch: &mut TileScratch) {
    let (halo, need) = (sub.tree.max_path, out.need);
    let n_chan = sub.channels.len();
    let per_out = out.per_out;
    let tile_len = STAGE1_TILE / per_out;
    for j0 in (0..need).step_by(tile_len) {
        let mut tile = TopTile {
            j0,
            n_j: tile_len.min(need - j0),
            per_out,
            width: 0,
            quantum: 0.0,
        };
        tile.width = tile.len() + halo;
        let (start, width) = (src.t0 + j0 * per_out, tile.width);
        // One more row than the channels: zeros, which pad the direct sums.
        let mut channels = std::mem::take(&mut scratch.channels);
        grow(&mut channels, (n_chan + 1) * width);
        channels[n_chan * width..(n_chan + 1) * width].fill(0);
        let rows = sub
            .channels
            .iter()
            .map(|&c| &src.rows[c * src.row_stride..][..src.row_len]);
        // Zero past the block's end: paths never reach there (each is capped at its
        // step's largest delay), so a chunk's last tile sums none of it into a valid
        // output.
        tile.quantum = quantise_tile(rows, start, width, &mut channels[..n_chan * width]);
        tile_rows(sub, &Level::new(&channels, width), &tile, &mut out, scratch);
        scratch.channels = channels;
    }
}

/// The tree of one tile, from its quantised channels (`channels.row(i)`: the
/// sub-band's i-th channel from the tile's first tree sample) to its top rows in `out`.
#[inline(always)]
fn tile_rows(
    sub: &SubBand,
    channels: &Level<'_>,
    tile: &TopTile,
    out: &mut Phased<'_>,
    scratch: &mut TileScratch,
) {
    let (len, width) = (tile.len(), tile.width);
    let Some((top, below)) = sub.tree.levels.split_last() else {
        // A one-channel sub-band: its channel is its only row.
        return store_phases(&channels.row(0)[..len], out, 0, tile);
    };
    // The top level goes straight to `out`; the direct level and the levels above it
    // alternate between two buffers.
    let rows = below.iter().map(Vec::len).max().unwrap_or(0);
    let [mut level, mut next] = std::mem::take(&mut scratch.levels);
    grow(&mut level, rows * width);
    grow(&mut next, rows * width);
    let direct = &sub.direct;
    if direct.depth > 0 {
        direct_rows(direct, channels, &mut level, width, len);
    }
    for (l, merges) in below.iter().enumerate().skip(direct.depth) {
        let src = if l == 0 {
            *channels
        } else {
            Level::new(&level, width)
        };
        merge_rows(merges, &src, &mut next, width, len);
        std::mem::swap(&mut level, &mut next);
    }
    let last = match below.len() {
        0 => *channels,
        _ => Level::new(&level, width),
    };
    top_level(top, &last, tile, out, &mut scratch.row);
    scratch.levels = [level, next];
}

/// The direct level of a tile (`dst`, rows `stride` apart) from its channels: each
/// row over the samples it must supply, as the tree's merges would make it.
#[inline(always)]
fn direct_rows(
    direct: &DirectLevel,
    channels: &Level<'_>,
    dst: &mut [i16],
    stride: usize,
    len: usize,
) {
    let rows = direct.taps.iter().zip(&direct.reach).zip(&direct.max_delay);
    for (out, ((taps, &reach), &max_delay)) in dst.chunks_exact_mut(stride).zip(rows) {
        let n = (len + reach).min(stride - max_delay);
        let inputs = taps.map(|(c, delay)| &channels.row(c)[delay..][..n]);
        sum_taps(&mut out[..n], &inputs);
    }
}

/// The rows of one tree level (or of the quantised channels), stored one after
/// another `stride` values apart.
#[derive(Clone, Copy)]
struct Level<'a> {
    data: &'a [i16],
    stride: usize,
}

impl<'a> Level<'a> {
    fn new(data: &'a [i16], stride: usize) -> Self {
        Level { data, stride }
    }

    #[inline(always)]
    fn row(&self, i: usize) -> &'a [i16] {
        &self.data[i * self.stride..(i + 1) * self.stride]
    }
}

/// Where one tile of the top level goes: output samples `j0..j0 + n_j` of the phased
/// rows, from tree rows of `width` values apart in the level below, whose values are
/// in units of `quantum`.
struct TopTile {
    j0: usize,
    n_j: usize,
    per_out: usize,
    width: usize,
    quantum: Quantum,
}

impl TopTile {
    /// Tree samples the top rows need: the last phase reads one past the tile.
    fn len(&self) -> usize {
        self.n_j * self.per_out + self.per_out - 1
    }
}

/// The top level of one tile, merged row by row into one L1-resident row and stored
/// from there, per phase and as bfloat16, into the stage-1 buffer (the level as a
/// whole would not fit in L2). Top rows need no samples beyond the tile (their reach
/// is 0): `n_j·per_out + per_out − 1` tree samples, the last phase's.
#[inline(always)]
fn top_level(
    merges: &[Merge],
    src: &Level<'_>,
    tile: &TopTile,
    out: &mut Phased<'_>,
    row: &mut Vec<i16>,
) {
    let len = tile.len();
    grow(row, len);
    for (r, m) in merges.iter().enumerate() {
        merge_row(m, src, &mut row[..len]);
        store_phases(&row[..len], out, r, tile);
    }
}

/// Stores tree samples `row` as the phases of top row `r` over the tile's output
/// samples: phase φ's sample j sums `row[per_out·j + φ ..][..per_out]`, converted
/// from fixed point.
#[inline(always)]
fn store_phases(row: &[i16], out: &mut Phased<'_>, r: usize, tile: &TopTile) {
    let (j0, n_j, per_out, q) = (tile.j0, tile.n_j, tile.per_out, tile.quantum);
    let value = |x: i16| f32::from(x);
    for phase in 0..per_out {
        let src_row = &row[phase..][..n_j * per_out];
        let dst = &mut out.row_mut(r, phase)[j0..j0 + n_j];
        match per_out {
            1 => dst
                .iter_mut()
                .zip(src_row)
                .for_each(|(o, &x)| *o = to_bf16(value(x) * q)),
            // Every downsampled step (TREE_OVERSAMPLE): a loop that vectorises.
            2 => {
                for (o, pair) in dst.iter_mut().zip(src_row.chunks_exact(2)) {
                    *o = to_bf16((value(pair[0]) + value(pair[1])) * q);
                }
            }
            _ => {
                for (o, group) in dst.iter_mut().zip(src_row.chunks_exact(per_out)) {
                    *o = to_bf16(group.iter().map(|&x| value(x)).sum::<f32>() * q);
                }
            }
        }
    }
}

/// Stage 2: output samples `t0..t0 + len` of every trial into `data` (`[dm, n_out]`):
/// for each sub-band, the phase of its row matching its delay, from that delay on.
fn stage2(
    kernel: &StepKernel,
    stage1: &[Bf16],
    stride: usize,
    chunk: std::ops::Range<usize>,
    data: &mut [Bf16],
    n_out: usize,
    isa: Isa,
) {
    let (t0, len) = (chunk.start, chunk.len());
    let n_sub = kernel.subbands.len();
    let per_out = kernel.per_out;
    data.par_chunks_mut(n_out * STAGE2_DMS)
        .enumerate()
        .for_each(|(block, series)| {
            let mut acc = [0.0f32; STAGE2_TILE];
            for a in (0..len).step_by(STAGE2_TILE) {
                let tile = STAGE2_TILE.min(len - a);
                for (j, row) in series.chunks_exact_mut(n_out).enumerate() {
                    let k = block * STAGE2_DMS + j;
                    let paths = (k * n_sub..(k + 1) * n_sub).map(|i| {
                        let (row, offset) = (kernel.rows[i], kernel.offsets[i]);
                        (row * per_out + offset % per_out) * stride + offset / per_out + a
                    });
                    let out = &mut row[t0 + a..t0 + a + tile];
                    sum_and_store(&mut acc[..tile], out, stage1, paths, isa);
                }
            }
        });
}

/// `acc` = sum of the `acc.len()` samples of `stage1` starting at each of `starts`,
/// then `out` = `acc` rounded to bfloat16; compiled for `isa` (AVX2 makes twice the
/// adds per cycle of the baseline SSE2 build).
fn sum_and_store(
    acc: &mut [f32],
    out: &mut [Bf16],
    stage1: &[Bf16],
    starts: impl Iterator<Item = usize>,
    isa: Isa,
) {
    match isa.level() {
        // SAFETY: as in `subband_rows`: the CPU has the instruction set of `isa`.
        #[cfg(target_arch = "x86_64")]
        IsaLevel::Avx512 => unsafe { sum_and_store_avx512(acc, out, stage1, starts) },
        #[cfg(target_arch = "x86_64")]
        IsaLevel::Avx2 => unsafe { sum_and_store_avx2(acc, out, stage1, starts) },
        _ => sum_and_store_rows(acc, out, stage1, starts),
    }
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2,avx512f,avx512bw,avx512vl")]
fn sum_and_store_avx512(
    acc: &mut [f32],
    out: &mut [Bf16],
    stage1: &[Bf16],
    starts: impl Iterator<Item = usize>,
) {
    sum_and_store_rows(acc, out, stage1, starts)
}

#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
fn sum_and_store_avx2(
    acc: &mut [f32],
    out: &mut [Bf16],
    stage1: &[Bf16],
    starts: impl Iterator<Item = usize>,
) {
    sum_and_store_rows(acc, out, stage1, starts)
}

/// The portable body of [`sum_and_store`].
#[inline(always)]
fn sum_and_store_rows(
    acc: &mut [f32],
    out: &mut [Bf16],
    stage1: &[Bf16],
    starts: impl Iterator<Item = usize>,
) {
    accumulate_rows(acc, stage1, starts);
    bf16::encode(acc, out);
}

/// The sums of [`sum_and_store`]: eight rows per pass over `acc`, the first pass
/// writing it, then four, then one at a time (16 rows take two passes, not a copy and
/// fifteen more; with eight a pass stage 2 took about 8 % less of the survey search
/// than with four, docs/benchmarks.md). Rows are added pairwise in a fixed order, so every
/// instruction set gives the same sums.
#[inline(always)]
fn accumulate_rows(acc: &mut [f32], stage1: &[Bf16], starts: impl Iterator<Item = usize>) {
    let n = acc.len();
    let mut rows = starts.map(|s| &stage1[s..s + n]);
    let f = |&x: &Bf16| from_bf16(x);
    let mut first = true;
    loop {
        let mut group: [&[Bf16]; 8] = [&[]; 8];
        let mut k = 0;
        while let Some(row) = (k < group.len()).then(|| rows.next()).flatten() {
            group[k] = row;
            k += 1;
        }
        if let [a, b, c, d, e, g, h, i] = group
            && k == group.len()
        {
            let eights = acc
                .iter_mut()
                .zip(a.iter().zip(b))
                .zip(c.iter().zip(d))
                .zip(e.iter().zip(g))
                .zip(h.iter().zip(i));
            let sum = |((a, b), (c, d)), ((e, g), (h, i))| {
                ((f(a) + f(b)) + (f(c) + f(d))) + ((f(e) + f(g)) + (f(h) + f(i)))
            };
            if first {
                eights.for_each(|((((o, ab), cd), eg), hi)| *o = sum((ab, cd), (eg, hi)));
            } else {
                eights.for_each(|((((o, ab), cd), eg), hi)| *o += sum((ab, cd), (eg, hi)));
            }
            first = false;
            continue;
        }
        let mut rest = &group[..k];
        if let Some(([a, b, c, d], after)) = rest.split_first_chunk::<4>() {
            let quads = acc.iter_mut().zip(*a).zip(*b).zip(*c).zip(*d);
            if first {
                quads.for_each(|((((o, a), b), c), d)| *o = (f(a) + f(b)) + (f(c) + f(d)));
            } else {
                quads.for_each(|((((o, a), b), c), d)| *o += (f(a) + f(b)) + (f(c) + f(d)));
            }
            (first, rest) = (false, after);
        }
        for row in rest {
            if first {
                acc.iter_mut().zip(*row).for_each(|(o, x)| *o = f(x));
            } else {
                acc.iter_mut().zip(*row).for_each(|(o, x)| *o += f(x));
            }
            first = false;
        }
        if first {
            acc.fill(0.0);
        }
        return;
    }
}

/// Makes the output buffer `data` hold `n_values` samples. Stage 2 writes every
/// output sample, so a reused buffer needs no clearing, and a fresh one is left to
/// the parallel stage 2 to touch first (zeroing it here would fault its pages in on
/// one thread). A reused buffer too small — the last block of a file, whose low-DM
/// trials run to its end — is grown in place: its pages, faulted in already, are
/// kept (a large buffer is its own mapping, which glibc's `realloc` remaps without
/// copying), and only the new tail is touched, in parallel. Replacing it instead
/// faulted in the whole buffer again: a quarter of a 30 s survey search's page
/// faults, 1–5 s of CPU per gigabyte on our virtual machines (docs/benchmarks.md).
fn fit_output(data: &mut Vec<Bf16>, n_values: usize) {
    if data.capacity() == 0 {
        *data = vec![0; n_values];
    } else if data.len() < n_values {
        data.reserve_exact(n_values - data.len());
        data.par_extend(rayon::iter::repeat_n(0, n_values - data.len()));
    }
    data.truncate(n_values);
}

/// Grows `buf` to at least `n` values (never shrinks: the scratch is reused). Old
/// values need not survive, so a buffer too small is replaced by fresh zeroed memory,
/// whose pages the parallel code that fills it touches first.
fn grow<T: Copy + Default>(buf: &mut Vec<T>, n: usize) {
    if buf.capacity() < n {
        *buf = vec![T::default(); n];
    } else if buf.len() < n {
        buf.resize(n, T::default());
    }
}

/// One tree level over a tile: each output row over the samples it must supply.
#[inline(always)]
fn merge_rows(merges: &[Merge], src: &Level<'_>, dst: &mut [i16], stride: usize, len: usize) {
    for (out, m) in dst.chunks_exact_mut(stride).zip(merges) {
        let n = (len + m.reach).min(stride - m.shift);
        merge_row(m, src, &mut out[..n]);
    }
}

/// `out[t] = upper[t] + lower[t + shift]` for the rows of `m` in `src`, or a copy of
/// the upper row when there is no lower one. The adds saturate, which only infinite
/// input can reach ([`super::fixed`]).
#[inline(always)]
fn merge_row(m: &Merge, src: &Level<'_>, out: &mut [i16]) {
    let n = out.len();
    let upper = &src.row(m.upper)[..n];
    match m.lower {
        Some(l) => {
            let lower = &src.row(l)[m.shift..][..n];
            for ((o, x), y) in out.iter_mut().zip(upper).zip(lower) {
                *o = x.saturating_add(*y);
            }
        }
        None => out.copy_from_slice(upper),
    }
}

#[cfg(test)]
#[path = "fast_tests.rs"]
mod tests;
