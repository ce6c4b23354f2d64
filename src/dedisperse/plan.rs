//! The DM plan: which trial DMs to search and at what time resolution.

use serde::{Deserialize, Serialize};

use super::channel_delays;

/// What the user asks of a DM plan; [`DmPlan`] is what the planner makes of it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlanRequest {
    /// Lowest trial DM in pc cm⁻³.
    pub dm_min: f64,
    /// Highest trial DM in pc cm⁻³.
    pub dm_max: f64,
    /// Narrowest intrinsic pulse width searched, in seconds.
    pub min_width_s: f64,
    /// Allowed smearing growth between neighbouring trials (e.g. 1.25: the effective
    /// width grows by at most 25 % half-way between trials).
    pub tolerance: f64,
    /// Largest time-resolution reduction factor (a power of two).
    pub max_downsample: usize,
}

impl Default for PlanRequest {
    fn default() -> Self {
        PlanRequest {
            dm_min: 0.0,
            dm_max: 1000.0,
            min_width_s: 0.0,
            tolerance: 1.25,
            max_downsample: 64,
        }
    }
}

/// A run of trial DMs searched at one time resolution.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DmStep {
    /// Trial DMs in pc cm⁻³, ascending.
    pub dms: Vec<f64>,
    /// Input samples summed per output sample (a power of two).
    pub downsample: usize,
}

/// Everything a kernel needs to dedisperse a block: band, sample time and trials.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DmPlan {
    /// Channel centre frequencies in MHz, in data order.
    pub freqs_mhz: Vec<f64>,
    /// Channel width in MHz.
    pub chan_bw_mhz: f64,
    /// Input sample time in seconds.
    pub tsamp_s: f64,
    /// Trial groups in ascending DM.
    pub steps: Vec<DmStep>,
}

impl DmPlan {
    /// A plan with evenly spaced DMs `dm_min..=dm_max` (`n` trials) at full resolution.
    pub fn uniform(
        freqs_mhz: Vec<f64>,
        chan_bw_mhz: f64,
        tsamp_s: f64,
        dm_min: f64,
        dm_max: f64,
        n: usize,
    ) -> Self {
        let dms = (0..n)
            .map(|i| {
                if n == 1 {
                    dm_min
                } else {
                    dm_min + (dm_max - dm_min) * i as f64 / (n - 1) as f64
                }
            })
            .collect();
        DmPlan {
            freqs_mhz,
            chan_bw_mhz,
            tsamp_s,
            steps: vec![DmStep { dms, downsample: 1 }],
        }
    }

    /// Total number of trial DMs.
    pub fn n_trials(&self) -> usize {
        self.steps.iter().map(|s| s.dms.len()).sum()
    }

    /// Largest trial DM in pc cm⁻³ (0 for an empty plan).
    pub fn max_dm(&self) -> f64 {
        self.steps
            .iter()
            .flat_map(|s| s.dms.iter().copied())
            .fold(0.0, f64::max)
    }

    /// Largest channel delay in input samples over all trials: the rows a block must
    /// carry beyond its last valid output sample.
    pub fn max_delay_samples(&self) -> usize {
        channel_delays(&self.freqs_mhz, self.max_dm(), self.tsamp_s)
            .into_iter()
            .max()
            .unwrap_or(0)
    }
}
