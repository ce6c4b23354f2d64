//! Broken observations give one clear typed error naming the file, never a panic:
//! through the library and through the `burstbook` binary.

mod cli_common;

use std::path::{Path, PathBuf};

use burstbook::Error;
use burstbook::obs::{self, Container, Header, SampleSink, Site, UtcEpoch};

fn header(n_chan: usize, n_samples: u64, nbits: u32) -> Header {
    Header {
        source: "Field A".into(),
        telescope: "Test Array".into(),
        ra_deg: 150.0,
        dec_deg: -20.0,
        site: Site {
            name: "Test Array".into(),
            lon_deg: 20.0,
            lat_deg: -30.0,
            height_m: 1000.0,
        },
        start: UtcEpoch::new(60500, 10.5),
        tsamp_s: 1e-3,
        freqs_mhz: (0..n_chan).map(|i| 1400.0 - i as f64).collect(),
        chan_bw_mhz: 1.0,
        weights: vec![1.0; n_chan],
        n_samples,
        nbits,
        sefd_jy: None,
        beam: None,
    }
}

/// Writes `n_samples` rows of `value` to `path`.
fn write(path: &Path, h: &Header, container: Container, value: f32) {
    let mut sink = obs::create(path, h, container).unwrap();
    sink.write_rows(&vec![value; h.n_chan() * h.n_samples as usize])
        .unwrap();
    sink.finish().unwrap();
}

/// Opens and reads everything; returns the error.
fn open_and_read(path: &Path) -> Error {
    let mut src = match obs::open(path) {
        Ok(s) => s,
        Err(e) => return e,
    };
    let mut buf = vec![0.0; src.header().n_chan() * 16];
    loop {
        match src.read_rows(&mut buf) {
            Ok(0) => panic!("{} read without error", path.display()),
            Ok(_) => {}
            Err(e) => return e,
        }
    }
}

/// Asserts `e` is `BadInput` for `file` whose message contains `needle`, on one line.
fn assert_bad(e: Error, file: &Path, needle: &str) {
    let text = e.to_string();
    match &e {
        Error::BadInput { path, msg } => {
            assert_eq!(path, file, "{text}");
            assert!(msg.contains(needle), "expected '{needle}' in: {text}");
        }
        other => panic!("expected BadInput for {}, got {other:?}", file.display()),
    }
    assert!(!text.contains('\n'), "one line: {text}");
}

fn native_pair(dir: &Path, name: &str, nbits: u32) -> (PathBuf, PathBuf) {
    let json = dir.join(format!("{name}.json"));
    write(&json, &header(4, 10, nbits), Container::Native, 3.0);
    (json.clone(), json.with_extension("npy"))
}

fn edit_json(path: &Path, f: impl FnOnce(&mut serde_json::Value)) {
    let mut v: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap();
    f(&mut v);
    std::fs::write(path, v.to_string()).unwrap();
}

#[test]
fn native_missing_files_are_io_errors_naming_the_file() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("nothing.json");
    let e = open_and_read(&missing);
    assert!(
        matches!(&e, Error::Io { path, .. } if path == &missing),
        "{e}"
    );
    let (json, npy) = native_pair(dir.path(), "a", 8);
    std::fs::remove_file(&npy).unwrap();
    let e = open_and_read(&json);
    assert!(matches!(&e, Error::Io { path, .. } if path == &npy), "{e}");
}

#[test]
fn native_truncated_or_oversized_data() {
    let dir = tempfile::tempdir().unwrap();
    let (json, npy) = native_pair(dir.path(), "a", 16);
    let bytes = std::fs::read(&npy).unwrap();
    std::fs::write(&npy, &bytes[..bytes.len() - 3]).unwrap();
    assert_bad(open_and_read(&json), &npy, "truncated");
    std::fs::write(&npy, [&bytes[..], &[0, 0]].concat()).unwrap();
    assert_bad(open_and_read(&json), &npy, "needs");
}

