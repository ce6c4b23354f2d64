//! Human- and machine-readable summaries of a [`DmPlan`].

use serde::Serialize;

use super::{DmPlan, PlanCost};

/// One step of a plan in brief.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StepSummary {
    /// First and last trial DM, pc cm⁻³.
    pub dm_first: f64,
    pub dm_last: f64,
    /// Number of trials.
    pub n_trials: usize,
    /// Input samples per output sample.
    pub downsample: usize,
    /// Output time resolution, seconds.
    pub resolution_s: f64,
    /// Spacing of the first and last pair of trials, pc cm⁻³ (0 for a single trial).
    pub dm_step_first: f64,
    pub dm_step_last: f64,
}

/// A plan with its step summaries and cost, as printed by `burstbook plan --json`.
#[derive(Debug, Clone, Serialize)]
pub struct PlanReport {
    pub n_trials: usize,
    pub steps: Vec<StepSummary>,
    pub cost: PlanCost,
    pub plan: DmPlan,
}

impl DmPlan {
    /// One summary per step.
    pub fn summaries(&self) -> Vec<StepSummary> {
        self.steps
            .iter()
            .map(|s| {
                let gap = |a: Option<&f64>, b: Option<&f64>| match (a, b) {
                    (Some(a), Some(b)) => b - a,
                    _ => 0.0,
                };
                let n = s.dms.len();
                StepSummary {
                    dm_first: s.dms.first().copied().unwrap_or(0.0),
                    dm_last: s.dms.last().copied().unwrap_or(0.0),
                    n_trials: n,
                    downsample: s.downsample,
                    resolution_s: s.downsample as f64 * self.tsamp_s,
                    dm_step_first: gap(s.dms.first(), s.dms.get(1)),
                    dm_step_last: gap(s.dms.get(n.wrapping_sub(2)), s.dms.last()),
                }
            })
            .collect()
    }

    /// Summaries, cost and the plan itself.
    pub fn report(&self) -> PlanReport {
        PlanReport {
            n_trials: self.n_trials(),
            steps: self.summaries(),
            cost: self.cost(),
            plan: self.clone(),
        }
    }
}

/// Centres in MHz of `n_chan` equal channels filling `freq_lo_mhz..freq_hi_mhz`
/// (band edges), highest first (the usual recording order), and the channel width.
pub fn channel_centres_mhz(freq_lo_mhz: f64, freq_hi_mhz: f64, n_chan: usize) -> (Vec<f64>, f64) {
    let bw = (freq_hi_mhz - freq_lo_mhz) / n_chan as f64;
    let centres = (0..n_chan)
        .map(|i| freq_hi_mhz - bw * (i as f64 + 0.5))
        .collect();
    (centres, bw)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dedisperse::PlanRequest;

    #[test]
    fn summaries_describe_each_step() {
        let (freqs, bw) = channel_centres_mhz(1200.0, 1600.0, 1024);
        assert!((freqs[0] - 1599.8046875).abs() < 1e-9 && (bw - 0.390625).abs() < 1e-12);
        let req = PlanRequest {
            dm_max: 300.0,
            ..PlanRequest::default()
        };
        let plan = DmPlan::build(&freqs, bw, 64e-6, &req).unwrap();
        let steps = plan.summaries();
        assert_eq!(steps.len(), plan.steps.len());
        assert_eq!(
            steps.iter().map(|s| s.n_trials).sum::<usize>(),
            plan.n_trials()
        );
        assert_eq!(steps[0].dm_first, 0.0);
        assert_eq!(steps.last().unwrap().dm_last, 300.0);
        assert!((steps[1].resolution_s - 128e-6).abs() < 1e-12);
        assert!(steps[0].dm_step_first > 0.038 && steps[0].dm_step_first < 0.0381);
    }
}
