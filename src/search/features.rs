//! Measures a candidate's triage features from the block it was found in: the
//! on-pulse spectrum (band fraction, modulation index, the part of the band the signal
//! occupies), the S/N at DM 0 over the pulse's sweep, and the S/N-versus-DM curve
//! around the best DM.

use ndarray::ArrayView2;

use super::boxcar::{Scratch, best_snr_in, best_snrs_in};
use super::normalise::NormalisedSeries;
use crate::candidate::TriageFeatures;
use crate::cluster::Detection;
use crate::dedisperse::channel_delays;
use crate::obs::Header;
use crate::triage::{band_fraction, cm03_peak_ratio, cm03_zeta, modulation_index};
use crate::units::delay_between_s;

/// Sub-bands used for the band-fraction estimate.
const N_SUBBANDS: usize = 16;
/// The DM-curve is sampled out to the DM error where the expected ratio is ≈ 0.18.
const CURVE_MAX_ZETA: f64 = 5.0;
/// A signal in fewer sub-bands than this (by its band fraction) may be narrower than
/// a sub-band, which the spectrum cannot tell.
const UNRESOLVED_SUBBANDS: f64 = 3.0;

/// Everything of one processed block that feature measurement reads (`'s`: the
/// block's dedispersed series, lent to [`NormalisedSeries`]).
pub(super) struct BlockData<'a, 's> {
    pub header: &'a Header,
    /// Global index of the first trial of each plan step.
    pub dm_offsets: &'a [usize],
    /// Normalised samples, `[channel, time]`.
    pub norm: ArrayView2<'a, f32>,
    pub mask: &'a [bool],
    /// Normalised band sum (DM 0) at input resolution.
    pub dm0: &'a [f32],
    /// Dedispersed series, normalised when read.
    pub series: &'a NormalisedSeries<'s>,
    pub block_start: u64,
}

/// The features, and what triage needs to judge them.
pub(super) struct Measured {
    pub features: TriageFeatures,
    /// DM-0 ratio a dispersed pulse like this one would show.
    pub expected_dm0_ratio: f64,
    /// Typical largest noise S/N in the DM-0 search window (√(2 ln n) for n
    /// independent boxcars), which a weak pulse's DM-0 S/N cannot fall below.
    pub dm0_noise_snr: f64,
}

/// The part of the band a pulse occupies, which sets its smearing by a DM error
/// (Cordes & McLaughlin 2003 use the bandwidth and centre of the signal).
#[derive(Debug, Clone, Copy)]
struct SignalBand {
    bandwidth_mhz: f64,
    centre_ghz: f64,
}

impl SignalBand {
    fn zeta(&self, delta_dm: f64, width_in: usize, tsamp_s: f64) -> f64 {
        let width_ms = width_in as f64 * tsamp_s * 1e3;
        cm03_zeta(delta_dm, self.bandwidth_mhz, width_ms, self.centre_ghz)
    }
}

impl BlockData<'_, '_> {
    /// Sweep across the band in input samples for `dm`.
    fn sweep_samples(&self, dm: f64) -> usize {
        let h = self.header;
        (delay_between_s(dm.abs(), h.freq_lo_mhz(), h.freq_hi_mhz()) / h.tsamp_s).ceil() as usize
    }

    /// On-pulse sum of each unmasked channel along the dispersion curve of `d`, with
    /// the channel frequencies.
    fn spectrum(&self, d: &Detection, t0: usize) -> (Vec<f64>, Vec<f64>) {
        let delays = channel_delays(&self.header.freqs_mhz, d.dm, self.header.tsamp_s);
        let n_time = self.norm.ncols();
        (0..self.mask.len())
            .filter(|&c| !self.mask[c])
            .map(|c| {
                let start = (t0 + delays[c]).min(n_time);
                let end = (start + d.width_samples).min(n_time);
                let row = self.norm.row(c);
                let sum: f64 = (start..end).map(|i| f64::from(row[i])).sum();
                (sum, self.header.freqs_mhz[c])
            })
            .unzip()
    }

