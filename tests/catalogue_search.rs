//! `burstbook search` recording into the catalogue, with a real search process
//! killed part-way through its files and then run again.

mod cli_common;
use cli_common::{assert_success, table_counts};

use std::io::{BufRead, BufReader};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use burstbook::catalogue::Catalogue;
use rusqlite::Connection;

const BIN: &str = env!("CARGO_BIN_EXE_burstbook");

/// A small invented observation: 64 channels, 6 s, one burst.
const SCENARIO: &str = r#"
[observation]
source = "Quillwort Test Field"
telescope = "Marrowby 12 m"
ra_deg = 210.5
dec_deg = 33.25
start_mjd = 61100.5
length_s = 6.0
tsamp_s = 1.024e-3

[site]
name = "Marrowby"
lon_deg = 4.5
lat_deg = 51.0
height_m = 30.0

[band]
first_chan_mhz = 1596.875
chan_step_mhz = -6.25
n_chan = 64

[noise]
nbits = 8
mean = 96.0
sigma = 12.0
sefd_jy = 30.0

[[burst]]
t_inf_s = 3.0
dm = 120.0
width_ms = 2.0
snr = 30.0
"#;

fn simulate(dir: &Path, seed: u64) -> PathBuf {
    let scenario = dir.join("scenario.toml");
    std::fs::write(&scenario, SCENARIO).unwrap();
    let out = dir.join(format!("obs{seed}.json"));
    let st = Command::new(BIN)
        .arg("simulate")
        .arg(&scenario)
        .arg("--out")
        .arg(&out)
        .args(["--seed", &seed.to_string()])
        .output()
        .unwrap();
    assert_success(&st);
    out
}

fn search(files: &[PathBuf], dir: &Path, db: &Path) -> Command {
    let mut c = Command::new(BIN);
    c.arg("search")
        .args(files)
        .arg("--out")
        .arg(dir.join("results"))
        .arg("--catalogue")
        .arg(db)
        .args(["--dm-max", "200"]);
    c
}

/// (observations, runs, candidates), after checking no run is partial.
fn contents(db: &Path) -> (i64, i64, i64) {
    let c = Catalogue::open(db).unwrap().verify().unwrap();
    (c.observations, c.runs, c.candidates)
}

#[test]
fn a_killed_search_keeps_finished_files_and_a_rerun_records_the_rest() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    let files: Vec<PathBuf> = (1..=3).map(|s| simulate(dir.path(), s)).collect();

    let mut child = search(&files, dir.path(), &db)
        .stdout(Stdio::piped())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let lines = BufReader::new(child.stdout.take().unwrap()).lines();
    for line in lines {
        if line.unwrap().contains("recorded in catalogue") {
            break;
        }
    }
    child.kill().unwrap();
    child.wait().unwrap();
    let (n_obs, n_runs, _) = contents(&db);
    assert_eq!(n_obs, n_runs);
    assert!((1..3).contains(&n_runs), "killed too late: {n_runs} runs");

    let out = search(&files, dir.path(), &db).output().unwrap();
    assert_success(&out);
    let text = String::from_utf8(out.stdout).unwrap();
    assert_eq!(
        text.matches(": skipped, the catalogue").count() as i64,
        n_runs,
        "the files recorded before the kill are not searched again: {text}"
    );
    let (n_obs, n_runs, n_cands) = contents(&db);
    assert_eq!((n_obs, n_runs), (3, 3));
    // The catalogue holds exactly the candidates written out, the skipped files' taken
    // from it.
    let csv = std::fs::read_to_string(dir.path().join("results/candidates.csv")).unwrap();
    assert_eq!(n_cands, csv.lines().count() as i64 - 1);
    assert!(n_cands >= 3, "each file has a 30-sigma burst");

    // Every run keeps the configuration that produced it, and its exposure.
    let c = Connection::open(&db).unwrap();
    let (snr, hours): (f64, f64) = c
        .query_row(
            "SELECT json_extract(config_json, '$.snr_threshold'),
                    (SELECT sum(end_mjd - start_mjd) * 24 FROM exposure)
             FROM search_run LIMIT 1",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    assert!(snr > 0.0);
    assert!((hours - 3.0 * 6.0 / 3600.0).abs() < 1e-6, "{hours}");
}

