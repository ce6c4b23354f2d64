//! Activity-cycle search (days to months) with the real exposure.
//!
//! For each trial period: bursts per phase bin against the counts the exposure in that
//! bin predicts (Pearson χ²), and the narrowest phase window holding every burst. The
//! significance of the best period comes from Monte Carlo sets that keep the real
//! exposure: the same number of bursts placed at a constant rate inside the observing
//! sessions, the *whole* scan rerun, the maximum χ² (and narrowest window) recorded.
//! This accounts for the number of trial periods and for the window function at once.
//! The scan's best period may be a multiple of the true one; [`super::harmonic`] takes
//! a sub-harmonic when the data do not need the longer period, in the data and in
//! every Monte Carlo set alike. A Lomb–Scargle periodogram of per-session burst rates
//! is given alongside.

use rand_chacha::ChaCha8Rng;
use rayon::prelude::*;
use serde::Serialize;

use super::fold::{
    FoldTest, PhaseWindow, fold_counts, fold_exposure, fold_test, narrowest_window, phase,
};
use super::harmonic::{Pick, SubHarmonic, peak_fwhm_per_day, resolve};
use super::lomb::{fap_baluev, lomb_scargle};
use super::synth::{rng, uniform_over_exposure};
use crate::error::{Error, Result};

/// Largest exposure-fold table (trial periods × phase bins) a search builds: 2²⁶ cells,
/// 512 MiB, rescanned by every Monte Carlo set.
pub const MAX_FOLD_CELLS: usize = 1 << 26;

/// Farthest from the data's reference day a forecast may start, days (~2700 years).
pub const MAX_FORECAST_OFFSET_DAYS: f64 = 1e6;

/// Most forecast windows a search lists; in practice the widening by the period
/// uncertainty ends a forecast much sooner (see [`ActivityResult::forecast_stopped_at_cycle`]).
pub const MAX_FORECAST_WINDOWS: usize = 1000;

/// Random stream of the data's sub-harmonic check; Monte Carlo set s uses stream s.
const CHECK_STREAM: u64 = u64::MAX;

/// Settings of an activity search. Times are in days.
#[derive(Clone, Debug, Serialize)]
pub struct ActivityConfig {
    /// Shortest trial period, days.
    pub min_period_days: f64,
    /// Longest trial period, days (None: half the observing span).
    pub max_period_days: Option<f64>,
    /// Phase bins of the folded counts.
    pub bins: usize,
    /// Frequency step 1/(oversample·T), T the observing span.
    pub oversample: f64,
    /// Monte Carlo sets for the significance (0: none).
    pub sims: usize,
    /// Seed of the Monte Carlo.
    pub seed: u64,
    /// Number of future active windows to forecast.
    pub forecast: usize,
    /// Forecast windows ending after this day (None: end of the last session).
    pub after_day: Option<f64>,
}

impl Default for ActivityConfig {
    fn default() -> Self {
        ActivityConfig {
            min_period_days: 1.5,
            max_period_days: None,
            bins: 10,
            oversample: 10.0,
            sims: 1000,
            seed: 1,
            forecast: 3,
            after_day: None,
        }
    }
}

/// Per-trial-period curves (for plotting).
#[derive(Clone, Debug, Default, Serialize)]
pub struct ActivityPeriodogram {
    /// Trial periods, days, in order of ascending trial frequency (descending period).
    pub period_days: Vec<f64>,
    /// Pearson χ² of the folded counts against the exposure.
    pub chi2: Vec<f64>,
    /// Narrowest phase window holding all bursts, cycles.
    pub window_fraction: Vec<f64>,
    /// Lomb–Scargle power of per-session burst rates.
    pub ls_power: Vec<f64>,
}

/// Counts and exposure per phase bin at the best period (for plotting).
#[derive(Clone, Debug, Serialize)]
pub struct FoldedProfile {
    /// Bursts per bin.
    pub counts: Vec<u32>,
    /// On-source time per bin, days.
    pub exposure_days: Vec<f64>,
    /// Counts the exposure predicts under a constant rate.
    pub expected: Vec<f64>,
}

/// A forecast active window.
#[derive(Clone, Debug, Serialize)]
pub struct ActiveWindow {
    /// Cycle number counted from the epoch.
    pub cycle: i64,
    /// Start, MJD, widened by the period uncertainty propagated to this cycle.
    pub start_mjd: f64,
    /// End, MJD, widened likewise.
    pub end_mjd: f64,
    /// Start and end at the best period without widening, MJD.
    pub nominal_start_mjd: f64,
    /// See `nominal_start_mjd`.
    pub nominal_end_mjd: f64,
}

