//! The expected S/N of a burst, and conversions between amplitude, S/N and fluence.
//!
//! **Definition.** Work in units of each channel's per-sample noise σ_c (the search
//! normalises every channel to unit variance, so a signal s_c counts as s_c/σ_c). Take
//! the noise-free burst signal of each unmasked channel (weight ≠ 0), integrated over
//! every sample and over the sub-frequencies of the channel exactly as written into the
//! data, and remove each channel's dispersion delay at its centre frequency exactly
//! (no rounding to whole samples; the sweep *inside* a channel stays). Sum the N
//! unmasked channels with equal weights into S(i). Then
//!
//! expected S/N = max over boxcar widths w ≥ 1 and starts j of Σ_{i=j}^{j+w−1} S(i) / √(N·w).
//!
//! It is the S/N an ideal incoherent search (exact DM, exact per-channel delays, every
//! integer width) would report on noise of unit variance; the file's edges are ignored.
//! A real search with integer delays, a DM grid and a width ladder gets somewhat less.
//! [`recorded_snr`] is the same for the part of a burst a recording holds: a burst
//! whose sweep runs past either end of the file loses the channels' samples outside it.

use super::burst::{Burst, ChannelModel};
use crate::error::{Error, Result};
use crate::obs::Header;
use crate::units::delay_to_infinity_s;

/// Polarisations summed in the data, used by the radiometer equation (total intensity
/// from two orthogonal feeds; common practice).
pub const N_POL: f64 = 2.0;

/// Widths tried one by one up to here; above, a ladder with 2 % steps keeps long
/// (heavily scattered) pulses affordable.
const EXHAUSTIVE_WIDTHS: usize = 4096;

/// The best boxcar of an aligned, channel-summed series.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BoxcarPeak {
    /// Signal-to-noise ratio.
    pub snr: f64,
    /// Boxcar width in samples.
    pub width: usize,
    /// Index in the series of the boxcar's first sample.
    pub start: usize,
}

/// Best boxcar S/N of `series` (the sum over `n_chan` unit-variance channels, so the
/// noise of a w-sample sum is √(n_chan·w)): max over w and start of Σ/√(n_chan·w).
///
/// # Panics
/// If `n_chan` is 0.
pub fn boxcar_snr(series: &[f64], n_chan: usize) -> BoxcarPeak {
    assert!(n_chan > 0, "at least one channel");
    let mut prefix = Vec::with_capacity(series.len() + 1);
    prefix.push(0.0);
    for &v in series {
        prefix.push(prefix.last().copied().unwrap_or(0.0) + v);
    }
    let mut best = BoxcarPeak {
        snr: f64::NEG_INFINITY,
        width: 1,
        start: 0,
    };
    let mut w = 1;
    while w <= series.len() {
        let norm = ((n_chan * w) as f64).sqrt();
        for j in 0..=series.len() - w {
            let snr = (prefix[j + w] - prefix[j]) / norm;
            if snr > best.snr {
                best = BoxcarPeak {
                    snr,
                    width: w,
                    start: j,
                };
            }
        }
        w = if w < EXHAUSTIVE_WIDTHS {
            w + 1
        } else {
            (w as f64 * 1.02).ceil() as usize
        };
    }
    if series.is_empty() {
        best.snr = 0.0;
    }
    best
}

/// The ideally dedispersed, channel-summed signal of `burst` in σ units, and the
/// file sample index of its first element. Empty if every channel is masked.
pub fn dedispersed_signal(header: &Header, burst: &Burst) -> (i64, Vec<f64>) {
    dedispersed(header, burst, Edges::Ignored)
}

/// Whether a channel's signal counts outside the recording's samples.
#[derive(Clone, Copy, PartialEq)]
enum Edges {
    Ignored,
    /// Only samples `[0, n_samples)` of each channel, as recorded, count.
    Recording,
}

