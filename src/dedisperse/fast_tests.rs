//! The fast kernel against the reference kernel and the tree's own traced paths.

use super::*;
use crate::dedisperse::subband::{SUBBAND_CHANNELS, tree_downsample};
use crate::dedisperse::{DmStep, PlanRequest, reference};
use crate::isa::Isa;
use crate::units::{channel_smearing_s, delay_between_s};
use ndarray::Array2;
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use rand_distr::StandardNormal;

/// Channel centres over `lo..hi` MHz, descending unless `ascending`.
fn band(n_chan: usize, lo: f64, hi: f64, ascending: bool) -> (Vec<f64>, f64) {
    let bw = (hi - lo) / n_chan as f64;
    let mut f: Vec<f64> = (0..n_chan).map(|i| hi - bw * (i as f64 + 0.5)).collect();
    if ascending {
        f.reverse();
    }
    (f, bw)
}

/// The most the kernel's number formats can move an output whose paths sum the
/// absolute input values to `magnitude` ([`sum_along`] of `|input|`) when its tree
/// values carry at most `fixed` of fixed-point error in all ([`fixed_error`]): the
/// stage-1 rows and the output are each rounded to bfloat16 with relative error
/// ≤ 2⁻⁸, and each is at most the sum of the absolute values it adds up.
fn stored_bound(magnitude: f32, fixed: f32) -> f32 {
    (magnitude + fixed) * 2.0 * 2f32.powi(-8) * 1.01 + fixed
}

/// The most the 16-bit tiles' rounding can move one output of a step at `tree_ds`
/// that sums `per_out` tree samples of each of `n_chan` channels: half a quantum per
/// value, a quantum being at most the largest tree-sample magnitude (`tree_ds` input
/// samples of at most `peak`) over the fixed-point limit of a full sub-band.
fn fixed_error(n_chan: usize, tree_ds: usize, per_out: usize, peak: f32) -> f32 {
    let limit = (32767 / n_chan.min(SUBBAND_CHANNELS)) as f32;
    (n_chan * per_out) as f32 * 0.5 * tree_ds as f32 * peak / limit
}

fn peak(input: &Array2<f32>) -> f32 {
    input.iter().fold(0.0, |m, x| m.max(x.abs()))
}

fn noise(n_chan: usize, n_time: usize, rng: &mut ChaCha8Rng) -> Array2<f32> {
    Array2::from_shape_fn((n_chan, n_time), |_| rng.sample::<f32, _>(StandardNormal))
}

/// Output `t` sums, for every channel, the `per_out` tree samples (each `tree_ds`
/// input samples) from tree sample `t·per_out + delay_c`.
fn sum_along(
    input: &Array2<f32>,
    delays: &[usize],
    tree_ds: usize,
    per_out: usize,
    n_out: usize,
) -> Vec<f32> {
    (0..n_out)
        .map(|t| {
            delays
                .iter()
                .enumerate()
                .map(|(c, &d)| {
                    let start = (t * per_out + d) * tree_ds;
                    (start..start + per_out * tree_ds)
                        .map(|i| input[[c, i]])
                        .sum::<f32>()
                })
                .sum()
        })
        .collect()
}

fn correlation(a: &[f32], b: &[f32]) -> f64 {
    let mean = |x: &[f32]| x.iter().map(|&v| v as f64).sum::<f64>() / x.len() as f64;
    let (ma, mb) = (mean(a), mean(b));
    let (mut ab, mut aa, mut bb) = (0.0, 0.0, 0.0);
    for (&x, &y) in a.iter().zip(b) {
        let (x, y) = (x as f64 - ma, y as f64 - mb);
        ab += x * y;
        aa += x * x;
        bb += y * y;
    }
    ab / (aa * bb).sqrt()
}

