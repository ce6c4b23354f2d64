//! Rotation-period search over arrival times: Z²ₙ scan, H-test at the strongest peaks,
//! common-divisor cross-check and phase-connected refinement.
//!
//! Trial counting: the scan's false-alarm probability is the Davies-type bound of
//! [`z2n_scan_fap`] over the searched band (an upcrossing count, so no number of
//! "independent" frequencies is assumed; it corresponds to about B·√(4π·Var t)·√(z/2)
//! trials). The Fourier count B·T is reported for reference. The H-test is evaluated
//! at the strongest Z²ₙ peaks; its FAP is the union bound [`h_scan_fap`]. With
//! `null_sets` > 0 both also get Monte Carlo FAPs from null sets searched the same
//! way ([`super::null_sets`]), calibrated for any number of arrivals.

use serde::Serialize;

use super::coherence::{
    HTest, h_p_single, h_scan_fap, h_test, phases, variance, z2n, z2n_p_single, z2n_scan_fap,
};
use super::divisor::{DivisorResult, common_divisor_period};
use super::null_sets::{NULL_JITTER_PERIODS, NullCalibration, NullFaps, null_maxima};
use super::scan::{FrequencyGrid, Periodogram, centre, z2n_grid};
use super::timing::{TimingSolution, fit_phase_connected};
use crate::error::{Error, Result};

/// Largest grid searched: for 200 arrivals, about 30 min of CPU (bench: 7 s per 3.1e7).
pub const MAX_TRIALS: usize = 1 << 33;

/// A phase-connected solution of a search is kept only below this residual rms, cycles.
pub const MAX_TIMING_RMS_CYCLES: f64 = 0.25;

/// Largest k tried when looking for the fundamental f/k below the strongest peak.
pub const MAX_SUB_HARMONIC: usize = 1000;

/// Settings of a rotation search.
#[derive(Clone, Debug, Serialize)]
pub struct RotationConfig {
    /// Shortest trial period, s.
    pub min_period_s: f64,
    /// Longest trial period, s.
    pub max_period_s: f64,
    /// Harmonics n of the scanned Z²ₙ.
    pub harmonics: usize,
    /// Grid points per peak width of the n-th harmonic (step 1/(oversample·n·T)).
    pub oversample: f64,
    /// Strongest peaks kept for refinement and the H-test.
    pub candidates: usize,
    /// Arrivals closer than this are merged into one first, s.
    pub merge_gap_s: f64,
    /// Fit a period derivative in the timing solution.
    pub fit_pdot: bool,
    /// Tolerance (cycles) of the common-divisor method; 0 disables it.
    pub divisor_tol_cycles: f64,
    /// A peak counts as "as strong" as the best (for choosing the fundamental among
    /// harmonics) if its Z²ₙ reaches this fraction of the best — common practice.
    pub harmonic_family_fraction: f64,
    /// Most points kept in the plotted periodogram.
    pub max_periodogram_points: usize,
    /// Null sets searched for Monte Carlo FAPs ([`super::null_sets`]); 0 skips them.
    pub null_sets: usize,
    /// Seed of the null sets.
    pub seed: u64,
}

impl Default for RotationConfig {
    fn default() -> Self {
        RotationConfig {
            min_period_s: 1e-3,
            max_period_s: 10.0,
            harmonics: 2,
            oversample: 3.0,
            candidates: 16,
            merge_gap_s: 1e-3,
            fit_pdot: false,
            divisor_tol_cycles: 0.05,
            harmonic_family_fraction: 0.8,
            max_periodogram_points: 200_000,
            null_sets: 0,
            seed: 1,
        }
    }
}

/// One refined peak of the scan.
#[derive(Clone, Debug, Serialize)]
pub struct RotationCandidate {
    /// Refined frequency, Hz.
    pub freq_hz: f64,
    /// 1/freq, s.
    pub period_s: f64,
    /// Z²ₙ at the refined frequency.
    pub z2n: f64,
    /// Single-trial chance probability of Z²ₙ (χ²₂ₙ tail).
    pub z2n_p_single: f64,
    /// Z²ₙ false-alarm probability over the whole scan.
    pub z2n_fap: f64,
    /// H-test at the H-refined frequency.
    pub h: HTest,
    /// Single-trial exp(−0.4 H).
    pub h_p_single: f64,
    /// H false-alarm probability over the scan (union bound, [`h_scan_fap`]).
    pub h_fap: f64,
    /// Monte Carlo FAPs of its Z²ₙ and H from the null sets, if searched.
    pub null_faps: Option<NullFaps>,
}