fn run_ok(cmd: &mut Command) -> String {
    let out = cmd.output().unwrap();
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        out.status.success(),
        "{text}{}",
        String::from_utf8_lossy(&out.stderr)
    );
    text
}

/// `burstbook book --catalogue DB ARGS...`, to run.
fn book(db: &Path, args: &[&str]) -> Command {
    let mut c = Command::new(BIN);
    c.args(["book", "--catalogue"]).arg(db).args(args);
    c
}

fn line_of<'a>(text: &'a str, file: &Path) -> &'a str {
    let name = file.display().to_string();
    text.lines()
        .find(|l| l.starts_with(&format!("{name}: ")))
        .unwrap_or_else(|| panic!("no line for {name} in {text}"))
}

#[test]
fn a_file_already_searched_is_skipped_unless_searched_again() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    let (f1, f2) = (simulate(dir.path(), 1), simulate(dir.path(), 2));
    let csv_path = dir.path().join("results/candidates.csv");

    let text = run_ok(&mut search(std::slice::from_ref(&f1), dir.path(), &db));
    assert!(
        line_of(&text, &f1).contains("recorded in catalogue"),
        "{text}"
    );
    let (_, _, n1) = contents(&db);
    let first_csv = std::fs::read_to_string(&csv_path).unwrap();

    // f1 again beside a new file: f1 is skipped, its candidates come from the catalogue.
    let text = run_ok(&mut search(&[f1.clone(), f2.clone()], dir.path(), &db));
    let skip = line_of(&text, &f1);
    assert!(skip.contains("skipped") && skip.contains("run 1"), "{text}");
    assert!(skip.contains("--search-again"), "{skip}");
    assert!(
        line_of(&text, &f2).contains("recorded in catalogue"),
        "{text}"
    );
    let (n_obs, n_runs, n_cands) = contents(&db);
    assert_eq!((n_obs, n_runs), (2, 2));
    let mixed_csv = std::fs::read_to_string(&csv_path).unwrap();
    assert_eq!(mixed_csv.lines().count() as i64 - 1, n_cands);
    assert!(
        mixed_csv.starts_with(&first_csv),
        "f1's rows from the catalogue equal those its search wrote"
    );
    let json: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(dir.path().join("results/candidates.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(json["skipped"][0]["run_id"], 1);
    assert_eq!(json["skipped"][0]["n_candidates"], n1);
    assert_eq!(json["files"].as_array().unwrap().len(), 1, "f2 only");

    // Forced: both are searched, nothing is recorded twice, and the fresh outputs
    // equal those that came partly from the catalogue.
    let text = run_ok(search(&[f1.clone(), f2.clone()], dir.path(), &db).arg("--search-again"));
    for f in [&f1, &f2] {
        assert!(line_of(&text, f).contains("already in catalogue"), "{text}");
    }
    assert_eq!(contents(&db), (2, 2, n_cands));
    assert_eq!(std::fs::read_to_string(&csv_path).unwrap(), mixed_csv);

    // Another configuration is another search, recorded as a second run.
    let text = run_ok(search(std::slice::from_ref(&f1), dir.path(), &db).args(["--snr", "8"]));
    assert!(
        line_of(&text, &f1).contains("recorded in catalogue"),
        "{text}"
    );
    assert_eq!(contents(&db).1, 3);
}

#[test]
fn search_without_catalogue_writes_none() {
    let dir = tempfile::tempdir().unwrap();
    let file = simulate(dir.path(), 9);
    let out = Command::new(BIN)
        .current_dir(dir.path())
        .arg("search")
        .arg(&file)
        .arg("--out")
        .arg(dir.path().join("r"))
        .args(["--dm-max", "200", "--no-catalogue"])
        .output()
        .unwrap();
    assert_success(&out);
    // Without the flag the default would be ./burstbook.sqlite in the working directory.
    assert!(!dir.path().join("burstbook.sqlite").exists());
}

/// The same samples under a second header file used to be a second observation:
/// every candidate twice, the exposure counted twice, and so every burst promoted
/// from both. A header that says the same is the same observation; one that says
/// something else is refused, naming the file, the first one and what differs.
#[test]
fn one_recording_under_two_headers_is_one_observation() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    let first = simulate(dir.path(), 1);
    let header: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&first).unwrap()).unwrap();
    // Another file, other bytes (pretty-printed), the same header, the same samples.
    let copy = dir.path().join("copy.json");
    std::fs::write(&copy, serde_json::to_string_pretty(&header).unwrap()).unwrap();
    let mut renamed = header.clone();
    renamed["source"] = "Quillwort Field B".into();
    let relabelled = dir.path().join("relabelled.json");
    std::fs::write(&relabelled, renamed.to_string()).unwrap();

    run_ok(&mut search(std::slice::from_ref(&first), dir.path(), &db));
    let once = contents(&db);
    assert_eq!((once.0, once.1), (1, 1));
    assert!(once.2 >= 1, "a 30-sigma burst");
    let text = run_ok(&mut search(std::slice::from_ref(&copy), dir.path(), &db));
    let skip = line_of(&text, &copy);
    assert!(
        skip.contains("skipped") && skip.contains("of this recording"),
        "{skip}"
    );
    assert!(
        skip.contains(&format!("recorded as {}", first.display())),
        "{skip}"
    );
    assert_eq!(contents(&db), once);
    // Searched again by force or with another configuration: runs of one observation.
    let text = run_ok(search(std::slice::from_ref(&copy), dir.path(), &db).arg("--search-again"));
    assert!(
        line_of(&text, &copy).contains("already in catalogue"),
        "{text}"
    );
    assert_eq!(contents(&db), once);
    run_ok(search(std::slice::from_ref(&copy), dir.path(), &db).args(["--snr", "8"]));
    assert_eq!(contents(&db).0, 1);

    let before = std::fs::read(&db).unwrap();
    let out = search(std::slice::from_ref(&relabelled), dir.path(), &db)
        .output()
        .unwrap();
    cli_common::assert_one_line_failure(
        &out,
        &[
            &format!(
                "{}: holds the same samples as {}",
                relabelled.display(),
                first.display()
            ),
            "under a header that differs in source; not recorded",
        ],
    );
    assert!(std::fs::read(&db).unwrap() == before, "a refusal wrote");
}

