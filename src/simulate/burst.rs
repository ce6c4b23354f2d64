//! A dispersed, scattered burst and its contribution to each channel and sample.
//!
//! Signal units: the model is in units of each channel's noise standard deviation σ_c
//! (one sample, before quantisation). [`add_burst`] multiplies by a per-channel scale,
//! normally σ_c of the data, so the same [`Burst`] means the same S/N in any data.

use serde::{Deserialize, Serialize};

use super::profile::{Emg, FWHM_PER_SIGMA};
use crate::obs::{Block, Header};
use crate::units::delay_to_infinity_s;

/// Most sub-frequencies used to resolve the dispersion sweep inside one channel.
const MAX_SUB_FREQS: usize = 8192;

/// Spectral shape of a burst, a multiplier on its amplitude at each frequency.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case", deny_unknown_fields)]
pub enum Spectrum {
    /// (ν / ν_ref)^index, with ν_ref the centre of the header's band
    /// ((lowest + highest channel centre) / 2). Index 0 is a flat spectrum.
    PowerLaw { index: f64 },
    /// Band-limited Gaussian envelope, 1 at `centre_mhz`, full width at half
    /// maximum `fwhm_mhz`.
    Gaussian { centre_mhz: f64, fwhm_mhz: f64 },
    /// 1 between `lo_mhz` and `hi_mhz`, 0 outside (used for band-limited interference).
    TopHat { lo_mhz: f64, hi_mhz: f64 },
}

impl Spectrum {
    /// The multiplier at `freq_mhz` for a band whose centre is `ref_mhz`.
    pub fn gain(&self, freq_mhz: f64, ref_mhz: f64) -> f64 {
        match *self {
            Spectrum::PowerLaw { index } => (freq_mhz / ref_mhz).powf(index),
            Spectrum::Gaussian {
                centre_mhz,
                fwhm_mhz,
            } => {
                let z = (freq_mhz - centre_mhz) / (fwhm_mhz / FWHM_PER_SIGMA);
                (-0.5 * z * z).exp()
            }
            Spectrum::TopHat { lo_mhz, hi_mhz } => {
                if (lo_mhz..=hi_mhz).contains(&freq_mhz) {
                    1.0
                } else {
                    0.0
                }
            }
        }
    }

    /// Checks that the shape is a real one: a finite index, a finite centre and a
    /// width > 0, or a top hat with `lo_mhz` < `hi_mhz`.
    ///
    /// # Errors
    /// A one-line message naming the bad value.
    pub fn check(&self) -> Result<(), String> {
        match *self {
            Spectrum::PowerLaw { index } if !index.is_finite() => {
                Err(format!("power_law index must be finite, got {index}"))
            }
            Spectrum::Gaussian {
                centre_mhz,
                fwhm_mhz,
            } if !(centre_mhz.is_finite() && fwhm_mhz.is_finite() && fwhm_mhz > 0.0) => {
                Err(format!(
                    "gaussian needs a finite centre_mhz and fwhm_mhz > 0, got {centre_mhz} and {fwhm_mhz}"
                ))
            }
            Spectrum::TopHat { lo_mhz, hi_mhz }
                if !(lo_mhz.is_finite() && hi_mhz.is_finite() && lo_mhz < hi_mhz) =>
            {
                Err(format!(
                    "top_hat lo_mhz must be < hi_mhz, got lo_mhz {lo_mhz} and hi_mhz {hi_mhz}"
                ))
            }
            _ => Ok(()),
        }
    }

    /// A short description without commas (for CSV), e.g. `power_law(index=-1.5)`.
    pub fn describe(&self) -> String {
        match *self {
            Spectrum::PowerLaw { index } => format!("power_law(index={index})"),
            Spectrum::Gaussian {
                centre_mhz,
                fwhm_mhz,
            } => format!("gaussian(centre_mhz={centre_mhz};fwhm_mhz={fwhm_mhz})"),
            Spectrum::TopHat { lo_mhz, hi_mhz } => {
                format!("top_hat(lo_mhz={lo_mhz};hi_mhz={hi_mhz})")
            }
        }
    }
}

