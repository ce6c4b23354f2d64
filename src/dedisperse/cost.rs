//! Cost model of a plan: additions per second of data for each kernel, and memory.

use serde::Serialize;

use super::DmPlan;
use super::bf16::Bf16;
use super::fast::{chunk_len, stage1_len};
use super::subband::StepKernel;

/// What executing a [`DmPlan`] costs, per second of data.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct PlanCost {
    /// Additions per second of data by the reference kernel: every trial sums
    /// `n_chan` samples per input sample.
    pub reference_adds_per_s: f64,
    /// Additions per second of data by the fast kernel: sub-band tree merges (with
    /// the chunk overlap), phase sums and per-trial sub-band sums, and downsampling.
    pub fast_adds_per_s: f64,
    /// Scratch memory of the fast kernel (the stage-1 rows of one chunk, the
    /// kernel's own buffer size), bytes.
    pub fast_scratch_bytes: f64,
    /// Dedispersed output, bytes per second of data (bfloat16, as the kernels store
    /// it; all steps).
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
        let max_delay = self.max_delay_samples();
        for step in &self.steps {
            let kernel = StepKernel::new(
                &self.freqs_mhz,
                &step.dms,
                self.tsamp_s,
                step.downsample,
                max_delay,
            );
            let tree_ds = kernel.tree_ds as f64;
            let chunk = chunk_len(kernel.max_path) as f64;
            let overlap = 1.0 + kernel.max_path as f64 / chunk;
            let ds = step.downsample as f64;
            fast += kernel.stage1_adds_per_sample() as f64 * overlap * per_s / tree_ds;
            fast += kernel.stage2_adds_per_sample() as f64 * per_s / ds;
            fast += n_chan * (tree_ds - 1.0) / tree_ds * per_s;
            scratch = scratch.max((stage1_len(&kernel) * size_of::<Bf16>()) as f64);
            output += step.dms.len() as f64 * per_s / ds * size_of::<Bf16>() as f64;
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
