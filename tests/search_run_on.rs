//! Consecutive files of one recording: a burst whose sweep crosses from one file into
//! the next is found by reading on into the next file, and reported once, by the file
//! its boxcar starts in.

mod cli_common;
mod common;

use std::path::Path;

use burstbook::obs::{self, Container, Header, SampleSource};
use burstbook::search::{
    FileResult, SearchConfig, Workspace, drop_repeats_across_cut, search_run_on_in, search_source,
};
use burstbook::simulate::{Burst, expected_snr};
use burstbook::units::delay_to_infinity_s;
use burstbook::{Candidate, Verdict};
use cli_common::{assert_success, burstbook};
use common::{K_HANDBOOK_S_MHZ2, add, burst, header, noise, source};

const N_CHAN: usize = 32;
const TSAMP: f64 = 1e-3;
/// Samples of the whole recording, and of its first file.
const N: u64 = 12_000;
const N_FIRST: u64 = 6_000;

fn config() -> SearchConfig {
    let mut c = SearchConfig::default();
    c.plan.dm_max = 300.0;
    c
}

/// The test recording (noise of `seed`) holding one [`burst_at_top`] reaching the
/// top channel at `top_sample`, with that burst.
fn recording_with_burst(
    top_sample: f64,
    dm: f64,
    snr: f64,
    seed: u64,
) -> (Header, Burst, Vec<f32>) {
    let whole = header(N_CHAN, N, TSAMP);
    let b = burst_at_top(&whole, top_sample, dm, snr);
    let mut data = noise(&whole, seed);
    add(&whole, &mut data, &b);
    (whole, b, data)
}

/// A burst of `dm` whose top channel sees it `top_sample` samples into the recording.
fn burst_at_top(h: &Header, top_sample: f64, dm: f64, snr: f64) -> Burst {
    let to_top = K_HANDBOOK_S_MHZ2 * dm / h.freqs_mhz[0].powi(2);
    burst(h, top_sample * TSAMP - to_top, dm, 4e-3, snr)
}

/// The recording's two files: headers and samples.
fn split(whole: &Header, data: &[f32]) -> [(Header, Vec<f32>); 2] {
    let mut first = whole.clone();
    first.n_samples = N_FIRST;
    let mut second = whole.clone();
    second.start = whole.epoch_of_sample(N_FIRST as f64);
    second.n_samples = N - N_FIRST;
    let cut = N_FIRST as usize * N_CHAN;
    [
        (first, data[..cut].to_vec()),
        (second, data[cut..].to_vec()),
    ]
}

/// Samples `from..to` of the recording `whole` holding `data`, as a file of their own.
fn part_of(whole: &Header, data: &[f32], from: u64, to: u64) -> Box<dyn SampleSource> {
    let mut h = whole.clone();
    h.start = whole.epoch_of_sample(from as f64);
    h.n_samples = to - from;
    source(
        h,
        data[from as usize * N_CHAN..to as usize * N_CHAN].to_vec(),
    )
}

/// Samples `from..to` of the recording `whole` holding `data`, written as the native
/// file `name` in `dir`; returns its path.
fn write_part(
    dir: &Path,
    name: &str,
    (whole, data): (&Header, &[f32]),
    from: u64,
    to: u64,
) -> std::path::PathBuf {
    let path = dir.join(name);
    let mut h = whole.clone();
    h.start = whole.epoch_of_sample(from as f64);
    h.n_samples = to - from;
    let mut sink = obs::create(&path, &h, Container::Native).unwrap();
    sink.write_rows(&data[from as usize * N_CHAN..to as usize * N_CHAN])
        .unwrap();
    sink.finish().unwrap();
    path
}

/// The candidates within 20 ms of `t_inf_s` with a DM within 10 % of `dm`.
fn found(r: &FileResult, t_inf_s: f64, dm: f64) -> Vec<&Candidate> {
    found_within(r, t_inf_s, dm, 0.02)
}

/// [`found`] within `within_s` of `t_inf_s` (averaged samples time a burst coarser).
fn found_within(r: &FileResult, t_inf_s: f64, dm: f64, within_s: f64) -> Vec<&Candidate> {
    r.candidates
        .iter()
        .filter(|c| (c.t_inf_s - t_inf_s).abs() < within_s && (c.dm - dm).abs() < 0.1 * dm)
        .collect()
}

