//! Matching the search's candidates to injected bursts.
//!
//! A candidate matches a burst when
//! * the burst's DM lies in the candidate's DM range (`dm_lo..dm_hi`, the trials its
//!   cluster spans) widened by [`DM_STEPS`] trial spacings of the plan at that DM, and
//! * their infinite-frequency arrival times differ by at most half the sum of the
//!   candidate's boxcar and the burst's ideal boxcar, plus the shift a DM error
//!   causes (k·|ΔDM|/f_lo², an upper bound: the candidate's time is referred to
//!   infinite frequency with its own DM), plus two samples of rounding.
//!
//! Candidates that coincide, by the same rules, with a candidate of the untouched
//! data are never counted as recoveries.

use crate::candidate::Candidate;
use crate::dedisperse::DmPlan;
use crate::obs::Header;
use crate::simulate::Burst;
use crate::units::delay_to_infinity_s;

/// Trial spacings by which a candidate's DM range is widened when matching.
pub const DM_STEPS: f64 = 2.0;

/// The matching tolerances of one search (its plan and band).
pub struct Matcher {
    trial_dms: Vec<f64>,
    freq_lo_mhz: f64,
    tsamp_s: f64,
}

/// One injected burst as the matcher sees it.
#[derive(Debug, Clone, Copy)]
pub struct Target {
    /// The burst (time and DM).
    pub burst: Burst,
    /// Its ideal boxcar width in seconds.
    pub width_s: f64,
}

impl Matcher {
    /// Tolerances from the search's plan and the observation's band.
    pub fn new(plan: &DmPlan, header: &Header) -> Self {
        let mut trial_dms: Vec<f64> = plan
            .steps
            .iter()
            .flat_map(|s| s.dms.iter().copied())
            .collect();
        trial_dms.sort_by(f64::total_cmp);
        trial_dms.dedup();
        Matcher {
            trial_dms,
            freq_lo_mhz: header.freq_lo_mhz(),
            tsamp_s: header.tsamp_s,
        }
    }

    /// Spacing of the trial DMs around `dm` (the larger gap next to the nearest trial;
    /// 0 for a single-trial plan).
    pub fn dm_step(&self, dm: f64) -> f64 {
        let d = &self.trial_dms;
        if d.len() < 2 {
            return 0.0;
        }
        let i = d.partition_point(|&x| x < dm).min(d.len() - 1);
        let nearest = if i > 0 && (dm - d[i - 1]).abs() < (d[i] - dm).abs() {
            i - 1
        } else {
            i
        };
        let below = if nearest > 0 {
            d[nearest] - d[nearest - 1]
        } else {
            0.0
        };
        let above = d.get(nearest + 1).map_or(0.0, |x| x - d[nearest]);
        below.max(above)
    }

    /// How far `c` is from an event at (`t_inf_s`, `dm`) of ideal boxcar `width_s`,
    /// in units of the tolerances: `None` beyond them, else the DM distance over the
    /// DM slack plus the time distance over the time tolerance.
    fn distance(&self, c: &Candidate, t_inf_s: f64, dm: f64, width_s: f64) -> Option<f64> {
        let slack = DM_STEPS * self.dm_step(dm);
        let dm_ok = dm >= c.dm_lo - slack && dm <= c.dm_hi + slack;
        let t_tol = 0.5 * (c.width_ms * 1e-3 + width_s)
            + delay_to_infinity_s((c.dm - dm).abs(), self.freq_lo_mhz)
            + 2.0 * self.tsamp_s;
        let dt = (c.t_inf_s - t_inf_s).abs();
        (dm_ok && dt <= t_tol)
            .then(|| (c.dm - dm).abs() / slack.max(f64::MIN_POSITIVE) + dt / t_tol)
    }

    fn coincide(&self, c: &Candidate, t_inf_s: f64, dm: f64, width_s: f64) -> bool {
        self.distance(c, t_inf_s, dm, width_s).is_some()
    }

    fn target_distance(&self, c: &Candidate, target: &Target) -> Option<f64> {
        self.distance(c, target.burst.t_inf_s, target.burst.dm, target.width_s)
    }

    /// Whether `c` matches the injected `target`.
    pub fn matches(&self, c: &Candidate, target: &Target) -> bool {
        self.target_distance(c, target).is_some()
    }

    /// Whether `c` coincides with a candidate `o` of the untouched data.
    pub fn same_event(&self, c: &Candidate, o: &Candidate) -> bool {
        self.coincide(c, o.t_inf_s, o.dm, o.width_ms * 1e-3)
            || self.coincide(o, c.t_inf_s, c.dm, c.width_ms * 1e-3)
    }

