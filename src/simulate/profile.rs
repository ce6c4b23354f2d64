//! The intrinsic pulse shape: a Gaussian convolved with a one-sided exponential
//! (scattering) tail, the exponentially modified Gaussian (EMG), with unit area.
//!
//! Grushka 1972 (Anal. Chem. 44, 1733) gives the EMG density
//! f(x) = (1/2τ) · exp(σ²/(2τ²) − x/τ) · erfc[(σ/τ − x/σ)/√2]
//! and its distribution function F(x) = Φ(x/σ) − exp(σ²/(2τ²) − x/τ) · Φ(x/σ − σ/τ),
//! where x is the time from the Gaussian's centre. Both are evaluated here in a form
//! that neither overflows nor loses precision far out in the tails.

use statrs::function::erf::erfc;
use std::f64::consts::{FRAC_1_SQRT_2, PI};

/// Gaussian FWHM divided by its standard deviation, 2√(2 ln 2).
pub const FWHM_PER_SIGMA: f64 = 2.354_820_045_030_949_3;

/// A unit-area pulse shape: Gaussian of standard deviation `sigma_s` convolved with
/// exp(−t/τ)/τ for t ≥ 0 with τ = `tau_s`. Either may be zero.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Emg {
    /// Standard deviation of the Gaussian in seconds.
    pub sigma_s: f64,
    /// Exponential (scattering) time in seconds.
    pub tau_s: f64,
}

impl Emg {
    /// Density at `x_s` seconds after the Gaussian's centre (per second).
    /// For `sigma_s == 0` and `tau_s == 0` (a delta) the density is not defined and
    /// 0 is returned; use [`Emg::cdf`] for integrals.
    pub fn pdf(&self, x_s: f64) -> f64 {
        let (s, t) = (self.sigma_s, self.tau_s);
        match (s > 0.0, t > 0.0) {
            (true, true) => {
                // (1/2τ)·exp(−x²/2σ²)·erfcx(b) with b = (σ/τ − x/σ)/√2, identical to the
                // Grushka form since exp(σ²/2τ² − x/τ) = exp(−x²/2σ² + b²).
                let b = (s / t - x_s / s) * FRAC_1_SQRT_2;
                if b >= 0.0 {
                    (-0.5 * (x_s / s).powi(2)).exp() * erfcx(b) / (2.0 * t)
                } else {
                    (0.5 * (s / t).powi(2) - x_s / t).exp() * erfc(b) / (2.0 * t)
                }
            }
            (true, false) => (-0.5 * (x_s / s).powi(2)).exp() / (s * (2.0 * PI).sqrt()),
            (false, true) if x_s >= 0.0 => (-x_s / t).exp() / t,
            _ => 0.0,
        }
    }

    /// Fraction of the pulse's area that arrives before `x_s` seconds after the
    /// Gaussian's centre, in `[0, 1]`.
    pub fn cdf(&self, x_s: f64) -> f64 {
        let (s, t) = (self.sigma_s, self.tau_s);
        match (s > 0.0, t > 0.0) {
            (true, true) => {
                let gauss = normal_cdf(x_s / s);
                let u = x_s / s - s / t;
                let tail = if u < 0.0 {
                    // exp(σ²/2τ² − x/τ)·Φ(u) = ½·exp(−x²/2σ²)·erfcx(−u/√2).
                    0.5 * (-0.5 * (x_s / s).powi(2)).exp() * erfcx(-u * FRAC_1_SQRT_2)
                } else {
                    // Here x ≥ σ²/τ so the exponent is ≤ −σ²/2τ²: no overflow.
                    (0.5 * (s / t).powi(2) - x_s / t).exp() * normal_cdf(u)
                };
                (gauss - tail).clamp(0.0, 1.0)
            }
            (true, false) => normal_cdf(x_s / s),
            (false, true) => {
                if x_s > 0.0 {
                    -(-x_s / t).exp_m1()
                } else {
                    0.0
                }
            }
            // A delta arrives at 0, not before it: its area lies in the sample that
            // starts at 0 (samples are [start, end)), not in the one that ends there.
            (false, false) => {
                if x_s > 0.0 {
                    1.0
                } else {
                    0.0
                }
            }
        }
    }