// A burst at DM 250 whose sweep (0.32 s) starts 0.1 s before the first file ends is
// missed by that file alone and found, at its expected S/N, when the search reads on
// into the second; a burst that starts inside the second file, within the rows read
// on into, is the second's, not reported by the first. The first file is then searched at every trial DM to its
// last sample.
#[test]
fn a_sweep_crossing_into_the_next_file_is_found_once() {
    let whole = header(N_CHAN, N, TSAMP);
    let crossing = burst_at_top(&whole, N_FIRST as f64 - 100.0, 250.0, 20.0);
    // Clear of the crossing sweep, which ends 0.22 s into the second file.
    let after_cut = burst_at_top(&whole, N_FIRST as f64 + 400.0, 150.0, 20.0);
    let mut data = noise(&whole, 41);
    for b in [&crossing, &after_cut] {
        add(&whole, &mut data, b);
    }
    let expected = expected_snr(&whole, &crossing);
    let [(h1, d1), (h2, d2)] = split(&whole, &data);
    let c = config();

    let alone = search_source(source(h1.clone(), d1.clone()), "first", &c, None).unwrap();
    assert!(
        found(&alone, crossing.t_inf_s, crossing.dm).is_empty(),
        "{:#?}",
        alone.candidates
    );
    assert!(
        alone.samples_searched < N_FIRST - 250,
        "{}",
        alone.samples_searched
    );

    let next = source(h2.clone(), d2.clone());
    let joined = search_run_on_in(
        &mut Workspace::default(),
        source(h1.clone(), d1),
        Some(next),
        "first",
        &c,
        None,
    )
    .unwrap();
    let hits = found(&joined, crossing.t_inf_s, crossing.dm);
    assert_eq!(hits.len(), 1, "{:#?}", joined.candidates);
    assert!(
        hits[0].snr > 0.85 * expected - 2.0,
        "S/N {} of {expected}",
        hits[0].snr
    );
    assert_eq!(
        hits[0].verdict,
        Verdict::Astrophysical,
        "{:?}",
        hits[0].reasons
    );
    assert!(
        joined
            .candidates
            .iter()
            .all(|c| c.t_inf_s < N_FIRST as f64 * TSAMP)
    );
    assert_eq!(joined.samples_searched, N_FIRST);
    assert_eq!(joined.run_on_samples, joined.layout.overlap as u64);
    assert_eq!(joined.header, h1);
    assert_eq!(joined.highest_dm_searched(), Some(joined.plan.max_dm()));

    // The second file, searched from its own start, has the other burst.
    let second = search_source(source(h2, d2), "second", &c, None).unwrap();
    let t_in_second = after_cut.t_inf_s - N_FIRST as f64 * TSAMP;
    assert_eq!(
        found(&second, t_in_second, after_cut.dm).len(),
        1,
        "{:#?}",
        second.candidates
    );
    assert!(found(&joined, after_cut.t_inf_s, after_cut.dm).is_empty());

    // As found in the recording searched whole.
    let all = search_source(source(whole, data), "whole", &c, None).unwrap();
    let in_whole = found(&all, crossing.t_inf_s, crossing.dm);
    assert_eq!(in_whole.len(), 1, "{:#?}", all.candidates);
    assert!((in_whole[0].snr - hits[0].snr).abs() < 0.1 * in_whole[0].snr);
}

/// Writes the two files of a recording (8-bit native) with a burst crossing the cut
/// into `dir`; returns their paths and the burst's DM.
fn write_consecutive_files(dir: &Path) -> ([std::path::PathBuf; 2], f64) {
    write_consecutive_files_at(dir, N_FIRST as f64 - 100.0, 43)
}

/// [`write_consecutive_files`] with the burst reaching the top channel at
/// `top_sample` of the recording, and noise of `seed`.
fn write_consecutive_files_at(
    dir: &Path,
    top_sample: f64,
    seed: u64,
) -> ([std::path::PathBuf; 2], f64) {
    write_consecutive_files_as(dir, top_sample, seed, [Container::Native; 2])
}

/// [`write_consecutive_files_at`] in the given containers (`a.json` or `a.fits`,
/// then `b…`).
fn write_consecutive_files_as(
    dir: &Path,
    top_sample: f64,
    seed: u64,
    containers: [Container; 2],
) -> ([std::path::PathBuf; 2], f64) {
    let (whole, crossing, data) = recording_with_burst(top_sample, 250.0, 25.0, seed);
    let paths = [("a", containers[0]), ("b", containers[1])].map(|(name, c)| {
        dir.join(match c {
            Container::Native => format!("{name}.json"),
            Container::Fits => format!("{name}.fits"),
        })
    });
    for ((path, container), (mut h, rows)) in paths.iter().zip(containers).zip(split(&whole, &data))
    {
        // 8-bit samples (mean 96, σ 12), read as bytes, as survey files are.
        h.nbits = 8;
        let bytes: Vec<f32> = rows
            .iter()
            .map(|&x| (96.0 + 12.0 * (x - 1.0) * 7.07).round())
            .collect();
        let mut sink = obs::create(path, &h, container).unwrap();
        sink.write_rows(&bytes).unwrap();
        sink.finish().unwrap();
    }
    (paths, crossing.dm)
}

