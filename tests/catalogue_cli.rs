//! The `burstbook book` commands end to end, as an observer would use them.

mod cli_common;

use std::path::Path;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_burstbook");

/// Runs `burstbook book --catalogue DB ARGS...`.
fn run_book(db: &Path, args: &[&str]) -> std::process::Output {
    Command::new(BIN)
        .arg("book")
        .arg("--catalogue")
        .arg(db)
        .args(args)
        .output()
        .unwrap()
}

/// Runs `burstbook book --catalogue DB ARGS...`, asserts success, returns stdout.
fn book(db: &Path, args: &[&str]) -> String {
    let out = run_book(db, args);
    assert!(
        out.status.success(),
        "book {args:?}: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8(out.stdout).unwrap()
}

fn json(text: &str) -> Vec<serde_json::Value> {
    serde_json::from_str::<serde_json::Value>(text)
        .unwrap()
        .as_array()
        .unwrap()
        .clone()
}

#[test]
fn review_promote_summarise_and_export() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("c.sqlite");
    book(
        &db,
        &[
            "fill-synthetic",
            "--source",
            "FIELD-7",
            "--observations",
            "3",
            "--candidates",
            "40",
        ],
    );

    // Filtered listing agrees with itself across formats.
    let filter = [
        "--source",
        "FIELD-7",
        "--dm-min",
        "100",
        "--dm-max",
        "600",
        "--snr-min",
        "20",
    ];
    let rows = json(&book(
        &db,
        &[&["candidates"][..], &filter, &["--format", "json"]].concat(),
    ));
    assert!(!rows.is_empty());
    for r in &rows {
        let (dm, snr) = (r["dm"].as_f64().unwrap(), r["snr"].as_f64().unwrap());
        assert!((100.0..=600.0).contains(&dm) && snr >= 20.0, "{r}");
    }
    let csv = book(
        &db,
        &[&["candidates"][..], &filter, &["--format", "csv"]].concat(),
    );
    assert_eq!(csv.lines().count(), rows.len() + 1);

    // Label by filter, relabel one by id; history keeps both.
    book(
        &db,
        &[
            &["label"][..],
            &filter,
            &["--label", "burst", "--reviewer", "ana"],
        ]
        .concat(),
    );
    let first = rows[0]["id"].as_i64().unwrap().to_string();
    book(
        &db,
        &[
            "label",
            &first,
            "--label",
            "rfi",
            "--reviewer",
            "ben",
            "--comment",
            "satellite",
        ],
    );
    let history = json(&book(&db, &["history", &first, "--format", "json"]));
    assert_eq!(history.len(), 2);
    assert_eq!(history[1]["comment"], "satellite");
    let labelled = json(&book(
        &db,
        &["candidates", "--label-is", "burst", "--format", "json"],
    ));
    assert_eq!(labelled.len(), rows.len() - 1);

    // Refuses to label everything by accident.
    let out = Command::new(BIN)
        .args(["book", "--catalogue"])
        .arg(&db)
        .args(["label", "--label", "x"])
        .output()
        .unwrap();
    assert!(!out.status.success());

    // Automatic promotion needs a source with a reference DM near each candidate.
    book(
        &db,
        &[
            "source", "add", "FIELD-7", "--ra", "123.25", "--dec", "-12.5", "--dm", "350",
            "--notes", "test",
        ],
    );
    // A filter that matches nothing says so (it used to print nothing at all).
    let msg = book(
        &db,
        &["promote", "--label-is", "never-given", "--dm-tol", "300"],
    );
    assert_eq!(msg, "no candidate matches; nothing promoted\n");
    book(&db, &["promote", "--label-is", "burst", "--dm-tol", "300"]);
    let bursts = json(&book(
        &db,
        &["bursts", "--source", "FIELD-7", "--format", "json"],
    ));
    assert_eq!(bursts.len(), labelled.len());
    let bursts_csv = book(&db, &["bursts", "--format", "csv"]);
    assert!(bursts_csv.starts_with("id,candidate_id,source,mjd_utc,toa_tdb_mjd,dm,snr"));

    // Exposure: 3 one-hour observations (the first 01:00-02:00 UTC on MJD 60000)
    // plus 01:30-03:30 imported: 3 + 2 - 0.5 overlapping = 4.5 hours of recording.
    // At the source's DM 350 each observation's window for arrival times at infinite
    // frequency starts 0.56944 s early (delay to its top channel, 1596.875 MHz) and
    // ends 1.00316 s early (bottom channel, 1203.125 MHz; dispersion constant of
    // Lorimer & Kramer 2005): the first gains 0.56944 s before 01:00, the other two
    // lose the 0.43372 s sweep each.
    let csv_path = dir.path().join("exposure.csv");
    std::fs::write(
        &csv_path,
        "source,start_mjd,end_mjd,snr_threshold\nFIELD-7,60000.0625,60000.14583333333,7\n",
    )
    .unwrap();
    let msg = book(&db, &["exposure", "import", csv_path.to_str().unwrap()]);
    assert!(msg.contains("imported 1"), "{msg}");
    let exported = book(&db, &["exposure", "export", "--source", "FIELD-7"]);
    assert_eq!(exported.lines().count(), 1 + 3 + 1);

    let summary = json(&book(
        &db,
        &["summary", "FIELD-7", "--snr-min", "20", "--format", "json"],
    ));
    let s = &summary[0];
    assert_eq!(s["n_bursts"].as_u64().unwrap() as usize, bursts.len());
    assert!(
        (s["exposure_hours"].as_f64().unwrap() - (4.5 - 0.29799 / 3600.0)).abs() < 1e-7,
        "{s}"
    );

    let xml = book(&db, &["voevent", &bursts[0]["id"].to_string()]);
    assert!(xml.contains("<voe:VOEvent") && xml.contains("FIELD-7"));
    // Barycentric TOAs are those of the timing library for the burst's site and
    // its source's catalogue position.
    let msg = book(&db, &["barycentre", "FIELD-7"]);
    assert!(
        msg.contains(&format!("{} barycentric TOA(s) stored", bursts.len())),
        "{msg}"
    );
    let cat = burstbook::catalogue::Catalogue::open(&db).unwrap();
    for b in cat.burst_timing("FIELD-7").unwrap() {
        let expected = burstbook::timing::utc_to_barycentric_tdb(
            burstbook::obs::UtcEpoch::from_mjd_f64(b.mjd_utc),
            &b.site,
            123.25,
            -12.5,
        )
        .unwrap();
        assert_eq!(b.toa_tdb_mjd, Some(expected.tdb.to_mjd_f64()));
        // TDB − UTC is 69.184 s plus up to ±500 s of light travel time.
        let diff_s = (b.toa_tdb_mjd.unwrap() - b.mjd_utc) * 86_400.0;
        assert!((diff_s - 69.184).abs() < 510.0, "{diff_s}");
    }
    drop(cat);
    assert!(book(&db, &["check"]).contains("ok (3 observations, 3 runs, 120 candidates)"));
}