#[test]
fn native_absurd_shape() {
    let dir = tempfile::tempdir().unwrap();
    let (json, npy) = native_pair(dir.path(), "a", 8);
    let mut bytes = std::fs::read(&npy).unwrap();
    let at = bytes.windows(7).position(|w| w == b"(10, 4)").unwrap();
    let huge = b"(4611686018427387904, 4)";
    bytes.splice(at..at + 7, huge.iter().copied());
    // Keep the header length field consistent (version 1: u16 at bytes 8..10).
    let len = u16::from_le_bytes([bytes[8], bytes[9]]) + (huge.len() - 7) as u16;
    bytes[8..10].copy_from_slice(&len.to_le_bytes());
    std::fs::write(&npy, bytes).unwrap();
    assert_bad(open_and_read(&json), &npy, "needs");
}

#[test]
fn native_header_disagreeing_with_data() {
    let dir = tempfile::tempdir().unwrap();
    let (json, _) = native_pair(dir.path(), "a", 8);
    edit_json(&json, |v| v["channels"]["count"] = 7.into());
    assert_bad(open_and_read(&json), &json, "7 channels");
}

#[test]
fn native_unsupported_dtype() {
    let dir = tempfile::tempdir().unwrap();
    let (json, npy) = native_pair(dir.path(), "a", 32);
    let mut bytes = std::fs::read(&npy).unwrap();
    let at = bytes.windows(3).position(|w| w == b"<f4").unwrap();
    bytes[at..at + 3].copy_from_slice(b"<f8");
    std::fs::write(&npy, bytes).unwrap();
    assert_bad(open_and_read(&json), &npy, "unsupported sample type '<f8'");
}

#[test]
fn native_wrong_json_types_and_values() {
    let dir = tempfile::tempdir().unwrap();
    type Edit = fn(&mut serde_json::Value);
    let cases: [(&str, Edit, &str); 8] = [
        (
            "type",
            |v| v["sample_time_s"] = "fast".into(),
            "invalid type",
        ),
        (
            "negative",
            |v| v["sample_time_s"] = (-1e-3).into(),
            "sample time must be positive",
        ),
        (
            "zero",
            |v| v["channels"]["step_mhz"] = 0.0.into(),
            "channel step",
        ),
        (
            "missing",
            |v| drop(v.as_object_mut().unwrap().remove("ra_deg")),
            "missing field `ra_deg`",
        ),
        ("format", |v| v["format"] = "other".into(), "\"format\""),
        (
            "hertz",
            |v| v["channels"]["first_mhz"] = 1.4e9.into(),
            "outside the radio window",
        ),
        (
            "badchan",
            |v| v["bad_channels"] = serde_json::json!([9]),
            "bad channel 9",
        ),
        // Barycentring refuses 360°, so the header does too.
        (
            "ra360",
            |v| v["ra_deg"] = 360.0.into(),
            "RA must be in [0, 360)",
        ),
    ];
    for (name, edit, needle) in cases {
        let (json, _) = native_pair(dir.path(), name, 8);
        edit_json(&json, edit);
        assert_bad(open_and_read(&json), &json, needle);
    }
    let json = dir.path().join("text.json");
    std::fs::write(&json, "{ not json").unwrap();
    assert_bad(open_and_read(&json), &json, "bad JSON header");
}

