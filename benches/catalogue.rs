//! Catalogue speed: ingest of one million candidates and a filtered query by
//! source and DM range. Run `cargo bench --bench catalogue`; figures go in
//! docs/catalogue.md. Under `cargo test` (no `--bench` argument) it runs a small
//! version once as a smoke test.

use std::time::Instant;

use burstbook::catalogue::{Bounds, CandidateFilter, Catalogue, synthetic};

fn main() {
    let full = std::env::args().any(|a| a == "--bench");
    let (n_sources, runs_per_source, per_run) = if full { (10, 10, 10_000) } else { (2, 2, 500) };
    let dir = tempfile::tempdir().expect("temporary directory");
    let db = dir.path().join("bench.sqlite");
    let mut cat = Catalogue::open(&db).expect("catalogue opens");

    let t = Instant::now();
    let mut total = 0usize;
    for s in 0..n_sources {
        let name = format!("BENCH-{s}");
        for r in 0..runs_per_source {
            let seed = (s * 1000 + r) as u64;
            let obs = synthetic::observation(&name, seed);
            let cands = synthetic::candidates(&obs, per_run, seed);
            cat.record_search(&obs, &synthetic::run(7.0), &cands)
                .expect("recorded");
            total += cands.len();
        }
    }
    let ingest_s = t.elapsed().as_secs_f64();
    println!(
        "ingest: {total} candidates in {} runs of {per_run}: {ingest_s:.2} s ({:.0} candidates/s)",
        n_sources * runs_per_source,
        total as f64 / ingest_s
    );

    let filter = CandidateFilter {
        source: Some("BENCH-3".into()),
        bounds: Bounds {
            dm_min: Some(300.0),
            dm_max: Some(350.0),
            ..Default::default()
        },
        ..Default::default()
    };
    let filter = if full {
        filter
    } else {
        CandidateFilter {
            source: Some("BENCH-1".into()),
            ..filter
        }
    };
    let repeats = if full { 20 } else { 2 };
    let mut times = Vec::new();
    let mut n_rows = 0;
    for _ in 0..repeats {
        let t = Instant::now();
        n_rows = cat.candidates(&filter).expect("query").len();
        times.push(t.elapsed().as_secs_f64() * 1e3);
    }
    times.sort_by(f64::total_cmp);
    // Uniform DMs in 10..1000 put about 50/990 of one source's candidates in range.
    let expected = (runs_per_source * per_run) as f64 * 50.0 / 990.0;
    assert!(
        (n_rows as f64 - expected).abs() < 6.0 * expected.sqrt() + 3.0,
        "{n_rows} rows"
    );
    println!(
        "query source + DM range: {n_rows} rows, median {:.1} ms, min {:.1} ms over {repeats} runs",
        times[repeats / 2],
        times[0]
    );
    let size = std::fs::metadata(&db).map(|m| m.len()).unwrap_or(0);
    println!("file size: {:.1} MB", size as f64 / 1e6);
}
