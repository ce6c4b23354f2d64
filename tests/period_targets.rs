//! Target behaviours of the periodicity searches on seeded synthetic sets (invented
//! sources): recovery of a rotation period and of an activity cycle, and calibration
//! of the false-alarm probabilities on sets without any period.

use burstbook::period::activity::{ActivityConfig, ActivityResult, search_activity};
use burstbook::period::harmonic::CYCLE_ALPHA;
use burstbook::period::null_sets::NullFaps;
use burstbook::period::rotation::{RotationConfig, search_rotation, test_period};
use burstbook::period::synth::{
    RotatingSource, activity_cycle, irregular_sessions, rng, uniform_over_exposure,
};

#[test]
fn sparse_rotator_over_days_is_recovered_within_its_uncertainty() {
    let src = RotatingSource {
        period_s: 0.837_614_2,
        pdot: 0.0,
        epoch_s: 12.3,
        pulse_fraction: 0.01,
        jitter_s: 0.002,
    };
    // Three one-hour sessions over a day and a half.
    let sessions = [(0.0, 3600.0), (50_000.0, 53_600.0), (126_000.0, 129_600.0)];
    let toas = src.arrivals(&sessions, &mut rng(42, 0));
    assert!(toas.len() > 80, "{} arrivals", toas.len());
    let cfg = RotationConfig {
        min_period_s: 0.6,
        max_period_s: 1.2,
        ..Default::default()
    };
    let r = search_rotation(&toas, &cfg, &|_| {}).unwrap();
    let timing = r.timing.as_ref().expect("phase-connected solution");
    let err = (r.period_s - src.period_s).abs();
    assert!(
        err < 3.0 * r.period_err_s,
        "P = {} ± {} vs {}",
        r.period_s,
        r.period_err_s,
        src.period_s
    );
    assert!(r.period_err_s < 1e-7);
    assert!(r.fap < 1e-10, "fap {}", r.fap);
    // Residuals reflect the 2 ms jitter.
    assert!(
        timing.rms_s > 0.0015 && timing.rms_s < 0.0025,
        "rms {}",
        timing.rms_s
    );
    // The stated period is significant with its residuals; half of it is the harmonic.
    let h = test_period(&toas, src.period_s, 0.0, &cfg).unwrap();
    assert!(h.z2n_p < 1e-30 && h.timing.unwrap().rms_cycles < 0.01);
}

#[test]
fn activity_cycle_is_recovered_from_forty_bursts_with_irregular_cadence() {
    let mut r = rng(7, 0);
    // 120 sessions of 3 h at irregular times over 400 days.
    let sessions = irregular_sessions(120, 400.0, 0.125, &mut r);
    let (period, width, centre) = (16.3, 0.3, 0.62);
    let bursts = activity_cycle(period, width, centre, 9.0, &sessions, &mut r);
    assert!((30..=55).contains(&bursts.len()), "{} bursts", bursts.len());
    let cfg = ActivityConfig {
        min_period_days: 2.0,
        max_period_days: Some(100.0),
        sims: 200,
        seed: 3,
        ..Default::default()
    };
    let res = search_activity(&bursts, &sessions, 60_000, &cfg, &|_| {}).unwrap();
    assert_period_within_3_sigma(&res, period);
    // No simulated set reached the observed χ²: FAP at the Monte Carlo floor 1/201.
    assert!(res.fap < 0.01, "fap {}", res.fap);
    assert!(res.window_fap < 0.01, "window fap {}", res.window_fap);
    // A period off by δP smears the window by ~(span/P)·δP/P cycles: 0.3 → ≤ 0.45.
    assert!(res.window_fraction < 0.45, "window {}", res.window_fraction);
    let d = (res.centre_phase - centre).rem_euclid(1.0);
    assert!(d.min(1.0 - d) < 0.1, "centre {}", res.centre_phase);
    // The session-rate periodogram sees the same cycle.
    assert!((res.ls_period_days - period).abs() < 0.5 && res.ls_fap < 0.01);
    // The next windows start after the data and are one period apart.
    let w = &res.next_windows;
    assert_eq!(w.len(), 3);
    assert!(w[0].nominal_end_mjd > 60_000.0 + sessions.last().unwrap().1);
    assert!((w[1].nominal_start_mjd - w[0].nominal_start_mjd - res.period_days).abs() < 1e-9);
}

#[test]
fn a_cycle_with_bursts_in_every_other_window_is_not_halved() {
    // Active 15 % of a 47.4-day cycle: bursts in every other window of a 23.7-day
    // cycle, as if the demo repeater skipped alternate windows. Sessions and rate as
    // the demo's, twice the rate while active.
    let mut r = rng(1, 7);
    let sessions = irregular_sessions(90, 300.0, 0.125, &mut r);
    let period = 47.4;
    let bursts = activity_cycle(period, 0.15, 0.4, 16.0, &sessions, &mut r);
    assert!((20..=35).contains(&bursts.len()), "{} bursts", bursts.len());
    let cfg = ActivityConfig {
        sims: 19,
        ..Default::default()
    };
    let res = search_activity(&bursts, &sessions, 60_000, &cfg, &|_| {}).unwrap();
    assert_period_within_3_sigma(&res, period);
    // Half the period was considered and rejected: its two cycles differ.
    let h = &res.harmonic;
    assert!(!h.changed);
    let half = &h.sub_harmonics[0];
    assert_eq!(half.k, 2);
    assert!((half.period_days - period / 2.0).abs() < 1.0, "{half:?}");
    assert!(!half.accepted && half.p <= CYCLE_ALPHA, "{half:?}");
    assert_eq!(res.fap, 1.0 / 20.0);
}