/// A plan with four steps (full, 2×, 4× and 8× downsampled) starting above DM 0.
fn awkward_plan(freqs: Vec<f64>, bw: f64, tsamp: f64, dm_lo: f64, dm_hi: f64) -> DmPlan {
    let quarter = (dm_hi - dm_lo) / 4.0;
    let steps = (0..4)
        .map(|s| DmStep {
            dms: (0..7)
                .map(|k| dm_lo + quarter * (s as f64 + k as f64 / 7.0))
                .collect(),
            downsample: 1 << s,
        })
        .collect();
    DmPlan {
        freqs_mhz: freqs,
        chan_bw_mhz: bw,
        tsamp_s: tsamp,
        steps,
    }
}

// Seeded random inputs with awkward shapes: prime channel counts, one channel, short
// blocks, ascending and descending bands, masked (zeroed) channels, DMs above 0 and
// downsampled steps (×2, ×4, ×8: the block is halved in time up to twice). The fast
// kernel must equal an explicit sum along the paths it traces (exact up to f32
// summation order); those paths must stay close to the ideal per-channel delays (the
// tree's rounding accumulates over its levels: rms ≤ 0.6, worst ≤ 2.5 tree samples,
// against 0.29 and 0.5 for the reference's independent rounding); and each row must
// correlate with the reference row at the same DM.
#[test]
fn fast_kernel_matches_its_paths_and_tracks_the_reference() {
    let mut rng = ChaCha8Rng::seed_from_u64(20_170_111);
    let cases = [
        (1, false, 40),
        (2, true, 33),
        (7, false, 300),
        (13, true, 517),
        (31, false, 1000),
        (64, true, 777),
        (97, false, 2100),
    ];
    let (mut sq, mut n, mut worst) = (0.0, 0usize, 0.0f64);
    let mut further = 0;
    for (n_chan, ascending, extra) in cases {
        let (freqs, bw) = band(n_chan, 1200.0, 1600.0, ascending);
        let tsamp = 1e-3;
        let plan = awkward_plan(freqs.clone(), bw, tsamp, 11.0, 400.0);
        let n_time = plan.max_delay_samples() + extra;
        let mut input = noise(n_chan, n_time, &mut rng);
        if n_chan > 2 {
            input.row_mut(n_chan / 3).fill(0.0);
        }
        let mut fast = FastDedisperser::new(&plan);
        // Both extents: with `PerTrial` each trial runs to the end of the input
        // along its own path (`sum_along` would panic past it), about as far as the
        // reference's exactly rounded delays allow.
        for extent in [Extent::Common, Extent::PerTrial] {
            let rows = input.as_slice().expect("contiguous");
            let got = fast.dedisperse_rows(rows, n_time, n_time, extent);
            let want = reference::dedisperse_over(input.view(), &plan, extent);
            let common = plan.valid_samples(0.0, plan.steps[0].downsample, n_time, Extent::Common);
            if extent == Extent::PerTrial && got[0].row_lens[0] > common {
                further += 1;
            }
            let f_top = freqs.iter().copied().fold(f64::MIN, f64::max);
            for (s, (g, w)) in got.iter().zip(&want).enumerate() {
                assert_eq!((&g.dms, g.downsample), (&w.dms, w.downsample));
                if extent == Extent::Common {
                    assert_eq!((g.n_time, &g.row_lens), (w.n_time, &w.row_lens));
                }
                let tree_ds = tree_downsample(g.downsample);
                for (k, &dm) in g.dms.iter().enumerate() {
                    let delays = fast.steps[s].path_delays(k, n_chan);
                    for (c, &d) in delays.iter().enumerate() {
                        let ideal = delay_between_s(dm, freqs[c], f_top) / (tsamp * tree_ds as f64);
                        let e = d as f64 - ideal;
                        (sq, n, worst) = (sq + e * e, n + 1, worst.max(e.abs()));
                    }
                    let per_out = g.downsample / tree_ds;
                    let (row, want_row) = (g.row_f32(k), w.row_f32(k));
                    let len = row.len();
                    if extent == Extent::PerTrial {
                        let path = delays.iter().copied().max().unwrap_or(0);
                        assert_eq!(len, (n_time / tree_ds - path) / per_out);
                        let exact = want_row.len() as f64;
                        assert!(
                            (len as f64 - exact).abs() * per_out as f64 <= 3.0,
                            "{len} vs {exact}"
                        );
                    }
                    let along = sum_along(&input, &delays, tree_ds, per_out, len);
                    let magnitudes =
                        sum_along(&input.mapv(f32::abs), &delays, tree_ds, per_out, len);
                    let scale = ((n_chan * g.downsample) as f32).sqrt();
                    let fixed = fixed_error(n_chan, tree_ds, per_out, peak(&input));
                    for (t, ((&a, &b), &m)) in row.iter().zip(&along).zip(&magnitudes).enumerate() {
                        assert!(
                            (a - b).abs() <= stored_bound(m, fixed) + 1e-4 * scale,
                            "{n_chan} ch DM {dm} t {t}: {a} vs {b}"
                        );
                    }
                    if n_chan > 4 && g.n_time > 20 {
                        let r = correlation(&row, &want_row);
                        assert!(
                            r > 0.4,
                            "{n_chan} ch, DM {dm}, ds {}: correlation {r}",
                            g.downsample
                        );
                    }
                }
            }
        }
    }
    assert!(
        further >= 4,
        "only {further} cases test the longer first step"
    );
    let rms = (sq / n as f64).sqrt();
    assert!(
        rms <= 0.6 && worst <= 2.5,
        "path error rms {rms}, worst {worst}"
    );
}