/// Outcome of [`search_rotation`].
#[derive(Clone, Debug, Serialize)]
pub struct RotationResult {
    /// The settings used, the longest trial period cut to the span (see
    /// `max_period_asked_s`).
    pub config: RotationConfig,
    /// The longest trial period asked for, when it was longer than the arrivals'
    /// span and the searched band was cut there.
    pub max_period_asked_s: Option<f64>,
    /// Arrivals after merging.
    pub n_toas: usize,
    /// Span of the arrivals, s.
    pub span_s: f64,
    /// The trial-frequency grid.
    pub grid: FrequencyGrid,
    /// Fourier count of independent frequencies, B·T (for reference).
    pub independent_frequencies: f64,
    /// Refined peaks, strongest Z²ₙ first.
    pub candidates: Vec<RotationCandidate>,
    /// Index in `candidates` of the chosen peak (the strongest, or a nearly as strong
    /// sub-harmonic f/k of it).
    pub best: usize,
    /// Phase-connected solution started from the chosen peak, if it could be fitted.
    pub timing: Option<TimingSolution>,
    /// Why there is no `timing` (too few arrivals, residuals too large ...).
    pub timing_failure: Option<String>,
    /// Common-divisor result, if enabled and found.
    pub divisor: Option<DivisorResult>,
    /// Reported period, s: the timing solution's if fitted, else the peak's.
    pub period_s: f64,
    /// Its 1σ uncertainty, s (timing fit, else a quarter of the grid step in period).
    pub period_err_s: f64,
    /// False-alarm probability of the chosen peak (Z²ₙ scan bound).
    pub fap: f64,
    /// The null sets searched for Monte Carlo FAPs, if any.
    pub null: Option<NullCalibration>,
    /// Decimated Z²ₙ periodogram (not written to JSON; see the CSV export).
    #[serde(skip)]
    pub periodogram: Periodogram,
}

/// The settings a search and a hypothesis test share: a NaN here would not fail
/// any comparison below, it would only give NaN or misleading results.
fn validate_common(cfg: &RotationConfig) -> Result<()> {
    let ok = (1..=20).contains(&cfg.harmonics)
        && cfg.merge_gap_s.is_finite()
        && cfg.merge_gap_s >= 0.0
        && cfg.divisor_tol_cycles.is_finite()
        && cfg.divisor_tol_cycles >= 0.0;
    if !ok {
        return Err(Error::Config(format!(
            "need 1 ≤ harmonics ≤ 20 (got {}), a finite merge gap ≥ 0 s (got {}) and a \
             finite divisor tolerance ≥ 0 cycles (got {})",
            cfg.harmonics, cfg.merge_gap_s, cfg.divisor_tol_cycles
        )));
    }
    Ok(())
}

fn validate(cfg: &RotationConfig) -> Result<()> {
    let ok = cfg.min_period_s > 0.0
        && cfg.max_period_s > cfg.min_period_s
        && cfg.max_period_s.is_finite()
        && cfg.oversample >= 1.0
        && cfg.oversample.is_finite()
        && cfg.candidates >= 1
        && cfg.harmonic_family_fraction > 0.0
        && cfg.harmonic_family_fraction <= 1.0;
    if !ok {
        return Err(Error::Config(
            "need 0 < min period < max period < ∞, 1 ≤ oversample < ∞".into(),
        ));
    }
    Ok(())
}

/// `cfg` with its longest trial period cut to the arrivals' span `span_s`, and the
/// longest period asked for if it was cut: over a longer period every arrival lies
/// within one turn, where Z²ₙ and H have no chance probability (as for a stated
/// period, [`test_period`]), so such a trial cannot be tested.
///
/// # Errors
/// [`Error::Config`] if not even the shortest trial period is below the span.
fn within_span(cfg: &RotationConfig, span_s: f64) -> Result<(RotationConfig, Option<f64>)> {
    if cfg.min_period_s >= span_s {
        return Err(Error::Config(format!(
            "the arrivals span {span_s} s, no longer than the shortest trial period of {} s \
             (--min-period-s): every trial period would hold them within one turn, where \
             Z²ₙ and H have no chance probability",
            cfg.min_period_s
        )));
    }
    if cfg.max_period_s <= span_s {
        return Ok((cfg.clone(), None));
    }
    let cut = RotationConfig {
        max_period_s: span_s,
        ..cfg.clone()
    };
    Ok((cut, Some(cfg.max_period_s)))
}

