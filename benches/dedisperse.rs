//! Dedispersion throughput on the reference survey setup: 1024 channels over
//! 1200–1600 MHz, 64 µs samples, DM 0–2000 pc cm⁻³ planned at tolerance 1.25.
//!
//! Run with `cargo bench --bench dedisperse` (release). Reports seconds of data
//! dedispersed per second of wall clock for the fast kernel with 2 and 1 rayon
//! threads in the steady state of a search (buffers reused from a first block), and for the reference kernel timed on every 50th trial DM of the same
//! plan and scaled by the trial count (its cost per trial does not depend on the
//! step's downsampling: every trial sums n_chan input samples per input sample).
//! `cargo bench --bench dedisperse -- per-step` adds each plan step's time alone
//! (and skips the reference too).
//! `cargo bench --bench dedisperse -- fast-only` skips the reference, which takes
//! minutes.

use std::time::Instant;

use burstbook::dedisperse::{DmPlan, DmStep, FastDedisperser, PlanRequest, reference};
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

/// CPU seconds (user + system, all threads) this process has used so far, from
/// /proc/self/stat (Linux; clock ticks of 1/100 s). The machine is shared, so wall
/// time alone overstates the cost.
fn cpu_seconds() -> f64 {
    let stat = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let after_name = stat.rsplit(')').next().unwrap_or("");
    let fields: Vec<f64> = after_name
        .split_whitespace()
        .map(|f| f.parse().unwrap_or(0.0))
        .collect();
    // utime and stime are fields 14 and 15 of the line, 12 and 13 after the name.
    (fields.get(11).unwrap_or(&0.0) + fields.get(12).unwrap_or(&0.0)) / 100.0
}

/// Valid output samples per block (4.19 s of data at 64 µs).
const VALID_SAMPLES: usize = 1 << 16;
/// The reference kernel runs on every this-many-th trial.
const REFERENCE_STRIDE: usize = 50;

fn main() {
    // `cargo test --all-targets` runs bench binaries without `--bench`: stay quick there.
    if !std::env::args().any(|a| a == "--bench") {
        println!("dedisperse benchmark: run with `cargo bench --bench dedisperse`");
        return;
    }
    let n_chan = 1024;
    let bw = 400.0 / n_chan as f64;
    let freqs: Vec<f64> = (0..n_chan)
        .map(|i| 1600.0 - bw * (i as f64 + 0.5))
        .collect();
    let tsamp = 64e-6;
    let request = PlanRequest {
        dm_min: 0.0,
        dm_max: 2000.0,
        min_width_s: 0.0,
        tolerance: 1.25,
        max_downsample: 64,
        ..PlanRequest::default()
    };
    let plan = DmPlan::build(&freqs, bw, tsamp, &request).expect("valid survey plan");
    let n_time = plan.max_delay_samples() + VALID_SAMPLES;
    let data_s = VALID_SAMPLES as f64 * tsamp;
    println!(
        "plan: {} trials in {} steps, max delay {} samples; block {} samples ({:.2} s valid)",
        plan.n_trials(),
        plan.steps.len(),
        plan.max_delay_samples(),
        n_time,
        data_s
    );
    let cost = plan.cost();
    println!(
        "model: reference {:.3e} adds/s of data, fast {:.3e} adds/s of data, fast scratch {:.0} MB",
        cost.reference_adds_per_s,
        cost.fast_adds_per_s,
        cost.fast_scratch_bytes / 1e6
    );

    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let input = Array2::from_shape_fn((n_chan, n_time), |_| rng.sample::<f32, _>(StandardNormal));

    let mut fast = FastDedisperser::new(&plan);
    for threads in [2, 1] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("thread pool");
        let runs = if threads == 2 { 2 } else { 1 };
        let (mut best, mut best_cpu) = (f64::INFINITY, f64::INFINITY);
        // Steady state, as in a search: the first block (untimed) faults in the
        // output and scratch, later blocks reuse them (`recycle`).
        let warm_up = pool.install(|| fast.dedisperse(input.view()));
        fast.recycle(warm_up);
        for _ in 0..runs {
            let (start, cpu) = (Instant::now(), cpu_seconds());
            let out = pool.install(|| fast.dedisperse(input.view()));
            best = best.min(start.elapsed().as_secs_f64());
            best_cpu = best_cpu.min(cpu_seconds() - cpu);
            fast.recycle(std::hint::black_box(out));
        }
        println!(
            "fast, {threads} thread(s): {best:.3} s wall per block = {:.2}x real time; \
             {best_cpu:.2} CPU s = {:.2}x real time per core ({:.2e} adds per CPU s)",
            data_s / best,
            data_s / best_cpu,
            cost.fast_adds_per_s * data_s / best_cpu
        );
    }

    if std::env::args().any(|a| a == "per-step") {
        // Each step as a plan of its own (its halvings of the block included), two
        // threads, best of two blocks after one untimed.
        for (i, step) in plan.steps.iter().enumerate() {
            let one = DmPlan {
                steps: vec![step.clone()],
                ..plan.clone()
            };
            let mut kernel = FastDedisperser::new(&one);
            let warm_up = kernel.dedisperse(input.view());
            kernel.recycle(warm_up);
            let (mut best, mut best_cpu) = (f64::INFINITY, f64::INFINITY);
            for _ in 0..2 {
                let (start, cpu) = (Instant::now(), cpu_seconds());
                let out = kernel.dedisperse(input.view());
                best = best.min(start.elapsed().as_secs_f64());
                best_cpu = best_cpu.min(cpu_seconds() - cpu);
                kernel.recycle(std::hint::black_box(out));
            }
            println!(
                "step {i} (DM {:.1}-{:.1}, {} trials, downsample {}): {best:.3} s wall, \
                 {best_cpu:.2} CPU s per block; model {:.2e} adds per s of data",
                step.dms[0],
                step.dms[step.dms.len() - 1],
                step.dms.len(),
                step.downsample,
                one.cost().fast_adds_per_s
            );
        }
    }

    if std::env::args().any(|a| a.ends_with("-only") || a == "per-step") {
        return;
    }
    let subset = DmPlan {
        steps: plan
            .steps
            .iter()
            .map(|s| DmStep {
                dms: s.dms.iter().copied().step_by(REFERENCE_STRIDE).collect(),
                downsample: s.downsample,
            })
            .collect(),
        ..plan.clone()
    };
    let (start, cpu) = (Instant::now(), cpu_seconds());
    std::hint::black_box(reference::dedisperse(input.view(), &subset));
    let elapsed = start.elapsed().as_secs_f64();
    let cpu = cpu_seconds() - cpu;
    let scale = plan.n_trials() as f64 / subset.n_trials() as f64;
    println!(
        "reference (1 thread): {elapsed:.2} s wall, {cpu:.2} CPU s for {} trials; scaled to {} \
         trials: {:.1} CPU s per block = {:.4}x real time per core",
        subset.n_trials(),
        plan.n_trials(),
        cpu * scale,
        data_s / (cpu * scale)
    );
    let load = std::fs::read_to_string("/proc/loadavg").unwrap_or_default();
    println!("load average during the run: {}", load.trim());
}
