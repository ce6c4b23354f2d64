//! Spectral kurtosis (Nita & Gary 2010, PASP 122, 595), in the generalised form for
//! power samples that are each the sum of N raw spectra with shape factor d
//! (Nita & Gary 2010, MNRAS 406, L60):
//!
//! SK = (M·N·d + 1)/(M − 1) · (M·S₂/S₁² − 1), with S₁ = ΣPᵢ, S₂ = ΣPᵢ² over M samples.
//!
//! For Gaussian noise the mean of SK is 1; its variance and third central moment are known in
//! closed form (same papers), and the distribution is skewed, so the flagging
//! thresholds are asymmetric: quantiles of the Pearson type III curve (a shifted gamma
//! distribution) with those first three moments.

use statrs::distribution::{ContinuousCDF, Gamma, Normal};

use super::run_sums::RunSums;
use crate::robust::median_in_place;

/// Variance of SK for Gaussian noise with `m` samples and shape `nd` = N·d.
pub fn sk_variance(m: f64, nd: f64) -> f64 {
    let mn = m * nd;
    2.0 * nd * (nd + 1.0) * m * m / ((m - 1.0) * (mn + 2.0) * (mn + 3.0))
}

/// Third central moment of SK for Gaussian noise (Nita & Gary 2010, MNRAS 406, L60).
pub fn sk_third_moment(m: f64, nd: f64) -> f64 {
    let mn = m * nd;
    8.0 * nd * (nd + 1.0) * m.powi(3) * ((nd + 4.0) * mn - 5.0 * nd - 2.0)
        / ((m - 1.0).powi(2) * (mn + 2.0) * (mn + 3.0) * (mn + 4.0) * (mn + 5.0))
}

/// The generalised SK estimator from the sums `s1` = ΣP and `s2` = ΣP² of `m` samples.
pub fn sk_estimate(s1: f64, s2: f64, m: f64, nd: f64) -> f64 {
    (m * nd + 1.0) / (m - 1.0) * (m * s2 / (s1 * s1) - 1.0)
}

/// Lower and upper SK thresholds leaving probability `tail` in each tail for Gaussian
/// noise, from the Pearson type III curve matched to the first three moments.
pub fn sk_thresholds(m: f64, nd: f64, tail: f64) -> (f64, f64) {
    let sigma = sk_variance(m, nd).sqrt();
    let skew = sk_third_moment(m, nd) / sigma.powi(3);
    if skew < 1e-3 {
        let z = Normal::standard().inverse_cdf(1.0 - tail);
        return (1.0 - z * sigma, 1.0 + z * sigma);
    }
    let shape = 4.0 / (skew * skew);
    let scale = sigma * skew / 2.0;
    let loc = 1.0 - shape * scale;
    let g = Gamma::new(shape, 1.0).expect("positive shape");
    (
        loc + scale * g.inverse_cdf(tail),
        loc + scale * g.inverse_cdf(1.0 - tail),
    )
}

/// The spectral-kurtosis test on a block's [`RunSums`]: each whole run of M samples
/// of a channel is one estimate.
#[derive(Debug, Clone, Copy)]
pub struct ChannelKurtosis<'a> {
    runs: &'a RunSums,
}

impl<'a> ChannelKurtosis<'a> {
    /// The test on the runs of `runs`.
    pub fn new(runs: &'a RunSums) -> Self {
        ChannelKurtosis { runs }
    }

    /// Whether channel `c` looks like detected power: in every run a positive mean at
    /// least √½ of the standard deviation. Power summed from N·d ≥ 1 spectra has
    /// mean²/variance = N·d ≥ 1 (Gamma-distributed); data with its offset removed
    /// (zero-mean noise) has about 1/M, so SK, which needs the power's own offset, is
    /// not applied to it. (Testing only the sign let one channel in 2^runs of
    /// zero-mean noise through, and SK then masked it.)
    fn is_power(&self, c: usize) -> bool {
        let m = self.runs.m() as f64;
        self.runs.whole_runs(c).all(|(s1, s2)| {
            let mean = s1 / m;
            mean > 0.0 && 2.0 * mean * mean >= s2 / m - mean * mean
        })
    }

    /// Median over power-like unmasked channels of the median over runs of mean²/variance,
    /// which equals N·d for Gamma-distributed (detected, summed) noise.
    pub fn estimate_nd(&self, mask: &[bool]) -> Option<f64> {
        let m = self.runs.m() as f64;
        let mut per_chan: Vec<f32> = Vec::new();
        let mut scratch = Vec::new();
        for c in (0..self.runs.n_chan()).filter(|&c| !mask[c] && self.is_power(c)) {
            scratch.clear();
            scratch.extend(self.runs.whole_runs(c).filter_map(|(s1, s2)| {
                let mean = s1 / m;
                let var = s2 / m - mean * mean;
                (var > 0.0).then_some((mean * mean / var) as f32)
            }));
            if !scratch.is_empty() {
                per_chan.push(median_in_place(&mut scratch));
            }
        }
        let nd = f64::from(median_in_place(&mut per_chan));
        (nd.is_finite() && nd > 0.0).then_some(nd)
    }