/// Searches sorted arrival times `t_s` (s, TDB) for a rotation period, over trial
/// periods from `cfg.min_period_s` to `cfg.max_period_s` or the arrivals' span,
/// whichever is shorter. `on_progress` receives grid points done out of `grid.len`
/// (see [`rotation_grid`]).
///
/// # Errors
/// [`Error::Config`] for fewer than 3 arrivals, inconsistent settings, or arrivals
/// spanning no more than the shortest trial period.
pub fn search_rotation(
    t_s: &[f64],
    cfg: &RotationConfig,
    on_progress: &(dyn Fn(u64) + Sync),
) -> Result<RotationResult> {
    validate_common(cfg)?;
    validate(cfg)?;
    let toas = merged(t_s, cfg.merge_gap_s)?;
    let span_s = toas[toas.len() - 1] - toas[0];
    let (cfg, max_period_asked_s) = within_span(cfg, span_s)?;
    let cfg = &cfg;
    let grid = rotation_grid(&toas, cfg);
    if grid.len > MAX_TRIALS {
        return Err(Error::Config(format!(
            "{} trial frequencies ({:.1} days span) is beyond {MAX_TRIALS}; raise the minimum \
             period, lower the oversampling or split the data into shorter spans",
            grid.len,
            span_s / 86_400.0
        )));
    }
    let band_hz = 1.0 / cfg.min_period_s - 1.0 / cfg.max_period_s;
    let scan = scan_candidates(&toas, cfg, &grid, on_progress);
    let null = (cfg.null_sets > 0).then(|| {
        let jitter_s = NULL_JITTER_PERIODS * cfg.max_period_s;
        null_maxima(
            &toas,
            cfg.null_sets,
            cfg.seed,
            jitter_s,
            on_progress,
            |t, progress| {
                let found = scan_candidates(t, cfg, &grid, progress).candidates;
                let max = |stat: fn(&RotationCandidate) -> f64| {
                    found.iter().map(stat).fold(f64::NEG_INFINITY, f64::max)
                };
                (max(|c| c.z2n), max(|c| c.h.h))
            },
        )
    });
    let ScannedCandidates {
        mut candidates,
        best,
        periodogram,
    } = scan;
    if let Some(null) = &null {
        for c in &mut candidates {
            c.null_faps = Some(null.faps(c.z2n, c.h.h));
        }
    }
    let chosen = &candidates[best];
    let (timing, timing_failure) = match fit_phase_connected(&toas, chosen.period_s, cfg.fit_pdot) {
        Ok(s) if s.rms_cycles < MAX_TIMING_RMS_CYCLES => (Some(s), None),
        Ok(s) => (
            None,
            Some(format!(
                "residual rms {:.3} cycles, above {MAX_TIMING_RMS_CYCLES}",
                s.rms_cycles
            )),
        ),
        Err(e) => (None, Some(e.to_string())),
    };
    let divisor = (cfg.divisor_tol_cycles > 0.0)
        .then(|| common_divisor_period(&toas, cfg.min_period_s, cfg.divisor_tol_cycles, 10_000_000))
        .flatten();
    let (period_s, period_err_s) = match &timing {
        Some(s) => (s.period_s, s.period_err_s),
        None => (chosen.period_s, 0.25 * grid.df_hz * chosen.period_s.powi(2)),
    };
    Ok(RotationResult {
        config: cfg.clone(),
        max_period_asked_s,
        n_toas: toas.len(),
        span_s,
        grid,
        independent_frequencies: band_hz * span_s,
        fap: chosen.z2n_fap,
        null,
        best,
        candidates,
        timing,
        timing_failure,
        divisor,
        period_s,
        period_err_s,
        periodogram,
    })
}

