//! The review page end to end in a real headless browser: start the server on a
//! temporary catalogue, press keys, check the labels landed in the catalogue's label
//! history. Plus plain-HTTP checks of the server's guards.
//!
//! Needs Debian `chromium` (skipped, loudly, when absent), `node`, and
//! `npm ci --prefix tests/browser` (playwright-core; fails with instructions when
//! missing, because then the test would silently prove nothing).

mod cli_common;
mod report_common;

use std::io::{Read, Write};
use std::net::TcpStream;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::thread;

use burstbook::candidate::{Candidate, TriageFeatures, Verdict};
use burstbook::catalogue::{CandidateFilter, Catalogue, ObservationRecord, synthetic};
use burstbook::report::review::{
    CatalogueStore, LabelStore, MemoryStore, ReviewItem, ReviewLabel, ReviewServer,
};

fn candidate(file: &Path, t_inf_s: f64, dm: f64, snr: f64) -> Candidate {
    Candidate {
        file: file.display().to_string(),
        t_inf_s,
        mjd_inf: 60100.05,
        dm,
        dm_lo: dm - 2.0,
        dm_hi: dm + 2.0,
        width_ms: 3.0,
        snr,
        cluster_size: 5,
        verdict: Verdict::Unsure,
        reasons: vec!["made for the review test".into()],
        features: TriageFeatures::default(),
        fluence_jy_ms: None,
    }
}

/// A catalogue holding the four candidates of [`store_with_four`] from one search.
fn catalogue_with_four(dir: &Path, obs: &Path, t_inf: f64) -> CatalogueStore {
    let mut cat = Catalogue::open(&dir.join("review.sqlite")).unwrap();
    let header = burstbook::obs::open(obs).unwrap().header().clone();
    let record = ObservationRecord::from_file(obs, &header).unwrap();
    let cands: Vec<Candidate> = store_with_four(obs, t_inf)
        .items
        .into_iter()
        .map(|i| i.candidate)
        .collect();
    cat.record_search(&record, &synthetic::run(6.0), &cands)
        .unwrap();
    CatalogueStore {
        catalogue: cat,
        filter: CandidateFilter {
            label: Some("none".into()),
            ..CandidateFilter::default()
        },
        reviewer: "test-reviewer".into(),
        obs_dir: None,
    }
}

fn store_with_four(obs: &Path, t_inf: f64) -> MemoryStore {
    let items = [
        (11, t_inf, report_common::DM, 25.0),
        (12, 2.0, 40.0, 8.0),
        (13, 5.5, 90.0, 7.0),
        (14, 7.0, 10.0, 6.5),
    ]
    .into_iter()
    .map(|(id, t, dm, snr)| ReviewItem {
        id,
        candidate: candidate(obs, t, dm, snr),
        label: None,
        obs_path: None,
    })
    .collect();
    MemoryStore {
        items,
        history: vec![],
    }
}

/// Runs the server on its own thread; the handle returns the store when it stops.
fn start<S: LabelStore + 'static>(store: S) -> (String, Arc<AtomicBool>, thread::JoinHandle<S>) {
    let server = ReviewServer::bind(None).unwrap();
    let url = server.url();
    let stop = Arc::new(AtomicBool::new(false));
    let flag = stop.clone();
    let handle = thread::spawn(move || {
        let mut store = store;
        server.run(&mut store, &flag).unwrap();
        store
    });
    (url, stop, handle)
}

fn chromium() -> Option<PathBuf> {
    let candidates = [
        std::env::var("CHROMIUM").unwrap_or_default(),
        "/usr/bin/chromium".into(),
        "/usr/bin/chromium-browser".into(),
    ];
    candidates
        .into_iter()
        .map(PathBuf::from)
        .find(|p| p.is_file())
}

