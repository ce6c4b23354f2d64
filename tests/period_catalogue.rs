//! `burstbook period ... --source` end to end: a catalogue with promoted bursts and
//! imported exposure feeds the periodicity commands.

use std::path::Path;
use std::process::{Command, Output};

use burstbook::catalogue::{AssignTolerance, CandidateFilter, Catalogue, synthetic};

const BIN: &str = env!("CARGO_BIN_EXE_burstbook");
const SOURCE: &str = "SYNTH-9";
const OBSERVATIONS: u64 = 8;
const PER_OBSERVATION: usize = 4;

/// Eight one-hour observations on consecutive days (invented), every candidate
/// promoted to SOURCE, plus one imported session two days later without bursts.
/// Returns the number of bursts.
fn build_catalogue(db: &Path, dir: &Path) -> usize {
    let mut cat = Catalogue::open(db).unwrap();
    for seed in 0..OBSERVATIONS {
        let obs = synthetic::observation(SOURCE, seed);
        let cands = synthetic::candidates(&obs, PER_OBSERVATION, seed);
        cat.record_search(&obs, &synthetic::run(7.0), &cands)
            .unwrap();
    }
    let tol = AssignTolerance {
        radius_deg: 1.0,
        dm: 1.0,
    };
    let rows = cat.candidates(&CandidateFilter::default()).unwrap();
    for r in &rows {
        cat.promote(r.id, Some(SOURCE), tol).unwrap();
    }
    drop(cat);
    let csv = dir.join("sessions.csv");
    let day = 60_000 + OBSERVATIONS + 2;
    std::fs::write(
        &csv,
        format!("source,start_mjd,end_mjd\n{SOURCE},{day}.25,{day}.3\n"),
    )
    .unwrap();
    let out = burstbook(
        &["book", "--catalogue", db.to_str().unwrap()],
        &["exposure", "import", csv.to_str().unwrap()],
    );
    assert!(out.status.success(), "{}", stderr(&out));
    rows.len()
}

fn burstbook(first: &[&str], rest: &[&str]) -> Output {
    Command::new(BIN).args(first).args(rest).output().unwrap()
}

/// `period stats` of the source in catalogue `db`, without bootstrap.
fn stats_args(db: &str) -> [&str; 8] {
    [
        "period",
        "stats",
        "--boot",
        "0",
        "--source",
        SOURCE,
        "--catalogue",
        db,
    ]
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

fn json(out: &Output) -> serde_json::Value {
    assert!(out.status.success(), "{}", stderr(out));
    serde_json::from_slice(&out.stdout).expect("JSON on stdout")
}

#[test]
fn period_commands_read_bursts_and_exposure_of_a_source() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    let n = build_catalogue(&db, dir.path());
    assert_eq!(n, OBSERVATIONS as usize * PER_OBSERVATION);
    let db = db.to_str().unwrap();
    let from_source = ["--source", SOURCE, "--catalogue", db];

    let out = burstbook(
        &["period", "activity", "--sims", "50", "--json"],
        &from_source,
    );
    let a = json(&out);
    assert_eq!(a["n_bursts"], n);
    assert_eq!(a["n_sessions"], OBSERVATIONS + 1);
    // None of the TOAs was stored, so all were computed, and the user is told.
    assert!(
        stderr(&out).contains(&format!("{n} of {n} barycentric arrival times")),
        "{}",
        stderr(&out)
    );

    // The catalogue found through the environment variable, as everywhere else.
    let out = Command::new(BIN)
        .args([
            "period", "stats", "--boot", "20", "--json", "--source", SOURCE,
        ])
        .env("BURSTBOOK_CATALOGUE", db)
        .output()
        .unwrap();
    let s = json(&out);
    assert_eq!(s["waiting"]["n_bursts"], n);
    assert_eq!(s["waiting"]["n_outside"], 0);
    assert!(s["power_law"]["n_tail"].as_u64().unwrap() >= 2);

    // A threshold counts the bursts at or above it, as `book summary` does.
    let summary = json(&burstbook(
        &["book", "--catalogue", db],
        &["summary", SOURCE, "--snr-min", "30", "--format", "json"],
    ));
    let strong = summary[0]["n_bursts"].as_u64().unwrap();
    assert!(0 < strong && strong < n as u64, "{strong} of {n}");
    let s = json(&burstbook(
        &[
            "period",
            "stats",
            "--boot",
            "20",
            "--json",
            "--snr-min",
            "30",
        ],
        &from_source,
    ));
    assert_eq!(s["waiting"]["n_bursts"], strong);

    // Stored TOAs are used as they are: no note once `book barycentre` has run.
    let out = burstbook(&["book", "--catalogue", db], &["barycentre", SOURCE]);
    assert!(out.status.success(), "{}", stderr(&out));
    let out = burstbook(
        &[
            "period",
            "rotation",
            "--min-period-s",
            "1",
            "--max-period-s",
            "2",
            "--json",
        ],
        &from_source,
    );
    let r = json(&out);
    assert_eq!(r["n_toas"], n);
    assert!(!stderr(&out).contains("computed now"), "{}", stderr(&out));
    let h = json(&burstbook(
        &["period", "rotation", "--period-s", "1.25", "--json"],
        &from_source,
    ));
    assert_eq!(h["n_toas"], n);
}