/// What the sub-harmonic check ([`super::harmonic`]) did to the scan's best period.
#[derive(Clone, Debug, Serialize)]
pub struct HarmonicCheck {
    /// Whether the reported period is a sub-harmonic of the scan's best.
    pub changed: bool,
    /// Period of the largest folded χ² over the scan, days.
    pub scan_period_days: f64,
    /// Its 1σ uncertainty from the χ² peak width, days.
    pub scan_period_err_days: f64,
    /// Its folded χ².
    pub scan_chi2: f64,
    /// Monte Carlo false-alarm probability of the largest χ² over the scan, with no
    /// check (NaN without sets).
    pub scan_fap: f64,
    /// The sub-harmonics considered, in order.
    pub sub_harmonics: Vec<SubHarmonic>,
}

/// Outcome of [`search_activity`].
#[derive(Clone, Debug, Serialize)]
pub struct ActivityResult {
    /// The settings used.
    pub config: ActivityConfig,
    /// Bursts used.
    pub n_bursts: usize,
    /// Observing sessions.
    pub n_sessions: usize,
    /// Total on-source time, days.
    pub exposure_days: f64,
    /// First session start to last session end, days.
    pub span_days: f64,
    /// Epoch of phase 0, MJD.
    pub epoch_mjd: f64,
    /// Best period after the sub-harmonic check, days.
    pub period_days: f64,
    /// Its 1σ uncertainty from the χ² peak width (FWHM/2.355), days — common practice.
    pub period_err_days: f64,
    /// Folded-count test at the best period.
    pub fold: FoldTest,
    /// Single-trial χ² chance probability (ignores the search; for reference).
    pub chi2_p_single: f64,
    /// Monte Carlo false-alarm probability of the folded χ² at the best period: the
    /// sets' χ² at the period each one's scan and sub-harmonic check settle on.
    pub fap: f64,
    /// The sub-harmonic check: the scan's own best period, its χ² and FAP, the tests.
    pub harmonic: HarmonicCheck,
    /// Monte Carlo probability that some trial period packs all bursts into a window
    /// as narrow as the observed narrowest one (over the scan).
    pub window_fap: f64,
    /// Narrowest phase window holding all bursts at the best period.
    pub window: PhaseWindow,
    /// Its width, cycles.
    pub window_fraction: f64,
    /// Its centre phase, cycles.
    pub centre_phase: f64,
    /// Narrowest window holding half of the bursts, cycles.
    pub half_window_fraction: f64,
    /// Best Lomb–Scargle period of the session rates, days, its power and Baluev FAP.
    pub ls_period_days: f64,
    /// See `ls_period_days`.
    pub ls_power: f64,
    /// See `ls_period_days`.
    pub ls_fap: f64,
    /// Forecast active windows.
    pub next_windows: Vec<ActiveWindow>,
    /// The cycle at which the forecast stopped short of the windows asked for: its
    /// window, widened by the period uncertainty, would be longer than the period, so
    /// it and every later one would cover every day.
    pub forecast_stopped_at_cycle: Option<i64>,
    /// Folded counts and exposure at the best period.
    pub profile: FoldedProfile,
    /// Curves over the trial periods.
    #[serde(skip)]
    pub periodogram: ActivityPeriodogram,
}

impl ActivityResult {
    /// The Monte Carlo FAP of the best period in words, as the terminal and the report
    /// give it: without simulations there is none (`fap` is NaN), and it says so.
    pub fn fap_text(&self) -> String {
        match self.config.sims {
            0 => "Monte Carlo FAP not computed (no simulations)".into(),
            sets => format!(
                "Monte Carlo FAP {:.4} ({sets} sets, real exposure)",
                self.fap
            ),
        }
    }
}

/// Per-trial exposure folds, reused by every Monte Carlo set.
struct TrialGrid<'a> {
    sessions: &'a [(f64, f64)],
    bins: usize,
    periods: Vec<f64>,
    exposure: Vec<Vec<f64>>,
}

