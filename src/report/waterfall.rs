//! The arrays behind the waterfall and profile panels: a normalised stretch shifted
//! to one DM, binned in time and grouped into a readable number of sub-bands.

use super::stretch::Normalised;
use crate::dedisperse::channel_delays;

/// What to cut out: columns of `bin` samples starting at sample `start` of the stretch
/// (`start` counts from the stretch's first row and is the arrival at the top channel).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Window {
    pub start: usize,
    pub bin: usize,
    pub n_cols: usize,
}

/// A dedispersed dynamic spectrum and its band-summed profile.
#[derive(Debug, Clone, PartialEq)]
pub struct Waterfall {
    /// Centre frequency in MHz of each sub-band, highest first (row 0 is the top of the band).
    pub band_freqs_mhz: Vec<f64>,
    /// `[band, column]`, each value in units of its own noise σ; NaN where every channel
    /// of the sub-band is masked or dead.
    pub data: Vec<f32>,
    /// Band sum per column in units of its noise σ (S/N per column).
    pub profile: Vec<f32>,
    /// Columns per row.
    pub n_cols: usize,
}

impl Waterfall {
    /// Number of sub-bands (rows).
    pub fn n_bands(&self) -> usize {
        self.band_freqs_mhz.len()
    }

    /// Value at sub-band `band`, column `col`.
    pub fn at(&self, band: usize, col: usize) -> f32 {
        self.data[band * self.n_cols + col]
    }
}