#[test]
fn native_absurd_times() {
    let dir = tempfile::tempdir().unwrap();
    type Edit = fn(&mut serde_json::Value);
    let cases: [(&str, Edit, &str); 6] = [
        (
            "tiny",
            |v| v["sample_time_s"] = 1e-300.into(),
            "sample time 1e-300 s is outside 1e-9 s to 100 s",
        ),
        (
            "huge",
            |v| v["sample_time_s"] = 1e300.into(),
            "is outside 1e-9 s to 100 s",
        ),
        (
            "late",
            |v| v["start_sec"] = 1e9.into(),
            "start_sec = 1e9 is not a time of day",
        ),
        (
            "early",
            |v| v["start_sec"] = (-1.0).into(),
            "start_sec = -1 is not a time of day",
        ),
        (
            "mjdneg",
            |v| v["start_mjd"] = (-100).into(),
            "start_mjd = -100 is not a plausible MJD",
        ),
        (
            "mjdhuge",
            |v| v["start_mjd"] = 600_000.into(),
            "start_mjd = 600000 is not a plausible MJD",
        ),
    ];
    for (name, edit, needle) in cases {
        let (json, _) = native_pair(dir.path(), name, 8);
        edit_json(&json, edit);
        assert_bad(open_and_read(&json), &json, needle);
    }
    // The second of a leap second is a time of day (MJD 57753 ended with one).
    let (json, _) = native_pair(dir.path(), "leap", 8);
    edit_json(&json, |v| {
        v["start_mjd"] = 57753.into();
        v["start_sec"] = 86400.5.into();
    });
    let src = obs::open(&json).unwrap();
    assert_eq!(src.header().start.to_iso(), "2016-12-31T23:59:60.500000");
    // A tiny sample time used to make `search` spin forever sizing its boxcars.
    let (json, _) = native_pair(dir.path(), "spin", 8);
    edit_json(&json, |v| v["sample_time_s"] = 1e-300.into());
    let out = cli_common::burstbook(&[
        Path::new("search"),
        &json,
        Path::new("--no-catalogue"),
        Path::new("--out"),
        &dir.path().join("out"),
    ]);
    cli_common::assert_one_line_failure(&out, &[&json.display().to_string(), "sample time"]);
}

/// `search A B` checks B before searching A: a bad file late in the list stopped the
/// run only after the files before it had been searched (and catalogued).
#[test]
fn search_checks_every_file_before_searching_any() {
    let dir = tempfile::tempdir().unwrap();
    let (good, _) = native_pair(dir.path(), "good", 8);
    let (bad, _) = native_pair(dir.path(), "bad", 8);
    edit_json(&bad, |v| v["sample_time_s"] = (-1e-3).into());
    let out_dir = dir.path().join("out");
    let catalogue = dir.path().join("survey.sqlite");
    let search = |files: &[&Path]| {
        let flags = [
            Path::new("--catalogue"),
            &catalogue,
            Path::new("--out"),
            &out_dir,
        ];
        cli_common::burstbook(&[&[Path::new("search")], files, &flags[..]].concat())
    };
    let out = search(&[&good, &bad]);
    cli_common::assert_one_line_failure(
        &out,
        &[&bad.display().to_string(), "sample time must be positive"],
    );
    let said = String::from_utf8_lossy(&out.stdout);
    assert!(said.is_empty(), "nothing searched, yet: {said}");
    assert!(!out_dir.exists() && !catalogue.exists());
    // The good file alone is searched: the failure above was the bad one's.
    cli_common::assert_success(&search(&[&good]));
}

// A file whose header passes but whose samples fail part-way (a NaN) is reported
// and left out; the other files are still searched and written, and the command
// fails so no script takes the run for complete. Alone, it fails as before, in one
// line, and writes no outputs (an empty list would read as "no candidates").
#[test]
fn a_file_failing_part_way_does_not_stop_the_others() {
    let dir = tempfile::tempdir().unwrap();
    let (good, _) = native_pair(dir.path(), "good", 8);
    let (nan, npy) = native_pair(dir.path(), "nan", 32);
    let mut bytes = std::fs::read(&npy).unwrap();
    let n = bytes.len();
    bytes[n - 24..n - 20].copy_from_slice(&f32::NAN.to_le_bytes());
    std::fs::write(&npy, &bytes).unwrap();
    let out_dir = dir.path().join("out");
    let search = |files: &[&Path]| {
        let flags = [Path::new("--no-catalogue"), Path::new("--out"), &out_dir];
        cli_common::burstbook(&[&[Path::new("search")], files, &flags[..]].concat())
    };
    let out = search(&[&nan, &good]);
    assert!(!out.status.success());
    let err = String::from_utf8_lossy(&out.stderr);
    // (The tiny good file also gets the note that all of it is masked.)
    let errors: Vec<&str> = err
        .lines()
        .filter(|l| l.starts_with("burstbook: error: "))
        .collect();
    assert_eq!(errors.len(), 2, "{err}");
    assert!(errors[0].contains("sample 8 of channel 2 is NaN"), "{err}");
    assert!(
        errors[1].contains("1 of 2 files could not be searched"),
        "{err}"
    );
    let said = String::from_utf8_lossy(&out.stdout);
    assert!(said.contains("good.json: searched"), "{said}");
    let json: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out_dir.join("candidates.json")).unwrap())
            .unwrap();
    assert_eq!(json["files"].as_array().unwrap().len(), 1);
    assert_eq!(json["failed"][0]["file"], nan.display().to_string());
    assert!(out_dir.join("candidates.csv").exists());

    std::fs::remove_dir_all(&out_dir).unwrap();
    let out = search(&[&nan]);
    cli_common::assert_one_line_failure(&out, &[&npy.display().to_string(), "NaN"]);
    assert!(!out_dir.join("candidates.csv").exists());
}

