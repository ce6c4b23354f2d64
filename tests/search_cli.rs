//! `burstbook search` end to end: simulated files in both containers, the CSV/JSON
//! outputs, config-file overrides, and clean failures on bad input.

mod cli_common;
use cli_common::{assert_one_line_failure, burstbook};

use std::path::Path;

use burstbook::obs::{self, Container};
use burstbook::search::output;
use burstbook::simulate::{Scenario, Simulation, write_observation};

const SCENARIO: &str = r#"
[observation]
source = "Made-Up Source 9"
telescope = "Paper Dish"
ra_deg = 45.0
dec_deg = 12.5
start_mjd = 61020.75
length_s = 12.0
tsamp_s = 1e-3
[site]
name = "Paper Dish"
lon_deg = 100.0
lat_deg = 10.0
height_m = 50.0
[band]
first_chan_mhz = 1593.75
chan_step_mhz = -12.5
n_chan = 32
[noise]
nbits = 8
mean = 96.0
sigma = 12.0
sefd_jy = 30.0
[[burst]]
t_inf_s = 4.0
dm = 180.0
width_ms = 4.0
snr = 25.0
[[rfi.impulse]]
t_s = 8.0
width_ms = 2.0
snr = 40.0
"#;

fn simulate(path: &Path, container: Container, seed: u64) {
    write_scenario(path, SCENARIO, container, seed);
}

/// Simulates `scenario` with `seed` into `path`; returns the simulation.
fn write_scenario(path: &Path, scenario: &str, container: Container, seed: u64) -> Simulation {
    let sim = Simulation::new(&Scenario::parse(scenario).unwrap(), seed).unwrap();
    let mut sink = obs::create(path, &sim.header, container).unwrap();
    write_observation(&sim, sink.as_mut()).unwrap();
    sink.finish().unwrap();
    sim
}

#[test]
fn finds_the_burst_in_both_containers_and_writes_csv_and_json() {
    let dir = tempfile::tempdir().unwrap();
    let native = dir.path().join("a.json");
    let fits = dir.path().join("b.fits");
    simulate(&native, Container::Native, 1);
    simulate(&fits, Container::Fits, 2);
    let config = dir.path().join("search.toml");
    std::fs::write(
        &config,
        "snr_threshold = 8.0\n[plan]\ndm_min = 0.0\ndm_max = 300.0\n\
        min_width_s = 0.0\ntolerance = 1.25\nmax_downsample = 8\n",
    )
    .unwrap();
    let out = dir.path().join("out");
    // The native file named twice: searched and listed once.
    let again = dir.path().join(".").join("a.json");
    let o = burstbook(&[
        "search",
        native.to_str().unwrap(),
        fits.to_str().unwrap(),
        again.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--config",
        config.to_str().unwrap(),
        "--snr",
        "7.5",
        // Not the default ./burstbook.sqlite: a test must not leave state behind.
        "--catalogue",
        dir.path().join("cat.sqlite").to_str().unwrap(),
    ]);
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(
        o.status.success(),
        "{stdout}\n{}",
        String::from_utf8_lossy(&o.stderr)
    );
    assert!(stdout.contains("astrophysical"), "{stdout}");
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(
        stderr.contains(&format!("{}: listed more than once", again.display())),
        "{stderr}"
    );
    // Each file's throughput, as data seconds per wall-clock second.
    for file in [&native, &fits] {
        let line = stdout
            .lines()
            .find(|l| l.starts_with(file.to_str().unwrap()) && l.contains(" searched "))
            .unwrap_or_else(|| panic!("no timing line for {}: {stdout}", file.display()));
        let rate: f64 = line
            .rsplit_once('(')
            .and_then(|(_, r)| r.strip_suffix("x real time)"))
            .and_then(|r| r.parse().ok())
            .unwrap_or_else(|| panic!("unreadable timing line {line}"));
        assert!(rate > 0.0, "{line}");
    }

    let mut reader = csv::Reader::from_path(out.join("candidates.csv")).unwrap();
    let headers = reader.headers().unwrap().clone();
    assert_eq!(headers.iter().collect::<Vec<_>>(), output::CSV_COLUMNS);
    // The columns the catalogue relies on.
    for col in "file t_inf_s mjd_inf dm dm_lo dm_hi width_ms snr cluster_size verdict".split(' ') {
        assert!(headers.iter().any(|h| h == col), "column {col}");
    }
    let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.unwrap()).collect();
    let col = |name: &str| headers.iter().position(|h| h == name).unwrap();
    let astro: Vec<&csv::StringRecord> = rows
        .iter()
        .filter(|r| &r[col("verdict")] == "astrophysical")
        .collect();
    assert_eq!(astro.len(), 2, "one burst per file: {rows:?}");
    assert!(astro[0][col("file")].ends_with("a.json") && astro[1][col("file")].ends_with("b.fits"));
    for r in &astro {
        let t: f64 = r[col("t_inf_s")].parse().unwrap();
        let dm: f64 = r[col("dm")].parse().unwrap();
        assert!((t - 4.0).abs() < 0.01 && (dm - 180.0).abs() < 10.0, "{r:?}");
        let mjd: f64 = r[col("mjd_inf")].parse().unwrap();
        assert!((mjd - (61020.75 + t / 86400.0)).abs() < 1e-9);
    }

    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("candidates.json")).unwrap())
            .unwrap();
    assert_eq!(
        json["config"]["snr_threshold"], 7.5,
        "flag overrides the file"
    );
    assert_eq!(json["config"]["plan"]["dm_max"], 300.0);
    assert_eq!(json["config_hash"].as_str().unwrap().len(), 64);
    assert_eq!(json["files"].as_array().unwrap().len(), 2);
    assert_eq!(json["candidates"].as_array().unwrap().len(), rows.len());
}

