//! Triage: does a candidate look like a dispersed astrophysical pulse or like
//! interference? Pure functions of the features measured by the search.
//!
//! - DM-0 test: a dispersed pulse seen at DM 0 is smeared over the band's sweep and
//!   its S/N falls to the Cordes & McLaughlin (2003) ratio for δDM = DM; undispersed
//!   interference stays as bright.
//! - DM-curve test: S/N versus trial DM, normalised to its peak, should follow the
//!   same curve (Cordes & McLaughlin 2003, ApJ 596, 1142):
//!   ζ = 6.91 × 10⁻³ δDM Δν_MHz / (W_ms ν_GHz³), ratio = (√π/2) erf(ζ)/ζ.
//! - Band occupancy and modulation index (Spitler et al. 2012, ApJ 748, 73): signal
//!   confined to a few channels is interference.

use crate::candidate::{TriageFeatures, Verdict};
use crate::search::TriageConfig;

/// Cordes & McLaughlin (2003) smearing parameter ζ for a DM error `delta_dm`
/// (pc cm⁻³), total bandwidth `bandwidth_mhz`, pulse FWHM `width_ms` and centre
/// frequency `freq_ghz`.
pub fn cm03_zeta(delta_dm: f64, bandwidth_mhz: f64, width_ms: f64, freq_ghz: f64) -> f64 {
    6.91e-3 * delta_dm.abs() * bandwidth_mhz / (width_ms * freq_ghz.powi(3))
}

/// Peak S/N ratio (√π/2)·erf(ζ)/ζ of a Gaussian pulse dedispersed with an error that
/// gives smearing parameter ζ (Cordes & McLaughlin 2003); 1 at ζ = 0.
pub fn cm03_peak_ratio(zeta: f64) -> f64 {
    if zeta < 1e-6 {
        return 1.0;
    }
    0.5 * std::f64::consts::PI.sqrt() * statrs::function::erf::erf(zeta) / zeta
}

