//! Schema upgrades keep every row, and VOEvent packets validate against the
//! official IVOA VOEvent 2.0 schema.

use std::path::Path;
use std::process::Command;

use burstbook::catalogue::{
    APPLICATION_ID, AssignTolerance, BurstFilter, CandidateFilter, Catalogue, DemoteOptions,
    SCHEMA_VERSION, VoEventOptions, synthetic, voevent_xml,
};
use rusqlite::Connection;

/// Builds a version-1 catalogue by hand with the shipped first migration and
/// one row in every table.
fn version_one(db: &Path) {
    let c = Connection::open(db).unwrap();
    c.execute_batch(include_str!("../migrations/0001_core.sql"))
        .unwrap();
    c.pragma_update(None, "user_version", 1).unwrap();
    c.pragma_update(None, "application_id", APPLICATION_ID)
        .unwrap();
    c.execute_batch(
        "INSERT INTO source VALUES (1, 'OLD-1', 10.5, -5.25, 120.5, 'kept since v1');
         INSERT INTO observation VALUES (1, 'abc123', 'obs/old.fits', 'OLD-1', 10.5, -5.25,
             'Heronsgate', 59000.25, 1800.0, 1200.0, 1600.0, 0.125, '{}', '2020-01-01T00:00:00Z');
         INSERT INTO search_run VALUES (1, 1, 'cfg1', '0.0.9', '{\"snr_threshold\":8}', '{}', 8.0,
             '2020-01-01T00:00:00Z', '2020-01-01T00:10:00Z', 'complete', 2);
         INSERT INTO candidate VALUES
             (1, 1, 'obs/old.fits', 100.0, 59000.2512, 120.0, 119.0, 121.5, 2.0, 12.5, 7,
              'astrophysical', '[\"sweep\"]', 0.1, 0.05, 0.9, 0.3, 0.75),
             (2, 1, 'obs/old.fits', 900.0, 59000.2604, 3.0, 0.0, 6.0, 8.0, 9.0, 40,
              'rfi', '[\"dm0\"]', 0.9, 0.8, 0.2, 2.5, NULL);
         INSERT INTO exposure VALUES (1, 1, 59000.25, 59000.270833, 8.0, 1);
         INSERT INTO burst VALUES (1, 1, 1, 59000.2512, 12.5, 2.0, 120.0, 0.75, NULL,
             '2020-01-02T00:00:00Z');",
    )
    .unwrap();
}

fn dump(db: &Path) -> Vec<String> {
    let c = Connection::open(db).unwrap();
    let mut rows = Vec::new();
    for table in [
        "source",
        "observation",
        "search_run",
        "candidate",
        "exposure",
        "burst",
    ] {
        let mut stmt = c
            .prepare(&format!("SELECT * FROM {table} ORDER BY id"))
            .unwrap();
        let n = stmt.column_count();
        let mut q = stmt.query([]).unwrap();
        while let Some(r) = q.next().unwrap() {
            let cells: Vec<String> = (0..n)
                .map(|i| format!("{:?}", r.get_ref(i).unwrap()))
                .collect();
            rows.push(format!("{table}: {}", cells.join(" | ")));
        }
    }
    rows
}

