//! The scenario file (TOML): an invented survey, its noise, bursts and interference.
//! Every table rejects unknown keys so a misspelt option is an error, not a no-op.
//! The reference for every key is `docs/simulate.md`.

use std::path::Path;

use serde::Deserialize;

use super::burst::Spectrum;
use crate::error::{Error, Result};
use crate::obs::{Header, Site, UtcEpoch};

/// A whole scenario file.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Scenario {
    /// Seed for noise and random draws when the command line gives none.
    #[serde(default)]
    pub seed: u64,
    pub observation: ObservationSpec,
    pub site: SiteSpec,
    pub band: BandSpec,
    pub noise: NoiseSpec,
    #[serde(default)]
    pub bandpass: BandpassSpec,
    /// Bursts listed one by one (`[[burst]]` tables).
    #[serde(default, rename = "burst")]
    pub bursts: Vec<BurstSpec>,
    /// Bursts drawn at random.
    #[serde(default)]
    pub random_bursts: Option<RandomBurstsSpec>,
    #[serde(default)]
    pub rfi: RfiSpec,
}

/// `[observation]`: header fields and length.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ObservationSpec {
    pub source: String,
    pub telescope: String,
    pub ra_deg: f64,
    pub dec_deg: f64,
    /// UTC MJD of the first sample.
    pub start_mjd: f64,
    pub length_s: f64,
    pub tsamp_s: f64,
    #[serde(default)]
    pub beam: Option<String>,
}

/// `[site]`: where the invented telescope stands.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SiteSpec {
    pub name: String,
    pub lon_deg: f64,
    pub lat_deg: f64,
    pub height_m: f64,
}

/// `[band]`: channel layout in data order.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BandSpec {
    /// Centre frequency of the first channel in the data, MHz.
    pub first_chan_mhz: f64,
    /// Signed step between channel centres, MHz (negative for a descending band).
    pub chan_step_mhz: f64,
    pub n_chan: usize,
    /// Channels (data-order indices) written with weight 0.
    #[serde(default)]
    pub masked_channels: Vec<usize>,
}

/// `[noise]`: sample type and level (digitiser units for 8-bit data).
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NoiseSpec {
    /// 8 or 16 (unsigned integers, clipped to 0–255 or 0–65535) or 32 (float).
    pub nbits: u32,
    /// Mean level where the bandpass gain is 1.
    pub mean: f64,
    /// Noise standard deviation where the bandpass gain is 1.
    pub sigma: f64,
    /// System-equivalent flux density in Jy: enables fluences.
    #[serde(default)]
    pub sefd_jy: Option<f64>,
}

/// `[bandpass]`: a smooth gain across the band multiplying mean, noise and signal.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BandpassSpec {
    /// Linear gain change from the bottom to the top of the band (e.g. -0.3).
    #[serde(default)]
    pub tilt: f64,
    /// Fraction of the band at each edge over which the gain rolls off.
    #[serde(default)]
    pub edge_rolloff_fraction: f64,
    /// Gain at the very band edges when rolling off (default 0.5).
    #[serde(default)]
    pub edge_gain: Option<f64>,
    /// Relative amplitude of a sinusoidal ripple.
    #[serde(default)]
    pub ripple_fraction: f64,
    /// Ripple period in MHz.
    #[serde(default)]
    pub ripple_period_mhz: Option<f64>,
}

/// One `[[burst]]`: give exactly one of `snr` or `fluence_jy_ms`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BurstSpec {
    /// Arrival time at infinite frequency, seconds from the start.
    pub t_inf_s: f64,
    pub dm: f64,
    /// Intrinsic Gaussian FWHM, ms.
    pub width_ms: f64,
    /// Scattering time at 1 GHz, ms (ν⁻⁴).
    #[serde(default)]
    pub scatter_ms_1ghz: f64,
    #[serde(default = "flat_spectrum")]
    pub spectrum: Spectrum,
    /// Target expected S/N.
    #[serde(default)]
    pub snr: Option<f64>,
    /// Fluence in Jy ms where the spectrum is 1 (needs `noise.sefd_jy`).
    #[serde(default)]
    pub fluence_jy_ms: Option<f64>,
}

fn flat_spectrum() -> Spectrum {
    Spectrum::PowerLaw { index: 0.0 }
}