/// One burst set scanned over the grid, and the trial the sub-harmonic check picks.
struct Scan {
    tests: Vec<FoldTest>,
    chi2: Vec<f64>,
    windows: Vec<f64>,
    /// Trial of the largest χ².
    scan_best: usize,
    pick: Pick,
}

impl<'a> TrialGrid<'a> {
    fn new(sessions: &'a [(f64, f64)], cfg: &ActivityConfig, span: f64) -> Result<Self> {
        let p_max = cfg.max_period_days.unwrap_or(0.5 * span);
        if !(cfg.min_period_days > 0.0
            && p_max > cfg.min_period_days
            && cfg.bins >= 2
            && cfg.oversample >= 1.0)
        {
            // A default the user never gave is named, with where it came from.
            let max = match cfg.max_period_days {
                Some(_) => format!("max period ({p_max})"),
                None => format!(
                    "max period ({p_max:.4}, by default half the sessions' span of {span:.4})"
                ),
            };
            return Err(Error::Config(format!(
                "need 0 < min period ({}) < {max} days, ≥ 2 bins, oversample ≥ 1",
                cfg.min_period_days
            )));
        }
        let (f_lo, f_hi) = (1.0 / p_max, 1.0 / cfg.min_period_days);
        let df = 1.0 / (cfg.oversample * span);
        // Counted in f64 first: an extreme setting must be refused, not wrap or abort.
        let n_f = ((f_hi - f_lo) / df).floor() + 1.0;
        let cells = n_f * cfg.bins as f64;
        if !cells.is_finite() || cells > MAX_FOLD_CELLS as f64 {
            return Err(Error::Config(format!(
                "{n_f:.3e} trial periods × {} phase bins is beyond {MAX_FOLD_CELLS}; raise the \
                 minimum period, lower the oversampling or use fewer bins",
                cfg.bins
            )));
        }
        let n = n_f as usize;
        let periods: Vec<f64> = (0..n).map(|j| 1.0 / (f_lo + j as f64 * df)).collect();
        let exposure = periods
            .par_iter()
            .map(|&p| {
                let mut e = vec![0.0; cfg.bins];
                fold_exposure(sessions, p, 0.0, &mut e);
                e
            })
            .collect();
        Ok(TrialGrid {
            sessions,
            bins: cfg.bins,
            periods,
            exposure,
        })
    }

    /// Fold tests and all-burst window widths at every trial for burst times `t`, the
    /// largest χ² and the sub-harmonic check's pick (drawing from `rng`).
    fn scan(&self, t: &[f64], rng: &mut ChaCha8Rng) -> Scan {
        let (tests, windows) = self.fold_all(t);
        let chi2: Vec<f64> = tests.iter().map(|t| t.chi2).collect();
        let scan_best = argmax(&chi2);
        let pick = resolve(
            &self.periods,
            &chi2,
            scan_best,
            t,
            self.sessions,
            self.bins,
            rng,
        );
        Scan {
            tests,
            chi2,
            windows,
            scan_best,
            pick,
        }
    }

    /// (fold test, all-burst window width) at every trial.
    fn fold_all(&self, t: &[f64]) -> (Vec<FoldTest>, Vec<f64>) {
        let mut counts = vec![0u32; self.bins];
        let mut ph = vec![0.0; t.len()];
        self.periods
            .iter()
            .zip(&self.exposure)
            .map(|(&p, e)| {
                counts.iter_mut().for_each(|c| *c = 0);
                fold_counts(t, p, 0.0, &mut counts);
                ph.iter_mut()
                    .zip(t)
                    .for_each(|(x, &ti)| *x = phase(ti, p, 0.0));
                (
                    fold_test(&counts, e),
                    narrowest_window(&mut ph, t.len()).width,
                )
            })
            .unzip()
    }
}