#[test]
fn native_empty_or_misplaced_data() {
    let dir = tempfile::tempdir().unwrap();
    let (json, npy) = native_pair(dir.path(), "a", 8);
    let mut bytes = std::fs::read(&npy).unwrap();
    bytes.truncate(bytes.len() - 40); // drop the samples
    let at = bytes.windows(7).position(|w| w == b"(10, 4)").unwrap();
    bytes[at..at + 7].copy_from_slice(b"( 0, 4)");
    std::fs::write(&npy, bytes).unwrap();
    assert_bad(open_and_read(&json), &npy, "no samples");
    let out = cli_common::burstbook(&[Path::new("inspect"), &json]);
    cli_common::assert_one_line_failure(&out, &[&npy.display().to_string(), "no samples"]);

    let (json, npy) = native_pair(dir.path(), "b", 8);
    std::fs::remove_file(&npy).unwrap();
    std::fs::create_dir(&npy).unwrap();
    assert_bad(open_and_read(&json), &npy, "is a directory");
}

#[test]
fn native_zero_channels() {
    let dir = tempfile::tempdir().unwrap();
    let (json, npy) = native_pair(dir.path(), "a", 8);
    edit_json(&json, |v| v["channels"]["count"] = 0.into());
    let mut bytes = std::fs::read(&npy).unwrap();
    bytes.truncate(bytes.len() - 40); // drop the samples
    let at = bytes.windows(7).position(|w| w == b"(10, 4)").unwrap();
    bytes[at..at + 7].copy_from_slice(b"(10, 0)");
    std::fs::write(&npy, bytes).unwrap();
    assert_bad(open_and_read(&json), &json, "zero channels");
}

#[test]
fn native_nan_and_inf_samples() {
    let dir = tempfile::tempdir().unwrap();
    let (json, npy) = native_pair(dir.path(), "a", 32);
    let mut bytes = std::fs::read(&npy).unwrap();
    let n = bytes.len();
    bytes[n - 4..].copy_from_slice(&f32::INFINITY.to_le_bytes());
    std::fs::write(&npy, &bytes).unwrap();
    assert_bad(open_and_read(&json), &npy, "sample 9 of channel 3 is inf");
    bytes[n - 24..n - 20].copy_from_slice(&f32::NAN.to_le_bytes());
    std::fs::write(&npy, &bytes).unwrap();
    assert_bad(open_and_read(&json), &npy, "sample 8 of channel 2 is NaN");
}

/// Replaces the card starting with `key` by `card` (padded to 80 characters).
fn patch_card(path: &Path, key: &str, card: &str) {
    let mut bytes = std::fs::read(path).unwrap();
    let at = (0..bytes.len())
        .step_by(80)
        .find(|&i| bytes[i..].starts_with(format!("{key:<8}").as_bytes()))
        .unwrap_or_else(|| panic!("no {key} card"));
    bytes[at..at + 80].copy_from_slice(format!("{card:<80}").as_bytes());
    std::fs::write(path, bytes).unwrap();
}

fn fits_file(dir: &Path, name: &str, nbits: u32, value: f32) -> PathBuf {
    let path = dir.join(format!("{name}.fits"));
    write(&path, &header(4, 10, nbits), Container::Fits, value);
    path
}