/// `burstbook search FILES --out OUT --no-catalogue --dm-max 300 EXTRA...`.
fn search_cli(files: &[&Path], out: &Path, extra: &[&str]) -> std::process::Output {
    let mut args: Vec<&std::ffi::OsStr> = vec!["search".as_ref()];
    args.extend(files.iter().map(|f| f.as_os_str()));
    args.extend::<[&std::ffi::OsStr; 5]>([
        "--out".as_ref(),
        out.as_os_str(),
        "--no-catalogue".as_ref(),
        "--dm-max".as_ref(),
        "300".as_ref(),
    ]);
    args.extend(extra.iter().map(std::ffi::OsStr::new));
    burstbook(&args)
}

/// `burstbook search FILES --out OUT --catalogue CATALOGUE --dm-max 300`, which must
/// succeed; its standard output.
fn search_catalogued(files: &[&Path], out: &Path, catalogue: &Path) -> String {
    let mut args: Vec<&std::ffi::OsStr> = vec!["search".as_ref()];
    args.extend(files.iter().map(|f| f.as_os_str()));
    args.extend::<[&std::ffi::OsStr; 6]>([
        "--out".as_ref(),
        out.as_os_str(),
        "--catalogue".as_ref(),
        catalogue.as_os_str(),
        "--dm-max".as_ref(),
        "300".as_ref(),
    ]);
    let run = burstbook(&args);
    assert_success(&run);
    String::from_utf8_lossy(&run.stdout).into_owned()
}

/// The DMs of the candidates the catalogue holds of files whose path ends in `file`
/// ("" for all).
fn catalogued_dms(catalogue: &Path, file: &str) -> Vec<f64> {
    let conn = rusqlite::Connection::open(catalogue).unwrap();
    let mut stmt = conn
        .prepare("SELECT dm FROM candidate WHERE file LIKE '%' || ?1")
        .unwrap();
    stmt.query_map([file], |r| r.get(0))
        .unwrap()
        .map(Result::unwrap)
        .collect()
}

/// The DMs of the candidates of `file` in the CSV at `out`.
fn candidate_dms(out: &Path, file: &str) -> Vec<f64> {
    let csv = std::fs::read_to_string(out.join("candidates.csv")).unwrap();
    let mut lines = csv.lines();
    let columns: Vec<&str> = lines.next().unwrap().split(',').collect();
    let col = |name: &str| columns.iter().position(|&c| c == name).unwrap();
    let (file_col, dm_col) = (col("file"), col("dm"));
    lines
        .map(|l| l.split(',').collect::<Vec<_>>())
        .filter(|f| f[file_col].ends_with(file))
        .map(|f| f[dm_col].parse().unwrap())
        .collect()
}

/// `run_on_s` of `file` in the candidates.json at `out`.
fn run_on_s(out: &Path, file: &str) -> f64 {
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("candidates.json")).unwrap())
            .unwrap();
    let files = json["files"].as_array().unwrap();
    let f = files
        .iter()
        .find(|f| f["file"].as_str().unwrap().ends_with(file));
    f.unwrap()["run_on_s"].as_f64().unwrap()
}

// From the command line: two consecutive files, given in either order, are joined and
// the crossing burst is a candidate of the first; `--no-join` searches each alone and
// misses it.
#[test]
fn the_command_joins_consecutive_files_unless_told_not_to() {
    let dir = tempfile::tempdir().unwrap();
    let ([a, b], dm) = write_consecutive_files(dir.path());
    let near = |dms: &[f64]| dms.iter().filter(|&&d| (d - dm).abs() < 0.1 * dm).count();
    for (k, files) in [[&b, &a], [&a, &b]].iter().enumerate() {
        let out = dir.path().join(format!("joined{k}"));
        let run = search_cli(&[files[0], files[1]], &out, &[]);
        assert_success(&run);
        let stdout = String::from_utf8_lossy(&run.stdout);
        assert!(
            stdout.contains("read on") && stdout.contains("b.json"),
            "{stdout}"
        );
        assert_eq!(near(&candidate_dms(&out, "a.json")), 1, "{stdout}");
        assert!(run_on_s(&out, "a.json") > 0.3);
        assert_eq!(run_on_s(&out, "b.json"), 0.0);
    }
    let out = dir.path().join("apart");
    let run = search_cli(&[&a, &b], &out, &["--no-join"]);
    assert_success(&run);
    assert!(!String::from_utf8_lossy(&run.stdout).contains("read on"));
    assert_eq!(near(&candidate_dms(&out, "a.json")), 0);
}

// A burst whose sweep starts at the cut, or a few samples either side of it, is
// reported by exactly one of the two files, at the S/N the whole recording gives it:
// the later file, searched from its own first sample, finds the part of the sweep
// that falls in it (at a DM a few percent low, and S/N 22 against 25 at one sample
// after the cut), which `drop_repeats_across_cut` leaves out as the pulse the earlier
// file found whole; nothing else is left out.
#[test]
fn a_burst_at_the_cut_is_reported_by_one_file_only() {
    let whole = header(N_CHAN, N, TSAMP);
    let c = config();
    for (k, offset) in [-3.0, -1.0, 0.0, 1.0, 3.0].into_iter().enumerate() {
        let b = burst_at_top(&whole, N_FIRST as f64 + offset, 250.0, 25.0);
        let mut data = noise(&whole, 50 + k as u64);
        add(&whole, &mut data, &b);
        let (hits, left_out) = reports_across_cut(&whole, &data, N_FIRST, &b, &c, 0.02);
        assert_eq!(
            hits.len(),
            1,
            "top-channel arrival {offset} samples after the cut: {hits:#?}"
        );
        assert!(
            hits[0].snr > 0.85 * expected_snr(&whole, &b) - 2.0,
            "{hits:#?}"
        );
        // Only candidates at the cut are left out.
        assert!(left_out <= 1, "{left_out}");
    }
}

