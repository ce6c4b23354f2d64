//! Period of sparse single pulses from the differences of their arrival times: the
//! largest period dividing every difference (the approach of McLaughlin et al. 2006,
//! Nature 439, 817, for sources that pulse on few rotations).
//!
//! Candidates are P = d_min/k for the smallest gap d_min. Each is tested by connecting
//! phase outwards in time from that pair, refitting (t₀, P) after every added arrival
//! and rejecting the candidate as soon as a residual exceeds `tol`·P: dividing d_min
//! by k and checking all differences at once fails over long spans because the error
//! of d_min/k grows with the number of turns. A prediction that misses by a turn (short
//! baseline, jittered arrivals) is retried with n ± 1, keeping the best refit.

use serde::Serialize;

use super::timing::{TimingSolution, fit_phase_connected};

/// The accepted common-divisor period.
#[derive(Clone, Debug, Serialize)]
pub struct DivisorResult {
    /// Smallest gap between arrivals, s.
    pub smallest_gap_s: f64,
    /// Divisor k: the smallest gap spans k turns.
    pub turns_in_smallest_gap: u64,
    /// Candidates tried before this one passed (largest period first).
    pub candidates_tried: u64,
    /// Rough chance that a wrong candidate passes: tried·(6·tol)^(N−2) (every
    /// arrival after the first pair must land within ±tol of one of the three turn
    /// counts tried by accident).
    pub chance_probability: f64,
    /// Least-squares timing solution for the accepted period.
    pub solution: TimingSolution,
}

/// Running least-squares line y = a + b·x (Welford updates, stable for large x).
#[derive(Clone, Default)]
struct Line {
    n: f64,
    mean_x: f64,
    mean_y: f64,
    cxx: f64,
    cxy: f64,
}

impl Line {
    fn add(&mut self, x: f64, y: f64) {
        self.n += 1.0;
        let dx = x - self.mean_x;
        self.mean_x += dx / self.n;
        self.mean_y += (y - self.mean_y) / self.n;
        self.cxx += dx * (x - self.mean_x);
        self.cxy += dx * (y - self.mean_y);
    }
    fn slope(&self) -> f64 {
        self.cxy / self.cxx
    }
    fn at(&self, x: f64) -> f64 {
        self.mean_y + self.slope() * (x - self.mean_x)
    }
}

/// Tries periods d_min/k from the largest down to `p_min_s` (at most `max_candidates`)
/// and returns the first that phase-connects every arrival within `tol_cycles`.
/// Needs at least 3 distinct arrivals. Every P/j also fits, so the result is the
/// fundamental only if no longer period exists in the data.
pub fn common_divisor_period(
    t_s: &[f64],
    p_min_s: f64,
    tol_cycles: f64,
    max_candidates: u64,
) -> Option<DivisorResult> {
    if t_s.len() < 3 {
        return None;
    }
    let (i0, d_min) = t_s
        .windows(2)
        .enumerate()
        .map(|(i, w)| (i, w[1] - w[0]))
        .filter(|(_, d)| *d > 0.0)
        .min_by(|a, b| a.1.total_cmp(&b.1))?;
    let k_max = ((d_min / p_min_s).floor() as u64).min(max_candidates);
    for k in 1..=k_max {
        let Some(period) = connect(t_s, i0, k, tol_cycles) else {
            continue;
        };
        let solution = fit_phase_connected(t_s, period, false).ok()?;
        let chance = k as f64 * (6.0 * tol_cycles).powi(t_s.len() as i32 - 2);
        return Some(DivisorResult {
            smallest_gap_s: d_min,
            turns_in_smallest_gap: k,
            candidates_tried: k,
            chance_probability: chance.min(1.0),
            solution,
        });
    }
    None
}

