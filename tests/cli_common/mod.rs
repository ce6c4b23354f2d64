//! Helpers shared by the end-to-end tests: run the real binary, check how it fails,
//! count what a catalogue holds.
// Each test crate includes this module and uses its own subset of it.
#![allow(dead_code)]

use std::ffi::OsStr;
use std::process::{Command, Output};

/// Runs the built `burstbook` with `args` and waits for it.
pub fn burstbook<S: AsRef<OsStr>>(args: &[S]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_burstbook"))
        .args(args)
        .output()
        .expect("the burstbook binary runs")
}

/// Asserts a successful run, showing its standard error if not.
pub fn assert_success(out: &Output) {
    assert!(
        out.status.success(),
        "exit {:?}: {}",
        out.status,
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Asserts a failed run: non-zero exit and exactly one stderr line, carrying the
/// binary's error prefix and every one of `needles` (the file at fault, the problem).
pub fn assert_one_line_failure(out: &Output, needles: &[&str]) {
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success(), "should fail: {err}");
    assert_eq!(err.trim_end().lines().count(), 1, "not one line: {err}");
    assert!(err.starts_with("burstbook: error: "), "{err}");
    for needle in needles {
        assert!(err.contains(needle), "expected {needle:?} in {err}");
    }
}

/// Rows per table of the catalogue at `db`, SQLite's own tables left out.
pub fn table_counts(db: &std::path::Path) -> Vec<(String, i64)> {
    let c = rusqlite::Connection::open(db).unwrap();
    let tables: Vec<String> = c
        .prepare(
            "SELECT name FROM sqlite_master WHERE type = 'table' AND name NOT LIKE 'sqlite_%'
             ORDER BY name",
        )
        .unwrap()
        .query_map([], |r| r.get(0))
        .unwrap()
        .collect::<Result<_, _>>()
        .unwrap();
    tables
        .into_iter()
        .map(|t| {
            let n = c
                .query_row(&format!("SELECT count(*) FROM {t}"), [], |r| r.get(0))
                .unwrap();
            (t, n)
        })
        .collect()
}