// With --average-samples 16, a file of 10 samples between two long ones (shorter than
// one group, so refused on its own) is joined: the first file reads through it into
// the third, and the burst crossing all three cuts is reported once, by the first.
#[test]
fn averaged_files_are_joined_through_a_file_shorter_than_a_group() {
    let dir = tempfile::tempdir().unwrap();
    let (whole, crossing, data) = recording_with_burst(N_FIRST as f64 - 100.0, 250.0, 40.0, 48);
    let cuts = [0, N_FIRST + 12, N_FIRST + 22, N];
    let names = ["a.json", "b.json", "c.json"];
    let paths: Vec<_> = (0..3)
        .map(|k| write_part(dir.path(), names[k], (&whole, &data), cuts[k], cuts[k + 1]))
        .collect();
    let out = dir.path().join("out");
    let files: Vec<&Path> = paths.iter().map(|p| p.as_path()).collect();
    let run = search_cli(&files, &out, &["--average-samples", "16"]);
    assert_success(&run);
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert!(
        stdout.contains("a.json: read on") && stdout.contains("through"),
        "{stdout}"
    );
    let dm = crossing.dm;
    let near = |dms: &[f64]| dms.iter().filter(|&&d| (d - dm).abs() < 0.2 * dm).count();
    let found_in = names.map(|name| near(&candidate_dms(&out, name)));
    assert_eq!(found_in, [1, 0, 0], "{stdout}");
}

// With averaging (16 samples) and a first file 12 samples over whole groups, a burst
// at the cut, or a few samples either side of it, is reported by exactly one file,
// at the S/N of the recording searched whole with that averaging. The first file owns
// the group straddling the cut, which the second file's first group overlaps, so a
// repeat is offset from the first file's candidate by a fraction of a group; it is
// still left out.
#[test]
fn an_averaged_burst_at_the_cut_is_reported_by_one_file_only() {
    let whole = header(N_CHAN, N, TSAMP);
    let mut c = config();
    c.average.samples = 16;
    let cut = N_FIRST + 12;
    for (k, offset) in [-8.0, -4.0, -2.0, 0.0, 1.0, 2.0, 3.0, 4.0, 6.0, 10.0]
        .into_iter()
        .enumerate()
    {
        let b = burst_at_top(&whole, cut as f64 + offset, 250.0, 40.0);
        let mut data = noise(&whole, 60 + k as u64);
        add(&whole, &mut data, &b);
        let all = search_run_on_in(
            &mut Workspace::default(),
            source(whole.clone(), data.clone()),
            None,
            "whole",
            &c,
            None,
        )
        .unwrap();
        // Two averaged samples: the grid times the burst to about one.
        let within_s = 2.0 * 16.0 * TSAMP;
        let in_whole = found_within(&all, b.t_inf_s, b.dm, within_s);
        assert_eq!(in_whole.len(), 1, "{:#?}", all.candidates);
        let (hits, left_out) = reports_across_cut(&whole, &data, cut, &b, &c, within_s);
        assert_eq!(
            hits.len(),
            1,
            "top-channel arrival {offset} samples after the cut: {hits:#?}"
        );
        assert!(
            (hits[0].snr - in_whole[0].snr).abs() < 0.15 * in_whole[0].snr,
            "{hits:#?} against {in_whole:#?}"
        );
        assert!(left_out <= 1, "{left_out}");
    }
}

/// The candidates for burst `b` of the recording `whole` holding `data`, cut into two
/// files at sample `cut` and searched with `c` as the command searches them: the first
/// read on into the second, the second from its own start, less the repeats across
/// the cut ([`drop_repeats_across_cut`]), as [`found_within`] `within_s` of the burst;
/// and how many repeats were left out.
fn reports_across_cut(
    whole: &Header,
    data: &[f32],
    cut: u64,
    b: &Burst,
    c: &SearchConfig,
    within_s: f64,
) -> (Vec<Candidate>, usize) {
    let part = |from: u64, to: u64| part_of(whole, data, from, to);
    let search = |file: Box<dyn SampleSource>, next, label| {
        search_run_on_in(&mut Workspace::default(), file, next, label, c, None).unwrap()
    };
    let first = search(part(0, cut), Some(part(cut, N)), "first");
    // The groups that start in the first file, the last completed by the second.
    assert_eq!(
        first.header.n_samples,
        cut.div_ceil(c.average.samples as u64)
    );
    let mut second = search(part(cut, N), None, "second");
    let before = second.candidates.len();
    let offset_s = cut as f64 * TSAMP;
    let left_out = drop_repeats_across_cut(
        &second.header,
        &first.candidates,
        offset_s,
        first.header.duration_s(),
        &mut second.candidates,
    );
    assert_eq!(second.candidates.len() + left_out, before);
    let hits = found_within(&first, b.t_inf_s, b.dm, within_s)
        .into_iter()
        .chain(found_within(&second, b.t_inf_s - offset_s, b.dm, within_s))
        .cloned()
        .collect();
    (hits, left_out)
}

