//! Turns a [`Scenario`] into concrete signals: every burst and interference pulse as
//! a [`Burst`] with its amplitude fixed, plus the truth table describing them.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

use super::burst::{Burst, Spectrum};
use super::scenario::{RandomBurstsSpec, Scenario};
use super::snr::{
    amplitude_from_fluence, expected_snr, fluence_from_amplitude, peak_per_channel, recorded_snr,
    with_expected_snr,
};
use crate::error::Result;
use crate::obs::Header;

/// RNG stream (of the scenario seed) for random burst parameters; noise uses stream 0
/// and carrier fluctuations stream 2, so adding bursts never changes the noise.
const BURST_STREAM: u64 = 1;

/// What a truth-table row describes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum TruthKind {
    /// An astrophysical burst.
    Burst,
    /// A persistent narrow-band carrier (interference).
    RfiNarrowband,
    /// A single broadband DM-0 impulse (interference).
    RfiImpulse,
    /// One pulse of a periodic DM-0 impulse train (interference).
    RfiTrainPulse,
}

/// One row of `NAME.truth.csv`.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct TruthRow {
    pub kind: TruthKind,
    /// Arrival at infinite frequency (for a carrier: the file start), s from start.
    pub t_inf_s: f64,
    /// The same instant as a UTC MJD.
    pub mjd_inf: f64,
    pub dm: Option<f64>,
    /// Intrinsic FWHM, ms.
    pub width_ms: Option<f64>,
    pub scatter_ms_1ghz: Option<f64>,
    pub spectrum: Option<String>,
    pub expected_snr: Option<f64>,
    /// Fluence in Jy ms where the spectrum is 1 (only with an SEFD).
    pub fluence_jy_ms: Option<f64>,
    /// Carrier frequency, MHz.
    pub freq_mhz: Option<f64>,
    /// Train period or carrier modulation period, s.
    pub period_s: Option<f64>,
    /// Carrier mean excess in σ units.
    pub strength: Option<f64>,
}

/// A persistent narrow-band carrier, resolved to channels.
#[derive(Debug, Clone, PartialEq)]
pub struct Carrier {
    /// Data-order channel indices it occupies.
    pub channels: Vec<usize>,
    /// Mean excess per sample, σ units.
    pub strength: f64,
    pub modulation_period_s: Option<f64>,
}

/// Everything needed to write the data, and the truth about it.
#[derive(Debug, Clone)]
pub struct Simulation {
    pub header: Header,
    /// Noise level and bandpass gain per channel: mean and σ in output units.
    pub chan_mean: Vec<f64>,
    pub chan_sigma: Vec<f64>,
    /// All pulsed signals (bursts and DM-0 interference), amplitude in σ units.
    pub pulses: Vec<Burst>,
    pub carriers: Vec<Carrier>,
    pub truth: Vec<TruthRow>,
    pub seed: u64,
    /// One line for each burst the recording does not wholly hold (its sweep runs
    /// past an end of the file): its truth row gives the S/N of the part recorded.
    pub notes: Vec<String>,
}

impl Simulation {
    /// Resolves `scenario` with `seed` (random draws and noise).
    ///
    /// # Errors
    /// [`crate::Error::Config`] if a burst cannot reach its S/N (no signal in band).
    pub fn new(scenario: &Scenario, seed: u64) -> Result<Simulation> {
        let header = scenario.header();
        let gains = super::noise::bandpass_gains(&header, &scenario.bandpass)?;
        let mut sim = Simulation {
            chan_mean: gains.iter().map(|g| g * scenario.noise.mean).collect(),
            chan_sigma: gains.iter().map(|g| g * scenario.noise.sigma).collect(),
            header,
            pulses: Vec::new(),
            carriers: Vec::new(),
            truth: Vec::new(),
            seed,
            notes: Vec::new(),
        };
        let sefd = scenario.noise.sefd_jy;
        for (i, b) in scenario.bursts.iter().enumerate() {
            let burst = Burst {
                t_inf_s: b.t_inf_s,
                dm: b.dm,
                width_s: b.width_ms * 1e-3,
                scatter_1ghz_s: b.scatter_ms_1ghz * 1e-3,
                spectrum: b.spectrum,
                amplitude: 1.0,
            };
            sim.add_burst(
                &format!("burst {}", i + 1),
                burst,
                b.snr,
                b.fluence_jy_ms.zip(sefd),
            )?;
        }
        if let Some(r) = &scenario.random_bursts {
            let mut rng = ChaCha8Rng::seed_from_u64(seed);
            rng.set_stream(BURST_STREAM);
            for i in 0..r.count {
                let (burst, snr, fluence) = draw_burst(&mut rng, r, &sim.header);
                sim.add_burst(
                    &format!("random burst {}", i + 1),
                    burst,
                    snr,
                    fluence.zip(sefd),
                )?;
            }
        }
        sim.add_rfi(scenario)?;
        Ok(sim)
    }