/// One burst as it arrives at the telescope.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Burst {
    /// Arrival time at infinite frequency, seconds after the leading edge of sample 0.
    pub t_inf_s: f64,
    /// Dispersion measure in pc cm⁻³.
    pub dm: f64,
    /// Intrinsic Gaussian full width at half maximum in seconds (0 = unresolved).
    pub width_s: f64,
    /// Scattering time at 1 GHz in seconds; τ(ν) = τ_1GHz · (ν / 1000 MHz)⁻⁴.
    pub scatter_1ghz_s: f64,
    /// Spectral shape.
    pub spectrum: Spectrum,
    /// Time-integrated signal in a channel where the spectrum is 1, in units of that
    /// channel's per-sample noise σ times one sample: a pulse falling wholly in one
    /// sample of such a channel raises that sample by `amplitude` σ.
    pub amplitude: f64,
}

impl Burst {
    /// Scattering time in seconds at `freq_mhz` (thin-screen ν⁻⁴ law).
    pub fn scatter_s(&self, freq_mhz: f64) -> f64 {
        self.scatter_1ghz_s * (freq_mhz / 1000.0).powi(-4)
    }

    /// The same burst with `amplitude` multiplied by `factor`.
    pub fn scaled(&self, factor: f64) -> Burst {
        Burst {
            amplitude: self.amplitude * factor,
            ..*self
        }
    }

    /// Sample range `[first, end)` (may be negative or past the file) outside which
    /// the burst adds less than ~1e-10 of its area in any channel of `header`.
    pub fn sample_span(&self, header: &Header) -> (i64, i64) {
        let half = header.chan_bw_mhz / 2.0;
        let f_lo = (header.freq_lo_mhz() - half).max(1e-3);
        let f_hi = header.freq_hi_mhz() + half;
        let shape = Emg {
            sigma_s: self.width_s / FWHM_PER_SIGMA,
            tau_s: self.scatter_s(f_lo),
        };
        let (lo, hi) = shape.support_s();
        let t0 = self.t_inf_s + delay_to_infinity_s(self.dm, f_hi) + lo;
        let t1 = self.t_inf_s + delay_to_infinity_s(self.dm, f_lo) + hi;
        // Saturating: an absurd burst (checked by the callers) must not overflow.
        (
            ((t0 / header.tsamp_s).floor() as i64).saturating_sub(1),
            ((t1 / header.tsamp_s).ceil() as i64).saturating_add(1),
        )
    }
}

/// How one channel sees a burst: the pulse shape and the arrival times, relative to
/// the sample grid, of the sub-frequencies that resolve the sweep across the channel.
pub(crate) struct ChannelModel {
    shape: Emg,
    /// Arrival time (s) of the Gaussian centre at each sub-frequency.
    arrivals_s: Vec<f64>,
    /// Amplitude per sub-frequency (σ·samples): amplitude × spectrum / count.
    weight: f64,
}

impl ChannelModel {
    /// The model of channel `chan`; `shift_s` is subtracted from every arrival time
    /// (0 for the data as recorded, the channel-centre delay for ideal dedispersion).
    pub(crate) fn new(header: &Header, burst: &Burst, chan: usize, shift_s: f64) -> Self {
        let f_c = header.freqs_mhz[chan];
        let bw = header.chan_bw_mhz;
        let ref_mhz = 0.5 * (header.freq_lo_mhz() + header.freq_hi_mhz());
        let shape = Emg {
            sigma_s: burst.width_s / FWHM_PER_SIGMA,
            tau_s: burst.scatter_s(f_c),
        };
        // Sub-frequency spacing: each step of the sweep moves the pulse by at most
        // 1/8 of the larger of the sample time and the Gaussian σ, so sample
        // integration (or the pulse itself) blurs the steps away.
        let sweep_s = (delay_to_infinity_s(burst.dm, (f_c - bw / 2.0).max(1e-3))
            - delay_to_infinity_s(burst.dm, f_c + bw / 2.0))
        .abs();
        let step_s = header.tsamp_s.max(shape.sigma_s) / 8.0;
        let n_sub = ((sweep_s / step_s).ceil() as usize).clamp(1, MAX_SUB_FREQS);
        let arrivals_s = (0..n_sub)
            .map(|k| {
                let f = f_c - bw / 2.0 + bw * (k as f64 + 0.5) / n_sub as f64;
                burst.t_inf_s + delay_to_infinity_s(burst.dm, f) - shift_s
            })
            .collect();
        ChannelModel {
            shape,
            arrivals_s,
            weight: burst.amplitude * burst.spectrum.gain(f_c, ref_mhz) / n_sub as f64,
        }
    }

