//! One-off timing of the candidate-figure load for an event near the end of an
//! hour-long recording: 256 channels, 8 bits, 1 ms samples (3.6 million rows, 0.9 GB
//! per file), written once as a native and once as a FITS file. Times the stretch read
//! (`candidate_data::read_for`) and the whole figure (`candidate_figure_from_file`),
//! wall-clock, median of five after the file was just written (warm page cache).
//! Run with `cargo bench --bench seek_stretch`; the files go to `target/seek-bench/`
//! and are removed afterwards.

use std::path::Path;
use std::time::Instant;

use burstbook::candidate::{Candidate, TriageFeatures, Verdict};
use burstbook::obs::{Container, Header};
use burstbook::report::candidate_data::{self, Cut};
use burstbook::report::candidate_figure_from_file;
use burstbook::simulate::Scenario;

const N_CHAN: usize = 256;
const TSAMP_S: f64 = 1e-3;
const DURATION_S: f64 = 3600.0;
const EVENT_T_S: f64 = 3590.0;
const DM: f64 = 500.0;
const REPEATS: usize = 5;

/// The recording, described as a `burstbook simulate` scenario (only its header is used).
fn header() -> Header {
    let bw_mhz = 400.0 / N_CHAN as f64;
    let scenario = format!(
        "[observation]\nsource = \"BENCH-1\"\ntelescope = \"Bench Dish\"\nra_deg = 0.0\n\
         dec_deg = 0.0\nstart_mjd = 60000.0\nlength_s = {DURATION_S}\ntsamp_s = {TSAMP_S}\n\
         [site]\nname = \"Bench Dish\"\nlon_deg = 0.0\nlat_deg = 40.0\nheight_m = 0.0\n\
         [band]\nfirst_chan_mhz = {}\nchan_step_mhz = {}\nn_chan = {N_CHAN}\n\
         [noise]\nnbits = 8\nmean = 96.0\nsigma = 12.0\n",
        1600.0 - bw_mhz / 2.0,
        -bw_mhz
    );
    Scenario::parse(&scenario).unwrap().header()
}

/// Writes a cheap deterministic pattern (the timing does not depend on the values).
fn write(path: &Path, h: &Header, container: Container) {
    let mut sink = burstbook::obs::create(path, h, container).unwrap();
    let chunk_rows = 4096u64;
    let mut rows = Vec::with_capacity(chunk_rows as usize * N_CHAN);
    let mut t = 0u64;
    while t < h.n_samples {
        let n = chunk_rows.min(h.n_samples - t);
        rows.clear();
        rows.extend((0..n * N_CHAN as u64).map(|i| ((t * 31 + i * 7) % 200 + 20) as f32));
        sink.write_rows(&rows).unwrap();
        t += n;
    }
    sink.finish().unwrap();
}

fn median_s(mut f: impl FnMut()) -> f64 {
    let mut times: Vec<f64> = (0..REPEATS)
        .map(|_| {
            let t0 = Instant::now();
            f();
            t0.elapsed().as_secs_f64()
        })
        .collect();
    times.sort_by(f64::total_cmp);
    times[REPEATS / 2]
}

fn main() {
    let h = header();
    let cand = Candidate {
        file: String::new(),
        t_inf_s: EVENT_T_S,
        mjd_inf: 60000.0 + EVENT_T_S / 86400.0,
        dm: DM,
        dm_lo: DM - 5.0,
        dm_hi: DM + 5.0,
        width_ms: 4.0,
        snr: 12.0,
        cluster_size: 1,
        verdict: Verdict::Astrophysical,
        reasons: Vec::new(),
        features: TriageFeatures {
            snr_dm0_ratio: 0.0,
            dm_curve_misfit: 0.0,
            band_fraction: 1.0,
            modulation_index: 0.0,
        },
        fluence_jy_ms: None,
    };
    let cut = Cut::new(&h, &cand);
    let dir = Path::new("target/seek-bench");
    std::fs::create_dir_all(dir).unwrap();
    println!(
        "{} rows x {N_CHAN} channels, event at {EVENT_T_S} s (stretch of {} rows from row {})",
        h.n_samples, cut.stretch_len, cut.window.start
    );
    for (name, container) in [
        ("obs.json", Container::Native),
        ("obs.fits", Container::Fits),
    ] {
        let path = dir.join(name);
        write(&path, &h, container);
        let read = median_s(|| {
            let budget = candidate_data::STRETCH_BUDGET_BYTES;
            let b = candidate_data::read_for(&path, &cand, budget).unwrap();
            assert!(b.stretch.data.iter().all(|v| v.is_finite()));
        });
        let figure = median_s(|| {
            candidate_figure_from_file(&path, &cand, &[]).unwrap();
        });
        println!(
            "{name}: stretch read {:.1} ms, whole figure {:.1} ms (median of {REPEATS})",
            read * 1e3,
            figure * 1e3
        );
        std::fs::remove_file(&path).unwrap();
        if container == Container::Native {
            std::fs::remove_file(path.with_extension("npy")).unwrap();
        }
    }
}