    /// Masks unmasked power-like channels in which more than `flag_fraction` of the
    /// runs fall outside the SK thresholds. Returns the number newly masked.
    pub fn flag(&self, mask: &mut [bool], nd: Option<f64>, tail: f64, flag_fraction: f64) -> usize {
        let m = self.runs.m() as f64;
        if self.runs.m() < 16 {
            return 0;
        }
        let Some(nd) = nd.or_else(|| self.estimate_nd(mask)) else {
            return 0;
        };
        let (lo, hi) = sk_thresholds(m, nd, tail);
        let mut newly = 0;
        for (c, masked) in mask.iter_mut().enumerate() {
            if *masked || !self.is_power(c) {
                continue;
            }
            let (mut flagged, mut total) = (0usize, 0usize);
            for (s1, s2) in self.runs.whole_runs(c) {
                let sk = sk_estimate(s1, s2, m, nd);
                total += 1;
                flagged += usize::from(!(lo..=hi).contains(&sk));
            }
            if total > 0 && flagged as f64 > flag_fraction * total as f64 {
                *masked = true;
                newly += 1;
            }
        }
        newly
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;
    use rand::SeedableRng;
    use rand_distr::{Distribution, Gamma as GammaDist};

    // Closed-form moments (Nita & Gary 2010, MNRAS 406, L60), values recomputed here:
    // M = 128, N·d = 1 → variance 0.030301, skewness 0.8351; M = 64, N·d = 50 → 0.03233.
    #[test]
    fn moments_match_closed_form_values() {
        assert!((sk_variance(128.0, 1.0) - 0.030_301_32).abs() < 1e-7);
        assert!((sk_variance(64.0, 50.0) - 0.032_330_4).abs() < 1e-6);
        let skew = sk_third_moment(128.0, 1.0) / sk_variance(128.0, 1.0).powf(1.5);
        assert!((skew - 0.835_052).abs() < 1e-5, "{skew}");
        // Large-M limit 2(Nd + 1)/(M·Nd).
        let v = sk_variance(1e6, 50.0);
        assert!((v / (2.0 * 51.0 / (1e6 * 50.0)) - 1.0).abs() < 1e-4);
    }

    // SK([1,2,3,4]) = 1/3 for N·d = 1 (direct evaluation of the estimator's formula).
    #[test]
    fn estimator_worked_value() {
        let (s1, s2) = (10.0, 30.0);
        assert!((sk_estimate(s1, s2, 4.0, 1.0) - 1.0 / 3.0).abs() < 1e-12);
        assert!((sk_estimate(s1, s2, 4.0, 50.0) - 13.4).abs() < 1e-12);
    }

    // Thresholds against Monte Carlo quantiles (0.13499 % and 99.86501 %) of SK for
    // Gamma(N·d) power samples, from tests/fixtures/kurtosis/sk_quantiles.py
    // (numpy 2.4.6, 2 × 10⁵ trials each; ±0.005 sampling error).
    #[test]
    fn pearson_iii_thresholds_match_monte_carlo() {
        for &(m, nd, lo_mc, hi_mc) in &[
            (256.0, 50.0, 0.754_237, 1.292_770),
            (64.0, 50.0, 0.547_092, 1.632_195),
            (1024.0, 1.0, 0.834_169, 1.217_032),
        ] {
            let (lo, hi) = sk_thresholds(m, nd, 0.0013499);
            assert!((lo - lo_mc).abs() < 0.008, "M={m} lo {lo} vs {lo_mc}");
            assert!((hi - hi_mc).abs() < 0.008, "M={m} hi {hi} vs {hi_mc}");
        }
    }

    #[test]
    fn flags_a_channel_with_a_periodic_carrier_only() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(5);
        let g = GammaDist::new(50.0f32, 1.0 / 50.0).unwrap();
        let n_chan = 32;
        let raw = Array2::from_shape_fn((8192, n_chan), |(t, c)| {
            let p = g.sample(&mut rng);
            // Channel 9: power switching on and off every 64 samples (raises SK).
            if c == 9 && (t / 64) % 2 == 0 {
                p * 1.5
            } else {
                p
            }
        });
        let runs = RunSums::measure(raw.view(), 512);
        let sk = ChannelKurtosis::new(&runs);
        let nd = sk.estimate_nd(&[false; 32]).unwrap();
        assert!((nd - 50.0).abs() < 3.0, "estimated N·d {nd}");
        let mut mask = vec![false; n_chan];
        assert_eq!(sk.flag(&mut mask, None, 0.0013499, 0.25), 1);
        assert!(mask[9]);
    }

    // Zero-mean noise (data whose offset was removed) is not power: no channel is
    // tested, so none is masked, however few runs a block has. Testing the sign of
    // the runs' means alone passed one channel in 2^runs (1 in 16 here) to SK, which
    // then masked it; power-like channels are still tested.
    #[test]
    fn zero_mean_noise_is_not_taken_for_power() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(9);
        let n_chan = 512;
        let zero_mean = Array2::from_shape_fn((2048, n_chan), |_| {
            Distribution::<f32>::sample(&rand_distr::StandardNormal, &mut rng)
        });
        let runs = RunSums::measure(zero_mean.view(), 512);
        let sk = ChannelKurtosis::new(&runs);
        let mut mask = vec![false; n_chan];
        assert_eq!(sk.flag(&mut mask, Some(1.0), 0.0013499, 0.25), 0);
        assert!((0..n_chan).all(|c| !sk.is_power(c)));
        // The same noise on an offset of 8σ is power-like (mean²/variance 64).
        let offset = zero_mean.mapv(|x| x + 8.0);
        let runs = RunSums::measure(offset.view(), 512);
        let sk = ChannelKurtosis::new(&runs);
        assert!((0..n_chan).all(|c| sk.is_power(c)));
    }
}
