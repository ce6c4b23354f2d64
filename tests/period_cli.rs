//! End-to-end runs of `burstbook period ...` on freshly written demo sets.

mod cli_common;
use cli_common::{assert_one_line_failure, assert_success};

use std::path::Path;
use std::process::Command;

/// A rotation search over periods around the demo rotator's.
const ROTATION_NEAR_DEMO: [&str; 6] = [
    "period",
    "rotation",
    "--min-period-s",
    "0.3",
    "--max-period-s",
    "0.6",
];

fn burstbook(args: &[&str], dir: &Path) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(args)
        .current_dir(dir)
        .output()
        .expect("binary runs")
}

fn json(out: &std::process::Output) -> serde_json::Value {
    assert_success(out);
    serde_json::from_slice(&out.stdout).expect("JSON on stdout")
}

#[test]
fn demo_sets_give_json_with_the_promised_fields() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    assert!(
        burstbook(&["period", "synth", "--seed", "4"], d)
            .status
            .success()
    );
    let rotation = ROTATION_NEAR_DEMO;
    let r = json(&burstbook(
        &[&rotation[..], &["--json", "--periodogram-out", "pg.csv"]].concat(),
        d,
    ));
    let p = r["period_s"].as_f64().unwrap();
    assert!(
        (p - 0.413_702_9).abs() < 5.0 * r["period_err_s"].as_f64().unwrap(),
        "P = {p}"
    );
    // The demo rotator's FAP is tiny but not zero (no cancellation in 1 − (1 − p)e^{−τ}).
    let fap = r["fap"].as_f64().unwrap();
    assert!(fap > 0.0 && fap < 1e-6, "FAP {fap}");
    let pg = std::fs::read_to_string(d.join("pg.csv")).unwrap();
    assert!(pg.starts_with("freq_hz,period_s,z2n\n") && pg.lines().count() > 100);

    // In the table, probabilities below the floating-point range read "<1e-300".
    let text = burstbook(&rotation, d);
    let text = String::from_utf8_lossy(&text.stdout);
    let chosen = text
        .lines()
        .find(|l| l.ends_with("<- chosen"))
        .expect("chosen row");
    assert!(!chosen.contains("0.00e0"), "{chosen}");

    let h = json(&burstbook(
        &["period", "rotation", "--period-s", "0.4137029", "--json"],
        d,
    ));
    assert!(h["z2n_p"].as_f64().unwrap() < 1e-20);

    let a = json(&burstbook(
        &["period", "activity", "--sims", "49", "--json"],
        d,
    ));
    for key in ["period_days", "period_err_days", "fap", "window_fraction"] {
        assert!(a[key].as_f64().is_some(), "{key} missing");
    }
    // The seed-4 set (19 bursts of the 23.7-day cycle) folds best at twice the period;
    // the sub-harmonic check finds its two cycles alike and reports the half, within
    // three of its errors of the true cycle, with the scan's own pick beside it.
    let (p, dp) = (
        a["period_days"].as_f64().unwrap(),
        a["period_err_days"].as_f64().unwrap(),
    );
    assert!((p - 23.7).abs() < 3.0 * dp, "{p} ± {dp} d");
    let h = &a["harmonic"];
    assert_eq!(h["changed"].as_bool(), Some(true), "{h}");
    let scan = h["scan_period_days"].as_f64().unwrap();
    assert!((scan - 47.4).abs() < 3.0 * h["scan_period_err_days"].as_f64().unwrap());
    assert!(h["scan_chi2"].as_f64().unwrap() > a["fold"]["chi2"].as_f64().unwrap());
    assert!(h["scan_fap"].as_f64().is_some());
    let first = &h["sub_harmonics"][0];
    assert_eq!(first["k"].as_u64(), Some(2));
    assert_eq!(first["accepted"].as_bool(), Some(true));
    assert!(first["p"].as_f64().unwrap() > 0.05, "{first}");
    let text = burstbook(&["period", "activity", "--sims", "0"], d);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(
        text.contains("sub-harmonic check: the scan scored 47.0"),
        "{text}"
    );
    // The committed demo set (32 bursts, active for 30 % of a 23.7-day cycle): the
    // cycle is found within three of its own errors, and kept.
    let root = env!("CARGO_MANIFEST_DIR");
    let demo = json(&burstbook(
        &[
            "period",
            "activity",
            "--sims",
            "19",
            "--json",
            "--toas",
            &format!("{root}/demo-data/period/repeater_bursts.csv"),
            "--exposure",
            &format!("{root}/demo-data/period/repeater_exposure.csv"),
        ],
        d,
    ));
    let (p, dp) = (
        demo["period_days"].as_f64().unwrap(),
        demo["period_err_days"].as_f64().unwrap(),
    );
    assert!((p - 23.7).abs() < 3.0 * dp, "{p} ± {dp} d");
    assert_eq!(demo["harmonic"]["changed"].as_bool(), Some(false));
    assert_eq!(a["next_windows"].as_array().unwrap().len(), 3);
    assert!(a["next_windows"][0]["start_mjd"].as_f64().unwrap() > 61_000.0);

    let s = json(&burstbook(
        &["period", "stats", "--boot", "20", "--json"],
        d,
    ));
    assert!(s["waiting"]["weibull"]["k"].as_f64().unwrap() > 0.0);
    assert!(s["power_law"]["alpha"].as_f64().unwrap() > 1.0);
}

