//! End-to-end checks of the simulator through its public API: determinism, where
//! bursts and interference land, S/N recovered by a plain search, scenario errors.

mod common;

use burstbook::dedisperse::channel_delays;
use burstbook::obs::{Block, BlockReader, Header, MemorySource};
use burstbook::simulate::{
    Burst, Generator, Scenario, Simulation, Spectrum, TruthKind, add_burst, boxcar_snr,
    expected_snr, write_truth,
};
use common::simulated_rows;

/// A small scenario: 64 channels, 1 ms, `length_s`, float samples of unit σ around 0
/// (or 8-bit around 96 ± 12), plus `extra` TOML.
fn scenario(length_s: f64, nbits: u32, descending: bool, extra: &str) -> Scenario {
    Scenario::parse(&scenario_text(length_s, nbits, descending, extra)).unwrap()
}

fn scenario_text(length_s: f64, nbits: u32, descending: bool, extra: &str) -> String {
    let (first, step) = if descending {
        (1596.875, -6.25)
    } else {
        (1203.125, 6.25)
    };
    let (mean, sigma) = if nbits < 32 { (96.0, 12.0) } else { (0.0, 1.0) };
    format!(
        r#"
[observation]
source = "Fictional-7"
telescope = "Test Array"
ra_deg = 120.0
dec_deg = -30.0
start_mjd = 61000.25
length_s = {length_s}
tsamp_s = 1e-3
[site]
name = "Test Array"
lon_deg = 20.0
lat_deg = -30.0
height_m = 1000.0
[band]
first_chan_mhz = {first}
chan_step_mhz = {step}
n_chan = 64
[noise]
nbits = {nbits}
mean = {mean}
sigma = {sigma}
sefd_jy = 20.0
{extra}
"#
    )
}

const BURSTS: &str = r#"
[[burst]]
t_inf_s = 0.5
dm = 400.0
width_ms = 3.0
scatter_ms_1ghz = 2.0
snr = 30.0
[[burst]]
t_inf_s = 1.5
dm = 150.0
width_ms = 1.5
spectrum = { kind = "gaussian", centre_mhz = 1350.0, fwhm_mhz = 150.0 }
fluence_jy_ms = 3.0
[random_bursts]
count = 3
t_range_s = [0.2, 2.0]
dm_range = [50.0, 500.0]
width_ms_range = [1.0, 10.0]
snr_range = [8.0, 20.0]
band_limited_fraction = 0.5
[[rfi.narrowband]]
freq_mhz = 1300.0
strength = 2.0
modulation_period_s = 0.7
"#;

#[test]
fn same_seed_gives_identical_data_and_other_seeds_differ() {
    let s = scenario(3.0, 8, true, BURSTS);
    let a = simulated_rows(&Simulation::new(&s, 11).unwrap());
    let b = simulated_rows(&Simulation::new(&s, 11).unwrap());
    let c = simulated_rows(&Simulation::new(&s, 12).unwrap());
    assert_eq!(a.len(), 3000 * 64);
    assert!(a == b, "same seed, same rows");
    assert!(a != c, "another seed, other rows");
    // Chunking does not matter: odd chunk sizes give the same stream.
    let sim = Simulation::new(&s, 11).unwrap();
    let mut g = Generator::new(&sim);
    let mut pieced = Vec::new();
    while let Some(rows) = g.next_chunk(777) {
        pieced.extend_from_slice(rows);
    }
    assert!(pieced == a);
    // 8-bit samples are whole numbers in the digitiser range with the chosen level.
    assert!(
        a.iter()
            .all(|&v| v.fract() == 0.0 && (0.0..=255.0).contains(&v))
    );
    let mean = a.iter().map(|&v| f64::from(v)).sum::<f64>() / a.len() as f64;
    assert!((mean - 96.0).abs() < 0.5, "{mean}");
}

// Bursts come from their own random stream: adding them leaves the noise untouched,
// so samples away from every burst are identical with and without them.
#[test]
fn bursts_do_not_change_the_noise() {
    let quiet = scenario(3.0, 32, true, "");
    let busy = scenario(3.0, 32, true, BURSTS.split("[[rfi").next().unwrap());
    let a = simulated_rows(&Simulation::new(&quiet, 4).unwrap());
    let b = simulated_rows(&Simulation::new(&busy, 4).unwrap());
    // All bursts arrive after 0.2 s; the first 100 ms are untouched.
    assert!(a[..100 * 64] == b[..100 * 64]);
    assert!(a != b);
}