#[test]
fn keyboard_review_in_headless_chromium_records_labels() {
    let Some(chromium) = chromium() else {
        // CI installs chromium and playwright-core (.ci/run): missing there, a failure.
        assert!(
            std::env::var_os("CI").is_none(),
            "chromium is not installed (Debian packages `chromium`, or set CHROMIUM)"
        );
        eprintln!(
            "\n!!!!!!!! SKIPPED keyboard_review_in_headless_chromium_records_labels: no chromium \
             (install Debian packages `chromium` and `chromium-driver`, or set CHROMIUM) !!!!!!!!\n"
        );
        return;
    };
    let browser_dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/browser");
    if !browser_dir.join("node_modules/playwright-core").is_dir() {
        // On a developer's machine the suite still runs, and says loudly what it skipped.
        assert!(
            std::env::var_os("CI").is_none(),
            "chromium is present but playwright-core is not installed: run `npm ci --prefix tests/browser`"
        );
        eprintln!(
            "\n!!!!!!!! SKIPPED keyboard_review_in_headless_chromium_records_labels: \
             playwright-core not installed (run `npm ci --prefix tests/browser`) !!!!!!!!\n"
        );
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let obs = dir.path().join("review-night.json");
    let t_inf = report_common::write_observation(&obs);
    let mut store = catalogue_with_four(dir.path(), &obs, t_inf);
    // Review order is S/N, highest first: catalogue ids in that order.
    let ids: Vec<i64> = store.items().unwrap().iter().map(|i| i.id).collect();
    assert_eq!(ids.len(), 4);
    let (url, stop, handle) = start(store);

    let out = Command::new("node")
        .arg(browser_dir.join("review.mjs"))
        .arg(&url)
        .arg(&chromium)
        .env("REVIEW_SCREENSHOT", dir.path().join("review.png"))
        .output()
        .expect("node runs");
    stop.store(true, Ordering::Relaxed); // in case the page never sent quit
    let store = handle.join().unwrap();
    assert!(
        out.status.success(),
        "browser script failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    let seen: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(
        seen["ids"],
        serde_json::json!([ids[0], ids[1], ids[2], ids[3], ids[2]]),
        "walked in S/N order; s skipped the third; k went back"
    );
    assert_eq!(
        seen["plotWidths"],
        serde_json::json!([1100, 1100]),
        "figures drawn and shown"
    );
    assert!(
        seen["flashes"][1]
            .as_str()
            .unwrap()
            .contains("with comment")
    );

    // The labels are in the catalogue's history, as the catalogue reports them.
    let cat = store.catalogue;
    let history = |id| cat.label_history(id).unwrap();
    let got: Vec<(String, String, String)> = ids
        .iter()
        .flat_map(|&id| history(id))
        .map(|l| (l.label, l.reviewer, l.comment))
        .collect();
    let r = "test-reviewer".to_string();
    assert_eq!(
        got,
        vec![
            ("astrophysical".into(), r.clone(), String::new()),
            (
                "rfi".into(),
                r.clone(),
                "two peaks, maybe a reflection".into()
            ),
            ("unsure".into(), r, String::new()),
        ]
    );
    assert!(
        history(ids[2]).is_empty(),
        "skipped candidate stays unlabelled"
    );
    let unlabelled = cat
        .candidates(&CandidateFilter {
            label: Some("none".into()),
            ..CandidateFilter::default()
        })
        .unwrap();
    assert_eq!(
        unlabelled.iter().map(|r| r.id).collect::<Vec<_>>(),
        vec![ids[2]]
    );
}

/// Sends one raw HTTP/1.1 request and returns the status code and body.
fn request(url: &str, raw: &str) -> (u16, String) {
    let addr = url.trim_start_matches("http://").trim_end_matches('/');
    let mut s = TcpStream::connect(addr).unwrap();
    s.write_all(raw.replace("{HOST}", addr).as_bytes()).unwrap();
    let mut resp = String::new();
    s.read_to_string(&mut resp).unwrap();
    let code = resp[9..12].parse().unwrap();
    let body = resp.split("\r\n\r\n").nth(1).unwrap_or("").to_string();
    (code, body)
}

#[test]
fn server_refuses_foreign_hosts_and_non_json_posts_and_reports_bad_labels() {
    let dir = tempfile::tempdir().unwrap();
    let obs = dir.path().join("missing.json"); // never written: figures must fail politely
    let (url, stop, handle) = start(store_with_four(&obs, 1.0));
    assert!(url.starts_with("http://127.0.0.1:"));
    let get = |path: &str, host: &str| {
        request(
            &url,
            &format!("GET {path} HTTP/1.1\r\nHost: {host}\r\nConnection: close\r\n\r\n"),
        )
    };
    let post = |ctype: &str, body: &str| {
        request(
            &url,
            &format!(
                "POST /api/label HTTP/1.1\r\nHost: {{HOST}}\r\nContent-Type: {ctype}\r\nContent-Length: {}\r\nConnection: close\r\n\r\n{body}",
                body.len()
            ),
        )
    };
    assert_eq!(get("/", "evil.example:80").0, 403);
    let (code, page) = get("/", "{HOST}");
    assert_eq!(code, 200);
    assert!(
        !page.contains("http://") && !page.contains("https://"),
        "page loads nothing external"
    );
    let (code, items) = get("/api/items", "{HOST}");
    assert_eq!(code, 200);
    assert_eq!(
        serde_json::from_str::<serde_json::Value>(&items)
            .unwrap()
            .as_array()
            .unwrap()
            .len(),
        4
    );
    let (code, msg) = get("/plot/11.png", "{HOST}");
    assert_eq!(code, 404);
    assert!(msg.contains("missing.json"), "{msg}");
    assert_eq!(post("text/plain", r#"{"id":11,"label":"rfi"}"#).0, 415);
    let (code, msg) = post("application/json", r#"{"id":11,"label":"maybe"}"#);
    assert_eq!((code, msg.contains("unknown label")), (400, true), "{msg}");
    let (code, msg) = post("application/json", r#"{"id":99,"label":"rfi"}"#);
    assert_eq!(
        (code, msg.contains("no candidate 99")),
        (500, true),
        "{msg}"
    );
    assert_eq!(
        post(
            "application/json",
            r#"{"id":13,"label":"rfi","comment":"x"}"#
        )
        .0,
        200
    );
    stop.store(true, Ordering::Relaxed);
    let store = handle.join().unwrap();
    assert_eq!(
        store.history,
        vec![(13, ReviewLabel::Interference, "x".to_string())]
    );
}

#[test]
fn review_command_serves_the_catalogue_and_stops_on_quit() {
    use std::io::BufRead;
    let dir = tempfile::tempdir().unwrap();
    let obs = dir.path().join("cli-night.json");
    let t_inf = report_common::write_observation(&obs);
    drop(catalogue_with_four(dir.path(), &obs, t_inf)); // writes review.sqlite
    let mut child = Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(["review", "--catalogue"])
        .arg(dir.path().join("review.sqlite"))
        .stdout(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let mut lines = std::io::BufReader::new(child.stdout.take().unwrap()).lines();
    let first = lines.next().unwrap().unwrap();
    assert!(first.starts_with("4 candidates to review"), "{first}");
    let second = lines.next().unwrap().unwrap();
    let url = second
        .split_whitespace()
        .find(|w| w.starts_with("http://127.0.0.1:"))
        .unwrap_or_else(|| panic!("no URL in {second:?}"))
        .to_string();
    let (code, items) = request(
        &url,
        "GET /api/items HTTP/1.1\r\nHost: {HOST}\r\nConnection: close\r\n\r\n",
    );
    assert_eq!(code, 200);
    assert!(items.contains("cli-night.json"));
    let (code, _) = request(
        &url,
        "POST /api/quit HTTP/1.1\r\nHost: {HOST}\r\nContent-Length: 0\r\nConnection: close\r\n\r\n",
    );
    assert_eq!(code, 200);
    assert!(child.wait().unwrap().success());
    assert_eq!(lines.next().unwrap().unwrap(), "review finished");
}

/// Runs `burstbook review ARGS...`, killing it (and failing) if it is still
/// serving after 30 s: a review with nothing to show used to serve for ever.
fn review_exits(args: &[&std::ffi::OsStr]) -> std::process::Output {
    let mut child = Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .arg("review")
        .args(args)
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let start = std::time::Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > std::time::Duration::from_secs(30) {
            child.kill().unwrap();
            let _ = child.wait();
            panic!("review {args:?} was still running after 30 s");
        }
        thread::sleep(std::time::Duration::from_millis(50));
    }
    child.wait_with_output().unwrap()
}

#[test]
fn review_with_nothing_to_review_or_a_nan_filter_stops_at_once() {
    let dir = tempfile::tempdir().unwrap();
    let obs = dir.path().join("quiet-night.json");
    let t_inf = report_common::write_observation(&obs);
    drop(catalogue_with_four(dir.path(), &obs, t_inf));
    let db = dir.path().join("review.sqlite");
    let arg = std::ffi::OsStr::new;
    // Nothing to show is a finished review: said, and a successful exit.
    let nothing = review_exits(&[
        arg("--catalogue"),
        db.as_os_str(),
        arg("--snr-min"),
        arg("1000"),
    ]);
    cli_common::assert_success(&nothing);
    let said = String::from_utf8_lossy(&nothing.stdout);
    assert!(
        said.contains("review.sqlite: nothing to review (0 candidates match"),
        "{said}"
    );
    // A source the catalogue does not hold is a mistake, not an empty review.
    cli_common::assert_one_line_failure(
        &review_exits(&[
            arg("--catalogue"),
            db.as_os_str(),
            arg("--source"),
            arg("No Such"),
        ]),
        &["has no source named \"No Such\""],
    );
    cli_common::assert_one_line_failure(
        &review_exits(&[
            arg("--catalogue"),
            db.as_os_str(),
            arg("--snr-min"),
            arg("nan"),
        ]),
        &["--snr-min NaN is not a finite number"],
    );
}