#[test]
fn listings_written_to_a_file_match_standard_output() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("c.sqlite");
    book(
        &db,
        &["fill-synthetic", "--observations", "2", "--candidates", "5"],
    );
    let shown = book(&db, &["candidates", "--format", "csv"]);
    let file = dir.path().join("candidates.csv");
    std::fs::write(&file, "an older listing\n").unwrap();
    let printed = book(
        &db,
        &[
            "candidates",
            "--format",
            "csv",
            "--out",
            file.to_str().unwrap(),
        ],
    );
    assert_eq!(printed, "");
    assert_eq!(std::fs::read_to_string(&file).unwrap(), shown);

    let missing = dir.path().join("no-such-dir").join("c.csv");
    let out = cli_common::burstbook(&[
        "book",
        "--catalogue",
        db.to_str().unwrap(),
        "candidates",
        "--out",
        missing.to_str().unwrap(),
    ]);
    cli_common::assert_one_line_failure(&out, &[missing.to_str().unwrap(), "No such file"]);
}

#[test]
fn exposure_exported_to_a_file_imports_into_another_catalogue_unchanged() {
    let dir = tempfile::tempdir().unwrap();
    let (here, there) = (
        dir.path().join("here.sqlite"),
        dir.path().join("there.sqlite"),
    );
    book(
        &here,
        &[
            "fill-synthetic",
            "--source",
            "FIELD-7",
            "--observations",
            "3",
        ],
    );
    let file = dir.path().join("exposure.csv");
    book(
        &here,
        &["exposure", "export", "--out", file.to_str().unwrap()],
    );
    let exported = std::fs::read_to_string(&file).unwrap();
    assert!(
        exported.starts_with("source,start_mjd,end_mjd,snr_threshold,fluence_limit_jy_ms\n"),
        "{exported}"
    );
    book(
        &there,
        &[
            "source", "add", "FIELD-7", "--ra", "123.25", "--dec", "-12.5",
        ],
    );
    let msg = book(&there, &["exposure", "import", file.to_str().unwrap()]);
    assert!(msg.contains("imported 3 interval(s)"), "{msg}");
    assert_eq!(book(&there, &["exposure", "export"]), exported);
}

