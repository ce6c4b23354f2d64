//! Sub-harmonic check of the activity-cycle pick.
//!
//! A rate periodic with Q is periodic with kQ too, and with few bursts the fold at kQ
//! can score best by chance: its k active windows per cycle give it more ways to fit
//! noise. Only a true kQ makes the k cycles differ at the same phase of Q. So the check
//! asks whether the fold at kQ scores higher than a rate periodic with Q would let it.
//!
//! Conditional randomisation (derived here): with phase 0 at an epoch e, bin j of the
//! fold at Q in B bins is the union of bins j, j + B, …, j + (k−1)B of the fold at kQ
//! in kB bins, one per cycle of Q within kQ. If the rate is periodic with Q and
//! constant within each of its bins, then given the bursts per Q-bin, each burst's
//! cycle is drawn independently with probability proportional to that cycle's
//! exposure in the bin (a Poisson process thinned into the bin's cycles: the rate
//! cancels from the ratio, the exposures remain). Redrawing the cycles [`RELABELS`]
//! times keeps the fold at Q as it is and gives the distribution of the fold at kQ (B
//! bins, the scan's own statistic, Pearson χ²) under Q; p = (1 + redraws reaching the
//! observed χ²)/(1 + redraws) (North, Curtis & Sham 2002, Am. J. Hum. Genet. 71, 439).
//!
//! The rate is seldom constant within a bin: an active window's edge falls inside one,
//! and the bursts there sit in the active part while the k cycles' exposure falls in
//! different parts of the bin; the redraws then spread the bursts more evenly than a
//! rate periodic with Q would, and the test rejects Q too often. Finer strata (phase
//! kernels narrower than a bin, bins cut at the ends of the bursts' arc) were tried on
//! the sets of `tests/period_alias_study.rs` and either lost the power to keep true
//! periods when sessions are sparse or did not help (docs/period.md). What helps
//! is that a chance difference between the cycles depends on where the bin edges fall,
//! while a true kQ (bursts in some of the k cycles only) shows in any binning. So the
//! test is made in [`BINNINGS`] binnings, phase 0 moved by a fraction m/[`BINNINGS`] of
//! a bin (e = m·Q/([`BINNINGS`]·B)), and kQ is kept only if every binning rejects Q: an
//! intersection–union test (Berger 1982, Technometrics 24, 295; Berger & Hsu 1996,
//! Stat. Sci. 11, 283), whose p is the largest of the binnings' p and which is valid at
//! its level whenever the rate is constant within the bins of any one binning, e.g.
//! when one of them puts the bin edges near the window's edges. Q is taken unless
//! p ≤ [`CYCLE_ALPHA`]: the shorter period, which explains every burst the longer one
//! does, stands until the data need the longer one. The level is 0.1 where the single
//! binning used 0.05: measured on the study's 1050 sets, three binnings at 0.1 replace
//! fewer true picks and bring back more aliases than one binning at 0.05 (or at any
//! level from 0.05 to 0.2: each level trades one against the other, the binnings move
//! the whole trade).

use rand::Rng;
use rand_chacha::ChaCha8Rng;
use serde::Serialize;

use super::fold::{fold_counts, fold_exposure, fold_test};

/// Level at or below which the k cycles' differing rates, in every binning, keep the
/// longer period.
pub const CYCLE_ALPHA: f64 = 0.1;

/// Binnings of the test: phase 0 moved by 0, 1/3 and 2/3 of a bin.
pub const BINNINGS: usize = 3;

/// Redraws of the bursts' cycles per test (p resolves 10⁻³).
pub const RELABELS: usize = 999;

/// Divisors tried, in order; the first sub-harmonic accepted is taken.
pub const DIVISORS: [usize; 2] = [2, 3];

/// One sub-harmonic the check considered.
#[derive(Clone, Debug, Serialize)]
pub struct SubHarmonic {
    /// Period it divides, days.
    pub from_period_days: f64,
    /// The divisor k.
    pub k: usize,
    /// Candidate Q: the trial of largest χ² within k half-widths of the χ² peak at
    /// `from_period_days` around frequency k/`from_period_days`, days.
    pub period_days: f64,
    /// Its folded Pearson χ².
    pub chi2: f64,
    /// Folded χ² at exactly k·Q, phase 0 at day 0 as in the scan (the statistic of
    /// the test's first binning).
    pub chi2_k_cycles: f64,
    /// Probability that a rate periodic with Q gives the observed χ² at k·Q or more,
    /// the largest over the [`BINNINGS`]; the candidate is taken when this is above
    /// [`CYCLE_ALPHA`].
    pub p: f64,
    /// Whether the candidate replaced `from_period_days`.
    pub accepted: bool,
}

/// The trial the check settles on and the tests it made.
pub(super) struct Pick {
    pub index: usize,
    pub tests: Vec<SubHarmonic>,
}

/// Outcome of [`cycle_test`].
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CycleTest {
    /// Folded χ² at k·Q in B bins, phase 0 at day 0.
    pub chi2: f64,
    /// Randomisation probability of reaching it under a rate periodic with Q, the
    /// largest over the [`BINNINGS`].
    pub p: f64,
}