// A strong period beats every null set, so its Monte Carlo FAPs sit at the floor
// 1/(K + 1); the table gains the two columns.
#[test]
fn null_sets_give_monte_carlo_faps() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    assert!(burstbook(&["period", "synth"], d).status.success());
    let rotation = [&ROTATION_NEAR_DEMO[..], &["--sims", "4", "--seed", "3"]].concat();
    let r = json(&burstbook(&[&rotation[..], &["--json"]].concat(), d));
    assert_eq!(r["null"]["sets"].as_u64(), Some(4));
    assert_eq!(r["null"]["seed"].as_u64(), Some(3));
    assert!((r["null"]["jitter_s"].as_f64().unwrap() - 12.0).abs() < 1e-9);
    let best = r["best"].as_u64().unwrap() as usize;
    let chosen = &r["candidates"][best]["null_faps"];
    assert_eq!(chosen["z2n"].as_f64(), Some(0.2), "{chosen}");
    assert_eq!(chosen["h"].as_f64(), Some(0.2), "{chosen}");

    let text = burstbook(&rotation, d);
    let text = String::from_utf8_lossy(&text.stdout);
    assert!(
        text.contains("MC(Z2n)") && text.contains("MC FAP = 0.2000"),
        "{text}"
    );
}

#[test]
fn bad_input_is_one_line_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    std::fs::write(d.join("t.csv"), "time\n61000.5\n").unwrap();
    let out = burstbook(&["period", "rotation", "--toas", "t.csv"], d);
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(err.trim().lines().count(), 1, "{err}");
    assert!(
        err.contains("t.csv") && err.contains("no column 'mjd'"),
        "{err}"
    );
}

/// Bad arrival times, sessions and values are refused in one line naming the file,
/// the line and the value as written (sessions used to be shown in days relative to
/// the data, fluences ≤ 0 were dropped silently, a binary file printed a Rust
/// structure, 1e15 was taken for an MJD, and a merge left "got 1" unexplained).
#[test]
fn bad_arrival_files_are_named_with_line_and_value() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    assert!(burstbook(&["period", "synth"], d).status.success());
    std::fs::write(d.join("toas.csv"), "mjd\n61001.35\n61004.7\n61008.5\n").unwrap();
    std::fs::write(
        d.join("inverted.csv"),
        "start_mjd,end_mjd\n# sessions\n61001.3,61001.4\n61001.4,61001.3\n",
    )
    .unwrap();
    std::fs::write(d.join("v.csv"), "fluence_jy_ms\n2.5\n-1.0\n3\n").unwrap();
    std::fs::write(d.join("binary.csv"), [0xff, 0xfe, 0x00, 0x81, b'\n', 0xc3]).unwrap();
    std::fs::write(
        d.join("same.csv"),
        "mjd\n61000.5\n61000.5\n61000.5\n61000.5\n",
    )
    .unwrap();
    std::fs::write(d.join("huge.csv"), "mjd\n61000.5\n61000.7\n1e15\n").unwrap();
    let stats = ["period", "stats", "--boot", "5"];
    for (args, needles) in [
        (
            &["period", "activity", "--sims", "0", "--toas", "toas.csv"][..],
            &[
                "inverted.csv",
                "line 4: end_mjd 61001.3 is not after start_mjd 61001.4",
            ][..],
        ),
        (
            &[&stats[..], &["--values", "v.csv"]].concat(),
            &["v.csv", "line 3: fluence_jy_ms -1.0 must be > 0"],
        ),
        (
            &["period", "rotation", "--toas", "binary.csv"],
            &["binary.csv", "line 1: not text (invalid UTF-8)"],
        ),
        (
            &["period", "rotation", "--toas", "same.csv"],
            &[
                "same.csv",
                "4 read, 1 left after merging arrivals closer than",
            ],
        ),
        (
            &["period", "rotation", "--toas", "huge.csv"],
            &["huge.csv", "line 4: '1e15' is not an MJD"],
        ),
        (
            &["period", "rotation", "--periodogram-out", "toas.csv/p.csv"],
            &["toas.csv/p.csv", "toas.csv is a file, not a directory"],
        ),
    ] {
        let mut args = args.to_vec();
        if args[1] == "activity" {
            args.extend(["--exposure", "inverted.csv"]);
        }
        assert_one_line_failure(&burstbook(&args, d), needles);
    }
}