/// Runs `burstbook book --catalogue DB ARGS...` and asserts one line of failure
/// carrying every needle.
fn book_fails(db: &Path, args: &[&str], needles: &[&str]) {
    cli_common::assert_one_line_failure(&run_book(db, args), needles);
}

/// NaN and empty ranges used to select nothing and exit 0, an unknown id gave an
/// empty history or a raw SQLite message, and a VOEvent took any radius and IVORN.
#[test]
fn bad_flag_values_and_unknown_ids_are_refused_in_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("c.sqlite");
    book(&db, &["fill-synthetic", "--source", "FIELD-7"]);
    book(
        &db,
        &[
            "source", "add", "FIELD-7", "--ra", "123.25", "--dec", "-12.5",
        ],
    );
    book(&db, &["promote", "1", "--to", "FIELD-7"]);
    let before = std::fs::read(&db).unwrap();
    let dm_inverted = ["--dm-min", "500", "--dm-max", "100"];
    let inverted = "--dm-min 500 is above --dm-max 100";
    for (args, needle) in [
        (&["candidates"][..], inverted),
        (&["bursts"], inverted),
        (&["label", "--label", "rfi"], inverted),
        (&["promote", "--to", "FIELD-7"], inverted),
    ] {
        book_fails(&db, &[args, &dm_inverted].concat(), &[needle]);
    }
    for (args, needle) in [
        (
            &["candidates", "--mjd-min", "nan"][..],
            "--mjd-min NaN is not a finite number",
        ),
        (
            &["candidates", "--snr-min", "nan"],
            "--snr-min NaN is not a finite number",
        ),
        (
            &["bursts", "--mjd-max", "inf"],
            "--mjd-max inf is not a finite number",
        ),
        (
            &["summary", "--snr-min", "nan"],
            "--snr-min NaN is not a finite number",
        ),
        (&["history", "999"], "has no candidate 999"),
        (
            &["promote", "999", "--to", "FIELD-7"],
            "has no candidate 999; nothing promoted",
        ),
        (
            &["promote", "2", "--radius-deg=-1"],
            "--radius-deg -1 must not be negative",
        ),
        (
            &["promote", "2", "--dm-tol", "nan"],
            "--dm-tol NaN is not a finite number",
        ),
        (
            &["voevent", "1", "--position-error-deg=-1"],
            "--position-error-deg -1 must be a radius above 0",
        ),
        (
            &["voevent", "1", "--position-error-deg", "nan"],
            "--position-error-deg NaN must be a radius",
        ),
        (
            &["voevent", "1", "--ivorn-root", "not an ivorn"],
            "--ivorn-root \"not an ivorn\" must be an IVORN",
        ),
        (
            &["voevent", "1", "--ivorn-root", "ivo://"],
            "--ivorn-root \"ivo://\" must be an IVORN",
        ),
    ] {
        book_fails(&db, args, &[needle]);
    }
    assert!(std::fs::read(&db).unwrap() == before, "a refusal wrote");
    // A radius in range and an IVORN with an authority are fine.
    let xml = book(
        &db,
        &[
            "voevent",
            "1",
            "--position-error-deg",
            "180",
            "--ivorn-root",
            "ivo://example.invalid/survey",
        ],
    );
    assert!(
        xml.contains("ivo://example.invalid/survey#burst-1"),
        "{xml}"
    );
}