#[test]
fn truth_table_lists_bursts_and_interference() {
    let s = scenario(3.0, 32, true, BURSTS);
    let sim = Simulation::new(&s, 5).unwrap();
    let bursts: Vec<_> = sim
        .truth
        .iter()
        .filter(|r| r.kind == TruthKind::Burst)
        .collect();
    assert_eq!(bursts.len(), 5);
    assert!((bursts[0].expected_snr.unwrap() - 30.0).abs() < 1e-6);
    // The fluence burst keeps its fluence; every burst gets one since an SEFD is known.
    assert!((bursts[1].fluence_jy_ms.unwrap() - 3.0).abs() < 1e-9);
    assert!(
        bursts
            .iter()
            .all(|b| b.fluence_jy_ms.is_some() && b.expected_snr.unwrap() > 0.0)
    );
    for b in &bursts[2..] {
        let snr = b.expected_snr.unwrap();
        assert!((8.0..=20.0).contains(&(snr + 1e-9)), "{snr}");
    }
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("x.truth.csv");
    write_truth(&path, &sim.truth).unwrap();
    let text = std::fs::read_to_string(&path).unwrap();
    let mut lines = text.lines();
    assert!(
        lines
            .next()
            .unwrap()
            .starts_with("kind,t_inf_s,mjd_inf,dm,width_ms")
    );
    assert_eq!(lines.filter(|l| l.starts_with("rfi_narrowband")).count(), 1);
}

/// Series of `rows` summed over channels after shifting each channel by its
/// integer-sample dispersion delay (the plainest possible search).
fn dedisperse_sum(
    header: &Header,
    rows: &[f32],
    dm: f64,
    norm: &dyn Fn(usize, f32) -> f64,
) -> Vec<f64> {
    let n_chan = header.n_chan();
    let n_time = rows.len() / n_chan;
    let delays = channel_delays(&header.freqs_mhz, dm, header.tsamp_s);
    let max_delay = *delays.iter().max().unwrap();
    (0..n_time - max_delay)
        .map(|t| {
            (0..n_chan)
                .map(|c| norm(c, rows[(t + delays[c]) * n_chan + c]))
                .sum()
        })
        .collect()
}

// The expected S/N is what a plain integer-delay search recovers: noise-free it gets
// at least 95 % of it, and with unit noise it lands within noise of it.
#[test]
fn plain_search_recovers_expected_snr_in_both_band_orders() {
    for descending in [true, false] {
        let s = scenario(2.0, 32, descending, "");
        let h = s.header();
        let b = Burst {
            t_inf_s: 0.3,
            dm: 500.0,
            width_s: 4e-3,
            scatter_1ghz_s: 3e-3,
            spectrum: Spectrum::PowerLaw { index: -1.5 },
            amplitude: 1.0,
        };
        let b = burstbook::simulate::with_expected_snr(&h, &b, 25.0).unwrap();
        let mut block = Block {
            start_sample: 0,
            overlap: 0,
            n_chan: 64,
            data: vec![0.0; h.n_samples as usize * 64],
        };
        add_burst(&mut block, &h, &b, &[1.0; 64]);
        let clean = dedisperse_sum(&h, &block.data, b.dm, &|_, v| f64::from(v));
        let found = boxcar_snr(&clean, 64).snr;
        assert!(
            (25.0 * 0.95..=25.0 * 1.01).contains(&found),
            "noise-free {found}"
        );

        // Now through the generator with noise (mean 0, σ 1 per channel).
        let mut with_burst = s.clone();
        with_burst.bursts.push(burstbook::simulate::BurstSpec {
            t_inf_s: b.t_inf_s,
            dm: b.dm,
            width_ms: 4.0,
            scatter_ms_1ghz: 3.0,
            spectrum: b.spectrum,
            snr: Some(25.0),
            fluence_jy_ms: None,
        });
        let sim = Simulation::new(&with_burst, 3).unwrap();
        let rows = simulated_rows(&sim);
        let series = dedisperse_sum(&h, &rows, b.dm, &|_, v| f64::from(v));
        let found = boxcar_snr(&series, 64).snr;
        assert!((found - 25.0).abs() < 3.0, "with noise {found}");
    }
}

