//! S/N against trial DM: measured on a re-read stretch, and the curve expected for a
//! real dispersed pulse (Cordes & McLaughlin 2003, ApJ 596, 1142, eq. 12–13).

use statrs::function::erf::erf;

use super::stretch::{Normalised, robust_location_scale};
use crate::dedisperse::{DmPlan, reference};

/// ζ at which the Cordes & McLaughlin peak ratio falls to one half (solved numerically
/// from (√π/2)·erf(ζ)/ζ = 0.5).
const ZETA_HALF: f64 = 1.7487;

/// Measured S/N at each trial DM.
#[derive(Debug, Clone, PartialEq)]
pub struct DmCurve {
    /// Trial DMs in pc cm⁻³, ascending.
    pub dms: Vec<f64>,
    /// Best boxcar S/N near the event at each trial.
    pub snr: Vec<f64>,
}

/// Peak-S/N ratio of a Gaussian pulse of FWHM `width_ms` dedispersed with a DM error
/// `delta_dm` (pc cm⁻³) over `bw_mhz` centred on `freq_ghz`:
/// ζ = 6.91×10⁻³ δDM Δν_MHz / (W_ms ν_GHz³), ratio = (√π/2) erf(ζ)/ζ
/// (Cordes & McLaughlin 2003, ApJ 596, 1142).
pub fn expected_ratio(delta_dm: f64, bw_mhz: f64, freq_ghz: f64, width_ms: f64) -> f64 {
    let zeta = 6.91e-3 * delta_dm.abs() * bw_mhz / (width_ms * freq_ghz.powi(3));
    if zeta < 1e-9 {
        1.0
    } else {
        std::f64::consts::PI.sqrt() / 2.0 * erf(zeta) / zeta
    }
}

/// DM error (pc cm⁻³) that halves the expected peak (same formula, ζ = 1.7487).
pub fn half_power_delta_dm(bw_mhz: f64, freq_ghz: f64, width_ms: f64) -> f64 {
    ZETA_HALF * width_ms * freq_ghz.powi(3) / (6.91e-3 * bw_mhz)
}

/// DM range for the curve: `dm ± 4` half-power widths,
/// widened to cover the cluster's `dm_lo..dm_hi`, never below zero.
pub fn trial_range(dm: f64, dm_lo: f64, dm_hi: f64, half_width: f64) -> (f64, f64) {
    let span = (4.0 * half_width).max(dm - dm_lo).max(dm_hi - dm).max(0.5);
    ((dm - span).max(0.0), dm + span)
}

/// S/N against DM of a boxcar `width` samples long whose start lies within
/// `search` samples of `expected_start` (counted from the stretch's first row, arrival
/// at the top channel). Each dedispersed series is put on its own robust scale.
///
/// # Panics
/// If the stretch is shorter than the largest delay (a caller bug).
pub fn measure(
    input: &Normalised,
    plan: &DmPlan,
    width: usize,
    expected_start: usize,
    search: usize,
) -> DmCurve {
    let out = reference::dedisperse(input.data.view(), plan);
    let mut dms = Vec::new();
    let mut snr = Vec::new();
    for step in &out {
        for (d, &dm) in step.dms.iter().enumerate() {
            dms.push(dm);
            snr.push(best_boxcar_snr(step.row(d), width, expected_start, search));
        }
    }
    DmCurve { dms, snr }
}

/// Largest (Σ x − w μ)/(σ √w) over boxcar starts `centre ± search`, μ and σ robust.
fn best_boxcar_snr(series: &[f32], width: usize, centre: usize, search: usize) -> f64 {
    let Some((mu, sigma)) = robust_location_scale(series) else {
        return 0.0;
    };
    let lo = centre.saturating_sub(search);
    let hi = (centre + search).min(series.len().saturating_sub(width));
    (lo..=hi)
        .map(|t| {
            let s: f64 = series[t..t + width].iter().map(|&x| x as f64).sum();
            (s - width as f64 * mu) / (sigma * (width as f64).sqrt())
        })
        .fold(f64::NEG_INFINITY, f64::max)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::report::stretch::normalise;
    use crate::report::waterfall::tests::{Pulse, band, noisy_burst};

    // Check values derived from the Cordes & McLaughlin (2003, ApJ 596, 1142) formula for
    // Δν = 400 MHz, ν = 1.4 GHz, W = 1 ms (ζ = 0.50364 at δDM = 0.5).
    #[test]
    fn expected_ratio_matches_cordes_mclaughlin() {
        for (ddm, want) in [
            (0.5, 0.92151),
            (1.0, 0.74406),
            (2.0, 0.43798),
            (10.0, 0.08798),
        ] {
            let got = expected_ratio(ddm, 400.0, 1.4, 1.0);
            assert!((got - want).abs() < 1e-4, "δDM {ddm}: {got} vs {want}");
            assert_eq!(got, expected_ratio(-ddm, 400.0, 1.4, 1.0), "symmetric");
        }
        assert_eq!(expected_ratio(0.0, 400.0, 1.4, 1.0), 1.0);
        let half = half_power_delta_dm(400.0, 1.4, 1.0);
        assert!((half - 1.736).abs() < 1e-3, "{half}");
        assert!((expected_ratio(half, 400.0, 1.4, 1.0) - 0.5).abs() < 1e-4);
    }

    #[test]
    fn trial_range_covers_the_cluster_and_stays_non_negative() {
        assert_eq!(trial_range(100.0, 99.0, 101.0, 1.0), (96.0, 104.0));
        assert_eq!(trial_range(100.0, 80.0, 101.0, 1.0), (80.0, 120.0));
        assert_eq!(trial_range(2.0, 2.0, 2.0, 1.0), (0.0, 6.0));
    }

    #[test]
    fn measured_curve_peaks_at_the_true_dm() {
        let (tsamp, dm) = (1e-3, 200.0);
        let freqs = band(32);
        let block = noisy_burst(
            &freqs,
            tsamp,
            1400,
            Pulse {
                t_top: 500,
                dm,
                width: 3,
                amp: 2.0,
            },
            3,
        );
        let input = normalise(&block, &[1.0; 32]);
        let plan = DmPlan::uniform(freqs, 12.5, tsamp, 180.0, 220.0, 41);
        let curve = measure(&input, &plan, 3, 500, 6);
        assert_eq!(curve.dms.len(), 41);
        let best = (0..41)
            .max_by(|&a, &b| curve.snr[a].total_cmp(&curve.snr[b]))
            .unwrap();
        assert!((curve.dms[best] - dm).abs() <= 1.0, "{}", curve.dms[best]);
        // 32 channels × 3 samples × 2σ / √96 ≈ 19.6σ.
        assert!(curve.snr[best] > 15.0, "{}", curve.snr[best]);
        assert!(curve.snr[0] < 0.5 * curve.snr[best], "{}", curve.snr[0]);
    }
}
