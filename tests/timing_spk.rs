//! The SPK (JPL .bsp) reader against jplephem 2.24 (numpy 2.4.6).
//!
//! Always: a 11 kB excerpt of DE421 (Earth segments, 2024-01..03), cut by jplephem's
//! own `excerpt` command, against Earth states jplephem computed from the full file
//! (`tests/fixtures/timing/make_spk_subset.py`). Only when `BURSTBOOK_DE421_BSP` names
//! the full de421.bsp (17 MB, not committed; in the PyPI package skyfield-data): the
//! full file against `ephemeris_check.csv` and the astropy fixture.

use std::path::Path;

use burstbook::obs::{Site, UtcEpoch};
use burstbook::timing::{Barycentrer, Ephemeris, SpkEphemeris, TimingWarning};

fn rows(path: &str) -> Vec<Vec<f64>> {
    csv::ReaderBuilder::new()
        .comment(Some(b'#'))
        .from_path(path)
        .unwrap()
        .records()
        .map(|r| r.unwrap().iter().map(|v| v.parse().unwrap()).collect())
        .collect()
}

fn split(mjd: f64) -> (i64, f64) {
    let day = mjd.floor();
    (day as i64, mjd - day)
}

#[test]
fn excerpt_matches_jplephem_on_the_full_file() {
    let spk = SpkEphemeris::open(Path::new(
        "tests/fixtures/timing/de421_earth_2024jan_feb.bsp",
    ))
    .unwrap();
    let (mut dp, mut dv) = (0f64, 0f64);
    for r in rows("tests/fixtures/timing/spk_subset_check.csv") {
        let (day, frac) = split(r[0]);
        let (p, v) = spk.earth_km(day, frac).unwrap();
        for i in 0..3 {
            dp = dp.max((p[i] - r[1 + i]).abs());
            dv = dv.max((v[i] - r[4 + i]).abs());
        }
    }
    println!(
        "SPK excerpt vs jplephem: position {:.2e} km, velocity {:.2e} km/s",
        dp, dv
    );
    // Input rounding: the CSV time has 12 decimals of a day (86 ns ≈ 3 mm of motion).
    assert!(dp < 1e-5 && dv < 1e-9);
    // Outside the excerpt: no answer, and the conversion falls back with a warning.
    assert!(spk.earth_km(60_000, 0.0).is_none());
    let site = Site {
        name: "x".into(),
        lon_deg: 0.0,
        lat_deg: 0.0,
        height_m: 0.0,
    };
    let bary = Barycentrer::new(&site, 10.0, 10.0, Ephemeris::Spk(spk)).unwrap();
    let r = bary.convert(UtcEpoch::new(60_000, 0.0)).unwrap();
    assert!(matches!(
        r.warnings[..],
        [TimingWarning::EarthOutsideEphemeris { .. }]
    ));
}

/// Rewrites a little-endian DAF as a big-endian one (as older JPL files are): 4-byte
/// integers swapped in the file record and in segment summaries, every other 8-byte
/// word swapped as a double. Text records are swapped too; they are never read.
fn to_big_endian(mut daf: Vec<u8>) -> Vec<u8> {
    let int_at = |d: &[u8], o: usize| i32::from_le_bytes(d[o..o + 4].try_into().unwrap());
    let first_summary = int_at(&daf, 76) as usize;
    assert_eq!(
        int_at(&daf, 80) as usize,
        first_summary,
        "one summary record expected"
    );
    let n_summaries = f64::from_le_bytes(
        daf[(first_summary - 1) * 1024 + 16..][..8]
            .try_into()
            .unwrap(),
    ) as usize;
    for o in [8, 12, 76, 80, 84] {
        daf[o..o + 4].reverse();
    }
    daf[88..96].copy_from_slice(b"BIG-IEEE");
    for record in 1..daf.len().div_ceil(1024) {
        let base = record * 1024;
        if record + 1 == first_summary {
            for w in 0..3 + 2 * n_summaries {
                let o = base
                    + if w < 3 {
                        8 * w
                    } else {
                        24 + 40 * ((w - 3) / 2) + 8 * ((w - 3) % 2)
                    };
                daf[o..o + 8].reverse();
            }
            for k in 0..6 * n_summaries {
                let o = base + 24 + 40 * (k / 6) + 16 + 4 * (k % 6);
                daf[o..o + 4].reverse();
            }
        } else {
            let words = (daf.len() - base).min(1024) / 8; // the last record may be short
            for w in 0..words {
                daf[base + 8 * w..base + 8 * w + 8].reverse();
            }
        }
    }
    daf
}

#[test]
fn big_endian_files_read_the_same() {
    let path = "tests/fixtures/timing/de421_earth_2024jan_feb.bsp";
    let little = SpkEphemeris::open(Path::new(path)).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let big_path = dir.path().join("big.bsp");
    std::fs::write(&big_path, to_big_endian(std::fs::read(path).unwrap())).unwrap();
    let big = SpkEphemeris::open(&big_path).unwrap();
    for day in [60_311, 60_330, 60_365] {
        assert_eq!(little.earth_km(day, 0.37), big.earth_km(day, 0.37));
        assert!(big.earth_km(day, 0.37).is_some());
    }
}

#[test]
fn not_an_spk_file_is_a_clear_error() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("fake.bsp");
    std::fs::write(&path, vec![b'x'; 2048]).unwrap();
    let err = SpkEphemeris::open(&path).unwrap_err().to_string();
    assert!(
        err.contains("fake.bsp") && err.contains("not a DAF/SPK"),
        "{err}"
    );
    let mut truncated = std::fs::read("tests/fixtures/timing/de421_earth_2024jan_feb.bsp").unwrap();
    truncated.truncate(5000);
    std::fs::write(&path, truncated).unwrap();
    assert!(SpkEphemeris::open(&path).is_err());
}

#[test]
fn full_de421_file_when_available() {
    let Ok(path) = std::env::var("BURSTBOOK_DE421_BSP") else {
        eprintln!(
            "SKIPPED full_de421_file_when_available: set BURSTBOOK_DE421_BSP to a de421.bsp \
             (pip install skyfield-data; .../skyfield_data/data/de421.bsp)"
        );
        return;
    };
    let spk = SpkEphemeris::open(Path::new(&path)).unwrap();
    let mut worst = 0f64;
    for r in rows("tests/fixtures/timing/ephemeris_check.csv") {
        let (day, frac) = split(r[0]);
        let (p, _) = spk.earth_km(day, frac).unwrap();
        let d2: f64 = (0..3).map(|i| (p[i] - r[1 + i]).powi(2)).sum();
        worst = worst.max(d2.sqrt());
    }
    println!("full SPK vs jplephem: {:.2e} km", worst);
    assert!(worst < 1e-3);
    // The whole conversion against the geometric Roemer delay from astropy + DE421.
    let mut roemer = 0f64;
    for r in rows("tests/fixtures/timing/barycentre_astropy_de421.csv") {
        let site = Site {
            name: "x".into(),
            lon_deg: r[2],
            lat_deg: r[3],
            height_m: r[4],
        };
        let bary = Barycentrer::new(&site, r[5], r[6], Ephemeris::Spk(spk.clone())).unwrap();
        let got = bary
            .convert(UtcEpoch {
                mjd: r[0] as i64,
                sec: r[1],
            })
            .unwrap();
        roemer = roemer.max((got.roemer_s - r[11]).abs());
    }
    println!(
        "full SPK: geometric Roemer vs astropy max {:.3} µs",
        roemer * 1e6
    );
    assert!(roemer < 0.1e-6);
}