// Each sub-band's row and whole-sample offset are fitted together to the ideal
// per-channel delays (least squares). On the 256-channel band of the injection
// measurements (1200–1600 MHz, 256 µs, default plan to DM 2000) the rms path error is
// 0.413–0.419 tree samples per step; rounding each sub-band top's delay alone gave
// 0.47 (and fails), independent rounding of every channel would give 1/√12 = 0.289.
#[test]
fn fitted_sub_band_offsets_keep_paths_on_the_dispersion_curve() {
    let (freqs, bw) = band(256, 1200.0, 1600.0, false);
    let tsamp = 256e-6;
    let plan = DmPlan::build(&freqs, bw, tsamp, &PlanRequest::default()).unwrap();
    let fast = FastDedisperser::new(&plan);
    let f_top = freqs[0];
    for (s, step) in plan.steps.iter().enumerate() {
        let tree_s = tsamp * tree_downsample(step.downsample) as f64;
        let (mut sq, mut n) = (0.0, 0usize);
        for (k, &dm) in step.dms.iter().enumerate() {
            let delays = fast.steps[s].path_delays(k, freqs.len());
            for (&d, &f) in delays.iter().zip(&freqs) {
                let e = d as f64 - delay_between_s(dm, f, f_top) / tree_s;
                (sq, n) = (sq + e * e, n + 1);
            }
        }
        let rms = (sq / n as f64).sqrt();
        assert!(rms < 0.44, "ds {}: rms path error {rms}", step.downsample);
    }
}

// Where the paths coincide with the reference's (DM 0: no delays), the outputs match.
#[test]
fn fast_kernel_equals_reference_at_zero_dm() {
    let mut rng = ChaCha8Rng::seed_from_u64(7);
    let (freqs, bw) = band(37, 1100.0, 1500.0, true);
    let plan = DmPlan::uniform(freqs, bw, 1e-3, 0.0, 0.0, 1);
    let input = noise(37, 333, &mut rng);
    let got = dedisperse_fast(&input, &plan);
    let want = reference::dedisperse(input.view(), &plan);
    let magnitudes = sum_along(&input.mapv(f32::abs), &[0; 37], 1, 1, 333);
    let fixed = fixed_error(37, 1, 1, peak(&input));
    let (got, want) = (got[0].row_f32(0), want[0].row_f32(0));
    for ((a, b), m) in got.iter().zip(&want).zip(magnitudes) {
        // The reference rounds its exact sum to bfloat16 too.
        let bound = stored_bound(m, fixed) + m * 2f32.powi(-8) + 1e-4;
        assert!((a - b).abs() <= bound, "{a} vs {b}");
    }
}

fn dedisperse_fast(input: &Array2<f32>, plan: &DmPlan) -> Vec<Dedispersed> {
    FastDedisperser::new(plan).dedisperse(input.view())
}