/// The ζ at which [`cm03_peak_ratio`] falls to one half (bisection; 1.7487).
pub fn cm03_half_zeta() -> f64 {
    let (mut lo, mut hi) = (0.1f64, 10.0f64);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if cm03_peak_ratio(mid) > 0.5 {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// Spectral modulation index σ_ν(I)/⟨I⟩_ν of an on-pulse spectrum, with the noise
/// variance per channel `noise_var` subtracted from the spectral variance (Spitler et
/// al. 2012). 0 when the mean is not positive.
pub fn modulation_index(spectrum: &[f64], noise_var: f64) -> f64 {
    let n = spectrum.len() as f64;
    if spectrum.is_empty() {
        return 0.0;
    }
    let mean = spectrum.iter().sum::<f64>() / n;
    if mean.is_nan() || mean <= 0.0 {
        return 0.0;
    }
    let var = spectrum.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n;
    (var - noise_var).max(0.0).sqrt() / mean
}

/// Fraction of the band carrying the signal, from sub-band S/Ns (each with unit
/// noise): ((Σs)² − n) / (n (Σs² − n)), the square of the equal-weight efficiency
/// η = Σs/√(n Σs²) with the noise bias removed (unit noise adds n to the expectations
/// of both (Σs)² and Σs²). Derived here: a flat signal of S/N A in a fraction f of the
/// n sub-bands has Σs = f n A and Σs² = f n A², so η² = f² n² A² / (n f n A²) = f.
/// Clamped to [0, 1]; 1 when the signal is too weak to tell.
pub fn band_fraction(subband_snr: &[f64]) -> f64 {
    let n = subband_snr.len() as f64;
    let sum: f64 = subband_snr.iter().sum();
    let sum2: f64 = subband_snr.iter().map(|s| s * s).sum();
    let power = sum2 - n;
    if power.is_nan() || power <= 0.0 {
        return 1.0;
    }
    ((sum * sum - n) / (n * power)).clamp(0.0, 1.0)
}

/// What a dispersed pulse with the candidate's S/N, DM, width and band would show.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Expectation {
    /// Best S/N of the candidate.
    pub snr: f64,
    /// Best DM in pc cm⁻³.
    pub dm: f64,
    /// DM-0 S/N ratio expected from smearing alone (Cordes & McLaughlin 2003).
    pub dm0_ratio: f64,
    /// Typical largest noise S/N in the DM-0 search window, or the best DM-0 S/N of
    /// the weaker of the two windows beside it if higher (undispersed interference
    /// all around); a pulse's DM-0 S/N does not fall below it.
    pub dm0_noise_snr: f64,
}

/// The verdict and the reasons for it.
pub fn verdict(
    f: &TriageFeatures,
    e: &Expectation,
    config: &TriageConfig,
) -> (Verdict, Vec<String>) {
    let (snr, dm, expected_dm0_ratio) = (e.snr, e.dm, e.dm0_ratio);
    let mut rfi = Vec::new();
    let misfit_limit = config.max_dm_curve_misfit + 1.0 / snr.max(1.0);
    if f.dm_curve_misfit > misfit_limit {
        rfi.push(format!(
            "S/N-vs-DM curve misfit {:.2} > {:.2}",
            f.dm_curve_misfit, misfit_limit
        ));
    }
    let dm0_limit = expected_dm0_ratio.max(e.dm0_noise_snr / snr.max(1.0)) + config.max_dm0_excess;
    if f.snr_dm0_ratio > dm0_limit {
        rfi.push(format!(
            "as bright at DM 0 (ratio {:.2}) as at DM {:.1} (limit {:.2})",
            f.snr_dm0_ratio, dm, dm0_limit
        ));
    }
    if !rfi.is_empty() {
        return (Verdict::Rfi, rfi);
    }
    if expected_dm0_ratio >= config.ambiguous_dm0_ratio {
        return (
            Verdict::Unsure,
            vec![format!(
                "DM {dm:.1} too low to tell from undispersed signal (expected DM-0 ratio {expected_dm0_ratio:.2})"
            )],
        );
    }
    // A weak undispersed pulse peaks at a small DM > 0 by chance about as often as at
    // 0 (its S/N barely changes while the sweep is shorter than its width): only a
    // DM-0 S/N clearly below the peak shows dispersion.
    let dm0_snr = f.snr_dm0_ratio * snr;
    if snr - dm0_snr < config.min_dm0_snr_gap {
        return (
            Verdict::Unsure,
            vec![format!(
                "S/N {dm0_snr:.1} at DM 0 against {snr:.1} at DM {dm:.1}: not clearly dispersed (a gap of {:.1} is needed)",
                config.min_dm0_snr_gap
            )],
        );
    }
    // A signal that passed the dispersion tests in a small part of the band may be a
    // band-limited burst (repeating sources emit bursts tens of MHz wide) as well as
    // interference: left for a person to judge, not thrown away.
    if f.band_fraction < config.min_band_fraction {
        return (
            Verdict::Unsure,
            vec![format!(
                "dispersed, but in only {:.0} % of the band: a band-limited burst or interference",
                100.0 * f.band_fraction
            )],
        );
    }
    (
        Verdict::Astrophysical,
        vec![format!(
            "dispersed: DM-0 ratio {:.2} (expected {:.2}), DM-curve misfit {:.2}, band fraction {:.2}",
            f.snr_dm0_ratio, expected_dm0_ratio, f.dm_curve_misfit, f.band_fraction
        )],
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    // The curve at Δν = 400 MHz, ν = 1.4 GHz, W = 1 ms: values recomputed from the
    // formula of Cordes & McLaughlin 2003 (ApJ 596, 1142), ζ = 6.91e-3 δDM Δν/(W ν³)
    // and (√π/2) erf(ζ)/ζ, with an independent erf. The ratio halves at ζ = 1.74871,
    // i.e. at δDM = 1.73606 here (the half-power DM error the trial count and the
    // report use, `cm03_half_zeta() / cm03_zeta(1.0, …)`).
    #[test]
    fn cm03_worked_values() {
        for &(ddm, zeta, ratio) in &[
            (0.5, 0.50364, 0.92151),
            (1.0, 1.00729, 0.74406),
            (2.0, 2.01458, 0.43798),
            (10.0, 10.0729, 0.08798),
        ] {
            let z = cm03_zeta(ddm, 400.0, 1.0, 1.4);
            assert!((z - zeta).abs() < 1e-4, "{z}");
            assert_eq!(z, cm03_zeta(-ddm, 400.0, 1.0, 1.4), "symmetric in δDM");
            assert!((cm03_peak_ratio(z) - ratio).abs() < 1e-4);
        }
        assert_eq!(cm03_peak_ratio(0.0), 1.0);
        let half = cm03_half_zeta();
        assert!((half - 1.74871).abs() < 1e-5, "{half}");
        assert!((cm03_peak_ratio(half) - 0.5).abs() < 1e-12);
        let half_dm = half / cm03_zeta(1.0, 400.0, 1.0, 1.4);
        assert!((half_dm - 1.73606).abs() < 1e-5, "{half_dm}");
    }

    // All signal in one of N = 1024 channels: m_I = √(N − 1) = 31.984
    // (Spitler et al. 2012 definition, evaluated exactly).
    #[test]
    fn modulation_index_of_a_single_channel_signal() {
        let mut s = vec![0.0; 1024];
        s[100] = 5.0;
        assert!((modulation_index(&s, 0.0) - 1023f64.sqrt()).abs() < 1e-9);
        assert_eq!(modulation_index(&vec![2.0; 64], 0.0), 0.0);
    }

    #[test]
    fn band_fraction_of_flat_and_confined_signals() {
        assert!((band_fraction(&[1000.0; 16]) - 1.0).abs() < 1e-6);
        let mut one = vec![0.0; 16];
        one[3] = 1000.0;
        assert!((band_fraction(&one) - 1.0 / 16.0).abs() < 1e-9);
        let mut half = vec![0.0; 16];
        half[..8].fill(1000.0);
        assert!((band_fraction(&half) - 0.5).abs() < 1e-5);
        assert_eq!(band_fraction(&[0.1, -0.2, 0.3]), 1.0, "too weak to tell");
    }

    #[test]
    fn verdicts() {
        let cfg = TriageConfig::default();
        let good = TriageFeatures {
            snr_dm0_ratio: 0.1,
            dm_curve_misfit: 0.05,
            band_fraction: 0.9,
            modulation_index: 0.2,
        };
        let e = Expectation {
            snr: 12.0,
            dm: 300.0,
            dm0_ratio: 0.05,
            dm0_noise_snr: 2.5,
        };
        assert_eq!(verdict(&good, &e, &cfg).0, Verdict::Astrophysical);
        let low = Expectation {
            dm: 2.0,
            dm0_ratio: 0.95,
            ..e
        };
        assert_eq!(verdict(&good, &low, &cfg).0, Verdict::Unsure);
        // Dispersed in a small part of the band: a band-limited burst or interference.
        let narrow = TriageFeatures {
            band_fraction: 0.05,
            ..good
        };
        let (v, reasons) = verdict(&narrow, &e, &cfg);
        assert_eq!(v, Verdict::Unsure);
        assert!(reasons[0].contains("5 % of the band"), "{reasons:?}");
        let narrow_flat = TriageFeatures {
            snr_dm0_ratio: 1.0,
            ..narrow
        };
        assert_eq!(verdict(&narrow_flat, &e, &cfg).0, Verdict::Rfi);
        // A weak pulse's DM-0 S/N sits at the noise maximum, not at the smearing ratio.
        let weak = TriageFeatures {
            snr_dm0_ratio: 0.35,
            ..good
        };
        let weak_e = Expectation {
            snr: 8.0,
            dm0_noise_snr: 3.0,
            ..e
        };
        assert_eq!(verdict(&weak, &weak_e, &cfg).0, Verdict::Astrophysical);
        let flat = TriageFeatures {
            snr_dm0_ratio: 1.0,
            ..good
        };
        let (v, reasons) = verdict(&flat, &e, &cfg);
        assert_eq!(v, Verdict::Rfi);
        assert!(reasons[0].contains("DM 0"), "{reasons:?}");
        // Measured on a simulated band-limited pulse at DM 0 (5 ms, 1250–1350 MHz in a
        // 1200–1600 MHz band): best at DM 10.4, 4 ms, S/N 8.36, DM-0 ratio 0.664, an
        // expected ratio of 0.68 there (band fraction 0.37). Within the noise of an
        // undispersed pulse (5.55 against 8.36 at DM 0), so not astrophysical; a
        // stronger pulse with the same ratio is.
        let chance = TriageFeatures {
            snr_dm0_ratio: 0.664,
            band_fraction: 0.37,
            ..good
        };
        let chance_e = Expectation {
            snr: 8.36,
            dm: 10.4,
            dm0_ratio: 0.68,
            dm0_noise_snr: 2.5,
        };
        let (v, reasons) = verdict(&chance, &chance_e, &cfg);
        assert_eq!(v, Verdict::Unsure);
        assert!(reasons[0].contains("not clearly dispersed"), "{reasons:?}");
        let strong_e = Expectation {
            snr: 12.0,
            ..chance_e
        };
        assert_eq!(verdict(&chance, &strong_e, &cfg).0, Verdict::Astrophysical);
    }
}