/// The activity search's period lies within three of its own σ of `period` (days).
fn assert_period_within_3_sigma(res: &ActivityResult, period: f64) {
    assert!(
        (res.period_days - period).abs() < 3.0 * res.period_err_days,
        "P = {} ± {}",
        res.period_days,
        res.period_err_days
    );
}

/// Counts FAPs below each level over `sets` null sets; returns fractions.
fn null_fractions(levels: &[f64], faps: &[f64]) -> Vec<f64> {
    levels
        .iter()
        .map(|&l| faps.iter().filter(|&&f| f < l).count() as f64 / faps.len() as f64)
        .collect()
}

#[test]
fn rotation_fap_is_calibrated_on_sets_without_period() {
    // 400 sets of 30 arrivals placed uniformly in three 1000-s sessions over 5000 s;
    // small band so the test is cheap. Calibrated: P(FAP < x) ≈ x. The scan bound is an
    // upper bound (conservative), so we require "not optimistic" at each level with a
    // 3σ binomial margin, √(x(1−x)/400), and not wildly conservative at 0.1.
    let sets = 400;
    let sessions = [(0.0, 1000.0), (2000.0, 3000.0), (4000.0, 5000.0)];
    let cfg = RotationConfig {
        min_period_s: 0.5,
        max_period_s: 1.0,
        divisor_tol_cycles: 0.0,
        ..Default::default()
    };
    let results: Vec<(f64, f64)> = (0..sets)
        .map(|s| {
            let t = uniform_over_exposure(&sessions, 30, &mut rng(2024, s));
            let r = search_rotation(&t, &cfg, &|_| {}).unwrap();
            (
                r.fap,
                r.candidates.iter().map(|c| c.h_fap).fold(1.0, f64::min),
            )
        })
        .collect();
    let z: Vec<f64> = results.iter().map(|r| r.0).collect();
    let h: Vec<f64> = results.iter().map(|r| r.1).collect();
    let levels = [0.01, 0.1, 0.5];
    let fz = null_fractions(&levels, &z);
    let fh = null_fractions(&levels, &h);
    // Measured (seed 2024): Z² [0.005, 0.09, 0.475]. The H union bound is optimistic
    // for N = 30 (≈ [0.06, 0.16, 0.33]): scanned noise makes chance clusters of phases
    // whose high-harmonic tail is far heavier than exp(−0.4 H). H is reported, not
    // used for `fap`; docs/period.md says so.
    eprintln!("Z² fractions below {levels:?}: {fz:?}; H: {fh:?}");
    for (i, &x) in levels.iter().enumerate() {
        let margin = 3.0 * (x * (1.0 - x) / sets as f64).sqrt();
        assert!(fz[i] <= x + margin, "Z² FAP optimistic at {x}: {}", fz[i]);
        assert!(
            fz[i] >= x - margin,
            "Z² FAP too conservative at {x}: {}",
            fz[i]
        );
    }
}

#[test]
fn monte_carlo_faps_are_calibrated_for_few_arrivals() {
    // The sets of the test above (30 arrivals, three 1000-s sessions), each searched
    // with 19 null sets of its own. A Monte Carlo FAP takes the values k/20; if it is
    // calibrated, P(FAP ≤ 2/20) = 0.1 and P(FAP ≤ 10/20) = 0.5, within a 3σ binomial
    // margin. This is where the H union bound fails (≈ 0.16 at 0.1), so the test tells
    // the two apart.
    let sets = 300;
    let sessions = [(0.0, 1000.0), (2000.0, 3000.0), (4000.0, 5000.0)];
    let cfg = RotationConfig {
        min_period_s: 0.5,
        max_period_s: 1.0,
        divisor_tol_cycles: 0.0,
        null_sets: 19,
        ..Default::default()
    };
    let results: Vec<(f64, f64)> = (0..sets)
        .map(|s| {
            let t = uniform_over_exposure(&sessions, 30, &mut rng(77, s));
            let cfg = RotationConfig {
                seed: s,
                ..cfg.clone()
            };
            let r = search_rotation(&t, &cfg, &|_| {}).unwrap();
            let min = |stat: fn(&NullFaps) -> f64| {
                let faps = r.candidates.iter().filter_map(|c| c.null_faps.as_ref());
                faps.map(stat).fold(1.0, f64::min)
            };
            (min(|f| f.z2n), min(|f| f.h))
        })
        .collect();
    let z: Vec<f64> = results.iter().map(|r| r.0).collect();
    let h: Vec<f64> = results.iter().map(|r| r.1).collect();
    // Just above k/20, so that FAPs of exactly k/20 count.
    let levels = [0.1 + 1e-9, 0.5 + 1e-9];
    let (fz, fh) = (null_fractions(&levels, &z), null_fractions(&levels, &h));
    eprintln!("Monte Carlo FAP fractions at or below [0.1, 0.5]: Z² {fz:?}; H {fh:?}");
    for (i, x) in [0.1, 0.5].into_iter().enumerate() {
        let margin = 3.0 * (x * (1.0 - x) / sets as f64).sqrt();
        for (name, f) in [("Z²", fz[i]), ("H", fh[i])] {
            assert!(
                (f - x).abs() <= margin,
                "{name} Monte Carlo FAP at {x}: {f}"
            );
        }
    }
}