/// The refined peaks of one scan, strongest Z²ₙ first, and the chosen one.
struct ScannedCandidates {
    candidates: Vec<RotationCandidate>,
    best: usize,
    periodogram: Periodogram,
}

/// Scans merged, sorted `toas` over `grid`, refines and scores the strongest peaks,
/// and chooses among them (the strongest, or a nearly as strong sub-harmonic of it).
fn scan_candidates(
    toas: &[f64],
    cfg: &RotationConfig,
    grid: &FrequencyGrid,
    on_progress: &(dyn Fn(u64) + Sync),
) -> ScannedCandidates {
    let scan = z2n_grid(
        toas,
        grid,
        cfg.harmonics,
        cfg.max_periodogram_points,
        cfg.candidates,
        on_progress,
    );
    let band_hz = 1.0 / cfg.min_period_s - 1.0 / cfg.max_period_s;
    let span_s = toas[toas.len() - 1] - toas[0];
    let var_t = variance(toas);
    let mut candidates: Vec<RotationCandidate> = scan
        .peaks
        .iter()
        .map(|&(j, _)| refine(toas, grid.freq(j), grid.df_hz, cfg, band_hz, span_s, var_t))
        .collect();
    candidates.sort_by(|a, b| b.z2n.total_cmp(&a.z2n));
    let strongest = candidates[0].clone();
    let best = match sub_harmonic(toas, &strongest, cfg, grid, band_hz, span_s, var_t) {
        None => 0,
        Some(c) => match candidates
            .iter()
            .position(|x| (x.freq_hz - c.freq_hz).abs() < grid.df_hz)
        {
            Some(i) => {
                candidates[i] = c;
                i
            }
            None => {
                candidates.push(c);
                candidates.len() - 1
            }
        },
    };
    ScannedCandidates {
        candidates,
        best,
        periodogram: scan.periodogram,
    }
}

/// The fundamental below the strongest peak f: every harmonic of a narrow pulse is as
/// coherent as the fundamental, so the scan's strongest peak may be k·f. Returns the
/// refined sub-harmonic f/k (k ≥ 2, largest k first) whose Z²ₙ reaches
/// `harmonic_family_fraction` of the peak's, if any (common practice).
fn sub_harmonic(
    toas: &[f64],
    strongest: &RotationCandidate,
    cfg: &RotationConfig,
    grid: &FrequencyGrid,
    band_hz: f64,
    span_s: f64,
    var_t: f64,
) -> Option<RotationCandidate> {
    let k_max = ((strongest.freq_hz / grid.f0_hz).floor() as usize).min(MAX_SUB_HARMONIC);
    (2..=k_max).rev().find_map(|k| {
        let kf = k as f64;
        let (f, z) = refine_z(toas, strongest.freq_hz / kf, grid.df_hz / kf, cfg);
        (z >= cfg.harmonic_family_fraction * strongest.z2n)
            .then(|| candidate_at(toas, f, z, cfg, band_hz, span_s, var_t))
    })
}

/// The trial grid [`search_rotation`] scans for these (merged) arrivals: its band
/// cut to their span (a band wholly beyond it, which the search refuses, is left).
pub fn rotation_grid(t_s: &[f64], cfg: &RotationConfig) -> FrequencyGrid {
    let span = t_s.last().unwrap_or(&0.0) - t_s.first().unwrap_or(&0.0);
    let max_period_s = within_span(cfg, span).map_or(cfg.max_period_s, |(c, _)| c.max_period_s);
    FrequencyGrid::for_span(
        1.0 / max_period_s,
        1.0 / cfg.min_period_s,
        span,
        cfg.harmonics,
        cfg.oversample,
    )
}