fn dedispersed(header: &Header, burst: &Burst, edges: Edges) -> (i64, Vec<f64>) {
    let (models, shifts_samples): (Vec<ChannelModel>, Vec<f64>) = (0..header.n_chan())
        .filter(|&c| header.weights[c] != 0.0)
        .map(|c| {
            let shift = delay_to_infinity_s(burst.dm, header.freqs_mhz[c]);
            (
                ChannelModel::new(header, burst, c, shift),
                shift / header.tsamp_s,
            )
        })
        .unzip();
    let spans: Vec<(i64, i64)> = models
        .iter()
        .map(|m| m.sample_span(header.tsamp_s))
        .collect();
    let (Some(first), Some(end)) = (
        spans.iter().map(|s| s.0).min(),
        spans.iter().map(|s| s.1).max(),
    ) else {
        return (0, Vec::new());
    };
    let mut chan = vec![0.0f32; (end - first) as usize];
    let mut sum = vec![0.0f64; chan.len()];
    let recorded = 0.0..header.n_samples as f64;
    for ((m, &(f, e)), &shift) in models.iter().zip(&spans).zip(&shifts_samples) {
        let part = &mut chan[..(e - f) as usize];
        part.fill(0.0);
        m.add_into(header.tsamp_s, f, part, 1, 1.0);
        if edges == Edges::Recording {
            // Dedispersed sample f + i was recorded at file sample f + i + shift (its
            // middle decides, so each edge is right to a sample).
            for (i, v) in part.iter_mut().enumerate() {
                if !recorded.contains(&((f + i as i64) as f64 + 0.5 + shift)) {
                    *v = 0.0;
                }
            }
        }
        let offset = (f - first) as usize;
        for (s, &v) in sum[offset..].iter_mut().zip(part.iter()) {
            *s += f64::from(v);
        }
    }
    (first, sum)
}

/// The largest value the noise-free signal of `burst` reaches in any sample of each
/// channel as recorded (not dedispersed), in units of that channel's noise σ, with
/// the channel's index; masked channels are left out.
pub(crate) fn peak_per_channel(header: &Header, burst: &Burst) -> Vec<(usize, f64)> {
    let mut samples = Vec::new();
    (0..header.n_chan())
        .filter(|&c| header.weights[c] != 0.0)
        .map(|c| {
            let model = ChannelModel::new(header, burst, c, 0.0);
            let (first, end) = model.sample_span(header.tsamp_s);
            samples.clear();
            samples.resize((end - first).max(0) as usize, 0.0);
            model.add_into(header.tsamp_s, first, &mut samples, 1, 1.0);
            (c, samples.iter().copied().fold(0.0f32, f32::max).into())
        })
        .collect()
}

/// Expected S/N of `burst` in data described by `header` (see the module docs for
/// the exact definition), with the best boxcar in samples from the file start.
pub fn expected_snr_detail(header: &Header, burst: &Burst) -> (BoxcarPeak, i64) {
    snr_detail(header, burst, Edges::Ignored)
}

fn snr_detail(header: &Header, burst: &Burst, edges: Edges) -> (BoxcarPeak, i64) {
    let n_unmasked = header.weights.iter().filter(|&&w| w != 0.0).count();
    let (first, series) = dedispersed(header, burst, edges);
    if n_unmasked == 0 {
        return (
            BoxcarPeak {
                snr: 0.0,
                width: 1,
                start: 0,
            },
            first,
        );
    }
    let peak = boxcar_snr(&series, n_unmasked);
    (peak, first + peak.start as i64)
}

/// Expected S/N of `burst` in data described by `header`: see the module docs.
pub fn expected_snr(header: &Header, burst: &Burst) -> f64 {
    expected_snr_detail(header, burst).0.snr
}

/// Expected S/N of the part of `burst` that a recording described by `header` holds:
/// as [`expected_snr`], with each channel's signal outside samples `[0, n_samples)`
/// left out. Equal to [`expected_snr`] for a burst wholly inside the recording.
pub fn recorded_snr(header: &Header, burst: &Burst) -> f64 {
    snr_detail(header, burst, Edges::Recording).0.snr
}

/// `burst` with its amplitude set so that its expected S/N is `target_snr`.
///
/// # Errors
/// [`Error::Config`] if the burst has no signal in any unmasked channel.
pub fn with_expected_snr(header: &Header, burst: &Burst, target_snr: f64) -> Result<Burst> {
    let unit = Burst {
        amplitude: 1.0,
        ..*burst
    };
    let snr = expected_snr(header, &unit);
    if snr.partial_cmp(&0.0) != Some(std::cmp::Ordering::Greater) {
        return Err(Error::Config(format!(
            "burst at t = {} s, DM {} has no signal in the unmasked band, so it cannot reach S/N {target_snr}",
            burst.t_inf_s, burst.dm
        )));
    }
    Ok(unit.scaled(target_snr / snr))
}

