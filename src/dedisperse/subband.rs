//! How the fast kernel splits one plan step: a merge tree inside each sub-band of
//! adjacent channels (stage 1), then, per trial DM, a sum of one row of every
//! sub-band at that sub-band's own rounded delay (stage 2).

use super::direct::DirectLevel;
use super::tree::StepTree;
use crate::units::delay_between_s;

/// Channels per sub-band: the tree inside a sub-band stays in cache, and stage 2 adds
/// `n_chan / SUBBAND_CHANNELS` rows per trial and sample.
pub(crate) const SUBBAND_CHANNELS: usize = 64;

/// Downsampled steps run at half their output sample (pairs summed at the end), so
/// delays are rounded at half an output sample.
const TREE_OVERSAMPLE: usize = 2;

/// The tree's sample, in input samples, for a step downsampled by `downsample`.
pub(crate) fn tree_downsample(downsample: usize) -> usize {
    (downsample / TREE_OVERSAMPLE).max(1)
}

/// One sub-band: its channels (data order), its tree over those channels and the
/// tree's bottom levels as direct sums.
#[derive(Debug, Clone)]
pub(crate) struct SubBand {
    pub channels: Vec<usize>,
    pub tree: StepTree,
    pub direct: DirectLevel,
    /// Largest stage-2 delay of its top, tree samples.
    pub max_offset: usize,
}

/// Everything the fast kernel needs for one [`super::DmStep`].
#[derive(Debug, Clone)]
pub(crate) struct StepKernel {
    /// Input samples per tree sample, and tree samples per output sample.
    pub tree_ds: usize,
    pub per_out: usize,
    pub subbands: Vec<SubBand>,
    /// Per trial and sub-band (`[dm][subband]`): stage-1 row and delay of its top.
    pub rows: Vec<usize>,
    pub offsets: Vec<usize>,
    /// Largest total path over all trials, tree samples.
    pub max_path: usize,
    /// Each trial's longest path (its largest channel delay), tree samples.
    pub trial_paths: Vec<usize>,
}

impl StepKernel {
    /// Plans step `dms` at `downsample` for channel centres `freqs_mhz` (data order),
    /// with no path longer than `max_delay_samples` input samples.
    pub(crate) fn new(
        freqs_mhz: &[f64],
        dms: &[f64],
        tsamp_s: f64,
        downsample: usize,
        max_delay_samples: usize,
    ) -> Self {
        let tree_ds = tree_downsample(downsample);
        let longest = max_delay_samples / tree_ds;
        let sample_s = tsamp_s * tree_ds as f64;
        let mut order: Vec<usize> = (0..freqs_mhz.len()).collect();
        order.sort_by(|&a, &b| freqs_mhz[b].total_cmp(&freqs_mhz[a]));
        let f_top = order.first().map_or(0.0, |&c| freqs_mhz[c]);

        let mut subbands = Vec::new();
        let mut row_base = Vec::new();
        let mut n_rows = 0;
        for group in order.chunks(SUBBAND_CHANNELS) {
            let freqs: Vec<f64> = group.iter().map(|&c| freqs_mhz[c]).collect();
            let top_offsets: Vec<f64> = dms
                .iter()
                .map(|&dm| delay_between_s(dm, freqs[0], f_top) / sample_s)
                .collect();
            let tree = StepTree::new(&freqs, dms, &top_offsets, tsamp_s, tree_ds, longest);
            row_base.push(n_rows);
            n_rows += tree.n_top_rows(group.len());
            subbands.push(SubBand {
                channels: group.to_vec(),
                direct: DirectLevel::new(&tree, group.len()),
                tree,
                max_offset: 0,
            });
        }

        let n_sub = subbands.len();
        let mut rows = Vec::with_capacity(dms.len() * n_sub);
        let mut offsets = Vec::with_capacity(dms.len() * n_sub);
        let mut trial_paths = vec![0; dms.len()];
        for (k, trial_path) in trial_paths.iter_mut().enumerate() {
            for (s, sub) in subbands.iter_mut().enumerate() {
                let (row, internal, fitted) = sub.tree.top_row(k);
                let offset = fitted.min(longest.saturating_sub(internal));
                sub.max_offset = sub.max_offset.max(offset);
                *trial_path = (*trial_path).max(offset + internal);
                rows.push(row_base[s] + row);
                offsets.push(offset);
            }
        }
        let max_path = trial_paths.iter().copied().max().unwrap_or(0);
        StepKernel {
            tree_ds,
            per_out: downsample / tree_ds,
            subbands,
            rows,
            offsets,
            max_path,
            trial_paths,
        }
    }

    /// Stage-1 rows over all sub-bands.
    pub(crate) fn n_rows(&self) -> usize {
        self.subbands
            .iter()
            .map(|s| s.tree.n_top_rows(s.channels.len()))
            .sum()
    }

    /// Stage-1 additions per tree sample (direct sums and tree merges).
    pub(crate) fn stage1_adds_per_sample(&self) -> usize {
        self.subbands
            .iter()
            .map(|s| s.direct.adds + s.tree.adds_per_sample(s.direct.depth))
            .sum()
    }

    /// Stage-2 additions per output sample: phase sums and per-trial sub-band sums.
    pub(crate) fn stage2_adds_per_sample(&self) -> usize {
        let n_dm = self.rows.len() / self.subbands.len().max(1);
        self.n_rows() * self.per_out * (self.per_out - 1)
            + n_dm * self.subbands.len().saturating_sub(1)
    }

    /// The delay (tree samples) applied to each channel (data order) for trial `k`.
    #[cfg(test)]
    pub(crate) fn path_delays(&self, k: usize, n_chan: usize) -> Vec<usize> {
        let mut delays = vec![0; n_chan];
        for (s, sub) in self.subbands.iter().enumerate() {
            let local = sub.tree.path_delays(k, sub.channels.len());
            let offset = self.offsets[k * self.subbands.len() + s];
            for (&c, d) in sub.channels.iter().zip(local) {
                delays[c] = offset + d;
            }
        }
        delays
    }
}
