//! Phase-connected least-squares timing of arrival times: integer pulse numbers Nᵢ and
//! the fit tᵢ = t₀ + P·Nᵢ (+ ½·P·Ṗ·Nᵢ²), iterated until the pulse numbers settle.
//! Unweighted least squares; uncertainties scale the covariance by the residual
//! variance (no TOA errors are assumed known) — common practice.

use serde::Serialize;

use crate::error::{Error, Result};

/// A phase-connected timing solution.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TimingSolution {
    /// Period at the epoch, s.
    pub period_s: f64,
    /// 1σ uncertainty of the period, s.
    pub period_err_s: f64,
    /// Period derivative (s/s), when fitted.
    pub pdot: Option<f64>,
    /// 1σ uncertainty of the period derivative.
    pub pdot_err: Option<f64>,
    /// Time of pulse number 0, s (same reference as the input times).
    pub epoch_s: f64,
    /// 1σ uncertainty of the epoch, s.
    pub epoch_err_s: f64,
    /// Pulse number of each arrival time.
    pub pulse_numbers: Vec<i64>,
    /// Observed minus model time of each arrival, s.
    pub residuals_s: Vec<f64>,
    /// Root-mean-square residual, s.
    pub rms_s: f64,
    /// Root-mean-square residual in cycles (rms / P).
    pub rms_cycles: f64,
}

/// Fits a phase-connected solution starting from `period_guess_s`. Pulse 0 is the
/// arrival nearest the middle of the span.
///
/// # Errors
/// [`Error::Numerical`] with fewer than 3 arrivals (4 with Ṗ) or a singular fit.
pub fn fit_phase_connected(
    t_s: &[f64],
    period_guess_s: f64,
    fit_pdot: bool,
) -> Result<TimingSolution> {
    let n_par = if fit_pdot { 3 } else { 2 };
    if t_s.len() <= n_par {
        return Err(Error::Numerical(format!(
            "a timing fit with {n_par} parameters needs more than {n_par} arrival times, got {}",
            t_s.len()
        )));
    }
    let mid = 0.5 * (t_s[0] + t_s[t_s.len() - 1]);
    let anchor = t_s
        .iter()
        .cloned()
        .min_by(|a, b| (a - mid).abs().total_cmp(&(b - mid).abs()))
        .unwrap_or(mid);
    let mut coef = vec![0.0, period_guess_s, 0.0];
    let mut numbers: Vec<i64> = Vec::new();
    for _ in 0..50 {
        let new: Vec<i64> = t_s
            .iter()
            .map(|&t| pulse_number(t - anchor, &coef))
            .collect();
        if new == numbers {
            break;
        }
        numbers = new;
        coef = polyfit(t_s, anchor, &numbers, n_par)?.0;
    }
    let (coef, cov) = polyfit(t_s, anchor, &numbers, n_par)?;
    let residuals_s: Vec<f64> = t_s
        .iter()
        .zip(&numbers)
        .map(|(&t, &n)| t - anchor - model(&coef, n as f64))
        .collect();
    let ss: f64 = residuals_s.iter().map(|r| r * r).sum();
    let rms_s = (ss / t_s.len() as f64).sqrt();
    let s2 = ss / (t_s.len() - n_par) as f64;
    let err = |i: usize| (cov[i][i] * s2).sqrt();
    let period_s = coef[1];
    let (pdot, pdot_err) = if fit_pdot {
        (
            Some(2.0 * coef[2] / period_s),
            Some(2.0 * err(2) / period_s),
        )
    } else {
        (None, None)
    };
    Ok(TimingSolution {
        period_s,
        period_err_s: err(1),
        pdot,
        pdot_err,
        epoch_s: anchor + coef[0],
        epoch_err_s: err(0),
        pulse_numbers: numbers,
        residuals_s,
        rms_s,
        rms_cycles: rms_s / period_s,
    })
}

fn model(coef: &[f64], n: f64) -> f64 {
    coef[0] + coef[1] * n + coef[2] * n * n
}

/// Nearest integer N with model(N) ≈ dt (one Newton step from the linear guess).
fn pulse_number(dt: f64, coef: &[f64]) -> i64 {
    let mut n = (dt - coef[0]) / coef[1];
    let slope = coef[1] + 2.0 * coef[2] * n;
    n -= (model(coef, n) - dt) / slope;
    n.round() as i64
}