/// Shifts every channel of `input` by its delay at `dm` (pc cm⁻³), sums `window.bin`
/// samples per column and averages channels into at most `max_bands` sub-bands of
/// adjacent frequencies.
///
/// # Panics
/// If the stretch is too short for the window plus the largest delay (a caller bug).
pub fn build(
    input: &Normalised,
    freqs_mhz: &[f64],
    tsamp_s: f64,
    dm: f64,
    window: Window,
    max_bands: usize,
) -> Waterfall {
    let n_chan = freqs_mhz.len();
    let delays = channel_delays(freqs_mhz, dm, tsamp_s);
    let needed = window.start + window.n_cols * window.bin + delays.iter().max().unwrap_or(&0);
    assert!(
        input.data.ncols() >= needed,
        "stretch shorter than the window"
    );

    // Channels from the top of the band down, cut into near-equal runs.
    let mut order: Vec<usize> = (0..n_chan).collect();
    order.sort_by(|&a, &b| freqs_mhz[b].total_cmp(&freqs_mhz[a]));
    let n_bands = max_bands.clamp(1, n_chan.max(1));

    let mut data = vec![f32::NAN; n_bands * window.n_cols];
    let mut band_freqs_mhz = Vec::with_capacity(n_bands);
    let mut profile = vec![0.0f64; window.n_cols];
    let mut n_live_total = 0usize;
    for band in 0..n_bands {
        let members = &order[band * n_chan / n_bands..(band + 1) * n_chan / n_bands];
        let centre = members.iter().map(|&c| freqs_mhz[c]).sum::<f64>() / members.len() as f64;
        band_freqs_mhz.push(centre);
        let live: Vec<usize> = members.iter().copied().filter(|&c| input.live[c]).collect();
        if live.is_empty() {
            continue;
        }
        n_live_total += live.len();
        let row = &mut data[band * window.n_cols..(band + 1) * window.n_cols];
        for (col, out) in row.iter_mut().enumerate() {
            let t0 = window.start + col * window.bin;
            let sum: f64 = live
                .iter()
                .map(|&c| {
                    let series = input.data.row(c);
                    let s = t0 + delays[c];
                    (s..s + window.bin).map(|i| series[i] as f64).sum::<f64>()
                })
                .sum();
            profile[col] += sum;
            // Independent unit-σ samples: the sum's σ is √(channels × samples).
            *out = (sum / ((live.len() * window.bin) as f64).sqrt()) as f32;
        }
    }
    let norm = ((n_live_total * window.bin) as f64).sqrt().max(1.0);
    Waterfall {
        band_freqs_mhz,
        data,
        profile: profile.iter().map(|&p| (p / norm) as f32).collect(),
        n_cols: window.n_cols,
    }
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::obs::Block;
    use crate::report::stretch::normalise;
    use rand::SeedableRng;
    use rand_chacha::ChaCha8Rng;
    use rand_distr::{Distribution, Normal};

    /// A top-hat test pulse: starts at the top channel at sample `t_top`, dispersed at
    /// `dm`, `width` samples wide, `amp` noise σ high.
    pub(crate) struct Pulse {
        pub t_top: usize,
        pub dm: f64,
        pub width: usize,
        pub amp: f32,
    }

    /// Unit Gaussian noise (offset 10) `[time, chan]` with `pulse` added.
    pub(crate) fn noisy_burst(
        freqs: &[f64],
        tsamp: f64,
        n_time: usize,
        pulse: Pulse,
        seed: u64,
    ) -> Block {
        let Pulse {
            t_top,
            dm,
            width,
            amp,
        } = pulse;
        let n_chan = freqs.len();
        let mut rng = ChaCha8Rng::seed_from_u64(seed);
        let noise = Normal::new(0.0f32, 1.0).unwrap();
        let mut data: Vec<f32> = (0..n_time * n_chan)
            .map(|_| 10.0 + noise.sample(&mut rng))
            .collect();
        for (c, d) in channel_delays(freqs, dm, tsamp).into_iter().enumerate() {
            for t in t_top + d..(t_top + d + width).min(n_time) {
                data[t * n_chan + c] += amp;
            }
        }
        Block {
            start_sample: 0,
            overlap: 0,
            n_chan,
            data,
        }
    }

    pub(crate) use crate::obs::{band, test_header};

    #[test]
    fn dedispersed_burst_lines_up_in_every_band_at_its_time() {
        let (tsamp, dm) = (1e-3, 300.0);
        let freqs = band(64);
        let block = noisy_burst(
            &freqs,
            tsamp,
            2000,
            Pulse {
                t_top: 700,
                dm,
                width: 4,
                amp: 3.0,
            },
            1,
        );
        let mut weights = vec![1.0; 64];
        weights[8..12].fill(0.0); // exactly sub-band 2 of 16
        let input = normalise(&block, &weights);
        let window = Window {
            start: 600,
            bin: 2,
            n_cols: 100,
        };
        let w = build(&input, &freqs, tsamp, dm, window, 16);
        assert_eq!((w.n_bands(), w.n_cols), (16, 100));
        assert!(w.band_freqs_mhz.windows(2).all(|p| p[0] > p[1]));
        // Pulse starts at sample 700 = column 50 and fills columns 50 and 51.
        for b in (0..16).filter(|&b| b != 2) {
            let row: Vec<f32> = (0..100).map(|c| w.at(b, c)).collect();
            let peak = (0..100).max_by(|&i, &j| row[i].total_cmp(&row[j])).unwrap();
            assert!(peak == 50 || peak == 51, "band {b} peaks at {peak}");
            assert!(row[peak] > 6.0, "4 channels × 2 samples × 3σ / √8 ≈ 8.5σ");
        }
        assert!((0..100).all(|c| w.at(2, c).is_nan()), "masked band is NaN");
        let p = &w.profile;
        let peak = (0..100).max_by(|&i, &j| p[i].total_cmp(&p[j])).unwrap();
        assert!(
            (50..=51).contains(&peak) && p[peak] > 25.0,
            "{peak} {}",
            p[peak]
        );
    }

    #[test]
    fn at_dm_zero_the_burst_follows_the_dispersion_sweep() {
        let (tsamp, dm) = (1e-3, 300.0);
        let freqs = band(64);
        let block = noisy_burst(
            &freqs,
            tsamp,
            2000,
            Pulse {
                t_top: 300,
                dm,
                width: 4,
                amp: 8.0,
            },
            2,
        );
        let input = normalise(&block, &[1.0; 64]);
        let window = Window {
            start: 0,
            bin: 1,
            n_cols: 1000,
        };
        let w = build(&input, &freqs, tsamp, 0.0, window, 64);
        for (c, &f) in freqs.iter().enumerate().step_by(7) {
            let row: Vec<f32> = (0..1000).map(|t| w.at(c, t)).collect();
            let peak = (0..1000)
                .max_by(|&i, &j| row[i].total_cmp(&row[j]))
                .unwrap();
            let expected = 300.0 + crate::units::delay_between_s(dm, f, freqs[0]) / tsamp;
            assert!(
                (peak as f64 - expected).abs() <= 4.0,
                "channel {c}: {peak} vs {expected}"
            );
        }
    }
}
