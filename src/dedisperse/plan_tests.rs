//! Planner checks against the Cordes & McLaughlin 2003 (ApJ 596, 1142) smearing model.

use super::*;
use crate::triage::{cm03_peak_ratio, cm03_zeta};

/// The survey band: 1024 channels over 1200–1600 MHz, 64 µs samples.
fn survey_band() -> (Vec<f64>, f64, f64) {
    let bw = 400.0 / 1024.0;
    let freqs = (0..1024).map(|i| 1600.0 - bw * (i as f64 + 0.5)).collect();
    (freqs, bw, 64e-6)
}

/// A request with the former, coarsest downsampling (smearing fraction 1), for which
/// the worked values below were derived.
fn request(tolerance: f64, min_width_s: f64, dm_max: f64) -> PlanRequest {
    PlanRequest {
        dm_min: 0.0,
        dm_max,
        min_width_s,
        tolerance,
        max_downsample: 64,
        smearing_fraction: 1.0,
    }
}

fn planner(req: &PlanRequest) -> Planner {
    let (freqs, bw, tsamp) = survey_band();
    Planner::new(&freqs, bw, tsamp, req).unwrap()
}

// Step sizes of the tolerance plan for this band, recomputed from the step formula
// DM_{i+1} = DM_i + √(tol²−1)·W_eff/B with the Cordes & McLaughlin 2003 width model
// (values quoted to 3–4 figures, hence the 1.5e-3 relative tolerance).
#[test]
fn step_sizes_match_the_worked_survey_plan() {
    let cases = [
        (1.25, 0.0, [0.03808, 0.0800, 0.465, 0.930]),
        (1.25, 1e-3, [0.5962, 0.6004, 0.755, 1.104]),
        (1.10, 0.0, [0.02329, 0.0489, 0.284, 0.568]),
    ];
    for (tol, w_int, expected) in cases {
        let p = planner(&request(tol, w_int, 2000.0));
        for (dm, want) in [0.0, 100.0, 500.0, 1000.0].into_iter().zip(expected) {
            let got = p.step_at(dm);
            assert!(
                (got / want - 1.0).abs() < 1.5e-3,
                "tol {tol} W {w_int}: step at DM {dm} is {got}, expected {want}"
            );
        }
    }
}

// t_chan(ν_c = 1.4 GHz) = 2k·Δν/ν³ = 1.18122 µs × DM (k from Lorimer & Kramer 2005)
// reaches 2n·64 µs at DM 108.36·n. (With the rounded 8.3 µs prefactor of Cordes &
// McLaughlin 2003 the thresholds move by 0.03 %, to 108.3·n.)
#[test]
fn downsampling_doubles_where_smearing_reaches_two_samples() {
    let p = planner(&request(1.25, 0.0, 2000.0));
    for (dm, n) in [
        (108.36, 2),
        (216.72, 4),
        (433.45, 8),
        (866.90, 16),
        (1733.8, 32),
    ] {
        assert_eq!(p.downsample_at(dm - 0.2), n / 2, "below DM {dm}");
        assert_eq!(p.downsample_at(dm + 0.2), n, "above DM {dm}");
    }
    let capped = planner(&PlanRequest {
        max_downsample: 4,
        ..request(1.25, 0.0, 2000.0)
    });
    assert_eq!(capped.downsample_at(1500.0), 4);
}

// The default smearing fraction ½: one downsampled sample spans at most half the
// channel smearing, so each doubling comes at twice the DM (216.72·n) and a narrow
// burst's smeared pulse covers at least two samples.
#[test]
fn default_plan_keeps_two_samples_per_smearing_time() {
    let p = planner(&PlanRequest {
        dm_max: 2000.0,
        ..PlanRequest::default()
    });
    for (dm, n) in [(216.72, 2), (433.45, 4), (866.90, 8), (1733.8, 16)] {
        assert_eq!(p.downsample_at(dm - 0.2), n / 2, "below DM {dm}");
        assert_eq!(p.downsample_at(dm + 0.2), n, "above DM {dm}");
    }
}