#[test]
fn fits_missing_and_truncated() {
    let dir = tempfile::tempdir().unwrap();
    let missing = dir.path().join("none.fits");
    assert!(matches!(open_and_read(&missing), Error::Io { .. }));
    let path = fits_file(dir.path(), "a", 8, 1.0);
    let bytes = std::fs::read(&path).unwrap();
    std::fs::write(&path, &bytes[..bytes.len() - 2880]).unwrap();
    assert_bad(open_and_read(&path), &path, "truncated");
    std::fs::write(&path, &bytes[..2000]).unwrap();
    assert_bad(open_and_read(&path), &path, "truncated");
    std::fs::write(&path, b"just some text, not FITS at all").unwrap();
    assert_bad(open_and_read(&path), &path, "header");
}

#[test]
fn fits_unsupported_or_inconsistent_keywords() {
    let dir = tempfile::tempdir().unwrap();
    let cases = [
        (
            "NBITS",
            "NBITS   =                    3",
            "NBITS = 3 is not supported",
        ),
        ("NPOL", "NPOL    =                    3", "NPOL = 3"),
        ("NCHAN", "NCHAN   =                    0", "zero channels"),
        (
            "TBIN",
            "TBIN    =                -1E-3",
            "TBIN must be positive",
        ),
        ("NAXIS1", "NAXIS1  =                  999", "NAXIS1 is 999"),
        ("OBS_MODE", "OBS_MODE= 'PSR     '", "OBS_MODE is 'PSR'"),
        ("RA", "RA      = 'noon    '", "RA 'noon'"),
        ("ANT_X", "ANT_X   = 'here    '", "ANT_X is not a number"),
        // Absurd sizes from a corrupt header: an error, not an overflow or a huge allocation.
        ("NAXIS2", "NAXIS2  =  9223372036854775807", "truncated"),
        ("NSBLK", "NSBLK   =  9223372036854775807", "DATA holds"),
        ("TFORM7", "TFORM7  = '9223372036854775807E'", "too large"),
    ];
    for (key, card, needle) in cases {
        let path = fits_file(dir.path(), key, 8, 1.0);
        patch_card(&path, key, card);
        assert_bad(open_and_read(&path), &path, needle);
    }
}

#[test]
fn fits_absurd_start() {
    let dir = tempfile::tempdir().unwrap();
    let cases = [
        (
            "STT_SMJD",
            "STT_SMJD=           1000000000",
            "STT_SMJD + STT_OFFS = 1.0000000005e9 is not a time of day",
        ),
        (
            "STT_OFFS",
            "STT_OFFS=                -20.0",
            "STT_SMJD + STT_OFFS = -10 is not a time of day",
        ),
        (
            "STT_IMJD",
            "STT_IMJD=                 -100",
            "STT_IMJD = -100 is not a plausible MJD",
        ),
    ];
    for (key, card, needle) in cases {
        let path = fits_file(dir.path(), key, 8, 1.0);
        patch_card(&path, key, card);
        assert_bad(open_and_read(&path), &path, needle);
    }
}

/// A FITS file of 10 samples in `SUBINT` rows of 4, 4 and (padded) 2.
fn fits_rows(dir: &Path, name: &str) -> PathBuf {
    let path = dir.join(format!("{name}.fits"));
    let h = header(4, 10, 8);
    let mut sink = obs::fits::FitsWriter::create_with_nsblk(&path, &h, 4).unwrap();
    sink.write_rows(&[5.0; 40]).unwrap();
    Box::new(sink).finish().unwrap();
    path
}

/// Byte offset of `SUBINT` row `row` (from 0) in a file this crate wrote: the table
/// data starts at the block after the second `END` card, in rows of `NAXIS1` bytes.
/// Within a row the writer puts `TSUBINT` (8 bytes), `OFFS_SUB` (8), `DAT_FREQ`
/// (8 per channel), `DAT_WTS` (4 per channel), then the rest.
fn fits_row_start(bytes: &[u8], row: usize) -> usize {
    let card = |key: &str| {
        (0..bytes.len())
            .step_by(80)
            .filter(|&i| bytes[i..].starts_with(format!("{key:<8}").as_bytes()))
            .collect::<Vec<_>>()
    };
    let data = (card("END")[1] / 2880 + 1) * 2880;
    let at = card("NAXIS1")[0];
    let text = std::str::from_utf8(&bytes[at + 10..at + 30]).unwrap();
    data + row * text.trim().parse::<usize>().unwrap()
}

