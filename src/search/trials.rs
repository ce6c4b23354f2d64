//! False-alarm accounting: how many effectively independent trials a search made and
//! how many noise events it should therefore expect above its threshold.
//!
//! For Gaussian noise the expected number of false alarms is N_eff · Q(s), with
//! Q(s) = ½ erfc(s/√2) the one-sided tail. Neighbouring DMs and widths are strongly
//! correlated, so N_eff counts, for every boxcar width W of every plan step,
//! N_t / W independent starts times the number of independent DMs in the step: its
//! DM span divided by the half-S/N DM width of a pulse of width W (Cordes &
//! McLaughlin 2003), capped at the number of trials. This is an order-of-magnitude
//! estimate (detection notes §8), to be checked against measured rates.

use serde::{Deserialize, Serialize};

use crate::dedisperse::DmPlan;
use crate::triage::{cm03_half_zeta, cm03_zeta};

/// Trials and expected false alarms of one file's search.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TrialCount {
    /// Trial DMs in the plan.
    pub dm_trials: usize,
    /// Every (DM, width, start) tested.
    pub raw_trials: f64,
    /// Effectively independent trials.
    pub effective_trials: f64,
    /// N_eff · Q(threshold).
    pub expected_false_alarms: f64,
}

/// One-sided Gaussian tail probability Q(s).
pub fn gaussian_tail(s: f64) -> f64 {
    0.5 * statrs::function::erf::erfc(s / std::f64::consts::SQRT_2)
}

/// Counts trials for `n_samples` searched input samples of a plan whose step `i`
/// searched the boxcar widths `widths[i]` (in that step's downsampled samples).
pub fn count(
    plan: &DmPlan,
    widths: &[Vec<usize>],
    n_samples: u64,
    bandwidth_mhz: f64,
    centre_mhz: f64,
    threshold: f64,
) -> TrialCount {
    let half = cm03_half_zeta();
    let (mut raw, mut eff) = (0.0, 0.0);
    for (step, step_widths) in plan.steps.iter().zip(widths) {
        let n_dm = step.dms.len() as f64;
        let span = step.dms.last().unwrap_or(&0.0) - step.dms.first().unwrap_or(&0.0);
        for &w in step_widths {
            let w_in = (w * step.downsample) as f64;
            let starts = n_samples as f64 / step.downsample as f64;
            raw += n_dm * starts;
            let width_ms = w_in * plan.tsamp_s * 1e3;
            // δDM at which ζ reaches its half-S/N value (ζ is linear in δDM).
            let dm_half = half / cm03_zeta(1.0, bandwidth_mhz, width_ms, centre_mhz / 1e3);
            let indep_dms = (span / dm_half + 1.0).min(n_dm);
            eff += n_samples as f64 / w_in * indep_dms;
        }
    }
    TrialCount {
        dm_trials: plan.n_trials(),
        raw_trials: raw,
        effective_trials: eff,
        expected_false_alarms: eff * gaussian_tail(threshold),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Q(s) = ½ erfc(s/√2); Q(6) = 9.8659e-10, Q(7) = 1.2798e-12, Q(8) = 6.2210e-16
    // (standard normal tail, values recomputed with scipy.stats.norm.sf).
    #[test]
    fn gaussian_tail_values() {
        for &(s, q) in &[(6.0, 9.8659e-10), (7.0, 1.2798e-12), (8.0, 6.2210e-16)] {
            assert!((gaussian_tail(s) / q - 1.0).abs() < 1e-4, "{s}");
        }
    }

    #[test]
    fn one_dm_one_width_counts_every_sample() {
        let plan = DmPlan::uniform(vec![1400.0], 1.0, 1e-3, 0.0, 0.0, 1);
        let t = count(&plan, &[vec![1, 4]], 1000, 400.0, 1400.0, 7.0);
        assert_eq!(t.raw_trials, 2000.0);
        assert!((t.effective_trials - 1250.0).abs() < 1e-9);
    }
}
