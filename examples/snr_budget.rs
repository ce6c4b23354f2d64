//! Where does a narrow burst's S/N go? Noise-free attribution of the search's S/N
//! losses against the simulator's expected S/N (`simulate::expected_snr`).
//!
//! Each burst is built with the simulator's signal model on a noise-free block of the
//! measurement band (256 channels, 1200–1600 MHz, 256 µs, as
//! `scripts/measure-inject.sh`), dedispersed, and boxcar-filtered with the noise level
//! known exactly (every output sample of a step sums `downsample` unit-variance
//! samples of each of N channels, so a w-sample boxcar has σ = √(N·ds·w)). Without
//! noise the ratio reported/expected is deterministic, so each loss can be switched on
//! one at a time:
//!
//! * `round`  exact trial DM, full resolution, reference kernel, every width and start:
//!   only the rounding of per-channel delays to whole samples;
//! * `ds`     + the planner's downsampling at that DM;
//! * `ladder` + the search's √2 width ladder;
//! * `grid`   + the planner's trial DMs (best of the trials near the burst);
//! * `fast`   + the fast kernel: the search without noise;
//! * `os4`    the fast kernel with its trees at a quarter of the output sample
//!   (a half-downsampled run summed in pairs);
//! * `2ph`    `os4` plus a second boxcar pass offset by half a coarse sample;
//! * `ref/2`  the reference kernel at half the planner's downsampling;
//! * `ds/2`   the fast kernel at half the planner's downsampling;
//! * `ds/2os4` the same with its trees at a quarter of the output sample.
//!
//! ```text
//! cargo run --release --example snr_budget -- [COUNT] [SEED] [DM_LO:DM_HI] [W_LO:W_HI_MS] [SMEARING_FRACTION]
//! ```

use std::f64::consts::SQRT_2;

use burstbook::dedisperse::bf16::to_bf16;
use burstbook::dedisperse::{self, DmPlan, DmStep, Kernel, PlanRequest};
use burstbook::obs::{Block, Header};
use burstbook::search::boxcar::width_ladder;
use burstbook::simulate::{Burst, Scenario, Spectrum, add_burst, expected_snr};
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;

const TSAMP_S: f64 = 256e-6;
const N_CHAN: usize = 256;
const MAX_WIDTH_S: f64 = 0.1;
/// Samples of output kept after the burst's arrival at the top of the band.
const TAIL: usize = 4096;
/// Samples before it.
const LEAD: usize = 512;

fn header() -> Header {
    let text = format!(
        "[observation]\nsource = \"Quiet Meadow\"\ntelescope = \"Measuring Dish\"\n\
         ra_deg = 200.0\ndec_deg = -20.0\nstart_mjd = 61300.0\nlength_s = 10.0\n\
         tsamp_s = {TSAMP_S}\n[site]\nname = \"Measuring Dish\"\nlon_deg = 15.0\n\
         lat_deg = -30.0\nheight_m = 500.0\n[band]\nfirst_chan_mhz = 1599.21875\n\
         chan_step_mhz = -1.5625\nn_chan = {N_CHAN}\n[noise]\nnbits = 32\nmean = 0.0\n\
         sigma = 1.0\n"
    );
    Scenario::parse(&text).expect("built-in scenario").header()
}

/// Best boxcar S/N over every row of every step: widths from `widths(ds)`, all starts.
fn best_snr(outs: &[dedisperse::Dedispersed], widths: &dyn Fn(usize) -> Vec<usize>) -> f64 {
    let mut best = f64::NEG_INFINITY;
    for step in outs {
        let ws = widths(step.downsample);
        for d in 0..step.dms.len() {
            let row = step.row_f32(d);
            let mut prefix = vec![0.0f64];
            for &v in &row {
                prefix.push(prefix.last().unwrap() + f64::from(v));
            }
            for &w in &ws {
                let norm = ((N_CHAN * step.downsample * w) as f64).sqrt();
                for t in 0..row.len().saturating_sub(w - 1) {
                    best = best.max((prefix[t + w] - prefix[t]) / norm);
                }
            }
        }
    }
    best
}