    /// The S/N at the detected width for the trial DMs of `d`'s plan step within
    /// `reach` of its DM, as (DM − best DM, S/N).
    fn dm_curve(&self, d: &Detection, t0_in: usize, reach: f64) -> Vec<(f64, f64)> {
        let step_index = self.dm_offsets.partition_point(|&o| o <= d.dm_index) - 1;
        let ds = self.series.downsample(step_index);
        let (t0, w) = (t0_in / ds, (d.width_samples / ds).max(1));
        let mut scratch = Scratch::default();
        let mut points = Vec::new();
        let mut row = Vec::new();
        for (r, &dm) in self.series.dms(step_index).iter().enumerate() {
            if (dm - d.dm).abs() > reach {
                continue;
            }
            let shift = self.sweep_samples(dm - d.dm).div_ceil(ds);
            let lo = t0.saturating_sub(shift + w);
            self.series.row_into(step_index, r, &mut row);
            let snr = best_snr_in(&row, w, lo, t0 + shift + w, &mut scratch);
            points.push((dm - d.dm, f64::from(snr)));
        }
        points
    }
}

/// RMS difference between the peak-normalised S/N-vs-DM `curve` and the Cordes &
/// McLaughlin curve of a pulse `width_in` samples wide in `band`, over the trials
/// within [`CURVE_MAX_ZETA`] of the best (0 with fewer than 3).
fn curve_misfit(curve: &[(f64, f64)], band: SignalBand, width_in: usize, tsamp_s: f64) -> f64 {
    let reach = CURVE_MAX_ZETA / band.zeta(1.0, width_in, tsamp_s);
    let points: Vec<(f64, f64)> = curve
        .iter()
        .filter(|p| p.0.abs() <= reach)
        .map(|&(ddm, snr)| (snr, cm03_peak_ratio(band.zeta(ddm, width_in, tsamp_s))))
        .collect();
    let peak = points.iter().map(|p| p.0).fold(0.0, f64::max);
    if points.len() < 3 || peak <= 0.0 {
        return 0.0;
    }
    let ss: f64 = points.iter().map(|(m, e)| (m / peak - e).powi(2)).sum();
    (ss / points.len() as f64).sqrt()
}

/// The signal bands a pulse whose spectrum fills `fraction` of the band may have: the
/// measured one, and when that is within [`UNRESOLVED_SUBBANDS`] sub-bands, halvings
/// of it down to one channel (a pulse tens of MHz wide in a 4 GHz band fills a
/// fraction of one sub-band, and its DM curve is as broad as its own bandwidth makes
/// it).
fn possible_bands(fraction: f64, n_sub: usize, centre_ghz: f64, h: &Header) -> Vec<SignalBand> {
    let widest = fraction.max(1.0 / n_sub as f64) * h.bandwidth_mhz();
    let mut bands = vec![widest];
    if fraction * (n_sub as f64) < UNRESOLVED_SUBBANDS {
        while bands[bands.len() - 1] / 2.0 >= h.chan_bw_mhz {
            bands.push(bands[bands.len() - 1] / 2.0);
        }
    }
    bands
        .into_iter()
        .map(|bandwidth_mhz| SignalBand {
            bandwidth_mhz,
            centre_ghz,
        })
        .collect()
}

impl BlockData<'_, '_> {
    /// The DM-curve misfit of `d` (see [`curve_misfit`]) for the one of `bands` it
    /// fits best, and that band.
    fn dm_curve_misfit(
        &self,
        d: &Detection,
        t0_in: usize,
        bands: &[SignalBand],
    ) -> (f64, SignalBand) {
        let tsamp = self.header.tsamp_s;
        // The narrowest band has the broadest curve, so the farthest reach.
        let reach = bands
            .iter()
            .map(|b| CURVE_MAX_ZETA / b.zeta(1.0, d.width_samples, tsamp))
            .fold(0.0, f64::max);
        let curve = self.dm_curve(d, t0_in, reach);
        bands
            .iter()
            .map(|&b| (curve_misfit(&curve, b, d.width_samples, tsamp), b))
            .min_by(|x, y| x.0.total_cmp(&y.0))
            .expect("at least the measured band")
    }
}

/// Splits a spectrum (each value with unit noise) into up to [`N_SUBBANDS`] runs of
/// channels; returns each run's S/N and mean frequency in MHz.
fn subbands(unit: &[f64], freqs_mhz: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let n_sub = N_SUBBANDS.min(unit.len()).max(1);
    (0..n_sub)
        .map(|k| {
            let range = k * unit.len() / n_sub..(k + 1) * unit.len() / n_sub;
            let n = range.len().max(1) as f64;
            let snr = unit[range.clone()].iter().sum::<f64>() / n.sqrt();
            (snr, freqs_mhz[range].iter().sum::<f64>() / n)
        })
        .unzip()
}