    /// Bytes of samples the observation holds (`nbits` per sample), without the
    /// container's headers: what writing it needs on disk, near enough.
    pub fn sample_bytes(&self) -> u128 {
        let h = &self.header;
        u128::from(h.n_samples) * h.n_chan() as u128 * u128::from(h.nbits) / 8
    }

    /// Adds `burst` (called `what` in a note). Its truth row's expected S/N is that of
    /// the part the recording holds; a scenario's S/N or fluence sets the burst's
    /// brightness as if it were wholly recorded.
    fn add_burst(
        &mut self,
        what: &str,
        burst: Burst,
        snr: Option<f64>,
        fluence: Option<(f64, f64)>,
    ) -> Result<()> {
        let burst = match (snr, fluence) {
            (Some(s), _) => with_expected_snr(&self.header, &burst, s)?,
            (None, Some((f, sefd))) => Burst {
                amplitude: amplitude_from_fluence(&self.header, sefd, f),
                ..burst
            },
            (None, None) => burst,
        };
        let row = TruthRow {
            kind: TruthKind::Burst,
            dm: Some(burst.dm),
            width_ms: Some(burst.width_s * 1e3),
            scatter_ms_1ghz: Some(burst.scatter_1ghz_s * 1e3),
            spectrum: Some(burst.spectrum.describe()),
            expected_snr: Some(self.recorded_snr(what, &burst)),
            fluence_jy_ms: self
                .header
                .sefd_jy
                .map(|sefd| fluence_from_amplitude(&self.header, sefd, burst.amplitude)),
            ..self.empty_row(TruthKind::Burst, burst.t_inf_s)
        };
        self.note_saturation(what, &burst);
        self.truth.push(row);
        self.pulses.push(burst);
        Ok(())
    }

    /// A note in [`Simulation::notes`] if `burst`'s brightest samples exceed what
    /// integer samples hold (255 for 8 bits, 65535 for 16, where [`super::quantise`]
    /// clips them): the file then holds less than the truth's expected S/N, which
    /// ignores quantisation.
    fn note_saturation(&mut self, what: &str, burst: &Burst) {
        let Some(top) = super::noise::max_code(self.header.nbits) else {
            return;
        };
        // Headroom of each channel in its own σ, from its mean to the top code.
        let headroom = |c: usize| (top - self.chan_mean[c]) / self.chan_sigma[c];
        let over: Vec<(usize, f64)> = peak_per_channel(&self.header, burst)
            .into_iter()
            .filter(|&(c, peak)| peak > headroom(c))
            .collect();
        let Some(&(c, peak)) = over.iter().max_by(|a, b| a.1.total_cmp(&b.1)) else {
            return;
        };
        self.notes.push(format!(
            "{what} (t_inf {} s, DM {}) saturates the {}-bit samples in {} of {} channels: \
             its brightest sample is {peak:.1} σ above the mean where {top} is {:.1} σ \
             above it, so the file holds less than the truth's expected S/N",
            burst.t_inf_s,
            burst.dm,
            self.header.nbits,
            over.len(),
            self.header.weights.iter().filter(|&&w| w != 0.0).count(),
            headroom(c),
        ));
    }

    /// The expected S/N of the part of `burst` the recording holds, with a note in
    /// [`Simulation::notes`] if that is less than the whole burst's.
    fn recorded_snr(&mut self, what: &str, burst: &Burst) -> f64 {
        let h = &self.header;
        let whole = expected_snr(h, burst);
        let (first, end) = burst.sample_span(h);
        if first >= 0 && end <= h.n_samples as i64 {
            return whole;
        }
        let recorded = recorded_snr(h, burst);
        // Tails far below the noise are not worth a note.
        if recorded < whole - 0.01 {
            let t = |sample: i64| sample as f64 * h.tsamp_s;
            self.notes.push(format!(
                "{what} (t_inf {} s, DM {}) runs past the recording: its signal spans \
                 {:.3}–{:.3} s of 0–{:.3} s; the truth gives the S/N of the part \
                 recorded, {recorded:.2} ({whole:.2} whole)",
                burst.t_inf_s,
                burst.dm,
                t(first),
                t(end),
                t(h.n_samples as i64),
            ));
        }
        recorded
    }