/// Rows of a finer plan summed in pairs, at phase 0 only or at both phases (a second
/// boxcar pass half a coarse sample later).
fn paired(outs: &[dedisperse::Dedispersed], both: bool) -> Vec<dedisperse::Dedispersed> {
    outs.iter()
        .flat_map(|s| {
            let phases = 2;
            (0..if both { 2 } else { 1 }).map(move |p| {
                let n_time = (s.n_time - p) / phases;
                let mut data = Vec::with_capacity(s.dms.len() * n_time);
                for d in 0..s.dms.len() {
                    let row = s.row_f32(d);
                    data.extend(
                        (0..n_time).map(|t| {
                            to_bf16(row[p + phases * t..p + phases * (t + 1)].iter().sum())
                        }),
                    );
                }
                dedisperse::Dedispersed {
                    dms: s.dms.clone(),
                    downsample: s.downsample * phases,
                    n_time,
                    row_lens: vec![n_time; s.dms.len()],
                    data,
                }
            })
        })
        .collect()
}

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let count: usize = args.first().map_or(60, |s| s.parse().expect("COUNT"));
    let seed: u64 = args.get(1).map_or(1, |s| s.parse().expect("SEED"));
    let range = |i: usize, default: (f64, f64)| {
        args.get(i).map_or(default, |s| {
            let (a, b) = s.split_once(':').expect("LO:HI");
            (a.parse().expect("LO"), b.parse().expect("HI"))
        })
    };
    let (dm_lo, dm_hi) = range(2, (500.0, 2000.0));
    let (w_lo, w_hi) = range(3, (0.1, 2.0));
    let request = PlanRequest {
        smearing_fraction: args
            .get(4)
            .map_or(PlanRequest::default().smearing_fraction, |s| {
                s.parse().expect("SMEARING_FRACTION")
            }),
        ..PlanRequest::default()
    };

    let h = header();
    let full = DmPlan::build(&h.freqs_mhz, h.chan_bw_mhz, h.tsamp_s, &request).expect("plan");
    let trials: Vec<(f64, usize)> = full.trials().collect();
    let max_width = (MAX_WIDTH_S / TSAMP_S).floor() as usize;
    let ladder = |ds: usize| width_ladder((max_width / ds).max(1), SQRT_2);
    let every = |ds: usize| (1..=(128 / ds).max(4)).collect::<Vec<_>>();
    let plan_of = |dms: &[(f64, usize)]| DmPlan {
        freqs_mhz: h.freqs_mhz.clone(),
        chan_bw_mhz: h.chan_bw_mhz,
        tsamp_s: h.tsamp_s,
        steps: dms
            .iter()
            .map(|&(dm, ds)| DmStep {
                dms: vec![dm],
                downsample: ds,
            })
            .collect(),
    };

    let mut rng = ChaCha8Rng::seed_from_u64(seed);
    let names = [
        "round", "ds", "ladder", "grid", "fast", "os4", "2ph", "ref/2", "ds/2", "ds/2os4",
    ];
    println!(
        "{:>7} {:>6} {:>3} {}",
        "DM",
        "W ms",
        "ds",
        names.map(|n| format!("{n:>8}")).join("")
    );
    let mut rows: Vec<(f64, f64, Vec<f64>)> = Vec::new();
    for _ in 0..count {
        let dm = rng.random_range(dm_lo..dm_hi);
        let width_s = 1e-3 * (w_lo * (w_hi / w_lo).powf(rng.random::<f64>()));
        let phase: f64 = rng.random();
        let nearest = trials
            .iter()
            .enumerate()
            .min_by(|a, b| (a.1.0 - dm).abs().total_cmp(&(b.1.0 - dm).abs()))
            .map(|(i, _)| i)
            .unwrap();
        let near = &trials[nearest.saturating_sub(2)..(nearest + 3).min(trials.len())];
        let ds = trials[nearest].1;
        let top_delay = burstbook::units::delay_to_infinity_s(dm, h.freq_hi_mhz() + 0.78125);
        let burst = Burst {
            t_inf_s: (LEAD as f64 + phase) * TSAMP_S - top_delay,
            dm,
            width_s,
            scatter_1ghz_s: 0.0,
            spectrum: Spectrum::PowerLaw { index: 0.0 },
            amplitude: 1.0,
        };
        let expected = expected_snr(&h, &burst);
        let max_delay = plan_of(near).max_delay_samples();
        let n_time = LEAD + TAIL + max_delay;
        let mut block = Block {
            start_sample: 0,
            overlap: 0,
            n_chan: N_CHAN,
            data: vec![0.0; n_time * N_CHAN],
        };
        add_burst(&mut block, &h, &burst, &vec![1.0; N_CHAN]);
        let input: Array2<f32> = block.view().t().to_owned();
        let run = |dms: &[(f64, usize)], kernel: Kernel| {
            dedisperse::dedisperse(input.view(), &plan_of(dms), kernel)
        };
        let scaled = |div: usize| -> Vec<(f64, usize)> {
            near.iter().map(|&(d, n)| (d, (n / div).max(1))).collect()
        };
        let fast = run(near, Kernel::Fast);
        let half = run(&scaled(2), Kernel::Fast);
        let quarter = run(&scaled(4), Kernel::Fast);
        let ratios = [
            best_snr(&run(&[(dm, 1)], Kernel::Reference), &every),
            best_snr(&run(&[(dm, ds)], Kernel::Reference), &every),
            best_snr(&run(&[(dm, ds)], Kernel::Reference), &ladder),
            best_snr(&run(near, Kernel::Reference), &ladder),
            best_snr(&fast, &ladder),
            best_snr(&paired(&half, false), &ladder),
            best_snr(&paired(&half, true), &ladder),
            best_snr(&run(&scaled(2), Kernel::Reference), &ladder),
            best_snr(&half, &ladder),
            best_snr(&paired(&quarter, false), &ladder),
        ]
        .map(|s| s / expected);
        println!(
            "{dm:7.1} {:6.3} {ds:3} {}",
            width_s * 1e3,
            ratios.map(|r| format!("{r:8.3}")).join("")
        );
        rows.push((dm, width_s * 1e3, ratios.to_vec()));
    }
    let median = |mut v: Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    println!("\nmedian ratio reported/expected (noise-free)");
    println!(
        "{:>18} {:>4} {}",
        "bin",
        "n",
        names.map(|n| format!("{n:>8}")).join("")
    );
    // (label, DM range, width range in ms): everything, three DM thirds, two widths.
    let third = (dm_hi - dm_lo) / 3.0;
    let w_mid = (w_lo * w_hi).sqrt();
    let mut bins = vec![("all".to_string(), dm_lo, dm_hi, w_lo, w_hi)];
    for k in 0..3 {
        let (a, b) = (dm_lo + k as f64 * third, dm_lo + (k + 1) as f64 * third);
        bins.push((format!("DM {a:.0}-{b:.0}"), a, b, w_lo, w_hi));
    }
    bins.push((format!("W {w_lo}-{w_mid:.2} ms"), dm_lo, dm_hi, w_lo, w_mid));
    bins.push((format!("W {w_mid:.2}-{w_hi} ms"), dm_lo, dm_hi, w_mid, w_hi));
    for (label, d0, d1, w0, w1) in &bins {
        let chosen: Vec<&Vec<f64>> = rows
            .iter()
            .filter(|r| (*d0..=*d1).contains(&r.0) && (*w0..=*w1).contains(&r.1))
            .map(|r| &r.2)
            .collect();
        if chosen.is_empty() {
            continue;
        }
        let meds: Vec<String> = (0..names.len())
            .map(|k| format!("{:8.3}", median(chosen.iter().map(|r| r[k]).collect())))
            .collect();
        println!("{label:>18} {:4} {}", chosen.len(), meds.join(""));
    }
}