/// `[random_bursts]`: `count` bursts drawn with the scenario seed.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RandomBurstsSpec {
    pub count: usize,
    /// Uniform range of arrival times at infinite frequency, s.
    pub t_range_s: [f64; 2],
    /// Uniform DM range.
    pub dm_range: [f64; 2],
    /// Log-uniform FWHM range, ms.
    pub width_ms_range: [f64; 2],
    /// Log-uniform scattering range at 1 GHz, ms; none if absent.
    #[serde(default)]
    pub scatter_ms_1ghz_range: Option<[f64; 2]>,
    /// Uniform expected-S/N range (give this or `fluence_jy_ms_range`).
    #[serde(default)]
    pub snr_range: Option<[f64; 2]>,
    /// Log-uniform fluence range, Jy ms (needs `noise.sefd_jy`).
    #[serde(default)]
    pub fluence_jy_ms_range: Option<[f64; 2]>,
    /// Uniform power-law index range (default flat).
    #[serde(default)]
    pub spectral_index_range: Option<[f64; 2]>,
    /// Probability that a burst has a Gaussian band-limited envelope instead.
    #[serde(default)]
    pub band_limited_fraction: f64,
    /// Uniform envelope FWHM range, MHz (default 100–300).
    #[serde(default)]
    pub envelope_fwhm_mhz_range: Option<[f64; 2]>,
}

/// `[rfi]`: interference, added before quantisation like the bursts.
#[derive(Debug, Clone, Default, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RfiSpec {
    #[serde(default)]
    pub narrowband: Vec<NarrowbandSpec>,
    #[serde(default)]
    pub impulse: Vec<ImpulseSpec>,
    #[serde(default)]
    pub train: Vec<TrainSpec>,
}

/// `[[rfi.narrowband]]`: a persistent carrier in the channel(s) covering `freq_mhz`.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct NarrowbandSpec {
    pub freq_mhz: f64,
    /// Mean excess per sample in units of the channel's σ; each sample's excess is
    /// exponentially distributed (a fluctuating carrier's power).
    pub strength: f64,
    /// Width of the carrier in MHz (default: the one channel containing it).
    #[serde(default)]
    pub width_mhz: Option<f64>,
    /// If given, the strength is modulated as ½(1 + sin 2πt/P).
    #[serde(default)]
    pub modulation_period_s: Option<f64>,
}

/// `[[rfi.impulse]]`: one broadband pulse at DM 0.
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ImpulseSpec {
    pub t_s: f64,
    pub width_ms: f64,
    /// Expected S/N at DM 0 (same definition as bursts).
    pub snr: f64,
}

/// `[[rfi.train]]`: DM-0 pulses every `period_s` from `first_s` to the end (or `count`).
#[derive(Debug, Clone, PartialEq, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrainSpec {
    pub first_s: f64,
    pub period_s: f64,
    pub width_ms: f64,
    /// Expected S/N of each pulse at DM 0.
    pub snr: f64,
    #[serde(default)]
    pub count: Option<usize>,
    /// Restrict to a frequency range (both or neither).
    #[serde(default)]
    pub freq_lo_mhz: Option<f64>,
    #[serde(default)]
    pub freq_hi_mhz: Option<f64>,
}

impl Scenario {
    /// Reads and checks a scenario file.
    ///
    /// # Errors
    /// [`Error::Io`] if unreadable, [`Error::BadInput`] naming the file for a TOML
    /// error, an unknown key or an inconsistent value.
    pub fn load(path: &Path) -> Result<Scenario> {
        let text = std::fs::read_to_string(path).map_err(|e| Error::io(path, e))?;
        Scenario::parse(&text).map_err(|msg| Error::bad_input(path, msg))
    }

    /// Parses and checks scenario text; the error is a one-line message.
    ///
    /// # Errors
    /// A TOML error, an unknown key or an inconsistent value.
    pub fn parse(text: &str) -> Result<Scenario, String> {
        let s: Scenario = toml::from_str(text).map_err(|e| crate::error::toml_message(text, &e))?;
        s.check()?;
        Ok(s)
    }

