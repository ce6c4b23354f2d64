//! Time to draw one candidate's diagnostic figure (the target is < 100 ms) on a
//! realistic stretch: 256 channels over 1200–1600 MHz at 64 µs, a 2 ms burst at DM 500.
//! The observation is written to disk and re-read, as `burstbook report` does. Times are
//! on-CPU (this thread), so they mean something on a loaded shared machine.
//! Run with `cargo bench --bench report_render`; writes the figure to
//! `target/report-bench/candidate.png` for inspection.

use std::time::Instant;

use burstbook::candidate::{Candidate, TriageFeatures, Verdict};
use burstbook::dedisperse::channel_delays;
use burstbook::obs::{Container, Header, Site, UtcEpoch};
use burstbook::report::candidate_data::{self, Cut};
use burstbook::report::{Detection, candidate_figure_from_file};
use burstbook::units::delay_to_infinity_s;
use rand::SeedableRng;
use rand_chacha::ChaCha8Rng;
use rand_distr::{Distribution, Normal};

const N_CHAN: usize = 256;
const N_TIME: usize = 50_000;
const TSAMP_S: f64 = 64e-6;
const DM: f64 = 500.0;

fn header() -> Header {
    let bw = 400.0 / N_CHAN as f64;
    let site = Site {
        name: "Bench Dish".into(),
        lon_deg: 0.0,
        lat_deg: 40.0,
        height_m: 0.0,
    };
    Header {
        source: "BENCH-1".into(),
        telescope: site.name.clone(),
        ra_deg: 0.0,
        dec_deg: 0.0,
        site,
        start: UtcEpoch::new(60000, 0.0),
        tsamp_s: TSAMP_S,
        freqs_mhz: (0..N_CHAN)
            .map(|i| 1600.0 - bw * (i as f64 + 0.5))
            .collect(),
        chan_bw_mhz: bw,
        weights: (0..N_CHAN)
            .map(|c| if (100..110).contains(&c) { 0.0 } else { 1.0 })
            .collect(),
        n_samples: N_TIME as u64,
        nbits: 32,
        sefd_jy: None,
        beam: None,
    }
}

fn main() {
    let h = header();
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let noise = Normal::new(0.0f32, 1.0).unwrap();
    let mut data: Vec<f32> = (0..N_TIME * N_CHAN)
        .map(|_| noise.sample(&mut rng))
        .collect();
    let t_top = 30_000;
    for (c, d) in channel_delays(&h.freqs_mhz, DM, TSAMP_S)
        .into_iter()
        .enumerate()
    {
        for t in t_top + d..t_top + d + 31 {
            data[t * N_CHAN + c] += 1.0;
        }
    }
    let t_inf_s = t_top as f64 * TSAMP_S - delay_to_infinity_s(DM, h.freq_hi_mhz());
    let cand = Candidate {
        file: "bench.json".into(),
        t_inf_s,
        mjd_inf: h.start.to_mjd_f64() + t_inf_s / 86_400.0,
        dm: DM,
        dm_lo: 497.0,
        dm_hi: 503.0,
        width_ms: 2.0,
        snr: 40.0,
        cluster_size: 30,
        verdict: Verdict::Astrophysical,
        reasons: vec!["S/N falls off with DM as a dispersed pulse should".into()],
        features: TriageFeatures::default(),
        fluence_jy_ms: Some(1.3),
    };
    let others: Vec<Detection> = (0..30)
        .map(|i| Detection {
            t_s: t_inf_s + (i as f64 - 15.0) * 0.05,
            dm: 10.0 + 30.0 * i as f64,
            snr: 6.0 + (i % 7) as f64,
            verdict: Some(if i % 3 == 0 {
                Verdict::Rfi
            } else {
                Verdict::Unsure
            }),
        })
        .collect();
    // The real path: the observation on disk, re-read by `candidate_figure_from_file`.
    std::fs::create_dir_all("target/report-bench").unwrap();
    let path = std::path::Path::new("target/report-bench/bench.json");
    let mut sink = burstbook::obs::create(path, &h, Container::Native).unwrap();
    sink.write_rows(&data).unwrap();
    sink.finish().unwrap();

    let cut = Cut::new(&h, &cand);
    // `cargo bench` passes --bench; under `cargo test --all-targets` one smoke run.
    let runs = if std::env::args().any(|a| a == "--bench") {
        15
    } else {
        1
    };
    let mut stages = [Vec::new(), Vec::new(), Vec::new(), Vec::new()];
    let mut png = Vec::new();
    for _ in 0..runs {
        let c0 = thread_cpu_ns();
        let read =
            candidate_data::read_for(path, &cand, candidate_data::STRETCH_BUDGET_BYTES).unwrap();
        let input = candidate_data::normalise_for(&h, &read.stretch, &cut).unwrap();
        let c1 = thread_cpu_ns();
        let _curve = candidate_data::dm_curve(&h, &input, &cut);
        let c2 = thread_cpu_ns();
        let t = Instant::now();
        png = candidate_figure_from_file(path, &cand, &others)
            .unwrap()
            .to_png();
        let wall = t.elapsed().as_secs_f64() * 1e3;
        let c3 = thread_cpu_ns();
        let ms = |a: u64, b: u64| (b - a) as f64 / 1e6;
        stages[0].push(ms(c0, c1));
        stages[1].push(ms(c1, c2));
        stages[2].push(ms(c2, c3));
        stages[3].push(wall);
    }
    std::fs::write("target/report-bench/candidate.png", &png).unwrap();
    let median = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let [read, curve, full, wall] = stages.each_mut().map(median);
    println!(
        "candidate figure from file ({N_CHAN} ch, {} rows re-read, {} DM trials), median of {runs}, \
         on-CPU: re-read + normalise {read:.1} ms, S/N-vs-DM {curve:.1} ms, \
         whole figure incl. PNG {full:.1} ms ({} bytes); wall {wall:.1} ms (shared machine)",
        cut.stretch_len,
        candidate_data::N_DM_TRIALS,
        png.len()
    );
}

/// Nanoseconds this thread has spent on a CPU (Linux schedstat), so the figure is
/// meaningful on a loaded shared machine.
fn thread_cpu_ns() -> u64 {
    std::fs::read_to_string("/proc/thread-self/schedstat")
        .ok()
        .and_then(|s| s.split_whitespace().next()?.parse().ok())
        .unwrap_or(0)
}