/// Searches burst times `t_days` (days after an integer reference MJD `ref_mjd`)
/// observed in `sessions_days` (same reference) for an activity cycle.
/// `on_progress` receives Monte Carlo sets done.
///
/// # Errors
/// [`Error::Config`] for fewer than 3 bursts, bursts outside every session, or
/// inconsistent settings.
pub fn search_activity(
    t_days: &[f64],
    sessions_days: &[(f64, f64)],
    ref_mjd: i64,
    cfg: &ActivityConfig,
    on_progress: &(dyn Fn(u64) + Sync),
) -> Result<ActivityResult> {
    if t_days.len() < 3 || sessions_days.is_empty() {
        return Err(Error::Config(
            "an activity search needs ≥ 3 bursts and ≥ 1 session".into(),
        ));
    }
    if cfg.forecast > MAX_FORECAST_WINDOWS {
        return Err(Error::Config(format!(
            "--forecast {} is beyond {MAX_FORECAST_WINDOWS} windows",
            cfg.forecast
        )));
    }
    if let Some(after) = cfg.after_day
        && (!after.is_finite() || after.abs() > MAX_FORECAST_OFFSET_DAYS)
    {
        return Err(Error::Config(format!(
            "forecast start MJD {:.4e} is not within {MAX_FORECAST_OFFSET_DAYS:.0e} days of \
             the data (reference MJD {ref_mjd})",
            ref_mjd as f64 + after
        )));
    }
    let outside = t_days
        .iter()
        .filter(|&&t| !sessions_days.iter().any(|s| t >= s.0 && t <= s.1))
        .count();
    if outside > 0 {
        return Err(Error::Config(format!(
            "{outside} burst(s) fall outside every observing session; the exposure must cover them"
        )));
    }
    let span = sessions_days.last().map_or(0.0, |s| s.1) - sessions_days[0].0;
    let grid = TrialGrid::new(sessions_days, cfg, span)?;
    let Scan {
        tests,
        chi2,
        windows,
        scan_best,
        pick,
    } = grid.scan(t_days, &mut rng(cfg.seed, CHECK_STREAM));
    let best = pick.index;
    let observed = Extremes {
        scan_chi2: chi2[scan_best],
        pick_chi2: chi2[best],
        window: windows.iter().cloned().fold(f64::INFINITY, f64::min),
    };
    let faps = monte_carlo(&grid, t_days.len(), cfg, &observed, on_progress);
    let sigma =
        |i: usize| peak_fwhm_per_day(&grid.periods, &chi2, i) / 2.355 * grid.periods[i].powi(2);
    let period = grid.periods[best];
    let period_err = sigma(best);
    let mut ph: Vec<f64> = t_days.iter().map(|&t| phase(t, period, 0.0)).collect();
    let window = narrowest_window(&mut ph, t_days.len());
    let half = narrowest_window(&mut ph, t_days.len().div_ceil(2));
    let (rate_t, rate, rate_err) = session_rates(t_days, sessions_days);
    let freqs: Vec<f64> = grid.periods.iter().map(|p| 1.0 / p).collect();
    let ls = lomb_scargle(&rate_t, &rate, &rate_err, &freqs);
    let ls_best = argmax(&ls);
    let f_max = freqs.iter().cloned().fold(0.0, f64::max);
    let mut counts = vec![0u32; cfg.bins];
    fold_counts(t_days, period, 0.0, &mut counts);
    let exposure = grid.exposure[best].clone();
    let total: f64 = exposure.iter().sum();
    let expected = exposure
        .iter()
        .map(|e| t_days.len() as f64 * e / total)
        .collect();
    let mean_t = t_days.iter().sum::<f64>() / t_days.len() as f64;
    let after = cfg
        .after_day
        .unwrap_or(sessions_days.last().map_or(0.0, |s| s.1));
    let (next_windows, forecast_stopped_at_cycle) = forecast(
        &window,
        period,
        period_err,
        mean_t,
        after,
        cfg.forecast,
        ref_mjd,
    );
    Ok(ActivityResult {
        config: cfg.clone(),
        n_bursts: t_days.len(),
        n_sessions: sessions_days.len(),
        exposure_days: sessions_days.iter().map(|s| s.1 - s.0).sum(),
        span_days: span,
        epoch_mjd: ref_mjd as f64,
        period_days: period,
        period_err_days: period_err,
        fold: tests[best],
        chi2_p_single: tests[best].chi2_p(),
        fap: faps.pick_chi2,
        harmonic: HarmonicCheck {
            changed: best != scan_best,
            scan_period_days: grid.periods[scan_best],
            scan_period_err_days: sigma(scan_best),
            scan_chi2: chi2[scan_best],
            scan_fap: faps.scan_chi2,
            sub_harmonics: pick.tests,
        },
        window_fap: faps.window,
        window,
        window_fraction: window.width,
        centre_phase: window.centre(),
        half_window_fraction: half.width,
        ls_period_days: 1.0 / freqs[ls_best],
        ls_power: ls[ls_best],
        ls_fap: fap_baluev(ls[ls_best], f_max, &rate_t, &rate_err),
        next_windows,
        forecast_stopped_at_cycle,
        profile: FoldedProfile {
            counts,
            exposure_days: exposure,
            expected,
        },
        periodogram: ActivityPeriodogram {
            period_days: grid.periods.clone(),
            chi2,
            window_fraction: windows,
            ls_power: ls,
        },
    })
}

