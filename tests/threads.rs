//! `--threads N`: the number of worker threads changes how work is split, never the
//! results. Each command that works in parallel is run with one thread and with
//! more threads than this machine may have cores, and its outputs are compared
//! byte for byte.

mod cli_common;
use cli_common::{assert_one_line_failure, assert_success, burstbook};

use std::path::{Path, PathBuf};

const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn demo(rel: &str) -> String {
    format!("{ROOT}/demo-data/{rel}")
}

/// Runs `args` with `--threads n` and returns its standard output.
fn run_with(n: u16, args: &[&str]) -> String {
    let n = n.to_string();
    let out = burstbook(&[&["--threads", &n][..], args].concat());
    assert_success(&out);
    String::from_utf8(out.stdout).unwrap()
}

fn read(path: &Path) -> String {
    std::fs::read_to_string(path).unwrap_or_else(|e| panic!("{}: {e}", path.display()))
}

#[test]
fn search_candidates_do_not_depend_on_the_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let outputs: Vec<PathBuf> = [1u16, 5]
        .iter()
        .map(|&n| {
            let out = dir.path().join(format!("out{n}"));
            run_with(
                n,
                &[
                    "search",
                    &demo("demo.json"),
                    "--out",
                    out.to_str().unwrap(),
                    "--no-catalogue",
                ],
            );
            out
        })
        .collect();
    let (one, five) = (&outputs[0], &outputs[1]);
    let csv = read(&one.join("candidates.csv"));
    assert!(
        csv.lines().count() > 8,
        "the demo's eight bursts and more: {csv}"
    );
    assert_eq!(csv, read(&five.join("candidates.csv")));
    // The JSON also records wall-clock times; its candidates must be identical.
    let candidates = |dir: &Path| {
        let json: serde_json::Value = serde_json::from_str(&read(&dir.join("candidates.json")))
            .expect("candidates.json parses");
        json["candidates"].clone()
    };
    assert_eq!(candidates(one), candidates(five));
}

#[test]
fn period_significances_do_not_depend_on_the_thread_count() {
    let rotation = [
        "period",
        "rotation",
        "--toas",
        &demo("period/rotator_toas.csv"),
        "--min-period-s",
        "0.3",
        "--max-period-s",
        "0.6",
        "--sims",
        "19",
        "--json",
    ];
    let activity = [
        "period",
        "activity",
        "--toas",
        &demo("period/repeater_bursts.csv"),
        "--exposure",
        &demo("period/repeater_exposure.csv"),
        "--sims",
        "19",
        "--json",
    ];
    for args in [&rotation[..], &activity[..]] {
        let one = run_with(1, args);
        assert!(one.contains("fap"), "{one}");
        assert_eq!(one, run_with(5, args), "{args:?}");
    }
}

#[test]
fn injection_results_do_not_depend_on_the_thread_count() {
    // Four threads let two passes run side by side (one per two threads); one thread
    // runs them one at a time.
    let dir = tempfile::tempdir().unwrap();
    let csvs: Vec<String> = [1u16, 4]
        .iter()
        .map(|&n| {
            let out = dir.path().join(format!("inj{n}"));
            run_with(
                n,
                &[
                    "inject",
                    &demo("demo.json"),
                    "--count",
                    "40",
                    "--seed",
                    "5",
                    "--out",
                    out.to_str().unwrap(),
                    "--no-catalogue",
                ],
            );
            read(&out.join("injections.csv"))
        })
        .collect();
    assert_eq!(
        csvs[0].lines().count(),
        41,
        "a header and 40 bursts: {}",
        csvs[0]
    );
    assert_eq!(csvs[0], csvs[1]);
}

#[test]
fn zero_threads_is_refused_in_one_line() {
    let out = burstbook(&["--threads", "0", "plan", &demo("demo.json")]);
    assert_one_line_failure(&out, &["--threads", "0"]);
}
