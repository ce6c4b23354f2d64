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
    /// Of those, bursts whose arrival lies outside every exposure interval counted
    /// (promoted to this source from another pointing's search, or found by a run
    /// with a higher threshold): they are left out of the rate, which counts
    /// bursts against the time in which they were searched for.
    pub n_outside_exposure: u64,
    /// Hours searched with a threshold at or below `snr_min` (overlaps merged).
    pub exposure_hours: f64,
    /// Confidence level of the rate interval.
    pub confidence: f64,
    /// Bursts inside the exposure per hour (`None` without exposure).
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
    /// exposure searched at least that deep (see [`Catalogue::merged_exposure`]);
    /// the rate counts only the bursts that arrived inside that exposure.
    ///
    /// # Errors
    /// Unknown source, a bad confidence level, or an SQLite failure.
    pub fn summary(
        &self,
        source: &str,
        snr_min: Option<f64>,
        confidence: f64,
    ) -> Result<SourceSummary> {
        let bursts = self.bursts(&BurstFilter {
            source: Some(source.into()),
            bounds: Bounds {
                snr_min,
                ..Default::default()
            },
        })?;
        let windows = self.merged_exposure(source, snr_min)?;
        let hours = exposure_hours(&windows);
        let searched = self.bursts_in_own_exposure(source, snr_min)?;
        let n_outside = bursts
            .iter()
            .filter(|b| {
                !searched.contains(&b.id)
                    && !windows.iter().any(|&(a, e)| (a..=e).contains(&b.mjd_utc))
            })
            .count() as u64;
        let n = bursts.len() as u64 - n_outside;
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
            n_bursts: bursts.len() as u64,
            n_outside_exposure: n_outside,
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

impl Catalogue {
    /// Ids of `source`'s bursts found by a run whose exposure row, of this source and
    /// with a threshold ≤ `snr_min` (or none), is counted: inside the exposure by
    /// construction, even where the source has no reference DM and an early burst's
    /// arrival at infinite frequency precedes its recording's start.
    fn bursts_in_own_exposure(&self, source: &str, snr_min: Option<f64>) -> Result<Vec<i64>> {
        let mut stmt = self
            .conn()
            .prepare(
                "SELECT DISTINCT b.id FROM burst b
                 JOIN source s ON s.id = b.source_id
                 JOIN candidate c ON c.id = b.candidate_id
                 JOIN exposure e ON e.run_id = c.run_id AND e.source_id = b.source_id
                 WHERE s.name = ?1 AND (?2 IS NULL OR e.snr_threshold IS NULL OR e.snr_threshold <= ?2)",
            )
            .map_err(|e| self.err(e))?;
        let ids = stmt
            .query_map(rusqlite::params![source, snr_min], |r| r.get(0))
            .map_err(|e| self.err(e))?
            .collect::<rusqlite::Result<Vec<i64>>>()
            .map_err(|e| self.err(e))?;
        Ok(ids)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Bursts count in the rate only when their search's exposure is counted: one
    /// promoted to a source observed elsewhere is left out (it was counted against
    /// another source's hour: 2 per hour), and one whose arrival at infinite frequency
    /// precedes its recording's start by 0.5 s (DM 900: delay 1.46 s to the top
    /// channel, dispersion constant of Lorimer & Kramer 2005) is kept.
    #[test]
    fn the_rate_counts_the_bursts_inside_the_exposure() {
        use crate::catalogue::synthetic::{candidates, observation, run};
        use crate::catalogue::{AssignTolerance, SourceRecord};
        let dir = tempfile::tempdir().unwrap();
        let mut cat = Catalogue::open(&dir.path().join("c.sqlite")).unwrap();
        let other = SourceRecord {
            id: 0,
            name: "OTHER".into(),
            ra_deg: 10.0,
            dec_deg: 10.0,
            dm_ref: None,
            notes: String::new(),
        };
        cat.upsert_source(&other).unwrap();
        let obs = observation("FIELD-7", 3);
        let start = obs.span_mjd().0;
        let mut cands = candidates(&obs, 3, 3);
        cands[0].t_inf_s = -0.5;
        cands[0].mjd_inf = start - 0.5 / 86_400.0;
        cands[0].dm = 900.0;
        cat.record_search(&obs, &run(7.0), &cands).unwrap();
        cat.import_exposure_csv(
            std::path::Path::new("x.csv"),
            "OTHER,60010.0,60010.5\n".as_bytes(),
        )
        .unwrap();
        let tol = AssignTolerance {
            radius_deg: 0.5,
            dm: 5.0,
        };
        for (id, to) in [(1, "FIELD-7"), (2, "FIELD-7"), (3, "OTHER")] {
            cat.promote(id, Some(to), tol).unwrap();
        }
        let field = cat.summary("FIELD-7", None, 0.95).unwrap();
        assert_eq!((field.n_bursts, field.n_outside_exposure), (2, 0));
        assert!(
            (field.rate_per_hour.unwrap() - 2.0).abs() < 1e-9,
            "{field:?}"
        );
        let other = cat.summary("OTHER", None, 0.95).unwrap();
        assert_eq!((other.n_bursts, other.n_outside_exposure), (1, 1));
        assert_eq!(other.rate_per_hour, Some(0.0), "{other:?}");
        assert_eq!(other.rate_interval_per_hour.unwrap().lower, 0.0);
    }

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