/// Tests bursts `t` seen in `sessions` (days) for a rate periodic with `q` against
/// one periodic with `k`·`q` (`bins` phase bins, in each of the [`BINNINGS`]; see the
/// module notes). Draws from `rng`.
pub fn cycle_test(
    t: &[f64],
    sessions: &[(f64, f64)],
    q: f64,
    k: usize,
    bins: usize,
    rng: &mut ChaCha8Rng,
) -> CycleTest {
    let binnings: Vec<CycleTest> = (0..BINNINGS)
        .map(|m| {
            let epoch = m as f64 * q / (BINNINGS * bins) as f64;
            binned_cycle_test(t, sessions, q, k, bins, epoch, rng)
        })
        .collect();
    CycleTest {
        chi2: binnings[0].chi2,
        p: binnings.iter().map(|b| b.p).fold(0.0, f64::max),
    }
}

/// [`cycle_test`] in one binning, phase 0 at day `epoch`.
fn binned_cycle_test(
    t: &[f64],
    sessions: &[(f64, f64)],
    q: f64,
    k: usize,
    bins: usize,
    epoch: f64,
    rng: &mut ChaCha8Rng,
) -> CycleTest {
    let mut fine_counts = vec![0u32; k * bins];
    let mut fine_exposure = vec![0.0; k * bins];
    fold_counts(t, k as f64 * q, epoch, &mut fine_counts);
    fold_exposure(sessions, k as f64 * q, epoch, &mut fine_exposure);
    // Bin i of kB at kQ lies in bin i / k of B at kQ: the B edges are among the kB ones.
    let mut exposure = vec![0.0; bins];
    let mut counts = vec![0u32; bins];
    for (i, (&c, &e)) in fine_counts.iter().zip(&fine_exposure).enumerate() {
        exposure[i / k] += e;
        counts[i / k] += c;
    }
    let chi2 = fold_test(&counts, &exposure).chi2;
    // Per Q-bin j: its bursts and the fine bins (cycles) they may be drawn into.
    let strata: Vec<(u32, Vec<usize>, Vec<f64>)> = (0..bins)
        .filter_map(|j| {
            let fine: Vec<usize> = (0..k).map(|c| j + c * bins).collect();
            let n = fine.iter().map(|&i| fine_counts[i]).sum::<u32>();
            let mut cumulative: Vec<f64> = fine.iter().map(|&i| fine_exposure[i]).collect();
            for c in 1..k {
                cumulative[c] += cumulative[c - 1];
            }
            (n > 0).then_some((n, fine, cumulative))
        })
        .collect();
    let hits = (0..RELABELS)
        .filter(|_| {
            counts.iter_mut().for_each(|c| *c = 0);
            for (n, fine, cumulative) in &strata {
                let total = cumulative[k - 1];
                for _ in 0..*n {
                    let u = rng.random::<f64>() * total;
                    let c = cumulative.partition_point(|&x| x <= u).min(k - 1);
                    counts[fine[c] / k] += 1;
                }
            }
            fold_test(&counts, &exposure).chi2 >= chi2
        })
        .count();
    CycleTest {
        chi2,
        p: (hits as f64 + 1.0) / (RELABELS as f64 + 1.0),
    }
}

/// Tries each of [`DIVISORS`] in turn on the scan's best trial `best` whose
/// sub-harmonic lies within the scanned range, and takes the first sub-harmonic the
/// data do not reject (once: not again from the sub-harmonic, where every further
/// step would be another chance for a test of few bursts to miss). `periods` are in
/// ascending frequency.
pub(super) fn resolve(
    periods: &[f64],
    chi2: &[f64],
    best: usize,
    t: &[f64],
    sessions: &[(f64, f64)],
    bins: usize,
    rng: &mut ChaCha8Rng,
) -> Pick {
    let mut tests = Vec::new();
    for k in DIVISORS {
        let Some(j) = sub_harmonic_peak(periods, chi2, best, k) else {
            continue;
        };
        let test = cycle_test(t, sessions, periods[j], k, bins, rng);
        let accepted = test.p > CYCLE_ALPHA;
        tests.push(SubHarmonic {
            from_period_days: periods[best],
            k,
            period_days: periods[j],
            chi2: chi2[j],
            chi2_k_cycles: test.chi2,
            p: test.p,
            accepted,
        });
        if accepted {
            return Pick { index: j, tests };
        }
    }
    Pick { index: best, tests }
}

/// Width in frequency (1/day) of the χ² peak at trial `best`: its full width where it
/// stands half its height above the median level (common practice), at least one grid
/// step.
pub(super) fn peak_fwhm_per_day(periods: &[f64], chi2: &[f64], best: usize) -> f64 {
    let mut sorted = chi2.to_vec();
    sorted.sort_by(f64::total_cmp);
    let base = sorted[sorted.len() / 2];
    let half = base + 0.5 * (chi2[best] - base);
    let mut lo = best;
    while lo > 0 && chi2[lo - 1] > half {
        lo -= 1;
    }
    let mut hi = best;
    while hi + 1 < chi2.len() && chi2[hi + 1] > half {
        hi += 1;
    }
    // Crossings taken half-way between the last point above and the first below.
    let f = |i: usize| 1.0 / periods[i.min(periods.len() - 1)];
    let f_lo = 0.5 * (f(lo) + f(lo.saturating_sub(1)));
    let f_hi = 0.5 * (f(hi) + f(hi + 1));
    (f_hi - f_lo).abs().max((f(1) - f(0)).abs())
}