// Trial counts: the continuous count ∫dDM/step is 4602.7, 5402.7, 1347.8, 2063.0,
// 7532.9 and 8842.2 for the cases below (numerical integral of the same formula),
// and 5017.3 and 5943.7 with the default smearing fraction ½.
// Discrete stepping evaluates W_eff at the left end of each step, which adds about
// two trials around the downsampling jumps, and the plan always ends on dm_max.
#[test]
fn trial_counts_match_the_continuous_count() {
    let (freqs, bw, tsamp) = survey_band();
    let cases = [
        (1.25, 0.0, 1000.0, 4603),
        (1.25, 0.0, 2000.0, 5403),
        (1.25, 1e-3, 1000.0, 1348),
        (1.25, 1e-3, 2000.0, 2064),
        (1.10, 0.0, 1000.0, 7533),
        (1.10, 0.0, 2000.0, 8843),
    ];
    for (tol, w_int, dm_max, want) in cases {
        let plan = DmPlan::build(&freqs, bw, tsamp, &request(tol, w_int, dm_max)).unwrap();
        let n = plan.n_trials() as i64;
        assert!(
            (n - want).abs() <= 4,
            "tol {tol} W {w_int} DM<={dm_max}: {n} trials, expected about {want}"
        );
    }
    for (dm_max, want) in [(1000.0, 5017), (2000.0, 5944)] {
        let req = PlanRequest {
            dm_max,
            ..PlanRequest::default()
        };
        let n = DmPlan::build(&freqs, bw, tsamp, &req).unwrap().n_trials() as i64;
        assert!((n - want).abs() <= 4, "default DM<={dm_max}: {n} trials");
    }
}

// Half-way between neighbouring trials (the worst DM error), the Cordes & McLaughlin
// 2003 peak ratio of a Gaussian burst of FWHM W_eff must stay above the quadrature
// model's promise 1/√(1 + (tol²−1)/4) (0.936 for tol 1.25).
#[test]
fn peak_loss_half_way_between_trials_stays_within_tolerance() {
    let (freqs, bw, tsamp) = survey_band();
    for (tol, w_int, f) in [
        (1.25, 0.0, 1.0),
        (1.25, 1e-3, 1.0),
        (1.10, 0.0, 1.0),
        (1.5, 2e-4, 1.0),
        (1.25, 0.0, 0.5),
    ] {
        let req = PlanRequest {
            smearing_fraction: f,
            ..request(tol, w_int, 2000.0)
        };
        let plan = DmPlan::build(&freqs, bw, tsamp, &req).unwrap();
        let p = planner(&req);
        let promise = 1.0 / (1.0 + (tol * tol - 1.0) / 4.0).sqrt();
        let trials: Vec<f64> = plan.trials().map(|(dm, _)| dm).collect();
        let worst = trials
            .windows(2)
            .map(|w| {
                let width_ms = p.effective_width_s(w[0]) * 1e3;
                cm03_peak_ratio(cm03_zeta((w[1] - w[0]) / 2.0, 400.0, width_ms, 1.4))
            })
            .fold(1.0, f64::min);
        assert!(
            worst >= promise,
            "tol {tol}: worst mid-trial peak ratio {worst} < {promise}"
        );
        assert!(worst < 1.0, "the check must see some loss");
    }
}

#[test]
fn steps_are_grouped_by_downsampling_and_cover_the_range() {
    let (freqs, bw, tsamp) = survey_band();
    let req = PlanRequest {
        dm_min: 150.0,
        dm_max: 900.0,
        min_width_s: 0.0,
        tolerance: 1.25,
        max_downsample: 8,
        smearing_fraction: 1.0,
    };
    let plan = DmPlan::build(&freqs, bw, tsamp, &req).unwrap();
    let ds: Vec<usize> = plan.steps.iter().map(|s| s.downsample).collect();
    assert_eq!(ds, vec![2, 4, 8]);
    let trials: Vec<f64> = plan.trials().map(|(dm, _)| dm).collect();
    assert_eq!(trials.first(), Some(&150.0));
    assert_eq!(trials.last(), Some(&900.0));
    assert!(trials.windows(2).all(|w| w[1] > w[0]));

    let single = PlanRequest {
        dm_min: 56.0,
        dm_max: 56.0,
        ..req
    };
    let plan = DmPlan::build(&freqs, bw, tsamp, &single).unwrap();
    assert_eq!(plan.n_trials(), 1);
}