#[test]
fn interference_lands_where_scheduled() {
    let extra = r#"
[[rfi.narrowband]]
freq_mhz = 1400.0
strength = 3.0
[[rfi.narrowband]]
freq_mhz = 1250.0
strength = 4.0
modulation_period_s = 1.0
[[rfi.impulse]]
t_s = 0.8
width_ms = 2.0
snr = 40.0
[[rfi.train]]
first_s = 0.25
period_s = 0.5
width_ms = 1.0
snr = 20.0
freq_lo_mhz = 1300.0
freq_hi_mhz = 1500.0
"#;
    let s = scenario(2.0, 32, true, extra);
    let h = s.header();
    let sim = Simulation::new(&s, 9).unwrap();
    let kinds = |k| sim.truth.iter().filter(|r| r.kind == k).count();
    assert_eq!(kinds(TruthKind::RfiImpulse), 1);
    assert_eq!(kinds(TruthKind::RfiTrainPulse), 4); // 0.25, 0.75, 1.25, 1.75 s
    assert_eq!(kinds(TruthKind::RfiNarrowband), 2);
    let rows = simulated_rows(&sim);

    // The carrier's channel has a raised mean; its neighbours do not.
    let carrier = h
        .freqs_mhz
        .iter()
        .position(|f| (f - 1400.0).abs() <= 3.125)
        .unwrap();
    let chan_mean = |c: usize| {
        rows.iter()
            .skip(c)
            .step_by(64)
            .map(|&v| f64::from(v))
            .sum::<f64>()
            / 2000.0
    };
    assert!(
        (chan_mean(carrier) - 3.0).abs() < 0.3,
        "{}",
        chan_mean(carrier)
    );
    assert!(chan_mean(carrier + 2).abs() < 0.1);
    // The modulated carrier follows ½(1 + sin 2πt/P): full near t = 0.25 s, gone near 0.75 s.
    let modulated = h
        .freqs_mhz
        .iter()
        .position(|f| (f - 1250.0).abs() <= 3.125)
        .unwrap();
    let mean_over = |t0: usize| {
        (t0..t0 + 100)
            .map(|t| f64::from(rows[t * 64 + modulated]))
            .sum::<f64>()
            / 100.0
    };
    assert!(
        mean_over(200) > 3.0 && mean_over(1200) > 3.0,
        "{} {}",
        mean_over(200),
        mean_over(1200)
    );
    assert!(
        mean_over(700).abs() < 0.6 && mean_over(1700).abs() < 0.6,
        "{}",
        mean_over(700)
    );

    // DM-0 pulses: the band sum (carrier excluded) peaks at each scheduled time.
    let zero_dm = dedisperse_sum(&h, &rows, 0.0, &|c, v| {
        if c == carrier || c == modulated {
            0.0
        } else {
            f64::from(v)
        }
    });
    for row in sim
        .truth
        .iter()
        .filter(|r| matches!(r.kind, TruthKind::RfiImpulse | TruthKind::RfiTrainPulse))
    {
        let at = (row.t_inf_s / h.tsamp_s) as usize;
        let window = &zero_dm[at - 20..at + 20];
        let peak = window.iter().copied().fold(f64::MIN, f64::max);
        let elsewhere = zero_dm[at + 60..at + 100]
            .iter()
            .copied()
            .fold(f64::MIN, f64::max);
        assert!(
            peak > 3.0 * elsewhere.max(8.0),
            "t={} peak {peak} vs {elsewhere}",
            row.t_inf_s
        );
    }
    // The band-limited train leaves channels outside 1300–1500 MHz alone.
    let train_t = (0.25f64 / h.tsamp_s) as usize;
    let outside: f64 = (0..64)
        .filter(|&c| h.freqs_mhz[c] > 1520.0)
        .map(|c| f64::from(rows[train_t * 64 + c]))
        .sum();
    assert!(outside.abs() < 12.0, "{outside}");
}

#[test]
fn generator_output_streams_through_memory_source_blocks() {
    let s = scenario(3.0, 8, false, BURSTS);
    let sim = Simulation::new(&s, 1).unwrap();
    let rows = simulated_rows(&sim);
    let source = MemorySource::new(sim.header.clone(), rows.clone());
    let mut reader = BlockReader::new(source, 1000, 100).unwrap();
    let mut n = 0;
    while let Some(block) = reader.next_block().unwrap() {
        let at = block.start_sample as usize * 64;
        assert_eq!(&rows[at..at + block.data.len()], &block.data[..]);
        n += 1;
    }
    assert!(n >= 3);
    assert!(expected_snr(&sim.header, &sim.pulses[0]) > 29.9);
}

