//! Completeness curves: binned recovery fractions and a fitted probit curve.
//!
//! The curve is P(found | x) = Φ((x − μ)/σ), fitted to the individual found/missed
//! outcomes by maximum likelihood (Bernoulli likelihood, iteratively reweighted least
//! squares for the probit link; McCullagh & Nelder 1989, Generalized Linear Models,
//! ch. 4). The form is motivated by Gaussian noise: a burst of expected S/N s is
//! reported with S/N ≈ s + n, n ~ N(0, 1), so it crosses a threshold T with
//! probability Φ(s − T) — an ideal search gives μ = T, σ = 1 against expected S/N.
//! The 50 % and 90 % levels are μ and μ + Φ⁻¹(0.9)·σ.

use serde::Serialize;
use statrs::distribution::{Continuous, ContinuousCDF, Normal};

/// Φ⁻¹(0.9) (Abramowitz & Stegun 1964, table 26.5).
pub const PROBIT_90: f64 = 1.281_551_565_545;

/// Fitted probit completeness curve.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct ProbitFit {
    /// Location: the 50 % completeness level.
    pub mu: f64,
    /// Scale (rise width).
    pub sigma: f64,
    /// The 90 % completeness level, μ + 1.2816 σ.
    pub level90: f64,
    /// IRLS iterations used.
    pub iterations: usize,
}

impl ProbitFit {
    /// The fitted completeness at `x`.
    pub fn at(&self, x: f64) -> f64 {
        std_normal().cdf((x - self.mu) / self.sigma)
    }
}

fn std_normal() -> Normal {
    Normal::standard()
}

/// Maximum-likelihood probit fit of `found` against `x`. `None` when the data
/// cannot constrain a rising curve: fewer than two found and two missed outcomes, or
/// a fit whose slope is not positive.
pub fn fit_probit(x: &[f64], found: &[bool]) -> Option<ProbitFit> {
    let n_found = found.iter().filter(|&&f| f).count();
    if n_found < 2 || found.len() - n_found < 2 {
        return None;
    }
    let norm = std_normal();
    // Work on standardised x for conditioning.
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let sd = (x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n).sqrt();
    if sd.is_nan() || sd <= 0.0 {
        return None;
    }
    let (mut a, mut b) = (0.0f64, 1.0f64);
    let mut iterations = 0;
    for it in 1..=100 {
        iterations = it;
        // Weighted least squares of the working response on (1, z).
        let (mut sw, mut swz, mut swzz, mut swy, mut swzy) = (0.0, 0.0, 0.0, 0.0, 0.0);
        for (&xi, &fi) in x.iter().zip(found) {
            let z = (xi - mean) / sd;
            let eta = (a + b * z).clamp(-30.0, 30.0);
            let p = norm.cdf(eta).clamp(1e-12, 1.0 - 1e-12);
            let d = norm.pdf(eta).max(1e-300);
            let w = d * d / (p * (1.0 - p));
            let y = eta + (f64::from(u8::from(fi)) - p) / d;
            sw += w;
            swz += w * z;
            swzz += w * z * z;
            swy += w * y;
            swzy += w * z * y;
        }
        let det = sw * swzz - swz * swz;
        if det.is_nan() || det.abs() <= 1e-300 {
            break;
        }
        let nb = (sw * swzy - swz * swy) / det;
        let na = (swy - nb * swz) / sw;
        let converged = (na - a).abs() < 1e-10 && (nb - b).abs() < 1e-10;
        (a, b) = (na.clamp(-1e6, 1e6), nb.clamp(-1e6, 1e6));
        if converged {
            break;
        }
    }
    if !(b > 0.0 && b.is_finite()) {
        return None;
    }
    let sigma = sd / b;
    let mu = mean - a * sigma;
    Some(ProbitFit {
        mu,
        sigma,
        level90: mu + PROBIT_90 * sigma,
        iterations,
    })
}

/// Recovery in one bin of some parameter.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Bin {
    /// Bin edges `[lo, hi)`.
    pub lo: f64,
    /// Upper edge.
    pub hi: f64,
    /// Bursts injected in the bin.
    pub n: usize,
    /// Bursts recovered.
    pub n_found: usize,
    /// Recovered fraction (NaN when empty; serialised as null).
    pub fraction: Option<f64>,
    /// Binomial standard error √(p(1−p)/n), with p floored at 1/(n+1) away from 0 and
    /// 1 so an all-found or all-missed bin does not claim zero error.
    pub fraction_err: Option<f64>,
    /// Median ratio of reported to expected S/N among the recovered.
    pub median_snr_ratio: Option<f64>,
}