    /// The observation header this scenario describes.
    pub fn header(&self) -> Header {
        let o = &self.observation;
        let b = &self.band;
        let mut weights = vec![1.0; b.n_chan];
        for &c in &b.masked_channels {
            if let Some(w) = weights.get_mut(c) {
                *w = 0.0;
            }
        }
        Header {
            source: o.source.clone(),
            telescope: o.telescope.clone(),
            ra_deg: o.ra_deg,
            dec_deg: o.dec_deg,
            site: Site {
                name: self.site.name.clone(),
                lon_deg: self.site.lon_deg,
                lat_deg: self.site.lat_deg,
                height_m: self.site.height_m,
            },
            start: UtcEpoch::from_mjd_f64(o.start_mjd),
            tsamp_s: o.tsamp_s,
            freqs_mhz: (0..b.n_chan)
                .map(|i| b.first_chan_mhz + b.chan_step_mhz * i as f64)
                .collect(),
            chan_bw_mhz: b.chan_step_mhz.abs(),
            weights,
            n_samples: (o.length_s / o.tsamp_s).round() as u64,
            nbits: self.noise.nbits,
            sefd_jy: self.noise.sefd_jy,
            beam: o.beam.clone(),
        }
    }

    fn check(&self) -> Result<(), String> {
        let o = &self.observation;
        positive("observation.length_s", o.length_s)?;
        positive("observation.tsamp_s", o.tsamp_s)?;
        if !o.start_mjd.is_finite() {
            return Err("observation.start_mjd must be finite".into());
        }
        let b = &self.band;
        if b.n_chan == 0 || b.chan_step_mhz == 0.0 || !b.chan_step_mhz.is_finite() {
            return Err("band needs n_chan > 0 and a non-zero chan_step_mhz".into());
        }
        if let Some(&c) = b.masked_channels.iter().find(|&&c| c >= b.n_chan) {
            return Err(format!(
                "band.masked_channels: {c} is not below n_chan {}",
                b.n_chan
            ));
        }
        let n = &self.noise;
        match n.nbits {
            8 | 16 => {
                let max = super::noise::max_code(n.nbits).unwrap_or(f64::INFINITY);
                if !(n.mean > 0.0 && n.mean < max) {
                    return Err(format!(
                        "noise.mean {} must lie inside 0–{max} for {} bits",
                        n.mean, n.nbits
                    ));
                }
            }
            32 => {}
            other => return Err(format!("noise.nbits must be 8, 16 or 32, got {other}")),
        }
        positive("noise.sigma", n.sigma)?;
        if let Some(s) = n.sefd_jy {
            positive("noise.sefd_jy", s)?;
        }
        let header = self.header();
        header.validate()?;
        let length = o.length_s;
        for (i, b) in self.bursts.iter().enumerate() {
            let what = format!("burst {}", i + 1);
            check_burst_like(&what, b.t_inf_s, b.width_ms, length)?;
            if !(b.dm.is_finite() && b.dm >= 0.0) || b.scatter_ms_1ghz < 0.0 {
                return Err(format!("{what}: dm and scatter_ms_1ghz must be ≥ 0"));
            }
            b.spectrum
                .check()
                .map_err(|m| format!("{what}: spectrum {m}"))?;
            self.check_amplitude(&what, b.snr, b.fluence_jy_ms)?;
        }
        if let Some(r) = &self.random_bursts {
            ordered("random_bursts.t_range_s", r.t_range_s, Low::AtLeastZero)?;
            ordered("random_bursts.dm_range", r.dm_range, Low::AtLeastZero)?;
            ordered(
                "random_bursts.width_ms_range",
                r.width_ms_range,
                Low::AboveZero,
            )?;
            if let Some(s) = r.scatter_ms_1ghz_range {
                ordered("random_bursts.scatter_ms_1ghz_range", s, Low::AboveZero)?;
            }
            if let Some(f) = r.fluence_jy_ms_range {
                ordered("random_bursts.fluence_jy_ms_range", f, Low::AboveZero)?;
            }
            self.check_amplitude(
                "random_bursts",
                r.snr_range.map(|s| s[0]),
                r.fluence_jy_ms_range.map(|f| f[0]),
            )?;
            if !(0.0..=1.0).contains(&r.band_limited_fraction) {
                return Err("random_bursts.band_limited_fraction must be in 0–1".into());
            }
        }
        let half = header.chan_bw_mhz / 2.0;
        let (band_lo, band_hi) = (header.freq_lo_mhz() - half, header.freq_hi_mhz() + half);
        for (i, nb) in self.rfi.narrowband.iter().enumerate() {
            positive(&format!("rfi.narrowband {} strength", i + 1), nb.strength)?;
            // Like a burst outside the observation: a carrier the data cannot hold
            // must not be listed in the truth table.
            if !(band_lo..=band_hi).contains(&nb.freq_mhz) {
                return Err(format!(
                    "rfi.narrowband {}: {} MHz is outside the band {band_lo}–{band_hi} MHz",
                    i + 1,
                    nb.freq_mhz
                ));
            }
        }
        for (i, p) in self.rfi.impulse.iter().enumerate() {
            check_burst_like(&format!("rfi.impulse {}", i + 1), p.t_s, p.width_ms, length)?;
            positive(&format!("rfi.impulse {} snr", i + 1), p.snr)?;
        }
        for (i, t) in self.rfi.train.iter().enumerate() {
            let what = format!("rfi.train {}", i + 1);
            check_burst_like(&what, t.first_s, t.width_ms, length)?;
            positive(&format!("{what} period_s"), t.period_s)?;
            positive(&format!("{what} snr"), t.snr)?;
            match (t.freq_lo_mhz, t.freq_hi_mhz) {
                (Some(lo_mhz), Some(hi_mhz)) => {
                    Spectrum::TopHat { lo_mhz, hi_mhz }.check().map_err(|_| {
                        format!("{what}: freq_lo_mhz {lo_mhz} must be < freq_hi_mhz {hi_mhz}")
                    })?
                }
                (None, None) => {}
                _ => {
                    return Err(format!(
                        "{what}: give both freq_lo_mhz and freq_hi_mhz or neither"
                    ));
                }
            }
        }
        Ok(())
    }

