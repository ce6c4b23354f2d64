//! A reader that stops early (`burstbook ... | head`) must not turn into an error
//! message or a panic (common practice for command-line tools).

mod cli_common;
use cli_common::assert_success;

mod common;

use std::io::{BufRead, BufReader};
use std::process::{Command, Stdio};

use burstbook::obs::{self, Container};

/// Runs `command`, reads the first line of its output and closes the pipe, as
/// `head -1` would; asserts that it still exits successfully and quietly, and
/// returns that line.
fn first_line_then_close(command: &mut Command) -> String {
    let mut child = command
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("burstbook runs");
    let mut first = String::new();
    BufReader::new(child.stdout.take().expect("stdout piped"))
        .read_line(&mut first)
        .expect("one line");
    let out = child.wait_with_output().expect("burstbook exits");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(out.status.success(), "exit {:?}: {stderr}", out.status);
    assert!(!stderr.contains("panicked"), "{stderr}");
    assert!(!stderr.contains("error"), "{stderr}");
    first
}

#[test]
fn closing_stdout_early_is_quiet_and_successful() {
    // Far more output than a pipe buffers, so the writer really meets a closed pipe.
    let dir = tempfile::tempdir().unwrap();
    let input = dir.path().join("times.csv");
    let rows: String = (0..40_000)
        .map(|i| format!("{}\n", 60000.0 + f64::from(i) * 1e-3))
        .collect();
    std::fs::write(&input, format!("mjd_utc\n{rows}")).unwrap();
    let first = first_line_then_close(
        Command::new(env!("CARGO_BIN_EXE_burstbook"))
            .args(["barycentre", "--ra-deg", "10", "--dec-deg", "20"])
            .args(["--site", "10,45,100", "--out", "/dev/stdout"])
            .arg("--in")
            .arg(&input),
    );
    assert!(!first.is_empty());
}

// The same for a catalogue listing written by the library (`book exposure export`).
#[test]
fn exposure_export_to_a_closed_pipe_is_quiet() {
    let dir = tempfile::tempdir().unwrap();
    let catalogue = dir.path().join("c.sqlite");
    let input = dir.path().join("exposure.csv");
    let rows: String = (0..20_000)
        .map(|i| {
            let start = 61000.0 + f64::from(i) * 0.01;
            format!("Made-Up Source 9,{start},{},7\n", start + 0.005)
        })
        .collect();
    std::fs::write(
        &input,
        format!("source,start_mjd,end_mjd,snr_threshold\n{rows}"),
    )
    .unwrap();
    let book = |args: &[&str]| {
        let mut c = Command::new(env!("CARGO_BIN_EXE_burstbook"));
        c.arg("book").arg("--catalogue").arg(&catalogue).args(args);
        c
    };
    let add = [
        "source",
        "add",
        "Made-Up Source 9",
        "--ra",
        "45",
        "--dec",
        "12.5",
    ];
    assert!(book(&add).output().unwrap().status.success());
    let import = book(&["exposure", "import"]).arg(&input).output().unwrap();
    assert_success(&import);
    let first = first_line_then_close(&mut book(&["exposure", "export"]));
    assert!(first.starts_with("source,"), "{first}");
}

// A search whose terminal is closed early still finishes its work: every file is
// searched and the outputs are written (before, the next line printed panicked).
#[test]
fn a_search_whose_reader_has_gone_still_writes_its_outputs() {
    let dir = tempfile::tempdir().unwrap();
    let mut files = Vec::new();
    // Several files, so that lines are still printed long after the pipe closed.
    for seed in 0..4 {
        let h = common::header(32, 6000, 1e-3);
        let path = dir.path().join(format!("scan{seed}.json"));
        let mut sink = obs::create(&path, &h, Container::Native).unwrap();
        sink.write_rows(&common::noise(&h, seed)).unwrap();
        sink.finish().unwrap();
        files.push(path);
    }
    let out = dir.path().join("out");
    let first = first_line_then_close(
        Command::new(env!("CARGO_BIN_EXE_burstbook"))
            .args(["search", "--no-catalogue", "--dm-max", "300", "--out"])
            .arg(&out)
            .args(&files),
    );
    assert!(first.contains("scan0.json"), "{first}");
    let csv = std::fs::read_to_string(out.join("candidates.csv")).unwrap();
    assert!(csv.starts_with("file,"), "{csv}");
    assert!(out.join("candidates.json").exists());
}

// A closed standard error (the reader of `2>&1 | head` gone) drops the closing note
// instead of panicking; the work is done and the exit is clean.
#[test]
fn a_closed_standard_error_drops_the_note() {
    let dir = tempfile::tempdir().unwrap();
    let (input, output) = (dir.path().join("times.csv"), dir.path().join("tdb.csv"));
    let rows: String = (0..20_000)
        .map(|i| format!("{}\n", 60000.0 + f64::from(i) * 1e-3))
        .collect();
    std::fs::write(&input, format!("mjd_utc\n{rows}")).unwrap();
    let mut child = Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(["barycentre", "--ra-deg", "10", "--dec-deg", "20"])
        .args(["--site", "10,45,100", "--in"])
        .arg(&input)
        .arg("--out")
        .arg(&output)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("burstbook runs");
    // Close the read end now, long before the 20 000 rows are converted.
    drop(child.stderr.take());
    let status = child.wait().expect("burstbook exits");
    assert!(status.success(), "exit {status:?}");
    let written = std::fs::read_to_string(&output).unwrap();
    assert_eq!(written.lines().count(), 20_001);
}
