//! Cost model of a plan: additions per second of data for each kernel, and memory.

use serde::Serialize;

use super::DmPlan;
use super::fast::{chunk_len, tree_downsample};
use super::tree::StepTree;

/// What executing a [`DmPlan`] costs, per second of data.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanCost {
    /// Additions per second of data by the reference kernel: every trial sums
    /// `n_chan` samples per input sample.
    pub reference_adds_per_s: f64,
    /// Additions per second of data by the fast kernel: one per merged tree row per
    /// tree sample, plus the chunk overlap, downsampling and the final pair sums.
    pub fast_adds_per_s: f64,
    /// Scratch memory of the fast kernel (channel chunk and two level buffers), bytes.
    pub fast_scratch_bytes: f64,
    /// Dedispersed output, bytes per second of data (f32, all steps).
    pub output_bytes_per_s: f64,
    /// Input samples a block must carry beyond its last valid output sample.
    pub overlap_samples: usize,
}

impl DmPlan {
    /// Estimates the work and memory of dedispersing with this plan.
    pub fn cost(&self) -> PlanCost {
        let n_chan = self.freqs_mhz.len() as f64;
        let per_s = 1.0 / self.tsamp_s;
        let mut fast = 0.0;
        let mut scratch: f64 = 0.0;
        let mut output = 0.0;
        for step in &self.steps {
            let tree_ds = tree_downsample(step.downsample);
            let longest = self.max_delay_samples() / tree_ds;
            let tree = StepTree::new(&self.freqs_mhz, &step.dms, self.tsamp_s, tree_ds, longest);
            let ds = tree_ds as f64;
            let chunk = chunk_len(tree.max_path) as f64;
            let overlap = 1.0 + tree.max_path as f64 / chunk;
            fast += tree.adds_per_sample() as f64 * overlap * per_s / ds;
            fast += n_chan * (ds - 1.0) / ds * overlap * per_s;
            let rows = tree.max_rows(self.freqs_mhz.len()) as f64;
            scratch = scratch.max((n_chan + 2.0 * rows) * (chunk + tree.max_path as f64) * 4.0);
            let out_per_s = step.dms.len() as f64 * per_s / step.downsample as f64;
            fast += out_per_s * (step.downsample / tree_ds - 1) as f64;
            output += out_per_s * 4.0;
        }
        PlanCost {
            reference_adds_per_s: self.n_trials() as f64 * n_chan * per_s,
            fast_adds_per_s: fast,
            fast_scratch_bytes: scratch,
            output_bytes_per_s: output,
            overlap_samples: self.max_delay_samples(),
        }
    }
}
