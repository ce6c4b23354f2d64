//! End-to-end: `burstbook barycentre` on small CSV files.

mod cli_common;
use cli_common::{assert_one_line_failure, assert_success};

use std::process::Command;

use burstbook::obs::{Site, UtcEpoch};
use burstbook::timing::utc_to_barycentric_tdb;

fn run(dir: &std::path::Path, input: &str, extra: &[&str]) -> std::process::Output {
    let inp = dir.join("in.csv");
    std::fs::write(&inp, input).unwrap();
    let mut args = vec!["barycentre", "--ra-deg", "201.37", "--dec-deg", "-43.02"];
    args.extend_from_slice(extra);
    Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(&args)
        .arg("--in")
        .arg(&inp)
        .arg("--out")
        .arg(dir.join("out.csv"))
        .output()
        .unwrap()
}

#[test]
fn adds_tdb_columns_and_keeps_the_others() {
    let dir = tempfile::tempdir().unwrap();
    let out = run(
        dir.path(),
        "# bursts\nname,mjd_utc,snr\nb1,60123.456789012345,9.5\nb2,58000,12\n",
        &["--site", "-70.25,-30.5,2400"],
    );
    assert_success(&out);
    let text = std::fs::read_to_string(dir.path().join("out.csv")).unwrap();
    let lines: Vec<&str> = text.lines().collect();
    assert_eq!(lines[0], "name,mjd_utc,snr,mjd_tdb,correction_s");
    let fields: Vec<&str> = lines[1].split(',').collect();
    assert_eq!(&fields[..3], &["b1", "60123.456789012345", "9.5"]);
    assert_eq!(fields[3].split('.').nth(1).unwrap().len(), 15);

    let site = Site {
        name: "x".into(),
        lon_deg: -70.25,
        lat_deg: -30.5,
        height_m: 2400.0,
    };
    let utc = UtcEpoch {
        mjd: 60123,
        sec: 0.456789012345 * 86400.0,
    };
    let expected = utc_to_barycentric_tdb(utc, &site, 201.37, -43.02).unwrap();
    let correction: f64 = fields[4].parse().unwrap();
    assert!((correction - expected.correction_s).abs() < 1e-9);
    let tdb_frac: f64 = format!("0.{}", fields[3].split('.').nth(1).unwrap())
        .parse()
        .unwrap();
    assert!((tdb_frac * 86400.0 - expected.tdb.sec).abs() < 1e-6);
    assert_eq!(lines.len(), 3);
}

#[test]
fn bad_input_gives_one_line_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    for (input, problem) in [
        ("time,snr\n60000.5,3\n", "no column named `mjd_utc`"),
        ("mjd_utc\n60000.5\nsoon\n", "`soon` is not an MJD"),
        ("mjd_utc\n30000.5\n", "before 1972"),
        // Which of two `mjd_utc` columns holds the times is a guess: the first was used.
        (
            "mjd_utc,mjd_utc\n61011.3125,61012\n",
            "2 columns are named `mjd_utc` (columns 1 and 2)",
        ),
    ] {
        let out = run(dir.path(), input, &["--site", "10,45,500"]);
        assert!(!out.status.success());
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(err.trim().lines().count(), 1, "{err}");
        assert!(err.contains("in.csv") && err.contains(problem), "{err}");
    }
}

#[test]
fn out_dev_stdout_appends_to_a_redirected_file() {
    // `--out /dev/stdout >> log.csv` must add to the log, not replace it.
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in.csv");
    std::fs::write(&input, "mjd_utc\n60000.5\n").unwrap();
    let log = dir.path().join("log.csv");
    std::fs::write(&log, "earlier lines\n").unwrap();
    let append = std::fs::OpenOptions::new().append(true).open(&log).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(["barycentre", "--ra-deg", "10", "--dec-deg", "20"])
        .args(["--site", "10,45,100", "--out", "/dev/stdout", "--in"])
        .arg(&input)
        .stdout(append)
        .output()
        .unwrap();
    assert_success(&out);
    let text = std::fs::read_to_string(&log).unwrap();
    assert!(
        text.starts_with("earlier lines\nmjd_utc,mjd_tdb,correction_s\n60000.5,"),
        "{text}"
    );
}

/// An RA outside [0, 360) is refused rather than wrapped (400° gave the answer for 40°).
#[test]
fn a_right_ascension_outside_a_circle_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("in.csv");
    std::fs::write(&input, "mjd_utc\n60000.5\n").unwrap();
    for ra in ["400", "360", "-10"] {
        let out = Command::new(env!("CARGO_BIN_EXE_burstbook"))
            .args(["barycentre", "--ra-deg", ra, "--dec-deg", "41"])
            .args(["--site", "10,45,100", "--out"])
            .arg(dir.path().join("out.csv"))
            .arg("--in")
            .arg(&input)
            .output()
            .unwrap();
        assert_one_line_failure(&out, &[&format!("RA {ra}°"), "RA must be in [0, 360)"]);
    }
    assert!(!dir.path().join("out.csv").exists());
}

/// Times after the leap-second table's validity used to be warned about once,
/// naming the first such MJD only; the warning now counts and lists the rows.
#[test]
fn a_warning_counts_and_lists_the_rows_that_raised_it() {
    let dir = tempfile::tempdir().unwrap();
    let late: String = (0..8).map(|i| format!("{}.25\n", 62_500 + i)).collect();
    let input = format!("mjd_utc\n60000.5\n62490.5\n{late}");
    let out = run(dir.path(), &input, &["--site", "10,45,500"]);
    assert_success(&out);
    let err = String::from_utf8_lossy(&out.stderr);
    let warnings: Vec<&str> = err.lines().filter(|l| l.contains("warning")).collect();
    assert_eq!(warnings.len(), 1, "{err}");
    assert!(
        warnings[0].contains(
            "in.csv: 9 rows (lines 3, 4, 5, 6, 7 and 4 more; MJD 62490 to 62507) are after \
             the leap-second table's validity"
        ),
        "{err}"
    );
    assert!(err.contains("10 rows written"), "{err}");
}