/// A burst taken back leaves its candidate and review history, adds a "demoted"
/// label saying what it was and why, and stays out of the source's bursts,
/// summary and promotions by label; by id it is promoted again. A dry run, an
/// unknown id anywhere in the list and a missing reason change nothing.
#[test]
fn a_burst_taken_back_keeps_its_candidate_and_a_trace() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("c.sqlite");
    book(
        &db,
        &[
            "fill-synthetic",
            "--source",
            "FIELD-7",
            "--observations",
            "2",
            "--candidates",
            "5",
        ],
    );
    book(
        &db,
        &["source", "add", "OTHER", "--ra", "10", "--dec", "20"],
    );
    book(
        &db,
        &[
            "label",
            "1",
            "2",
            "3",
            "--label",
            "burst",
            "--reviewer",
            "ana",
        ],
    );
    book(&db, &["promote", "1", "2", "--to", "FIELD-7"]);
    book(&db, &["promote", "3", "--to", "OTHER"]);
    book(&db, &["barycentre", "FIELD-7"]);
    let n_bursts = |source: &str| {
        let s = json(&book(&db, &["summary", source, "--format", "json"]));
        s[0]["n_bursts"].as_u64().unwrap()
    };
    assert_eq!((n_bursts("FIELD-7"), n_bursts("OTHER")), (2, 1));
    let burst_1 = json(&book(&db, &["bursts", "--format", "json"]))
        .into_iter()
        .find(|b| b["id"] == 1)
        .unwrap();
    let counts = cli_common::table_counts(&db);
    let before = std::fs::read(&db).unwrap();

    let why = [
        "--comment",
        "satellite on second look",
        "--reviewer",
        "cleo",
    ];
    let dry = book(&db, &[&["demote", "1", "--dry-run"][..], &why].concat());
    let what = format!(
        "burst 1 of FIELD-7: candidate 1, MJD {:.8}, DM {:.2}, with its barycentric TOA\n",
        burst_1["mjd_utc"].as_f64().unwrap(),
        burst_1["dm"].as_f64().unwrap()
    );
    assert_eq!(
        dry,
        format!(
            "would demote {what}  would label \"demoted\": candidate 1\n\
             dry run: nothing was changed\n"
        )
    );
    for (args, needle) in [
        (
            &["demote", "2", "99", "1", "98"][..],
            "has no bursts 99, 98; nothing was demoted",
        ),
        (
            &["demote", "99", "--dry-run"],
            "has no burst 99; nothing was demoted",
        ),
    ] {
        book_fails(&db, &[args, &why].concat(), &[needle]);
    }
    book_fails(
        &db,
        &["demote", "1", "--comment", ""],
        &["a demotion needs a comment saying why"],
    );
    assert!(
        std::fs::read(&db).unwrap() == before,
        "a refusal or dry run wrote"
    );

    let done = book(&db, &[&["demote", "1"][..], &why].concat());
    assert_eq!(
        done,
        format!("demoted {what}  labelled \"demoted\": candidate 1\n")
    );
    let change: Vec<(String, i64)> = counts
        .iter()
        .zip(cli_common::table_counts(&db))
        .map(|((table, was), (_, now))| (table.clone(), now - was))
        .filter(|(_, n)| *n != 0)
        .collect();
    assert_eq!(
        change,
        [("burst".to_string(), -1), ("review_label".to_string(), 1)]
    );
    let history = json(&book(&db, &["history", "1", "--format", "json"]));
    assert_eq!(history.len(), 2);
    assert_eq!(
        (
            &history[0]["label"],
            &history[1]["label"],
            &history[1]["reviewer"]
        ),
        (&"burst".into(), &"demoted".into(), &"cleo".into())
    );
    let trace = history[1]["comment"].as_str().unwrap();
    assert!(
        trace.starts_with("was burst 1 of FIELD-7, promoted ")
            && trace.ends_with(": satellite on second look"),
        "{trace}"
    );
    let demoted = json(&book(
        &db,
        &["candidates", "--label-is", "demoted", "--format", "json"],
    ));
    assert_eq!(demoted.len(), 1);
    assert_eq!(
        (&demoted[0]["id"], &demoted[0]["burst_id"]),
        (&1.into(), &serde_json::Value::Null)
    );
    let ids: Vec<i64> = json(&book(&db, &["bursts", "--format", "json"]))
        .iter()
        .map(|b| b["id"].as_i64().unwrap())
        .collect();
    assert_eq!(ids.len(), 2);
    assert!(!ids.contains(&1));
    assert_eq!((n_bursts("FIELD-7"), n_bursts("OTHER")), (1, 1));
    assert!(book(&db, &["check"]).contains("ok (2 observations, 2 runs, 10 candidates)"));

    // Promoting by label passes it by; by id it goes to the right source.
    let by_label = book(&db, &["promote", "--label-is", "burst", "--to", "FIELD-7"]);
    assert!(!by_label.contains("candidate 1 "), "{by_label}");
    assert_eq!(n_bursts("FIELD-7"), 1);
    let again = book(&db, &["promote", "1", "--to", "OTHER"]);
    assert_eq!(again, "candidate 1 is now burst 4 of OTHER\n");
    assert_eq!((n_bursts("FIELD-7"), n_bursts("OTHER")), (1, 2));
    assert_eq!(
        json(&book(&db, &["history", "1", "--format", "json"])),
        history
    );
    book(&db, &["check"]);
}

