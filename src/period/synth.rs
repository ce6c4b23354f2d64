//! Seeded synthetic burst sets (invented sources) for tests, benchmarks and demos.

use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

/// A generator seeded once; `stream` separates independent sets from one seed.
pub fn rng(seed: u64, stream: u64) -> ChaCha8Rng {
    let mut r = ChaCha8Rng::seed_from_u64(seed);
    r.set_stream(stream);
    r
}

/// A rotating source seen in sessions: each rotation inside a session emits a
/// pulse with probability `pulse_fraction`; arrival = turn time + Gaussian jitter.
#[derive(Clone, Debug)]
pub struct RotatingSource {
    /// Period at t = 0, s.
    pub period_s: f64,
    /// Period derivative, s/s.
    pub pdot: f64,
    /// Arrival time of turn 0, s.
    pub epoch_s: f64,
    /// Probability that a rotation is seen.
    pub pulse_fraction: f64,
    /// Standard deviation of the arrival-time jitter, s.
    pub jitter_s: f64,
}

impl RotatingSource {
    /// Arrival times (s, ascending) inside the `sessions_s` (start, end) intervals.
    pub fn arrivals(&self, sessions_s: &[(f64, f64)], rng: &mut ChaCha8Rng) -> Vec<f64> {
        let jitter = Normal::new(0.0, self.jitter_s.max(0.0)).expect("finite jitter");
        let mut out = Vec::new();
        for &(a, b) in sessions_s {
            let mut n = ((a - self.epoch_s) / self.period_s).ceil() as i64;
            loop {
                let nf = n as f64;
                let t =
                    self.epoch_s + self.period_s * nf + 0.5 * self.period_s * self.pdot * nf * nf;
                if t > b {
                    break;
                }
                if rng.random::<f64>() < self.pulse_fraction {
                    out.push(t + jitter.sample(rng));
                }
                n += 1;
            }
        }
        out.sort_by(f64::total_cmp);
        out
    }
}

/// `n` sessions of `duration` each, starting at irregular times over [0, `span`)
/// (same unit in and out), sorted and not overlapping.
pub fn irregular_sessions(
    n: usize,
    span: f64,
    duration: f64,
    rng: &mut ChaCha8Rng,
) -> Vec<(f64, f64)> {
    let slot = span / n.max(1) as f64;
    (0..n)
        .map(|i| {
            let start = i as f64 * slot + rng.random::<f64>() * (slot - duration).max(0.0);
            (start, start + duration.min(slot))
        })
        .collect()
}

/// `n` times drawn uniformly over the total exposure of `sessions` (constant rate,
/// no period): the null hypothesis of the activity Monte Carlo. Ascending.
pub fn uniform_over_exposure(sessions: &[(f64, f64)], n: usize, rng: &mut ChaCha8Rng) -> Vec<f64> {
    let mut cumulative = Vec::with_capacity(sessions.len());
    let mut total = 0.0;
    for (a, b) in sessions {
        total += b - a;
        cumulative.push(total);
    }
    let mut out: Vec<f64> = (0..n)
        .map(|_| {
            let u = rng.random::<f64>() * total;
            let i = cumulative
                .partition_point(|&c| c < u)
                .min(sessions.len() - 1);
            let before = if i == 0 { 0.0 } else { cumulative[i - 1] };
            sessions[i].0 + (u - before)
        })
        .collect();
    out.sort_by(f64::total_cmp);
    out
}

/// A source active for a fraction `window_fraction` of each `period_days` cycle,
/// centred on phase `centre_phase` (phase 0 at day 0), with a constant rate
/// `rate_per_day` while active. Bursts inside `sessions_days`, ascending (days).
pub fn activity_cycle(
    period_days: f64,
    window_fraction: f64,
    centre_phase: f64,
    rate_per_day: f64,
    sessions_days: &[(f64, f64)],
    rng: &mut ChaCha8Rng,
) -> Vec<f64> {
    let mut out = Vec::new();
    let active = |t: f64| {
        let d = (t / period_days - centre_phase).rem_euclid(1.0);
        d.min(1.0 - d) <= 0.5 * window_fraction
    };
    for &(a, b) in sessions_days {
        // Thinning of a Poisson process of rate `rate_per_day` by the active window.
        let mut t = a;
        loop {
            t += -(1.0 - rng.random::<f64>()).ln() / rate_per_day;
            if t > b {
                break;
            }
            if active(t) {
                out.push(t);
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uniform_over_exposure_stays_inside_sessions() {
        let sessions = [(0.0, 1.0), (5.0, 5.5), (9.0, 12.0)];
        let t = uniform_over_exposure(&sessions, 500, &mut rng(1, 0));
        assert!(
            t.iter()
                .all(|&x| sessions.iter().any(|s| x >= s.0 && x <= s.1))
        );
        // About 1/9 of the exposure is in the middle session: binomial sd ≈ 7.
        let mid = t.iter().filter(|&&x| (5.0..=5.5).contains(&x)).count();
        assert!((mid as f64 - 500.0 / 9.0).abs() < 4.0 * 7.0);
    }

    #[test]
    fn rotating_source_pulses_fall_on_turns() {
        let src = RotatingSource {
            period_s: 0.5,
            pdot: 0.0,
            epoch_s: 0.0,
            pulse_fraction: 0.1,
            jitter_s: 0.0,
        };
        let t = src.arrivals(&[(0.0, 1000.0)], &mut rng(2, 0));
        assert!(t.len() > 150 && t.len() < 250);
        assert!(
            t.iter()
                .all(|x| ((x / 0.5) - (x / 0.5).round()).abs() < 1e-9)
        );
    }
}