    /// Earliest and latest arrival time over the sub-frequencies.
    fn arrival_range_s(&self) -> (f64, f64) {
        self.arrivals_s
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &a| {
                (lo.min(a), hi.max(a))
            })
    }

    /// Sample range `[first, end)` outside which this channel gets (almost) nothing.
    pub(crate) fn sample_span(&self, tsamp_s: f64) -> (i64, i64) {
        let (lo, hi) = self.shape.support_s();
        let (first, last) = self.arrival_range_s();
        (
            ((first + lo) / tsamp_s).floor() as i64,
            ((last + hi) / tsamp_s).ceil() as i64 + 1,
        )
    }

    /// Adds the channel's signal (σ units times `scale`) integrated over samples
    /// `first_sample ..` into `out[i * stride]`, for `out.len() / stride` samples
    /// (rounded up). Each sample gets the mean of the signal over its duration.
    ///
    /// Sub-frequency k, arriving at a_k, gives sample i F(e_{i+1} − a_k) − F(e_i − a_k)
    /// for sample edges e. Once e_i is in its exponential tail, where 1 − F(x) =
    /// R(x) = exp(σ²/2τ² − x/τ), that is (1 − e^{−T/τ})·R(e_i − a_k): the previous
    /// sample's value times e^{−T/τ}. So each sub-frequency is differenced edge by
    /// edge only up to its tail, where it leaves R at that sample, and one pass
    /// over the samples carries all the tails on with a multiply each: the tail,
    /// many scattering times long, no longer costs an erfc and an exp per sample and
    /// sub-frequency, nor does the rest of the sweep after a sub-frequency's pulse.
    pub(crate) fn add_into(
        &self,
        tsamp_s: f64,
        first_sample: i64,
        out: &mut [f32],
        stride: usize,
        scale: f64,
    ) {
        if self.weight == 0.0 || scale == 0.0 {
            return;
        }
        let n = out.len().div_ceil(stride);
        let mut acc = vec![0.0f64; n];
        let tail_start = self.shape.exp_tail_start_s();
        // Remainders R left by the sub-frequencies whose tails start at each sample.
        let mut tails = vec![0.0f64; if tail_start.is_some() { n } else { 0 }];
        let edge_s = |i: usize| (first_sample + i as i64) as f64 * tsamp_s;
        let index = |sample: i64| (sample - first_sample).clamp(0, n as i64) as usize;
        let (lo, hi) = self.shape.support_s();
        for &a in &self.arrivals_s {
            let i0 = index(((a + lo) / tsamp_s).floor() as i64);
            // Past its support this sub-frequency adds (almost exactly) nothing.
            let mut i1 = index(((a + hi) / tsamp_s).ceil() as i64 + 1);
            if let Some(x) = tail_start {
                let j = index(((a + x) / tsamp_s).ceil() as i64);
                if j < i1 {
                    tails[j] += self.shape.tail_remainder(edge_s(j) - a);
                    i1 = j;
                }
            }
            let mut prev = self.shape.cdf(edge_s(i0) - a);
            for (i, v) in acc.iter_mut().enumerate().take(i1).skip(i0) {
                let next = self.shape.cdf(edge_s(i + 1) - a);
                *v += next - prev;
                prev = next;
            }
        }
        if !tails.is_empty() {
            let ratio = (-tsamp_s / self.shape.tau_s).exp();
            let loss = -(-tsamp_s / self.shape.tau_s).exp_m1();
            let mut remainder = 0.0;
            for (v, &r) in acc.iter_mut().zip(&tails) {
                remainder = remainder * ratio + r;
                *v += loss * remainder;
            }
        }
        let w = self.weight * scale;
        for (i, v) in acc.into_iter().enumerate() {
            out[i * stride] += (v * w) as f32;
        }
    }

    /// The plain sum that [`ChannelModel::add_into`] speeds up, kept to test it
    /// against: the distribution function differenced at both edges of every sample
    /// in each sub-frequency's support.
    #[cfg(test)]
    fn add_into_reference(
        &self,
        tsamp_s: f64,
        first_sample: i64,
        out: &mut [f32],
        stride: usize,
        scale: f64,
    ) {
        if self.weight == 0.0 || scale == 0.0 {
            return;
        }
        let n = out.len().div_ceil(stride);
        let mut acc = vec![0.0f64; n];
        let (lo, hi) = self.shape.support_s();
        for &a in &self.arrivals_s {
            // Outside its support this sub-frequency adds (almost exactly) nothing.
            let i0 =
                (((a + lo) / tsamp_s).floor() as i64 - first_sample).clamp(0, n as i64) as usize;
            let i1 =
                (((a + hi) / tsamp_s).ceil() as i64 + 1 - first_sample).clamp(0, n as i64) as usize;
            let mut prev = self
                .shape
                .cdf((first_sample + i0 as i64) as f64 * tsamp_s - a);
            for (i, v) in acc.iter_mut().enumerate().take(i1).skip(i0) {
                let next = self
                    .shape
                    .cdf((first_sample + i as i64 + 1) as f64 * tsamp_s - a);
                *v += next - prev;
                prev = next;
            }
        }
        let w = self.weight * scale;
        for (i, v) in acc.into_iter().enumerate() {
            out[i * stride] += (v * w) as f32;
        }
    }
}