    /// Time in seconds after the Gaussian's centre from which the distribution
    /// function is a pure exponential, F(x) = 1 − [`Emg::tail_remainder`], to double
    /// precision; `None` without scattering.
    ///
    /// In the Grushka (1972) form 1 − F(x) = Q(x/σ) + R(x)·Φ(u), with Q = 1 − Φ,
    /// u = x/σ − σ/τ and R(x) = exp(−σ²/2τ² − uσ/τ) once x = σ(u + σ/τ) is
    /// substituted. So R(x) is off by R(x)·Q(u) − Q(x/σ), and for u ≥ 0 the normal
    /// tail bound Q(u) ≤ ½·exp(−u²/2) (common practice) puts both terms under
    /// ½·exp(−x²/2σ²). From x = max(9σ, σ²/τ) on (u ≥ 0 and x ≥ 9σ) that is
    /// < 3e-18. Without the Gaussian (σ = 0) the pulse is exponential from 0 on.
    pub fn exp_tail_start_s(&self) -> Option<f64> {
        let (s, t) = (self.sigma_s, self.tau_s);
        (t > 0.0).then(|| (9.0 * s).max(s * s / t))
    }

    /// 1 − F(x) = exp(σ²/2τ² − x/τ), the area still to come at `x_s` seconds after
    /// the Gaussian's centre, valid from [`Emg::exp_tail_start_s`] on (there x/τ ≥
    /// σ²/τ², so the exponent is ≤ −σ²/2τ²: no overflow).
    pub fn tail_remainder(&self, x_s: f64) -> f64 {
        (0.5 * (self.sigma_s / self.tau_s).powi(2) - x_s / self.tau_s).exp()
    }

    /// Times in seconds, relative to the Gaussian's centre, outside which the pulse
    /// carries less than about 1e-10 of its area on either side.
    pub fn support_s(&self) -> (f64, f64) {
        (-7.0 * self.sigma_s, 7.0 * self.sigma_s + 25.0 * self.tau_s)
    }
}

/// Standard normal distribution function Φ(z).
fn normal_cdf(z: f64) -> f64 {
    0.5 * erfc(-z * FRAC_1_SQRT_2)
}

