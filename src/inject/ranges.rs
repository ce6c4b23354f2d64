//! The ranges injected bursts are drawn from, and the seeded draw itself.

use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::{Deserialize, Serialize};

use crate::error::{Error, Result};
use crate::obs::Header;
use crate::simulate::{
    Burst, Spectrum, amplitude_from_fluence, expected_snr_detail, fluence_from_amplitude,
    with_expected_snr,
};

/// How bright the injected bursts are.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Brightness {
    /// Expected S/N (simulator definition), uniform in `[lo, hi]`.
    Snr([f64; 2]),
    /// Fluence in Jy ms where the spectrum is 1, log-uniform in `[lo, hi]` (needs the SEFD).
    FluenceJyMs([f64; 2]),
}

/// Parameter ranges of the injected bursts. Widths and scattering times are drawn
/// log-uniformly (they span decades), everything else uniformly.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct InjectionRanges {
    /// DM range in pc cm⁻³.
    pub dm: [f64; 2],
    /// Intrinsic Gaussian FWHM range in ms.
    pub width_ms: [f64; 2],
    /// Scattering time at 1 GHz in ms; `None` injects unscattered bursts.
    pub scatter_ms_1ghz: Option<[f64; 2]>,
    /// Power-law spectral index range (0 = flat).
    pub spectral_index: [f64; 2],
    /// Probability that a burst gets a Gaussian band-limited envelope instead.
    pub band_limited_fraction: f64,
    /// FWHM range of those envelopes in MHz (centres uniform over the band).
    pub envelope_fwhm_mhz: [f64; 2],
    /// Amplitude distribution.
    pub brightness: Brightness,
}

impl Default for InjectionRanges {
    fn default() -> Self {
        InjectionRanges {
            dm: [0.0, 1000.0],
            width_ms: [0.5, 20.0],
            scatter_ms_1ghz: None,
            spectral_index: [0.0, 0.0],
            band_limited_fraction: 0.0,
            envelope_fwhm_mhz: [100.0, 300.0],
            brightness: Brightness::Snr([4.0, 20.0]),
        }
    }
}

/// One drawn burst with its bookkeeping (time not yet chosen: `burst.t_inf_s` is 0).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Drawn {
    /// The burst model.
    pub burst: Burst,
    /// Expected S/N by the simulator's definition ([`crate::simulate::expected_snr`]).
    pub expected_snr: f64,
    /// Width in samples of the ideal boxcar (the burst's effective width).
    pub ideal_width_samples: usize,
    /// Fluence in Jy ms where the spectrum is 1, when the SEFD is known.
    pub fluence_jy_ms: Option<f64>,
}

impl InjectionRanges {
    /// Checks that every range is ordered and physical.
    ///
    /// # Errors
    /// [`Error::Config`] naming the bad range; fluence without an SEFD in `header`.
    pub fn validate(&self, header: &Header) -> Result<()> {
        // `positive`: the lower end must exceed 0; otherwise it must be at least `min`.
        let ordered = |name: &str, r: [f64; 2], min: f64, positive: bool| {
            let low_ok = if positive { r[0] > 0.0 } else { r[0] >= min };
            if r[0].is_finite() && r[1].is_finite() && low_ok && r[1] >= r[0] {
                Ok(())
            } else {
                let bound = if positive {
                    "above 0".to_string()
                } else {
                    format!("at least {min}")
                };
                Err(Error::Config(format!(
                    "{name} range {}..{} must be finite, ordered (LO <= HI) and {bound}",
                    r[0], r[1]
                )))
            }
        };
        ordered("DM", self.dm, 0.0, false)?;
        ordered("width (ms, drawn log-uniformly)", self.width_ms, 0.0, true)?;
        if let Some(s) = self.scatter_ms_1ghz {
            ordered("scattering (ms, drawn log-uniformly)", s, 0.0, true)?;
        }
        ordered(
            "spectral index",
            self.spectral_index,
            f64::NEG_INFINITY,
            false,
        )?;
        ordered("envelope FWHM", self.envelope_fwhm_mhz, 0.0, true)?;
        if !(0.0..=1.0).contains(&self.band_limited_fraction) {
            return Err(Error::Config(format!(
                "band-limited fraction {} must be in [0, 1]",
                self.band_limited_fraction
            )));
        }
        match self.brightness {
            Brightness::Snr(r) => ordered("S/N", r, 0.0, true),
            Brightness::FluenceJyMs(r) => {
                ordered("fluence (Jy ms, drawn log-uniformly)", r, 0.0, true)?;
                if header.sefd_jy.is_none() {
                    return Err(Error::Config(
                        "fluence ranges need the SEFD, but the observation header has none".into(),
                    ));
                }
                Ok(())
            }
        }
    }

    /// The burst of largest extent in time the ranges allow (highest DM, widest pulse,
    /// most scattering), at `t_inf_s` = 0 and unit amplitude: every drawn burst fits
    /// wherever this one does.
    pub fn widest(&self) -> Burst {
        Burst {
            t_inf_s: 0.0,
            dm: self.dm[1],
            width_s: self.width_ms[1] * 1e-3,
            scatter_1ghz_s: self.scatter_ms_1ghz.map_or(0.0, |r| r[1] * 1e-3),
            spectrum: Spectrum::PowerLaw { index: 0.0 },
            amplitude: 1.0,
        }
    }

