//! The fast kernel: executes the merge trees of [`super::tree`] level by level over
//! time chunks, in parallel over rows, with caller-owned scratch buffers.

use ndarray::ArrayView2;
use rayon::prelude::*;

use super::tree::{Merge, StepTree};
use super::{Dedispersed, DmPlan};

/// Output samples per chunk as a multiple of the step's longest path: the chunk
/// overlap (the path length) then costs at most 25 % extra work.
const CHUNK_PER_PATH: usize = 4;
/// Smallest chunk, output samples: keeps rows long enough to vectorise and to split.
const MIN_CHUNK: usize = 2048;
/// Downsampled steps run their tree at half the output sample (then sum pairs), so
/// delays are rounded at half an output sample; see `docs/dedisperse.md`.
const TREE_OVERSAMPLE: usize = 2;

/// The tree's sample, in input samples, for a step downsampled by `downsample`.
pub(crate) fn tree_downsample(downsample: usize) -> usize {
    (downsample / TREE_OVERSAMPLE).max(1)
}

/// A reusable fast dedisperser for one [`DmPlan`]: the trees are built once, and the
/// scratch buffers grow to the largest chunk and are then reused for every block.
#[derive(Debug, Clone)]
pub struct FastDedisperser {
    plan: DmPlan,
    trees: Vec<StepTree>,
    /// Downsampled channel rows of the current chunk, `[channel, time]`.
    channels: Vec<f32>,
    /// Ping-pong buffers for the tree levels, `[row, time]`.
    levels: [Vec<f32>; 2],
}

impl FastDedisperser {
    /// Prepares the merge trees for every step of `plan`.
    pub fn new(plan: &DmPlan) -> Self {
        let trees = plan
            .steps
            .iter()
            .map(|s| {
                let ds = tree_downsample(s.downsample);
                let longest = plan.max_delay_samples() / ds;
                StepTree::new(&plan.freqs_mhz, &s.dms, plan.tsamp_s, ds, longest)
            })
            .collect();
        FastDedisperser {
            plan: plan.clone(),
            trees,
            channels: Vec::new(),
            levels: [Vec::new(), Vec::new()],
        }
    }

    /// The plan this dedisperser executes.
    pub fn plan(&self) -> &DmPlan {
        &self.plan
    }

    /// Dedisperses `input` (`[channel, time]`, conventions of [`super`]) for every step.
    ///
    /// # Panics
    /// If `input` has a different channel count from the plan (a caller bug).
    pub fn dedisperse(&mut self, input: ArrayView2<'_, f32>) -> Vec<Dedispersed> {
        let (n_chan, n_time) = input.dim();
        assert_eq!(
            n_chan,
            self.plan.freqs_mhz.len(),
            "input channels disagree with the plan"
        );
        let input = input.as_standard_layout();
        let input = input.as_slice().expect("standard layout is contiguous");
        let valid = n_time.saturating_sub(self.plan.max_delay_samples());
        let mut out = Vec::with_capacity(self.trees.len());
        for i in 0..self.trees.len() {
            let dms = self.plan.steps[i].dms.clone();
            let ds = self.plan.steps[i].downsample;
            let n_out = valid / ds;
            let mut data = vec![0.0f32; dms.len() * n_out];
            if n_chan > 0 && n_out > 0 {
                let per_out = ds / tree_downsample(ds);
                let chunk = chunk_len(self.trees[i].max_path).div_ceil(per_out);
                for t0 in (0..n_out).step_by(chunk) {
                    let len = chunk.min(n_out - t0);
                    self.run_chunk(i, input, n_time, t0, len, &mut data, n_out);
                }
            }
            out.push(Dedispersed {
                dms,
                downsample: ds,
                n_time: n_out,
                data,
            });
        }
        out
    }