#[test]
fn bad_input_fails_with_one_line_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("nothing.json");
    let out = dir.path().join("out");
    let o = burstbook(&[
        "search",
        missing.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--no-catalogue",
    ]);
    assert_one_line_failure(&o, &["nothing.json"]);

    let junk = dir.path().join("junk.fits");
    std::fs::write(&junk, b"SIMPLE  = T  this is not a FITS file").unwrap();
    let o = burstbook(&[
        "search",
        junk.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--no-catalogue",
    ]);
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("junk.fits"));

    let o = burstbook(&[
        "search",
        junk.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--dm-min",
        "50",
        "--dm-max",
        "10",
        "--no-catalogue",
    ]);
    assert!(!o.status.success());
    assert!(
        String::from_utf8_lossy(&o.stderr)
            .contains("DM range 50..10 (dm_min..dm_max, flags --dm-min/--dm-max)")
    );

    // A search beyond its memory limit is refused up front, naming the file.
    let fine = dir.path().join("fine.json");
    simulate(&fine, Container::Native, 3);
    let o = burstbook(&[
        "search",
        fine.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--memory-limit-gib",
        "0.00001",
        "--no-catalogue",
    ]);
    assert_one_line_failure(&o, &["fine.json", "--memory-limit-gib"]);
    assert!(!out.join("candidates.csv").exists());
}

/// A huge --dm-max is searched up to what the recording holds, and the note saying
/// so writes the asked DM shortly (it printed all 301 digits of 1e300).
#[test]
fn the_note_for_a_huge_dm_max_is_short() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("a.json");
    simulate(&file, Container::Native, 4);
    let o = burstbook(&[
        "search",
        file.to_str().unwrap(),
        "--out",
        dir.path().join("out").to_str().unwrap(),
        "--dm-max",
        "1e300",
        "--no-catalogue",
    ]);
    cli_common::assert_success(&o);
    let text = String::from_utf8_lossy(&o.stdout);
    let note = text
        .lines()
        .find(|l| l.contains("is shorter than the sweep"))
        .unwrap_or_else(|| panic!("no note in {text}"));
    assert!(
        note.contains("the sweep at DM 1e300: searched only up to DM "),
        "{note}"
    );
    assert!(note.len() < 200, "{note}");
}

/// A very bright pulse (S/N 1000 in float data, 256 channels) is one candidate: its
/// echoes at trial DMs ~100 away (S/N ~11, smeared over the residual sweep) merge into
/// it. With a merge window centred on the band's mean ν⁻², echoes near the
/// low-frequency end of the sweep were left as `rfi` candidates in 5 of 6 noise seeds.
#[test]
fn a_very_bright_pulse_is_one_candidate() {
    let scenario = SCENARIO
        .replace("length_s = 12.0", "length_s = 10.0")
        .replace("tsamp_s = 1e-3", "tsamp_s = 1.024e-3")
        .replace("first_chan_mhz = 1593.75", "first_chan_mhz = 1599.21875")
        .replace("chan_step_mhz = -12.5", "chan_step_mhz = -1.5625")
        .replace("n_chan = 32", "n_chan = 256")
        .replace(
            "nbits = 8\nmean = 96.0\nsigma = 12.0",
            "nbits = 32\nmean = 0.0\nsigma = 1.0",
        )
        .replace(
            "t_inf_s = 4.0\ndm = 180.0\nwidth_ms = 4.0\nsnr = 25.0",
            "t_inf_s = 5.0\ndm = 500.0\nwidth_ms = 1.0\nsnr = 1000.0",
        );
    let scenario = scenario.split("[[rfi.impulse]]").next().unwrap();
    let dir = tempfile::tempdir().unwrap();
    for seed in 1..=3 {
        let file = dir.path().join(format!("bright{seed}.json"));
        let sim = write_scenario(&file, scenario, Container::Native, seed);
        assert_eq!(
            (sim.header.n_chan(), sim.header.nbits, sim.pulses.len()),
            (256, 32, 1)
        );
        let out = dir.path().join(format!("out{seed}"));
        let o = burstbook(&[
            "search",
            file.to_str().unwrap(),
            "--out",
            out.to_str().unwrap(),
            "--no-catalogue",
        ]);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        let rows: Vec<csv::StringRecord> = csv::Reader::from_path(out.join("candidates.csv"))
            .unwrap()
            .records()
            .map(|r| r.unwrap())
            .collect();
        assert_eq!(rows.len(), 1, "seed {seed}: {rows:?}");
    }
}

