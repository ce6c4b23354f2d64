//! Measures a candidate's triage features from the block it was found in: the
//! on-pulse spectrum (band fraction, modulation index), the S/N at DM 0 over the
//! pulse's sweep, and the S/N-versus-DM curve around the best DM.

use ndarray::ArrayView2;

use super::boxcar::{Scratch, best_snr_in};
use crate::candidate::TriageFeatures;
use crate::cluster::Detection;
use crate::dedisperse::{Dedispersed, channel_delays};
use crate::obs::Header;
use crate::triage::{band_fraction, cm03_peak_ratio, cm03_zeta, modulation_index};
use crate::units::delay_between_s;

/// Sub-bands used for the band-fraction estimate.
const N_SUBBANDS: usize = 16;
/// The DM-curve is sampled out to the DM error where the expected ratio is ≈ 0.18.
const CURVE_MAX_ZETA: f64 = 5.0;

/// Everything of one processed block that feature measurement reads.
pub(super) struct BlockData<'a> {
    pub header: &'a Header,
    /// Global index of the first trial of each plan step.
    pub dm_offsets: &'a [usize],
    /// Normalised samples, `[channel, time]`.
    pub norm: ArrayView2<'a, f32>,
    pub mask: &'a [bool],
    /// Normalised band sum (DM 0) at input resolution.
    pub dm0: &'a [f32],
    /// Normalised dedispersed series.
    pub outs: &'a [Dedispersed],
    pub block_start: u64,
}

/// The features and the DM-0 ratio a dispersed pulse like this one would show.
pub(super) struct Measured {
    pub features: TriageFeatures,
    pub expected_dm0_ratio: f64,
}

impl BlockData<'_> {
    fn bandwidth_mhz(&self) -> f64 {
        self.header.bandwidth_mhz()
    }

    fn centre_ghz(&self) -> f64 {
        0.5 * (self.header.freq_lo_mhz() + self.header.freq_hi_mhz()) / 1e3
    }

    fn zeta(&self, delta_dm: f64, width_in: usize) -> f64 {
        let width_ms = width_in as f64 * self.header.tsamp_s * 1e3;
        cm03_zeta(delta_dm, self.bandwidth_mhz(), width_ms, self.centre_ghz())
    }

    /// Sweep across the band in input samples for `dm`.
    fn sweep_samples(&self, dm: f64) -> usize {
        let h = self.header;
        (delay_between_s(dm.abs(), h.freq_lo_mhz(), h.freq_hi_mhz()) / h.tsamp_s).ceil() as usize
    }

    /// On-pulse sum of each unmasked channel along the dispersion curve of `d`.
    fn spectrum(&self, d: &Detection, t0: usize) -> Vec<f64> {
        let delays = channel_delays(&self.header.freqs_mhz, d.dm, self.header.tsamp_s);
        let n_time = self.norm.ncols();
        (0..self.mask.len())
            .filter(|&c| !self.mask[c])
            .map(|c| {
                let start = (t0 + delays[c]).min(n_time);
                let end = (start + d.width_samples).min(n_time);
                let row = self.norm.row(c);
                (start..end).map(|i| f64::from(row[i])).sum()
            })
            .collect()
    }

    /// Peak-normalised S/N at the detected width for trial DMs near the best one,
    /// against the Cordes & McLaughlin curve; RMS difference (0 with < 3 trials).
    fn dm_curve_misfit(&self, d: &Detection, t0_in: usize, scratch: &mut Scratch) -> f64 {
        let step_index = self.dm_offsets.partition_point(|&o| o <= d.dm_index) - 1;
        let step = &self.outs[step_index];
        let ds = step.downsample;
        let (t0, w) = (t0_in / ds, (d.width_samples / ds).max(1));
        let reach = CURVE_MAX_ZETA / self.zeta(1.0, d.width_samples);
        let mut points = Vec::new();
        for (r, &dm) in step.dms.iter().enumerate() {
            if (dm - d.dm).abs() > reach {
                continue;
            }
            let shift = self.sweep_samples(dm - d.dm).div_ceil(ds);
            let lo = t0.saturating_sub(shift + w);
            let snr = best_snr_in(step.row(r), w, lo, t0 + shift + w, scratch);
            points.push((
                f64::from(snr),
                cm03_peak_ratio(self.zeta(dm - d.dm, d.width_samples)),
            ));
        }
        let peak = points.iter().map(|p| p.0).fold(0.0, f64::max);
        if points.len() < 3 || !(peak > 0.0) {
            return 0.0;
        }
        let ss: f64 = points.iter().map(|(m, e)| (m / peak - e).powi(2)).sum();
        (ss / points.len() as f64).sqrt()
    }
}

/// Measures the triage features of detection `d` (the best member of a cluster).
pub(super) fn measure(b: &BlockData<'_>, d: &Detection) -> Measured {
    let t0 = (d.start_sample - b.block_start) as usize;
    let w = d.width_samples;
    let mut scratch = Scratch::default();

    let spectrum = b.spectrum(d, t0);
    let unit: Vec<f64> = spectrum.iter().map(|s| s / (w as f64).sqrt()).collect();
    let n_sub = N_SUBBANDS.min(unit.len()).max(1);
    let subbands: Vec<f64> = (0..n_sub)
        .map(|k| {
            let part = &unit[k * unit.len() / n_sub..(k + 1) * unit.len() / n_sub];
            part.iter().sum::<f64>() / (part.len().max(1) as f64).sqrt()
        })
        .collect();

    let lo = t0.saturating_sub(w);
    let snr0 = best_snr_in(b.dm0, w, lo, t0 + b.sweep_samples(d.dm) + w, &mut scratch);

    Measured {
        features: TriageFeatures {
            snr_dm0_ratio: f64::from(snr0).max(0.0) / d.snr,
            dm_curve_misfit: b.dm_curve_misfit(d, t0, &mut scratch),
            band_fraction: band_fraction(&subbands),
            modulation_index: modulation_index(&unit, 1.0),
        },
        expected_dm0_ratio: cm03_peak_ratio(b.zeta(d.dm, w)),
    }
}