/// The same recording searched with two configurations holds its burst as a
/// candidate of each run; promoting every astrophysical candidate makes one burst of
/// it, not two (the second run averages pairs of samples, so it measures the event
/// with another width and time). Taking that burst back takes the event back: both
/// finds are labelled, and either can be promoted again.
#[test]
fn a_burst_found_by_two_runs_is_promoted_once() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    let f1 = simulate(dir.path(), 1);
    run_ok(&mut search(std::slice::from_ref(&f1), dir.path(), &db));
    run_ok(search(std::slice::from_ref(&f1), dir.path(), &db).args(["--average-samples", "2"]));
    let astrophysical = |run: i64| -> i64 {
        Connection::open(&db)
            .unwrap()
            .query_row(
                "SELECT count(*) FROM candidate WHERE run_id = ?1 AND verdict = 'astrophysical'",
                [run],
                |r| r.get(0),
            )
            .unwrap()
    };
    assert_eq!((astrophysical(1), astrophysical(2)), (1, 1));
    let book = |args: &[&str]| run_ok(&mut book(&db, args));
    let text = book(&[
        "promote",
        "--verdict",
        "astrophysical",
        "--to",
        "Quillwort Test Field",
    ]);
    assert!(text.contains("is now burst 1"), "{text}");
    assert!(text.contains("is the event of candidate"), "{text}");
    let bursts = book(&["bursts", "--format", "csv"]);
    assert_eq!(bursts.lines().count(), 2, "{bursts}");
    assert!(!book(&["check"]).contains("note:"));

    // A catalogue an older burstbook left: the other run's find promoted too.
    // `book check` names the pair.
    Connection::open(&db)
        .unwrap()
        .execute(
            "INSERT INTO burst (candidate_id, source_id, mjd_utc, snr, width_ms, dm, promoted_utc)
             SELECT id, 1, mjd_inf, snr, width_ms, dm, 'then' FROM candidate
             WHERE verdict = 'astrophysical' AND id NOT IN (SELECT candidate_id FROM burst)",
            [],
        )
        .unwrap();
    let check = book(&["check"]);
    assert!(
        check.contains("note: bursts 1 and 2 are one event found by two runs"),
        "{check}"
    );
    let found_by: Vec<String> = book(&["bursts", "--format", "csv"])
        .lines()
        .skip(1)
        .map(|l| l.split(',').nth(1).unwrap().to_string())
        .collect();

    // The twin taken back alone: its pair is a burst, so only its own find is
    // labelled, and the note is gone.
    let text = book(&["demote", "2", "--comment", "promoted twice"]);
    assert!(
        text.ends_with(&format!(
            "  labelled \"demoted\": candidate {}\n",
            found_by[1]
        )),
        "{text}"
    );
    assert!(!book(&["check"]).contains("note:"));
    // The event taken back: the other run's find is labelled with it.
    let text = book(&["demote", "1", "--comment", "interference after all"]);
    assert!(
        text.ends_with(&format!(
            "  labelled \"demoted\": candidate {} and {} (its event, found by another run)\n",
            found_by[0], found_by[1]
        )),
        "{text}"
    );
    assert_eq!(book(&["bursts", "--format", "csv"]).lines().count(), 1);
    let history = book(&["history", &found_by[1], "--format", "csv"]);
    assert_eq!(history.lines().count(), 3, "{history}");
    assert!(history.contains("the event of burst 1 of Quillwort Test Field"));
    // Either find can be promoted again, once.
    let text = book(&["promote", &found_by[1], "--to", "Quillwort Test Field"]);
    assert!(text.contains("is now burst"), "{text}");
    let text = book(&["promote", &found_by[0], "--to", "Quillwort Test Field"]);
    assert!(text.contains("not promoted again"), "{text}");
    assert!(!book(&["check"]).contains("note:"));
}

