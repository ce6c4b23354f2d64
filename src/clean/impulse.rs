//! Clipping of strong broadband impulses: time samples whose band sum is far above
//! the noise are zeroed in every channel. Runs on normalised data (zero mean, unit
//! variance per channel), so zero is the baseline (common practice).
//!
//! A very bright pulse at a low DM also crosses the threshold in the band sum, but
//! it arrives later at lower frequencies, while interference at DM 0 arrives at once.
//! So before a hot sample is clipped, the band is cut into [`PROBE_PARTS`] runs of
//! adjacent channels and their sums are added along a few small dispersion sweeps:
//! when one of them collects clearly more than the undispersed sum
//! ([`PROTECT_RATIO`]), the sample belongs to a dispersed pulse and is kept.

use ndarray::{ArrayView2, ArrayViewMut2, s};
use rayon::prelude::*;

use crate::robust::median_sigma;
use crate::units::delay_between_s;

/// Runs of adjacent channels whose sums the dispersion test compares.
pub const PROBE_PARTS: usize = 8;

/// Sweeps tried by the dispersion test, samples between the centres of the top and
/// bottom runs: 2, 4, …, 64.
const PROBE_SWEEPS: [usize; 6] = [2, 4, 8, 16, 32, 64];

/// How much more a dispersed sweep must collect than the undispersed sum to spare a
/// sample: an impulse at DM 0 collects less along any sweep (its parts no longer line
/// up), and noise moves the ratio by about 1σ/6σ at the clipping threshold.
pub const PROTECT_RATIO: f32 = 1.2;

/// The band cut into runs of adjacent channels, and the delay of each run for each
/// probe sweep; tells a low-DM pulse from an undispersed impulse.
#[derive(Debug, Clone)]
pub struct DispersionProbe {
    /// Run of each channel (data order), 0 = highest frequencies.
    part_of: Vec<usize>,
    n_parts: usize,
    /// Per sweep, each run's delay from the top run, in samples.
    delays: Vec<Vec<usize>>,
}

impl DispersionProbe {
    /// The probe for channels at `freqs_mhz` (data order) sampled every `tsamp_s`.
    pub fn new(freqs_mhz: &[f64], tsamp_s: f64) -> Self {
        let n_chan = freqs_mhz.len();
        let mut order: Vec<usize> = (0..n_chan).collect();
        order.sort_by(|&a, &b| freqs_mhz[b].total_cmp(&freqs_mhz[a]));
        let runs: Vec<&[usize]> = order.chunks(n_chan.div_ceil(PROBE_PARTS).max(1)).collect();
        if runs.len() < 2 || tsamp_s <= 0.0 {
            return Self::none(n_chan);
        }
        let mut part_of = vec![0; n_chan];
        let mut centres = Vec::with_capacity(runs.len());
        for (k, run) in runs.iter().enumerate() {
            run.iter().for_each(|&c| part_of[c] = k);
            centres.push(run.iter().map(|&c| freqs_mhz[c]).sum::<f64>() / run.len() as f64);
        }
        let top = centres[0];
        let span_s = delay_between_s(1.0, centres[runs.len() - 1], top);
        if span_s <= 0.0 {
            return Self::none(n_chan);
        }
        let delays = PROBE_SWEEPS
            .iter()
            .map(|&sweep| {
                let dm = sweep as f64 * tsamp_s / span_s;
                centres
                    .iter()
                    .map(|&f| (delay_between_s(dm, f, top) / tsamp_s).round() as usize)
                    .collect()
            })
            .collect();
        DispersionProbe {
            part_of,
            n_parts: runs.len(),
            delays,
        }
    }

    /// A probe that spares nothing: every hot sample is clipped.
    pub fn none(n_chan: usize) -> Self {
        DispersionProbe {
            part_of: vec![0; n_chan],
            n_parts: 1,
            delays: Vec::new(),
        }
    }

    /// The longest sweep, samples.
    fn reach(&self) -> usize {
        self.delays.iter().flatten().copied().max().unwrap_or(0)
    }

    /// Sums of each run over samples `span` of `data` (`[channel, time]`),
    /// `[run][sample]`.
    fn part_sums(
        &self,
        data: ArrayView2<'_, f32>,
        mask: &[bool],
        span: std::ops::Range<usize>,
    ) -> Vec<f32> {
        let n = span.len();
        let mut sums = vec![0.0f32; self.n_parts * n];
        for (c, row) in data.rows().into_iter().enumerate() {
            if mask[c] {
                continue;
            }
            let part = &mut sums[self.part_of[c] * n..][..n];
            let row = row.slice_move(s![span.clone()]);
            part.iter_mut().zip(row).for_each(|(s, &v)| *s += v);
        }
        sums
    }