    /// Output samples `t0..t0 + len` of step `i` into `data` (`[dm, n_out]`).
    #[allow(clippy::too_many_arguments)]
    fn run_chunk(
        &mut self,
        i: usize,
        input: &[f32],
        n_time: usize,
        t0: usize,
        len: usize,
        data: &mut [f32],
        n_out: usize,
    ) {
        let tree = &self.trees[i];
        let ds = tree_downsample(self.plan.steps[i].downsample);
        let per_out = self.plan.steps[i].downsample / ds;
        let n_chan = self.plan.freqs_mhz.len();
        let (t0_in, len_in) = (t0 * per_out, len * per_out);
        let stride = len_in + tree.max_path;
        grow(&mut self.channels, n_chan * stride);
        self.channels[..n_chan * stride]
            .par_chunks_mut(stride)
            .enumerate()
            .for_each(|(c, row)| {
                downsample_into(&input[c * n_time..(c + 1) * n_time], t0_in * ds, ds, row)
            });

        let rows = tree.max_rows(n_chan);
        for buf in &mut self.levels {
            grow(buf, rows * stride);
        }
        let [even, odd] = &mut self.levels;
        for (l, merges) in tree.levels.iter().enumerate() {
            let (src, dst): (&[f32], &mut [f32]) = match l {
                0 => (&self.channels, even),
                _ if l % 2 == 1 => (even, odd),
                _ => (odd, even),
            };
            run_level(merges, src, dst, stride, len_in);
        }
        let top: &[f32] = match tree.levels.len() {
            0 => &self.channels,
            n if n % 2 == 1 => even,
            _ => odd,
        };
        data.par_chunks_mut(n_out)
            .zip(tree.dm_rows.par_iter())
            .for_each(|(series, &r)| {
                let row = &top[r * stride..r * stride + len_in];
                for (o, group) in series[t0..t0 + len]
                    .iter_mut()
                    .zip(row.chunks_exact(per_out))
                {
                    *o = group.iter().sum();
                }
            });
    }
}

/// Output samples per chunk for a step whose longest path is `max_path` samples.
pub(crate) fn chunk_len(max_path: usize) -> usize {
    (CHUNK_PER_PATH * max_path).max(MIN_CHUNK)
}

/// Grows `buf` to at least `n` values (never shrinks: the scratch is reused).
fn grow(buf: &mut Vec<f32>, n: usize) {
    if buf.len() < n {
        buf.resize(n, 0.0);
    }
}

/// `row[j]` = sum of `chan[start + j·ds ..][..ds]`. Paths never reach past the block
/// (trees cap them at the plan's largest delay), so the zero tail is never summed.
fn downsample_into(chan: &[f32], start: usize, ds: usize, row: &mut [f32]) {
    let avail = chan.get(start..).unwrap_or(&[]);
    let full = (avail.len() / ds).min(row.len());
    let (head, tail) = row.split_at_mut(full);
    if ds == 1 {
        head.copy_from_slice(&avail[..full]);
    } else {
        for (o, group) in head.iter_mut().zip(avail.chunks_exact(ds)) {
            *o = group.iter().sum();
        }
    }
    tail.fill(0.0);
}

/// One tree level: every output row in parallel, each over the samples it must supply.
fn run_level(merges: &[Merge], src: &[f32], dst: &mut [f32], stride: usize, len: usize) {
    dst[..merges.len() * stride]
        .par_chunks_mut(stride)
        .zip(merges.par_iter())
        .for_each(|(out, m)| {
            let n = (len + m.reach).min(stride - m.shift);
            let upper = &src[m.upper * stride..][..n];
            match m.lower {
                Some(l) => add_rows(&mut out[..n], upper, &src[l * stride + m.shift..][..n]),
                None => out[..n].copy_from_slice(upper),
            }
        });
}

/// `out = a + b` elementwise; equal-length slices so the loop vectorises.
fn add_rows(out: &mut [f32], a: &[f32], b: &[f32]) {
    for ((o, x), y) in out.iter_mut().zip(a).zip(b) {
        *o = x + y;
    }
}

#[cfg(test)]
#[path = "fast_tests.rs"]
mod tests;