/// Adds `burst` to whatever part of it falls inside `block` (rows
/// `block.start_sample ..`), in every channel with a non-zero `chan_scale`.
///
/// The signal of channel `c` is the burst model in units of σ (see [`Burst`])
/// times `chan_scale[c]`; pass each channel's noise standard deviation so the burst
/// has its intended S/N, or all ones for data already normalised to unit variance.
/// Works for ascending or descending bands and any sample time. Masked channels
/// (weight 0) are treated like any other: give them scale 0 to leave them untouched.
///
/// # Panics
/// If `chan_scale` or the block's row length differ from the header's channel count.
pub fn add_burst(block: &mut Block, header: &Header, burst: &Burst, chan_scale: &[f32]) {
    let n_chan = header.n_chan();
    assert_eq!(block.n_chan, n_chan, "block and header channel counts");
    assert_eq!(chan_scale.len(), n_chan, "one scale per channel");
    let (span_first, span_end) = burst.sample_span(header);
    let b_first = block.start_sample as i64;
    let b_end = b_first + block.n_time() as i64;
    if span_end <= b_first || span_first >= b_end {
        return;
    }
    for (c, &scale) in chan_scale.iter().enumerate() {
        if scale == 0.0 {
            continue;
        }
        let model = ChannelModel::new(header, burst, c, 0.0);
        let (first, end) = model.sample_span(header.tsamp_s);
        let (first, end) = (first.max(b_first), end.min(b_end));
        if first >= end {
            continue;
        }
        let offset = (first - b_first) as usize * n_chan + c;
        let len = (end - first - 1) as usize * n_chan + 1;
        model.add_into(
            header.tsamp_s,
            first,
            &mut block.data[offset..offset + len],
            n_chan,
            f64::from(scale),
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::simulate::test_header;
    use rand::{Rng, SeedableRng};
    use rand_chacha::ChaCha8Rng;

    fn flat(dm: f64, t_inf_s: f64, width_s: f64) -> Burst {
        Burst {
            t_inf_s,
            dm,
            width_s,
            scatter_1ghz_s: 0.0,
            spectrum: Spectrum::PowerLaw { index: 0.0 },
            amplitude: 10.0,
        }
    }

    fn render(header: &Header, burst: &Burst) -> Block {
        let mut block = Block {
            start_sample: 0,
            overlap: 0,
            n_chan: header.n_chan(),
            data: vec![0.0; header.n_samples as usize * header.n_chan()],
        };
        add_burst(&mut block, header, burst, &vec![1.0; header.n_chan()]);
        block
    }

    // Cold-plasma sweep (Lorimer & Kramer 2005, Handbook of Pulsar Astronomy, eq. 4.7
    // convention, k = 4.148808e3 s MHz² pc⁻¹ cm³): each channel's brightest sample
    // contains t_inf + k·DM/ν², for both band orientations.
    #[test]
    fn brightest_sample_follows_dispersion_law() {
        for descending in [true, false] {
            let mut h = test_header(128, 2000);
            h.tsamp_s = 5e-4;
            if !descending {
                h.freqs_mhz.reverse();
            }
            let b = flat(300.0, 0.05, 2e-3);
            let block = render(&h, &b);
            for c in 0..h.n_chan() {
                let expect = (b.t_inf_s + 4.148808e3 * b.dm / h.freqs_mhz[c].powi(2)) / h.tsamp_s;
                let col: Vec<f32> = (0..block.n_time()).map(|t| block.row(t)[c]).collect();
                let peak = (0..col.len())
                    .max_by(|&a, &b| col[a].total_cmp(&col[b]))
                    .unwrap();
                assert!(
                    (peak as f64 - expect).abs() <= 1.0,
                    "chan {c}: peak {peak}, expected {expect}"
                );
                // Each channel carries the whole time-integrated amplitude.
                let total: f64 = col.iter().map(|&v| f64::from(v)).sum();
                assert!((total - 10.0).abs() < 1e-3, "chan {c}: {total}");
            }
        }
    }

    // Intra-channel smearing: an unresolved pulse at DM 500 in the 1200.000–1200.391 MHz
    // channel sweeps across it in exactly k·DM·(ν_lo⁻² − ν_hi⁻²) = 937.41 µs (Lorimer &
    // Kramer 2005; 8.3 µs·DM·Δν/ν³ to first order, Cordes & McLaughlin 2003, ApJ 596,
    // 1142), so at 10 µs sampling it fills ~94 samples at a level of amplitude/93.741.
    #[test]
    fn unresolved_pulse_fills_the_channel_smearing_time() {
        let mut h = test_header(1, 3000);
        h.freqs_mhz = vec![1200.0 + 0.390625 / 2.0];
        h.chan_bw_mhz = 0.390625;
        h.tsamp_s = 10e-6;
        let b = Burst {
            t_inf_s: 5e-3 - delay_to_infinity_s(500.0, 1200.390625),
            ..flat(500.0, 0.0, 0.0)
        };
        let block = render(&h, &b);
        let smear = crate::units::delay_between_s(500.0, 1200.0, 1200.390625);
        assert!((smear - 937.41e-6).abs() < 0.01e-6);
        let level = 10.0 * h.tsamp_s / smear;
        let full: Vec<f32> = block
            .data
            .iter()
            .copied()
            .filter(|&v| f64::from(v) > 0.5 * level)
            .collect();
        assert!((92..=95).contains(&full.len()), "{} samples", full.len());
        for &v in &full[1..full.len() - 1] {
            assert!((f64::from(v) / level - 1.0).abs() < 0.02, "{v} vs {level}");
        }
    }

    #[test]
    fn blocks_add_up_to_the_whole() {
        let mut h = test_header(16, 3000);
        h.weights[3] = 0.0;
        let b = Burst {
            scatter_1ghz_s: 2e-3,
            spectrum: Spectrum::Gaussian {
                centre_mhz: 1400.0,
                fwhm_mhz: 150.0,
            },
            ..flat(50.0, 0.01, 1e-3)
        };
        let whole = render(&h, &b);
        let mut pieced = Vec::new();
        let mut start = 0;
        for len in [7usize, 1000, 1, 1992] {
            let mut block = Block {
                start_sample: start,
                overlap: 0,
                n_chan: 16,
                data: vec![0.0; len * 16],
            };
            add_burst(&mut block, &h, &b, &[1.0; 16]);
            pieced.extend(block.data);
            start += len as u64;
        }
        let max_diff = whole
            .data
            .iter()
            .zip(&pieced)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0f32, f32::max);
        assert!(max_diff < 1e-6, "{max_diff}");
        assert!(whole.data.iter().any(|&v| v > 0.01));
    }

    // The fast sum against the plain one on random bursts, bands (either order),
    // sample times, dedispersion shifts and windows, strided as in a block. Pulse
    // sizes are drawn in samples (log-uniform sweep, σ and τ up to 100 samples, each
    // sometimes 0) to keep the plain sum cheap. Tolerance: 1e-6 of the channel's
    // brightest sample. Both round each sample to f32 (6e-8 of the peak at most),
    // the tail recursion is exact to ~1e-15 of the area (`exponential_tail_matches_cdf`)
    // and the plain sum's support cut drops < 1e-10 of it, while mistakes such as a
    // tail started inside the Gaussian core, a wrong tail level or ratio, or an edge
    // off by a sample, are orders of magnitude larger.
    #[test]
    fn fast_sum_matches_reference() {
        let mut rng = ChaCha8Rng::seed_from_u64(20261204);
        let log_samples = |rng: &mut ChaCha8Rng, tsamp_s: f64| {
            if rng.random_bool(0.15) {
                0.0
            } else {
                tsamp_s * 10f64.powf(rng.random_range(-2.0..2.0))
            }
        };
        for trial in 0..300 {
            let n_chan = rng.random_range(1..=16);
            let mut h = test_header(n_chan, 1);
            let lo_mhz = 10f64.powf(rng.random_range(2.0..3.8));
            h.chan_bw_mhz = lo_mhz * rng.random_range(0.02..0.6) / n_chan as f64;
            h.freqs_mhz = (0..n_chan)
                .map(|c| lo_mhz + h.chan_bw_mhz * (c as f64 + 0.5))
                .collect();
            if rng.random_bool(0.5) {
                h.freqs_mhz.reverse();
            }
            h.tsamp_s = 10f64.powf(rng.random_range(-5.0..-2.5));
            let chan = rng.random_range(0..n_chan);
            let f_c = h.freqs_mhz[chan];
            let (sweep_s, sigma_s, tau_s) = (
                log_samples(&mut rng, h.tsamp_s),
                log_samples(&mut rng, h.tsamp_s),
                log_samples(&mut rng, h.tsamp_s),
            );
            let half = h.chan_bw_mhz / 2.0;
            let burst = Burst {
                t_inf_s: rng.random_range(0.0..2.0),
                dm: sweep_s
                    / (delay_to_infinity_s(1.0, f_c - half) - delay_to_infinity_s(1.0, f_c + half)),
                width_s: sigma_s * FWHM_PER_SIGMA,
                scatter_1ghz_s: tau_s * (f_c / 1000.0).powi(4),
                spectrum: Spectrum::PowerLaw { index: -1.0 },
                amplitude: rng.random_range(1.0..100.0),
            };
            let shift_s = if rng.random_bool(0.5) {
                delay_to_infinity_s(burst.dm, f_c)
            } else {
                0.0
            };
            let model = ChannelModel::new(&h, &burst, chan, shift_s);
            let (first, end) = model.sample_span(h.tsamp_s);
            let mut whole = vec![0.0f32; (end - first) as usize];
            model.add_into_reference(h.tsamp_s, first, &mut whole, 1, 1.0);
            let peak = whole.iter().copied().fold(0.0f32, f32::max);
            let start = rng.random_range(first - 5..end);
            let len = rng.random_range(1..=(end - start + 5) as usize);
            let stride = rng.random_range(1..=3);
            let scale = rng.random_range(0.5..20.0);
            let (mut fast, mut plain) = (vec![0.0f32; (len - 1) * stride + 1], Vec::new());
            plain.clone_from(&fast);
            model.add_into(h.tsamp_s, start, &mut fast, stride, scale);
            model.add_into_reference(h.tsamp_s, start, &mut plain, stride, scale);
            let worst = fast
                .iter()
                .zip(&plain)
                .map(|(a, b)| (a - b).abs())
                .fold(0.0f32, f32::max);
            assert!(
                worst <= 1e-6 * peak * scale as f32,
                "trial {trial}: {burst:?} in {f_c} MHz ({} MHz wide), {} s samples: \
                 off by {worst} of peak {peak}",
                h.chan_bw_mhz,
                h.tsamp_s
            );
        }
    }

    #[test]
    fn zero_scale_leaves_channel_untouched() {
        let h = test_header(4, 500);
        let mut block = Block {
            start_sample: 0,
            overlap: 0,
            n_chan: 4,
            data: vec![0.0; 2000],
        };
        add_burst(
            &mut block,
            &h,
            &flat(10.0, 0.005, 0.0),
            &[1.0, 0.0, 2.0, 1.0],
        );
        let col = |c: usize| -> f32 { (0..500).map(|t| block.row(t)[c]).sum() };
        assert_eq!(col(1), 0.0);
        assert!((col(2) - 20.0).abs() < 1e-3 && (col(0) - 10.0).abs() < 1e-3);
    }
}