/// `t_s` sorted, with arrivals closer than `gap_s` merged; at least 3 must be left,
/// not all at one instant (with no merge gap, identical times stay apart: every phase
/// is then the same at every frequency, and Z²ₙ is at its maximum).
///
/// # Errors
/// [`Error::Config`] saying how many were given and how many the merging left, or
/// that they are all the same instant.
fn merged(t_s: &[f64], gap_s: f64) -> Result<Vec<f64>> {
    let mut sorted = t_s.to_vec();
    sorted.sort_by(f64::total_cmp);
    let left = super::times::ArrivalTimes {
        ref_mjd: 0,
        t_s: sorted,
    }
    .merge_closer_than(gap_s)
    .t_s;
    if left.len() < 3 {
        let counts = if left.len() < t_s.len() {
            format!(
                "{} read, {} left after merging arrivals closer than the merge gap of \
                 {gap_s} s (--merge-gap-s)",
                t_s.len(),
                left.len()
            )
        } else {
            format!("got {}", t_s.len())
        };
        return Err(Error::Config(format!(
            "a period test needs at least 3 arrival times: {counts}"
        )));
    }
    if left[0] == left[left.len() - 1] {
        return Err(Error::Config(format!(
            "a period test needs arrival times spread in time: all {} are the same instant",
            left.len()
        )));
    }
    Ok(left)
}

/// The searched band [1/max period, 1/min period], Hz.
fn band(cfg: &RotationConfig) -> (f64, f64) {
    (1.0 / cfg.max_period_s, 1.0 / cfg.min_period_s)
}

/// Maximises f ↦ stat(f) on a local grid of `steps` points either side of `f0`,
/// each point held inside `cfg`'s band: next to a band edge a step of a coarse grid
/// (arrivals spanning less than a trial period) would otherwise reach zero or negative
/// frequencies, where every arrival has the same phase.
fn local_max(
    f0: f64,
    step: f64,
    steps: i32,
    cfg: &RotationConfig,
    stat: impl Fn(f64) -> f64,
) -> (f64, f64) {
    let (lo, hi) = band(cfg);
    (-steps..=steps)
        .map(|i| {
            let f = (f0 + i as f64 * step).clamp(lo, hi);
            (f, stat(f))
        })
        .max_by(|a, b| a.1.total_cmp(&b.1))
        .expect("non-empty local grid")
}

/// Z²ₙ maximised near `f_grid` (±1 grid step, then 8× finer around the best), within
/// the searched band.
fn refine_z(toas: &[f64], f_grid: f64, df: f64, cfg: &RotationConfig) -> (f64, f64) {
    let t_ref = centre(toas);
    let z_of = |f: f64| z2n(&phases(toas, t_ref, f, 0.0), cfg.harmonics);
    let (f1, _) = local_max(f_grid, df / 8.0, 8, cfg, z_of);
    local_max(f1, df / 64.0, 8, cfg, z_of)
}

fn refine(
    toas: &[f64],
    f_grid: f64,
    df: f64,
    cfg: &RotationConfig,
    band_hz: f64,
    span_s: f64,
    var_t: f64,
) -> RotationCandidate {
    let (fz, z) = refine_z(toas, f_grid, df, cfg);
    candidate_at(toas, fz, z, cfg, band_hz, span_s, var_t)
}

/// Scores a refined frequency: FAPs of Z²ₙ and the H-test (H refined on a step
/// fine enough for 20 harmonics).
fn candidate_at(
    toas: &[f64],
    fz: f64,
    z: f64,
    cfg: &RotationConfig,
    band_hz: f64,
    span_s: f64,
    var_t: f64,
) -> RotationCandidate {
    let t_ref = centre(toas);
    let n = cfg.harmonics;
    let h_of = |f: f64| h_test(&phases(toas, t_ref, f, 0.0)).h;
    let h_step = 1.0 / (4.0 * 20.0 * span_s.max(f64::MIN_POSITIVE));
    let (fh, _) = local_max(fz, h_step, 8, cfg, h_of);
    let h = h_test(&phases(toas, t_ref, fh, 0.0));
    RotationCandidate {
        freq_hz: fz,
        period_s: 1.0 / fz,
        z2n: z,
        z2n_p_single: z2n_p_single(z, n),
        z2n_fap: z2n_scan_fap(z, n, band_hz, var_t),
        h,
        h_p_single: h_p_single(h.h),
        h_fap: h_scan_fap(h.h, band_hz, var_t),
        null_faps: None,
    }
}