// Toy case after Zackay & Ofek 2017 (ApJ 835, 11), set up here:
// 64 channels over 1200–1600 MHz, 256 delays, 2048 samples. A burst along the curve
// with a total delay of 200 samples arriving at sample 500 (unit-fluence Gaussian of
// 0.3 samples FWHM, smeared across each channel's own sweep) must peak within one
// delay and one sample of (200, 500). The paper's FDMT absorbs each channel's sweep
// and so collects ≥ 90 % of the fluence; this kernel sums one sample per channel,
// like the reference, so it must collect ≥ 90 % of what the reference collects.
// Every row sums one sample per channel, so unit-variance white noise gives σ = √64.
#[test]
fn fdmt_toy_case_recovers_pulse_and_noise() {
    let (freqs, bw) = band(64, 1200.0, 1600.0, false);
    let tsamp = 64e-6;
    let sweep_s_per_dm = delay_between_s(1.0, freqs[63], freqs[0]);
    let dm_of = |d: f64| d * tsamp / sweep_s_per_dm;
    let plan = DmPlan::uniform(freqs.clone(), bw, tsamp, 0.0, dm_of(255.0), 256);
    let mut input = Array2::<f32>::zeros((64, 2048));
    inject(&mut input, &freqs, bw, tsamp, dm_of(200.0), 0.3, 500.0);
    let fast = FastDedisperser::new(&plan);
    let peak = |out: &Dedispersed| {
        let (mut best, mut at) = (f32::MIN, (0, 0));
        for d in 0..256 {
            for (t, &v) in out.row_f32(d).iter().enumerate() {
                if v > best {
                    (best, at) = (v, (d, t));
                }
            }
        }
        (best, at)
    };
    let (got, at) = peak(&dedisperse_fast(&input, &plan)[0]);
    let (want, _) = peak(&reference::dedisperse(input.view(), &plan)[0]);
    assert!(
        at.0.abs_diff(200) <= 1 && at.1.abs_diff(500) <= 1,
        "peak at {at:?}"
    );
    assert!(got >= 0.9 * want, "peak {got} vs reference {want}");

    // Cost: the paper's speed-up is about N_f/log2(N_f) = 10.7 over brute force. The
    // tree's merges count here; the kernel sums its bottom levels directly, trading
    // adds for memory traffic (`direct.rs`).
    let brute = 64 * 256;
    let step = &fast.steps[0];
    let merges: usize = step
        .subbands
        .iter()
        .map(|s| s.tree.adds_per_sample(0))
        .sum();
    let tree = merges + step.stage2_adds_per_sample();
    assert!(
        brute >= 8 * tree,
        "tree {tree} vs brute {brute} adds per sample"
    );

    let mut rng = ChaCha8Rng::seed_from_u64(64);
    let out = &dedisperse_fast(&noise(64, 2048, &mut rng), &plan)[0];
    for d in [0, 100, 255] {
        let row = out.row_f32(d);
        let var = row.iter().map(|&v| (v as f64).powi(2)).sum::<f64>() / row.len() as f64;
        assert!(
            (var.sqrt() / 8.0 - 1.0).abs() < 0.05,
            "row {d}: σ {}",
            var.sqrt()
        );
    }
}

/// Adds a Gaussian pulse of `fwhm` samples and fluence 4·√fwhm per channel, arriving
/// at the top channel at sample `t0`: in each channel smeared by the channel's own
/// dispersion sweep (a boxcar of t_chan, averaged over 16 offsets) and integrated over
/// samples.
fn inject(
    input: &mut Array2<f32>,
    freqs: &[f64],
    bw: f64,
    tsamp: f64,
    dm: f64,
    fwhm: f64,
    t0: f64,
) {
    let sigma = fwhm / (8.0 * 2f64.ln()).sqrt();
    let fluence = 4.0 * fwhm.sqrt();
    let cdf = |x: f64| 0.5 * (1.0 + statrs::function::erf::erf(x / (sigma * 2f64.sqrt())));
    let f_top = freqs.iter().copied().fold(f64::MIN, f64::max);
    for (c, &f) in freqs.iter().enumerate() {
        let centre = t0 + delay_between_s(dm, f, f_top) / tsamp;
        let smear = channel_smearing_s(dm, bw, f) / tsamp;
        let first = (centre - 5.0 * sigma - smear - 1.0).floor() as usize;
        for i in first..first + (10.0 * sigma + 2.0 * smear) as usize + 3 {
            let v: f64 = (0..16)
                .map(|k| {
                    let x = i as f64 - centre - smear * ((k as f64 + 0.5) / 16.0 - 0.5);
                    cdf(x + 1.0) - cdf(x)
                })
                .sum::<f64>()
                / 16.0;
            input[[c, i]] += (fluence * v) as f32;
        }
    }
}