/// Overwrites the bytes at `at` in `path` with `value`.
fn patch_bytes(path: &Path, at: impl FnOnce(&[u8]) -> usize, value: &[u8]) {
    let mut bytes = std::fs::read(path).unwrap();
    let at = at(&bytes);
    bytes[at..at + value.len()].copy_from_slice(value);
    std::fs::write(path, bytes).unwrap();
}

#[test]
fn fits_last_row_duration_must_be_one() {
    let dir = tempfile::tempdir().unwrap();
    let good = fits_rows(dir.path(), "good");
    assert_eq!(obs::open(&good).unwrap().header().n_samples, 10);
    let cases = [
        (-5.0, "SUBINT row 3 of 3: TSUBINT = -5 is not a duration"),
        (
            f64::NAN,
            "SUBINT row 3 of 3: TSUBINT = NaN is not a duration",
        ),
        (f64::INFINITY, "TSUBINT = inf is not a duration"),
        (0.0, "TSUBINT = 0 s is less than half a sample"),
        (4e-4, "TSUBINT = 0.0004 s is less than half a sample"),
    ];
    for (i, (tsubint, needle)) in cases.into_iter().enumerate() {
        let path = fits_rows(dir.path(), &format!("t{i}"));
        patch_bytes(&path, |b| fits_row_start(b, 2), &tsubint.to_be_bytes());
        assert_bad(open_and_read(&path), &path, needle);
    }
    let path = fits_rows(dir.path(), "cli");
    patch_bytes(&path, |b| fits_row_start(b, 2), &(-5f64).to_be_bytes());
    assert_one_line_failure(&path, "TSUBINT = -5 is not a duration");
}

#[test]
fn fits_channel_frequencies_must_be_a_steady_band() {
    let dir = tempfile::tempdir().unwrap();
    // The header's band is 1400, 1399, 1398, 1397 MHz with CHAN_BW 1 MHz.
    let freq = |b: &[u8]| fits_row_start(b, 0) + 16;
    let cases: [(&[f64; 4], &str); 5] = [
        (
            &[1400.0, 1300.0, 1500.0, 1397.0],
            "DAT_FREQ is not evenly spaced: channel 1 is 1300 MHz after 1400 MHz, expected 1399 MHz",
        ),
        (
            &[1400.0, 1398.0, 1399.0, 1397.0],
            "channel 1 is 1398 MHz after 1400 MHz",
        ),
        (
            &[1400.0, 1398.0, 1396.0, 1394.0],
            "DAT_FREQ steps by -2 MHz but CHAN_BW is -1 MHz",
        ),
        (
            &[1400.0, 1399.0, f64::NAN, 1397.0],
            "outside the radio window",
        ),
        // Steady, but the other way from what CHAN_BW's sign says.
        (
            &[1397.0, 1398.0, 1399.0, 1400.0],
            "CHAN_BW = -1 MHz says the channels descend in frequency but DAT_FREQ ascends \
             (1397 to 1400 MHz)",
        ),
    ];
    for (i, (freqs, needle)) in cases.into_iter().enumerate() {
        let path = fits_file(dir.path(), &format!("f{i}"), 8, 1.0);
        let bytes: Vec<u8> = freqs.iter().flat_map(|f| f.to_be_bytes()).collect();
        patch_bytes(&path, freq, &bytes);
        assert_bad(open_and_read(&path), &path, needle);
    }
    // Centres half a percent of a channel off a steady step are not a disagreement.
    let path = fits_file(dir.path(), "rounded", 8, 1.0);
    let freqs: [f64; 4] = [1400.0, 1399.005, 1397.995, 1397.0];
    let bytes: Vec<u8> = freqs.iter().flat_map(|f| f.to_be_bytes()).collect();
    patch_bytes(&path, freq, &bytes);
    assert!(obs::open(&path).is_ok());
    let path = fits_file(dir.path(), "cli", 8, 1.0);
    patch_bytes(&path, freq, &1500f64.to_be_bytes());
    assert_one_line_failure(&path, "DAT_FREQ is not evenly spaced: channel 1");
    let path = fits_file(dir.path(), "sign", 8, 1.0);
    patch_card(&path, "CHAN_BW", "CHAN_BW =                  1.0");
    assert_one_line_failure(
        &path,
        "CHAN_BW = 1 MHz says the channels ascend in frequency but DAT_FREQ descends",
    );
}

