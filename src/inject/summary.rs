//! The summary of an injection run: completeness levels from the probit fit (and
//! from linear interpolation of the binned fractions as a cross-check), binned
//! recovery against S/N, DM and width, and S/N, DM and time errors.

use serde::Serialize;

use super::curve::{Bin, ProbitFit, bin, edges, fit_probit, median};
use super::run::InjectionRow;

/// Bins used for DM and width.
const N_PARAM_BINS: usize = 6;

/// Bright-burst figures (expected S/N at or above a threshold).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Bright {
    /// The S/N threshold.
    pub min_expected_snr: f64,
    /// Bursts at or above it.
    pub n: usize,
    /// Of which recovered.
    pub n_found: usize,
    /// Recovered fraction.
    pub fraction: Option<f64>,
    /// Median reported / expected S/N of the recovered.
    pub median_snr_ratio: Option<f64>,
    /// By injected DM.
    pub by_dm: Vec<Bin>,
    /// By injected intrinsic width (ms, log bins).
    pub by_width_ms: Vec<Bin>,
}

/// Everything reported about an injection run besides the per-burst rows.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Summary {
    /// Bursts injected.
    pub n_injected: usize,
    /// Recovered (see [`InjectionRow::found`]).
    pub n_found: usize,
    /// Matched by a candidate of any verdict.
    pub n_detected: usize,
    /// How the levels are obtained, in words.
    pub method: String,
    /// Probit fit against expected S/N.
    pub snr_fit: Option<ProbitFit>,
    /// 50 % completeness in expected S/N (fit).
    pub snr50: Option<f64>,
    /// 90 % completeness in expected S/N (fit).
    pub snr90: Option<f64>,
    /// 50 % level by interpolating the binned fractions.
    pub snr50_interpolated: Option<f64>,
    /// 90 % level by interpolating the binned fractions.
    pub snr90_interpolated: Option<f64>,
    /// Probit fit against log10 fluence (with an SEFD).
    pub log10_fluence_fit: Option<ProbitFit>,
    /// 50 % completeness in fluence, Jy ms.
    pub fluence50_jy_ms: Option<f64>,
    /// 90 % completeness in fluence, Jy ms.
    pub fluence90_jy_ms: Option<f64>,
    /// Recovery by expected S/N (unit bins).
    pub by_snr: Vec<Bin>,
    /// Recovery by DM (all bursts).
    pub by_dm: Vec<Bin>,
    /// Recovery by intrinsic width in ms (all bursts).
    pub by_width_ms: Vec<Bin>,
    /// Bright bursts.
    pub bright: Bright,
    /// Median reported − injected DM of the recovered, pc cm⁻³.
    pub median_dm_error: Option<f64>,
    /// Median |reported − injected DM|.
    pub median_abs_dm_error: Option<f64>,
    /// Median reported − injected arrival time, s.
    pub median_time_error_s: Option<f64>,
    /// Median |reported − injected time|, s.
    pub median_abs_time_error_s: Option<f64>,
}

/// Builds the summary of `rows`; fluence figures only if `with_fluence`.
pub fn summarise(rows: &[InjectionRow], with_fluence: bool, bright_snr: f64) -> Summary {
    let snr: Vec<f64> = rows.iter().map(|r| r.expected_snr).collect();
    let found: Vec<bool> = rows.iter().map(|r| r.found).collect();
    let ratio: Vec<Option<f64>> = rows.iter().map(InjectionRow::snr_ratio).collect();
    let dm: Vec<f64> = rows.iter().map(|r| r.dm).collect();
    let width: Vec<f64> = rows.iter().map(|r| r.width_ms).collect();

    let snr_fit = fit_probit(&snr, &found);
    let snr_edges = unit_edges(&snr);
    let by_snr = bin(&snr_edges, &snr, &found, &ratio);
    let fluence_fit = if with_fluence {
        let lf: Vec<f64> = rows
            .iter()
            .map(|r| r.fluence_jy_ms.map_or(f64::NAN, f64::log10))
            .collect();
        if lf.iter().all(|v| v.is_finite()) {
            fit_probit(&lf, &found)
        } else {
            None
        }
    } else {
        None
    };
    let param_bins = |v: &[f64], log: bool, keep: &dyn Fn(usize) -> bool| {
        let idx: Vec<usize> = (0..rows.len()).filter(|&i| keep(i)).collect();
        let vals: Vec<f64> = idx.iter().map(|&i| v[i]).collect();
        let (lo, hi) = range(&vals);
        let e = if log && lo > 0.0 {
            edges(lo, hi, N_PARAM_BINS, true)
        } else {
            edges(lo, hi, N_PARAM_BINS, false)
        };
        let f: Vec<bool> = idx.iter().map(|&i| found[i]).collect();
        let r: Vec<Option<f64>> = idx.iter().map(|&i| ratio[i]).collect();
        bin(&e, &vals, &f, &r)
    };
    let all = |_: usize| true;
    let is_bright = |i: usize| snr[i] >= bright_snr;
    let n_bright = (0..rows.len()).filter(|&i| is_bright(i)).count();
    let n_bright_found = (0..rows.len())
        .filter(|&i| is_bright(i) && found[i])
        .count();
    let mut bright_ratios: Vec<f64> = (0..rows.len())
        .filter(|&i| is_bright(i))
        .filter_map(|i| ratio[i])
        .collect();
    let mut dm_err: Vec<f64> = rows
        .iter()
        .filter_map(|r| r.reported_dm.map(|d| d - r.dm))
        .collect();
    let mut t_err: Vec<f64> = rows
        .iter()
        .filter_map(|r| r.reported_t_inf_s.map(|t| t - r.t_inf_s))
        .collect();
    let abs = |v: &[f64]| median(&mut v.iter().map(|x| x.abs()).collect::<Vec<_>>());
    let (median_abs_dm_error, median_abs_time_error_s) = (abs(&dm_err), abs(&t_err));
    Summary {
        n_injected: rows.len(),
        n_found: found.iter().filter(|&&f| f).count(),
        n_detected: rows.iter().filter(|r| r.detected).count(),
        method: "levels from a maximum-likelihood probit fit P = Phi((x - mu)/sigma) to the \
                 individual found/missed outcomes (x = expected S/N, or log10 fluence); \
                 50 % = mu, 90 % = mu + 1.2816 sigma; the *_interpolated levels interpolate \
                 the unit-S/N binned fractions linearly between bin centres"
            .into(),
        snr_fit,
        snr50: snr_fit.map(|f| f.mu),
        snr90: snr_fit.map(|f| f.level90),
        snr50_interpolated: crossing(&by_snr, 0.5),
        snr90_interpolated: crossing(&by_snr, 0.9),
        log10_fluence_fit: fluence_fit,
        fluence50_jy_ms: fluence_fit.map(|f| 10f64.powf(f.mu)),
        fluence90_jy_ms: fluence_fit.map(|f| 10f64.powf(f.level90)),
        by_snr,
        by_dm: param_bins(&dm, false, &all),
        by_width_ms: param_bins(&width, true, &all),
        bright: Bright {
            min_expected_snr: bright_snr,
            n: n_bright,
            n_found: n_bright_found,
            fraction: (n_bright > 0).then(|| n_bright_found as f64 / n_bright as f64),
            median_snr_ratio: median(&mut bright_ratios),
            by_dm: param_bins(&dm, false, &is_bright),
            by_width_ms: param_bins(&width, true, &is_bright),
        },
        median_dm_error: median(&mut dm_err),
        median_abs_dm_error,
        median_time_error_s: median(&mut t_err),
        median_abs_time_error_s,
    }
}