/// Best boxcar S/N over all series of a noiseless response: widths 1, 2, 4 … 64
/// output samples, with the noise each kernel would have on unit-variance white input
/// (both sum exactly `n_chan · downsample` input samples per output sample).
fn best_snr(out: &[Dedispersed], n_chan: usize) -> f64 {
    let mut best = f64::MIN;
    for step in out {
        let sigma = ((n_chan * step.downsample) as f64).sqrt();
        for d in 0..step.dms.len() {
            let row: Vec<f64> = step.row(d).iter().map(|&v| v as f64).collect();
            for w in (0..7).map(|k| 1usize << k) {
                for win in row.windows(w) {
                    best = best.max(win.iter().sum::<f64>() / (sigma * (w as f64).sqrt()));
                }
            }
        }
    }
    best
}

// Injected dispersed Gaussian pulses (sample-integrated, smeared within channels,
// arrival at a random sub-sample phase): the best boxcar S/N of the fast kernel must
// be within 5 % of the reference's across DMs and widths, with a planner-made plan
// (downsampled steps). Compared noiselessly: both kernels' outputs carry the same
// white-noise σ (checked below), while on one noisy realisation the two kernels'
// slightly different paths pick up different noise and scatter the ratio by ±8 %.
#[test]
fn injected_pulse_snr_agrees_with_reference() {
    let (freqs, bw) = band(128, 1200.0, 1600.0, false);
    let tsamp = 256e-6;
    let req = PlanRequest {
        dm_min: 0.0,
        dm_max: 600.0,
        min_width_s: 0.0,
        tolerance: 1.25,
        max_downsample: 16,
        smearing_fraction: 1.0,
    };
    let plan = DmPlan::build(&freqs, bw, tsamp, &req).unwrap();
    let n_time = plan.max_delay_samples() + 2048;
    let mut fast = FastDedisperser::new(&plan);
    let mut rng = ChaCha8Rng::seed_from_u64(2017);
    for dm in [20.0, 150.0, 500.0] {
        for fwhm in [1.0, 3.0, 10.0] {
            let mut input = Array2::<f32>::zeros((128, n_time));
            let t0 = 700.0 + rng.random::<f64>();
            inject(&mut input, &freqs, bw, tsamp, dm, fwhm, t0);
            let got = best_snr(&fast.dedisperse(input.view()), 128);
            let want = best_snr(&reference::dedisperse(input.view(), &plan), 128);
            eprintln!("DM {dm} FWHM {fwhm}: fast {got:.2} reference {want:.2}");
            assert!(want > 5.0, "pulse too weak to compare: {want}");
            assert!(
                (got / want - 1.0).abs() <= 0.05,
                "DM {dm} FWHM {fwhm}: {got} vs {want}"
            );
        }
    }
}