#[test]
fn unknown_source_and_mixed_inputs_are_refused_in_one_line() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    build_catalogue(&db, dir.path());
    let db = db.to_str().unwrap();
    let out = burstbook(
        &["period", "activity", "--source", "NOPE", "--catalogue", db],
        &[],
    );
    assert!(!out.status.success());
    let err = stderr(&out);
    assert!(err.contains("NOPE") && err.lines().count() == 1, "{err}");
    let out = burstbook(
        &["period", "activity", "--source", SOURCE, "--toas", "x.csv"],
        &[],
    );
    assert!(!out.status.success());
    assert!(
        stderr(&out).contains("cannot be used with"),
        "{}",
        stderr(&out)
    );
}

/// Catalogue fluences that are not > 0 cannot be in a power law: the fit leaves them
/// out and says how many (it dropped them silently).
#[test]
fn power_law_counts_the_fluences_it_leaves_out() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    build_catalogue(&db, dir.path());
    let sql = rusqlite::Connection::open(&db).unwrap();
    let set = "UPDATE burst SET fluence_jy_ms = ?1 WHERE rowid = \
               (SELECT rowid FROM burst WHERE fluence_jy_ms > 0 LIMIT 1)";
    for fluence in [0.0, -1.5] {
        assert_eq!(sql.execute(set, [fluence]).unwrap(), 1);
    }
    drop(sql);
    let db = db.to_str().unwrap();
    let stats = stats_args(db);
    let s = json(&burstbook(&stats, &["--json"]));
    assert_eq!(s["power_law"]["n_excluded"], 2);
    let out = burstbook(&stats, &[]);
    assert!(out.status.success(), "{}", stderr(&out));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(
        text.contains(" values; 2 not > 0 left out): α = "),
        "{text}"
    );
}

/// A source observed without an SEFD has no fluences: `period stats --source` still
/// gives its waiting times and says why there is no power law (it failed with
/// `no positive values to fit` and printed nothing else).
#[test]
fn waiting_times_do_not_need_fluences() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    let n = build_catalogue(&db, dir.path());
    let sql = rusqlite::Connection::open(&db).unwrap();
    sql.execute("UPDATE burst SET fluence_jy_ms = NULL", [])
        .unwrap();
    drop(sql);
    let db = db.to_str().unwrap();
    let stats = stats_args(db);
    let s = json(&burstbook(&stats, &["--json"]));
    assert_eq!(s["waiting"]["n_bursts"], n);
    assert!(s["power_law"].is_null(), "{s}");
    let why = s["power_law_not_fitted"].as_str().unwrap();
    assert!(why.contains("no fluence"), "{why}");
    let out = burstbook(&stats, &[]);
    assert!(out.status.success(), "{}", stderr(&out));
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains(&format!("{n} bursts in ")), "{text}");
    assert!(text.contains("Power law: not fitted"), "{text}");
}