    fn add_rfi(&mut self, scenario: &Scenario) -> Result<()> {
        for nb in &scenario.rfi.narrowband {
            let h = &self.header;
            let half = nb.width_mhz.unwrap_or(0.0) / 2.0;
            let channels: Vec<usize> = (0..h.n_chan())
                .filter(|&c| {
                    let (lo, hi) = (
                        h.freqs_mhz[c] - h.chan_bw_mhz / 2.0,
                        h.freqs_mhz[c] + h.chan_bw_mhz / 2.0,
                    );
                    nb.freq_mhz + half >= lo && nb.freq_mhz - half < hi
                })
                .collect();
            self.truth.push(TruthRow {
                freq_mhz: Some(nb.freq_mhz),
                period_s: nb.modulation_period_s,
                strength: Some(nb.strength),
                ..self.empty_row(TruthKind::RfiNarrowband, 0.0)
            });
            self.carriers.push(Carrier {
                channels,
                strength: nb.strength,
                modulation_period_s: nb.modulation_period_s,
            });
        }
        for p in &scenario.rfi.impulse {
            self.add_impulse(
                TruthKind::RfiImpulse,
                p.t_s,
                p.width_ms,
                p.snr,
                Spectrum::PowerLaw { index: 0.0 },
                None,
            )?;
        }
        let length = self.header.duration_s();
        for t in &scenario.rfi.train {
            let spectrum = match (t.freq_lo_mhz, t.freq_hi_mhz) {
                (Some(lo), Some(hi)) => Spectrum::TopHat {
                    lo_mhz: lo,
                    hi_mhz: hi,
                },
                _ => Spectrum::PowerLaw { index: 0.0 },
            };
            let count = t.count.unwrap_or(usize::MAX);
            let mut time = t.first_s;
            let mut k = 0;
            while time < length && k < count {
                self.add_impulse(
                    TruthKind::RfiTrainPulse,
                    time,
                    t.width_ms,
                    t.snr,
                    spectrum,
                    Some(t.period_s),
                )?;
                k += 1;
                time = t.first_s + k as f64 * t.period_s;
            }
        }
        Ok(())
    }

    fn add_impulse(
        &mut self,
        kind: TruthKind,
        t_s: f64,
        width_ms: f64,
        snr: f64,
        spectrum: Spectrum,
        period_s: Option<f64>,
    ) -> Result<()> {
        let unit = Burst {
            t_inf_s: t_s,
            dm: 0.0,
            width_s: width_ms * 1e-3,
            scatter_1ghz_s: 0.0,
            spectrum,
            amplitude: 1.0,
        };
        let pulse = with_expected_snr(&self.header, &unit, snr)?;
        self.truth.push(TruthRow {
            dm: Some(0.0),
            width_ms: Some(width_ms),
            spectrum: Some(spectrum.describe()),
            expected_snr: Some(snr),
            period_s,
            ..self.empty_row(kind, t_s)
        });
        self.pulses.push(pulse);
        Ok(())
    }

    fn empty_row(&self, kind: TruthKind, t_s: f64) -> TruthRow {
        TruthRow {
            kind,
            t_inf_s: t_s,
            mjd_inf: self.header.start.plus_seconds(t_s).to_mjd_f64(),
            dm: None,
            width_ms: None,
            scatter_ms_1ghz: None,
            spectrum: None,
            expected_snr: None,
            fluence_jy_ms: None,
            freq_mhz: None,
            period_s: None,
            strength: None,
        }
    }
}

/// One random burst: unit amplitude plus its target S/N or fluence.
fn draw_burst(
    rng: &mut ChaCha8Rng,
    r: &RandomBurstsSpec,
    header: &Header,
) -> (Burst, Option<f64>, Option<f64>) {
    let uniform = |rng: &mut ChaCha8Rng, [lo, hi]: [f64; 2]| lo + (hi - lo) * rng.random::<f64>();
    let log_uniform = |rng: &mut ChaCha8Rng, [lo, hi]: [f64; 2]| {
        (lo.ln() + (hi.ln() - lo.ln()) * rng.random::<f64>()).exp()
    };
    let t_inf_s = uniform(rng, r.t_range_s);
    let dm = uniform(rng, r.dm_range);
    let width_ms = log_uniform(rng, r.width_ms_range);
    let scatter_ms = r.scatter_ms_1ghz_range.map_or(0.0, |s| log_uniform(rng, s));
    let spectrum = if rng.random::<f64>() < r.band_limited_fraction {
        let lo = header.freq_lo_mhz();
        Spectrum::Gaussian {
            centre_mhz: uniform(rng, [lo, header.freq_hi_mhz()]),
            fwhm_mhz: uniform(rng, r.envelope_fwhm_mhz_range.unwrap_or([100.0, 300.0])),
        }
    } else {
        Spectrum::PowerLaw {
            index: uniform(rng, r.spectral_index_range.unwrap_or([0.0, 0.0])),
        }
    };
    let snr = r.snr_range.map(|s| uniform(rng, s));
    let fluence = r.fluence_jy_ms_range.map(|f| log_uniform(rng, f));
    let burst = Burst {
        t_inf_s,
        dm,
        width_s: width_ms * 1e-3,
        scatter_1ghz_s: scatter_ms * 1e-3,
        spectrum,
        amplitude: 1.0,
    };
    (burst, snr, fluence)
}
