//! Figures for an activity-cycle search ([`crate::period::activity`]): the folded-χ²
//! periodogram, the burst counts folded at the best period beside the exposure, and
//! the timeline with the active windows the best period implies.

use statrs::distribution::{ChiSquared, ContinuousCDF};

use super::figure::CaptionedFigure;
use super::periodicity::{Periodogram, folded_figure, periodogram_figure, timeline_figure};
use crate::error::{Error, Result};
use crate::period::activity::ActivityResult;

/// Single-trial chance probabilities drawn as levels on the periodogram.
const LEVELS_P: [(f64, &str); 2] = [
    (1e-2, "single-trial p = 1%"),
    (1e-3, "single-trial p = 0.1%"),
];

/// The three figures for `r`, from the same sessions and bursts (MJD) it was run on.
/// Active windows are the best period's narrowest all-burst phase window repeated
/// over the sessions' span, plus the forecast windows.
///
/// # Errors
/// [`Error::Config`] for an empty periodogram.
pub fn activity_figures(
    r: &ActivityResult,
    sessions_mjd: &[(f64, f64)],
    bursts_mjd: &[f64],
) -> Result<Vec<CaptionedFigure>> {
    let pg = &r.periodogram;
    if pg.period_days.is_empty() {
        return Err(Error::Config("activity search has no periodogram".into()));
    }
    // The search scans in ascending frequency: reverse for ascending period.
    let periods: Vec<f64> = pg.period_days.iter().rev().copied().collect();
    let chi2: Vec<f64> = pg.chi2.iter().rev().copied().collect();
    let levels = chi2_levels(r.config.bins.saturating_sub(1).max(1) as f64);
    let level_refs: Vec<(f64, &str)> = levels.iter().map(|(v, l)| (*v, *l)).collect();
    let periodogram = periodogram_figure(&Periodogram {
        periods: &periods,
        statistic: &chi2,
        statistic_label: "folded χ² (counts vs exposure)",
        period_label: "trial period (days)",
        fap_levels: &level_refs,
    })?;
    let exposure_h: Vec<f64> = r.profile.exposure_days.iter().map(|d| d * 24.0).collect();
    let folded = folded_figure(
        &r.profile.counts,
        &exposure_h,
        "h",
        &format!(
            "folded at {:.4} ± {:.4} d from MJD {:.3}; χ² = {:.1}, {}",
            r.period_days,
            r.period_err_days,
            r.epoch_mjd,
            r.fold.chi2,
            r.fap_text()
        ),
    )?;
    let timeline = timeline_figure(sessions_mjd, bursts_mjd, &active_windows(r, sessions_mjd))?;
    // A sub-harmonic reported instead of the scan's highest peak is said beside it.
    let h = &r.harmonic;
    let scan_best = if h.changed {
        format!(
            "; the highest peak, {:.4} d, is a multiple with alike cycles",
            h.scan_period_days
        )
    } else {
        String::new()
    };
    Ok(vec![
        (
            format!(
                "Activity periodogram: best {:.4} d ({}{scan_best})",
                r.period_days,
                r.fap_text()
            ),
            periodogram,
        ),
        (
            "Bursts folded at the best period, with exposure per phase bin".into(),
            folded,
        ),
        (
            "Sessions, bursts and the active windows of the best period (shaded)".into(),
            timeline,
        ),
    ])
}

/// χ² values with the [`LEVELS_P`] upper-tail probabilities for `dof` degrees of freedom.
fn chi2_levels(dof: f64) -> Vec<(f64, &'static str)> {
    let dist = ChiSquared::new(dof).expect("dof is positive");
    LEVELS_P
        .iter()
        .map(|&(p, label)| (dist.inverse_cdf(1.0 - p), label))
        .collect()
}