/// The trial of largest χ² within k·fwhm/2 of k times the frequency of trial `i`
/// (the harmonic's uncertainty is k times the fundamental's), at most half the
/// fundamental's frequency away so no other harmonic is reached; None when k/P lies
/// beyond the scanned range.
fn sub_harmonic_peak(periods: &[f64], chi2: &[f64], i: usize, k: usize) -> Option<usize> {
    let f = 1.0 / periods[i];
    let target = k as f64 * f;
    if target > 1.0 / periods[periods.len() - 1] {
        return None;
    }
    let reach = (0.5 * k as f64 * peak_fwhm_per_day(periods, chi2, i)).min(0.5 * f);
    (0..periods.len())
        .filter(|&j| (1.0 / periods[j] - target).abs() <= reach)
        .max_by(|&a, &b| chi2[a].total_cmp(&chi2[b]))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::period::synth::rng;

    /// A 10-day cycle active on phases 0.3–0.5, seen daily for 0.4 d over 200 days
    /// (sessions clear of the bin edges); a burst at the middle of each session inside
    /// the active phase, every cycle (`every` = 1) or every other one (`every` = 2).
    fn set(every: usize) -> (Vec<f64>, Vec<(f64, f64)>) {
        let sessions: Vec<(f64, f64)> =
            (0..200).map(|d| (d as f64 + 0.3, d as f64 + 0.7)).collect();
        let t = sessions
            .iter()
            .map(|s| s.0 + 0.2)
            .filter(|&m| {
                let ph = (m / 10.0).rem_euclid(1.0);
                let cycle = (m / 10.0).floor() as usize;
                (0.3..0.5).contains(&ph) && cycle.is_multiple_of(every)
            })
            .collect();
        (t, sessions)
    }

    #[test]
    fn bursts_in_every_cycle_keep_the_shorter_period() {
        let (t, sessions) = set(1);
        let test = cycle_test(&t, &sessions, 10.0, 2, 10, &mut rng(1, 0));
        // Each Q-bin's 20 bursts fall 10 and 10 between the cycles, as the exposure
        // does: the most even split, so most redraws reach the observed χ².
        assert!(test.p > 0.5, "{test:?}");
    }

    #[test]
    fn a_window_edge_inside_a_bin_does_not_keep_the_longer_period() {
        // A 10-day cycle active from day 3⅓ to day 4 of each cycle. Even cycles see it
        // in a session at days 3.4–3.6 (a burst in each), odd ones only at days
        // 3.05–3.25, before it opens. With phase 0 at day 0 both sessions share bin
        // [3, 4): all 10 bursts in one cycle of two with equal exposure, so that binning
        // rejects Q. Phase 0 moved by a third of a bin puts a bin edge at the window's
        // opening, the bin's exposure is the even cycles' alone, and Q stands.
        let mut sessions = Vec::new();
        let mut t = Vec::new();
        for n in 0..20 {
            let day = 10.0 * n as f64;
            if n % 2 == 0 {
                sessions.push((day + 3.4, day + 3.6));
                t.push(day + 3.5);
            } else {
                sessions.push((day + 3.05, day + 3.25));
            }
        }
        let first = binned_cycle_test(&t, &sessions, 10.0, 2, 10, 0.0, &mut rng(1, 0));
        assert!(first.p <= CYCLE_ALPHA, "{first:?}");
        let test = cycle_test(&t, &sessions, 10.0, 2, 10, &mut rng(1, 0));
        assert_eq!(test.chi2, first.chi2);
        assert!(test.p > CYCLE_ALPHA, "{test:?}");
    }

    #[test]
    fn bursts_in_every_other_cycle_keep_the_longer_one() {
        let (t, sessions) = set(2);
        let test = cycle_test(&t, &sessions, 10.0, 2, 10, &mut rng(1, 0));
        // All 20 bursts in one cycle of two with equal exposure, in every binning: a
        // redraw does the same with probability 2⁻¹⁹, so none of the 3 × 999 does and p
        // is at its floor.
        assert_eq!(test.p, 1.0 / (RELABELS as f64 + 1.0), "{test:?}");
        for k in [2, 3] {
            let mut c = vec![0u32; 10];
            let mut e = vec![0.0; 10];
            fold_counts(&t, 10.0 * k as f64, 0.0, &mut c);
            fold_exposure(&sessions, 10.0 * k as f64, 0.0, &mut e);
            let direct = fold_test(&c, &e).chi2;
            let test = cycle_test(&t, &sessions, 10.0, k, 10, &mut rng(1, 0));
            assert!((test.chi2 - direct).abs() < 1e-9 * direct, "k = {k}");
        }
    }
}