// A file searched on its own into a catalogue (its successor not yet written, as
// when a survey searches each file as it arrives), then listed again with the file
// that continues it: the earlier search did not read on, so skipping the first file
// as already searched would lose the crossing burst for good. It is searched again,
// joined, and its catalogue run completed with the burst, once; listed a third
// time, both files are skipped.
#[test]
fn a_file_searched_alone_is_joined_when_its_successor_comes() {
    let dir = tempfile::tempdir().unwrap();
    let ([a, b], dm) = write_consecutive_files(dir.path());
    let catalogue = dir.path().join("survey.sqlite");
    let search = |files: &[&Path], out: &Path| search_catalogued(files, out, &catalogue);
    let near = |dms: &[f64]| dms.iter().filter(|&&d| (d - dm).abs() < 0.1 * dm).count();
    let catalogued = || catalogued_dms(&catalogue, "a.json");
    let alone = dir.path().join("alone");
    search(&[&a], &alone);
    assert_eq!(near(&candidate_dms(&alone, "a.json")), 0);
    assert_eq!(near(&catalogued()), 0);
    let joined = dir.path().join("joined");
    let stdout = search(&[&a, &b], &joined);
    assert!(stdout.contains("searched again"), "{stdout}");
    assert!(stdout.contains("completed"), "{stdout}");
    assert_eq!(near(&candidate_dms(&joined, "a.json")), 1, "{stdout}");
    assert_eq!(near(&catalogued()), 1, "{stdout}");
    let again = dir.path().join("again");
    let stdout = search(&[&a, &b], &again);
    assert_eq!(stdout.matches("skipped").count(), 2, "{stdout}");
    assert_eq!(near(&catalogued()), 1, "{stdout}");
}

// Each file searched alone as it arrived, then both listed: the first is searched
// again, reading on, and finds the pulse crossing the cut whole; the second, skipped
// as already searched, held that pulse again, found from the part of its sweep after
// the cut. That repeat is taken out of its catalogue run and the outputs, so the
// pulse is catalogued once.
#[test]
fn a_repeat_recorded_before_the_file_it_continues_was_joined_is_taken_out() {
    let dir = tempfile::tempdir().unwrap();
    let ([a, b], dm) = write_consecutive_files_at(dir.path(), N_FIRST as f64 - 3.0, 54);
    let catalogue = dir.path().join("survey.sqlite");
    let search = |files: &[&Path], out: &str| {
        let out = dir.path().join(out);
        let stdout = search_catalogued(files, &out, &catalogue);
        (out, stdout)
    };
    let near = |dms: &[f64]| dms.iter().filter(|&&d| (d - dm).abs() < 0.1 * dm).count();
    let catalogued = || near(&catalogued_dms(&catalogue, ""));
    search(&[&a], "first");
    let (out, stdout) = search(&[&b], "second");
    assert_eq!(near(&candidate_dms(&out, "b.json")), 1, "{stdout}");
    assert_eq!(catalogued(), 1);
    let (out, stdout) = search(&[&a, &b], "both");
    assert!(stdout.contains("taken out of run"), "{stdout}");
    assert_eq!(near(&candidate_dms(&out, "a.json")), 1, "{stdout}");
    assert_eq!(near(&candidate_dms(&out, "b.json")), 0, "{stdout}");
    assert_eq!(catalogued(), 1, "{stdout}");
    // Listed again: both skipped, nothing more taken out.
    let (_, stdout) = search(&[&a, &b], "again");
    assert!(!stdout.contains("taken out"), "{stdout}");
    assert_eq!(catalogued(), 1, "{stdout}");
}

/// A recording that continues another but whose every read fails (a sample that is
/// not finite, a disk error).
struct Unreadable(Header);

impl obs::SampleSource for Unreadable {
    fn header(&self) -> &Header {
        &self.0
    }
    fn read_rows(&mut self, _: &mut [f32]) -> burstbook::Result<usize> {
        Err(burstbook::Error::bad_input("second", "sample 0 is NaN"))
    }
}