/// A forecast stops, with a note, once the window widened by the period uncertainty
/// is longer than the period (100 million windows used to fill gigabytes), asks for
/// no more than 1000 windows, and no Monte Carlo sets print "not computed", not NaN.
#[test]
fn activity_forecasts_stop_where_they_stop_meaning_anything() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    assert!(burstbook(&["period", "synth"], d).status.success());
    let activity = ["period", "activity", "--sims", "0"];
    let out = burstbook(&[&activity[..], &["--forecast", "1000"]].concat(), d);
    assert_success(&out);
    let text = String::from_utf8_lossy(&out.stdout);
    let windows = text
        .lines()
        .filter(|l| l.trim_start().starts_with("cycle"))
        .count();
    assert!((1..1000).contains(&windows), "{windows} windows: {text}");
    assert!(text.contains("stopped at cycle"), "{text}");
    assert!(text.contains("Monte Carlo FAP not computed"), "{text}");
    assert!(!text.contains("NaN"), "{text}");
    let a = json(&burstbook(
        &[&activity[..], &["--forecast", "1000", "--json"]].concat(),
        d,
    ));
    assert_eq!(a["next_windows"].as_array().unwrap().len(), windows);
    assert!(a["forecast_stopped_at_cycle"].as_i64().is_some());
    assert_one_line_failure(
        &burstbook(&[&activity[..], &["--forecast", "100000000"]].concat(), d),
        &["--forecast 100000000 is beyond 1000 windows"],
    );
}

/// Arrivals spanning 4 s searched up to the default 10 s used to list trial periods
/// up to 10 s, which put every arrival within one turn; the band is now cut to the
/// span, with a note, and a band wholly beyond it is refused.
#[test]
fn rotation_band_is_cut_to_the_span_of_the_arrivals() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let mut csv = String::from("mjd\n");
    for t_s in [0.0, 0.9, 1.7, 2.5, 3.1, 4.0] {
        csv += &format!("{:.15}\n", 61000.25 + t_s / 86_400.0);
    }
    std::fs::write(d.join("short.csv"), csv).unwrap();
    let search = ["period", "rotation", "--toas", "short.csv"];
    let out = burstbook(&search, d);
    assert_success(&out);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("longest trial period cut from 10 s to the arrivals' span of 4.000000 s"),
        "{text}"
    );
    let r = json(&burstbook(&[&search[..], &["--json"]].concat(), d));
    assert_eq!(r["max_period_asked_s"], 10.0);
    let span = r["span_s"].as_f64().unwrap();
    assert!((span - 4.0).abs() < 1e-6, "{span}");
    assert_eq!(r["config"]["max_period_s"].as_f64().unwrap(), span);
    assert!(r["period_s"].as_f64().unwrap() <= span, "{}", r["period_s"]);
    for c in r["candidates"].as_array().unwrap() {
        assert!(c["period_s"].as_f64().unwrap() <= span, "{c}");
    }
    // An explicit longest period inside the span is searched as asked.
    let r = json(&burstbook(
        &[&search[..], &["--max-period-s", "2", "--json"]].concat(),
        d,
    ));
    assert!(
        r["max_period_asked_s"].is_null(),
        "{}",
        r["max_period_asked_s"]
    );
    assert_eq!(r["config"]["max_period_s"], 2.0);
    assert_one_line_failure(
        &burstbook(&[&search[..], &["--min-period-s", "5"]].concat(), d),
        &[
            "short.csv",
            "no longer than the shortest trial period of 5 s (--min-period-s)",
        ],
    );
}