    /// Whether the hot sample `t` (index into `sums`, runs of `n` samples each) lies
    /// on a dispersed pulse: some sweep collects more than [`PROTECT_RATIO`] times
    /// the best undispersed sum within a sample of `t`.
    fn spares(&self, sums: &[f32], n: usize, t: usize) -> bool {
        let along = |delays: Option<&[usize]>, top: usize| -> Option<f32> {
            let mut total = 0.0;
            for k in 0..self.n_parts {
                let at = top + delays.map_or(0, |d| d[k]);
                total += *sums.get(k * n..(k + 1) * n)?.get(at)?;
            }
            Some(total)
        };
        let best = |delays: Option<&[usize]>, lo: usize, hi: usize| {
            (lo..=hi)
                .filter_map(|top| along(delays, top))
                .fold(f32::NEG_INFINITY, f32::max)
        };
        let undispersed = best(None, t.saturating_sub(1), t + 1);
        self.delays.iter().any(|d| {
            // The pulse's top run arrived up to one sweep before the hot sample.
            let sweep = d.last().copied().unwrap_or(0);
            let dispersed = best(Some(d), t.saturating_sub(sweep + 1), t + 1);
            dispersed > PROTECT_RATIO * undispersed
        })
    }
}

/// Zeroes every time sample of `data` (`[channel, time]`, normalised) from `first`
/// on whose sum over unmasked channels exceeds `threshold` robust σ of all such sums,
/// unless `probe` finds it on a dispersed pulse. The samples before `first` (rows
/// kept from the previous block, already clipped) are only looked at by the probe,
/// so a pulse that began there is still seen as dispersed. Returns the number of
/// samples zeroed; `threshold == 0` disables clipping.
pub fn clip(
    mut data: ArrayViewMut2<'_, f32>,
    first: usize,
    mask: &[bool],
    threshold: f64,
    probe: &DispersionProbe,
) -> usize {
    let n_time = data.ncols();
    if threshold == 0.0 || first >= n_time {
        return 0;
    }
    let sums = super::band_sum(data.slice(s![.., first..]), mask);
    let (med, sigma) = median_sigma(&sums, 1, &mut Vec::new());
    if sigma.is_nan() || sigma <= 0.0 {
        return 0;
    }
    let hot: Vec<usize> = (0..sums.len())
        .filter(|&t| f64::from((sums[t] - med) / sigma) > threshold)
        .map(|t| first + t)
        .collect();
    let hot = spare_dispersed(data.view(), mask, probe, hot);
    for mut row in data.rows_mut() {
        for &t in &hot {
            row[t] = 0.0;
        }
    }
    hot.len()
}