    /// For each target, the brightest candidate of `found` that matches it, is not an
    /// event of the untouched data (`original`), and is not nearer another target
    /// it matches: one candidate recovers at most one burst. (Two bright bursts
    /// clustered into one candidate had both counted as found.)
    pub fn recover<'a>(
        &self,
        targets: &[Target],
        found: &'a [Candidate],
        original: &[Candidate],
    ) -> Vec<Option<&'a Candidate>> {
        let mut best: Vec<Option<&'a Candidate>> = vec![None; targets.len()];
        let fresh = found
            .iter()
            .filter(|c| !original.iter().any(|o| self.same_event(c, o)));
        for c in fresh {
            let owner = targets
                .iter()
                .enumerate()
                .filter_map(|(i, t)| Some((i, self.target_distance(c, t)?)))
                .min_by(|a, b| a.1.total_cmp(&b.1));
            if let Some((i, _)) = owner
                && best[i].is_none_or(|b| c.snr > b.snr)
            {
                best[i] = Some(c);
            }
        }
        best
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::candidate::{TriageFeatures, Verdict};
    use crate::simulate::Spectrum;

    fn cand(t: f64, dm: f64, snr: f64) -> Candidate {
        Candidate {
            file: "x".into(),
            t_inf_s: t,
            mjd_inf: 0.0,
            dm,
            dm_lo: dm - 1.0,
            dm_hi: dm + 1.0,
            width_ms: 1.0,
            snr,
            cluster_size: 3,
            verdict: Verdict::Astrophysical,
            reasons: vec![],
            features: TriageFeatures::default(),
            fluence_jy_ms: None,
        }
    }

    fn target(t: f64, dm: f64) -> Target {
        Target {
            burst: Burst {
                t_inf_s: t,
                dm,
                width_s: 1e-3,
                scatter_1ghz_s: 0.0,
                spectrum: Spectrum::PowerLaw { index: 0.0 },
                amplitude: 1.0,
            },
            width_s: 1e-3,
        }
    }

    #[test]
    fn tolerances_follow_the_plan_and_widths() {
        let header = crate::simulate::test_header(16, 10_000);
        let plan = DmPlan::uniform(header.freqs_mhz.clone(), 25.0, 64e-6, 0.0, 100.0, 51);
        let m = Matcher::new(&plan, &header);
        assert!((m.dm_step(37.3) - 2.0).abs() < 1e-12);
        assert_eq!(m.dm_step(0.0), 2.0);
        let t = target(0.3, 50.0);
        // DM: range 49..51 widened by 2 steps of 2 → 45..55.
        assert!(m.matches(&cand(0.3, 54.9, 9.0), &t));
        assert!(!m.matches(&cand(0.3, 55.2, 9.0), &t));
        // Time at equal DM: half of (1 ms + 1 ms) + 2 samples = 1.128 ms.
        assert!(m.matches(&cand(0.3011, 50.0, 9.0), &t));
        assert!(!m.matches(&cand(0.3012, 50.0, 9.0), &t));
    }

    #[test]
    fn brightest_fresh_candidate_wins_and_original_events_are_dropped() {
        let header = crate::simulate::test_header(16, 10_000);
        let plan = DmPlan::uniform(header.freqs_mhz.clone(), 25.0, 64e-6, 0.0, 100.0, 51);
        let m = Matcher::new(&plan, &header);
        let found = [
            cand(0.3, 50.0, 8.0),
            cand(0.3002, 50.5, 12.0),
            cand(0.6, 20.0, 30.0),
        ];
        let original = [cand(0.6001, 20.0, 25.0)];
        let got = m.recover(&[target(0.3, 50.0), target(0.6, 20.0)], &found, &original);
        assert_eq!(got[0].unwrap().snr, 12.0);
        assert!(
            got[1].is_none(),
            "the untouched data's own event is not a recovery"
        );
    }

    // Two bursts that one candidate matches (their events clustered into one): the
    // candidate recovers only the burst it is nearer; the other is missed unless
    // another candidate matches it.
    #[test]
    fn one_candidate_recovers_one_burst() {
        let header = crate::simulate::test_header(16, 10_000);
        let plan = DmPlan::uniform(header.freqs_mhz.clone(), 25.0, 64e-6, 0.0, 100.0, 51);
        let m = Matcher::new(&plan, &header);
        let mut wide = cand(0.3, 52.0, 20.0);
        (wide.dm_lo, wide.dm_hi) = (40.0, 60.0);
        let targets = [target(0.3, 45.0), target(0.3, 51.0)];
        assert!(targets.iter().all(|t| m.matches(&wide, t)));
        let got = m.recover(&targets, std::slice::from_ref(&wide), &[]);
        assert!(got[0].is_none());
        assert_eq!(got[1].unwrap().snr, 20.0);
        // A fainter candidate near the first burst recovers it.
        let found = [wide.clone(), cand(0.3, 45.0, 9.0)];
        let got = m.recover(&targets, &found, &[]);
        let snrs: Vec<_> = got.iter().map(|c| c.map(|c| c.snr)).collect();
        assert_eq!(snrs, [Some(9.0), Some(20.0)]);
    }
}