// When the next file cannot be read, the first is searched as on its own, to its
// last sample, even when its last block ends exactly where the file does (the block
// then looks like one more is to come, and none does); and it is not said to have
// read on into the next.
#[test]
fn an_unreadable_next_file_leaves_the_first_searched_to_its_end() {
    // A burst in the first file's last block, all of its sweep in that file.
    let (whole, tail, data) = recording_with_burst(N_FIRST as f64 - 100.0, 50.0, 20.0, 47);
    let [(h1, d1), (h2, _)] = split(&whole, &data);
    let mut c = config();
    let overlap = burstbook::search::block_layout(&h1, &c).unwrap().overlap as u64;
    // Blocks of `N_FIRST - overlap` new rows: the second block ends at the file's end.
    let advance = N_FIRST - overlap;
    assert!(advance >= overlap, "overlap {overlap}");
    c.block_s = (advance as f64 - 0.5) * TSAMP;
    let alone = search_source(source(h1.clone(), d1.clone()), "first", &c, None).unwrap();
    let joined = search_run_on_in(
        &mut Workspace::default(),
        source(h1, d1),
        Some(Box::new(Unreadable(h2))),
        "first",
        &c,
        None,
    )
    .unwrap();
    assert_eq!(found(&alone, tail.t_inf_s, tail.dm).len(), 1);
    assert_eq!(joined.samples_searched, alone.samples_searched);
    assert_eq!(joined.trials, alone.trials);
    assert_eq!(joined.candidates, alone.candidates);
    assert_eq!(joined.run_on_samples, 0);
}

// A file shorter than the rows read on into (a recording interrupted and resumed, a
// short file between two long ones) is read through into the file after it: a burst
// whose sweep starts in the first file and crosses the short one into the third is
// found by the first, once, as in the recording searched whole.
#[test]
fn a_short_file_is_read_through_into_the_one_after_it() {
    let dir = tempfile::tempdir().unwrap();
    // The sweep at DM 250 lasts 0.32 s; the middle file holds 0.05 s.
    let (whole, crossing, data) = recording_with_burst(N_FIRST as f64 - 100.0, 250.0, 25.0, 44);
    let cuts = [0, N_FIRST, N_FIRST + 50, N];
    let paths: Vec<_> = ["a.json", "b.json", "c.json"]
        .iter()
        .enumerate()
        .map(|(k, name)| write_part(dir.path(), name, (&whole, &data), cuts[k], cuts[k + 1]))
        .collect();
    let out = dir.path().join("out");
    let files: Vec<&Path> = paths.iter().map(|p| p.as_path()).collect();
    let run = search_cli(&files, &out, &[]);
    assert_success(&run);
    let stdout = String::from_utf8_lossy(&run.stdout);
    let dm = crossing.dm;
    let near = |dms: &[f64]| dms.iter().filter(|&&d| (d - dm).abs() < 0.1 * dm).count();
    assert_eq!(near(&candidate_dms(&out, "a.json")), 1, "{stdout}");
    assert_eq!(near(&candidate_dms(&out, "b.json")), 0, "{stdout}");
    assert_eq!(near(&candidate_dms(&out, "c.json")), 0, "{stdout}");
    assert!(stdout.contains("through"), "{stdout}");
}

// A file shorter than a sweep at the highest DM (0.2 s here, the sweep at DM 250
// lasting 0.32 s), read on into a long one, is searched at every trial DM and as a
// longer file is: a burst starting in it is found by it with the S/N, DM and verdict
// the recording searched whole gives. Its one block used to end 0.5 s after its
// start, too few samples to normalise the series and measure the noise of wide
// boxcars: the burst came out at 32 ms and DM 238, called rfi. It now reads on until
// a block is full.
#[test]
fn a_short_file_read_on_into_a_long_one_is_searched_at_every_dm() {
    let whole = header(N_CHAN, N, TSAMP);
    let (lo, hi) = (N_FIRST - 200, N_FIRST);
    let b = burst_at_top(&whole, lo as f64 + 100.0, 250.0, 25.0);
    let mut data = noise(&whole, 45);
    add(&whole, &mut data, &b);
    let part = |from: u64, to: u64| part_of(&whole, &data, from, to);
    let c = config();
    let all = search_source(source(whole.clone(), data.clone()), "whole", &c, None).unwrap();
    let in_whole = found(&all, b.t_inf_s, b.dm);
    assert_eq!(in_whole.len(), 1, "{:#?}", all.candidates);
    let short = search_run_on_in(
        &mut Workspace::default(),
        part(lo, hi),
        Some(part(hi, N)),
        "short",
        &c,
        None,
    )
    .unwrap();
    let t_in_short = b.t_inf_s - lo as f64 * TSAMP;
    let in_short = found(&short, t_in_short, b.dm);
    assert_eq!(
        in_short.len(),
        1,
        "highest DM searched {:?}: {:#?}",
        short.highest_dm_searched(),
        short.candidates
    );
    let (s, w) = (in_short[0], in_whole[0]);
    assert!((s.snr / w.snr - 1.0).abs() < 0.1, "{s:#?} {w:#?}");
    assert_eq!(s.verdict, w.verdict, "{s:#?} {w:#?}");
    assert!((s.dm - w.dm).abs() < 0.03 * w.dm, "{s:#?} {w:#?}");
}

