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
