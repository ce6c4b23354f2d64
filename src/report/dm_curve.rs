//! S/N against trial DM: measured on a re-read stretch, and the curve expected for a
//! real dispersed pulse (Cordes & McLaughlin 2003, ApJ 596, 1142, eq. 12–13).

use super::stretch::{Normalised, robust_location_scale};
use crate::dedisperse::{DmPlan, reference};
use crate::triage::{cm03_half_zeta, cm03_peak_ratio, cm03_zeta};

/// Measured S/N at each trial DM.
#[derive(Debug, Clone, PartialEq)]
pub struct DmCurve {
    /// Trial DMs in pc cm⁻³, ascending.
    pub dms: Vec<f64>,
    /// Best boxcar S/N near the event at each trial.
    pub snr: Vec<f64>,
}

/// Peak-S/N ratio of a Gaussian pulse of FWHM `width_ms` dedispersed with a DM error
/// `delta_dm` (pc cm⁻³) over `bw_mhz` centred on `freq_ghz`: the Cordes & McLaughlin
/// (2003, ApJ 596, 1142) curve of [`crate::triage::cm03_peak_ratio`].
pub fn expected_ratio(delta_dm: f64, bw_mhz: f64, freq_ghz: f64, width_ms: f64) -> f64 {
    cm03_peak_ratio(cm03_zeta(delta_dm, bw_mhz, width_ms, freq_ghz))
}

/// DM error (pc cm⁻³) that halves the expected peak: ζ is linear in δDM, so it is
/// [`cm03_half_zeta`] over ζ at δDM = 1.
pub fn half_power_delta_dm(bw_mhz: f64, freq_ghz: f64, width_ms: f64) -> f64 {
    cm03_half_zeta() / cm03_zeta(1.0, bw_mhz, width_ms, freq_ghz)
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
            snr.push(best_boxcar_snr(
                &step.row_f32(d),
                width,
                expected_start,
                search,
            ));
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

    // The report's argument order (frequency before width) reaches the triage curve
    // unswapped: at 1.4 GHz and 3 ms, δDM = 5 gives ζ = 1.68 and a ratio of 0.52; a
    // swap would compute ζ for 3 GHz and 1.4 ms, 4.6 times smaller, and a ratio of
    // 0.96. The half-power DM error halves the peak.
    #[test]
    fn expected_ratio_is_the_triage_curve_in_report_order() {
        let (bw, freq_ghz, width_ms) = (400.0, 1.4, 3.0);
        for ddm in [-7.0, 0.0, 0.5, 5.0, 40.0] {
            let want = cm03_peak_ratio(cm03_zeta(ddm, bw, width_ms, freq_ghz));
            assert_eq!(
                expected_ratio(ddm, bw, freq_ghz, width_ms),
                want,
                "δDM {ddm}"
            );
        }
        let half = half_power_delta_dm(bw, freq_ghz, width_ms);
        assert!((expected_ratio(half, bw, freq_ghz, width_ms) - 0.5).abs() < 1e-12);
        assert!((expected_ratio(-half, bw, freq_ghz, width_ms) - 0.5).abs() < 1e-12);
        assert!(expected_ratio(5.0, bw, freq_ghz, width_ms) < 0.9);
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