#[test]
fn bad_scenarios_give_one_clear_message() {
    let base = std::fs::read_to_string(concat!(
        env!("CARGO_MANIFEST_DIR"),
        "/demo-data/scenario.toml"
    ))
    .unwrap();
    assert!(Scenario::parse(&base).is_ok());
    let typo = base.replacen("[noise]", "[noise]\nsigmaa = 3.0", 1);
    let e = Scenario::parse(&typo).unwrap_err();
    assert!(e.contains("sigmaa") && !e.contains('\n'), "{e}");
    let cases = [
        ("nbits = 8", "nbits = 12", "nbits"),
        ("[[burst]]", "[[burst]]\nfluence_jy_ms = 1.0", "exactly one"),
        ("index = -1.5", "indx = -1.5", "indx"),
        ("kind = \"gaussian\"", "kind = \"lorentzian\"", "lorentzian"),
    ];
    for (from, to, needle) in cases {
        let e = Scenario::parse(&base.replacen(from, to, 1)).unwrap_err();
        assert!(e.contains(needle), "{e}");
    }
    let late = scenario_text(
        1.0,
        32,
        true,
        "[[burst]]\nt_inf_s = 5.0\ndm = 1.0\nwidth_ms = 1.0\nsnr = 9.0\n",
    );
    let e = Scenario::parse(&late).unwrap_err();
    assert!(e.contains("burst 1") && e.contains("outside"), "{e}");
}

// The demo data live in the repository: keep them under 20 MB (project rule).
#[test]
fn demo_scenario_fits_the_repository_budget() {
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/demo-data/scenario.toml");
    let h = Scenario::load(std::path::Path::new(path)).unwrap().header();
    let bytes = h.n_chan() as u64 * h.n_samples * u64::from(h.nbits) / 8;
    assert!(bytes < 20_000_000, "{bytes} bytes");
}

// A burst whose sweep runs past the end of the recording: its scenario S/N sets its
// brightness as if whole, its truth row gives the S/N of the part recorded (as
// `recorded_snr` computes it), and one note names it. A burst wholly inside keeps
// its scenario S/N and gets no note.
#[test]
fn truth_gives_the_recorded_snr_of_a_burst_cut_by_the_file_end() {
    let bursts = "[[burst]]\nt_inf_s = 0.5\ndm = 100.0\nwidth_ms = 2.0\nsnr = 20.0\n\
                  [[burst]]\nt_inf_s = 1.5\ndm = 300.0\nwidth_ms = 2.0\nsnr = 20.0\n";
    // DM 300 arrives at 1.5 + 0.49 s at 1600 MHz and 1.5 + 0.86 s at 1200 MHz: a 2.2 s
    // recording cuts the lower part of its sweep.
    let sim = Simulation::new(&scenario(2.2, 32, true, bursts), 1).unwrap();
    let snr = |i: usize| sim.truth[i].expected_snr.unwrap();
    assert!((snr(0) - 20.0).abs() < 1e-6, "{}", snr(0));
    let recorded = burstbook::simulate::recorded_snr(&sim.header, &sim.pulses[1]);
    assert!((snr(1) - recorded).abs() < 1e-12);
    assert!(snr(1) > 1.0 && snr(1) < 19.0, "{}", snr(1));
    assert!((expected_snr(&sim.header, &sim.pulses[1]) - 20.0).abs() < 1e-6);
    assert_eq!(sim.notes.len(), 1, "{:?}", sim.notes);
    assert!(
        sim.notes[0].starts_with("burst 2 (t_inf 1.5 s, DM 300)"),
        "{}",
        sim.notes[0]
    );
    // The same recording 1 s longer holds the whole sweep.
    let sim = Simulation::new(&scenario(3.2, 32, true, bursts), 1).unwrap();
    assert!((sim.truth[1].expected_snr.unwrap() - 20.0).abs() < 1e-6);
    assert!(sim.notes.is_empty(), "{:?}", sim.notes);
}

// 8-bit samples around 96 ± 12 hold at most 13.25 σ above the mean: a burst whose
// brightest samples exceed that gets a note (its expected S/N ignores the clipping);
// a faint one, or the same bright one in float samples, does not.
#[test]
fn a_burst_that_saturates_eight_bit_samples_gets_a_note() {
    let bright = "[[burst]]\nt_inf_s = 0.5\ndm = 100.0\nwidth_ms = 2.0\nsnr = 1000.0\n";
    let faint = bright.replace("snr = 1000.0", "snr = 20.0");
    let notes = |nbits: u32, bursts: &str| {
        Simulation::new(&scenario(2.0, nbits, true, bursts), 1)
            .unwrap()
            .notes
    };
    let saturated = notes(8, bright);
    assert_eq!(saturated.len(), 1, "{saturated:?}");
    assert!(
        saturated[0].starts_with(
            "burst 1 (t_inf 0.5 s, DM 100) saturates the 8-bit samples in 64 of 64 channels"
        ) && saturated[0].contains("where 255 is 13.2 σ above it"),
        "{}",
        saturated[0]
    );
    assert!(notes(8, &faint).is_empty());
    assert!(notes(32, bright).is_empty());
    // 16-bit samples around 96 ± 12 have 5453 σ of headroom
    assert!(notes(16, bright).is_empty());
}