/// Phase-connects outwards from the pair (i0, i0+1) taken to be `k` turns apart; the
/// fitted period, or None once a residual exceeds `tol_cycles`.
fn connect(t_s: &[f64], i0: usize, k: u64, tol_cycles: f64) -> Option<f64> {
    let origin = t_s[i0];
    let mut points = vec![(0.0, 0.0), (k as f64, t_s[i0 + 1] - origin)];
    let mut line = Line::default();
    points.iter().for_each(|&(x, y)| line.add(x, y));
    let (mut lo, mut hi) = (i0, i0 + 1);
    while lo > 0 || hi + 1 < t_s.len() {
        let take_left =
            hi + 1 >= t_s.len() || (lo > 0 && t_s[hi] - t_s[lo - 1] < t_s[hi + 1] - t_s[lo]);
        let i = if take_left {
            lo -= 1;
            lo
        } else {
            hi += 1;
            hi
        };
        let y = t_s[i] - origin;
        let b = line.slope();
        let predicted = ((y - line.at(0.0)) / b).round();
        let n = if (y - line.at(predicted)).abs() <= tol_cycles * b {
            line.add(predicted, y);
            predicted
        } else {
            // Extrapolating from a short baseline can miss by a turn: take the turn
            // count (n, n ± 1) whose refit leaves the smallest worst residual.
            let (n, refit, worst) = [predicted, predicted - 1.0, predicted + 1.0]
                .into_iter()
                .map(|m| {
                    let mut l = line.clone();
                    l.add(m, y);
                    let worst = points
                        .iter()
                        .chain(std::iter::once(&(m, y)))
                        .map(|&(x, yy)| (yy - l.at(x)).abs())
                        .fold(0.0, f64::max);
                    (m, l, worst)
                })
                .min_by(|a, b| a.2.total_cmp(&b.2))
                .expect("three choices");
            if worst > tol_cycles * refit.slope() {
                return None;
            }
            line = refit;
            n
        };
        points.push((n, y));
    }
    Some(line.slope())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_period_of_sparse_pulses_with_jitter() {
        // Turn numbers and jitter 0.002·sin(2.1 i) s: the worked example whose fit is
        // recomputed with numpy.polyfit in tests/fixtures/period/make_fixtures.py.
        let p_true = 1.2345678;
        let turns = [0, 3, 17, 45, 112, 250, 391, 604, 1007, 1500];
        let t: Vec<f64> = turns
            .iter()
            .enumerate()
            .map(|(i, &n)| p_true * n as f64 + 0.002 * (2.1 * i as f64).sin())
            .collect();
        let r = common_divisor_period(&t, 0.2, 0.05, 1_000_000).unwrap();
        assert_eq!(r.turns_in_smallest_gap, 3);
        assert!((r.solution.period_s - 1.2345674).abs() < 5e-8);
        // numpy.polyfit: rms = sqrt(mean r²) = 1.331519e-3 s (1.488684e-3 with N−2).
        assert!((r.solution.rms_s - 1.331519e-3).abs() < 1e-8);
        let first = r.solution.pulse_numbers[0];
        let rel: Vec<i64> = r.solution.pulse_numbers.iter().map(|n| n - first).collect();
        assert_eq!(rel, turns.to_vec());
    }

    #[test]
    fn connects_jittered_pulses_on_few_turns() {
        use crate::period::synth::{RotatingSource, rng};
        let src = RotatingSource {
            period_s: 0.4137029,
            pdot: 0.0,
            epoch_s: 3.1,
            pulse_fraction: 0.02,
            jitter_s: 0.001,
        };
        let t = src.arrivals(&[(0.0, 1800.0), (2700.0, 4500.0)], &mut rng(8, 0));
        let r = common_divisor_period(&t, 0.05, 0.05, 1_000_000).unwrap();
        let err = (r.solution.period_s - src.period_s).abs();
        assert!(
            err < 3.0 * r.solution.period_err_s,
            "{:?}",
            r.solution.period_s
        );
        assert!(r.chance_probability < 1e-20);
    }
}