/// The all-burst phase window of every cycle overlapping the sessions, then the forecast.
fn active_windows(r: &ActivityResult, sessions_mjd: &[(f64, f64)]) -> Vec<(f64, f64)> {
    let p = r.period_days;
    let (lo, hi) = sessions_mjd
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), s| {
            (a.min(s.0), b.max(s.1))
        });
    let mut out = Vec::new();
    if p > 0.0 && lo.is_finite() {
        let first = ((lo - r.epoch_mjd) / p).floor() as i64 - 1;
        let last = ((hi - r.epoch_mjd) / p).ceil() as i64;
        for k in first..=last {
            let start = r.epoch_mjd + (k as f64 + r.window.start) * p;
            let end = start + r.window.width * p;
            // A cycle running past the last session is drawn by the (widened) forecast.
            let forecast_covers = end > hi && !r.next_windows.is_empty();
            if end >= lo && start <= hi && !forecast_covers {
                out.push((start, end));
            }
        }
    }
    out.extend(r.next_windows.iter().map(|w| (w.start_mjd, w.end_mjd)));
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::period::activity::{ActivityConfig, search_activity};

    // Upper-tail points of χ² with 9 dof: 21.666 (p = 0.01) and 27.877 (p = 0.001)
    // (standard tables, e.g. Abramowitz & Stegun 1964, table 26.8).
    #[test]
    fn chi2_levels_match_tables() {
        let l = chi2_levels(9.0);
        assert!((l[0].0 - 21.666).abs() < 2e-3, "{}", l[0].0);
        assert!((l[1].0 - 27.877).abs() < 2e-3, "{}", l[1].0);
    }

    /// Daily 6-hour sessions for 80 days, bursts only in the first 3 days of a 16-day
    /// cycle, searched with `sims` simulations: the result, sessions and bursts (MJD).
    fn sixteen_day_cycle(sims: usize) -> (ActivityResult, Vec<(f64, f64)>, Vec<f64>) {
        let ref_mjd = 60000;
        let sessions: Vec<(f64, f64)> = (0..80).map(|d| (d as f64, d as f64 + 0.25)).collect();
        let bursts: Vec<f64> = (0..80)
            .filter(|d| d % 16 < 3)
            .map(|d| d as f64 + 0.1)
            .collect();
        let cfg = ActivityConfig {
            sims,
            max_period_days: Some(30.0),
            ..ActivityConfig::default()
        };
        let r = search_activity(&bursts, &sessions, ref_mjd, &cfg, &|_| {}).unwrap();
        let to_mjd = |d: f64| ref_mjd as f64 + d;
        let sessions_mjd = sessions
            .iter()
            .map(|&(a, b)| (to_mjd(a), to_mjd(b)))
            .collect();
        (r, sessions_mjd, bursts.iter().map(|&d| to_mjd(d)).collect())
    }

    #[test]
    fn figures_for_a_periodic_source_show_bursts_inside_active_windows() {
        let (r, sessions_mjd, bursts_mjd) = sixteen_day_cycle(20);
        assert!((r.period_days - 16.0).abs() < 0.5, "{}", r.period_days);
        let windows = active_windows(&r, &sessions_mjd);
        for b in &bursts_mjd {
            assert!(
                windows
                    .iter()
                    .any(|&(s, e)| s - 1e-9 <= *b && *b <= e + 1e-9),
                "burst at {b} outside every active window"
            );
        }
        let figs = activity_figures(&r, &sessions_mjd, &bursts_mjd).unwrap();
        assert_eq!(figs.len(), 3);
        assert!(
            figs.iter()
                .all(|(caption, f)| !caption.is_empty() && f.width >= 1000)
        );
        assert!(figs[0].0.contains("Monte Carlo FAP 0."), "{}", figs[0].0);
    }

    /// Without simulations the FAP is "not computed", never "NaN" (the library's value).
    #[test]
    fn without_simulations_the_fap_is_not_computed() {
        let (r, sessions_mjd, bursts_mjd) = sixteen_day_cycle(0);
        assert!(r.fap.is_nan());
        let fap = r.fap_text();
        assert_eq!(fap, "Monte Carlo FAP not computed (no simulations)");
        let figs = activity_figures(&r, &sessions_mjd, &bursts_mjd).unwrap();
        assert!(figs[0].0.contains(&fap), "{}", figs[0].0);
        assert!(figs.iter().all(|(caption, _)| !caption.contains("NaN")));
    }
}
