//! Exposure-aware epoch folding: bursts and on-source time per phase bin, the Pearson
//! χ² and likelihood-ratio G of counts against the exposure's prediction, and the
//! narrowest phase window holding a number of bursts.
//!
//! Windows without detections still add exposure: they are what make an inactive
//! phase significant. A test that ignores exposure finds the observing pattern
//! instead (e.g. a transit instrument's sidereal day).

use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// Phase in cycles [0, 1) of time `t` for `period` and `epoch` (same unit).
pub fn phase(t: f64, period: f64, epoch: f64) -> f64 {
    ((t - epoch) / period).rem_euclid(1.0)
}

fn bin_of(phase: f64, bins: usize) -> usize {
    ((phase * bins as f64) as usize).min(bins - 1)
}

/// Adds the on-source time of each session (start, end) falling in each of the
/// `out.len()` phase bins, by cutting the session at bin edges.
pub fn fold_exposure(sessions: &[(f64, f64)], period: f64, epoch: f64, out: &mut [f64]) {
    let bins = out.len();
    let bin_width = 1.0 / bins as f64;
    for &(a, b) in sessions {
        let cycles = (b - a) / period;
        let whole = cycles.floor();
        if whole > 0.0 {
            out.iter_mut()
                .for_each(|e| *e += whole * period * bin_width);
        }
        let mut left = cycles - whole;
        let mut pos = phase(a, period, epoch);
        let mut j = bin_of(pos, bins);
        // Walk bin by bin; after the first, each step uses a whole bin, so this ends.
        loop {
            let room = ((j + 1) as f64 * bin_width - pos).max(0.0);
            if left <= room {
                out[j] += left * period;
                break;
            }
            out[j] += room * period;
            left -= room;
            j = (j + 1) % bins;
            pos = j as f64 * bin_width;
        }
    }
}

/// Plain reference for [`fold_exposure`]: sums many small steps of each session.
pub fn fold_exposure_reference(
    sessions: &[(f64, f64)],
    period: f64,
    epoch: f64,
    steps_per_session: usize,
    out: &mut [f64],
) {
    for &(a, b) in sessions {
        let dt = (b - a) / steps_per_session as f64;
        for i in 0..steps_per_session {
            let t = a + (i as f64 + 0.5) * dt;
            out[bin_of(phase(t, period, epoch), out.len())] += dt;
        }
    }
}

/// Counts of `times` per phase bin.
pub fn fold_counts(times: &[f64], period: f64, epoch: f64, out: &mut [u32]) {
    let bins = out.len();
    for &t in times {
        out[bin_of(phase(t, period, epoch), bins)] += 1;
    }
}

/// A χ²-type comparison of counts with the exposure's prediction.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct FoldTest {
    /// Pearson χ² = Σ (O − E)²/E over bins with exposure.
    pub chi2: f64,
    /// Likelihood-ratio G = 2 Σ O ln(O/E) (terms with O = 0 add nothing).
    pub g: f64,
    /// Degrees of freedom: bins with exposure − 1.
    pub dof: usize,
}

impl FoldTest {
    /// Single-trial chance probability of χ² (χ² law with `dof` degrees of freedom).
    pub fn chi2_p(&self) -> f64 {
        chi2_sf(self.chi2, self.dof)
    }
    /// Single-trial chance probability of G (same χ² law).
    pub fn g_p(&self) -> f64 {
        chi2_sf(self.g, self.dof)
    }
}

fn chi2_sf(x: f64, dof: usize) -> f64 {
    if dof == 0 {
        return 1.0;
    }
    ChiSquared::new(dof as f64).map_or(1.0, |c| c.sf(x.max(0.0)))
}

