//! Dedispersion: the DM plan (plain data) and the kernels that execute it.
//!
//! Conventions shared by every kernel:
//! - input is `[channel, time]`, channels in header (data) order, already normalised
//!   and with masked channels set to zero;
//! - delays are measured from the highest-frequency channel, in input samples,
//!   rounded to the nearest sample;
//! - for each [`DmStep`] the output row `d` at time `t` is the sum over channels of the
//!   input at `t * downsample + delay_c(dm_d)` after summing `downsample` adjacent
//!   samples, i.e. time is the arrival at the top channel, in downsampled samples
//!   from the block start;
//! - a trial yields the output samples whose sweep lies inside the input: with
//!   [`Extent::Common`] (a block that another follows) every trial the
//!   `(n_time - plan.max_delay_samples()) / downsample` that the plan's highest DM
//!   allows; with [`Extent::PerTrial`] each trial as many as its own delays allow, so
//!   that low DMs reach the end of a file's last block. [`Dedispersed::row`] is a
//!   trial's valid samples; rows are stored `n_time` apart.
//!
//! Kernels: [`reference`](mod@reference) (per-channel shifts, the plain check) and
//! [`FastDedisperser`]: merge trees inside 64-channel sub-bands (after the FDMT,
//! Zackay & Ofek 2017, ApJ 835, 11; in 16-bit fixed point, one quantum per time
//! tile), then per-trial sums of one row per sub-band.
//! Its delays are rounded along the trees — at half the output sample for
//! downsampled steps — so per-channel delays differ from the exact ones by about 0.42
//! tree samples rms (at most 2) instead of the reference's 0.29 (at most 0.5); every
//! output sample still sums exactly `downsample` input samples per channel, so its
//! noise equals the reference's. See `docs/dedisperse.md`.

pub mod bf16;
mod cost;
mod direct;
mod fast;
mod fixed;
mod plan;
pub mod reference;
mod subband;
mod summary;
mod tree;

pub use cost::PlanCost;
pub use fast::FastDedisperser;
pub use plan::{DmPlan, DmStep, PlanRequest, boxcar_strides};
pub use summary::{PlanReport, StepSummary, channel_centres_mhz};

use ndarray::ArrayView2;

use bf16::Bf16;

/// How far each trial's output runs (see the conventions above).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Extent {
    /// Every trial up to the last sample the plan's highest DM can reach.
    Common,
    /// Each trial up to the last sample its own delays reach.
    PerTrial,
}

/// Which dedispersion kernel to run.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Kernel {
    /// Per-channel integer shifts and sums ([`reference::dedisperse`]).
    Reference,
    /// The tree kernel ([`FastDedisperser`]).
    #[default]
    Fast,
}

/// Dedisperses `input` (`[channel, time]`) for every step of `plan` with `kernel`.
/// To run many blocks, keep a [`FastDedisperser`] instead: it reuses its trees and
/// scratch buffers.
///
/// # Panics
/// If `input` has a different channel count from the plan (a caller bug).
pub fn dedisperse(input: ArrayView2<'_, f32>, plan: &DmPlan, kernel: Kernel) -> Vec<Dedispersed> {
    match kernel {
        Kernel::Reference => reference::dedisperse(input, plan),
        Kernel::Fast => FastDedisperser::new(plan).dedisperse(input),
    }
}

/// Output of one [`DmStep`]: one dedispersed time series per trial DM.
#[derive(Debug, Clone, PartialEq)]
pub struct Dedispersed {
    /// Trial DMs in pc cm⁻³, one per row.
    pub dms: Vec<f64>,
    /// Input samples summed into each output sample.
    pub downsample: usize,
    /// Samples stored per row: the longest row.
    pub n_time: usize,
    /// Valid samples of each row (≤ `n_time`; all equal with [`Extent::Common`]).
    pub row_lens: Vec<usize>,
    /// Series, `[dm, time]` row-major, as bfloat16 ([`bf16`]); past a row's length,
    /// values mean nothing.
    pub data: Vec<Bf16>,
}

impl Dedispersed {
    /// Row `d`: the valid samples of the series at `dms[d]`, as stored.
    pub fn row(&self, d: usize) -> &[Bf16] {
        &self.data[d * self.n_time..][..self.row_lens[d]]
    }

    /// Row `d` as f32.
    pub fn row_f32(&self, d: usize) -> Vec<f32> {
        let mut out = Vec::new();
        bf16::decode_into(self.row(d), &mut out);
        out
    }
}

/// Delay in input samples (nearest integer) of each channel, relative to the highest
/// frequency in `freqs_mhz`, for `dm` in pc cm⁻³ and sample time `tsamp_s`.
pub fn channel_delays(freqs_mhz: &[f64], dm: f64, tsamp_s: f64) -> Vec<usize> {
    let f_hi = freqs_mhz.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    freqs_mhz
        .iter()
        .map(|&f| (crate::units::delay_between_s(dm, f, f_hi) / tsamp_s).round() as usize)
        .collect()
}