#[test]
fn bad_requests_are_config_errors() {
    let (freqs, bw, tsamp) = survey_band();
    let good = request(1.25, 0.0, 100.0);
    let bad = [
        PlanRequest {
            tolerance: 1.0,
            ..good.clone()
        },
        PlanRequest {
            dm_min: 200.0,
            ..good.clone()
        },
        PlanRequest {
            dm_min: -1.0,
            ..good.clone()
        },
        PlanRequest {
            max_downsample: 3,
            ..good.clone()
        },
        PlanRequest {
            min_width_s: f64::NAN,
            ..good.clone()
        },
        PlanRequest {
            smearing_fraction: 0.0,
            ..good.clone()
        },
    ];
    for req in bad {
        let err = DmPlan::build(&freqs, bw, tsamp, &req).unwrap_err();
        assert!(matches!(err, Error::Config(_)), "{req:?}: {err}");
    }
    assert!(DmPlan::build(&[], bw, tsamp, &good).is_err());
    assert!(DmPlan::build(&freqs, bw, 0.0, &good).is_err());
}

// Boxcar strides: powers of two, growing with width, 1 for boxcars narrower than the
// step's effective width; every stride keeps the widening of a pulse as wide as the
// boxcar within the tolerance over one stride at the step's most smeared trial
// (the planner's own criterion, Cordes & McLaughlin 2003), and doubling it would not.
#[test]
fn boxcar_strides_keep_wide_pulses_within_the_tolerance() {
    let req = PlanRequest {
        smearing_fraction: 0.5,
        ..request(1.25, 0.0, 2000.0)
    };
    let (freqs, bw, tsamp) = survey_band();
    let plan = DmPlan::build(&freqs, bw, tsamp, &req).unwrap();
    let p = planner(&req);
    let widths_s: Vec<Vec<f64>> = plan
        .steps
        .iter()
        .map(|s| {
            (0..12)
                .map(|k| (s.downsample << k) as f64 * tsamp)
                .collect()
        })
        .collect();
    let strides = boxcar_strides(&plan, &req, &widths_s).unwrap();
    let growth = (1.25f64.powi(2) - 1.0).sqrt();
    for ((step, widths), ks) in plan.steps.iter().zip(&widths_s).zip(&strides) {
        let last = *step.dms.last().unwrap();
        let w_eff = p.effective_width_s(last);
        assert_eq!(
            ks[0], 1,
            "one sample is never wider than the effective width"
        );
        for (pair, (&w, &k)) in ks.windows(2).zip(widths.iter().zip(ks)) {
            assert!(k.is_power_of_two() && pair[0] <= pair[1]);
            let allowed = growth * w_eff.hypot(w) / p.sweep_s_per_dm;
            assert!(
                k as f64 * p.step_at(last) <= allowed * (1.0 + 1e-9),
                "w={w} k={k}"
            );
            assert!(2 * k > step.dms.len() || 2.0 * k as f64 * p.step_at(last) > allowed);
        }
        assert!(
            ks.last().unwrap() > &1,
            "a 2048-sample boxcar spans many trials"
        );
    }
}

// The sweep across the survey's channel centres is 4.148808e3 s MHz² · DM ·
// (ν_lo⁻² − ν_hi⁻²) (Lorimer & Kramer 2005), with centres 1200.195 and 1599.805 MHz:
// 1.2592 ms per unit DM, so 10 s of data hold whole sweeps up to DM ≈ 7942.
#[test]
fn within_sweep_cuts_the_dm_range_at_the_recordings_length() {
    let (freqs, _, _) = survey_band();
    let (lo, hi) = (freqs[1023], freqs[0]);
    let per_dm = 4.148808e3 * (lo.powi(-2) - hi.powi(-2));
    assert!((per_dm - 1.2592e-3).abs() < 1e-7, "{per_dm}");
    let huge = request(1.25, 0.0, 1e9);
    let cut = huge.within_sweep(&freqs, 10.0);
    assert!((cut.dm_max - 10.0 / per_dm).abs() < 1e-6, "{}", cut.dm_max);
    assert!((cut.dm_max - 7942.0).abs() < 1.0, "{}", cut.dm_max);
    assert_eq!(
        PlanRequest {
            dm_max: 1e9,
            ..cut.clone()
        },
        huge
    );
    // A recording long enough changes nothing; one shorter than the lowest DM's
    // sweep keeps a single trial at dm_min.
    assert_eq!(
        request(1.25, 0.0, 2000.0).within_sweep(&freqs, 10.0),
        request(1.25, 0.0, 2000.0)
    );
    let high = PlanRequest {
        dm_min: 500.0,
        ..request(1.25, 0.0, 2000.0)
    };
    assert_eq!(high.within_sweep(&freqs, 0.1).dm_max, 500.0);
    // One channel has no sweep to cut by.
    assert_eq!(huge.within_sweep(&[1400.0], 10.0), huge);
}