// With --average-samples, consecutive files whose first is not a whole number of
// averaged samples long (12 samples over a multiple of 16 here) are joined: the
// crossing burst, found in the recording searched whole with the same averaging, is
// found once, by the first file, which reads on into the second. Averaged alone, the
// first file lost its last partial group and ended 0.75 averaged samples before the
// second started, so the two were not joined and the burst was missed.
#[test]
fn averaged_files_are_joined_whatever_the_first_length() {
    let dir = tempfile::tempdir().unwrap();
    let whole = header(N_CHAN, N, TSAMP);
    let cut = N_FIRST + 12;
    let crossing = burst_at_top(&whole, cut as f64 - 100.0, 250.0, 40.0);
    let mut data = noise(&whole, 46);
    add(&whole, &mut data, &crossing);
    let recording = (&whole, data.as_slice());
    let a = write_part(dir.path(), "a.json", recording, 0, cut);
    let b = write_part(dir.path(), "b.json", recording, cut, N);
    let all = write_part(dir.path(), "whole.json", recording, 0, N);
    let averaging = ["--average-samples", "16"];
    let dm = crossing.dm;
    let near = |dms: &[f64]| dms.iter().filter(|&&d| (d - dm).abs() < 0.2 * dm).count();
    let out_whole = dir.path().join("out-whole");
    let run = search_cli(&[&all], &out_whole, &averaging);
    assert_success(&run);
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert_eq!(
        near(&candidate_dms(&out_whole, "whole.json")),
        1,
        "{stdout}"
    );
    let out = dir.path().join("out");
    let run = search_cli(&[&a, &b], &out, &averaging);
    assert_success(&run);
    let (stdout, stderr) = (
        String::from_utf8_lossy(&run.stdout),
        String::from_utf8_lossy(&run.stderr),
    );
    assert!(
        stdout.contains("read on") && !stderr.contains("not joined"),
        "{stderr}"
    );
    assert_eq!(near(&candidate_dms(&out, "a.json")), 1, "{stdout}");
    assert_eq!(near(&candidate_dms(&out, "b.json")), 0, "{stdout}");
    // The second file's first 4 samples complete the first's last group, then whole
    // groups are read on into.
    let read_on = (run_on_s(&out, "a.json") / TSAMP).round() as u64;
    assert_eq!(read_on % 16, 4, "{read_on}");
    assert_eq!(run_on_s(&out, "b.json"), 0.0);
}

// From the command line, with the files listed latest first: a burst reaching the top
// channel a sample after the cut is reported once, by the first file, and a line
// says the second file left out its repeat.
#[test]
fn the_command_reports_a_burst_at_the_cut_once() {
    let dir = tempfile::tempdir().unwrap();
    let ([a, b], dm) = write_consecutive_files_at(dir.path(), N_FIRST as f64 + 1.0, 53);
    let out = dir.path().join("out");
    let run = search_cli(&[&b, &a], &out, &[]);
    assert_success(&run);
    let stdout = String::from_utf8_lossy(&run.stdout);
    let near = |dms: &[f64]| dms.iter().filter(|&&d| (d - dm).abs() < 0.1 * dm).count();
    let (in_a, in_b) = (
        near(&candidate_dms(&out, "a.json")),
        near(&candidate_dms(&out, "b.json")),
    );
    assert_eq!((in_a, in_b), (1, 0), "{stdout}");
    assert!(stdout.contains("left out"), "{stdout}");
}

// A file that starts where another ends but is not joined to it (here its header
// names another source) gets a note naming the field, on standard error: the sweep
// crossing between them is missed, and the user should know why.
#[test]
fn a_file_following_another_but_not_joined_gets_a_note() {
    let dir = tempfile::tempdir().unwrap();
    let ([a, b], _) = write_consecutive_files(dir.path());
    let mut json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(&b).unwrap()).unwrap();
    json["source"] = "ANOTHER FIELD".into();
    std::fs::write(&b, json.to_string()).unwrap();
    let out = dir.path().join("out");
    let run = search_cli(&[&a, &b], &out, &[]);
    assert_success(&run);
    let stderr = String::from_utf8_lossy(&run.stderr);
    let notes: Vec<&str> = stderr
        .lines()
        .filter(|l| l.contains("not joined"))
        .collect();
    assert_eq!(notes.len(), 1, "{stderr}");
    assert!(
        notes[0].contains("b.json") && notes[0].contains("a.json") && notes[0].contains("source"),
        "{stderr}"
    );
    assert!(!String::from_utf8_lossy(&run.stdout).contains("read on"));
}