#[test]
fn fits_weights_must_be_weights() {
    let dir = tempfile::tempdir().unwrap();
    // Row 2 (of 3): found when that row is read.
    let wts = |b: &[u8]| fits_row_start(b, 1) + 16 + 8 * 4 + 4;
    for (w, needle) in [
        (
            f32::NAN,
            "SUBINT row 2: DAT_WTS of channel 1 is NaN, not a weight",
        ),
        (-1.0, "DAT_WTS of channel 1 is -1, not a weight"),
        (f32::INFINITY, "DAT_WTS of channel 1 is inf, not a weight"),
    ] {
        let path = fits_rows(dir.path(), "w");
        patch_bytes(&path, wts, &w.to_be_bytes());
        assert_bad(open_and_read(&path), &path, needle);
    }
    let path = fits_rows(dir.path(), "first");
    patch_bytes(
        &path,
        |b| fits_row_start(b, 0) + 16 + 8 * 4,
        &f32::NAN.to_be_bytes(),
    );
    assert_one_line_failure(&path, "SUBINT row 1: DAT_WTS of channel 0 is NaN");
}

#[test]
fn fits_header_text_must_be_whole() {
    let dir = tempfile::tempdir().unwrap();
    // The primary header's END card blanked: the reader must not run on into the
    // SUBINT header and take its cards as the primary's.
    let path = fits_file(dir.path(), "noend", 8, 1.0);
    patch_card(&path, "END", "");
    assert_bad(
        open_and_read(&path),
        &path,
        "is XTENSION: the header unit before it has no END card",
    );
    assert_one_line_failure(&path, "no END card");
    // A NUL byte inside a card.
    let path = fits_file(dir.path(), "nul", 8, 1.0);
    patch_bytes(
        &path,
        |b| b.windows(8).position(|w| w == b"TELESCOP").unwrap() + 20,
        &[0],
    );
    assert_bad(
        open_and_read(&path),
        &path,
        "holds byte 0x00 at column 21, but a FITS header is printable ASCII only",
    );
}

#[test]
fn fits_nan_samples() {
    let dir = tempfile::tempdir().unwrap();
    let path = fits_file(dir.path(), "nan", 32, 12345.5);
    let mut bytes = std::fs::read(&path).unwrap();
    let marker = 12345.5f32.to_be_bytes();
    let at = bytes.windows(4).position(|w| w == marker).unwrap();
    bytes[at + 4 * 6..at + 4 * 7].copy_from_slice(&f32::NAN.to_be_bytes());
    std::fs::write(&path, bytes).unwrap();
    assert_bad(open_and_read(&path), &path, "sample 1 of channel 2 is NaN");

    // The same NaN in a channel of weight 0 is masked, not an error.
    let mut h = header(4, 10, 32);
    h.weights[2] = 0.0;
    write(&path, &h, Container::Fits, 12345.5);
    let mut bytes = std::fs::read(&path).unwrap();
    let at = bytes.windows(4).position(|w| w == marker).unwrap();
    bytes[at + 4 * 6..at + 4 * 7].copy_from_slice(&f32::NAN.to_be_bytes());
    std::fs::write(&path, bytes).unwrap();
    let data = obs::read_all(&mut obs::open(&path).unwrap(), 3).unwrap();
    assert_eq!(data[4 + 2], 0.0);
    assert_eq!(data.iter().filter(|&&v| v == 0.0).count(), 10);
}

