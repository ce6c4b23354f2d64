//! Power-law index of fluences or energies by maximum likelihood (Crawford, Jauncey &
//! Murdoch 1970, ApJ 162, 405; Clauset, Shalizi & Newman 2009, SIAM Rev. 51, 661).
//!
//! Differential dN/dS ∝ S^−α above S_min; the cumulative index is γ = α − 1.
//! α̂ = 1 + n / Σ ln(Sᵢ/S_min), σ(α̂) = (α̂ − 1)/√n; the (n − 1) form is less biased.
//! S_min, if not given, minimises the Kolmogorov–Smirnov distance (Clauset et al.).

use rand::Rng;
use rayon::prelude::*;
use serde::Serialize;

use super::synth::rng;
use crate::error::{Error, Result};

/// A power-law fit above S_min.
#[derive(Clone, Debug, Serialize)]
pub struct PowerLawFit {
    /// Lower limit of the fitted tail (same unit as the values).
    pub s_min: f64,
    /// Whether S_min was chosen by the KS distance.
    pub s_min_chosen: bool,
    /// Values ≥ S_min.
    pub n_tail: usize,
    /// Values left out for not being finite and > 0: a power law has no such values,
    /// and a catalogue fluence can be one (a burst whose S/N said nothing).
    pub n_excluded: usize,
    /// Differential index α̂ (maximum likelihood).
    pub alpha: f64,
    /// 1σ of α̂: (α̂ − 1)/√n.
    pub alpha_err: f64,
    /// Less biased 1 + (n − 1)/Σ ln(S/S_min).
    pub alpha_unbiased: f64,
    /// Cumulative index γ = α̂ − 1.
    pub gamma_cumulative: f64,
    /// KS distance between the tail and the fitted law.
    pub ks_distance: f64,
    /// Goodness-of-fit p: fraction of simulated power laws (same n, α̂, S_min, refit)
    /// with a larger KS distance (Clauset et al. 2009 with S_min held fixed).
    pub gof_p: Option<f64>,
}

fn alpha_and_ks(sorted_tail: &[f64], s_min: f64) -> (f64, f64, f64) {
    let n = sorted_tail.len() as f64;
    let sum_ln: f64 = sorted_tail.iter().map(|s| (s / s_min).ln()).sum();
    let alpha = 1.0 + n / sum_ln;
    let ks = sorted_tail
        .iter()
        .enumerate()
        .map(|(i, &s)| {
            let model = 1.0 - (s / s_min).powf(1.0 - alpha);
            ((i as f64 + 1.0) / n - model)
                .abs()
                .max((i as f64 / n - model).abs())
        })
        .fold(0.0, f64::max);
    (alpha, ks, sum_ln)
}