fn argmax(v: &[f64]) -> usize {
    (0..v.len())
        .max_by(|&a, &b| v[a].total_cmp(&v[b]))
        .unwrap_or(0)
}

/// The statistics a Monte Carlo set is compared on: the largest χ² over the scan, the
/// χ² at the sub-harmonic check's pick, the narrowest all-burst window over the scan.
/// Observed values in, false-alarm probabilities out.
struct Extremes {
    scan_chi2: f64,
    pick_chi2: f64,
    window: f64,
}

/// Monte Carlo FAPs of the observed [`Extremes`], each (1 + hits)/(1 + sims); NaN
/// without sets. Each set goes through the same scan and sub-harmonic check.
fn monte_carlo(
    grid: &TrialGrid,
    n: usize,
    cfg: &ActivityConfig,
    observed: &Extremes,
    on_progress: &(dyn Fn(u64) + Sync),
) -> Extremes {
    let hits = (0..cfg.sims as u64)
        .into_par_iter()
        .map(|s| {
            let mut r = rng(cfg.seed, s);
            let t = uniform_over_exposure(grid.sessions, n, &mut r);
            let scan = grid.scan(&t, &mut r);
            on_progress(1);
            let min_window = scan.windows.iter().cloned().fold(f64::INFINITY, f64::min);
            [
                scan.chi2[scan.scan_best] >= observed.scan_chi2,
                scan.chi2[scan.pick.index] >= observed.pick_chi2,
                min_window <= observed.window,
            ]
            .map(usize::from)
        })
        .reduce(|| [0; 3], |a, b| [a[0] + b[0], a[1] + b[1], a[2] + b[2]]);
    let fap = |h: usize| match cfg.sims {
        0 => f64::NAN,
        sets => (h as f64 + 1.0) / (sets as f64 + 1.0),
    };
    Extremes {
        scan_chi2: fap(hits[0]),
        pick_chi2: fap(hits[1]),
        window: fap(hits[2]),
    }
}

/// Per-session burst rates (per day) at session mid-times, with Gehrels (1986, ApJ
/// 303, 336) upper 1σ count errors 1 + √(n + 0.75), so sessions without bursts count.
fn session_rates(t: &[f64], sessions: &[(f64, f64)]) -> (Vec<f64>, Vec<f64>, Vec<f64>) {
    let mut mid = Vec::new();
    let mut rate = Vec::new();
    let mut err = Vec::new();
    for &(a, b) in sessions {
        let n = t.iter().filter(|&&x| x >= a && x <= b).count() as f64;
        let d = b - a;
        mid.push(0.5 * (a + b));
        rate.push(n / d);
        err.push((1.0 + (n + 0.75).sqrt()) / d);
    }
    (mid, rate, err)
}

/// The next `count` active windows ending after `after` (days), widened by the period
/// uncertainty times the number of cycles from the data's mean time; stops early, at
/// the cycle returned, once a widened window is longer than the period.
fn forecast(
    window: &PhaseWindow,
    period: f64,
    period_err: f64,
    mean_t: f64,
    after: f64,
    count: usize,
    ref_mjd: i64,
) -> (Vec<ActiveWindow>, Option<i64>) {
    let n_mid = mean_t / period;
    // Cycle `first` ends at or after `after` up to rounding, so at most one is dropped:
    // a bounded range, whatever the arithmetic gives.
    let first = ((after / period) - window.start - window.width).ceil() as i64;
    let mut windows = Vec::with_capacity(count);
    for n in first..first.saturating_add(count as i64 + 2) {
        if windows.len() == count {
            break;
        }
        let start = (n as f64 + window.start) * period;
        let end = start + window.width * period;
        if end <= after {
            continue;
        }
        let widen = (n as f64 - n_mid).abs() * period_err;
        if end - start + 2.0 * widen > period {
            return (windows, Some(n));
        }
        windows.push(ActiveWindow {
            cycle: n,
            start_mjd: ref_mjd as f64 + start - widen,
            end_mjd: ref_mjd as f64 + end + widen,
            nominal_start_mjd: ref_mjd as f64 + start,
            nominal_end_mjd: ref_mjd as f64 + end,
        });
    }
    (windows, None)
}