/// The samples of `hot` (ascending) that `probe` does not spare. Run sums are taken
/// only around hot samples: over their windows merged where they overlap, in
/// parallel.
fn spare_dispersed(
    data: ArrayView2<'_, f32>,
    mask: &[bool],
    probe: &DispersionProbe,
    hot: Vec<usize>,
) -> Vec<usize> {
    let reach = probe.reach();
    if reach == 0 || hot.is_empty() {
        return hot;
    }
    let n_time = data.ncols();
    let window = |t: usize| t.saturating_sub(reach + 1)..(t + reach + 2).min(n_time);
    let mut groups: Vec<(std::ops::Range<usize>, Vec<usize>)> = Vec::new();
    for t in hot {
        let w = window(t);
        match groups.last_mut() {
            Some((span, members)) if w.start <= span.end => {
                span.end = span.end.max(w.end);
                members.push(t);
            }
            _ => groups.push((w, vec![t])),
        }
    }
    groups
        .into_par_iter()
        .flat_map_iter(|(span, members)| {
            let sums = probe.part_sums(data, mask, span.clone());
            let n = span.len();
            members
                .into_iter()
                .filter(move |&t| !probe.spares(&sums, n, t - span.start))
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use rand::SeedableRng;
    use rand_distr::{Distribution, StandardNormal};

    #[test]
    fn zeroes_a_strong_impulse_and_nothing_else() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let mut d = Array2::from_shape_fn((32, 5000), |_| StandardNormal.sample(&mut rng));
        for c in 0..32 {
            d[[c, 1234]] += 5.0; // band sum S/N ≈ 5·32/√32 ≈ 28
        }
        let n = clip(
            d.view_mut(),
            0,
            &[false; 32],
            6.0,
            &DispersionProbe::none(32),
        );
        assert_eq!(
            n, 1,
            "Gaussian noise exceeds 6σ with probability 1e-9 per sample"
        );
        assert!(d.column(1234).iter().all(|&v| v == 0.0));
        assert_eq!(
            clip(
                d.view_mut(),
                0,
                &[false; 32],
                0.0,
                &DispersionProbe::none(32)
            ),
            0
        );
    }

    /// 256 channels over 1200–1600 MHz (descending), 256 µs samples.
    fn band() -> (Vec<f64>, f64) {
        let freqs = (0..256).map(|c| 1600.0 - 400.0 / 256.0 * (c as f64 + 0.5));
        (freqs.collect(), 256e-6)
    }

    // Impulses at DM 0 — one sample, and three samples long — are clipped with the
    // probe on, over many noise realisations; a pulse of the same band-sum brightness
    // at DM 1 and DM 4 pc cm⁻³ (sweeps of about 4 and 17 samples) is kept untouched.
    #[test]
    fn probe_spares_low_dm_pulses_but_not_impulses() {
        let (freqs, tsamp) = band();
        let probe = DispersionProbe::new(&freqs, tsamp);
        let n_chan = freqs.len();
        for seed in 0..20u64 {
            let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(seed);
            let noise = Array2::from_shape_fn((n_chan, 4000), |_| StandardNormal.sample(&mut rng));
            for len in [1usize, 3] {
                let mut d = noise.clone();
                for c in 0..n_chan {
                    for t in 2000..2000 + len {
                        d[[c, t]] += 0.6; // band sum ≈ 0.6·256/16 ≈ 9.6σ per sample
                    }
                }
                let n = clip(d.view_mut(), 0, &[false; 256], 6.0, &probe);
                assert!(n >= len, "seed {seed}, impulse of {len}: {n} clipped");
                assert!((2000..2000 + len).all(|t| d.column(t).iter().all(|&v| v == 0.0)));
            }
            for dm in [1.0, 4.0] {
                let mut d = noise.clone();
                for (c, &f) in freqs.iter().enumerate() {
                    let t = 2000 + (delay_between_s(dm, f, freqs[0]) / tsamp).round() as usize;
                    for v in d.row_mut(c).iter_mut().skip(t).take(2) {
                        *v += 1.5;
                    }
                }
                let before = d.clone();
                let n = clip(d.view_mut(), 0, &[false; 256], 6.0, &probe);
                assert_eq!(n, 0, "seed {seed}, DM {dm}: a dispersed pulse was clipped");
                assert_eq!(d, before);
            }
        }
    }

    #[test]
    fn probe_delays_grow_down_the_band_to_each_sweep() {
        let (freqs, tsamp) = band();
        let probe = DispersionProbe::new(&freqs, tsamp);
        assert_eq!(probe.n_parts, PROBE_PARTS);
        for (d, &sweep) in probe.delays.iter().zip(&PROBE_SWEEPS) {
            assert_eq!(d[0], 0);
            assert_eq!(*d.last().unwrap(), sweep);
            assert!(d.windows(2).all(|w| w[0] <= w[1]));
        }
        let few = DispersionProbe::new(&freqs[..3], tsamp);
        assert_eq!(few.n_parts, 3);
        assert_eq!(DispersionProbe::new(&freqs[..1], tsamp).reach(), 0);
        assert_eq!(DispersionProbe::new(&[], tsamp).reach(), 0);
    }

    // Only samples from `first` on are tested and zeroed: an impulse in the rows kept
    // from the previous block stays, one in the new rows goes; a low-DM pulse whose
    // sweep began in the kept rows is kept whole.
    #[test]
    fn only_new_rows_are_clipped_while_the_probe_sees_the_kept_ones() {
        let (freqs, tsamp) = band();
        let probe = DispersionProbe::new(&freqs, tsamp);
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(3);
        let noise = Array2::from_shape_fn((256, 4000), |_| StandardNormal.sample(&mut rng));
        let first = 2000;
        let mut d = noise.clone();
        for mut row in d.rows_mut() {
            row[1998] += 0.6;
            row[2001] += 0.6;
        }
        assert_eq!(clip(d.view_mut(), first, &[false; 256], 6.0, &probe), 1);
        assert!(d.column(1998).iter().all(|&v| v != 0.0));
        assert!(d.column(2001).iter().all(|&v| v == 0.0));
        let mut d = noise;
        for (c, &f) in freqs.iter().enumerate() {
            let t = 1995 + (delay_between_s(4.0, f, freqs[0]) / tsamp).round() as usize;
            for v in d.row_mut(c).iter_mut().skip(t).take(2) {
                *v += 6.0;
            }
        }
        let before = d.clone();
        assert_eq!(clip(d.view_mut(), first, &[false; 256], 6.0, &probe), 0);
        assert_eq!(d, before);
    }
}