#[test]
fn writers_reject_what_they_cannot_store() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("x.fits");
    let e = obs::create(&path, &header(4, 10, 7), Container::Fits)
        .err()
        .unwrap();
    assert_bad(e, &path, "not 7");
    let path = dir.path().join("x.json");
    let mut h = header(4, 10, 8);
    h.tsamp_s = -1.0;
    let e = obs::create(&path, &h, Container::Native).err().unwrap();
    assert_bad(e, &path, "sample time");
    let mut h = header(4, 10, 8);
    h.freqs_mhz[2] = 1390.0;
    let e = obs::create(&path, &h, Container::Native).err().unwrap();
    assert_bad(
        e,
        &path,
        "the native format needs evenly spaced channels: channel 2 is 1390 MHz after 1399 MHz",
    );
}

/// `burstbook inspect FILE` fails with one line naming the file and the problem.
fn assert_one_line_failure(file: &Path, needle: &str) {
    let out = cli_common::burstbook(&[Path::new("inspect"), file]);
    cli_common::assert_one_line_failure(&out, &[&file.display().to_string(), needle]);
    assert!(!String::from_utf8_lossy(&out.stderr).contains("panicked"));
}

#[test]
fn binary_reports_bad_input_in_one_line() {
    let dir = tempfile::tempdir().unwrap();
    assert_one_line_failure(&dir.path().join("missing.json"), "No such file");
    let (json, _) = native_pair(dir.path(), "types", 8);
    edit_json(&json, |v| v["start_mjd"] = "yesterday".into());
    assert_one_line_failure(&json, "invalid type");
    let (json, npy) = native_pair(dir.path(), "short", 8);
    let bytes = std::fs::read(&npy).unwrap();
    std::fs::write(&npy, &bytes[..bytes.len() - 1]).unwrap();
    // The error names the data file, the one at fault.
    let out = cli_common::burstbook(&[Path::new("inspect"), &json]);
    cli_common::assert_one_line_failure(&out, &[&npy.display().to_string(), "truncated"]);
    let fits = fits_file(dir.path(), "bits", 8, 1.0);
    patch_card(&fits, "NBITS", "NBITS   =                   12");
    assert_one_line_failure(&fits, "NBITS = 12");
    let (_, npy) = native_pair(dir.path(), "direct", 8);
    assert_one_line_failure(&npy, "open the .json header");
}

#[test]
fn binary_inspects_a_good_file() {
    let dir = tempfile::tempdir().unwrap();
    let fits = fits_file(dir.path(), "good", 8, 7.0);
    let out = cli_common::burstbook(&[Path::new("inspect"), Path::new("--json"), &fits]);
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["statistics"]["data"]["mean"], 7.0);
    assert_eq!(v["header"]["n_samples"], 10);
}

/// Clap's own usage errors take one line too, with clap's exit code 2, and a
/// negative number for a flag that takes none says what the flag takes.
#[test]
fn usage_errors_are_one_line() {
    let cases: [(&[&str], &str); 6] = [
        (
            &["search", "a.json", "--out", "o", "--top", "-1"],
            "invalid value '-1' for '--top <TOP>': must be a whole number >= 0 (try '--help')",
        ),
        (
            &["period", "activity", "--seed", "-1"],
            "'--seed <SEED>': must be a whole number >= 0",
        ),
        (
            &["period", "stats", "--seed", "1.5"],
            "'--seed <SEED>': must be a whole number (try",
        ),
        (
            &["search", "--out", "o"],
            "the following required arguments were not provided: <FILES>... (try '--help')",
        ),
        (
            &["search", "a.json", "--out", "o", "--dmmax", "3"],
            "unexpected argument '--dmmax' found; tip: a similar argument exists: '--dm-max'",
        ),
        (&["bogus"], "unrecognized subcommand 'bogus'"),
    ];
    for (args, needle) in cases {
        let out = cli_common::burstbook(args);
        cli_common::assert_one_line_failure(&out, &[needle]);
        assert_eq!(out.status.code(), Some(2), "{args:?}");
    }
    // Help is still clap's, in full, and a success.
    let out = cli_common::burstbook(&["search", "--help"]);
    cli_common::assert_success(&out);
    assert!(String::from_utf8_lossy(&out.stdout).contains("Usage: burstbook search"));
}