/// Least squares of (t − anchor) on 1, N (, N²) with N scaled for conditioning.
/// Returns coefficients (a, b, c) and the unscaled covariance (AᵀA)⁻¹.
#[allow(clippy::needless_range_loop)]
fn polyfit(
    t_s: &[f64],
    anchor: f64,
    numbers: &[i64],
    n_par: usize,
) -> Result<(Vec<f64>, [[f64; 3]; 3])> {
    let scale = numbers
        .iter()
        .map(|n| n.unsigned_abs())
        .max()
        .unwrap_or(1)
        .max(1) as f64;
    let mut ata = [[0.0f64; 3]; 3];
    let mut aty = [0.0f64; 3];
    for (&t, &n) in t_s.iter().zip(numbers) {
        let x = n as f64 / scale;
        let row = [1.0, x, x * x];
        for i in 0..n_par {
            aty[i] += row[i] * (t - anchor);
            for j in 0..n_par {
                ata[i][j] += row[i] * row[j];
            }
        }
    }
    let inv = invert(&ata, n_par).ok_or_else(|| {
        Error::Numerical("timing fit is singular (pulse numbers all equal)".into())
    })?;
    let mut coef = vec![0.0; 3];
    let mut cov = [[0.0f64; 3]; 3];
    let unscale = [1.0, 1.0 / scale, 1.0 / (scale * scale)];
    for i in 0..n_par {
        coef[i] = (0..n_par).map(|j| inv[i][j] * aty[j]).sum::<f64>() * unscale[i];
        for j in 0..n_par {
            cov[i][j] = inv[i][j] * unscale[i] * unscale[j];
        }
    }
    Ok((coef, cov))
}

/// Inverse of the leading n×n block by Gauss–Jordan with partial pivoting.
#[allow(clippy::needless_range_loop)]
fn invert(m: &[[f64; 3]; 3], n: usize) -> Option<[[f64; 3]; 3]> {
    let mut a = *m;
    let mut inv = [[0.0f64; 3]; 3];
    for i in 0..n {
        inv[i][i] = 1.0;
    }
    let norm = (0..n).map(|i| a[i][i].abs()).fold(0.0, f64::max);
    for col in 0..n {
        let piv = (col..n).max_by(|&x, &y| a[x][col].abs().total_cmp(&a[y][col].abs()))?;
        if a[piv][col].abs() <= 1e-12 * norm {
            return None;
        }
        a.swap(col, piv);
        inv.swap(col, piv);
        let d = a[col][col];
        for j in 0..n {
            a[col][j] /= d;
            inv[col][j] /= d;
        }
        for r in 0..n {
            if r != col {
                let f = a[r][col];
                for j in 0..n {
                    a[r][j] -= f * a[col][j];
                    inv[r][j] -= f * inv[col][j];
                }
            }
        }
    }
    Some(inv)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn recovers_period_and_pdot_of_exact_pulses() {
        let (p, pdot) = (0.7531, 1e-12);
        let numbers: Vec<i64> = (0..40).map(|i| i * i * 37 + i * 11 - 20_000).collect();
        let t: Vec<f64> = numbers
            .iter()
            .map(|&n| {
                let n = n as f64;
                100.0 + p * n + 0.5 * p * pdot * n * n
            })
            .collect();
        let sol = fit_phase_connected(&t, p * (1.0 + 2e-7), true).unwrap();
        // The fitted period is the one at the epoch (pulse 0 of the solution).
        let n_epoch = (numbers[0] - sol.pulse_numbers[0]) as f64;
        assert!((sol.period_s - p * (1.0 + pdot * n_epoch)).abs() < 1e-12);
        assert!((sol.pdot.unwrap() - pdot).abs() < 1e-15);
        assert!(sol.rms_s < 1e-7);
        let first = sol.pulse_numbers[0];
        let shifted: Vec<i64> = sol.pulse_numbers.iter().map(|n| n - first).collect();
        let expected: Vec<i64> = numbers.iter().map(|n| n - numbers[0]).collect();
        assert_eq!(shifted, expected);
    }

    #[test]
    fn too_few_arrivals_is_an_error() {
        assert!(fit_phase_connected(&[0.0, 1.0], 1.0, false).is_err());
    }
}
