//! One trial's matched-filter work as the survey search does it at full resolution
//! (64 µs samples, 1 s baseline, boxcars to 50 ms): normalise a dedispersed series of
//! about 66 000 samples, then run the boxcar search over it with the √2 ladder to
//! 781 samples at threshold 7, for all 19 widths and for the first 3 (most trials
//! test only a prefix of the ladder; about 3.5 widths per sample on average).
//!
//! Run with `cargo bench --bench matched_filter` (release, plain `Instant` timing,
//! one thread). Reports nanoseconds per series sample, the minimum and the median
//! over calls of one row each (the machine is shared: the minimum is the
//! undisturbed cost):
//! - in cache: the same row again and again (a plain copy of a row is timed too,
//!   as a yardstick of memory speed);
//! - out of cache: cycling through rows that together exceed the L3 cache, as the
//!   search reads the dedisperser's output from main memory.

use std::time::Instant;

use burstbook::search::boxcar::{self, Peak, Scratch};
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, StandardNormal};

/// Samples per series: the step-1 length of a 4 s block plus its overlap.
const N: usize = 66_000;
/// 1 s of 64 µs samples.
const BASELINE_LEN: usize = 15_625;
/// Rows cycled through out of cache: 192 × 264 kB = 51 MB, above the 32 MiB L3.
const ROWS: usize = 192;
const THRESHOLD: f32 = 7.0;

/// Gaussian noise over a slow drift, with one weak pulse.
fn row(seed: u64) -> Vec<f32> {
    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let mut row: Vec<f32> = (0..N)
        .map(|t| {
            let noise: f32 = StandardNormal.sample(&mut rng);
            let drift = 3.0 * (t as f32 / 20_000.0).sin() + 1e-5 * t as f32;
            5.0 + drift + 2.0 * noise
        })
        .collect();
    for v in &mut row[30_000..30_040] {
        *v += 3.0;
    }
    row
}

/// What the search does for one trial.
fn trial(row: &[f32], widths: &[usize], work: &mut (Scratch, Vec<Peak>)) {
    let (scratch, peaks) = work;
    peaks.clear();
    boxcar::search_trial(
        row,
        BASELINE_LEN,
        widths,
        THRESHOLD,
        0..row.len(),
        scratch,
        peaks,
    );
}

/// Each call's time of `f`, in ns per sample of `samples`, sorted.
fn ns_per_sample(calls: usize, samples: usize, mut f: impl FnMut(usize)) -> Vec<f64> {
    let mut times: Vec<f64> = (0..calls)
        .map(|i| {
            let start = Instant::now();
            f(i);
            start.elapsed().as_secs_f64() * 1e9 / samples as f64
        })
        .collect();
    times.sort_by(f64::total_cmp);
    times
}

/// "min / median" of sorted times.
fn summary(times: &[f64]) -> String {
    format!("{:.3} / {:.3}", times[0], times[times.len() / 2])
}

fn main() {
    // `cargo test --all-targets` runs bench binaries without `--bench`: stay quick there.
    if !std::env::args().any(|a| a == "--bench") {
        println!("matched_filter benchmark: run with `cargo bench --bench matched_filter`");
        return;
    }
    let ladder = boxcar::width_ladder(781, std::f64::consts::SQRT_2);
    let pristine = row(1);
    let mut work = (Scratch::default(), Vec::new());
    let mut copy = pristine.clone();
    let copy_ns = ns_per_sample(200, N, |_| {
        copy.copy_from_slice(&pristine);
        std::hint::black_box(&mut copy);
    });
    println!("series of {N} samples; ladder {ladder:?}");
    println!(
        "ns per sample, min / median over calls (each call one row); copying a row: {}",
        summary(&copy_ns)
    );
    let rows: Vec<Vec<f32>> = (0..ROWS as u64).map(|s| row(s + 2)).collect();
    for due in [ladder.len(), 3] {
        let widths = &ladder[..due];
        let in_cache = ns_per_sample(300, N, |_| trial(&pristine, widths, &mut work));
        let peaks = work.1.len();
        let out_of_cache = ns_per_sample(3 * ROWS, N, |i| {
            trial(&rows[i % ROWS], widths, &mut work);
        });
        println!(
            "{due:2} widths: in cache {}, out of cache {}; \
             {peaks} peak(s) in the pulsed row",
            summary(&in_cache),
            summary(&out_of_cache)
        );
    }
    let load = std::fs::read_to_string("/proc/loadavg").unwrap_or_default();
    println!("load average during the run: {}", load.trim());
}
