//! Barycentric conversions per second (plain timer, release build):
//! `cargo bench --bench timing_throughput`. Set `BURSTBOOK_DE421_BSP` to also time
//! the SPK path.

use std::hint::black_box;
use std::time::Instant;

use burstbook::obs::{Site, UtcEpoch};
use burstbook::timing::{Barycentrer, Ephemeris, SpkEphemeris};

/// Times `n` conversions of `utc_of(i)` and prints the rate.
fn rate(label: &str, bary: &Barycentrer, n: usize, utc_of: impl Fn(usize) -> UtcEpoch) {
    let start = Instant::now();
    let mut sum = 0.0;
    for i in 0..n {
        sum += bary.convert(black_box(utc_of(i))).unwrap().correction_s;
    }
    let secs = start.elapsed().as_secs_f64();
    black_box(sum);
    println!(
        "{label}: {n} conversions in {secs:.3} s = {:.0} per second ({:.1} µs each)",
        n as f64 / secs,
        secs / n as f64 * 1e6
    );
}

/// Both regimes: bursts of one 6-hour observation (precession–nutation reused) and
/// times scattered over 50 days of 2024 (recomputed every time).
fn both(label: &str, bary: &Barycentrer) {
    let one_observation = |i: usize| UtcEpoch::new(60_310, 3600.0 + i as f64 * 1.08);
    rate(
        &format!("{label}, one observation"),
        bary,
        20_000,
        one_observation,
    );
    let scattered =
        |i: usize| UtcEpoch::new(60_310 + (i % 50) as i64, (i as f64 * 7.31) % 86_400.0);
    rate(&format!("{label}, scattered dates"), bary, 2_000, scattered);
}

fn main() {
    let site = Site {
        name: "bench".into(),
        lon_deg: 10.0,
        lat_deg: 45.0,
        height_m: 500.0,
    };
    let embedded = Barycentrer::new(&site, 83.6, 22.0, Ephemeris::Embedded).unwrap();
    both("embedded DE421 table", &embedded);
    if let Ok(path) = std::env::var("BURSTBOOK_DE421_BSP") {
        let spk = SpkEphemeris::open(std::path::Path::new(&path)).unwrap();
        let bary = Barycentrer::new(&site, 83.6, 22.0, Ephemeris::Spk(spk)).unwrap();
        both("SPK file", &bary);
    }
}