/// Pearson χ² and G of `counts` against expected counts Eⱼ = N·eⱼ/Σe (Pearson 1900;
/// G as the likelihood ratio of multinomial counts). Bins without exposure are left out.
pub fn fold_test(counts: &[u32], exposure: &[f64]) -> FoldTest {
    let n: u32 = counts.iter().sum();
    let total: f64 = exposure.iter().sum();
    let (mut chi2, mut g, mut used) = (0.0, 0.0, 0usize);
    for (&o, &e) in counts.iter().zip(exposure) {
        if e <= 0.0 {
            continue;
        }
        used += 1;
        let expected = n as f64 * e / total;
        let o = o as f64;
        chi2 += (o - expected).powi(2) / expected;
        if o > 0.0 {
            g += 2.0 * o * (o / expected).ln();
        }
    }
    FoldTest {
        chi2,
        g,
        dof: used.saturating_sub(1),
    }
}

/// The shortest arc of phase holding `k` of the phases (cycles).
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct PhaseWindow {
    /// Start phase of the arc, [0, 1).
    pub start: f64,
    /// Width, cycles.
    pub width: f64,
}

impl PhaseWindow {
    /// Centre phase, [0, 1).
    pub fn centre(&self) -> f64 {
        (self.start + 0.5 * self.width).rem_euclid(1.0)
    }
}

/// Shortest circular arc holding `k` (1 ≤ k ≤ len) of the phases; sorts `phases`.
pub fn narrowest_window(phases: &mut [f64], k: usize) -> PhaseWindow {
    let n = phases.len();
    if n == 0 || k == 0 {
        return PhaseWindow {
            start: 0.0,
            width: 0.0,
        };
    }
    let k = k.min(n);
    phases.sort_by(f64::total_cmp);
    let mut best = PhaseWindow {
        start: phases[0],
        width: f64::INFINITY,
    };
    for i in 0..n {
        let j = i + k - 1;
        let end = if j < n {
            phases[j]
        } else {
            phases[j - n] + 1.0
        };
        if end - phases[i] < best.width {
            best = PhaseWindow {
                start: phases[i],
                width: end - phases[i],
            };
        }
    }
    best
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::period::synth::rng;
    use rand::Rng;

    #[test]
    fn exposure_fold_matches_reference() {
        let mut r = rng(3, 0);
        for bins in [1, 7, 10] {
            let sessions: Vec<(f64, f64)> = (0..13)
                .map(|i| {
                    let a = i as f64 * 9.7 + r.random::<f64>();
                    (a, a + r.random::<f64>() * 6.0)
                })
                .collect();
            let mut fast = vec![0.0; bins];
            let mut slow = vec![0.0; bins];
            fold_exposure(&sessions, 2.3, 0.4, &mut fast);
            fold_exposure_reference(&sessions, 2.3, 0.4, 200_000, &mut slow);
            let total: f64 = sessions.iter().map(|s| s.1 - s.0).sum();
            assert!((fast.iter().sum::<f64>() - total).abs() < 1e-9);
            for (a, b) in fast.iter().zip(&slow) {
                assert!((a - b).abs() < 1e-4, "{a} vs {b}");
            }
        }
    }

    #[test]
    fn fold_statistics_of_worked_example() {
        // Counts and exposures of the worked example; χ², G and p recomputed with
        // scipy 1.17.1 in tests/fixtures/period/make_fixtures.py (Pearson χ², G-test).
        let counts = [0, 1, 9, 14, 3, 1, 0, 0];
        let t = fold_test(&counts, &[10.0, 12.0, 8.0, 11.0, 9.0, 10.0, 12.0, 8.0]);
        assert!((t.chi2 - 55.218615).abs() < 1e-5 && t.dof == 7);
        assert!((t.g - 51.496014).abs() < 1e-5);
        let t2 = fold_test(&counts, &[2.0, 2.0, 20.0, 20.0, 20.0, 2.0, 2.0, 2.0]);
        assert!((t2.chi2 - 10.25).abs() < 1e-9);
        assert!((t2.chi2_p() - 0.1748433).abs() < 1e-6);
    }

    #[test]
    fn narrowest_window_wraps_around_phase_zero() {
        let mut ph = [0.95, 0.02, 0.5, 0.98, 0.05];
        let w = narrowest_window(&mut ph, 4);
        assert!((w.start - 0.95).abs() < 1e-12 && (w.width - 0.10).abs() < 1e-12);
        assert!((w.centre() - 0.0).abs() < 1e-12 || (w.centre() - 1.0).abs() < 1e-12);
    }
}