// A wide burst needs wide boxcars, and asking for them is one flag: the baseline
// window follows the widest boxcar (10×) unless a configuration file sets it.
#[test]
fn a_wide_burst_is_found_with_only_the_width_flag() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("wide.json");
    let scenario = SCENARIO
        .replace("length_s = 12.0", "length_s = 20.0")
        .replace("width_ms = 4.0", "width_ms = 300.0");
    write_scenario(&file, &scenario, Container::Native, 4);
    let out = dir.path().join("out");
    let o = burstbook(&[
        "search",
        file.to_str().unwrap(),
        "--dm-max",
        "300",
        "--max-width-ms",
        "600",
        "--out",
        out.to_str().unwrap(),
        "--no-catalogue",
    ]);
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert!(o.status.success(), "{stderr}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("candidates.json")).unwrap())
            .unwrap();
    assert_eq!(json["config"]["baseline_s"], 6.0);
    let best = json["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .max_by(|a, b| {
            a["snr"]
                .as_f64()
                .unwrap()
                .total_cmp(&b["snr"].as_f64().unwrap())
        })
        .expect("the wide burst is found");
    let (t, width_ms, snr) = (
        best["t_inf_s"].as_f64().unwrap(),
        best["width_ms"].as_f64().unwrap(),
        best["snr"].as_f64().unwrap(),
    );
    assert!((t - 4.0).abs() < 0.3, "{best}");
    assert!((150.0..=600.0).contains(&width_ms), "{best}");
    assert!(snr > 20.0, "{best}");
}

// `--smearing-fraction` sets the plan's fraction over the configuration's: the
// cheaper plan has fewer trials and still finds the burst; a fraction of 0 is
// refused in one line that names the setting.
#[test]
fn the_smearing_fraction_flag_sets_the_plan() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("obs.json");
    simulate(&file, Container::Native, 5);
    let search = |fraction: Option<&str>, out: &str| {
        let out = dir.path().join(out);
        let mut args = vec![
            "search",
            file.to_str().unwrap(),
            "--dm-max",
            "1000",
            "--out",
            out.to_str().unwrap(),
            "--no-catalogue",
        ];
        if let Some(f) = fraction {
            args.extend(["--smearing-fraction", f]);
        }
        (burstbook(&args), out)
    };
    let json = |out: &Path| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(out.join("candidates.json")).unwrap())
            .unwrap()
    };
    let (o, default_out) = search(None, "default");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let (o, coarse_out) = search(Some("1"), "coarse");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let (default, coarse) = (json(&default_out), json(&coarse_out));
    assert_eq!(default["config"]["plan"]["smearing_fraction"], 0.5);
    assert_eq!(coarse["config"]["plan"]["smearing_fraction"], 1.0);
    let trials = |j: &serde_json::Value| j["files"][0]["dm_trials"].as_u64().unwrap();
    assert!(
        trials(&coarse) < trials(&default),
        "{} {}",
        trials(&coarse),
        trials(&default)
    );
    let near_burst = coarse["candidates"]
        .as_array()
        .unwrap()
        .iter()
        .filter(|c| (c["dm"].as_f64().unwrap() - 180.0).abs() < 20.0)
        .count();
    assert_eq!(near_burst, 1, "{coarse}");
    let (o, _) = search(Some("0"), "refused");
    assert_one_line_failure(&o, &["smearing fraction"]);
}

