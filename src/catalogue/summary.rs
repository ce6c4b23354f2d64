//! Per-source summary: bursts, exposure, burst rate with a Poisson confidence
//! interval, fluence range, DM mean and scatter.

use serde::Serialize;
use statrs::distribution::{ChiSquared, ContinuousCDF};

use super::{Bounds, BurstFilter, Catalogue, exposure_hours};
use crate::error::{Error, Result};

/// Confidence limits on the mean of a Poisson variable given `n` events.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct PoissonInterval {
    /// Lower limit on the mean number of events.
    pub lower: f64,
    /// Upper limit on the mean number of events.
    pub upper: f64,
}

/// Exact single-sided Poisson limits at confidence level `cl` (0 < cl < 1) for `n`
/// observed events, Gehrels (1986, ApJ 303, 336) eqs. (9) and (10) written with the
/// chi-square distribution: upper = χ²⁻¹(cl; 2(n+1))/2, lower = χ²⁻¹(1−cl; 2n)/2
/// (lower = 0 for n = 0).
///
/// # Errors
/// [`Error::Numerical`] if `cl` is not inside (0, 1).
pub fn poisson_interval(n: u64, cl: f64) -> Result<PoissonInterval> {
    if !(cl > 0.0 && cl < 1.0) {
        return Err(Error::Numerical(format!(
            "confidence level must lie in (0, 1), got {cl}"
        )));
    }
    let quantile = |dof: f64, p: f64| {
        ChiSquared::new(dof)
            .map(|d| d.inverse_cdf(p) / 2.0)
            .map_err(|e| Error::Numerical(format!("chi-square with {dof} dof: {e}")))
    };
    let upper = quantile(2.0 * (n as f64 + 1.0), cl)?;
    let lower = if n == 0 {
        0.0
    } else {
        quantile(2.0 * n as f64, 1.0 - cl)?
    };
    Ok(PoissonInterval { lower, upper })
}

/// What the catalogue knows about one source.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SourceSummary {
    /// Source name.
    pub source: String,
    /// S/N threshold applied to bursts and exposure (`None`: all).
    pub snr_min: Option<f64>,
    /// Bursts at or above the threshold.
    pub n_bursts: u64,
    /// Hours searched with a threshold at or below `snr_min` (overlaps merged).
    pub exposure_hours: f64,
    /// Confidence level of the rate interval.
    pub confidence: f64,
    /// Bursts per hour (`None` without exposure).
    pub rate_per_hour: Option<f64>,
    /// Lower and upper rate limits per hour (`None` without exposure).
    pub rate_interval_per_hour: Option<PoissonInterval>,
    /// Smallest and largest fluence in Jy ms among bursts that have one.
    pub fluence_range_jy_ms: Option<(f64, f64)>,
    /// Mean DM in pc cm⁻³.
    pub dm_mean: Option<f64>,
    /// Sample standard deviation of DM in pc cm⁻³ (needs two bursts).
    pub dm_std: Option<f64>,
}

impl Catalogue {
    /// Summarises `source`, counting bursts with S/N ≥ `snr_min` against the
    /// exposure searched at least that deep (see [`Catalogue::merged_exposure`]).
    ///
    /// # Errors
    /// Unknown source, a bad confidence level, or an SQLite failure.
    pub fn summary(
        &self,
        source: &str,
        snr_min: Option<f64>,
        confidence: f64,
    ) -> Result<SourceSummary> {
        self.source(source)?;
        let bursts = self.bursts(&BurstFilter {
            source: Some(source.into()),
            bounds: Bounds {
                snr_min,
                ..Default::default()
            },
        })?;
        let hours = exposure_hours(&self.merged_exposure(source, snr_min)?);
        let n = bursts.len() as u64;
        let interval = poisson_interval(n, confidence)?;
        let per_hour = (hours > 0.0).then_some(hours);
        let fluences: Vec<f64> = bursts.iter().filter_map(|b| b.fluence_jy_ms).collect();
        let dms: Vec<f64> = bursts.iter().map(|b| b.dm).collect();
        let dm_mean = (!dms.is_empty()).then(|| dms.iter().sum::<f64>() / dms.len() as f64);
        let dm_std = dm_mean.filter(|_| dms.len() > 1).map(|m| {
            (dms.iter().map(|d| (d - m).powi(2)).sum::<f64>() / (dms.len() - 1) as f64).sqrt()
        });
        Ok(SourceSummary {
            source: source.into(),
            snr_min,
            n_bursts: n,
            exposure_hours: hours,
            confidence,
            rate_per_hour: per_hour.map(|h| n as f64 / h),
            rate_interval_per_hour: per_hour.map(|h| PoissonInterval {
                lower: interval.lower / h,
                upper: interval.upper / h,
            }),
            fluence_range_jy_ms: (!fluences.is_empty()).then(|| {
                let lo = fluences.iter().copied().fold(f64::INFINITY, f64::min);
                let hi = fluences.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                (lo, hi)
            }),
            dm_mean,
            dm_std,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every row of the scipy fixture (tests/fixtures/poisson/make_limits.py,
    /// scipy 1.17.1) to 1e-8 relative.
    #[test]
    fn limits_match_scipy_chi_square_fixture() {
        let text = include_str!("../../tests/fixtures/poisson/limits.csv");
        let mut rows = 0;
        for line in text.lines().skip(1) {
            let v: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
            let got = poisson_interval(v[0] as u64, v[1]).unwrap();
            let close = |a: f64, b: f64| (a - b).abs() <= 1e-8 * b.abs().max(1e-3);
            assert!(
                close(got.upper, v[2]),
                "n={} cl={} upper {} vs {}",
                v[0],
                v[1],
                got.upper,
                v[2]
            );
            assert!(
                close(got.lower, v[3]),
                "n={} cl={} lower {} vs {}",
                v[0],
                v[1],
                got.lower,
                v[3]
            );
            rows += 1;
        }
        assert_eq!(rows, 45);
    }

    /// Gehrels (1986, ApJ 303, 336) Table 1, S = 1 (CL 0.8413) column, upper limits
    /// to four significant figures: n = 0 → 1.841, n = 10 → 14.27 (from memory; both
    /// agree with the exact chi-square form, scipy 1.17.1). Lower limits are asserted
    /// against the exact form only, in the fixture test above.
    #[test]
    fn limits_match_gehrels_1986_table_1() {
        let cl = 0.841_344_746;
        assert!((poisson_interval(0, cl).unwrap().upper - 1.841).abs() < 5e-4);
        assert!((poisson_interval(10, cl).unwrap().upper - 14.27).abs() < 5e-3);
        assert!(poisson_interval(3, 1.0).is_err());
    }
}