/// Measures the triage features of detection `d` (the best member of a cluster).
pub(super) fn measure(b: &BlockData<'_, '_>, d: &Detection) -> Measured {
    let h = b.header;
    let t0 = (d.start_sample - b.block_start) as usize;
    let w = d.width_samples;

    let (spectrum, freqs) = b.spectrum(d, t0);
    let unit: Vec<f64> = spectrum.iter().map(|s| s / (w as f64).sqrt()).collect();
    let (sub_snr, sub_freq) = subbands(&unit, &freqs);
    let fraction = band_fraction(&sub_snr);
    let weight: f64 = sub_snr.iter().map(|s| s.max(0.0)).sum();
    let centre_mhz = if weight > 0.0 {
        sub_snr
            .iter()
            .zip(&sub_freq)
            .map(|(s, f)| s.max(0.0) * f)
            .sum::<f64>()
            / weight
    } else {
        0.5 * (h.freq_lo_mhz() + h.freq_hi_mhz())
    };
    let bands = possible_bands(fraction, sub_snr.len(), centre_mhz / 1e3, h);
    let (dm_curve_misfit, band) = b.dm_curve_misfit(d, t0, &bands);

    let mut scratch = Scratch::default();
    let lo = t0.saturating_sub(w);
    let sweep = b.sweep_samples(d.dm);
    // The pulse's own window, and one of the same length on each side of it: where
    // undispersed interference fills the DM-0 series (an impulse train), the weaker
    // neighbour's best sets the level a dispersed pulse's window reaches anyway.
    let hi = t0 + sweep + w;
    let span = hi - lo + 1;
    let mut ranges = vec![(lo, hi)];
    if lo >= span {
        ranges.push((lo - span, lo - 1));
    }
    if hi + span + w < b.dm0.len() {
        ranges.push((hi + 1, hi + span));
    }
    let snrs = best_snrs_in(b.dm0, w, &ranges, &mut scratch);
    let snr0 = snrs[0];
    let background = snrs[1..]
        .iter()
        .map(|&s| f64::from(s))
        .fold(f64::INFINITY, f64::min);
    let window_trials = ((sweep + 2 * w) as f64 / w as f64).max(2.0);

    Measured {
        features: TriageFeatures {
            snr_dm0_ratio: f64::from(snr0).max(0.0) / d.snr,
            dm_curve_misfit,
            band_fraction: fraction,
            modulation_index: modulation_index(&unit, 1.0),
        },
        expected_dm0_ratio: cm03_peak_ratio(band.zeta(d.dm, w, h.tsamp_s)),
        dm0_noise_snr: (2.0 * window_trials.ln())
            .sqrt()
            .max(if background.is_finite() {
                background
            } else {
                0.0
            }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Runs cover the band once, in order, as evenly as the channel count allows;
    // each run's S/N is its sum over √(its channels) (unit noise per channel) and its
    // frequency the mean of its channels.
    #[test]
    fn subbands_split_the_band_evenly_with_unit_noise_snrs() {
        for n_chan in [1usize, 5, 16, 40, 1024] {
            let unit: Vec<f64> = (0..n_chan).map(|c| (c % 7) as f64 - 2.0).collect();
            let freqs: Vec<f64> = (0..n_chan).map(|c| 1600.0 - c as f64).collect();
            let (snr, freq) = subbands(&unit, &freqs);
            assert_eq!(snr.len(), n_chan.min(N_SUBBANDS));
            let mut first = 0;
            for (k, (&s, &f)) in snr.iter().zip(&freq).enumerate() {
                let end = (k + 1) * n_chan / snr.len();
                let run = first..end;
                assert!(
                    run.len() >= n_chan / N_SUBBANDS && run.len() <= n_chan.div_ceil(N_SUBBANDS)
                );
                let n = run.len() as f64;
                let sum: f64 = unit[run.clone()].iter().sum();
                assert!(
                    (s - sum / n.sqrt()).abs() < 1e-12,
                    "n_chan {n_chan} run {k}"
                );
                let mean_f = freqs[run].iter().sum::<f64>() / n;
                assert!((f - mean_f).abs() < 1e-9);
                first = end;
            }
            assert_eq!(first, n_chan, "every channel in one run");
        }
        // A flat signal of S/N 1 per channel over the whole band: every run sums to √n.
        let (snr, _) = subbands(&[1.0; 64], &[1400.0; 64]);
        assert!(snr.iter().all(|&s| (s - 2.0).abs() < 1e-12), "{snr:?}");
    }
}