// A block read in place from a larger buffer (channels `row_stride` apart, junk in
// between) gives exactly what the same block gives stored contiguously, for every
// step including the halved ones; a reused dedisperser (recycled outputs, grown
// scratch) gives it again.
#[test]
fn strided_rows_equal_the_contiguous_block() {
    let mut rng = ChaCha8Rng::seed_from_u64(77);
    let (freqs, bw) = band(13, 1200.0, 1600.0, false);
    let plan = awkward_plan(freqs, bw, 1e-3, 11.0, 400.0);
    let n_time = plan.max_delay_samples() + 301;
    let input = noise(13, n_time, &mut rng);
    let row_stride = n_time + 37;
    let mut rows: Vec<f32> = (0..13 * row_stride)
        .map(|_| rng.random::<f32>() * 1e6)
        .collect();
    for (c, chan) in input.rows().into_iter().enumerate() {
        for (t, &v) in chan.iter().enumerate() {
            rows[c * row_stride + t] = v;
        }
    }
    let expected = dedisperse_fast(&input, &plan);
    let mut kernel = FastDedisperser::new(&plan);
    let first = kernel.dedisperse_rows(&rows, n_time, row_stride, Extent::Common);
    assert_eq!(first, expected);
    kernel.recycle(first);
    assert_eq!(
        kernel.dedisperse_rows(&rows, n_time, row_stride, Extent::Common),
        expected
    );
}

// The kernel's loops compiled for each instruction set this CPU has (AVX-512, AVX2,
// the portable build) give the same output, bit for bit, on random input over
// several sub-bands and halved steps.
#[test]
fn every_instruction_set_gives_the_same_output() {
    let mut rng = ChaCha8Rng::seed_from_u64(78);
    let (freqs, bw) = band(150, 1200.0, 1600.0, false);
    let plan = awkward_plan(freqs, bw, 2.5e-4, 3.0, 300.0);
    assert!(plan.steps.len() > 1, "the plan should halve");
    let input = noise(150, plan.max_delay_samples() + 3001, &mut rng);
    let bits =
        |outs: Vec<Dedispersed>| -> Vec<Vec<Bf16>> { outs.into_iter().map(|o| o.data).collect() };
    let run = |isa| {
        bits(
            FastDedisperser::new(&plan)
                .with_isa(isa)
                .dedisperse(input.view()),
        )
    };
    let mut isas = Isa::available().into_iter();
    let portable = run(isas.next().unwrap());
    for isa in isas {
        assert!(
            run(isa) == portable,
            "{isa:?} differs from the portable build"
        );
    }
}

// Stage 2's sums of 0 to 20 sub-band rows (eight a pass, then four, then one at a
// time) against a plain sum of the same rows, in every instruction set the CPU has:
// equal to f32 rounding, and identical between the sets.
#[test]
fn stage_two_sums_any_number_of_rows() {
    let mut rng = ChaCha8Rng::seed_from_u64(80);
    let n = 1000;
    let stage1: Vec<Bf16> = (0..30 * n)
        .map(|_| bf16::to_bf16(rng.sample::<f32, _>(StandardNormal)))
        .collect();
    for n_rows in 0..=20 {
        let starts: Vec<usize> = (0..n_rows).map(|_| rng.random_range(0..29 * n)).collect();
        let plain: Vec<f32> = (0..n)
            .map(|t| starts.iter().map(|&s| bf16::from_bf16(stage1[s + t])).sum())
            .collect();
        let mut first_isa: Option<Vec<Bf16>> = None;
        for isa in Isa::available() {
            let (mut acc, mut out) = (vec![f32::NAN; n], vec![0; n]);
            sum_and_store(&mut acc, &mut out, &stage1, starts.iter().copied(), isa);
            for (t, (&a, &p)) in acc.iter().zip(&plain).enumerate() {
                assert!(
                    (a - p).abs() <= 1e-5 * (1.0 + p.abs()),
                    "{n_rows} rows, t {t}: {a} vs {p}"
                );
            }
            assert!(out.iter().zip(&acc).all(|(&o, &a)| o == bf16::to_bf16(a)));
            match &first_isa {
                None => first_isa = Some(out),
                Some(portable) => assert!(&out == portable, "{isa:?}, {n_rows} rows"),
            }
        }
    }
}

