//! False-alarm accounting: how many noise events a search should expect above its
//! threshold if the dedispersed noise were Gaussian.
//!
//! In time, a boxcar of width w makes consecutive S/N values correlated with
//! ρ = 1 − 1/w, so noise peaks above s appear at the discrete up-crossing rate
//! P(X < s ≤ Y) = Q(s) − P(X ≥ s, Y ≥ s) per sample (Rice 1945, Bell Syst. Tech. J. 24,
//! 46, in discrete form; Q(s) = ½ erfc(s/√2)). For w = 1 this is Q(s)(1 − Q(s)).
//! Across DM, trials closer than the half-S/N DM width of a pulse of width w
//! (Cordes & McLaughlin 2003, ApJ 596, 1142) see the same noise, so each plan step
//! contributes span/δDM₅₀ + 1 independent DMs, capped at its number of trials. The sum
//! over widths and steps of (starts × independent DMs × up-crossing rate) is the
//! expected number of false alarms; divided by Q(s) it is the number of effective
//! trials. Detections of one noise peak at several widths merge in clustering, while
//! partly correlated DMs add peaks, so this is an estimate: on Gaussian noise
//! (tests/search_pipeline.rs) the measured count is within a factor of two of it.

use serde::{Deserialize, Serialize};

use crate::dedisperse::DmPlan;
use crate::triage::{cm03_half_zeta, cm03_zeta};

/// One (plan step, boxcar width) term of the trial count.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TrialTerm {
    /// Boxcar width in the step's (downsampled) samples.
    pub width: usize,
    /// Boxcar starts searched per trial DM.
    pub starts: f64,
    /// Trial DMs of the step at which this width was tested.
    pub dm_trials: usize,
    /// Effectively independent DMs at this width.
    pub independent_dms: f64,
}

/// Trials and expected false alarms of one file's search.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TrialCount {
    /// Trial DMs in the plan.
    pub dm_trials: usize,
    /// The detection threshold the counts refer to.
    pub threshold: f64,
    /// Every (DM, width, start) tested.
    pub raw_trials: f64,
    /// Expected false alarms divided by Q(threshold).
    pub effective_trials: f64,
    /// Expected noise events above the threshold for Gaussian noise.
    pub expected_false_alarms: f64,
    /// The terms the totals are made of.
    pub terms: Vec<TrialTerm>,
}

impl TrialCount {
    /// Expected false alarms above another threshold `s` for the same search.
    pub fn expected_at(&self, s: f64) -> f64 {
        self.terms
            .iter()
            .map(|t| t.starts * t.independent_dms * upcrossing_rate(s, t.width))
            .sum()
    }
}

/// One-sided Gaussian tail probability Q(s).
pub fn gaussian_tail(s: f64) -> f64 {
    0.5 * statrs::function::erf::erfc(s / std::f64::consts::SQRT_2)
}

/// P(X ≥ s, Y ≥ s) for unit normals with correlation `rho` in [0, 1): Simpson
/// quadrature of φ(x)·Q((s − ρx)/√(1 − ρ²)) over x ∈ [s, s + 12].
pub fn joint_tail(s: f64, rho: f64) -> f64 {
    let root = (1.0 - rho * rho).sqrt();
    let f = |x: f64| {
        (-0.5 * x * x).exp() / (2.0 * std::f64::consts::PI).sqrt()
            * gaussian_tail((s - rho * x) / root)
    };
    let n = 1200;
    let h = 12.0 / n as f64;
    let inner: f64 = (1..n)
        .map(|i| f(s + i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 })
        .sum();
    (f(s) + inner + f(s + 12.0)) * h / 3.0
}

/// Rate per start of noise peaks crossing up through `s` for a boxcar of width `w`
/// samples over white noise (lag-one correlation 1 − 1/w).
pub fn upcrossing_rate(s: f64, w: usize) -> f64 {
    let rho = 1.0 - 1.0 / w.max(1) as f64;
    gaussian_tail(s) - joint_tail(s, rho)
}