/// The candidates CSV rows of observation `id` (`observation_id` is its third column).
fn rows_of_observation(csv: &str, id: &str) -> Vec<String> {
    csv.lines()
        .filter(|l| l.split(',').nth(2) == Some(id))
        .map(str::to_string)
        .collect()
}

/// A recording first recorded under a wrong header (its start a minute off) refuses
/// the corrected file, naming the observation and the way out; forgetting that
/// observation (its burst too, when asked) lets the corrected file in as a new
/// observation, and another observation's rows stay as they were.
#[test]
fn a_wrong_header_is_forgotten_and_the_corrected_file_recorded() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("survey.sqlite");
    let (wrong, other) = (simulate(dir.path(), 1), simulate(dir.path(), 2));
    let mut header: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&wrong).unwrap()).unwrap();
    header["start_sec"] = (header["start_sec"].as_f64().unwrap() + 60.0).into();
    let corrected = dir.path().join("corrected.json");
    std::fs::write(&corrected, header.to_string()).unwrap();
    run_ok(&mut search(
        &[wrong.clone(), other.clone()],
        dir.path(),
        &db,
    ));
    run_ok(&mut book(&db, &["label", "1", "--label", "burst"]));
    run_ok(&mut book(
        &db,
        &["promote", "1", "--to", "Quillwort Test Field"],
    ));

    let before = std::fs::read(&db).unwrap();
    let out = search(std::slice::from_ref(&corrected), dir.path(), &db)
        .output()
        .unwrap();
    cli_common::assert_one_line_failure(
        &out,
        &[
            "(observation 1), under a header that differs in start",
            &format!("`burstbook book --catalogue {} forget 1`", db.display()),
        ],
    );
    let candidates = run_ok(&mut book(&db, &["candidates", "--format", "csv"]));
    assert!(candidates.starts_with("id,run_id,observation_id,source,"));
    let others = rows_of_observation(&candidates, "2");
    assert!(!others.is_empty() && !rows_of_observation(&candidates, "1").is_empty());
    let table = run_ok(&mut book(&db, &["candidates"]));
    assert!(table.lines().next().unwrap().contains(" obs "), "{table}");

    // Its burst is refused; a dry run counts and changes nothing; unknown ids fail.
    let refused = book(&db, &["forget", "1"]).output().unwrap();
    cli_common::assert_one_line_failure(
        &refused,
        &[
            "observation 1 has 1 burst(s) promoted from its candidates (1 of Quillwort \
             Test Field); nothing was removed (--with-bursts",
        ],
    );
    let unknown = book(&db, &["forget", "99"]).output().unwrap();
    cli_common::assert_one_line_failure(&unknown, &["has no observation 99; nothing was removed"]);
    assert!(std::fs::read(&db).unwrap() == before, "a refusal wrote");
    let counts = table_counts(&db);
    let dry = run_ok(&mut book(
        &db,
        &["forget", "1", "--with-bursts", "--dry-run"],
    ));
    assert_eq!(table_counts(&db), counts, "a dry run changed something");
    let first = format!(
        "would remove observation 1: {}, start MJD 61100.",
        wrong.display()
    );
    assert!(dry.starts_with(&first), "{dry}");
    assert!(dry.ends_with("dry run: nothing was changed\n"), "{dry}");

    let done = run_ok(&mut book(&db, &["forget", "1", "--with-bursts"]));
    assert_eq!(
        done.replace("removed", "would remove"),
        dry.replace("dry run: nothing was changed\n", "")
    );
    for line in [
        "  1 search run(s)",
        "  1 review label(s)",
        "  1 exposure interval(s)",
        "  1 burst(s)",
    ] {
        assert!(done.contains(&format!("{line}\n")), "{line} in {done}");
    }
    let gone: std::collections::HashMap<String, i64> = counts
        .iter()
        .zip(table_counts(&db))
        .map(|((table, was), (_, now))| (table.clone(), was - now))
        .collect();
    let n_candidates = gone["candidate"];
    assert!(
        done.contains(&format!("  {n_candidates} candidate(s)\n")),
        "{done}"
    );
    let expected = [
        ("burst", 1),
        ("exposure", 1),
        ("injection_completeness", 0),
        ("observation", 1),
        ("review_label", 1),
        ("search_run", 1),
        ("source", 0),
    ];
    for (table, n) in expected {
        assert_eq!(gone[table], n, "{table}");
    }
    assert_eq!(gone.len(), expected.len() + 1, "{gone:?}");
    let after = run_ok(&mut book(&db, &["candidates", "--format", "csv"]));
    assert_eq!(rows_of_observation(&after, "2"), others);
    assert_eq!(
        after.lines().count(),
        others.len() + 1,
        "only observation 2's rows"
    );
    run_ok(&mut book(&db, &["check"]));

    // The corrected file is now a new observation.
    let text = run_ok(&mut search(
        std::slice::from_ref(&corrected),
        dir.path(),
        &db,
    ));
    assert!(
        line_of(&text, &corrected).contains("recorded in catalogue"),
        "{text}"
    );
    assert_eq!(contents(&db).0, 2);
    let check = run_ok(&mut book(&db, &["check"]));
    assert!(check.contains(": ok (2 observations, 2 runs,"), "{check}");
}
