//! `burstbook plan` end to end: band flags in, plan and cost out.

mod cli_common;
use cli_common::assert_success;

use std::process::Command;

fn plan(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .arg("plan")
        .args(args)
        .output()
        .expect("run burstbook")
}

const SURVEY: [&str; 8] = [
    "--freq-lo-mhz",
    "1200",
    "--freq-hi-mhz",
    "1600",
    "--channels",
    "1024",
    "--tsamp-us",
    "64",
];

// The survey band at tolerance 1.25 up to DM 1000: about 5017 trials (4603 with
// smearing fraction 1), the continuous count of the Cordes & McLaughlin 2003 (ApJ
// 596, 1142) step formula (see the planner tests), with the doubling of the time
// resolution from DM 216.72 (108.36) on.
#[test]
fn json_plan_for_the_survey_band() {
    for (fraction, trials, first_doubling) in [("0.5", 5017, 216.8), ("1", 4603, 108.4)] {
        let args = [
            "--dm-max",
            "1000",
            "--smearing-fraction",
            fraction,
            "--json",
        ];
        let out = plan(&[&SURVEY[..], &args].concat());
        assert_success(&out);
        let report: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
        let n = report["n_trials"].as_u64().unwrap() as i64;
        assert!((n - trials).abs() <= 4, "{n} trials");
        let steps = report["steps"].as_array().unwrap();
        assert_eq!(steps[0]["downsample"], 1);
        assert_eq!(steps[1]["downsample"], 2);
        let dm_first = steps[1]["dm_first"].as_f64().unwrap();
        assert!((dm_first - first_doubling).abs() < 0.1, "{dm_first}");
        let cost = &report["cost"];
        assert!(
            cost["fast_adds_per_s"].as_f64().unwrap()
                < cost["reference_adds_per_s"].as_f64().unwrap() / 20.0
        );
        assert_eq!(report["plan"]["freqs_mhz"].as_array().unwrap().len(), 1024);
    }
}

#[test]
fn text_plan_and_bad_input() {
    let out = plan(&[&SURVEY[..], &["--dm-max", "300"]].concat());
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains("1024 channels") && text.contains("Per second of data"),
        "{text}"
    );

    let out = plan(&[&SURVEY[..], &["--tolerance", "0.9"]].concat());
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("tolerance must exceed 1") && !err.contains("panicked"),
        "{err}"
    );

    // For a file, no trial beyond the sweep its 60 s can hold (the demo band's
    // centres 1200.78–1599.22 MHz sweep 1.255 ms per unit DM: DM ≈ 47 800).
    let out = plan(&["demo-data/demo.json", "--dm-max", "1e9", "--json"]);
    assert!(out.status.success());
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    let last = report["plan"]["steps"].as_array().unwrap().last().unwrap()["dms"]
        .as_array()
        .unwrap()
        .last()
        .unwrap()
        .as_f64()
        .unwrap();
    assert!((last - 47_803.0).abs() < 1.0, "{last}");
    let out = plan(&["demo-data/demo.json", "--dm-max", "1e9"]);
    assert!(String::from_utf8_lossy(&out.stdout).contains("up to DM 47803.0"));

    let out = plan(&[]);
    assert!(!out.status.success());
    assert!(String::from_utf8_lossy(&out.stderr).contains("give an observation file"));
}

// Without flags, `plan` shows the plan `search` would use: the same DM range and
// tolerance as a search configuration with no `[plan]` table.
#[test]
fn defaults_are_the_search_defaults() {
    let defaults = burstbook::search::SearchConfig::default().plan;
    let out = plan(&[&SURVEY[..], &["--json"]].concat());
    assert!(out.status.success());
    let report: serde_json::Value = serde_json::from_slice(&out.stdout).expect("JSON");
    let steps = report["plan"]["steps"].as_array().unwrap();
    let dms: Vec<f64> = steps
        .iter()
        .flat_map(|s| {
            s["dms"]
                .as_array()
                .unwrap()
                .iter()
                .map(|d| d.as_f64().unwrap())
        })
        .collect();
    assert_eq!(dms.first().copied(), Some(defaults.dm_min));
    assert_eq!(dms.last().copied(), Some(defaults.dm_max));
    let (freqs_mhz, chan_bw_mhz) = burstbook::dedisperse::channel_centres_mhz(1200.0, 1600.0, 1024);
    let planned =
        burstbook::dedisperse::DmPlan::build(&freqs_mhz, chan_bw_mhz, 64e-6, &defaults).unwrap();
    assert_eq!(report["n_trials"].as_u64(), Some(planned.n_trials() as u64));
}

// Requests in the wrong unit or of absurd size are refused in one line before any
// tree is sized for them (a 1e-9 µs sample once asked for 4.8 TB); a negative value
// given as `--flag -5` reaches the command's own check, in nested subcommands too.
#[test]
fn absurd_or_negative_requests_get_one_line() {
    let band = |lo: &str, hi: &str, chans: &str, us: &str| {
        let args = [
            "--freq-lo-mhz",
            lo,
            "--freq-hi-mhz",
            hi,
            "--channels",
            chans,
            "--tsamp-us",
            us,
        ];
        plan(&args)
    };
    let cases = [
        (band("1200", "1600", "256", "1e-9"), "is the sample time"),
        (
            band("1200", "1600", "100000000", "64"),
            "is the channel count right",
        ),
        (
            band("1.2e9", "1.6e9", "256", "1024"),
            "outside the radio window",
        ),
        (
            plan(&[&SURVEY[..], &["--dm-max", "-5"]].concat()),
            "0 <= dm_min <= dm_max, got 0..-5",
        ),
        (
            cli_common::burstbook(&["period", "rotation", "--min-period-s", "-1"]),
            "min period",
        ),
    ];
    for (out, needle) in cases {
        cli_common::assert_one_line_failure(&out, &[needle]);
    }
}

// `--average-samples` and `--average-channels` plan a file as a search averaging on
// read sees it: a quarter of the sample rate, half the channels; a channel factor
// that does not divide the channels is one line naming the file.
#[test]
fn averaging_flags_plan_the_averaged_file() {
    let json = |args: &[&str]| -> serde_json::Value {
        let out = plan(&[&["demo-data/demo.json", "--json"], args].concat());
        assert_success(&out);
        serde_json::from_slice(&out.stdout).expect("JSON")
    };
    let plain = json(&[]);
    let averaged = json(&["--average-samples", "4", "--average-channels", "2"]);
    let n_chan = |r: &serde_json::Value| r["plan"]["freqs_mhz"].as_array().unwrap().len();
    let tsamp_s = |r: &serde_json::Value| r["plan"]["tsamp_s"].as_f64().unwrap();
    assert_eq!(2 * n_chan(&averaged), n_chan(&plain));
    assert_eq!(tsamp_s(&averaged), 4.0 * tsamp_s(&plain));

    let out = plan(&["demo-data/demo.json", "--average-channels", "3"]);
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("demo.json") && err.contains("groups of 3") && err.lines().count() == 1,
        "{err}"
    );
}
