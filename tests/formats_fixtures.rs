//! Readers checked against files written by the reference libraries.
//!
//! Fixtures in `tests/fixtures/obs/` were made by `make_fixtures.py` with numpy 2.4.6
//! (`.npy`) and astropy 8.0.2 (`astropy.io.fits` search-mode files; geodetic
//! positions from `astropy.coordinates.EarthLocation`, i.e. ERFA gc2gd on WGS84).
//! The expected samples (`*.expected.f32`) were decoded by that script with numpy,
//! independently of the Rust code.

use std::path::{Path, PathBuf};

use burstbook::obs::{self, Header, geodesy};
use serde_json::Value;

fn dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/obs")
}

fn manifest() -> Value {
    let text = std::fs::read_to_string(dir().join("manifest.json")).unwrap();
    serde_json::from_str(&text).unwrap()
}

fn expected(file: &str) -> Vec<f32> {
    let stem = file.rsplit_once('.').unwrap().0;
    std::fs::read(dir().join(format!("{stem}.expected.f32")))
        .unwrap()
        .chunks_exact(4)
        .map(|c| f32::from_le_bytes(c.try_into().unwrap()))
        .collect()
}

/// Reads every sample of `file` in awkwardly sized chunks (7 rows), and checks that
/// one big read gives the same.
fn read_all(file: &str) -> (Header, Vec<f32>) {
    let mut src = obs::open(&dir().join(file)).unwrap();
    let all = obs::read_all(&mut src, 7).unwrap();
    let mut again = obs::open(&dir().join(file)).unwrap();
    assert_eq!(obs::read_all(&mut again, 100_000).unwrap(), all, "{file}");
    (src.header().clone(), all)
}

fn f(v: &Value) -> f64 {
    v.as_f64().unwrap()
}

#[test]
fn fixtures_name_the_reference_versions() {
    let m = manifest();
    assert_eq!(m["numpy"], "2.4.6");
    assert_eq!(m["astropy"], "8.0.2");
}

#[test]
fn native_files_written_by_numpy_read_back() {
    for case in manifest()["native"].as_array().unwrap() {
        let file = case["file"].as_str().unwrap();
        let (h, data) = read_all(file);
        assert_eq!(
            data,
            expected(file),
            "{file}: integers and float32 are exact"
        );
        assert_eq!(h.n_samples, case["n_samples"].as_u64().unwrap(), "{file}");
        assert_eq!(h.nbits as u64, case["nbits"].as_u64().unwrap(), "{file}");
        for (a, b) in h
            .freqs_mhz
            .iter()
            .zip(case["freqs_mhz"].as_array().unwrap())
        {
            assert!((a - f(b)).abs() < 1e-9, "{file}: {a} vs {b}");
        }
        for b in case["bad_channels"].as_array().unwrap() {
            assert_eq!(h.weights[b.as_u64().unwrap() as usize], 0.0, "{file}");
        }
    }
}

#[test]
fn search_mode_files_written_by_astropy_decode_like_numpy() {
    for case in manifest()["fits"].as_array().unwrap() {
        let file = case["file"].as_str().unwrap();
        let (h, data) = read_all(file);
        let want = expected(file);
        assert_eq!(data.len(), want.len(), "{file}: sample count");
        // The reader scales and sums polarisations in f32, the script in f64: allow a
        // few f32 roundings of the largest magnitude in the file.
        let tol = 5e-7 * want.iter().fold(1.0f32, |m, v| m.max(v.abs()));
        for (i, (a, b)) in data.iter().zip(&want).enumerate() {
            assert!((a - b).abs() <= tol, "{file}: value {i}: {a} vs {b}");
        }
        assert_eq!(h.n_samples, case["n_samples"].as_u64().unwrap(), "{file}");
        assert_eq!(h.nbits as u64, case["nbits"].as_u64().unwrap(), "{file}");
        assert_eq!(h.source, case["source"].as_str().unwrap(), "{file}");
        assert_eq!(h.telescope, case["telescope"].as_str().unwrap(), "{file}");
        assert!((h.ra_deg - f(&case["ra_deg"])).abs() < 1e-10, "{file}");
        assert!((h.dec_deg - f(&case["dec_deg"])).abs() < 1e-10, "{file}");
        assert!(
            (h.site.lon_deg - f(&case["lon_deg"])).abs() < 1e-9,
            "{file}"
        );
        assert!(
            (h.site.lat_deg - f(&case["lat_deg"])).abs() < 1e-9,
            "{file}"
        );
        assert!(
            (h.site.height_m - f(&case["height_m"])).abs() < 1e-3,
            "{file}"
        );
        assert_eq!(h.start.mjd, case["start_mjd"].as_i64().unwrap());
        assert!((h.start.sec - f(&case["start_sec"])).abs() < 1e-9);
        assert_eq!(h.tsamp_s, f(&case["tsamp_s"]));
        assert_eq!(h.chan_bw_mhz, f(&case["chan_bw_mhz"]));
        let freqs: Vec<f64> = case["freqs_mhz"]
            .as_array()
            .unwrap()
            .iter()
            .map(f)
            .collect();
        assert_eq!(h.freqs_mhz, freqs, "{file}");
        assert_eq!(
            h.weights[case["masked_channel"].as_u64().unwrap() as usize],
            0.0
        );
        assert_eq!(h.weights.iter().filter(|&&w| w == 0.0).count(), 1);
    }
}

#[test]
fn itrf_to_wgs84_matches_astropy_earth_location() {
    for p in manifest()["geodesy"].as_array().unwrap() {
        let xyz: Vec<f64> = p["itrf_m"].as_array().unwrap().iter().map(f).collect();
        let (lon, lat, h) = geodesy::itrf_to_geodetic([xyz[0], xyz[1], xyz[2]]);
        assert!((lon - f(&p["lon_deg"])).abs() < 1e-10, "{p}: lon {lon}");
        assert!((lat - f(&p["lat_deg"])).abs() < 1e-10, "{p}: lat {lat}");
        assert!((h - f(&p["height_m"])).abs() < 1e-6, "{p}: height {h}");
        let back = geodesy::geodetic_to_itrf_m(lon, lat, h);
        for (a, b) in back.iter().zip(&xyz) {
            assert!((a - b).abs() < 1e-6, "{p}: round trip {a} vs {b}");
        }
    }
}