// Dozens of undispersed pulses (a band-limited impulse train at DM 0) make the
// summary suggest the zero-DM filter; with the filter on they are gone, and so is
// the note.
#[test]
fn many_undispersed_candidates_suggest_the_zero_dm_filter() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("train.json");
    let scenario = SCENARIO.split("[[rfi.impulse]]").next().unwrap().to_owned()
        + "[[rfi.train]]\nfirst_s = 0.3\nperiod_s = 0.1\nwidth_ms = 2.0\nsnr = 8.0\n\
           freq_lo_mhz = 1250.0\nfreq_hi_mhz = 1450.0\n";
    write_scenario(&file, &scenario, Container::Native, 1);
    let search = |extra: &[&str]| {
        let out = dir.path().join("out");
        let mut args = vec![
            "search",
            file.to_str().unwrap(),
            "--dm-max",
            "300",
            "--out",
            out.to_str().unwrap(),
            "--no-catalogue",
        ];
        args.extend_from_slice(extra);
        let o = burstbook(&args);
        assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
        String::from_utf8_lossy(&o.stdout).into_owned()
    };
    let plain = search(&[]);
    let note = plain
        .lines()
        .find(|l| l.contains("nearly as bright at DM 0"))
        .unwrap_or_else(|| panic!("no zero-DM note: {plain}"));
    let count: usize = note.split_whitespace().nth(1).unwrap().parse().unwrap();
    assert!(count >= 10, "{note}");
    assert!(note.contains("--zero-dm"), "{note}");
    let filtered = search(&["--zero-dm"]);
    assert!(!filtered.contains("nearly as bright at DM 0"), "{filtered}");
    assert!(filtered.contains("1 astrophysical"), "{filtered}");
}

// Low frequencies: every block holds the whole sweep at the input's resolution. A
// search refused for memory fits once samples and channels are averaged as they are
// read, and still finds the burst at its DM and time; the catalogue keeps the file's
// own header and counts searched samples in the file's samples.
#[test]
fn averaging_on_read_fits_a_low_frequency_search_into_less_memory() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("low.json");
    let scenario = SCENARIO
        .replace("tsamp_s = 1e-3", "tsamp_s = 256e-6")
        .replace("first_chan_mhz = 1593.75", "first_chan_mhz = 199.8046875")
        .replace("chan_step_mhz = -12.5", "chan_step_mhz = -0.390625")
        .replace("n_chan = 32", "n_chan = 256")
        .replace("dm = 180.0", "dm = 12.0")
        .replace("width_ms = 4.0\nsnr = 25.0", "width_ms = 20.0\nsnr = 40.0");
    let scenario = scenario.split("[[rfi.impulse]]").next().unwrap();
    write_scenario(&file, scenario, Container::Native, 5);
    let out = dir.path().join("out");
    let catalogue = dir.path().join("cat.sqlite");
    let search = |extra: &[&str]| {
        let mut args = vec![
            "search",
            file.to_str().unwrap(),
            "--dm-max",
            "15",
            "--memory-limit-gib",
            "0.05",
            "--out",
            out.to_str().unwrap(),
            "--catalogue",
            catalogue.to_str().unwrap(),
        ];
        args.extend_from_slice(extra);
        burstbook(&args)
    };
    let refused = search(&[]);
    assert_one_line_failure(&refused, &["low.json", "memory", "--average-samples"]);

    let o = search(&["--average-samples", "8", "--average-channels", "2"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("candidates.json")).unwrap())
            .unwrap();
    assert_eq!(json["config"]["average"]["samples"], 8);
    let best = &json["candidates"][0];
    assert_eq!(json["candidates"].as_array().unwrap().len(), 1, "{json}");
    assert!((best["dm"].as_f64().unwrap() - 12.0).abs() < 0.5, "{best}");
    // Within the pulse width, smeared to tens of ms at 100 MHz.
    let width_s = best["width_ms"].as_f64().unwrap() / 1e3;
    assert!(
        (best["t_inf_s"].as_f64().unwrap() - 4.0).abs() < width_s,
        "{best}"
    );
    assert!(best["snr"].as_f64().unwrap() > 25.0, "{best}");
    assert_eq!(best["verdict"], "astrophysical");

    let db = rusqlite::Connection::open(&catalogue).unwrap();
    let (freq_lo_mhz, searched): (f64, i64) = db
        .query_row(
            "SELECT o.freq_lo_mhz, r.samples_searched FROM observation o \
             JOIN search_run r ON r.observation_id = o.id",
            [],
            |r| Ok((r.get(0)?, r.get(1)?)),
        )
        .unwrap();
    // The file's lowest channel centre, not the averaged pair's (100.390625 MHz).
    assert_eq!(freq_lo_mhz, 199.8046875 - 255.0 * 0.390625);
    // 12 s of 256 µs samples is 46 875; all but the sweep's share is searched.
    assert!((20_000..=46_875).contains(&searched), "{searched}");
    assert_eq!(searched % 8, 0, "whole averaged samples: {searched}");
}
