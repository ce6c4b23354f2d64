//! Monte Carlo false-alarm probabilities of a rotation scan, from null sets made of
//! the observed arrivals themselves.
//!
//! A null set moves every arrival by an independent uniform offset over a window of
//! [`NULL_JITTER_PERIODS`] longest trial periods. A uniform offset over J multiplies
//! the mean phasor of harmonic k at frequency f by sinc(πkfJ), at most 1/(πkfJ) ≤
//! P_max/(πJ) = 1/(20π) ≈ 0.016 in size for every trial frequency f ≥ 1/P_max: any
//! periodicity in the data is gone from the null sets (Z²ₙ, which grows as its
//! square, by a factor of at least 3900), while the number of arrivals and the way they
//! cluster into sessions, hours to days long, are kept to within J/2 (100 s for the
//! default 10 s longest period). Each null set is searched exactly as the data were,
//! on the same grid, and the strongest Z²ₙ and H among its candidates recorded. An
//! observed value x then has FAP (1 + #{null maxima ≥ x}) / (1 + sets), the estimate
//! that counts the observation among the draws (North, Curtis & Sham 2002, Am. J. Hum.
//! Genet. 71, 439), never below 1/(1 + sets).
//!
//! Why: the analytic scan bounds assume Z²ₘ is χ²-distributed far in its tail, which
//! fails for few arrivals at high harmonics (docs/period.md): the H-test's union bound
//! is then optimistic. The null sets carry the data's own sampling, so their FAPs are
//! calibrated for any N (tested in tests/period_targets.rs).

use rand::Rng;
use rayon::prelude::*;
use serde::Serialize;

use super::synth::rng;

/// Width of the uniform offset of a null set's arrivals, in longest trial periods.
pub const NULL_JITTER_PERIODS: f64 = 20.0;

/// The strongest statistics of each null set.
#[derive(Clone, Debug, Serialize)]
pub struct NullCalibration {
    /// Null sets searched.
    pub sets: usize,
    /// Seed of the offsets; set `i` draws from stream `i`, so results do not depend on
    /// the number of threads.
    pub seed: u64,
    /// Width of the uniform offset, s.
    pub jitter_s: f64,
    /// Per null set, the largest Z²ₙ among its candidates.
    #[serde(skip)]
    pub max_z2n: Vec<f64>,
    /// Per null set, the largest H among its candidates.
    #[serde(skip)]
    pub max_h: Vec<f64>,
}

/// Monte Carlo false-alarm probabilities of one candidate.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct NullFaps {
    /// Of its Z²ₙ.
    pub z2n: f64,
    /// Of its H.
    pub h: f64,
}

impl NullCalibration {
    /// FAPs of a candidate with these Z²ₙ and H.
    pub fn faps(&self, z2n: f64, h: f64) -> NullFaps {
        NullFaps {
            z2n: exceedance(&self.max_z2n, z2n),
            h: exceedance(&self.max_h, h),
        }
    }
}

/// (1 + null values ≥ `observed`) / (1 + null values).
fn exceedance(null: &[f64], observed: f64) -> f64 {
    let hits = null.iter().filter(|&&v| v >= observed).count();
    (hits as f64 + 1.0) / (null.len() as f64 + 1.0)
}

/// `toas` each moved by an independent uniform offset in [−jitter_s/2, jitter_s/2),
/// sorted.
pub fn jittered(toas: &[f64], jitter_s: f64, rng: &mut impl Rng) -> Vec<f64> {
    let mut t: Vec<f64> = toas
        .iter()
        .map(|&t| t + jitter_s * (rng.random::<f64>() - 0.5))
        .collect();
    t.sort_by(f64::total_cmp);
    t
}

/// Runs `search` on `sets` null sets of `toas` (offsets over `jitter_s`, seeded by
/// `seed`) in parallel; `search` returns a set's largest Z²ₙ and H and passes progress
/// on to `on_progress`.
pub fn null_maxima(
    toas: &[f64],
    sets: usize,
    seed: u64,
    jitter_s: f64,
    on_progress: &(dyn Fn(u64) + Sync),
    search: impl Fn(&[f64], &(dyn Fn(u64) + Sync)) -> (f64, f64) + Sync,
) -> NullCalibration {
    let (max_z2n, max_h) = (0..sets as u64)
        .into_par_iter()
        .map(|s| search(&jittered(toas, jitter_s, &mut rng(seed, s)), on_progress))
        .unzip();
    NullCalibration {
        sets,
        seed,
        jitter_s,
        max_z2n,
        max_h,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::period::coherence::{phases, z2n};

    #[test]
    fn exceedance_counts_the_observation_among_the_draws() {
        let null = [1.0, 2.0, 3.0, 4.0];
        assert_eq!(exceedance(&null, 5.0), 0.2, "floor 1/(1 + sets)");
        assert_eq!(exceedance(&null, 3.0), 0.6, "ties count as reaching it");
        assert_eq!(exceedance(&null, 0.0), 1.0);
        assert_eq!(exceedance(&[], 7.0), 1.0);
    }

    // A strictly periodic train (Z²₂ = 2·2·N exactly) loses its coherence in a null set:
    // Z²₂ there is a χ²₄ draw (mean 4), not ~4N.
    #[test]
    fn jitter_removes_the_period_and_keeps_the_arrivals() {
        let period = 0.7;
        let toas: Vec<f64> = (0..400).map(|k| 3.0 * k as f64 * period).collect();
        let z_of = |t: &[f64]| z2n(&phases(t, 0.0, 1.0 / period, 0.0), 2);
        assert!((z_of(&toas) - 1600.0).abs() < 1e-6);
        let null = jittered(&toas, NULL_JITTER_PERIODS * period, &mut rng(5, 0));
        assert_eq!(null.len(), toas.len());
        assert!(null.windows(2).all(|p| p[0] <= p[1]), "sorted");
        // Sorting moves no value further than the offsets did (it is 1-Lipschitz in
        // the largest difference).
        let moved = toas.iter().zip(&null).map(|(a, b)| (a - b).abs());
        assert!(moved.fold(0.0, f64::max) <= 0.5 * NULL_JITTER_PERIODS * period);
        assert!(z_of(&null) < 30.0, "Z²₂ of the null set: {}", z_of(&null));
    }

    #[test]
    fn null_sets_depend_only_on_seed_and_index() {
        let toas: Vec<f64> = (0..50).map(|k| k as f64 * 1.3).collect();
        let search = |t: &[f64], _: &(dyn Fn(u64) + Sync)| (t[0], t[t.len() - 1]);
        let a = null_maxima(&toas, 8, 11, 4.0, &|_| {}, search);
        let b = null_maxima(&toas, 8, 11, 4.0, &|_| {}, search);
        let c = null_maxima(&toas, 8, 12, 4.0, &|_| {}, search);
        assert_eq!((a.max_z2n.clone(), a.max_h.clone()), (b.max_z2n, b.max_h));
        assert_ne!(a.max_z2n, c.max_z2n);
        assert_eq!(a.max_z2n.len(), 8);
    }
}