/// Scaled complementary error function exp(b²)·erfc(b) for b ≥ 0.
///
/// Direct product below b = 25 (erfc(25) ≈ 8e-274 is still a normal double, exp(625)
/// ≈ 3e271 finite); above, the asymptotic series 1/(b√π)·(1 − 1/2b² + 3/4b⁴ − 15/8b⁶)
/// (Abramowitz & Stegun 1964, eq. 7.1.23), whose truncation error there is < 1e-11.
fn erfcx(b: f64) -> f64 {
    if b < 25.0 {
        (b * b).exp() * erfc(b)
    } else {
        let r = 1.0 / (2.0 * b * b);
        (1.0 - r * (1.0 - 3.0 * r * (1.0 - 5.0 * r))) / (b * PI.sqrt())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Grushka 1972 (Anal. Chem. 44, 1733) EMG density at the Gaussian centre for
    // σ = τ = 1: ½·e^{½}·erfc(1/√2) = 0.261578 (re-derived with scipy.special.erfc).
    #[test]
    fn emg_density_at_centre_matches_grushka_formula() {
        let p = Emg {
            sigma_s: 1.0,
            tau_s: 1.0,
        };
        assert!((p.pdf(0.0) - 0.261_578).abs() < 5e-7, "{}", p.pdf(0.0));
        // The same value scales as 1/time for σ = τ = 2 ms.
        let q = Emg {
            sigma_s: 2e-3,
            tau_s: 2e-3,
        };
        assert!((q.pdf(0.0) * 2e-3 - 0.261_578).abs() < 5e-7);
    }

    // scipy.stats.exponnorm (scipy 1.17.1, numpy 2.4.6) density and distribution
    // function; fixture and its generating script in tests/fixtures/simulate/.
    #[test]
    fn matches_scipy_exponnorm() {
        let text = include_str!("../../tests/fixtures/simulate/emg.csv");
        let mut n = 0;
        for line in text.lines().skip(1) {
            let v: Vec<f64> = line.split(',').map(|f| f.parse().unwrap()).collect();
            let p = Emg {
                sigma_s: v[0],
                tau_s: v[1],
            };
            let (pdf, cdf) = (p.pdf(v[2]), p.cdf(v[2]));
            assert!(
                (pdf - v[3]).abs() <= 1e-9 * v[3].abs() + 1e-12 / v[0],
                "{line}: pdf {pdf}"
            );
            assert!(
                (cdf - v[4]).abs() <= 1e-9 * v[4] + 1e-13,
                "{line}: cdf {cdf}"
            );
            n += 1;
        }
        assert_eq!(n, 65);
    }

    #[test]
    fn cdf_is_the_integral_of_pdf() {
        for &(s, t) in &[(1.0, 1.0), (1.0, 0.05), (0.2, 3.0), (1.0, 0.0), (0.0, 2.0)] {
            let p = Emg {
                sigma_s: s,
                tau_s: t,
            };
            let (lo, hi) = p.support_s();
            let n = 200_000;
            let dx = (hi - lo) / n as f64;
            let mut integral = 0.0;
            for i in 0..n {
                let x = lo + (i as f64 + 0.5) * dx;
                integral += p.pdf(x) * dx;
                if i % 20_000 == 0 {
                    assert!(
                        (integral - p.cdf(lo + (i + 1) as f64 * dx)).abs() < 2e-5,
                        "σ={s} τ={t} x={x}"
                    );
                }
            }
            assert!(
                (integral - 1.0).abs() < 1e-5,
                "σ={s} τ={t}: area {integral}"
            );
            assert!(p.cdf(lo) < 1e-9 && p.cdf(hi) > 1.0 - 1e-9);
        }
    }

    // Past its start the exponential tail gives the distribution function itself,
    // with or without a Gaussian core, however wide the Gaussian against τ.
    #[test]
    fn exponential_tail_matches_cdf() {
        for &(s, t) in &[
            (1.0, 1.0),
            (1.0, 0.05),
            (1.0, 0.3),
            (0.2, 3.0),
            (0.0, 2.0),
            (3.0, 0.1),
        ] {
            let p = Emg {
                sigma_s: s,
                tau_s: t,
            };
            let x0 = p.exp_tail_start_s().unwrap();
            for k in 0..50 {
                let x = x0 + k as f64 * 0.1 * t;
                let (cdf, tail) = (p.cdf(x), 1.0 - p.tail_remainder(x));
                assert!(
                    (cdf - tail).abs() < 2e-15,
                    "σ={s} τ={t} x={x}: {cdf} vs {tail}"
                );
            }
        }
        let gauss = Emg {
            sigma_s: 1.0,
            tau_s: 0.0,
        };
        assert_eq!(gauss.exp_tail_start_s(), None);
    }

    #[test]
    fn tails_are_finite_and_monotone() {
        let p = Emg {
            sigma_s: 1e-4,
            tau_s: 1e-1,
        };
        let mut last = 0.0;
        for i in -2000..20_000 {
            let c = p.cdf(i as f64 * 1e-4);
            assert!(c.is_finite() && c >= last - 1e-15, "x={i}e-4 c={c}");
            assert!(p.pdf(i as f64 * 1e-4).is_finite());
            last = c;
        }
        // Continuity of erfcx at the switch to the asymptotic series.
        assert!((erfcx(25.0 - 1e-9) / erfcx(25.0) - 1.0).abs() < 1e-9);
    }
}