/// Bins `values` by `edges` (ascending; last bin closed) and summarises recovery.
pub fn bin(edges: &[f64], values: &[f64], found: &[bool], ratio: &[Option<f64>]) -> Vec<Bin> {
    edges
        .windows(2)
        .enumerate()
        .map(|(i, e)| {
            let last = i + 2 == edges.len();
            let inside: Vec<usize> = (0..values.len())
                .filter(|&k| values[k] >= e[0] && (values[k] < e[1] || (last && values[k] == e[1])))
                .collect();
            let n = inside.len();
            let n_found = inside.iter().filter(|&&k| found[k]).count();
            let mut ratios: Vec<f64> = inside.iter().filter_map(|&k| ratio[k]).collect();
            let (fraction, fraction_err) = if n == 0 {
                (None, None)
            } else {
                let p = n_found as f64 / n as f64;
                let floor = 1.0 / (n as f64 + 1.0);
                let pe = p.clamp(floor, 1.0 - floor);
                (Some(p), Some((pe * (1.0 - pe) / n as f64).sqrt()))
            };
            Bin {
                lo: e[0],
                hi: e[1],
                n,
                n_found,
                fraction,
                fraction_err,
                median_snr_ratio: median(&mut ratios),
            }
        })
        .collect()
}

/// Median of `v` (reordered; [`crate::robust::median_in_place`]), `None` when empty.
pub fn median(v: &mut [f64]) -> Option<f64> {
    (!v.is_empty()).then(|| crate::robust::median_in_place(v))
}

/// `n` equal bins spanning `[lo, hi]` (log-spaced if `log`), as `n + 1` edges.
pub fn edges(lo: f64, hi: f64, n: usize, log: bool) -> Vec<f64> {
    let n = n.max(1);
    let (a, b) = if log { (lo.ln(), hi.ln()) } else { (lo, hi) };
    (0..=n)
        .map(|i| {
            let v = a + (b - a) * i as f64 / n as f64;
            if log { v.exp() } else { v }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::{Rng, SeedableRng};

    /// Outcomes drawn from a known probit curve give back its μ and σ within a few
    /// standard errors (2 000 outcomes: σ(μ) ≈ 0.03 here).
    #[test]
    fn probit_fit_recovers_a_known_curve() {
        let mut rng = rand_chacha::ChaCha8Rng::seed_from_u64(11);
        let truth = ProbitFit {
            mu: 7.0,
            sigma: 1.0,
            level90: 7.0 + PROBIT_90,
            iterations: 0,
        };
        let x: Vec<f64> = (0..2000).map(|_| rng.random_range(3.0..12.0)).collect();
        let found: Vec<bool> = x.iter().map(|&v| rng.random_bool(truth.at(v))).collect();
        let fit = fit_probit(&x, &found).unwrap();
        assert!((fit.mu - 7.0).abs() < 0.15, "{fit:?}");
        assert!((fit.sigma - 1.0).abs() < 0.15, "{fit:?}");
        assert!((fit.level90 - fit.mu - PROBIT_90 * fit.sigma).abs() < 1e-12);
        // Φ(1.2816) = 0.9 (Abramowitz & Stegun table 26.1).
        assert!((truth.at(truth.level90) - 0.9).abs() < 1e-9);
    }

    #[test]
    fn degenerate_outcomes_give_no_fit() {
        assert!(fit_probit(&[1.0, 2.0, 3.0], &[true, true, true]).is_none());
        assert!(fit_probit(&[1.0, 2.0, 3.0, 4.0], &[true, false, true, false]).is_none());
    }

    #[test]
    fn bins_count_fractions_errors_and_medians() {
        let e = edges(0.0, 4.0, 2, false);
        assert_eq!(e, vec![0.0, 2.0, 4.0]);
        let v = [0.5, 1.5, 2.5, 4.0];
        let f = [true, false, true, true];
        let r = [Some(1.0), None, Some(0.8), Some(1.2)];
        let b = bin(&e, &v, &f, &r);
        assert_eq!((b[0].n, b[0].n_found, b[1].n, b[1].n_found), (2, 1, 2, 2));
        assert_eq!(b[0].fraction, Some(0.5));
        assert!((b[0].fraction_err.unwrap() - 0.5f64.powi(2).sqrt() / 2f64.sqrt()).abs() < 1e-12);
        assert_eq!(b[1].median_snr_ratio, Some(1.0));
        assert_eq!(median(&mut []), None);
        let l = edges(1.0, 100.0, 2, true);
        assert!((l[1] - 10.0).abs() < 1e-9);
    }
}