/// Counts trials of a plan whose step `i` searched `step_samples[i]` input samples
/// per trial (missing: none) with the boxcar widths `widths[i]` (in that step's
/// downsampled samples), each at every `strides[i][j]`-th trial.
pub fn count(
    plan: &DmPlan,
    widths: &[Vec<usize>],
    strides: &[Vec<usize>],
    step_samples: &[f64],
    bandwidth_mhz: f64,
    centre_mhz: f64,
    threshold: f64,
) -> TrialCount {
    let half = cm03_half_zeta();
    let mut terms = Vec::new();
    for (i, ((step, step_widths), step_strides)) in
        plan.steps.iter().zip(widths).zip(strides).enumerate()
    {
        let n_samples = step_samples.get(i).copied().unwrap_or(0.0);
        let span = step.dms.last().unwrap_or(&0.0) - step.dms.first().unwrap_or(&0.0);
        for (&w, &stride) in step_widths.iter().zip(step_strides) {
            let dm_trials = step.dms.len().div_ceil(stride.max(1));
            let width_ms = (w * step.downsample) as f64 * plan.tsamp_s * 1e3;
            // δDM at which ζ reaches its half-S/N value (ζ is linear in δDM).
            let dm_half = half / cm03_zeta(1.0, bandwidth_mhz, width_ms, centre_mhz / 1e3);
            terms.push(TrialTerm {
                width: w,
                starts: n_samples / step.downsample as f64,
                dm_trials,
                independent_dms: (span / dm_half + 1.0).min(dm_trials as f64),
            });
        }
    }
    let mut t = TrialCount {
        dm_trials: plan.n_trials(),
        threshold,
        raw_trials: terms.iter().map(|t| t.starts * t.dm_trials as f64).sum(),
        effective_trials: 0.0,
        expected_false_alarms: 0.0,
        terms,
    };
    t.expected_false_alarms = t.expected_at(threshold);
    // Q(s) underflows f64 near 38σ (0/0 made the count NaN for --snr 40); the ratio
    // barely changes with s that far out, so it is taken at 30σ there.
    let s = threshold.min(EFFECTIVE_TRIALS_MAX_SNR);
    t.effective_trials = t.expected_at(s) / gaussian_tail(s);
    t
}

/// Highest threshold at which the effective trials are evaluated.
const EFFECTIVE_TRIALS_MAX_SNR: f64 = 30.0;

#[cfg(test)]
mod tests {
    use super::*;

    // Q(s) = ½ erfc(s/√2); Q(6) = 9.8659e-10, Q(7) = 1.2798e-12, Q(8) = 6.2210e-16
    // (standard normal tail, scipy.stats.norm.sf).
    #[test]
    fn gaussian_tail_values() {
        for &(s, q) in &[(6.0, 9.8659e-10), (7.0, 1.2798e-12), (8.0, 6.2210e-16)] {
            assert!((gaussian_tail(s) / q - 1.0).abs() < 1e-4, "{s}");
        }
    }

    // Up-crossing probabilities from scipy's bivariate normal CDF
    // (tests/fixtures/trials/upcrossing.py, scipy 1.17.1).
    #[test]
    fn upcrossing_matches_scipy() {
        for &(s, w, expected) in &[
            (5.0, 1, 2.866515e-07),
            (5.0, 4, 2.721863e-07),
            (4.5, 16, 2.043863e-06),
            (7.0, 2, 1.279813e-12),
        ] {
            let got = upcrossing_rate(s, w);
            assert!((got / expected - 1.0).abs() < 1e-4, "s={s} w={w}: {got}");
        }
    }

    #[test]
    fn one_dm_counts_every_start() {
        let plan = DmPlan::uniform(vec![1400.0], 1.0, 1e-3, 0.0, 0.0, 1);
        let t = count(
            &plan,
            &[vec![1, 4]],
            &[vec![1, 1]],
            &[1000.0],
            400.0,
            1400.0,
            5.0,
        );
        assert_eq!(t.raw_trials, 2000.0);
        let expected = 1000.0 * (upcrossing_rate(5.0, 1) + upcrossing_rate(5.0, 4));
        assert!((t.expected_false_alarms - expected).abs() < 1e-15);
        assert!((t.expected_at(5.0) - t.expected_false_alarms).abs() < 1e-18);
        // With no correlation (w = 1) the effective trials are the starts times
        // 1 − Q(s), whatever the threshold; they were NaN above ~38σ.
        for s in [5.0, 30.0, 40.0, 1e3] {
            let t = count(&plan, &[vec![1]], &[vec![1]], &[1000.0], 400.0, 1400.0, s);
            assert!(
                (t.effective_trials / 1000.0 - 1.0).abs() < 1e-6,
                "{s}: {t:?}"
            );
            assert!(t.expected_false_alarms.is_finite() && t.expected_false_alarms >= 0.0);
        }
    }
}
