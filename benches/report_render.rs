//! Time to draw one candidate's diagnostic figure (the target is < 100 ms) on a
//! realistic stretch: 256 channels over 1200–1600 MHz at 64 µs, a 2 ms burst at DM 500.
//! Run with `cargo bench --bench report_render`; writes the figure to
//! `target/report-bench/candidate.png` for inspection.

use std::time::Instant;

use burstbook::candidate::{Candidate, TriageFeatures, Verdict};
use burstbook::dedisperse::channel_delays;
use burstbook::obs::{Header, MemorySource, Site, UtcEpoch};
use burstbook::report::candidate_data::{self, Cut};
use burstbook::report::stretch::read_stretch;
use burstbook::report::{Detection, candidate_figure};
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
    let cut = Cut::new(&h, &cand);
    let runs = 15;
    let (mut read_ms, mut curve_ms, mut draw_ms) = (Vec::new(), Vec::new(), Vec::new());
    let mut png_len = 0;
    let mut cpu_ns = 0;
    for _ in 0..runs {
        let src = MemorySource::new(h.clone(), data.clone());
        let (t1, c1) = (Instant::now(), thread_cpu_ns());
        let stretch = read_stretch(src, cut.window.start as u64, cut.stretch_len).unwrap();
        let input = candidate_data::normalise_for(&h, &stretch, &cut).unwrap();
        let t2 = Instant::now();
        let curve = candidate_data::dm_curve(&h, &input, &cut);
        let t3 = Instant::now();
        let fig = candidate_figure(&h, &stretch, &cand, Some(&curve), &others).unwrap();
        let png = fig.to_png();
        let t4 = Instant::now();
        cpu_ns += thread_cpu_ns() - c1;
        png_len = png.len();
        read_ms.push((t2 - t1).as_secs_f64() * 1e3);
        curve_ms.push((t3 - t2).as_secs_f64() * 1e3);
        draw_ms.push((t4 - t3).as_secs_f64() * 1e3);
        if read_ms.len() == runs {
            std::fs::create_dir_all("target/report-bench").unwrap();
            std::fs::write("target/report-bench/candidate.png", &png).unwrap();
        }
    }
    let cpu_ms = cpu_ns as f64 / 1e6 / runs as f64;
    let median = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let (r, c, d) = (
        median(&mut read_ms),
        median(&mut curve_ms),
        median(&mut draw_ms),
    );
    println!(
        "candidate figure ({N_CHAN} ch, {} rows stretch, {} DM trials): read+normalise {r:.1} ms, \
         S/N-vs-DM {c:.1} ms, draw+PNG {d:.1} ms ({png_len} bytes), total {:.1} ms (median of {runs})",
        cut.stretch_len,
        candidate_data::N_DM_TRIALS,
        r + c + d
    );
    println!(
        "mean on-CPU time per figure (this thread, excludes waiting for a core): {cpu_ms:.1} ms"
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