/// Significance of one stated period (no search, so no trials).
#[derive(Clone, Debug, Serialize)]
pub struct HypothesisResult {
    /// The period tested, s.
    pub period_s: f64,
    /// Arrivals after merging.
    pub n_toas: usize,
    /// Z²ₙ at the stated period and its χ²₂ₙ chance probability.
    pub z2n: f64,
    /// Harmonics n.
    pub harmonics: usize,
    /// Chance probability of Z²ₙ.
    pub z2n_p: f64,
    /// H-test and its chance probability exp(−0.4 H).
    pub h: HTest,
    /// exp(−0.4 H).
    pub h_p: f64,
    /// Phase-connected fit started from the stated period (residuals, pulse numbers).
    pub timing: Option<TimingSolution>,
    /// Why there is no `timing` (e.g. too few arrivals for the parameters).
    pub timing_failure: Option<String>,
}

/// Tests one period (and optional Ṗ) without searching.
///
/// # Errors
/// [`Error::Config`] for fewer than 3 arrivals, a period that is not finite and
/// positive or is longer than the arrivals' span (their phases then cover less than
/// one turn and would all but agree: five arrivals within 0.8 s gave p = 5e-4 at
/// P = 10⁶ s), a Ṗ that is not finite, or bad shared settings.
pub fn test_period(
    t_s: &[f64],
    period_s: f64,
    pdot: f64,
    cfg: &RotationConfig,
) -> Result<HypothesisResult> {
    validate_common(cfg)?;
    if !(period_s.is_finite() && period_s > 0.0 && pdot.is_finite()) {
        return Err(Error::Config(format!(
            "need a finite period > 0 s and a finite Ṗ, got P = {period_s}, Ṗ = {pdot}"
        )));
    }
    let toas = merged(t_s, cfg.merge_gap_s)?;
    let span_s = toas[toas.len() - 1] - toas[0];
    if period_s > span_s {
        return Err(Error::Config(format!(
            "the arrivals span {span_s} s, less than the stated period of {period_s} s: \
             their phases lie within one turn, where Z²ₙ and H have no chance probability"
        )));
    }
    let f = 1.0 / period_s;
    let ph = phases(&toas, centre(&toas), f, -pdot * f * f);
    let z = z2n(&ph, cfg.harmonics);
    let h = h_test(&ph);
    let (timing, timing_failure) = match fit_phase_connected(&toas, period_s, cfg.fit_pdot) {
        Ok(s) => (Some(s), None),
        Err(e) => (None, Some(e.to_string())),
    };
    Ok(HypothesisResult {
        period_s,
        n_toas: toas.len(),
        z2n: z,
        harmonics: cfg.harmonics,
        z2n_p: z2n_p_single(z, cfg.harmonics),
        h,
        h_p: h_p_single(h.h),
        timing,
        timing_failure,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Four arrivals an exact number of 0.3-s turns apart.
    const TOAS: [f64; 4] = [0.0, 4320.0, 8640.0, 12960.0];

    #[test]
    fn settings_that_are_not_numbers_are_refused() {
        // NaN fails no `<=` test: each of these used to run and print NaN or a
        // misleading answer with exit status 0.
        for (p, pdot) in [(f64::NAN, 0.0), (f64::INFINITY, 0.0), (0.3, f64::NAN)] {
            let err = test_period(&TOAS, p, pdot, &RotationConfig::default()).unwrap_err();
            assert!(err.to_string().contains("finite period"), "{err}");
        }
        for cfg in [
            RotationConfig {
                merge_gap_s: f64::NAN,
                ..Default::default()
            },
            RotationConfig {
                divisor_tol_cycles: f64::NAN,
                ..Default::default()
            },
        ] {
            assert!(test_period(&TOAS, 0.3, 0.0, &cfg).is_err());
            assert!(search_rotation(&TOAS, &cfg, &|_| {}).is_err());
        }
        let cfg = RotationConfig {
            max_period_s: f64::INFINITY,
            ..Default::default()
        };
        assert!(search_rotation(&TOAS, &cfg, &|_| {}).is_err());
    }

    #[test]
    fn a_grid_beyond_counting_is_refused_not_indexed() {
        // A grid length that wrapped to 0 left no peak and the search panicked.
        for cfg in [
            RotationConfig {
                min_period_s: 1e-300,
                ..Default::default()
            },
            RotationConfig {
                oversample: 1e300,
                ..Default::default()
            },
        ] {
            let err = search_rotation(&TOAS, &cfg, &|_| {}).unwrap_err();
            assert!(err.to_string().contains("is beyond"), "{err}");
        }
    }

    #[test]
    fn arrivals_within_one_trial_period_keep_every_pick_in_the_band() {
        // Five arrivals within 0.81 s, searched up to 10 s before the band was cut
        // to the span: the grid step (0.21 Hz) was wider than the lowest trial
        // frequency, and refining the peak there reached a negative frequency (a
        // period of −2130 s was reported).
        let toas = [0.0, 0.0864, 0.216, 0.69984, 0.80352];
        let cfg = RotationConfig::default();
        let r = search_rotation(&toas, &cfg, &|_| {}).unwrap();
        for c in &r.candidates {
            assert!(
                (cfg.min_period_s..=cfg.max_period_s).contains(&c.period_s),
                "{c:?}"
            );
        }
        assert!((cfg.min_period_s..=cfg.max_period_s).contains(&r.period_s));
    }

    #[test]
    fn arrivals_all_at_one_instant_are_refused() {
        // With --merge-gap-s 0 four identical times were searched over a grid step of
        // 7e306 Hz and reported a period of 0 s; tested at a stated period they
        // gave the largest Z²ₙ possible, p = 0.003.
        let cfg = RotationConfig {
            merge_gap_s: 0.0,
            ..Default::default()
        };
        let toas = [5.0; 4];
        let err = search_rotation(&toas, &cfg, &|_| {}).unwrap_err();
        assert!(
            err.to_string().contains("all 4 are the same instant"),
            "{err}"
        );
        let err = test_period(&toas, 0.3, 0.0, &cfg).unwrap_err();
        assert!(
            err.to_string().contains("all 4 are the same instant"),
            "{err}"
        );
        assert!(search_rotation(&[5.0, 5.0, 6.0], &cfg, &|_| {}).is_ok());
    }

    /// Arrivals spanning 0.8 s searched up to the default 10 s used to report a best
    /// period of seconds: a trial period longer than the span cannot be tested.
    #[test]
    fn the_band_is_cut_to_the_span_and_a_band_wholly_beyond_it_is_refused() {
        let toas = [0.0, 0.0864, 0.216, 0.69984, 0.80352];
        let span = toas[4] - toas[0];
        let r = search_rotation(&toas, &RotationConfig::default(), &|_| {}).unwrap();
        assert!(r.period_s <= span, "best period {} s", r.period_s);
        for c in &r.candidates {
            assert!(c.period_s <= span, "{c:?}");
        }
        assert_eq!(r.config.max_period_s, span);
        assert_eq!(r.max_period_asked_s, Some(10.0));
        assert_eq!(rotation_grid(&toas, &RotationConfig::default()), r.grid);
        // A band inside the span is searched as asked.
        let inside = RotationConfig {
            max_period_s: 0.5,
            ..Default::default()
        };
        let r = search_rotation(&toas, &inside, &|_| {}).unwrap();
        assert_eq!((r.config.max_period_s, r.max_period_asked_s), (0.5, None));
        // Nothing of the band left: refused, like a stated period beyond the span.
        for min_period_s in [span, 1.0] {
            let beyond = RotationConfig {
                min_period_s,
                ..Default::default()
            };
            let err = search_rotation(&toas, &beyond, &|_| {}).unwrap_err();
            assert!(
                err.to_string()
                    .contains("no longer than the shortest trial period"),
                "{err}"
            );
        }
    }

    #[test]
    fn a_stated_period_longer_than_the_span_is_refused() {
        let cfg = RotationConfig::default();
        let err = test_period(&TOAS, 12_961.0, 0.0, &cfg).unwrap_err();
        assert!(
            err.to_string().contains("less than the stated period"),
            "{err}"
        );
        assert!(test_period(&TOAS, 12_960.0, 0.0, &cfg).is_ok());
    }

    #[test]
    fn a_timing_fit_that_cannot_be_made_says_why() {
        let cfg = RotationConfig {
            fit_pdot: true,
            ..Default::default()
        };
        let h = test_period(&TOAS[..3], 0.3, 0.0, &cfg).unwrap();
        assert!(h.timing.is_none());
        let why = h.timing_failure.unwrap();
        assert!(why.contains("needs more than 3 arrival times"), "{why}");
        let h = test_period(&TOAS, 0.3, 0.0, &cfg).unwrap();
        assert!(h.timing.is_some() && h.timing_failure.is_none());
    }
}