#[test]
fn upgrading_a_version_one_catalogue_keeps_every_row() {
    let dir = tempfile::tempdir().unwrap();
    let db = dir.path().join("v1.sqlite");
    version_one(&db);
    let before = dump(&db);
    assert_eq!(before.len(), 7);

    let mut cat = Catalogue::open(&db).unwrap();
    let version: i64 = Connection::open(&db)
        .unwrap()
        .query_row("PRAGMA user_version", [], |r| r.get(0))
        .unwrap();
    assert_eq!(version, SCHEMA_VERSION);
    // Old columns unchanged; the added exposure column is NULL for old rows.
    let after: Vec<String> = dump(&db)
        .into_iter()
        .map(|r| r.replace(" | Null", ""))
        .collect();
    let before_cmp: Vec<String> = before.iter().map(|r| r.replace(" | Null", "")).collect();
    assert_eq!(after, before_cmp);

    // The upgraded file works through the library, including version-2 features.
    let cands = cat.candidates(&CandidateFilter::default()).unwrap();
    assert_eq!(cands.len(), 2);
    assert_eq!(cands[0].candidate.reasons, vec!["sweep".to_string()]);
    assert_eq!(cands[0].burst_id, Some(1));
    cat.label(&[2], "rfi", "tester", "after upgrade").unwrap();
    assert_eq!(cat.label_history(2).unwrap().len(), 1);
    let s = cat.summary("OLD-1", Some(8.0), 0.95).unwrap();
    assert_eq!(s.n_bursts, 1);
    assert!((s.exposure_hours - 0.5).abs() < 1e-4);
    // A burst taken back keeps its id to itself (version 5): the next one is 2.
    let how = DemoteOptions {
        reviewer: "tester",
        comment: "after upgrade",
        dry_run: false,
    };
    cat.demote(&[1], how).unwrap();
    let tol = AssignTolerance {
        radius_deg: 1.0,
        dm: 1.0,
    };
    assert_eq!(cat.promote(2, Some("OLD-1"), tol).unwrap().burst_id, 2);
    drop(cat);
    // Opening again changes nothing.
    let once = dump(&db);
    Catalogue::open(&db).unwrap();
    assert_eq!(dump(&db), once);
}

fn packet_file(dir: &Path) -> std::path::PathBuf {
    let mut cat = Catalogue::open(&dir.join("c.sqlite")).unwrap();
    let obs = synthetic::observation("VOE-1", 4);
    cat.record_search(
        &obs,
        &synthetic::run(7.0),
        &synthetic::candidates(&obs, 3, 4),
    )
    .unwrap();
    let id = cat.candidates(&CandidateFilter::default()).unwrap()[0].id;
    let tol = AssignTolerance {
        radius_deg: 1.0,
        dm: 1.0,
    };
    cat.promote(id, Some("VOE-1"), tol).unwrap();
    let burst = cat.bursts(&BurstFilter::default()).unwrap()[0].id;
    let opt = VoEventOptions {
        ivorn_root: "ivo://example.invalid/burstbook".into(),
        contact: "A. Observer".into(),
        position_error_deg: 0.25,
        role: "test".into(),
    };
    let xml = voevent_xml(
        &cat.burst_packet(burst).unwrap(),
        &opt,
        "2026-12-02T01:00:00",
    );
    let path = dir.join("burst.xml");
    std::fs::write(&path, xml).unwrap();
    path
}

/// Runs xmllint against the committed IVOA schema; `None` if xmllint is absent.
fn xmllint(file: &Path) -> Option<std::process::Output> {
    let schema = concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/tests/fixtures/voevent/VOEvent-v2.0.xsd"
    );
    Command::new("xmllint")
        .args(["--noout", "--nonet", "--schema", schema])
        .arg(file)
        .output()
        .ok()
}

/// Validation against the VOEvent 2.0 XSD (IVOA Recommendation, Seaman et al.
/// 2011) with xmllint from Debian libxml2-utils. A broken copy must fail, so the
/// check is known to be live.
#[test]
fn voevent_packet_validates_against_the_ivoa_schema() {
    let dir = tempfile::tempdir().unwrap();
    let good = packet_file(dir.path());
    let Some(out) = xmllint(&good) else {
        // CI installs it (.ci/run), so there a missing xmllint is a failure.
        assert!(
            std::env::var_os("CI").is_none(),
            "xmllint is not installed: apt-get install libxml2-utils"
        );
        eprintln!(
            "SKIPPED voevent_packet_validates_against_the_ivoa_schema: xmllint not installed \
             (apt-get install libxml2-utils); VOEvent packets were NOT validated"
        );
        return;
    };
    assert!(
        out.status.success(),
        "packet does not validate: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    let bad = dir.path().join("bad.xml");
    let text = std::fs::read_to_string(&good).unwrap();
    std::fs::write(&bad, text.replace("<Why>", "<Why importance=\"high\">")).unwrap();
    let out = xmllint(&bad).unwrap();
    assert!(!out.status.success(), "a broken packet validated");
}