// A recording written partly as native files and partly as FITS (a change of
// recorder, or files converted one by one) is still joined: FITS keeps the site as
// Earth-fixed metres, and its round trip moves the longitude and latitude by about
// 1e-9°, a tenth of a millimetre, which must not count as another site.
#[test]
fn a_native_file_continued_by_a_fits_file_is_joined() {
    let dir = tempfile::tempdir().unwrap();
    let ([a, b], dm) = write_consecutive_files_as(
        dir.path(),
        N_FIRST as f64 - 100.0,
        43,
        [Container::Native, Container::Fits],
    );
    let out = dir.path().join("out");
    let run = search_cli(&[&a, &b], &out, &[]);
    assert_success(&run);
    let stdout = String::from_utf8_lossy(&run.stdout);
    assert!(
        stdout.contains("read on"),
        "{stdout}{}",
        String::from_utf8_lossy(&run.stderr)
    );
    let near = |dms: &[f64]| dms.iter().filter(|&&d| (d - dm).abs() < 0.1 * dm).count();
    assert_eq!(near(&candidate_dms(&out, "a.json")), 1, "{stdout}");
}

// A file shorter than the sweep at the highest DM, read on into a long one, is planned
// and searched to the highest DM: the rows read on into hold the rest of its sweeps.
// Its plan used to stop at DM 164, the DMs whose sweep fits in the 0.2 s file alone.
#[test]
fn a_short_file_read_on_into_a_long_one_is_planned_to_every_dm() {
    let whole = header(N_CHAN, N, TSAMP);
    let data = noise(&whole, 46);
    let part = |from: u64, to: u64| part_of(&whole, &data, from, to);
    let c = config();
    let alone = search_source(part(N_FIRST - 200, N_FIRST), "short", &c, None).unwrap();
    assert!(alone.plan.max_dm() < 200.0, "{}", alone.plan.max_dm());
    let short = search_run_on_in(
        &mut Workspace::default(),
        part(N_FIRST - 200, N_FIRST),
        Some(part(N_FIRST, N)),
        "short",
        &c,
        None,
    )
    .unwrap();
    assert_eq!(short.plan.max_dm(), c.plan.dm_max);
    assert_eq!(short.highest_dm_searched(), Some(c.plan.dm_max));
    assert_eq!(short.samples_searched, 200);
}

// The rule that leaves a repeat across the cut out: a later candidate on the bow-tie
// of an earlier one is dropped when it is no brighter, and kept when it is brighter
// (then the earlier may be its echo, and a burst must not be lost for it) unless its
// boxcar starts where both files searched, in the earlier file's last averaged group:
// there the later file's grid may simply catch the pulse better.
#[test]
fn only_a_repeat_no_brighter_than_the_earlier_candidate_is_dropped() {
    let (whole, crossing, data) = recording_with_burst(N_FIRST as f64 - 100.0, 250.0, 20.0, 47);
    let [(h1, d1), (h2, d2)] = split(&whole, &data);
    let c = config();
    let first = search_run_on_in(
        &mut Workspace::default(),
        source(h1.clone(), d1),
        Some(source(h2.clone(), d2)),
        "first",
        &c,
        None,
    )
    .unwrap();
    let earlier = found(&first, crossing.t_inf_s, crossing.dm);
    assert_eq!(earlier.len(), 1, "{:#?}", first.candidates);
    let offset_s = h1.duration_s();
    // The same pulse as the later file would time it, fainter or brighter.
    let seen_later = |snr_factor: f64| {
        let mut c = earlier[0].clone();
        c.t_inf_s -= offset_s;
        c.snr *= snr_factor;
        vec![c]
    };
    let mut fainter = seen_later(0.9);
    assert_eq!(
        drop_repeats_across_cut(&h2, &first.candidates, offset_s, offset_s, &mut fainter),
        1
    );
    assert!(fainter.is_empty());
    let mut brighter = seen_later(1.2);
    assert_eq!(
        drop_repeats_across_cut(&h2, &first.candidates, offset_s, offset_s, &mut brighter),
        0
    );
    assert_eq!(brighter.len(), 1);
    // A later file starting where the pulse's boxcar does, with the earlier file's
    // last group running on a group (16 samples) into it, or ending at the cut.
    let e = earlier[0];
    let top_s = delay_to_infinity_s(e.dm, h2.freq_hi_mhz());
    let boxcar_start_s = e.t_inf_s + top_s - 0.5 * e.width_ms * 1e-3;
    let left_out_of_brighter_copy = |earlier_end_s: f64| {
        let mut c = e.clone();
        c.t_inf_s -= boxcar_start_s;
        c.snr *= 1.2;
        let later = &mut vec![c];
        drop_repeats_across_cut(&h2, &first.candidates, boxcar_start_s, earlier_end_s, later)
    };
    assert_eq!(left_out_of_brighter_copy(boxcar_start_s + 16.0 * TSAMP), 1);
    assert_eq!(left_out_of_brighter_copy(boxcar_start_s), 0);
    // An end at the cut to rounding (as the end of whole groups may be) shares nothing.
    let rounded_up = boxcar_start_s * (1.0 + 2.0 * f64::EPSILON);
    assert_eq!(left_out_of_brighter_copy(rounded_up), 0);
}