    fn check_amplitude(
        &self,
        what: &str,
        snr: Option<f64>,
        fluence: Option<f64>,
    ) -> Result<(), String> {
        match (snr, fluence) {
            (Some(s), None) => positive(&format!("{what} snr"), s),
            (None, Some(f)) if self.noise.sefd_jy.is_some() => {
                positive(&format!("{what} fluence"), f)
            }
            (None, Some(_)) => Err(format!("{what}: a fluence needs noise.sefd_jy")),
            _ => Err(format!("{what}: give exactly one of snr or fluence")),
        }
    }
}

fn positive(what: &str, v: f64) -> Result<(), String> {
    if v.is_finite() && v > 0.0 {
        Ok(())
    } else {
        Err(format!("{what} must be positive, got {v}"))
    }
}

/// The lower end a range may take.
#[derive(Clone, Copy)]
enum Low {
    AtLeastZero,
    AboveZero,
}

fn ordered(what: &str, r: [f64; 2], low: Low) -> Result<(), String> {
    let (low_ok, rule) = match low {
        Low::AtLeastZero => (r[0] >= 0.0, "0 ≤ low ≤ high"),
        Low::AboveZero => (r[0] > 0.0, "0 < low ≤ high"),
    };
    if r[0].is_finite() && r[1].is_finite() && low_ok && r[0] <= r[1] {
        Ok(())
    } else {
        Err(format!("{what} must be [low, high] with {rule}, got {r:?}"))
    }
}

fn check_burst_like(what: &str, t_s: f64, width_ms: f64, length_s: f64) -> Result<(), String> {
    if !(t_s.is_finite() && (0.0..length_s).contains(&t_s)) {
        return Err(format!(
            "{what}: time {t_s} s is outside the observation (0–{length_s} s)"
        ));
    }
    if !(width_ms.is_finite() && width_ms >= 0.0) {
        return Err(format!("{what}: width_ms must be ≥ 0"));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use crate::simulate::test_header;

    #[test]
    fn header_follows_the_band_table() {
        let h = test_header(8, 1000);
        assert_eq!(h.n_chan(), 8);
        assert!(h.is_descending());
        assert!((h.freqs_mhz[0] - 1575.0).abs() < 1e-9 && (h.freqs_mhz[7] - 1225.0).abs() < 1e-9);
        assert!((h.chan_bw_mhz - 50.0).abs() < 1e-12);
        assert_eq!(h.start.mjd, 61000);
        assert_eq!(h.nbits, 32);
        assert!((h.bandwidth_mhz() - 400.0).abs() < 1e-9);
    }
}