/// Bin edges at whole S/N units covering `v` (at most 60 bins, wider if needed).
fn unit_edges(v: &[f64]) -> Vec<f64> {
    let (lo, hi) = range(v);
    let (lo, hi) = (lo.floor(), hi.floor() + 1.0);
    let step = ((hi - lo) / 60.0).ceil().max(1.0);
    let n = ((hi - lo) / step).ceil() as usize;
    (0..=n).map(|i| lo + step * i as f64).collect()
}

fn range(v: &[f64]) -> (f64, f64) {
    let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if lo.is_finite() && hi.is_finite() {
        (lo, if hi > lo { hi } else { lo + 1.0 })
    } else {
        (0.0, 1.0)
    }
}

/// The first x where the binned fraction (at bin centres, empty bins skipped) rises
/// through `level`, by linear interpolation; `None` if it never does.
fn crossing(bins: &[Bin], level: f64) -> Option<f64> {
    let pts: Vec<(f64, f64)> = bins
        .iter()
        .filter_map(|b| b.fraction.map(|f| (0.5 * (b.lo + b.hi), f)))
        .collect();
    if pts.first().is_some_and(|p| p.1 >= level) {
        return None;
    }
    pts.windows(2).find_map(|w| {
        let ((x0, f0), (x1, f1)) = (w[0], w[1]);
        (f0 < level && f1 >= level).then(|| x0 + (level - f0) / (f1 - f0) * (x1 - x0))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn row(snr: f64, found: bool) -> InjectionRow {
        InjectionRow {
            index: 0,
            pass: 0,
            t_inf_s: 1.0,
            dm: 100.0,
            width_ms: 1.0,
            scatter_ms_1ghz: 0.0,
            spectrum: String::new(),
            expected_snr: snr,
            ideal_width_ms: 1.0,
            fluence_jy_ms: Some(snr / 10.0),
            found,
            detected: found,
            verdict: None,
            reported_snr: found.then_some(snr * 0.95),
            reported_dm: found.then_some(101.0),
            reported_t_inf_s: found.then_some(1.001),
            reported_width_ms: None,
        }
    }

    #[test]
    fn interpolated_crossing_and_bright_figures() {
        // Fractions 0, 0.25, 0.75, 1 at S/N bin centres 5.5, 6.5, 7.5, 8.5 (+ bright).
        let mut rows = Vec::new();
        for (s, k) in [(5.5, 0), (6.5, 1), (7.5, 3), (8.5, 4), (10.5, 4)] {
            for j in 0..4 {
                rows.push(row(s, j < k));
            }
        }
        let s = summarise(&rows, true, 10.0);
        assert_eq!((s.n_injected, s.n_found), (20, 12));
        assert!((s.snr50_interpolated.unwrap() - 7.0).abs() < 1e-12);
        assert!((s.snr90_interpolated.unwrap() - 8.1).abs() < 1e-12);
        assert_eq!((s.bright.n, s.bright.n_found), (4, 4));
        assert!((s.bright.median_snr_ratio.unwrap() - 0.95).abs() < 1e-12);
        assert!((s.median_dm_error.unwrap() - 1.0).abs() < 1e-12);
        assert!((s.median_abs_time_error_s.unwrap() - 0.001).abs() < 1e-9);
        let fit = s.snr_fit.unwrap();
        assert!((6.0..8.0).contains(&fit.mu), "{fit:?}");
        // Fluence ∝ S/N here, so its 50 % level is the S/N one over 10.
        assert!((s.fluence50_jy_ms.unwrap() / (fit.mu / 10.0) - 1.0).abs() < 0.1);
    }
}