/// Fits the values ≥ `s_min` (or the KS-chosen S_min among the values, keeping at
/// least 5 in the tail); `n_boot` simulated sets (seeded) give a goodness-of-fit p.
///
/// # Errors
/// [`Error::Config`] if a given `s_min` is not a finite positive number;
/// [`Error::Numerical`] if fewer than 2 positive values lie above S_min or all equal.
/// Values that are not finite and > 0 are left out and counted in
/// [`PowerLawFit::n_excluded`].
pub fn fit_power_law(
    values: &[f64],
    s_min: Option<f64>,
    n_boot: usize,
    seed: u64,
) -> Result<PowerLawFit> {
    let mut v: Vec<f64> = values
        .iter()
        .copied()
        .filter(|x| x.is_finite() && *x > 0.0)
        .collect();
    let n_excluded = values.len() - v.len();
    v.sort_by(f64::total_cmp);
    let chosen = s_min.is_none();
    if let Some(s) = s_min
        && !(s.is_finite() && s > 0.0)
    {
        // ln(S/0) is infinite: the fit would report α = 1 ± 0 as if it were a result.
        return Err(Error::Config(format!(
            "S_min must be a finite number > 0, got {s}"
        )));
    }
    let s_min = match s_min {
        Some(s) => s,
        None => {
            let last = v.len().saturating_sub(5);
            (0..last.max(1))
                .filter(|&i| i < v.len() && (i == 0 || v[i] > v[i - 1]))
                .map(|i| (v[i], alpha_and_ks(&v[i..], v[i]).1))
                .filter(|(_, ks)| ks.is_finite())
                .min_by(|a, b| a.1.total_cmp(&b.1))
                .map(|p| p.0)
                .ok_or_else(|| Error::Numerical("no positive values to fit".into()))?
        }
    };
    let tail: Vec<f64> = v.iter().cloned().filter(|&x| x >= s_min).collect();
    let (alpha, ks, sum_ln) = alpha_and_ks(&tail, s_min);
    if tail.len() < 2 || sum_ln <= 0.0 || !alpha.is_finite() {
        return Err(Error::Numerical(format!(
            "a power-law fit needs ≥ 2 values at or above S_min = {s_min}, not all equal to \
             it; got {} ({} above it)",
            tail.len(),
            tail.iter().filter(|&&x| x > s_min).count()
        )));
    }
    let n = tail.len() as f64;
    let gof_p = (n_boot > 0).then(|| {
        let worse = (0..n_boot as u64)
            .into_par_iter()
            .filter(|&b| {
                let mut r = rng(seed, b);
                // Inverse CDF of the Pareto law: S = S_min·u^(−1/(α−1)).
                let mut sim: Vec<f64> = (0..tail.len())
                    .map(|_| s_min * (1.0 - r.random::<f64>()).powf(-1.0 / (alpha - 1.0)))
                    .collect();
                sim.sort_by(f64::total_cmp);
                alpha_and_ks(&sim, s_min).1 >= ks
            })
            .count();
        worse as f64 / n_boot as f64
    });
    Ok(PowerLawFit {
        s_min,
        s_min_chosen: chosen,
        n_tail: tail.len(),
        n_excluded,
        alpha,
        alpha_err: (alpha - 1.0) / n.sqrt(),
        alpha_unbiased: 1.0 + (n - 1.0) / sum_ln,
        gamma_cumulative: alpha - 1.0,
        ks_distance: ks,
        gof_p,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn worked_example_matches_closed_form() {
        // α̂ checked against scipy.stats.pareto.fit (floc=0, fscale=1) in
        // tests/fixtures/period/make_fixtures.py (scipy 1.17.1): b = α − 1.
        let s = [1.1, 1.3, 1.5, 2.0, 2.2, 3.1, 4.0, 5.5, 8.0, 15.0];
        let f = fit_power_law(&s, Some(1.0), 200, 5).unwrap();
        assert!((f.alpha - 1.888519).abs() < 1e-6);
        assert!((f.alpha_err - 0.280974).abs() < 1e-6);
        assert!((f.alpha_unbiased - 1.799667).abs() < 1e-6);
        assert!((f.ks_distance - 0.159832).abs() < 1e-6);
        let p = f.gof_p.unwrap();
        assert!(p > 0.05, "a fair sample should not be rejected, p = {p}");
    }

    #[test]
    fn recovers_index_of_synthetic_power_law() {
        let mut r = rng(11, 0);
        let s: Vec<f64> = (0..4000)
            .map(|_| 2.0 * (1.0 - r.random::<f64>()).powf(-1.0 / 1.5))
            .collect();
        let f = fit_power_law(&s, Some(2.0), 0, 0).unwrap();
        // True α = 2.5; σ = 1.5/√4000 ≈ 0.024: allow 4σ.
        assert!((f.alpha - 2.5).abs() < 4.0 * f.alpha_err, "{}", f.alpha);
    }

    #[test]
    fn values_that_are_not_positive_are_left_out_and_counted() {
        let s = [1.1, 1.3, 1.5, 2.0, 2.2, 3.1, 4.0, 5.5, 8.0, 15.0];
        let clean = fit_power_law(&s, None, 0, 0).unwrap();
        assert_eq!(clean.n_excluded, 0);
        let with_bad = [&s[..], &[0.0, -2.5, f64::NAN, f64::INFINITY]].concat();
        let f = fit_power_law(&with_bad, None, 0, 0).unwrap();
        assert_eq!(f.n_excluded, 4);
        assert_eq!(
            (f.alpha, f.s_min, f.n_tail),
            (clean.alpha, clean.s_min, clean.n_tail)
        );
    }

    #[test]
    fn a_lower_limit_that_is_not_positive_is_refused() {
        // With S_min = 0 every ln(S/S_min) is infinite and α came out as 1 ± 0.
        let s = [1.1, 1.3, 1.5, 2.0, 2.2];
        for s_min in [0.0, -1.0, f64::NAN, f64::INFINITY] {
            let err = fit_power_law(&s, Some(s_min), 10, 1).unwrap_err();
            assert!(matches!(err, Error::Config(_)), "{s_min}: {err}");
        }
        let err = fit_power_law(&[2.0; 4], None, 0, 0)
            .unwrap_err()
            .to_string();
        assert!(err.contains("got 4 (0 above it)"), "{err}");
    }
}