/// Amplitude (σ·samples, see [`Burst::amplitude`]) of a pulse of fluence
/// `fluence_jy_ms` where its spectrum is 1, by the radiometer equation with
/// [`N_POL`] polarisations and bandwidth one channel:
/// per-sample σ of a flux S is S/SEFD · √(n_pol Δν_ch t_samp), so the time-summed
/// signal is F/SEFD · √(n_pol Δν_ch / t_samp) (Cordes & McLaughlin 2003, ApJ 596,
/// 1142; Lorimer & Kramer 2005, Handbook of Pulsar Astronomy).
pub fn amplitude_from_fluence(header: &Header, sefd_jy: f64, fluence_jy_ms: f64) -> f64 {
    fluence_jy_ms * 1e-3 / sefd_jy * (N_POL * header.chan_bw_mhz * 1e6 / header.tsamp_s).sqrt()
}

/// Inverse of [`amplitude_from_fluence`]: fluence in Jy ms where the spectrum is 1.
pub fn fluence_from_amplitude(header: &Header, sefd_jy: f64, amplitude: f64) -> f64 {
    amplitude / amplitude_from_fluence(header, sefd_jy, 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::simulate::Spectrum;
    use crate::simulate::test_header;

    fn pulse(width_s: f64, t_inf_s: f64, amplitude: f64) -> Burst {
        Burst {
            t_inf_s,
            dm: 0.0,
            width_s,
            scatter_1ghz_s: 0.0,
            spectrum: Spectrum::PowerLaw { index: 0.0 },
            amplitude,
        }
    }

    #[test]
    fn one_sample_top_hat_has_snr_amplitude_over_sigma() {
        let mut s = vec![0.0; 9];
        s[4] = 7.5;
        let p = boxcar_snr(&s, 1);
        assert_eq!((p.snr, p.width, p.start), (7.5, 1, 4));
        // Through the burst model: an unresolved pulse inside one sample of a
        // single-channel recording.
        let h = test_header(1, 100);
        let snr = expected_snr(&h, &pulse(0.0, 10.5 * h.tsamp_s, 7.5));
        assert!((snr - 7.5).abs() < 1e-5, "{snr}");
        // N channels: the signal adds N-fold, the noise √N-fold.
        let h = test_header(16, 100);
        let snr = expected_snr(&h, &pulse(0.0, 10.5 * h.tsamp_s, 7.5));
        assert!((snr - 7.5 * 4.0).abs() < 1e-4, "{snr}");
        // Masked channels count neither in signal nor noise.
        let mut h = test_header(16, 100);
        h.weights[..12].fill(0.0);
        let snr = expected_snr(&h, &pulse(0.0, 10.5 * h.tsamp_s, 7.5));
        assert!((snr - 7.5 * 2.0).abs() < 1e-4, "{snr}");
    }

    // An unresolved pulse inside one sample puts its whole amplitude there (the
    // one-sample S/N above); split across two samples, half in each.
    #[test]
    fn peak_per_channel_of_an_unresolved_pulse_is_its_amplitude() {
        let h = test_header(4, 100);
        for (c, peak) in peak_per_channel(&h, &pulse(0.0, 10.5 * h.tsamp_s, 7.5)) {
            assert!((peak - 7.5).abs() < 1e-5, "channel {c}: {peak}");
        }
        let split = peak_per_channel(&h, &pulse(1e-4 * h.tsamp_s, 10.0 * h.tsamp_s, 7.5));
        assert!(
            split.iter().all(|&(_, p)| (p - 3.75).abs() < 1e-5),
            "{split:?}"
        );
        // A delta on a sample boundary lies wholly in the sample that starts there
        // (it was lost: no sample got it, and no S/N could be set for it).
        let h1 = test_header(1, 100);
        for at in [10.0, 37.0, 0.0] {
            let delta = pulse(0.0, at * h1.tsamp_s, 7.5);
            let (first, series) = dedispersed_signal(&h1, &delta);
            let i = usize::try_from(at as i64 - first).unwrap();
            assert!((series[i] - 7.5).abs() < 1e-5, "at {at}: {series:?}");
            assert!((expected_snr(&h1, &delta) - 7.5).abs() < 1e-5);
        }
        let mut masked = h.clone();
        masked.weights[1] = 0.0;
        let peaks = peak_per_channel(&masked, &pulse(0.0, 10.5 * h.tsamp_s, 7.5));
        assert_eq!(peaks.iter().map(|p| p.0).collect::<Vec<_>>(), [0, 2, 3]);
    }

    // Without dispersion every channel is cut at the same sample, so the recorded S/N
    // is the best boxcar of the whole signal truncated at the file's end (exactly).
    #[test]
    fn recorded_snr_is_the_whole_signal_cut_at_the_file_end() {
        let h = test_header(8, 100);
        for centre in [90.5, 99.5, 100.0, 101.5] {
            // FWHM 4 samples: a Gaussian's ±7σ support spans 24 samples.
            let b = pulse(4.0 * h.tsamp_s, centre * h.tsamp_s, 5.0);
            let (first, series) = dedispersed_signal(&h, &b);
            let kept = (100 - first).clamp(0, series.len() as i64) as usize;
            let direct = boxcar_snr(&series[..kept], 8).snr;
            let recorded = recorded_snr(&h, &b);
            assert!(
                (recorded - direct).abs() < 1e-9,
                "{centre}: {recorded} vs {direct}"
            );
            assert!(recorded <= expected_snr(&h, &b) + 1e-12);
        }
        // Wholly inside: equal; half of a symmetric pulse past the end: 1/√2 of the
        // S/N or less (half the signal, at best over half the width).
        let inside = pulse(4.0 * h.tsamp_s, 50.0 * h.tsamp_s, 5.0);
        assert_eq!(recorded_snr(&h, &inside), expected_snr(&h, &inside));
        let half = pulse(4.0 * h.tsamp_s, 100.0 * h.tsamp_s, 5.0);
        let ratio = recorded_snr(&h, &half) / expected_snr(&h, &half);
        assert!(
            ratio > 0.5 && ratio <= std::f64::consts::FRAC_1_SQRT_2 + 1e-9,
            "{ratio}"
        );
    }

    // A dispersed burst arrives last in the lowest channels: as it moves past the end
    // its recorded S/N falls from the whole to nothing; before the start nothing at all.
    #[test]
    fn recorded_snr_of_a_sweep_past_the_end_falls_to_zero() {
        let h = test_header(64, 2000);
        let dm = 30.0;
        let sweep_samples =
            (delay_to_infinity_s(dm, 1200.0) - delay_to_infinity_s(dm, 1600.0)) / h.tsamp_s;
        assert!(
            (500.0..900.0).contains(&sweep_samples),
            "the sweep spans many samples: {sweep_samples}"
        );
        let at = |top_arrival: f64| Burst {
            t_inf_s: top_arrival * h.tsamp_s - delay_to_infinity_s(dm, 1600.0),
            dm,
            ..pulse(2.0 * h.tsamp_s, 0.0, 5.0)
        };
        let whole = expected_snr(&h, &at(1000.0));
        assert!((recorded_snr(&h, &at(1000.0)) - whole).abs() < 1e-9);
        let mut last = whole;
        for top in [1500.0, 1700.0, 1900.0, 1990.0] {
            let r = recorded_snr(&h, &at(top));
            assert!(r < last && r > 0.0, "top arrival {top}: {r} after {last}");
            last = r;
        }
        assert_eq!(recorded_snr(&h, &at(2050.0)), 0.0);
        assert_eq!(recorded_snr(&h, &at(-1000.0)), 0.0);
    }

    // An unresolved pulse split evenly across two samples keeps 1/√2 of the aligned
    // S/N whether the boxcar is one or two samples wide (elementary: a/2 over 1 sample
    // or a over √2 samples' noise; common practice for sample-phase loss).
    #[test]
    fn pulse_split_across_two_samples_loses_one_over_root_two() {
        let h = test_header(1, 100);
        let aligned = expected_snr(&h, &pulse(1e-4 * h.tsamp_s, 20.5 * h.tsamp_s, 10.0));
        let split = expected_snr(&h, &pulse(1e-4 * h.tsamp_s, 20.0 * h.tsamp_s, 10.0));
        assert!((aligned - 10.0).abs() < 1e-4, "{aligned}");
        assert!(
            (split / aligned - std::f64::consts::FRAC_1_SQRT_2).abs() < 1e-4,
            "{split}"
        );
    }

    // A well-resolved Gaussian: the best boxcar reaches 0.94345 of the matched-filter
    // S/N √(Σs²) at 1.189 FWHM: maximise erf(W/(2√2σ))/√W against the matched
    // filter's (2√π σ)^(-1/2) (re-derived with scipy.special.erf; boxcar matched
    // filtering as discussed by Keane & Petroff 2015, MNRAS 447, 2852).
    #[test]
    fn resolved_gaussian_reaches_boxcar_efficiency() {
        let h = test_header(1, 4000);
        let b = pulse(200.0 * h.tsamp_s, 2000.3 * h.tsamp_s, 50.0);
        let (first, series) = dedispersed_signal(&h, &b);
        let matched = series.iter().map(|v| v * v).sum::<f64>().sqrt();
        let (peak, start) = expected_snr_detail(&h, &b);
        assert!(
            (peak.snr / matched - 0.94345).abs() < 1e-3,
            "{}",
            peak.snr / matched
        );
        assert!(
            (peak.width as f64 / 200.0 - 1.189).abs() < 0.01,
            "{}",
            peak.width
        );
        let centre = start as f64 + peak.width as f64 / 2.0;
        assert!((centre - 2000.3).abs() < 1.0, "{centre} (first {first})");
    }

    #[test]
    fn target_snr_scaling_is_exact_for_dispersed_scattered_bursts() {
        for descending in [true, false] {
            let mut h = test_header(32, 10_000);
            if !descending {
                h.freqs_mhz.reverse();
            }
            h.weights[5] = 0.0;
            let b = Burst {
                t_inf_s: 0.1,
                dm: 300.0,
                width_s: 1e-3,
                scatter_1ghz_s: 3e-3,
                spectrum: Spectrum::Gaussian {
                    centre_mhz: 1300.0,
                    fwhm_mhz: 200.0,
                },
                amplitude: 1.0,
            };
            let b = with_expected_snr(&h, &b, 12.0).unwrap();
            assert!((expected_snr(&h, &b) - 12.0).abs() < 1e-6);
        }
        let h = test_header(8, 100);
        let silent = Burst {
            spectrum: Spectrum::TopHat {
                lo_mhz: 100.0,
                hi_mhz: 200.0,
            },
            ..pulse(1e-3, 0.001, 1.0)
        };
        assert!(with_expected_snr(&h, &silent, 10.0).is_err());
    }

    // Radiometer equation for a single pulse, S/N = F·√(n_p Δν) / (SEFD·√W)
    // (Cordes & McLaughlin 2003, ApJ 596, 1142; Lorimer & Kramer 2005): with
    // G = 0.7 K/Jy, T_sys = 25 K (SEFD = 35.714 Jy), Δν = 400 MHz, n_p = 2 and
    // W = 1 ms, a 1 Jy × 1 ms pulse has S/N 25.044 (recomputed from the formula).
    #[test]
    fn fluence_and_snr_follow_the_radiometer_equation() {
        let mut h = test_header(64, 200);
        h.tsamp_s = 1e-3;
        let sefd = 25.0 / 0.7;
        let amp = amplitude_from_fluence(&h, sefd, 1.0);
        // Unresolved pulse wholly inside one 1 ms sample: W = t_samp = 1 ms.
        let snr = expected_snr(&h, &pulse(0.0, 50.5e-3, amp));
        assert!((snr - 25.044).abs() < 1e-3, "{snr}");
        let analytic = 1e-3 * (2.0 * 400e6f64).sqrt() / (sefd * 1e-3f64.sqrt());
        assert!(
            (snr - analytic).abs() < 1e-6 * analytic,
            "{snr} vs {analytic}"
        );
        assert!((fluence_from_amplitude(&h, sefd, amp) - 1.0).abs() < 1e-12);
    }
}