    /// Draws one burst (at `t_inf_s` = 0) from `rng`.
    ///
    /// # Errors
    /// A burst with no signal in the unmasked band (e.g. every channel masked).
    pub fn draw(&self, header: &Header, rng: &mut ChaCha8Rng) -> Result<Drawn> {
        let uniform = |rng: &mut ChaCha8Rng, r: [f64; 2]| {
            if r[1] > r[0] {
                rng.random_range(r[0]..r[1])
            } else {
                r[0]
            }
        };
        let log_uniform =
            |rng: &mut ChaCha8Rng, r: [f64; 2]| uniform(rng, [r[0].ln(), r[1].ln()]).exp();
        let dm = uniform(rng, self.dm);
        let width_s = log_uniform(rng, self.width_ms) * 1e-3;
        let scatter_1ghz_s = self
            .scatter_ms_1ghz
            .map_or(0.0, |r| log_uniform(rng, r) * 1e-3);
        let spectrum = if rng.random_bool(self.band_limited_fraction) {
            Spectrum::Gaussian {
                centre_mhz: uniform(rng, [header.freq_lo_mhz(), header.freq_hi_mhz()]),
                fwhm_mhz: uniform(rng, self.envelope_fwhm_mhz),
            }
        } else {
            Spectrum::PowerLaw {
                index: uniform(rng, self.spectral_index),
            }
        };
        let shape = Burst {
            t_inf_s: 0.0,
            dm,
            width_s,
            scatter_1ghz_s,
            spectrum,
            amplitude: 1.0,
        };
        let burst = match self.brightness {
            Brightness::Snr(r) => with_expected_snr(header, &shape, uniform(rng, r))?,
            Brightness::FluenceJyMs(r) => {
                let sefd = header.sefd_jy.unwrap_or(f64::NAN);
                shape.scaled(amplitude_from_fluence(header, sefd, log_uniform(rng, r)))
            }
        };
        let (peak, _) = expected_snr_detail(header, &burst);
        Ok(Drawn {
            burst,
            expected_snr: peak.snr,
            ideal_width_samples: peak.width,
            fluence_jy_ms: header
                .sefd_jy
                .map(|sefd| fluence_from_amplitude(header, sefd, burst.amplitude)),
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;

    #[test]
    fn draws_stay_in_range_and_hit_the_requested_snr() {
        let header = crate::simulate::test_header(16, 4000);
        let ranges = InjectionRanges {
            dm: [10.0, 50.0],
            width_ms: [0.2, 2.0],
            scatter_ms_1ghz: Some([0.01, 0.1]),
            spectral_index: [-2.0, 1.0],
            band_limited_fraction: 0.5,
            brightness: Brightness::Snr([6.0, 12.0]),
            ..InjectionRanges::default()
        };
        ranges.validate(&header).unwrap();
        let mut rng = ChaCha8Rng::seed_from_u64(3);
        let mut envelopes = 0;
        for _ in 0..40 {
            let d = ranges.draw(&header, &mut rng).unwrap();
            assert!((10.0..50.0).contains(&d.burst.dm));
            assert!((0.2e-3..2.0e-3).contains(&d.burst.width_s));
            assert!((1e-5..1e-4).contains(&d.burst.scatter_1ghz_s));
            assert!((6.0 - 1e-9..12.0 + 1e-9).contains(&d.expected_snr), "{d:?}");
            assert!(d.fluence_jy_ms.is_none());
            envelopes += usize::from(matches!(d.burst.spectrum, Spectrum::Gaussian { .. }));
        }
        assert!((8..=32).contains(&envelopes), "{envelopes} envelopes of 40");
    }

    #[test]
    fn fluence_needs_an_sefd_and_sets_the_amplitude() {
        let mut header = crate::simulate::test_header(16, 4000);
        let ranges = InjectionRanges {
            brightness: Brightness::FluenceJyMs([1.0, 1.0]),
            ..InjectionRanges::default()
        };
        assert!(ranges.validate(&header).is_err());
        header.sefd_jy = Some(20.0);
        ranges.validate(&header).unwrap();
        let d = ranges
            .draw(&header, &mut ChaCha8Rng::seed_from_u64(1))
            .unwrap();
        assert!((d.fluence_jy_ms.unwrap() - 1.0).abs() < 1e-12);
        let want = amplitude_from_fluence(&header, 20.0, 1.0);
        assert!((d.burst.amplitude - want).abs() < 1e-12 * want);
    }

    #[test]
    fn bad_ranges_are_named() {
        let header = crate::simulate::test_header(16, 4000);
        let bad = |r: InjectionRanges| r.validate(&header).unwrap_err().to_string();
        let e = bad(InjectionRanges {
            brightness: Brightness::Snr([5.0, 3.0]),
            ..InjectionRanges::default()
        });
        assert!(e.contains("S/N range 5..3") && e.contains("above 0"), "{e}");
        let e = bad(InjectionRanges {
            width_ms: [0.0, 3.0],
            ..InjectionRanges::default()
        });
        assert!(e.contains("width"), "{e}");
    }
}