/// Impossible exposure (a threshold or limit not above 0, an MJD far outside any
/// observing era) used to import and then swamp the summary.
#[test]
fn impossible_exposure_rows_are_refused_naming_file_and_line() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("c.sqlite");
    book(
        &db,
        &[
            "source", "add", "FIELD-7", "--ra", "123.25", "--dec", "-12.5",
        ],
    );
    let before = std::fs::read(&db).unwrap();
    for (row, needle) in [
        (
            "FIELD-7,61000,61000.1,-3",
            "line 2: snr_threshold -3 must be above 0",
        ),
        (
            "FIELD-7,61000,61000.1,7,-1",
            "line 2: fluence_limit_jy_ms -1 must be above 0",
        ),
        (
            "FIELD-7,61000,99999999",
            "line 2: end_mjd 99999999 is outside the plausible MJD range 40000..=100000",
        ),
    ] {
        let csv = dir.path().join("x.csv");
        std::fs::write(&csv, format!("source,start_mjd,end_mjd\n{row}\n")).unwrap();
        book_fails(
            &db,
            &["exposure", "import", csv.to_str().unwrap()],
            &["x.csv: ", needle, "nothing imported"],
        );
    }
    assert!(std::fs::read(&db).unwrap() == before);
}

/// A mistyped `--source` used to list nothing and exit 0, as if the source had no
/// rows; `summary` already refused it. A source held without rows still lists none.
#[test]
fn an_unknown_source_is_refused_and_a_known_empty_one_lists_nothing() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("c.sqlite");
    book(&db, &["fill-synthetic", "--source", "FIELD-7"]);
    book(&db, &["promote", "1", "--to", "FIELD-7"]);
    let unknown = "has no source named \"FIELD-8\"";
    for args in [
        &["candidates", "--source", "FIELD-8"][..],
        &["bursts", "--source", "FIELD-8"],
        &["exposure", "export", "--source", "FIELD-8"],
        &["label", "--source", "FIELD-8", "--label", "rfi"],
        &["summary", "FIELD-8"],
    ] {
        book_fails(&db, args, &[unknown, "burstbook book source add"]);
    }
    book(
        &db,
        &["source", "add", "QUIET", "--ra", "10.5", "--dec", "-20"],
    );
    for (args, header) in [
        (
            &["candidates", "--source", "QUIET", "--format", "csv"][..],
            "id,run_id,observation_id,source",
        ),
        (
            &["bursts", "--source", "QUIET", "--format", "csv"],
            "id,candidate_id",
        ),
        (
            &["exposure", "export", "--source", "QUIET"],
            "source,start_mjd",
        ),
    ] {
        let out = book(&db, args);
        assert_eq!(out.lines().count(), 1, "{args:?}: {out}");
        assert!(out.starts_with(header), "{args:?}: {out}");
    }
    // The source that has rows still lists them.
    let held = book(&db, &["bursts", "--source", "FIELD-7", "--format", "csv"]);
    assert_eq!(held.lines().count(), 2, "{held}");
}

/// RA 359.9999999° was listed as `360.000000`, outside [0, 360): it is the
/// direction 0 and prints so, in the source list and in a burst's VOEvent.
#[test]
fn right_ascension_that_rounds_to_360_prints_as_zero() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("c.sqlite");
    book(&db, &["fill-synthetic", "--source", "FIELD-7"]);
    book(
        &db,
        &[
            "source",
            "add",
            "FIELD-7",
            "--ra",
            "359.9999999",
            "--dec",
            "-12.5",
        ],
    );
    let csv = book(&db, &["source", "list", "--format", "csv"]);
    let row = csv.lines().find(|l| l.contains("FIELD-7")).unwrap();
    assert!(row.contains(",0.000000,-12.500000,"), "{csv}");
    assert!(!csv.contains("360.0"), "{csv}");
    book(&db, &["promote", "1", "--to", "FIELD-7"]);
    let xml = book(&db, &["voevent", "1"]);
    assert!(xml.contains("<C1>0.000000</C1>"), "{xml}");
}