// The last block of a file (every trial to its own end) needs larger outputs than
// the blocks before it: the recycled buffers grow in place, keeping the samples
// (and pages) they hold, and every block still equals a fresh dedisperser's.
#[test]
fn a_larger_last_block_grows_the_recycled_outputs() {
    let mut data: Vec<Bf16> = (1..=5).collect();
    fit_output(&mut data, 8);
    assert_eq!(data, [1, 2, 3, 4, 5, 0, 0, 0]);
    fit_output(&mut data, 3);
    assert_eq!(data, [1, 2, 3]);

    let mut rng = ChaCha8Rng::seed_from_u64(79);
    let (freqs, bw) = band(16, 1200.0, 1600.0, false);
    let plan = awkward_plan(freqs, bw, 1e-3, 11.0, 400.0);
    let input = noise(16, plan.max_delay_samples() + 640, &mut rng);
    let rows = input.as_slice().unwrap();
    let n_time = input.ncols();
    let fresh = |extent| FastDedisperser::new(&plan).dedisperse_rows(rows, n_time, n_time, extent);
    let mut kernel = FastDedisperser::new(&plan);
    for extent in [Extent::Common, Extent::PerTrial, Extent::Common] {
        let out = kernel.dedisperse_rows(rows, n_time, n_time, extent);
        assert_eq!(out, fresh(extent));
        kernel.recycle(out);
    }
}

// Blocks after the first reuse the halving buffer: with three halvings (steps down
// to ×16), the later two in place, it is allocated (and faulted in) once.
#[test]
fn later_blocks_reuse_the_halving_buffer() {
    let mut rng = ChaCha8Rng::seed_from_u64(78);
    let (freqs, bw) = band(16, 1200.0, 1600.0, false);
    let mut plan = awkward_plan(freqs, bw, 1e-3, 11.0, 400.0);
    plan.steps.push(DmStep {
        dms: vec![420.0, 450.0],
        downsample: 16,
    });
    let input = noise(16, plan.max_delay_samples() + 640, &mut rng);
    let mut kernel = FastDedisperser::new(&plan);
    let buffers = |k: &FastDedisperser| (k.coarse.as_ptr(), k.coarse.capacity());
    let first = kernel.dedisperse(input.view());
    let after_first = buffers(&kernel);
    kernel.recycle(first);
    let second = kernel.dedisperse(input.view());
    assert_eq!(buffers(&kernel), after_first);
    assert_eq!(second, dedisperse_fast(&input, &plan));
}

// The cost model's scratch is the kernel's own stage-1 buffer, which the first block
// never needs to grow.
#[test]
fn cost_scratch_is_the_stage1_buffer() {
    let (freqs, bw) = band(97, 1200.0, 1600.0, false);
    let plan = DmPlan::build(&freqs, bw, 1e-3, &PlanRequest::default()).unwrap();
    let mut fast = FastDedisperser::new(&plan);
    let reserved = fast.stage1.len();
    assert_eq!(plan.cost().fast_scratch_bytes, (reserved * 2) as f64);
    let mut rng = ChaCha8Rng::seed_from_u64(5);
    let input = noise(97, plan.max_delay_samples() + 3000, &mut rng);
    fast.dedisperse(input.view());
    assert_eq!(fast.stage1.len(), reserved);
}

// In-place halving against plain pair sums (the reference: `halve` into a fresh
// buffer, which reads its source untouched), repeated as the kernel does for ever coarser
// steps, for rows shorter and longer than a chunk and odd lengths.
#[test]
fn halving_in_place_equals_halving_into_a_copy() {
    let mut rng = ChaCha8Rng::seed_from_u64(91);
    for n_time in [3, 7, 511, 512, 1025, 2 * 1024 + 3] {
        let n_chan = 5;
        let stride = n_time / 2;
        let input: Vec<f32> = (0..n_chan * n_time).map(|_| rng.random()).collect();
        let mut in_place = Vec::new();
        halve(&input, n_time, n_time, &mut in_place, n_chan);
        let mut copied = in_place.clone();
        let mut len = stride;
        while len >= 2 {
            halve_in_place(&mut in_place, len, stride);
            let mut next = Vec::new();
            halve(&copied, len, len, &mut next, n_chan);
            len /= 2;
            for c in 0..n_chan {
                assert_eq!(in_place[c * stride..][..len], next[c * len..][..len]);
            }
            copied = next;
        }
    }
}