#[cfg(test)]
mod tests {
    use super::*;

    const BURSTS: [f64; 4] = [0.1, 10.2, 20.3, 35.3];
    const SESSIONS: [(f64, f64); 5] = [
        (0.0, 0.5),
        (10.0, 10.5),
        (20.0, 20.5),
        (35.0, 35.5),
        (40.0, 40.5),
    ];

    fn run(cfg: ActivityConfig) -> Result<ActivityResult> {
        search_activity(&BURSTS, &SESSIONS, 60_000, &cfg, &|_| {})
    }

    #[test]
    fn sessions_too_short_for_the_default_longest_period_say_where_it_came_from() {
        // One 0.5-day session: the longest period defaults to 0.25 d, below the
        // shortest (1.5 d), and the message named a max period nobody had given.
        let cfg = ActivityConfig {
            sims: 0,
            ..Default::default()
        };
        let err = search_activity(&[0.1, 0.2, 0.3], &SESSIONS[..1], 60_000, &cfg, &|_| {})
            .unwrap_err()
            .to_string();
        assert!(
            err.contains("max period (0.2500, by default half the sessions' span of 0.5000)"),
            "{err}"
        );
    }

    #[test]
    fn a_forecast_start_that_is_not_a_nearby_day_is_refused() {
        // Before the check, NaN (and 1e300) never satisfied `end > after` and the
        // forecast looped for ever.
        for after in [f64::NAN, f64::INFINITY, 1e300, -2e6] {
            let cfg = ActivityConfig {
                sims: 0,
                after_day: Some(after),
                ..Default::default()
            };
            let err = run(cfg).unwrap_err().to_string();
            assert!(err.contains("forecast start"), "{after}: {err}");
        }
        // 10⁵ days on, the window widened by the period uncertainty is longer than
        // the period: nothing is listed, and the stop is said.
        let cfg = ActivityConfig {
            sims: 0,
            after_day: Some(1e5),
            ..Default::default()
        };
        let r = run(cfg).unwrap();
        assert!(r.next_windows.is_empty());
        let stop = r.forecast_stopped_at_cycle.unwrap();
        assert!((stop as f64 * r.period_days - 1e5).abs() < 2.0 * r.period_days);
    }

    #[test]
    fn a_forecast_stops_once_its_windows_outgrow_the_period() {
        // 100 million windows were listed, a window 11 million days wide among them.
        let cfg = ActivityConfig {
            sims: 0,
            after_day: Some(50.0),
            forecast: MAX_FORECAST_WINDOWS,
            ..Default::default()
        };
        let r = run(cfg.clone()).unwrap();
        let stop = r.forecast_stopped_at_cycle.unwrap();
        let last = r.next_windows.last().unwrap();
        assert_eq!(last.cycle + 1, stop);
        assert!(r.next_windows.len() > 3 && r.next_windows.len() < MAX_FORECAST_WINDOWS);
        for w in &r.next_windows {
            assert!(w.nominal_end_mjd > 60_050.0, "{w:?}");
            assert!(w.end_mjd - w.start_mjd <= r.period_days, "{w:?}");
        }
        let few = run(ActivityConfig { forecast: 3, ..cfg }).unwrap();
        assert_eq!(few.next_windows.len(), 3);
        assert_eq!(few.forecast_stopped_at_cycle, None);
        let too_many = ActivityConfig {
            sims: 0,
            forecast: MAX_FORECAST_WINDOWS + 1,
            ..Default::default()
        };
        let err = run(too_many).unwrap_err().to_string();
        assert!(err.contains("is beyond 1000 windows"), "{err}");
    }

    #[test]
    fn a_fold_table_too_large_to_build_is_refused() {
        // Before the check these aborted on allocation (or wrapped the count to 0).
        for cfg in [
            ActivityConfig {
                min_period_days: 1e-9,
                ..Default::default()
            },
            ActivityConfig {
                oversample: 1e300,
                ..Default::default()
            },
            ActivityConfig {
                bins: 1 << 40,
                ..Default::default()
            },
        ] {
            let err = run(cfg).unwrap_err().to_string();
            assert!(err.contains("is beyond"), "{err}");
        }
    }
}
